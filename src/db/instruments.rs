//! The instrument register: instruments, their dated records and assignments, gauge
//! operators, standard counts, tolerances, clause policies and material offsets.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A registered instrument (organisation-wide).
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Instrument {
    pub id: i64,
    pub kind: crate::reduction::instruments::InstrumentKind,
    pub serial: String,
    pub description: String,
    pub created_at: String,
    pub created_by: String,
}

/// A dated record of an instrument: a calibration, a leak test or a licence.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct InstrumentRecord {
    pub id: i64,
    pub instrument_id: i64,
    pub kind: crate::ledger::instruments::RecordKind,
    pub done_on: String,
    pub due_on: Option<String>,
    pub reference: String,
    /// Sand filling cone and plate (sand-cone calibrations), g.
    pub cone_sand_mass_g: Option<f64>,
    /// Bulk density of a sand batch, kg/m³.
    pub sand_density_kg_m3: Option<f64>,
    /// Calibrated volume (balloon apparatus, drive cylinder), cm³.
    pub volume_cm3: Option<f64>,
    pub created_at: String,
    pub created_by: String,
}

impl crate::reduction::instruments::Dated for InstrumentRecord {
    fn effective_day(&self) -> &str {
        &self.done_on
    }
}

/// An instrument's time on a project (`to_on` None: still there).
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Assignment {
    pub id: i64,
    pub instrument_id: i64,
    pub project_id: i64,
    pub from_on: String,
    pub to_on: Option<String>,
    pub created_at: String,
    pub created_by: String,
}

impl Assignment {
    /// Whether the instrument was on the project on `day`.
    pub fn covers(&self, day: &str) -> bool {
        self.from_on.as_str() <= day && self.to_on.as_deref().is_none_or(|t| day <= t)
    }
}

/// A person licensed or certified to run nuclear gauges.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Operator {
    pub id: i64,
    pub code: String,
    pub name: String,
    pub certification: String,
    pub expires_on: String,
    pub created_at: String,
    pub created_by: String,
}

/// A daily standard count and how it was judged.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct StandardCount {
    pub id: i64,
    pub instrument_id: i64,
    pub project_id: i64,
    pub counted_on: String,
    pub density_count: i64,
    pub moisture_count: i64,
    /// "baseline", "accepted" or "failed".
    pub outcome: String,
    pub density_mean: Option<f64>,
    pub moisture_mean: Option<f64>,
    pub density_deviation_pct: Option<f64>,
    pub moisture_deviation_pct: Option<f64>,
    pub density_tolerance_pct: f64,
    pub moisture_tolerance_pct: f64,
    pub created_at: String,
    pub created_by: String,
}

/// A gauge's material offsets for one source and mode, from an effective date.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct GaugeOffset {
    pub id: i64,
    pub instrument_id: i64,
    pub source_id: i64,
    pub mode: String,
    pub effective_on: String,
    pub density_offset_kg_m3: f64,
    pub moisture_offset_pct: f64,
    pub pairs: i64,
    pub pairs_json: String,
    pub created_at: String,
    pub created_by: String,
}

impl crate::reduction::instruments::Dated for GaugeOffset {
    fn effective_day(&self) -> &str {
        &self.effective_on
    }
}

const INSTRUMENT: &str = "id, kind, serial, description, created_at, created_by";
const RECORD: &str =
    "id, instrument_id, kind, done_on, due_on, reference, cone_sand_mass_g, sand_density_kg_m3,
    volume_cm3, created_at, created_by";
const ASSIGNMENT: &str = "id, instrument_id, project_id, from_on, to_on, created_at, created_by";
const OPERATOR: &str = "id, code, name, certification, expires_on, created_at, created_by";
const COUNT: &str = "id, instrument_id, project_id, counted_on, density_count, moisture_count, outcome,
    density_mean, moisture_mean, density_deviation_pct, moisture_deviation_pct, density_tolerance_pct,
    moisture_tolerance_pct, created_at, created_by";
