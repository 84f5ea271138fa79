//! Projects and what is set up inside them: clauses, sources, lab tests, layers, lots.

use axum::Json;
use axum::extract::State;
use axum::http::StatusCode;
use serde::Deserialize;
use utoipa::IntoParams;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::Page;
use super::answers::{
    ClauseAnswer, LabTestAnswer, LayerAnswer, LotAnswer, LotHistoryAnswer, LotPage,
    LotReportAnswer, MouldAnswer, ProjectAnswer, SourceAnswer, SplitAnswer,
};
use super::bodies;
use super::doc::{IdPath, Refusals};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require, require_admin};
use crate::http::extract::{ApiJson, ApiPath, ApiQuery};
use crate::ledger::lot_report::TestWindow;
use crate::ledger::{self, setup};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(list_projects, create_project))
        .routes(routes!(get_project))
        .routes(routes!(list_clauses, create_clause))
        .routes(routes!(list_sources, create_source))
        .routes(routes!(list_lab_tests, create_lab_test))
        .routes(routes!(get_lab_test))
        .routes(routes!(list_layers, create_layer))
        .routes(routes!(list_lots, create_lot))
        .routes(routes!(split_lots))
        .routes(routes!(list_moulds, create_mould))
        .routes(routes!(get_lot))
        .routes(routes!(lot_history))
        .routes(routes!(review_queue))
        .routes(routes!(submit_lot))
        .routes(routes!(accept_lot))
        .routes(routes!(reject_lot))
}

type Created<T> = (StatusCode, Json<T>);

/// List projects.
///
/// The projects the caller may read (all of them for an administrator).
#[utoipa::path(get, path = "/api/v1/projects", tag = "projects",
    responses((status = 200, description = "Projects", body = Vec<ProjectAnswer>), Refusals))]
async fn list_projects(
    State(s): State<AppState>,
    caller: Caller,
) -> Result<Json<Vec<ProjectAnswer>>> {
    let all = db::projects::list(&s.db).await?;
    let visible = caller.visible_projects(&s.db).await?;
    Ok(Json(
        all.into_iter()
            .filter(|p| visible.as_ref().is_none_or(|ids| ids.contains(&p.id)))
            .map(Into::into)
            .collect(),
    ))
}

/// Create a project (administrators).
#[utoipa::path(post, path = "/api/v1/projects", tag = "projects", request_body = bodies::ProjectInput,
    responses((status = 201, description = "The new project", body = ProjectAnswer), Refusals))]
async fn create_project(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::ProjectInput>,
) -> Result<Created<ProjectAnswer>> {
    let actor = require_admin(&caller)?;

    let p = setup::create_project(&s.db, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(p.into())))
}

/// One project.
#[utoipa::path(get, path = "/api/v1/projects/{id}", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "The project", body = ProjectAnswer), Refusals))]
async fn get_project(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<ProjectAnswer>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    Ok(Json(setup::require_project(&s.db, id).await?.into()))
}

/// List a project's specification clauses.
#[utoipa::path(get, path = "/api/v1/projects/{id}/clauses", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "Clauses", body = Vec<ClauseAnswer>), Refusals))]
async fn list_clauses(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<ClauseAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    let clauses = db::clauses::list(&s.db, id).await?;
    Ok(Json(clauses.into_iter().map(Into::into).collect()))
}

/// Create a specification clause.
#[utoipa::path(post, path = "/api/v1/projects/{id}/clauses", tag = "projects", request_body = bodies::ClauseInput,
    params(IdPath),
    responses((status = 201, description = "The new clause", body = ClauseAnswer), Refusals))]
async fn create_clause(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::ClauseInput>,
) -> Result<Created<ClauseAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let c = setup::create_clause(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(c.into())))
}

/// List a project's borrow sources.
#[utoipa::path(get, path = "/api/v1/projects/{id}/sources", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "Sources", body = Vec<SourceAnswer>), Refusals))]
async fn list_sources(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<SourceAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    let sources = db::sources::list(&s.db, id).await?;
    Ok(Json(sources.into_iter().map(Into::into).collect()))
}

