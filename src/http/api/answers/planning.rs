//! Answers about test-location plans, planning terms, one-point checks, drift and charts.

use serde::Serialize;
use serde_json::Value;
use utoipa::ToSchema;

use super::json_column;
use super::setup::LotAnswer;
use crate::db;
use crate::http::api::codes;
use crate::ledger::{one_point, planning, watch};

/// One drawn plan of a lot (a replan keeps the old one, superseded).
#[derive(Debug, Serialize, ToSchema)]
pub struct PlanRowAnswer {
    pub id: i64,
    pub project_id: i64,
    pub lot_id: i64,
    pub revision: i64,
    /// The ChaCha20 seed the locations are drawn from.
    pub seed: i64,
    pub location_count: i64,
    /// Least distance from the lot's edges, m.
    pub edge_m: f64,
    /// Chainage bands left out (`chainage_from_m`, `chainage_to_m`).
    #[schema(value_type = Vec<super::super::bodies::Exclusion>)]
    pub exclusions: Value,
    /// The locations drawn (`sublot`, `chainage_m`, `offset_m`).
    #[schema(value_type = Vec<PlannedLocationAnswer>)]
    pub locations: Value,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
    #[schema(format = DateTime)]
    pub superseded_at: Option<String>,
    pub superseded_reason: Option<String>,
}

impl From<&db::planning::TestPlan> for PlanRowAnswer {
    fn from(p: &db::planning::TestPlan) -> Self {
        Self {
            id: p.id,
            project_id: p.project_id,
            lot_id: p.lot_id,
            revision: p.revision,
            seed: p.seed,
            location_count: p.location_count,
            edge_m: p.edge_m,
            exclusions: json_column(&p.exclusions_json),
            locations: json_column(&p.locations_json),
            created_at: p.created_at.clone(),
            created_by: p.created_by.clone(),
            superseded_at: p.superseded_at.clone(),
            superseded_reason: p.superseded_reason.clone(),
        }
    }
}

/// A planned test location.
#[derive(Debug, Serialize, ToSchema)]
pub struct PlannedLocationAnswer {
    /// 1-based sub-lot number, in chainage order.
    pub sublot: u32,
    pub chainage_m: f64,
    pub offset_m: f64,
}

/// How a test lies against its nearest planned location.
#[derive(Debug, Serialize, ToSchema)]
pub struct PlanMatchAnswer {
    /// The test's number.
    pub number: String,
    pub sublot: u32,
    /// Test chainage − planned chainage, m.
    pub chainage_diff_m: f64,
    /// Test offset − planned offset, m.
    pub offset_diff_m: f64,
    /// Straight-line distance, m.
    pub distance_m: f64,
    /// True when the distance exceeds the clause's tolerance.
    pub misplaced: bool,
}

/// A lot's plan, its earlier plans and how each test lies against it.
#[derive(Debug, Serialize, ToSchema)]
pub struct PlanAnswer {
    pub lot: LotAnswer,
    pub current: Option<PlanRowAnswer>,
    pub locations: Vec<PlannedLocationAnswer>,
    #[schema(value_type = Vec<super::super::bodies::Exclusion>)]
    pub exclusions: Value,
    /// How far a test may lie from its planned location, m.
    pub tolerance_m: f64,
    /// Every plan of the lot, newest first.
    pub history: Vec<PlanRowAnswer>,
    /// The lot's tests that are not voided, against the plan.
    pub matches: Vec<PlanMatchAnswer>,
}

impl From<planning::PlanView> for PlanAnswer {
    fn from(v: planning::PlanView) -> Self {
        Self {
            current: v.current.as_ref().map(PlanRowAnswer::from),
            locations: v
                .locations
                .iter()
                .map(|l| PlannedLocationAnswer {
                    sublot: l.sublot,
                    chainage_m: l.chainage_m,
                    offset_m: l.offset_m,
                })
                .collect(),
            exclusions: serde_json::to_value(v.exclusions).unwrap_or(Value::Null),
            tolerance_m: v.tolerance_m,
            history: v.history.iter().map(PlanRowAnswer::from).collect(),
            matches: v
                .matches
                .iter()
                .map(|(number, m)| PlanMatchAnswer {
                    number: number.clone(),
                    sublot: m.sublot,
                    chainage_diff_m: m.chainage_diff_m,
                    offset_diff_m: m.offset_diff_m,
                    distance_m: m.distance_m,
                    misplaced: m.misplaced,
                })
                .collect(),
            lot: v.lot.into(),
        }
    }
}

/// A clause's planning terms.
#[derive(Debug, Serialize, ToSchema)]
pub struct PlanningTermsAnswer {
    /// How far a test may lie from its planned location, m.
    pub plan_tolerance_m: f64,
    /// Whether a one-point check may be a test's reference.
    pub one_point_allowed: bool,
    /// How far dry of optimum a one-point check may be, percentage points.
    pub one_point_dry_window_pct: f64,
}

