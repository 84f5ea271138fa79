//! Who may do what: every route that changes something, tried by every kind of caller.

use serde_json::{Value, json};

use crate::helpers::{As, TestApp, build_frame, client_with, nuclear_test, spawn_app};

/// The kinds of caller tried on every route.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Who {
    Anonymous,
    RevokedToken,
    Outsider,
    Persona(As),
    TechToken,
}

const CALLERS: [Who; 9] = [
    Who::Anonymous,
    Who::RevokedToken,
    Who::Outsider,
    Who::Persona(As::Viewer),
    Who::Persona(As::Admin),
    Who::Persona(As::Engineer),
    Who::Persona(As::Tech),
    Who::TechToken,
    Who::Persona(As::Qc),
];

/// What a project-scoped route needs.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Needs {
    Admin,
    Setup,
    Enter,
    Void,
    Submit,
    Review,
    /// Make a technician's token: only a member whose role contains a technician's.
    MakeTechToken,
    /// Revoke a viewer's token: an admin, or a member whose role contains a viewer's and who manages tokens.
    RevokeViewerToken,
    SignedIn,
}

/// The permission table as the tests expect it (mirrors `auth::allows` in words).
fn allowed(who: Who, needs: Needs) -> bool {
    match (who, needs) {
        (Who::Anonymous | Who::RevokedToken, _) => false,
        (_, Needs::SignedIn) => true,
        (Who::Outsider, _) => false,
        (Who::Persona(As::Admin), n) => matches!(n, Needs::Admin | Needs::RevokeViewerToken),
        (Who::TechToken, Needs::Enter) => true,
        (Who::TechToken, _) => false,
        (Who::Persona(As::Qc), n) => matches!(
            n,
            Needs::Setup
                | Needs::Enter
                | Needs::Void
                | Needs::Submit
                | Needs::MakeTechToken
                | Needs::RevokeViewerToken
        ),
        (Who::Persona(As::Tech), n) => n == Needs::Enter,
        (Who::Persona(As::Engineer), n) => matches!(n, Needs::Review | Needs::RevokeViewerToken),
        (Who::Persona(As::Viewer), _) => false,
    }
}

/// The refusal status a caller gets from the JSON API.
fn refused_status(who: Who, needs: Needs) -> u16 {
    match who {
        Who::Anonymous | Who::RevokedToken => 401,
        // Records of a project you do not belong to are not revealed.
        Who::Outsider if needs != Needs::Admin => 404,
        _ => 403,
    }
}

struct Fixture {
    app: TestApp,
    project: i64,
    source: i64,
    layer: i64,
    clause: i64,
    lab: i64,
    open_lot: i64,
    ready_lot: i64,
    submitted_lot: i64,
    failed: Vec<i64>,
    passed: Vec<i64>,
    tokens_to_revoke: Vec<i64>,
    revoked_secret: String,
    tech_secret: String,
    outsider: reqwest::Client,
}

async fn lot(app: &TestApp, f: &crate::helpers::Frame, code: &str, from: f64) -> i64 {
    let (s, l) = app
        .post(
            &format!("/api/v1/projects/{}/lots", f.project),
            &json!({"code": code, "layer_id": f.layer, "chainage_from_m": from, "chainage_to_m": from + 100.0,
                    "offset_left_m": -5.0, "offset_right_m": 5.0, "clause_id": f.clause, "lab_test_id": f.lab_test}),
        )
        .await;
    assert_eq!(s, 201, "{l}");
    l["id"].as_i64().unwrap()
}

async fn add_test(
    app: &TestApp,
    lot: i64,
    number: &str,
    ch: f64,
    rc: f64,
    mdd: f64,
    omc: f64,
) -> i64 {
    let (s, t) = app
        .post(
            &format!("/api/v1/lots/{lot}/field-tests"),
            &nuclear_test(number, ch, rc * mdd, omc),
        )
        .await;
    assert_eq!(s, 201, "{t}");
    t["id"].as_i64().unwrap()
}

