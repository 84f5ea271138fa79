//! Lab curve entry, the lab's daily job: one row per compacted specimen, typed
//! either as water content and dry density or as the raw masses they come from,
//! with the fitted curve previewed before it is saved.
//!
//! Raw masses go to the ledger as they are (the same body the API takes) and are
//! reduced there by the library: water content by ASTM D2216 from the tin
//! masses, dry density from the mould mass, the mould-and-soil mass and the
//! mould's volume. The volume is the registered mould's calibrated one, or the
//! effort's nominal volume, recorded on each specimen as *nominal*.

use askama::Template;
use axum::Router;
use axum::body::Bytes;
use axum::extract::{Path, State};
use axum::routing::{get, post};

use super::form::{self, Errors, Field, Kind, Values, decode};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::domain::CurveStatus;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require};
use crate::http::pages::curve::chart;
use crate::http::pages::{PageError, PageResult, ProjectNav, render, render_status, see_other};
use crate::ledger::Actor;
use crate::ledger::setup::{self, LabPointInput, LabTestInput, reduce_lab_point, resolve_effort};
use crate::present::Units;
use crate::reduction::curve::fit_curve;
use crate::reduction::{Density, SpecificGravity, UnitSystem};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route(
            "/sources/{id}/setup/lab-curves/new",
            get(lab_form).post(lab_post),
        )
        .route("/sources/{id}/setup/lab-curves/preview", post(live_preview))
}

/// Rows shown on a new form; "More rows" adds three.
const FIRST_ROWS: usize = 5;
const MOST_ROWS: usize = 20;

/// The value of the mould choice that means "the effort's nominal volume".
const NOMINAL: &str = "nominal";

/// Every input of one specimen row, in column order: (name, heading).
const ROW_INPUTS: [(&str, &str); 7] = [
    ("water_content_pct", "Water content (%)"),
    ("dry_density", "Dry density"),
    ("mass_mold_and_soil_g", "Mould + wet soil (g)"),
    ("mass_mold_g", "Mould (g)"),
    ("mass_tare_g", "Tin (g)"),
    ("mass_wet_g", "Tin + wet soil (g)"),
    ("mass_dry_g", "Tin + dry soil (g)"),
];

fn cell(row: usize, input: &str) -> String {
    format!("p{row}_{input}")
}

/// The source the curve is for, checked for the caller's right.
struct Place {
    source: db::sources::Source,
    project: db::projects::Project,
    units: Units,
    actor: Actor,
    moulds: Vec<db::moulds::Mould>,
    curves: Vec<db::lab_tests::LabTest>,
}

async fn place(s: &AppState, caller: &Caller, source_id: i64) -> PageResult<Place> {
    let actor = require(&s.db, caller, Scope::Source(source_id), Action::ManageSetup).await?;
    let source = db::sources::get(&s.db, source_id).await?.ok_or_else(|| {
        PageError(AppError::not_found(
            "source_id",
            "no such record in your projects",
        ))
    })?;
    let project = setup::require_project(&s.db, source.project_id).await?;
    Ok(Place {
        units: Units::of(&project),
        moulds: db::moulds::list(&s.db, project.id).await?,
        curves: db::lab_tests::list_for_source(&s.db, source_id)
            .await?
            .into_iter()
            .filter(|t| t.status == CurveStatus::Active)
            .collect(),
        source,
        project,
        actor,
    })
}

/// The inputs above the specimen table.
fn head_fields(p: &Place) -> Vec<Field> {
    let efforts = crate::reduction::lab::EffortPreset::ALL
        .iter()
        .map(|p| (p.code().to_string(), p.label().to_string()))
        .collect();
    let mut moulds: Vec<(String, String)> = p
        .moulds
        .iter()
        .map(|m| {
            (
                m.code.clone(),
                format!(
                    "{} · {:.1} cm³ (calibrated {})",
                    m.code, m.volume_cm3, m.calibrated_on
                ),
            )
        })
        .collect();
    moulds.push((
        NOMINAL.into(),
        "The effort's nominal mould volume (marked nominal)".into(),
    ));
    let curves = p
        .curves
        .iter()
        .map(|t| (t.id, format!("{} ({})", t.code, t.tested_on)))
        .collect();
    vec![
        Field::new("code", "Lab test code", Kind::Text, true),
        Field::new("tested_on", "Tested on", Kind::Date, true),
        Field::new("effort", "Effort", Kind::Choice(efforts), true),
        Field::new(
            "specific_gravity",
            "Specific gravity (Gs)",
            Kind::Number,
            false,
        )
        .hint(&format!("empty: the source's {:.2}", p.source.gs_fines)),
        Field::new("mould", "Mould", Kind::Choice(moulds), true)
            .hint("its volume turns the mould masses into a density"),
        Field::new(
            "supersedes_lab_test_id",
            "Replaces the curve",
            Kind::Record(curves),
            false,
        )
        .hint("open lots move to this curve only when a QC manager re-points them"),
        Field::new("supersede_reason", "Why it is replaced", Kind::Text, false),
    ]
}

