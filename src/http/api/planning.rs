//! Where and what to test: lot plans, clause planning terms, one-point checks, curve drift and
//! control charts.

use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::routing::{get, post, put};
use axum::{Json, Router};
use serde::Deserialize;

use crate::app::AppState;
use crate::auth::Action;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiQuery};
use crate::ledger::{self, planning, watch};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/lots/{id}/plan", get(get_plan).post(draw_plan))
        .route("/api/v1/clauses/{id}/planning-terms", put(set_terms))
        .route("/api/v1/sources/{id}/one-point-checks", post(one_point))
        .route("/api/v1/lab-tests/{id}/drift", get(drift))
        .route("/api/v1/projects/{id}/control-charts", get(charts))
}

async fn get_plan(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
) -> Result<Json<planning::PlanView>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;
    Ok(Json(planning::view(&s.db, id).await?))
}

async fn draw_plan(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<planning::PlanRequest>,
) -> Result<(StatusCode, Json<planning::PlanView>)> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    planning::draw(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(planning::view(&s.db, id).await?)))
}

async fn set_terms(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<planning::TermsInput>,
) -> Result<Json<crate::db::planning::ClauseTerms>> {
    let project = crate::db::clauses::get(&s.db, id)
        .await?
        .map(|c| c.project_id)
        .ok_or_else(|| {
            AppError::not_found("clause_id", format!("no clause {id} in your projects"))
        })?;
    let actor = require(&s.db, &caller, Scope::Project(project), Action::ManageSetup).await?;
    Ok(Json(planning::set_terms(&s.db, id, &input, &actor).await?))
}

async fn one_point(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ledger::one_point::OnePointInput>,
) -> Result<(StatusCode, Json<ledger::one_point::OnePointAnswer>)> {
    let actor = require(&s.db, &caller, Scope::Source(id), Action::ManageSetup).await?;
    let answer = ledger::one_point::record(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(answer)))
}

async fn drift(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
) -> Result<Json<watch::CurveDrift>> {
    require(&s.db, &caller, Scope::LabTest(id), Action::Read).await?;
    let lab = crate::db::lab_tests::get(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("lab_test_id", format!("lab test {id} does not exist"))
    })?;
    let source = crate::db::sources::get(&s.db, lab.source_id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lab test {id} has no source"))?;
    Ok(Json(watch::drift_of(&s.db, source.project_id, &lab).await?))
}

/// Which charts.
#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct ChartQuery {
    #[serde(default)]
    pub by: watch::GroupBy,
    #[serde(default)]
    pub measure: watch::Measure,
}

async fn charts(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiQuery(q): ApiQuery<ChartQuery>,
) -> Result<Json<Vec<watch::ChartGroup>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    Ok(Json(
        watch::control_charts(&s.db, id, q.by, q.measure).await?,
    ))
}
