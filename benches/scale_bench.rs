//! Scale figures for a large invented project: `cargo bench --bench scale_bench`.
//!
//! Builds (or reuses, with `LIFTLEDGER_BENCH_DB=file`) a 60 km, 30-layer project of
//! about 300,000 field tests through the bulk path, then prints:
//! (a) the whole-project overview against the queries it needs, and the lift map page;
//! (b) one lot's report and the project home page;
//! (c) CSV import rows/s for 100,000 rows against raw INSERTs of the same rows;
//! (d) peak memory of a process that loads 1,000,000 tests, and cold start on that file;
//! (e) field-test POST throughput over HTTP with 32 concurrent clients.
//!
//! Environment: `SCALE_ONLY=import,overview,pages,post,million` picks parts,
//! `SCALE_TESTS` (default 300000), `SCALE_MILLION=0` skips (d),
//! `SCALE_POSTS` (requests in (e), default 9600), `SCALE_RUNS` (default 20).
//! Figures and how to read them: docs/performance.md.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::{Duration, Instant};

use anyhow::Context;
use liftledger::db::{self, Pool};
use liftledger::ledger::import::{AuditMode, ImportOptions};
use liftledger::ledger::{Actor, lot_report, overview, setup};
use liftledger::transfer::mapping::{ImportMapping, Target};
use liftledger::{AppState, Settings};
use serde_json::json;

#[path = "../src/scale.rs"]
mod scale;

use scale::{Progress, ScaleOptions, generate, generate_with};

/// Percentiles of a set of timings, milliseconds.
struct Stats {
    p50: f64,
    p95: f64,
    p99: f64,
    max: f64,
}

fn stats(samples: &mut [Duration]) -> Stats {
    samples.sort();
    let ms = |d: Duration| d.as_secs_f64() * 1000.0;
    let at = |q: f64| {
        let i = ((samples.len() as f64 - 1.0) * q).round() as usize;
        ms(samples[i.min(samples.len() - 1)])
    };
    Stats {
        p50: at(0.50),
        p95: at(0.95),
        p99: at(0.99),
        max: ms(*samples.last().unwrap_or(&Duration::ZERO)),
    }
}

fn line(name: &str, s: &Stats) {
    println!(
        "  {name:<46} p50 {:>8.1} ms   p95 {:>8.1} ms   max {:>8.1} ms",
        s.p50, s.p95, s.max
    );
}

fn runs() -> usize {
    std::env::var("SCALE_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20)
}

/// Peak and current resident memory of this process, MB (Linux /proc).
fn memory_mb() -> (f64, f64) {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let kb = |key: &str| {
        status
            .lines()
            .find(|l| l.starts_with(key))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse::<f64>().ok())
            .unwrap_or(0.0)
    };
    (kb("VmHWM:") / 1024.0, kb("VmRSS:") / 1024.0)
}

fn main() -> anyhow::Result<()> {
    let rt = tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()?;
    if let Ok(phase) = std::env::var("SCALE_BENCH_PHASE") {
        return rt.block_on(child(&phase));
    }
    rt.block_on(run())
}

async fn run() -> anyhow::Result<()> {
    let dir = tempfile::tempdir()?;
    let only = std::env::var("SCALE_ONLY").unwrap_or_default();
    let wants = |part: &str| only.is_empty() || only.split(',').any(|p| p.trim() == part);
    if wants("import") {
        import_figures(dir.path()).await?;
    }
    if wants("overview") || wants("pages") || wants("post") {
        let (path, pool, project) = big_project(dir.path()).await?;
        if wants("overview") {
            overview_figures(&pool, project).await?;
            println!("  in fresh processes, on the same file:");
            serve_figures(&pool, &path, project).await?;
            children(&path, "BIG", &["export"])?;
        }
        if wants("pages") {
            let server = Server::start(pool.clone(), project).await?;
            page_figures(&pool, &server, project).await?;
            server.stop().await;
        }
        if wants("post") {
            let server = Server::start(pool.clone(), project).await?;
            post_figures(&server, &pool, project, "as shipped (synchronous=FULL)").await?;
            server.stop().await;
            // What-if: the same load with commits that survive a crash but not a power cut.
            let normal = open_with(&path, "NORMAL", None).await?;
            let server = Server::start(normal.clone(), project).await?;
            post_figures(&server, &normal, project, "what-if synchronous=NORMAL").await?;
            server.stop().await;
            normal.close().await;
        }
        pool.close().await;
    }
    if wants("million") && std::env::var("SCALE_MILLION").as_deref() != Ok("0") {
        million_figures(dir.path()).await?;
    }
    Ok(())
}

/// The generator's progress on standard error, a line every tenth of the tests.
fn progress_lines() -> impl FnMut(&Progress) + Send {
    let mut next = 0;
    move |p: &Progress| {
        if p.generated >= next {
            eprintln!(
                "  generated {} of {} tests, {:.0} s",
                p.generated,
                p.wanted,
                p.elapsed.as_secs_f64()
            );
            next = p.generated + (p.wanted / 10).max(1);
        }
    }
}