/// Create a borrow source.
#[utoipa::path(post, path = "/api/v1/projects/{id}/sources", tag = "projects", request_body = bodies::SourceInput,
    params(IdPath),
    responses((status = 201, description = "The new source", body = SourceAnswer), Refusals))]
async fn create_source(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::SourceInput>,
) -> Result<Created<SourceAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let source = setup::create_source(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(source.into())))
}

/// List a source's lab compaction tests.
#[utoipa::path(get, path = "/api/v1/sources/{id}/lab-tests", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "Lab tests with their curves", body = Vec<LabTestAnswer>), Refusals))]
async fn list_lab_tests(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<LabTestAnswer>>> {
    require(&s.db, &caller, Scope::Source(id), Action::Read).await?;

    db::sources::get(&s.db, id)
        .await?
        .ok_or_else(|| AppError::not_found("source_id", format!("source {id} does not exist")))?;
    let tests = db::lab_tests::list_for_source(&s.db, id).await?;
    Ok(Json(tests.into_iter().map(Into::into).collect()))
}

/// Record a lab compaction test and fit its curve.
///
/// A curve with quality concerns is stored as needing a QC manager's approval.
#[utoipa::path(post, path = "/api/v1/sources/{id}/lab-tests", tag = "projects", request_body = bodies::LabTestInput,
    params(IdPath),
    responses((status = 201, description = "The new lab test", body = LabTestAnswer), Refusals))]
async fn create_lab_test(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::LabTestInput>,
) -> Result<Created<LabTestAnswer>> {
    let actor = require(&s.db, &caller, Scope::Source(id), Action::ManageSetup).await?;

    let t = setup::create_lab_test(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(t.into())))
}

/// One lab compaction test.
#[utoipa::path(get, path = "/api/v1/lab-tests/{id}", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "The lab test", body = LabTestAnswer), Refusals))]
async fn get_lab_test(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<LabTestAnswer>> {
    require(&s.db, &caller, Scope::LabTest(id), Action::Read).await?;

    let t = db::lab_tests::get(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("lab_test_id", format!("lab test {id} does not exist"))
    })?;
    Ok(Json(t.into()))
}

/// List a project's layers by zone.
#[utoipa::path(get, path = "/api/v1/projects/{id}/layers", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "Layers", body = Vec<LayerAnswer>), Refusals))]
async fn list_layers(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<LayerAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    let layers = db::layers::list(&s.db, id).await?;
    Ok(Json(layers.into_iter().map(Into::into).collect()))
}

/// Create a layer (and its zone when new).
#[utoipa::path(post, path = "/api/v1/projects/{id}/layers", tag = "projects", request_body = bodies::LayerInput,
    params(IdPath),
    responses((status = 201, description = "The new layer", body = LayerAnswer), Refusals))]
async fn create_layer(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::LayerInput>,
) -> Result<Created<LayerAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let layer = setup::create_layer(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(layer.into())))
}

/// Filters of the lot list.
#[derive(Debug, Deserialize, IntoParams)]
#[serde(deny_unknown_fields)]
#[into_params(parameter_in = Query)]
struct LotQuery {
    /// Lots reaching at least this chainage, m.
    chainage_from_m: Option<f64>,
    /// Lots starting before this chainage, m.
    chainage_to_m: Option<f64>,
    layer_id: Option<i64>,
    #[param(value_type = Option<super::codes::LotState>)]
    state: Option<String>,
    /// Lots whose state changed at or after this time (RFC 3339, or a date).
    #[param(pattern = r"^\d{4}-\d{2}-\d{2}")]
    changed_since: Option<String>,
    /// Lots whose state changed before this time (RFC 3339, or a date).
    #[param(pattern = r"^\d{4}-\d{2}-\d{2}")]
    changed_before: Option<String>,
    /// Page number, from 1.
    #[param(minimum = 1)]
    page: Option<i64>,
    /// Lots per page (default 100).
    #[param(minimum = 1, maximum = 1000)]
    per_page: Option<i64>,
}

