//! A failing lot followed from the lift map to a passing retest, on a phone.

use serde_json::json;

use crate::app::{Rig, nuclear_reading, test_number_in};
use crate::pages::{self, fact, mark_page, wait_for_new_page, wait_for_path};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn failing_lot_to_passing_retest_from_a_phone() {
    let Some(rig) = Rig::start("retest").await else {
        return;
    };
    let b = &rig.browser;

    // The lift map lists a failing lot; its row leads to the lot sheet.
    let (lot_id, code) = pages::open_lot_from_map(&rig, "failing").await;
    assert_eq!(
        pages::viewport_width(b).await,
        360,
        "the browser should be phone-sized"
    );
    let state = b.find("#lot-state").await;
    assert_eq!(state.attr("data-state").await.as_deref(), Some("failing"));
    assert_eq!(state.text().await, "failing");
    let facts = rig.app.lot(lot_id).await;
    assert_eq!(facts.code, code);
    let tests_before = rig.app.lot_test_count(lot_id).await;

    // The failed test still waiting for a retest, as the tests table shows it.
    let failed_row = b
        .find("#tests tr[data-result=\"fail\"]:has(a[href$=\"/retest\"])")
        .await;
    let failed_number = failed_row.find("td").await.text().await;
    let failed_chainage = failed_row.find("td:nth-child(3)").await.text().await;
    assert_eq!(failed_row.find(".tag").await.text().await, "fail");
    let retest_href = failed_row
        .find("a[href$=\"/retest\"]")
        .await
        .attr("href")
        .await
        .expect("retest href");
    let failed_id: i64 = retest_href
        .trim_start_matches("/field-tests/")
        .trim_end_matches("/retest")
        .parse()
        .unwrap_or_else(|_| panic!("retest link {retest_href}"));

    // The verdict says the lot falls short and which test is to blame.
    let verdict = b.find("#verdict").await.text().await;
    assert!(
        verdict.contains(&format!("Does not meet clause {}", facts.clause)),
        "verdict: {verdict}"
    );
    assert!(
        verdict.contains(&failed_number),
        "the verdict should name the failing test {failed_number} as the tests table does; it reads:\n{verdict}"
    );
    let lot_mdd = fact(b, ".card:has(a[href^=\"/lab-tests/\"])", "MDD").await;

    // The reference curve: the chart is there and plots the lot's field tests.
    b.find(".card a[href^=\"/lab-tests/\"]").await.click().await;
    b.wait_for("#curve-chart svg").await;
    assert!(b.current_path().await.starts_with("/lab-tests/"));
    assert_eq!(
        b.find("#mdd").await.text().await,
        lot_mdd,
        "curve sheet and lot sheet MDD"
    );
    let marks = b
        .script(
            "return Array.from(document.querySelectorAll('#curve-chart svg .ll-field')).map(function (g) {
               var t = g.querySelector('title');
               return {cls: g.getAttribute('class'), title: t ? t.textContent : ''};
             });",
            vec![],
        )
        .await;
    let marks = marks.as_array().cloned().unwrap_or_default();
    assert!(
        !marks.is_empty(),
        "the curve chart shows no field-test marks"
    );
    let plotted: usize = b
        .find(".card strong")
        .await
        .text()
        .await
        .parse()
        .expect("plotted count on the curve sheet");
    assert_eq!(
        marks.len(),
        plotted,
        "marks on the chart vs the count the sheet states"
    );
    assert!(
        marks.iter().any(|m| {
            m["title"]
                .as_str()
                .is_some_and(|t| t.starts_with(&format!("{failed_number} ")))
                && m["cls"].as_str().is_some_and(|c| c.contains("ll-fail"))
        }),
        "the failed test {failed_number} should be marked failing on the curve"
    );
    rig.shot("1-curve").await;
    rig.shot_at("1-curve-chart", "#curve-chart").await;

    // Back to the lot, and retest the failed spot.
    b.back().await;
    wait_for_path(b, &format!("/lots/{lot_id}")).await;
    b.wait_for("#tests").await;
    b.find(&format!("#tests a[href=\"{retest_href}\"]"))
        .await
        .click()
        .await;
    wait_for_path(b, &retest_href).await;
    b.wait_for("#entry-form").await;
    let h1 = b.find("h1").await.text().await;
    assert_eq!(h1, format!("Retest of {failed_number}"));
    assert_eq!(
        b.find("#chainage").await.prop("value").await,
        json!(failed_chainage),
        "the retest should start at the failed test's chainage"
    );

    // A reading at 99 % of the reference MDD, at optimum moisture.
    let (wet, moisture) = nuclear_reading(0.99 * facts.mdd, facts.omc);
    assert_eq!(
        b.find("#method").await.prop("value").await,
        json!("nuclear")
    );
    b.find("#wet_density").await.type_over(&wet).await;
    b.find("#moisture_density").await.type_over(&moisture).await;
    let heading = b
        .wait_until("the live preview of the typed reading", async || {
            let rc = b.try_find("#preview-result #pv-rc").await?.text().await;
            if rc != "99.0 %" {
                return None;
            }
            Some(b.find("#preview-result h2").await.text().await)
        })
        .await;
    assert_eq!(heading, "This test passes (not saved yet)");
    assert_eq!(
        b.find("#preview-result")
            .await
            .attr("class")
            .await
            .as_deref(),
        Some("verdict meets")
    );
    rig.shot("2-preview").await;

    // Save: back on the lot sheet, at the new test's row.
    mark_page(b).await;
    b.find("#save").await.click().await;
    wait_for_new_page(b).await;
    let landed = b.current_path().await;
    assert!(
        landed.starts_with(&format!("/lots/{lot_id}#")),
        "after saving: {landed}"
    );
    let new_number = test_number_in(&landed).expect("saved test's anchor in the URL");
    assert_ne!(new_number, failed_number);

    let new_row = b
        .find(&format!("#tests tr[id=\"test-{new_number}\"]"))
        .await;
    assert_eq!(new_row.attr("data-result").await.as_deref(), Some("pass"));
    assert_eq!(new_row.find(".tag").await.text().await, "pass");
    assert_eq!(
        new_row.find("td:nth-child(3)").await.text().await,
        failed_chainage
    );
    assert_eq!(new_row.find("td:nth-child(9)").await.text().await, "99.0");
    assert!(
        new_row
            .text()
            .await
            .contains(&format!("retest of {failed_number}")),
        "the new row should say what it retests"
    );

    let old_row = b
        .find(&format!("#tests tr[id=\"test-{failed_number}\"]"))
        .await;
    assert_eq!(
        old_row.attr("data-result").await.as_deref(),
        Some("superseded")
    );
    assert_eq!(old_row.find(".tag").await.text().await, "superseded");
    assert!(
        old_row
            .text()
            .await
            .contains(&format!("superseded by {new_number}")),
        "the failed row should point to its retest"
    );
    assert!(
        old_row.try_find("a[href$=\"/retest\"]").await.is_none(),
        "a retested test offers no second retest"
    );

    let state_now = b.find("#lot-state").await;
    assert_ne!(
        state_now.attr("data-state").await.as_deref(),
        Some("failing"),
        "lot {code} still failing after its retest passed"
    );
    let label_now = state_now.text().await;
    let verdict_now = b.find("#verdict").await.text().await;
    assert!(
        !verdict_now.contains(&format!("{failed_number} at")),
        "the superseded failure should be out of the verdict: {verdict_now}"
    );
    rig.shot("3-lot").await;
    rig.shot_at("3-lot-verdict", "#verdict").await;

    // What was saved: exactly one new test, linked to the failed one, passing.
    assert_eq!(rig.app.lot_test_count(lot_id).await, tests_before + 1);
    let saved = rig.app.tests_numbered(&new_number).await;
    assert_eq!(saved.len(), 1, "one saved test numbered {new_number}");
    assert_eq!(saved[0].lot_id, lot_id);
    assert_eq!(
        saved[0].retest_of,
        Some(failed_id),
        "the retest is linked to the failed test"
    );

    // The lift map no longer shows the lot as failing.
    let (on_map, written) = pages::map_state_of(&rig, lot_id).await;
    assert_ne!(on_map, "failing", "lot {code} on the lift map");
    assert!(
        written.ends_with(&label_now),
        "map row state {written:?} vs lot sheet {label_now:?}"
    );
    rig.shot("4-map").await;
    rig.finish().await;
}
