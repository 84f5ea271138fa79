//! Field tests: entry, preview, listing, voiding and retests.

use axum::Json;
use axum::extract::State;
use axum::http::{HeaderMap, HeaderValue, StatusCode};
use serde::Deserialize;
use serde_json::Value;
use utoipa::IntoParams;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::Page;
use super::answers::{AuditAnswer, FieldTestPage, JudgedTestAnswer};
use super::bodies;
use super::doc::{IdPath, Refusals};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath, ApiQuery};
use crate::ledger::{self, field::FieldTestInput};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(list_for_lot, create))
        .routes(routes!(preview))
        .routes(routes!(list_for_project))
        .routes(routes!(get_one))
        .routes(routes!(history))
        .routes(routes!(void))
        .routes(routes!(retest))
}

/// A just-stored test with its own verdict (cheap: does not load the whole lot).
async fn with_own_line(s: &AppState, t: &db::field_tests::FieldTest) -> Result<JudgedTestAnswer> {
    let line = ledger::lot_report::judge_new(&s.db, t).await?;
    Ok(JudgedTestAnswer::new(t, &line))
}

/// A stored test with its line in its lot's report.
async fn with_line(s: &AppState, t: &db::field_tests::FieldTest) -> Result<JudgedTestAnswer> {
    let report = ledger::lot_report::build(&s.db, t.lot_id).await?;
    let line = report
        .tests
        .iter()
        .find(|l| l.test.id == t.id)
        .ok_or_else(|| anyhow::anyhow!("test {} is missing from its lot's report", t.id))?;
    Ok(JudgedTestAnswer::new(t, line))
}

/// A lot's field tests as judged.
#[utoipa::path(get, path = "/api/v1/lots/{id}/field-tests", tag = "field-tests",
    params(IdPath),
    responses((status = 200, description = "The lot's tests with their verdicts", body = Vec<JudgedTestAnswer>), Refusals))]
async fn list_for_lot(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<JudgedTestAnswer>>> {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;

    let report = ledger::lot_report::build(&s.db, id).await?;
    Ok(Json(
        report
            .tests
            .iter()
            .map(|l| JudgedTestAnswer::new(&l.test, l))
            .collect(),
    ))
}

/// Record a field test.
///
/// With an `Idempotency-Key` header the test is stored once per key: a repeat answers 200
/// with the stored test and `Idempotent-Replayed: true`.
#[utoipa::path(post, path = "/api/v1/lots/{id}/field-tests", tag = "field-tests", request_body = bodies::FieldTestInput,
    params(IdPath,
        ("Idempotency-Key" = Option<String>, Header, description = "A client's key for this test (1 to 255 visible ASCII characters; the site app sends a UUID)")),
    responses(
        (status = 201, description = "The new test with its verdict", body = JudgedTestAnswer),
        (status = 200, description = "The test this Idempotency-Key stored before", body = JudgedTestAnswer,
            headers(("Idempotent-Replayed" = String, description = "true"))),
        Refusals))]
async fn create(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    headers: axum::http::HeaderMap,
    ApiJson(input): ApiJson<FieldTestInput>,
) -> Result<(StatusCode, HeaderMap, Json<JudgedTestAnswer>)> {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::EnterTests).await?;

    if let Some(key) = idempotency_key(&headers)? {
        let keyed = s.ledger.record_once(id, &input, &actor, &key).await?;
        return keyed_answer(&s, keyed).await;
    }

    let (t, line) = s.ledger.record_test(id, &input, &actor).await?;
    Ok((
        StatusCode::CREATED,
        HeaderMap::new(),
        Json(JudgedTestAnswer::new(&t, &line)),
    ))
}

/// The `Idempotency-Key` a POST carries, checked; none when it has no such header.
fn idempotency_key(headers: &HeaderMap) -> Result<Option<String>> {
    headers
        .get(ledger::idempotent::HEADER)
        .map(|raw| ledger::idempotent::check_key(raw.to_str().unwrap_or("")))
        .transpose()
}

/// The answer to a keyed POST: 201 with what it stored now, 200 with what its key stored
/// before (`Idempotent-Replayed` says which).
async fn keyed_answer(
    s: &AppState,
    keyed: ledger::idempotent::Keyed,
) -> Result<(StatusCode, HeaderMap, Json<JudgedTestAnswer>)> {
    use ledger::idempotent::Keyed;
    let (status, t, replayed) = match keyed {
        Keyed::Created(t) => (StatusCode::CREATED, t, "false"),
        Keyed::Replayed(t) => (StatusCode::OK, t, "true"),
    };
    let mut headers = HeaderMap::new();
    headers.insert("idempotent-replayed", HeaderValue::from_static(replayed));
    Ok((status, headers, Json(with_own_line(s, &t).await?)))
}

