//! The HTTP edge, tried as an attacker would: a burst of guesses, a forged sign-in,
//! hostile cells in a spreadsheet, oversized and malformed input, slow clients.

use serde_json::{Value, json};
use tokio::io::{AsyncReadExt, AsyncWriteExt};

use crate::helpers::{
    As, TEST_PASSWORD, TestApp, build_frame, nuclear_test, spawn_app, spawn_with,
};

/// The most attempts the throttle's rule lets reach the password check in `secs` seconds:
/// five free, then one more after each wait has passed (1 s, then 2, 4, … — counted one
/// second long each, as stored times have whole seconds). Taken from the rule as written in
/// `auth::throttle`'s documentation, not from its code.
fn allowed_within(secs: f64) -> usize {
    let (mut allowed, mut spent, mut wait) = (5, 0.0, 1.0);
    while spent + wait + 1.0 <= secs {
        spent += wait + 1.0;
        allowed += 1;
        wait *= 2.0;
    }
    allowed
}

/// Sends `n` wrong passwords for one user at once, spread over `apps`; returns
/// (answers that reached the password check, answers refused by the throttle, the most
/// the rule allows in the time the burst took).
async fn burst(apps: &[&TestApp], n: usize) -> (usize, usize, usize) {
    let started = std::time::Instant::now();
    let mut tasks = tokio::task::JoinSet::new();
    for i in 0..n {
        let app = apps[i % apps.len()];
        let (client, url) = (app.anonymous.clone(), app.url("/sign-in"));
        tasks.spawn(async move {
            client
                .post(url)
                .form(&[("username", "t.tech"), ("password", "wrong-guess-123")])
                .send()
                .await
                .unwrap()
                .status()
                .as_u16()
        });
    }
    let (mut checked, mut throttled) = (0, 0);
    while let Some(s) = tasks.join_next().await {
        match s.unwrap() {
            401 => checked += 1,
            429 => throttled += 1,
            other => panic!("unexpected status {other}"),
        }
    }
    let took = started.elapsed().as_secs_f64();
    (checked, throttled, allowed_within(took))
}

