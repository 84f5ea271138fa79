//! Answers about what is set up in a project: the project, clauses, sources, lab tests,
//! layers, lots, moulds, and the history rows of any record.

use serde::Serialize;
use serde_json::Value;
use utoipa::ToSchema;

use super::{json_column, optional_json_column};
use crate::db;
use crate::http::api::codes;

/// A project.
#[derive(Debug, Serialize, ToSchema)]
#[schema(example = json!({"id": 1, "code": "P-7", "name": "Northern bypass", "contract": "C-204", "client": "County roads",
    "contractor": "Earthmovers Ltd", "unit_system": "si", "chainage_style": "km_metre", "created_at": "2026-03-01T08:00:00Z"}))]
pub struct ProjectAnswer {
    pub id: i64,
    pub code: String,
    pub name: String,
    pub contract: String,
    pub client: String,
    pub contractor: String,
    #[schema(value_type = codes::UnitSystem)]
    pub unit_system: String,
    #[schema(value_type = codes::ChainageStyle)]
    pub chainage_style: String,
    #[schema(format = DateTime)]
    pub created_at: String,
}

impl From<db::projects::Project> for ProjectAnswer {
    fn from(p: db::projects::Project) -> Self {
        Self {
            id: p.id,
            code: p.code,
            name: p.name,
            contract: p.contract,
            client: p.client,
            contractor: p.contractor,
            unit_system: p.unit_system,
            chainage_style: p.chainage_style,
            created_at: p.created_at,
        }
    }
}

/// A specification clause as stored (defaults filled in).
#[derive(Debug, Serialize, ToSchema)]
pub struct ClauseAnswer {
    pub id: i64,
    pub project_id: i64,
    pub code: String,
    pub title: String,
    /// Least relative compaction, percent.
    pub rc_min_pct: f64,
    /// Percentage points allowed below OMC.
    pub moisture_below_pct: f64,
    /// Percentage points allowed above OMC.
    pub moisture_above_pct: f64,
    #[schema(value_type = codes::ClauseEffort)]
    pub effort: crate::domain::ClauseEffort,
    #[schema(value_type = codes::Rule)]
    pub rule: crate::domain::Rule,
    pub allowance_pct: Option<f64>,
    pub min_pwl_pct: Option<f64>,
    pub area_per_test_m2: Option<f64>,
    pub length_per_test_m: Option<f64>,
    pub min_tests_per_lot: i64,
    pub oversize_limit_pct: f64,
    #[schema(format = DateTime)]
    pub created_at: String,
    #[schema(value_type = codes::MoistureJudgement)]
    pub moisture_judgement: crate::domain::MoistureMode,
    pub moisture_min_pwl_pct: Option<f64>,
    pub rc_plausible_max_pct: f64,
    #[schema(value_type = codes::Rounding)]
    pub rounding: crate::reduction::rounding::RoundingMethod,
    pub limit_decimals: i64,
    pub oversize_sieve_mm: f64,
    pub coarse_water_default_pct: Option<f64>,
    #[schema(value_type = codes::MoistureBasis)]
    pub moisture_basis: crate::domain::MoistureBasis,
    pub moisture_low_pct: Option<f64>,
    pub moisture_high_pct: Option<f64>,
    pub max_air_voids_pct: Option<f64>,
}

impl From<db::clauses::Clause> for ClauseAnswer {
    fn from(c: db::clauses::Clause) -> Self {
        Self {
            id: c.id,
            project_id: c.project_id,
            code: c.code,
            title: c.title,
            rc_min_pct: c.rc_min_pct,
            moisture_below_pct: c.moisture_below_pct,
            moisture_above_pct: c.moisture_above_pct,
            effort: c.effort,
            rule: c.rule,
            allowance_pct: c.allowance_pct,
            min_pwl_pct: c.min_pwl_pct,
            area_per_test_m2: c.area_per_test_m2,
            length_per_test_m: c.length_per_test_m,
            min_tests_per_lot: c.min_tests_per_lot,
            oversize_limit_pct: c.oversize_limit_pct,
            created_at: c.created_at,
            moisture_judgement: c.moisture_judgement,
            moisture_min_pwl_pct: c.moisture_min_pwl_pct,
            rc_plausible_max_pct: c.rc_plausible_max_pct,
            rounding: c.rounding,
            limit_decimals: c.limit_decimals,
            oversize_sieve_mm: c.oversize_sieve_mm,
            coarse_water_default_pct: c.coarse_water_default_pct,
            moisture_basis: c.moisture_basis,
            moisture_low_pct: c.moisture_low_pct,
            moisture_high_pct: c.moisture_high_pct,
            max_air_voids_pct: c.max_air_voids_pct,
        }
    }
}

