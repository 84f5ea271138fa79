//! The instrument register (organisation-wide): instruments and their dated records,
//! assignments to projects, gauge operators, CSV import of the register, daily standard
//! counts, project tolerances, clause policies and material offsets. Each write is
//! validated, judged by `reduction::instruments` and stored with its audit row.

pub mod check;
pub mod counts;
pub mod offsets;

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::validate::{code, date, number, optional_text, text};
use crate::clock;
use crate::db::{self, Pool, instruments::Instrument};
use crate::error::{AppError, Result};

pub use crate::reduction::instruments::InstrumentKind;

/// What kind of dated record.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RecordKind {
    Calibration,
    LeakTest,
    Licence,
}

impl RecordKind {
    /// Every kind of record.
    pub const ALL: [RecordKind; 3] = [Self::Calibration, Self::LeakTest, Self::Licence];

    /// Reads a code written by [`RecordKind::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|k| k.code() == s)
    }

    /// The stored and JSON code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Calibration => "calibration",
            Self::LeakTest => "leak_test",
            Self::Licence => "licence",
        }
    }
}

/// Body of a new instrument; a calibration date registers its first calibration.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InstrumentInput {
    pub kind: InstrumentKind,
    pub serial: String,
    #[serde(default)]
    pub description: String,
    pub calibrated_on: Option<String>,
    pub due_on: Option<String>,
    pub cone_sand_mass_g: Option<f64>,
    pub sand_density_kg_m3: Option<f64>,
    pub volume_cm3: Option<f64>,
}

/// Body of a dated record.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecordInput {
    pub kind: RecordKind,
    pub done_on: String,
    pub due_on: Option<String>,
    #[serde(default)]
    pub reference: String,
    pub cone_sand_mass_g: Option<f64>,
    pub sand_density_kg_m3: Option<f64>,
    pub volume_cm3: Option<f64>,
}

/// Body of an assignment to a project.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AssignmentInput {
    pub project_id: i64,
    pub from_on: String,
    pub to_on: Option<String>,
}

/// Body of a new gauge operator.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OperatorInput {
    pub code: String,
    pub name: String,
    /// The licence or certification held (its reference).
    pub certification: String,
    pub expires_on: String,
}

/// Writes one audit row of the register (a creation; the accounts' audit writer).
pub(crate) async fn audit_row(
    tx: &mut db::Tx<'_>,
    actor: &Actor,
    entity: &str,
    id: i64,
    project_id: Option<i64>,
    after: serde_json::Value,
    now: &str,
) -> Result<()> {
    super::accounts::audit_change(tx, actor, "create", (entity, id, project_id), after, now).await
}

/// Loads an instrument or fails with 404 naming `instrument_id`.
pub async fn require_instrument(pool: &Pool, id: i64) -> Result<Instrument> {
    db::instruments::get_instrument(pool, id)
        .await?
        .ok_or_else(|| {
            AppError::not_found("instrument_id", format!("instrument {id} does not exist"))
        })
}

/// Loads an instrument by serial or fails with 404 naming `serial`.
pub async fn require_serial(pool: &Pool, serial: &str) -> Result<Instrument> {
    db::instruments::by_serial(pool, serial.trim())
        .await?
        .ok_or_else(|| {
            AppError::not_found(
                "serial",
                format!("'{}' is not in the instrument register", serial.trim()),
            )
        })
}