/// Reduce and judge a field test without saving it.
#[utoipa::path(post, path = "/api/v1/lots/{id}/field-tests/preview", tag = "field-tests", request_body = bodies::FieldTestInput,
    params(IdPath),
    responses((status = 200, description = "The reduction and verdict the test would get (the entry form's preview)",
        body = Object), Refusals))]
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
#[derive(Debug, Deserialize, IntoParams)]
#[serde(deny_unknown_fields)]
#[into_params(parameter_in = Query)]
struct TestQuery {
    lot_id: Option<i64>,
    layer_id: Option<i64>,
    /// Tests at or after this chainage, m.
    chainage_from_m: Option<f64>,
    /// Tests before this chainage, m.
    chainage_to_m: Option<f64>,
    /// Tests taken at or after this time (RFC 3339, or a date).
    #[param(pattern = r"^\d{4}-(0[1-9]|1[0-2])-(0[1-9]|[12]\d|3[01])")]
    tested_from: Option<String>,
    /// Tests taken before this time (RFC 3339, or a date).
    #[param(pattern = r"^\d{4}-(0[1-9]|1[0-2])-(0[1-9]|[12]\d|3[01])")]
    tested_before: Option<String>,
    #[param(value_type = Option<super::codes::Method>)]
    method: Option<crate::domain::Method>,
    /// Page number, from 1.
    #[param(minimum = 1)]
    page: Option<i64>,
    /// Tests per page (default 100).
    #[param(minimum = 1, maximum = 1000)]
    per_page: Option<i64>,
}

/// List a project's field tests, newest first, filtered and paged.
#[utoipa::path(get, path = "/api/v1/projects/{id}/field-tests", tag = "field-tests",
    params(IdPath, TestQuery),
    responses((status = 200, description = "One page of tests", body = FieldTestPage), Refusals))]
async fn list_for_project(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<TestQuery>,
) -> Result<Json<FieldTestPage>> {
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
        method: q.method.map(|m| m.code().to_string()),
        limit,
        offset,
    };
    let tests = db::field_tests::list(&s.db, id, &filter).await?;
    Ok(Json(FieldTestPage {
        field_tests: tests.iter().map(Into::into).collect(),
        limit,
        offset,
    }))
}

/// One field test as judged.
#[utoipa::path(get, path = "/api/v1/field-tests/{id}", tag = "field-tests",
    params(IdPath),
    responses((status = 200, description = "The test with its verdict", body = JudgedTestAnswer), Refusals))]
async fn get_one(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<JudgedTestAnswer>> {
    require(&s.db, &caller, Scope::Test(id), Action::Read).await?;

    let t = ledger::field::require_test(&s.db, id).await?;
    Ok(Json(with_line(&s, &t).await?))
}

/// A field test's audit trail.
#[utoipa::path(get, path = "/api/v1/field-tests/{id}/history", tag = "field-tests",
    params(IdPath),
    responses((status = 200, description = "Audit rows, oldest first", body = Vec<AuditAnswer>), Refusals))]
async fn history(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<AuditAnswer>>> {
    require(&s.db, &caller, Scope::Test(id), Action::Read).await?;

    let t = ledger::field::require_test(&s.db, id).await?;
    let rows = ledger::field::history(&s.db, &t).await?;
    Ok(Json(rows.into_iter().map(Into::into).collect()))
}

/// Body of a void action.
#[derive(Debug, Deserialize, utoipa::ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"reason": "wrong lot"}))]
struct VoidInput {
    /// Why the test is voided (kept in its history).
    #[schema(
        max_length = 500,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    reason: String,
}

/// Void a field test with a reason.
#[utoipa::path(post, path = "/api/v1/field-tests/{id}/void", tag = "field-tests", request_body = VoidInput,
    params(IdPath),
    responses((status = 200, description = "The test, voided", body = JudgedTestAnswer), Refusals))]
async fn void(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    ApiJson(input): ApiJson<VoidInput>,
) -> Result<Json<JudgedTestAnswer>> {
    let actor = require(&s.db, &caller, Scope::Test(id), Action::VoidTest).await?;

    let t = ledger::field::void_test(&s.db, id, &input.reason, &actor).await?;
    Ok(Json(with_line(&s, &t).await?))
}

/// Record a retest of a failed test.
///
/// With an `Idempotency-Key` header the retest is stored once per key (a retest kept on a
/// phone without signal): a repeat answers 200 with the stored retest.
#[utoipa::path(post, path = "/api/v1/field-tests/{id}/retests", tag = "field-tests", request_body = bodies::FieldTestInput,
    params(IdPath,
        ("Idempotency-Key" = Option<String>, Header, description = "A client's key for this retest (1 to 255 visible ASCII characters; the site app sends a UUID)")),
    responses(
        (status = 201, description = "The retest with its verdict", body = JudgedTestAnswer),
        (status = 200, description = "The retest this Idempotency-Key stored before", body = JudgedTestAnswer,
            headers(("Idempotent-Replayed" = String, description = "true"))),
        Refusals))]
async fn retest(
    State(s): State<AppState>,
    ApiPath(id): ApiPath<i64>,
    caller: Caller,
    headers: axum::http::HeaderMap,
    ApiJson(input): ApiJson<FieldTestInput>,
) -> Result<(StatusCode, HeaderMap, Json<JudgedTestAnswer>)> {
    let actor = require(&s.db, &caller, Scope::Test(id), Action::EnterTests).await?;

    if let Some(key) = idempotency_key(&headers)? {
        let keyed = s
            .ledger
            .record_retest_once(id, &input, &actor, &key)
            .await?;
        return keyed_answer(&s, keyed).await;
    }
    let t = s.ledger.record_retest(id, &input, &actor).await?;
    Ok((
        StatusCode::CREATED,
        HeaderMap::new(),
        Json(with_own_line(&s, &t).await?),
    ))
}
