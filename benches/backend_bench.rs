//! Field-test POST throughput and latency over loopback: SQLite with one app
//! server, PostgreSQL with one and with two app servers on the same database.
//! 32 concurrent clients, each posting auto-numbered nuclear tests for a fixed
//! time. Run by hand: `cargo bench --bench backend_bench` (needs the PostgreSQL
//! server named by `LIFTLEDGER_BENCH_PG`, default the local `test` database).

use std::sync::Arc;
use std::time::{Duration, Instant};

use liftledger::ledger::{Actor, accounts};
use liftledger::{AppState, Settings, db};
use serde_json::json;
use tokio::sync::Mutex;

const CLIENTS: usize = 32;
const RUN: Duration = Duration::from_secs(8);

async fn start(location: &db::Location) -> (String, tokio::sync::oneshot::Sender<()>) {
    let pool = db::connect(location).await.expect("db");
    let listener = tokio::net::TcpListener::bind("127.0.0.1:0").await.unwrap();
    let addr = listener.local_addr().unwrap();
    let state = AppState::new(
        pool,
        Settings {
            demo: false,
            secure_cookies: false,
            trust_proxy: false,
        },
    );
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    tokio::spawn(async move {
        let _ = liftledger::serve(listener, state, async {
            let _ = rx.await;
        })
        .await;
    });
    (format!("http://{addr}"), tx)
}

/// Loads the demo project and returns a technician token and an open lot (id, from, to).
async fn prepare(location: &db::Location) -> (String, i64, f64, f64) {
    let pool = db::connect(location).await.expect("db");
    liftledger::demo::load(&pool).await.expect("demo");
    let input = accounts::TokenInput {
        name: "bench".into(),
        role: "technician".into(),
        expires_in_days: None,
    };
    let maker = liftledger::db::users::by_username(&pool, "achterberg")
        .await
        .unwrap()
        .unwrap()
        .id;
    let (secret, _) = accounts::create_token(&pool, 1, &input, maker, &Actor::system("bench"))
        .await
        .unwrap();
    let (id, from, to): (i64, f64, f64) = db::on_pool!(&pool, |p| sqlx::query_as(
        "SELECT id, chainage_from_m, chainage_to_m FROM lots WHERE code = 'EF08-1'"
    )
    .fetch_one(p)
    .await)
    .unwrap();
    pool.close().await;
    (secret, id, from, to)
}

async fn load(
    bases: &[String],
    token: &str,
    lot: i64,
    from: f64,
    to: f64,
) -> (usize, usize, Vec<Duration>) {
    let latencies = Arc::new(Mutex::new(Vec::new()));
    let errors = Arc::new(std::sync::atomic::AtomicUsize::new(0));
    let deadline = Instant::now() + RUN;
    let mut tasks = Vec::new();
    for c in 0..CLIENTS {
        let base = bases[c % bases.len()].clone();
        let mut h = reqwest::header::HeaderMap::new();
        h.insert("authorization", format!("Bearer {token}").parse().unwrap());
        let client = reqwest::Client::builder()
            .default_headers(h)
            .build()
            .unwrap();
        let (latencies, errors) = (latencies.clone(), errors.clone());
        tasks.push(tokio::spawn(async move {
            let mut mine = Vec::new();
            let mut k = 0u64;
            while Instant::now() < deadline {
                k += 1;
                let ch = from + (to - from) * ((c as u64 * 7919 + k * 104_729) % 1000) as f64 / 1000.0;
                let body = json!({"tested_at": "2026-11-30T10:00:00Z", "technician": "bench", "chainage_m": ch, "offset_m": 1.0,
                    "readings": {"method": "nuclear", "wet_density_kg_m3": 2050.0, "moisture_density_kg_m3": 250.0}});
                let t0 = Instant::now();
                match client.post(format!("{base}/api/v1/lots/{lot}/field-tests")).json(&body).send().await {
                    Ok(r) if r.status().as_u16() == 201 => mine.push(t0.elapsed()),
                    _ => {
                        errors.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                    }
                }
            }
            latencies.lock().await.extend(mine);
        }));
    }
    for t in tasks {
        t.await.unwrap();
    }
    let mut l = latencies.lock().await.clone();
    l.sort();
    (
        l.len(),
        errors.load(std::sync::atomic::Ordering::Relaxed),
        l,
    )
}

fn report(name: &str, (ok, errors, lat): (usize, usize, Vec<Duration>)) {
    let pct = |p: f64| {
        lat.get(((lat.len() as f64 * p) as usize).min(lat.len().saturating_sub(1)))
            .copied()
            .unwrap_or_default()
    };
    println!(
        "{name:<34} {:>8.0} tests/s   p50 {:>6.1} ms   p99 {:>6.1} ms   errors {errors}",
        ok as f64 / RUN.as_secs_f64(),
        pct(0.50).as_secs_f64() * 1e3,
        pct(0.99).as_secs_f64() * 1e3,
    );
}

async fn fresh_pg() -> db::Location {
    use sqlx::Connection;
    let admin = std::env::var("LIFTLEDGER_BENCH_PG")
        .unwrap_or_else(|_| "postgres://postgres@127.0.0.1:5432/test".into());
    let name = format!("ll_bench_{}", std::process::id());
    let mut conn = sqlx::PgConnection::connect(&admin)
        .await
        .expect("PostgreSQL");
    let _ = sqlx::query(sqlx::AssertSqlSafe(format!(
        "DROP DATABASE IF EXISTS {name}"
    )))
    .execute(&mut conn)
    .await;
    sqlx::query(sqlx::AssertSqlSafe(format!("CREATE DATABASE {name}")))
        .execute(&mut conn)
        .await
        .unwrap();
    let base = admin
        .rsplit_once('/')
        .map_or(admin.as_str(), |(b, _)| b)
        .to_string();
    db::Location::parse(&format!("{base}/{name}"), 16)
}

#[tokio::main]
async fn main() {
    println!(
        "field-test POST, {CLIENTS} concurrent clients over loopback, {} s each",
        RUN.as_secs()
    );
    let dir = tempfile::tempdir().unwrap();
    let sqlite = db::Location::sqlite(&dir.path().join("bench.sqlite"));
    let (token, lot, from, to) = prepare(&sqlite).await;
    let (base, stop) = start(&sqlite).await;
    report(
        "SQLite, 1 app server",
        load(&[base], &token, lot, from, to).await,
    );
    let _ = stop.send(());

    let pg = fresh_pg().await;
    let (token, lot, from, to) = prepare(&pg).await;
    let (b1, s1) = start(&pg).await;
    report(
        "PostgreSQL, 1 app server",
        load(std::slice::from_ref(&b1), &token, lot, from, to).await,
    );
    let (b2, s2) = start(&pg).await;
    report(
        "PostgreSQL, 2 app servers",
        load(&[b1, b2], &token, lot, from, to).await,
    );
    let _ = (s1.send(()), s2.send(()));
}
