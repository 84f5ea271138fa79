//! Projects and what is set up inside them: clauses, sources, lab tests, layers, lots.

use axum::extract::State;
use axum::http::StatusCode;
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::{Value, json};

use super::Page;
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require, require_admin};
use crate::http::extract::{ApiJson, ApiPath, ApiQuery};
use crate::ledger::{self, setup};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/projects", get(list_projects).post(create_project))
        .route("/api/v1/projects/{id}", get(get_project))
        .route(
            "/api/v1/projects/{id}/clauses",
            get(list_clauses).post(create_clause),
        )
        .route(
            "/api/v1/projects/{id}/sources",
            get(list_sources).post(create_source),
        )
        .route(
            "/api/v1/sources/{id}/lab-tests",
            get(list_lab_tests).post(create_lab_test),
        )
        .route("/api/v1/lab-tests/{id}", get(get_lab_test))
        .route(
            "/api/v1/projects/{id}/layers",
            get(list_layers).post(create_layer),
        )
        .route(
            "/api/v1/projects/{id}/lots",
            get(list_lots).post(create_lot),
        )
        .route("/api/v1/projects/{id}/lots/split", post(split_lots))
        .route(
            "/api/v1/projects/{id}/moulds",
            get(list_moulds).post(create_mould),
        )
        .route("/api/v1/lots/{id}", get(get_lot))
        .route("/api/v1/lots/{id}/history", get(lot_history))
        .route("/api/v1/projects/{id}/review-queue", get(review_queue))
        .route("/api/v1/lots/{id}/submit", post(submit_lot))
        .route("/api/v1/lots/{id}/accept", post(accept_lot))
        .route("/api/v1/lots/{id}/reject", post(reject_lot))
}

type Created<T> = (StatusCode, Json<T>);

async fn list_projects(
    State(s): State<AppState>,
    caller: Caller,
) -> Result<Json<Vec<db::projects::Project>>> {
    let all = db::projects::list(&s.db).await?;
    Ok(Json(match caller.visible_projects(&s.db).await? {
        None => all,
        Some(ids) => all.into_iter().filter(|p| ids.contains(&p.id)).collect(),
    }))
}

async fn create_project(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::ProjectInput>,
) -> Result<Created<db::projects::Project>> {
    let actor = require_admin(&caller)?;

    let p = setup::create_project(&s.db, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(p)))
}

async fn get_project(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<db::projects::Project>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    Ok(Json(setup::require_project(&s.db, id).await?))
}

async fn list_clauses(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::clauses::Clause>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    Ok(Json(db::clauses::list(&s.db, id).await?))
}

async fn create_clause(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::ClauseInput>,
) -> Result<Created<db::clauses::Clause>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    Ok((
        StatusCode::CREATED,
        Json(setup::create_clause(&s.db, id, &input, &actor).await?),
    ))
}

async fn list_sources(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::sources::Source>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    Ok(Json(db::sources::list(&s.db, id).await?))
}

async fn create_source(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::SourceInput>,
) -> Result<Created<db::sources::Source>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    Ok((
        StatusCode::CREATED,
        Json(setup::create_source(&s.db, id, &input, &actor).await?),
    ))
}

async fn list_lab_tests(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<Value>>> {
    require(&s.db, &caller, Scope::Source(id), Action::Read).await?;

    db::sources::get(&s.db, id)
        .await?
        .ok_or_else(|| AppError::not_found("source_id", format!("source {id} does not exist")))?;
    let tests = db::lab_tests::list_for_source(&s.db, id).await?;
    Ok(Json(tests.iter().map(lab_test_json).collect()))
}

/// A lab test with its stored JSON columns expanded.
pub(super) fn lab_test_json(t: &db::lab_tests::LabTest) -> Value {
    let mut v = json!(t);
    v["points"] = serde_json::from_str(&t.points_json).unwrap_or(Value::Null);
    v["warnings"] = serde_json::from_str(&t.warnings_json).unwrap_or(Value::Null);
    v["approval_concerns"] = serde_json::from_str(&t.approval_concerns_json).unwrap_or(Value::Null);
    v["effort_family"] = json!(ledger::reference::lab_family(t).code());
    if let Some(o) = v.as_object_mut() {
        o.remove("points_json");
        o.remove("warnings_json");
        o.remove("approval_concerns_json");
    }
    v
}

async fn create_lab_test(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::LabTestInput>,
) -> Result<Created<Value>> {
    let actor = require(&s.db, &caller, Scope::Source(id), Action::ManageSetup).await?;

    let t = setup::create_lab_test(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(lab_test_json(&t))))
}

