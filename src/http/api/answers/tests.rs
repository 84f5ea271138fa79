//! Answers about field tests, lots as judged, and certificates.

use serde::Serialize;
use serde_json::Value;
use utoipa::ToSchema;

use super::json_column;
use super::setup::{ClauseAnswer, LabTestAnswer, LotAnswer, ProjectAnswer, SourceAnswer};
use crate::db;
use crate::http::api::codes;
use crate::ledger::lot_report::{LotReport, TestLine, TestWindow, Verdict};

/// A stored field test with its readings as entered.
#[derive(Debug, Serialize, ToSchema)]
pub struct FieldTestAnswer {
    pub id: i64,
    pub project_id: i64,
    pub lot_id: i64,
    pub number: String,
    #[schema(format = DateTime)]
    pub tested_at: String,
    pub technician: String,
    #[schema(value_type = codes::Method)]
    pub method: String,
    pub instrument_serial: String,
    pub chainage_m: f64,
    pub offset_m: f64,
    pub depth_mm: Option<f64>,
    /// Oversize fraction, percent by dry mass.
    pub coarse_pct: Option<f64>,
    pub coarse_water_content_pct: Option<f64>,
    /// Grid easting, m.
    pub easting: Option<f64>,
    /// Grid northing, m.
    pub northing: Option<f64>,
    /// The readings as entered (the request's `readings`, with its `method`).
    #[schema(value_type = super::super::bodies::Readings)]
    pub readings: Value,
    pub wet_density_kg_m3: f64,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    #[schema(value_type = codes::MoistureSource)]
    pub moisture_source: String,
    pub reduction_version: String,
    /// The failed test this one retests.
    pub retest_of: Option<i64>,
    pub void_reason: Option<String>,
    pub voided_by: Option<String>,
    #[schema(format = DateTime)]
    pub voided_at: Option<String>,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
    #[schema(value_type = codes::InstrumentCheck)]
    pub instrument_check: crate::reduction::instruments::InstrumentCheck,
    pub instrument_note: Option<String>,
    pub operator_id: Option<i64>,
    /// Gauge density offset applied to the reading, kg/m³.
    pub density_offset_kg_m3: Option<f64>,
    /// Gauge moisture offset applied to the reading, percentage points.
    pub moisture_offset_pct: Option<f64>,
}

impl From<&db::field_tests::FieldTest> for FieldTestAnswer {
    fn from(t: &db::field_tests::FieldTest) -> Self {
        Self {
            id: t.id,
            project_id: t.project_id,
            lot_id: t.lot_id,
            number: t.number.clone(),
            tested_at: t.tested_at.clone(),
            technician: t.technician.clone(),
            method: t.method.to_string(),
            instrument_serial: t.instrument_serial.clone(),
            chainage_m: t.chainage_m,
            offset_m: t.offset_m,
            depth_mm: t.depth_mm,
            coarse_pct: t.coarse_pct,
            coarse_water_content_pct: t.coarse_water_content_pct,
            easting: t.easting,
            northing: t.northing,
            readings: json_column(&t.readings_json),
            wet_density_kg_m3: t.wet_density_kg_m3,
            water_content_pct: t.water_content_pct,
            dry_density_kg_m3: t.dry_density_kg_m3,
            moisture_source: t.moisture_source.clone(),
            reduction_version: t.reduction_version.clone(),
            retest_of: t.retest_of,
            void_reason: t.void_reason.clone(),
            voided_by: t.voided_by.clone(),
            voided_at: t.voided_at.clone(),
            created_at: t.created_at.clone(),
            created_by: t.created_by.clone(),
            instrument_check: t.instrument_check,
            instrument_note: t.instrument_note.clone(),
            operator_id: t.operator_id,
            density_offset_kg_m3: t.density_offset_kg_m3,
            moisture_offset_pct: t.moisture_offset_pct,
        }
    }
}

/// A field test with its verdict inside its lot.
#[derive(Debug, Serialize, ToSchema)]
pub struct JudgedTestAnswer {
    #[serde(flatten)]
    pub test: FieldTestAnswer,
    pub relative_compaction_pct: Option<f64>,
    /// Water content minus the reference OMC, percentage points.
    pub moisture_deviation_pct: Option<f64>,
    /// MDD the test was judged against, kg/m³ (oversize-corrected when it has a coarse fraction).
    pub reference_mdd_kg_m3: Option<f64>,
    /// OMC the test was judged against, percent.
    pub reference_omc_pct: Option<f64>,
    pub passed: bool,
    #[schema(value_type = codes::Standing)]
    pub standing: String,
    /// Number of the test that supersedes this one.
    pub superseded_by: Option<String>,
    pub reasons: Vec<String>,
    #[schema(value_type = codes::TestResult)]
    pub result: String,
    /// Why the test cannot be judged, when it cannot.
    pub unjudged_reason: Option<String>,
    /// Plausibility warnings (`code`, `message`).
    #[schema(value_type = Vec<Object>)]
    pub flags: Value,
}

