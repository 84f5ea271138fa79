//! Server-rendered HTML pages (askama templates in `templates/`).
//!
//! Handlers gather view models from `ledger` and `db`, format numbers through
//! `present`, draw charts through `charts`, and render. Every page works without
//! JavaScript; `static/entry.js` only adds the live preview on the site-entry form,
//! and `static/import.js` the upload progress on the import page.

mod account;
pub mod curve;
mod entry;
mod home;
mod import;
mod instruments;
mod lot;
pub mod map;
mod planning;
mod review;
pub mod session;
mod setup;
mod site_app;
mod test_page;
mod tests_list;

use askama::Template;
use axum::Router;
use axum::http::{StatusCode, header};
use axum::response::{Html, IntoResponse, Redirect, Response};
use axum::routing::get;

use crate::app::AppState;
use crate::error::AppError;

/// All page routes.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/static/style.css", get(style))
        .route("/static/entry.js", get(entry_js))
        .route("/static/import.js", get(import_js))
        .route("/static/setup.js", get(setup_js))
        .merge(site_app::router())
        .merge(home::router())
        .merge(import::router())
        .merge(map::router())
        .merge(lot::router())
        .merge(curve::router())
        .merge(entry::router())
        .merge(tests_list::router())
        .merge(review::router())
        .merge(session::router())
        .merge(account::router())
        .merge(test_page::router())
        .merge(setup::router())
        .merge(planning::router())
        .merge(instruments::router())
}

async fn style() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/css; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=300"),
        ],
        include_str!("../../../static/style.css"),
    )
}

async fn entry_js() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=300"),
        ],
        include_str!("../../../static/entry.js"),
    )
}

async fn import_js() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=300"),
        ],
        include_str!("../../../static/import.js"),
    )
}

async fn setup_js() -> impl IntoResponse {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=300"),
        ],
        include_str!("../../../static/setup.js"),
    )
}

/// Page routes that take an uploaded file (mounted with the import body limit).
pub fn upload_router() -> Router<AppState> {
    import::upload_router()
}

/// An error shown as a page rather than JSON.
pub struct PageError(pub AppError);

impl From<AppError> for PageError {
    fn from(e: AppError) -> Self {
        Self(e)
    }
}

impl From<sqlx::Error> for PageError {
    fn from(e: sqlx::Error) -> Self {
        Self(e.into())
    }
}

/// The error page.
#[derive(Template)]
#[template(path = "error.html")]
struct ErrorPage {
    status: u16,
    title: String,
    message: String,
    reasons: Vec<String>,
    /// The request's id, as in its log lines.
    request_id: Option<String>,
}

impl IntoResponse for PageError {
    fn into_response(self) -> Response {
        let e = self.0;
        if matches!(e, AppError::Unauthorized { .. }) {
            return session::to_sign_in();
        }
        if let AppError::Internal(err) = &e {
            tracing::error!(error = ?err, "page failed");
        }
        let status = e.status();
        let page = ErrorPage {
            status: status.as_u16(),
            title: status.canonical_reason().unwrap_or("Error").to_string(),
            message: if e.field().is_empty() || e.field() == "path" {
                e.user_message()
            } else {
                format!("{}: {}", e.field(), e.user_message())
            },
            reasons: e.reasons().to_vec(),
            request_id: crate::http::request_id::RequestId::current().map(|id| id.to_string()),
        };
        match page.render() {
            Ok(html) => (status, Html(html)).into_response(),
            Err(_) => (status, e.user_message()).into_response(),
        }
    }
}

/// The HTML error page for a status and a message (axum's own rejections on pages).
pub fn error_page(status: StatusCode, message: &str) -> Response {
    let page = ErrorPage {
        status: status.as_u16(),
        title: status.canonical_reason().unwrap_or("Error").to_string(),
        message: message.to_string(),
        reasons: Vec::new(),
        request_id: crate::http::request_id::RequestId::current().map(|id| id.to_string()),
    };
    match page.render() {
        Ok(html) => (status, Html(html)).into_response(),
        Err(_) => (status, message.to_string()).into_response(),
    }
}

/// Result of a page handler.
pub type PageResult<T = Response> = Result<T, PageError>;

/// Renders a template into a 200 response.
pub fn render(t: &impl Template) -> PageResult {
    render_status(StatusCode::OK, t)
}

/// Renders a template with a status (422 for a form with errors).
pub fn render_status(status: StatusCode, t: &impl Template) -> PageResult {
    let html = t.render().map_err(|e| {
        PageError(AppError::Internal(
            anyhow::Error::new(e).context("rendering template"),
        ))
    })?;
    Ok((status, Html(html)).into_response())
}

/// Redirect after a successful form post (303 so the browser GETs the target).
pub fn see_other(to: &str) -> Response {
    Redirect::to(to).into_response()
}

/// Navigation links of a project, shown in the header of its pages.
#[derive(Clone)]
pub struct ProjectNav {
    pub id: i64,
    pub name: String,
}

/// A project page's first steps: the caller may read the project, and it exists.
pub async fn readable_project(
    s: &AppState,
    caller: &crate::http::caller::Caller,
    id: i64,
) -> PageResult<crate::db::projects::Project> {
    use crate::http::caller::{Scope, require};
    require(&s.db, caller, Scope::Project(id), crate::auth::Action::Read).await?;
    Ok(crate::ledger::setup::require_project(&s.db, id).await?)
}

/// The cautions as owned strings for templates.
pub fn cautions() -> Vec<String> {
    crate::present::CAUTIONS
        .iter()
        .map(|s| s.to_string())
        .collect()
}