/// Opens (building when missing) the large project; returns (file, pool, project id).
async fn big_project(dir: &Path) -> anyhow::Result<(PathBuf, Pool, i64)> {
    let tests: u64 = std::env::var("SCALE_TESTS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(300_000);
    let path = match std::env::var("LIFTLEDGER_BENCH_DB") {
        Ok(p) => PathBuf::from(p),
        Err(_) => dir.join("scale.sqlite"),
    };
    let pool = db::open(&path).await?;
    let project = match db::projects::get_by_code(&pool, "BIG").await? {
        Some(p) => {
            println!("reusing project BIG in {}", path.display());
            p
        }
        None => {
            println!(
                "building the large project ({tests} tests) in {}",
                path.display()
            );
            let summary =
                generate_with(&pool, ScaleOptions::for_tests(tests), &mut progress_lines()).await?;
            println!("  {summary}");
            db::projects::get_by_code(&pool, "BIG")
                .await?
                .context("project BIG")?
        }
    };
    let n_tests = db::field_tests::count(&pool, project.id).await?;
    let size_mb = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0) as f64 / 1e6;
    println!(
        "project {} has {n_tests} tests; database file {size_mb:.0} MB",
        project.code
    );
    Ok((path, pool, project.id))
}

/// (a) Judging the whole project (what a lift map or home page does after a change)
/// against the raw query it needs: the same rows streamed from SQLite, not decoded.
async fn overview_figures(pool: &Pool, project_id: i64) -> anyhow::Result<()> {
    use futures_util::TryStreamExt;
    println!("(a) whole-project judging, {} runs", runs());
    let mut judged = Vec::new();
    let mut raw = Vec::new();
    let mut decoded = Vec::new();
    let mut lots = 0usize;
    let mut rows = 0usize;
    for _ in 0..runs() {
        let t = Instant::now();
        let mut n = 0usize;
        overview::each_report(
            pool,
            project_id,
            |_| true,
            false,
            |r| {
                n += 1;
                std::hint::black_box(&r);
                Ok(())
            },
        )
        .await
        .map_err(|e| anyhow::anyhow!("{}", e.user_message()))?;
        judged.push(t.elapsed());
        lots = n;

        let t = Instant::now();
        let sql = format!(
            "SELECT {} FROM field_tests WHERE project_id = $1 ORDER BY lot_id, tested_at, id",
            db::bulk::VERDICT_COLUMNS
        );
        let n = db::on_pool!(pool, |pool| {
            let mut stream = sqlx::query(sqlx::AssertSqlSafe(sql))
                .bind(project_id)
                .fetch(pool);
            let mut n = 0usize;
            while let Some(row) = stream.try_next().await? {
                std::hint::black_box(&row);
                n += 1;
            }
            n
        });
        raw.push(t.elapsed());
        rows = n;

        let t = Instant::now();
        let mut stream = db::field_tests::stream_for_views(pool, project_id, true);
        while let Some(row) = stream.try_next().await? {
            std::hint::black_box(&row);
        }
        drop(stream);
        decoded.push(t.elapsed());
    }
    let j = stats(&mut judged);
    let r = stats(&mut raw);
    line(&format!("overview::each_report, {lots} lots judged"), &j);
    line(&format!("  raw streamed SELECT of its {rows} rows"), &r);
    line(
        "  the same rows decoded into FieldTest",
        &stats(&mut decoded),
    );
    println!(
        "  ratio judged / raw query: p50 {:.2}×, p95 {:.2}×",
        j.p50 / r.p50,
        j.p95 / r.p95
    );
    let (peak, now) = memory_mb();
    println!("  process memory so far: peak {peak:.0} MB, now {now:.0} MB");
    Ok(())
}

/// A running server on port 0 with a signed-in QC manager of the project.
struct Server {
    addr: std::net::SocketAddr,
    client: reqwest::Client,
    stop: Option<tokio::sync::oneshot::Sender<()>>,
    handle: tokio::task::JoinHandle<()>,
}

impl Server {
    async fn start(pool: Pool, project_id: i64) -> anyhow::Result<Self> {
        let listener = tokio::net::TcpListener::bind("127.0.0.1:0").await?;
        let addr = listener.local_addr()?;
        let state = AppState::new(
            pool.clone(),
            Settings {
                demo: false,
                secure_cookies: false,
                trust_proxy: false,
            },
        );
        let (stop_tx, rx) = tokio::sync::oneshot::channel::<()>();
        let handle = tokio::spawn(async move {
            let _ = liftledger::serve(listener, state, async {
                let _ = rx.await;
            })
            .await;
        });
        let secret = bench_session(&pool, project_id).await?;
        let mut headers = reqwest::header::HeaderMap::new();
        headers.insert("origin", format!("http://{addr}").parse()?);
        headers.insert(
            "cookie",
            format!("{}={secret}", liftledger::http::caller::SESSION_COOKIE).parse()?,
        );
        let client = reqwest::Client::builder()
            .default_headers(headers)
            .redirect(reqwest::redirect::Policy::none())
            .pool_max_idle_per_host(64)
            .build()?;
        Ok(Self {
            addr,
            client,
            stop: Some(stop_tx),
            handle,
        })
    }

