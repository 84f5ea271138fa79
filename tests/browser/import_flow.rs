//! Importing a CSV file on the import page: check it, read its problems, fix it, import it.

use std::path::Path;

use liftledger::ledger::Actor;
use liftledger::transfer::{self, mapping::ImportMapping, mapping::Target};
use serde_json::json;

use crate::app::{LotFacts, PROJECT, Rig, km_m, nuclear_reading};
use crate::pages::{self, wait_for_path};
use crate::webdriver::Session;

const HEADER: &str =
    "Test No,Taken,Technician,Lot,Chainage,Offset,Method,Wet density,Moisture density";

/// A nuclear row in the lot at `chainage_m`, meeting its curve.
fn line(number: &str, lot: &str, chainage_m: f64, mdd: f64, omc: f64) -> String {
    let (wet, moisture) = nuclear_reading(0.99 * mdd, omc);
    line_with(number, lot, chainage_m, &wet, &moisture)
}

/// A nuclear row with its readings as written.
fn line_with(number: &str, lot: &str, chainage_m: f64, wet: &str, moisture: &str) -> String {
    format!(
        "{number},2026-11-20T09:00:00Z,R. Okafor,{lot},{},0.5,nuclear,{wet},{moisture}",
        km_m(chainage_m)
    )
}

fn write_csv(path: &Path, lines: &[String]) {
    let mut text = format!("{HEADER}\n");
    for l in lines {
        text.push_str(l);
        text.push('\n');
    }
    std::fs::write(path, text).expect("write the CSV file");
}

/// Saves what the phone shows and the same page at desktop width, under /tmp and the shots folder.
async fn shots(rig: &Rig, step: &str) {
    rig.shot(step).await;
    let b = &rig.browser;
    std::fs::write(
        format!("/tmp/liftledger-import-{step}-360.png"),
        b.full_page_screenshot().await,
    )
    .expect("write screenshot");
    set_width(b, 1280, false).await;
    std::fs::write(
        format!("/tmp/liftledger-import-{step}-1280.png"),
        b.full_page_screenshot().await,
    )
    .expect("write screenshot");
    assert_eq!(
        pages::sideways_overflow(b).await,
        0,
        "{step}: no sideways scroll"
    );
    set_width(b, 360, true).await;
}

async fn set_width(b: &Session, width: u32, mobile: bool) {
    b.cmd(
        reqwest::Method::POST,
        "/goog/cdp/execute",
        Some(json!({"cmd": "Emulation.setDeviceMetricsOverride",
                    "params": {"width": width, "height": 800, "deviceScaleFactor": if mobile { 2 } else { 1 }, "mobile": mobile}})),
    )
    .await
    .expect("set the window width");
}

/// Slows the browser's uploads to `bytes_per_second` (`None`: full speed again).
async fn throttle_upload(b: &Session, bytes_per_second: Option<u32>) {
    let cdp = |cmd: &str, params: serde_json::Value| json!({"cmd": cmd, "params": params});
    b.cmd(
        reqwest::Method::POST,
        "/goog/cdp/execute",
        Some(cdp("Network.enable", json!({}))),
    )
    .await
    .expect("enable network emulation");
    b.cmd(
        reqwest::Method::POST,
        "/goog/cdp/execute",
        Some(cdp(
            "Network.emulateNetworkConditions",
            json!({"offline": false, "latency": 0, "downloadThroughput": -1,
                   "uploadThroughput": bytes_per_second.map_or(-1, i64::from)}),
        )),
    )
    .await
    .expect("throttle uploads");
}

/// The text of the element with `id` right now, in one call (the page may be replaced
/// between two calls while an answer arrives).
async fn text_now(b: &Session, id: &str) -> Option<String> {
    b.script(
        "var e = document.getElementById(arguments[0]); return e ? e.textContent.trim() : null;",
        vec![json!(id)],
    )
    .await
    .as_str()
    .map(str::to_string)
}

/// Waits for a result whose heading differs from `before`; returns the new heading.
async fn new_result(b: &Session, before: &str) -> String {
    b.wait_until("the import result", async || {
        let h = text_now(b, "result-heading").await?;
        (h != before).then_some(h)
    })
    .await
}

/// (row, column, reason) of every line of the problems table.
async fn problems(b: &Session) -> Vec<(String, String, String)> {
    let mut out = Vec::new();
    for tr in b.find_all("#problems tbody tr").await {
        out.push((
            tr.find("td:nth-child(1)").await.text().await,
            tr.find("td:nth-child(2)").await.text().await,
            tr.find("td:nth-child(4)").await.text().await,
        ));
    }
    out
}

