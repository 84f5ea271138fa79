//! Stored lot summaries and the marks of lots to judge again.
//!
//! The marks are written by triggers (migration 0012) in the transaction of every change
//! that can alter a lot's verdict; this module reads and clears them and keeps the
//! summaries. The one list of such changes is the migration's, repeated in
//! `ledger::lot_summaries`.

use super::{Engine, Pool, Tx, on_pool, on_tx};

/// A lot's stored summary: the judged part of its report as JSON, with the few fields
/// views filter on beside it.
#[derive(Debug, Clone, sqlx::FromRow)]
pub struct SummaryRow {
    pub lot_id: i64,
    pub project_id: i64,
    pub reduction_version: String,
    pub display_state: String,
    pub accepted: i64,
    pub tests_entered: i64,
    pub tests_owed: i64,
    pub judged_json: String,
    /// The lot's test ids by result code (JSON); empty when read for a view.
    pub test_results: String,
    pub judged_at: String,
}

/// One mark: a lot to judge again, by the id the mark was given.
#[derive(Debug, Clone, Copy, sqlx::FromRow)]
pub struct Mark {
    pub id: i64,
    pub lot_id: i64,
}

const MARKS: &str = "SELECT id, lot_id FROM lots_to_judge WHERE project_id = $1 ORDER BY id";

/// The marks of a project, oldest first.
pub async fn marks(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<Mark>> {
    on_pool!(pool, |p| sqlx::query_as::<_, Mark>(MARKS)
        .bind(project_id)
        .fetch_all(p)
        .await)
}

/// The marks of a project read inside the settling transaction.
pub async fn marks_in(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<Vec<Mark>> {
    on_tx!(tx, |t| sqlx::query_as::<_, Mark>(MARKS)
        .bind(project_id)
        .fetch_all(&mut **t)
        .await)
}

/// Projects with lots waiting to be judged again.
pub async fn marked_projects(pool: &Pool) -> sqlx::Result<Vec<i64>> {
    on_pool!(pool, |p| sqlx::query_scalar(
        "SELECT DISTINCT project_id FROM lots_to_judge ORDER BY project_id"
    )
    .fetch_all(p)
    .await)
}

/// Takes the settling of a project's summaries until the transaction ends, if free: on
/// PostgreSQL an advisory lock, so two app servers never write a lot's summary from two
/// different readings (SQLite's write lock already does so for one file). False when
/// another settling holds it.
pub async fn try_hold_settling(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<bool> {
    match tx {
        Tx::Sqlite(_) => Ok(true),
        Tx::Postgres(t) => {
            sqlx::query_scalar("SELECT pg_try_advisory_xact_lock(1201, CAST($1 AS INTEGER))")
                .bind(project_id)
                .fetch_one(&mut **t)
                .await
        }
    }
}

/// Writes a lot's summary. With `newer_only` an existing summary is kept when it was
/// judged from a later mark (SQLite, where mark ids follow commits).
pub async fn store(
    tx: &mut Tx<'_>,
    row: &SummaryRow,
    judged_mark: i64,
    newer_only: bool,
) -> sqlx::Result<()> {
    let guard = if newer_only {
        " WHERE excluded.judged_mark >= lot_summaries.judged_mark"
    } else {
        ""
    };
    let sql = format!(
        "INSERT INTO lot_summaries (lot_id, project_id, reduction_version, display_state, accepted,
             tests_entered, tests_owed, judged_json, test_results, judged_at, judged_mark)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11)
         ON CONFLICT (lot_id) DO UPDATE SET reduction_version = excluded.reduction_version,
             display_state = excluded.display_state, accepted = excluded.accepted,
             tests_entered = excluded.tests_entered, tests_owed = excluded.tests_owed,
             judged_json = excluded.judged_json, test_results = excluded.test_results,
             judged_at = excluded.judged_at, judged_mark = excluded.judged_mark{guard}"
    );
    on_tx!(tx, |t| sqlx::query(sqlx::AssertSqlSafe(sql))
        .bind(row.lot_id)
        .bind(row.project_id)
        .bind(&row.reduction_version)
        .bind(&row.display_state)
        .bind(row.accepted)
        .bind(row.tests_entered)
        .bind(row.tests_owed)
        .bind(&row.judged_json)
        .bind(&row.test_results)
        .bind(&row.judged_at)
        .bind(judged_mark)
        .execute(&mut **t)
        .await
        .map(|_| ()))
}

/// Removes the summary of a lot that no longer exists.
pub async fn forget(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<()> {
    on_tx!(tx, |t| sqlx::query(
        "DELETE FROM lot_summaries WHERE lot_id = $1"
    )
    .bind(lot_id)
    .execute(&mut **t)
    .await
    .map(|_| ()))
}

/// Clears exactly the marks that were read and judged: a mark committed meanwhile,
/// whatever its id, stays for the next settling. The ids are the store's own integers.
pub async fn clear(tx: &mut Tx<'_>, ids: &[i64]) -> sqlx::Result<()> {
    for chunk in ids.chunks(500) {
        let list = chunk
            .iter()
            .map(i64::to_string)
            .collect::<Vec<_>>()
            .join(", ");
        let sql = format!("DELETE FROM lots_to_judge WHERE id IN ({list})");
        on_tx!(&mut *tx, |t| sqlx::query(sqlx::AssertSqlSafe(sql))
            .execute(&mut **t)
            .await
            .map(|_| ()))?;
    }
    Ok(())
}

/// Moves the project's revision: the in-memory copies of its views are stale.
pub async fn bump_revision(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<()> {
    on_tx!(tx, |t| sqlx::query(
        "UPDATE projects SET revision = revision + 1 WHERE id = $1"
    )
    .bind(project_id)
    .execute(&mut **t)
    .await
    .map(|_| ()))
}

/// Every stored summary of a project (without the per-test results).
pub async fn for_project(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<SummaryRow>> {
    on_pool!(pool, |p| sqlx::query_as::<_, SummaryRow>(
        "SELECT lot_id, project_id, reduction_version, display_state, accepted, tests_entered,
                tests_owed, judged_json, '' AS test_results, judged_at
         FROM lot_summaries WHERE project_id = $1",
    )
    .bind(project_id)
    .fetch_all(p)
    .await)
}

/// Each lot's test ids by result (JSON), for the lots of a project (of one layer).
pub async fn test_results(
    pool: &Pool,
    project_id: i64,
    layer_id: Option<i64>,
) -> sqlx::Result<Vec<String>> {
    on_pool!(pool, |p| sqlx::query_scalar(
        "SELECT s.test_results FROM lot_summaries s JOIN lots l ON l.id = s.lot_id
         WHERE s.project_id = $1 AND ($2 IS NULL OR l.layer_id = $3)",
    )
    .bind(project_id)
    .bind(layer_id)
    .bind(layer_id)
    .fetch_all(p)
    .await)
}

/// Marks every lot (of one project, or of all) to be judged again; returns how many.
pub async fn mark_all(pool: &Pool, project_id: Option<i64>) -> sqlx::Result<u64> {
    on_pool!(pool, |p| sqlx::query(
        "INSERT INTO lots_to_judge (project_id, lot_id)
         SELECT project_id, id FROM lots WHERE ($1 IS NULL OR project_id = $2)",
    )
    .bind(project_id)
    .bind(project_id)
    .execute(p)
    .await
    .map(|r| r.rows_affected()))
}

/// True when mark ids follow commit order (SQLite's one writer), so a summary can be
/// guarded by the mark it was judged from.
pub fn marks_follow_commits(pool: &Pool) -> bool {
    pool.engine() == Engine::Sqlite
}
