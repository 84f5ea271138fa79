//! Certificates: list, metadata, the issued PDF bytes, and verification.

use axum::extract::State;
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::{Value, json};

use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::{self, verify};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/projects/{id}/certificates", get(list))
        .route("/api/v1/certificates/{id}", get(get_one))
        .route("/api/v1/certificates/{id}/pdf", get(pdf))
        .route("/api/v1/verify", post(verify_body))
}

async fn list(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::certificates::Certificate>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    ledger::setup::require_project(&s.db, id).await?;
    Ok(Json(db::certificates::for_project(&s.db, id).await?))
}

async fn get_one(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Certificate(id), Action::Read).await?;

    let c = verify::require_certificate(&s.db, id).await?;
    Ok(Json(json!({"certificate": c, "current": c.is_current()})))
}

async fn pdf(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<impl IntoResponse> {
    require(&s.db, &caller, Scope::Certificate(id), Action::Read).await?;

    let c = verify::require_certificate(&s.db, id).await?;
    let bytes = db::certificates::pdf(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("certificate_id", format!("certificate {id} has no PDF"))
    })?;
    let name = format!("{}-rev{}.pdf", c.number, c.revision);
    Ok((
        [
            (header::CONTENT_TYPE, "application/pdf".to_string()),
            (
                header::CONTENT_DISPOSITION,
                format!("inline; filename=\"{name}\""),
            ),
            (
                header::CACHE_CONTROL,
                "private, max-age=31536000, immutable".to_string(),
            ),
        ],
        bytes,
    ))
}

/// Body of a verification request: one of the three ways to name a certificate.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct VerifyInput {
    code: Option<String>,
    sha256: Option<String>,
    pdf_base64: Option<String>,
}

async fn verify_body(
    State(s): State<AppState>,
    ApiJson(input): ApiJson<VerifyInput>,
) -> Result<Json<Value>> {
    let query = match (input.code, input.sha256, input.pdf_base64) {
        (Some(c), None, None) => verify::Query::Code(c),
        (None, Some(h), None) => verify::Query::Hash(h),
        (None, None, Some(b)) => verify::Query::Pdf(
            verify::decode_base64(&b)
                .ok_or_else(|| AppError::invalid("pdf_base64", "is not valid base64"))?,
        ),
        _ => {
            return Err(AppError::invalid(
                "body",
                "give exactly one of code, sha256 or pdf_base64",
            ));
        }
    };
    Ok(Json(verify::verify(&s.db, query).await?))
}
