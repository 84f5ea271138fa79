//! Where and what to test: lot plans, clause planning terms, one-point checks, curve drift and
//! control charts.

use axum::Json;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use serde::Deserialize;
use utoipa::IntoParams;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{
    ChartGroupAnswer, DriftAnswer, OnePointAnswer, PlanAnswer, PlanningTermsAnswer,
};
use super::bodies;
use super::codes;
use super::doc::{IdPath, Refusals};

use crate::app::AppState;
use crate::auth::Action;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiQuery};
use crate::ledger::{self, planning, watch};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(get_plan, draw_plan))
        .routes(routes!(set_terms))
        .routes(routes!(one_point))
        .routes(routes!(drift))
        .routes(routes!(charts))
}

/// A lot's test-location plan (ASTM D3665, stratified random).
///
/// With its earlier plans and how each test lies against it.
#[utoipa::path(get, path = "/api/v1/lots/{id}/plan", tag = "planning",
    params(IdPath),
    responses((status = 200, description = "The plan (no current plan before one is drawn)", body = PlanAnswer), Refusals))]
async fn get_plan(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
) -> Result<Json<PlanAnswer>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;
    Ok(Json(planning::view(&s.db, id).await?.into()))
}

/// Declare a lot ready for testing: draw its random test locations from a recorded seed.
///
/// A replan needs a reason; the old plan is kept.
#[utoipa::path(post, path = "/api/v1/lots/{id}/plan", tag = "planning", request_body = bodies::PlanInput,
    params(IdPath),
    responses((status = 201, description = "The plan drawn", body = PlanAnswer), Refusals))]
async fn draw_plan(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<planning::PlanRequest>,
) -> Result<(StatusCode, Json<PlanAnswer>)> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    planning::draw(&s.db, id, &input, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(planning::view(&s.db, id).await?.into()),
    ))
}

/// Set a clause's planning terms.
///
/// Plan tolerance, whether one-point references are allowed, and the one-point dry window.
#[utoipa::path(put, path = "/api/v1/clauses/{id}/planning-terms", tag = "planning", request_body = bodies::PlanningTermsInput,
    params(IdPath),
    responses((status = 200, description = "The terms now in force", body = PlanningTermsAnswer), Refusals))]
async fn set_terms(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<planning::TermsInput>,
) -> Result<Json<PlanningTermsAnswer>> {
    let project = crate::db::clauses::get(&s.db, id)
        .await?
        .map(|c| c.project_id)
        .ok_or_else(|| {
            AppError::not_found("clause_id", format!("no clause {id} in your projects"))
        })?;
    let actor = require(&s.db, &caller, Scope::Project(project), Action::ManageSetup).await?;
    Ok(Json(
        planning::set_terms(&s.db, id, &input, &actor).await?.into(),
    ))
}

/// Record a one-point check (AASHTO T 272).
///
/// MDD and OMC are interpolated in the source's family of curves.
#[utoipa::path(post, path = "/api/v1/sources/{id}/one-point-checks", tag = "planning", request_body = bodies::OnePointInput,
    params(IdPath),
    responses((status = 201, description = "The check with its interpolated reference", body = OnePointAnswer), Refusals))]
async fn one_point(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ledger::one_point::OnePointInput>,
) -> Result<(StatusCode, Json<OnePointAnswer>)> {
    let actor = require(&s.db, &caller, Scope::Source(id), Action::ManageSetup).await?;
    let answer = ledger::one_point::record(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(answer.into())))
}

/// Whether a curve's field points say its material may have changed.
///
/// With the tests that triggered each finding.
#[utoipa::path(get, path = "/api/v1/lab-tests/{id}/drift", tag = "planning",
    params(IdPath),
    responses((status = 200, description = "The drift findings", body = DriftAnswer), Refusals))]
async fn drift(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
) -> Result<Json<DriftAnswer>> {
    require(&s.db, &caller, Scope::LabTest(id), Action::Read).await?;
    let lab = crate::db::lab_tests::get(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("lab_test_id", format!("lab test {id} does not exist"))
    })?;
    let source = crate::db::sources::get(&s.db, lab.source_id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lab test {id} has no source"))?;
    Ok(Json(
        watch::drift_of(&s.db, source.project_id, &lab)
            .await?
            .into(),
    ))
}

/// Which charts.
#[derive(Debug, Deserialize, Default, IntoParams)]
#[serde(deny_unknown_fields)]
#[into_params(parameter_in = Query)]
pub struct ChartQuery {
    /// How points are grouped (default `source`).
    #[serde(default)]
    #[param(value_type = Option<codes::GroupBy>)]
    pub by: watch::GroupBy,
    /// What is plotted (default `rc`).
    #[serde(default)]
    #[param(value_type = Option<codes::Measure>)]
    pub measure: watch::Measure,
}

/// Individuals and moving-range charts with run rules.
///
/// Of relative compaction or moisture deviation, per source, layer or technician.
#[utoipa::path(get, path = "/api/v1/projects/{id}/control-charts", tag = "planning",
    params(IdPath, ChartQuery),
    responses((status = 200, description = "One chart per group, groups in name order", body = Vec<ChartGroupAnswer>), Refusals))]
async fn charts(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    ApiQuery(q): ApiQuery<ChartQuery>,
) -> Result<Json<Vec<ChartGroupAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let groups = watch::control_charts(&s.db, id, q.by, q.measure).await?;
    Ok(Json(groups.into_iter().map(Into::into).collect()))
}
