//! Borrow sources: where fill comes from and what it is.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A stored borrow source.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Source {
    pub id: i64,
    pub project_id: i64,
    pub code: String,
    pub name: String,
    pub description: String,
    pub uscs_class: String,
    pub aashto_class: String,
    pub gs_fines: f64,
    pub gs_coarse: Option<f64>,
    pub created_at: String,
}

/// Every column of a source, in the order of [`Source`].
const COLUMNS: &str = "id, project_id, code, name, description, uscs_class, aashto_class, gs_fines, gs_coarse, created_at";

/// Inserts a source; `id` is ignored.
pub async fn insert(tx: &mut Tx<'_>, s: &Source) -> sqlx::Result<Source> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, Source>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO sources (project_id, code, name, description, uscs_class, aashto_class, gs_fines, gs_coarse, created_at)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9)
         RETURNING {COLUMNS}"
    )))
    .bind(s.project_id)
    .bind(&s.code)
    .bind(&s.name)
    .bind(&s.description)
    .bind(&s.uscs_class)
    .bind(&s.aashto_class)
    .bind(s.gs_fines)
    .bind(s.gs_coarse)
    .bind(&s.created_at)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every source of a project.
pub async fn list(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<Source>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Source>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM sources WHERE project_id = $1 ORDER BY code"
        ))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// One source by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<Source>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Source>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM sources WHERE id = $1"
        ))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}