/// One specimen row as the template draws it.
struct RowView {
    number: usize,
    cells: Vec<CellView>,
}

struct CellView {
    name: String,
    label: String,
    value: String,
    error: String,
}

#[derive(Template)]
#[template(path = "setup/lab.html")]
struct LabPage {
    nav: ProjectNav,
    title: String,
    source_id: i64,
    source: String,
    fields: Vec<super::FieldView>,
    headings: Vec<String>,
    rows: Vec<RowView>,
    row_count: usize,
    form_error: String,
    error_list: Vec<String>,
    preview_html: String,
}

fn row_count(values: &Values) -> usize {
    let asked = values
        .get("rows")
        .and_then(|r| r.parse::<usize>().ok())
        .unwrap_or(FIRST_ROWS);
    let more = if values.get("action").is_some_and(|a| a == "more") {
        3
    } else {
        0
    };
    (asked + more).clamp(1, MOST_ROWS)
}

fn page(p: &Place, values: &Values, errors: &Errors, preview_html: String) -> LabPage {
    let rows = row_count(values);
    let density_unit = p.units.density_unit();
    LabPage {
        nav: ProjectNav {
            id: p.project.id,
            name: p.project.code.clone(),
        },
        title: format!("New lab curve for {}", p.source.code),
        source_id: p.source.id,
        source: format!("{} {}", p.source.code, p.source.name),
        fields: head_fields(p)
            .iter()
            .map(|f| super::view(f, values, errors))
            .collect(),
        headings: ROW_INPUTS
            .iter()
            .map(|(n, h)| {
                if *n == "dry_density" {
                    format!("{h} ({density_unit})")
                } else {
                    h.to_string()
                }
            })
            .collect(),
        rows: (0..rows)
            .map(|r| RowView {
                number: r + 1,
                cells: ROW_INPUTS
                    .iter()
                    .map(|(n, h)| {
                        let name = cell(r, n);
                        CellView {
                            label: format!("Specimen {} {h}", r + 1),
                            value: values.get(&name).cloned().unwrap_or_default(),
                            error: errors.get(&name).cloned().unwrap_or_default(),
                            name,
                        }
                    })
                    .collect(),
            })
            .collect(),
        row_count: rows,
        form_error: errors.get("").cloned().unwrap_or_default(),
        error_list: errors
            .iter()
            .filter(|(k, _)| !k.is_empty())
            .map(|(k, v)| format!("{k}: {v}"))
            .collect(),
        preview_html,
    }
}

async fn lab_form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let p = place(&s, &caller, id).await?;
    let mut defaults = Values::new();
    defaults.insert(
        "mould".into(),
        p.moulds.first().map_or(NOMINAL.into(), |m| m.code.clone()),
    );
    render(&page(&p, &defaults, &Errors::new(), String::new()))
}

/// A typed specimen row, and the row number it came from (for errors).
struct Specimen {
    row: usize,
    point: LabPointInput,
}

fn optional_number(values: &Values, name: &str, errors: &mut Errors) -> Option<f64> {
    let raw = values.get(name).map(|v| v.trim()).unwrap_or("");
    if raw.is_empty() {
        return None;
    }
    form::number(raw)
        .map_err(|e| errors.insert(name.to_string(), e))
        .ok()
}