const OFFSET: &str = "id, instrument_id, source_id, mode, effective_on, density_offset_kg_m3,
    moisture_offset_pct, pairs, pairs_json, created_at, created_by";

/// Inserts an instrument; `id` ignored.
pub async fn insert_instrument(tx: &mut Tx<'_>, i: &Instrument) -> sqlx::Result<Instrument> {
    on_tx!(tx, |tx| sqlx::query_as::<_, Instrument>(
        sqlx::AssertSqlSafe(format!(
            "INSERT INTO instruments (kind, serial, description, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5) RETURNING {INSTRUMENT}"
        ))
    )
    .bind(i.kind)
    .bind(&i.serial)
    .bind(&i.description)
    .bind(&i.created_at)
    .bind(&i.created_by)
    .fetch_one(&mut **tx)
    .await)
}

/// Every instrument, by kind and serial.
pub async fn list_instruments(pool: &Pool) -> sqlx::Result<Vec<Instrument>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Instrument>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {INSTRUMENT} FROM instruments ORDER BY kind, serial"
        ))
    )
    .fetch_all(pool)
    .await)
}

/// One instrument by id.
pub async fn get_instrument(pool: &Pool, id: i64) -> sqlx::Result<Option<Instrument>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Instrument>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {INSTRUMENT} FROM instruments WHERE id = $1"
        ))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// One instrument by serial.
pub async fn by_serial(pool: &Pool, serial: &str) -> sqlx::Result<Option<Instrument>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Instrument>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {INSTRUMENT} FROM instruments WHERE serial = $1"
        ))
    )
    .bind(serial)
    .fetch_optional(pool)
    .await)
}

/// Inserts a dated record; `id` ignored.
pub async fn insert_record(
    tx: &mut Tx<'_>,
    r: &InstrumentRecord,
) -> sqlx::Result<InstrumentRecord> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, InstrumentRecord>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO instrument_records (instrument_id, kind, done_on, due_on, reference, cone_sand_mass_g,
             sand_density_kg_m3, volume_cm3, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10) RETURNING {RECORD}"
    )))
    .bind(r.instrument_id)
    .bind(r.kind)
    .bind(&r.done_on)
    .bind(&r.due_on)
    .bind(&r.reference)
    .bind(r.cone_sand_mass_g)
    .bind(r.sand_density_kg_m3)
    .bind(r.volume_cm3)
    .bind(&r.created_at)
    .bind(&r.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every record of one instrument (or of all, with `None`), oldest first.
pub async fn records(
    pool: &Pool,
    instrument_id: Option<i64>,
) -> sqlx::Result<Vec<InstrumentRecord>> {
    let filter = if instrument_id.is_some() {
        "WHERE instrument_id = $1"
    } else {
        ""
    };
    on_pool!(pool, |pool| {
        let q = sqlx::query_as::<_, InstrumentRecord>(sqlx::AssertSqlSafe(format!(
            "SELECT {RECORD} FROM instrument_records {filter} ORDER BY done_on, id"
        )));
        match instrument_id {
            Some(id) => q.bind(id).fetch_all(pool).await,
            None => q.fetch_all(pool).await,
        }
    })
}

/// The filter on one instrument (`Some`) or on one project, by the column naming the project.
fn by_instrument_or_project(instrument_id: Option<i64>, project_clause: &str) -> (String, i64) {
    match instrument_id {
        Some(id) => ("WHERE instrument_id = $1".to_string(), id),
        None => (format!("WHERE {project_clause}"), 0),
    }
}

/// Inserts an assignment; `id` ignored.
pub async fn insert_assignment(tx: &mut Tx<'_>, a: &Assignment) -> sqlx::Result<Assignment> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, Assignment>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO instrument_assignments (instrument_id, project_id, from_on, to_on, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6) RETURNING {ASSIGNMENT}"
    )))
    .bind(a.instrument_id)
    .bind(a.project_id)
    .bind(&a.from_on)
    .bind(&a.to_on)
    .bind(&a.created_at)
    .bind(&a.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Ends an instrument's open assignments on `to_on` (it moves to another contract).
pub async fn close_open_assignments(
    tx: &mut Tx<'_>,
    instrument_id: i64,
    to_on: &str,
) -> sqlx::Result<u64> {
    let done = on_tx!(tx, |tx| sqlx::query(
        "UPDATE instrument_assignments SET to_on = $1
         WHERE instrument_id = $2 AND to_on IS NULL AND from_on <= $3",
    )
    .bind(to_on)
    .bind(instrument_id)
    .bind(to_on)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(done)
}

/// Assignments of one instrument (`Some(id)`) or of one project, oldest first.
pub async fn assignments(
    pool: &Pool,
    instrument_id: Option<i64>,
    project_id: Option<i64>,
) -> sqlx::Result<Vec<Assignment>> {
    let (filter, id) = by_instrument_or_project(instrument_id, "project_id = $1");
    on_pool!(pool, |pool| sqlx::query_as::<_, Assignment>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {ASSIGNMENT} FROM instrument_assignments {filter} ORDER BY from_on, id"
        ))
    )
    .bind(instrument_id.map_or(project_id.unwrap_or(0), |_| id))
    .fetch_all(pool)
    .await)
}

