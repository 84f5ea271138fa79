//! Tests check their instrument: the register read once ([`InstrumentBook`]), then every
//! field test — single entry, preview and import alike — checked against it without
//! further database access.
//!
//! The rules (stated once, here):
//! - A test naming no serial, or a serial the register does not know (tests entered
//!   before the register existed, their retests, imports), is *instrument not recorded*:
//!   shown as such, never blocked. Unknown serials are refused (404 naming `serial`)
//!   where the register itself is addressed, not on tests.
//! - A registered instrument must be assigned to the test's project on the test's date.
//! - A nuclear test needs a registered operator (the `technician`, by code or name) whose
//!   certification covers the date, an accepted standard count of the gauge that day and
//!   a calibration covering the date. Without the last two the test is refused — or,
//!   where its clause allows, recorded *out of check*: out of the statistics and
//!   blocking submission (through the lot report's "cannot be judged" path).
//! - A sand-cone test takes the cone-and-plate mass from its cone's calibration in force
//!   on its date and the sand density from the sand batch on the project that day;
//!   entering other values needs `calibration_override_reason`.
//! - A nuclear reading gets the gauge's offsets in force on its date for the lot's
//!   source and the gauge mode; the raw reading stays in `readings_json`.

use crate::db::instruments::{
    Assignment, GaugeOffset, Instrument, InstrumentRecord, Operator, StandardCount,
};
use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use crate::ledger::field::{CheckedTest, FieldTestInput, LotContext, Spot, check_loaded};
use crate::ledger::{Actor, validate};
use crate::reduction::field::FieldReadings;
use crate::reduction::instruments::{
    self as rules, CountOutcome, GaugeMode, InstrumentCheck, Offsets, in_force_on,
};

/// Largest difference from a calibrated value still taken as the same value.
const SAME_MASS_G: f64 = 0.05;
const SAME_DENSITY_KG_M3: f64 = 0.5;

/// How a test arrives: one at a time or in an import (both checked by the same rules;
/// kept so a caller says which path it is).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Arrival {
    Single,
    Import,
}

/// What the register holds that a project's tests are checked against.
#[derive(Debug, Clone, Default)]
pub struct InstrumentBook {
    pub instruments: Vec<Instrument>,
    pub records: Vec<InstrumentRecord>,
    pub assignments: Vec<Assignment>,
    pub counts: Vec<StandardCount>,
    pub operators: Vec<Operator>,
    pub offsets: Vec<GaugeOffset>,
    /// Clauses that record a test from an instrument out of check instead of refusing it.
    pub clauses_recording_out_of_check: Vec<i64>,
}

impl InstrumentBook {
    /// Reads what a project's tests need of the register.
    pub async fn load(pool: &Pool, project_id: i64) -> Result<Self> {
        Ok(Self {
            instruments: db::instruments::list_instruments(pool).await?,
            records: db::instruments::records(pool, None).await?,
            assignments: db::instruments::assignments(pool, None, Some(project_id)).await?,
            counts: db::instruments::counts(pool, None, Some(project_id)).await?,
            operators: db::instruments::operators(pool).await?,
            offsets: db::instruments::offsets(pool, None, Some(project_id)).await?,
            clauses_recording_out_of_check: db::instruments::clauses_recording_out_of_check(
                pool, project_id,
            )
            .await?,
        })
    }

    fn instrument(&self, serial: &str) -> Option<&Instrument> {
        self.instruments.iter().find(|i| i.serial == serial)
    }

    /// The calibration of an instrument in force on a day.
    pub fn calibration_on(&self, instrument_id: i64, day: &str) -> Option<&InstrumentRecord> {
        let cals: Vec<InstrumentRecord> = self
            .records
            .iter()
            .filter(|r| r.instrument_id == instrument_id && r.kind == "calibration")
            .cloned()
            .collect();
        let found = in_force_on(&cals, day)?.id;
        self.records.iter().find(|r| r.id == found)
    }

    fn assigned(&self, instrument_id: i64, day: &str) -> bool {
        self.assignments
            .iter()
            .any(|a| a.instrument_id == instrument_id && a.covers(day))
    }