async fn fixture() -> Fixture {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (_, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    let mdd = lab["max_dry_density_kg_m3"].as_f64().unwrap();
    let omc = lab["optimum_water_content_pct"].as_f64().unwrap();
    let mut failed = Vec::new();
    let mut passed = Vec::new();
    for i in 0..3 {
        failed.push(
            add_test(
                &app,
                f.lot,
                &format!("F{i}"),
                1010.0 + 10.0 * f64::from(i),
                0.90,
                mdd,
                omc,
            )
            .await,
        );
        passed.push(
            add_test(
                &app,
                f.lot,
                &format!("P{i}"),
                1050.0 + 10.0 * f64::from(i),
                0.98,
                mdd,
                omc,
            )
            .await,
        );
    }
    let ready_lot = lot(&app, &f, "READY", 2000.0).await;
    let submitted_lot = lot(&app, &f, "SUB", 3000.0).await;
    for (l, base) in [(ready_lot, 2000.0), (submitted_lot, 3000.0)] {
        for i in 0..3 {
            add_test(
                &app,
                l,
                &format!("L{l}-{i}"),
                base + 10.0 + 20.0 * f64::from(i),
                0.98,
                mdd,
                omc,
            )
            .await;
        }
    }
    let (s, _) = app
        .post(&format!("/api/v1/lots/{submitted_lot}/submit"), &json!({}))
        .await;
    assert_eq!(s, 200);
    let mut tokens_to_revoke = Vec::new();
    let secret = |v: &Value| v["token"].as_str().unwrap().to_string();
    for i in 0..3 {
        let (s, t) = app
            .post(
                &format!("/api/v1/projects/{}/tokens", f.project),
                &json!({"name": format!("spare {i}"), "role": "viewer"}),
            )
            .await;
        assert_eq!(s, 201, "{t}");
        tokens_to_revoke.push(t["details"]["id"].as_i64().unwrap());
    }
    let (_, revoked) = app
        .post(
            &format!("/api/v1/projects/{}/tokens", f.project),
            &json!({"name": "old gauge", "role": "technician"}),
        )
        .await;
    let (s, _) = app
        .post(
            &format!("/api/v1/tokens/{}/revoke", revoked["details"]["id"]),
            &json!({}),
        )
        .await;
    assert_eq!(s, 200);
    let (_, tech) = app
        .post(
            &format!("/api/v1/projects/{}/tokens", f.project),
            &json!({"name": "tablet 3", "role": "technician"}),
        )
        .await;
    // The outsider is a QC manager of another project.
    let (s, other) = app
        .post_as(
            As::Admin,
            "/api/v1/projects",
            &json!({"code": "OTH", "name": "Other job"}),
        )
        .await;
    assert_eq!(s, 201);
    let (s, _) = app
        .post_as(As::Admin, "/api/v1/users", &json!({"username": "outsider", "display_name": "O. Side", "password": "outsider-pass-1"}))
        .await;
    assert_eq!(s, 201);
    let (s, _) = app
        .post_as(
            As::Admin,
            &format!("/api/v1/projects/{}/members", other["id"]),
            &json!({"username": "outsider", "role": "qc_manager"}),
        )
        .await;
    assert_eq!(s, 200);
    let signed = liftledger::ledger::accounts::sign_in(
        &app.pool,
        "outsider",
        "outsider-pass-1",
        "127.0.0.1",
    )
    .await
    .unwrap();
    let outsider = client_with(&format!("http://{}", app.addr), Some(&signed.secret));
    Fixture {
        project: f.project,
        source: f.source,
        layer: f.layer,
        clause: f.clause,
        lab: f.lab_test,
        open_lot: f.lot,
        ready_lot,
        submitted_lot,
        failed,
        passed,
        tokens_to_revoke,
        revoked_secret: secret(&revoked),
        tech_secret: secret(&tech),
        outsider,
        app,
    }
}

/// One request: JSON to the API, or a form to a page.
enum Body {
    Json(Value),
    Form(Vec<(&'static str, String)>),
}

impl Fixture {
    fn client(&self, who: Who) -> reqwest::Client {
        let origin = format!("http://{}", self.app.addr);
        match who {
            Who::Anonymous => self.app.anonymous.clone(),
            Who::Outsider => self.outsider.clone(),
            Who::Persona(p) => self.app.client_as(p).clone(),
            Who::RevokedToken | Who::TechToken => {
                let secret = if who == Who::TechToken {
                    &self.tech_secret
                } else {
                    &self.revoked_secret
                };
                let mut h = reqwest::header::HeaderMap::new();
                h.insert("authorization", format!("Bearer {secret}").parse().unwrap());
                h.insert("origin", origin.parse().unwrap());
                reqwest::Client::builder()
                    .default_headers(h)
                    .redirect(reqwest::redirect::Policy::none())
                    .build()
                    .unwrap()
            }
        }
    }

    async fn send(&self, who: Who, path: &str, body: &Body) -> (u16, String) {
        let c = self.client(who);
        let r = match body {
            Body::Json(v) => c.post(self.app.url(path)).json(v),
            Body::Form(f) => c.post(self.app.url(path)).form(f),
        }
        .send()
        .await
        .unwrap();
        let s = r.status().as_u16();
        (s, r.text().await.unwrap_or_default())
    }
}

fn nuclear_form(ch: &str) -> Vec<(&'static str, String)> {
    vec![
        ("action", "save".into()),
        ("chainage", ch.into()),
        ("offset_m", "1.0".into()),
        ("technician", "A. Site".into()),
        ("method", "nuclear".into()),
        ("wet_density", "2150".into()),
        ("moisture_density", "215".into()),
    ]
}

/// Runs one route for every caller: refused ones first (nothing may change), then the allowed ones.
async fn check_route(
    f: &mut Fixture,
    name: &str,
    needs: Needs,
    page: bool,
    make: impl Fn(&Fixture, usize) -> (String, Body),
) {
    let mut allowed_n = 0;
    for who in CALLERS {
        let ok = allowed(who, needs);
        let (path, body) = make(f, allowed_n);
        let before = f.app.all_counts().await;
        let (status, text) = f.send(who, &path, &body).await;
        if ok {
            allowed_n += 1;
            assert!(
                (200..400).contains(&status),
                "{name}: {who:?} should succeed, got {status} {text}"
            );
        } else {
            let expected = if page && matches!(who, Who::Anonymous | Who::RevokedToken) {
                303
            } else {
                refused_status(who, needs)
            };
            assert_eq!(status, expected, "{name}: {who:?} → {text}");
            assert_eq!(
                f.app.all_counts().await,
                before,
                "{name}: refused {who:?} changed something"
            );
        }
    }
    assert!(
        allowed_n > 0 || needs == Needs::Admin,
        "{name}: nobody may do it?"
    );
}

#[tokio::test]
async fn every_mutating_route_answers_each_caller_as_the_permission_table_says() {
    let mut f = fixture().await;
    let p = f.project;
    check_route(&mut f, "create project", Needs::Admin, false, |_, i| {
        (
            "/api/v1/projects".into(),
            Body::Json(json!({"code": format!("N{i}"), "name": "New"})),
        )
    })
    .await;
    check_route(&mut f, "create user", Needs::Admin, false, |_, i| {
        ("/api/v1/users".into(), Body::Json(json!({"username": format!("new{i}"), "display_name": "N", "password": "long-enough-1"})))
    })
    .await;
    check_route(&mut f, "grant", Needs::Admin, false, move |_, _| {
        (
            format!("/api/v1/projects/{p}/members"),
            Body::Json(json!({"username": "t.viewer", "role": "viewer"})),
        )
    })
    .await;
    check_route(&mut f, "clause", Needs::Setup, false, move |_, i| {
        (format!("/api/v1/projects/{p}/clauses"), Body::Json(json!({"code": format!("K{i}"), "rc_min_pct": 95.0,
            "moisture_below_pct": 2.0, "moisture_above_pct": 2.0, "effort": "astm_d698_4in", "rule": "every_test", "min_tests_per_lot": 3})))
    })
    .await;
    check_route(&mut f, "source", Needs::Setup, false, move |_, i| {
        (
            format!("/api/v1/projects/{p}/sources"),
            Body::Json(json!({"code": format!("S{i}x"), "name": "Pit", "gs_fines": 2.65})),
        )
    })
    .await;
    check_route(&mut f, "lab test", Needs::Setup, false, |f, i| {
        (
            format!("/api/v1/sources/{}/lab-tests", f.source),
            Body::Json(json!({"code": format!("LX{i}"), "tested_on": "2026-11-02",
            "effort": "astm_d1557_4in", "points": crate::helpers::lab_points()})),
        )
    })
    .await;
    check_route(&mut f, "layer", Needs::Setup, false, move |_, i| {
        (
            format!("/api/v1/projects/{p}/layers"),
            Body::Json(json!({"zone": "Fill", "number": 10 + i})),
        )
    })
    .await;
    check_route(&mut f, "lot", Needs::Setup, false, |f, i| {
        (format!("/api/v1/projects/{}/lots", f.project), Body::Json(json!({"code": format!("NEW{i}"), "layer_id": f.layer,
            "chainage_from_m": 5000.0 + 200.0 * i as f64, "chainage_to_m": 5100.0 + 200.0 * i as f64, "offset_left_m": -5.0,
            "offset_right_m": 5.0, "clause_id": f.clause, "lab_test_id": f.lab})))
    })
    .await;
    check_route(&mut f, "field test", Needs::Enter, false, |f, i| {
        (
            format!("/api/v1/lots/{}/field-tests", f.open_lot),
            Body::Json(nuclear_test(&format!("M{i}"), 1080.0, 1900.0, 11.0)),
        )
    })
    .await;
    check_route(&mut f, "preview", Needs::Enter, false, |f, _| {
        (
            format!("/api/v1/lots/{}/field-tests/preview", f.open_lot),
            Body::Json(nuclear_test("PV", 1080.0, 1900.0, 11.0)),
        )
    })
    .await;
    check_route(&mut f, "retest", Needs::Enter, false, |f, i| {
        let mut b = nuclear_test(&format!("RT{i}"), 0.0, 1930.0, 11.5);
        b.as_object_mut().unwrap().remove("chainage_m");
        (
            format!("/api/v1/field-tests/{}/retests", f.failed[i]),
            Body::Json(b),
        )
    })
    .await;
    check_route(&mut f, "void", Needs::Void, false, |f, i| {
        (
            format!("/api/v1/field-tests/{}/void", f.passed[i]),
            Body::Json(json!({"reason": "matrix"})),
        )
    })
    .await;
    check_route(&mut f, "submit", Needs::Submit, false, |f, _| {
        (
            format!("/api/v1/lots/{}/submit", f.ready_lot),
            Body::Json(json!({})),
        )
    })
    .await;
    check_route(&mut f, "reject", Needs::Review, false, |f, _| {
        (
            format!("/api/v1/lots/{}/reject", f.submitted_lot),
            Body::Json(json!({"comment": "redo"})),
        )
    })
    .await;
    // The rejected lot goes back for review, then accept is tried by everyone.
    let (s, _) = f
        .app
        .post(
            &format!("/api/v1/lots/{}/submit", f.submitted_lot),
            &json!({}),
        )
        .await;
    assert_eq!(s, 200);
    check_route(&mut f, "accept", Needs::Review, false, |f, _| {
        (
            format!("/api/v1/lots/{}/accept", f.submitted_lot),
            Body::Json(json!({})),
        )
    })
    .await;
    check_route(
        &mut f,
        "create token",
        Needs::MakeTechToken,
        false,
        move |_, i| {
            (
                format!("/api/v1/projects/{p}/tokens"),
                Body::Json(json!({"name": format!("dev {i}"), "role": "technician"})),
            )
        },
    )
    .await;
    check_route(
        &mut f,
        "revoke token",
        Needs::RevokeViewerToken,
        false,
        |f, i| {
            (
                format!("/api/v1/tokens/{}/revoke", f.tokens_to_revoke[i]),
                Body::Json(json!({})),
            )
        },
    )
    .await;
    check_route(&mut f, "calculator", Needs::SignedIn, false, |_, _| {
        (
            "/api/v1/calc/oversize".into(),
            Body::Json(
                json!({"fine_dry_density_kg_m3": 1900.0, "fine_water_content_pct": 12.0,
            "coarse_pct": 20.0, "coarse_specific_gravity": 2.65, "coarse_water_content_pct": 2.0}),
            ),
        )
    })
    .await;

    // The same rights hold for the page forms.
    check_route(&mut f, "entry form", Needs::Enter, true, |f, _| {
        (
            format!("/lots/{}/entry", f.open_lot),
            Body::Form(nuclear_form("1+090")),
        )
    })
    .await;
    check_route(&mut f, "void form", Needs::Void, true, |f, _| {
        (
            format!("/field-tests/{}/void", f.passed[2]),
            Body::Form(vec![("reason", "form".into())]),
        )
    })
    .await;
    let ready2 = lot(
        &f.app,
        &crate::helpers::Frame {
            project: f.project,
            clause: f.clause,
            source: f.source,
            lab_test: f.lab,
            layer: f.layer,
            lot: f.open_lot,
        },
        "READY2",
        7000.0,
    )
    .await;
    for i in 0..3 {
        add_test(
            &f.app,
            ready2,
            &format!("R2-{i}"),
            7010.0 + 20.0 * f64::from(i),
            0.98,
            1960.0,
            11.4,
        )
        .await;
    }
    check_route(&mut f, "submit form", Needs::Submit, true, move |_, _| {
        (
            format!("/lots/{ready2}/submit"),
            Body::Form(vec![("comment", "".into())]),
        )
    })
    .await;
    check_route(&mut f, "accept form", Needs::Review, true, move |_, _| {
        (
            format!("/lots/{ready2}/accept"),
            Body::Form(vec![("comment", "ok".into())]),
        )
    })
    .await;
}

#[tokio::test]
async fn a_member_sees_only_their_projects_and_tokens_work_until_revoked() {
    let f = fixture().await;
    let (s, mine) = {
        let r = f
            .outsider
            .get(f.app.url("/api/v1/projects"))
            .send()
            .await
            .unwrap();
        (r.status().as_u16(), r.json::<Value>().await.unwrap())
    };
    assert_eq!(s, 200);
    let codes: Vec<_> = mine
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["code"].clone())
        .collect();
    assert_eq!(codes, vec![json!("OTH")]);
    let r = f
        .outsider
        .get(f.app.url(&format!("/lots/{}", f.open_lot)))
        .send()
        .await
        .unwrap();
    assert_eq!(
        r.status().as_u16(),
        404,
        "another project's lot page is not shown"
    );

    // The technician token enters a test; its use is recorded; revoked, it stops working.
    let tech = f.client(Who::TechToken);
    let r = tech
        .post(
            f.app
                .url(&format!("/api/v1/lots/{}/field-tests", f.open_lot)),
        )
        .json(&nuclear_test("TOK-1", 1085.0, 1900.0, 11.0))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 201);
    let t: Value = r.json().await.unwrap();
    assert_eq!(t["created_by"], "token tablet 3 (technician)");
    let (_, tokens) = f
        .app
        .get(&format!("/api/v1/projects/{}/tokens", f.project))
        .await;
    let tablet = tokens
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["name"] == "tablet 3")
        .unwrap()
        .clone();
    assert!(tablet["last_used_at"].is_string(), "last use recorded");
    assert!(
        tablet.get("token_hash").is_none() && !tablet.to_string().contains(&f.tech_secret),
        "secret never listed"
    );
    let (s, _) = f
        .app
        .post(
            &format!("/api/v1/tokens/{}/revoke", tablet["id"]),
            &json!({}),
        )
        .await;
    assert_eq!(s, 200);
    let r = tech
        .get(f.app.url(&format!("/api/v1/lots/{}", f.open_lot)))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 401);
}