impl JudgedTestAnswer {
    /// The test with its line in the lot report.
    pub fn new(t: &db::field_tests::FieldTest, l: &TestLine) -> Self {
        Self {
            test: t.into(),
            relative_compaction_pct: l.relative_compaction_pct,
            moisture_deviation_pct: l.moisture_deviation_pct,
            reference_mdd_kg_m3: l.reference_mdd_kg_m3,
            reference_omc_pct: l.reference_omc_pct,
            passed: l.passed,
            standing: l.standing.to_string(),
            superseded_by: l.superseded_by.clone(),
            reasons: l.reasons.clone(),
            result: l.result().to_string(),
            unjudged_reason: l.unjudged_reason.clone(),
            flags: serde_json::to_value(&l.flags).unwrap_or(Value::Null),
        }
    }
}

/// One test as judged inside its lot report.
#[derive(Debug, Serialize, ToSchema)]
pub struct TestLineAnswer {
    pub test: FieldTestAnswer,
    pub reference_mdd_kg_m3: Option<f64>,
    pub reference_omc_pct: Option<f64>,
    pub relative_compaction_pct: Option<f64>,
    pub moisture_deviation_pct: Option<f64>,
    /// Air voids, percent, when the clause sets a maximum.
    pub air_voids_pct: Option<f64>,
    pub passed: bool,
    #[schema(value_type = codes::Standing)]
    pub standing: String,
    pub unjudged_reason: Option<String>,
    #[schema(value_type = Vec<Object>)]
    pub flags: Value,
    /// The clause's coarse water content, percent, when the oversize correction assumed it.
    pub coarse_water_assumed_pct: Option<f64>,
    pub superseded_by: Option<String>,
    pub retest_of_number: Option<String>,
    pub reasons: Vec<String>,
    /// The one-point check the test was judged against, when one is.
    pub one_point_code: Option<String>,
    /// The test's nearest planned location (`sublot`, `chainage_diff_m`, `offset_diff_m`,
    /// `distance_m`, `misplaced`), when the lot has a plan.
    #[schema(value_type = Option<Object>)]
    pub plan_match: Option<Value>,
}

impl From<&TestLine> for TestLineAnswer {
    fn from(l: &TestLine) -> Self {
        Self {
            test: (&l.test).into(),
            reference_mdd_kg_m3: l.reference_mdd_kg_m3,
            reference_omc_pct: l.reference_omc_pct,
            relative_compaction_pct: l.relative_compaction_pct,
            moisture_deviation_pct: l.moisture_deviation_pct,
            air_voids_pct: l.air_voids_pct,
            passed: l.passed,
            standing: l.standing.to_string(),
            unjudged_reason: l.unjudged_reason.clone(),
            flags: serde_json::to_value(&l.flags).unwrap_or(Value::Null),
            coarse_water_assumed_pct: l.coarse_water_assumed_pct,
            superseded_by: l.superseded_by.clone(),
            retest_of_number: l.retest_of_number.clone(),
            reasons: l.reasons.clone(),
            one_point_code: l.one_point_code.clone(),
            plan_match: l
                .plan_match
                .map(|m| serde_json::to_value(m).unwrap_or(Value::Null)),
        }
    }
}

/// The statistics and verdict of a lot; the statistics are of relative compaction.
#[derive(Debug, Serialize, ToSchema)]
pub struct VerdictAnswer {
    #[schema(value_type = codes::Rule)]
    pub rule: String,
    pub rule_label: String,
    /// Tests counted.
    pub n: usize,
    /// Mean relative compaction, percent.
    pub mean_pct: Option<f64>,
    /// Standard deviation of relative compaction, percent.
    pub std_dev_pct: Option<f64>,
    pub min_pct: Option<f64>,
    pub max_pct: Option<f64>,
    /// Quality index (dimensionless).
    pub quality_index: Option<f64>,
    /// Percent within limits.
    pub pwl_pct: Option<f64>,
    /// How moisture is judged, in words.
    pub moisture_judgement: String,
    pub moisture_window: String,
    pub air_voids_limit: Option<String>,
    /// Two-sided moisture percent within limits.
    pub moisture_pwl_pct: Option<f64>,
    /// Tests that stand for their location but cannot be judged.
    pub unjudged: usize,
    pub accepted: bool,
    pub reasons: Vec<String>,
}

