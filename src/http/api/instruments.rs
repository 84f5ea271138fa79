//! The instrument register: instruments, records, assignments, operators, CSV import,
//! standard counts, offsets, tolerances, clause policies and calibrations due.
//!
//! The register is the organisation's: any signed-in caller reads it; admins and QC
//! managers (of any project) edit it. Standard counts need the right to enter tests on
//! the project they are taken for; offsets, tolerances and policies need set-up rights.

use axum::Json;
use axum::extract::State;
use axum::http::StatusCode;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{
    AssignmentAnswer, DueAnswer, GaugeOffsetAnswer, InstrumentAnswer, InstrumentDetailAnswer,
    InstrumentImportAnswer, OffsetResultAnswer, OperatorAnswer, PolicyAnswer, RecordAnswer,
    StandardCountAnswer, TolerancesAnswer,
};
use super::bodies;
use super::doc::{IdPath, Refusals};
use crate::app::AppState;
use crate::auth::{Action, Role};
use crate::db;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Principal, Scope, require};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::{self, Actor, instruments as reg};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(list, create))
        .routes(routes!(import))
        .routes(routes!(one))
        .routes(routes!(add_record))
        .routes(routes!(assign))
        .routes(routes!(count))
        .routes(routes!(offset))
        .routes(routes!(list_operators, create_operator))
        .routes(routes!(tolerances, set_tolerances))
        .routes(routes!(set_policy))
        .routes(routes!(due))
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
pub async fn detail(pool: &db::Pool, id: i64) -> Result<InstrumentDetailAnswer> {
    let i = reg::require_instrument(pool, id).await?;
    let records = db::instruments::records(pool, Some(id)).await?;
    let assignments = db::instruments::assignments(pool, Some(id), None).await?;
    let counts = db::instruments::counts(pool, Some(id), None).await?;
    let offsets = db::instruments::offsets(pool, Some(id), None).await?;
    Ok(InstrumentDetailAnswer {
        instrument: (&i).into(),
        records: records.iter().map(Into::into).collect(),
        assignments: assignments.iter().map(Into::into).collect(),
        standard_counts: counts.iter().map(Into::into).collect(),
        offsets: offsets.iter().map(Into::into).collect(),
    })
}

/// The instrument register (organisation-wide).
#[utoipa::path(get, path = "/api/v1/instruments", tag = "instruments",
    responses((status = 200, description = "Every registered instrument", body = Vec<InstrumentAnswer>), Refusals))]
async fn list(State(s): State<AppState>, _caller: Caller) -> Result<Json<Vec<InstrumentAnswer>>> {
    let all = db::instruments::list_instruments(&s.db).await?;
    Ok(Json(all.iter().map(Into::into).collect()))
}

/// Register an instrument, with its first calibration (administrators and QC managers).
#[utoipa::path(post, path = "/api/v1/instruments", tag = "instruments", request_body = bodies::InstrumentInput,
    responses((status = 201, description = "The new instrument", body = InstrumentAnswer), Refusals))]
async fn create(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<reg::InstrumentInput>,
) -> Result<Created<InstrumentAnswer>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    let i = reg::create_instrument(&s.db, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json((&i).into())))
}

/// Import register rows from CSV; all or none.
///
/// Columns: kind, serial, description, calibrated_on, due_on, cone_sand_mass_g,
/// sand_density_kg_m3, volume_cm3.
#[utoipa::path(post, path = "/api/v1/instruments/import", tag = "instruments",
    request_body(content = String, content_type = "text/csv", description = "CSV text with a header row"),
    responses((status = 201, description = "The instruments made", body = InstrumentImportAnswer), Refusals))]
async fn import(
    State(s): State<AppState>,
    caller: Caller,
    body: String,
) -> Result<Created<InstrumentImportAnswer>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    let made = reg::import_csv(&s.db, &body, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(InstrumentImportAnswer {
            created: made.len(),
            instruments: made.iter().map(Into::into).collect(),
        }),
    ))
}

/// An instrument with its records, assignments, standard counts and offsets.
#[utoipa::path(get, path = "/api/v1/instruments/{id}", tag = "instruments",
    params(IdPath),
    responses((status = 200, description = "The instrument and its history", body = InstrumentDetailAnswer), Refusals))]
async fn one(
    State(s): State<AppState>,
    _caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<InstrumentDetailAnswer>> {
    Ok(Json(detail(&s.db, id).await?))
}

/// Add a calibration, leak test or licence record.
#[utoipa::path(post, path = "/api/v1/instruments/{id}/records", tag = "instruments", request_body = bodies::InstrumentRecordInput,
    params(IdPath),
    responses((status = 201, description = "The record", body = RecordAnswer), Refusals))]
async fn add_record(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::RecordInput>,
) -> Result<Created<RecordAnswer>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    let r = reg::add_record(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json((&r).into())))
}

/// Assign an instrument to a project from a date (its open assignment ends that day).
#[utoipa::path(post, path = "/api/v1/instruments/{id}/assignments", tag = "instruments", request_body = bodies::AssignmentInput,
    params(IdPath),
    responses((status = 201, description = "The assignment", body = AssignmentAnswer), Refusals))]
