//! Sixteen writers at once all succeed, and every write is there afterwards.

use serde_json::json;

use crate::helpers::{build_frame, nuclear_test, spawn_app};

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn sixteen_concurrent_writers_all_succeed() {
    let app = std::sync::Arc::new(spawn_app().await);
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let mut tasks = Vec::new();
    for w in 0..16 {
        let app = app.clone();
        tasks.push(tokio::spawn(async move {
            let mut statuses = Vec::new();
            for i in 0..10 {
                // Half give a number, half let the server number them.
                let mut body = nuclear_test(
                    &format!("W{w}-{i}"),
                    1000.0 + f64::from(w * 6 + i % 6),
                    1900.0,
                    11.0,
                );
                if w % 2 == 0 {
                    body.as_object_mut().unwrap().remove("number");
                }
                let (s, b) = app
                    .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &body)
                    .await;
                statuses.push((s, b));
            }
            statuses
        }));
    }
    let mut ok = 0;
    for t in tasks {
        for (s, b) in t.await.unwrap() {
            assert_eq!(s, 201, "{b}");
            ok += 1;
        }
    }
    assert_eq!(ok, 160);
    assert_eq!(app.count("field_tests").await, 160);
    let distinct: i64 = sqlx::query_scalar("SELECT COUNT(DISTINCT number) FROM field_tests")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(distinct, 160);
    let audit: i64 =
        sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE entity = 'field_test'")
            .fetch_one(&app.pool)
            .await
            .unwrap();
    assert_eq!(audit, 160);
}
