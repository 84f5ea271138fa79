//! Bulk import and export: CSV dialects, dry runs that name every bad row, one-transaction
//! commits, re-uploads that create nothing, conflicts that block, exports that read back,
//! hostile files that cannot crash the reader, and an import killed mid-commit.

use std::io::Write;
use std::path::Path;

use liftledger::db;
use liftledger::ledger::Actor;
use liftledger::ledger::import::{AuditMode, ImportOptions, ImportReport, RowSource};
use liftledger::reduction::{ChainageStyle, UnitSystem};
use liftledger::transfer::csv_import::CsvFieldTests;
use liftledger::transfer::export::{self, ExportKind, FilterText};
use liftledger::transfer::mapping::{ImportMapping, LabPointMapping, LabTarget, Separator, Target};
use liftledger::transfer::{self, import_csv};
use proptest::prelude::*;
use serde_json::{Value, json};

use crate::helpers::{Frame, TestApp, build_frame, spawn_app};

/// The SQL of the saved-mappings table (the migration adds it; tests make sure it exists).
const IMPORT_MAPPINGS_SQL: &str = "CREATE TABLE IF NOT EXISTS import_mappings (
    id            INTEGER PRIMARY KEY,
    project_id    INTEGER NOT NULL REFERENCES projects(id),
    name          TEXT NOT NULL,
    mapping_json  TEXT NOT NULL,
    created_at    TEXT NOT NULL,
    created_by    TEXT NOT NULL,
    UNIQUE (project_id, name)
)";

const HEADER: [&str; 12] = [
    "Test No",
    "Taken",
    "Technician",
    "Lot",
    "Chainage",
    "Offset",
    "Method",
    "Wet density",
    "Moisture density",
    "Retest of",
    "Easting",
    "Northing",
];

pub(crate) fn mapping() -> ImportMapping {
    ImportMapping::new([
        ("Test No", Target::Number),
        ("Taken", Target::TestedAt),
        ("Technician", Target::Technician),
        ("Lot", Target::Lot),
        ("Chainage", Target::Chainage),
        ("Offset", Target::OffsetM),
        ("Method", Target::Method),
        ("Wet density", Target::WetDensity),
        ("Moisture density", Target::MoistureDensity),
        ("Retest of", Target::RetestOf),
        ("Easting", Target::Easting),
        ("Northing", Target::Northing),
    ])
}

/// The mapping without the columns a short file leaves out (retest, coordinates).
fn short_mapping() -> ImportMapping {
    let mut m = mapping();
    for c in ["Retest of", "Easting", "Northing"] {
        m.columns.remove(c);
    }
    m
}

fn opts(commit: bool) -> ImportOptions {
    ImportOptions {
        commit,
        audit: AuditMode::PerImport,
        actor: Actor::system("T. Importer"),
    }
}

/// A nuclear row giving dry density `dry` and water content `w` (the frame's lot, 1000–1100 m).
pub(crate) fn row(number: &str, chainage: &str, dry: f64, w: f64) -> Vec<String> {
    vec![
        number.to_string(),
        "2026-11-20T09:00:00Z".to_string(),
        "A. Tester".to_string(),
        "LOT-1".to_string(),
        chainage.to_string(),
        "1.5".to_string(),
        "nuclear".to_string(),
        format!("{:.1}", dry * (1.0 + w / 100.0)),
        format!("{:.1}", dry * w / 100.0),
        String::new(),
        String::new(),
        String::new(),
    ]
}

/// Writes rows as CSV with a separator (quoting what needs it).
pub(crate) fn csv_bytes(sep: u8, bom: bool, rows: &[Vec<String>]) -> Vec<u8> {
    let mut out = Vec::new();
    if bom {
        out.extend_from_slice(b"\xEF\xBB\xBF");
    }
    let mut w = csv::WriterBuilder::new().delimiter(sep).from_writer(out);
    w.write_record(HEADER).unwrap();
    for r in rows {
        w.write_record(r).unwrap();
    }
    w.into_inner().unwrap()
}

async fn run(
    app: &TestApp,
    f: &Frame,
    bytes: &[u8],
    m: &ImportMapping,
    commit: bool,
) -> ImportReport {
    import_csv(&app.pool, f.project, bytes, "test.csv", m, &opts(commit))
        .await
        .expect("import runs")
}

async fn tests_count(app: &TestApp) -> i64 {
    app.count("field_tests").await
}

