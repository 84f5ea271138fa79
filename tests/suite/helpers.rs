//! Spawning a real liftledger server on a random loopback port with a fresh SQLite file.

use std::net::SocketAddr;

use liftledger::{AppState, Settings, db};
use serde_json::{Value, json};
use tokio::sync::oneshot;

/// The people every test server knows, one per role (plus an admin).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum As {
    Admin,
    Qc,
    Tech,
    Engineer,
    Viewer,
}

impl As {
    /// Every signed-in persona.
    pub const ALL: [As; 5] = [As::Admin, As::Qc, As::Tech, As::Engineer, As::Viewer];

    /// (username, display name, project role or "admin").
    pub fn account(self) -> (&'static str, &'static str, &'static str) {
        match self {
            As::Admin => ("t.admin", "T. Admin", "admin"),
            As::Qc => ("t.qc", "T. Quality", "qc_manager"),
            As::Tech => ("t.tech", "T. Technician", "technician"),
            As::Engineer => ("t.engineer", "T. Engineer", "client_engineer"),
            As::Viewer => ("t.viewer", "T. Viewer", "viewer"),
        }
    }
}

/// The password of every test user.
pub const TEST_PASSWORD: &str = "test-password-123";

/// One argon2id hash of the test password, computed once per test process.
fn test_password_hash() -> &'static str {
    static HASH: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    HASH.get_or_init(|| liftledger::auth::password::hash(TEST_PASSWORD).expect("hash"))
}

/// A running server and what a test needs to talk to it.
pub struct TestApp {
    pub addr: SocketAddr,
    /// Signed in as the QC manager (member of every project made through `post`).
    pub client: reqwest::Client,
    /// One signed-in client per persona.
    pub clients: Vec<(As, reqwest::Client)>,
    /// A client with no session at all.
    pub anonymous: reqwest::Client,
    /// The server's pool (native drivers): for calling `liftledger::db` functions.
    pub pool: db::Pool,
    /// A raw pool on the same database for the tests' own SQL ([`crate::raw_sql`]).
    pub sql: sqlx::AnyPool,
    /// The server's own state (its ledger handle: writer and caches).
    pub state: AppState,
    /// Where the database is (an SQLite file, or a fresh PostgreSQL database).
    pub location: db::Location,
    _dir: std::sync::Arc<tempfile::TempDir>,
    stop: Option<oneshot::Sender<()>>,
    handle: Option<tokio::task::JoinHandle<()>>,
}

impl TestApp {
    /// Full URL of a path on this server.
    pub fn url(&self, path: &str) -> String {
        format!("http://{}{}", self.addr, path)
    }

    /// The client of a persona.
    pub fn client_as(&self, who: As) -> &reqwest::Client {
        &self
            .clients
            .iter()
            .find(|(w, _)| *w == who)
            .expect("persona")
            .1
    }

    /// GET a path as the QC manager and return (status, JSON body).
    pub async fn get(&self, path: &str) -> (u16, Value) {
        self.get_as(As::Qc, path).await
    }

    /// GET a path as a persona.
    pub async fn get_as(&self, who: As, path: &str) -> (u16, Value) {
        let r = self
            .client_as(who)
            .get(self.url(path))
            .send()
            .await
            .expect("GET failed");
        let status = r.status().as_u16();
        (status, r.json().await.unwrap_or(Value::Null))
    }

    /// POST JSON as whoever the route is meant for: the admin creates projects, the
    /// client engineer accepts and rejects, the QC manager does the rest.
    pub async fn post(&self, path: &str, body: &Value) -> (u16, Value) {
        let who = if path == "/api/v1/projects" {
            As::Admin
        } else if path.ends_with("/accept") || path.ends_with("/reject") {
            As::Engineer
        } else {
            As::Qc
        };
        let (s, v) = self.post_as(who, path, body).await;
        if who == As::Admin
            && s == 201
            && let Some(id) = v["id"].as_i64()
        {
            self.grant_all(id).await;
        }
        (s, v)
    }