/// A borrow source.
#[derive(Debug, Serialize, ToSchema)]
pub struct SourceAnswer {
    pub id: i64,
    pub project_id: i64,
    pub code: String,
    pub name: String,
    pub description: String,
    pub uscs_class: String,
    pub aashto_class: String,
    /// Specific gravity of the solids.
    pub gs_fines: f64,
    /// Bulk specific gravity of the oversize.
    pub gs_coarse: Option<f64>,
    #[schema(format = DateTime)]
    pub created_at: String,
}

impl From<db::sources::Source> for SourceAnswer {
    fn from(s: db::sources::Source) -> Self {
        Self {
            id: s.id,
            project_id: s.project_id,
            code: s.code,
            name: s.name,
            description: s.description,
            uscs_class: s.uscs_class,
            aashto_class: s.aashto_class,
            gs_fines: s.gs_fines,
            gs_coarse: s.gs_coarse,
            created_at: s.created_at,
        }
    }
}

/// A lab compaction test with its fitted curve.
#[derive(Debug, Serialize, ToSchema)]
pub struct LabTestAnswer {
    pub id: i64,
    pub source_id: i64,
    pub code: String,
    #[schema(format = Date)]
    pub tested_on: String,
    #[schema(value_type = codes::LabEffort)]
    pub effort: crate::domain::LabEffort,
    #[schema(value_type = codes::EffortFamily)]
    pub effort_family: String,
    /// Compactive energy, kJ/m³.
    pub effort_energy_kj_m3: f64,
    pub specific_gravity: f64,
    /// The specimens as entered and reduced (`water_content_pct`, `dry_density_kg_m3`, …).
    #[schema(value_type = Vec<Object>)]
    pub points: Value,
    /// Maximum dry density of the fitted curve, kg/m³.
    pub max_dry_density_kg_m3: f64,
    /// Optimum water content of the fitted curve, percent.
    pub optimum_water_content_pct: f64,
    pub fit_method: String,
    /// Warnings of the fit (`code`, `message`).
    #[schema(value_type = Vec<Object>)]
    pub warnings: Value,
    pub reduction_version: String,
    #[schema(value_type = codes::LabStatus)]
    pub status: String,
    pub superseded_reason: Option<String>,
    #[schema(format = DateTime)]
    pub superseded_at: Option<String>,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
    #[schema(value_type = codes::Approval)]
    pub approval: String,
    /// What the quality rules found (`code`, `message`).
    #[schema(value_type = Vec<Object>)]
    pub approval_concerns: Value,
    pub approval_reason: Option<String>,
    pub approved_by: Option<String>,
    #[schema(format = DateTime)]
    pub approved_at: Option<String>,
    /// Whether the curve was checked by the quality rules when stored.
    pub quality_checked: bool,
}

impl From<db::lab_tests::LabTest> for LabTestAnswer {
    fn from(t: db::lab_tests::LabTest) -> Self {
        let effort_family = crate::ledger::reference::lab_family(&t).code().to_string();
        Self {
            id: t.id,
            source_id: t.source_id,
            code: t.code,
            tested_on: t.tested_on,
            effort: t.effort,
            effort_family,
            effort_energy_kj_m3: t.effort_energy_kj_m3,
            specific_gravity: t.specific_gravity,
            points: json_column(&t.points_json),
            max_dry_density_kg_m3: t.max_dry_density_kg_m3,
            optimum_water_content_pct: t.optimum_water_content_pct,
            fit_method: t.fit_method,
            warnings: json_column(&t.warnings_json),
            reduction_version: t.reduction_version,
            status: t.status.to_string(),
            superseded_reason: t.superseded_reason,
            superseded_at: t.superseded_at,
            created_at: t.created_at,
            created_by: t.created_by,
            approval: t.approval.to_string(),
            approval_concerns: json_column(&t.approval_concerns_json),
            approval_reason: t.approval_reason,
            approved_by: t.approved_by,
            approved_at: t.approved_at,
            quality_checked: t.quality_checked != 0,
        }
    }
}

/// A layer of a zone.
#[derive(Debug, Serialize, ToSchema)]
pub struct LayerAnswer {
    pub id: i64,
    pub project_id: i64,
    pub zone_id: i64,
    pub zone_name: String,
    pub zone_position: i64,
    pub number: i64,
    pub thickness_mm: Option<f64>,
    #[schema(format = DateTime)]
    pub created_at: String,
}

impl From<db::layers::Layer> for LayerAnswer {
    fn from(l: db::layers::Layer) -> Self {
        Self {
            id: l.id,
            project_id: l.project_id,
            zone_id: l.zone_id,
            zone_name: l.zone_name,
            zone_position: l.zone_position,
            number: l.number,
            thickness_mm: l.thickness_mm,
            created_at: l.created_at,
        }
    }
}

