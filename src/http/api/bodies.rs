//! Schemas of the request bodies the ledger's own input structs read.
//!
//! The ledger's inputs live in `src/ledger`, `src/reduction` and `src/transfer`, which stay
//! free of the document's crate (`src/reduction` is also compiled to WebAssembly). So each
//! body is described here once, field for field, with the bounds the ledger enforces.
//! `tests/suite/openapi.rs` keeps them honest: every property list equals the field list the
//! server itself names when it refuses an unknown field, and every example is accepted as
//! readable by the route it documents.
#![allow(dead_code)]

use serde::Deserialize;
use utoipa::ToSchema;

use super::codes::{
    ChainageStyle, ClauseEffort, Effort, GaugeMode, InstrumentKind, MoistureBasis,
    MoistureJudgement, RecordKind, Rounding, Rule, UnitSystem,
};

/// A new project.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "P-7", "name": "Northern bypass", "unit_system": "si", "chainage_style": "km_metre"}))]
pub struct ProjectInput {
    /// Short identifier: letters, digits, `- _ . /`.
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    #[schema(
        max_length = 200,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub name: String,
    #[serde(default)]
    #[schema(max_length = 200, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub contract: String,
    #[serde(default)]
    #[schema(max_length = 200, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub client: String,
    #[serde(default)]
    #[schema(max_length = 200, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub contractor: String,
    /// Default `si`.
    #[schema(required = false)]
    pub unit_system: UnitSystem,
    /// Default `km_metre`.
    #[schema(required = false)]
    pub chainage_style: ChainageStyle,
}

/// A specification clause: the limits and the acceptance rule lots are judged by.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "C-1", "rc_min_pct": 95.0, "moisture_below_pct": 2.0, "moisture_above_pct": 2.0,
    "effort": "astm_d698_4in", "rule": "every_test", "min_tests_per_lot": 3, "area_per_test_m2": 500.0}))]
pub struct ClauseInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    #[serde(default)]
    #[schema(max_length = 200, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub title: String,
    /// Least relative compaction, percent.
    #[schema(minimum = 50.0, maximum = 110.0)]
    pub rc_min_pct: f64,
    /// Percentage points allowed below OMC (`points_of_omc` windows only).
    #[schema(minimum = 0.0, maximum = 20.0)]
    pub moisture_below_pct: Option<f64>,
    /// Percentage points allowed above OMC (`points_of_omc` windows only).
    #[schema(minimum = 0.0, maximum = 20.0)]
    pub moisture_above_pct: Option<f64>,
    /// How the moisture window is written (default `points_of_omc`).
    pub moisture_basis: Option<MoistureBasis>,
    /// Lower bound of a `percent_of_omc` or `absolute` window, percent.
    pub moisture_low_pct: Option<f64>,
    /// Upper bound of a `percent_of_omc` or `absolute` window, percent.
    pub moisture_high_pct: Option<f64>,
    /// Greatest air voids allowed, percent; absent: not judged.
    #[schema(minimum = 0.1, maximum = 30.0)]
    pub max_air_voids_pct: Option<f64>,
    pub effort: ClauseEffort,
    pub rule: Rule,
    /// Allowance below the limit for the mean (`mean_and_min`), percent.
    #[schema(minimum = 0.0, maximum = 20.0)]
    pub allowance_pct: Option<f64>,
    /// Least percent within limits (`quality_index`).
    #[schema(minimum = 1.0, maximum = 100.0)]
    pub min_pwl_pct: Option<f64>,
    /// Area each test stands for, m².
    pub area_per_test_m2: Option<f64>,
    /// Length each test stands for, m.
    pub length_per_test_m: Option<f64>,
    pub min_tests_per_lot: i64,
    /// Largest oversize fraction corrected for, percent.
    pub oversize_limit_pct: Option<f64>,
    /// How moisture is judged (default `per_test`; `pwl` only under `quality_index`).
    pub moisture_judgement: Option<MoistureJudgement>,
    /// Least moisture percent within limits under `pwl`.
    #[schema(minimum = 1.0, maximum = 100.0)]
    pub moisture_min_pwl_pct: Option<f64>,
    /// Relative compaction above this is flagged implausible, percent (default 103).
    pub rc_plausible_max_pct: Option<f64>,
    pub rounding: Option<Rounding>,
    /// Decimals the contract writes its limits with (default 1).
    pub limit_decimals: Option<i64>,
    /// Sieve the oversize is retained on, mm: 4.75 (default) or 19.
    pub oversize_sieve_mm: Option<f64>,
    /// Coarse water content assumed when a test gives none, percent.
    #[schema(minimum = 0.0, maximum = 20.0)]
    pub coarse_water_default_pct: Option<f64>,
}