async fn get_lab_test(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::LabTest(id), Action::Read).await?;

    let t = db::lab_tests::get(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("lab_test_id", format!("lab test {id} does not exist"))
    })?;
    Ok(Json(lab_test_json(&t)))
}

async fn list_layers(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::layers::Layer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    Ok(Json(db::layers::list(&s.db, id).await?))
}

async fn create_layer(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::LayerInput>,
) -> Result<Created<db::layers::Layer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    Ok((
        StatusCode::CREATED,
        Json(setup::create_layer(&s.db, id, &input, &actor).await?),
    ))
}

/// Filters of the lot list.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct LotQuery {
    chainage_from_m: Option<f64>,
    chainage_to_m: Option<f64>,
    layer_id: Option<i64>,
    state: Option<String>,
    changed_since: Option<String>,
    changed_before: Option<String>,
    page: Option<i64>,
    per_page: Option<i64>,
}

async fn list_lots(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<LotQuery>,
) -> Result<Json<Value>> {
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
    Ok(Json(
        json!({"lots": lots, "limit": limit, "offset": offset}),
    ))
}

async fn split_lots(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ledger::lot_split::SplitInput>,
) -> Result<(StatusCode, Json<Value>)> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    let ids = ledger::lot_split::create(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(json!({"lot_ids": ids}))))
}

async fn list_moulds(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::moulds::Mould>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    Ok(Json(db::moulds::list(&s.db, id).await?))
}

async fn create_mould(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ledger::moulds::MouldInput>,
) -> Result<Created<db::moulds::Mould>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    Ok((
        StatusCode::CREATED,
        Json(ledger::moulds::create_mould(&s.db, id, &input, &actor).await?),
    ))
}

async fn create_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<setup::LotInput>,
) -> Result<Created<db::lots::Lot>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;

    Ok((
        StatusCode::CREATED,
        Json(setup::create_lot(&s.db, id, &input, &actor).await?),
    ))
}

async fn get_lot(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<ledger::lot_report::LotReport>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;

    Ok(Json(ledger::lot_report::build(&s.db, id).await?))
}

async fn lot_history(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;

    ledger::field::require_lot(&s.db, id).await?;
    let transitions = db::lots::transitions(&s.db, id).await?;
    let audit = db::audit::for_entity(&s.db, "lot", id).await?;
    Ok(Json(json!({"transitions": transitions, "audit": audit})))
}

async fn review_queue(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::lots::Lot>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    setup::require_project(&s.db, id).await?;
    Ok(Json(
        db::lots::in_state(&s.db, id, crate::domain::LotState::Submitted).await?,
    ))
}

/// Body of a review action.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ReviewInput {
    #[serde(default)]
    comment: String,
}

async fn submit_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReviewInput>,
) -> Result<Json<ledger::lot_report::LotReport>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::SubmitLot).await?;

    Ok(Json(
        ledger::review::submit(&s.db, id, &input.comment, &actor).await?,
    ))
}

async fn accept_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReviewInput>,
) -> Result<Json<ledger::lot_report::LotReport>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ReviewLot).await?;

    Ok(Json(
        ledger::review::accept(&s.db, id, &input.comment, &actor).await?,
    ))
}

async fn reject_lot(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<ReviewInput>,
) -> Result<Json<ledger::lot_report::LotReport>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ReviewLot).await?;

    Ok(Json(
        ledger::review::reject(&s.db, id, &input.comment, &actor).await?,
    ))
}
