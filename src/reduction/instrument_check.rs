//! A field test checked against its instrument, from a copy of the register with no store
//! behind it: the server checks every test with it, and the phone (this module compiled to
//! WebAssembly) checks an offline entry against the register it keeps for the day.
//!
//! The rules (stated once, here):
//! - A test naming no serial, or a serial the register does not know (tests entered
//!   before the register existed, their retests, imports), is *instrument not recorded*:
//!   shown as such, never blocked.
//! - A registered instrument must be assigned to the test's project on the test's date,
//!   and be of the kind the test's method uses.
//! - A nuclear test needs a registered operator (the `technician`, by code or name) whose
//!   certification covers the date, an accepted standard count of the gauge that day and
//!   a calibration covering the date. Without the last two the test is refused — or,
//!   where its clause allows, recorded *out of check*: out of the statistics and
//!   blocking submission.
//! - A sand-cone test takes the cone-and-plate mass from its cone's calibration in force
//!   on its date and the sand density from the sand batch on the project that day (a
//!   reading left at 0 takes the calibrated value); entering other values needs
//!   `calibration_override_reason`.
//! - A nuclear reading gets the gauge's offsets in force on its date for the lot's
//!   source and the gauge mode; the raw reading is kept beside the corrected one.

use serde::{Deserialize, Serialize};

use super::field::{FieldDensity, FieldReadings, reduce_field};
use super::instruments::{
    CountOutcome, Dated, GaugeMode, InstrumentCheck, InstrumentKind, Offsets, apply_offsets,
    covers, in_force_on,
};
use super::site::SiteError;

/// Largest difference from a calibrated value still taken as the same value.
const SAME_MASS_G: f64 = 0.05;
const SAME_DENSITY_KG_M3: f64 = 0.5;
/// Longest calibration override reason, in characters.
const OVERRIDE_REASON_MAX_CHARS: usize = 300;

/// A registered instrument.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RegisteredInstrument {
    pub id: i64,
    pub kind: InstrumentKind,
    pub serial: String,
}

/// A calibration of an instrument and the values it fixes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    pub id: i64,
    pub instrument_id: i64,
    pub done_on: String,
    pub due_on: Option<String>,
    /// Sand filling cone and plate (sand-cone calibrations), g.
    pub cone_sand_mass_g: Option<f64>,
    /// Bulk density of a sand batch, kg/m³.
    pub sand_density_kg_m3: Option<f64>,
    /// Calibrated volume (balloon apparatus, drive cylinder), cm³.
    pub volume_cm3: Option<f64>,
}

impl Dated for Calibration {
    fn effective_day(&self) -> &str {
        &self.done_on
    }
}

/// An instrument's time on the project (`to_on` None: still there).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OnProject {
    pub instrument_id: i64,
    pub from_on: String,
    pub to_on: Option<String>,
}

impl OnProject {
    /// Whether the instrument was on the project on `day`.
    pub fn covers(&self, day: &str) -> bool {
        self.from_on.as_str() <= day && self.to_on.as_deref().is_none_or(|t| day <= t)
    }
}

/// A gauge's standard count on a day, as it was judged.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DayCount {
    pub instrument_id: i64,
    pub counted_on: String,
    pub density_count: i64,
    pub moisture_count: i64,
    pub outcome: CountOutcome,
}

/// A person certified to run nuclear gauges.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GaugeOperator {
    pub id: i64,
    pub code: String,
    pub name: String,
    pub certification: String,
    pub expires_on: String,
}

/// A gauge's material offsets for one source and mode, from an effective date.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MaterialOffset {
    pub id: i64,
    pub instrument_id: i64,
    pub source_id: i64,
    pub mode: GaugeMode,
    pub effective_on: String,
    pub density_offset_kg_m3: f64,
    pub moisture_offset_pct: f64,
}

impl Dated for MaterialOffset {
    fn effective_day(&self) -> &str {
        &self.effective_on
    }
}

/// What a project's tests are checked against: the register as it stands for the project.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Register {
    pub instruments: Vec<RegisteredInstrument>,
    pub calibrations: Vec<Calibration>,
    pub assignments: Vec<OnProject>,
    pub counts: Vec<DayCount>,
    pub operators: Vec<GaugeOperator>,
    pub offsets: Vec<MaterialOffset>,
    /// Clauses that record a test from an instrument out of check instead of refusing it.
    pub clauses_recording_out_of_check: Vec<i64>,
}

/// The parts of a test its instrument check reads.
#[derive(Debug, Clone, Copy)]
pub struct TestAtInstrument<'a> {
    /// The serial the test names (see [`serial_named`]).
    pub serial: &'a str,
    pub readings: &'a FieldReadings,
    pub technician: &'a str,
    /// The test's date (`YYYY-MM-DD`).
    pub day: &'a str,
    pub clause_id: i64,
    pub clause_code: &'a str,
    pub source_id: i64,
    pub override_reason: Option<&'a str>,
}

