//! The app under test (in-process, on a fresh demo database) and the browser that drives it.

use std::net::SocketAddr;
use std::path::PathBuf;

use liftledger::{AppState, Settings, db};
use tokio::sync::oneshot;

use crate::webdriver::{self, Driver, Session};

/// The demo project's id.
pub const PROJECT: i64 = 1;

/// A liftledger server on a random loopback port, holding the invented demo project.
pub struct DemoApp {
    pub addr: SocketAddr,
    /// The server's own database, for checking what a form really saved.
    pub pool: db::Pool,
    /// A raw pool on the same file for the tests' own SQL ([`crate::raw_sql`]).
    pub sql: sqlx::AnyPool,
    _dir: tempfile::TempDir,
    stop: Option<oneshot::Sender<()>>,
}

/// What the record says about a lot.
#[derive(Debug, Clone)]
pub struct LotFacts {
    pub code: String,
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
    pub clause: String,
    /// The reference curve's maximum dry density, kg/m³.
    pub mdd: f64,
    /// The reference curve's optimum moisture content, %.
    pub omc: f64,
}

/// A field test as stored.
#[derive(Debug, Clone)]
pub struct SavedTest {
    pub lot_id: i64,
    pub technician: String,
    pub chainage_m: f64,
    pub retest_of: Option<i64>,
}

impl DemoApp {
    /// Loads the demo into a fresh SQLite file and serves it.
    pub async fn spawn() -> DemoApp {
        Self::spawn_with(true).await.0
    }

    /// Serves an empty database as a first start does: no project, one admin with a
    /// printed password (returned).
    pub async fn spawn_empty() -> (DemoApp, String) {
        let (app, password) = Self::spawn_with(false).await;
        (
            app,
            password.expect("a first start prints the admin's password"),
        )
    }

    async fn spawn_with(demo: bool) -> (DemoApp, Option<String>) {
        let dir = tempfile::tempdir().expect("tempdir");
        let path = dir.path().join("browser.sqlite");
        let pool = db::open(&path).await.expect("open db");
        let password = if demo {
            liftledger::demo::load(&pool).await.expect("load demo");
            None
        } else {
            liftledger::ledger::accounts::ensure_first_admin(&pool)
                .await
                .expect("first admin")
        };
        let listener = tokio::net::TcpListener::bind("127.0.0.1:0")
            .await
            .expect("bind");
        let addr = listener.local_addr().expect("addr");
        let tx = Self::serve_on(listener, pool.clone(), demo);
        let sql = crate::raw_sql::raw_of(&pool).await;
        (
            DemoApp {
                addr,
                pool,
                sql,
                _dir: dir,
                stop: Some(tx),
            },
            password,
        )
    }

    /// Serves the database on a bound listener until the returned sender fires.
    fn serve_on(
        listener: tokio::net::TcpListener,
        pool: db::Pool,
        demo: bool,
    ) -> oneshot::Sender<()> {
        let state = AppState::new(
            pool,
            Settings {
                demo,
                secure_cookies: false,
                trust_proxy: false,
            },
        );
        let (tx, rx) = oneshot::channel::<()>();
        tokio::spawn(async move {
            liftledger::serve(listener, state, async {
                let _ = rx.await;
            })
            .await
            .expect("server failed");
        });
        tx
    }

    /// Stops the server (letting requests in flight finish); `restart` starts it again.
    pub fn stop_server(&mut self) {
        if let Some(s) = self.stop.take() {
            let _ = s.send(());
        }
    }

    /// Stops the server (letting requests in flight finish) and starts it again on the
    /// same address and database, as a restart of the process would.
    pub async fn restart(&mut self) {
        if let Some(s) = self.stop.take() {
            let _ = s.send(());
        }
        let mut tries = 0;
        let listener = loop {
            match tokio::net::TcpListener::bind(self.addr).await {
                Ok(l) => break l,
                Err(e) if tries < 100 => {
                    tries += 1;
                    let _ = e;
                    tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                }
                Err(e) => panic!("rebinding {}: {e}", self.addr),
            }
        };
        self.stop = Some(Self::serve_on(listener, self.pool.clone(), true));
    }

