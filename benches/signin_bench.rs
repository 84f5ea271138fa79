//! A signed-in page's latency while 64 sign-ins run, as a ratio to its latency with no
//! sign-ins, both measured in this run on the same server (an in-process server on a
//! fresh SQLite file, the demo project loaded, on a runtime with one worker per core).
//! Argon2 runs on the blocking pool behind a per-core semaphore, so the ratio shows what
//! a burst of sign-ins costs everyone else. Run by hand: `cargo bench --bench signin_bench`.

use std::time::{Duration, Instant};

use liftledger::{AppState, Settings, db};

const SIGN_INS: usize = 64;
const PROBES: usize = 40;

fn client(cookie: Option<&str>) -> reqwest::Client {
    let mut h = reqwest::header::HeaderMap::new();
    if let Some(c) = cookie {
        let v = format!("{}={c}", liftledger::http::caller::SESSION_COOKIE);
        h.insert("cookie", v.parse().unwrap());
    }
    reqwest::Client::builder()
        .default_headers(h)
        .redirect(reqwest::redirect::Policy::none())
        .build()
        .unwrap()
}

/// Users bench.0 … bench.63 (one hash for all), and a session of the QC manager.
async fn prepare(pool: &db::Pool) -> String {
    liftledger::demo::load(pool).await.expect("demo");
    let hash = liftledger::auth::password::hash("bench-password-123").unwrap();
    let now = liftledger::clock::now();
    let mut tx = db::begin_write(pool).await.unwrap();
    for i in 0..SIGN_INS {
        let name = format!("bench.{i}");
        db::users::insert(&mut tx, &name, "Bench", &hash, false, false, &now)
            .await
            .unwrap();
    }
    let qc = db::users::by_username(pool, "achterberg")
        .await
        .unwrap()
        .unwrap();
    let secret = liftledger::auth::secret::new("lls_").unwrap();
    let digest = liftledger::auth::secret::digest(&secret);
    db::users::start_session(&mut tx, &digest, qc.id, &now)
        .await
        .unwrap();
    tx.commit().await.unwrap();
    secret
}

/// Latencies of `n` sequential GETs of the project home, in milliseconds.
async fn probe(c: &reqwest::Client, url: &str, n: usize) -> Vec<f64> {
    let mut out = Vec::with_capacity(n);
    for _ in 0..n {
        let t = Instant::now();
        let r = c.get(url).send().await.unwrap();
        assert_eq!(r.status().as_u16(), 200);
        let _ = r.bytes().await.unwrap();
        out.push(t.elapsed().as_secs_f64() * 1000.0);
    }
    out
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn p95(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    v[(v.len() * 95 / 100).min(v.len() - 1)]
}

async fn run() {
    let dir = tempfile::tempdir().unwrap();
    let location = db::Location::sqlite(&dir.path().join("bench.sqlite"));
    let pool = db::connect(&location).await.unwrap();
    let secret = prepare(&pool).await;
    let listener = tokio::net::TcpListener::bind("127.0.0.1:0").await.unwrap();
    let base = format!("http://{}", listener.local_addr().unwrap());
    // Each sign-in comes from its own (forwarded) address, so none is throttled.
    let state = AppState::new(
        pool,
        Settings {
            demo: true,
            secure_cookies: false,
            trust_proxy: true,
        },
    );
    tokio::spawn(liftledger::serve(listener, state, std::future::pending()));
    let page = format!("{base}/projects/1");
    let signed_in = client(Some(&secret));
    probe(&signed_in, &page, 5).await; // warm the caches
    let mut quiet = probe(&signed_in, &page, PROBES).await;

    let started = Instant::now();
    let mut sign_ins = tokio::task::JoinSet::new();
    for i in 0..SIGN_INS {
        let (c, url, origin) = (client(None), format!("{base}/sign-in"), base.clone());
        sign_ins.spawn(async move {
            let user = format!("bench.{i}");
            let r = c
                .post(url)
                .header("origin", origin)
                .header("x-forwarded-for", format!("198.51.100.{i}"))
                .form(&[
                    ("username", user.as_str()),
                    ("password", "bench-password-123"),
                ])
                .send()
                .await
                .unwrap();
            r.status().as_u16()
        });
    }
    let mut busy = probe(&signed_in, &page, PROBES).await;
    let busy_for = started.elapsed();
    let mut ok = 0;
    while let Some(s) = sign_ins.join_next().await {
        ok += usize::from(s.unwrap() == 303);
    }
    let all_done = started.elapsed();
    let (q50, q95) = (median(&mut quiet), p95(&mut quiet));
    let (b50, b95) = (median(&mut busy), p95(&mut busy));
    println!("signed-in page (project home, demo project), {PROBES} requests each:");
    println!("  no sign-ins:       median {q50:7.2} ms   p95 {q95:7.2} ms");
    println!(
        "  during {SIGN_INS} sign-ins: median {b50:7.2} ms   p95 {b95:7.2} ms   (probes took {:.2} s)",
        busy_for.as_secs_f64()
    );
    println!(
        "  ratio busy/quiet:  median {:.2}×   p95 {:.2}×",
        b50 / q50,
        b95 / q95
    );
    println!(
        "  {ok} of {SIGN_INS} sign-ins succeeded, all answered after {:.2} s; cores {}",
        all_done.as_secs_f64(),
        std::thread::available_parallelism().map_or(0, |n| n.get())
    );
    drop(dir);
}

fn main() {
    tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .unwrap()
        .block_on(async {
            tokio::time::timeout(Duration::from_secs(600), run())
                .await
                .expect("bench finished in time")
        });
}