/// A test's instrument once checked: what its record carries.
#[derive(Debug, Clone, PartialEq)]
pub struct Checked {
    pub serial: String,
    pub check: InstrumentCheck,
    /// The evidence, and why the instrument is out of check when it is.
    pub note: String,
    /// The registered operator (id, name) of a nuclear test.
    pub operator: Option<(i64, String)>,
    /// The readings to reduce: a sand-cone test's calibrated values filled in.
    pub readings: FieldReadings,
    /// The gauge's offsets in force, to be applied to the reduced reading.
    pub offset: Option<MaterialOffset>,
}

/// The serial a test names: `instrument_serial`, else the gauge serial of its readings.
pub fn serial_named(instrument_serial: &str, readings: &FieldReadings) -> String {
    match readings {
        FieldReadings::Nuclear {
            gauge_serial: Some(s),
            ..
        } if instrument_serial.trim().is_empty() => s.trim().to_string(),
        _ => instrument_serial.trim().to_string(),
    }
}

impl Register {
    fn instrument(&self, serial: &str) -> Option<&RegisteredInstrument> {
        self.instruments.iter().find(|i| i.serial == serial)
    }

    /// The calibration of an instrument in force on a day.
    pub fn calibration_on(&self, instrument_id: i64, day: &str) -> Option<&Calibration> {
        let mine: Vec<&Calibration> = self
            .calibrations
            .iter()
            .filter(|c| c.instrument_id == instrument_id)
            .collect();
        let found = in_force_on(&mine, day)?.id;
        self.calibrations.iter().find(|c| c.id == found)
    }

    fn assigned(&self, instrument_id: i64, day: &str) -> bool {
        self.assignments
            .iter()
            .any(|a| a.instrument_id == instrument_id && a.covers(day))
    }

    /// The sand batch on the project on a day (the latest assigned, when several).
    fn sand_batch_on(&self, day: &str) -> Option<&RegisteredInstrument> {
        self.assignments
            .iter()
            .filter(|a| a.covers(day))
            .filter_map(|a| {
                let i = self.instruments.iter().find(|i| i.id == a.instrument_id)?;
                (i.kind == InstrumentKind::SandBatch).then_some((a.from_on.as_str(), i))
            })
            .max_by(|a, b| a.0.cmp(b.0))
            .map(|(_, i)| i)
    }

    /// The offsets of a gauge in force on a day for a source and the reading's mode.
    pub fn offset_for(
        &self,
        gauge_id: i64,
        source_id: i64,
        readings: &FieldReadings,
        day: &str,
    ) -> Option<&MaterialOffset> {
        let FieldReadings::Nuclear { probe_depth_mm, .. } = readings else {
            return None;
        };
        let mode = GaugeMode::of_probe_depth(*probe_depth_mm);
        let mine: Vec<&MaterialOffset> = self
            .offsets
            .iter()
            .filter(|o| o.instrument_id == gauge_id && o.source_id == source_id && o.mode == mode)
            .collect();
        let id = in_force_on(&mine, day)?.id;
        self.offsets.iter().find(|o| o.id == id)
    }

    /// Why a gauge is out of check on a day (empty when in check), and its evidence.
    pub fn gauge_standing(&self, gauge: &RegisteredInstrument, day: &str) -> (Vec<String>, String) {
        let mut reasons = Vec::new();
        let mut evidence = format!("gauge {}", gauge.serial);
        match self.calibration_on(gauge.id, day) {
            None => reasons.push(format!("no calibration recorded on or before {day}")),
            Some(c) => {
                evidence.push_str(&format!(
                    ": calibrated {}{}",
                    c.done_on,
                    c.due_on
                        .as_deref()
                        .map(|d| format!(" (due {d})"))
                        .unwrap_or_default()
                ));
                if !covers(c.due_on.as_deref(), day) {
                    reasons.push(format!(
                        "its calibration of {} was due on {}",
                        c.done_on,
                        c.due_on.as_deref().unwrap_or("")
                    ));
                }
            }
        }
        let todays: Vec<&DayCount> = self
            .counts
            .iter()
            .filter(|c| c.instrument_id == gauge.id && c.counted_on == day)
            .collect();
        match todays.iter().rev().find(|c| c.outcome.in_check()) {
            Some(c) => evidence.push_str(&format!(
                "; standard count {day}: density {}, moisture {} ({})",
                c.density_count,
                c.moisture_count,
                c.outcome.code()
            )),
            None if todays.is_empty() => reasons.push(format!("no standard count on {day}")),
            None => reasons.push(format!(
                "its standard count{} on {day} failed",
                if todays.len() == 1 { "" } else { "s" }
            )),
        }
        (reasons, evidence)
    }

