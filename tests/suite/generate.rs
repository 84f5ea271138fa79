//! `liftledger generate`: the real binary builds an invented project in a fresh database
//! (SQLite, or PostgreSQL with LIFTLEDGER_TEST_DB=postgres), its counts are read back from
//! the database, and it refuses a bad count or a project code the database already holds.

use crate::helpers::fresh_location;
use liftledger::db;

/// Runs the real binary; (success, stdout, stderr).
fn run(args: &[&str]) -> (bool, String, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args(args)
        .env_remove("LIFTLEDGER_DB")
        .env("RUST_LOG", "warn")
        .output()
        .expect("run liftledger");
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stdout).to_string(),
        String::from_utf8_lossy(&out.stderr).to_string(),
    )
}

/// The value of `key=` in the command's closing line.
fn figure(stdout: &str, key: &str) -> i64 {
    stdout
        .split_whitespace()
        .find_map(|w| w.strip_prefix(&format!("{key}=")))
        .unwrap_or_else(|| panic!("{key}= missing from: {stdout}"))
        .parse()
        .expect("a number")
}

async fn scalar(pool: &sqlx::AnyPool, sql: &str, project_id: i64) -> i64 {
    sqlx::query_scalar(sqlx::AssertSqlSafe(sql.to_string()))
        .bind(project_id)
        .fetch_one(pool)
        .await
        .expect(sql)
}

#[tokio::test]
async fn generate_builds_a_project_whose_counts_the_database_holds() {
    let dir = tempfile::tempdir().unwrap();
    let location = fresh_location(&dir.path().join("gen.sqlite")).await;
    let (ok, out, err) = run(&[
        "generate",
        "--db",
        &location.url,
        "--tests",
        "2000",
        "--code",
        "gen",
    ]);
    assert!(ok, "generate failed:\n{out}\n{err}");
    assert!(
        err.contains("of 2,000 tests ("),
        "progress line missing: {err}"
    );
    assert!(err.contains("tests/s"), "{err}");

    let pool = db::connect(&location).await.unwrap();
    let project = db::projects::get_by_code(&pool, "GEN")
        .await
        .unwrap()
        .expect("project GEN");
    assert_eq!(figure(&out, "project_id"), project.id);
    assert!(out.contains("project_code=GEN"), "{out}");
    let tests = figure(&out, "tests");
    assert!(
        (1_800..=2_300).contains(&tests),
        "about 2,000 tests asked for, {tests} made"
    );
    let raw = crate::raw_sql::raw_of(&pool).await;
    let count = |sql| scalar(&raw, sql, project.id);
    assert_eq!(
        count("SELECT COUNT(*) FROM field_tests WHERE project_id = $1").await,
        tests
    );
    // The lots' stored summaries, once settled, count every test.
    liftledger::ledger::lot_summaries::settle(&pool, project.id)
        .await
        .unwrap();
    assert_eq!(
        count("SELECT CAST(SUM(tests_entered) AS BIGINT) FROM lot_summaries WHERE project_id = $1")
            .await,
        tests
    );
    assert_eq!(
        count("SELECT COUNT(*) FROM lots WHERE project_id = $1").await,
        figure(&out, "lots")
    );
    assert_eq!(
        count("SELECT COUNT(*) FROM field_tests WHERE project_id = $1 AND retest_of IS NOT NULL")
            .await,
        figure(&out, "retests")
    );
    assert_eq!(
        count("SELECT COUNT(*) FROM field_tests WHERE project_id = $1 AND void_reason IS NOT NULL")
            .await,
        figure(&out, "voids")
    );
    let accepted = figure(&out, "accepted_lots");
    assert!(accepted > 0, "{out}");
    assert_eq!(
        count("SELECT COUNT(*) FROM lots WHERE project_id = $1 AND state = 'accepted'").await,
        accepted
    );
    pool.close().await;

    // The same code again is refused, and nothing is added.
    let (ok, out2, err2) = run(&[
        "generate",
        "--db",
        &location.url,
        "--tests",
        "2000",
        "--code",
        "GEN",
    ]);
    assert!(!ok, "a second GEN was accepted: {out2}");
    assert!(
        err2.contains("already holds a project with code GEN"),
        "{err2}"
    );
    assert!(!err2.contains("panicked"), "{err2}");
    let pool = db::connect(&location).await.unwrap();
    assert_eq!(db::projects::list(&pool).await.unwrap().len(), 1);
    pool.close().await;
}

#[test]
fn generate_refuses_a_count_of_zero_or_beyond_reason() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("never.sqlite");
    for n in ["0", "99", "5000001", "100000000000"] {
        let (ok, _, err) = run(&["generate", "--db", file.to_str().unwrap(), "--tests", n]);
        assert!(!ok, "--tests {n} was accepted");
        assert!(
            err.contains("--tests must be between 100 and 5,000,000"),
            "--tests {n}: {err}"
        );
        assert!(!err.contains("panicked"), "{err}");
    }
    assert!(!file.exists(), "a refused count opened the database");
    let (ok, _, err) = run(&["generate", "--db", file.to_str().unwrap(), "--tests", "-5"]);
    assert!(!ok && !err.contains("panicked"), "{err}");
}
