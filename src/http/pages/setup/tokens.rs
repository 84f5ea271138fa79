//! API tokens of a project for devices and integrations: create (the secret shown
//! once), list and revoke. The ledger decides which roles the caller may hand out.

use askama::Template;
use axum::Router;
use axum::body::Bytes;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::routing::{get, post};

use super::Context;
use super::form::{self, Errors, Field, Kind, Values, decode};
use crate::app::AppState;
use crate::auth::{Action, Role};
use crate::db;
use crate::http::caller::{Caller, Principal, Scope, project_of, require};
use crate::http::pages::{PageError, PageResult, ProjectNav, render_status, see_other};
use crate::ledger::accounts::{self, Revoker, TokenInput};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/projects/{id}/setup/tokens", get(list).post(create))
        .route("/setup/tokens/{id}/revoke", post(revoke))
}

/// A token as the list shows it.
struct TokenRow {
    id: i64,
    name: String,
    role: String,
    created: String,
    last_used: String,
    revoked: String,
}

#[derive(Template)]
#[template(path = "setup/tokens.html")]
struct TokensPage {
    nav: ProjectNav,
    id: i64,
    tokens: Vec<TokenRow>,
    fields: Vec<super::FieldView>,
    error_list: Vec<(String, String)>,
    form_error: String,
    /// The new token's secret, shown on this answer only.
    secret: String,
    secret_name: String,
}

fn fields() -> Vec<Field> {
    let roles = Role::ALL
        .iter()
        .map(|r| (r.code().to_string(), r.label().to_string()))
        .collect();
    vec![
        Field::new("name", "Token name", Kind::Text, true)
            .hint("the device or system that will use it"),
        Field::new("role", "Role", Kind::Choice(roles), true)
            .hint("what the token may do in this project; never more than you may"),
        Field::new(
            "expires_in_days",
            "Expires after (days)",
            Kind::Integer,
            false,
        )
        .hint("empty: 90 days; at most 365"),
    ]
}

async fn page(
    s: &AppState,
    ctx: &Context,
    values: &Values,
    errors: &Errors,
    secret: (String, String),
) -> PageResult<TokensPage> {
    let tokens = db::users::tokens(&s.db, ctx.project.id)
        .await?
        .into_iter()
        .map(|t| TokenRow {
            id: t.id,
            name: t.name,
            role: t.role.label().to_string(),
            created: format!("{} by {}", t.created_at, t.created_by),
            last_used: t.last_used_at.unwrap_or_else(|| "never".into()),
            revoked: t.revoked_at.unwrap_or_default(),
        })
        .collect();
    let f = fields();
    Ok(TokensPage {
        nav: ctx.nav.clone(),
        id: ctx.project.id,
        tokens,
        fields: f.iter().map(|x| super::view(x, values, errors)).collect(),
        error_list: errors
            .iter()
            .filter(|(k, _)| !k.is_empty())
            .map(|(k, v)| (k.clone(), v.clone()))
            .collect(),
        form_error: errors.get("").cloned().unwrap_or_default(),
        secret: secret.0,
        secret_name: secret.1,
    })
}

async fn list(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let ctx = Context::load(&s, &caller, id, Action::ManageTokens).await?;
    render_status(
        StatusCode::OK,
        &page(&s, &ctx, &Values::new(), &Errors::new(), Default::default()).await?,
    )
}

async fn create(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let ctx = Context::load(&s, &caller, id, Action::ManageTokens).await?;
    let values = decode(&body);
    let f = fields();
    let refused = async |errors: Errors| {
        render_status(
            StatusCode::UNPROCESSABLE_ENTITY,
            &page(&s, &ctx, &values, &errors, Default::default()).await?,
        )
    };
    let json = match form::to_json(&f, &values, &ctx.units) {
        Ok(j) => j,
        Err(errors) => return refused(errors).await,
    };
    let input: TokenInput = match serde_json::from_value(serde_json::Value::Object(json)) {
        Ok(i) => i,
        Err(e) => return refused(Errors::from([(String::new(), e.to_string())])).await,
    };
    let Principal::User(user) = &caller.principal else {
        return Err(PageError(crate::error::AppError::forbidden(
            "an API token may not manage tokens",
        )));
    };
    match accounts::create_token(&s.db, id, &input, user.id, &ctx.actor).await {
        Ok((secret, token)) => render_status(
            StatusCode::CREATED,
            &page(
                &s,
                &ctx,
                &Values::new(),
                &Errors::new(),
                (secret, token.name),
            )
            .await?,
        ),
        Err(e) if form::is_refusal(&e) => refused(form::place(&e, &f)).await,
        Err(e) => Err(PageError(e)),
    }
}

async fn revoke(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let actor = require(&s.db, &caller, Scope::Token(id), Action::ManageTokens).await?;
    let project = project_of(&s.db, Scope::Token(id)).await?;
    let role = caller.role_in(&s.db, project).await?.ok_or_else(|| {
        PageError(crate::error::AppError::forbidden(
            "revoking a token needs a role in its project",
        ))
    })?;
    let t = accounts::revoke_token(&s.db, id, Revoker::Member(role), &actor).await?;
    Ok(see_other(&format!(
        "/projects/{}/setup/tokens",
        t.project_id
    )))
}
