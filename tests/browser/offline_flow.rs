//! The site app without signal: Chromium's network switched off through DevTools network
//! emulation, tests previewed on the phone by the WebAssembly build of the server's own
//! library, kept in IndexedDB, and stored exactly once when the network is back — also
//! when the server restarts in the middle of the sync, and never dropped when refused.

use std::time::Duration;

use serde_json::{Value, json};

use crate::app::{PROJECT, Rig, km_m, nuclear_reading};
use crate::pages;
use crate::webdriver::Session;

/// Switches the page's network off or on (DevTools network emulation), with `latency_ms`.
async fn network(b: &Session, online: bool, latency_ms: u64) {
    b.cdp("Network.enable", json!({})).await;
    b.cdp(
        "Network.emulateNetworkConditions",
        json!({"offline": !online, "latency": latency_ms, "downloadThroughput": -1, "uploadThroughput": -1}),
    )
    .await;
    b.wait_until("navigator.onLine to follow the emulation", async || {
        (b.script("return navigator.onLine;", vec![]).await == json!(online)).then_some(())
    })
    .await;
}

/// How many tests the phone keeps, and how many of them the server refused.
async fn queue(b: &Session) -> (u64, u64) {
    let v = b
        .script(
            "return window.liftSite.all().then(function (a) { return [a.length, a.filter(function (i) { return i.state === 'refused'; }).length]; });",
            vec![],
        )
        .await;
    (v[0].as_u64().unwrap_or(99), v[1].as_u64().unwrap_or(99))
}

/// Types one nuclear test into the entry form (number empty: the server numbers it).
async fn fill(b: &Session, chainage_m: f64, dry: f64, omc: f64, number: &str) {
    let (wet, moisture) = nuclear_reading(dry, omc);
    b.find("#number").await.type_over(number).await;
    b.find("#chainage").await.type_over(&km_m(chainage_m)).await;
    b.find("#offset_m").await.type_over("1.5").await;
    b.find("#technician").await.type_over("R. Okafor").await;
    b.find("#wet_density").await.type_over(&wet).await;
    b.find("#moisture_density").await.type_over(&moisture).await;
}

/// Enters a test with no signal: the preview shows `rc` (worked out on the phone), then
/// Save keeps it.
async fn enter_offline(b: &Session, chainage_m: f64, dry: f64, omc: f64, number: &str, rc: &str) {
    fill(b, chainage_m, dry, omc, number).await;
    b.wait_until("the offline preview", async || {
        let shown = b.try_find("#preview-result #pv-rc").await?.text().await;
        (shown == rc).then_some(())
    })
    .await;
    b.find("#save").await.click().await;
    b.wait_for("#kept-offline").await;
}

/// Opens the entry page of an open lot owing tests; (lot id, chainage mid-lot, mdd, omc).
async fn open_entry(rig: &Rig) -> (i64, f64, f64, f64) {
    let (lot_id, _) = pages::open_lot_from_map_owing(rig, "owed", None).await;
    let lot = rig.app.lot(lot_id).await;
    rig.open(&format!("/lots/{lot_id}/entry")).await;
    rig.browser.wait_for("#entry-form").await;
    // The library is loaded while there is signal.
    rig.browser
        .wait_until("the site library to load", async || {
            let ok = rig
                .browser
                .script(
                    "return window.liftSite.answer({}).then(function () { return true; }, function () { return false; });",
                    vec![],
                )
                .await;
            (ok == json!(true)).then_some(())
        })
        .await;
    let mid = ((lot.chainage_from_m + lot.chainage_to_m) / 2.0).round();
    (lot_id, mid, lot.mdd, lot.omc)
}