    /// The registered operator a technician names (code or name, any case), certified on `day`.
    fn operator_for(&self, technician: &str, day: &str) -> Result<&GaugeOperator, SiteError> {
        let t = technician.trim();
        let op = self
            .operators
            .iter()
            .find(|o| o.code.eq_ignore_ascii_case(t) || o.name.eq_ignore_ascii_case(t))
            .ok_or_else(|| {
                SiteError::new(
                    "technician",
                    format!("'{t}' is not a registered gauge operator; a nuclear test from a registered gauge needs one"),
                )
            })?;
        if op.expires_on.as_str() < day {
            return Err(SiteError::new(
                "technician",
                format!(
                    "{}'s certification ({}) expired on {}",
                    op.name, op.certification, op.expires_on
                ),
            ));
        }
        Ok(op)
    }
}

/// Checks a test against its instrument (the rules are in the module doc); `None` when the
/// instrument is not recorded (no serial, or one the register does not know).
pub fn check(register: &Register, t: &TestAtInstrument<'_>) -> Result<Option<Checked>, SiteError> {
    let Some(instrument) = register.instrument(t.serial) else {
        return Ok(None);
    };
    if !register.assigned(instrument.id, t.day) {
        return Err(SiteError::new(
            "instrument_serial",
            format!(
                "{} is not assigned to this project on {}",
                instrument.serial, t.day
            ),
        ));
    }
    let checked = match (t.readings, instrument.kind) {
        (FieldReadings::Nuclear { .. }, InstrumentKind::NuclearGauge) => {
            nuclear(register, t, instrument)?
        }
        (FieldReadings::SandCone { .. }, InstrumentKind::SandCone) => {
            sand_cone(register, t, instrument)?
        }
        (FieldReadings::Balloon { .. }, InstrumentKind::Balloon)
        | (FieldReadings::DriveCylinder { .. }, InstrumentKind::DriveCylinder) => {
            by_volume(register, t, instrument)
        }
        (r, kind) => {
            return Err(SiteError::new(
                "instrument_serial",
                format!(
                    "{} is a {}, not an instrument for a {} test",
                    instrument.serial,
                    kind.label(),
                    r.method_code().replace('_', " ")
                ),
            ));
        }
    };
    Ok(Some(checked))
}

/// A nuclear gauge: its operator, its standing on the day, and its offsets.
fn nuclear(
    register: &Register,
    t: &TestAtInstrument<'_>,
    gauge: &RegisteredInstrument,
) -> Result<Checked, SiteError> {
    let operator = register.operator_for(t.technician, t.day)?;
    let (reasons, evidence) = register.gauge_standing(gauge, t.day);
    let check = if reasons.is_empty() {
        InstrumentCheck::InCheck
    } else if register
        .clauses_recording_out_of_check
        .contains(&t.clause_id)
    {
        InstrumentCheck::OutOfCheck
    } else {
        return Err(SiteError::new(
            "instrument_serial",
            format!(
                "gauge {} is out of check on {}: {}; the test is refused (clause {} does not record tests from an instrument out of check)",
                gauge.serial,
                t.day,
                reasons.join("; "),
                t.clause_code
            ),
        ));
    };
    Ok(Checked {
        serial: gauge.serial.clone(),
        check,
        note: if reasons.is_empty() {
            evidence
        } else {
            format!("{evidence}; out of check: {}", reasons.join("; "))
        },
        operator: Some((operator.id, operator.name.clone())),
        readings: t.readings.clone(),
        offset: register
            .offset_for(gauge.id, t.source_id, t.readings, t.day)
            .cloned(),
    })
}

/// A balloon apparatus or drive cylinder: in check, with its calibration as evidence.
fn by_volume(
    register: &Register,
    t: &TestAtInstrument<'_>,
    instrument: &RegisteredInstrument,
) -> Checked {
    let label = instrument.kind.label();
    let note = match register.calibration_on(instrument.id, t.day) {
        Some(c) => format!(
            "{label} {}: calibrated {}{}",
            instrument.serial,
            c.done_on,
            c.volume_cm3
                .map(|v| format!(", {v:.1} cm³"))
                .unwrap_or_default()
        ),
        None => format!("{label} {}", instrument.serial),
    };
    Checked {
        serial: instrument.serial.clone(),
        check: InstrumentCheck::InCheck,
        note,
        operator: None,
        readings: t.readings.clone(),
        offset: None,
    }
}

