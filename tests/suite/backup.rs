//! Backups while serving, restoring them, scheduled backups, and the handover archive.
//!
//! The backup and restore run on the engine the suite runs on (a backup is always one
//! SQLite file); the command-line cases run the real binary, whose refusals must leave
//! every file and database as they were.

use std::collections::{BTreeMap, BTreeSet};
use std::io::{BufRead, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use liftledger::db;
use serde_json::{Value, json};

use crate::helpers::{
    As, build_frame, client_with, engine, fresh_location, nuclear_test, pdf_pages,
    signed_in_session, spawn_app, spawn_demo,
};

/// Field-test numbers of a database, straight from its table.
async fn numbers(pool: &db::Pool) -> BTreeSet<String> {
    sqlx::query_scalar::<_, String>("SELECT number FROM field_tests")
        .fetch_all(&crate::raw_sql::raw_of(pool).await)
        .await
        .expect("numbers")
        .into_iter()
        .collect()
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_backup_taken_under_sixteen_writers_restores_every_acknowledged_test() {
    let app = Arc::new(spawn_app().await);
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let acknowledged: Arc<Mutex<Vec<String>>> = Arc::default();
    let refused: Arc<Mutex<Vec<String>>> = Arc::default();
    let stop = Arc::new(AtomicBool::new(false));
    let mut writers = Vec::new();
    for w in 0..16 {
        let (app, acknowledged, refused, stop) = (
            app.clone(),
            acknowledged.clone(),
            refused.clone(),
            stop.clone(),
        );
        writers.push(tokio::spawn(async move {
            let mut i = 0;
            while !stop.load(Ordering::Relaxed) {
                let number = format!("W{w}-{i}");
                let body =
                    nuclear_test(&number, 1000.0 + f64::from((w * 7 + i) % 100), 1900.0, 11.0);
                let (s, b) = app
                    .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &body)
                    .await;
                if s == 201 {
                    acknowledged.lock().unwrap().push(number);
                } else {
                    refused.lock().unwrap().push(format!("{number}: {s} {b}"));
                }
                i += 1;
            }
        }));
    }
    while acknowledged.lock().unwrap().len() < 64 {
        tokio::time::sleep(Duration::from_millis(20)).await;
    }
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("while-writing.sqlite");
    let before: BTreeSet<String> = acknowledged.lock().unwrap().iter().cloned().collect();
    let started = Instant::now();
    let report = liftledger::backup::take(&app.location, &file, &mut |_| {})
        .await
        .expect("backup while writing");
    let took = started.elapsed();
    let during = acknowledged.lock().unwrap().len() - before.len();
    tokio::time::sleep(Duration::from_millis(200)).await;
    stop.store(true, Ordering::Relaxed);
    for w in writers {
        w.await.unwrap();
    }
    println!(
        "backup under 16 writers ({:?}): {:.1} ms, {} bytes, {} tests acknowledged before, {} during",
        engine(),
        took.as_secs_f64() * 1e3,
        report.bytes,
        before.len(),
        during
    );
    assert!(
        refused.lock().unwrap().is_empty(),
        "{:?}",
        refused.lock().unwrap()
    );
    let all: BTreeSet<String> = acknowledged.lock().unwrap().iter().cloned().collect();
    assert!(
        all.len() > before.len(),
        "the writers kept writing after the backup"
    );

    // The file on its own: SQLite's integrity check, read here without the code under test.
    let copy = db::connect_unmigrated(&db::Location::parse(
        &format!("sqlite://{}?mode=rw", file.display()),
        1,
    ))
    .await
    .unwrap();
    let integrity: String = sqlx::query_scalar("PRAGMA integrity_check")
        .fetch_one(&crate::raw_sql::raw_of(&copy).await)
        .await
        .unwrap();
    assert_eq!(integrity, "ok");
    copy.close().await;

    let target = fresh_location(&dir.path().join("restored.sqlite")).await;
    liftledger::backup::restore::restore(&file, &target, &mut |_| {})
        .await
        .expect("restore");
    let restored = db::connect(&target).await.unwrap();
    let got = numbers(&restored).await;
    let missing: Vec<_> = before.difference(&got).collect();
    assert!(
        missing.is_empty(),
        "acknowledged before the backup but not restored: {missing:?}"
    );
    let unknown: Vec<_> = got
        .iter()
        .filter(|n| n.starts_with('W') && !all.contains(*n))
        .collect();
    assert!(
        unknown.is_empty(),
        "restored tests never acknowledged: {unknown:?}"
    );
    let audit: i64 = sqlx::query_scalar(
        "SELECT COUNT(*) FROM audit_log WHERE entity = 'field_test' AND action = 'create'",
    )
    .fetch_one(&crate::raw_sql::raw_of(&restored).await)
    .await
    .unwrap();
    assert_eq!(
        audit as usize,
        got.len(),
        "every restored test has its audit row"
    );
    if engine() == db::Engine::Sqlite {
        let integrity: String = sqlx::query_scalar("PRAGMA integrity_check")
            .fetch_one(&crate::raw_sql::raw_of(&restored).await)
            .await
            .unwrap();
        assert_eq!(integrity, "ok");
    }
    restored.close().await;
}

/// The demo's archive as the client engineer downloads it.
async fn demo_archive(app: &crate::helpers::TestApp) -> Vec<u8> {
    let r = app
        .client_as(As::Engineer)
        .get(app.url("/api/v1/projects/1/archive"))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    assert_eq!(r.headers()["content-type"], "application/zip");
    assert!(
        r.headers()["content-disposition"]
            .to_str()
            .unwrap()
            .contains("MLR-handover-")
    );
    r.bytes().await.unwrap().to_vec()
}

fn member(zip: &[u8], name: &str) -> Vec<u8> {
    let mut z = zip::ZipArchive::new(std::io::Cursor::new(zip)).unwrap();
    let mut f = z
        .by_name(name)
        .unwrap_or_else(|_| panic!("{name} in the archive"));
    let mut out = Vec::new();
    f.read_to_end(&mut out).unwrap();
    out
}

fn json_member(zip: &[u8], name: &str) -> Value {
    serde_json::from_slice(&member(zip, name)).unwrap_or_else(|e| panic!("{name}: {e}"))
}

#[tokio::test]
async fn the_archive_holds_every_certificate_revision_the_records_and_the_audit_log() {
    let app = spawn_demo().await;
    let bytes = demo_archive(&app).await;
    let checked =
        liftledger::archive::verify::verify_bytes(&bytes).expect("a fresh archive verifies");
    let manifest = json_member(&bytes, "manifest.json");
    let files = manifest["files"].as_array().unwrap();
    assert_eq!(checked.files, files.len());
    // Every certificate revision, byte for byte as stored, with the stored hash.
    let certs: Vec<(String, i64, String, Vec<u8>)> = sqlx::query_as(
        "SELECT number, revision, sha256, pdf FROM certificates WHERE project_id = 1",
    )
    .fetch_all(&app.sql)
    .await
    .unwrap();
    assert!(certs.iter().any(|c| c.1 == 2), "the demo has a revision 2");
    let pdfs: Vec<&Value> = files
        .iter()
        .filter(|f| f["path"].as_str().unwrap().starts_with("certificates/"))
        .collect();
    assert_eq!(pdfs.len(), certs.len());
    for (number, revision, sha, pdf) in &certs {
        let path = format!("certificates/{number}-rev{revision}.pdf");
        assert_eq!(&member(&bytes, &path), pdf, "{path}");
        let listed = files.iter().find(|f| f["path"] == path.as_str()).unwrap();
        assert_eq!(listed["sha256"], sha.as_str());
        assert!(!listed["description"].as_str().unwrap().is_empty());
    }
    // The records and the audit log, as many as the database holds.
    let count = |sql: &'static str| {
        let pool = app.pool.clone();
        async move {
            sqlx::query_scalar::<_, i64>(sql)
                .fetch_one(&crate::raw_sql::raw_of(&pool).await)
                .await
                .unwrap() as usize
        }
    };
    let n = |name: &str| json_member(&bytes, name).as_array().unwrap().len();
    assert_eq!(
        n("records/field_tests.json"),
        count("SELECT COUNT(*) FROM field_tests WHERE project_id = 1").await
    );
    assert_eq!(
        n("records/lots.json"),
        count("SELECT COUNT(*) FROM lots WHERE project_id = 1").await
    );
    assert_eq!(
        n("records/clauses.json"),
        count("SELECT COUNT(*) FROM clauses WHERE project_id = 1").await
    );
    assert_eq!(
        n("audit/audit_log.json"),
        count("SELECT COUNT(*) FROM audit_log WHERE project_id = 1").await
    );
    let curves = json_member(&bytes, "records/lab_curves.json");
    assert!(
        curves
            .as_array()
            .unwrap()
            .iter()
            .all(|c| c["points"].as_array().is_some_and(|p| p.len() >= 4))
    );
    // CSV rows: header plus one line per record (no field of the demo holds a line break).
    let csv_lines = String::from_utf8(member(&bytes, "records/field_tests.csv"))
        .unwrap()
        .lines()
        .count();
    assert_eq!(csv_lines - 1, n("records/field_tests.json"));
    let readme = String::from_utf8(member(&bytes, "README.txt")).unwrap();
    assert!(readme.contains("Marrowby Link Road") && readme.contains("sha256sum -c SHA256SUMS"));
    // SHA256SUMS is what `sha256sum -c` reads: hash, two spaces, path.
    let sums = String::from_utf8(member(&bytes, "SHA256SUMS")).unwrap();
    assert_eq!(sums.lines().count(), files.len());
    app.stop().await;
}

