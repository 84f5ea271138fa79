//! Tests check their instrument: the register read once ([`InstrumentBook`]), then every
//! field test — single entry, preview and import alike — checked against it without
//! further database access, by `reduction::instrument_check` (where the rules are stated;
//! the phone runs the same module offline). Unknown serials are refused (404 naming
//! `serial`) where the register itself is addressed, not on tests.

use crate::db::instruments::{
    Assignment, GaugeOffset, Instrument, InstrumentRecord, Operator, StandardCount,
};
use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use crate::ledger::field::{
    CheckedTest, FieldTestInput, LotContext, Spot, check_loaded, site_error,
};
use crate::ledger::{Actor, validate};
use crate::reduction::field::FieldReadings;
use crate::reduction::instrument_check::{
    self as pure, Calibration, DayCount, GaugeOperator, MaterialOffset, OnProject, Register,
    RegisteredInstrument, TestAtInstrument,
};
use crate::reduction::instruments::{CountOutcome, GaugeMode};
use crate::reduction::site::LotInstruments;

/// How a test arrives: one at a time or in an import (both checked by the same rules;
/// kept so a caller says which path it is).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Arrival {
    Single,
    Import,
}

/// What the register holds that a project's tests are checked against: the rows, and the
/// same as the pure [`Register`] the checks read.
#[derive(Debug, Clone, Default)]
pub struct InstrumentBook {
    pub instruments: Vec<Instrument>,
    pub records: Vec<InstrumentRecord>,
    pub assignments: Vec<Assignment>,
    pub register: Register,
}

impl InstrumentBook {
    /// Reads what a project's tests need of the register.
    pub async fn load(pool: &Pool, project_id: i64) -> Result<Self> {
        let instruments = db::instruments::list_instruments(pool).await?;
        let records = db::instruments::records(pool, None).await?;
        let assignments = db::instruments::assignments(pool, None, Some(project_id)).await?;
        let register = register_of(RegisterRows {
            instruments: &instruments,
            records: &records,
            assignments: &assignments,
            counts: &db::instruments::counts(pool, None, Some(project_id)).await?,
            operators: &db::instruments::operators(pool).await?,
            offsets: &db::instruments::offsets(pool, None, Some(project_id)).await?,
            clauses_recording_out_of_check: db::instruments::clauses_recording_out_of_check(
                pool, project_id,
            )
            .await?,
        })?;
        Ok(Self {
            instruments,
            records,
            assignments,
            register,
        })
    }
}

/// The register a project's tests are checked against, kept per project with the
/// register revision it was read at: a test reads one number, not seven tables, while
/// nothing in the register changed (on any server: the revision is in the database).
#[derive(Default)]
pub struct BookCache(
    std::sync::Mutex<std::collections::HashMap<i64, (i64, std::sync::Arc<InstrumentBook>)>>,
);

impl BookCache {
    /// The project's register as of now.
    pub async fn book(
        &self,
        pool: &Pool,
        project_id: i64,
    ) -> Result<std::sync::Arc<InstrumentBook>> {
        // Read before the register, so a change made meanwhile moves it past this copy.
        let revision = db::instruments::register_revision(pool).await?;
        {
            let kept = self.0.lock().unwrap_or_else(|e| e.into_inner());
            if let Some((rev, book)) = kept.get(&project_id)
                && *rev == revision
            {
                return Ok(book.clone());
            }
        }
        let book = std::sync::Arc::new(InstrumentBook::load(pool, project_id).await?);
        let mut kept = self.0.lock().unwrap_or_else(|e| e.into_inner());
        kept.insert(project_id, (revision, book.clone()));
        Ok(book)
    }
}

/// What the site app keeps of the register for one lot: the project's register with the
/// lot's clause and source, so the phone checks instruments as the server does.
pub async fn lot_instruments(pool: &Pool, lot: &db::lots::Lot) -> Result<LotInstruments> {
    Ok(LotInstruments {
        register: InstrumentBook::load(pool, lot.project_id).await?.register,
        clause_id: lot.clause_id,
        source_id: lot.source_id,
    })
}

/// The register's rows for one project, as read.
struct RegisterRows<'a> {
    instruments: &'a [Instrument],
    records: &'a [InstrumentRecord],
    assignments: &'a [Assignment],
    counts: &'a [StandardCount],
    operators: &'a [Operator],
    offsets: &'a [GaugeOffset],
    clauses_recording_out_of_check: Vec<i64>,
}

/// A stored code the register's rules cannot read: a loud error, never a silent default.
fn unknown_code(column: &str, code: &str) -> AppError {
    AppError::Internal(anyhow::anyhow!(
        "the instrument register holds an unknown {column} '{code}'"
    ))
}