    fn url(&self, path: &str) -> String {
        format!("http://{}{path}", self.addr)
    }

    async fn page(&self, path: &str) -> anyhow::Result<(Duration, usize)> {
        let t = Instant::now();
        let r = self.client.get(self.url(path)).send().await?;
        anyhow::ensure!(r.status() == 200, "GET {path}: {}", r.status());
        let body = r.bytes().await?;
        Ok((t.elapsed(), body.len()))
    }

    async fn stop(mut self) {
        if let Some(s) = self.stop.take() {
            let _ = s.send(());
        }
        let _ = self.handle.await;
    }
}

/// A real change: one passing field test posted to a lot, as a site crew would.
async fn post_one(server: &Server, lot: &db::lots::Lot, n: usize) -> anyhow::Result<()> {
    let body = json!({
        "number": format!("PG-{}-{n}", std::process::id()),
        "tested_at": "2026-12-01T10:00:00Z",
        "technician": "Bench Technician",
        "chainage_m": lot.chainage_from_m + 1.0,
        "offset_m": 0.5,
        "readings": {"method": "nuclear", "wet_density_kg_m3": 2109.0, "moisture_density_kg_m3": 209.0}
    });
    let r = server
        .client
        .post(server.url(&format!("/api/v1/lots/{}/field-tests", lot.id)))
        .json(&body)
        .send()
        .await?;
    anyhow::ensure!(r.status() == 201, "POST a test: {}", r.status());
    Ok(())
}

/// (a, b) Pages and a lot report.
async fn page_figures(pool: &Pool, server: &Server, project_id: i64) -> anyhow::Result<()> {
    let lots = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            limit: 10,
            offset: 2000,
            ..Default::default()
        },
    )
    .await?;
    let lot = lots.first().context("a lot")?;
    let open = db::lots::in_state(pool, project_id, liftledger::domain::LotState::Open).await?;
    let open = open.first().context("an open lot")?;
    println!("(a, b) pages over HTTP, {} runs each", runs());
    let mut posted = 0;
    for (name, path, after_change) in [
        (
            "lift map, unchanged project",
            format!("/projects/{project_id}/map"),
            false,
        ),
        (
            "lift map, right after a new test",
            format!("/projects/{project_id}/map"),
            true,
        ),
        (
            "project home, unchanged project",
            format!("/projects/{project_id}"),
            false,
        ),
        (
            "project home, right after a new test",
            format!("/projects/{project_id}"),
            true,
        ),
        ("lot sheet", format!("/lots/{}", lot.id), false),
        (
            "test list (newest 500)",
            format!("/projects/{project_id}/tests"),
            false,
        ),
    ] {
        server.page(&path).await?;
        let mut samples = Vec::new();
        let mut bytes = 0;
        for _ in 0..runs() {
            if after_change {
                posted += 1;
                post_one(server, open, posted).await?;
            }
            let (d, b) = server.page(&path).await?;
            samples.push(d);
            bytes = b;
        }
        line(
            &format!("{name} ({} kB)", bytes / 1000),
            &stats(&mut samples),
        );
    }
    // The first map of a freshly started server judges the whole project.
    let mut samples = Vec::new();
    for _ in 0..runs().min(5) {
        let fresh = Server::start(pool.clone(), project_id).await?;
        let (d, _) = fresh.page(&format!("/projects/{project_id}/map")).await?;
        samples.push(d);
        fresh.stop().await;
    }
    line(
        "lift map, first view after the server starts",
        &stats(&mut samples),
    );
    let mut samples = Vec::new();
    let mut n = 0;
    for _ in 0..runs() {
        let t = Instant::now();
        let r = lot_report::build(pool, lot.id).await?;
        samples.push(t.elapsed());
        n = r.tests.len();
    }
    line(
        &format!("lot_report::build, lot of {n} tests"),
        &stats(&mut samples),
    );
    Ok(())
}

