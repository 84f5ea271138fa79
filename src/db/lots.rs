//! Lots: one layer between two chainages, judged as a unit, and their state changes.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};
use crate::domain::LotState;

/// A stored lot joined with the names a reader needs beside it.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Lot {
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
    pub state: LotState,
    pub state_changed_at: String,
    pub created_at: String,
    pub created_by: String,
    pub zone_name: String,
    pub zone_position: i64,
    pub layer_number: i64,
    /// Compacted thickness of the lot's layer, mm, when recorded.
    pub layer_thickness_mm: Option<f64>,
    /// Which random sample the lot is judged on (1 until a quality-index lot is re-sampled).
    pub sample: i64,
    /// Tests with ids up to this belong to earlier samples (None before any re-sample).
    pub sample_after_test_id: Option<i64>,
}

/// Fields of a new lot, already validated.
#[derive(Debug, Clone)]
pub struct NewLot {
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
}

/// Filters for listing lots; `None` means "any".
#[derive(Debug, Clone, Default)]
pub struct LotFilter {
    pub chainage_from_m: Option<f64>,
    pub chainage_to_m: Option<f64>,
    pub layer_id: Option<i64>,
    pub state: Option<LotState>,
    pub changed_since: Option<String>,
    pub changed_before: Option<String>,
    pub limit: i64,
    pub offset: i64,
}

/// A recorded state change of a lot.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Transition {
    pub id: i64,
    pub lot_id: i64,
    pub from_state: LotState,
    pub to_state: LotState,
    pub actor: String,
    pub at: String,
    pub comment: String,
}

const SELECT: &str = "SELECT lo.id, lo.project_id, lo.layer_id, lo.code, lo.chainage_from_m, lo.chainage_to_m,
        lo.offset_left_m, lo.offset_right_m, lo.clause_id, lo.source_id, lo.lab_test_id, lo.state,
        lo.state_changed_at, lo.created_at, lo.created_by, z.name AS zone_name, z.position AS zone_position,
        la.number AS layer_number, la.thickness_mm AS layer_thickness_mm, lo.sample, lo.sample_after_test_id
     FROM lots lo JOIN layers la ON la.id = lo.layer_id JOIN zones z ON z.id = la.zone_id";

/// Inserts a lot in the open state.
pub async fn insert(tx: &mut Tx<'_>, new: &NewLot, actor: &str, now: &str) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| {
        sqlx::query_scalar(
        "INSERT INTO lots (project_id, layer_id, code, chainage_from_m, chainage_to_m, offset_left_m, offset_right_m,
             clause_id, source_id, lab_test_id, state, state_changed_at, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14) RETURNING id",
    )
    .bind(new.project_id)
    .bind(new.layer_id)
    .bind(&new.code)
    .bind(new.chainage_from_m)
    .bind(new.chainage_to_m)
    .bind(new.offset_left_m)
    .bind(new.offset_right_m)
    .bind(new.clause_id)
    .bind(new.source_id)
    .bind(new.lab_test_id)
    .bind(LotState::Open)
    .bind(now)
    .bind(now)
    .bind(actor)
    .fetch_one(&mut **tx)
    .await
    })
}

/// One lot by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<Lot>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Lot>(sqlx::AssertSqlSafe(
        format!("{SELECT} WHERE lo.id = $1")
    ))
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// Lots of a project matching the filter, by layer then chainage.
pub async fn list(pool: &Pool, project_id: i64, f: &LotFilter) -> sqlx::Result<Vec<Lot>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Lot>(sqlx::AssertSqlSafe(
        format!(
            "{SELECT} WHERE lo.project_id = $1
           AND ($2 IS NULL OR lo.chainage_to_m > $3)
           AND ($4 IS NULL OR lo.chainage_from_m < $5)
           AND ($6 IS NULL OR lo.layer_id = $7)
           AND ($8 IS NULL OR lo.state = $9)
           AND ($10 IS NULL OR lo.state_changed_at >= $11)
           AND ($12 IS NULL OR lo.state_changed_at < $13)
         ORDER BY z.position, la.number, lo.chainage_from_m, lo.id
         LIMIT $14 OFFSET $15"
        )
    ))
    .bind(project_id)
    .bind(f.chainage_from_m)
    .bind(f.chainage_from_m)
    .bind(f.chainage_to_m)
    .bind(f.chainage_to_m)
    .bind(f.layer_id)
    .bind(f.layer_id)
    .bind(f.state)
    .bind(f.state)
    .bind(&f.changed_since)
    .bind(&f.changed_since)
    .bind(&f.changed_before)
    .bind(&f.changed_before)
    .bind(f.limit)
    .bind(f.offset)
    .fetch_all(pool)
    .await)
}

/// Lots in one state across a project, oldest state change first (the review queue).
pub async fn in_state(pool: &Pool, project_id: i64, state: LotState) -> sqlx::Result<Vec<Lot>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, Lot>(sqlx::AssertSqlSafe(format!(
        "{SELECT} WHERE lo.project_id = $1 AND lo.state = $2 ORDER BY lo.state_changed_at, lo.id"
    )))
    .bind(project_id)
    .bind(state)
    .fetch_all(pool)
    .await
    })
}