/// The pure register from its rows (calibrations only among the dated records).
fn register_of(rows: RegisterRows<'_>) -> Result<Register> {
    let instruments = rows
        .instruments
        .iter()
        .map(|i| {
            Ok(RegisteredInstrument {
                id: i.id,
                kind: i.kind,
                serial: i.serial.clone(),
            })
        })
        .collect::<Result<_>>()?;
    let counts = rows
        .counts
        .iter()
        .map(|c| {
            Ok(DayCount {
                instrument_id: c.instrument_id,
                counted_on: c.counted_on.clone(),
                density_count: c.density_count,
                moisture_count: c.moisture_count,
                outcome: CountOutcome::parse_code(&c.outcome)
                    .ok_or_else(|| unknown_code("count outcome", &c.outcome))?,
            })
        })
        .collect::<Result<_>>()?;
    Ok(Register {
        instruments,
        calibrations: rows
            .records
            .iter()
            .filter(|r| r.kind == super::RecordKind::Calibration)
            .map(calibration_of)
            .collect(),
        assignments: rows
            .assignments
            .iter()
            .map(|a| OnProject {
                instrument_id: a.instrument_id,
                from_on: a.from_on.clone(),
                to_on: a.to_on.clone(),
            })
            .collect(),
        counts,
        operators: rows.operators.iter().map(operator_of).collect(),
        offsets: rows
            .offsets
            .iter()
            .map(material_offset)
            .collect::<Result<_>>()?,
        clauses_recording_out_of_check: rows.clauses_recording_out_of_check,
    })
}

fn calibration_of(r: &InstrumentRecord) -> Calibration {
    Calibration {
        id: r.id,
        instrument_id: r.instrument_id,
        done_on: r.done_on.clone(),
        due_on: r.due_on.clone(),
        cone_sand_mass_g: r.cone_sand_mass_g,
        sand_density_kg_m3: r.sand_density_kg_m3,
        volume_cm3: r.volume_cm3,
    }
}

fn operator_of(o: &Operator) -> GaugeOperator {
    GaugeOperator {
        id: o.id,
        code: o.code.clone(),
        name: o.name.clone(),
        certification: o.certification.clone(),
        expires_on: o.expires_on.clone(),
    }
}

/// A stored offset as the checks read it.
pub fn material_offset(o: &GaugeOffset) -> Result<MaterialOffset> {
    Ok(MaterialOffset {
        id: o.id,
        instrument_id: o.instrument_id,
        source_id: o.source_id,
        mode: GaugeMode::parse_code(&o.mode).ok_or_else(|| unknown_code("gauge mode", &o.mode))?,
        effective_on: o.effective_on.clone(),
        density_offset_kg_m3: o.density_offset_kg_m3,
        moisture_offset_pct: o.moisture_offset_pct,
    })
}

/// The serial a test names: `instrument_serial`, else the gauge serial of its readings.
pub fn serial_of(input: &FieldTestInput) -> String {
    pure::serial_named(&input.instrument_serial, &input.readings)
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
    let found = pure::check(
        &book.register,
        &TestAtInstrument {
            serial: &serial,
            readings: &input.readings,
            technician: &input.technician,
            day: &day,
            clause_id: ctx.clause.id,
            clause_code: &ctx.clause.code,
            source_id: ctx.lot.source_id,
            override_reason: input.calibration_override_reason.as_deref(),
        },
    )
    .map_err(site_error)?;
    let Some(found) = found else {
        return check_loaded(ctx, input, fallback, actor, now);
    };
    let mut input = input.clone();
    input.readings = found.readings.clone();
    let mut checked = check_loaded(ctx, &input, fallback, actor, now)?;
    let r = &mut checked.record;
    r.instrument_serial = found.serial;
    if let Some((id, name)) = found.operator {
        r.operator_id = Some(id);
        r.technician = name;
    }
    r.instrument_check = found.check;
    r.instrument_note = Some(found.note);
    if let Some(o) = &found.offset {
        apply_offset(r, &input.readings, o)?;
    }
    Ok(checked)
}

/// Re-reduces a test's raw readings with an offset applied, keeping the raw reading.
pub fn apply_offset(
    r: &mut db::field_tests::FieldTest,
    readings: &FieldReadings,
    o: &MaterialOffset,
) -> Result<()> {
    let corrected = pure::with_offset(readings, o).map_err(site_error)?;
    r.wet_density_kg_m3 = corrected.wet_density.kg_m3();
    r.water_content_pct = corrected.water_content.pct();
    r.dry_density_kg_m3 = corrected.dry_density.kg_m3();
    r.density_offset_kg_m3 = Some(o.density_offset_kg_m3);
    r.moisture_offset_pct = Some(
        if corrected.moisture_source == crate::reduction::field::MoistureSource::Oven {
            0.0
        } else {
            o.moisture_offset_pct
        },
    );
    Ok(())
}
