//! Lab compaction tests: the points as entered and the fitted reference curve.

use serde::Serialize;

use super::{Pool, Tx};

/// A stored lab compaction test with its fitted MDD and OMC.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct LabTest {
    pub id: i64,
    pub source_id: i64,
    pub code: String,
    pub tested_on: String,
    pub effort: String,
    pub effort_energy_kj_m3: f64,
    pub specific_gravity: f64,
    pub points_json: String,
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
    pub fit_method: String,
    pub warnings_json: String,
    pub reduction_version: String,
    pub status: String,
    pub superseded_reason: Option<String>,
    pub superseded_at: Option<String>,
    pub created_at: String,
    pub created_by: String,
}

/// Inserts a lab test; `id` is ignored.
pub async fn insert(tx: &mut Tx<'_>, t: &LabTest) -> sqlx::Result<LabTest> {
    sqlx::query_as::<_, LabTest>(
        "INSERT INTO lab_tests (source_id, code, tested_on, effort, effort_energy_kj_m3, specific_gravity, points_json,
             max_dry_density_kg_m3, optimum_water_content_pct, fit_method, warnings_json, reduction_version, status,
             superseded_reason, superseded_at, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17)
         RETURNING id, source_id, code, tested_on, effort, effort_energy_kj_m3, specific_gravity, points_json,
             max_dry_density_kg_m3, optimum_water_content_pct, fit_method, warnings_json, reduction_version, status,
             superseded_reason, superseded_at, created_at, created_by",
    )
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
    .bind(&t.status)
    .bind(&t.superseded_reason)
    .bind(&t.superseded_at)
    .bind(&t.created_at)
    .bind(&t.created_by)
    .fetch_one(&mut **tx)
    .await
}

/// Every lab test of a source, newest first.
pub async fn list_for_source(pool: &Pool, source_id: i64) -> sqlx::Result<Vec<LabTest>> {
    sqlx::query_as::<_, LabTest>(
        "SELECT id, source_id, code, tested_on, effort, effort_energy_kj_m3, specific_gravity, points_json,
             max_dry_density_kg_m3, optimum_water_content_pct, fit_method, warnings_json, reduction_version, status,
             superseded_reason, superseded_at, created_at, created_by
         FROM lab_tests WHERE source_id = $1 ORDER BY tested_on DESC, id DESC",
    )
    .bind(source_id)
    .fetch_all(pool)
    .await
}

/// One lab test by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<LabTest>> {
    sqlx::query_as::<_, LabTest>(
        "SELECT id, source_id, code, tested_on, effort, effort_energy_kj_m3, specific_gravity, points_json,
             max_dry_density_kg_m3, optimum_water_content_pct, fit_method, warnings_json, reduction_version, status,
             superseded_reason, superseded_at, created_at, created_by
         FROM lab_tests WHERE id = $1",
    )
    .bind(id)
    .fetch_optional(pool)
    .await
}

/// Marks an active lab test superseded with a reason; returns false if it was not active.
pub async fn supersede(tx: &mut Tx<'_>, id: i64, reason: &str, now: &str) -> sqlx::Result<bool> {
    let done = sqlx::query(
        "UPDATE lab_tests SET status = 'superseded', superseded_reason = $1, superseded_at = $2
         WHERE id = $3 AND status = 'active'",
    )
    .bind(reason)
    .bind(now)
    .bind(id)
    .execute(&mut **tx)
    .await?;
    Ok(done.rows_affected() == 1)
}

/// Every lab test of a project's sources.
pub async fn list_for_project(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<LabTest>> {
    sqlx::query_as::<_, LabTest>(
        "SELECT t.id, t.source_id, t.code, t.tested_on, t.effort, t.effort_energy_kj_m3, t.specific_gravity, t.points_json,
             t.max_dry_density_kg_m3, t.optimum_water_content_pct, t.fit_method, t.warnings_json, t.reduction_version,
             t.status, t.superseded_reason, t.superseded_at, t.created_at, t.created_by
         FROM lab_tests t JOIN sources s ON s.id = t.source_id WHERE s.project_id = $1 ORDER BY s.code, t.tested_on, t.id",
    )
    .bind(project_id)
    .fetch_all(pool)
    .await
}
