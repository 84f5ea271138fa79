//! The instrument register: instruments, records, assignments, operators, CSV import,
//! standard counts, offsets, tolerances, clause policies and calibrations due.
//!
//! The register is the organisation's: any signed-in caller reads it; admins and QC
//! managers (of any project) edit it. Standard counts need the right to enter tests on
//! the project they are taken for; offsets, tolerances and policies need set-up rights.

use axum::extract::State;
use axum::http::StatusCode;
use axum::routing::{get, post, put};
use axum::{Json, Router};
use serde_json::{Value, json};

use crate::app::AppState;
use crate::auth::{Action, Role};
use crate::db;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Principal, Scope, require};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::{self, Actor, instruments as reg};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/instruments", get(list).post(create))
        .route("/api/v1/instruments/import", post(import))
        .route("/api/v1/instruments/{id}", get(one))
        .route("/api/v1/instruments/{id}/records", post(add_record))
        .route("/api/v1/instruments/{id}/assignments", post(assign))
        .route("/api/v1/instruments/{id}/standard-counts", post(count))
        .route("/api/v1/instruments/{id}/offsets", post(offset))
        .route(
            "/api/v1/gauge-operators",
            get(list_operators).post(create_operator),
        )
        .route(
            "/api/v1/projects/{id}/instrument-tolerances",
            get(tolerances).put(set_tolerances),
        )
        .route("/api/v1/clauses/{id}/instrument-policy", put(set_policy))
        .route("/api/v1/projects/{id}/calibrations-due", get(due))
}

type Created<T> = (StatusCode, Json<T>);

/// Admins and QC managers (of any project; a token with the QC manager's role) edit the register.
pub async fn require_register_editor(pool: &db::Pool, caller: &Caller) -> Result<Actor> {
    let allowed = match &caller.principal {
        Principal::User(u) if u.admin() => true,
        Principal::User(u) => db::instruments::is_qc_manager_anywhere(pool, u.id).await?,
        Principal::Token(t) => t.role == Role::QcManager,
    };
    if allowed {
        Ok(caller.actor())
    } else {
        Err(AppError::forbidden(
            "only an administrator or a QC manager may change the instrument register",
        ))
    }
}

/// An instrument with everything recorded of it.
pub async fn detail(pool: &db::Pool, id: i64) -> Result<Value> {
    let i = reg::require_instrument(pool, id).await?;
    Ok(json!({
        "instrument": i,
        "records": db::instruments::records(pool, Some(id)).await?,
        "assignments": db::instruments::assignments(pool, Some(id), None).await?,
        "standard_counts": db::instruments::counts(pool, Some(id), None).await?,
        "offsets": db::instruments::offsets(pool, Some(id), None).await?,
    }))
}

async fn list(
    State(s): State<AppState>,
    _caller: Caller,
) -> Result<Json<Vec<db::instruments::Instrument>>> {
    Ok(Json(db::instruments::list_instruments(&s.db).await?))
}

async fn create(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<reg::InstrumentInput>,
) -> Result<Created<db::instruments::Instrument>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    Ok((
        StatusCode::CREATED,
        Json(reg::create_instrument(&s.db, &input, &actor).await?),
    ))
}

async fn import(State(s): State<AppState>, caller: Caller, body: String) -> Result<Created<Value>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    let made = reg::import_csv(&s.db, &body, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(json!({"created": made.len(), "instruments": made})),
    ))
}

async fn one(
    State(s): State<AppState>,
    _caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    Ok(Json(detail(&s.db, id).await?))
}

async fn add_record(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::RecordInput>,
) -> Result<Created<db::instruments::InstrumentRecord>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    Ok((
        StatusCode::CREATED,
        Json(reg::add_record(&s.db, id, &input, &actor).await?),
    ))
}

async fn assign(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::AssignmentInput>,
) -> Result<Created<db::instruments::Assignment>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    Ok((
        StatusCode::CREATED,
        Json(reg::assign(&s.db, id, &input, &actor).await?),
    ))
}

async fn count(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::counts::CountInput>,
) -> Result<Created<db::instruments::StandardCount>> {
    let actor = require(
        &s.db,
        &caller,
        Scope::Project(input.project_id),
        Action::EnterTests,
    )
    .await?;
    Ok((
        StatusCode::CREATED,
        Json(reg::counts::record_count(&s.db, id, &input, &actor).await?),
    ))
}

async fn offset(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::offsets::OffsetInput>,
) -> Result<Created<reg::offsets::OffsetResult>> {
    let actor = require(
        &s.db,
        &caller,
        Scope::Source(input.source_id),
        Action::ManageSetup,
    )
    .await?;
    Ok((
        StatusCode::CREATED,
        Json(reg::offsets::create_offset(&s.db, id, &input, &actor).await?),
    ))
}

async fn list_operators(
    State(s): State<AppState>,
    _caller: Caller,
) -> Result<Json<Vec<db::instruments::Operator>>> {
    Ok(Json(db::instruments::operators(&s.db).await?))
}

async fn create_operator(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<reg::OperatorInput>,
) -> Result<Created<db::instruments::Operator>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    Ok((
        StatusCode::CREATED,
        Json(reg::create_operator(&s.db, &input, &actor).await?),
    ))
}

async fn tolerances(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    Ok(Json(json!(reg::counts::tolerances_of(&s.db, id).await?)))
}

async fn set_tolerances(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::counts::TolerancesInput>,
) -> Result<Json<Value>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    Ok(Json(json!(
        reg::counts::set_tolerances(&s.db, id, &input, &actor).await?
    )))
}

async fn set_policy(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::counts::PolicyInput>,
) -> Result<Json<Value>> {
    let clause = db::clauses::get(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("clause_id", format!("no clause {id} in your projects"))
    })?;
    let actor = require(
        &s.db,
        &caller,
        Scope::Project(clause.project_id),
        Action::ManageSetup,
    )
    .await?;
    reg::counts::set_policy(&s.db, &clause, &input, &actor).await?;
    Ok(Json(
        json!({"clause_id": id, "record_out_of_check": input.record_out_of_check}),
    ))
}

async fn due(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let today = crate::clock::date_of(&crate::clock::now());
    let rows = ledger::instruments::due_for_project(&s.db, id, &today, 30).await?;
    Ok(Json(json!(
        rows.into_iter()
            .map(
                |(i, r, days)| json!({"serial": i.serial, "kind": i.kind, "record": r.kind,
            "done_on": r.done_on, "due_on": r.due_on, "days_left": days})
            )
            .collect::<Vec<_>>()
    )))
}
