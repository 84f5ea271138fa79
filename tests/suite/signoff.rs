//! Sign-off that cannot be forged or changed afterwards: tokens within their maker's
//! role, accepted lots frozen until a client engineer reopens them, every test with a
//! history, and the people who hold the roles.

use serde_json::{Value, json};

use crate::helpers::{
    As, Frame, TEST_PASSWORD, TestApp, answer, build_frame, nuclear_test, session_client,
    sign_in_form, spawn_app, token_client,
};

async fn token_as(app: &TestApp, who: As, project: i64, role: &str) -> (u16, Value) {
    app.post_as(
        who,
        &format!("/api/v1/projects/{project}/tokens"),
        &json!({"name": format!("{role} device"), "role": role}),
    )
    .await
}

/// A lot with three passing tests, submitted.
async fn ready_lot(app: &TestApp) -> (Frame, f64, f64) {
    let f = build_frame(app, json!({"rule": "every_test"})).await;
    let (_, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    let mdd = lab["max_dry_density_kg_m3"].as_f64().unwrap();
    let omc = lab["optimum_water_content_pct"].as_f64().unwrap();
    for (i, ch) in [1010.0, 1050.0, 1090.0].into_iter().enumerate() {
        let (s, t) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &nuclear_test(&format!("T-{i}"), ch, 0.99 * mdd, omc),
            )
            .await;
        assert_eq!(s, 201, "{t}");
    }
    let (s, r) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{r}");
    (f, mdd, omc)
}

