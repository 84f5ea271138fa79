//! liftledger: the shared record and calculator for earthworks compaction QC.
//!
//! `reduction` holds all the math (pure); `db` all the SQL; `ledger` what each
//! request does; `http` the routes; `pdf` and `charts` render what people read.

pub mod app;
pub mod archive;
pub mod auth;
pub mod backup;
pub mod charts;
pub mod cli;
pub mod clock;
pub mod db;
pub mod demo;
pub mod error;
pub mod http;
pub mod ledger;
pub mod metrics;
pub mod pdf;
pub mod present;
pub mod reduction;
pub mod scale;
pub mod transfer;

use std::net::SocketAddr;

use tokio::net::TcpListener;

pub use app::{AppState, Settings};

/// Serves the app on an already-bound listener until `shutdown` resolves.
pub async fn serve(
    listener: TcpListener,
    state: AppState,
    shutdown: impl std::future::Future<Output = ()> + Send + 'static,
) -> std::io::Result<()> {
    let app = http::router(state).into_make_service_with_connect_info::<SocketAddr>();
    axum::serve(listener, app)
        .with_graceful_shutdown(shutdown)
        .await
}
