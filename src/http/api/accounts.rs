//! Users, memberships and API tokens.

use axum::extract::State;
use axum::http::StatusCode;
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::{Value, json};

use crate::app::AppState;
use crate::auth::Action;
use crate::db::users;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Principal, Scope, project_of, require, require_admin};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::accounts::{self, Revoker, TokenInput, UserInput};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/me", get(me))
        .route("/api/v1/users", get(list_users).post(create_user))
        .route(
            "/api/v1/projects/{id}/members",
            get(list_members).post(grant),
        )
        .route(
            "/api/v1/projects/{id}/tokens",
            get(list_tokens).post(create_token),
        )
        .route("/api/v1/tokens/{id}/revoke", post(revoke_token))
}

async fn me(State(s): State<AppState>, caller: Caller) -> Result<Json<Value>> {
    let projects = caller.visible_projects(&s.db).await?;
    Ok(Json(match &caller.principal {
        Principal::User(u) => json!({"kind": "user", "user": u, "projects": projects}),
        Principal::Token(t) => json!({"kind": "token", "token": t}),
    }))
}

async fn list_users(State(s): State<AppState>, caller: Caller) -> Result<Json<Vec<users::User>>> {
    require_admin(&caller)?;
    Ok(Json(users::list(&s.db).await?))
}

async fn create_user(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<UserInput>,
) -> Result<(StatusCode, Json<users::User>)> {
    let actor = require_admin(&caller)?;
    Ok((
        StatusCode::CREATED,
        Json(accounts::create_user(&s.db, &input, false, &actor).await?),
    ))
}

async fn list_members(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let members: Vec<Value> = users::members(&s.db, id)
        .await?
        .into_iter()
        .map(|(u, d, r)| json!({"username": u, "display_name": d, "role": r}))
        .collect();
    Ok(Json(Value::Array(members)))
}

/// Body of a membership grant.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct GrantInput {
    username: String,
    role: String,
}

async fn grant(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<GrantInput>,
) -> Result<Json<Value>> {
    let actor = require_admin(&caller)?;
    project_of(&s.db, Scope::Project(id)).await?;
    accounts::grant(&s.db, &input.username, id, &input.role, &actor).await?;
    Ok(Json(
        json!({"username": input.username, "project_id": id, "role": input.role}),
    ))
}

/// Who may list a project's tokens: an admin, or a member who may manage tokens.
async fn token_reader(s: &AppState, caller: &Caller, scope: Scope) -> Result<()> {
    if matches!(caller.principal, Principal::Token(_)) {
        return Err(AppError::forbidden("an API token may not manage tokens"));
    }
    if caller.is_admin() {
        project_of(&s.db, scope).await?;
        return Ok(());
    }
    require(&s.db, caller, scope, Action::ManageTokens).await?;
    Ok(())
}

async fn list_tokens(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<users::ApiToken>>> {
    token_reader(&s, &caller, Scope::Project(id)).await?;
    Ok(Json(users::tokens(&s.db, id).await?))
}

/// A token is made by a signed-in person with a role in the project, for a role within it
/// (an admin without a project role may not make one).
async fn create_token(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<TokenInput>,
) -> Result<(StatusCode, Json<Value>)> {
    let Principal::User(user) = &caller.principal else {
        return Err(AppError::forbidden("an API token may not manage tokens"));
    };
    let actor = if caller.is_admin() {
        project_of(&s.db, Scope::Project(id)).await?;
        caller.actor()
    } else {
        require(&s.db, &caller, Scope::Project(id), Action::ManageTokens).await?
    };
    let (secret, token) = accounts::create_token(&s.db, id, &input, user.id, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(
            json!({"token": secret, "details": token, "note": "shown once; only its hash is stored"}),
        ),
    ))
}

async fn revoke_token(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<users::ApiToken>> {
    if matches!(caller.principal, Principal::Token(_)) {
        return Err(AppError::forbidden("an API token may not manage tokens"));
    }
    let (by, actor) = if caller.is_admin() {
        project_of(&s.db, Scope::Token(id)).await?;
        (Revoker::Admin, caller.actor())
    } else {
        let actor = require(&s.db, &caller, Scope::Token(id), Action::ManageTokens).await?;
        let project = project_of(&s.db, Scope::Token(id)).await?;
        let role = caller
            .role_in(&s.db, project)
            .await?
            .ok_or_else(|| AppError::forbidden("revoking a token needs a role in its project"))?;
        (Revoker::Member(role), actor)
    };
    Ok(Json(accounts::revoke_token(&s.db, id, by, &actor).await?))
}
