//! Sign-in and sign-out pages, and the session cookie.

use askama::Template;
use axum::Router;
use axum::extract::{FromRequestParts, State};
use axum::http::request::Parts;
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::Response;
use axum::routing::{get, post};

use super::{PageError, PageResult, render, render_status, see_other};
use crate::app::AppState;
use crate::clock;
use crate::db::users;
use crate::error::AppError;
use crate::http::caller::{self, MaybeCaller, SESSION_COOKIE};
use crate::http::extract::parse_form;
use crate::ledger::accounts;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/sign-in", get(form).post(sign_in))
        .route("/sign-out", post(sign_out))
}

#[derive(Template)]
#[template(path = "sign_in.html")]
struct SignInPage {
    signed_in_as: String,
    username: String,
    message: String,
    demo: bool,
    demo_users: Vec<(String, String, String)>,
}

fn demo_users(s: &AppState) -> Vec<(String, String, String)> {
    if !s.settings.demo {
        return Vec::new();
    }
    accounts::DEMO_USERS
        .iter()
        .map(|(u, _, role, p)| (u.to_string(), role.replace('_', " "), p.to_string()))
        .collect()
}

async fn form(State(s): State<AppState>, MaybeCaller(c): MaybeCaller) -> PageResult {
    render(&SignInPage {
        signed_in_as: c.map(|c| c.actor().name).unwrap_or_default(),
        username: String::new(),
        message: String::new(),
        demo: s.settings.demo,
        demo_users: demo_users(&s),
    })
}

/// The sign-in form.
#[derive(serde::Deserialize)]
struct Credentials {
    #[serde(default)]
    username: String,
    #[serde(default)]
    password: String,
}

/// Request facts the sign-in needs: client address, TLS, and a session being replaced.
pub struct RequestFacts {
    pub address: String,
    pub secure: bool,
    pub old_session: Option<String>,
}

impl FromRequestParts<AppState> for RequestFacts {
    type Rejection = AppError;

    async fn from_request_parts(
        parts: &mut Parts,
        state: &AppState,
    ) -> Result<Self, Self::Rejection> {
        let secure = state.settings.secure_cookies
            || parts
                .headers
                .get("x-forwarded-proto")
                .and_then(|v| v.to_str().ok())
                .is_some_and(|v| v.eq_ignore_ascii_case("https"));
        let old_session = parts
            .headers
            .get_all(header::COOKIE)
            .iter()
            .filter_map(|v| v.to_str().ok())
            .flat_map(|v| v.split(';'))
            .filter_map(|kv| kv.trim().split_once('='))
            .find(|(k, _)| *k == SESSION_COOKIE)
            .map(|(_, v)| v.to_string());
        Ok(Self {
            address: caller::address(parts, state.settings.trust_proxy),
            secure,
            old_session,
        })
    }
}

/// The Set-Cookie value for a session secret (empty secret clears the cookie).
pub fn session_cookie(secret: &str, secure: bool) -> String {
    let mut c = format!("{SESSION_COOKIE}={secret}; Path=/; HttpOnly; SameSite=Lax");
    if secret.is_empty() {
        c.push_str("; Max-Age=0");
    }
    if secure {
        c.push_str("; Secure");
    }
    c
}

async fn sign_in(
    State(s): State<AppState>,
    facts: RequestFacts,
    body: axum::body::Bytes,
) -> PageResult {
    let creds: Credentials = parse_form(&body).map_err(PageError)?;
    match accounts::sign_in(&s.db, &creds.username, &creds.password, &facts.address).await {
        Ok(signed) => {
            // Rotation: a session presented at sign-in is ended; the new one has a new secret.
            if let Some(old) = facts.old_session
                && let Some(sess) =
                    users::session(&s.db, &crate::auth::secret::digest(&old)).await?
            {
                users::end_session(&s.db, sess.id, &clock::now()).await?;
            }
            // A password set by someone else is replaced before anything else.
            let to = if signed.user.must_change_password != 0 {
                "/account"
            } else {
                "/"
            };
            let mut resp: Response = see_other(to);
            let cookie = HeaderValue::from_str(&session_cookie(&signed.secret, facts.secure))
                .map_err(|e| PageError(AppError::Internal(anyhow::anyhow!("cookie: {e}"))))?;
            resp.headers_mut().insert(header::SET_COOKIE, cookie);
            Ok(resp)
        }
        Err(
            e @ (AppError::Unauthorized { .. }
            | AppError::TooManyRequests { .. }
            | AppError::Invalid { .. }),
        ) => {
            let status = e.status();
            let mut resp = render_status(
                status,
                &SignInPage {
                    signed_in_as: String::new(),
                    username: creds.username,
                    message: e.user_message(),
                    demo: s.settings.demo,
                    demo_users: demo_users(&s),
                },
            )?;
            if let AppError::TooManyRequests {
                retry_after_secs, ..
            } = e
                && let Ok(v) = HeaderValue::from_str(&retry_after_secs.to_string())
            {
                resp.headers_mut().insert(header::RETRY_AFTER, v);
            }
            Ok(resp)
        }
        Err(e) => Err(e.into()),
    }
}

async fn sign_out(
    State(s): State<AppState>,
    MaybeCaller(c): MaybeCaller,
    facts: RequestFacts,
) -> PageResult {
    if let Some(c) = c
        && let Some(id) = c.session_id
    {
        accounts::sign_out(&s.db, id, &c.actor()).await?;
    }
    let mut resp = see_other("/sign-in");
    if let Ok(v) = HeaderValue::from_str(&session_cookie("", facts.secure)) {
        resp.headers_mut().insert(header::SET_COOKIE, v);
    }
    Ok(resp)
}

/// Where an anonymous page request is sent.
pub fn to_sign_in() -> Response {
    let mut r = see_other("/sign-in");
    *r.status_mut() = StatusCode::SEE_OTHER;
    r
}
