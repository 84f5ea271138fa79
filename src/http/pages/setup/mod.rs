//! Setting a contract up in the browser: projects and people (admins), clauses,
//! sources, moulds, lab curves, layers, lots and API tokens (QC managers).
//!
//! Each form is a list of [`form::Field`]s. What is typed becomes the JSON body
//! the API takes and goes to the same ledger function, so the pages and the API
//! accept and refuse exactly the same things. Forms work without JavaScript; a
//! refused form comes back (422) with each message beside its field and nothing
//! saved.

mod approval;
pub mod form;
mod frame;
mod hub;
mod lab;
mod people;
mod split;
mod summary;
mod tokens;

use askama::Template;
use axum::Router;
use axum::extract::FromRequestParts;
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use serde::de::DeserializeOwned;

use self::form::{Errors, Field, Kind, Values};
use super::{PageError, PageResult, ProjectNav, render_status};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::http::caller::{Caller, Scope, require};
use crate::ledger::Actor;
use crate::present::Units;

/// Routes of the set-up pages.
pub fn router() -> Router<AppState> {
    Router::new()
        .merge(hub::router())
        .merge(approval::router())
        .merge(people::router())
        .merge(frame::router())
        .merge(split::router())
        .merge(lab::router())
        .merge(tokens::router())
}

/// The project a set-up page works in, checked for the caller's right.
pub struct Context {
    pub project: db::projects::Project,
    pub units: Units,
    pub nav: ProjectNav,
    pub actor: Actor,
}

impl Context {
    /// Loads the project and refuses a caller who may not do `action` in it.
    pub async fn load(
        s: &AppState,
        caller: &Caller,
        project_id: i64,
        action: Action,
    ) -> PageResult<Self> {
        let actor = require(&s.db, caller, Scope::Project(project_id), action).await?;
        let project = crate::ledger::setup::require_project(&s.db, project_id).await?;
        Ok(Self {
            units: Units::of(&project),
            nav: ProjectNav {
                id: project.id,
                name: project.code.clone(),
            },
            project,
            actor,
        })
    }
}

/// A set-up page's context for a change to the frame (`/projects/{id}/setup/…`): the
/// project loaded and the caller checked for [`Action::ManageSetup`] before the handler runs.
pub struct ManageSetup(pub Context);

impl FromRequestParts<AppState> for ManageSetup {
    type Rejection = Response;

    async fn from_request_parts(
        parts: &mut axum::http::request::Parts,
        s: &AppState,
    ) -> Result<Self, Self::Rejection> {
        let caller = Caller::from_request_parts(parts, s)
            .await
            .map_err(IntoResponse::into_response)?;
        let axum::extract::Path(id) = axum::extract::Path::<i64>::from_request_parts(parts, s)
            .await
            .map_err(IntoResponse::into_response)?;
        Context::load(s, &caller, id, Action::ManageSetup)
            .await
            .map(Self)
            .map_err(IntoResponse::into_response)
    }
}

/// One input as the template draws it.
pub struct FieldView {
    pub name: String,
    pub label: String,
    /// "text", "date", "select", "textarea" or "checkbox".
    pub input: &'static str,
    /// Keyboard the phone shows: "text", "decimal" or "numeric".
    pub mode: &'static str,
    pub value: String,
    pub error: String,
    pub hint: String,
    pub required: bool,
    pub options: Vec<OptionView>,
}

/// One choice of a select.
pub struct OptionView {
    pub value: String,
    pub label: String,
    pub selected: bool,
}

fn view(f: &Field, values: &Values, errors: &Errors) -> FieldView {
    let value = match f.kind {
        Kind::Secret => String::new(),
        _ => values.get(&f.name).cloned().unwrap_or_default(),
    };
    let options = |pairs: Vec<(String, String)>| {
        pairs
            .into_iter()
            .map(|(v, label)| OptionView {
                selected: v == value,
                value: v,
                label,
            })
            .collect()
    };
    let (input, mode, options) = match &f.kind {
        Kind::Text | Kind::Chainage => ("text", "text", vec![]),
        Kind::TextArea => ("textarea", "text", vec![]),
        Kind::Secret => ("password", "text", vec![]),
        Kind::Number => ("text", "decimal", vec![]),
        Kind::Integer => ("text", "numeric", vec![]),
        Kind::Date => ("date", "text", vec![]),
        Kind::Tick => ("checkbox", "text", vec![]),
        Kind::Choice(c) => ("select", "text", options(c.clone())),
        Kind::Record(r) => (
            "select",
            "text",
            options(
                r.iter()
                    .map(|(id, l)| (id.to_string(), l.clone()))
                    .collect(),
            ),
        ),
    };
    FieldView {
        name: f.name.clone(),
        label: f.label.clone(),
        input,
        mode,
        error: errors.get(&f.name).cloned().unwrap_or_default(),
        hint: f.hint.clone(),
        required: f.required,
        options,
        value,
    }
}