async fn failed_sign_ins(app: &TestApp) -> i64 {
    sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE action = 'sign_in_failed'")
        .fetch_one(&app.sql)
        .await
        .unwrap()
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_burst_of_guesses_reaches_the_password_check_at_most_five_times() {
    let app = spawn_app().await;
    let (checked, throttled, limit) = burst(&[&app], 48).await;
    println!(
        "one server: {checked} of 48 parallel wrong passwords reached the password check (rule allows {limit})"
    );
    assert!(
        checked <= limit,
        "{checked} reached the check (limit {limit})"
    );
    assert_eq!(checked + throttled, 48);
    assert_eq!(failed_sign_ins(&app).await, checked as i64);
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn two_servers_on_one_database_share_the_throttle() {
    let app = spawn_app().await;
    let dir = std::sync::Arc::new(tempfile::tempdir().unwrap());
    let second = spawn_with(dir, app.location.clone(), false).await;
    let (checked, throttled, limit) = burst(&[&app, &second], 48).await;
    println!(
        "two servers: {checked} of 48 parallel wrong passwords reached the password check (rule allows {limit})"
    );
    assert!(
        checked <= limit,
        "{checked} reached the check (limit {limit})"
    );
    assert_eq!(checked + throttled, 48);
}

async fn guess_from(app: &TestApp, user: &str, forwarded: &str) -> u16 {
    app.anonymous
        .post(app.url("/sign-in"))
        .header("x-forwarded-for", forwarded)
        .form(&[("username", user), ("password", "wrong-guess-123")])
        .send()
        .await
        .unwrap()
        .status()
        .as_u16()
}

#[tokio::test]
async fn forwarded_addresses_count_only_behind_a_trusted_proxy() {
    // Without --trust-proxy an invented X-Forwarded-For does not give a fresh address key.
    let app = spawn_app().await;
    let mut statuses = Vec::new();
    let mut fifth_answered = std::time::Instant::now();
    for i in 0..6 {
        statuses.push(guess_from(&app, &format!("nobody{i}"), &format!("203.0.113.{i}")).await);
        if i == 4 {
            fifth_answered = std::time::Instant::now();
        }
    }
    let gap = fifth_answered.elapsed().as_secs_f64();
    assert_eq!(&statuses[..5], &[401; 5]);
    // The rule owes a 1 s wait after the fifth failure; only a sixth guess sent later than
    // that may reach the check (on a loaded machine the request itself can take that long).
    assert!(
        statuses[5] == 429 || gap >= 1.0,
        "the sixth guess from one address waits: {statuses:?} ({gap:.2} s after the fifth)"
    );

    // With it, each forwarded address is its own key and is what the audit records.
    let dir = std::sync::Arc::new(tempfile::tempdir().unwrap());
    let location = crate::helpers::fresh_location(&dir.path().join("proxy.sqlite")).await;
    let proxied = spawn_with(dir, location, true).await;
    for i in 0..7 {
        let s = guess_from(
            &proxied,
            &format!("nobody{i}"),
            &format!("10.0.0.1, 203.0.113.{i}"),
        )
        .await;
        assert_eq!(s, 401, "guess {i}");
    }
    let origins: Vec<String> = sqlx::query_scalar(
        "SELECT origin FROM audit_log WHERE action = 'sign_in_failed' ORDER BY id",
    )
    .fetch_all(&proxied.sql)
    .await
    .unwrap();
    assert_eq!(origins[6], "203.0.113.6", "{origins:?}");
}

#[tokio::test]
async fn password_hashing_leaves_the_workers_free_for_other_requests() {
    use liftledger::auth::password;
    use std::sync::Arc;
    use std::sync::atomic::{AtomicUsize, Ordering};
    // This test's runtime has one thread. A task that counts each time it is polled
    // shows whether that thread was free while a password was hashed and checked: run on
    // the thread itself, the check would finish before the counter ever ran.
    let polls = Arc::new(AtomicUsize::new(0));
    let counter = polls.clone();
    let ticker = tokio::spawn(async move {
        loop {
            counter.fetch_add(1, Ordering::Relaxed);
            tokio::task::yield_now().await;
        }
    });
    let hash = password::hash_off_workers(TEST_PASSWORD).await.unwrap();
    let during_hash = polls.load(Ordering::Relaxed);
    let ok = password::verify_off_workers(TEST_PASSWORD, &hash).await;
    let during_both = polls.load(Ordering::Relaxed);
    ticker.abort();
    assert!(ok, "the password checks against its own hash");
    assert!(
        during_hash > 0,
        "the runtime thread served nothing while hashing"
    );
    assert!(
        during_both > during_hash,
        "the runtime thread served nothing while checking"
    );

    // Through the server as well: sign-ins on this one thread succeed while it answers probes.
    let app = spawn_app().await;
    let (signed, probes) = tokio::join!(
        crate::helpers::sign_in_form(&app, "t.viewer", TEST_PASSWORD),
        app.anonymous.get(app.url("/healthz")).send()
    );
    assert_eq!(signed.0, 303);
    assert_eq!(probes.unwrap().status().as_u16(), 200);
}

#[tokio::test]
async fn oversized_names_passwords_text_and_pages_are_refused_before_any_write() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let before = app.all_counts().await;
    let failures = app.count("sign_in_failures").await;
    let long_name = "u".repeat(100_000);
    let long_password = "p".repeat(2000);
    for (user, password) in [
        (long_name.as_str(), "x"),
        ("t.tech", long_password.as_str()),
    ] {
        let r = app
            .anonymous
            .post(app.url("/sign-in"))
            .form(&[("username", user), ("password", password)])
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), 422);
    }
    assert_eq!(
        app.count("sign_in_failures").await,
        failures,
        "no throttle row for a refused input"
    );
    let (s, e) = app
        .post_as(
            As::Admin,
            "/api/v1/users",
            &json!({"username": "n".repeat(65), "display_name": "N", "password": "long-enough-pass"}),
        )
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "username");
    let mut t = nuclear_test("C-1", 1010.0, 1900.0, 11.0);
    t["technician"] = json!("A. Tester\u{0007}");
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &t)
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "technician");
    let mut t = nuclear_test("C-2", 1010.0, 1900.0, 11.0);
    t["instrument_serial"] = json!("s".repeat(10_000));
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &t)
        .await;
    assert_eq!(s, 422, "{e}");
    for q in [
        format!("page={}", i64::MAX),
        format!("page={}&per_page=1000", i64::MAX / 2),
    ] {
        let (s, e) = app
            .get(&format!("/api/v1/projects/{}/field-tests?{q}", f.project))
            .await;
        assert_eq!(s, 422, "{q}: {e}");
        assert_eq!(e["error"]["field"], "page");
    }
    assert_eq!(app.all_counts().await, before, "nothing was written");
}

