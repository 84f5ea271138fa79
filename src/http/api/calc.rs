//! Stateless calculators for previews and integrators: nothing is stored.

use axum::routing::post;
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::{Value, json};

use crate::app::AppState;
use crate::error::{AppError, Result};
use crate::http::caller::Caller;
use crate::http::extract::ApiJson;
use crate::ledger::validate::quantity;
use crate::reduction::acceptance::{AcceptanceRule, evaluate_values};
use crate::reduction::curve::{CurvePoint, fit_curve};
use crate::reduction::field::{FieldReadings, reduce_field};
use crate::reduction::oversize::{DEFAULT_OVERSIZE_LIMIT_PCT, OversizeInput, correct_for_oversize};
use crate::reduction::verdict::{moisture_deviation_pct, relative_compaction_pct};
use crate::reduction::voids::zero_air_voids_line;
use crate::reduction::{Density, SpecificGravity, WaterContent};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/calc/lab-curve", post(lab_curve))
        .route("/api/v1/calc/field-density", post(field_density))
        .route("/api/v1/calc/oversize", post(oversize))
        .route("/api/v1/calc/acceptance", post(acceptance))
}

/// Body of the lab-curve calculator.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct LabCurveInput {
    specific_gravity: f64,
    points: Vec<CurvePoint>,
}

async fn lab_curve(_caller: Caller, ApiJson(input): ApiJson<LabCurveInput>) -> Result<Json<Value>> {
    let gs = quantity(
        "specific_gravity",
        SpecificGravity::new(input.specific_gravity),
    )?;
    for (i, p) in input.points.iter().enumerate() {
        quantity(
            &format!("points[{i}].water_content_pct"),
            WaterContent::new(p.water_content_pct),
        )?;
        quantity(
            &format!("points[{i}].dry_density_kg_m3"),
            Density::new(p.dry_density_kg_m3),
        )?;
    }
    let fit = fit_curve(&input.points, Some(gs))
        .map_err(|e| AppError::invalid("points", e.to_string()))?;
    let (lo, hi) = input
        .points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
            (lo.min(p.water_content_pct), hi.max(p.water_content_pct))
        });
    let zav = zero_air_voids_line(gs, (lo - 2.0).max(0.0), hi + 2.0, 25);
    Ok(Json(json!({
        "max_dry_density_kg_m3": fit.max_dry_density.kg_m3(),
        "optimum_water_content_pct": fit.optimum_water_content.pct(),
        "fit_method": fit.method.code(),
        "warnings": fit.warnings.iter().map(|w| json!({"code": w.code, "message": w.message})).collect::<Vec<_>>(),
        "curve": fit.curve,
        "zero_air_voids": zav,
    })))
}

/// Body of the field-density calculator: the readings plus an optional reference.
#[derive(Debug, Deserialize)]
struct FieldDensityInput {
    #[serde(flatten)]
    readings: FieldReadings,
    max_dry_density_kg_m3: Option<f64>,
    optimum_water_content_pct: Option<f64>,
}

async fn field_density(
    _caller: Caller,
    ApiJson(input): ApiJson<FieldDensityInput>,
) -> Result<Json<Value>> {
    let d =
        reduce_field(&input.readings).map_err(|e| AppError::invalid(e.field(), e.to_string()))?;
    let mut out = json!({
        "wet_density_kg_m3": d.wet_density.kg_m3(),
        "water_content_pct": d.water_content.pct(),
        "dry_density_kg_m3": d.dry_density.kg_m3(),
        "moisture_source": d.moisture_source,
    });
    if let Some(mdd) = input.max_dry_density_kg_m3 {
        let mdd = quantity("max_dry_density_kg_m3", Density::new(mdd))?;
        out["relative_compaction_pct"] = json!(relative_compaction_pct(d.dry_density, mdd));
    }
    if let Some(omc) = input.optimum_water_content_pct {
        let omc = quantity("optimum_water_content_pct", WaterContent::new(omc))?;
        out["moisture_deviation_pct"] = json!(moisture_deviation_pct(d.water_content, omc));
    }
    Ok(Json(out))
}

/// Body of the oversize calculator.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct OversizeBody {
    fine_dry_density_kg_m3: f64,
    fine_water_content_pct: f64,
    coarse_pct: f64,
    coarse_specific_gravity: f64,
    coarse_water_content_pct: f64,
    limit_pct: Option<f64>,
}

async fn oversize(_caller: Caller, ApiJson(b): ApiJson<OversizeBody>) -> Result<Json<Value>> {
    let input = OversizeInput {
        fine_dry_density_kg_m3: b.fine_dry_density_kg_m3,
        fine_water_content_pct: b.fine_water_content_pct,
        coarse_pct: b.coarse_pct,
        coarse_specific_gravity: b.coarse_specific_gravity,
        coarse_water_content_pct: b.coarse_water_content_pct,
    };
    let r = correct_for_oversize(&input, b.limit_pct.unwrap_or(DEFAULT_OVERSIZE_LIMIT_PCT))
        .map_err(|e| AppError::invalid(e.field(), e.to_string()))?;
    Ok(Json(json!({
        "dry_density_kg_m3": r.dry_density.kg_m3(),
        "water_content_pct": r.water_content.pct(),
    })))
}

/// Body of the acceptance calculator.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct AcceptanceBody {
    rule: String,
    values: Vec<f64>,
    lower_limit: f64,
    allowance: Option<f64>,
    min_pwl: Option<f64>,
}

async fn acceptance(_caller: Caller, ApiJson(b): ApiJson<AcceptanceBody>) -> Result<Json<Value>> {
    let rule = match b.rule.as_str() {
        "every_test" => AcceptanceRule::EveryTest,
        "mean_and_min" => AcceptanceRule::MeanAndMin {
            allowance_pct: b.allowance.ok_or_else(|| {
                AppError::invalid("allowance", "is required for the mean_and_min rule")
            })?,
        },
        "quality_index" => AcceptanceRule::QualityIndex {
            min_pwl_pct: b.min_pwl.ok_or_else(|| {
                AppError::invalid("min_pwl", "is required for the quality_index rule")
            })?,
        },
        other => {
            return Err(AppError::invalid(
                "rule",
                format!("unknown rule '{other}'; use every_test, mean_and_min or quality_index"),
            ));
        }
    };
    if !b.lower_limit.is_finite() {
        return Err(AppError::invalid("lower_limit", "must be a finite number"));
    }
    for (i, v) in b.values.iter().enumerate() {
        if !v.is_finite() || *v < 0.0 || *v > 200.0 {
            return Err(AppError::invalid(
                format!("values[{i}]"),
                "must be a relative compaction between 0 and 200 %",
            ));
        }
    }
    let s = evaluate_values(&b.values, b.lower_limit, &rule)
        .map_err(|e| AppError::invalid(e.field(), e.to_string()))?;
    Ok(Json(json!({
        "n": s.n,
        "mean": s.mean,
        "std_dev": s.std_dev,
        "quality_index": s.quality_index,
        "pwl": s.pwl,
        "accepted": s.accepted,
        "reasons": s.reasons,
    })))
}
