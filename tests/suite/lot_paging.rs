//! A lot of more than one sheet page: the test table pages after 500 rows with previous
//! and next links, while the verdict and statistics count every test; the API lot report
//! lists a window of lines and counts them all.

use liftledger::ledger::Actor;
use liftledger::ledger::import::{AuditMode, ImportOptions};
use liftledger::transfer::import_csv;
use serde_json::json;

use crate::helpers::{build_frame, page, spawn_app};
use crate::transfer::{csv_bytes, mapping, row};

/// Tests in the lot: one full page and part of a second.
const TESTS: usize = 620;

/// Rows in the sheet's test table.
fn table_rows(html: &str) -> usize {
    let table = html
        .split("<table id=\"tests\"")
        .nth(1)
        .expect("the test table");
    let body = table.split("</table>").next().unwrap();
    body.matches("<tr id=\"test-").count()
}

/// The statistics table's n.
fn stats_n(html: &str) -> String {
    let stats = html
        .split("<h2>Statistics")
        .nth(1)
        .expect("statistics")
        .split("<tbody><tr><td class=\"num\">")
        .nth(1)
        .unwrap();
    stats.split('<').next().unwrap().to_string()
}

#[tokio::test]
async fn a_big_lot_sheet_pages_its_tests_and_counts_them_all() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "mean_and_min", "allowance_pct": 3.0})).await;
    let rows: Vec<Vec<String>> = (0..TESTS)
        .map(|i| {
            let chainage = format!("{:.2}", 1000.5 + i as f64 * 0.15);
            let dry = 1890.0 + (i % 7) as f64 * 5.0;
            row(&format!("P{:04}", i + 1), &chainage, dry, 11.2)
        })
        .collect();
    let opts = ImportOptions {
        commit: true,
        audit: AuditMode::PerImport,
        actor: Actor::system("T. Importer"),
    };
    let report = import_csv(
        &app.pool,
        f.project,
        csv_bytes(b',', false, &rows).as_slice(),
        "big-lot.csv",
        &mapping(),
        &opts,
    )
    .await
    .expect("import runs");
    assert_eq!(report.new_tests as usize, TESTS, "{:?}", report.problems);

    let (s, first) = page(&app, &format!("/lots/{}", f.lot)).await;
    assert_eq!(s, 200, "{first}");
    assert_eq!(table_rows(&first), 500);
    assert!(first.contains("id=\"test-P0001\"") && first.contains("id=\"test-P0500\""));
    assert!(!first.contains("id=\"test-P0501\""));
    assert!(
        first.contains("Tests 1–500 of 620 (page 1 of 2)"),
        "words missing"
    );
    let next = format!("href=\"/lots/{}?page=2#tests-heading\" rel=\"next\"", f.lot);
    assert!(first.contains(&next), "no link to page 2");
    assert!(!first.contains("rel=\"prev\""), "page 1 links backwards");
    // The statistics and verdict count every test, not the page's.
    assert_eq!(stats_n(&first), "620");
    assert!(
        first.contains("<strong>620</strong> counted"),
        "verdict counts"
    );
    assert_eq!(
        first.matches("class=\"ll-test ").count(),
        TESTS,
        "chart marks"
    );

    let (s, second) = page(&app, &format!("/lots/{}?page=2", f.lot)).await;
    assert_eq!(s, 200);
    assert_eq!(table_rows(&second), TESTS - 500);
    assert!(second.contains("id=\"test-P0501\"") && second.contains("id=\"test-P0620\""));
    assert!(second.contains("Tests 501–620 of 620 (page 2 of 2)"));
    assert!(second.contains(&format!(
        "href=\"/lots/{}?page=1#tests-heading\" rel=\"prev\"",
        f.lot
    )));
    assert!(!second.contains("rel=\"next\""));
    assert_eq!(stats_n(&second), "620");

    // Past the last page, or not a page: refused, naming the field.
    for bad in ["3", "0", "two"] {
        let (s, body) = page(&app, &format!("/lots/{}?page={bad}", f.lot)).await;
        assert!((400..500).contains(&s), "page={bad}: {s} {body}");
        assert!(body.contains("page"), "page={bad}: {body}");
    }

    // The API lists the first 1000 lines unless asked, and counts every test.
    let (s, whole) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(s, 200);
    assert_eq!(whole["tests"].as_array().unwrap().len(), TESTS);
    assert_eq!(whole["tests_entered"], TESTS);
    let (s, part) = app
        .get(&format!("/api/v1/lots/{}?offset=600&limit=50", f.lot))
        .await;
    assert_eq!(s, 200, "{part}");
    let lines = part["tests"].as_array().unwrap();
    assert_eq!(lines.len(), 20);
    assert_eq!(lines[0]["test"]["number"], "P0601");
    assert_eq!(part["tests_offset"], 600);
    assert_eq!(part["tests_limit"], 50);
    assert_eq!(part["verdict"]["n"], TESTS);
    assert_eq!(part["verdict"], whole["verdict"]);
    let (s, refused) = app.get(&format!("/api/v1/lots/{}?limit=0", f.lot)).await;
    assert!((400..500).contains(&s), "{s} {refused}");
    assert_eq!(refused["error"]["field"], "limit");
    app.stop().await;
}

#[tokio::test]
async fn a_small_lot_sheet_shows_no_pager() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (s, html) = page(&app, &format!("/lots/{}", f.lot)).await;
    assert_eq!(s, 200);
    assert!(!html.contains("id=\"test-pager\""));
    app.stop().await;
}
