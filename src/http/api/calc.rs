//! Stateless calculators for previews and integrators: nothing is stored.

use axum::Json;
use serde::Deserialize;
use utoipa::ToSchema;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{
    AcceptanceAnswer, CodedMessage, CurvePointAnswer, FieldDensityAnswer, LabCurveAnswer,
    OversizeAnswer,
};
use super::bodies;
use super::codes;
use super::doc::Refusals;

use crate::app::AppState;
use crate::domain::Rule;
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
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(lab_curve))
        .routes(routes!(field_density))
        .routes(routes!(oversize))
        .routes(routes!(acceptance))
}

/// Body of the lab-curve calculator.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"specific_gravity": 2.65, "points": [{"water_content_pct": 10.0, "dry_density_kg_m3": 1850.0},
    {"water_content_pct": 12.0, "dry_density_kg_m3": 1900.0}, {"water_content_pct": 14.0, "dry_density_kg_m3": 1880.0},
    {"water_content_pct": 16.0, "dry_density_kg_m3": 1820.0}]}))]
struct LabCurveInput {
    /// Specific gravity of the solids.
    #[schema(minimum = 2.0, maximum = 3.2)]
    specific_gravity: f64,
    #[schema(value_type = Vec<CurvePointBody>)]
    points: Vec<CurvePoint>,
}

/// One specimen of a lab curve.
#[derive(ToSchema)]
#[allow(dead_code)]
struct CurvePointBody {
    /// Water content, percent.
    #[schema(minimum = 0.0, maximum = 100.0)]
    water_content_pct: f64,
    /// Dry density, kg/m³.
    #[schema(minimum = 500.0, maximum = 3000.0)]
    dry_density_kg_m3: f64,
}

/// Fit a compaction curve (nothing is stored).
#[utoipa::path(post, path = "/api/v1/calc/lab-curve", tag = "calculators", request_body = LabCurveInput,
    responses((status = 200, description = "The fitted curve and the zero-air-voids line", body = LabCurveAnswer), Refusals))]
async fn lab_curve(
    _caller: Caller,
    ApiJson(input): ApiJson<LabCurveInput>,
) -> Result<Json<LabCurveAnswer>> {
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
    let point = |p: &CurvePoint| CurvePointAnswer {
        water_content_pct: p.water_content_pct,
        dry_density_kg_m3: p.dry_density_kg_m3,
    };
    Ok(Json(LabCurveAnswer {
        max_dry_density_kg_m3: fit.max_dry_density.kg_m3(),
        optimum_water_content_pct: fit.optimum_water_content.pct(),
        fit_method: fit.method.code().to_string(),
        warnings: fit
            .warnings
            .iter()
            .map(|w| CodedMessage {
                code: w.code.to_string(),
                message: w.message.clone(),
            })
            .collect(),
        curve: fit.curve.iter().map(point).collect(),
        zero_air_voids: zav.iter().map(point).collect(),
    }))
}

/// Body of the field-density calculator: the readings plus an optional reference.
#[derive(Deserialize, ToSchema)]
#[allow(dead_code)]
#[schema(example = json!({"method": "nuclear", "wet_density_kg_m3": 2050.0, "water_content_pct": 11.0,
    "max_dry_density_kg_m3": 1900.0, "optimum_water_content_pct": 12.0}))]
struct FieldDensityBody {
    #[serde(flatten)]
    readings: bodies::Readings,
    /// MDD to compute relative compaction against, kg/m³.
    #[schema(minimum = 500.0, maximum = 3000.0)]
    max_dry_density_kg_m3: Option<f64>,
    /// OMC to compute the moisture deviation against, percent.
    #[schema(minimum = 0.0, maximum = 100.0)]
    optimum_water_content_pct: Option<f64>,
}

/// Body of the field-density calculator as read.
#[derive(Debug, Deserialize)]
struct FieldDensityInput {
    #[serde(flatten)]
    readings: FieldReadings,
    max_dry_density_kg_m3: Option<f64>,
    optimum_water_content_pct: Option<f64>,
}

/// Reduce field density readings (nothing is stored).
///
/// The body is the readings themselves (`method` and its fields), optionally with the
/// reference MDD and OMC.
#[utoipa::path(post, path = "/api/v1/calc/field-density", tag = "calculators", request_body = FieldDensityBody,
    responses((status = 200, description = "Wet and dry density, water content", body = FieldDensityAnswer), Refusals))]
async fn field_density(
    _caller: Caller,
    ApiJson(input): ApiJson<FieldDensityInput>,
) -> Result<Json<FieldDensityAnswer>> {
    let d =
        reduce_field(&input.readings).map_err(|e| AppError::invalid(e.field(), e.to_string()))?;
    let relative_compaction_pct = input
        .max_dry_density_kg_m3
        .map(|mdd| quantity("max_dry_density_kg_m3", Density::new(mdd)))
        .transpose()?
        .map(|mdd| relative_compaction_pct(d.dry_density, mdd));
    let moisture_deviation_pct = input
        .optimum_water_content_pct
        .map(|omc| quantity("optimum_water_content_pct", WaterContent::new(omc)))
        .transpose()?
        .map(|omc| moisture_deviation_pct(d.water_content, omc));
    Ok(Json(FieldDensityAnswer {
        wet_density_kg_m3: d.wet_density.kg_m3(),
        water_content_pct: d.water_content.pct(),
        dry_density_kg_m3: d.dry_density.kg_m3(),
        moisture_source: d.moisture_source.to_string(),
        relative_compaction_pct,
        moisture_deviation_pct,
    }))
}