    /// POST JSON as a persona.
    pub async fn post_as(&self, who: As, path: &str, body: &Value) -> (u16, Value) {
        let r = self
            .client_as(who)
            .post(self.url(path))
            .json(body)
            .send()
            .await
            .expect("POST failed");
        let status = r.status().as_u16();
        (status, r.json().await.unwrap_or(Value::Null))
    }

    /// Gives every persona its role in a project.
    pub async fn grant_all(&self, project_id: i64) {
        let now = liftledger::clock::now();
        let mut tx = db::begin_write(&self.pool).await.expect("tx");
        for who in As::ALL {
            let (username, _, role) = who.account();
            if role == "admin" {
                continue;
            }
            let user = db::users::by_username(&self.pool, username)
                .await
                .unwrap()
                .unwrap();
            let role = liftledger::auth::Role::parse_code(role).expect("a project role");
            db::users::grant(&mut tx, user.id, project_id, role, &now)
                .await
                .expect("grant");
        }
        tx.commit().await.expect("commit");
    }

    /// POST raw bytes with a content type.
    pub async fn post_raw(&self, path: &str, body: &'static str) -> (u16, Value) {
        let r = self
            .client
            .post(self.url(path))
            .header("content-type", "application/json")
            .body(body)
            .send()
            .await
            .expect("POST failed");
        let status = r.status().as_u16();
        (status, r.json().await.unwrap_or(Value::Null))
    }

    /// Stops the server and waits for it to finish; the database file stays.
    pub async fn stop(mut self) -> (std::sync::Arc<tempfile::TempDir>, db::Location) {
        if let Some(s) = self.stop.take() {
            let _ = s.send(());
        }
        if let Some(h) = self.handle.take() {
            let _ = h.await;
        }
        self.sql.close().await;
        self.pool.close().await;
        (self._dir.clone(), self.location.clone())
    }

    /// Rows in a table, straight from SQLite (to prove refused requests wrote nothing).
    pub async fn count(&self, table: &str) -> i64 {
        let sql = format!("SELECT COUNT(*) FROM {table}");
        sqlx::query_scalar(sqlx::AssertSqlSafe(sql))
            .fetch_one(&self.sql)
            .await
            .expect("count")
    }

    /// Row counts of every table that holds records.
    pub async fn all_counts(&self) -> Vec<(String, i64)> {
        let mut out = Vec::new();
        for t in TABLES {
            out.push((t.to_string(), self.count(t).await));
        }
        out
    }
}

/// Every table whose rows a refused request must leave alone.
pub const TABLES: [&str; 11] = [
    "projects",
    "clauses",
    "sources",
    "lab_tests",
    "zones",
    "layers",
    "lots",
    "field_tests",
    "lot_transitions",
    "certificates",
    "audit_log",
];

/// Starts a server on a fresh database in a new temp dir.
pub async fn spawn_app() -> TestApp {
    let dir = std::sync::Arc::new(tempfile::tempdir().expect("tempdir"));
    let path = dir.path().join("test.sqlite");
    spawn_on(dir, fresh_location(&path).await).await
}

/// The engine the tests run on: `LIFTLEDGER_TEST_DB=postgres` selects PostgreSQL
/// (a new database per test on `LIFTLEDGER_TEST_PG`, default the local server's `test`), else SQLite.
pub fn engine() -> db::Engine {
    match std::env::var("LIFTLEDGER_TEST_DB").as_deref() {
        Ok("postgres") => db::Engine::Postgres,
        _ => db::Engine::Sqlite,
    }
}

