//! Site entry: one field test from a phone, previewed before it is saved.
//!
//! The form posts to the server for both "check" and "save", so it works with
//! JavaScript off; `static/entry.js` posts the same form to the preview route
//! as the user types and shows the result without a page load.

use std::collections::BTreeMap;

use askama::Template;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::json;

use super::{PageError, PageResult, ProjectNav, cautions, render_status, see_other};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::parse_form;
use crate::ledger::field::FieldTestInput;
use crate::ledger::{self, Actor};
use crate::present::Units;
use crate::reduction::field::FieldReadings;
use crate::reduction::{Chainage, Density, UnitSystem};

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

/// The form exactly as typed; every value is text until parsed.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(default)]
pub struct EntryForm {
    pub action: String,
    pub number: String,
    pub tested_at: String,
    pub technician: String,
    pub instrument_serial: String,
    pub chainage: String,
    pub offset_m: String,
    pub depth_mm: String,
    pub coarse_pct: String,
    pub coarse_water_content_pct: String,
    pub method: String,
    pub wet_density: String,
    pub moisture_density: String,
    pub gauge_water_content_pct: String,
    pub oven_water_content_pct: String,
    pub mass_sand_used_g: String,
    pub mass_sand_in_cone_g: String,
    pub sand_density_kg_m3: String,
    pub hole_volume_cm3: String,
    pub cylinder_volume_cm3: String,
    pub mass_wet_soil_g: String,
    pub water_content_pct: String,
    /// "on" when the technician confirms a reading far above zero air voids.
    pub confirm_implausible: String,
}

/// Field name → message, shown beside each input.
type Errors = BTreeMap<String, String>;

fn num(errors: &mut Errors, field: &str, v: &str, required: bool) -> Option<f64> {
    let v = v.trim().replace(',', ".");
    if v.is_empty() {
        if required {
            errors.insert(field.into(), "is required".into());
        }
        return None;
    }
    match v.parse::<f64>() {
        Ok(x) if x.is_finite() => Some(x),
        _ => {
            errors.insert(field.into(), format!("'{v}' is not a number"));
            None
        }
    }
}

/// Converts a density typed in the project's unit to kg/m³.
fn density_in(errors: &mut Errors, u: &Units, field: &str, v: &str, required: bool) -> Option<f64> {
    let x = num(errors, field, v, required)?;
    match u.system {
        UnitSystem::Si => Some(x),
        UnitSystem::Us => match Density::from_lb_ft3(x) {
            Ok(d) => Some(d.kg_m3()),
            Err(e) => {
                errors.insert(field.into(), e.to_string());
                None
            }
        },
    }
}