#[tokio::test]
async fn only_admins_and_client_engineers_download_the_archive() {
    let app = spawn_demo().await;
    for (who, want) in [
        (As::Engineer, 200),
        (As::Admin, 200),
        (As::Qc, 403),
        (As::Tech, 403),
        (As::Viewer, 403),
    ] {
        let r = app
            .client_as(who)
            .get(app.url("/api/v1/projects/1/archive"))
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), want, "{who:?}");
    }
    let r = app
        .anonymous
        .get(app.url("/api/v1/projects/1/archive"))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 401);
    let r = app
        .client_as(As::Engineer)
        .get(app.url("/api/v1/projects/999/archive"))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 404);
    let body: Value = r.json().await.unwrap();
    assert_eq!(body["error"]["field"], "project_id");
    app.stop().await;
}

/// Runs the real binary; returns (success, stdout + stderr).
fn run(args: &[&str]) -> (bool, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args(args)
        .env_remove("LIFTLEDGER_DB")
        .env("RUST_LOG", "warn")
        .output()
        .expect("run liftledger");
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status.success(), text)
}

/// The same archive with one member's bytes replaced.
fn with_member_replaced(zip: &[u8], name: &str, new: &[u8]) -> Vec<u8> {
    let mut src = zip::ZipArchive::new(std::io::Cursor::new(zip)).unwrap();
    let mut out = zip::ZipWriter::new(std::io::Cursor::new(Vec::new()));
    for i in 0..src.len() {
        let mut f = src.by_index(i).unwrap();
        let fname = f.name().unwrap().to_string();
        let mut data = Vec::new();
        f.read_to_end(&mut data).unwrap();
        out.start_file(fname.as_str(), zip::write::SimpleFileOptions::default())
            .unwrap();
        out.write_all(if fname == name { new } else { &data })
            .unwrap();
    }
    out.finish().unwrap().into_inner()
}

