//! Where and what to test: a lot's plan (phone page, form and printable PDF), control charts with
//! their CSV, and a source's family of curves with its one-point checks.

use askama::Template;
use axum::Router;
use axum::body::Bytes;
use axum::extract::{Path, Query, State};
use axum::http::{StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use serde::Deserialize;

use super::{PageError, PageResult, ProjectNav, render, render_status, see_other};
use crate::app::AppState;
use crate::auth::Action;
use crate::charts::{ControlPanel, FamilyLine, control_panel, family_chart};
use crate::db;
use crate::error::AppError;
use crate::http::api::planning::ChartQuery;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::parse_form;
use crate::ledger::planning::{PlanRequest, PlanView};
use crate::ledger::watch::{self, ChartGroup, GroupBy, Measure};
use crate::present::Units;
use crate::reduction::sampling::Exclusion;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/lots/{id}/plan", get(plan_page).post(plan_post))
        .route("/lots/{id}/plan.pdf", get(plan_pdf))
        .route("/projects/{id}/control-charts", get(charts_page))
        .route("/projects/{id}/control-charts.csv", get(charts_csv))
        .route("/sources/{id}/family", get(family_page))
}

struct LocationRow {
    sublot: u32,
    chainage: String,
    offset: String,
    tests: String,
}

struct MatchRow {
    number: String,
    sublot: u32,
    d_chainage: String,
    d_offset: String,
    distance: String,
    misplaced: bool,
}

struct HistoryRow {
    revision: i64,
    seed: i64,
    created: String,
    superseded: String,
}

#[derive(Template)]
#[template(path = "planning/plan.html")]
struct PlanPage {
    nav: ProjectNav,
    lot_id: i64,
    lot_code: String,
    has_plan: bool,
    facts: Vec<String>,
    locations: Vec<LocationRow>,
    matches: Vec<MatchRow>,
    history: Vec<HistoryRow>,
    may_plan: bool,
    error: String,
    form: PlanForm,
    cautions: Vec<String>,
}

/// The plan form as posted (all text, typed by [`PlanForm::request`]).
#[derive(Debug, Default, Deserialize)]
struct PlanForm {
    #[serde(default)]
    edge_m: String,
    #[serde(default)]
    exclusions: String,
    #[serde(default)]
    seed: String,
    #[serde(default)]
    reason: String,
}

impl PlanForm {
    /// "1020-1030, 1050-1055" → exclusions; a blank seed draws a fresh one.
    fn request(&self) -> Result<PlanRequest, AppError> {
        let num = |field: &str, s: &str| -> Result<f64, AppError> {
            s.trim()
                .parse::<f64>()
                .map_err(|_| AppError::invalid(field, format!("'{}' is not a number", s.trim())))
        };
        let edge_m = if self.edge_m.trim().is_empty() {
            0.3
        } else {
            num("edge_m", &self.edge_m)?
        };
        let mut exclusions = Vec::new();
        for part in self
            .exclusions
            .split(',')
            .map(str::trim)
            .filter(|p| !p.is_empty())
        {
            let (a, b) = part.split_once('-').ok_or_else(|| {
                AppError::invalid(
                    "exclusions",
                    format!("'{part}' is not a chainage band like 1020-1030"),
                )
            })?;
            exclusions.push(Exclusion {
                chainage_from_m: num("exclusions", a)?,
                chainage_to_m: num("exclusions", b)?,
            });
        }
        let seed = match self.seed.trim() {
            "" => None,
            s => Some(
                s.parse::<u64>()
                    .map_err(|_| AppError::invalid("seed", "must be a whole number 0 or more"))?,
            ),
        };
        Ok(PlanRequest {
            seed,
            edge_m,
            exclusions,
            reason: self.reason.clone(),
        })
    }
}

