//! The `Idempotency-Key` header of the field-test POST (the site app's offline queue):
//! each key stores one test, in the test's own transaction; a repeat answers that test.

use serde_json::{Value, json};

use crate::helpers::{As, TestApp, build_frame, nuclear_test, spawn_app};

/// POSTs `body` to `path` with a key as the technician; (status, replayed header, body).
async fn post_keyed_to(app: &TestApp, path: &str, key: &str, body: &Value) -> (u16, String, Value) {
    let r = app
        .client_as(As::Tech)
        .post(app.url(path))
        .header("Idempotency-Key", key)
        .json(body)
        .send()
        .await
        .expect("POST");
    let status = r.status().as_u16();
    let replayed = r
        .headers()
        .get("idempotent-replayed")
        .map(|v| v.to_str().unwrap_or("").to_string())
        .unwrap_or_default();
    (status, replayed, r.json().await.unwrap_or(Value::Null))
}

/// POSTs a field test to a lot with a key; (status, replayed header, body).
async fn post_keyed(app: &TestApp, lot: i64, key: &str, body: &Value) -> (u16, String, Value) {
    post_keyed_to(app, &format!("/api/v1/lots/{lot}/field-tests"), key, body).await
}

async fn count(app: &TestApp, sql: &str) -> i64 {
    sqlx::query_scalar::<_, i64>(sqlx::AssertSqlSafe(sql.to_string()))
        .fetch_one(&app.sql)
        .await
        .expect("count")
}

async fn tests_in_lot(app: &TestApp, lot: i64) -> i64 {
    count(
        app,
        &format!("SELECT COUNT(*) FROM field_tests WHERE lot_id = {lot}"),
    )
    .await
}

#[tokio::test]
async fn a_repeated_key_answers_the_stored_test_and_stores_nothing_more() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    // No number: the server numbers it when it arrives, once.
    let mut body = nuclear_test("x", 1020.0, 1950.0, 10.0);
    body.as_object_mut().unwrap().remove("number");

    let (s1, r1, first) = post_keyed(&app, f.lot, "a1b2c3d4-0001", &body).await;
    assert_eq!((s1, r1.as_str()), (201, "false"), "{first}");
    let number = first["number"].as_str().unwrap().to_string();
    assert!(!number.is_empty(), "the server gives the number: {first}");
    for _ in 0..3 {
        let (s, r, again) = post_keyed(&app, f.lot, "a1b2c3d4-0001", &body).await;
        assert_eq!((s, r.as_str()), (200, "true"), "{again}");
        assert_eq!(again["id"], first["id"]);
        assert_eq!(again["number"], first["number"]);
        assert_eq!(again["dry_density_kg_m3"], first["dry_density_kg_m3"]);
    }
    assert_eq!(tests_in_lot(&app, f.lot).await, 1);
    assert_eq!(
        count(
            &app,
            "SELECT COUNT(*) FROM audit_log WHERE entity = 'field_test' AND action = 'create'"
        )
        .await,
        1,
        "one audit row for one test"
    );
    assert_eq!(
        count(&app, "SELECT COUNT(*) FROM idempotency_keys").await,
        1
    );

    // A new key is a new test.
    let (s, _, second) = post_keyed(&app, f.lot, "a1b2c3d4-0002", &body).await;
    assert_eq!(s, 201, "{second}");
    assert_ne!(second["number"].as_str().unwrap(), number);
    assert_eq!(tests_in_lot(&app, f.lot).await, 2);
}

#[tokio::test]
async fn a_key_reused_for_another_test_or_malformed_is_refused_naming_the_header() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (s, _, _) = post_keyed(
        &app,
        f.lot,
        "k-1",
        &nuclear_test("T-1", 1020.0, 1950.0, 10.0),
    )
    .await;
    assert_eq!(s, 201);
    let (s, _, e) = post_keyed(
        &app,
        f.lot,
        "k-1",
        &nuclear_test("T-2", 1030.0, 1900.0, 9.0),
    )
    .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "Idempotency-Key");
    let long = "k".repeat(256);
    for bad in ["", " ", long.as_str(), "two words"] {
        let r = app
            .client_as(As::Tech)
            .post(app.url(&format!("/api/v1/lots/{}/field-tests", f.lot)))
            .header("Idempotency-Key", bad)
            .json(&nuclear_test("T-3", 1040.0, 1950.0, 10.0))
            .send()
            .await
            .expect("POST");
        assert_eq!(r.status().as_u16(), 422, "key {bad:?}");
        let e: Value = r.json().await.unwrap();
        assert_eq!(e["error"]["field"], "Idempotency-Key", "key {bad:?}");
    }
    assert_eq!(
        tests_in_lot(&app, f.lot).await,
        1,
        "nothing more was written"
    );
}

