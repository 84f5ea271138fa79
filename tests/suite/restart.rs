//! A restart keeps every record: stop the server, open the same file, read it all back.

use serde_json::json;

use crate::helpers::{build_frame, nuclear_test, spawn_app, spawn_on};

#[tokio::test]
async fn restart_keeps_every_record() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    for i in 0..5 {
        let (s, _) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &nuclear_test(
                    &format!("R-{i}"),
                    1005.0 + 10.0 * f64::from(i),
                    1900.0,
                    11.0,
                ),
            )
            .await;
        assert_eq!(s, 201);
    }
    let (_, report_before) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    let counts_before = app.all_counts().await;
    let (dir, location) = app.stop().await;

    let app = spawn_on(dir, location).await;
    assert_eq!(app.all_counts().await, counts_before);
    let (s, report_after) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(s, 200);
    assert_eq!(report_after["verdict"], report_before["verdict"]);
    assert_eq!(report_after["tests"], report_before["tests"]);
    // The engine settings below are SQLite's; PostgreSQL is durable by its own configuration.
    if crate::helpers::engine() != liftledger::db::Engine::Sqlite {
        return;
    }
    // Read on one of the server's own connections: the settings it runs with.
    let settings = liftledger::db::health::sqlite_settings(&app.pool)
        .await
        .unwrap()
        .expect("an SQLite pool");
    assert_eq!(settings.journal_mode, "wal");
    assert!(settings.foreign_keys);
    assert_eq!(settings.synchronous, 2, "synchronous=FULL");
}