#[tokio::test]
async fn no_contractor_can_sign_and_tokens_die_with_their_maker() {
    let app = spawn_app().await;
    let (f, _, _) = ready_lot(&app).await;
    let p = f.project;

    // A QC manager cannot make a client engineer's token; an admin without a role cannot make any.
    let (s, e) = token_as(&app, As::Qc, p, "client_engineer").await;
    assert_eq!(s, 403, "{e}");
    let (s, e) = token_as(&app, As::Admin, p, "viewer").await;
    assert_eq!(s, 403, "{e}");
    // Nor can the engineer make a technician's (not within their role).
    let (s, _) = token_as(&app, As::Engineer, p, "technician").await;
    assert_eq!(s, 403);
    let (s, bad) = app
        .post_as(
            As::Engineer,
            &format!("/api/v1/projects/{p}/tokens"),
            &json!({"name": "x", "role": "viewer", "expires_in_days": 366}),
        )
        .await;
    assert_eq!(s, 422, "{bad}");
    assert_eq!(bad["error"]["field"], "expires_in_days");

    // The engineer's own token: 90 days by default; it may accept.
    let (s, eng) = token_as(&app, As::Engineer, p, "client_engineer").await;
    assert_eq!(s, 201, "{eng}");
    let created = liftledger::clock::parse(eng["details"]["created_at"].as_str().unwrap()).unwrap();
    let expires = liftledger::clock::parse(eng["details"]["expires_at"].as_str().unwrap()).unwrap();
    assert_eq!((expires - created).whole_days(), 90);
    let eng_id = eng["details"]["id"].as_i64().unwrap();
    let eng_token = eng["token"].as_str().unwrap().to_string();

    // A QC manager cannot revoke it.
    let (s, e) = app
        .post_as(
            As::Qc,
            &format!("/api/v1/tokens/{eng_id}/revoke"),
            &json!({}),
        )
        .await;
    assert_eq!(s, 403, "{e}");

    // It dies when its maker leaves the project.
    let me = token_client(&eng_token);
    let (s, _) = answer(me.get(app.url(&format!("/api/v1/lots/{}", f.lot)))).await;
    assert_eq!(s, 200);
    let (s, r) = app
        .post_as(
            As::Admin,
            &format!("/api/v1/projects/{p}/members/remove"),
            &json!({"username": "t.engineer"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let (s, _) = answer(
        me.post(app.url(&format!("/api/v1/lots/{}/accept", f.lot)))
            .json(&json!({})),
    )
    .await;
    assert_eq!(s, 401, "a token outlives no membership");

    // A technician token of the QC manager dies when the QC manager is disabled …
    let (s, tech) = token_as(&app, As::Qc, p, "technician").await;
    assert_eq!(s, 201, "{tech}");
    let tech = token_client(tech["token"].as_str().unwrap());
    let (s, _) = answer(tech.get(app.url(&format!("/api/v1/lots/{}", f.lot)))).await;
    assert_eq!(s, 200);
    let qc = db_user(&app, "t.qc").await;
    let (s, r) = app
        .post_as(
            As::Admin,
            &format!("/api/v1/users/{qc}/disable"),
            &json!({}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let (s, _) = answer(tech.get(app.url(&format!("/api/v1/lots/{}", f.lot)))).await;
    assert_eq!(s, 401);
    let (s, _) = app.get_as(As::Qc, "/api/v1/me").await;
    assert_eq!(s, 401, "the disabled user's session ended");

    // … and an expired token is refused.
    let (s, _) = app
        .post_as(As::Admin, &format!("/api/v1/users/{qc}/enable"), &json!({}))
        .await;
    assert_eq!(s, 200);
    let (secret, _) = liftledger::ledger::accounts::create_token(
        &app.pool,
        p,
        &liftledger::ledger::accounts::TokenInput {
            name: "short".into(),
            role: "viewer".into(),
            expires_in_days: Some(1),
        },
        qc,
        &liftledger::ledger::Actor::system("test"),
    )
    .await
    .unwrap();
    let short = token_client(&secret);
    let (s, _) = answer(short.get(app.url(&format!("/api/v1/lots/{}", f.lot)))).await;
    assert_eq!(s, 200);
    sqlx::query("UPDATE api_tokens SET expires_at = '2020-01-01T00:00:00Z' WHERE name = 'short'")
        .execute(&app.sql)
        .await
        .unwrap();
    let (s, _) = answer(short.get(app.url(&format!("/api/v1/lots/{}", f.lot)))).await;
    assert_eq!(s, 401);
}

async fn db_user(app: &TestApp, name: &str) -> i64 {
    liftledger::db::users::by_username(&app.pool, name)
        .await
        .unwrap()
        .unwrap()
        .id
}

async fn second_curve(app: &TestApp, f: &Frame) -> i64 {
    let (s, new) = app
        .post(
            &format!("/api/v1/sources/{}/lab-tests", f.source),
            &json!({"code": "L2", "tested_on": "2026-11-10", "effort": "astm_d1557_4in",
                    "points": crate::helpers::lab_points(), "supersedes_lab_test_id": f.lab_test,
                    "supersede_reason": "new material face opened"}),
        )
        .await;
    assert_eq!(s, 201, "{new}");
    new["id"].as_i64().unwrap()
}

#[tokio::test]
async fn an_accepted_lot_is_frozen_until_a_client_engineer_reopens_it() {
    let app = spawn_app().await;
    let (f, mdd, omc) = ready_lot(&app).await;
    let (s, r) = app
        .post(&format!("/api/v1/lots/{}/accept", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{r}");
    let code = r["certificate"]["verification_code"]
        .as_str()
        .unwrap()
        .to_string();
    let first_test = r["tests"][0]["test"]["id"].as_i64().unwrap();
    let before = app.all_counts().await;

    // No new test, retest or void on an accepted lot.
    let (s, _) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &nuclear_test("T-9", 1020.0, 0.99 * mdd, omc),
        )
        .await;
    assert_eq!(s, 409);
    let (s, _) = app
        .post(
            &format!("/api/v1/field-tests/{first_test}/retests"),
            &nuclear_test("T-0R", 1010.0, 0.99 * mdd, omc),
        )
        .await;
    assert_eq!(s, 409);
    let (s, e) = app
        .post(
            &format!("/api/v1/field-tests/{first_test}/void"),
            &json!({"reason": "entered twice"}),
        )
        .await;
    assert_eq!(s, 409, "voiding a test of an accepted lot is refused: {e}");
    assert_eq!(app.all_counts().await, before, "nothing was written");

    // Superseding the curve moves no lot; an accepted lot cannot be re-pointed.
    let l2 = second_curve(&app, &f).await;
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(lot["lot"]["lab_test_id"], f.lab_test);
    assert_eq!(lot["lot"]["state"], "accepted");
    let (s, _) = app
        .post(
            &format!("/api/v1/lots/{}/reference", f.lot),
            &json!({"lab_test_id": l2, "reason": "new face"}),
        )
        .await;
    assert_eq!(s, 409);

    // Only a client engineer reopens, and only with a reason.
    let reopen = format!("/api/v1/lots/{}/reopen", f.lot);
    let (s, _) = app
        .post_as(As::Qc, &reopen, &json!({"reason": "mine"}))
        .await;
    assert_eq!(s, 403);
    let (s, e) = app.post_as(As::Engineer, &reopen, &json!({})).await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "reason");
    let (s, r) = app
        .post_as(
            As::Engineer,
            &reopen,
            &json!({"reason": "T-0 was taken on the wrong lift"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    assert_eq!(r["lot"]["state"], "open");

    // The certificate is withdrawn, and verification says so and why.
    let (_, v) = app.post("/api/v1/verify", &json!({"code": code})).await;
    assert_eq!(v["found"], true);
    assert_eq!(v["current"], false);
    assert_eq!(v["withdrawn"], true, "{v}");
    let message = v["message"].as_str().unwrap();
    assert!(
        message.contains("WITHDRAWN") && message.contains("wrong lift"),
        "{message}"
    );
    let form = reqwest::multipart::Form::new().text("code", code.clone());
    let html = app
        .anonymous
        .post(app.url("/verify"))
        .multipart(form)
        .send()
        .await
        .unwrap()
        .text()
        .await
        .unwrap();
    assert!(
        html.contains("Genuine but withdrawn") && html.contains("wrong lift"),
        "{html}"
    );

    // Open again: void, re-point (audited), resubmit, accept → revision 2.
    let (s, _) = app
        .post(
            &format!("/api/v1/field-tests/{first_test}/void"),
            &json!({"reason": "wrong lift"}),
        )
        .await;
    assert_eq!(s, 200);
    let (s, _) = app
        .post_as(
            As::Engineer,
            &format!("/api/v1/lots/{}/reference", f.lot),
            &json!({"lab_test_id": l2, "reason": "x"}),
        )
        .await;
    assert_eq!(s, 403, "re-pointing is the QC manager's");
    let (s, r) = app
        .post(
            &format!("/api/v1/lots/{}/reference", f.lot),
            &json!({"lab_test_id": l2, "reason": "new material face"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    assert_eq!(r["lot"]["lab_test_id"], l2);
    let (_, hist) = app.get(&format!("/api/v1/lots/{}/history", f.lot)).await;
    let repoint = hist["audit"]
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["action"] == "repoint")
        .expect("the re-point is in the lot's history");
    assert!(
        repoint["before"]
            .to_string()
            .contains(&f.lab_test.to_string())
    );
    // Reissue checks every submit blocker: with a void the lot owes a test.
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 409, "{e}");
    let (s, t) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &nuclear_test("T-3", 1030.0, 0.99 * mdd, omc),
        )
        .await;
    assert_eq!(s, 201, "{t}");
    let (s, _) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200);
    let (s, r2) = app
        .post(&format!("/api/v1/lots/{}/accept", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{r2}");
    assert_eq!(r2["certificate"]["revision"], 2);
    assert_eq!(r2["display_state"], "certified");
    let (_, list) =
        crate::helpers::page(&app, &format!("/projects/{}/certificates", f.project)).await;
    assert!(
        list.contains(">withdrawn<") && list.contains(">current<"),
        "{list}"
    );
}

#[tokio::test]
async fn imported_tests_show_their_import_and_sessions_end_on_the_record() {
    use sha2::Digest;
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (s, saved) = app
        .post(
            &format!("/api/v1/projects/{}/import-mappings", f.project),
            &json!({"name": "m", "mapping": serde_json::to_value(crate::transfer::mapping()).unwrap()}),
        )
        .await;
    assert_eq!(s, 201, "{saved}");
    let rows = vec![
        crate::transfer::row("I-1", "1010", 1900.0, 11.0),
        crate::transfer::row("I-2", "1020", 1900.0, 11.0),
    ];
    let body = crate::transfer::csv_bytes(b',', false, &rows);
    let sha = hex::encode(sha2::Sha256::digest(&body));
    let (s, rep) = answer(
        app.client
            .post(app.url(&format!(
                "/api/v1/projects/{}/imports?mapping=m&commit=true&file_name=site.csv",
                f.project
            )))
            .body(body),
    )
    .await;
    assert_eq!(s, 201, "{rep}");
    let (_, tests) = app
        .get(&format!("/api/v1/lots/{}/field-tests", f.lot))
        .await;
    let ids: Vec<i64> = tests
        .as_array()
        .or_else(|| tests["tests"].as_array())
        .unwrap()
        .iter()
        .map(|t| t["test"]["id"].as_i64().or(t["id"].as_i64()).unwrap())
        .collect();
    assert_eq!(ids.len(), 2);
    for id in ids {
        let (_, hist) = app.get(&format!("/api/v1/field-tests/{id}/history")).await;
        let import = hist
            .as_array()
            .unwrap()
            .iter()
            .find(|h| h["action"] == "import")
            .unwrap_or_else(|| panic!("test {id} shows its import: {hist}"));
        assert_eq!(import["actor"], "T. Quality (t.qc)");
        assert!(!import["at"].as_str().unwrap().is_empty());
        let after = &import["after"];
        assert_eq!(
            after["sha256"], sha,
            "the file's SHA-256, computed here from the bytes sent"
        );
    }

    // Sign-out and expiry are audited.
    let (s, secret) = sign_in_form(&app, "t.viewer", TEST_PASSWORD).await;
    assert_eq!(s, 303);
    let me = session_client(&app, &secret.unwrap());
    let r = me.post(app.url("/sign-out")).send().await.unwrap();
    assert_eq!(r.status().as_u16(), 303);
    let (s, _) = sign_in_form(&app, "t.tech", TEST_PASSWORD).await;
    assert_eq!(s, 303);
    sqlx::query(
        "UPDATE sessions SET last_seen_at = '2020-01-01T00:00:00Z' WHERE ended_at IS NULL AND user_id = $1",
    )
    .bind(db_user(&app, "t.tech").await)
    .execute(&app.sql)
    .await
    .unwrap();
    let (s, _) = app.get_as(As::Tech, "/api/v1/me").await;
    assert_eq!(s, 401);
    let actions: Vec<String> =
        sqlx::query_scalar("SELECT action FROM audit_log WHERE entity = 'session' ORDER BY id")
            .fetch_all(&app.sql)
            .await
            .unwrap();
    assert!(actions.contains(&"sign_out".to_string()), "{actions:?}");
    assert!(
        actions.contains(&"session_expired".to_string()),
        "{actions:?}"
    );
}

#[tokio::test]
async fn sessions_end_after_seven_days_however_busy() {
    let app = spawn_app().await;
    let (s, _) = app.get_as(As::Viewer, "/api/v1/me").await;
    assert_eq!(s, 200);
    let now = liftledger::clock::now();
    let eight_days_ago = liftledger::clock::format(
        liftledger::clock::parse(&now).unwrap() - time::Duration::days(8),
    );
    sqlx::query("UPDATE sessions SET created_at = $1, last_seen_at = $2 WHERE user_id = $3")
        .bind(&eight_days_ago)
        .bind(&now)
        .bind(db_user(&app, "t.viewer").await)
        .execute(&app.sql)
        .await
        .unwrap();
    let (s, _) = app.get_as(As::Viewer, "/api/v1/me").await;
    assert_eq!(s, 401, "used a minute ago, but signed in eight days ago");
}

#[tokio::test]
async fn people_are_removed_disabled_and_change_passwords_and_sessions_end_at_once() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let lot = format!("/api/v1/lots/{}", f.lot);

    // Removing a membership ends the member's sessions.
    let (s, _) = app.get_as(As::Viewer, &lot).await;
    assert_eq!(s, 200);
    let (s, r) = app
        .post_as(
            As::Admin,
            &format!("/api/v1/projects/{}/members/remove", f.project),
            &json!({"username": "t.viewer"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let (s, _) = app.get_as(As::Viewer, "/api/v1/me").await;
    assert_eq!(s, 401);

    // Changing one's own password needs the current one and ends every other session.
    let (_, second) = sign_in_form(&app, "t.tech", TEST_PASSWORD).await;
    let second = session_client(&app, &second.unwrap());
    let change = |current: &str, new: &str| {
        app.client_as(As::Tech)
            .post(app.url("/api/v1/me/password"))
            .json(&json!({"current_password": current, "new_password": new}))
    };
    let (s, e) = answer(change("not-my-password", "a-brand-new-password")).await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "current_password");
    let (s, r) = answer(change(TEST_PASSWORD, "a-brand-new-password")).await;
    assert_eq!(s, 200, "{r}");
    let (s, _) = answer(second.get(app.url("/api/v1/me"))).await;
    assert_eq!(s, 401, "the other session ended");
    let (s, _) = app.get_as(As::Tech, "/api/v1/me").await;
    assert_eq!(s, 401, "this session ended too (a new cookie replaces it)");
    let (s, _) = sign_in_form(&app, "t.tech", TEST_PASSWORD).await;
    assert_eq!(s, 401);
    let (s, _) = sign_in_form(&app, "t.tech", "a-brand-new-password").await;
    assert_eq!(s, 303);

    // An admin's reset forces a change at the next sign-in.
    let eng = db_user(&app, "t.engineer").await;
    let (s, r) = app
        .post_as(
            As::Admin,
            &format!("/api/v1/users/{eng}/password-reset"),
            &json!({"new_password": "temporary-pass-1"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let (s, _) = app.get_as(As::Engineer, "/api/v1/me").await;
    assert_eq!(s, 401, "the reset ended the engineer's session");
    let r = app
        .anonymous
        .post(app.url("/sign-in"))
        .form(&[("username", "t.engineer"), ("password", "temporary-pass-1")])
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 303);
    assert_eq!(r.headers()["location"], "/account");
    let (_, secret) = sign_in_form(&app, "t.engineer", "temporary-pass-1").await;
    let eng_client = session_client(&app, &secret.unwrap());
    let (s, e) = answer(eng_client.get(app.url(&lot))).await;
    assert_eq!(
        s, 403,
        "nothing but the password change until it is done: {e}"
    );
    let page = eng_client.get(app.url("/account")).send().await.unwrap();
    assert_eq!(page.status().as_u16(), 200);
    assert!(page.text().await.unwrap().contains("must-change"));
    let r = eng_client
        .post(app.url("/account"))
        .form(&[
            ("current_password", "temporary-pass-1"),
            ("new_password", "engineers-own-pass"),
            ("confirm_password", "engineers-own-pass"),
        ])
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 303);
    let (_, secret) = sign_in_form(&app, "t.engineer", "engineers-own-pass").await;
    let (s, _) = answer(session_client(&app, &secret.unwrap()).get(app.url(&lot))).await;
    assert_eq!(s, 200);
}

#[tokio::test]
async fn the_first_admins_printed_password_must_be_changed_and_the_cli_disables_users() {
    let dir = std::sync::Arc::new(tempfile::tempdir().unwrap());
    let location = crate::helpers::fresh_location(&dir.path().join("first.sqlite")).await;
    let pool = liftledger::db::connect(&location).await.unwrap();
    let printed = liftledger::ledger::accounts::ensure_first_admin(&pool)
        .await
        .unwrap()
        .expect("a new database gets an admin");
    pool.close().await;
    let app = crate::helpers::spawn_on(dir, location.clone()).await;
    let r = app
        .anonymous
        .post(app.url("/sign-in"))
        .form(&[("username", "admin"), ("password", printed.as_str())])
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 303);
    assert_eq!(
        r.headers()["location"],
        "/account",
        "sent to change the printed password"
    );
    let (_, secret) = sign_in_form(&app, "admin", &printed).await;
    let (s, _) = answer(session_client(&app, &secret.unwrap()).get(app.url("/api/v1/users"))).await;
    assert_eq!(s, 403);

    // `liftledger user disable` ends the user's sessions.
    let (s, _) = app.get_as(As::Viewer, "/api/v1/me").await;
    assert_eq!(s, 200);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args([
            "user",
            "disable",
            "--db",
            &location.url,
            "--username",
            "t.viewer",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let (s, _) = app.get_as(As::Viewer, "/api/v1/me").await;
    assert_eq!(s, 401);
    let (s, _) = sign_in_form(&app, "t.viewer", TEST_PASSWORD).await;
    assert_eq!(s, 401, "a disabled user cannot sign in");
}
