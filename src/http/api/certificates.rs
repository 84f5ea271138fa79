//! Certificates: list, metadata, the issued PDF bytes, and verification.

use axum::Json;
use axum::extract::State;
use axum::http::header;
use axum::response::IntoResponse;
use serde::Deserialize;
use serde_json::Value;
use utoipa::ToSchema;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{CertificateAnswer, CertificateStatusAnswer, VerifyAnswer};
use super::doc::{IdPath, Refusals};

use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::{self, verify};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(list))
        .routes(routes!(get_one))
        .routes(routes!(pdf))
        .routes(routes!(verify_body))
}

/// Certificate revisions of a project.
#[utoipa::path(get, path = "/api/v1/projects/{id}/certificates", tag = "certificates",
    params(IdPath),
    responses((status = 200, description = "Every revision issued", body = Vec<CertificateAnswer>), Refusals))]
async fn list(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<CertificateAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    ledger::setup::require_project(&s.db, id).await?;
    let all = db::certificates::for_project(&s.db, id).await?;
    Ok(Json(all.into_iter().map(Into::into).collect()))
}

/// One certificate revision and whether it is current.
#[utoipa::path(get, path = "/api/v1/certificates/{id}", tag = "certificates",
    params(IdPath),
    responses((status = 200, description = "The revision", body = CertificateStatusAnswer), Refusals))]
async fn get_one(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<CertificateStatusAnswer>> {
    require(&s.db, &caller, Scope::Certificate(id), Action::Read).await?;

    let c = verify::require_certificate(&s.db, id).await?;
    let current = c.is_current();
    Ok(Json(CertificateStatusAnswer {
        certificate: c.into(),
        current,
    }))
}

/// The issued PDF bytes of a revision.
#[utoipa::path(get, path = "/api/v1/certificates/{id}/pdf", tag = "certificates",
    params(IdPath),
    responses((status = 200, description = "The PDF as issued (its SHA-256 is the certificate's `sha256`)",
        content_type = "application/pdf", body = [u8]), Refusals))]
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

/// Body of a verification request: exactly one of the three ways to name a certificate.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "7K2M-Q9XD"}), min_properties = 1, max_properties = 1)]
struct VerifyInput {
    /// The verification code printed on the certificate.
    #[serde(default, deserialize_with = "given_text")]
    #[schema(nullable = false, pattern = r"\S")]
    code: Option<String>,
    /// SHA-256 of the PDF, hex.
    #[serde(default, deserialize_with = "given_text")]
    #[schema(nullable = false, pattern = r"\S")]
    sha256: Option<String>,
    /// The PDF itself, standard base64.
    #[serde(default, deserialize_with = "given_text")]
    #[schema(nullable = false)]
    pdf_base64: Option<String>,
}

/// A field that may be left out but, when given, is text: `null` is refused with the field
/// named (the body names its certificate one way, and a second key set to `null` is a
/// client's mistake worth saying).
fn given_text<'de, D: serde::Deserializer<'de>>(
    d: D,
) -> std::result::Result<Option<String>, D::Error> {
    String::deserialize(d).map(Some)
}

/// Identify a certificate by code, hash or PDF bytes (no sign-in needed).
#[utoipa::path(post, path = "/api/v1/verify", tag = "certificates", request_body = VerifyInput, security(()),
    responses((status = 200, description = "What was found (also when nothing matches)", body = VerifyAnswer), Refusals))]
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