/// The member whose local header or data holds byte `offset` of the zip.
fn member_at(zip: &[u8], offset: u64) -> String {
    let mut z = zip::ZipArchive::new(std::io::Cursor::new(zip)).unwrap();
    let mut spans: Vec<(u64, String)> = (0..z.len())
        .map(|i| {
            let f = z.by_index(i).unwrap();
            (f.header_start(), f.name().unwrap().to_string())
        })
        .collect();
    spans.sort();
    spans
        .iter()
        .rev()
        .find(|(start, _)| *start <= offset)
        .unwrap()
        .1
        .clone()
}

#[tokio::test]
async fn an_altered_or_truncated_archive_fails_verification_naming_the_file() {
    let app = spawn_demo().await;
    let bytes = demo_archive(&app).await;
    app.stop().await;
    let dir = tempfile::tempdir().unwrap();
    let path = |n: &str| dir.path().join(n).display().to_string();

    std::fs::write(path("whole.zip"), &bytes).unwrap();
    let (ok, text) = run(&["archive", "verify", &path("whole.zip")]);
    assert!(ok, "{text}");

    // One test's dry density changed in the CSV, the archive rebuilt around it.
    let csv = String::from_utf8(member(&bytes, "records/field_tests.csv")).unwrap();
    let altered = csv.replacen(",pass,", ",fail,", 1);
    assert_ne!(altered, csv);
    std::fs::write(
        path("altered.zip"),
        with_member_replaced(&bytes, "records/field_tests.csv", altered.as_bytes()),
    )
    .unwrap();
    let (ok, text) = run(&["archive", "verify", &path("altered.zip")]);
    assert!(!ok, "{text}");
    assert!(text.contains("records/field_tests.csv"), "{text}");

    // One byte of a stored certificate flipped in place.
    let target = "certificates/";
    let (name, at) = {
        let mut z = zip::ZipArchive::new(std::io::Cursor::new(&bytes[..])).unwrap();
        let i = (0..z.len())
            .find(|i| z.by_index(*i).unwrap().name().unwrap().starts_with(target))
            .unwrap();
        let f = z.by_index(i).unwrap();
        (
            f.name().unwrap().to_string(),
            f.data_start().unwrap() + f.compressed_size() / 2,
        )
    };
    let mut flipped = bytes.clone();
    flipped[at as usize] ^= 0x20;
    std::fs::write(path("flipped.zip"), &flipped).unwrap();
    let (ok, text) = run(&["archive", "verify", &path("flipped.zip")]);
    assert!(!ok, "{text}");
    assert!(text.contains(&name), "{name} not named: {text}");

    // Cut in half: the member the cut falls in is named.
    let cut = bytes.len() as u64 / 2;
    let expected = member_at(&bytes, cut);
    std::fs::write(path("truncated.zip"), &bytes[..cut as usize]).unwrap();
    let (ok, text) = run(&["archive", "verify", &path("truncated.zip")]);
    assert!(!ok, "{text}");
    assert!(text.contains(&expected), "{expected} not named: {text}");
}