fn plan_rows(v: &PlanView, u: &Units) -> (Vec<LocationRow>, Vec<MatchRow>) {
    let mut locs = v.locations.clone();
    locs.sort_by(|a, b| a.chainage_m.total_cmp(&b.chainage_m));
    let locations = locs
        .iter()
        .map(|l| LocationRow {
            sublot: l.sublot,
            chainage: u.chainage(l.chainage_m),
            offset: u.offset(l.offset_m),
            tests: v
                .matches
                .iter()
                .filter(|(_, m)| m.sublot == l.sublot && !m.misplaced)
                .map(|(n, _)| n.clone())
                .collect::<Vec<_>>()
                .join(", "),
        })
        .collect();
    let matches = v
        .matches
        .iter()
        .map(|(n, m)| MatchRow {
            number: n.clone(),
            sublot: m.sublot,
            d_chainage: format!("{:+.1}", m.chainage_diff_m),
            d_offset: format!("{:+.1}", m.offset_diff_m),
            distance: format!("{:.1}", m.distance_m),
            misplaced: m.misplaced,
        })
        .collect();
    (locations, matches)
}

fn plan_facts(v: &PlanView, u: &Units) -> Vec<String> {
    let Some(p) = &v.current else { return vec![] };
    let mut f = vec![
        format!(
            "Lot {}: {} to {}, offsets {} to {}",
            v.lot.code,
            u.chainage(v.lot.chainage_from_m),
            u.chainage(v.lot.chainage_to_m),
            u.offset(v.lot.offset_left_m),
            u.offset(v.lot.offset_right_m)
        ),
        format!(
            "Plan revision {} · seed {} · {} locations, one per equal sub-lot (ASTM D3665, stratified)",
            p.revision, p.seed, p.location_count
        ),
        format!(
            "Kept {:.1} m from the lot's edges · drawn {} by {}",
            p.edge_m, p.created_at, p.created_by
        ),
        format!(
            "A test more than {:.1} m from its planned location is flagged (clause tolerance)",
            v.tolerance_m
        ),
    ];
    if !v.exclusions.is_empty() {
        let bands: Vec<String> = v
            .exclusions
            .iter()
            .map(|e| {
                format!(
                    "{} to {}",
                    u.chainage(e.chainage_from_m),
                    u.chainage(e.chainage_to_m)
                )
            })
            .collect();
        f.push(format!("Excluded: {}", bands.join("; ")));
    }
    f
}

async fn plan_model(
    s: &AppState,
    caller: &Caller,
    id: i64,
    form: PlanForm,
    error: String,
) -> Result<PlanPage, PageError> {
    require(&s.db, caller, Scope::Lot(id), Action::Read).await?;
    let may_plan = require(&s.db, caller, Scope::Lot(id), Action::ManageSetup)
        .await
        .is_ok();
    let v = crate::ledger::planning::view(&s.db, id).await?;
    let project = crate::ledger::setup::require_project(&s.db, v.lot.project_id).await?;
    let u = Units::of(&project);
    let (locations, matches) = plan_rows(&v, &u);
    Ok(PlanPage {
        nav: ProjectNav {
            id: project.id,
            name: project.code.clone(),
        },
        lot_id: id,
        lot_code: v.lot.code.clone(),
        has_plan: v.current.is_some(),
        facts: plan_facts(&v, &u),
        locations,
        matches,
        history: v
            .history
            .iter()
            .map(|p| HistoryRow {
                revision: p.revision,
                seed: p.seed,
                created: format!("{} by {}", p.created_at, p.created_by),
                superseded: p
                    .superseded_at
                    .as_ref()
                    .map(|at| {
                        format!(
                            "superseded {at}: {}",
                            p.superseded_reason.as_deref().unwrap_or("")
                        )
                    })
                    .unwrap_or_else(|| "current".into()),
            })
            .collect(),
        may_plan,
        error,
        form,
        cautions: super::cautions(),
    })
}

async fn plan_page(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let page = plan_model(&s, &caller, id, PlanForm::default(), String::new()).await?;
    render(&page)
}