impl From<db::planning::ClauseTerms> for PlanningTermsAnswer {
    fn from(t: db::planning::ClauseTerms) -> Self {
        Self {
            plan_tolerance_m: t.plan_tolerance_m,
            one_point_allowed: t.one_point_allowed != 0,
            one_point_dry_window_pct: t.one_point_dry_window_pct,
        }
    }
}

/// A stored one-point check.
#[derive(Debug, Serialize, ToSchema)]
pub struct OnePointCheckAnswer {
    pub id: i64,
    pub project_id: i64,
    pub source_id: i64,
    pub field_test_id: Option<i64>,
    pub code: String,
    #[schema(format = Date)]
    pub tested_on: String,
    #[schema(value_type = codes::LabEffort)]
    pub effort: String,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    /// How far dry of optimum the point may be, percentage points.
    pub dry_window_pct: f64,
    /// Interpolated maximum dry density, kg/m³.
    pub max_dry_density_kg_m3: f64,
    /// Interpolated optimum water content, percent.
    pub optimum_water_content_pct: f64,
    pub lower_lab_test_id: i64,
    pub upper_lab_test_id: i64,
    /// Where the point lies between the lower (0) and upper (1) curve.
    pub fraction: f64,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

/// A one-point check placed in its source's family of curves.
#[derive(Debug, Serialize, ToSchema)]
pub struct OnePointAnswer {
    pub check: OnePointCheckAnswer,
    pub lower_curve: String,
    pub upper_curve: String,
    /// How MDD and OMC were interpolated, in words.
    pub interpolation: String,
}

impl From<one_point::OnePointAnswer> for OnePointAnswer {
    fn from(a: one_point::OnePointAnswer) -> Self {
        let c = a.check;
        Self {
            check: OnePointCheckAnswer {
                id: c.id,
                project_id: c.project_id,
                source_id: c.source_id,
                field_test_id: c.field_test_id,
                code: c.code,
                tested_on: c.tested_on,
                effort: c.effort.to_string(),
                water_content_pct: c.water_content_pct,
                dry_density_kg_m3: c.dry_density_kg_m3,
                dry_window_pct: c.dry_window_pct,
                max_dry_density_kg_m3: c.max_dry_density_kg_m3,
                optimum_water_content_pct: c.optimum_water_content_pct,
                lower_lab_test_id: c.lower_lab_test_id,
                upper_lab_test_id: c.upper_lab_test_id,
                fraction: c.fraction,
                created_at: c.created_at,
                created_by: c.created_by,
            },
            lower_curve: a.lower_curve,
            upper_curve: a.upper_curve,
            interpolation: a.interpolation.to_string(),
        }
    }
}

/// Whether a curve's field points say its material may have changed.
#[derive(Debug, Serialize, ToSchema)]
pub struct DriftAnswer {
    pub lab_test_id: i64,
    pub lab_code: String,
    /// True when the material may have changed (some rule found something).
    pub warned: bool,
    /// The rules applied, with their thresholds.
    #[schema(value_type = Object)]
    pub rules: Value,
    /// What each rule found (`rule`, `message`, `test_ids`).
    #[schema(value_type = Vec<Object>)]
    pub findings: Value,
    /// Test numbers per finding, in the findings' order.
    pub test_numbers: Vec<Vec<String>>,
}

impl From<watch::CurveDrift> for DriftAnswer {
    fn from(d: watch::CurveDrift) -> Self {
        Self {
            warned: d.warned(),
            lab_test_id: d.lab_test_id,
            lab_code: d.lab_code,
            rules: serde_json::to_value(d.rules).unwrap_or(Value::Null),
            findings: serde_json::to_value(d.findings).unwrap_or(Value::Null),
            test_numbers: d.test_numbers,
        }
    }
}

/// One group's control chart and its points.
#[derive(Debug, Serialize, ToSchema)]
pub struct ChartGroupAnswer {
    pub key: String,
    pub label: String,
    /// The group's tests in time order (`test_id`, `number`, `tested_at`, the value, …).
    #[schema(value_type = Vec<Object>)]
    pub tests: Value,
    /// Individuals and moving-range chart with its limits and run-rule findings; null with
    /// fewer than two points.
    #[schema(value_type = Option<Object>)]
    pub chart: Option<Value>,
}

impl From<watch::ChartGroup> for ChartGroupAnswer {
    fn from(g: watch::ChartGroup) -> Self {
        Self {
            tests: serde_json::to_value(g.tests).unwrap_or(Value::Null),
            chart: g
                .chart
                .as_ref()
                .map(|c| serde_json::to_value(c).unwrap_or(Value::Null)),
            key: g.key,
            label: g.label,
        }
    }
}