/// Recomputes a lot's verdict from the archive's JSON with the reduction library alone.
fn recompute(
    lot: &Value,
    clause: &Value,
    curve: &Value,
    source: &Value,
    tests: &[&Value],
) -> (bool, usize) {
    use liftledger::reduction::acceptance::{AcceptanceRule, LotTestInput, evaluate_lot};
    use liftledger::reduction::verdict::{
        MoistureWindow, Reference, SpecLimits, judge_test, reference_for_coarse_fraction,
    };
    use liftledger::reduction::{Density, SpecificGravity, WaterContent};
    let f = |v: &Value, k: &str| v[k].as_f64().unwrap_or_else(|| panic!("{k} in {v}"));
    let moisture = match clause["moisture_basis"].as_str().unwrap() {
        "points_of_omc" => MoistureWindow::PointsOfOmc {
            below_pct: f(clause, "moisture_below_pct"),
            above_pct: f(clause, "moisture_above_pct"),
        },
        "percent_of_omc" => MoistureWindow::PercentOfOmc {
            low_pct: f(clause, "moisture_low_pct"),
            high_pct: f(clause, "moisture_high_pct"),
        },
        "absolute" => MoistureWindow::Absolute {
            min_pct: f(clause, "moisture_low_pct"),
            max_pct: f(clause, "moisture_high_pct"),
        },
        other => panic!("moisture basis {other}"),
    };
    let limits = SpecLimits {
        rc_min_pct: f(clause, "rc_min_pct"),
        moisture,
        max_air_voids_pct: clause["max_air_voids_pct"].as_f64(),
        rounding: liftledger::reduction::rounding::Rounding {
            method: match clause["rounding"].as_str() {
                Some("absolute") => liftledger::reduction::rounding::RoundingMethod::Absolute,
                _ => liftledger::reduction::rounding::RoundingMethod::AstmE29,
            },
            decimals: clause["limit_decimals"].as_u64().unwrap_or(1) as u32,
        },
    };
    let rule = match clause["rule"].as_str().unwrap() {
        "every_test" => AcceptanceRule::EveryTest,
        "mean_and_min" => AcceptanceRule::MeanAndMin {
            allowance_pct: f(clause, "allowance_pct"),
        },
        "quality_index" => AcceptanceRule::QualityIndex {
            min_pwl_pct: f(clause, "min_pwl_pct"),
        },
        other => panic!("rule {other}"),
    };
    let reference = Reference {
        max_dry_density: Density::new(f(curve, "max_dry_density_kg_m3")).unwrap(),
        optimum_water_content: WaterContent::new(f(curve, "optimum_water_content_pct")).unwrap(),
        specific_gravity: SpecificGravity::new(f(curve, "specific_gravity")).ok(),
    };
    let id_of: BTreeMap<&str, i64> = tests
        .iter()
        .map(|t| (t["number"].as_str().unwrap(), t["id"].as_i64().unwrap()))
        .collect();
    let inputs: Vec<LotTestInput> = tests
        .iter()
        .map(|t| {
            let r = match t["coarse_pct"].as_f64() {
                // A test whose reference is a one-point check: its record states that reference.
                _ if t["reference_one_point"].is_string() => Some(Reference {
                    max_dry_density: Density::new(f(t, "reference_mdd_kg_m3")).unwrap(),
                    optimum_water_content: WaterContent::new(f(t, "reference_omc_pct")).unwrap(),
                    specific_gravity: reference.specific_gravity,
                }),
                Some(c) if c > 0.0 => reference_for_coarse_fraction(
                    &reference,
                    c,
                    f(source, "gs_coarse"),
                    t["coarse_water_content_pct"].as_f64().unwrap_or(0.0),
                    f(clause, "oversize_limit_pct"),
                )
                .ok(),
                _ => Some(reference),
            };
            let v = r.map(|r| {
                judge_test(
                    Density::new(f(t, "dry_density_kg_m3")).unwrap(),
                    WaterContent::new(f(t, "water_content_pct")).unwrap(),
                    &r,
                    &limits,
                )
            });
            LotTestInput {
                id: t["id"].as_i64().unwrap(),
                label: t["number"].as_str().unwrap().to_string(),
                relative_compaction_pct: v.as_ref().map_or(0.0, |v| v.relative_compaction_pct),
                moisture_measure: v.as_ref().map_or(0.0, |v| v.moisture_measure),
                air_voids_ok: v.as_ref().is_none_or(|v| v.air_voids_ok),
                passed: v.as_ref().is_some_and(|v| v.passed),
                voided: !t["void_reason"].is_null(),
                retest_of: t["retest_of"].as_str().map(|n| id_of[n]),
                tested_at: t["tested_at"].as_str().unwrap_or("").to_string(),
                unjudged: v
                    .is_none()
                    .then(|| "oversize correction refused".to_string()),
                earlier_sample: false,
            }
        })
        .collect();
    let v = evaluate_lot(&inputs, &rule, &limits);
    let _ = lot;
    (v.accepted, v.n)
}