/// A new, empty database of the selected engine (`path` is used for SQLite).
pub async fn fresh_location(path: &std::path::Path) -> db::Location {
    match engine() {
        db::Engine::Sqlite => db::Location::sqlite(path),
        db::Engine::Postgres => {
            use sqlx::Connection;
            let admin = std::env::var("LIFTLEDGER_TEST_PG")
                .unwrap_or_else(|_| "postgres://postgres@127.0.0.1:5432/test".to_string());
            let name = format!(
                "ll_t_{}",
                &liftledger::auth::secret::digest(&liftledger::auth::secret::new("").unwrap())
                    [..16]
            );
            let mut conn = sqlx::PgConnection::connect(&admin)
                .await
                .expect("PostgreSQL for tests");
            sqlx::query(sqlx::AssertSqlSafe(format!("CREATE DATABASE {name}")))
                .execute(&mut conn)
                .await
                .expect("create test database");
            let base = admin
                .rsplit_once('/')
                .map_or(admin.as_str(), |(b, _)| b)
                .to_string();
            db::Location::parse(&format!("{base}/{name}"), 8)
        }
    }
}

/// Starts a server on an existing (or new) database file.
pub async fn spawn_on(dir: std::sync::Arc<tempfile::TempDir>, location: db::Location) -> TestApp {
    spawn_with(dir, location, false).await
}

/// Starts a server; `trust_proxy` as `serve --trust-proxy`.
pub async fn spawn_with(
    dir: std::sync::Arc<tempfile::TempDir>,
    location: db::Location,
    trust_proxy: bool,
) -> TestApp {
    if std::env::var("TEST_LOG").is_ok() {
        let _ = tracing_subscriber::fmt().with_env_filter("info").try_init();
    }
    let pool = db::connect(&location).await.expect("open db");
    let sql = crate::raw_sql::raw_pool(&location).await;
    let listener = tokio::net::TcpListener::bind("127.0.0.1:0")
        .await
        .expect("bind");
    let addr = listener.local_addr().expect("addr");
    let state = AppState::new(
        pool.clone(),
        Settings {
            demo: false,
            secure_cookies: false,
            trust_proxy,
        },
    );
    let (tx, rx) = oneshot::channel::<()>();
    let served = state.clone();
    let handle = tokio::spawn(async move {
        liftledger::serve(listener, served, async {
            let _ = rx.await;
        })
        .await
        .expect("server failed");
    });
    let origin = format!("http://{addr}");
    let mut clients = Vec::new();
    for who in As::ALL {
        let secret = signed_in_session(&pool, who).await;
        clients.push((who, client_with(&origin, Some(&secret))));
    }
    TestApp {
        addr,
        client: clients
            .iter()
            .find(|(w, _)| *w == As::Qc)
            .unwrap()
            .1
            .clone(),
        clients,
        anonymous: client_with(&origin, None),
        pool,
        sql,
        state,
        location,
        _dir: dir,
        stop: Some(tx),
        handle: Some(handle),
    }
}

/// Ids of a small project built through the API: a clause, a source, a lab curve, a layer, a lot.
#[derive(Debug, Clone, Copy)]
pub struct Frame {
    pub project: i64,
    pub clause: i64,
    pub source: i64,
    pub lab_test: i64,
    pub layer: i64,
    pub lot: i64,
}

/// The lab points used by `build_frame` (an invented sandy clay, modified effort).
pub fn lab_points() -> Value {
    json!([
        {"water_content_pct": 7.8, "dry_density_kg_m3": 1868.0},
        {"water_content_pct": 9.7, "dry_density_kg_m3": 1927.0},
        {"water_content_pct": 11.4, "dry_density_kg_m3": 1958.0},
        {"water_content_pct": 13.2, "dry_density_kg_m3": 1932.0},
        {"water_content_pct": 15.1, "dry_density_kg_m3": 1872.0}
    ])
}

