//! Verdict actions beyond setup and review: approving a curve with quality concerns,
//! and re-sampling a failed quality-index lot.

use axum::Json;
use axum::extract::{Path, State};
use serde::Deserialize;
use utoipa::ToSchema;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{LabTestAnswer, LotReportAnswer};
use super::doc::{IdPath, Refusals};
use crate::app::AppState;
use crate::auth::Action;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::ApiJson;
use crate::ledger;

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(approve_lab_test))
        .routes(routes!(resample_lot))
}

/// Body of an action that needs a written reason.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"reason": "scatter explained by the lab's note; curve shape checked"}))]
pub(super) struct ReasonInput {
    /// Why (kept in the record's history); required.
    #[serde(default)]
    #[schema(
        max_length = 1000,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub(super) reason: String,
}

/// Approve a curve awaiting approval, with a written reason (QC manager).
#[utoipa::path(post, path = "/api/v1/lab-tests/{id}/approve", tag = "projects", request_body = ReasonInput,
    params(IdPath),
    responses((status = 200, description = "The lab test, approved", body = LabTestAnswer), Refusals))]
async fn approve_lab_test(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReasonInput>,
) -> Result<Json<LabTestAnswer>> {
    let actor = require(&s.db, &caller, Scope::LabTest(id), Action::ManageSetup).await?;
    let t = ledger::reference::approve(&s.db, id, &input.reason, &actor).await?;
    Ok(Json(t.into()))
}

/// Judge a failed quality-index lot on a new random sample after rework.
#[utoipa::path(post, path = "/api/v1/lots/{id}/resample", tag = "lots", request_body = ReasonInput,
    params(IdPath),
    responses((status = 200, description = "The lot, judged on its new sample", body = LotReportAnswer), Refusals))]
async fn resample_lot(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReasonInput>,
) -> Result<Json<LotReportAnswer>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    let report = ledger::resample::resample(&s.db, id, &input.reason, &actor).await?;
    Ok(Json(report.into()))
}