#[tokio::test]
async fn every_lot_verdict_recomputed_from_the_archive_json_matches_its_certificate() {
    let app = spawn_demo().await;
    let bytes = demo_archive(&app).await;
    app.stop().await;
    let by = |name: &str, key: &str| -> BTreeMap<String, Value> {
        json_member(&bytes, name)
            .as_array()
            .unwrap()
            .iter()
            .map(|v| (v[key].to_string(), v.clone()))
            .collect()
    };
    let clauses = by("records/clauses.json", "code");
    let curves = by("records/lab_curves.json", "id");
    let sources = by("records/sources.json", "id");
    let tests = json_member(&bytes, "records/field_tests.json");
    let register = json_member(&bytes, "records/certificates.json");
    let mut certified = 0;
    for lot in json_member(&bytes, "records/lots.json").as_array().unwrap() {
        let lot_tests: Vec<&Value> = tests
            .as_array()
            .unwrap()
            .iter()
            .filter(|t| t["lot"] == lot["lot"])
            .collect();
        let (accepted, n) = recompute(
            lot,
            &clauses[&lot["clause"].to_string()],
            &curves[&lot["lab_test_id"].to_string()],
            &sources[&lot["source_id"].to_string()],
            &lot_tests,
        );
        assert_eq!(lot["verdict"]["accepted"], accepted, "lot {}", lot["lot"]);
        assert_eq!(lot["verdict"]["n"], n, "lot {}", lot["lot"]);
        // The verdict its current certificate states, read back from the PDF in the archive.
        if lot["certificate"]["current"] != true {
            continue;
        }
        let entry = register
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["lot"] == lot["lot"] && c["superseded_at"].is_null())
            .expect("current certificate in the register");
        let pages = pdf_pages(&member(&bytes, entry["file"].as_str().unwrap()));
        let text = pages
            .join(" ")
            .split_whitespace()
            .collect::<Vec<_>>()
            .join(" ");
        let stated = if text.contains("DOES NOT MEET CLAUSE") {
            false
        } else {
            assert!(text.contains("MEETS CLAUSE"), "{text}");
            true
        };
        assert_eq!(
            stated, accepted,
            "lot {} certificate {}",
            lot["lot"], entry["file"]
        );
        certified += 1;
    }
    assert!(certified >= 5, "the demo has certified lots ({certified})");
}