/// Builds project → clause → source → lab test → layer → lot through the API.
pub async fn build_frame(app: &TestApp, rule: Value) -> Frame {
    let (s, p) = app
        .post(
            "/api/v1/projects",
            &json!({"code": "TST", "name": "Test Link", "contract": "T-1"}),
        )
        .await;
    assert_eq!(s, 201, "{p}");
    let project = p["id"].as_i64().unwrap();
    let mut clause = json!({"code": "C1", "rc_min_pct": 95.0, "moisture_below_pct": 2.0, "moisture_above_pct": 2.0,
        "effort": "astm_d1557_4in", "area_per_test_m2": 500.0, "min_tests_per_lot": 3});
    for (k, v) in rule.as_object().unwrap() {
        clause[k] = v.clone();
    }
    let (s, c) = app
        .post(&format!("/api/v1/projects/{project}/clauses"), &clause)
        .await;
    assert_eq!(s, 201, "{c}");
    let (s, src) = app
        .post(
            &format!("/api/v1/projects/{project}/sources"),
            &json!({"code": "S1", "name": "Pit one", "gs_fines": 2.68, "gs_coarse": 2.65}),
        )
        .await;
    assert_eq!(s, 201, "{src}");
    let source = src["id"].as_i64().unwrap();
    let (s, lab) = app
        .post(
            &format!("/api/v1/sources/{source}/lab-tests"),
            &json!({"code": "L1", "tested_on": "2026-11-02", "effort": "astm_d1557_4in", "points": lab_points()}),
        )
        .await;
    assert_eq!(s, 201, "{lab}");
    let (s, layer) = app
        .post(
            &format!("/api/v1/projects/{project}/layers"),
            &json!({"zone": "Fill", "number": 1}),
        )
        .await;
    assert_eq!(s, 201, "{layer}");
    let (s, lot) = app
        .post(
            &format!("/api/v1/projects/{project}/lots"),
            &json!({"code": "LOT-1", "layer_id": layer["id"], "chainage_from_m": 1000.0, "chainage_to_m": 1100.0,
                    "offset_left_m": -5.0, "offset_right_m": 5.0, "clause_id": c["id"], "lab_test_id": lab["id"]}),
        )
        .await;
    assert_eq!(s, 201, "{lot}");
    Frame {
        project,
        clause: c["id"].as_i64().unwrap(),
        source,
        lab_test: lab["id"].as_i64().unwrap(),
        layer: layer["id"].as_i64().unwrap(),
        lot: lot["id"].as_i64().unwrap(),
    }
}

/// A nuclear-gauge test body at a chainage giving the wanted dry density and water content.
pub fn nuclear_test(number: &str, chainage_m: f64, dry: f64, w_pct: f64) -> Value {
    json!({
        "number": number,
        "tested_at": "2026-11-20T09:00:00Z",
        "technician": "A. Tester",
        "chainage_m": chainage_m,
        "offset_m": 1.5,
        "readings": {"method": "nuclear", "wet_density_kg_m3": dry * (1.0 + w_pct / 100.0),
                     "moisture_density_kg_m3": dry * w_pct / 100.0}
    })
}

/// Starts a server on a fresh database holding the invented demo project.
pub async fn spawn_demo() -> TestApp {
    let dir = std::sync::Arc::new(tempfile::tempdir().expect("tempdir"));
    let path = dir.path().join("demo.sqlite");
    let location = fresh_location(&path).await;
    {
        let pool = db::connect(&location).await.expect("open db");
        liftledger::demo::load(&pool).await.expect("demo loads");
        pool.close().await;
    }
    let app = spawn_on(dir, location).await;
    app.grant_all(1).await;
    app
}

/// GET a page and return (status, body text).
pub async fn page(app: &TestApp, path: &str) -> (u16, String) {
    let r = app
        .client
        .get(app.url(path))
        .send()
        .await
        .expect("GET failed");
    let status = r.status().as_u16();
    (status, r.text().await.unwrap_or_default())
}

/// Every inline `<svg>…</svg>` in a page.
pub fn svgs(html: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut rest = html;
    while let Some(start) = rest.find("<svg") {
        let Some(end) = rest[start..].find("</svg>") else {
            break;
        };
        out.push(&rest[start..start + end + 6]);
        rest = &rest[start + end + 6..];
    }
    out
}