/// A frame for an import: project, clause, source, lab test, one layer, `lots` lots of 100 m.
async fn import_frame(pool: &Pool, code: &str, lots: usize) -> anyhow::Result<i64> {
    let a = Actor::system("bench");
    let app =
        |e: liftledger::error::AppError| anyhow::anyhow!("{}: {}", e.field(), e.user_message());
    let p = setup::create_project(
        pool,
        &serde_json::from_value(json!({"code": code, "name": "Import bench"}))?,
        &a,
    )
    .await
    .map_err(app)?;
    let c = setup::create_clause(
        pool,
        p.id,
        &serde_json::from_value(json!({"code": "C1", "rc_min_pct": 95.0, "moisture_below_pct": 2.0,
            "moisture_above_pct": 2.0, "effort": "astm_d1557_4in", "rule": "every_test", "min_tests_per_lot": 3}))?,
        &a,
    )
    .await
    .map_err(app)?;
    let s = setup::create_source(
        pool,
        p.id,
        &serde_json::from_value(json!({"code": "S1", "name": "Pit", "gs_fines": 2.68}))?,
        &a,
    )
    .await
    .map_err(app)?;
    let lab = setup::create_lab_test(
        pool,
        s.id,
        &serde_json::from_value(
            json!({"code": "L1", "tested_on": "2026-11-02", "effort": "astm_d1557_4in",
            "points": [
                {"water_content_pct": 7.8, "dry_density_kg_m3": 1868.0},
                {"water_content_pct": 9.7, "dry_density_kg_m3": 1927.0},
                {"water_content_pct": 11.4, "dry_density_kg_m3": 1958.0},
                {"water_content_pct": 13.2, "dry_density_kg_m3": 1932.0},
                {"water_content_pct": 15.1, "dry_density_kg_m3": 1872.0}]}),
        )?,
        &a,
    )
    .await
    .map_err(app)?;
    let layer = setup::create_layer(
        pool,
        p.id,
        &serde_json::from_value(json!({"zone": "Fill", "number": 1}))?,
        &a,
    )
    .await
    .map_err(app)?;
    for i in 0..lots {
        setup::create_lot(
            pool,
            p.id,
            &serde_json::from_value(json!({"code": format!("L-{i:03}"), "layer_id": layer.id,
                "chainage_from_m": i as f64 * 100.0, "chainage_to_m": (i + 1) as f64 * 100.0,
                "offset_left_m": -10.0, "offset_right_m": 10.0, "clause_id": c.id, "lab_test_id": lab.id}))?,
            &a,
        )
        .await
        .map_err(app)?;
    }
    Ok(p.id)
}

fn import_mapping() -> ImportMapping {
    ImportMapping::new([
        ("number", Target::Number),
        ("tested_at", Target::TestedAt),
        ("technician", Target::Technician),
        ("lot", Target::Lot),
        ("chainage", Target::Chainage),
        ("offset_m", Target::OffsetM),
        ("method", Target::Method),
        ("wet_density", Target::WetDensity),
        ("moisture_density", Target::MoistureDensity),
        ("easting", Target::Easting),
        ("northing", Target::Northing),
    ])
}

/// 100,000 rows over 50 lots of 100 m, as a field-data export would give them.
fn import_file(dir: &Path, rows: usize, lots: usize) -> anyhow::Result<PathBuf> {
    let path = dir.join("import.csv");
    let mut w = csv::Writer::from_path(&path)?;
    w.write_record([
        "number",
        "tested_at",
        "technician",
        "lot",
        "chainage",
        "offset_m",
        "method",
        "wet_density",
        "moisture_density",
        "easting",
        "northing",
    ])?;
    for i in 0..rows {
        let lot = i % lots;
        let ch = lot as f64 * 100.0 + 1.0 + (i / lots % 98) as f64;
        let dry = 1880.0 + (i % 40) as f64;
        let w_pct = 10.5 + (i % 10) as f64 / 10.0;
        w.write_record([
            format!("I-{i:07}"),
            format!(
                "2026-10-{:02}T{:02}:{:02}:00Z",
                1 + i % 28,
                7 + i % 10,
                i % 60
            ),
            "A. Tester".to_string(),
            format!("L-{lot:03}"),
            format!("{}+{:07.3}", (ch / 1000.0).floor(), ch % 1000.0),
            format!("{:.2}", (i % 17) as f64 - 8.0),
            "nuclear".to_string(),
            format!("{:.1}", dry * (1.0 + w_pct / 100.0)),
            format!("{:.1}", dry * w_pct / 100.0),
            format!("{:.3}", 512_000.0 + ch * 0.5),
            format!("{:.3}", 6_204_000.0 + ch * 0.866),
        ])?;
    }
    w.flush()?;
    Ok(path)
}

