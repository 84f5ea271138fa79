//! liftledger: the shared record and calculator for earthworks compaction QC.
//!
//! `reduction` holds all the math (pure); `db` all the SQL; `ledger` what each
//! request does; `http` the routes; `pdf` and `charts` render what people read.

// Lets files mounted both here and by a bench (`pdf/sample.rs`) name the library alike.
extern crate self as liftledger;

pub mod app;
pub mod archive;
pub mod auth;
pub mod backup;
pub mod charts;
pub mod cli;
pub mod clock;
pub mod db;
pub mod demo;
pub mod domain;
pub mod error;
pub mod http;
pub mod ledger;
pub mod metrics;
pub mod pdf;
pub mod present;
pub mod readings;
pub mod reduction;
pub mod site_form;
pub mod transfer;

use tokio::net::TcpListener;

pub use app::{AppState, Settings};

/// Serves the app on an already-bound listener until `shutdown` resolves.
pub async fn serve(
    listener: TcpListener,
    state: AppState,
    shutdown: impl std::future::Future<Output = ()> + Send + 'static,
) -> std::io::Result<()> {
    serve_with_header_timeout(listener, state, shutdown, http::listen::HEADER_READ_TIMEOUT).await
}

/// [`serve`] with another HTTP/1 header-read timeout (tests use a short one).
pub async fn serve_with_header_timeout(
    listener: TcpListener,
    state: AppState,
    shutdown: impl std::future::Future<Output = ()> + Send + 'static,
    header_read_timeout: std::time::Duration,
) -> std::io::Result<()> {
    // Curves stored before the quality rules are checked once, before the first request.
    if let Err(e) = ledger::reference::recheck_curves(&state.db).await {
        tracing::warn!(error = %e.user_message(), "curve quality re-check failed; it runs again at the next start");
    }
    http::listen::serve(listener, http::router(state), shutdown, header_read_timeout).await
}