/// Inserts an operator; `id` ignored.
pub async fn insert_operator(tx: &mut Tx<'_>, o: &Operator) -> sqlx::Result<Operator> {
    on_tx!(tx, |tx| sqlx::query_as::<_, Operator>(sqlx::AssertSqlSafe(
        format!(
        "INSERT INTO gauge_operators (code, name, certification, expires_on, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6) RETURNING {OPERATOR}"
    )
    ))
    .bind(&o.code)
    .bind(&o.name)
    .bind(&o.certification)
    .bind(&o.expires_on)
    .bind(&o.created_at)
    .bind(&o.created_by)
    .fetch_one(&mut **tx)
    .await)
}

/// Every operator, by name.
pub async fn operators(pool: &Pool) -> sqlx::Result<Vec<Operator>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Operator>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {OPERATOR} FROM gauge_operators ORDER BY name, id"
        ))
    )
    .fetch_all(pool)
    .await)
}

/// Inserts a standard count; `id` ignored.
pub async fn insert_count(tx: &mut Tx<'_>, c: &StandardCount) -> sqlx::Result<StandardCount> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, StandardCount>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO standard_counts (instrument_id, project_id, counted_on, density_count, moisture_count, outcome,
             density_mean, moisture_mean, density_deviation_pct, moisture_deviation_pct, density_tolerance_pct,
             moisture_tolerance_pct, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14) RETURNING {COUNT}"
    )))
    .bind(c.instrument_id)
    .bind(c.project_id)
    .bind(&c.counted_on)
    .bind(c.density_count)
    .bind(c.moisture_count)
    .bind(&c.outcome)
    .bind(c.density_mean)
    .bind(c.moisture_mean)
    .bind(c.density_deviation_pct)
    .bind(c.moisture_deviation_pct)
    .bind(c.density_tolerance_pct)
    .bind(c.moisture_tolerance_pct)
    .bind(&c.created_at)
    .bind(&c.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// A gauge's counts in the order they were taken, read inside the write that adds the next.
pub async fn counts_in(tx: &mut Tx<'_>, instrument_id: i64) -> sqlx::Result<Vec<StandardCount>> {
    on_tx!(tx, |tx| sqlx::query_as::<_, StandardCount>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COUNT} FROM standard_counts WHERE instrument_id = $1 ORDER BY counted_on, id"
        ))
    )
    .bind(instrument_id)
    .fetch_all(&mut **tx)
    .await)
}