/// Parses the form into the ledger's input, collecting every field's problem at once.
pub fn parse_entry(f: &EntryForm, u: &Units, retest: bool) -> Result<FieldTestInput, Errors> {
    let mut e = Errors::new();
    let chainage = if retest && f.chainage.trim().is_empty() {
        None
    } else {
        match Chainage::parse(f.chainage.trim(), u.chainage) {
            Ok(c) => Some(c.metres()),
            Err(err) => {
                e.insert("chainage".into(), err.to_string());
                None
            }
        }
    };
    let offset = num(&mut e, "offset_m", &f.offset_m, !retest);
    let depth = num(&mut e, "depth_mm", &f.depth_mm, false);
    let coarse = num(&mut e, "coarse_pct", &f.coarse_pct, false);
    let coarse_w = num(
        &mut e,
        "coarse_water_content_pct",
        &f.coarse_water_content_pct,
        false,
    );
    let readings = match f.method.as_str() {
        "nuclear" => {
            let wet = density_in(&mut e, u, "wet_density", &f.wet_density, true);
            let md = density_in(&mut e, u, "moisture_density", &f.moisture_density, false);
            let gw = num(
                &mut e,
                "gauge_water_content_pct",
                &f.gauge_water_content_pct,
                false,
            );
            let oven = num(
                &mut e,
                "oven_water_content_pct",
                &f.oven_water_content_pct,
                false,
            );
            if md.is_none()
                && gw.is_none()
                && !e.contains_key("moisture_density")
                && !e.contains_key("gauge_water_content_pct")
            {
                e.insert(
                    "moisture_density".into(),
                    "give the gauge's moisture density or its water content".into(),
                );
            }
            wet.map(|wet| FieldReadings::Nuclear {
                wet_density_kg_m3: wet,
                moisture_density_kg_m3: md,
                water_content_pct: gw,
                oven_water_content_pct: oven,
                gauge_serial: None,
                probe_depth_mm: depth,
            })
        }
        "sand_cone" => {
            let used = num(&mut e, "mass_sand_used_g", &f.mass_sand_used_g, true);
            // Blank: taken from the registered cone's and sand batch's calibrations in force.
            let cone =
                num(&mut e, "mass_sand_in_cone_g", &f.mass_sand_in_cone_g, false).or(Some(0.0));
            let rho = num(&mut e, "sand_density_kg_m3", &f.sand_density_kg_m3, false).or(Some(0.0));
            let soil = num(&mut e, "mass_wet_soil_g", &f.mass_wet_soil_g, true);
            let w = num(&mut e, "water_content_pct", &f.water_content_pct, true);
            match (used, cone, rho, soil, w) {
                (Some(a), Some(b), Some(c), Some(d), Some(w)) => Some(FieldReadings::SandCone {
                    mass_sand_used_g: a,
                    mass_sand_in_cone_g: b,
                    sand_density_kg_m3: c,
                    mass_wet_soil_g: d,
                    water_content_pct: w,
                }),
                _ => None,
            }
        }
        "balloon" => {
            let v = num(&mut e, "hole_volume_cm3", &f.hole_volume_cm3, true);
            let soil = num(&mut e, "mass_wet_soil_g", &f.mass_wet_soil_g, true);
            let w = num(&mut e, "water_content_pct", &f.water_content_pct, true);
            match (v, soil, w) {
                (Some(v), Some(s), Some(w)) => Some(FieldReadings::Balloon {
                    hole_volume_cm3: v,
                    mass_wet_soil_g: s,
                    water_content_pct: w,
                }),
                _ => None,
            }
        }
        "drive_cylinder" => {
            let v = num(&mut e, "cylinder_volume_cm3", &f.cylinder_volume_cm3, true);
            let soil = num(&mut e, "mass_wet_soil_g", &f.mass_wet_soil_g, true);
            let w = num(&mut e, "water_content_pct", &f.water_content_pct, true);
            match (v, soil, w) {
                (Some(v), Some(s), Some(w)) => Some(FieldReadings::DriveCylinder {
                    cylinder_volume_cm3: v,
                    mass_wet_soil_g: s,
                    water_content_pct: w,
                }),
                _ => None,
            }
        }
        _ => {
            e.insert("method".into(), "choose a test method".into());
            None
        }
    };
    if f.technician.trim().is_empty() {
        e.insert("technician".into(), "is required".into());
    }
    match readings {
        Some(readings) if e.is_empty() => Ok(FieldTestInput {
            number: Some(f.number.trim().to_string()).filter(|n| !n.is_empty()),
            tested_at: Some(f.tested_at.trim().to_string()).filter(|t| !t.is_empty()),
            technician: f.technician.clone(),
            instrument_serial: f.instrument_serial.clone(),
            chainage_m: chainage,
            offset_m: offset,
            depth_mm: depth,
            coarse_pct: coarse,
            coarse_water_content_pct: coarse_w,
            easting: None,
            northing: None,
            readings,
            confirm_implausible: !f.confirm_implausible.trim().is_empty(),
            calibration_override_reason: None,
        }),
        _ => Err(e),
    }
}

/// Adds the lot-range problem of a readable chainage, so every problem shows at once.
fn lot_range_error(lot: &db::lots::Lot, u: &Units, form: &EntryForm, errors: &mut Errors) {
    if errors.contains_key("chainage") || form.chainage.trim().is_empty() {
        return;
    }
    if let Ok(c) = Chainage::parse(form.chainage.trim(), u.chainage)
        && ledger::field::chainage_in_lot(lot, c.metres()).is_err()
    {
        errors.insert("chainage".into(), outside_lot_words(lot, u, c.metres()));
    }
}

/// "0+650.000 is outside lot EF06-1 (0+000.000 to 0+400.000)", in the project's style.
fn outside_lot_words(lot: &db::lots::Lot, u: &Units, metres: f64) -> String {
    format!(
        "{} is outside lot {} ({} to {})",
        u.chainage(metres),
        lot.code,
        u.chainage(lot.chainage_from_m),
        u.chainage(lot.chainage_to_m)
    )
}

/// Maps a ledger error's field onto the form input it came from.
fn form_field(api_field: &str, method: &str) -> String {
    match api_field {
        "chainage_m" => "chainage".into(),
        "readings.wet_density_kg_m3" => "wet_density".into(),
        "readings.moisture_density_kg_m3" => "moisture_density".into(),
        "readings.water_content_pct" if method == "nuclear" => "gauge_water_content_pct".into(),
        "readings.probe_depth_mm" => "depth_mm".into(),
        other => other.strip_prefix("readings.").unwrap_or(other).to_string(),
    }
}

/// The reduced values and verdict shown before saving.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct PreviewView {
    pub wet: String,
    pub water: String,
    pub dry: String,
    pub rc: String,
    pub dev: String,
    pub reference: String,
    pub passed: bool,
    pub verdict: String,
    pub reasons: Vec<String>,
}