/// A database made for the command-line cases: the demo on the suite's engine.
async fn demo_database(dir: &Path) -> db::Location {
    let location = fresh_location(&dir.join("demo.sqlite")).await;
    let pool = db::connect(&location).await.unwrap();
    liftledger::demo::load(&pool).await.unwrap();
    pool.close().await;
    location
}

fn sha_of(path: &Path) -> String {
    use sha2::Digest;
    hex::encode(sha2::Sha256::digest(std::fs::read(path).unwrap()))
}

#[tokio::test]
async fn the_commands_back_up_restore_and_archive_and_refuse_bad_arguments_writing_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let p = |n: &str| dir.path().join(n);
    let s = |n: &str| p(n).display().to_string();
    let source = demo_database(dir.path()).await;

    let (ok, text) = run(&["backup", "--db", &source.url, "--to", &s("b.sqlite")]);
    assert!(ok, "{text}");
    assert!(text.contains("written and checked"), "{text}");
    let target = fresh_location(&p("restored.sqlite")).await;
    let (ok, text) = run(&["restore", "--from", &s("b.sqlite"), "--db", &target.url]);
    assert!(ok, "{text}");
    let (ok, text) = run(&[
        "archive",
        "--db",
        &target.url,
        "--project",
        "mlr",
        "--to",
        &s("a.zip"),
    ]);
    assert!(ok, "{text}");
    let (ok, text) = run(&["archive", "verify", &s("a.zip")]);
    assert!(ok, "{text}");

    let backup_sha = sha_of(&p("b.sqlite"));
    let refusals: Vec<(Vec<String>, &str, Option<PathBuf>)> = vec![
        (
            vec![
                "backup".into(),
                "--db".into(),
                source.url.clone(),
                "--to".into(),
                s("no-dir/x.sqlite"),
            ],
            "does not exist",
            Some(p("no-dir")),
        ),
        (
            vec![
                "backup".into(),
                "--db".into(),
                source.url.clone(),
                "--to".into(),
                s("b.sqlite"),
            ],
            "already exists",
            None,
        ),
        (
            vec![
                "backup".into(),
                "--db".into(),
                s("missing.sqlite"),
                "--to".into(),
                s("c.sqlite"),
            ],
            "no database file",
            Some(p("missing.sqlite")),
        ),
        (
            vec![
                "restore".into(),
                "--from".into(),
                s("missing.sqlite"),
                "--db".into(),
                s("new.sqlite"),
            ],
            "no backup file",
            Some(p("new.sqlite")),
        ),
        (
            vec![
                "restore".into(),
                "--from".into(),
                s("b.sqlite"),
                "--db".into(),
                target.url.clone(),
            ],
            "restore only into a new database",
            None,
        ),
        (
            vec![
                "restore".into(),
                "--from".into(),
                s("b.sqlite"),
                "--db".into(),
                s("no-dir/r.sqlite"),
            ],
            "does not exist",
            Some(p("no-dir")),
        ),
        (
            vec![
                "archive".into(),
                "--db".into(),
                source.url.clone(),
                "--project".into(),
                "NOPE".into(),
                "--to".into(),
                s("nope.zip"),
            ],
            "no project with code NOPE",
            Some(p("nope.zip")),
        ),
        (
            vec![
                "archive".into(),
                "--db".into(),
                source.url.clone(),
                "--project".into(),
                "MLR".into(),
                "--to".into(),
                s("no-dir/a.zip"),
            ],
            "does not exist",
            Some(p("no-dir")),
        ),
        (
            vec![
                "archive".into(),
                "--db".into(),
                source.url.clone(),
                "--project".into(),
                "MLR".into(),
                "--to".into(),
                s("a.txt"),
            ],
            ".zip",
            Some(p("a.txt")),
        ),
        (
            vec![
                "archive".into(),
                "--db".into(),
                source.url.clone(),
                "--project".into(),
                "MLR".into(),
            ],
            "--to",
            None,
        ),
        (
            vec![
                "serve".into(),
                "--db".into(),
                s("served.sqlite"),
                "--backup-dir".into(),
                s("no-dir"),
            ],
            "does not exist",
            Some(p("served.sqlite")),
        ),
        (
            vec![
                "serve".into(),
                "--db".into(),
                s("served.sqlite"),
                "--backup-dir".into(),
                s(""),
                "--backup-every".into(),
                "6x".into(),
            ],
            "--backup-every",
            Some(p("served.sqlite")),
        ),
        (
            vec![
                "serve".into(),
                "--db".into(),
                s("served.sqlite"),
                "--backup-dir".into(),
                s(""),
                "--backup-keep".into(),
                "0".into(),
            ],
            "--backup-keep",
            Some(p("served.sqlite")),
        ),
    ];
    let source_pool = db::connect(&source).await.unwrap();
    let target_pool = db::connect(&target).await.unwrap();
    let counts = |pool: db::Pool| async move { db::snapshot::table_counts(&pool).await.unwrap() };
    let (source_rows, target_rows) = (
        counts(source_pool.clone()).await,
        counts(target_pool.clone()).await,
    );
    let files_before: BTreeSet<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    for (args, says, absent) in &refusals {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let (ok, text) = run(&args);
        assert!(!ok, "{args:?} succeeded: {text}");
        assert!(text.contains(says), "{args:?} should say '{says}': {text}");
        if let Some(path) = absent {
            assert!(!path.exists(), "{args:?} created {}", path.display());
        }
    }
    let files_after: BTreeSet<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    assert_eq!(
        files_before, files_after,
        "a refused command left a file behind"
    );
    assert_eq!(sha_of(&p("b.sqlite")), backup_sha);
    assert_eq!(counts(source_pool.clone()).await, source_rows);
    assert_eq!(counts(target_pool.clone()).await, target_rows);
    source_pool.close().await;
    target_pool.close().await;
}