async fn plan_post(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let actor = require(&s.db, &caller, Scope::Lot(id), Action::ManageSetup).await?;
    let form: PlanForm = parse_form(&body).map_err(PageError)?;
    let outcome = match form.request() {
        Ok(req) => crate::ledger::planning::draw(&s.db, id, &req, &actor)
            .await
            .map(|_| ()),
        Err(e) => Err(e),
    };
    match outcome {
        Ok(()) => Ok(see_other(&format!("/lots/{id}/plan"))),
        Err(e) if e.status().is_client_error() && !matches!(e, AppError::NotFound { .. }) => {
            let msg = format!("{}: {}", e.field(), e.user_message());
            let page = plan_model(&s, &caller, id, form, msg).await?;
            render_status(StatusCode::UNPROCESSABLE_ENTITY, &page)
        }
        Err(e) => Err(e.into()),
    }
}

async fn plan_pdf(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;
    let v = crate::ledger::planning::view(&s.db, id).await?;
    if v.current.is_none() {
        return Err(AppError::not_found(
            "lot_id",
            format!("lot {} has no test-location plan yet", v.lot.code),
        )
        .into());
    }
    let project = crate::ledger::setup::require_project(&s.db, v.lot.project_id).await?;
    let u = Units::of(&project);
    let (locations, _) = plan_rows(&v, &u);
    let doc = crate::pdf::PlanListDoc {
        title: format!("Test locations: lot {} ({})", v.lot.code, project.name),
        facts: plan_facts(&v, &u),
        rows: locations
            .into_iter()
            .map(|l| [l.sublot.to_string(), l.chainage, l.offset, l.tests])
            .collect(),
    };
    let bytes = crate::pdf::render_plan_list(&doc)
        .map_err(|e| AppError::Internal(anyhow::anyhow!("{e}")))?;
    Ok((
        [
            (header::CONTENT_TYPE, "application/pdf".to_string()),
            (
                header::CONTENT_DISPOSITION,
                format!("inline; filename=\"plan-{}.pdf\"", v.lot.code),
            ),
        ],
        bytes,
    )
        .into_response())
}

struct ChartBlock {
    label: String,
    count: usize,
    limits: String,
    individuals: String,
    moving_range: String,
    signals: Vec<String>,
}

#[derive(Template)]
#[template(path = "planning/charts.html")]
struct ChartsPage {
    nav: ProjectNav,
    by: String,
    measure: String,
    measure_label: String,
    blocks: Vec<ChartBlock>,
    cautions: Vec<String>,
}

fn by_code(b: GroupBy) -> &'static str {
    match b {
        GroupBy::Source => "source",
        GroupBy::Layer => "layer",
        GroupBy::Technician => "technician",
    }
}

