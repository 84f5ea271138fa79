//! After sign-off: reopening an accepted lot (client engineer) and re-pointing an
//! open lot at another curve (QC manager).

use axum::Json;
use axum::extract::State;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::LotReportAnswer;
use super::bodies;
use super::doc::{IdPath, Refusals};
use super::verdicts::ReasonInput;
use crate::app::AppState;
use crate::auth::Action;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::{reopen, repoint};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(reopen_lot))
        .routes(routes!(repoint_lot))
}

/// Reopen an accepted lot (client engineer, reason required); its certificate is withdrawn.
#[utoipa::path(post, path = "/api/v1/lots/{id}/reopen", tag = "lots", request_body = ReasonInput,
    params(IdPath),
    responses((status = 200, description = "The lot, open again", body = LotReportAnswer), Refusals))]
async fn reopen_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReasonInput>,
) -> Result<Json<LotReportAnswer>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ReviewLot).await?;
    let report = reopen::reopen(&s.db, id, &input.reason, &actor).await?;
    Ok(Json(report.into()))
}

/// Re-point an open lot at another active curve of its source (QC manager, audited).
#[utoipa::path(post, path = "/api/v1/lots/{id}/reference", tag = "lots", request_body = bodies::RepointInput,
    params(IdPath),
    responses((status = 200, description = "The lot, judged against its new curve", body = LotReportAnswer), Refusals))]
async fn repoint_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<repoint::RepointInput>,
) -> Result<Json<LotReportAnswer>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    let report = repoint::repoint(&s.db, id, &input, &actor).await?;
    Ok(Json(report.into()))
}