/// (c) CSV import against raw inserts of the same rows.
async fn import_figures(dir: &Path) -> anyhow::Result<()> {
    let rows = 100_000;
    let lots = 50;
    println!("(c) import of {rows} rows over {lots} lots");
    let file = import_file(dir, rows, lots)?;
    let size = std::fs::metadata(&file)?.len() as f64 / 1e6;
    let mapping = import_mapping();
    let import = |pool: Pool, pid: i64, commit: bool, audit: AuditMode| {
        let file = file.clone();
        let mapping = mapping.clone();
        async move {
            let reader = std::io::BufReader::new(std::fs::File::open(&file)?);
            let opts = ImportOptions {
                commit,
                audit,
                actor: Actor::system("bench"),
            };
            let t = Instant::now();
            let r =
                liftledger::transfer::import_csv(&pool, pid, reader, "import.csv", &mapping, &opts)
                    .await
                    .map_err(|e| anyhow::anyhow!("{}: {}", e.field(), e.user_message()))?;
            anyhow::ensure!(!r.refused(), "refused: {:?}", r.problems.first());
            anyhow::ensure!(r.new_tests == 100_000, "{} new", r.new_tests);
            anyhow::Ok(t.elapsed())
        }
    };
    let rate = |d: Duration| rows as f64 / d.as_secs_f64();
    let reps: usize = std::env::var("SCALE_IMPORT_REPS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(5);
    let names = [
        "dry run",
        "commit, one audit row per import",
        "commit, an audit row per test too",
        "raw INSERT, one prepared statement a row",
        "raw INSERT, 64 rows a statement",
        "what-if: commit with a 64 MB page cache",
    ];
    let mut times: Vec<Vec<Duration>> = vec![Vec::new(); names.len()];
    let mut stored: Vec<db::field_tests::FieldTest> = Vec::new();
    // Interleaved repetitions, best of each: the machine may be shared, and the best run
    // is the one least disturbed.
    for rep in 0..reps {
        for (k, name) in names.iter().enumerate() {
            let path = dir.join(format!("import-{k}-{rep}.sqlite"));
            let pool = if k == 5 {
                open_with(&path, "FULL", Some(64 * 1024)).await?
            } else {
                db::open(&path).await?
            };
            let pid = import_frame(&pool, "IMP", lots).await?;
            let d = match k {
                3 | 4 if stored.is_empty() => anyhow::bail!("no rows to insert raw"),
                0 => import(pool.clone(), pid, false, AuditMode::PerImport).await?,
                1 | 5 => import(pool.clone(), pid, true, AuditMode::PerImport).await?,
                2 => import(pool.clone(), pid, true, AuditMode::PerTest).await?,
                _ => {
                    let t = Instant::now();
                    let mut tx = db::begin_write(&pool).await?;
                    if k == 4 {
                        db::bulk::insert_field_tests(&mut tx, &stored).await?;
                    } else {
                        for r in &stored {
                            raw_insert(&mut tx, r).await?;
                        }
                    }
                    tx.commit().await?;
                    t.elapsed()
                }
            };
            times[k].push(d);
            if std::env::var("SCALE_VERBOSE").is_ok() {
                println!("    rep {rep} {name}: {:.2} s", d.as_secs_f64());
            }
            if k == 1 && rep == 0 {
                // Re-import: everything already there, nothing written.
                let reader = std::io::BufReader::new(std::fs::File::open(&file)?);
                let t = Instant::now();
                let r = liftledger::transfer::import_csv(
                    &pool,
                    pid,
                    reader,
                    "import.csv",
                    &mapping,
                    &ImportOptions {
                        commit: true,
                        audit: AuditMode::PerImport,
                        actor: Actor::system("bench"),
                    },
                )
                .await
                .map_err(|e| anyhow::anyhow!("{}", e.user_message()))?;
                let d = t.elapsed();
                println!(
                    "  {:<42} {:>7.2} s  {:>9.0} rows/s  ({} skipped as identical)",
                    "re-import of the same file (commit)",
                    d.as_secs_f64(),
                    rate(d),
                    r.skipped_identical
                );
                stored = db::on_pool!(&pool, |p| sqlx::query_as(
                    "SELECT * FROM field_tests ORDER BY id"
                )
                .fetch_all(p)
                .await)?;
            }
            pool.close().await;
            for ext in ["", "-wal", "-shm"] {
                let _ = std::fs::remove_file(format!("{}{ext}", path.display()));
            }
        }
    }
    let best: Vec<Duration> = times
        .iter_mut()
        .map(|t| {
            t.sort();
            t[0]
        })
        .collect();
    for (k, name) in names.iter().enumerate() {
        let median = times[k][times[k].len() / 2];
        println!(
            "  {name:<42} {:>7.2} s  {:>9.0} rows/s  (best of {reps}; median {:.2} s)",
            best[k].as_secs_f64(),
            rate(best[k]),
            median.as_secs_f64()
        );
    }
    println!("  ({size:.1} MB file; best times compared)");
    for (k, raw) in [(3, "one statement a row"), (4, "64 rows a statement")] {
        println!(
            "  import / raw INSERT ({raw}): {:.2}×; with an audit row per test {:.2}×",
            best[1].as_secs_f64() / best[k].as_secs_f64(),
            best[2].as_secs_f64() / best[k].as_secs_f64()
        );
    }
    println!(
        "  an audit row per test costs {:.0} % of the import throughput",
        (1.0 - best[1].as_secs_f64() / best[2].as_secs_f64()) * 100.0
    );
    Ok(())
}

/// One plain INSERT of a stored row (the statement is prepared once and reused by sqlx).
async fn raw_insert(tx: &mut db::Tx<'_>, r: &db::field_tests::FieldTest) -> sqlx::Result<()> {
    db::on_tx!(tx, |tx| {
        sqlx::query(
        "INSERT INTO field_tests (id, project_id, lot_id, number, tested_at, technician, method,
            instrument_serial, chainage_m, offset_m, depth_mm, coarse_pct, coarse_water_content_pct,
            easting, northing, readings_json, wet_density_kg_m3, water_content_pct, dry_density_kg_m3,
            moisture_source, reduction_version, retest_of, void_reason, voided_by, voided_at,
            created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20, $21, $22, $23, $24, $25, $26, $27)",
    )
    .bind(r.id)
    .bind(r.project_id)
    .bind(r.lot_id)
    .bind(&r.number)
    .bind(&r.tested_at)
    .bind(&r.technician)
    .bind(r.method)
    .bind(&r.instrument_serial)
    .bind(r.chainage_m)
    .bind(r.offset_m)
    .bind(r.depth_mm)
    .bind(r.coarse_pct)
    .bind(r.coarse_water_content_pct)
    .bind(r.easting)
    .bind(r.northing)
    .bind(&r.readings_json)
    .bind(r.wet_density_kg_m3)
    .bind(r.water_content_pct)
    .bind(r.dry_density_kg_m3)
    .bind(&r.moisture_source)
    .bind(&r.reduction_version)
    .bind(r.retest_of)
    .bind(&r.void_reason)
    .bind(&r.voided_by)
    .bind(&r.voided_at)
    .bind(&r.created_at)
    .bind(&r.created_by)
    .execute(&mut **tx)
    .await
    .map(|_| ())
    })
}