/// Reads the non-empty specimen rows, giving each the chosen mould's volume.
fn specimens(p: &Place, values: &Values, effort_code: &str, errors: &mut Errors) -> Vec<Specimen> {
    let chosen = values.get("mould").map(|m| m.trim()).unwrap_or("");
    let registered = p.moulds.iter().find(|m| m.code == chosen);
    let nominal_cm3 = resolve_effort(effort_code, None)
        .ok()
        .map(|e| e.mold_volume_m3 * 1.0e6);
    let mut out = Vec::new();
    for r in 0..row_count(values) {
        let n = |input: &str, errors: &mut Errors| optional_number(values, &cell(r, input), errors);
        let water = n("water_content_pct", errors);
        let dry = n("dry_density", errors)
            .map(|d| to_kg_m3(&p.units, d, &cell(r, "dry_density"), errors));
        let total = n("mass_mold_and_soil_g", errors);
        let mold = n("mass_mold_g", errors).or(registered
            .and_then(|m| m.mass_g)
            .filter(|_| total.is_some()));
        let tare = n("mass_tare_g", errors);
        let wet = n("mass_wet_g", errors);
        let dry_tin = n("mass_dry_g", errors);
        if [water, total, tare, wet, dry_tin]
            .iter()
            .all(Option::is_none)
            && dry.is_none()
        {
            continue;
        }
        let (volume, mould) = match (total, registered) {
            (None, _) => (None, None),
            (Some(_), Some(m)) => (Some(m.volume_cm3), Some(m.code.clone())),
            (Some(_), None) => (nominal_cm3, Some(format!("{NOMINAL} ({effort_code})"))),
        };
        out.push(Specimen {
            row: r,
            point: LabPointInput {
                water_content_pct: water,
                dry_density_kg_m3: dry.flatten(),
                mass_mold_and_soil_g: total,
                mass_mold_g: mold,
                mold_volume_cm3: volume,
                mass_wet_g: wet,
                mass_dry_g: dry_tin,
                mass_tare_g: tare,
                mould,
            },
        });
    }
    out
}

fn to_kg_m3(u: &Units, v: f64, name: &str, errors: &mut Errors) -> Option<f64> {
    match u.system {
        UnitSystem::Si => Some(v),
        UnitSystem::Us => Density::from_lb_ft3(v)
            .map(|d| d.kg_m3())
            .map_err(|e| errors.insert(name.to_string(), e.to_string()))
            .ok(),
    }
}

/// The whole form typed into the API's body, or every problem found.
fn input(p: &Place, values: &Values) -> std::result::Result<(LabTestInput, Vec<usize>), Errors> {
    let fields = head_fields(p);
    let head = form::to_json(&fields, values, &p.units);
    let mut errors = head.as_ref().err().cloned().unwrap_or_default();
    let effort = values.get("effort").cloned().unwrap_or_default();
    let rows = specimens(p, values, &effort, &mut errors);
    let mut head = match head {
        Ok(h) if errors.is_empty() => h,
        _ => return Err(errors),
    };
    head.remove("mould");
    let order: Vec<usize> = rows.iter().map(|r| r.row).collect();
    let points: Vec<LabPointInput> = rows.into_iter().map(|r| r.point).collect();
    head.insert(
        "points".into(),
        serde_json::to_value(points).unwrap_or_default(),
    );
    serde_json::from_value(serde_json::Value::Object(head))
        .map(|i| (i, order))
        .map_err(|e| Errors::from([(String::new(), format!("the form is incomplete: {e}"))]))
}

/// Puts a ledger refusal beside its cell: `points[i].x` names the i-th non-empty row.
fn place_error(e: &AppError, p: &Place, order: &[usize]) -> Errors {
    let field = e.field();
    if let Some(rest) = field.strip_prefix("points[")
        && let Some((i, name)) = rest.split_once("].")
        && let Ok(i) = i.parse::<usize>()
        && let Some(row) = order.get(i)
    {
        let name = if name == "dry_density_kg_m3" {
            "dry_density"
        } else {
            name
        };
        let name = if name == "mold_volume_cm3" {
            "mass_mold_and_soil_g"
        } else {
            name
        };
        return Errors::from([(cell(*row, name), e.user_message())]);
    }
    form::place(e, &head_fields(p))
}

/// The fitted curve of what was typed, with MDD, OMC, its voids lines and warnings.
#[derive(Template)]
#[template(path = "setup/lab_preview.html")]
struct Preview {
    mdd: String,
    omc: String,
    fit: String,
    warnings: Vec<String>,
    specimens: Vec<String>,
    chart: String,
}

