//! The lab's mould register: each compaction mould with its calibrated volume.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A registered mould.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Mould {
    pub id: i64,
    pub project_id: i64,
    pub code: String,
    pub volume_cm3: f64,
    pub mass_g: Option<f64>,
    pub calibrated_on: String,
    pub created_at: String,
    pub created_by: String,
}

const COLUMNS: &str =
    "id, project_id, code, volume_cm3, mass_g, calibrated_on, created_at, created_by";

/// Inserts a mould; `id` is ignored.
pub async fn insert(tx: &mut Tx<'_>, m: &Mould) -> sqlx::Result<Mould> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, Mould>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO moulds (project_id, code, volume_cm3, mass_g, calibrated_on, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7) RETURNING {COLUMNS}"
    )))
    .bind(m.project_id)
    .bind(&m.code)
    .bind(m.volume_cm3)
    .bind(m.mass_g)
    .bind(&m.calibrated_on)
    .bind(&m.created_at)
    .bind(&m.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every mould of a project, by code.
pub async fn list(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<Mould>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Mould>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM moulds WHERE project_id = $1 ORDER BY code"
        ))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}
