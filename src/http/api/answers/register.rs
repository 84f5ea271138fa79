//! Answers of the instrument register.

use serde::Serialize;
use serde_json::Value;
use utoipa::ToSchema;

use super::json_column;
use crate::db::instruments as rows;
use crate::http::api::codes;

/// A registered instrument.
#[derive(Debug, Serialize, ToSchema)]
pub struct InstrumentAnswer {
    pub id: i64,
    #[schema(value_type = codes::InstrumentKind)]
    pub kind: String,
    pub serial: String,
    pub description: String,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<&rows::Instrument> for InstrumentAnswer {
    fn from(i: &rows::Instrument) -> Self {
        Self {
            id: i.id,
            kind: i.kind.to_string(),
            serial: i.serial.clone(),
            description: i.description.clone(),
            created_at: i.created_at.clone(),
            created_by: i.created_by.clone(),
        }
    }
}

/// A calibration, leak test or licence of an instrument.
#[derive(Debug, Serialize, ToSchema)]
pub struct RecordAnswer {
    pub id: i64,
    pub instrument_id: i64,
    #[schema(value_type = codes::RecordKind)]
    pub kind: String,
    #[schema(format = Date)]
    pub done_on: String,
    #[schema(format = Date)]
    pub due_on: Option<String>,
    pub reference: String,
    /// Sand filling cone and plate, g.
    pub cone_sand_mass_g: Option<f64>,
    pub sand_density_kg_m3: Option<f64>,
    pub volume_cm3: Option<f64>,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<&rows::InstrumentRecord> for RecordAnswer {
    fn from(r: &rows::InstrumentRecord) -> Self {
        Self {
            id: r.id,
            instrument_id: r.instrument_id,
            kind: r.kind.to_string(),
            done_on: r.done_on.clone(),
            due_on: r.due_on.clone(),
            reference: r.reference.clone(),
            cone_sand_mass_g: r.cone_sand_mass_g,
            sand_density_kg_m3: r.sand_density_kg_m3,
            volume_cm3: r.volume_cm3,
            created_at: r.created_at.clone(),
            created_by: r.created_by.clone(),
        }
    }
}

/// An instrument's assignment to a project.
#[derive(Debug, Serialize, ToSchema)]
pub struct AssignmentAnswer {
    pub id: i64,
    pub instrument_id: i64,
    pub project_id: i64,
    #[schema(format = Date)]
    pub from_on: String,
    #[schema(format = Date)]
    pub to_on: Option<String>,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<&rows::Assignment> for AssignmentAnswer {
    fn from(a: &rows::Assignment) -> Self {
        Self {
            id: a.id,
            instrument_id: a.instrument_id,
            project_id: a.project_id,
            from_on: a.from_on.clone(),
            to_on: a.to_on.clone(),
            created_at: a.created_at.clone(),
            created_by: a.created_by.clone(),
        }
    }
}

/// A gauge operator.
#[derive(Debug, Serialize, ToSchema)]
pub struct OperatorAnswer {
    pub id: i64,
    pub code: String,
    pub name: String,
    pub certification: String,
    #[schema(format = Date)]
    pub expires_on: String,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<&rows::Operator> for OperatorAnswer {
    fn from(o: &rows::Operator) -> Self {
        Self {
            id: o.id,
            code: o.code.clone(),
            name: o.name.clone(),
            certification: o.certification.clone(),
            expires_on: o.expires_on.clone(),
            created_at: o.created_at.clone(),
            created_by: o.created_by.clone(),
        }
    }
}

/// A gauge's daily standard count, judged against its last four accepted counts.
#[derive(Debug, Serialize, ToSchema)]
pub struct StandardCountAnswer {
    pub id: i64,
    pub instrument_id: i64,
    pub project_id: i64,
    #[schema(format = Date)]
    pub counted_on: String,
    pub density_count: i64,
    pub moisture_count: i64,
    /// How the count was judged.
    pub outcome: String,
    /// Mean of the reference density counts.
    pub density_mean: Option<f64>,
    /// Mean of the reference moisture counts.
    pub moisture_mean: Option<f64>,
    pub density_deviation_pct: Option<f64>,
    pub moisture_deviation_pct: Option<f64>,
    pub density_tolerance_pct: f64,
    pub moisture_tolerance_pct: f64,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<&rows::StandardCount> for StandardCountAnswer {
    fn from(c: &rows::StandardCount) -> Self {
        Self {
            id: c.id,
            instrument_id: c.instrument_id,
            project_id: c.project_id,
            counted_on: c.counted_on.clone(),
            density_count: c.density_count,
            moisture_count: c.moisture_count,
            outcome: c.outcome.to_string(),
            density_mean: c.density_mean,
            moisture_mean: c.moisture_mean,
            density_deviation_pct: c.density_deviation_pct,
            moisture_deviation_pct: c.moisture_deviation_pct,
            density_tolerance_pct: c.density_tolerance_pct,
            moisture_tolerance_pct: c.moisture_tolerance_pct,
            created_at: c.created_at.clone(),
            created_by: c.created_by.clone(),
        }
    }
}

/// A gauge's material offsets for one source and mode.
#[derive(Debug, Serialize, ToSchema)]
pub struct GaugeOffsetAnswer {
    pub id: i64,
    pub instrument_id: i64,
    pub source_id: i64,
    #[schema(value_type = codes::GaugeMode)]
    pub mode: String,
    #[schema(format = Date)]
    pub effective_on: String,
    /// Added to the gauge's wet density, kg/m³.
    pub density_offset_kg_m3: f64,
    /// Added to the gauge's water content, percentage points.
    pub moisture_offset_pct: f64,
    /// How many pairs the offsets come from.
    pub pairs: i64,
    /// The pairs themselves (the request's `pairs`).
    #[schema(value_type = Vec<super::super::bodies::OffsetPair>)]
    pub pair_readings: Value,
    #[schema(format = DateTime)]
    pub created_at: String,
    pub created_by: String,
}

impl From<&rows::GaugeOffset> for GaugeOffsetAnswer {
    fn from(o: &rows::GaugeOffset) -> Self {
        Self {
            id: o.id,
            instrument_id: o.instrument_id,
            source_id: o.source_id,
            mode: o.mode.to_string(),
            effective_on: o.effective_on.clone(),
            density_offset_kg_m3: o.density_offset_kg_m3,
            moisture_offset_pct: o.moisture_offset_pct,
            pairs: o.pairs,
            pair_readings: json_column(&o.pairs_json),
            created_at: o.created_at.clone(),
            created_by: o.created_by.clone(),
        }
    }
}

/// Offsets stored, and the stored tests re-reduced with them.
#[derive(Debug, Serialize, ToSchema)]
pub struct OffsetResultAnswer {
    pub offset: GaugeOffsetAnswer,
    /// Numbers of the tests re-reduced.
    pub applied_to: Vec<String>,
}

/// An instrument with everything recorded of it.
#[derive(Debug, Serialize, ToSchema)]
pub struct InstrumentDetailAnswer {
    pub instrument: InstrumentAnswer,
    pub records: Vec<RecordAnswer>,
    pub assignments: Vec<AssignmentAnswer>,
    pub standard_counts: Vec<StandardCountAnswer>,
    pub offsets: Vec<GaugeOffsetAnswer>,
}

/// Instruments made by a CSV import.
#[derive(Debug, Serialize, ToSchema)]
pub struct InstrumentImportAnswer {
    pub created: usize,
    pub instruments: Vec<InstrumentAnswer>,
}

/// A project's standard-count tolerances.
#[derive(Debug, Serialize, ToSchema)]
pub struct TolerancesAnswer {
    /// Largest deviation of a density count, percent of the reference mean.
    pub density_pct: f64,
    /// Largest deviation of a moisture count, percent of the reference mean.
    pub moisture_pct: f64,
}

/// A clause's policy for tests from an instrument out of check.
#[derive(Debug, Serialize, ToSchema)]
pub struct PolicyAnswer {
    pub clause_id: i64,
    pub record_out_of_check: bool,
}

/// A calibration, leak test or licence falling due.
#[derive(Debug, Serialize, ToSchema)]
pub struct DueAnswer {
    pub serial: String,
    #[schema(value_type = codes::InstrumentKind)]
    pub kind: String,
    #[schema(value_type = codes::RecordKind)]
    pub record: String,
    #[schema(format = Date)]
    pub done_on: String,
    #[schema(format = Date)]
    pub due_on: Option<String>,
    /// Days until it is due (negative: overdue).
    pub days_left: i64,
}