#[tokio::test]
async fn comma_semicolon_and_tab_files_with_bom_and_quotes_import() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let m = short_mapping();

    // Comma, with a byte-order mark, quotes around separators, doubled quotes and a line break.
    let comma = "\u{FEFF}Test No,Taken,Technician,Lot,Chainage,Offset,Method,Wet density,Moisture density\n\
        C-1,2026-11-20T09:00:00Z,\"O'Neil, \"\"Jr.\"\"\",LOT-1,1+010.000,1.5,nuclear,2109,209\n\
        C-2,2026-11-20,\"Ng, A.\",LOT-1,1+020.500,-2,Nuclear,2109.0,209.0\n\
        C-3,2026-11-20T10:30,\"two\nlines\",LOT-1,1030,0,NUCLEAR,2109,209\n";
    // Semicolon, decimal commas.
    let semi = "Test No;Taken;Technician;Lot;Chainage;Offset;Method;Wet density;Moisture density\r\n\
        S-1;2026-11-21T09:00:00Z;\"Smith; J.\";LOT-1;1+040,250;1,5;nuclear;2109,0;209,0\r\n\
        S-2;2026-11-21T09:10:00Z;Smith J.;LOT-1;1050,5;-1,25;nuclear;2109;209\r\n";
    // Tab.
    let tab = "Test No\tTaken\tTechnician\tLot\tChainage\tOffset\tMethod\tWet density\tMoisture density\n\
        T-1\t2026-11-22T09:00:00Z\t\"Tab, Person\"\tLOT-1\t1+060.000\t0\tnuclear\t2109\t209\n";
    let mut us = m.clone();
    us.units = UnitSystem::Us;
    us.chainage = ChainageStyle::FeetStation;
    // 3346.46 ft is about 1020 m; 2109 kg/m³ = 131.66 lb/ft³ (÷ 16.018463); 209 kg/m³ = 13.05 lb/ft³.
    let feet = "Test No,Taken,Technician,Lot,Chainage,Offset,Method,Wet density,Moisture density\n\
        U-1,2026-11-23T09:00:00Z,US Tech,LOT-1,33+46.46,0,nuclear,131.66,13.05\n";

    for (text, mapping, expect) in [(comma, &m, 3), (semi, &m, 2), (tab, &m, 1), (feet, &us, 1)] {
        let dry = run(&app, &f, text.as_bytes(), mapping, false).await;
        assert!(!dry.refused(), "{text}: {:?}", dry.problems);
        assert_eq!(dry.new_tests, expect, "{text}: {dry:?}");
        let done = run(&app, &f, text.as_bytes(), mapping, true).await;
        assert!(done.committed, "{:?}", done.problems);
        assert_eq!(done.new_tests, expect);
        assert_eq!(done.origin.bytes, text.len() as u64);
        assert_eq!(done.origin.sha256.len(), 64);
    }
    assert_eq!(tests_count(&app).await, 7);
    let t: (String, f64, f64) = sqlx::query_as(
        "SELECT technician, chainage_m, offset_m FROM field_tests WHERE number = 'C-1'",
    )
    .fetch_one(&app.sql)
    .await
    .unwrap();
    assert_eq!(t, ("O'Neil, \"Jr.\"".to_string(), 1010.0, 1.5));
    let (tech, tested_at): (String, String) =
        sqlx::query_as("SELECT technician, tested_at FROM field_tests WHERE number = 'C-3'")
            .fetch_one(&app.sql)
            .await
            .unwrap();
    assert_eq!(tech, "two\nlines");
    assert_eq!(tested_at, "2026-11-20T10:30:00Z");
    let (ch, off): (f64, f64) =
        sqlx::query_as("SELECT chainage_m, offset_m FROM field_tests WHERE number = 'S-1'")
            .fetch_one(&app.sql)
            .await
            .unwrap();
    assert_eq!((ch, off), (1040.25, 1.5));
    let (ch, wet, dry): (f64, f64, f64) = sqlx::query_as(
        "SELECT chainage_m, wet_density_kg_m3, dry_density_kg_m3 FROM field_tests WHERE number = 'U-1'",
    )
    .fetch_one(&app.sql)
    .await
    .unwrap();
    // 33+46.46 = 3346.46 ft × 0.3048 m/ft = 1020.001008 m (international foot).
    assert!((ch - 1020.001008).abs() < 1e-6, "{ch}");
    assert!((wet - 2109.0).abs() < 0.1, "{wet}");
    assert!((dry - 1900.0).abs() < 0.2, "{dry}");
    // One audit row per import, naming the file's digest.
    let audits: Vec<String> = sqlx::query_scalar(
        "SELECT after_json FROM audit_log WHERE entity = 'field_test_import' ORDER BY id",
    )
    .fetch_all(&app.sql)
    .await
    .unwrap();
    assert_eq!(audits.len(), 4);
    let first: Value = serde_json::from_str(&audits[0]).unwrap();
    assert_eq!(first["rows"], 3);
    assert_eq!(first["created"], 3);
    assert_eq!(first["file_name"], "test.csv");
    assert_eq!(first["sha256"].as_str().unwrap().len(), 64);
}

#[tokio::test]
async fn separators_can_be_named_instead_of_guessed() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let mut m = short_mapping();
    m.separator = Separator::Semicolon;
    // The header holds more commas than semicolons; the named separator wins.
    let text = "Test No;Taken;Technician;Lot;Chainage;Offset;Method;Wet density;Moisture density\n\
        N-1;2026-11-21T09:00:00Z;Smith, J., Jr., III;LOT-1;1040;1,5;nuclear;2109;209\n";
    let r = run(&app, &f, text.as_bytes(), &m, true).await;
    assert!(r.committed, "{:?}", r.problems);
    assert_eq!(r.new_tests, 1);
}

pub(crate) fn big_rows(n: usize) -> Vec<Vec<String>> {
    (0..n)
        .map(|i| {
            row(
                &format!("B-{i:06}"),
                &format!("{:.3}", 1000.5 + (i % 990) as f64 / 10.0),
                1880.0 + (i % 40) as f64,
                10.5 + (i % 10) as f64 / 10.0,
            )
        })
        .collect()
}