/// Signs in through the form and returns the response.
async fn form_sign_in(
    app: &TestApp,
    user: &str,
    password: &str,
    extra: &[(&str, &str)],
) -> reqwest::Response {
    let mut req = app
        .anonymous
        .post(app.url("/sign-in"))
        .form(&[("username", user), ("password", password)]);
    for (k, v) in extra {
        req = req.header(*k, *v);
    }
    req.send().await.unwrap()
}

fn session_from(r: &reqwest::Response) -> (String, String) {
    let c = r.headers()["set-cookie"].to_str().unwrap().to_string();
    let secret = c
        .split(';')
        .next()
        .unwrap()
        .split_once('=')
        .unwrap()
        .1
        .to_string();
    (secret, c)
}

#[tokio::test]
async fn sign_in_sets_a_guarded_cookie_rotates_it_and_idle_sessions_expire() {
    let app = spawn_app().await;
    let r = form_sign_in(&app, "t.qc", crate::helpers::TEST_PASSWORD, &[]).await;
    assert_eq!(r.status().as_u16(), 303);
    let (first, cookie) = session_from(&r);
    assert!(cookie.contains("HttpOnly"), "{cookie}");
    assert!(cookie.contains("SameSite=Lax"), "{cookie}");
    assert!(cookie.contains("Path=/"), "{cookie}");
    assert!(
        !cookie.contains("Secure"),
        "plain http: no Secure flag ({cookie})"
    );
    let r = form_sign_in(
        &app,
        "t.qc",
        crate::helpers::TEST_PASSWORD,
        &[("x-forwarded-proto", "https")],
    )
    .await;
    assert!(
        session_from(&r).1.contains("Secure"),
        "behind TLS the cookie is Secure"
    );

    // Signing in again while presenting the first cookie ends that session and issues a new secret.
    let origin = format!("http://{}", app.addr);
    let with_first = client_with(&origin, Some(&first));
    let r = with_first
        .post(app.url("/sign-in"))
        .form(&[
            ("username", "t.qc"),
            ("password", crate::helpers::TEST_PASSWORD),
        ])
        .send()
        .await
        .unwrap();
    let (second, _) = session_from(&r);
    assert_ne!(first, second);
    let r = with_first.get(app.url("/api/v1/me")).send().await.unwrap();
    assert_eq!(
        r.status().as_u16(),
        401,
        "the rotated-out session no longer works"
    );
    let with_second = client_with(&origin, Some(&second));
    let r = with_second.get(app.url("/api/v1/me")).send().await.unwrap();
    assert_eq!(r.status().as_u16(), 200);

    // Idle for longer than the limit: the session has expired.
    let stale =
        liftledger::clock::format(time::OffsetDateTime::now_utc() - time::Duration::hours(9));
    sqlx::query("UPDATE sessions SET last_seen_at = $1 WHERE token_hash = $2")
        .bind(stale)
        .bind(liftledger::auth::secret::digest(&second))
        .execute(&app.sql)
        .await
        .unwrap();
    let r = with_second.get(app.url("/api/v1/me")).send().await.unwrap();
    assert_eq!(r.status().as_u16(), 401);
    let r = with_second.get(app.url("/")).send().await.unwrap();
    assert_eq!(
        r.status().as_u16(),
        303,
        "pages send the expired user to sign in"
    );
    assert_eq!(r.headers()["location"], "/sign-in");

    // Signing out ends the session.
    let r = form_sign_in(&app, "t.qc", crate::helpers::TEST_PASSWORD, &[]).await;
    let (third, _) = session_from(&r);
    let c = client_with(&origin, Some(&third));
    let r = c.post(app.url("/sign-out")).send().await.unwrap();
    assert_eq!(r.status().as_u16(), 303);
    assert_eq!(
        c.get(app.url("/api/v1/me"))
            .send()
            .await
            .unwrap()
            .status()
            .as_u16(),
        401
    );
}