/// A gauge's counts (or every count of gauges on a project's register), oldest first.
pub async fn counts(
    pool: &Pool,
    instrument_id: Option<i64>,
    project_id: Option<i64>,
) -> sqlx::Result<Vec<StandardCount>> {
    let (filter, id) = by_instrument_or_project(
        instrument_id,
        "instrument_id IN (SELECT instrument_id FROM instrument_assignments WHERE project_id = $1)",
    );
    on_pool!(pool, |pool| sqlx::query_as::<_, StandardCount>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COUNT} FROM standard_counts {filter} ORDER BY counted_on, id"
        ))
    )
    .bind(instrument_id.map_or(project_id.unwrap_or(0), |_| id))
    .fetch_all(pool)
    .await)
}

/// The latest calibration record of an instrument taken inside a write.
pub async fn latest_calibration_in(
    tx: &mut Tx<'_>,
    instrument_id: i64,
    on_or_before: &str,
) -> sqlx::Result<Option<InstrumentRecord>> {
    on_tx!(tx, |tx| sqlx::query_as::<_, InstrumentRecord>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {RECORD} FROM instrument_records
         WHERE instrument_id = $1 AND kind = 'calibration' AND done_on <= $2
         ORDER BY done_on DESC, id DESC LIMIT 1"
        ))
    )
    .bind(instrument_id)
    .bind(on_or_before)
    .fetch_optional(&mut **tx)
    .await)
}

/// Inserts an offset; `id` ignored.
pub async fn insert_offset(tx: &mut Tx<'_>, o: &GaugeOffset) -> sqlx::Result<GaugeOffset> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, GaugeOffset>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO gauge_offsets (instrument_id, source_id, mode, effective_on, density_offset_kg_m3,
             moisture_offset_pct, pairs, pairs_json, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10) RETURNING {OFFSET}"
    )))
    .bind(o.instrument_id)
    .bind(o.source_id)
    .bind(&o.mode)
    .bind(&o.effective_on)
    .bind(o.density_offset_kg_m3)
    .bind(o.moisture_offset_pct)
    .bind(o.pairs)
    .bind(&o.pairs_json)
    .bind(&o.created_at)
    .bind(&o.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Offsets of one gauge, or of every source of a project, oldest first.
pub async fn offsets(
    pool: &Pool,
    instrument_id: Option<i64>,
    project_id: Option<i64>,
) -> sqlx::Result<Vec<GaugeOffset>> {
    let (filter, id) = by_instrument_or_project(
        instrument_id,
        "source_id IN (SELECT id FROM sources WHERE project_id = $1)",
    );
    on_pool!(pool, |pool| sqlx::query_as::<_, GaugeOffset>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {OFFSET} FROM gauge_offsets {filter} ORDER BY effective_on, id"
        ))
    )
    .bind(instrument_id.map_or(project_id.unwrap_or(0), |_| id))
    .fetch_all(pool)
    .await)
}

/// A project's tolerances, when it set its own: (density %, moisture %).
pub async fn tolerances(pool: &Pool, project_id: i64) -> sqlx::Result<Option<(f64, f64)>> {
    on_pool!(pool, |pool| sqlx::query_as(
        "SELECT density_pct, moisture_pct FROM instrument_tolerances WHERE project_id = $1",
    )
    .bind(project_id)
    .fetch_optional(pool)
    .await)
}