fn write_file(dir: &Path, name: &str, bytes: &[u8]) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_large_file_is_checked_row_by_row_then_committed_at_once() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let m = mapping();
    let dir = tempfile::tempdir().unwrap();
    let n = 100_000;
    let good = big_rows(n);
    let mut bad = good.clone();
    // (row index, column index, bad value); file line = index + 2 (line 1 is the header).
    let faults: [(usize, usize, &str, &str); 5] = [
        (10, 7, "12x", "not a number"),
        (20_000, 4, "2+500.000", "outside lot LOT-1"),
        (50_000, 8, "3000", "not less than wet density"),
        (70_000, 3, "LOT-9", "does not exist"),
        (99_999, 1, "yesterday", "not a date-time"),
    ];
    for (i, c, v, _) in faults {
        bad[i][c] = v.to_string();
    }
    let before = app.all_counts().await;

    // Dry run of the faulty file: every bad row named, nothing written.
    let path = write_file(dir.path(), "bad.csv", &csv_bytes(b',', true, &bad));
    let file = std::io::BufReader::new(std::fs::File::open(&path).unwrap());
    let report = import_csv(&app.pool, f.project, file, "bad.csv", &m, &opts(false))
        .await
        .unwrap();
    assert_eq!(report.rows, n as u64);
    assert_eq!(report.rows_with_problems, 5, "{:?}", report.problems);
    assert_eq!(report.new_tests, (n - 5) as u64);
    assert_eq!(report.problems.len(), 5);
    for ((i, c, v, why), p) in faults.iter().zip(&report.problems) {
        assert_eq!(p.row, *i as u64 + 2, "{p:?}");
        assert_eq!(p.column, HEADER[*c], "{p:?}");
        assert_eq!(p.value, *v, "{p:?}");
        assert!(p.reason.contains(why), "{p:?} should say {why}");
    }
    assert!(!report.committed);
    assert_eq!(app.all_counts().await, before, "a dry run writes nothing");

    // A commit of the faulty file is refused whole.
    let file = std::io::BufReader::new(std::fs::File::open(&path).unwrap());
    let refused = import_csv(&app.pool, f.project, file, "bad.csv", &m, &opts(true))
        .await
        .unwrap();
    assert!(refused.refused() && !refused.committed);
    assert_eq!(
        app.all_counts().await,
        before,
        "a refused commit writes nothing"
    );

    // Fixed, it commits every row in one go.
    let path = write_file(dir.path(), "good.csv", &csv_bytes(b',', true, &good));
    let file = std::io::BufReader::new(std::fs::File::open(&path).unwrap());
    let started = std::time::Instant::now();
    let done = import_csv(&app.pool, f.project, file, "good.csv", &m, &opts(true))
        .await
        .unwrap();
    println!(
        "debug build: {n} rows committed in {:.2} s",
        started.elapsed().as_secs_f64()
    );
    assert!(done.committed, "{:?}", done.problems.first());
    assert_eq!(done.new_tests, n as u64);
    let (a, b) = done.created_ids.unwrap();
    assert_eq!(b - a + 1, n as i64);
    assert_eq!(tests_count(&app).await, n as i64);
    let audit_after = app.count("audit_log").await;
    assert_eq!(
        audit_after,
        before.iter().find(|(t, _)| t == "audit_log").unwrap().1 + 1
    );
    let per_lot: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM field_tests WHERE lot_id = $1")
        .bind(f.lot)
        .fetch_one(&app.sql)
        .await
        .unwrap();
    assert_eq!(per_lot, n as i64);

    // The same file again creates nothing.
    let counts = app.all_counts().await;
    let file = std::io::BufReader::new(std::fs::File::open(&path).unwrap());
    let again = import_csv(&app.pool, f.project, file, "good.csv", &m, &opts(true))
        .await
        .unwrap();
    assert!(again.committed && again.created_ids.is_none());
    assert_eq!(again.new_tests, 0);
    assert_eq!(again.skipped_identical, n as u64);
    assert_eq!(app.all_counts().await, counts);

    // One row changed: a conflict, reported, and nothing is written.
    let mut changed = good.clone();
    changed[500][7] = "2150.0".to_string();
    changed.push(row("B-NEW", "1050", 1900.0, 11.0));
    let file = csv_bytes(b',', false, &changed);
    let conflict = run(&app, &f, &file, &m, true).await;
    assert!(!conflict.committed);
    assert_eq!(conflict.conflicts, 1);
    assert_eq!(conflict.new_tests, 1);
    let p = &conflict.problems[0];
    assert_eq!((p.row, p.column.as_str()), (502, "Test No"));
    assert!(
        p.reason.contains("B-000500") && p.reason.contains("readings"),
        "{p:?}"
    );
    assert_eq!(app.all_counts().await, counts);
}