#[tokio::test]
async fn wrong_passwords_slow_down_and_are_audited() {
    let app = spawn_app().await;
    for i in 0..5 {
        let r = form_sign_in(&app, "t.tech", "not-the-password", &[]).await;
        assert_eq!(r.status().as_u16(), 401, "attempt {i}");
    }
    // The sixth attempt, even with the right password, must wait.
    let r = form_sign_in(&app, "t.tech", crate::helpers::TEST_PASSWORD, &[]).await;
    assert_eq!(r.status().as_u16(), 429);
    let wait: u64 = r.headers()["retry-after"]
        .to_str()
        .unwrap()
        .parse()
        .unwrap();
    assert!((1..=60).contains(&wait), "wait {wait}");
    let failures: i64 = sqlx::query_scalar(
        "SELECT COUNT(*) FROM audit_log WHERE action = 'sign_in_failed' AND actor = 't.tech'",
    )
    .fetch_one(&app.sql)
    .await
    .unwrap();
    assert_eq!(failures, 5);
    // The wait is bounded: failures older than the window stop counting, and the real user gets in.
    sqlx::query("UPDATE sign_in_failures SET at = '2000-01-01T00:00:00Z'")
        .execute(&app.sql)
        .await
        .unwrap();
    let r = form_sign_in(&app, "t.tech", crate::helpers::TEST_PASSWORD, &[]).await;
    assert_eq!(r.status().as_u16(), 303);
}