    /// Full URL of a path on this server.
    pub fn url(&self, path: &str) -> String {
        format!("http://{}{}", self.addr, path)
    }

    /// How many field tests the demo project holds.
    pub async fn field_test_count(&self) -> i64 {
        sqlx::query_scalar("SELECT COUNT(*) FROM field_tests WHERE project_id = $1")
            .bind(PROJECT)
            .fetch_one(&self.sql)
            .await
            .expect("count field tests")
    }

    /// How many field tests a lot holds (voided and superseded included).
    pub async fn lot_test_count(&self, lot_id: i64) -> i64 {
        sqlx::query_scalar("SELECT COUNT(*) FROM field_tests WHERE lot_id = $1")
            .bind(lot_id)
            .fetch_one(&self.sql)
            .await
            .expect("count lot tests")
    }

    /// A lot's place, clause and reference curve.
    pub async fn lot(&self, lot_id: i64) -> LotFacts {
        let (code, chainage_from_m, chainage_to_m, clause, mdd, omc): (String, f64, f64, String, f64, f64) =
            sqlx::query_as(
                "SELECT l.code, l.chainage_from_m, l.chainage_to_m, c.code,
                        t.max_dry_density_kg_m3, t.optimum_water_content_pct
                 FROM lots l JOIN clauses c ON c.id = l.clause_id JOIN lab_tests t ON t.id = l.lab_test_id
                 WHERE l.id = $1",
            )
            .bind(lot_id)
            .fetch_one(&self.sql)
            .await
            .expect("lot facts");
        LotFacts {
            code,
            chainage_from_m,
            chainage_to_m,
            clause,
            mdd,
            omc,
        }
    }

    /// The demo project's field tests numbered `number` (at most one, if numbers are unique).
    pub async fn tests_numbered(&self, number: &str) -> Vec<SavedTest> {
        let rows: Vec<(i64, String, f64, Option<i64>)> = sqlx::query_as(
            "SELECT lot_id, technician, chainage_m, retest_of FROM field_tests
             WHERE project_id = $1 AND number = $2",
        )
        .bind(PROJECT)
        .bind(number)
        .fetch_all(&self.sql)
        .await
        .expect("field tests by number");
        rows.into_iter()
            .map(|(lot_id, technician, chainage_m, retest_of)| SavedTest {
                lot_id,
                technician,
                chainage_m,
                retest_of,
            })
            .collect()
    }
}

impl Drop for DemoApp {
    fn drop(&mut self) {
        if let Some(s) = self.stop.take() {
            let _ = s.send(());
        }
    }
}

/// One test's world: a fresh app, a chromedriver, and a phone-sized browser.
///
/// Field order matters: the session closes before its driver goes.
pub struct Rig {
    pub browser: Session,
    pub driver: Driver,
    pub app: DemoApp,
    pub name: &'static str,
}

impl Rig {
    /// Starts everything, signed in as the demo's site technician, or returns `None`
    /// when the browsers are not installed.
    pub async fn start(name: &'static str) -> Option<Rig> {
        Self::start_as(name, "technician").await
    }

    /// Like `start`, signed in as the demo user with `role`.
    pub async fn start_as(name: &'static str, role: &str) -> Option<Rig> {
        let browsers = webdriver::browsers_or_skip()?;
        let app = DemoApp::spawn().await;
        let driver = Driver::start(&browsers).await;
        let browser = driver.session(true).await;
        let rig = Rig {
            browser,
            driver,
            app,
            name,
        };
        rig.sign_in_as(&rig.browser, role).await;
        Some(rig)
    }

    /// Signs a browser in through the sign-in form as the demo's site technician.
    pub async fn sign_in(&self, b: &Session) {
        self.sign_in_as(b, "technician").await;
    }