#[tokio::test]
async fn repeated_rows_retests_and_their_rules() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let m = mapping();
    let mut rows = vec![
        row("R-1", "1010", 1800.0, 11.0), // RC about 92 %: fails
        row("R-2", "1020", 1900.0, 11.0), // passes
        row("R-2", "1020", 1900.0, 11.0), // the same again: skipped
    ];
    let mut retest = row("R-1A", "", 1905.0, 11.0);
    retest[3] = String::new(); // lot taken from the failed test
    retest[5] = String::new(); // spot too
    retest[9] = "R-1".into();
    rows.push(retest);
    let report = run(&app, &f, &csv_bytes(b',', false, &rows), &m, true).await;
    assert!(report.committed, "{:?}", report.problems);
    assert_eq!(
        (
            report.new_tests,
            report.new_retests,
            report.skipped_repeated
        ),
        (3, 1, 1)
    );
    let (ch, off, retest_of): (f64, f64, Option<i64>) = sqlx::query_as(
        "SELECT chainage_m, offset_m, retest_of FROM field_tests WHERE number = 'R-1A'",
    )
    .fetch_one(&app.sql)
    .await
    .unwrap();
    let failed_id: i64 = sqlx::query_scalar("SELECT id FROM field_tests WHERE number = 'R-1'")
        .fetch_one(&app.sql)
        .await
        .unwrap();
    assert_eq!((ch, off, retest_of), (1010.0, 1.5, Some(failed_id)));

    // The single-entry retest rules, row by row.
    let mut second = row("R-1B", "1010", 1905.0, 11.0);
    second[9] = "R-1".into();
    let mut of_pass = row("R-2A", "1020", 1905.0, 11.0);
    of_pass[9] = "R-2".into();
    let mut of_nothing = row("R-9A", "1020", 1905.0, 11.0);
    of_nothing[9] = "R-9".into();
    let mut differs = row("R-2", "1020", 1910.0, 11.0);
    differs[2] = "Someone Else".into();
    let rows = vec![second, of_pass, of_nothing, differs];
    let report = run(&app, &f, &csv_bytes(b',', false, &rows), &m, false).await;
    let reasons: Vec<(u64, &str, &str)> = report
        .problems
        .iter()
        .map(|p| (p.row, p.column.as_str(), p.reason.as_str()))
        .collect();
    assert_eq!(reasons.len(), 4, "{reasons:?}");
    assert_eq!(reasons[0].1, "Retest of");
    assert!(
        reasons[0].2.contains("already has retest R-1A"),
        "{reasons:?}"
    );
    assert!(reasons[1].2.contains("passed"), "{reasons:?}");
    assert!(
        reasons[2]
            .2
            .contains("neither stored nor on an earlier row"),
        "{reasons:?}"
    );
    assert_eq!(reasons[3].1, "Test No");
    assert!(
        reasons[3].2.contains("technician") && reasons[3].2.contains("readings"),
        "{reasons:?}"
    );
}

#[tokio::test]
async fn problems_beyond_the_cap_are_counted() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let mut rows = big_rows(10_500);
    for r in &mut rows {
        r[7] = "dense".into();
    }
    let report = run(&app, &f, &csv_bytes(b',', false, &rows), &mapping(), false).await;
    assert_eq!(report.rows_with_problems, 10_500);
    assert_eq!(report.problems.len(), 10_000);
    assert_eq!(report.problems_not_listed, 500);
}

#[tokio::test]
async fn header_and_mapping_problems_stop_before_any_row() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let mut m = mapping();
    m.columns.insert("Depth (mm)".into(), Target::DepthMm);
    let report = run(&app, &f, &csv_bytes(b',', false, &big_rows(3)), &m, false).await;
    assert_eq!(report.rows, 1);
    assert_eq!(report.new_tests, 0);
    assert_eq!(report.problems[0].row, 1);
    assert_eq!(report.problems[0].column, "Depth (mm)");
    assert!(report.problems[0].reason.contains("no such column"));
    let empty = run(&app, &f, b"", &mapping(), false).await;
    assert!(empty.problems[0].reason.contains("empty"));
}

#[tokio::test]
async fn mappings_are_saved_per_project_by_name() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    sqlx::query(IMPORT_MAPPINGS_SQL)
        .execute(&app.sql)
        .await
        .unwrap();
    let actor = Actor::system("T. Quality");
    let m = mapping();
    let id = transfer::save_mapping(&app.pool, f.project, "gauge export", &m, &actor)
        .await
        .unwrap();
    assert_eq!(
        transfer::load_mapping(&app.pool, f.project, "gauge export")
            .await
            .unwrap(),
        m
    );
    let mut m2 = m.clone();
    m2.units = UnitSystem::Us;
    let id2 = transfer::save_mapping(&app.pool, f.project, "gauge export", &m2, &actor)
        .await
        .unwrap();
    assert_eq!(id, id2, "saving under the same name replaces");
    assert_eq!(
        transfer::load_mapping(&app.pool, f.project, "gauge export")
            .await
            .unwrap()
            .units,
        UnitSystem::Us
    );
    assert_eq!(
        db::bulk::list_mappings(&app.pool, f.project)
            .await
            .unwrap()
            .len(),
        1
    );
    let e = transfer::load_mapping(&app.pool, f.project, "nothing")
        .await
        .unwrap_err();
    assert_eq!(e.field(), "name");
    let bad = ImportMapping::new([("A", Target::Number)]);
    let e = transfer::save_mapping(&app.pool, f.project, "x", &bad, &actor)
        .await
        .unwrap_err();
    assert_eq!(e.field(), "mapping");
}