fn preview_view(v: &serde_json::Value, u: &Units) -> PreviewView {
    let f = |k: &str| v[k].as_f64().unwrap_or(0.0);
    let passed = v["passed"].as_bool().unwrap_or(false);
    PreviewView {
        wet: u.density_with_unit(f("wet_density_kg_m3")),
        water: format!(
            "{:.1} % ({})",
            f("water_content_pct"),
            v["moisture_source"].as_str().unwrap_or("")
        ),
        dry: u.density_with_unit(f("dry_density_kg_m3")),
        rc: format!("{:.1} %", f("relative_compaction_pct")),
        dev: format!("{:+.1} points", f("moisture_deviation_pct")),
        reference: format!(
            "MDD {}, OMC {:.1} %",
            u.density_with_unit(f("reference_mdd_kg_m3")),
            f("reference_omc_pct")
        ),
        passed,
        verdict: if passed { "passes" } else { "fails" }.to_string(),
        reasons: v["reasons"]
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(|r| r.as_str().map(str::to_string))
            .chain(
                v["flags"]
                    .as_array()
                    .into_iter()
                    .flatten()
                    .filter_map(|f| f["message"].as_str().map(|m| format!("flag: {m}"))),
            )
            .collect(),
    }
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
    Ok(Context {
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
        f.method = t.method.clone();
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
            lot_range_error(&c.lot, &c.units, &form, &mut errors);
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
        Some(t) => ledger::field::record_retest(&s.db, t.id, &input, &actor).await,
        None => ledger::field::record_test(&s.db, c.lot.id, &input, &actor).await,
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
    let mut msg = e.user_message();
    if field == "chainage"
        && let Ok(ch) = Chainage::parse(form.chainage.trim(), c.units.chainage)
        && ledger::field::chainage_in_lot(&c.lot, ch.metres()).is_err()
    {
        msg = outside_lot_words(&c.lot, &c.units, ch.metres());
    }
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

async fn new_post(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    let a = require(&s.db, &caller, Scope::Lot(id), Action::EnterTests).await?;

    let form: EntryForm = parse_form(&body).map_err(PageError)?;
    let c = context(&s, id, None).await?;
    handle(&s, c, form, a).await
}

async fn retest_post(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    let a = require(&s.db, &caller, Scope::Test(id), Action::EnterTests).await?;

    let form: EntryForm = parse_form(&body).map_err(PageError)?;
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
    let retest = form.action == "retest";
    let input = match parse_entry(&form, &u, retest) {
        Ok(i) => i,
        Err(mut errors) => {
            lot_range_error(&lot, &u, &form, &mut errors);
            return Ok(Json(json!({"errors": errors})));
        }
    };
    match ledger::field::preview(&s.db, id, &input, &a).await {
        Ok(v) => Ok(Json(json!({"errors": {}, "preview": preview_view(&v, &u)}))),
        Err(
            e
            @ (AppError::Invalid { .. } | AppError::Conflict { .. } | AppError::BadRequest { .. }),
        ) => Ok(Json(
            json!({"errors": {form_field(e.field(), &form.method): e.user_message()}}),
        )),
        Err(e) => Err(e),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn si() -> Units {
        Units {
            system: UnitSystem::Si,
            chainage: crate::reduction::ChainageStyle::KmMetre,
        }
    }

    #[test]
    fn every_bad_field_is_named_at_once() {
        let f = EntryForm {
            method: "nuclear".into(),
            chainage: "zero".into(),
            offset_m: "left".into(),
            wet_density: "".into(),
            ..Default::default()
        };
        let e = parse_entry(&f, &si(), false).unwrap_err();
        for k in [
            "chainage",
            "offset_m",
            "wet_density",
            "technician",
            "moisture_density",
        ] {
            assert!(e.contains_key(k), "{k} missing from {e:?}");
        }
    }

    #[test]
    fn a_complete_nuclear_form_parses_with_chainage_in_metres() {
        let f = EntryForm {
            method: "nuclear".into(),
            chainage: "1+012.5".into(),
            offset_m: "-2".into(),
            wet_density: "2100".into(),
            moisture_density: "210".into(),
            technician: "A".into(),
            ..Default::default()
        };
        let i = parse_entry(&f, &si(), false).unwrap();
        assert_eq!(i.chainage_m, Some(1012.5));
        assert_eq!(i.offset_m, Some(-2.0));
    }

    #[test]
    fn api_fields_map_to_form_inputs() {
        assert_eq!(
            form_field("readings.wet_density_kg_m3", "nuclear"),
            "wet_density"
        );
        assert_eq!(
            form_field("readings.water_content_pct", "nuclear"),
            "gauge_water_content_pct"
        );
        assert_eq!(
            form_field("readings.water_content_pct", "balloon"),
            "water_content_pct"
        );
        assert_eq!(form_field("chainage_m", "balloon"), "chainage");
    }
}