/// The database opened as `db::open` does, but with another durability or page cache (what-ifs).
async fn open_with(path: &Path, synchronous: &str, cache_kib: Option<i64>) -> anyhow::Result<Pool> {
    use std::str::FromStr;
    let mut options = sqlx::sqlite::SqliteConnectOptions::new()
        .filename(path)
        .create_if_missing(true)
        .journal_mode(sqlx::sqlite::SqliteJournalMode::Wal)
        .synchronous(
            sqlx::sqlite::SqliteSynchronous::from_str(synchronous).map_err(anyhow::Error::msg)?,
        )
        .foreign_keys(true)
        .busy_timeout(Duration::from_secs(10));
    if let Some(k) = cache_kib {
        options = options.pragma("cache_size", format!("-{k}"));
    }
    let pool = Pool::Sqlite(
        sqlx::sqlite::SqlitePoolOptions::new()
            .max_connections(8)
            .connect_with(options)
            .await?,
    );
    db::migrate(&pool).await?;
    Ok(pool)
}

/// (e) Field-test POSTs over HTTP, 32 clients at once.
async fn post_figures(
    server: &Server,
    pool: &Pool,
    project_id: i64,
    label: &str,
) -> anyhow::Result<()> {
    let total: usize = std::env::var("SCALE_POSTS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(9600);
    let clients = 32;
    let lots: Vec<db::lots::Lot> =
        db::lots::in_state(pool, project_id, liftledger::domain::LotState::Open)
            .await?
            .into_iter()
            .step_by(7)
            .take(256)
            .collect();
    anyhow::ensure!(!lots.is_empty(), "no open lots");
    let lots = Arc::new(lots);
    let per = total / clients;
    let tag = if label.contains("NORMAL") { "N" } else { "F" };
    let started = Instant::now();
    let mut tasks = Vec::new();
    for c in 0..clients {
        let client = server.client.clone();
        let base = server.url("");
        let lots = lots.clone();
        tasks.push(tokio::spawn(async move {
            let mut samples = Vec::with_capacity(per);
            let mut errors = 0usize;
            let mut first_error = None;
            for i in 0..per {
                let lot = &lots[(c * per + i) % lots.len()];
                let ch = lot.chainage_from_m + 1.0 + ((c * 31 + i * 7) % 97) as f64 / 100.0 * (lot.chainage_to_m - lot.chainage_from_m - 2.0);
                let body = json!({
                    "number": format!("P{}-{tag}-{c:02}-{i:05}", std::process::id()),
                    "tested_at": "2026-12-01T09:00:00Z",
                    "technician": "Bench Technician",
                    "chainage_m": (ch * 1000.0).round() / 1000.0,
                    "offset_m": 0.5,
                    "readings": {"method": "nuclear", "wet_density_kg_m3": 2109.0, "moisture_density_kg_m3": 209.0}
                });
                let t = Instant::now();
                let r = client
                    .post(format!("{base}/api/v1/lots/{}/field-tests", lot.id))
                    .json(&body)
                    .send()
                    .await;
                let ok = match r {
                    Ok(r) if r.status() == 201 => {
                        let _ = r.bytes().await;
                        true
                    }
                    Ok(r) => {
                        if first_error.is_none() {
                            first_error = Some(format!("{} {}", r.status(), r.text().await.unwrap_or_default()));
                        }
                        false
                    }
                    Err(e) => {
                        if first_error.is_none() {
                            first_error = Some(e.to_string());
                        }
                        false
                    }
                };
                samples.push(t.elapsed());
                if !ok {
                    errors += 1;
                }
            }
            (samples, errors, first_error)
        }));
    }
    let mut all = Vec::new();
    let mut errors = 0;
    let mut first = None;
    for t in tasks {
        let (s, e, f) = t.await?;
        all.extend(s);
        errors += e;
        first = first.or(f);
    }
    let took = started.elapsed();
    let s = stats(&mut all);
    println!(
        "(e) POST /api/v1/lots/{{id}}/field-tests {label}, {clients} clients, {} requests: {:.0} req/s, p50 {:.1} ms, p95 {:.1} ms, p99 {:.1} ms, max {:.1} ms, {errors} errors{}",
        all.len(),
        all.len() as f64 / took.as_secs_f64(),
        s.p50,
        s.p95,
        s.p99,
        s.max,
        first.map(|f| format!(" (first: {f})")).unwrap_or_default()
    );
    Ok(())
}

/// A bench user with the QC manager role on the project and a live session, as a
/// sign-in would leave them; returns the session secret.
async fn bench_session(pool: &Pool, project_id: i64) -> anyhow::Result<String> {
    let now = liftledger::clock::now();
    static SERVERS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let n = SERVERS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let name = format!("bench.{}.{n}", std::process::id());
    let mut tx = db::begin_write(pool).await?;
    let hash = liftledger::auth::password::hash("bench-password-123")?;
    let uid = db::users::insert(&mut tx, &name, "Bench QC", &hash, false, false, &now).await?;
    db::users::grant(
        &mut tx,
        uid,
        project_id,
        liftledger::auth::Role::QcManager,
        &now,
    )
    .await?;
    let secret = liftledger::auth::secret::new("lls_")?;
    db::users::start_session(
        &mut tx,
        &liftledger::auth::secret::digest(&secret),
        uid,
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(secret)
}

/// (d) The real server binary on a database file: time from start to the first answered
/// request, and its resident memory after the heaviest pages.
async fn serve_figures(pool: &Pool, path: &Path, project_id: i64) -> anyhow::Result<()> {
    use std::io::BufRead;
    let secret = bench_session(pool, project_id).await?;
    let n = db::field_tests::count(pool, project_id).await?;
    let t = Instant::now();
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args(["serve", "--addr", "127.0.0.1:0", "--db"])
        .arg(path)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::null())
        .spawn()?;
    let pid = child.id();
    let mut out = std::io::BufReader::new(child.stdout.take().context("stdout")?);
    let mut addr = String::new();
    let mut l = String::new();
    while out.read_line(&mut l)? > 0 {
        if let Some(at) = l.trim().split("at http://").nth(1) {
            addr = at.trim_end_matches('/').to_string();
            break;
        }
        l.clear();
    }
    anyhow::ensure!(!addr.is_empty(), "the server printed no address");
    let client = reqwest::Client::builder()
        .redirect(reqwest::redirect::Policy::none())
        .build()?;
    let r = client.get(format!("http://{addr}/sign-in")).send().await?;
    anyhow::ensure!(r.status() == 200, "sign-in page: {}", r.status());
    let cold = t.elapsed();
    let status = || std::fs::read_to_string(format!("/proc/{pid}/status")).unwrap_or_default();
    let kb = |s: &str, key: &str| {
        s.lines()
            .find(|l| l.starts_with(key))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse::<f64>().ok())
            .unwrap_or(0.0)
            / 1024.0
    };
    let idle = kb(&status(), "VmRSS:");
    let lot = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            limit: 1,
            offset: 100,
            ..Default::default()
        },
    )
    .await?;
    let lot_id = lot.first().context("a lot")?.id;
    let cookie = format!("{}={secret}", liftledger::http::caller::SESSION_COOKIE);
    let mut worst = Duration::ZERO;
    for path in [
        format!("/projects/{project_id}/map"),
        format!("/projects/{project_id}"),
        format!("/projects/{project_id}/tests"),
        format!("/lots/{lot_id}"),
        format!("/projects/{project_id}/map"),
    ] {
        let t = Instant::now();
        let r = client
            .get(format!("http://{addr}{path}"))
            .header("cookie", &cookie)
            .send()
            .await?;
        anyhow::ensure!(r.status() == 200, "GET {path}: {}", r.status());
        r.bytes().await?;
        worst = worst.max(t.elapsed());
    }
    let s = status();
    let (rss, peak) = (kb(&s, "VmRSS:"), kb(&s, "VmHWM:"));
    println!(
        "(d) server binary on {n} tests: first answer {:.0} ms after start; resident {idle:.0} MB idle, \
         {rss:.0} MB after map, home, test list and lot sheet (peak {peak:.0} MB; slowest of those {:.0} ms)",
        cold.as_secs_f64() * 1000.0,
        worst.as_secs_f64() * 1000.0
    );
    let _ = child.kill();
    let _ = child.wait();
    Ok(())
}

