//! Verdict actions beyond setup and review: approving a curve with quality concerns,
//! and re-sampling a failed quality-index lot.

use axum::extract::{Path, State};
use axum::routing::post;
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::Value;

use crate::app::AppState;
use crate::auth::Action;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::ApiJson;
use crate::ledger;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/lab-tests/{id}/approve", post(approve_lab_test))
        .route("/api/v1/lots/{id}/resample", post(resample_lot))
}

/// Body of an action that needs a written reason.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ReasonInput {
    #[serde(default)]
    reason: String,
}

async fn approve_lab_test(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReasonInput>,
) -> Result<Json<Value>> {
    let actor = require(&s.db, &caller, Scope::LabTest(id), Action::ManageSetup).await?;
    let t = ledger::reference::approve(&s.db, id, &input.reason, &actor).await?;
    Ok(Json(super::projects::lab_test_json(&t)))
}

async fn resample_lot(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReasonInput>,
) -> Result<Json<ledger::lot_report::LotReport>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    Ok(Json(
        ledger::resample::resample(&s.db, id, &input.reason, &actor).await?,
    ))
}
