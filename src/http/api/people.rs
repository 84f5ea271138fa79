//! People: removing a membership, disabling and re-enabling a user, an admin's password
//! reset and one's own password change. Each ends the person's sessions at once.

use axum::Json;
use axum::extract::State;
use axum::http::{HeaderValue, header};
use axum::response::{IntoResponse, Response};
use serde::Deserialize;
use utoipa::ToSchema;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{ChangedAnswer, RemovedAnswer, ResetAnswer, UserAnswer};
use super::doc::{IdPath, Refusals};

use crate::app::AppState;
use crate::db::users;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Principal, Scope, project_of, require_admin};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::accounts;

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(remove_member))
        .routes(routes!(disable))
        .routes(routes!(enable))
        .routes(routes!(reset))
        .routes(routes!(change_own))
}

/// Body naming a member.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"username": "bob"}))]
struct MemberInput {
    username: String,
}

/// End a user's membership (administrators); their sessions end and their tokens there die.
#[utoipa::path(post, path = "/api/v1/projects/{id}/members/remove", tag = "accounts", request_body = MemberInput,
    params(IdPath),
    responses((status = 200, description = "The membership ended", body = RemovedAnswer), Refusals))]
async fn remove_member(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<MemberInput>,
) -> Result<Json<RemovedAnswer>> {
    let actor = require_admin(&caller)?;
    project_of(&s.db, Scope::Project(id)).await?;
    accounts::remove_member(&s.db, &input.username, id, &actor).await?;
    Ok(Json(RemovedAnswer {
        username: input.username,
        project_id: id,
        removed: true,
    }))
}

/// An administrator's actor and the user they act on (404 when there is none).
async fn admin_on_user(
    s: &AppState,
    caller: &Caller,
    id: i64,
) -> Result<(crate::ledger::Actor, users::User)> {
    let actor = require_admin(caller)?;
    Ok((actor, user_named(s, id).await?))
}

async fn user_named(s: &AppState, id: i64) -> Result<users::User> {
    users::get(&s.db, id)
        .await?
        .ok_or_else(|| AppError::not_found("user_id", format!("no user {id}")))
}

/// Disable a user (administrators); every session and token of theirs ends.
#[utoipa::path(post, path = "/api/v1/users/{id}/disable", tag = "accounts",
    params(IdPath),
    responses((status = 200, description = "The account, disabled", body = UserAnswer), Refusals))]
async fn disable(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<UserAnswer>> {
    let (actor, u) = admin_on_user(&s, &caller, id).await?;
    if matches!(&caller.principal, Principal::User(me) if me.id == u.id) {
        return Err(AppError::invalid(
            "user_id",
            "an administrator may not disable their own account",
        ));
    }
    let done = accounts::set_enabled(&s.db, &u.username, false, &actor).await?;
    Ok(Json((&done).into()))
}

/// Re-enable a user (administrators).
#[utoipa::path(post, path = "/api/v1/users/{id}/enable", tag = "accounts",
    params(IdPath),
    responses((status = 200, description = "The account, enabled", body = UserAnswer), Refusals))]
async fn enable(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<UserAnswer>> {
    let (actor, u) = admin_on_user(&s, &caller, id).await?;
    let done = accounts::set_enabled(&s.db, &u.username, true, &actor).await?;
    Ok(Json((&done).into()))
}

/// Body of an admin's password reset.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"new_password": "a long temporary one"}))]
struct ResetInput {
    /// 10 to 1024 characters.
    #[schema(min_length = 10, max_length = 1024)]
    new_password: String,
}

/// Set a user's password (administrators); they must change it at next sign-in.
#[utoipa::path(post, path = "/api/v1/users/{id}/password-reset", tag = "accounts", request_body = ResetInput,
    params(IdPath),
    responses((status = 200, description = "Password set; the user's sessions ended", body = ResetAnswer), Refusals))]
async fn reset(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<ResetInput>,
) -> Result<Json<ResetAnswer>> {
    let (actor, u) = admin_on_user(&s, &caller, id).await?;
    let ended = accounts::reset_password(&s.db, &u.username, &input.new_password, &actor).await?;
    Ok(Json(ResetAnswer {
        username: u.username,
        must_change_password: true,
        sessions_ended: ended,
    }))
}

/// Body of one's own password change.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"current_password": "the one in use now", "new_password": "a longer new one"}))]
struct ChangeInput {
    current_password: String,
    /// 10 to 1024 characters.
    #[schema(min_length = 10, max_length = 1024)]
    new_password: String,
}

/// Change one's own password with the current one.
///
/// Every session of the user ends; the answer sets a new session cookie. Not for API tokens.
#[utoipa::path(post, path = "/api/v1/me/password", tag = "accounts", request_body = ChangeInput,
    responses((status = 200, description = "Changed; a new session cookie is set", body = ChangedAnswer,
        headers(("Set-Cookie" = String, description = "the new session cookie"))), Refusals))]
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
    let mut resp = Json(ChangedAnswer {
        changed: true,
        note: "every other session has ended".into(),
    })
    .into_response();
    let cookie =
        crate::http::pages::session::session_cookie(&signed.secret, s.settings.secure_cookies);
    if let Ok(v) = HeaderValue::from_str(&cookie) {
        resp.headers_mut().insert(header::SET_COOKIE, v);
    }
    Ok(resp)
}
