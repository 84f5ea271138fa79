//! Users, memberships and API tokens.

use axum::Json;
use axum::extract::State;
use axum::http::StatusCode;
use serde::Deserialize;
use utoipa::ToSchema;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{
    GrantAnswer, MeAnswer, MemberAnswer, NewTokenAnswer, TokenAnswer, UserAnswer,
};
use super::codes;
use super::doc::{IdPath, Refusals};

use crate::app::AppState;
use crate::auth::Action;
use crate::db::users;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Principal, Scope, project_of, require, require_admin};
use crate::http::extract::{ApiJson, ApiPath};
use crate::ledger::accounts::{self, Revoker, TokenInput, UserInput};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(me))
        .routes(routes!(list_users, create_user))
        .routes(routes!(list_members, grant))
        .routes(routes!(list_tokens, create_token))
        .routes(routes!(revoke_token))
}

/// Who the caller is and which projects they see.
#[utoipa::path(get, path = "/api/v1/me", tag = "accounts",
    responses((status = 200, description = "The signed-in user or the token", body = MeAnswer), Refusals))]
async fn me(State(s): State<AppState>, caller: Caller) -> Result<Json<MeAnswer>> {
    let projects = caller.visible_projects(&s.db).await?;
    Ok(Json(match &caller.principal {
        Principal::User(u) => MeAnswer::User {
            user: u.into(),
            projects,
        },
        Principal::Token(t) => MeAnswer::Token { token: t.into() },
    }))
}

/// List users (administrators).
#[utoipa::path(get, path = "/api/v1/users", tag = "accounts",
    responses((status = 200, description = "Every account", body = Vec<UserAnswer>), Refusals))]
async fn list_users(State(s): State<AppState>, caller: Caller) -> Result<Json<Vec<UserAnswer>>> {
    require_admin(&caller)?;
    let all = users::list(&s.db).await?;
    Ok(Json(all.iter().map(Into::into).collect()))
}

/// Body of a new user (read by `ledger::accounts::UserInput`).
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[allow(dead_code)]
#[schema(example = json!({"username": "bob", "display_name": "Bob Okafor", "password": "correct horse battery staple"}))]
struct UserBody {
    #[schema(max_length = 64, pattern = r"\S")]
    username: String,
    display_name: String,
    /// 10 to 1024 characters.
    #[schema(min_length = 10, max_length = 1024)]
    password: String,
    #[serde(default)]
    is_admin: bool,
}

/// Create a user (administrators).
#[utoipa::path(post, path = "/api/v1/users", tag = "accounts", request_body = UserBody,
    responses((status = 201, description = "The new account", body = UserAnswer), Refusals))]
async fn create_user(
    State(s): State<AppState>,
    caller: Caller,
    ApiJson(input): ApiJson<UserInput>,
) -> Result<(StatusCode, Json<UserAnswer>)> {
    let actor = require_admin(&caller)?;
    let u = accounts::create_user(&s.db, &input, false, &actor).await?;
    Ok((StatusCode::CREATED, Json((&u).into())))
}

/// Members of a project and their roles.
#[utoipa::path(get, path = "/api/v1/projects/{id}/members", tag = "accounts",
    params(IdPath),
    responses((status = 200, description = "Members", body = Vec<MemberAnswer>), Refusals))]
async fn list_members(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<MemberAnswer>>> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let members = users::members(&s.db, id)
        .await?
        .into_iter()
        .map(|(username, display_name, role)| MemberAnswer {
            username,
            display_name,
            role,
        })
        .collect();
    Ok(Json(members))
}

/// Body of a membership grant.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"username": "bob", "role": "technician"}))]
struct GrantInput {
    username: String,
    #[schema(value_type = codes::Role)]
    role: String,
}

/// Give a user a role in a project (administrators).
#[utoipa::path(post, path = "/api/v1/projects/{id}/members", tag = "accounts", request_body = GrantInput,
    params(IdPath),
    responses((status = 200, description = "The role given", body = GrantAnswer), Refusals))]
async fn grant(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<GrantInput>,
) -> Result<Json<GrantAnswer>> {
    let actor = require_admin(&caller)?;
    project_of(&s.db, Scope::Project(id)).await?;
    accounts::grant(&s.db, &input.username, id, &input.role, &actor).await?;
    Ok(Json(GrantAnswer {
        username: input.username,
        project_id: id,
        role: input.role,
    }))
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

/// API tokens of a project (administrators, QC managers and client engineers).
#[utoipa::path(get, path = "/api/v1/projects/{id}/tokens", tag = "accounts",
    params(IdPath),
    responses((status = 200, description = "Tokens (never their secrets)", body = Vec<TokenAnswer>), Refusals))]
async fn list_tokens(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Vec<TokenAnswer>>> {
    token_reader(&s, &caller, Scope::Project(id)).await?;
    let tokens = users::tokens(&s.db, id).await?;
    Ok(Json(tokens.iter().map(Into::into).collect()))
}

/// Body of a new token (read by `ledger::accounts::TokenInput`).
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[allow(dead_code)]
#[schema(example = json!({"name": "site tablet 2", "role": "technician", "expires_in_days": 30}))]
struct TokenBody {
    name: String,
    /// A role no higher than the maker's in the project.
    #[schema(value_type = codes::Role)]
    role: String,
    /// Days until it expires.
    #[schema(minimum = 1, maximum = 365, default = 90)]
    expires_in_days: Option<i64>,
}

/// Create an API token; its secret is shown once.
///
/// Made by a signed-in person with a role in the project, for a role within it (an
/// administrator without a project role may not make one).
#[utoipa::path(post, path = "/api/v1/projects/{id}/tokens", tag = "accounts", request_body = TokenBody,
    params(IdPath),
    responses((status = 201, description = "The token and its secret", body = NewTokenAnswer), Refusals))]
async fn create_token(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<TokenInput>,
) -> Result<(StatusCode, Json<NewTokenAnswer>)> {
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
        Json(NewTokenAnswer {
            token: secret,
            details: (&token).into(),
            note: "shown once; only its hash is stored".into(),
        }),
    ))
}

/// Revoke an API token.
#[utoipa::path(post, path = "/api/v1/tokens/{id}/revoke", tag = "accounts",
    params(IdPath),
    responses((status = 200, description = "The token, revoked", body = TokenAnswer), Refusals))]
async fn revoke_token(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<TokenAnswer>> {
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
    let token = accounts::revoke_token(&s.db, id, by, &actor).await?;
    Ok(Json((&token).into()))
}