/// Waits until the lot holds `want` tests and the phone keeps `kept` of its own.
async fn wait_stored(rig: &Rig, lot_id: i64, want: i64, kept: u64) {
    let b = &rig.browser;
    b.wait_until("the queue to be sent", async || {
        let n = rig.app.lot_test_count(lot_id).await;
        assert!(
            n <= want,
            "lot {lot_id} holds {n} tests, more than the {want} sent"
        );
        (n == want && queue(b).await.0 == kept).then_some(())
    })
    .await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_phone_answers_digit_for_digit_as_the_server() {
    let Some(rig) = Rig::start("offline-same-math").await else {
        return;
    };
    let b = &rig.browser;
    let (lot_id, mid, mdd, omc) = open_entry(&rig).await;
    let before = rig.app.lot_test_count(lot_id).await;
    let good = |dry: f64, w: f64| {
        let (wet, md) = nuclear_reading(dry, w);
        json!({"method": "nuclear", "chainage": km_m(mid + 0.5), "offset_m": "1.5", "depth_mm": "200",
               "technician": "R. Okafor", "wet_density": wet, "moisture_density": md})
    };
    let mut forms = vec![
        good(0.99 * mdd, omc),
        good(0.93 * mdd, omc + 3.1),
        good(1.02 * mdd, omc - 1.7),
    ];
    let mut bad = good(0.99 * mdd, omc);
    bad["chainage"] = json!("nine");
    bad["offset_m"] = json!("left");
    bad["wet_density"] = json!("");
    forms.push(bad);
    let mut off_lot = good(0.99 * mdd, omc);
    off_lot["chainage"] = json!(km_m(mid + 5000.0));
    forms.push(off_lot);
    let mut sand = json!({"method": "sand_cone", "chainage": km_m(mid), "offset_m": "0", "technician": "R. Okafor",
        "mass_sand_used_g": "5200", "mass_sand_in_cone_g": "6100", "sand_density_kg_m3": "1450",
        "mass_wet_soil_g": "4100", "water_content_pct": "9.5"});
    forms.push(sand.clone());
    sand["mass_sand_in_cone_g"] = json!("1650");
    forms.push(sand);
    // Far above zero air voids (the confirmation the server asks for).
    forms.push(good(1.25 * mdd, omc + 4.0));
    // The same, confirmed: previewed with its plausibility flags.
    let mut confirmed = good(1.25 * mdd, omc + 4.0);
    confirmed["confirm_implausible"] = json!("on");
    forms.push(confirmed);
    // The demo's register: gauge NG-6203 had an accepted standard count on 1 December
    // (in check), NG-6310 failed both its counts on 2 December (out of check: refused by
    // the demo's clauses), and a nuclear test from a registered gauge needs a registered
    // operator (src/demo/instruments.rs).
    let mut in_check = good(0.99 * mdd, omc);
    in_check["instrument_serial"] = json!("NG-6203");
    in_check["tested_at"] = json!("2026-12-01T10:00");
    forms.push(in_check);
    let mut out_of_check = good(0.99 * mdd, omc);
    out_of_check["instrument_serial"] = json!("NG-6310");
    out_of_check["tested_at"] = json!("2026-12-02T10:00");
    forms.push(out_of_check);
    let mut no_operator = good(0.99 * mdd, omc);
    no_operator["instrument_serial"] = json!("NG-6203");
    no_operator["tested_at"] = json!("2026-12-01T10:00");
    no_operator["technician"] = json!("Someone Unregistered");
    forms.push(no_operator);
    let mut flagged = 0;

    for form in &forms {
        let both = b
            .script(
                "var f = arguments[0]; var el = document.getElementById('entry-form');
                 var site = JSON.parse(el.getAttribute('data-site'));
                 var body = new URLSearchParams(f); body.set('action', 'check');
                 var server = fetch(el.getAttribute('data-preview'), {method: 'POST', credentials: 'same-origin',
                     headers: {'Content-Type': 'application/x-www-form-urlencoded'}, body: body.toString()})
                   .then(function (r) { return r.text(); });
                 var phone = window.liftSite.answerText({rules: site.rules, instruments: site.instruments,
                     unit_system: site.unit_system, chainage_style: site.chainage_style, form: f,
                     retest: false, today: new Date().toISOString().slice(0, 10)});
                 return Promise.all([server, phone]);",
                vec![form.clone()],
            )
            .await;
        let server: Value = serde_json::from_str(both[0].as_str().unwrap()).unwrap();
        let phone: Value = serde_json::from_str(both[1].as_str().unwrap()).unwrap();
        assert_eq!(
            both[0].as_str(),
            both[1].as_str(),
            "the phone's answer must be the server's, digit for digit, for {form}"
        );
        assert_eq!(server, phone);
        if phone["values"]["flags"]
            .as_array()
            .is_some_and(|f| !f.is_empty())
        {
            flagged += 1;
        }
    }
    assert!(flagged > 0, "a plausibility flag was compared too");
    let phone_answer = async |form: &Value| {
        b.script(
            "var el = document.getElementById('entry-form'); var site = JSON.parse(el.getAttribute('data-site'));
             return window.liftSite.answer({rules: site.rules, instruments: site.instruments,
               unit_system: site.unit_system, chainage_style: site.chainage_style, form: arguments[0],
               retest: false, today: '2026-12-03'});",
            vec![form.clone()],
        )
        .await
    };
    let n = forms.len();
    let checked = phone_answer(&forms[n - 3]).await;
    assert_eq!(
        checked["values"]["instrument_check"], "in_check",
        "{checked}"
    );
    assert!(
        checked["preview"]["instrument"]
            .as_str()
            .is_some_and(|w| w.starts_with("instrument in check: gauge NG-6203")),
        "{checked}"
    );
    let refused = phone_answer(&forms[n - 2]).await;
    assert!(
        refused["errors"]["instrument_serial"]
            .as_str()
            .is_some_and(|m| m.contains("NG-6310 is out of check on 2026-12-02")),
        "{refused}"
    );
    let no_operator = phone_answer(&forms[n - 1]).await;
    assert!(
        no_operator["errors"]["technician"].is_string(),
        "{no_operator}"
    );
    // The first form was built for 99 % of the lot's MDD (the test's own arithmetic).
    let first = b
        .script(
            "var el = document.getElementById('entry-form'); var site = JSON.parse(el.getAttribute('data-site'));
             return window.liftSite.answer({rules: site.rules, unit_system: site.unit_system,
               chainage_style: site.chainage_style, form: arguments[0], retest: false});",
            vec![forms[0].clone()],
        )
        .await;
    let rc = first["values"]["relative_compaction_pct"].as_f64().unwrap();
    assert!(
        (rc - 99.0).abs() < 0.01,
        "RC {rc} for a test at 99 % of MDD"
    );
    let bad = b
        .script(
            "var el = document.getElementById('entry-form'); var site = JSON.parse(el.getAttribute('data-site'));
             return window.liftSite.answer({rules: site.rules, unit_system: site.unit_system,
               chainage_style: site.chainage_style, form: arguments[0], retest: false});",
            vec![forms[3].clone()],
        )
        .await;
    for field in ["chainage", "offset_m", "wet_density"] {
        assert!(
            bad["errors"][field].is_string(),
            "{field} named offline: {bad}"
        );
    }
    assert_eq!(
        rig.app.lot_test_count(lot_id).await,
        before,
        "previews store nothing"
    );
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn three_tests_entered_offline_are_stored_exactly_once_when_the_network_is_back() {
    let Some(rig) = Rig::start("offline-queue").await else {
        return;
    };
    let b = &rig.browser;
    let (lot_id, mid, mdd, omc) = open_entry(&rig).await;
    let before = rig.app.lot_test_count(lot_id).await;

    network(b, false, 0).await;
    let note = b.find("#offline-note").await;
    assert_eq!(
        note.prop("hidden").await,
        json!(false),
        "the page says it has no signal"
    );
    enter_offline(b, mid - 10.0, 0.99 * mdd, omc, "", "99.0 %").await;
    enter_offline(b, mid, 0.97 * mdd, omc, "", "97.0 %").await;
    enter_offline(b, mid + 10.0, 0.96 * mdd, omc, "OFF-0003", "96.0 %").await;
    assert_eq!(queue(b).await, (3, 0));
    assert_eq!(
        rig.app.lot_test_count(lot_id).await,
        before,
        "nothing reaches the server without a network"
    );
    rig.shot_at("1-kept-offline", "#site-queue").await;
    assert_eq!(pages::sideways_overflow(b).await, 0, "fits 360 px");

    network(b, true, 0).await;
    wait_stored(&rig, lot_id, before + 3, 0).await;
    // Later syncs find nothing more to send.
    tokio::time::sleep(Duration::from_secs(6)).await;
    assert_eq!(rig.app.lot_test_count(lot_id).await, before + 3);
    assert_eq!(rig.app.tests_numbered("OFF-0003").await.len(), 1);
    let numbers: Vec<String> = sqlx::query_scalar(
        "SELECT number FROM field_tests WHERE lot_id = $1 ORDER BY id DESC LIMIT 3",
    )
    .bind(lot_id)
    .fetch_all(&rig.app.sql)
    .await
    .unwrap();
    let mut distinct = numbers.clone();
    distinct.sort();
    distinct.dedup();
    assert_eq!(distinct.len(), 3, "the server numbered them: {numbers:?}");
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_server_restart_in_the_middle_of_the_sync_still_stores_each_test_once() {
    let Some(mut rig) = Rig::start("offline-restart").await else {
        return;
    };
    let (lot_id, mid, mdd, omc) = open_entry(&rig).await;
    let before = rig.app.lot_test_count(lot_id).await;
    network(&rig.browser, false, 0).await;
    for (i, rc) in [(0, "99.0 %"), (1, "98.0 %"), (2, "97.0 %")] {
        let dry = [0.99, 0.98, 0.97][i] * mdd;
        enter_offline(&rig.browser, mid + i as f64 * 5.0, dry, omc, "", rc).await;
    }
    // Slow signal back: each request takes most of a second, so the restart lands mid-sync.
    network(&rig.browser, true, 700).await;
    let deadline = std::time::Instant::now() + Duration::from_secs(30);
    while rig.app.lot_test_count(lot_id).await == before {
        assert!(std::time::Instant::now() < deadline, "the sync never began");
        tokio::time::sleep(Duration::from_millis(10)).await;
    }
    rig.app.restart().await;
    wait_stored(&rig, lot_id, before + 3, 0).await;
    tokio::time::sleep(Duration::from_secs(6)).await;
    assert_eq!(rig.app.lot_test_count(lot_id).await, before + 3);
    let keys: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM idempotency_keys WHERE lot_id = $1")
        .bind(lot_id)
        .fetch_one(&rig.app.sql)
        .await
        .unwrap();
    assert_eq!(keys, 3);
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_refused_queued_test_stays_with_its_reason_and_a_signed_out_queue_waits() {
    let Some(rig) = Rig::start("offline-refused").await else {
        return;
    };
    let b = &rig.browser;
    let (lot_id, mid, mdd, omc) = open_entry(&rig).await;
    let before = rig.app.lot_test_count(lot_id).await;
    let taken: String = sqlx::query_scalar(
        "SELECT number FROM field_tests WHERE project_id = $1 ORDER BY id LIMIT 1",
    )
    .bind(PROJECT)
    .fetch_one(&rig.app.sql)
    .await
    .unwrap();

    network(b, false, 0).await;
    enter_offline(b, mid, 0.99 * mdd, omc, &taken, "99.0 %").await;
    enter_offline(b, mid + 5.0, 0.98 * mdd, omc, "", "98.0 %").await;
    // The session ends while the phone is offline (as a sign-out or an expiry would).
    b.cmd(reqwest::Method::DELETE, "/cookie", None)
        .await
        .unwrap();
    network(b, true, 0).await;
    b.wait_until("the phone to ask for a sign-in", async || {
        let s = b.find("#queue-status").await.text().await;
        s.contains("Sign in again").then_some(())
    })
    .await;
    assert_eq!(queue(b).await, (2, 0), "nothing dropped while signed out");
    assert_eq!(rig.app.lot_test_count(lot_id).await, before);

    rig.sign_in(b).await;
    wait_stored(&rig, lot_id, before + 1, 1).await;
    rig.open(&format!("/lots/{lot_id}/entry")).await;
    let reason = b
        .wait_until("the refused test with its reason", async || {
            let r = b
                .script(
                    "var e = document.querySelector('#queue-list li.refused .reason'); return e ? e.textContent : null;",
                    vec![],
                )
                .await;
            r.as_str().map(str::to_string)
        })
        .await;
    assert!(
        reason.contains(&taken) && reason.contains("already used"),
        "the server's reason is shown: {reason}"
    );
    rig.shot_at("1-refused", "#site-queue").await;
    b.find("#queue-list li.refused button.fix")
        .await
        .click()
        .await;
    b.wait_until("the refused test back in the form", async || {
        let n = b.find("#number").await.prop("value").await;
        (n == json!(taken)).then_some(())
    })
    .await;
    assert_eq!(queue(b).await, (0, 0));
    assert_eq!(rig.app.lot_test_count(lot_id).await, before + 1);
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_navigation_wraps_the_map_fits_and_entry_targets_are_touch_sized_at_360_px() {
    let Some(rig) = Rig::start("phone-fit").await else {
        return;
    };
    let b = &rig.browser;
    rig.open(&format!("/projects/{PROJECT}/map")).await;
    b.wait_for("#lift-map svg").await;
    assert_eq!(pages::viewport_width(b).await, 360);
    let fit = b
        .script(
            "var w = window.innerWidth;
             var links = Array.prototype.slice.call(document.querySelectorAll('.top nav a'));
             var nav = document.querySelector('.top nav');
             var map = document.querySelector('#lift-map');
             var svg = map.querySelector('svg').getBoundingClientRect();
             return {
               outside: links.filter(function (a) { var r = a.getBoundingClientRect(); return r.left < 0 || r.right > w; }).length,
               short: links.filter(function (a) { return a.getBoundingClientRect().height < 44; }).length,
               rows: new Set(links.map(function (a) { return Math.round(a.getBoundingClientRect().top); })).size,
               navScroll: nav.scrollWidth - nav.clientWidth,
               mapScroll: map.scrollWidth - map.clientWidth,
               svgRight: svg.right, w: w };",
            vec![],
        )
        .await;
    assert_eq!(fit["outside"], 0, "every menu link on screen: {fit}");
    assert_eq!(fit["short"], 0, "menu links are touch-sized (44 px): {fit}");
    assert!(fit["rows"].as_i64().unwrap() > 1, "the menu wraps: {fit}");
    assert_eq!(
        fit["navScroll"], 0,
        "the menu does not scroll sideways: {fit}"
    );
    assert_eq!(fit["mapScroll"], 0, "the lift map fits the width: {fit}");
    assert!(
        fit["svgRight"].as_f64().unwrap() <= fit["w"].as_f64().unwrap(),
        "{fit}"
    );
    assert_eq!(pages::sideways_overflow(b).await, 0);
    rig.shot("1-map-360").await;

    let (lot_id, _) = pages::open_lot_from_map_owing(&rig, "owed", None).await;
    rig.open(&format!("/lots/{lot_id}/entry")).await;
    b.wait_for("#entry-form").await;
    for method in ["nuclear", "sand_cone", "balloon", "drive_cylinder"] {
        let small = b
            .script(
                "var m = document.getElementById('method'); m.value = arguments[0];
                 m.dispatchEvent(new Event('change'));
                 var out = [];
                 document.querySelectorAll('#entry-form input, #entry-form select, #entry-form button').forEach(function (e) {
                   if (e.type === 'hidden' || e.offsetParent === null) return;
                   var target = e.type === 'checkbox' ? e.closest('label') : e;
                   var r = target.getBoundingClientRect();
                   if (r.height < 44 || r.width < 44) out.push((e.id || e.name) + ' ' + r.width + 'x' + r.height);
                 });
                 return out;",
                vec![json!(method)],
            )
            .await;
        assert_eq!(small, json!([]), "touch-sized entry targets ({method})");
    }
    assert_eq!(pages::sideways_overflow(b).await, 0);
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_kept_entry_page_opens_and_previews_with_no_server_at_all() {
    let Some(mut rig) = Rig::start("offline-page").await else {
        return;
    };
    let (lot_id, mid, mdd, omc) = open_entry(&rig).await;
    let before = rig.app.lot_test_count(lot_id).await;
    let b = &rig.browser;
    b.wait_until("the entry page to be kept on the phone", async || {
        let kept = b
            .script(
                "return window.liftSite.kept().then(function (r) { return !!r; });",
                vec![],
            )
            .await;
        (kept == json!(true)).then_some(())
    })
    .await;
    // No signal and no server: the page, its script and the library come from the phone.
    rig.app.stop_server();
    network(b, false, 0).await;
    rig.open(&format!("/lots/{lot_id}/entry")).await;
    b.wait_for("#entry-form").await;
    enter_offline(b, mid, 0.98 * mdd, omc, "", "98.0 %").await;
    assert_eq!(queue(b).await, (1, 0));
    rig.shot_at("1-offline-page", "#entry-form").await;

    rig.app.restart().await;
    network(b, true, 0).await;
    wait_stored(&rig, lot_id, before + 1, 0).await;
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_retest_kept_offline_is_stored_once_as_the_failed_tests_retest() {
    let Some(rig) = Rig::start("offline-retest").await else {
        return;
    };
    let b = &rig.browser;
    // A failing lot's failed test still waiting for its retest, from the lot sheet.
    let (lot_id, _) = pages::open_lot_from_map(&rig, "failing").await;
    let row = b
        .find("#tests tr[data-result=\"fail\"]:has(a[href$=\"/retest\"])")
        .await;
    let failed_number = row.find("td").await.text().await;
    let href = row
        .find("a[href$=\"/retest\"]")
        .await
        .attr("href")
        .await
        .expect("retest link");
    let lot = rig.app.lot(lot_id).await;
    let before = rig.app.lot_test_count(lot_id).await;
    rig.open(&href).await;
    b.wait_for("#entry-form").await;
    b.wait_until("the site library to load", async || {
        let ok = b
            .script(
                "return window.liftSite.answer({}).then(function () { return true; }, function () { return false; });",
                vec![],
            )
            .await;
        (ok == json!(true)).then_some(())
    })
    .await;

    network(b, false, 0).await;
    // The retest form keeps the failed test's spot; the readings are typed on the phone.
    let (wet, moisture) = nuclear_reading(0.985 * lot.mdd, lot.omc);
    b.find("#number").await.type_over("OFF-R1").await;
    b.find("#technician").await.type_over("R. Okafor").await;
    b.find("#wet_density").await.type_over(&wet).await;
    b.find("#moisture_density").await.type_over(&moisture).await;
    b.wait_until("the offline preview of the retest", async || {
        let shown = b.try_find("#preview-result #pv-rc").await?.text().await;
        (shown == "98.5 %").then_some(())
    })
    .await;
    b.find("#save").await.click().await;
    b.wait_for("#kept-offline").await;
    assert_eq!(queue(b).await, (1, 0));
    assert_eq!(rig.app.lot_test_count(lot_id).await, before);

    network(b, true, 0).await;
    wait_stored(&rig, lot_id, before + 1, 0).await;
    let stored = rig.app.tests_numbered("OFF-R1").await;
    assert_eq!(stored.len(), 1, "stored once");
    let failed = rig.app.tests_numbered(&failed_number).await;
    assert_eq!(failed.len(), 1);
    let failed_id: i64 = href
        .trim_start_matches("/field-tests/")
        .trim_end_matches("/retest")
        .parse()
        .expect("failed test id");
    assert_eq!(
        stored[0].retest_of,
        Some(failed_id),
        "kept as the retest of {failed_number}"
    );
    assert!(
        (stored[0].chainage_m - failed[0].chainage_m).abs() < 1e-9,
        "at the failed test's spot"
    );
    // Later syncs find nothing more to send.
    tokio::time::sleep(Duration::from_secs(6)).await;
    assert_eq!(rig.app.lot_test_count(lot_id).await, before + 1);
    rig.finish().await;
}
