//! Prometheus metrics: every metric liftledger exports is named in this file.
//!
//! The recorder is process-wide (the `metrics` crate's global recorder) so a count can
//! be taken where the thing happens (a test committed, a certificate issued) without
//! passing a registry through the ledger. It is installed only when `serve` is given
//! `--metrics-addr`; until then every function here returns at once, so a server
//! without metrics pays nothing for them. Gauges that describe a state (the pool, the
//! age of the last backup) are read when the page is scraped, not kept up to date.

use std::net::SocketAddr;
use std::sync::OnceLock;
use std::sync::atomic::{AtomicI64, Ordering};
use std::time::Duration;

use axum::Router;
use axum::extract::State;
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::get;
use metrics_exporter_prometheus::{Matcher, PrometheusBuilder, PrometheusHandle};

use crate::db::Pool;

/// Requests answered, by method, route template and status.
pub const HTTP_REQUESTS: &str = "liftledger_http_requests_total";
/// Time to answer a request, by method and route template.
pub const HTTP_DURATION: &str = "liftledger_http_request_duration_seconds";
/// Connections of the pool, by state (`in_use`, `idle`).
pub const POOL_CONNECTIONS: &str = "liftledger_db_pool_connections";
/// The pool's size limit (`--db-pool`).
pub const POOL_MAX: &str = "liftledger_db_pool_max_connections";
/// Field tests written by one group commit (SQLite).
pub const GROUP_SIZE: &str = "liftledger_test_writer_group_size";
/// Field tests stored, by how they came (`entry`, `retest`, `import`).
pub const FIELD_TESTS: &str = "liftledger_field_tests_recorded_total";
/// End-of-lift certificates issued (revisions included).
pub const CERTIFICATES: &str = "liftledger_certificates_issued_total";
/// Sign-ins refused for a wrong name or password.
pub const FAILED_SIGN_INS: &str = "liftledger_sign_ins_failed_total";
/// When the last backup that completed was taken (Unix seconds).
pub const BACKUP_TIME: &str = "liftledger_last_good_backup_timestamp_seconds";
/// Seconds since the last backup that completed, as of the scrape.
pub const BACKUP_AGE: &str = "liftledger_last_good_backup_age_seconds";

/// Latency buckets (seconds): a page or POST is expected in milliseconds, an import in seconds.
const LATENCY_BUCKETS: [f64; 14] = [
    0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0,
];
/// Group sizes up to the writer's limit of 64.
const GROUP_BUCKETS: [f64; 7] = [1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0];

static HANDLE: OnceLock<PrometheusHandle> = OnceLock::new();
/// Unix seconds of the last good backup; `i64::MIN` until one is reported.
static LAST_GOOD_BACKUP: AtomicI64 = AtomicI64::new(i64::MIN);

/// Installs the process-wide recorder (once; later calls keep the first).
pub fn install() -> anyhow::Result<()> {
    if HANDLE.get().is_some() {
        return Ok(());
    }
    let handle = PrometheusBuilder::new()
        .set_buckets_for_metric(Matcher::Full(HTTP_DURATION.into()), &LATENCY_BUCKETS)?
        .set_buckets_for_metric(Matcher::Full(GROUP_SIZE.into()), &GROUP_BUCKETS)?
        .install_recorder()?;
    describe();
    let _ = HANDLE.set(handle);
    Ok(())
}

fn describe() {
    use ::metrics::{Unit, describe_counter, describe_gauge, describe_histogram};
    describe_counter!(
        HTTP_REQUESTS,
        "Requests answered, by route template and status."
    );
    describe_histogram!(HTTP_DURATION, Unit::Seconds, "Time to answer a request.");
    describe_gauge!(POOL_CONNECTIONS, "Database pool connections by state.");
    describe_gauge!(POOL_MAX, "Largest number of connections the pool opens.");
    describe_histogram!(GROUP_SIZE, "Field tests written by one group commit.");
    describe_counter!(FIELD_TESTS, "Field tests stored, by how they came.");
    describe_counter!(CERTIFICATES, "End-of-lift certificates issued.");
    describe_counter!(
        FAILED_SIGN_INS,
        "Sign-ins refused for a wrong name or password."
    );
    describe_gauge!(
        BACKUP_TIME,
        Unit::Seconds,
        "When the last good backup was taken."
    );
    describe_gauge!(
        BACKUP_AGE,
        Unit::Seconds,
        "Seconds since the last good backup."
    );
}

