//! People: removing a membership, disabling and re-enabling a user, an admin's password
//! reset and one's own password change. Each ends the person's sessions at once.

use axum::extract::State;
use axum::http::{HeaderValue, header};
use axum::response::{IntoResponse, Response};
use axum::routing::post;
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::json;

use crate::app::AppState;
use crate::db::users;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Principal, Scope, project_of, require_admin};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::accounts;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/projects/{id}/members/remove", post(remove_member))
        .route("/api/v1/users/{id}/disable", post(disable))
        .route("/api/v1/users/{id}/enable", post(enable))
        .route("/api/v1/users/{id}/password-reset", post(reset))
        .route("/api/v1/me/password", post(change_own))
}

/// Body naming a member.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct MemberInput {
    username: String,
}

async fn remove_member(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<MemberInput>,
) -> Result<Json<serde_json::Value>> {
    let actor = require_admin(&caller)?;
    project_of(&s.db, Scope::Project(id)).await?;
    accounts::remove_member(&s.db, &input.username, id, &actor).await?;
    Ok(Json(
        json!({"username": input.username, "project_id": id, "removed": true}),
    ))
}

async fn user_named(s: &AppState, id: i64) -> Result<users::User> {
    users::get(&s.db, id)
        .await?
        .ok_or_else(|| AppError::not_found("user_id", format!("no user {id}")))
}

async fn disable(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<users::User>> {
    let actor = require_admin(&caller)?;
    let u = user_named(&s, id).await?;
    if matches!(&caller.principal, Principal::User(me) if me.id == u.id) {
        return Err(AppError::invalid(
            "user_id",
            "an administrator may not disable their own account",
        ));
    }
    Ok(Json(
        accounts::set_enabled(&s.db, &u.username, false, &actor).await?,
    ))
}

async fn enable(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<users::User>> {
    let actor = require_admin(&caller)?;
    let u = user_named(&s, id).await?;
    Ok(Json(
        accounts::set_enabled(&s.db, &u.username, true, &actor).await?,
    ))
}

/// Body of an admin's password reset.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ResetInput {
    new_password: String,
}

async fn reset(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<ResetInput>,
) -> Result<Json<serde_json::Value>> {
    let actor = require_admin(&caller)?;
    let u = user_named(&s, id).await?;
    let ended = accounts::reset_password(&s.db, &u.username, &input.new_password, &actor).await?;
    Ok(Json(
        json!({"username": u.username, "must_change_password": true, "sessions_ended": ended}),
    ))
}

/// Body of one's own password change.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ChangeInput {
    current_password: String,
    new_password: String,
}

async fn change_own(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<ChangeInput>,
) -> Result<Response> {
    let Principal::User(u) = &caller.principal else {
        return Err(AppError::forbidden("an API token has no password"));
    };
    let signed = accounts::change_own_password(
        &s.db,
        u.id,
        &input.current_password,
        &input.new_password,
        &caller.actor(),
    )
    .await?;
    let mut resp =
        Json(json!({"changed": true, "note": "every other session has ended"})).into_response();
    let cookie =
        crate::http::pages::session::session_cookie(&signed.secret, s.settings.secure_cookies);
    if let Ok(v) = HeaderValue::from_str(&cookie) {
        resp.headers_mut().insert(header::SET_COOKIE, v);
    }
    Ok(resp)
}