#[tokio::test]
async fn a_refused_test_keeps_no_key_so_its_fixed_retry_is_judged_anew() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    // Chainage 2000 m lies outside LOT-1 (1000–1100 m).
    let (s, _, e) = post_keyed(
        &app,
        f.lot,
        "fix-me",
        &nuclear_test("T-9", 2000.0, 1950.0, 10.0),
    )
    .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "chainage_m");
    assert_eq!(
        count(&app, "SELECT COUNT(*) FROM idempotency_keys").await,
        0
    );
    let (s, _, t) = post_keyed(
        &app,
        f.lot,
        "fix-me",
        &nuclear_test("T-9", 1050.0, 1950.0, 10.0),
    )
    .await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(tests_in_lot(&app, f.lot).await, 1);
}

#[tokio::test]
async fn parallel_sends_of_one_key_store_one_test() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let mut body = nuclear_test("x", 1060.0, 1950.0, 10.0);
    body.as_object_mut().unwrap().remove("number");
    let mut tasks = tokio::task::JoinSet::new();
    for _ in 0..8 {
        let client = app.client_as(As::Tech).clone();
        let url = app.url(&format!("/api/v1/lots/{}/field-tests", f.lot));
        let body = body.clone();
        tasks.spawn(async move {
            let r = client
                .post(url)
                .header("Idempotency-Key", "same-key-in-parallel")
                .json(&body)
                .send()
                .await
                .expect("POST");
            let s = r.status().as_u16();
            (
                s,
                String::new(),
                r.json::<Value>().await.unwrap_or(Value::Null),
            )
        });
    }
    let answers = tasks.join_all().await;
    let created = answers.iter().filter(|(s, _, _)| *s == 201).count();
    assert_eq!(created, 1, "{answers:?}");
    for (s, _, v) in &answers {
        assert!(*s == 200 || *s == 201, "{v}");
        assert_eq!(v["id"], answers[0].2["id"]);
    }
    assert_eq!(tests_in_lot(&app, f.lot).await, 1);
}

/// POSTs a retest of `failed` with a key; (status, replayed header, body).
async fn post_retest_keyed(
    app: &TestApp,
    failed: i64,
    key: &str,
    body: &Value,
) -> (u16, String, Value) {
    post_keyed_to(
        app,
        &format!("/api/v1/field-tests/{failed}/retests"),
        key,
        body,
    )
    .await
}

#[tokio::test]
async fn a_retest_kept_on_the_phone_is_stored_once_and_judged_when_it_arrives() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (_, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    let mdd = lab["max_dry_density_kg_m3"].as_f64().unwrap();
    let omc = lab["optimum_water_content_pct"].as_f64().unwrap();
    // 90 % of MDD fails the every-test rule (the frame's clause asks for 95 %).
    let (s, _, failed) = post_keyed(
        &app,
        f.lot,
        "first-0001",
        &nuclear_test("R-1", 1040.0, 0.90 * mdd, omc),
    )
    .await;
    assert_eq!(s, 201, "{failed}");
    assert_eq!(failed["passed"], false);
    let failed_id = failed["id"].as_i64().unwrap();

    // The retest at the failed test's spot (no chainage: it takes the failed test's).
    let mut body = nuclear_test("R-1R", 0.0, 0.98 * mdd, omc);
    body.as_object_mut().unwrap().remove("chainage_m");
    let (s, r1, retest) = post_retest_keyed(&app, failed_id, "retest-0001", &body).await;
    assert_eq!((s, r1.as_str()), (201, "false"), "{retest}");
    assert_eq!(retest["retest_of"], failed_id);
    assert_eq!(retest["chainage_m"], 1040.0, "the failed test's spot");
    // Sent again (the answer was lost on the way back): the stored retest, nothing more.
    for _ in 0..2 {
        let (s, r, again) = post_retest_keyed(&app, failed_id, "retest-0001", &body).await;
        assert_eq!((s, r.as_str()), (200, "true"), "{again}");
        assert_eq!(again["id"], retest["id"]);
    }
    assert_eq!(tests_in_lot(&app, f.lot).await, 2);
    assert_eq!(
        count(
            &app,
            "SELECT COUNT(*) FROM audit_log WHERE entity = 'field_test' AND action = 'retest'"
        )
        .await,
        1
    );
    // The same key for a new test of the lot is another request: refused naming the header.
    let (s, _, e) = post_keyed(&app, f.lot, "retest-0001", &body).await;
    assert_eq!(
        (s, e["error"]["field"].as_str()),
        (422, Some("Idempotency-Key")),
        "{e}"
    );
    // A second retest of the same failure, under a new key, is refused as it is without a
    // key (judged on arrival), and uses up no key.
    let keys = count(&app, "SELECT COUNT(*) FROM idempotency_keys").await;
    let (s, _, e) = post_retest_keyed(&app, failed_id, "retest-0002", &body).await;
    assert_eq!(s, 409, "{e}");
    assert_eq!(
        count(&app, "SELECT COUNT(*) FROM idempotency_keys").await,
        keys
    );
    assert_eq!(tests_in_lot(&app, f.lot).await, 2);
}