#[tokio::test]
async fn cross_site_forms_are_refused_and_change_nothing() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let secret = {
        let s = liftledger::ledger::accounts::sign_in(
            &app.pool,
            "t.qc",
            crate::helpers::TEST_PASSWORD,
            "127.0.0.1",
        )
        .await
        .unwrap();
        s.secret
    };
    let cookie = format!("{}={secret}", liftledger::http::caller::SESSION_COOKIE);
    let before = app.all_counts().await;
    let raw = reqwest::Client::builder()
        .redirect(reqwest::redirect::Policy::none())
        .build()
        .unwrap();
    let form = nuclear_form("1+050");
    for (origin, referer) in [
        (Some("http://evil.example"), None),
        (None, Some("http://evil.example/page")),
        (None, None),
    ] {
        let mut req = raw
            .post(app.url(&format!("/lots/{}/entry", f.lot)))
            .header("cookie", &cookie)
            .form(&form);
        if let Some(o) = origin {
            req = req.header("origin", o);
        }
        if let Some(r) = referer {
            req = req.header("referer", r);
        }
        let r = req.send().await.unwrap();
        assert_eq!(
            r.status().as_u16(),
            403,
            "origin {origin:?} referer {referer:?}"
        );
    }
    assert_eq!(app.all_counts().await, before);
    // The same form from this site is accepted (Referer only, as some browsers send).
    let r = raw
        .post(app.url(&format!("/lots/{}/entry", f.lot)))
        .header("cookie", &cookie)
        .header("referer", app.url(&format!("/lots/{}/entry", f.lot)))
        .form(&form)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 303);
}