fn chart_block(g: &ChartGroup, measure: Measure) -> ChartBlock {
    let Some(c) = &g.chart else {
        return ChartBlock {
            label: g.label.clone(),
            count: g.tests.len(),
            limits: "fewer than two tests: no moving range yet".into(),
            individuals: String::new(),
            moving_range: String::new(),
            signals: vec![],
        };
    };
    let rule_at = |i: usize| -> String {
        c.signals
            .iter()
            .filter(|s| s.index == i)
            .map(|s| s.rule.words())
            .collect::<Vec<_>>()
            .join("; ")
    };
    let individuals = control_panel(&ControlPanel {
        title: format!("{} — individuals, {}", g.label, measure.label()),
        points: g
            .tests
            .iter()
            .enumerate()
            .map(|(i, t)| (t.number.clone(), c.values[i], rule_at(i)))
            .collect(),
        centre: c.mean,
        upper: c.ucl,
        lower: Some(c.lcl),
    });
    let moving_range = control_panel(&ControlPanel {
        title: format!("{} — moving range", g.label),
        points: g
            .tests
            .iter()
            .skip(1)
            .zip(&c.moving_ranges)
            .enumerate()
            .map(|(i, (t, r))| {
                let beyond = c.mr_beyond.contains(&i);
                (
                    t.number.clone(),
                    *r,
                    if beyond {
                        "moving range above 3.267·MR̄".to_string()
                    } else {
                        String::new()
                    },
                )
            })
            .collect(),
        centre: c.mean_moving_range,
        upper: c.mr_ucl,
        lower: None,
    });
    ChartBlock {
        label: g.label.clone(),
        count: g.tests.len(),
        limits: format!(
            "x̄ {:.2}, MR̄ {:.3}; limits x̄ ± 2.66·MR̄ = {:.2} to {:.2}; moving range up to 3.267·MR̄ = {:.3}",
            c.mean, c.mean_moving_range, c.lcl, c.ucl, c.mr_ucl
        ),
        individuals,
        moving_range,
        signals: c
            .signals
            .iter()
            .map(|s| format!("{}: {}", g.tests[s.index].number, s.rule.words()))
            .chain(
                c.mr_beyond
                    .iter()
                    .map(|i| format!("{}: moving range above 3.267·MR̄", g.tests[i + 1].number)),
            )
            .collect(),
    }
}

async fn charts_page(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    Query(q): Query<ChartQuery>,
) -> PageResult {
    let project = super::readable_project(&s, &caller, id).await?;
    let groups = watch::control_charts(&s.db, id, q.by, q.measure).await?;
    render(&ChartsPage {
        nav: ProjectNav {
            id,
            name: project.code.clone(),
        },
        by: by_code(q.by).into(),
        measure: if q.measure == Measure::Rc {
            "rc".into()
        } else {
            "moisture".into()
        },
        measure_label: q.measure.label().into(),
        blocks: groups.iter().map(|g| chart_block(g, q.measure)).collect(),
        cautions: super::cautions(),
    })
}

async fn charts_csv(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    Query(q): Query<ChartQuery>,
) -> PageResult {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let groups = watch::control_charts(&s.db, id, q.by, q.measure).await?;
    let mut out = csv::Writer::from_writer(Vec::new());
    let w = |e: csv::Error| PageError(AppError::Internal(e.into()));
    out.write_record([
        "group",
        "test",
        "tested_at",
        "value",
        "moving_range",
        "centre",
        "lcl",
        "ucl",
        "mr_ucl",
        "rules_broken",
    ])
    .map_err(w)?;
    for g in &groups {
        let Some(c) = &g.chart else { continue };
        for (i, t) in g.tests.iter().enumerate() {
            let rules: Vec<&str> = c
                .signals
                .iter()
                .filter(|s| s.index == i)
                .map(|s| s.rule.words())
                .collect();
            let mr = if i == 0 {
                String::new()
            } else {
                format!("{:.3}", c.moving_ranges[i - 1])
            };
            out.write_record([
                crate::transfer::csv_safe::cell(&g.label).as_ref(),
                crate::transfer::csv_safe::cell(&t.number).as_ref(),
                &t.tested_at,
                &format!("{:.3}", c.values[i]),
                &mr,
                &format!("{:.3}", c.mean),
                &format!("{:.3}", c.lcl),
                &format!("{:.3}", c.ucl),
                &format!("{:.3}", c.mr_ucl),
                &rules.join("; "),
            ])
            .map_err(w)?;
        }
    }
    let bytes = out
        .into_inner()
        .map_err(|e| PageError(AppError::Internal(anyhow::anyhow!("{e}"))))?;
    Ok(([(header::CONTENT_TYPE, "text/csv; charset=utf-8")], bytes).into_response())
}