fn preview_html(p: &Place, input: &LabTestInput) -> Result<String> {
    let points = input
        .points
        .iter()
        .enumerate()
        .map(|(i, pt)| reduce_lab_point(i, pt))
        .collect::<Result<Vec<_>>>()?;
    let gs = SpecificGravity::new(input.specific_gravity.unwrap_or(p.source.gs_fines))
        .map_err(|e| AppError::invalid("specific_gravity", e.to_string()))?;
    let fit =
        fit_curve(&points, Some(gs)).map_err(|e| AppError::invalid("points", e.to_string()))?;
    let u = &p.units;
    let specimens = points
        .iter()
        .zip(&input.points)
        .enumerate()
        .map(|(i, (pt, raw))| {
            format!(
                "Specimen {}: w = {:.1} %, ρd = {}{}",
                i + 1,
                pt.water_content_pct,
                u.density_with_unit(pt.dry_density_kg_m3),
                raw.mould
                    .as_ref()
                    .map_or(String::new(), |m| format!(" (mould {m})"))
            )
        })
        .collect();
    let html = Preview {
        mdd: u.density_with_unit(fit.max_dry_density.kg_m3()),
        omc: format!("{:.1} %", fit.optimum_water_content.pct()),
        fit: fit.method.label(),
        warnings: fit.warnings.iter().map(|w| w.message.clone()).collect(),
        specimens,
        chart: chart(
            &format!("Preview of {}", input.code),
            &points,
            &fit.curve,
            (fit.optimum_water_content.pct(), fit.max_dry_density.kg_m3()),
            gs,
            vec![],
        ),
    }
    .render()
    .map_err(|e| AppError::Internal(anyhow::Error::new(e)))?;
    Ok(html)
}

/// What a post asks for.
enum Step {
    MoreRows,
    Preview,
    Save,
}

fn step(values: &Values) -> Step {
    match values.get("action").map(String::as_str) {
        Some("more") => Step::MoreRows,
        Some("preview") => Step::Preview,
        _ => Step::Save,
    }
}

async fn lab_post(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let p = place(&s, &caller, id).await?;
    let mut values = decode(&body);
    let refused = |values: &Values, errors: &Errors| {
        render_status(
            axum::http::StatusCode::UNPROCESSABLE_ENTITY,
            &page(&p, values, errors, String::new()),
        )
    };
    if let Step::MoreRows = step(&values) {
        values.insert("rows".into(), row_count(&values).to_string());
        values.remove("action");
        return render(&page(&p, &values, &Errors::new(), String::new()));
    }
    let (lab, order) = match input(&p, &values) {
        Ok(i) => i,
        Err(errors) => return refused(&values, &errors),
    };
    if let Step::Preview = step(&values) {
        return match preview_html(&p, &lab) {
            Ok(html) => render(&page(&p, &values, &Errors::new(), html)),
            Err(e) if form::is_refusal(&e) => refused(&values, &place_error(&e, &p, &order)),
            Err(e) => Err(PageError(e)),
        };
    }
    match setup::create_lab_test(&s.db, id, &lab, &p.actor).await {
        Ok(t) => Ok(see_other(&format!("/lab-tests/{}", t.id))),
        Err(e) if form::is_refusal(&e) => refused(&values, &place_error(&e, &p, &order)),
        Err(e) => Err(PageError(e)),
    }
}

/// The preview alone, for the page's script: the same reduction as the Preview button.
async fn live_preview(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let p = place(&s, &caller, id).await?;
    let values = decode(&body);
    let html = match input(&p, &values) {
        Err(errors) => errors_html(
            errors
                .into_iter()
                .map(|(k, v)| if k.is_empty() { v } else { format!("{k}: {v}") })
                .collect(),
        ),
        Ok((lab, order)) => match preview_html(&p, &lab) {
            Ok(h) => h,
            Err(e) if form::is_refusal(&e) => errors_html(
                place_error(&e, &p, &order)
                    .into_iter()
                    .map(|(k, v)| if k.is_empty() { v } else { format!("{k}: {v}") })
                    .collect(),
            ),
            Err(e) => return Err(PageError(e)),
        },
    };
    Ok(axum::response::IntoResponse::into_response(
        axum::response::Html(html),
    ))
}

#[derive(Template)]
#[template(
    source = r#"<div class="error-box" id="preview-problems"><p>No curve yet:</p><ul>{% for p in problems %}<li>{{ p }}</li>{% endfor %}</ul></div>"#,
    ext = "html"
)]
struct Problems {
    problems: Vec<String>,
}

fn errors_html(problems: Vec<String>) -> String {
    Problems { problems }.render().unwrap_or_default()
}