#[tokio::test]
async fn lab_points_import_into_a_lab_test() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let m = LabPointMapping {
        columns: [
            ("w (%)".to_string(), LabTarget::WaterContentPct),
            ("Dry density".to_string(), LabTarget::DryDensity),
        ]
        .into_iter()
        .collect(),
        units: UnitSystem::Si,
        separator: Separator::Auto,
    };
    let input = || {
        serde_json::from_value(json!({"code": "L2", "tested_on": "2026-11-05",
            "effort": "astm_d1557_4in", "points": []}))
        .unwrap()
    };
    let text = "\u{FEFF}w (%);Dry density\n7,8;1868\n9,7;1927\n11,4;1958\n13,2;1932\n15,1;1872\n";
    let lab = transfer::import_lab_points_csv(
        &app.pool,
        f.source,
        input(),
        text.as_bytes(),
        "points.csv",
        &m,
        &Actor::system("T. Quality"),
    )
    .await
    .unwrap()
    .expect("imports");
    assert!((lab.max_dry_density_kg_m3 - 1958.0).abs() < 10.0, "{lab:?}");
    // A point above saturation or unreadable is named by row and column.
    let text = "w (%);Dry density\n7.8;1868\n9.7;x\n";
    let problems = transfer::import_lab_points_csv(
        &app.pool,
        f.source,
        input(),
        text.as_bytes(),
        "points.csv",
        &m,
        &Actor::system("T. Quality"),
    )
    .await
    .unwrap()
    .unwrap_err();
    assert_eq!(problems[0].row, 3);
    assert_eq!(problems[0].column, "Dry density");
    assert_eq!(problems[0].value, "x");
    let text = "w (%);Dry density\n7.8;1868\n9.7;1927\n11.4;1958\n13.2;2900\n15.1;1872\n";
    let problems = transfer::import_lab_points_csv(
        &app.pool,
        f.source,
        input(),
        text.as_bytes(),
        "points.csv",
        &m,
        &Actor::system("T. Quality"),
    )
    .await
    .unwrap()
    .unwrap_err();
    assert!(!problems.is_empty(), "an impossible curve is refused");
}

/// A small project with a failure and its retest, a void and coordinates on some tests.
async fn exported_project(app: &TestApp) -> Frame {
    let f = build_frame(app, json!({"rule": "every_test"})).await;
    let mut rows = vec![
        row("X-1", "1010", 1800.0, 11.0),
        row("X-2", "1020", 1900.0, 11.0),
        row("X-3", "1030", 1910.0, 11.2),
        row("X-4", "1040", 1895.0, 10.8),
    ];
    rows[1][10] = "512345.250".into();
    rows[1][11] = "6204321.750".into();
    rows[2][10] = "512350.000".into();
    rows[2][11] = "6204330.000".into();
    let mut retest = row("X-1A", "1010", 1905.0, 11.0);
    retest[9] = "X-1".into();
    rows.push(retest);
    let r = run(app, &f, &csv_bytes(b',', false, &rows), &mapping(), true).await;
    assert!(r.committed, "{:?}", r.problems);
    let id: i64 = sqlx::query_scalar("SELECT id FROM field_tests WHERE number = 'X-4'")
        .fetch_one(&app.sql)
        .await
        .unwrap();
    liftledger::ledger::field::void_test(
        &app.pool,
        id,
        "gauge not standardised",
        &Actor::system("T. Quality"),
    )
    .await
    .unwrap();
    f
}

async fn export_bytes(app: &TestApp, f: &Frame, kind: ExportKind, filters: &FilterText) -> Vec<u8> {
    let mut out = Vec::new();
    export::export(&app.pool, f.project, kind, filters, &mut out)
        .await
        .unwrap();
    out
}

