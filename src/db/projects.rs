//! Projects: the contract a set of lots and tests belongs to.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A stored project.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Project {
    pub id: i64,
    pub code: String,
    pub name: String,
    pub contract: String,
    pub client: String,
    pub contractor: String,
    pub unit_system: String,
    pub chainage_style: String,
    pub created_at: String,
}

/// Every column of a project, in the order of [`Project`].
const COLUMNS: &str =
    "id, code, name, contract, client, contractor, unit_system, chainage_style, created_at";

/// Fields of a new project, already validated.
#[derive(Debug, Clone)]
pub struct NewProject {
    pub code: String,
    pub name: String,
    pub contract: String,
    pub client: String,
    pub contractor: String,
    pub unit_system: String,
    pub chainage_style: String,
}

/// Inserts a project and returns it.
pub async fn insert(tx: &mut Tx<'_>, new: &NewProject, now: &str) -> sqlx::Result<Project> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, Project>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO projects (code, name, contract, client, contractor, unit_system, chainage_style, created_at)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8)
         RETURNING {COLUMNS}"
    )))
    .bind(&new.code)
    .bind(&new.name)
    .bind(&new.contract)
    .bind(&new.client)
    .bind(&new.contractor)
    .bind(&new.unit_system)
    .bind(&new.chainage_style)
    .bind(now)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every project, by name.
pub async fn list(pool: &Pool) -> sqlx::Result<Vec<Project>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Project>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM projects ORDER BY name, id"
        ))
    )
    .fetch_all(pool)
    .await)
}

/// One project by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<Project>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Project>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM projects WHERE id = $1"
        ))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// One project by its short code.
pub async fn get_by_code(pool: &Pool, code: &str) -> sqlx::Result<Option<Project>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Project>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM projects WHERE code = $1"
        ))
    )
    .bind(code)
    .fetch_optional(pool)
    .await)
}

/// The project's revision: bumped by every audited change to it (see migration 0003),
/// so a cached whole-project view is current exactly when its revision still matches.
pub async fn revision(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT revision FROM projects WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}