/// List a project's lots, filtered and paged.
#[utoipa::path(get, path = "/api/v1/projects/{id}/lots", tag = "lots",
    params(IdPath, LotQuery),
    responses((status = 200, description = "One page of lots", body = LotPage), Refusals))]
async fn list_lots(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<LotQuery>,
) -> Result<Json<LotPage>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    let (limit, offset) = Page {
        page: q.page,
        per_page: q.per_page,
    }
    .limit_offset()?;
    if let Some(st) = &q.state
        && crate::domain::LotState::parse_code(st).is_none()
    {
        return Err(AppError::invalid(
            "state",
            "must be open, submitted, accepted or rejected",
        ));
    }
    let filter = db::lots::LotFilter {
        chainage_from_m: q.chainage_from_m,
        chainage_to_m: q.chainage_to_m,
        layer_id: q.layer_id,
        state: q
            .state
            .as_deref()
            .and_then(crate::domain::LotState::parse_code),
        changed_since: q
            .changed_since
            .as_deref()
            .map(|t| ledger::validate::timestamp("changed_since", t))
            .transpose()?,
        changed_before: q
            .changed_before
            .as_deref()
            .map(|t| ledger::validate::timestamp("changed_before", t))
            .transpose()?,
        limit,
        offset,
    };
    let lots = db::lots::list(&s.db, id, &filter).await?;
    Ok(Json(LotPage {
        lots: lots.into_iter().map(Into::into).collect(),
        limit,
        offset,
    }))
}

/// Split a stretch of a layer into lots every N metres (all or none are made).
#[utoipa::path(post, path = "/api/v1/projects/{id}/lots/split", tag = "lots", request_body = bodies::SplitInput,
    params(IdPath),
    responses((status = 201, description = "Ids of the lots made", body = SplitAnswer), Refusals))]
async fn split_lots(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ledger::lot_split::SplitInput>,
) -> Result<Created<SplitAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let lot_ids = ledger::lot_split::create(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(SplitAnswer { lot_ids })))
}

/// List the project's registered compaction moulds.
#[utoipa::path(get, path = "/api/v1/projects/{id}/moulds", tag = "projects",
    params(IdPath),
    responses((status = 200, description = "Moulds", body = Vec<MouldAnswer>), Refusals))]
async fn list_moulds(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<MouldAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    let moulds = db::moulds::list(&s.db, id).await?;
    Ok(Json(moulds.into_iter().map(Into::into).collect()))
}

/// Register a compaction mould with its calibrated volume.
#[utoipa::path(post, path = "/api/v1/projects/{id}/moulds", tag = "projects", request_body = bodies::MouldInput,
    params(IdPath),
    responses((status = 201, description = "The new mould", body = MouldAnswer), Refusals))]
async fn create_mould(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ledger::moulds::MouldInput>,
) -> Result<Created<MouldAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let m = ledger::moulds::create_mould(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(m.into())))
}

/// Create a lot.
#[utoipa::path(post, path = "/api/v1/projects/{id}/lots", tag = "lots", request_body = bodies::LotInput,
    params(IdPath),
    responses((status = 201, description = "The new lot", body = LotAnswer), Refusals))]
async fn create_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::LotInput>,
) -> Result<Created<LotAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let lot = setup::create_lot(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(lot.into())))
}

/// Which of a lot's test lines its report lists.
#[derive(Debug, Deserialize, IntoParams)]
#[serde(deny_unknown_fields)]
#[into_params(parameter_in = Query)]
struct LotLinesQuery {
    /// Test lines to skip (default 0).
    #[param(minimum = 0)]
    offset: Option<usize>,
    /// Most test lines to list (default 1000, at most 10000); the verdict and statistics
    /// cover every test whatever the window.
    #[param(minimum = 1, maximum = 10000)]
    limit: Option<usize>,
}