    /// The sand batch on the project on a day (the latest assigned, when several).
    fn sand_batch_on(&self, day: &str) -> Option<&Instrument> {
        self.assignments
            .iter()
            .filter(|a| a.covers(day))
            .filter_map(|a| {
                let i = self.instruments.iter().find(|i| i.id == a.instrument_id)?;
                (i.kind == "sand_batch").then_some((a.from_on.as_str(), i))
            })
            .max_by(|a, b| a.0.cmp(b.0))
            .map(|(_, i)| i)
    }
}

/// The serial a test names: `instrument_serial`, else the gauge serial of its readings.
pub fn serial_of(input: &FieldTestInput) -> String {
    match &input.readings {
        FieldReadings::Nuclear {
            gauge_serial: Some(s),
            ..
        } if input.instrument_serial.trim().is_empty() => s.trim().to_string(),
        _ => input.instrument_serial.trim().to_string(),
    }
}

/// Checks and reduces a field test with its instrument checked (the one path for single
/// entry, previews and imports). Pure: reads only the book and the lot context.
pub fn check_with_instruments(
    book: &InstrumentBook,
    ctx: &LotContext,
    input: &FieldTestInput,
    fallback: Option<Spot>,
    actor: &Actor,
    now: &str,
    arrival: Arrival,
) -> Result<CheckedTest> {
    let serial = serial_of(input);
    let day = match &input.tested_at {
        Some(t) => crate::clock::date_of(&validate::timestamp("tested_at", t)?),
        None => crate::clock::date_of(now),
    };
    let _ = arrival;
    let Some(instrument) = book.instrument(&serial) else {
        return check_loaded(ctx, input, fallback, actor, now);
    };
    if !book.assigned(instrument.id, &day) {
        return Err(AppError::invalid(
            "instrument_serial",
            format!(
                "{} is not assigned to this project on {day}",
                instrument.serial
            ),
        ));
    }
    match (&input.readings, instrument.kind.as_str()) {
        (FieldReadings::Nuclear { .. }, "nuclear_gauge") => {
            nuclear(book, ctx, input, fallback, actor, now, instrument, &day)
        }
        (FieldReadings::SandCone { .. }, "sand_cone") => {
            sand_cone(book, ctx, input, fallback, actor, now, instrument, &day)
        }
        (FieldReadings::Balloon { .. }, "balloon")
        | (FieldReadings::DriveCylinder { .. }, "drive_cylinder") => {
            let mut checked = check_loaded(ctx, input, fallback, actor, now)?;
            let cal = book.calibration_on(instrument.id, &day);
            checked.record.instrument_check = InstrumentCheck::InCheck;
            checked.record.instrument_note = Some(match cal {
                Some(c) => format!(
                    "{} {}: calibrated {}{}",
                    kind_label(&instrument.kind),
                    instrument.serial,
                    c.done_on,
                    c.volume_cm3
                        .map(|v| format!(", {v:.1} cm³"))
                        .unwrap_or_default()
                ),
                None => format!("{} {}", kind_label(&instrument.kind), instrument.serial),
            });
            Ok(checked)
        }
        (r, kind) => Err(AppError::invalid(
            "instrument_serial",
            format!(
                "{} is a {}, not an instrument for a {} test",
                instrument.serial,
                kind_label(kind),
                r.method_code().replace('_', " ")
            ),
        )),
    }
}

/// Words for an instrument kind.
pub fn kind_label(kind: &str) -> &'static str {
    match kind {
        "nuclear_gauge" => "nuclear gauge",
        "sand_cone" => "sand-cone apparatus",
        "sand_batch" => "sand batch",
        "balloon" => "balloon apparatus",
        "drive_cylinder" => "drive cylinder",
        _ => "instrument",
    }
}