/// A borrow source (the material a lab curve belongs to).
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "S-1", "name": "Cut 3 clay", "gs_fines": 2.65}))]
pub struct SourceInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    #[schema(
        max_length = 200,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub name: String,
    #[serde(default)]
    #[schema(max_length = 2000, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub description: String,
    #[serde(default)]
    #[schema(max_length = 20, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub uscs_class: String,
    #[serde(default)]
    #[schema(max_length = 20, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub aashto_class: String,
    /// Specific gravity of the solids (ASTM D854).
    #[schema(minimum = 2.0, maximum = 3.2)]
    pub gs_fines: f64,
    /// Bulk (oven-dry) specific gravity of the oversize (ASTM C127 / AASHTO T 85), used by the
    /// oversize correction; not the solids Gs.
    #[schema(minimum = 2.0, maximum = 3.2)]
    pub gs_coarse: Option<f64>,
}

/// One lab specimen: its water content and dry density, or the masses they come from.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct LabPointInput {
    #[schema(minimum = 0.0, maximum = 100.0)]
    pub water_content_pct: Option<f64>,
    #[schema(minimum = 500.0, maximum = 3000.0)]
    pub dry_density_kg_m3: Option<f64>,
    pub mass_mold_and_soil_g: Option<f64>,
    pub mass_mold_g: Option<f64>,
    pub mold_volume_cm3: Option<f64>,
    pub mass_wet_g: Option<f64>,
    pub mass_dry_g: Option<f64>,
    pub mass_tare_g: Option<f64>,
    /// A registered mould's code.
    pub mould: Option<String>,
}

/// A compaction effort other than the standard presets.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct CustomEffortInput {
    pub name: String,
    pub blows_per_layer: u32,
    pub layers: u32,
    pub rammer_mass_kg: f64,
    pub drop_m: f64,
    pub mold_volume_m3: f64,
}

/// A lab compaction test; its curve is fitted on the server.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "L-1", "tested_on": "2026-03-02", "effort": "astm_d698_4in", "specific_gravity": 2.65,
    "points": [{"water_content_pct": 10.0, "dry_density_kg_m3": 1850.0}, {"water_content_pct": 12.0, "dry_density_kg_m3": 1900.0},
    {"water_content_pct": 14.0, "dry_density_kg_m3": 1880.0}, {"water_content_pct": 16.0, "dry_density_kg_m3": 1820.0}]}))]
pub struct LabTestInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    #[schema(format = Date)]
    pub tested_on: String,
    pub effort: Effort,
    /// Required when `effort` is `custom`.
    pub custom_effort: Option<CustomEffortInput>,
    #[schema(minimum = 2.0, maximum = 3.2)]
    pub specific_gravity: Option<f64>,
    pub points: Vec<LabPointInput>,
    /// A lab test of the same source that this one replaces.
    pub supersedes_lab_test_id: Option<i64>,
    #[serde(default)]
    pub supersede_reason: String,
}

/// A layer of a zone.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"zone": "Embankment", "number": 4, "thickness_mm": 300.0}))]
pub struct LayerInput {
    #[schema(
        max_length = 80,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub zone: String,
    #[schema(minimum = 1, maximum = 999)]
    pub number: i64,
    #[schema(minimum = 10.0, maximum = 2000.0)]
    pub thickness_mm: Option<f64>,
}