    /// Signs a browser in through the sign-in form as the demo user with `role`.
    pub async fn sign_in_as(&self, b: &Session, role: &str) {
        let (username, _, _, password) = demo_user(role);
        b.goto(&self.app.url("/sign-in")).await;
        b.wait_for("#sign-in-form").await;
        b.find("#username").await.type_over(username).await;
        b.find("#password").await.type_over(password).await;
        b.find("#sign-in").await.click().await;
        b.wait_until("sign-in to finish", async || {
            let path = b.current_path().await;
            (!path.starts_with("/sign-in")).then_some(())
        })
        .await;
    }

    /// Opens a path of the app in the browser.
    pub async fn open(&self, path: &str) {
        self.browser.goto(&self.app.url(path)).await;
    }

    /// Saves screenshots of the browser's current page as `<test>-<step>`.
    pub async fn shot(&self, step: &str) {
        self.browser
            .save_screenshots(&shots_dir(), &format!("{}-{step}", self.name))
            .await;
    }

    /// Scrolls `css` to the top of the screen and saves what the phone shows as `<test>-<step>.png`.
    pub async fn shot_at(&self, step: &str, css: &str) {
        self.browser
            .script(
                "var e = document.querySelector(arguments[0]); if (e) e.scrollIntoView(true); return !!e;",
                vec![serde_json::json!(css)],
            )
            .await;
        let dir = shots_dir();
        std::fs::create_dir_all(&dir).expect("screenshot dir");
        std::fs::write(
            dir.join(format!("{}-{step}.png", self.name)),
            self.browser.screenshot().await,
        )
        .expect("write screenshot");
    }

    /// Closes the browser cleanly.
    pub async fn finish(self) {
        let Rig {
            browser, driver, ..
        } = self;
        browser.quit().await;
        drop(driver);
    }
}

/// The demo user with a role: (user name, display name, role, password).
pub fn demo_user(role: &str) -> (&'static str, &'static str, &'static str, &'static str) {
    liftledger::ledger::accounts::DEMO_USERS
        .into_iter()
        .find(|u| u.2 == role)
        .unwrap_or_else(|| panic!("the demo has no {role}"))
}

/// `target/browser-shots/` (under `CARGO_TARGET_DIR` when that is set).
pub fn shots_dir() -> PathBuf {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target"));
    target.join("browser-shots")
}

/// A chainage in metres as a technician types it (km+m, "1+234.500").
pub fn km_m(metres: f64) -> String {
    let km = (metres / 1000.0).floor();
    format!("{}+{:07.3}", km as i64, metres - km * 1000.0)
}

/// Nuclear-gauge readings (wet density, moisture density, as typed) giving the
/// wanted dry density and water content.
pub fn nuclear_reading(dry_kg_m3: f64, water_pct: f64) -> (String, String) {
    (
        format!("{:.1}", dry_kg_m3 * (1.0 + water_pct / 100.0)),
        format!("{:.1}", dry_kg_m3 * water_pct / 100.0),
    )
}

/// The number of the test a lot-sheet URL points at ("/lots/3#test-FT-0012" → "FT-0012").
pub fn test_number_in(path: &str) -> Option<String> {
    path.split_once("#test-").map(|(_, n)| n.to_string())
}

#[test]
fn chainages_are_typed_as_km_and_metres() {
    assert_eq!(km_m(200.0), "0+200.000");
    assert_eq!(km_m(1450.25), "1+450.250");
    assert_eq!(km_m(12_005.5), "12+005.500");
}

#[test]
fn nuclear_readings_reduce_back_to_the_wanted_point() {
    let (wet, md) = nuclear_reading(1817.0, 14.3);
    let (wet, md): (f64, f64) = (wet.parse().unwrap(), md.parse().unwrap());
    let dry = wet - md;
    assert!((dry - 1817.0).abs() < 0.2, "{dry}");
    assert!((md / dry * 100.0 - 14.3).abs() < 0.01);
}
