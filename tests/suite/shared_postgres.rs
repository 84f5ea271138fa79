//! Several app servers on one PostgreSQL database, and copying a database between engines.
//!
//! These tests need the PostgreSQL server named by `LIFTLEDGER_TEST_PG`
//! (default: the local server's `test` database); they run whichever engine the
//! rest of the suite uses.

use std::io::{BufRead, BufReader};
use std::process::{Child, Command, Stdio};
use std::sync::Arc;

use liftledger::db;
use serde_json::{Value, json};
use sha2::Digest;

use crate::helpers::{As, spawn_demo};

/// A new empty PostgreSQL database, whatever engine the suite runs on; `None` (and a
/// plain "SKIPPED" line) when no server answers, unless `LIFTLEDGER_REQUIRE_PG=1`.
async fn fresh_postgres() -> Option<db::Location> {
    use sqlx::Connection;
    let admin = std::env::var("LIFTLEDGER_TEST_PG")
        .unwrap_or_else(|_| "postgres://postgres@127.0.0.1:5432/test".to_string());
    let name = format!(
        "ll_t_{}",
        &liftledger::auth::secret::digest(&liftledger::auth::secret::new("").unwrap())[..16]
    );
    let mut conn = match sqlx::PgConnection::connect(&admin).await {
        Ok(c) => c,
        Err(e) if std::env::var("LIFTLEDGER_REQUIRE_PG").as_deref() != Ok("1") => {
            eprintln!(
                "SKIPPED: no PostgreSQL at {admin} ({e}); set LIFTLEDGER_TEST_PG or start one"
            );
            return None;
        }
        Err(e) => panic!("PostgreSQL for tests at {admin}: {e}"),
    };
    sqlx::query(sqlx::AssertSqlSafe(format!("CREATE DATABASE {name}")))
        .execute(&mut conn)
        .await
        .unwrap();
    let base = admin
        .rsplit_once('/')
        .map_or(admin.as_str(), |(b, _)| b)
        .to_string();
    Some(db::Location::parse(&format!("{base}/{name}"), 8))
}

/// A `liftledger serve` process on a database; killed when dropped.
struct Server {
    child: Child,
    base: String,
}

impl Server {
    fn start(location: &db::Location) -> Server {
        let mut child = Command::new(env!("CARGO_BIN_EXE_liftledger"))
            .args([
                "serve",
                "--db",
                &location.url,
                "--addr",
                "127.0.0.1:0",
                "--db-pool",
                "8",
            ])
            .env("RUST_LOG", "warn")
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .expect("start liftledger");
        let out = child.stdout.take().unwrap();
        let mut lines = BufReader::new(out).lines();
        let base = loop {
            let line = lines.next().expect("server printed its address").unwrap();
            if let Some(rest) = line.split(" at http://").nth(1) {
                break format!("http://{}", rest.trim_end_matches('/'));
            }
        };
        std::thread::spawn(move || for _ in lines {});
        Server { child, base }
    }

    fn kill(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        self.kill();
    }
}

