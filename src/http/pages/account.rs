//! The account page: a signed-in person changes their own password.

use askama::Template;
use axum::Router;
use axum::extract::State;
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::Response;
use axum::routing::get;

use super::session::{RequestFacts, session_cookie};
use super::{PageError, PageResult, render, render_status, see_other};
use crate::app::AppState;
use crate::error::AppError;
use crate::http::caller::{Caller, Principal};
use crate::http::extract::parse_form;
use crate::ledger::accounts;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/account", get(form).post(change))
}

#[derive(Template)]
#[template(path = "account.html")]
struct AccountPage {
    name: String,
    must_change: bool,
    message: String,
}

fn page_for(caller: &Caller, message: String) -> PageResult<AccountPage> {
    let Principal::User(u) = &caller.principal else {
        return Err(PageError(AppError::forbidden(
            "an API token has no account page",
        )));
    };
    Ok(AccountPage {
        name: accounts::actor_name(u),
        must_change: u.must_change_password != 0,
        message,
    })
}

async fn form(caller: Caller) -> PageResult {
    render(&page_for(&caller, String::new())?)
}

/// The password form.
#[derive(serde::Deserialize)]
struct PasswordForm {
    #[serde(default)]
    current_password: String,
    #[serde(default)]
    new_password: String,
    #[serde(default)]
    confirm_password: String,
}

async fn change(
    State(s): State<AppState>,
    caller: Caller,
    facts: RequestFacts,
    body: axum::body::Bytes,
) -> PageResult {
    let f: PasswordForm = parse_form(&body).map_err(PageError)?;
    let Principal::User(u) = &caller.principal else {
        return Err(PageError(AppError::forbidden(
            "an API token has no password",
        )));
    };
    let result = if f.new_password != f.confirm_password {
        Err(AppError::invalid(
            "confirm_password",
            "does not match the new password",
        ))
    } else {
        accounts::change_own_password(
            &s.db,
            u.id,
            &f.current_password,
            &f.new_password,
            &caller.actor(),
        )
        .await
    };
    match result {
        Ok(signed) => {
            let mut resp: Response = see_other("/");
            let cookie = HeaderValue::from_str(&session_cookie(&signed.secret, facts.secure))
                .map_err(|e| PageError(AppError::Internal(anyhow::anyhow!("cookie: {e}"))))?;
            resp.headers_mut().insert(header::SET_COOKIE, cookie);
            Ok(resp)
        }
        Err(e @ AppError::Invalid { .. }) => render_status(
            StatusCode::UNPROCESSABLE_ENTITY,
            &page_for(&caller, format!("{}: {}", e.field(), e.user_message()))?,
        ),
        Err(e) => Err(e.into()),
    }
}
