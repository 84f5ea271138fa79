//! Field tests: entry, preview, listing, voiding and retests.

use axum::extract::State;
use axum::http::{HeaderMap, HeaderValue, StatusCode};
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::{Value, json};

use super::Page;
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath, ApiQuery};
use crate::ledger::{self, field::FieldTestInput};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route(
            "/api/v1/lots/{id}/field-tests",
            get(list_for_lot).post(create),
        )
        .route("/api/v1/lots/{id}/field-tests/preview", post(preview))
        .route("/api/v1/projects/{id}/field-tests", get(list_for_project))
        .route("/api/v1/field-tests/{id}", get(get_one))
        .route("/api/v1/field-tests/{id}/history", get(history))
        .route("/api/v1/field-tests/{id}/void", post(void))
        .route("/api/v1/field-tests/{id}/retests", post(retest))
}

/// A stored test with its readings expanded and, when known, its line in the lot report.
pub fn test_json(
    t: &db::field_tests::FieldTest,
    line: Option<&ledger::lot_report::TestLine>,
) -> Value {
    let mut v = json!(t);
    v["readings"] = serde_json::from_str(&t.readings_json).unwrap_or(Value::Null);
    if let Some(o) = v.as_object_mut() {
        o.remove("readings_json");
    }
    if let Some(l) = line {
        v["relative_compaction_pct"] = json!(l.relative_compaction_pct);
        v["moisture_deviation_pct"] = json!(l.moisture_deviation_pct);
        v["reference_mdd_kg_m3"] = json!(l.reference_mdd_kg_m3);
        v["reference_omc_pct"] = json!(l.reference_omc_pct);
        v["passed"] = json!(l.passed);
        v["standing"] = json!(l.standing);
        v["superseded_by"] = json!(l.superseded_by);
        v["reasons"] = json!(l.reasons);
        v["result"] = json!(l.result());
        v["unjudged_reason"] = json!(l.unjudged_reason);
        v["flags"] = json!(l.flags);
    }
    v
}

/// A just-stored test with its own verdict (cheap: does not load the whole lot).
async fn with_own_line(s: &AppState, t: &db::field_tests::FieldTest) -> Result<Value> {
    let line = ledger::lot_report::judge_new(&s.db, t).await?;
    Ok(test_json(t, Some(&line)))
}

async fn with_line(s: &AppState, t: &db::field_tests::FieldTest) -> Result<Value> {
    let report = ledger::lot_report::build(&s.db, t.lot_id).await?;
    Ok(test_json(
        t,
        report.tests.iter().find(|l| l.test.id == t.id),
    ))
}

async fn list_for_lot(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<Value>>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;

    let report = ledger::lot_report::build(&s.db, id).await?;
    Ok(Json(
        report
            .tests
            .iter()
            .map(|l| test_json(&l.test, Some(l)))
            .collect(),
    ))
}

async fn create(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    headers: axum::http::HeaderMap,
    ApiJson(input): ApiJson<FieldTestInput>,
) -> Result<(StatusCode, HeaderMap, Json<Value>)> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::EnterTests).await?;

    if let Some(raw) = headers.get(ledger::idempotent::HEADER) {
        let key = ledger::idempotent::check_key(raw.to_str().unwrap_or(""))?;
        return create_once(&s, id, &input, &actor, &key).await;
    }

    let (t, line) = s.ledger.record_test(id, &input, &actor).await?;
    Ok((
        StatusCode::CREATED,
        HeaderMap::new(),
        Json(test_json(&t, Some(&line))),
    ))
}

/// A POST with an `Idempotency-Key`: 201 with the new test, or 200 with the test the key
/// made before (marked `Idempotent-Replayed: true`).
async fn create_once(
    s: &AppState,
    lot_id: i64,
    input: &FieldTestInput,
    actor: &ledger::Actor,
    key: &str,
) -> Result<(StatusCode, HeaderMap, Json<Value>)> {
    use ledger::idempotent::Keyed;
    let keyed = s.ledger.record_once(lot_id, input, actor, key).await?;
    let (status, t, replayed) = match keyed {
        Keyed::Created(t) => (StatusCode::CREATED, t, "false"),
        Keyed::Replayed(t) => (StatusCode::OK, t, "true"),
    };
    let mut headers = HeaderMap::new();
    headers.insert("idempotent-replayed", HeaderValue::from_static(replayed));
    Ok((status, headers, Json(with_own_line(s, &t).await?)))
}

async fn preview(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<FieldTestInput>,
) -> Result<Json<Value>> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::EnterTests).await?;

    Ok(Json(
        ledger::field::preview(&s.db, id, &input, &actor).await?,
    ))
}

/// Filters of the project test list.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct TestQuery {
    lot_id: Option<i64>,
    layer_id: Option<i64>,
    chainage_from_m: Option<f64>,
    chainage_to_m: Option<f64>,
    tested_from: Option<String>,
    tested_before: Option<String>,
    method: Option<String>,
    page: Option<i64>,
    per_page: Option<i64>,
}

async fn list_for_project(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<TestQuery>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    ledger::setup::require_project(&s.db, id).await?;
    let (limit, offset) = Page {
        page: q.page,
        per_page: q.per_page,
    }
    .limit_offset()?;
    let ts = |field: &str, v: &Option<String>| {
        v.as_deref()
            .map(|t| ledger::validate::timestamp(field, t))
            .transpose()
    };
    let filter = db::field_tests::TestFilter {
        lot_id: q.lot_id,
        layer_id: q.layer_id,
        chainage_from_m: q.chainage_from_m,
        chainage_to_m: q.chainage_to_m,
        tested_from: ts("tested_from", &q.tested_from)?,
        tested_before: ts("tested_before", &q.tested_before)?,
        method: q.method.clone(),
        limit,
        offset,
    };
    let tests = db::field_tests::list(&s.db, id, &filter).await?;
    let rows: Vec<Value> = tests.iter().map(|t| test_json(t, None)).collect();
    Ok(Json(
        json!({"field_tests": rows, "limit": limit, "offset": offset}),
    ))
}

async fn get_one(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Test(id), Action::Read).await?;

    let t = ledger::field::require_test(&s.db, id).await?;
    Ok(Json(with_line(&s, &t).await?))
}

async fn history(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<db::audit::AuditEntry>>> {
    require(&s.db, &caller, Scope::Test(id), Action::Read).await?;

    let t = ledger::field::require_test(&s.db, id).await?;
    Ok(Json(ledger::field::history(&s.db, &t).await?))
}

/// Body of a void action.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct VoidInput {
    reason: String,
}

async fn void(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<VoidInput>,
) -> Result<Json<Value>> {
    let actor = require(&s.db, &caller, Scope::Test(id), Action::VoidTest).await?;

    let t = ledger::field::void_test(&s.db, id, &input.reason, &actor).await?;
    Ok(Json(with_line(&s, &t).await?))
}

async fn retest(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<FieldTestInput>,
) -> Result<(StatusCode, Json<Value>)> {
    let actor = require(&s.db, &caller, Scope::Test(id), Action::EnterTests).await?;

    let t = s.ledger.record_retest(id, &input, &actor).await?;
    Ok((StatusCode::CREATED, Json(with_own_line(&s, &t).await?)))
}