/// A record checked against its instrument's kind (prefix names the fields, e.g. for CSV rows).
fn checked_record(
    kind: InstrumentKind,
    input: &RecordInput,
    instrument_id: i64,
    actor: &Actor,
    now: &str,
) -> Result<db::instruments::InstrumentRecord> {
    let done_on = date("done_on", &input.done_on)?;
    let due_on = input
        .due_on
        .as_deref()
        .map(|d| date("due_on", d))
        .transpose()?;
    if let Some(due) = &due_on
        && due < &done_on
    {
        return Err(AppError::invalid(
            "due_on",
            format!("{due} is before the record's date {done_on}"),
        ));
    }
    if input.kind == RecordKind::Licence && due_on.is_none() {
        return Err(AppError::invalid(
            "due_on",
            "a licence needs its expiry date",
        ));
    }
    let cal = input.kind == RecordKind::Calibration;
    let needed = |v: Option<f64>, field: &str, min: f64, max: f64, unit: &str, wanted: bool| match v
    {
        Some(x) => number(field, x, min, max, unit).map(Some),
        None if wanted => Err(AppError::invalid(
            field,
            "is required for this instrument's calibration",
        )),
        None => Ok(None),
    };
    // Ranges (common practice): cone-and-plate sand 500–4000 g; sand 1000–2000 kg/m³ (as
    // the field reduction accepts); volumes 100–10,000 cm³.
    Ok(db::instruments::InstrumentRecord {
        id: 0,
        instrument_id,
        kind: input.kind,
        done_on,
        due_on,
        reference: optional_text("reference", &input.reference, 120)?,
        cone_sand_mass_g: needed(
            input.cone_sand_mass_g,
            "cone_sand_mass_g",
            500.0,
            4000.0,
            "g",
            cal && kind == InstrumentKind::SandCone,
        )?,
        sand_density_kg_m3: needed(
            input.sand_density_kg_m3,
            "sand_density_kg_m3",
            crate::reduction::field::SAND_DENSITY_MIN_KG_M3,
            crate::reduction::field::SAND_DENSITY_MAX_KG_M3,
            "kg/m³",
            cal && kind == InstrumentKind::SandBatch,
        )?,
        volume_cm3: needed(
            input.volume_cm3,
            "volume_cm3",
            100.0,
            10_000.0,
            "cm³",
            cal && kind == InstrumentKind::DriveCylinder,
        )?,
        created_at: now.to_string(),
        created_by: actor.name.clone(),
    })
}

/// The instrument and its first calibration (when given), checked; nothing written.
fn checked_instrument(
    input: &InstrumentInput,
    actor: &Actor,
    now: &str,
) -> Result<(Instrument, Option<db::instruments::InstrumentRecord>)> {
    let instrument = Instrument {
        id: 0,
        kind: input.kind,
        serial: code("serial", &input.serial)?,
        description: optional_text("description", &input.description, 200)?,
        created_at: now.to_string(),
        created_by: actor.name.clone(),
    };
    let first = match &input.calibrated_on {
        Some(on) => Some(
            checked_record(
                input.kind,
                &RecordInput {
                    kind: RecordKind::Calibration,
                    done_on: on.clone(),
                    due_on: input.due_on.clone(),
                    reference: String::new(),
                    cone_sand_mass_g: input.cone_sand_mass_g,
                    sand_density_kg_m3: input.sand_density_kg_m3,
                    volume_cm3: input.volume_cm3,
                },
                0,
                actor,
                now,
            )
            .map_err(|e| match e.field() {
                "done_on" => AppError::invalid("calibrated_on", e.user_message()),
                _ => e,
            })?,
        ),
        None if input.due_on.is_some() => {
            return Err(AppError::invalid(
                "calibrated_on",
                "is required with a due date",
            ));
        }
        None => None,
    };
    Ok((instrument, first))
}

/// Writes a checked instrument and its first calibration inside a transaction.
async fn insert_checked(
    tx: &mut db::Tx<'_>,
    instrument: &Instrument,
    first: Option<db::instruments::InstrumentRecord>,
    actor: &Actor,
    now: &str,
) -> Result<Instrument> {
    let i = db::instruments::insert_instrument(tx, instrument)
        .await
        .map_err(|e| {
            if db::is_unique_violation(&e) {
                AppError::conflict(
                    "serial",
                    format!("serial {} is already registered", instrument.serial),
                    vec![],
                )
            } else {
                e.into()
            }
        })?;
    audit_row(tx, actor, "instrument", i.id, None, json!(i), now).await?;
    if let Some(mut r) = first {
        r.instrument_id = i.id;
        let r = db::instruments::insert_record(tx, &r).await?;
        audit_row(tx, actor, "instrument_record", r.id, None, json!(r), now).await?;
    }
    Ok(i)
}