/// Why a gauge is out of check on a day (empty when in check), and its evidence.
pub fn gauge_standing(
    book: &InstrumentBook,
    gauge: &Instrument,
    day: &str,
) -> (Vec<String>, String) {
    let mut reasons = Vec::new();
    let mut evidence = format!("gauge {}", gauge.serial);
    match book.calibration_on(gauge.id, day) {
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
            if !rules::covers(c.due_on.as_deref(), day) {
                reasons.push(format!(
                    "its calibration of {} was due on {}",
                    c.done_on,
                    c.due_on.as_deref().unwrap_or("")
                ));
            }
        }
    }
    let todays: Vec<&StandardCount> = book
        .counts
        .iter()
        .filter(|c| c.instrument_id == gauge.id && c.counted_on == day)
        .collect();
    match todays
        .iter()
        .rev()
        .find(|c| CountOutcome::parse_code(&c.outcome).is_some_and(CountOutcome::in_check))
    {
        Some(c) => evidence.push_str(&format!(
            "; standard count {day}: density {}, moisture {} ({})",
            c.density_count, c.moisture_count, c.outcome
        )),
        None if todays.is_empty() => reasons.push(format!("no standard count on {day}")),
        None => reasons.push(format!(
            "its standard count{} on {day} failed",
            if todays.len() == 1 { "" } else { "s" }
        )),
    }
    (reasons, evidence)
}

#[allow(clippy::too_many_arguments)]
fn nuclear(
    book: &InstrumentBook,
    ctx: &LotContext,
    input: &FieldTestInput,
    fallback: Option<Spot>,
    actor: &Actor,
    now: &str,
    gauge: &Instrument,
    day: &str,
) -> Result<CheckedTest> {
    let operator = operator_for(book, &input.technician, day)?;
    let (reasons, evidence) = gauge_standing(book, gauge, day);
    let status = if reasons.is_empty() {
        InstrumentCheck::InCheck
    } else if book.clauses_recording_out_of_check.contains(&ctx.clause.id) {
        InstrumentCheck::OutOfCheck
    } else {
        return Err(AppError::invalid(
            "instrument_serial",
            format!(
                "gauge {} is out of check on {day}: {}; the test is refused (clause {} does not record tests from an instrument out of check)",
                gauge.serial,
                reasons.join("; "),
                ctx.clause.code
            ),
        ));
    };
    let mut checked = check_loaded(ctx, input, fallback, actor, now)?;
    let r = &mut checked.record;
    r.instrument_serial = gauge.serial.clone();
    r.operator_id = Some(operator.id);
    r.technician = operator.name.clone();
    r.instrument_check = status;
    r.instrument_note = Some(if reasons.is_empty() {
        evidence
    } else {
        format!("{evidence}; out of check: {}", reasons.join("; "))
    });
    if let Some(o) = offset_for(book, gauge.id, ctx.lot.source_id, &input.readings, day) {
        apply_offset(r, &input.readings, o)?;
    }
    Ok(checked)
}

/// The registered operator a technician names (code or name, any case), certified on `day`.
fn operator_for<'a>(book: &'a InstrumentBook, technician: &str, day: &str) -> Result<&'a Operator> {
    let t = technician.trim();
    let op = book
        .operators
        .iter()
        .find(|o| o.code.eq_ignore_ascii_case(t) || o.name.eq_ignore_ascii_case(t))
        .ok_or_else(|| {
            AppError::invalid(
                "technician",
                format!("'{t}' is not a registered gauge operator; a nuclear test from a registered gauge needs one"),
            )
        })?;
    if op.expires_on.as_str() < day {
        return Err(AppError::invalid(
            "technician",
            format!(
                "{}'s certification ({}) expired on {}",
                op.name, op.certification, op.expires_on
            ),
        ));
    }
    Ok(op)
}

/// The offsets of a gauge in force on a day for a source and the reading's mode.
pub fn offset_for<'a>(
    book: &'a InstrumentBook,
    gauge_id: i64,
    source_id: i64,
    readings: &FieldReadings,
    day: &str,
) -> Option<&'a GaugeOffset> {
    let FieldReadings::Nuclear { probe_depth_mm, .. } = readings else {
        return None;
    };
    let mode = GaugeMode::of_probe_depth(*probe_depth_mm);
    let mine: Vec<GaugeOffset> = book
        .offsets
        .iter()
        .filter(|o| {
            o.instrument_id == gauge_id && o.source_id == source_id && o.mode == mode.code()
        })
        .cloned()
        .collect();
    let id = in_force_on(&mine, day)?.id;
    book.offsets.iter().find(|o| o.id == id)
}