/// (d) Children: one builds a 1,000,000-test project, one opens it cold, one judges it all.
async fn million_figures(dir: &Path) -> anyhow::Result<()> {
    let path = dir.join("million.sqlite");
    children(&path, "MIL", &["million"])?;
    let pool = db::open(&path).await?;
    let p = db::projects::get_by_code(&pool, "MIL")
        .await?
        .context("project MIL")?;
    serve_figures(&pool, &path, p.id).await?;
    pool.close().await;
    children(&path, "MIL", &["export"])
}

/// Runs bench phases in child processes (clean memory figures) on a database file.
fn children(path: &Path, project: &str, phases: &[&str]) -> anyhow::Result<()> {
    let exe = std::env::current_exe()?;
    for phase in phases {
        let t = Instant::now();
        let out = std::process::Command::new(&exe)
            .env("SCALE_BENCH_PHASE", phase)
            .env("SCALE_BENCH_DB", path)
            .env("SCALE_BENCH_PROJECT", project)
            .output()?;
        let wall = t.elapsed();
        let text = String::from_utf8_lossy(&out.stdout);
        anyhow::ensure!(
            out.status.success(),
            "phase {phase} failed: {text} {}",
            String::from_utf8_lossy(&out.stderr)
        );
        print!("{text}");
        println!("      (process wall time {:.2} s)", wall.as_secs_f64());
    }
    Ok(())
}

