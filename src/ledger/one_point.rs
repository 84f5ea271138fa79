//! One-point checks (AASHTO T 272): a specimen of field material at the reference effort placed in
//! its source's family of curves; the interpolated MDD and OMC, stored with the inputs, become the
//! reference of the test it is paired with where that test's clause allows.

use serde::{Deserialize, Serialize};
use serde_json::json;

use super::Actor;
use super::field::{require_lot, require_lot_takes_tests, require_test};
use super::setup::{LabPointInput, reduce_lab_point};
use super::validate::{code, date, number};
use crate::clock;
use crate::db::planning::OnePointCheck;
use crate::db::{self, Pool, audit};
use crate::domain::LabEffort;
use crate::error::{AppError, Result};
use crate::reduction::SpecificGravity;
use crate::reduction::curve::{CurvePoint, fit_curve};
use crate::reduction::one_point::{FamilyCurve, OnePointError, dry_density_of, one_point};

/// The fitted samples of a stored lab curve (None when its points no longer fit).
pub fn fitted_samples(lab: &db::lab_tests::LabTest) -> Option<Vec<CurvePoint>> {
    let entered: Vec<LabPointInput> = serde_json::from_str(&lab.points_json).ok()?;
    let points = entered
        .iter()
        .enumerate()
        .map(|(i, p)| reduce_lab_point(i, p))
        .collect::<Result<Vec<_>>>()
        .ok()?;
    let gs = SpecificGravity::new(lab.specific_gravity).ok();
    fit_curve(&points, gs).ok().map(|f| f.curve)
}

/// A source's family of curves for one effort: its lab tests of that effort still in force.
pub async fn family(
    pool: &Pool,
    source_id: i64,
    effort: &LabEffort,
) -> Result<Vec<(db::lab_tests::LabTest, FamilyCurve)>> {
    let labs = db::lab_tests::list_for_source(pool, source_id).await?;
    Ok(labs
        .into_iter()
        .filter(|l| &l.effort == effort && l.superseded_at.is_none())
        .filter_map(|l| {
            let samples = fitted_samples(&l)?;
            let c = FamilyCurve {
                id: l.id,
                max_dry_density_kg_m3: l.max_dry_density_kg_m3,
                optimum_water_content_pct: l.optimum_water_content_pct,
                samples,
            };
            Some((l, c))
        })
        .collect())
}

/// A one-point check as entered.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OnePointInput {
    pub code: String,
    pub tested_on: String,
    /// The effort code of the family (the reference effort).
    pub effort: String,
    /// Wet density of the compacted specimen, kg/m³.
    pub wet_density_kg_m3: f64,
    /// Water content of the specimen, percent.
    pub water_content_pct: f64,
    /// The field test this check is the reference of, if any.
    #[serde(default)]
    pub field_test_id: Option<i64>,
}

/// What was stored, with the neighbours named.
#[derive(Debug, Clone, Serialize)]
pub struct OnePointAnswer {
    pub check: OnePointCheck,
    pub lower_curve: String,
    pub upper_curve: String,
    pub interpolation: &'static str,
}

/// The interpolation, stated for every answer.
pub const INTERPOLATION: &str = "linear between the two neighbouring curves by the point's density at its water content; MDD and OMC interpolated by the same fraction";

async fn paired_test(pool: &Pool, source_id: i64, test_id: Option<i64>) -> Result<Option<i64>> {
    let Some(id) = test_id else { return Ok(None) };
    let t = require_test(pool, id).await.map_err(|_| {
        AppError::invalid("field_test_id", format!("field test {id} does not exist"))
    })?;
    let lot = require_lot(pool, t.lot_id).await?;
    if lot.source_id != source_id {
        return Err(AppError::invalid(
            "field_test_id",
            format!(
                "test {} is on lot {}, whose material is another source",
                t.number, lot.code
            ),
        ));
    }
    require_lot_takes_tests(&lot).map_err(|_| {
        AppError::invalid(
            "field_test_id",
            format!("lot {} is {}; its tests are frozen", lot.code, lot.state),
        )
    })?;
    Ok(Some(id))
}

