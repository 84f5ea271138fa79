//! The interactive API page (`/api/docs`): a static page and a small script of this
//! project's own (`static/api-docs.js`) that read the served document, list its operations,
//! and send a request with the caller's own session cookie, same-origin, showing the answer.

use axum::Router;
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::get;

use crate::app::AppState;

/// Routes of the API page.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/docs", get(page))
        .route("/static/api-docs.js", get(script))
        .route("/static/api-docs.css", get(style))
}

async fn page() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/html; charset=utf-8"),
            (header::CACHE_CONTROL, "no-cache"),
        ],
        include_str!("../../../templates/api_docs.html"),
    )
}

async fn script() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=300"),
        ],
        include_str!("../../../static/api-docs.js"),
    )
}

async fn style() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/css; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=300"),
        ],
        include_str!("../../../static/api-docs.css"),
    )
}
