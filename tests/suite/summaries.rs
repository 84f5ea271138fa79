//! Stored lot summaries: every kind of change marks its lot, views read the stored rows,
//! `liftledger rejudge` rebuilds them, and concurrent writers and views leave them equal
//! to the record; automatic numbers come from the project's counter. Both engines.

use serde_json::{Value, json};

use crate::helpers::{TestApp, build_frame, nuclear_test, page, spawn_app};

/// (display state, tests entered) of a lot's stored summary.
async fn stored(app: &TestApp, lot: i64) -> (String, i64) {
    sqlx::query_as("SELECT display_state, tests_entered FROM lot_summaries WHERE lot_id = $1")
        .bind(lot)
        .fetch_one(&app.sql)
        .await
        .expect("a stored summary")
}

async fn marks(app: &TestApp) -> i64 {
    app.count("lots_to_judge").await
}

async fn post_test(app: &TestApp, lot: i64, body: &Value) -> Value {
    let (s, t) = app
        .post(&format!("/api/v1/lots/{lot}/field-tests"), body)
        .await;
    assert_eq!(s, 201, "{t}");
    t
}

/// A test body without a number, so the project's counter numbers it.
fn unnumbered(dry: f64) -> Value {
    let mut b = nuclear_test("", 1050.0, dry, 11.0);
    b.as_object_mut().unwrap().remove("number");
    b
}

#[tokio::test]
async fn every_kind_of_change_marks_its_lot_and_views_show_the_stored_summary() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let map = format!("/projects/{}/map", f.project);
    for (i, ch) in [1010.0, 1040.0, 1070.0].iter().enumerate() {
        post_test(
            &app,
            f.lot,
            &nuclear_test(&format!("P{i}"), *ch, 1900.0, 11.0),
        )
        .await;
    }
    assert!(marks(&app).await > 0, "a new test marks its lot");
    let (s, _) = page(&app, &map).await;
    assert_eq!(s, 200);
    assert_eq!(marks(&app).await, 0, "the view settled the marked lot");
    assert_eq!(stored(&app, f.lot).await, ("open".to_string(), 3));

    // A failing test: the lot is shown failing, from its stored summary.
    let failed = post_test(&app, f.lot, &nuclear_test("F1", 1090.0, 1650.0, 11.0)).await;
    let (_, home) = page(&app, &format!("/projects/{}", f.project)).await;
    assert_eq!(stored(&app, f.lot).await, ("failing".to_string(), 4));
    assert!(home.contains("LOT-1"), "the home lists the failing lot");

    // A void marks the lot too.
    let (s, v) = app
        .post(
            &format!("/api/v1/field-tests/{}/void", failed["id"]),
            &json!({"reason": "gauge seated on a stone"}),
        )
        .await;
    assert_eq!(s, 200, "{v}");
    assert!(marks(&app).await > 0, "a void marks its lot");
    page(&app, &map).await;
    assert_eq!(stored(&app, f.lot).await, ("open".to_string(), 4));

    // A write that bypasses the application still marks the lot (the trigger does).
    sqlx::query("UPDATE lots SET state = 'submitted' WHERE id = $1")
        .bind(f.lot)
        .execute(&app.sql)
        .await
        .unwrap();
    assert!(marks(&app).await > 0, "a change of the lot's row marks it");
    let (_, map_html) = page(&app, &map).await;
    assert_eq!(stored(&app, f.lot).await.0, "submitted");
    assert!(map_html.contains(r#"data-state="submitted""#), "{map_html}");

    // An edit of the lot's curve marks every lot judged against it.
    sqlx::query("UPDATE lab_tests SET code = code WHERE id = $1")
        .bind(f.lab_test)
        .execute(&app.sql)
        .await
        .unwrap();
    assert!(
        marks(&app).await > 0,
        "an edit of the lab curve marks its lots"
    );
    app.stop().await;
}

#[tokio::test]
async fn the_map_reads_the_stored_rows_and_rejudge_rebuilds_them() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    for i in 0..2 {
        post_test(
            &app,
            f.lot,
            &nuclear_test(&format!("R{i}"), 1020.0 + 30.0 * f64::from(i), 1900.0, 11.0),
        )
        .await;
    }
    let map = format!("/projects/{}/map", f.project);
    page(&app, &map).await;
    assert_eq!(stored(&app, f.lot).await.1, 2);
    // A summary altered behind the application's back, with no mark: the map shows what
    // is stored (it judges nothing) until the lots are judged again.
    let judged: String =
        sqlx::query_scalar("SELECT judged_json FROM lot_summaries WHERE lot_id = $1")
            .bind(f.lot)
            .fetch_one(&app.sql)
            .await
            .unwrap();
    let altered = judged.replacen("\"tests_entered\":2", "\"tests_entered\":777", 1);
    assert_ne!(altered, judged);
    sqlx::query("UPDATE lot_summaries SET judged_json = $1 WHERE lot_id = $2")
        .bind(&altered)
        .bind(f.lot)
        .execute(&app.sql)
        .await
        .unwrap();
    // The revision moves only when summaries are settled; start a new server to drop the
    // in-memory copy and read the row.
    let (dir, location) = app.stop().await;
    let app = crate::helpers::spawn_on(dir.clone(), location.clone()).await;
    let (_, html) = page(&app, &map).await;
    assert!(html.contains(">777<"), "the map shows the stored row");
    let (dir, location) = app.stop().await;

    let out = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args(["rejudge", "--db", &location.url, "--project", "TST"])
        .env_remove("LIFTLEDGER_DB")
        .env("RUST_LOG", "warn")
        .output()
        .expect("run liftledger");
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "{text}");
    assert!(
        text.contains("judged 1 of 1 lots"),
        "a progress line: {text}"
    );
    assert!(text.contains("judged 1 lots again"), "{text}");
    let app = crate::helpers::spawn_on(dir, location).await;
    let (_, html) = page(&app, &map).await;
    assert!(
        !html.contains(">777<"),
        "rejudge replaced the altered summary"
    );
    assert_eq!(stored(&app, f.lot).await.1, 2);

    // An unknown project is refused by name, changing nothing.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args(["rejudge", "--db", &app.location.url, "--project", "NOPE"])
        .env_remove("LIFTLEDGER_DB")
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("no project has the code NOPE"));
    app.stop().await;
}