/// Text of every page of a PDF, read back with lopdf.
pub fn pdf_pages(bytes: &[u8]) -> Vec<String> {
    let doc = lopdf::Document::load_mem(bytes).expect("PDF parses");
    doc.get_pages()
        .keys()
        .map(|p| doc.extract_text(&[*p]).expect("page text"))
        .collect()
}

/// Makes sure a persona's user exists and returns the secret of a fresh session for it,
/// as a successful sign-in would (sign-in itself is tested through the form).
pub async fn signed_in_session(pool: &db::Pool, who: As) -> String {
    let (username, display, role) = who.account();
    let now = liftledger::clock::now();
    let user = match db::users::by_username(pool, username).await.unwrap() {
        Some(u) => u,
        None => {
            let mut tx = db::begin_write(pool).await.unwrap();
            db::users::insert(
                &mut tx,
                username,
                display,
                test_password_hash(),
                role == "admin",
                false,
                &now,
            )
            .await
            .unwrap();
            tx.commit().await.unwrap();
            db::users::by_username(pool, username)
                .await
                .unwrap()
                .unwrap()
        }
    };
    let secret = liftledger::auth::secret::new("lls_").unwrap();
    let mut tx = db::begin_write(pool).await.unwrap();
    db::users::start_session(
        &mut tx,
        &liftledger::auth::secret::digest(&secret),
        user.id,
        &now,
    )
    .await
    .unwrap();
    tx.commit().await.unwrap();
    secret
}

/// A client that sends this site's Origin and, when given, a session cookie.
pub fn client_with(origin: &str, session: Option<&str>) -> reqwest::Client {
    let mut headers = reqwest::header::HeaderMap::new();
    headers.insert("origin", origin.parse().unwrap());
    if let Some(s) = session {
        headers.insert(
            "cookie",
            format!("{}={s}", liftledger::http::caller::SESSION_COOKIE)
                .parse()
                .unwrap(),
        );
    }
    reqwest::Client::builder()
        .default_headers(headers)
        .redirect(reqwest::redirect::Policy::none())
        .build()
        .unwrap()
}

/// Signs in through the form; the session secret when the server set one, and the status.
pub async fn sign_in_form(app: &TestApp, username: &str, password: &str) -> (u16, Option<String>) {
    let r = app
        .anonymous
        .post(app.url("/sign-in"))
        .form(&[("username", username), ("password", password)])
        .send()
        .await
        .expect("sign-in");
    let status = r.status().as_u16();
    let secret = r
        .headers()
        .get_all("set-cookie")
        .iter()
        .filter_map(|v| v.to_str().ok())
        .find_map(|c| {
            c.strip_prefix(&format!("{}=", liftledger::http::caller::SESSION_COOKIE))
                .and_then(|rest| rest.split(';').next())
                .filter(|v| !v.is_empty())
                .map(str::to_string)
        });
    (status, secret)
}

/// A client signed in with a session secret, sending this server's Origin.
pub fn session_client(app: &TestApp, secret: &str) -> reqwest::Client {
    client_with(&format!("http://{}", app.addr), Some(secret))
}

/// A client sending a bearer token.
pub fn token_client(token: &str) -> reqwest::Client {
    let mut h = reqwest::header::HeaderMap::new();
    h.insert("authorization", format!("Bearer {token}").parse().unwrap());
    reqwest::Client::builder()
        .default_headers(h)
        .redirect(reqwest::redirect::Policy::none())
        .build()
        .unwrap()
}

/// Status and JSON of a request.
pub async fn answer(r: reqwest::RequestBuilder) -> (u16, Value) {
    let r = r.send().await.expect("request");
    let s = r.status().as_u16();
    (s, r.json().await.unwrap_or(Value::Null))
}