/// A lot: a stretch of a layer judged as one.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "L-30", "layer_id": 1, "chainage_from_m": 1000.0, "chainage_to_m": 1100.0,
    "offset_left_m": -10.0, "offset_right_m": 10.0, "clause_id": 1, "lab_test_id": 1}))]
pub struct LotInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    pub layer_id: i64,
    #[schema(minimum = 0.0, maximum = 10000000.0)]
    pub chainage_from_m: f64,
    #[schema(minimum = 0.0, maximum = 10000000.0)]
    pub chainage_to_m: f64,
    /// Left edge as an offset from the centreline, m (negative: left of it).
    #[schema(minimum = -1000.0, maximum = 1000.0)]
    pub offset_left_m: f64,
    /// Right edge as an offset from the centreline, m; greater than `offset_left_m`.
    #[schema(minimum = -1000.0, maximum = 1000.0)]
    pub offset_right_m: f64,
    pub clause_id: i64,
    pub lab_test_id: i64,
}

/// A stretch of a layer split into lots every `every_m` metres (all or none are made).
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"layer_id": 1, "chainage_from_m": 2000.0, "chainage_to_m": 2300.0, "every_m": 100.0,
    "code_prefix": "S-", "offset_left_m": -10.0, "offset_right_m": 10.0, "clause_id": 1, "lab_test_id": 1}))]
pub struct SplitInput {
    pub layer_id: i64,
    #[schema(minimum = 0.0, maximum = 10000000.0)]
    pub chainage_from_m: f64,
    #[schema(minimum = 0.0, maximum = 10000000.0)]
    pub chainage_to_m: f64,
    pub every_m: f64,
    /// Lot codes are this prefix followed by a running number.
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,18}\s*$")]
    pub code_prefix: String,
    /// Number of the first lot (default 1).
    #[serde(default)]
    #[schema(minimum = 0, maximum = 99999, default = 1)]
    pub first_number: i64,
    /// Left edge as an offset from the centreline, m (negative: left of it).
    #[schema(minimum = -1000.0, maximum = 1000.0)]
    pub offset_left_m: f64,
    /// Right edge as an offset from the centreline, m; greater than `offset_left_m`.
    #[schema(minimum = -1000.0, maximum = 1000.0)]
    pub offset_right_m: f64,
    pub clause_id: i64,
    pub lab_test_id: i64,
}

/// A compaction mould with its calibrated volume.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "M-4", "volume_cm3": 944.0, "mass_g": 4200.0, "calibrated_on": "2026-01-10"}))]
pub struct MouldInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    /// Volume measured at calibration, cm³.
    #[schema(minimum = 100.0, maximum = 20000.0)]
    pub volume_cm3: f64,
    /// The empty mould's mass, g.
    #[schema(minimum = 1.0, maximum = 50000.0)]
    pub mass_g: Option<f64>,
    #[schema(format = Date)]
    pub calibrated_on: String,
}