#[tokio::test]
async fn the_audit_trail_cannot_be_changed_even_with_raw_sql() {
    let app = spawn_app().await;
    build_frame(&app, json!({"rule": "every_test"})).await;
    let n = app.count("audit_log").await;
    assert!(n >= 6);
    let upd = sqlx::query("UPDATE audit_log SET actor = 'someone else'")
        .execute(&app.sql)
        .await;
    assert!(upd.unwrap_err().to_string().contains("append-only"));
    let del = sqlx::query("DELETE FROM audit_log").execute(&app.sql).await;
    assert!(del.unwrap_err().to_string().contains("append-only"));
    assert_eq!(app.count("audit_log").await, n);
}

#[tokio::test]
async fn a_broken_database_answers_a_plain_500_without_internals() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    sqlx::query("DROP TABLE lot_transitions")
        .execute(&app.sql)
        .await
        .unwrap();
    let (s, e) = app.get(&format!("/api/v1/lots/{}/history", f.lot)).await;
    assert_eq!(s, 500);
    let text = e.to_string();
    assert!(text.contains("internal error"), "{text}");
    for leak in ["SELECT", "lot_transitions", "sqlx", "panicked", ".rs:"] {
        assert!(!text.contains(leak), "{leak} leaked: {text}");
    }
    let r = app.client.get(app.url("/")).send().await.unwrap();
    let headers = r.headers().clone();
    assert_eq!(headers["x-content-type-options"], "nosniff");
    assert_eq!(headers["x-frame-options"], "DENY");
    let csp = headers["content-security-policy"].to_str().unwrap();
    assert!(
        csp.contains("script-src 'self'")
            && !csp.contains("unsafe-inline")
            && csp.contains("frame-ancestors 'none'")
    );
    assert!(headers.contains_key("referrer-policy"));
}