/// Moves a lot from `from` to `to` and records the transition; false when the lot was not in `from`.
pub async fn transition(
    tx: &mut Tx<'_>,
    lot_id: i64,
    from: LotState,
    to: LotState,
    actor: &str,
    comment: &str,
    now: &str,
) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| sqlx::query(
        "UPDATE lots SET state = $1, state_changed_at = $2 WHERE id = $3 AND state = $4",
    )
    .bind(to)
    .bind(now)
    .bind(lot_id)
    .bind(from)
    .execute(&mut **tx)
    .await?
    .rows_affected());
    if !super::changed_one(q) {
        return Ok(false);
    }
    on_tx!(tx, |tx| {
        sqlx::query(
        "INSERT INTO lot_transitions (lot_id, from_state, to_state, actor, at, comment) VALUES ($1, $2, $3, $4, $5, $6)",
    )
    .bind(lot_id)
    .bind(from)
    .bind(to)
    .bind(actor)
    .bind(now)
    .bind(comment)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(true)
}

/// Every state change of a lot, in order.
pub async fn transitions(pool: &Pool, lot_id: i64) -> sqlx::Result<Vec<Transition>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, Transition>(
        "SELECT id, lot_id, from_state, to_state, actor, at, comment FROM lot_transitions WHERE lot_id = $1 ORDER BY id",
    )
    .bind(lot_id)
    .fetch_all(pool)
    .await
    })
}

/// Count of lots per state in a project.
pub async fn count_by_state(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<(LotState, i64)>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, (LotState, i64)>(
        "SELECT state, COUNT(*) FROM lots WHERE project_id = $1 GROUP BY state ORDER BY state",
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// Points one open or rejected lot from curve `old` at curve `new`; false when the lot
/// is no longer open/rejected or no longer on `old` (changed meanwhile).
pub async fn set_lab_test(tx: &mut Tx<'_>, lot_id: i64, old: i64, new: i64) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| sqlx::query(
        "UPDATE lots SET lab_test_id = $1
         WHERE id = $2 AND lab_test_id = $3 AND state IN ($4, $5)",
    )
    .bind(new)
    .bind(lot_id)
    .bind(old)
    .bind(LotState::Open)
    .bind(LotState::Rejected)
    .execute(&mut **tx)
    .await?
    .rows_affected());
    Ok(super::changed_one(q))
}

/// Every state change of a lot, read inside a transaction.
pub async fn transitions_tx(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<Vec<Transition>> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, Transition>(
        "SELECT id, lot_id, from_state, to_state, actor, at, comment FROM lot_transitions WHERE lot_id = $1 ORDER BY id",
    )
    .bind(lot_id)
    .fetch_all(&mut **tx)
    .await
    })
}

/// The lot's state read inside a write, held against a concurrent state change until the
/// write commits (on PostgreSQL by a share lock; SQLite's write lock already holds it).
pub async fn state_for_write(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<Option<LotState>> {
    let sql = if tx.engine() == super::Engine::Postgres {
        "SELECT state FROM lots WHERE id = $1 FOR SHARE"
    } else {
        "SELECT state FROM lots WHERE id = $1"
    };
    on_tx!(tx, |tx| sqlx::query_scalar(sql)
        .bind(lot_id)
        .fetch_optional(&mut **tx)
        .await)
}

/// Lots judged against a lab test (code, clause id).
pub async fn using_lab_test(pool: &Pool, lab_test_id: i64) -> sqlx::Result<Vec<(String, i64)>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, (String, i64)>(
        "SELECT code, clause_id FROM lots WHERE lab_test_id = $1 ORDER BY code",
    )
    .bind(lab_test_id)
    .fetch_all(pool)
    .await)
}

/// Starts a new random sample of a lot: tests up to `after_test_id` become earlier samples.
/// False when the lot is not at `expected_sample` (someone re-sampled meanwhile).
pub async fn start_sample(
    tx: &mut Tx<'_>,
    lot_id: i64,
    expected_sample: i64,
    after_test_id: i64,
) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE lots SET sample = sample + 1, sample_after_test_id = $1 WHERE id = $2 AND sample = $3",
    )
    .bind(after_test_id)
    .bind(lot_id)
    .bind(expected_sample)
        .execute(&mut **tx)
        .await?
        .rows_affected()
    });
    Ok(super::changed_one(q))
}

/// The highest field-test id of a lot (0 when it has none), read inside a transaction.
pub async fn last_test_id(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<i64> {
    let id: Option<i64> = on_tx!(tx, |tx| sqlx::query_scalar(
        "SELECT MAX(id) FROM field_tests WHERE lot_id = $1"
    )
    .bind(lot_id)
    .fetch_one(&mut **tx)
    .await)?;
    Ok(id.unwrap_or(0))
}
