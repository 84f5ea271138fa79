//! The installable site app, served from the binary: the web app manifest, the service
//! worker (at the root, so its scope covers the entry pages), the queue script and the
//! reduction library built to WebAssembly by build.rs from `wasm/`.

use axum::Router;
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::get;

use crate::app::AppState;

/// The server's own reduction library, compiled for the browser (see build.rs).
pub static SITE_WASM: &[u8] = include_bytes!(concat!(env!("OUT_DIR"), "/liftledger_site.wasm"));

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/site.webmanifest", get(manifest))
        .route("/sw.js", get(worker))
        .route("/static/site.js", get(script))
        .route("/static/site.wasm", get(library))
        .route("/static/site-icon.svg", get(icon))
}

/// Short caching: the service worker asks the network first anyway.
const CACHE: (header::HeaderName, &str) = (header::CACHE_CONTROL, "no-cache");

async fn manifest() -> impl IntoResponse {
    (
        [(header::CONTENT_TYPE, "application/manifest+json"), CACHE],
        include_str!("../../../static/site.webmanifest"),
    )
}

async fn worker() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            CACHE,
        ],
        include_str!("../../../static/sw.js"),
    )
}

async fn script() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            CACHE,
        ],
        include_str!("../../../static/site.js"),
    )
}

async fn library() -> impl IntoResponse {
    (
        [(header::CONTENT_TYPE, "application/wasm"), CACHE],
        SITE_WASM,
    )
}

async fn icon() -> impl IntoResponse {
    (
        [(header::CONTENT_TYPE, "image/svg+xml"), CACHE],
        include_str!("../../../static/site-icon.svg"),
    )
}
