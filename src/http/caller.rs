//! Who is calling: a signed-in user (session cookie) or a device (API token),
//! and the one check every route makes before it reads or changes a project.

use axum::extract::FromRequestParts;
use axum::http::request::Parts;

use crate::app::AppState;
use crate::auth::{Action, Role, allows, secret};
use crate::clock;
use crate::db::{self, users};
use crate::error::{AppError, Result};
use crate::ledger::{Actor, accounts};

/// The session cookie's name.
pub const SESSION_COOKIE: &str = "liftledger_session";
/// A session ends after this long without use.
pub const IDLE_SECS: i64 = 8 * 3600;

/// What the caller is.
#[derive(Debug, Clone)]
pub enum Principal {
    /// A person signed in with a session.
    User(users::User),
    /// A device or integration with a project-scoped token.
    Token(users::ApiToken),
}

/// An authenticated caller.
#[derive(Debug, Clone)]
pub struct Caller {
    pub principal: Principal,
    /// The client address (or "" when unknown).
    pub address: String,
    /// The session id when signed in with a cookie.
    pub session_id: Option<i64>,
}

/// A record whose project decides the caller's rights.
#[derive(Debug, Clone, Copy)]
pub enum Scope {
    Project(i64),
    Lot(i64),
    Test(i64),
    Source(i64),
    LabTest(i64),
    Certificate(i64),
    Token(i64),
}

impl Caller {
    /// The name written to the audit trail.
    pub fn actor(&self) -> Actor {
        match &self.principal {
            Principal::User(u) => Actor {
                name: accounts::actor_name(u),
                origin: self.address.clone(),
            },
            Principal::Token(t) => Actor {
                name: format!("token {} ({})", t.name, t.role),
                origin: format!("token:{} {}", t.id, self.address),
            },
        }
    }

    /// True for a signed-in admin.
    pub fn is_admin(&self) -> bool {
        matches!(&self.principal, Principal::User(u) if u.admin())
    }

    /// The caller's role in a project, if any.
    pub async fn role_in(&self, pool: &db::Pool, project_id: i64) -> Result<Option<Role>> {
        Ok(match &self.principal {
            Principal::User(u) => users::role_in(pool, u.id, project_id)
                .await?
                .and_then(|r| Role::parse_code(&r)),
            Principal::Token(t) if t.project_id == project_id => Role::parse_code(&t.role),
            Principal::Token(_) => None,
        })
    }

    /// Ids of the projects this caller may see.
    pub async fn visible_projects(&self, pool: &db::Pool) -> Result<Option<Vec<i64>>> {
        Ok(match &self.principal {
            Principal::User(u) if u.admin() => None,
            Principal::User(u) => Some(users::project_ids(pool, u.id).await?),
            Principal::Token(t) => Some(vec![t.project_id]),
        })
    }
}

/// Resolves a scope to its project id; 404 when the record does not exist.
pub async fn project_of(pool: &db::Pool, scope: Scope) -> Result<i64> {
    use db::scope as s;
    let (found, field, what, id) = match scope {
        Scope::Project(id) => (
            s::project_exists(pool, id).await?,
            "project_id",
            "project",
            id,
        ),
        Scope::Lot(id) => (s::project_of_lot(pool, id).await?, "lot_id", "lot", id),
        Scope::Test(id) => (
            s::project_of_test(pool, id).await?,
            "test_id",
            "field test",
            id,
        ),
        Scope::Source(id) => (
            s::project_of_source(pool, id).await?,
            "source_id",
            "source",
            id,
        ),
        Scope::LabTest(id) => (
            s::project_of_lab_test(pool, id).await?,
            "lab_test_id",
            "lab test",
            id,
        ),
        Scope::Certificate(id) => (
            s::project_of_certificate(pool, id).await?,
            "certificate_id",
            "certificate",
            id,
        ),
        Scope::Token(id) => (
            s::project_of_token(pool, id).await?,
            "token_id",
            "token",
            id,
        ),
    };
    found.ok_or_else(|| AppError::not_found(field, format!("{what} {id} does not exist")))
}

/// The check of every route: may this caller do `action` on the record `scope` names?
///
/// A record the caller may not even read answers 404, so ids of other projects are not revealed.
pub async fn require(
    pool: &db::Pool,
    caller: &Caller,
    scope: Scope,
    action: Action,
) -> Result<Actor> {
    let project_id = project_of(pool, scope).await?;
    let role = caller.role_in(pool, project_id).await?;
    match role {
        Some(r) if allows(r, action) => Ok(caller.actor()),
        Some(r) => Err(AppError::forbidden(format!(
            "a {} may not {}",
            r.label(),
            action.label()
        ))),
        None if caller.is_admin() && action == Action::Read => Ok(caller.actor()),
        None if caller.is_admin() => Err(AppError::forbidden(format!(
            "an administrator manages projects and people but may not {} without a project role",
            action.label()
        ))),
        None => Err(AppError::not_found(
            "project_id",
            "no such record in your projects",
        )),
    }
}