impl LotLinesQuery {
    /// The window asked for, its limit checked.
    fn window(&self) -> Result<TestWindow> {
        let limit = self.limit.unwrap_or(TestWindow::API_DEFAULT.limit);
        if !(1..=TestWindow::API_MAX_LIMIT).contains(&limit) {
            return Err(AppError::invalid(
                "limit",
                format!("must be between 1 and {}", TestWindow::API_MAX_LIMIT),
            ));
        }
        Ok(TestWindow {
            offset: self.offset.unwrap_or(0),
            limit,
        })
    }
}

/// A lot with its tests, verdict, statistics and tests owed.
///
/// The tests are listed from `offset`, at most `limit` of them (default the first 1000);
/// `tests_entered` counts them all, and the verdict and statistics cover every test.
#[utoipa::path(get, path = "/api/v1/lots/{id}", tag = "lots",
    params(IdPath, LotLinesQuery),
    responses((status = 200, description = "The lot judged now", body = LotReportAnswer), Refusals))]
async fn get_lot(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<LotLinesQuery>,
) -> Result<Json<LotReportAnswer>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;

    let window = q.window()?;
    let report = ledger::lot_report::build(&s.db, id).await?;
    Ok(Json(LotReportAnswer::windowed(report, window)))
}

/// A lot's state changes and audit trail.
#[utoipa::path(get, path = "/api/v1/lots/{id}/history", tag = "lots",
    params(IdPath),
    responses((status = 200, description = "State changes and audit rows", body = LotHistoryAnswer), Refusals))]
async fn lot_history(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<LotHistoryAnswer>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;

    ledger::field::require_lot(&s.db, id).await?;
    let transitions = db::lots::transitions(&s.db, id).await?;
    let audit = db::audit::for_entity(&s.db, "lot", id).await?;
    Ok(Json(LotHistoryAnswer {
        transitions: transitions.into_iter().map(Into::into).collect(),
        audit: audit.into_iter().map(Into::into).collect(),
    }))
}

/// Submitted lots, oldest first.
#[utoipa::path(get, path = "/api/v1/projects/{id}/review-queue", tag = "lots",
    params(IdPath),
    responses((status = 200, description = "Lots awaiting review", body = Vec<LotAnswer>), Refusals))]
async fn review_queue(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<LotAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    let lots = db::lots::in_state(&s.db, id, crate::domain::LotState::Submitted).await?;
    Ok(Json(lots.into_iter().map(Into::into).collect()))
}

/// Body of a review action.
#[derive(Debug, Deserialize, utoipa::ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"comment": "all tests pass"}))]
struct ReviewInput {
    /// Required to reject; optional otherwise.
    #[serde(default)]
    #[schema(max_length = 1000, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    comment: String,
}

/// Submit a lot for review.
#[utoipa::path(post, path = "/api/v1/lots/{id}/submit", tag = "lots", request_body = ReviewInput,
    params(IdPath),
    responses((status = 200, description = "The lot, submitted", body = LotReportAnswer), Refusals))]
async fn submit_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReviewInput>,
) -> Result<Json<LotReportAnswer>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::SubmitLot).await?;

    let report = ledger::review::submit(&s.db, id, &input.comment, &actor).await?;
    Ok(Json(report.into()))
}

/// Accept a submitted lot and issue its certificate.
#[utoipa::path(post, path = "/api/v1/lots/{id}/accept", tag = "lots", request_body = ReviewInput,
    params(IdPath),
    responses((status = 200, description = "The lot, accepted, with its certificate", body = LotReportAnswer), Refusals))]
async fn accept_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReviewInput>,
) -> Result<Json<LotReportAnswer>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ReviewLot).await?;

    let report = ledger::review::accept(&s.db, id, &input.comment, &actor).await?;
    Ok(Json(report.into()))
}

/// Reject a submitted lot (comment required).
#[utoipa::path(post, path = "/api/v1/lots/{id}/reject", tag = "lots", request_body = ReviewInput,
    params(IdPath),
    responses((status = 200, description = "The lot, rejected", body = LotReportAnswer), Refusals))]
async fn reject_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReviewInput>,
) -> Result<Json<LotReportAnswer>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ReviewLot).await?;

    let report = ledger::review::reject(&s.db, id, &input.comment, &actor).await?;
    Ok(Json(report.into()))
}