impl From<&Verdict> for VerdictAnswer {
    fn from(v: &Verdict) -> Self {
        Self {
            rule: v.rule.to_string(),
            rule_label: v.rule_label.clone(),
            n: v.n,
            mean_pct: v.mean,
            std_dev_pct: v.std_dev,
            min_pct: v.min,
            max_pct: v.max,
            quality_index: v.quality_index,
            pwl_pct: v.pwl,
            moisture_judgement: v.moisture_judgement.clone(),
            moisture_window: v.moisture_window.clone(),
            air_voids_limit: v.air_voids_limit.clone(),
            moisture_pwl_pct: v.moisture_pwl,
            unjudged: v.unjudged,
            accepted: v.accepted,
            reasons: v.reasons.clone(),
        }
    }
}

/// A certificate revision.
#[derive(Debug, Serialize, ToSchema)]
pub struct CertificateAnswer {
    pub id: i64,
    pub project_id: i64,
    pub lot_id: i64,
    pub sequence: i64,
    pub revision: i64,
    pub number: String,
    pub verification_code: String,
    /// SHA-256 of the issued PDF, hex.
    pub sha256: String,
    /// The lot's record fingerprint when issued.
    pub record_fingerprint: String,
    #[schema(format = DateTime)]
    pub issued_at: String,
    pub issued_by: String,
    #[schema(format = DateTime)]
    pub superseded_at: Option<String>,
    #[schema(format = DateTime)]
    pub withdrawn_at: Option<String>,
    pub withdrawn_by: Option<String>,
    pub withdrawn_reason: Option<String>,
}

impl From<db::certificates::Certificate> for CertificateAnswer {
    fn from(c: db::certificates::Certificate) -> Self {
        Self {
            id: c.id,
            project_id: c.project_id,
            lot_id: c.lot_id,
            sequence: c.sequence,
            revision: c.revision,
            number: c.number,
            verification_code: c.verification_code,
            sha256: c.sha256,
            record_fingerprint: c.record_fingerprint,
            issued_at: c.issued_at,
            issued_by: c.issued_by,
            superseded_at: c.superseded_at,
            withdrawn_at: c.withdrawn_at,
            withdrawn_by: c.withdrawn_by,
            withdrawn_reason: c.withdrawn_reason,
        }
    }
}

/// A lot judged now: its tests, verdict, tests owed and certificate currency.
#[derive(Debug, Serialize, ToSchema)]
pub struct LotReportAnswer {
    pub lot: LotAnswer,
    pub project: ProjectAnswer,
    pub clause: ClauseAnswer,
    pub source: SourceAnswer,
    pub lab_test: LabTestAnswer,
    /// The lot's test lines from `tests_offset`, at most `tests_limit` of them (the verdict,
    /// statistics and counts cover every test).
    pub tests: Vec<TestLineAnswer>,
    /// Lines skipped before the first listed.
    pub tests_offset: usize,
    /// Most lines listed in this answer.
    pub tests_limit: usize,
    /// Tests entered on the lot, voided and superseded ones included.
    pub tests_entered: usize,
    pub verdict: VerdictAnswer,
    pub length_m: f64,
    pub width_m: f64,
    pub area_m2: f64,
    pub tests_required: u32,
    pub tests_owed: u32,
    /// Numbers of failed tests that still need a passing retest.
    pub failing_without_retest: Vec<String>,
    #[schema(value_type = codes::DisplayState)]
    pub display_state: String,
    /// What must happen before the lot can be submitted (empty when it can).
    pub submit_blockers: Vec<String>,
    pub certificate: Option<CertificateAnswer>,
    /// False when the record changed after the current certificate was issued.
    pub certificate_current: bool,
    /// A hash of everything the verdict depends on.
    pub fingerprint: String,
}

impl From<LotReport> for LotReportAnswer {
    /// The answer with the lot's first [`TestWindow::API_DEFAULT`] lines.
    fn from(r: LotReport) -> Self {
        Self::windowed(r, TestWindow::API_DEFAULT)
    }
}

impl LotReportAnswer {
    /// The answer listing the lines inside `w`.
    pub fn windowed(r: LotReport, w: TestWindow) -> Self {
        Self {
            tests: r.lines_in(w).iter().map(TestLineAnswer::from).collect(),
            tests_offset: w.offset,
            tests_limit: w.limit,
            verdict: (&r.verdict).into(),
            lot: r.lot.into(),
            project: r.project.into(),
            clause: r.clause.into(),
            source: r.source.into(),
            lab_test: r.lab_test.into(),
            tests_entered: r.tests_entered,
            length_m: r.length_m,
            width_m: r.width_m,
            area_m2: r.area_m2,
            tests_required: r.tests_required,
            tests_owed: r.tests_owed,
            failing_without_retest: r.failing_without_retest,
            display_state: r.display_state.to_string(),
            submit_blockers: r.submit_blockers,
            certificate: r.certificate.map(Into::into),
            certificate_current: r.certificate_current,
            fingerprint: r.fingerprint,
        }
    }
}
