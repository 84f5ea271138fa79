//! Probes for a load balancer or an orchestrator, anonymous and cheap:
//! `GET /healthz` (the process answers) and `GET /readyz` (the database answers within
//! a short time and its schema is current; 503 with the reason otherwise).

use std::time::Duration;

use axum::Json;
use axum::Router;
use axum::extract::State;
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use serde_json::json;

use crate::app::AppState;
use crate::db::health;

/// How long the readiness probe waits for the database; a balancer's own probe
/// timeout is usually a few seconds, and a slower answer means "send traffic elsewhere".
pub const READY_TIMEOUT: Duration = Duration::from_secs(2);

/// `/healthz` and `/readyz`.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/healthz", get(healthz))
        .route("/readyz", get(readyz))
}

async fn healthz() -> Json<serde_json::Value> {
    Json(json!({"status": "ok"}))
}

async fn readyz(State(s): State<AppState>) -> Response {
    let engine = match crate::db::engine_of(&s.db) {
        crate::db::Engine::Sqlite => "sqlite",
        crate::db::Engine::Postgres => "postgres",
    };
    match tokio::time::timeout(READY_TIMEOUT, health::readiness(&s.db)).await {
        Ok(Ok(version)) => Json(json!({
            "status": "ready", "engine": engine, "schema_version": version,
        }))
        .into_response(),
        Ok(Err(not_ready)) => unavailable(engine, not_ready.check(), &not_ready.reason()),
        Err(_) => unavailable(
            engine,
            "database",
            &format!(
                "the database did not answer within {} s",
                READY_TIMEOUT.as_secs()
            ),
        ),
    }
}

fn unavailable(engine: &str, check: &str, reason: &str) -> Response {
    tracing::warn!(check, reason, "not ready");
    (
        StatusCode::SERVICE_UNAVAILABLE,
        Json(json!({"status": "unavailable", "engine": engine, "check": check, "reason": reason})),
    )
        .into_response()
}
