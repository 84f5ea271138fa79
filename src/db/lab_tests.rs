//! Lab compaction tests: the points as entered and the fitted reference curve.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A stored lab compaction test with its fitted MDD and OMC.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct LabTest {
    pub id: i64,
    pub source_id: i64,
    pub code: String,
    pub tested_on: String,
    /// A preset, or "custom: NAME" (its energy beside it).
    pub effort: crate::domain::LabEffort,
    pub effort_energy_kj_m3: f64,
    pub specific_gravity: f64,
    pub points_json: String,
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
    pub fit_method: String,
    pub warnings_json: String,
    pub reduction_version: String,
    pub status: crate::domain::CurveStatus,
    pub superseded_reason: Option<String>,
    pub superseded_at: Option<String>,
    pub created_at: String,
    pub created_by: String,
    /// "not_needed", "needs_approval" or "approved".
    pub approval: crate::domain::Approval,
    /// The curve's quality concerns as JSON (`[{code, message}]`).
    pub approval_concerns_json: String,
    pub approval_reason: Option<String>,
    pub approved_by: Option<String>,
    pub approved_at: Option<String>,
    /// 0 for a curve stored before the quality rules, until the start-up re-check.
    pub quality_checked: i64,
}

/// Every column, in the struct's order.
const COLUMNS: &str = "id, source_id, code, tested_on, effort, effort_energy_kj_m3, specific_gravity, points_json,
    max_dry_density_kg_m3, optimum_water_content_pct, fit_method, warnings_json, reduction_version, status,
    superseded_reason, superseded_at, created_at, created_by, approval, approval_concerns_json, approval_reason,
    approved_by, approved_at, quality_checked";

/// Inserts a lab test; `id` is ignored.
pub async fn insert(tx: &mut Tx<'_>, t: &LabTest) -> sqlx::Result<LabTest> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, LabTest>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO lab_tests (source_id, code, tested_on, effort, effort_energy_kj_m3, specific_gravity, points_json,
             max_dry_density_kg_m3, optimum_water_content_pct, fit_method, warnings_json, reduction_version, status,
             superseded_reason, superseded_at, created_at, created_by, approval, approval_concerns_json, quality_checked)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, 1)
         RETURNING {COLUMNS}"
    )))
    .bind(t.source_id)
    .bind(&t.code)
    .bind(&t.tested_on)
    .bind(&t.effort)
    .bind(t.effort_energy_kj_m3)
    .bind(t.specific_gravity)
    .bind(&t.points_json)
    .bind(t.max_dry_density_kg_m3)
    .bind(t.optimum_water_content_pct)
    .bind(&t.fit_method)
    .bind(&t.warnings_json)
    .bind(&t.reduction_version)
    .bind(t.status)
    .bind(&t.superseded_reason)
    .bind(&t.superseded_at)
    .bind(&t.created_at)
    .bind(&t.created_by)
    .bind(t.approval)
    .bind(&t.approval_concerns_json)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every lab test of a source, newest first.
pub async fn list_for_source(pool: &Pool, source_id: i64) -> sqlx::Result<Vec<LabTest>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, LabTest>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM lab_tests WHERE source_id = $1 ORDER BY tested_on DESC, id DESC"
        ))
    )
    .bind(source_id)
    .fetch_all(pool)
    .await)
}

/// One lab test by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<LabTest>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, LabTest>(
        sqlx::AssertSqlSafe(format!("SELECT {COLUMNS} FROM lab_tests WHERE id = $1"))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// Marks an active lab test superseded with a reason; returns false if it was not active.
pub async fn supersede(tx: &mut Tx<'_>, id: i64, reason: &str, now: &str) -> sqlx::Result<bool> {
    let done = on_tx!(tx, |tx| sqlx::query(
        "UPDATE lab_tests SET status = 'superseded', superseded_reason = $1, superseded_at = $2
         WHERE id = $3 AND status = 'active'",
    )
    .bind(reason)
    .bind(now)
    .bind(id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(done == 1)
}

/// Every lab test of a project's sources.
pub async fn list_for_project(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<LabTest>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, LabTest>(
        sqlx::AssertSqlSafe(format!(
        "SELECT {} FROM lab_tests t JOIN sources s ON s.id = t.source_id WHERE s.project_id = $1
         ORDER BY s.code, t.tested_on, t.id",
        prefixed("t.")
    ))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// The column list with every name prefixed by a table alias.
fn prefixed(alias: &str) -> String {
    COLUMNS
        .split(',')
        .map(|c| format!("{alias}{}", c.trim()))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Lab tests not yet checked by the curve-quality rules (stored before them).
pub async fn unchecked(pool: &Pool) -> sqlx::Result<Vec<LabTest>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, LabTest>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM lab_tests WHERE quality_checked = 0 ORDER BY id"
        ))
    )
    .fetch_all(pool)
    .await)
}

/// Records the outcome of the curve-quality re-check of a stored curve.
pub async fn mark_checked(
    tx: &mut Tx<'_>,
    id: i64,
    approval: &str,
    concerns_json: &str,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE lab_tests SET approval = $1, approval_concerns_json = $2, quality_checked = 1 WHERE id = $3",
    )
    .bind(approval)
    .bind(concerns_json)
    .bind(id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(())
}

/// Approves a curve that needs approval; false when it did not need it (any more).
pub async fn approve(
    tx: &mut Tx<'_>,
    id: i64,
    reason: &str,
    by: &str,
    now: &str,
) -> sqlx::Result<bool> {
    let done = on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE lab_tests SET approval = 'approved', approval_reason = $1, approved_by = $2, approved_at = $3
         WHERE id = $4 AND approval = 'needs_approval'",
    )
    .bind(reason)
    .bind(by)
    .bind(now)
    .bind(id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(done == 1)
}