/// A set-up form as a page: its words, fields, and what happened on the last post.
#[derive(Template)]
#[template(path = "setup/form.html")]
pub struct FormPage {
    pub nav: Option<ProjectNav>,
    pub title: String,
    pub intro: String,
    pub action_url: String,
    pub back_href: String,
    pub back_label: String,
    pub fields: Vec<FieldView>,
    /// A problem not tied to one input.
    pub form_error: String,
    /// Every problem, for the summary at the top.
    pub error_list: Vec<(String, String)>,
    /// Server-rendered preview (escaped by its own template).
    pub preview_html: String,
    pub has_preview: bool,
    pub submit_label: String,
}

/// What a form is, apart from what was typed.
pub struct FormSpec {
    pub nav: Option<ProjectNav>,
    pub title: String,
    pub intro: String,
    pub action_url: String,
    pub back_href: String,
    pub back_label: String,
    pub fields: Vec<Field>,
    pub has_preview: bool,
    pub submit_label: String,
}

impl FormSpec {
    /// The page with these values, problems and preview.
    pub fn page(&self, values: &Values, errors: &Errors, preview_html: String) -> FormPage {
        let label_of = |name: &str| {
            self.fields
                .iter()
                .find(|f| f.name == name)
                .map_or(name.to_string(), |f| f.label.clone())
        };
        FormPage {
            nav: self.nav.clone(),
            title: self.title.clone(),
            intro: self.intro.clone(),
            action_url: self.action_url.clone(),
            back_href: self.back_href.clone(),
            back_label: self.back_label.clone(),
            fields: self
                .fields
                .iter()
                .map(|f| view(f, values, errors))
                .collect(),
            form_error: errors.get("").cloned().unwrap_or_default(),
            error_list: errors
                .iter()
                .filter(|(k, _)| !k.is_empty())
                .map(|(k, v)| (k.clone(), format!("{}: {v}", label_of(k))))
                .collect(),
            preview_html,
            has_preview: self.has_preview,
            submit_label: self.submit_label.clone(),
        }
    }

    /// The empty form (or one filled with defaults).
    pub fn blank(&self, values: &Values) -> PageResult {
        render_status(
            StatusCode::OK,
            &self.page(values, &Errors::new(), String::new()),
        )
    }

    /// The form again with its problems: 422, nothing saved.
    pub fn refused(&self, values: &Values, errors: &Errors) -> PageResult {
        render_status(
            StatusCode::UNPROCESSABLE_ENTITY,
            &self.page(values, errors, String::new()),
        )
    }

    /// Types the values into the ledger's input, or gives the refused form.
    pub fn input<T: DeserializeOwned>(&self, values: &Values, units: &Units) -> Result<T, Errors> {
        let json = form::to_json(&self.fields, values, units)?;
        serde_json::from_value(serde_json::Value::Object(json)).map_err(|e| {
            let mut errors = Errors::new();
            errors.insert(String::new(), format!("the form is incomplete: {e}"));
            errors
        })
    }

    /// Types the values, runs `save` (a ledger function) and answers: `Ok(saved)`, or the
    /// refused form with the ledger's message beside its field.
    pub async fn submit<T: DeserializeOwned, R>(
        &self,
        values: &Values,
        units: &Units,
        save: impl AsyncFnOnce(T) -> crate::error::Result<R>,
    ) -> PageResult<Result<R, Response>> {
        let input = match self.input::<T>(values, units) {
            Ok(i) => i,
            Err(errors) => return Ok(Err(self.refused(values, &errors)?)),
        };
        match save(input).await {
            Ok(r) => Ok(Ok(r)),
            Err(e) if form::is_refusal(&e) => {
                Ok(Err(self.refused(values, &form::place(&e, &self.fields))?))
            }
            Err(e) => Err(PageError(e)),
        }
    }
}

/// Is this post the Preview button rather than Save?
pub fn wants_preview(values: &Values) -> bool {
    values.get("action").is_some_and(|a| a == "preview")
}

/// Only an admin may go on.
pub fn require_admin(caller: &Caller) -> PageResult<Actor> {
    crate::http::caller::require_admin(caller).map_err(PageError)
}
