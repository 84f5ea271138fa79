//! After sign-off: reopening an accepted lot (client engineer) and re-pointing an
//! open lot at another curve (QC manager).

use axum::extract::State;
use axum::routing::post;
use axum::{Json, Router};
use serde::Deserialize;

use crate::app::AppState;
use crate::auth::Action;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::lot_report::LotReport;
use crate::ledger::{reopen, repoint};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/lots/{id}/reopen", post(reopen_lot))
        .route("/api/v1/lots/{id}/reference", post(repoint_lot))
}

/// Body of a reopen.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ReopenInput {
    #[serde(default)]
    reason: String,
}

async fn reopen_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReopenInput>,
) -> Result<Json<LotReport>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ReviewLot).await?;
    Ok(Json(
        reopen::reopen(&s.db, id, &input.reason, &actor).await?,
    ))
}

async fn repoint_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<repoint::RepointInput>,
) -> Result<Json<LotReport>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    Ok(Json(repoint::repoint(&s.db, id, &input, &actor).await?))
}