/// A lot as stored.
#[derive(Debug, Serialize, ToSchema)]
pub struct LotAnswer {
    pub id: i64,
    pub project_id: i64,
    pub layer_id: i64,
    pub code: String,
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
    pub offset_left_m: f64,
    pub offset_right_m: f64,
    pub clause_id: i64,
    pub source_id: i64,
    pub lab_test_id: i64,
    #[schema(value_type = codes::LotState)]
    pub state: String,
    #[schema(format = DateTime)]
    pub state_changed_at: String,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
    pub zone_name: String,
    pub zone_position: i64,
    pub layer_number: i64,
    pub layer_thickness_mm: Option<f64>,
    /// Which random sample the lot is judged on (1 unless re-sampled).
    pub sample: i64,
    /// Tests up to this id belong to earlier samples.
    pub sample_after_test_id: Option<i64>,
}

impl From<db::lots::Lot> for LotAnswer {
    fn from(l: db::lots::Lot) -> Self {
        Self {
            id: l.id,
            project_id: l.project_id,
            layer_id: l.layer_id,
            code: l.code,
            chainage_from_m: l.chainage_from_m,
            chainage_to_m: l.chainage_to_m,
            offset_left_m: l.offset_left_m,
            offset_right_m: l.offset_right_m,
            clause_id: l.clause_id,
            source_id: l.source_id,
            lab_test_id: l.lab_test_id,
            state: l.state.to_string(),
            state_changed_at: l.state_changed_at,
            created_at: l.created_at,
            created_by: l.created_by,
            zone_name: l.zone_name,
            zone_position: l.zone_position,
            layer_number: l.layer_number,
            layer_thickness_mm: l.layer_thickness_mm,
            sample: l.sample,
            sample_after_test_id: l.sample_after_test_id,
        }
    }
}

/// A registered compaction mould.
#[derive(Debug, Serialize, ToSchema)]
pub struct MouldAnswer {
    pub id: i64,
    pub project_id: i64,
    pub code: String,
    /// Calibrated volume, cm³.
    pub volume_cm3: f64,
    /// The empty mould's mass, g.
    pub mass_g: Option<f64>,
    #[schema(format = Date)]
    pub calibrated_on: String,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<db::moulds::Mould> for MouldAnswer {
    fn from(m: db::moulds::Mould) -> Self {
        Self {
            id: m.id,
            project_id: m.project_id,
            code: m.code,
            volume_cm3: m.volume_cm3,
            mass_g: m.mass_g,
            calibrated_on: m.calibrated_on,
            created_at: m.created_at,
            created_by: m.created_by,
        }
    }
}

/// One audited change of a record.
#[derive(Debug, Serialize, ToSchema)]
pub struct AuditAnswer {
    pub id: i64,
    #[schema(format = DateTime)]
    pub at: String,
    pub actor: String,
    pub action: String,
    pub entity: String,
    pub entity_id: Option<i64>,
    pub project_id: Option<i64>,
    /// The record before the change, when there was one.
    #[schema(value_type = Option<Object>)]
    pub before: Option<Value>,
    /// The record after the change, when there is one.
    #[schema(value_type = Option<Object>)]
    pub after: Option<Value>,
    /// Where the change came from (`web`, `api`, `import`, …).
    pub origin: String,
}

impl From<db::audit::AuditEntry> for AuditAnswer {
    fn from(a: db::audit::AuditEntry) -> Self {
        Self {
            id: a.id,
            at: a.at,
            actor: a.actor,
            action: a.action,
            entity: a.entity,
            entity_id: a.entity_id,
            project_id: a.project_id,
            before: optional_json_column(a.before_json.as_deref()),
            after: optional_json_column(a.after_json.as_deref()),
            origin: a.origin,
        }
    }
}

/// A lot's change of state.
#[derive(Debug, Serialize, ToSchema)]
pub struct TransitionAnswer {
    pub id: i64,
    pub lot_id: i64,
    #[schema(value_type = codes::LotState)]
    pub from_state: String,
    #[schema(value_type = codes::LotState)]
    pub to_state: String,
    pub actor: String,
    #[schema(format = DateTime)]
    pub at: String,
    pub comment: String,
}

impl From<db::lots::Transition> for TransitionAnswer {
    fn from(t: db::lots::Transition) -> Self {
        Self {
            id: t.id,
            lot_id: t.lot_id,
            from_state: t.from_state.to_string(),
            to_state: t.to_state.to_string(),
            actor: t.actor,
            at: t.at,
            comment: t.comment,
        }
    }
}