#[tokio::test]
async fn csv_exports_neutralise_formulas_and_keep_numbers() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (_, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    let omc = lab["optimum_water_content_pct"].as_f64().unwrap();
    let mut t = nuclear_test("X-1", 1010.0, 1900.0, omc - 1.2);
    t["technician"] = json!("=HYPERLINK(\"http://evil.example\",\"x\")");
    let (s, made) = app
        .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &t)
        .await;
    assert_eq!(s, 201, "{made}");
    let (s, _) = app
        .post(
            &format!("/api/v1/field-tests/{}/void", made["id"]),
            &json!({"reason": "@SUM(1+1)"}),
        )
        .await;
    assert_eq!(s, 200);
    for url in [
        format!("/api/v1/projects/{}/exports/tests_csv", f.project),
        format!("/projects/{}/tests.csv", f.project),
    ] {
        let bytes = app
            .client
            .get(app.url(&url))
            .send()
            .await
            .unwrap()
            .bytes()
            .await
            .unwrap();
        let text = std::str::from_utf8(&bytes)
            .unwrap()
            .trim_start_matches('\u{feff}');
        let mut r = csv::Reader::from_reader(text.as_bytes());
        let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
        let row = r.records().next().expect("one row").unwrap();
        let col = |name: &str| header.iter().position(|h| h == name).unwrap();
        assert_eq!(
            &row[col("technician")],
            "'=HYPERLINK(\"http://evil.example\",\"x\")",
            "{url}"
        );
        assert_eq!(&row[col("void_reason")], "'@SUM(1+1)", "{url}");
        for cell in row.iter() {
            assert!(
                !cell.starts_with(['=', '+', '@', '\t', '\r']),
                "{url}: {cell}"
            );
            if cell.starts_with('-') {
                cell.parse::<f64>()
                    .unwrap_or_else(|_| panic!("{url}: {cell} is a number"));
            }
        }
    }
}

#[tokio::test]
async fn the_sign_in_form_refuses_other_sites() {
    let app = spawn_app().await;
    let sessions = app.count("sessions").await;
    let plain = reqwest::Client::builder()
        .redirect(reqwest::redirect::Policy::none())
        .build()
        .unwrap();
    let r = plain
        .post(app.url("/sign-in"))
        .header("origin", "http://evil.example")
        .form(&[("username", "t.tech"), ("password", TEST_PASSWORD)])
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 403);
    assert!(r.headers().get("set-cookie").is_none());
    assert_eq!(app.count("sessions").await, sessions, "no session was made");
    let (s, _) = crate::helpers::sign_in_form(&app, "t.tech", TEST_PASSWORD).await;
    assert_eq!(s, 303, "this site's own form still signs in");
}

fn is_json_error(v: &Value) -> bool {
    v["error"]["field"].is_string() && v["error"]["message"].is_string()
}