/// A `serve` child with scheduled backups; its output lines are collected.
struct Served {
    process: std::process::Child,
    lines: Arc<Mutex<Vec<String>>>,
    base: String,
    metrics: String,
}

impl Served {
    fn start(location: &db::Location, backup_dir: &Path) -> Self {
        let mut process = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
            .args(["serve", "--db", &location.url, "--addr", "127.0.0.1:0"])
            .args(["--metrics-addr", "127.0.0.1:0"])
            .args(["--backup-dir", &backup_dir.display().to_string()])
            .args(["--backup-every", "1s", "--backup-keep", "2"])
            .env("RUST_LOG", "info")
            .env_remove("LIFTLEDGER_DB")
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .expect("start the liftledger binary");
        let lines: Arc<Mutex<Vec<String>>> = Arc::default();
        for out in [
            Box::new(process.stdout.take().unwrap()) as Box<dyn Read + Send>,
            Box::new(process.stderr.take().unwrap()),
        ] {
            let lines = lines.clone();
            std::thread::spawn(move || {
                for line in std::io::BufReader::new(out).lines().map_while(Result::ok) {
                    lines.lock().unwrap().push(line);
                }
            });
        }
        let mut served = Self {
            process,
            lines,
            base: String::new(),
            metrics: String::new(),
        };
        for _ in 0..600 {
            let lines = served.lines();
            let after = |start: &str| {
                lines.iter().find_map(|l| {
                    let rest = l.strip_prefix(start)?;
                    let at = rest.find("http://")?;
                    Some(
                        rest[at + 7..]
                            .trim_end_matches('/')
                            .trim_end_matches("/metrics")
                            .to_string(),
                    )
                })
            };
            if let (Some(base), Some(metrics)) =
                (after("liftledger is serving"), after("metrics at"))
            {
                served.base = format!("http://{base}");
                served.metrics = format!("http://{metrics}/metrics");
                return served;
            }
            if let Ok(Some(status)) = served.process.try_wait() {
                panic!("the server exited ({status}): {lines:#?}");
            }
            std::thread::sleep(Duration::from_millis(100));
        }
        panic!("the server did not start: {:#?}", served.lines());
    }

