//! Site entry: one field test from a phone, previewed before it is saved.
//!
//! The form posts to the server for both "check" and "save", so it works with
//! JavaScript off; `static/entry.js` posts the same form to the preview route
//! as the user types and shows the result without a page load.

use askama::Template;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::routing::{get, post};
use axum::{Json, Router};
use serde_json::json;

use super::{PageError, PageResult, ProjectNav, cautions, render_status, see_other};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::parse_form;
use crate::ledger::{self, Actor};
use crate::present::Units;
use crate::reduction::site::{LotInstruments, LotRules};
pub use crate::site_form::{EntryForm, Errors, PreviewView, parse_entry};
use crate::site_form::{form_field, lot_range_error, preview_view, refusal_words};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/lots/{id}/entry", get(new_form).post(new_post))
        .route("/lots/{id}/entry/preview", post(live_preview))
        .route(
            "/field-tests/{id}/retest",
            get(retest_form).post(retest_post),
        )
}

#[derive(Template)]
#[template(path = "entry.html")]
struct EntryPage {
    nav: ProjectNav,
    lot_id: i64,
    lot_code: String,
    lot_place: String,
    action_url: String,
    preview_url: String,
    retest_of: String,
    form: EntryForm,
    errors: Errors,
    preview: Option<PreviewView>,
    density_unit: String,
    chainage_hint: String,
    cautions: Vec<String>,
    /// The lot's rules and the project's units as JSON, kept by the site app for offline
    /// previews (`static/site.js`).
    site_json: String,
}

impl EntryPage {
    /// The message beside a field, or "".
    fn err(&self, field: &str) -> &str {
        self.errors.get(field).map_or("", String::as_str)
    }
    /// "has-error" when the field has a message.
    fn cls(&self, field: &str) -> &'static str {
        if self.errors.contains_key(field) {
            "field has-error"
        } else {
            "field"
        }
    }
    /// "selected" when the method is chosen.
    fn sel(&self, method: &str) -> &'static str {
        if self.form.method == method {
            "selected"
        } else {
            ""
        }
    }
}

struct Context {
    lot: db::lots::Lot,
    /// The lot's rules as the pure checks (and the phone) read them.
    rules: LotRules,
    /// The instrument register as the lot's tests are checked against it.
    instruments: LotInstruments,
    units: Units,
    nav: ProjectNav,
    retest_of: Option<db::field_tests::FieldTest>,
}

async fn context(
    s: &AppState,
    lot_id: i64,
    retest_of: Option<db::field_tests::FieldTest>,
) -> Result<Context, PageError> {
    let lot = ledger::field::require_lot(&s.db, lot_id).await?;
    let p = ledger::setup::require_project(&s.db, lot.project_id).await?;
    let rules = s.ledger.lot_context(&lot).await?.rules;
    let instruments = ledger::instruments::check::lot_instruments(&s.db, &lot).await?;
    Ok(Context {
        rules,
        instruments,
        units: Units::of(&p),
        nav: ProjectNav {
            id: p.id,
            name: p.code,
        },
        lot,
        retest_of,
    })
}

fn page(c: &Context, form: EntryForm, errors: Errors, preview: Option<PreviewView>) -> EntryPage {
    let (action_url, retest_of) = match &c.retest_of {
        Some(t) => (format!("/field-tests/{}/retest", t.id), t.number.clone()),
        None => (format!("/lots/{}/entry", c.lot.id), String::new()),
    };
    EntryPage {
        nav: c.nav.clone(),
        lot_id: c.lot.id,
        lot_code: c.lot.code.clone(),
        lot_place: format!(
            "{} layer {} · {} to {}",
            c.lot.zone_name,
            c.lot.layer_number,
            c.units.chainage(c.lot.chainage_from_m),
            c.units.chainage(c.lot.chainage_to_m)
        ),
        action_url,
        preview_url: format!("/lots/{}/entry/preview", c.lot.id),
        retest_of,
        form,
        errors,
        preview,
        density_unit: c.units.density_unit().to_string(),
        chainage_hint: match c.units.chainage {
            crate::reduction::ChainageStyle::KmMetre => "km+m, e.g. 0+412.5".into(),
            crate::reduction::ChainageStyle::FeetStation => "station, e.g. 12+34.50".into(),
        },
        cautions: cautions(),
        site_json: json!({
            "rules": c.rules,
            "instruments": c.instruments,
            "unit_system": c.units.system.code(),
            "chainage_style": c.units.chainage.code(),
            "lot_code": c.lot.code,
            "project": c.nav.name,
            // A retest kept on the phone is sent to its failed test's retests.
            "post_url": match &c.retest_of {
                Some(t) => format!("/api/v1/field-tests/{}/retests", t.id),
                None => format!("/api/v1/lots/{}/field-tests", c.lot.id),
            },
        })
        .to_string(),
    }
}

fn default_form(c: &Context) -> EntryForm {
    let mut f = EntryForm {
        method: "nuclear".into(),
        tested_at: crate::clock::now().get(..16).unwrap_or("").to_string(),
        sand_density_kg_m3: String::new(),
        depth_mm: "200".into(),
        ..Default::default()
    };
    if let Some(t) = &c.retest_of {
        f.chainage = c.units.chainage(t.chainage_m);
        f.offset_m = format!("{:.1}", t.offset_m);
        f.method = t.method.code().to_string();
        f.technician = t.technician.clone();
        f.instrument_serial = t.instrument_serial.clone();
    }
    f
}

