//! The curve sheet of a lab compaction test, with the field tests judged against it.

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::routing::get;

use super::{PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::auth::Action;
use crate::charts::{CurveChartInput, FieldMark, Series, curve_chart};
use crate::db;
use crate::domain::LabEffort;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::ledger::setup::{LabPointInput, reduce_lab_point};
use crate::present::Units;
use crate::reduction::SpecificGravity;
use crate::reduction::curve::fit_curve;
use crate::reduction::voids::{degree_of_saturation_pct, saturation_line, zero_air_voids_line};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/lab-tests/{id}", get(sheet))
}

/// One lab point on the sheet.
struct PointRow {
    water: String,
    dry: String,
    saturation: String,
}

#[derive(Template)]
#[template(path = "curve.html")]
struct CurvePage {
    nav: ProjectNav,
    code: String,
    source: String,
    tested_on: String,
    status: String,
    superseded_reason: String,
    effort: String,
    energy: String,
    mdd: String,
    omc: String,
    gs: String,
    fit_method: String,
    density_unit: String,
    points: Vec<PointRow>,
    warnings: Vec<String>,
    /// "not_needed", "needs_approval" or "approved" (a CSS hook and a test hook).
    approval: String,
    /// The caller may approve the curve (shown only while it needs approval).
    may_approve: bool,
    id: i64,
    /// The approval in words (who, when, why) and the concerns it answers.
    approval_words: String,
    effort_family: String,
    chart: String,
    field_count: usize,
    field_fail: usize,
    /// Drift warning of this curve's field points (empty when the material still matches).
    drift: Vec<crate::ledger::watch::DriftNote>,
    cautions: Vec<String>,
}

/// A lab test and what its sheet reads with it.
struct LabSheet {
    lab: db::lab_tests::LabTest,
    source: db::sources::Source,
    project: db::projects::Project,
    points: Vec<crate::reduction::curve::CurvePoint>,
    gs: SpecificGravity,
}

async fn load(s: &AppState, id: i64) -> crate::error::Result<LabSheet> {
    let lab = db::lab_tests::get(&s.db, id).await?.ok_or_else(|| {
        AppError::not_found("lab_test_id", format!("lab test {id} does not exist"))
    })?;
    let source = db::sources::get(&s.db, lab.source_id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lab test {id} has no source"))
        .map_err(AppError::from)?;
    let project = crate::ledger::setup::require_project(&s.db, source.project_id).await?;
    let entered: Vec<LabPointInput> = serde_json::from_str(&lab.points_json)
        .map_err(anyhow::Error::from)
        .map_err(AppError::from)?;
    let points = entered
        .iter()
        .enumerate()
        .map(|(i, p)| reduce_lab_point(i, p))
        .collect::<crate::error::Result<Vec<_>>>()?;
    let gs = SpecificGravity::new(lab.specific_gravity)
        .map_err(|e| AppError::Internal(anyhow::anyhow!("{e}")))?;
    Ok(LabSheet {
        lab,
        source,
        project,
        points,
        gs,
    })
}

/// Field tests judged against this curve, exactly as their lot sheets judge them
/// (oversize-corrected where a test carries a coarse fraction); voided and superseded
/// tests are left out.
async fn counted_tests(
    s: &AppState,
    project_id: i64,
    lab_test_id: i64,
) -> crate::error::Result<Vec<crate::ledger::lot_report::TestLine>> {
    let mut counted = Vec::new();
    crate::ledger::overview::each_report(
        &s.db,
        project_id,
        |lot| lot.lab_test_id == lab_test_id,
        true,
        |r| {
            counted.extend(r.tests.into_iter().filter(|l| l.standing.counted()));
            Ok(())
        },
    )
    .await?;
    Ok(counted)
}

fn field_marks(counted: &[crate::ledger::lot_report::TestLine]) -> Vec<FieldMark> {
    counted
        .iter()
        .map(|l| FieldMark {
            label: format!(
                "{} · RC {} %",
                l.test.number,
                crate::present::pct(l.relative_compaction_pct)
            ),
            x: l.test.water_content_pct,
            y: l.test.dry_density_kg_m3,
            passed: l.passed,
        })
        .collect()
}

/// The compaction energy in SI and US units, as the effort defines it.
fn energy_words(lab: &db::lab_tests::LabTest) -> String {
    match &lab.effort {
        LabEffort::Preset(p) => format!(
            "{:.0} kJ/m³ ({:.0} ft·lbf/ft³)",
            p.effort().energy_kj_m3(),
            p.effort().energy_ft_lbf_ft3()
        ),
        LabEffort::Custom(_) => format!("{:.0} kJ/m³", lab.effort_energy_kj_m3),
    }
}

fn point_rows(sheet: &LabSheet, u: &Units) -> Vec<PointRow> {
    sheet
        .points
        .iter()
        .map(|p| PointRow {
            water: format!("{:.1}", p.water_content_pct),
            dry: u.density(p.dry_density_kg_m3),
            saturation: format!(
                "{:.0}",
                degree_of_saturation_pct(sheet.gs, p.water_content_pct, p.dry_density_kg_m3)
            ),
        })
        .collect()
}

async fn sheet(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::LabTest(id), Action::Read).await?;
    let may_approve = require(&s.db, &caller, Scope::LabTest(id), Action::ManageSetup)
        .await
        .is_ok();
    let sheet = load(&s, id).await?;
    let LabSheet {
        lab,
        source,
        project,
        ..
    } = &sheet;
    let u = Units::of(project);
    // A curve stored before today's fit rules may be refused by them (it then awaits
    // approval); the sheet still shows its points and its stored MDD and OMC.
    let fit = fit_curve(&sheet.points, Some(sheet.gs)).ok();
    let counted = counted_tests(&s, project.id, id).await?;
    let marks = field_marks(&counted);
    let field_fail = marks.iter().filter(|m| !m.passed).count();
    let drift = crate::ledger::watch::drift_of(&s.db, project.id, lab).await?;
    let drift: Vec<_> = drift
        .warned()
        .then(|| (&drift).into())
        .into_iter()
        .collect();
    let fitted = fit.as_ref().map_or(&[][..], |f| f.curve.as_slice());
    let chart = chart(
        &format!("Compaction curve {} ({})", lab.code, source.code),
        &sheet.points,
        fitted,
        (lab.optimum_water_content_pct, lab.max_dry_density_kg_m3),
        sheet.gs,
        marks,
    );
    let warnings: Vec<String> = serde_json::from_str::<Vec<serde_json::Value>>(&lab.warnings_json)
        .unwrap_or_default()
        .iter()
        .filter_map(|w| w["message"].as_str().map(str::to_string))
        .collect();
    render(&CurvePage {
        nav: ProjectNav {
            id: project.id,
            name: project.code.clone(),
        },
        code: lab.code.clone(),
        source: format!("{} ({})", source.name, source.code),
        tested_on: lab.tested_on.clone(),
        status: lab.status.to_string(),
        superseded_reason: lab.superseded_reason.clone().unwrap_or_default(),
        effort: lab.effort.label(),
        energy: energy_words(lab),
        mdd: u.density_with_unit(lab.max_dry_density_kg_m3),
        omc: format!("{:.1} %", lab.optimum_water_content_pct),
        gs: format!("{:.2}", lab.specific_gravity),
        fit_method: fit
            .as_ref()
            .map_or_else(|| lab.fit_method.replace('_', " "), |f| f.method.label()),
        density_unit: u.density_unit().to_string(),
        points: point_rows(&sheet, &u),
        warnings,
        approval: lab.approval.to_string(),
        may_approve,
        id,
        approval_words: crate::ledger::certificate_doc::approval_words(lab),
        effort_family: crate::ledger::reference::lab_family(lab)
            .label()
            .to_string(),
        chart,
        field_count: counted.len(),
        field_fail,
        drift,
        cautions: super::cautions(),
    })
}