    fn lines(&self) -> Vec<String> {
        self.lines.lock().unwrap().clone()
    }
}

impl Drop for Served {
    fn drop(&mut self) {
        let _ = self.process.kill();
        let _ = self.process.wait();
    }
}

async fn wait_for(what: &str, mut cond: impl FnMut() -> bool) {
    for _ in 0..100 {
        if cond() {
            return;
        }
        tokio::time::sleep(Duration::from_millis(100)).await;
    }
    panic!("timed out waiting for {what}");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn scheduled_backups_are_checked_pruned_and_a_failure_is_shown_to_admins_only() {
    let dir = tempfile::tempdir().unwrap();
    let backups = dir.path().join("backups");
    std::fs::create_dir(&backups).unwrap();
    // Left by an attempt cut off earlier, and a file of someone else's: only the first goes.
    let stale = backups.join(".liftledger-20260101T000000Z.sqlite.partial");
    let foreign = backups.join("notes.txt");
    std::fs::write(&stale, b"half").unwrap();
    std::fs::write(&foreign, b"keep me").unwrap();
    let location = demo_database(dir.path()).await;
    let (admin, engineer) = {
        let pool = db::connect(&location).await.unwrap();
        let admin = signed_in_session(&pool, As::Admin).await;
        let engineer = signed_in_session(&pool, As::Engineer).await;
        pool.close().await;
        (admin, engineer)
    };
    let served = Served::start(&location, &backups);
    let listed = || liftledger::backup::schedule::backups_in(&backups).unwrap_or_default();
    wait_for("three backups written", || {
        served
            .lines()
            .iter()
            .filter(|l| l.contains("backup written and checked"))
            .count()
            >= 3
    })
    .await;
    let files = listed();
    assert_eq!(files.len(), 2, "keep 2: {files:?}");
    assert!(!stale.exists(), "an unfinished backup is removed");
    assert!(foreign.exists(), "no other file is touched");
    for f in &files {
        let copy = db::connect_unmigrated(&db::Location::parse(
            &format!("sqlite://{}?mode=rw", f.display()),
            1,
        ))
        .await
        .unwrap();
        let integrity: String = sqlx::query_scalar("PRAGMA integrity_check")
            .fetch_one(&crate::raw_sql::raw_of(&copy).await)
            .await
            .unwrap();
        assert_eq!(integrity, "ok", "{}", f.display());
        let tests: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM field_tests")
            .fetch_one(&crate::raw_sql::raw_of(&copy).await)
            .await
            .unwrap();
        assert!(tests > 400, "the demo's tests are in {}", f.display());
        copy.close().await;
    }
    let metrics = reqwest::get(&served.metrics)
        .await
        .unwrap()
        .text()
        .await
        .unwrap();
    assert!(
        metrics
            .lines()
            .any(|l| l.starts_with("liftledger_last_good_backup_timestamp_seconds ")),
        "{metrics}"
    );

    // The directory goes away: backups fail loudly, the service keeps serving.
    std::fs::remove_dir_all(&backups).unwrap();
    wait_for("a failed backup logged", || {
        served.lines().iter().any(|l| l.contains("BACKUP FAILED"))
    })
    .await;
    let as_admin = client_with(&served.base, Some(&admin));
    let home = as_admin
        .get(format!("{}/", served.base))
        .send()
        .await
        .unwrap();
    assert_eq!(home.status(), 200);
    let html = home.text().await.unwrap();
    assert!(html.contains("id=\"backup-failure\""), "{html}");
    assert!(html.contains("The last scheduled backup failed"), "{html}");
    let as_engineer = client_with(&served.base, Some(&engineer));
    let html = as_engineer
        .get(format!("{}/", served.base))
        .send()
        .await
        .unwrap()
        .text()
        .await
        .unwrap();
    assert!(
        !html.contains("backup-failure"),
        "a non-admin sees no backup notice"
    );
    let health = reqwest::get(format!("{}/healthz", served.base))
        .await
        .unwrap();
    assert_eq!(health.status(), 200);
    drop(served);
}