/// A project's tolerances read inside a write.
pub async fn tolerances_in(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<Option<(f64, f64)>> {
    on_tx!(tx, |tx| sqlx::query_as(
        "SELECT density_pct, moisture_pct FROM instrument_tolerances WHERE project_id = $1",
    )
    .bind(project_id)
    .fetch_optional(&mut **tx)
    .await)
}

/// Sets a project's tolerances (replacing earlier ones).
pub async fn set_tolerances(
    tx: &mut Tx<'_>,
    project_id: i64,
    density_pct: f64,
    moisture_pct: f64,
    actor: &str,
    now: &str,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "DELETE FROM instrument_tolerances WHERE project_id = $1"
    )
    .bind(project_id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    on_tx!(tx, |tx| {
        sqlx::query(
        "INSERT INTO instrument_tolerances (project_id, density_pct, moisture_pct, updated_at, updated_by)
         VALUES ($1, $2, $3, $4, $5)",
    )
    .bind(project_id)
    .bind(density_pct)
    .bind(moisture_pct)
    .bind(now)
    .bind(actor)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(())
}

/// Clauses of a project that let out-of-check tests be recorded, marked.
pub async fn clauses_recording_out_of_check(
    pool: &Pool,
    project_id: i64,
) -> sqlx::Result<Vec<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT p.clause_id FROM clause_instrument_policy p JOIN clauses c ON c.id = p.clause_id
         WHERE c.project_id = $1 AND p.record_out_of_check = 1",
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// Sets a clause's policy for tests from an instrument out of check.
pub async fn set_policy(
    tx: &mut Tx<'_>,
    clause_id: i64,
    record_out_of_check: bool,
    actor: &str,
    now: &str,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "DELETE FROM clause_instrument_policy WHERE clause_id = $1"
    )
    .bind(clause_id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    on_tx!(tx, |tx| {
        sqlx::query(
        "INSERT INTO clause_instrument_policy (clause_id, record_out_of_check, updated_at, updated_by)
         VALUES ($1, $2, $3, $4)",
    )
    .bind(clause_id)
    .bind(i64::from(record_out_of_check))
    .bind(now)
    .bind(actor)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(())
}

/// Tests a new offset reaches: from a registered gauge with this serial, on lots of this
/// source still taking tests (open or rejected — never submitted or accepted ones), taken
/// on or after the effective date.
pub async fn tests_for_offset(
    tx: &mut Tx<'_>,
    serial: &str,
    source_id: i64,
    effective_day: &str,
) -> sqlx::Result<Vec<super::field_tests::FieldTest>> {
    let cols = super::field_tests::COLUMNS;
    on_tx!(tx, |tx| sqlx::query_as::<_, super::field_tests::FieldTest>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {cols} FROM field_tests WHERE id IN (
             SELECT t.id FROM field_tests t JOIN lots l ON l.id = t.lot_id
             WHERE t.instrument_serial = $1 AND l.source_id = $2 AND t.tested_at >= $3
               AND t.method = 'nuclear' AND t.instrument_check <> 'not_recorded'
               AND l.state IN ('open', 'rejected'))
         ORDER BY id"
        ))
    )
    .bind(serial)
    .bind(source_id)
    .bind(effective_day)
    .fetch_all(&mut **tx)
    .await)
}

/// Stores a test's re-reduced figures and the offsets they carry.
pub async fn set_offset_reduction(
    tx: &mut Tx<'_>,
    t: &super::field_tests::FieldTest,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE field_tests SET wet_density_kg_m3 = $1, water_content_pct = $2, dry_density_kg_m3 = $3,
             density_offset_kg_m3 = $4, moisture_offset_pct = $5 WHERE id = $6",
    )
    .bind(t.wet_density_kg_m3)
    .bind(t.water_content_pct)
    .bind(t.dry_density_kg_m3)
    .bind(t.density_offset_kg_m3)
    .bind(t.moisture_offset_pct)
    .bind(t.id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(())
}

/// Whether a user holds the QC manager's role in any project (the register's editors are
/// admins and QC managers).
pub async fn is_qc_manager_anywhere(pool: &Pool, user_id: i64) -> sqlx::Result<bool> {
    let n: i64 = on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT COUNT(*) FROM memberships WHERE user_id = $1 AND role = 'qc_manager'",
    )
    .bind(user_id)
    .fetch_one(pool)
    .await)?;
    Ok(n > 0)
}

/// The register's revision (migration 0012): moved by every change of a register table.
pub async fn register_revision(pool: &Pool) -> sqlx::Result<i64> {
    on_pool!(pool, |p| sqlx::query_scalar(
        "SELECT revision FROM register_revision WHERE id = 1"
    )
    .fetch_one(p)
    .await)
}