fn bearer(secret: &str) -> reqwest::Client {
    let mut h = reqwest::header::HeaderMap::new();
    h.insert("authorization", format!("Bearer {secret}").parse().unwrap());
    reqwest::Client::builder()
        .default_headers(h)
        .build()
        .unwrap()
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn two_servers_on_one_postgres_take_tests_and_issue_consecutive_certificates() {
    let Some(location) = fresh_postgres().await else {
        return;
    };
    let pool = db::connect(&location).await.unwrap();
    liftledger::demo::load(&pool).await.unwrap();
    let system = liftledger::ledger::Actor::system("test setup");
    let token = |role: &'static str| {
        let pool = pool.clone();
        let system = system.clone();
        async move {
            let input = liftledger::ledger::accounts::TokenInput {
                name: format!("load {role}"),
                role: role.into(),
                expires_in_days: None,
            };
            // Each token is made by a demo member whose own role contains it.
            let maker = if role == "client_engineer" {
                "ferreira"
            } else {
                "achterberg"
            };
            let maker = db::users::by_username(&pool, maker)
                .await
                .unwrap()
                .unwrap()
                .id;
            liftledger::ledger::accounts::create_token(&pool, 1, &input, maker, &system)
                .await
                .unwrap()
                .0
        }
    };
    let (tech, qc, eng) = (
        token("technician").await,
        token("qc_manager").await,
        token("client_engineer").await,
    );

    // Sixteen fresh lots on a new layer, each with three passing tests, submitted for review.
    let qc_client = bearer(&qc);
    let servers = [Server::start(&location), Server::start(&location)];
    let base0 = servers[0].base.clone();
    let (_, lab) = get(&qc_client, &format!("{base0}/api/v1/lab-tests/1")).await;
    let mdd = lab["max_dry_density_kg_m3"].as_f64().unwrap();
    let omc = lab["optimum_water_content_pct"].as_f64().unwrap();
    let (s, layer) = post(
        &qc_client,
        &format!("{base0}/api/v1/projects/1/layers"),
        &json!({"zone": "Load", "number": 1}),
    )
    .await;
    assert_eq!(s, 201, "{layer}");
    let mut review_lots = Vec::new();
    let mut open_lots = Vec::new();
    for i in 0..24 {
        let from = 10_000.0 + 100.0 * f64::from(i);
        let (s, lot) = post(
            &qc_client,
            &format!("{base0}/api/v1/projects/1/lots"),
            &json!({"code": format!("LD-{i:02}"), "layer_id": layer["id"], "chainage_from_m": from, "chainage_to_m": from + 100.0,
                    "offset_left_m": -5.0, "offset_right_m": 5.0, "clause_id": 1, "lab_test_id": 1}),
        )
        .await;
        assert_eq!(s, 201, "{lot}");
        let id = lot["id"].as_i64().unwrap();
        if i < 16 {
            for k in 0..3 {
                let t = crate::helpers::nuclear_test(
                    &format!("LD{i}-{k}"),
                    from + 10.0 + 30.0 * f64::from(k),
                    0.98 * mdd,
                    omc,
                );
                assert_eq!(
                    post(
                        &qc_client,
                        &format!("{base0}/api/v1/lots/{id}/field-tests"),
                        &t
                    )
                    .await
                    .0,
                    201
                );
            }
            assert_eq!(
                post(
                    &qc_client,
                    &format!("{base0}/api/v1/lots/{id}/submit"),
                    &json!({})
                )
                .await
                .0,
                200
            );
            review_lots.push(id);
        } else {
            open_lots.push((id, from));
        }
    }
    let certs_before: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM certificates")
        .fetch_one(&crate::raw_sql::raw_of(&pool).await)
        .await
        .unwrap();

    // 32 clients over both servers: 24 enter tests (auto-numbered), 8 accept lots.
    let review = Arc::new(review_lots);
    let mut tasks = Vec::new();
    for c in 0..32usize {
        let base = servers[c % 2].base.clone();
        let (tech, eng) = (tech.clone(), eng.clone());
        let open = open_lots.clone();
        let review = review.clone();
        tasks.push(tokio::spawn(async move {
            let mut done = 0;
            if c < 24 {
                let client = bearer(&tech);
                let (lot, from) = open[c % open.len()];
                for k in 0..10 {
                    let mut t = crate::helpers::nuclear_test(
                        "x",
                        from + 5.0 + 9.0 * k as f64,
                        0.97 * mdd,
                        omc,
                    );
                    t.as_object_mut().unwrap().remove("number");
                    let (s, b) = post(
                        &client,
                        &format!("{base}/api/v1/lots/{lot}/field-tests"),
                        &t,
                    )
                    .await;
                    assert_eq!(s, 201, "{b}");
                    done += 1;
                }
            } else {
                let client = bearer(&eng);
                for lot in review.iter().skip(c - 24).step_by(8) {
                    let (s, b) = post(
                        &client,
                        &format!("{base}/api/v1/lots/{lot}/accept"),
                        &json!({"comment": "load"}),
                    )
                    .await;
                    assert_eq!(s, 200, "{b}");
                    done += 1;
                }
            }
            done
        }));
    }
    let mut total = 0;
    for t in tasks {
        total += t.await.unwrap();
    }
    assert_eq!(total, 24 * 10 + 16);

    // Certificate numbers are unique and consecutive, continuing the demo's.
    let seqs: Vec<i64> = sqlx::query_scalar(
        "SELECT sequence FROM certificates WHERE revision = 1 ORDER BY sequence",
    )
    .fetch_all(&crate::raw_sql::raw_of(&pool).await)
    .await
    .unwrap();
    assert_eq!(
        seqs,
        (1..=seqs.len() as i64).collect::<Vec<_>>(),
        "no gap, no duplicate"
    );
    let certs_after: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM certificates")
        .fetch_one(&crate::raw_sql::raw_of(&pool).await)
        .await
        .unwrap();
    assert_eq!(certs_after - certs_before, 16);
    // Every test has a unique number and its audit row; nothing was lost.
    let (n, distinct): (i64, i64) =
        sqlx::query_as("SELECT COUNT(*), COUNT(DISTINCT number) FROM field_tests")
            .fetch_one(&crate::raw_sql::raw_of(&pool).await)
            .await
            .unwrap();
    assert_eq!(n, distinct);
    // The demo's 463 tests (450, 10 on the Haul ramp, 3 of the instrument register).
    assert_eq!(n, 463 + 16 * 3 + 240);
    let audited: i64 = sqlx::query_scalar(
        "SELECT COUNT(DISTINCT entity_id) FROM audit_log WHERE entity = 'field_test' AND action IN ('create', 'retest')",
    )
    .fetch_one(&crate::raw_sql::raw_of(&pool).await)
    .await
    .unwrap();
    assert_eq!(audited, n);
    let issued: i64 = sqlx::query_scalar(
        "SELECT COUNT(*) FROM audit_log WHERE entity = 'certificate' AND action = 'issue'",
    )
    .fetch_one(&crate::raw_sql::raw_of(&pool).await)
    .await
    .unwrap();
    assert_eq!(issued, certs_after);
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn when_one_server_dies_mid_load_the_other_keeps_serving_and_nothing_is_half_written() {
    let Some(location) = fresh_postgres().await else {
        return;
    };
    let pool = db::connect(&location).await.unwrap();
    liftledger::demo::load(&pool).await.unwrap();
    let input = liftledger::ledger::accounts::TokenInput {
        name: "load".into(),
        role: "technician".into(),
        expires_in_days: None,
    };
    let maker = db::users::by_username(&pool, "achterberg")
        .await
        .unwrap()
        .unwrap()
        .id;
    let (tech, _) = liftledger::ledger::accounts::create_token(
        &pool,
        1,
        &input,
        maker,
        &liftledger::ledger::Actor::system("setup"),
    )
    .await
    .unwrap();
    let mut servers = [Server::start(&location), Server::start(&location)];
    let lot: i64 = sqlx::query_scalar("SELECT id FROM lots WHERE code = 'EF08-1'")
        .fetch_one(&crate::raw_sql::raw_of(&pool).await)
        .await
        .unwrap();
    let bases: Vec<String> = servers.iter().map(|s| s.base.clone()).collect();
    let mut tasks = Vec::new();
    for c in 0..16usize {
        let base = bases[c % 2].clone();
        let tech = tech.clone();
        tasks.push(tokio::spawn(async move {
            let client = bearer(&tech);
            let (mut ok, mut failed) = (0, 0);
            for k in 0..20 {
                let mut t =
                    crate::helpers::nuclear_test("x", 10.0 + 19.0 * (k % 20) as f64, 1800.0, 14.0);
                t.as_object_mut().unwrap().remove("number");
                match client
                    .post(format!("{base}/api/v1/lots/{lot}/field-tests"))
                    .json(&t)
                    .send()
                    .await
                {
                    Ok(r) if r.status().as_u16() == 201 => ok += 1,
                    Ok(r) => panic!(
                        "server answered {}: {}",
                        r.status(),
                        r.text().await.unwrap_or_default()
                    ),
                    Err(_) => failed += 1, // the killed server's connections drop
                }
            }
            (c % 2, ok, failed)
        }));
    }
    tokio::time::sleep(std::time::Duration::from_millis(300)).await;
    servers[0].kill();
    let mut survivor_ok = 0;
    for t in tasks {
        let (server, ok, failed) = t.await.unwrap();
        if server == 1 {
            assert_eq!(failed, 0, "the surviving server refused nothing");
            survivor_ok += ok;
        }
    }
    assert_eq!(survivor_ok, 8 * 20);
    // Still serving afterwards.
    let (s, _) = get(&bearer(&tech), &format!("{}/api/v1/lots/{lot}", bases[1])).await;
    assert_eq!(s, 200);
    // Every stored test is whole: it has its audit row, and numbers are unique.
    let (n, distinct): (i64, i64) =
        sqlx::query_as("SELECT COUNT(*), COUNT(DISTINCT number) FROM field_tests")
            .fetch_one(&crate::raw_sql::raw_of(&pool).await)
            .await
            .unwrap();
    assert_eq!(n, distinct);
    let audited: i64 = sqlx::query_scalar(
        "SELECT COUNT(DISTINCT entity_id) FROM audit_log WHERE entity = 'field_test' AND action IN ('create', 'retest')",
    )
    .fetch_one(&crate::raw_sql::raw_of(&pool).await)
    .await
    .unwrap();
    assert_eq!(audited, n, "no test without its audit row");
}

#[tokio::test]
async fn copy_round_trips_sqlite_postgres_sqlite_with_identical_verdicts_and_certificates() {
    let demo = spawn_demo().await;
    let dir = tempfile::tempdir().unwrap();
    let Some(pg) = fresh_postgres().await else {
        return;
    };
    let back = db::Location::sqlite(&dir.path().join("back.sqlite"));
    let pg_pool = db::connect(&pg).await.unwrap();
    let report = db::copy::copy_all(&demo.pool, &pg_pool).await.unwrap();
    assert_eq!(report.certificates_verified, 20);
    let back_pool = db::connect(&back).await.unwrap();
    db::copy::copy_all(&pg_pool, &back_pool).await.unwrap();
    // Copying into a database that is not empty is refused.
    assert!(db::copy::copy_all(&demo.pool, &back_pool).await.is_err());

    for pool in [&pg_pool, &back_pool] {
        let a = liftledger::ledger::overview::project_reports(&demo.pool, 1)
            .await
            .unwrap();
        let b = liftledger::ledger::overview::project_reports(pool, 1)
            .await
            .unwrap();
        assert_eq!(a.len(), b.len());
        for (x, y) in a.iter().zip(&b) {
            assert_eq!(x.lot.code, y.lot.code);
            assert_eq!(
                serde_json::to_value(&x.verdict).unwrap(),
                serde_json::to_value(&y.verdict).unwrap()
            );
            assert_eq!(x.display_state, y.display_state);
            assert_eq!(x.fingerprint, y.fingerprint);
        }
        let pdfs = |p: db::Pool| async move {
            sqlx::query_as::<_, (i64, Vec<u8>)>("SELECT id, pdf FROM certificates ORDER BY id")
                .fetch_all(&crate::raw_sql::raw_of(&p).await)
                .await
                .unwrap()
        };
        let (orig, copied) = (pdfs(demo.pool.clone()).await, pdfs(pool.clone()).await);
        assert_eq!(orig.len(), 20);
        assert_eq!(orig, copied, "certificates byte-identical");
        assert!(
            orig.iter()
                .all(|(_, b)| sha2::Sha256::digest(b).len() == 32)
        );
    }
    // The copy keeps working: a new lot gets the next id on PostgreSQL.
    let before: i64 = sqlx::query_scalar("SELECT MAX(id) FROM audit_log")
        .fetch_one(&crate::raw_sql::raw_of(&pg_pool).await)
        .await
        .unwrap();
    let _ = As::Qc;
    liftledger::ledger::setup::create_layer(
        &pg_pool,
        1,
        &liftledger::ledger::setup::LayerInput {
            zone: "Capping".into(),
            number: 9,
            thickness_mm: None,
        },
        &liftledger::ledger::Actor::system("after copy"),
    )
    .await
    .unwrap();
    let after: i64 = sqlx::query_scalar("SELECT MAX(id) FROM audit_log")
        .fetch_one(&crate::raw_sql::raw_of(&pg_pool).await)
        .await
        .unwrap();
    assert_eq!(after, before + 1);
}

async fn get(c: &reqwest::Client, url: &str) -> (u16, Value) {
    let r = c.get(url).send().await.unwrap();
    (r.status().as_u16(), r.json().await.unwrap_or(Value::Null))
}

async fn post(c: &reqwest::Client, url: &str, body: &Value) -> (u16, Value) {
    let r = c.post(url).json(body).send().await.unwrap();
    (r.status().as_u16(), r.json().await.unwrap_or(Value::Null))
}