/// Counts what an export writes, keeping none of it.
#[derive(Default)]
struct Counter(u64);

impl std::io::Write for Counter {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.0 += buf.len() as u64;
        Ok(buf.len())
    }
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// The child side of (d).
async fn child(phase: &str) -> anyhow::Result<()> {
    let started = Instant::now();
    let path = PathBuf::from(std::env::var("SCALE_BENCH_DB")?);
    let code = std::env::var("SCALE_BENCH_PROJECT").unwrap_or_else(|_| "MIL".into());
    match phase {
        "million" => {
            let pool = db::open(&path).await?;
            let s = generate(
                &pool,
                ScaleOptions {
                    tests: 1_000_000,
                    project_code: "MIL".into(),
                    rows_per_import: 100_000,
                    accepted_lots: 0,
                    submitted_lots: 0,
                    ..Default::default()
                },
            )
            .await?;
            pool.close().await;
            let (peak, now) = memory_mb();
            println!("(d) built a 1,000,000-test project: {s}");
            println!("    peak memory of that process {peak:.0} MB (now {now:.0} MB)");
        }
        "cold" => {
            let pool = db::open(&path).await?;
            let p = db::projects::get_by_code(&pool, &code)
                .await?
                .context("project")?;
            let n = db::field_tests::count(&pool, p.id).await?;
            let opened = started.elapsed();
            pool.close().await;
            let (peak, _) = memory_mb();
            println!(
                "    cold start: open {} ({n} tests) and first query in {:.0} ms; peak memory {peak:.0} MB",
                path.display(),
                opened.as_secs_f64() * 1000.0
            );
        }
        "home" => {
            let pool = db::open(&path).await?;
            let p = db::projects::get_by_code(&pool, &code)
                .await?
                .context("project")?;
            let t = Instant::now();
            let reports = overview::project_reports(&pool, p.id).await?;
            let took = t.elapsed();
            let lots = reports.len();
            drop(reports);
            pool.close().await;
            let (peak, _) = memory_mb();
            println!(
                "    whole-project overview of {code} ({lots} lots): {:.2} s, peak memory {peak:.0} MB",
                took.as_secs_f64()
            );
        }
        "export" => {
            let pool = db::open(&path).await?;
            let p = db::projects::get_by_code(&pool, &code)
                .await?
                .context("project")?;
            let t = Instant::now();
            let mut out = Counter::default();
            let n = liftledger::transfer::export::export(
                &pool,
                p.id,
                liftledger::transfer::export::ExportKind::TestsCsv,
                &Default::default(),
                &mut out,
            )
            .await
            .map_err(|e| anyhow::anyhow!("{}", e.user_message()))?;
            let took = t.elapsed();
            pool.close().await;
            let (peak, _) = memory_mb();
            println!(
                "    CSV export of every test of {code}: {n} rows, {:.0} MB, {:.2} s, peak memory {peak:.0} MB",
                out.0 as f64 / 1e6,
                took.as_secs_f64()
            );
        }
        other => anyhow::bail!("unknown phase {other}"),
    }
    Ok(())
}