/// What the technician read in the field, by method (`method` selects the variant).
#[derive(Deserialize, ToSchema)]
#[serde(tag = "method", rename_all = "snake_case")]
pub enum Readings {
    /// Nuclear gauge (ASTM D6938).
    Nuclear {
        /// Wet (bulk) density read by the gauge, kg/m³.
        #[schema(minimum = 500.0, maximum = 3000.0)]
        wet_density_kg_m3: f64,
        /// Moisture density read by the gauge, kg/m³.
        moisture_density_kg_m3: Option<f64>,
        /// Water content shown by the gauge, percent.
        #[schema(minimum = 0.0, maximum = 100.0)]
        water_content_pct: Option<f64>,
        /// Oven water content of a sample from the spot (ASTM D2216), percent.
        #[schema(minimum = 0.0, maximum = 100.0)]
        oven_water_content_pct: Option<f64>,
        gauge_serial: Option<String>,
        /// Probe depth, mm (0 for backscatter).
        probe_depth_mm: Option<f64>,
    },
    /// Sand cone (ASTM D1556).
    SandCone {
        /// Sand poured from the jar in total, g.
        #[schema(exclusive_minimum = 0.0)]
        mass_sand_used_g: f64,
        /// Sand filling cone and plate, g; absent: the registered cone's calibration.
        #[serde(default)]
        mass_sand_in_cone_g: f64,
        /// Bulk density of the sand, kg/m³; absent: the sand batch on the project.
        #[serde(default)]
        sand_density_kg_m3: f64,
        /// Wet soil dug from the hole, g.
        #[schema(exclusive_minimum = 0.0)]
        mass_wet_soil_g: f64,
        /// Water content of that soil, percent.
        #[schema(minimum = 0.0, maximum = 100.0)]
        water_content_pct: f64,
    },
    /// Rubber balloon (ASTM D2167).
    Balloon {
        /// Hole volume, cm³.
        #[schema(exclusive_minimum = 0.0)]
        hole_volume_cm3: f64,
        /// Wet soil dug from the hole, g.
        #[schema(exclusive_minimum = 0.0)]
        mass_wet_soil_g: f64,
        #[schema(minimum = 0.0, maximum = 100.0)]
        water_content_pct: f64,
    },
    /// Drive cylinder (ASTM D2937).
    DriveCylinder {
        /// Inside volume of the cylinder, cm³.
        #[schema(exclusive_minimum = 0.0)]
        cylinder_volume_cm3: f64,
        /// Wet soil in the cylinder, g.
        #[schema(exclusive_minimum = 0.0)]
        mass_wet_soil_g: f64,
        #[schema(minimum = 0.0, maximum = 100.0)]
        water_content_pct: f64,
    },
}

/// A field density test (also a retest, whose location defaults to the failed test's).
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"technician": "A. Tech", "chainage_m": 1050.0, "offset_m": 2.0,
    "readings": {"method": "nuclear", "wet_density_kg_m3": 2050.0, "water_content_pct": 11.0}}))]
pub struct FieldTestInput {
    /// Test number, unique in the project; generated when absent.
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub number: Option<String>,
    /// When the test was taken (RFC 3339); now when absent.
    #[schema(format = DateTime)]
    pub tested_at: Option<String>,
    #[schema(
        max_length = 80,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub technician: String,
    #[serde(default)]
    #[schema(max_length = 40, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub instrument_serial: String,
    /// Chainage, m.
    #[schema(minimum = 0.0, maximum = 10000000.0)]
    pub chainage_m: Option<f64>,
    /// Offset from the centreline, m (negative: left).
    #[schema(minimum = -1000.0, maximum = 1000.0)]
    pub offset_m: Option<f64>,
    /// Depth of the test below the layer's top, mm.
    pub depth_mm: Option<f64>,
    /// Oversize fraction, percent by dry mass.
    #[schema(minimum = 0.0, maximum = 100.0)]
    pub coarse_pct: Option<f64>,
    /// Water content of the oversize, percent.
    #[schema(minimum = 0.0, maximum = 100.0)]
    pub coarse_water_content_pct: Option<f64>,
    /// Grid easting, m.
    #[schema(minimum = -100000000.0, maximum = 100000000.0)]
    pub easting: Option<f64>,
    /// Grid northing, m.
    #[schema(minimum = -100000000.0, maximum = 100000000.0)]
    pub northing: Option<f64>,
    pub readings: Readings,
    /// The technician confirms a reading far above zero air voids (refused otherwise).
    #[serde(default)]
    pub confirm_implausible: bool,
    /// Why a sand-cone test uses a cone mass or sand density other than its calibration.
    #[serde(default)]
    pub calibration_override_reason: Option<String>,
}

/// Re-point an open lot at another curve of its source.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"lab_test_id": 2, "reason": "new curve for the wetter material"}))]
pub struct RepointInput {
    /// The lab test (curve) the lot is judged against from now on.
    pub lab_test_id: i64,
    /// Why (kept in the lot's history).
    #[schema(
        max_length = 500,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub reason: String,
}

/// A chainage band where no test may be placed.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct Exclusion {
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
}