#[tokio::test]
async fn concurrent_tests_and_views_leave_the_summary_equal_to_the_record() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let map = format!("/projects/{}/map", f.project);
    let mut tasks = Vec::new();
    for i in 0..40 {
        let client = app.client.clone();
        let url = app.url(&format!("/api/v1/lots/{}/field-tests", f.lot));
        let view = app.url(&map);
        tasks.push(tokio::spawn(async move {
            let dry = if i % 10 == 3 { 1650.0 } else { 1900.0 };
            let r = client
                .post(&url)
                .json(&unnumbered(dry))
                .send()
                .await
                .unwrap();
            assert_eq!(r.status(), 201, "{}", r.text().await.unwrap());
            let v = client.get(&view).send().await.unwrap();
            assert_eq!(v.status(), 200);
        }));
    }
    for t in tasks {
        t.await.unwrap();
    }
    page(&app, &map).await;
    let (state, entered) = stored(&app, f.lot).await;
    assert_eq!(entered, app.count("field_tests").await);
    assert_eq!(entered, 40);
    assert_eq!(state, "failing", "four of the forty fail");
    assert_eq!(marks(&app).await, 0);
    // Forty automatic numbers, each once, T-0001 to T-0040.
    let mut numbers: Vec<String> = sqlx::query_scalar("SELECT number FROM field_tests")
        .fetch_all(&app.sql)
        .await
        .unwrap();
    numbers.sort();
    let want: Vec<String> = (1..=40).map(|n| format!("T-{n:04}")).collect();
    assert_eq!(numbers, want);
    app.stop().await;
}

#[tokio::test]
async fn a_number_of_the_automatic_form_given_by_hand_is_not_given_again() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    post_test(&app, f.lot, &nuclear_test("T-0007", 1010.0, 1900.0, 11.0)).await;
    let t = post_test(&app, f.lot, &unnumbered(1900.0)).await;
    assert_eq!(t["number"], "T-0008");
    // A number of another form leaves the counter alone.
    post_test(&app, f.lot, &nuclear_test("EXTRA-1", 1020.0, 1900.0, 11.0)).await;
    let t = post_test(&app, f.lot, &unnumbered(1900.0)).await;
    assert_eq!(t["number"], "T-0009");
    app.stop().await;
}