#[tokio::test]
async fn exports_read_back_as_csv_json_and_geojson() {
    let app = spawn_app().await;
    let f = exported_project(&app).await;
    let all = FilterText::default();

    let bytes = export_bytes(&app, &f, ExportKind::TestsCsv, &all).await;
    assert!(bytes.starts_with(b"\xEF\xBB\xBF"));
    let mut r = csv::Reader::from_reader(&bytes[3..]);
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    assert_eq!(header, export::TEST_COLUMNS);
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 5);
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let by_number = |n: &str| rows.iter().find(|r| &r[0] == n).unwrap();
    assert_eq!(&by_number("X-1")[col("result")], "superseded");
    assert_eq!(&by_number("X-1A")[col("retest_of")], "X-1");
    assert_eq!(&by_number("X-4")[col("result")], "void");
    assert_eq!(
        &by_number("X-4")[col("void_reason")],
        "gauge not standardised"
    );
    assert_eq!(&by_number("X-2")[col("chainage")], "1+020.000");
    // RC = 1900 / MDD × 100, MDD from the frame's lab curve.
    let rc: f64 = by_number("X-2")[col("relative_compaction_pct")]
        .parse()
        .unwrap();
    let mdd: f64 = by_number("X-2")[col("reference_mdd_kg_m3")]
        .parse()
        .unwrap();
    assert!((rc - 1900.0 / mdd * 100.0).abs() < 0.01, "{rc} {mdd}");

    let json: Value =
        serde_json::from_slice(&export_bytes(&app, &f, ExportKind::TestsJson, &all).await).unwrap();
    let arr = json.as_array().unwrap();
    assert_eq!(arr.len(), 5);
    let x2 = arr.iter().find(|t| t["number"] == "X-2").unwrap();
    assert_eq!(x2["readings"]["method"], "nuclear");
    assert_eq!(x2["result"], "pass");
    assert_eq!(x2["lot"], "LOT-1");

    let geo: Value =
        serde_json::from_slice(&export_bytes(&app, &f, ExportKind::TestsGeojson, &all).await)
            .unwrap();
    assert_eq!(geo["type"], "FeatureCollection");
    let feats = geo["features"].as_array().unwrap();
    assert_eq!(feats.len(), 2, "only tests with coordinates");
    let x2 = feats
        .iter()
        .find(|f| f["properties"]["number"] == "X-2")
        .unwrap();
    assert_eq!(x2["geometry"]["type"], "Point");
    assert_eq!(
        x2["geometry"]["coordinates"],
        json!([512345.25, 6204321.75])
    );
    assert_eq!(x2["properties"]["lot"], "LOT-1");
    assert_eq!(x2["properties"]["result"], "pass");

    // Filters: a verdict and a chainage range.
    let fails = FilterText {
        verdict: "superseded".into(),
        ..Default::default()
    };
    let json: Value =
        serde_json::from_slice(&export_bytes(&app, &f, ExportKind::TestsJson, &fails).await)
            .unwrap();
    assert_eq!(json.as_array().unwrap().len(), 1);
    let range = FilterText {
        from: "1+015".into(),
        to: "1+035".into(),
        ..Default::default()
    };
    let bytes = export_bytes(&app, &f, ExportKind::TestsCsv, &range).await;
    let n = csv::Reader::from_reader(&bytes[3..]).records().count();
    assert_eq!(n, 2);
    let bad = FilterText {
        from: "twelve".into(),
        ..Default::default()
    };
    let e = export::export(&app.pool, f.project, ExportKind::TestsCsv, &bad, Vec::new())
        .await
        .unwrap_err();
    assert_eq!(e.field(), "from");

    // Lot verdicts.
    let bytes = export_bytes(&app, &f, ExportKind::LotsCsv, &all).await;
    let mut r = csv::Reader::from_reader(&bytes[3..]);
    let lots: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    assert_eq!(lots.len(), 1);
    assert_eq!(&lots[0][0], "LOT-1");
    let lots: Value =
        serde_json::from_slice(&export_bytes(&app, &f, ExportKind::LotsJson, &all).await).unwrap();
    assert_eq!(lots[0]["lot"], "LOT-1");
    assert_eq!(
        lots[0]["verdict"]["n"], 3,
        "the voided X-4 and the superseded X-1 are out"
    );
}

/// Drains a reader over arbitrary bytes; it must never panic and always end.
fn drain(bytes: &[u8]) -> usize {
    let mut rows = CsvFieldTests::new(bytes, "hostile.csv", &mapping());
    let mut n = 0;
    while let Some(r) = rows.next_row() {
        n += 1;
        if let Err(problems) = r {
            for p in problems {
                assert!(p.value.chars().count() <= 201);
            }
        }
        assert!(n < 100_000, "the reader must end");
    }
    let origin = rows.origin();
    assert_eq!(origin.bytes, bytes.len() as u64);
    n
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn random_bytes_never_crash_the_reader(bytes in proptest::collection::vec(any::<u8>(), 0..4096)) {
        drain(&bytes);
    }

    #[test]
    fn random_text_after_a_good_header_never_crashes(body in "[ -~\\t\\n\"';,é\u{0}]{0,2000}") {
        let text = format!("{}\n{body}", HEADER.join(","));
        drain(text.as_bytes());
    }
}

#[tokio::test]
async fn hostile_files_are_reported_not_crashed_on() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let header = HEADER.join(",");
    let huge = "9".repeat(2_000_000);
    let cases: Vec<Vec<u8>> = vec![
        b"\xEF\xBB\xBF".to_vec(),
        format!("{header}\nH-1,2026-11-20,A,LOT-1,1010,0,nuclear,{huge},200\n").into_bytes(),
        [
            header.as_bytes(),
            b"\nH-2,2026-11-20,\xFF\xFE,LOT-1,1010,0,nuclear,2100,200\n",
        ]
        .concat(),
        format!("{header}\nH-3,2026-11-20,\"never closed,LOT-1,1010\n").into_bytes(),
        format!("{header}\nH-4,2026-11-20,A,LOT-1,1010,0,nuclear,NaN,inf\n").into_bytes(),
        format!("{header}\nH-5,2026-11-20,A,LOT-1,1010,0,nuclear,1e308,-0\n").into_bytes(),
        format!("{header}\n{}\n", ",".repeat(50_000)).into_bytes(),
        vec![0u8; 10_000],
        format!("{header}\nH-6\u{0},2026-11-20,A\u{7},LOT-1,1010,0,nuclear,2100,200\n")
            .into_bytes(),
    ];
    for bytes in &cases {
        drain(bytes);
        let r = run(&app, &f, bytes, &mapping(), true).await;
        assert!(!r.committed || r.new_tests == 0, "{:?}", r.problems);
    }
    assert_eq!(tests_count(&app).await, 0);
    let r = run(&app, &f, &cases[2], &mapping(), false).await;
    assert!(
        r.problems
            .iter()
            .any(|p| p.column == "Technician" && p.reason.contains("UTF-8")),
        "{:?}",
        r.problems
    );
    let r = run(&app, &f, &cases[1], &mapping(), false).await;
    assert!(
        r.problems
            .iter()
            .any(|p| p.column == "Wet density" && p.reason.contains("longer than")),
        "{:?}",
        r.problems
    );
}

