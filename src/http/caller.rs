//! Who is calling: a signed-in user (session cookie) or a device (API token),
//! and the one check every route makes before it reads or changes a project.

use axum::extract::FromRequestParts;
use axum::http::request::Parts;

use crate::app::AppState;
use crate::auth::{Action, Role, allows, secret};
use crate::clock;
use crate::db::{self, users};
use crate::error::{AppError, Result};
use crate::ledger::{Actor, accounts, sessions};

/// The session cookie's name.
pub const SESSION_COOKIE: &str = "liftledger_session";
/// A session ends after this long without use.
pub const IDLE_SECS: i64 = sessions::IDLE_SECS;

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
            Principal::User(u) => users::role_in(pool, u.id, project_id).await?,
            Principal::Token(t) if t.project_id == project_id => Some(t.role),
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

impl Scope {
    /// The field and the words naming the record, for the one "not found" answer.
    fn names(self) -> (&'static str, &'static str, i64) {
        match self {
            Scope::Project(id) => ("project_id", "project", id),
            Scope::Lot(id) => ("lot_id", "lot", id),
            Scope::Test(id) => ("test_id", "field test", id),
            Scope::Source(id) => ("source_id", "source", id),
            Scope::LabTest(id) => ("lab_test_id", "lab test", id),
            Scope::Certificate(id) => ("certificate_id", "certificate", id),
            Scope::Token(id) => ("token_id", "token", id),
        }
    }

    /// The one answer for a record that does not exist and for one in another project,
    /// so ids of other projects are not revealed.
    pub fn not_found(self) -> AppError {
        let (field, what, id) = self.names();
        AppError::not_found(field, format!("no {what} {id} in your projects"))
    }
}

/// Resolves a scope to its project id; 404 when the record does not exist.
pub async fn project_of(pool: &db::Pool, scope: Scope) -> Result<i64> {
    use db::scope as s;
    let found = match scope {
        Scope::Project(id) => s::project_exists(pool, id).await?,
        Scope::Lot(id) => s::project_of_lot(pool, id).await?,
        Scope::Test(id) => s::project_of_test(pool, id).await?,
        Scope::Source(id) => s::project_of_source(pool, id).await?,
        Scope::LabTest(id) => s::project_of_lab_test(pool, id).await?,
        Scope::Certificate(id) => s::project_of_certificate(pool, id).await?,
        Scope::Token(id) => s::project_of_token(pool, id).await?,
    };
    found.ok_or_else(|| scope.not_found())
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
        None => Err(scope.not_found()),
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

/// The client address: the peer of the connection, or — only when the server was told
/// it sits behind a proxy (`--trust-proxy`) — the last address in `X-Forwarded-For`,
/// the one the proxy itself appended. Without the flag the header is ignored, so a
/// client cannot pick a fresh throttle key per request by inventing one.
pub fn address(parts: &Parts, trust_proxy: bool) -> String {
    let peer = parts
        .extensions
        .get::<axum::extract::ConnectInfo<std::net::SocketAddr>>()
        .map(|c| c.0.ip().to_string())
        .unwrap_or_default();
    if !trust_proxy {
        return peer;
    }
    parts
        .headers
        .get_all("x-forwarded-for")
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(','))
        .map(str::trim)
        .rfind(|v| v.parse::<std::net::IpAddr>().is_ok())
        .map_or(peer, str::to_string)
}

/// The caller behind a bearer token: live, unexpired, and its creator still enabled and
/// holding a role in the project that contains the token's.
async fn token_caller(state: &AppState, value: &str, address: String) -> Result<Caller> {
    let Some(token) = value.strip_prefix("Bearer ") else {
        return Err(AppError::unauthorized(
            "Authorization must be 'Bearer <token>'",
        ));
    };
    let now = clock::now();
    let refused = || AppError::unauthorized("the API token is unknown, expired or revoked");
    let (t, creator_role) = users::live_token(&state.db, &secret::digest(token.trim()), &now)
        .await?
        .ok_or_else(refused)?;
    if !t.role.within(creator_role) {
        return Err(refused());
    }
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
    Ok(Caller {
        principal: Principal::Token(t),
        address,
        session_id: None,
    })
}

/// Finds the caller from a bearer token or the session cookie; `None` when neither is valid.
pub async fn identify(state: &AppState, parts: &Parts) -> Result<Option<Caller>> {
    let address = address(parts, state.settings.trust_proxy);
    if let Some(auth) = parts.headers.get(axum::http::header::AUTHORIZATION) {
        let value = auth.to_str().unwrap_or("");
        return token_caller(state, value, address).await.map(Some);
    }
    let Some(cookie) = cookie_value(parts, SESSION_COOKIE) else {
        return Ok(None);
    };
    let Some(found) = users::session_user(&state.db, &secret::digest(&cookie)).await? else {
        return Ok(None);
    };
    let now = clock::now();
    if let Some(reason) = sessions::expiry(&found, &now) {
        sessions::expire(&state.db, &found, reason, &address).await?;
        return Ok(None);
    }
    if found.user.disabled_at.is_some() {
        return Ok(None);
    }
    // Write at most once a minute per session.
    let idle = clock::parse(&now)
        .zip(clock::parse(&found.session_last_seen_at))
        .map_or(0, |(n, l)| (n - l).whole_seconds());
    if idle > 60 {
        users::touch_session(&state.db, found.session_id, &now).await?;
    }
    Ok(Some(Caller {
        principal: Principal::User(found.user),
        address,
        session_id: Some(found.session_id),
    }))
}

/// Paths a user whose password must be changed may still reach.
const WHILE_PASSWORD_CHANGE: [&str; 5] = [
    "/account",
    "/sign-out",
    "/sign-in",
    "/api/v1/me",
    "/api/v1/me/password",
];

/// True when the caller must change their password before anything else.
fn must_change_first(caller: &Caller, path: &str) -> bool {
    matches!(&caller.principal, Principal::User(u) if u.must_change_password != 0)
        && !WHILE_PASSWORD_CHANGE.contains(&path)
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
        let api = parts.uri.path().starts_with("/api/");
        match found {
            Ok(c) if must_change_first(&c, parts.uri.path()) => Err(if api {
                AppError::forbidden(
                    "change your password first: POST /api/v1/me/password with current_password and new_password",
                )
                .into_response()
            } else {
                crate::http::pages::see_other("/account")
            }),
            Ok(c) => Ok(c),
            Err(e) if api => Err(e.into_response()),
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
