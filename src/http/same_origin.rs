//! Cross-site request forgery protection by strict Origin/Referer checks.
//!
//! A state-changing request (anything but GET, HEAD, OPTIONS) that carries the
//! session cookie must come from this site: its `Origin` header (or, when a
//! browser sends none, its `Referer`) must name the same host as the request.
//! Requests authenticated by an API token carry no cookie and are not subject
//! to this check. The sign-in form is checked even without a cookie: a forged
//! cross-site sign-in would put the victim's browser in the attacker's account
//! (login CSRF), and everything they then enter would be recorded as the attacker's. Together with `SameSite=Lax` cookies this refuses forged and
//! replayed cross-site forms without per-form tokens.

use axum::extract::Request;
use axum::http::{Method, header};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};

use super::caller::SESSION_COOKIE;
use crate::error::AppError;

/// The form that starts a session: always same-origin.
const SIGN_IN: &str = "/sign-in";

/// The host[:port] part of an origin or URL.
fn authority(url: &str) -> Option<&str> {
    let rest = url.split_once("://")?.1;
    Some(rest.split(['/', '?', '#']).next().unwrap_or(rest))
}

/// Refuses a cookie-authenticated unsafe request from another origin.
pub async fn check(req: Request, next: Next) -> Response {
    let safe = matches!(*req.method(), Method::GET | Method::HEAD | Method::OPTIONS);
    let h = req.headers();
    let has_session = h
        .get_all(header::COOKIE)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .any(|v| {
            v.split(';')
                .any(|kv| kv.trim().starts_with(&format!("{SESSION_COOKIE}=")))
        });
    let sign_in = req.uri().path() == SIGN_IN;
    if safe || (!sign_in && (!has_session || h.contains_key(header::AUTHORIZATION))) {
        return next.run(req).await;
    }
    let host = h
        .get(header::HOST)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("");
    let from = h
        .get(header::ORIGIN)
        .or_else(|| h.get(header::REFERER))
        .and_then(|v| v.to_str().ok())
        .and_then(authority);
    match from {
        Some(a) if !host.is_empty() && a.eq_ignore_ascii_case(host) => next.run(req).await,
        _ => AppError::forbidden(
            "cross-site request refused: the Origin or Referer must be this site",
        )
        .into_response(),
    }
}

#[cfg(test)]
mod tests {
    use super::authority;

    #[test]
    fn authority_takes_host_and_port() {
        assert_eq!(authority("http://127.0.0.1:8480"), Some("127.0.0.1:8480"));
        assert_eq!(
            authority("https://site.example/lots/3?x=1"),
            Some("site.example")
        );
        assert_eq!(authority("null"), None);
    }
}