/// Registers an instrument.
pub async fn create_instrument(
    pool: &Pool,
    input: &InstrumentInput,
    actor: &Actor,
) -> Result<Instrument> {
    let now = clock::now();
    let (instrument, first) = checked_instrument(input, actor, &now)?;
    let mut tx = db::begin_write(pool).await?;
    let i = insert_checked(&mut tx, &instrument, first, actor, &now).await?;
    tx.commit().await?;
    Ok(i)
}

/// Adds a dated record (calibration, leak test, licence) to an instrument.
pub async fn add_record(
    pool: &Pool,
    instrument_id: i64,
    input: &RecordInput,
    actor: &Actor,
) -> Result<db::instruments::InstrumentRecord> {
    let i = require_instrument(pool, instrument_id).await?;
    let kind = i.kind;
    let now = clock::now();
    let r = checked_record(kind, input, i.id, actor, &now)?;
    let mut tx = db::begin_write(pool).await?;
    let r = db::instruments::insert_record(&mut tx, &r).await?;
    audit_row(
        &mut tx,
        actor,
        "instrument_record",
        r.id,
        None,
        json!(r),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(r)
}

/// Assigns an instrument to a project from a date; its open assignment elsewhere ends that day.
pub async fn assign(
    pool: &Pool,
    instrument_id: i64,
    input: &AssignmentInput,
    actor: &Actor,
) -> Result<db::instruments::Assignment> {
    let i = require_instrument(pool, instrument_id).await?;
    super::setup::require_project(pool, input.project_id).await?;
    let from_on = date("from_on", &input.from_on)?;
    let to_on = input
        .to_on
        .as_deref()
        .map(|d| date("to_on", d))
        .transpose()?;
    if to_on.as_ref().is_some_and(|t| t < &from_on) {
        return Err(AppError::invalid("to_on", "is before from_on"));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    db::instruments::close_open_assignments(&mut tx, i.id, &from_on).await?;
    let a = db::instruments::insert_assignment(
        &mut tx,
        &db::instruments::Assignment {
            id: 0,
            instrument_id: i.id,
            project_id: input.project_id,
            from_on,
            to_on,
            created_at: now.clone(),
            created_by: actor.name.clone(),
        },
    )
    .await?;
    audit_row(
        &mut tx,
        actor,
        "instrument_assignment",
        a.id,
        Some(a.project_id),
        json!(a),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(a)
}

/// Registers a gauge operator.
pub async fn create_operator(
    pool: &Pool,
    input: &OperatorInput,
    actor: &Actor,
) -> Result<db::instruments::Operator> {
    let now = clock::now();
    let o = db::instruments::Operator {
        id: 0,
        code: code("code", &input.code)?,
        name: text("name", &input.name, 80)?,
        certification: text("certification", &input.certification, 120)?,
        expires_on: date("expires_on", &input.expires_on)?,
        created_at: now.clone(),
        created_by: actor.name.clone(),
    };
    let mut tx = db::begin_write(pool).await?;
    let o = db::instruments::insert_operator(&mut tx, &o)
        .await
        .map_err(|e| {
            if db::is_unique_violation(&e) {
                AppError::conflict(
                    "code",
                    format!("operator {} already exists", o.code),
                    vec![],
                )
            } else {
                e.into()
            }
        })?;
    audit_row(&mut tx, actor, "gauge_operator", o.id, None, json!(o), &now).await?;
    tx.commit().await?;
    Ok(o)
}

/// Imports a register CSV (header `kind,serial,description,calibrated_on,due_on,
/// cone_sand_mass_g,sand_density_kg_m3,volume_cm3`): every row is checked first; one bad
/// row refuses the file (the field named `rows[n].field`, n counting data rows from 1)
/// and nothing is written.
pub async fn import_csv(pool: &Pool, body: &str, actor: &Actor) -> Result<Vec<Instrument>> {
    let now = clock::now();
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .from_reader(body.as_bytes());
    let headers = reader
        .headers()
        .map_err(|e| AppError::invalid("file", format!("cannot read the header: {e}")))?
        .clone();
    let col = |name: &str| headers.iter().position(|h| h == name);
    let (Some(kind_col), Some(serial_col)) = (col("kind"), col("serial")) else {
        return Err(AppError::invalid(
            "file",
            "the header must name 'kind' and 'serial'",
        ));
    };
    let mut rows = Vec::new();
    for (n, rec) in reader.records().enumerate() {
        let n = n + 1;
        let rec = rec.map_err(|e| AppError::invalid(format!("rows[{n}]"), e.to_string()))?;
        let field = |name: &str| col(name).and_then(|c| rec.get(c)).filter(|v| !v.is_empty());
        let num = |name: &str| -> Result<Option<f64>> {
            field(name)
                .map(|v| {
                    v.parse::<f64>().map_err(|_| {
                        AppError::invalid(
                            format!("rows[{n}].{name}"),
                            format!("'{v}' is not a number"),
                        )
                    })
                })
                .transpose()
        };
        let kind_text = rec.get(kind_col).unwrap_or("");
        let kind = InstrumentKind::parse_code(kind_text).ok_or_else(|| {
            AppError::invalid(
                format!("rows[{n}].kind"),
                format!("'{kind_text}' is not nuclear_gauge, sand_cone, sand_batch, balloon or drive_cylinder"),
            )
        })?;
        let input = InstrumentInput {
            kind,
            serial: rec.get(serial_col).unwrap_or("").to_string(),
            description: field("description").unwrap_or("").to_string(),
            calibrated_on: field("calibrated_on").map(str::to_string),
            due_on: field("due_on").map(str::to_string),
            cone_sand_mass_g: num("cone_sand_mass_g")?,
            sand_density_kg_m3: num("sand_density_kg_m3")?,
            volume_cm3: num("volume_cm3")?,
        };
        let checked = checked_instrument(&input, actor, &now)
            .map_err(|e| AppError::invalid(format!("rows[{n}].{}", e.field()), e.user_message()))?;
        rows.push((n, checked));
    }
    if rows.is_empty() {
        return Err(AppError::invalid("file", "holds no instruments"));
    }
    let mut tx = db::begin_write(pool).await?;
    let mut out = Vec::new();
    for (n, (instrument, first)) in rows {
        let i = insert_checked(&mut tx, &instrument, first, actor, &now)
            .await
            .map_err(|e| match e {
                AppError::Internal(_) => e,
                e => {
                    AppError::conflict(format!("rows[{n}].{}", e.field()), e.user_message(), vec![])
                }
            })?;
        out.push(i);
    }
    tx.commit().await?;
    Ok(out)
}

/// Calibrations (and licences, leak tests) of instruments on a project falling due within
/// `window_days` of `today`, overdue ones included: (instrument, record, days left).
pub async fn due_for_project(
    pool: &Pool,
    project_id: i64,
    today: &str,
    window_days: i64,
) -> Result<Vec<(Instrument, db::instruments::InstrumentRecord, i64)>> {
    let book = check::InstrumentBook::load(pool, project_id).await?;
    let mut out = Vec::new();
    for i in &book.instruments {
        if !book
            .assignments
            .iter()
            .any(|a| a.instrument_id == i.id && a.covers(today))
        {
            continue;
        }
        for kind in RecordKind::ALL {
            let latest = book
                .records
                .iter()
                .filter(|r| {
                    r.instrument_id == i.id && r.kind == kind && r.done_on.as_str() <= today
                })
                .max_by(|a, b| a.done_on.cmp(&b.done_on).then(a.id.cmp(&b.id)));
            if let Some(r) = latest
                && let Some(due) = &r.due_on
                && crate::reduction::instruments::due_within(today, due, window_days)
            {
                let days = crate::reduction::instruments::days_until(today, due).unwrap_or(0);
                out.push((i.clone(), r.clone(), days));
            }
        }
    }
    out.sort_by_key(|(_, _, d)| *d);
    Ok(out)
}