async fn assign(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::AssignmentInput>,
) -> Result<Created<AssignmentAnswer>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    let a = reg::assign(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json((&a).into())))
}

/// Record a gauge's daily standard count, judged against its last four accepted counts.
#[utoipa::path(post, path = "/api/v1/instruments/{id}/standard-counts", tag = "instruments", request_body = bodies::StandardCountInput,
    params(IdPath),
    responses((status = 201, description = "The count as judged", body = StandardCountAnswer), Refusals))]
async fn count(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::counts::CountInput>,
) -> Result<Created<StandardCountAnswer>> {
    let actor = require(
        &s.db,
        &caller,
        Scope::Project(input.project_id),
        Action::EnterTests,
    )
    .await?;
    let c = reg::counts::record_count(&s.db, id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json((&c).into())))
}

/// Compute a gauge's material offsets from at least three pairs and apply them from a date.
#[utoipa::path(post, path = "/api/v1/instruments/{id}/offsets", tag = "instruments", request_body = bodies::OffsetInput,
    params(IdPath),
    responses((status = 201, description = "The offsets and the tests re-reduced", body = OffsetResultAnswer), Refusals))]
async fn offset(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::offsets::OffsetInput>,
) -> Result<Created<OffsetResultAnswer>> {
    let actor = require(
        &s.db,
        &caller,
        Scope::Source(input.source_id),
        Action::ManageSetup,
    )
    .await?;
    let r = reg::offsets::create_offset(&s.db, id, &input, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(OffsetResultAnswer {
            offset: GaugeOffsetAnswer::from(&r.offset),
            applied_to: r.applied_to,
        }),
    ))
}

/// Registered gauge operators.
#[utoipa::path(get, path = "/api/v1/gauge-operators", tag = "instruments",
    responses((status = 200, description = "Operators", body = Vec<OperatorAnswer>), Refusals))]
async fn list_operators(
    State(s): State<AppState>,
    _caller: Caller,
) -> Result<Json<Vec<OperatorAnswer>>> {
    let all = db::instruments::operators(&s.db).await?;
    Ok(Json(all.iter().map(Into::into).collect()))
}

/// Register a gauge operator with certification and expiry.
#[utoipa::path(post, path = "/api/v1/gauge-operators", tag = "instruments", request_body = bodies::OperatorInput,
    responses((status = 201, description = "The operator", body = OperatorAnswer), Refusals))]
async fn create_operator(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<reg::OperatorInput>,
) -> Result<Created<OperatorAnswer>> {
    let actor = require_register_editor(&s.db, &caller).await?;
    let o = reg::create_operator(&s.db, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json((&o).into())))
}

/// The project's standard-count tolerances.
#[utoipa::path(get, path = "/api/v1/projects/{id}/instrument-tolerances", tag = "instruments",
    params(IdPath),
    responses((status = 200, description = "The tolerances in force", body = TolerancesAnswer), Refusals))]
async fn tolerances(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<TolerancesAnswer>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let t = reg::counts::tolerances_of(&s.db, id).await?;
    Ok(Json(TolerancesAnswer {
        density_pct: t.density_pct,
        moisture_pct: t.moisture_pct,
    }))
}

/// Set the project's standard-count tolerances.
#[utoipa::path(put, path = "/api/v1/projects/{id}/instrument-tolerances", tag = "instruments", request_body = bodies::TolerancesInput,
    params(IdPath),
    responses((status = 200, description = "The tolerances now in force", body = TolerancesAnswer), Refusals))]
async fn set_tolerances(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::counts::TolerancesInput>,
) -> Result<Json<TolerancesAnswer>> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    let t = reg::counts::set_tolerances(&s.db, id, &input, &actor).await?;
    Ok(Json(TolerancesAnswer {
        density_pct: t.density_pct,
        moisture_pct: t.moisture_pct,
    }))
}

/// Whether the clause records tests from an instrument out of check (marked) or refuses them.
#[utoipa::path(put, path = "/api/v1/clauses/{id}/instrument-policy", tag = "instruments", request_body = bodies::InstrumentPolicyInput,
    params(IdPath),
    responses((status = 200, description = "The policy now in force", body = PolicyAnswer), Refusals))]
async fn set_policy(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<reg::counts::PolicyInput>,
) -> Result<Json<PolicyAnswer>> {
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
    Ok(Json(PolicyAnswer {
        clause_id: id,
        record_out_of_check: input.record_out_of_check,
    }))
}

/// Calibrations, leak tests and licences of the project's instruments due within 30 days.
#[utoipa::path(get, path = "/api/v1/projects/{id}/calibrations-due", tag = "instruments",
    params(IdPath),
    responses((status = 200, description = "What falls due, soonest first", body = Vec<DueAnswer>), Refusals))]
async fn due(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<DueAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let today = crate::clock::date_of(&crate::clock::now());
    let rows = ledger::instruments::due_for_project(&s.db, id, &today, 30).await?;
    Ok(Json(
        rows.into_iter()
            .map(|(i, r, days)| DueAnswer {
                serial: i.serial,
                kind: i.kind.to_string(),
                record: r.kind.to_string(),
                done_on: r.done_on,
                due_on: r.due_on,
                days_left: days,
            })
            .collect(),
    ))
}