#[tokio::test]
async fn every_api_error_is_json_and_pages_get_the_error_page() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    for (path, field) in [
        ("/api/v1/lots/abc".to_string(), "id"),
        (
            format!("/api/v1/projects/{}/field-tests?page=abc", f.project),
            "page",
        ),
        ("/api/v1/no-such-thing".to_string(), "path"),
    ] {
        let r = app.client.get(app.url(&path)).send().await.unwrap();
        let status = r.status().as_u16();
        assert!((400..500).contains(&status), "{path}: {status}");
        let v: Value = r.json().await.unwrap_or(Value::Null);
        assert!(is_json_error(&v), "{path}: {v}");
        assert_eq!(v["error"]["field"], field, "{path}: {v}");
    }
    let r = app
        .client
        .put(app.url(&format!("/api/v1/lots/{}", f.lot)))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 405);
    assert!(is_json_error(&r.json().await.unwrap()));
    let (s, v) = app
        .post_raw(&format!("/api/v1/lots/{}/submit", f.lot), "{not json")
        .await;
    assert_eq!(s, 400);
    assert!(is_json_error(&v));
    for path in ["/lots/abc", "/no-such-page"] {
        let r = app.client.get(app.url(path)).send().await.unwrap();
        assert!(r.status().is_client_error(), "{path}");
        let ct = r.headers()["content-type"].to_str().unwrap().to_string();
        assert!(ct.starts_with("text/html"), "{path}: {ct}");
    }

    // One "not found" for a missing id and for another project's id.
    let (s, other) = app
        .post_as(
            As::Admin,
            "/api/v1/projects",
            &json!({"code": "OTH", "name": "Other"}),
        )
        .await;
    assert_eq!(s, 201);
    let (s, layer) = app
        .post_as(
            As::Admin,
            &format!("/api/v1/projects/{}/layers", other["id"]),
            &json!({"zone": "Fill", "number": 1}),
        )
        .await;
    // The admin holds no role there; a layer is not needed, only a record of that project.
    assert_eq!(s, 403, "{layer}");
    let (s1, missing) = app.get_as(As::Viewer, "/api/v1/projects/999999").await;
    let (s2, foreign) = app
        .get_as(As::Viewer, &format!("/api/v1/projects/{}", other["id"]))
        .await;
    assert_eq!((s1, s2), (404, 404));
    let shape = |v: &Value| {
        let m = v["error"]["message"].as_str().unwrap().to_string();
        (
            v["error"]["field"].clone(),
            m.replace(|c: char| c.is_ascii_digit(), ""),
        )
    };
    assert_eq!(shape(&missing), shape(&foreign), "{missing} vs {foreign}");
}

#[tokio::test]
async fn a_slow_client_is_cut_off_and_no_header_names_the_actor() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    // No header decides who is recorded: the session's user is.
    let r = app
        .client
        .post(app.url(&format!("/api/v1/lots/{}/field-tests", f.lot)))
        .header("x-liftledger-user", "Forged Name")
        .json(&nuclear_test("H-1", 1010.0, 1900.0, 11.0))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 201);
    let actors: Vec<String> =
        sqlx::query_scalar("SELECT actor FROM audit_log WHERE entity = 'field_test'")
            .fetch_all(&app.sql)
            .await
            .unwrap();
    assert_eq!(actors, vec!["T. Quality (t.qc)".to_string()]);

    // A server with a one-second header timeout closes a connection that never finishes its headers.
    let listener = tokio::net::TcpListener::bind("127.0.0.1:0").await.unwrap();
    let addr = listener.local_addr().unwrap();
    let state = liftledger::AppState::new(
        app.pool.clone(),
        liftledger::Settings {
            demo: false,
            secure_cookies: false,
            trust_proxy: false,
        },
    );
    tokio::spawn(liftledger::serve_with_header_timeout(
        listener,
        state,
        std::future::pending(),
        std::time::Duration::from_secs(1),
    ));
    let mut slow = tokio::net::TcpStream::connect(addr).await.unwrap();
    slow.write_all(b"GET /healthz HTTP/1.1\r\nHost: x\r\n")
        .await
        .unwrap();
    let mut buf = Vec::new();
    let read = tokio::time::timeout(
        std::time::Duration::from_secs(15),
        slow.read_to_end(&mut buf),
    )
    .await;
    assert!(
        read.is_ok(),
        "the server kept a connection open whose headers never came"
    );
    assert!(!String::from_utf8_lossy(&buf).contains("200 OK"));
}