/// Re-reduces a test's raw readings with an offset applied, keeping the raw reading.
pub fn apply_offset(
    r: &mut db::field_tests::FieldTest,
    readings: &FieldReadings,
    o: &GaugeOffset,
) -> Result<()> {
    let raw = crate::reduction::field::reduce_field(readings)
        .map_err(|e| AppError::invalid(format!("readings.{}", e.field()), e.to_string()))?;
    let corrected = rules::apply_offsets(
        raw,
        Offsets {
            density_kg_m3: o.density_offset_kg_m3,
            moisture_pct: o.moisture_offset_pct,
        },
    )
    .map_err(|e| AppError::invalid("readings", format!("with the gauge offsets applied: {e}")))?;
    r.wet_density_kg_m3 = corrected.wet_density.kg_m3();
    r.water_content_pct = corrected.water_content.pct();
    r.dry_density_kg_m3 = corrected.dry_density.kg_m3();
    r.density_offset_kg_m3 = Some(o.density_offset_kg_m3);
    r.moisture_offset_pct = Some(if corrected.moisture_source == "oven" {
        0.0
    } else {
        o.moisture_offset_pct
    });
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn sand_cone(
    book: &InstrumentBook,
    ctx: &LotContext,
    input: &FieldTestInput,
    fallback: Option<Spot>,
    actor: &Actor,
    now: &str,
    cone: &Instrument,
    day: &str,
) -> Result<CheckedTest> {
    let cone_cal = book
        .calibration_on(cone.id, day)
        .and_then(|c| c.cone_sand_mass_g.map(|m| (c, m)))
        .ok_or_else(|| {
            AppError::invalid(
                "instrument_serial",
                format!("cone {} has no calibration on or before {day}", cone.serial),
            )
        })?;
    let batch = book.sand_batch_on(day).ok_or_else(|| {
        AppError::invalid(
            "readings.sand_density_kg_m3",
            format!("no sand batch is assigned to this project on {day}"),
        )
    })?;
    let batch_cal = book
        .calibration_on(batch.id, day)
        .and_then(|c| c.sand_density_kg_m3.map(|d| (c, d)))
        .ok_or_else(|| {
            AppError::invalid(
                "readings.sand_density_kg_m3",
                format!(
                    "sand batch {} has no calibration on or before {day}",
                    batch.serial
                ),
            )
        })?;
    let reason = input
        .calibration_override_reason
        .as_deref()
        .map(str::trim)
        .filter(|r| !r.is_empty());
    let mut input = input.clone();
    let mut overridden = Vec::new();
    if let FieldReadings::SandCone {
        mass_sand_in_cone_g,
        sand_density_kg_m3,
        ..
    } = &mut input.readings
    {
        let fields = [
            (
                mass_sand_in_cone_g,
                cone_cal.1,
                SAME_MASS_G,
                "mass_sand_in_cone_g",
                "g",
            ),
            (
                sand_density_kg_m3,
                batch_cal.1,
                SAME_DENSITY_KG_M3,
                "sand_density_kg_m3",
                "kg/m³",
            ),
        ];
        for (value, calibrated, same, field, unit) in fields {
            if *value == 0.0 {
                *value = calibrated;
            } else if (*value - calibrated).abs() > same {
                if reason.is_none() {
                    return Err(AppError::invalid(
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
    }
    let mut checked = check_loaded(ctx, &input, fallback, actor, now)?;
    let mut note = format!(
        "cone {} calibrated {}: {} g in cone and plate; sand batch {} calibrated {}: {} kg/m³",
        cone.serial, cone_cal.0.done_on, cone_cal.1, batch.serial, batch_cal.0.done_on, batch_cal.1
    );
    if !overridden.is_empty() {
        let why = validate::text("calibration_override_reason", reason.unwrap_or(""), 300)?;
        note.push_str(&format!("; overridden ({}): {why}", overridden.join(", ")));
    }
    checked.record.instrument_check = InstrumentCheck::InCheck;
    checked.record.instrument_note = Some(note);
    Ok(checked)
}
