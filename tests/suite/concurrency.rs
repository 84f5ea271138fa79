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
        .fetch_one(&app.sql)
        .await
        .unwrap();
    assert_eq!(distinct, 160);
    let audit: i64 =
        sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE entity = 'field_test'")
            .fetch_one(&app.sql)
            .await
            .unwrap();
    assert_eq!(audit, 160);
}

/// Writers that arrive together may share a commit; a test refused among them (its
/// number taken by another at the same moment, or its lot submitted meanwhile) is
/// refused alone, with nothing of it written, and every other test lands with its audit row.
#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_refused_test_among_simultaneous_ones_is_refused_alone() {
    let app = std::sync::Arc::new(spawn_app().await);
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let mut tasks = Vec::new();
    // 24 writers; every third pair asks for the same number at the same moment.
    for w in 0..24u32 {
        let app = app.clone();
        tasks.push(tokio::spawn(async move {
            let number = if w % 3 == 0 {
                format!("DUP-{}", w / 6)
            } else {
                format!("U-{w}")
            };
            let body = nuclear_test(&number, 1000.0 + f64::from(w), 1900.0, 11.0);
            let (s, b) = app
                .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &body)
                .await;
            (number, s, b)
        }));
    }
    let mut created = std::collections::BTreeMap::<String, usize>::new();
    let mut refused = 0;
    for t in tasks {
        let (number, s, b) = t.await.unwrap();
        match s {
            201 => *created.entry(number).or_default() += 1,
            409 => {
                assert_eq!(b["error"]["field"], "number", "{b}");
                assert!(number.starts_with("DUP-"), "{number} refused: {b}");
                refused += 1;
            }
            other => panic!("{number}: {other} {b}"),
        }
    }
    // Numbers DUP-0..DUP-3 were each asked for twice: one of each pair lands.
    assert_eq!(refused, 4);
    assert!(created.values().all(|n| *n == 1), "{created:?}");
    assert_eq!(created.len(), 20);
    assert_eq!(app.count("field_tests").await, 20);
    let audit: i64 =
        sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE entity = 'field_test'")
            .fetch_one(&app.sql)
            .await
            .unwrap();
    assert_eq!(
        audit, 20,
        "one audit row per stored test, none for a refused one"
    );
}