#[derive(Template)]
#[template(path = "planning/family.html")]
struct FamilyPage {
    nav: ProjectNav,
    source: String,
    effort: String,
    chart: String,
    curves: Vec<String>,
    checks: Vec<String>,
    interpolation: &'static str,
    cautions: Vec<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct FamilyQuery {
    #[serde(default)]
    effort: Option<String>,
}

/// A source's curves and one-point checks of one effort: the effort asked for, else the
/// first curve's (none, and nothing drawn, for a source without curves). The effort comes
/// back as its code for the page.
async fn family_of(
    s: &AppState,
    source_id: i64,
    asked: Option<&str>,
) -> crate::error::Result<(
    String,
    Vec<(
        db::lab_tests::LabTest,
        crate::reduction::one_point::FamilyCurve,
    )>,
    Vec<db::planning::OnePointCheck>,
)> {
    let labs = db::lab_tests::list_for_source(&s.db, source_id).await?;
    let effort = asked
        .and_then(crate::domain::LabEffort::parse_code)
        .or_else(|| labs.first().map(|l| l.effort.clone()));
    let fam = match &effort {
        Some(e) => crate::ledger::one_point::family(&s.db, source_id, e).await?,
        None => Vec::new(),
    };
    let checks = db::planning::one_points_for_source(&s.db, source_id)
        .await?
        .into_iter()
        .filter(|c| Some(&c.effort) == effort.as_ref())
        .collect();
    Ok((effort.map(|e| e.code()).unwrap_or_default(), fam, checks))
}

async fn family_page(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    Query(q): Query<FamilyQuery>,
) -> PageResult<Response> {
    require(&s.db, &caller, Scope::Source(id), Action::Read).await?;
    let source = db::sources::get(&s.db, id)
        .await?
        .ok_or_else(|| AppError::not_found("source_id", format!("source {id} does not exist")))?;
    let project = crate::ledger::setup::require_project(&s.db, source.project_id).await?;
    let (effort, fam, checks) = family_of(&s, id, q.effort.as_deref()).await?;
    let u = Units::of(&project);
    let chart = family_chart(
        &format!("Family of curves, source {} ({effort})", source.code),
        &fam.iter()
            .map(|(l, c)| FamilyLine {
                label: l.code.clone(),
                points: c
                    .samples
                    .iter()
                    .map(|p| (p.water_content_pct, p.dry_density_kg_m3))
                    .collect(),
            })
            .collect::<Vec<_>>(),
        &checks
            .iter()
            .map(|c| (c.code.clone(), c.water_content_pct, c.dry_density_kg_m3))
            .collect::<Vec<_>>(),
    );
    let code_of = |lid: i64| {
        fam.iter()
            .find(|(l, _)| l.id == lid)
            .map(|(l, _)| l.code.clone())
            .unwrap_or_else(|| format!("#{lid}"))
    };
    render(&FamilyPage {
        nav: ProjectNav { id: project.id, name: project.code.clone() },
        source: format!("{} {}", source.code, source.name),
        effort,
        chart,
        curves: fam
            .iter()
            .map(|(l, _)| format!("{}: MDD {}, OMC {:.1} %", l.code, u.density_with_unit(l.max_dry_density_kg_m3), l.optimum_water_content_pct))
            .collect(),
        checks: checks
            .iter()
            .map(|c| {
                format!(
                    "{} ({}): {:.1} %, {} → MDD {}, OMC {:.1} % ({:.0} % of the way from {} to {}; window {:.1} points dry){}",
                    c.code,
                    c.tested_on,
                    c.water_content_pct,
                    u.density_with_unit(c.dry_density_kg_m3),
                    u.density_with_unit(c.max_dry_density_kg_m3),
                    c.optimum_water_content_pct,
                    c.fraction * 100.0,
                    code_of(c.lower_lab_test_id),
                    code_of(c.upper_lab_test_id),
                    c.dry_window_pct,
                    if c.field_test_id.is_some() { "; paired with a field test" } else { "" }
                )
            })
            .collect(),
        interpolation: crate::ledger::one_point::INTERPOLATION,
        cautions: super::cautions(),
    })
}