/// A sand cone: the cone's and the sand batch's calibrated values in force on the day.
fn sand_cone(
    register: &Register,
    t: &TestAtInstrument<'_>,
    cone: &RegisteredInstrument,
) -> Result<Checked, SiteError> {
    let day = t.day;
    let (cone_cal, cone_mass_g) = register
        .calibration_on(cone.id, day)
        .and_then(|c| c.cone_sand_mass_g.map(|m| (c, m)))
        .ok_or_else(|| {
            SiteError::new(
                "instrument_serial",
                format!("cone {} has no calibration on or before {day}", cone.serial),
            )
        })?;
    let batch = register.sand_batch_on(day).ok_or_else(|| {
        SiteError::new(
            "readings.sand_density_kg_m3",
            format!("no sand batch is assigned to this project on {day}"),
        )
    })?;
    let (batch_cal, sand_kg_m3) = register
        .calibration_on(batch.id, day)
        .and_then(|c| c.sand_density_kg_m3.map(|d| (c, d)))
        .ok_or_else(|| {
            SiteError::new(
                "readings.sand_density_kg_m3",
                format!(
                    "sand batch {} has no calibration on or before {day}",
                    batch.serial
                ),
            )
        })?;
    let reason = t.override_reason.map(str::trim).filter(|r| !r.is_empty());
    let mut readings = t.readings.clone();
    let overridden = fill_calibrated(&mut readings, cone_mass_g, sand_kg_m3, day, reason)?;
    let mut note = format!(
        "cone {} calibrated {}: {cone_mass_g} g in cone and plate; sand batch {} calibrated {}: {sand_kg_m3} kg/m³",
        cone.serial, cone_cal.done_on, batch.serial, batch_cal.done_on
    );
    if !overridden.is_empty() {
        let why = override_reason(reason.unwrap_or(""))?;
        note.push_str(&format!("; overridden ({}): {why}", overridden.join(", ")));
    }
    Ok(Checked {
        serial: cone.serial.clone(),
        check: InstrumentCheck::InCheck,
        note,
        operator: None,
        readings,
        offset: None,
    })
}

/// Fills a sand-cone reading left at 0 with the calibrated value; a different value needs a
/// reason. Returns the values used instead of the calibration, in words.
fn fill_calibrated(
    readings: &mut FieldReadings,
    cone_mass_g: f64,
    sand_kg_m3: f64,
    day: &str,
    reason: Option<&str>,
) -> Result<Vec<String>, SiteError> {
    let FieldReadings::SandCone {
        mass_sand_in_cone_g,
        sand_density_kg_m3,
        ..
    } = readings
    else {
        return Ok(Vec::new());
    };
    let fields = [
        (
            mass_sand_in_cone_g,
            cone_mass_g,
            SAME_MASS_G,
            "mass_sand_in_cone_g",
            "g",
        ),
        (
            sand_density_kg_m3,
            sand_kg_m3,
            SAME_DENSITY_KG_M3,
            "sand_density_kg_m3",
            "kg/m³",
        ),
    ];
    let mut overridden = Vec::new();
    for (value, calibrated, same, field, unit) in fields {
        if *value == 0.0 {
            *value = calibrated;
        } else if (*value - calibrated).abs() > same {
            if reason.is_none() {
                return Err(SiteError::new(
                    format!("readings.{field}"),
                    format!(
                        "{value} {unit} differs from the calibration in force on {day} ({calibrated} {unit}); give calibration_override_reason to use it"
                    ),
                ));
            }
            overridden.push(format!(
                "{field} {value} {unit} instead of {calibrated} {unit}"
            ));
        }
    }
    Ok(overridden)
}

/// The override reason as stored: trimmed, at most 300 characters, no control characters.
fn override_reason(reason: &str) -> Result<String, SiteError> {
    let field = "calibration_override_reason";
    let v = reason.trim();
    if v.is_empty() {
        return Err(SiteError::new(field, "is required"));
    }
    if v.chars().count() > OVERRIDE_REASON_MAX_CHARS {
        return Err(SiteError::new(
            field,
            format!("is longer than {OVERRIDE_REASON_MAX_CHARS} characters"),
        ));
    }
    if v.chars().any(|c| c.is_control() && c != '\n') {
        return Err(SiteError::new(field, "contains control characters"));
    }
    Ok(v.to_string())
}

/// The reading reduced again with a gauge's offsets applied (the raw reading is kept by the
/// caller). An oven water content is not offset.
pub fn with_offset(
    readings: &FieldReadings,
    o: &MaterialOffset,
) -> Result<FieldDensity, SiteError> {
    let raw = reduce_field(readings)
        .map_err(|e| SiteError::new(format!("readings.{}", e.field()), e.to_string()))?;
    apply_offsets(
        raw,
        Offsets {
            density_kg_m3: o.density_offset_kg_m3,
            moisture_pct: o.moisture_offset_pct,
        },
    )
    .map_err(|e| SiteError::new("readings", format!("with the gauge offsets applied: {e}")))
}

#[cfg(test)]
mod tests;