/// What the fault test compares before and after: rows of the earlier import, in order.
async fn digest_of(pool: &db::Pool, prefix: &str) -> (i64, String) {
    let rows: Vec<(i64, String, f64, String)> = sqlx::query_as(
        "SELECT id, number, dry_density_kg_m3, readings_json FROM field_tests WHERE number LIKE $1 ORDER BY id",
    )
    .bind(format!("{prefix}%"))
    .fetch_all(&crate::raw_sql::raw_of(pool).await)
    .await
    .unwrap();
    let mut h = sha2::Sha256::new();
    use sha2::Digest;
    for r in &rows {
        h.update(format!("{r:?}"));
    }
    (rows.len() as i64, hex::encode(h.finalize()))
}

/// Runs an import in a child process, kills it with SIGKILL mid-commit and checks the
/// database: the import wholly there or wholly absent, integrity ok, earlier data intact.
async fn killed_mid_commit(child: impl FnOnce(&Path, &Path, &Path) -> std::process::Command) {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let m = mapping();
    let earlier: Vec<Vec<String>> = (0..1000)
        .map(|i| row(&format!("E-{i:04}"), "1050", 1900.0, 11.0))
        .collect();
    let r = run(&app, &f, &csv_bytes(b',', false, &earlier), &m, true).await;
    assert!(r.committed);
    let before = digest_of(&app.pool, "E-").await;
    let total_before = tests_count(&app).await;
    let (dir, location) = app.stop().await;
    // SIGKILL of a process writing an SQLite file is what this proves; PostgreSQL's
    // atomic commit is exercised by the shared-server tests.
    let Some(db_path) = location.sqlite_path() else {
        return;
    };

    let n = 300_000;
    let file = write_file(dir.path(), "big.csv", &csv_bytes(b',', false, &big_rows(n)));
    let map_path = write_file(
        dir.path(),
        "mapping.json",
        serde_json::to_string(&m).unwrap().as_bytes(),
    );
    let mut cmd = child(&db_path, &map_path, &file);
    let mut proc = cmd
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .expect("child starts");
    // Wait until the commit is well under way (the write-ahead log grows), then kill.
    let wal = db_path.with_extension("sqlite-wal");
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(120);
    let killed_at = loop {
        let size = std::fs::metadata(&wal).map(|m| m.len()).unwrap_or(0);
        if size > 4 * 1024 * 1024 {
            break size;
        }
        if let Ok(Some(status)) = proc.try_wait() {
            panic!("the child ended before it could be killed: {status}");
        }
        assert!(
            std::time::Instant::now() < deadline,
            "the child never wrote"
        );
        std::thread::sleep(std::time::Duration::from_millis(5));
    };
    proc.kill().expect("SIGKILL");
    let status = proc.wait().unwrap();
    assert!(!status.success(), "killed, not finished");
    println!("killed the import with {killed_at} bytes in the write-ahead log");

    let pool = db::open(&db_path).await.expect("reopens");
    let check: String = sqlx::query_scalar("PRAGMA integrity_check")
        .fetch_one(&crate::raw_sql::raw_of(&pool).await)
        .await
        .unwrap();
    assert_eq!(check, "ok");
    let total: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM field_tests")
        .fetch_one(&crate::raw_sql::raw_of(&pool).await)
        .await
        .unwrap();
    assert!(
        total == total_before || total == total_before + n as i64,
        "all or nothing: {total} rows"
    );
    assert_eq!(digest_of(&pool, "E-").await, before, "earlier data intact");
    pool.close().await;
}

/// The child side of the fault test: imports the file named in the environment (in-process).
#[tokio::test]
#[ignore = "run by killed_import_is_all_or_nothing as a child process"]
async fn fault_child_import() {
    let Ok(db_path) = std::env::var("LIFTLEDGER_FAULT_DB") else {
        return;
    };
    let file = std::env::var("LIFTLEDGER_FAULT_CSV").unwrap();
    let map = std::env::var("LIFTLEDGER_FAULT_MAPPING").unwrap();
    transfer::run_cli_import(
        &liftledger::db::Location::sqlite(Path::new(&db_path)),
        "TST",
        Path::new(&map),
        "si",
        "km_metre",
        Path::new(&file),
        true,
    )
    .await
    .unwrap();
}

#[tokio::test]
async fn killed_import_is_all_or_nothing() {
    killed_mid_commit(|db, map, csv| {
        let mut c = std::process::Command::new(std::env::current_exe().unwrap());
        c.args([
            "transfer::fault_child_import",
            "--exact",
            "--ignored",
            "--test-threads=1",
        ])
        .env("LIFTLEDGER_FAULT_DB", db)
        .env("LIFTLEDGER_FAULT_MAPPING", map)
        .env("LIFTLEDGER_FAULT_CSV", csv);
        c
    })
    .await;
}

#[tokio::test]
async fn killed_cli_import_is_all_or_nothing() {
    killed_mid_commit(|db, map, csv| {
        let mut c = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"));
        c.arg("import")
            .arg("--db")
            .arg(db)
            .args(["--project", "TST", "--mapping"])
            .arg(map)
            .args(["--units", "si", "--chainage", "km_metre"])
            .arg(csv)
            .arg("--commit");
        c
    })
    .await;
}