/// An open lot of the demo, after saving the "gauge export" mapping in its project.
async fn open_lot_with_mapping(rig: &Rig) -> (i64, LotFacts) {
    let lot_id: i64 = sqlx::query_scalar(
        "SELECT id FROM lots WHERE project_id = $1 AND state = 'open' ORDER BY id LIMIT 1",
    )
    .bind(PROJECT)
    .fetch_one(&rig.app.sql)
    .await
    .expect("the demo has an open lot");
    let lot = rig.app.lot(lot_id).await;
    let mapping = ImportMapping::new([
        ("Test No", Target::Number),
        ("Taken", Target::TestedAt),
        ("Technician", Target::Technician),
        ("Lot", Target::Lot),
        ("Chainage", Target::Chainage),
        ("Offset", Target::OffsetM),
        ("Method", Target::Method),
        ("Wet density", Target::WetDensity),
        ("Moisture density", Target::MoistureDensity),
    ]);
    transfer::save_mapping(
        &rig.app.pool,
        PROJECT,
        "gauge export",
        &mapping,
        &Actor::system("browser test"),
    )
    .await
    .expect("save the mapping");
    (lot_id, lot)
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_csv_file_is_checked_fixed_and_imported_on_the_import_page() {
    let Some(rig) = Rig::start_as("import", "qc_manager").await else {
        return;
    };
    let b = &rig.browser;
    let (lot_id, lot) = open_lot_with_mapping(&rig).await;
    let before = rig.app.field_test_count().await;
    let step = (lot.chainage_to_m - lot.chainage_from_m) / 5.0;
    let good: Vec<String> = (1..=4)
        .map(|i| {
            line(
                &format!("IMP-{i:03}"),
                &lot.code,
                lot.chainage_from_m + step * i as f64,
                lot.mdd,
                lot.omc,
            )
        })
        .collect();
    let mut bad = good.clone();
    bad[1] = line(
        "IMP-002",
        &lot.code,
        lot.chainage_to_m + 500.0,
        lot.mdd,
        lot.omc,
    );
    bad[3] = line_with(
        "IMP-004",
        &lot.code,
        lot.chainage_from_m + step * 4.0,
        "dense",
        "200",
    );
    let dir = tempfile::tempdir().expect("tempdir");
    let file = dir.path().join("gauge-day.csv");
    write_csv(&file, &bad);

    // The page, reached from the project home.
    rig.open(&format!("/projects/{PROJECT}")).await;
    b.find("#import-link").await.click().await;
    let path = format!("/projects/{PROJECT}/import");
    wait_for_path(b, &path).await;
    assert_eq!(b.find("h1").await.text().await, "Import field tests");
    assert_eq!(b.find("#mapping").await.prop("value").await, "gauge export");
    assert!(
        b.find("#import-progress")
            .await
            .attr("hidden")
            .await
            .is_some()
    );
    shots(&rig, "1-form").await;

    // Check the bad file: its problems are listed by row and nothing is written.
    b.find("#file")
        .await
        .send_keys(file.to_str().unwrap())
        .await;
    b.find("#check-file").await.click().await;
    let heading = new_result(b, "").await;
    assert!(
        heading.contains("2 rows of gauge-day.csv have problems"),
        "{heading}"
    );
    let sent = b
        .find("html")
        .await
        .attr("data-uploaded-bytes")
        .await
        .expect("the answer came through the progress script");
    let file_len = std::fs::metadata(&file).unwrap().len();
    assert!(
        sent.parse::<u64>().unwrap() > file_len,
        "the progress bar saw the whole upload ({sent} of at least {file_len} bytes)"
    );
    assert_eq!(b.current_path().await, path);
    let listed = problems(b).await;
    assert_eq!(listed.len(), 2, "{listed:?}");
    assert_eq!(listed[0].0, "3");
    assert_eq!(listed[0].1, "Chainage");
    assert!(
        listed[0].2.contains(&format!("outside lot {}", lot.code)),
        "{listed:?}"
    );
    assert_eq!(listed[1].0, "5");
    assert_eq!(listed[1].1, "Wet density");
    assert!(listed[1].2.contains("not a number"), "{listed:?}");
    assert_eq!(
        rig.app.field_test_count().await,
        before,
        "a check writes nothing"
    );
    shots(&rig, "2-problems").await;

    // Fixed, checked again: ready, with the Import button offered.
    write_csv(&file, &good);
    b.find("#file")
        .await
        .send_keys(file.to_str().unwrap())
        .await;
    b.find("#check-file").await.click().await;
    let heading = new_result(b, &heading).await;
    assert!(heading.contains("is ready"), "{heading}");
    assert_eq!(b.find("#would-create").await.text().await, "4");
    assert!(b.try_find("#problems").await.is_none());
    assert_eq!(rig.app.field_test_count().await, before);
    shots(&rig, "3-ready").await;

    // Import: the same file chosen again.
    b.find("#file")
        .await
        .send_keys(file.to_str().unwrap())
        .await;
    b.find("#import-file").await.click().await;
    let heading = new_result(b, &heading).await;
    assert!(heading.starts_with("Imported"), "{heading}");
    assert_eq!(b.find("#created").await.text().await, "4");
    assert_eq!(
        b.find("#per-lot").await.text().await,
        format!("{}: 4", lot.code)
    );
    assert_eq!(rig.app.field_test_count().await, before + 4);
    assert_eq!(rig.app.tests_numbered("IMP-004").await[0].lot_id, lot_id);
    shots(&rig, "4-imported").await;

    // A larger file over a slow link: the bar shows the upload, then the answer comes.
    let many: Vec<String> = (0..1500).flat_map(|_| good.iter().cloned()).collect();
    write_csv(&file, &many);
    let file_len = std::fs::metadata(&file).unwrap().len();
    throttle_upload(b, Some(200_000)).await;
    b.find("#file")
        .await
        .send_keys(file.to_str().unwrap())
        .await;
    b.find("#check-file").await.click().await;
    let status = b
        .wait_until("the upload's progress", async || {
            let t = text_now(b, "upload-status").await?;
            t.starts_with("Uploading: ").then_some(t)
        })
        .await;
    assert!(status.contains(" of "), "{status}");
    let bar = b
        .script(
            "var p = document.getElementById('upload-bar'); return [p.value, p.max];",
            vec![],
        )
        .await;
    assert!(
        bar[1].as_f64().unwrap() > file_len as f64,
        "the bar's end is the whole form: {bar}"
    );
    rig.shot_at("5-uploading", "#import-form").await;
    std::fs::write(
        "/tmp/liftledger-import-5-uploading-360.png",
        b.screenshot().await,
    )
    .expect("write screenshot");
    throttle_upload(b, None).await;
    let heading = new_result(b, &heading).await;
    assert!(heading.starts_with("Nothing new"), "{heading}");
    assert_eq!(rig.app.field_test_count().await, before + 4);

    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn without_javascript_the_import_form_posts_and_answers_with_the_same_page() {
    let Some(rig) = Rig::start_as("import-nojs", "qc_manager").await else {
        return;
    };
    let (_, lot) = open_lot_with_mapping(&rig).await;
    let b = rig.driver.session(false).await;
    rig.sign_in_as(&b, "qc_manager").await;
    let dir = tempfile::tempdir().expect("tempdir");
    let file = dir.path().join("no-script.csv");
    let mid = (lot.chainage_from_m + lot.chainage_to_m) / 2.0;
    write_csv(
        &file,
        &[
            line("NJS-001", &lot.code, mid, lot.mdd, lot.omc),
            line_with("NJS-002", &lot.code, mid + 1.0, "heavy", "200"),
        ],
    );
    let before = rig.app.field_test_count().await;
    b.goto(&rig.app.url(&format!("/projects/{PROJECT}/import")))
        .await;
    b.find("#file")
        .await
        .send_keys(file.to_str().unwrap())
        .await;
    b.find("#import-file").await.click().await;
    let heading = new_result(&b, "").await;
    assert!(
        heading.contains("1 row of no-script.csv has problems"),
        "{heading}"
    );
    assert!(
        b.find("html")
            .await
            .attr("data-uploaded-bytes")
            .await
            .is_none(),
        "the browser posted the form itself"
    );
    assert_eq!(
        b.find("#problems tbody td:nth-child(1)").await.text().await,
        "3"
    );
    assert!(
        b.find("#import-result")
            .await
            .text()
            .await
            .contains("The import was refused; nothing was written.")
    );
    assert_eq!(rig.app.field_test_count().await, before);
    b.quit().await;
    rig.finish().await;
}