/// Body of the oversize calculator.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"fine_dry_density_kg_m3": 1900.0, "fine_water_content_pct": 12.0, "coarse_pct": 20.0,
    "coarse_specific_gravity": 2.65, "coarse_water_content_pct": 2.0}))]
struct OversizeBody {
    /// Dry density of the fine fraction, kg/m³.
    #[schema(minimum = 500.0, maximum = 3000.0)]
    fine_dry_density_kg_m3: f64,
    /// Water content of the fine fraction, percent.
    #[schema(minimum = 0.0, maximum = 100.0)]
    fine_water_content_pct: f64,
    /// Oversize fraction, percent by dry mass.
    coarse_pct: f64,
    /// Bulk specific gravity of the oversize.
    #[schema(minimum = 2.0, maximum = 3.2)]
    coarse_specific_gravity: f64,
    /// Water content of the oversize, percent.
    coarse_water_content_pct: f64,
    /// Largest oversize fraction corrected for, percent.
    limit_pct: Option<f64>,
}

/// Oversize-correct a density and water content (ASTM D4718; nothing is stored).
#[utoipa::path(post, path = "/api/v1/calc/oversize", tag = "calculators", request_body = OversizeBody,
    responses((status = 200, description = "The corrected total-sample values", body = OversizeAnswer), Refusals))]
async fn oversize(
    _caller: Caller,
    ApiJson(b): ApiJson<OversizeBody>,
) -> Result<Json<OversizeAnswer>> {
    let input = OversizeInput {
        fine_dry_density_kg_m3: b.fine_dry_density_kg_m3,
        fine_water_content_pct: b.fine_water_content_pct,
        coarse_pct: b.coarse_pct,
        coarse_specific_gravity: b.coarse_specific_gravity,
        coarse_water_content_pct: b.coarse_water_content_pct,
    };
    let r = correct_for_oversize(&input, b.limit_pct.unwrap_or(DEFAULT_OVERSIZE_LIMIT_PCT))
        .map_err(|e| AppError::invalid(e.field(), e.to_string()))?;
    Ok(Json(OversizeAnswer {
        dry_density_kg_m3: r.dry_density.kg_m3(),
        water_content_pct: r.water_content.pct(),
    }))
}

/// Body of the acceptance calculator.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"rule": "mean_and_min", "values": [96.0, 97.5, 98.0], "lower_limit": 95.0, "allowance": 2.0}))]
struct AcceptanceBody {
    #[schema(value_type = codes::Rule)]
    rule: String,
    /// Relative compaction values, percent.
    #[schema(value_type = Vec<f64>)]
    values: Vec<f64>,
    /// The limit, percent.
    lower_limit: f64,
    /// Allowance below the limit for the mean, percent (`mean_and_min`).
    allowance: Option<f64>,
    /// Least percent within limits (`quality_index`).
    min_pwl: Option<f64>,
}

/// Judge a set of relative compaction values under a rule (nothing is stored).
#[utoipa::path(post, path = "/api/v1/calc/acceptance", tag = "calculators", request_body = AcceptanceBody,
    responses((status = 200, description = "Statistics and verdict", body = AcceptanceAnswer), Refusals))]
async fn acceptance(
    _caller: Caller,
    ApiJson(b): ApiJson<AcceptanceBody>,
) -> Result<Json<AcceptanceAnswer>> {
    let rule = b.rule.parse::<Rule>().map_err(|_| {
        AppError::invalid(
            "rule",
            format!(
                "unknown rule '{}'; use every_test, mean_and_min or quality_index",
                b.rule
            ),
        )
    })?;
    let rule = match rule {
        Rule::EveryTest => AcceptanceRule::EveryTest,
        Rule::MeanAndMin => AcceptanceRule::MeanAndMin {
            allowance_pct: b.allowance.ok_or_else(|| {
                AppError::invalid("allowance", "is required for the mean_and_min rule")
            })?,
        },
        Rule::QualityIndex => AcceptanceRule::QualityIndex {
            min_pwl_pct: b.min_pwl.ok_or_else(|| {
                AppError::invalid("min_pwl", "is required for the quality_index rule")
            })?,
        },
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
    Ok(Json(AcceptanceAnswer {
        n: s.n,
        mean_pct: s.mean,
        std_dev_pct: s.std_dev,
        quality_index: s.quality_index,
        pwl_pct: s.pwl,
        accepted: s.accepted,
        reasons: s.reasons,
    }))
}