/// A request to draw (or redraw) a lot's test-location plan.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"seed": 42, "edge_m": 0.3}))]
pub struct PlanInput {
    /// The seed; a fresh random one when absent (stored either way).
    #[serde(default)]
    #[schema(minimum = 0)]
    pub seed: Option<u64>,
    /// Least distance from the lot's edges, m (default 0.3).
    #[serde(default)]
    #[schema(minimum = 0.0, maximum = 1000.0)]
    pub edge_m: f64,
    #[serde(default)]
    pub exclusions: Vec<Exclusion>,
    /// Why the lot is replanned (required when it already has a plan).
    #[serde(default)]
    #[schema(max_length = 1000, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub reason: String,
}

/// A clause's planning terms.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"plan_tolerance_m": 5.0, "one_point_allowed": true, "one_point_dry_window_pct": 4.0}))]
pub struct PlanningTermsInput {
    /// How far a test may lie from its planned location, m.
    #[schema(minimum = 0.1, maximum = 1000.0)]
    pub plan_tolerance_m: f64,
    /// Whether a one-point check may be a test's reference.
    pub one_point_allowed: bool,
    /// How far dry of optimum a one-point check may be, percentage points.
    #[schema(minimum = 0.1, maximum = 10.0)]
    pub one_point_dry_window_pct: f64,
}

/// A one-point check (AASHTO T 272).
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "OP-1", "tested_on": "2026-03-05", "effort": "astm_d698_4in",
    "wet_density_kg_m3": 2080.0, "water_content_pct": 11.5}))]
pub struct OnePointInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    #[schema(format = Date)]
    pub tested_on: String,
    /// The effort code of the family (the reference effort).
    pub effort: Effort,
    /// Wet density of the compacted specimen, kg/m³.
    #[schema(minimum = 500.0, maximum = 3500.0)]
    pub wet_density_kg_m3: f64,
    /// Water content of the specimen, percent.
    #[schema(minimum = 0.0, maximum = 100.0)]
    pub water_content_pct: f64,
    /// The field test this check is the reference of, if any.
    #[serde(default)]
    pub field_test_id: Option<i64>,
}

/// A new instrument; a calibration date registers its first calibration.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"kind": "nuclear_gauge", "serial": "NG-31", "calibrated_on": "2026-01-05", "due_on": "2027-01-05"}))]
pub struct InstrumentInput {
    pub kind: InstrumentKind,
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub serial: String,
    #[serde(default)]
    #[schema(max_length = 200, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub description: String,
    #[schema(format = Date)]
    pub calibrated_on: Option<String>,
    #[schema(format = Date)]
    pub due_on: Option<String>,
    /// Sand filling cone and plate, g (sand cones).
    pub cone_sand_mass_g: Option<f64>,
    /// Bulk density of the sand, kg/m³ (sand batches).
    pub sand_density_kg_m3: Option<f64>,
    /// Calibrated volume, cm³ (drive cylinders, balloons).
    #[schema(minimum = 100.0, maximum = 10000.0)]
    pub volume_cm3: Option<f64>,
}

/// A calibration, leak test or licence record.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"kind": "leak_test", "done_on": "2026-02-01", "due_on": "2026-08-01", "reference": "LT-99"}))]
pub struct InstrumentRecordInput {
    pub kind: RecordKind,
    #[schema(format = Date)]
    pub done_on: String,
    #[schema(format = Date)]
    pub due_on: Option<String>,
    #[serde(default)]
    #[schema(max_length = 120, pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*$")]
    pub reference: String,
    pub cone_sand_mass_g: Option<f64>,
    pub sand_density_kg_m3: Option<f64>,
    /// Calibrated volume, cm³.
    #[schema(minimum = 100.0, maximum = 10000.0)]
    pub volume_cm3: Option<f64>,
}

/// An instrument assigned to a project from a date.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"project_id": 1, "from_on": "2026-03-01"}))]
pub struct AssignmentInput {
    pub project_id: i64,
    #[schema(format = Date)]
    pub from_on: String,
    #[schema(format = Date)]
    pub to_on: Option<String>,
}