/// The compaction-curve chart: lab points, fitted curve (empty when the points no longer
/// fit), optimum (water content %, dry density kg/m³), zero-air-voids and 90 %/80 %
/// saturation lines at the curve's Gs, and any field points judged against it.
pub fn chart(
    title: &str,
    points: &[crate::reduction::curve::CurvePoint],
    fitted: &[crate::reduction::curve::CurvePoint],
    (omc_pct, mdd_kg_m3): (f64, f64),
    gs: SpecificGravity,
    marks: Vec<FieldMark>,
) -> String {
    let (lo, hi) = points
        .iter()
        .map(|p| p.water_content_pct)
        .chain(marks.iter().map(|m| m.x))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), w| {
            (a.min(w), b.max(w))
        });
    let (lo, hi) = ((lo - 1.5).max(0.0), hi + 1.5);
    let pairs = |v: Vec<crate::reduction::curve::CurvePoint>| -> Vec<(f64, f64)> {
        v.into_iter()
            .map(|p| (p.water_content_pct, p.dry_density_kg_m3))
            .collect()
    };
    curve_chart(&CurveChartInput {
        title: title.to_string(),
        x_label: "Water content (%)".into(),
        y_label: "Dry density (kg/m³)".into(),
        lab_points: points
            .iter()
            .map(|p| (p.water_content_pct, p.dry_density_kg_m3))
            .collect(),
        fitted: pairs(fitted.to_vec()),
        optimum: (omc_pct, mdd_kg_m3),
        zero_air_voids: pairs(zero_air_voids_line(gs, lo, hi, 40)),
        saturation_lines: [90.0, 80.0]
            .iter()
            .map(|sat| Series {
                label: format!("S = {sat:.0} %"),
                points: pairs(saturation_line(gs, *sat, lo, hi, 40)),
            })
            .collect(),
        field_points: marks,
        optimum_label: format!("MDD {mdd_kg_m3:.0} kg/m³ at OMC {omc_pct:.1} %"),
    })
}
