//! The HTTP edge: routes, extractors and middleware (request ids, access log and
//! request metrics in `observe`).

pub mod api;
pub mod caller;
pub mod extract;
pub mod health;
pub mod listen;
mod observe;
pub mod pages;
pub mod request_id;
mod same_origin;
mod uniform_errors;
pub mod upload;

use std::time::Duration;

use axum::Router;
use axum::http::{HeaderValue, StatusCode, header};
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::timeout::TimeoutLayer;

use crate::app::AppState;
use crate::error::AppError;

/// Largest request body accepted (an uploaded certificate PDF or a form).
pub const MAX_BODY_BYTES: usize = 8 * 1024 * 1024;

/// Content-Security-Policy: scripts and styles only from this server, no inline script, no framing;
/// `'wasm-unsafe-eval'` lets the site app compile its WebAssembly (and allows no `eval`).
pub const CSP: &str = "default-src 'self'; script-src 'self' 'wasm-unsafe-eval'; style-src 'self'; img-src 'self' data:; \
     object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'";

/// The whole application router with its middleware.
pub fn router(state: AppState) -> Router {
    Router::new()
        .merge(api::router())
        .merge(pages::router())
        .merge(health::router())
        .layer(RequestBodyLimitLayer::new(MAX_BODY_BYTES))
        // Imports carry whole files; only they get the larger limit.
        .merge(
            Router::new()
                .merge(api::import_router())
                .merge(pages::upload_router())
                .layer(RequestBodyLimitLayer::new(api::transfer::MAX_IMPORT_BYTES)),
        )
        .fallback(not_found)
        .with_state(state)
        .layer(axum::middleware::from_fn(same_origin::check))
        .layer(TimeoutLayer::with_status_code(
            StatusCode::REQUEST_TIMEOUT,
            Duration::from_secs(30),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(
            header::X_CONTENT_TYPE_OPTIONS,
            HeaderValue::from_static("nosniff"),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(
            header::X_FRAME_OPTIONS,
            HeaderValue::from_static("DENY"),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(
            header::CONTENT_SECURITY_POLICY,
            HeaderValue::from_static(CSP),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(
            header::REFERRER_POLICY,
            HeaderValue::from_static("same-origin"),
        ))
        // Around everything but `observe`, so the timeout's answer is rewritten too.
        .layer(axum::middleware::from_fn(uniform_errors::uniform))
        // Outermost, so the id, the log line and the metrics cover every answer,
        // the timeout's and the same-origin refusal's included.
        .layer(axum::middleware::from_fn(observe::observe))
}

async fn not_found(uri: axum::http::Uri) -> axum::response::Response {
    use axum::response::IntoResponse;
    let e = AppError::not_found("path", format!("no such page or resource: {}", uri.path()));
    if uri.path().starts_with("/api/") {
        e.into_response()
    } else {
        pages::PageError(e).into_response()
    }
}