/// A gauge operator with certification and expiry.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"code": "OP-7", "name": "R. Jones", "certification": "RSO-2291", "expires_on": "2027-06-30"}))]
pub struct OperatorInput {
    #[schema(pattern = r"^\s*[A-Za-z0-9._/-]{1,24}\s*$")]
    pub code: String,
    #[schema(
        max_length = 80,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub name: String,
    /// The licence or certification held (its reference).
    #[schema(
        max_length = 120,
        pattern = r"^[^\x00-\x09\x0b-\x1f\x7f-\x9f]*[^\s\x00-\x1f\x7f-\x9f][^\x00-\x09\x0b-\x1f\x7f-\x9f]*$"
    )]
    pub certification: String,
    #[schema(format = Date)]
    pub expires_on: String,
}

/// A gauge's daily standard count.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"project_id": 1, "counted_on": "2026-03-02", "density_count": 2810, "moisture_count": 640}))]
pub struct StandardCountInput {
    /// The project whose tolerances judge it (the gauge must be assigned to it that day).
    pub project_id: i64,
    #[schema(format = Date)]
    pub counted_on: String,
    #[schema(minimum = 1, maximum = 10000000)]
    pub density_count: i64,
    #[schema(minimum = 1, maximum = 10000000)]
    pub moisture_count: i64,
}

/// A project's standard-count tolerances.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"density_pct": 1.0, "moisture_pct": 2.0}))]
pub struct TolerancesInput {
    /// Largest deviation of a density count from the mean of the last four, percent.
    #[schema(minimum = 0.1, maximum = 10.0)]
    pub density_pct: f64,
    /// Largest deviation of a moisture count from the mean of the last four, percent.
    #[schema(minimum = 0.1, maximum = 10.0)]
    pub moisture_pct: f64,
}

/// A clause's policy for tests from an instrument out of check.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"record_out_of_check": true}))]
pub struct InstrumentPolicyInput {
    /// True: such tests are recorded and marked; false: refused.
    pub record_out_of_check: bool,
}

/// One spot tested both by the gauge and by a reference method.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct OffsetPair {
    /// Wet density read by the gauge, kg/m³.
    #[schema(exclusive_minimum = 0.0, maximum = 3000.0)]
    pub gauge_wet_density_kg_m3: f64,
    /// Wet density by the reference method on the same spot, kg/m³.
    #[schema(exclusive_minimum = 0.0, maximum = 3000.0)]
    pub reference_wet_density_kg_m3: f64,
    /// Water content shown by the gauge, percent.
    #[schema(exclusive_minimum = 0.0, maximum = 100.0)]
    pub gauge_water_content_pct: f64,
    /// Oven water content of the same material (ASTM D2216), percent.
    #[schema(exclusive_minimum = 0.0, maximum = 100.0)]
    pub oven_water_content_pct: f64,
}

/// A gauge's material offsets from at least three pairs.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"source_id": 1, "mode": "direct_transmission", "effective_on": "2026-03-01", "pairs": [
    {"gauge_wet_density_kg_m3": 2050.0, "reference_wet_density_kg_m3": 2030.0, "gauge_water_content_pct": 11.0, "oven_water_content_pct": 11.8},
    {"gauge_wet_density_kg_m3": 2060.0, "reference_wet_density_kg_m3": 2041.0, "gauge_water_content_pct": 10.5, "oven_water_content_pct": 11.2},
    {"gauge_wet_density_kg_m3": 2040.0, "reference_wet_density_kg_m3": 2022.0, "gauge_water_content_pct": 11.4, "oven_water_content_pct": 12.1}]}))]
pub struct OffsetInput {
    pub source_id: i64,
    pub mode: GaugeMode,
    #[schema(format = Date)]
    pub effective_on: String,
    #[schema(min_items = 3)]
    pub pairs: Vec<OffsetPair>,
}

/// A column mapping for CSV imports, saved under a name.
#[derive(Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
#[schema(example = json!({"name": "lab-export", "mapping": {"columns": {"No": "number", "Chainage": "chainage"}, "method": "nuclear"}}))]
pub struct MappingInput {
    pub name: String,
    /// `columns` (file column → field), and optionally `method`, `units` (`si`/`us`),
    /// `chainage` (`km_metre`/`feet_station`/`metres`) and `separator`.
    #[schema(value_type = Object)]
    pub mapping: serde_json::Value,
}
