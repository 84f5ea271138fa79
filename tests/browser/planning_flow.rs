//! Where to test, at phone and desktop width: the drift warning on the project home, a lot's plan
//! with its misplaced test, a replan through the form, and the control charts with a broken rule.

use serde_json::json;

use crate::app::{PROJECT, Rig};
use crate::pages::{self, mark_page, wait_for_new_page};
use crate::webdriver::Session;

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

/// Checks the page at phone and desktop width (no sideways scroll) and saves both.
async fn both_widths(rig: &Rig, step: &str) {
    let b = &rig.browser;
    for (w, mobile) in [(360, true), (1280, false)] {
        set_width(b, w, mobile).await;
        assert_eq!(pages::viewport_width(b).await, i64::from(w));
        assert_eq!(
            pages::sideways_overflow(b).await,
            0,
            "{step} at {w}: no sideways scroll"
        );
        std::fs::write(
            format!("/tmp/liftledger-planning-{step}-{w}.png"),
            b.full_page_screenshot().await,
        )
        .expect("write screenshot");
    }
    set_width(b, 360, true).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn plan_drift_and_charts_in_a_browser() {
    let Some(rig) = Rig::start_as("planning", "qc_manager").await else {
        return;
    };
    let b = &rig.browser;

    // The project home warns that the Halvery cut material may have changed. The drift
    // checks run apart from the view; while one is under way the page says so, and a
    // reload shows its notes.
    for _ in 0..50 {
        rig.open(&format!("/projects/{PROJECT}")).await;
        if b.try_find("#drift-pending").await.is_none() {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(200)).await;
    }
    assert!(
        b.try_find("#drift-pending").await.is_none(),
        "the drift run finishes"
    );
    let warn = b.wait_for(".drift-warning").await;
    let text = warn.text().await;
    assert!(
        text.contains("HX4-A") && text.contains("material may have changed"),
        "{text}"
    );
    assert!(text.contains("H-008") && text.contains("H-010"), "{text}");
    both_widths(&rig, "home").await;

    // The lot sheet of HR01-1 flags its misplaced test and links the plan.
    rig.open(&format!("/projects/{PROJECT}/map")).await;
    b.wait_for("#lot-table").await;
    let mut href = None;
    for a in b.find_all("#lot-table a[href^=\"/lots/\"]").await {
        if a.text().await == "HR01-1" {
            href = a.attr("href").await;
        }
    }
    let href = href.expect("HR01-1 on the lift map");
    rig.open(&href).await;
    b.wait_for("#lot-state").await;
    let body = b.find("body").await.text().await;
    assert_eq!(
        body.matches("not at a planned location").count(),
        1,
        "one misplaced test"
    );
    assert!(body.contains("reference: one-point check OP-1"));
    b.find("#plan-link").await.click().await;
    b.wait_for("#plan-locations").await;
    let items = b.find_all("#plan-locations li").await;
    assert_eq!(items.len(), 5, "one location per sub-lot");
    assert!(
        items[0].text().await.contains("0+0"),
        "chainage in the project's style"
    );
    assert_eq!(b.find_all("#plan-matches tr.misplaced").await.len(), 1);
    both_widths(&rig, "plan").await;

    // Replanning through the form keeps the first plan on record.
    b.find("input[name=seed]").await.type_over("12345").await;
    b.find("input[name=reason]")
        .await
        .type_over("exclusion widened at the culvert")
        .await;
    b.find("input[name=exclusions]")
        .await
        .type_over("118-130")
        .await;
    mark_page(b).await;
    b.find("#plan-form button").await.click().await;
    wait_for_new_page(b).await;
    b.wait_for("#plan-history").await;
    let history = b.find_all("#plan-history li").await;
    assert_eq!(history.len(), 2);
    assert!(
        history[1].text().await.contains("superseded"),
        "the old plan stays on record"
    );
    assert!(
        b.find("#plan-facts")
            .await
            .text()
            .await
            .contains("seed 12345")
    );

    // The control charts flag the broken rule and offer the CSV.
    rig.open(&format!("/projects/{PROJECT}/control-charts"))
        .await;
    let broken = b.wait_for(".rule-broken").await;
    assert!(!broken.text().await.is_empty());
    assert!(b.find_all(".control-group svg").await.len() >= 2);
    assert!(
        !b.find_all(".control-group svg .signal").await.is_empty(),
        "a broken rule drawn as a diamond"
    );
    assert!(
        b.find("#chart-csv")
            .await
            .attr("href")
            .await
            .unwrap()
            .contains(".csv")
    );
    both_widths(&rig, "charts").await;
    rig.finish().await;
}
