//! An import audited per test writes each test's audit row as single entry writes it:
//! the stored record as it landed, at its creation time, beside the import's own row.

use liftledger::db;
use liftledger::ledger::Actor;
use liftledger::ledger::import::{AuditMode, ImportOptions};
use liftledger::transfer::import_csv;
use serde_json::{Value, json};

use crate::helpers::{build_frame, spawn_app};
use crate::transfer::{csv_bytes, mapping, row};

#[tokio::test]
async fn a_per_test_audited_import_writes_each_tests_own_row() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    // More rows than one multi-row audit statement holds (128).
    let rows: Vec<Vec<String>> = (0..150)
        .map(|i| {
            row(
                &format!("P-{i:04}"),
                &format!("{}", 1001 + i % 90),
                1900.0,
                11.0,
            )
        })
        .collect();
    let audit_before = app.count("audit_log").await;
    let opts = ImportOptions {
        commit: true,
        audit: AuditMode::PerTest,
        actor: Actor::system("T. Importer"),
    };
    let bytes = csv_bytes(b',', false, &rows);
    let done = import_csv(
        &app.pool,
        f.project,
        &bytes[..],
        "audited.csv",
        &mapping(),
        &opts,
    )
    .await
    .expect("import runs");
    assert!(done.committed, "{:?}", done.problems.first());
    let (first, last) = done.created_ids.unwrap();
    assert_eq!(last - first + 1, 150);
    assert_eq!(app.count("audit_log").await, audit_before + 151);
    for id in first..=last {
        let test = db::field_tests::get(&app.pool, id).await.unwrap().unwrap();
        let rows = db::audit::for_entity(&app.pool, "field_test", id)
            .await
            .unwrap();
        assert_eq!(rows.len(), 1, "test {id}");
        let a = &rows[0];
        assert_eq!(
            (a.action.as_str(), a.actor.as_str(), a.project_id),
            ("create", "T. Importer", Some(f.project))
        );
        assert_eq!(a.at, test.created_at);
        assert!(a.before_json.is_none());
        let after: Value = serde_json::from_str(a.after_json.as_deref().unwrap()).unwrap();
        assert_eq!(after, serde_json::to_value(&test).unwrap(), "test {id}");
    }
}
