//! The API's answers: serde structs of their own, built from database rows and ledger
//! results, so the schema of the database is not the API. Booleans are booleans, stored
//! JSON columns are objects, every quantity carries its unit in its name, and times are
//! RFC 3339 (`format: date-time`) or dates (`format: date`).

pub mod accounts;
pub mod planning;
pub mod register;
pub mod setup;
pub mod tests;

use serde::Serialize;
use serde_json::Value;
use utoipa::ToSchema;

pub use accounts::*;
pub use planning::*;
pub use register::*;
pub use setup::*;
pub use tests::*;

/// A stored JSON column as a value (null if it cannot be read, which a write never leaves).
pub fn json_column(text: &str) -> Value {
    serde_json::from_str(text).unwrap_or(Value::Null)
}

/// An optional stored JSON column as a value.
pub fn optional_json_column(text: Option<&str>) -> Option<Value> {
    text.map(json_column)
}

/// One page of lots.
#[derive(Debug, Serialize, ToSchema)]
pub struct LotPage {
    pub lots: Vec<LotAnswer>,
    /// The page size used.
    pub limit: i64,
    /// Lots skipped before this page.
    pub offset: i64,
}

/// One page of field tests.
#[derive(Debug, Serialize, ToSchema)]
pub struct FieldTestPage {
    pub field_tests: Vec<FieldTestAnswer>,
    pub limit: i64,
    pub offset: i64,
}

/// A lot's state changes and audit trail.
#[derive(Debug, Serialize, ToSchema)]
pub struct LotHistoryAnswer {
    pub transitions: Vec<TransitionAnswer>,
    pub audit: Vec<AuditAnswer>,
}

/// The lots a split made.
#[derive(Debug, Serialize, ToSchema)]
pub struct SplitAnswer {
    pub lot_ids: Vec<i64>,
}

/// A certificate revision and whether it is the lot's current one.
#[derive(Debug, Serialize, ToSchema)]
pub struct CertificateStatusAnswer {
    pub certificate: CertificateAnswer,
    /// Neither superseded nor withdrawn.
    pub current: bool,
}

/// A saved import mapping.
#[derive(Debug, Serialize, ToSchema)]
pub struct MappingAnswer {
    pub id: i64,
    pub name: String,
}

/// What an import found, and what it created or would create.
#[derive(Debug, Serialize, ToSchema)]
pub struct ImportAnswer {
    /// The report in one sentence.
    pub summary: String,
    /// Rows, new tests per lot, rows skipped, conflicts and problems by row.
    #[schema(value_type = Object)]
    pub report: Value,
}

/// A fitted compaction curve.
#[derive(Debug, Serialize, ToSchema)]
pub struct LabCurveAnswer {
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
    pub fit_method: String,
    pub warnings: Vec<CodedMessage>,
    /// The fitted curve for plotting.
    pub curve: Vec<CurvePointAnswer>,
    /// The zero-air-voids line for plotting.
    pub zero_air_voids: Vec<CurvePointAnswer>,
}

/// A point of a curve.
#[derive(Debug, Serialize, ToSchema)]
pub struct CurvePointAnswer {
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
}

/// A warning with a stable code.
#[derive(Debug, Serialize, ToSchema)]
pub struct CodedMessage {
    pub code: String,
    pub message: String,
}

/// Field readings reduced.
#[derive(Debug, Serialize, ToSchema)]
pub struct FieldDensityAnswer {
    pub wet_density_kg_m3: f64,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    #[schema(value_type = super::codes::MoistureSource)]
    pub moisture_source: String,
    /// With `max_dry_density_kg_m3` given.
    #[serde(skip_serializing_if = "Option::is_none")]
    #[schema(nullable = false)]
    pub relative_compaction_pct: Option<f64>,
    /// With `optimum_water_content_pct` given: water content − OMC, percentage points.
    #[serde(skip_serializing_if = "Option::is_none")]
    #[schema(nullable = false)]
    pub moisture_deviation_pct: Option<f64>,
}

/// A density and water content corrected for oversize.
#[derive(Debug, Serialize, ToSchema)]
pub struct OversizeAnswer {
    pub dry_density_kg_m3: f64,
    pub water_content_pct: f64,
}

/// Relative compaction values judged under a rule.
#[derive(Debug, Serialize, ToSchema)]
pub struct AcceptanceAnswer {
    pub n: usize,
    /// Mean relative compaction, percent.
    pub mean_pct: f64,
    /// Standard deviation, percent.
    pub std_dev_pct: Option<f64>,
    /// Quality index (dimensionless).
    pub quality_index: Option<f64>,
    /// Percent within limits.
    pub pwl_pct: Option<f64>,
    pub accepted: bool,
    pub reasons: Vec<String>,
}

/// What a verification found (the shape `ledger::verify::verify` answers).
#[derive(Debug, Serialize, ToSchema)]
#[allow(dead_code)]
pub struct VerifyAnswer {
    /// Whether a certificate matches.
    pub found: bool,
    /// What it was matched by: verification code, SHA-256 or uploaded PDF.
    pub matched_by: String,
    /// The finding in words (genuine and current, superseded, withdrawn, or no match).
    pub message: String,
    /// Present when found.
    #[schema(nullable = false)]
    pub withdrawn: Option<bool>,
    pub withdrawn_reason: Option<String>,
    /// Present when found.
    #[schema(nullable = false)]
    pub certificate: Option<CertificateAnswer>,
    pub lot_code: Option<String>,
    /// Present when found: neither superseded nor withdrawn.
    #[schema(nullable = false)]
    pub current: Option<bool>,
}