#[test]
fn the_written_file_is_what_was_hashed() {
    let bytes = csv_bytes(b'\t', true, &big_rows(3));
    let mut rows = CsvFieldTests::new(&bytes[..], "t.csv", &mapping());
    while rows.next_row().is_some() {}
    use sha2::Digest;
    assert_eq!(
        rows.origin().sha256,
        hex::encode(sha2::Sha256::digest(&bytes))
    );
    let mut sink = Vec::new();
    sink.write_all(&bytes).unwrap();
    assert_eq!(sink.len() as u64, rows.origin().bytes);
}

#[tokio::test]
async fn the_import_and_export_routes_check_commit_and_download_over_http() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (s, saved) = app
        .post(
            &format!("/api/v1/projects/{}/import-mappings", f.project),
            &json!({"name": "gauge export", "mapping": serde_json::to_value(mapping()).unwrap()}),
        )
        .await;
    assert_eq!(s, 201, "{saved}");
    let mut rows: Vec<Vec<String>> = (0..200)
        .map(|i| row(&format!("H-{i:03}"), "1050", 1900.0, 11.0))
        .collect();
    rows[57][4] = "9+999.000".into();
    let send = |body: Vec<u8>, commit: bool| {
        let url = app.url(&format!(
            "/api/v1/projects/{}/imports?mapping=gauge%20export&commit={commit}&file_name=site.csv",
            f.project
        ));
        let client = app.client.clone();
        async move {
            let r = client.post(url).body(body).send().await.unwrap();
            (
                r.status().as_u16(),
                r.json::<serde_json::Value>().await.unwrap(),
            )
        }
    };
    let before = tests_count(&app).await;
    let (s, report) = send(csv_bytes(b',', true, &rows), true).await;
    assert_eq!(s, 422, "a bad row refuses the commit: {report}");
    let problem = &report["report"]["problems"][0];
    assert_eq!(problem["row"], 58 + 1, "{problem}");
    assert!(
        problem["reason"].as_str().unwrap().contains("outside lot"),
        "{problem}"
    );
    assert_eq!(tests_count(&app).await, before, "nothing written");
    rows[57][4] = "1060".into();
    let (s, report) = send(csv_bytes(b',', true, &rows), false).await;
    assert_eq!(s, 200, "{report}");
    assert_eq!(report["report"]["new_tests"], 200);
    assert_eq!(tests_count(&app).await, before, "a dry run writes nothing");
    let (s, report) = send(csv_bytes(b';', true, &rows), true).await;
    assert_eq!(s, 201, "{report}");
    assert_eq!(tests_count(&app).await, before + 200);
    let (s, again) = send(csv_bytes(b',', false, &rows), true).await;
    assert_eq!(
        again["report"]["new_tests"], 0,
        "re-uploading creates nothing ({s})"
    );
    // Technicians may not import.
    let r = app
        .client_as(crate::helpers::As::Tech)
        .post(app.url(&format!(
            "/api/v1/projects/{}/imports?mapping=gauge%20export",
            f.project
        )))
        .body(csv_bytes(b',', false, &rows))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 403);

    let r = app
        .client
        .get(app.url(&format!(
            "/api/v1/projects/{}/exports/tests_csv?verdict=pass",
            f.project
        )))
        .send()
        .await
        .unwrap();
    assert!(
        r.headers()["content-type"]
            .to_str()
            .unwrap()
            .starts_with("text/csv")
    );
    let bytes = r.bytes().await.unwrap();
    assert_eq!(&bytes[..3], b"\xEF\xBB\xBF");
    let n = csv::Reader::from_reader(&bytes[3..]).records().count();
    assert_eq!(n, 200);
    let (s, lots) = app
        .get(&format!("/api/v1/projects/{}/exports/lots_json", f.project))
        .await;
    assert_eq!(s, 200, "{lots}");
    let (s, _) = app
        .get(&format!(
            "/api/v1/projects/{}/exports/spreadsheet",
            f.project
        ))
        .await;
    assert_eq!(s, 404);
}

#[tokio::test]
async fn single_entry_after_an_import_gets_fresh_ids() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let rows: Vec<Vec<String>> = (0..300)
        .map(|i| row(&format!("A-{i:03}"), "1050", 1900.0, 11.0))
        .collect();
    let r = run(&app, &f, &csv_bytes(b',', false, &rows), &mapping(), true).await;
    let (_, last) = r.created_ids.expect("created");
    // Ids the import gave explicitly are not handed out again (an identity column on
    // PostgreSQL must have been moved past them).
    let (s, body) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &crate::helpers::nuclear_test("AFTER-1", 1060.0, 1900.0, 11.0),
        )
        .await;
    assert_eq!(s, 201, "{body}");
    assert!(body["id"].as_i64().unwrap() > last, "{body}");
    // And a second import numbers on after the single test.
    let more: Vec<Vec<String>> = (0..10)
        .map(|i| row(&format!("B-{i:03}"), "1050", 1900.0, 11.0))
        .collect();
    let r2 = run(&app, &f, &csv_bytes(b',', false, &more), &mapping(), true).await;
    let (first, _) = r2.created_ids.expect("created");
    assert!(first > body["id"].as_i64().unwrap());
    assert_eq!(tests_count(&app).await, 311);
}