/// Records a one-point check (audited); a point outside the family or its window is refused
/// with advice to run a full curve.
pub async fn record(
    pool: &Pool,
    source_id: i64,
    input: &OnePointInput,
    actor: &Actor,
) -> Result<OnePointAnswer> {
    let source = db::sources::get(pool, source_id).await?.ok_or_else(|| {
        AppError::not_found("source_id", format!("source {source_id} does not exist"))
    })?;
    let code = code("code", &input.code)?;
    let tested_on = date("tested_on", &input.tested_on)?;
    let wet = number(
        "wet_density_kg_m3",
        input.wet_density_kg_m3,
        500.0,
        3500.0,
        "kg/m³",
    )?;
    let w = number(
        "water_content_pct",
        input.water_content_pct,
        0.0,
        100.0,
        "%",
    )?;
    let field_test_id = paired_test(pool, source_id, input.field_test_id).await?;
    let effort = LabEffort::parse_code(input.effort.trim()).ok_or_else(|| {
        AppError::invalid(
            "effort",
            format!(
                "unknown effort '{}'; give a lab test's effort code",
                input.effort.trim()
            ),
        )
    })?;
    let fam = family(pool, source_id, &effort).await?;
    let curves: Vec<FamilyCurve> = fam.iter().map(|(_, c)| c.clone()).collect();
    let window = dry_window_pct(pool, field_test_id).await?;
    let dry = dry_density_of(wet, w);
    let r = one_point(&curves, w, dry, window).map_err(|e| match e {
        OnePointError::TooFewCurves(_) => {
            AppError::invalid("effort", format!("{e} (source {})", source.code))
        }
        _ => AppError::invalid("water_content_pct", e.to_string()),
    })?;
    let name = |id: i64| {
        fam.iter()
            .find(|(l, _)| l.id == id)
            .map(|(l, _)| l.code.clone())
            .unwrap_or_default()
    };
    let now = clock::now();
    let mut check = OnePointCheck {
        id: 0,
        project_id: source.project_id,
        source_id,
        field_test_id,
        code,
        tested_on,
        effort,
        water_content_pct: w,
        dry_density_kg_m3: dry,
        dry_window_pct: window,
        max_dry_density_kg_m3: r.max_dry_density_kg_m3,
        optimum_water_content_pct: r.optimum_water_content_pct,
        lower_lab_test_id: r.lower_curve_id,
        upper_lab_test_id: r.upper_curve_id,
        fraction: r.fraction,
        created_at: now.clone(),
        created_by: actor.name.clone(),
    };
    check.id = store(pool, &check, wet, actor).await?;
    Ok(OnePointAnswer {
        lower_curve: name(check.lower_lab_test_id),
        upper_curve: name(check.upper_lab_test_id),
        check,
        interpolation: INTERPOLATION,
    })
}

/// The dry-side window of a check: the paired test's clause sets it; 4 points (from memory)
/// when the check is not paired with a test.
async fn dry_window_pct(pool: &Pool, field_test_id: Option<i64>) -> Result<f64> {
    let Some(id) = field_test_id else {
        return Ok(4.0);
    };
    let t = require_test(pool, id).await?;
    let lot = require_lot(pool, t.lot_id).await?;
    Ok(super::planning::clause_terms(pool, lot.clause_id)
        .await?
        .one_point_dry_window_pct)
}

/// Writes the check and its audit row in one transaction; a repeated code, or a second
/// check of one test, is refused naming `code`.
async fn store(pool: &Pool, check: &OnePointCheck, wet: f64, actor: &Actor) -> Result<i64> {
    let mut tx = db::begin_write(pool).await?;
    let id = db::planning::insert_one_point(&mut tx, check)
        .await
        .map_err(|e| {
            if e.as_database_error()
                .is_some_and(|d| d.is_unique_violation())
            {
                AppError::invalid(
                    "code",
                    "a one-point check with this code, or for this test, exists",
                )
            } else {
                e.into()
            }
        })?;
    let stored = OnePointCheck {
        id,
        ..check.clone()
    };
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "record_one_point",
            entity: "one_point_check",
            entity_id: Some(id),
            project_id: Some(check.project_id),
            before: None,
            after: Some(
                json!({"check": stored, "wet_density_kg_m3": wet, "interpolation": INTERPOLATION}),
            ),
            origin: &actor.origin,
        },
        &check.created_at,
    )
    .await?;
    tx.commit().await?;
    Ok(id)
}