async fn new_form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::Lot(id), Action::EnterTests).await?;

    let c = context(&s, id, None).await?;
    render_status(
        StatusCode::OK,
        &page(&c, default_form(&c), Errors::new(), None),
    )
}

async fn retest_form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::Test(id), Action::EnterTests).await?;

    let failed = ledger::field::require_test(&s.db, id).await?;
    let c = context(&s, failed.lot_id, Some(failed)).await?;
    render_status(
        StatusCode::OK,
        &page(&c, default_form(&c), Errors::new(), None),
    )
}

/// Checks or saves; re-renders with errors beside fields (422) or the preview (200).
async fn handle(s: &AppState, c: Context, form: EntryForm, actor: Actor) -> PageResult {
    let input = match parse_entry(&form, &c.units, c.retest_of.is_some()) {
        Ok(i) => i,
        Err(mut errors) => {
            lot_range_error(&c.rules, &c.units, &form, &mut errors);
            return render_status(
                StatusCode::UNPROCESSABLE_ENTITY,
                &page(&c, form, errors, None),
            );
        }
    };
    let preview = match ledger::field::preview(&s.db, c.lot.id, &input, &actor).await {
        Ok(v) => preview_view(&v, &c.units),
        Err(e) => return field_error(&c, form, e),
    };
    if form.action != "save" {
        return render_status(
            StatusCode::OK,
            &page(&c, form, Errors::new(), Some(preview)),
        );
    }
    let saved = match &c.retest_of {
        Some(t) => s.ledger.record_retest(t.id, &input, &actor).await,
        None => s
            .ledger
            .record_test(c.lot.id, &input, &actor)
            .await
            .map(|(t, _)| t),
    };
    match saved {
        Ok(t) => Ok(see_other(&format!("/lots/{}#test-{}", c.lot.id, t.number))),
        Err(e) => field_error(&c, form, e),
    }
}

fn field_error(c: &Context, form: EntryForm, e: AppError) -> PageResult {
    if matches!(e, AppError::Internal(_) | AppError::NotFound { .. }) {
        return Err(e.into());
    }
    let mut errors = Errors::new();
    let field = form_field(e.field(), &form.method);
    let mut msg = refusal_words(&c.rules, &c.units, &form, &field, &e.user_message());
    if !e.reasons().is_empty() {
        msg = format!("{msg}: {}", e.reasons().join("; "));
    }
    errors.insert(
        if field.is_empty() {
            "form".into()
        } else {
            field
        },
        msg,
    );
    render_status(e.status(), &page(c, form, errors, None))
}

/// A posted entry form: the caller may enter tests on `scope`, then the form is read.
async fn entry_post(
    s: &AppState,
    caller: &Caller,
    scope: Scope,
    body: &[u8],
) -> Result<(Actor, EntryForm), AppError> {
    let a = require(&s.db, caller, scope, Action::EnterTests).await?;
    Ok((a, parse_form(body)?))
}

async fn new_post(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    let (a, form) = entry_post(&s, &caller, Scope::Lot(id), &body).await?;
    let c = context(&s, id, None).await?;
    handle(&s, c, form, a).await
}

async fn retest_post(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    let (a, form) = entry_post(&s, &caller, Scope::Test(id), &body).await?;
    let failed = ledger::field::require_test(&s.db, id).await?;
    let c = context(&s, failed.lot_id, Some(failed)).await?;
    handle(&s, c, form, a).await
}

/// The live preview: the same form, answered as JSON for `entry.js`.
async fn live_preview(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> Result<Json<serde_json::Value>, AppError> {
    let a = require(&s.db, &caller, Scope::Lot(id), Action::EnterTests).await?;

    let form: EntryForm = parse_form(&body)?;
    let lot = ledger::field::require_lot(&s.db, id).await?;
    let p = ledger::setup::require_project(&s.db, lot.project_id).await?;
    let u = Units::of(&p);
    let rules = s.ledger.lot_context(&lot).await?.rules;
    let instruments = ledger::instruments::check::lot_instruments(&s.db, &lot).await?;
    // The phone's answer, computed by the same pure function the WebAssembly build runs.
    let today = crate::clock::date_of(&crate::clock::now());
    let answer = crate::site_form::answer(
        &rules,
        Some(&instruments),
        &u,
        &form,
        form.action == "retest",
        &today,
    );
    let pure_ok = answer["errors"].as_object().is_some_and(|e| e.is_empty());
    if !pure_ok {
        return Ok(Json(answer));
    }
    // The checks that need the server (test number, time, text lengths).
    let input = parse_entry(&form, &u, form.action == "retest").map_err(|_| {
        AppError::Internal(anyhow::anyhow!(
            "a form the preview accepted failed to parse"
        ))
    })?;
    match ledger::field::preview(&s.db, id, &input, &a).await {
        Ok(_) => Ok(Json(answer)),
        Err(
            e
            @ (AppError::Invalid { .. } | AppError::Conflict { .. } | AppError::BadRequest { .. }),
        ) => Ok(Json(
            json!({"errors": {form_field(e.field(), &form.method): e.user_message()}}),
        )),
        Err(e) => Err(e),
    }
}
