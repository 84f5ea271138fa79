//! `GET /api/v1/openapi.json`: the OpenAPI 3.1 document, generated once from the routers
//! (see `super::document`) and served as it is.

use std::sync::LazyLock;

use axum::http::header;
use axum::response::IntoResponse;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use crate::app::AppState;

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new().routes(routes!(openapi_json))
}

/// The document as JSON text, made on first use (the routers do not change while serving).
static DOCUMENT: LazyLock<String> = LazyLock::new(|| {
    super::document()
        .to_pretty_json()
        .unwrap_or_else(|e| format!("{{\"error\": \"the document could not be written: {e}\"}}"))
});

/// This document.
#[utoipa::path(get, path = "/api/v1/openapi.json", tag = "meta", security(()),
    responses((status = 200, description = "The OpenAPI 3.1 document of this API", body = Object)))]
async fn openapi_json() -> impl IntoResponse {
    (
        [(header::CONTENT_TYPE, "application/json")],
        DOCUMENT.as_str(),
    )
}