/// True once the recorder is installed.
pub fn enabled() -> bool {
    HANDLE.get().is_some()
}

/// One answered request.
pub fn request_answered(method: &str, route: &str, status: u16, elapsed: Duration) {
    if !enabled() {
        return;
    }
    let (method, route) = (method.to_string(), route.to_string());
    ::metrics::counter!(HTTP_REQUESTS, "method" => method.clone(), "route" => route.clone(),
        "status" => status.to_string())
    .increment(1);
    ::metrics::histogram!(HTTP_DURATION, "method" => method, "route" => route)
        .record(elapsed.as_secs_f64());
}

/// How a field test came to be stored.
#[derive(Debug, Clone, Copy)]
pub enum TestSource {
    /// Entered one at a time (API or site entry page).
    Entry,
    /// A retest of a failed test.
    Retest,
    /// A committed CSV import.
    Import,
}

/// `n` field tests committed.
pub fn field_tests_recorded(source: TestSource, n: u64) {
    if !enabled() || n == 0 {
        return;
    }
    let label = match source {
        TestSource::Entry => "entry",
        TestSource::Retest => "retest",
        TestSource::Import => "import",
    };
    ::metrics::counter!(FIELD_TESTS, "source" => label).increment(n);
}

/// One group commit of the test writer wrote `n` tests.
pub fn test_group_written(n: usize) {
    if enabled() {
        ::metrics::histogram!(GROUP_SIZE).record(n as f64);
    }
}

/// A certificate (or a revision) was issued.
pub fn certificate_issued() {
    if enabled() {
        ::metrics::counter!(CERTIFICATES).increment(1);
    }
}

/// A sign-in was refused for a wrong name or password.
pub fn sign_in_failed() {
    if enabled() {
        ::metrics::counter!(FAILED_SIGN_INS).increment(1);
    }
}

/// The hook for backups: a backup taken at `unix_secs` completed and was checked.
/// The page then shows its time and, at each scrape, its age.
pub fn set_last_good_backup(unix_secs: i64) {
    LAST_GOOD_BACKUP.store(unix_secs, Ordering::Relaxed);
}

/// The metrics page in the Prometheus text format, with the pool and backup gauges read now.
pub fn render(pool: &Pool) -> String {
    let Some(handle) = HANDLE.get() else {
        return String::new();
    };
    let size = pool.size();
    let idle = u32::try_from(pool.num_idle()).unwrap_or(size);
    ::metrics::gauge!(POOL_CONNECTIONS, "state" => "in_use")
        .set(f64::from(size.saturating_sub(idle)));
    ::metrics::gauge!(POOL_CONNECTIONS, "state" => "idle").set(f64::from(idle));
    ::metrics::gauge!(POOL_MAX).set(f64::from(pool.max_connections()));
    let backup = LAST_GOOD_BACKUP.load(Ordering::Relaxed);
    if backup != i64::MIN {
        let now = time::OffsetDateTime::now_utc().unix_timestamp();
        ::metrics::gauge!(BACKUP_TIME).set(backup as f64);
        ::metrics::gauge!(BACKUP_AGE).set((now - backup).max(0) as f64);
    }
    handle.render()
}

/// The router of the metrics listener: `GET /metrics`.
pub fn router(pool: Pool) -> Router {
    Router::new().route("/metrics", get(page)).with_state(pool)
}

async fn page(State(pool): State<Pool>) -> impl IntoResponse {
    (
        [(
            header::CONTENT_TYPE,
            "text/plain; version=0.0.4; charset=utf-8",
        )],
        render(&pool),
    )
}

/// Serves `/metrics` on its own listener (bound to a private address) and drains old
/// histogram samples every few seconds even when nobody scrapes.
pub async fn serve(listener: tokio::net::TcpListener, pool: Pool) -> std::io::Result<()> {
    if let Some(handle) = HANDLE.get() {
        tokio::spawn(async move {
            let mut every = tokio::time::interval(Duration::from_secs(5));
            loop {
                every.tick().await;
                handle.run_upkeep();
            }
        });
    }
    axum::serve(listener, router(pool)).await
}

/// Binds the metrics listener and reports its address.
pub async fn bind(addr: SocketAddr) -> anyhow::Result<tokio::net::TcpListener> {
    use anyhow::Context;
    tokio::net::TcpListener::bind(addr)
        .await
        .with_context(|| format!("binding the metrics address {addr}"))
}
