//! Zones and layers: the vertical structure lots sit in.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A zone (embankment fill, subgrade, capping…) in its position from the bottom.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Zone {
    pub id: i64,
    pub project_id: i64,
    pub name: String,
    pub position: i64,
}

/// A layer (lift) numbered from the bottom of its zone, with its zone's name.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Layer {
    pub id: i64,
    pub project_id: i64,
    pub zone_id: i64,
    pub zone_name: String,
    pub zone_position: i64,
    pub number: i64,
    pub thickness_mm: Option<f64>,
    pub created_at: String,
}

/// A [`Layer`] with its zone, before the WHERE of a read.
const SELECT: &str =
    "SELECT l.id, l.project_id, l.zone_id, z.name AS zone_name, z.position AS zone_position,
    l.number, l.thickness_mm, l.created_at
    FROM layers l JOIN zones z ON z.id = l.zone_id";

/// Finds a zone by name or creates it at the next position.
pub async fn zone_by_name_or_insert(
    tx: &mut Tx<'_>,
    project_id: i64,
    name: &str,
) -> sqlx::Result<Zone> {
    if let Some(z) = on_tx!(tx, |tx| sqlx::query_as::<_, Zone>(
        "SELECT id, project_id, name, position FROM zones WHERE project_id = $1 AND name = $2",
    )
    .bind(project_id)
    .bind(name)
    .fetch_optional(&mut **tx)
    .await)?
    {
        return Ok(z);
    }
    on_tx!(tx, |tx| sqlx::query_as::<_, Zone>(
        "INSERT INTO zones (project_id, name, position)
         VALUES ($1, $2, (SELECT COALESCE(MAX(position), 0) + 1 FROM zones WHERE project_id = $3))
         RETURNING id, project_id, name, position",
    )
    .bind(project_id)
    .bind(name)
    .bind(project_id)
    .fetch_one(&mut **tx)
    .await)
}

/// Inserts a layer in a zone.
pub async fn insert(
    tx: &mut Tx<'_>,
    project_id: i64,
    zone_id: i64,
    number: i64,
    thickness_mm: Option<f64>,
    now: &str,
) -> sqlx::Result<i64> {
    let id: i64 = on_tx!(tx, |tx| sqlx::query_scalar(
        "INSERT INTO layers (project_id, zone_id, number, thickness_mm, created_at)
         VALUES ($1, $2, $3, $4, $5) RETURNING id",
    )
    .bind(project_id)
    .bind(zone_id)
    .bind(number)
    .bind(thickness_mm)
    .bind(now)
    .fetch_one(&mut **tx)
    .await)?;
    Ok(id)
}

/// Every layer of a project, bottom zone first, bottom layer first.
pub async fn list(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<Layer>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Layer>(
        sqlx::AssertSqlSafe(format!(
            "{SELECT} WHERE l.project_id = $1 ORDER BY z.position, l.number"
        ))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// One layer by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<Layer>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Layer>(
        sqlx::AssertSqlSafe(format!("{SELECT} WHERE l.id = $1"))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}