/// Only admins pass.
pub fn require_admin(caller: &Caller) -> Result<Actor> {
    if caller.is_admin() {
        Ok(caller.actor())
    } else {
        Err(AppError::forbidden("only an administrator may do this"))
    }
}

fn cookie_value(parts: &Parts, name: &str) -> Option<String> {
    parts
        .headers
        .get_all(axum::http::header::COOKIE)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(';'))
        .filter_map(|kv| kv.trim().split_once('='))
        .find(|(k, _)| *k == name)
        .map(|(_, v)| v.to_string())
}

/// The client address, when the server was started with connection info.
pub fn address(parts: &Parts) -> String {
    parts
        .extensions
        .get::<axum::extract::ConnectInfo<std::net::SocketAddr>>()
        .map(|c| c.0.ip().to_string())
        .unwrap_or_default()
}

/// Finds the caller from a bearer token or the session cookie; `None` when neither is valid.
pub async fn identify(state: &AppState, parts: &Parts) -> Result<Option<Caller>> {
    let address = address(parts);
    let now = clock::now();
    if let Some(auth) = parts.headers.get(axum::http::header::AUTHORIZATION) {
        let value = auth.to_str().unwrap_or("");
        let Some(token) = value.strip_prefix("Bearer ") else {
            return Err(AppError::unauthorized(
                "Authorization must be 'Bearer <token>'",
            ));
        };
        let Some(t) = users::token_by_hash(&state.db, &secret::digest(token.trim())).await? else {
            return Err(AppError::unauthorized(
                "the API token is unknown or revoked",
            ));
        };
        // Record use at most once a minute per token: a write on every request would
        // double the write load of a busy site device.
        let stale = t
            .last_used_at
            .as_deref()
            .and_then(clock::parse)
            .zip(clock::parse(&now))
            .is_none_or(|(last, n)| (n - last).whole_seconds() > 60);
        if stale {
            users::touch_token(&state.db, t.id, &now).await?;
        }
        return Ok(Some(Caller {
            principal: Principal::Token(t),
            address,
            session_id: None,
        }));
    }
    let Some(cookie) = cookie_value(parts, SESSION_COOKIE) else {
        return Ok(None);
    };
    let Some(found) = users::session_user(&state.db, &secret::digest(&cookie)).await? else {
        return Ok(None);
    };
    let idle = match (
        clock::parse(&now),
        clock::parse(&found.session_last_seen_at),
    ) {
        (Some(n), Some(l)) => (n - l).whole_seconds(),
        _ => 0,
    };
    if idle > IDLE_SECS {
        users::end_session(&state.db, found.session_id, &now).await?;
        return Ok(None);
    }
    if found.user.disabled_at.is_some() {
        return Ok(None);
    }
    // Write at most once a minute per session.
    if idle > 60 {
        users::touch_session(&state.db, found.session_id, &now).await?;
    }
    Ok(Some(Caller {
        principal: Principal::User(found.user),
        address,
        session_id: Some(found.session_id),
    }))
}

impl FromRequestParts<AppState> for Caller {
    /// API routes answer 401 JSON; pages send the browser to the sign-in page.
    type Rejection = axum::response::Response;

    async fn from_request_parts(
        parts: &mut Parts,
        state: &AppState,
    ) -> Result<Self, Self::Rejection> {
        use axum::response::IntoResponse;
        let found = identify(state, parts).await.and_then(|c| {
            c.ok_or_else(|| AppError::unauthorized("sign in first, or send an API token"))
        });
        match found {
            Ok(c) => Ok(c),
            Err(e) if parts.uri.path().starts_with("/api/") => Err(e.into_response()),
            Err(e) => Err(crate::http::pages::PageError(e).into_response()),
        }
    }
}

/// A caller who may be anonymous (sign-in page, verification).
pub struct MaybeCaller(pub Option<Caller>);

impl FromRequestParts<AppState> for MaybeCaller {
    type Rejection = AppError;

    async fn from_request_parts(
        parts: &mut Parts,
        state: &AppState,
    ) -> Result<Self, Self::Rejection> {
        Ok(MaybeCaller(identify(state, parts).await.unwrap_or(None)))
    }
}
