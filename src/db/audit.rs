//! The append-only audit trail: who changed what, when, before and after.

use serde::Serialize;

use super::marks::{Marks, groups};
use super::{AsConn, Pool, Tx, on_conn, on_pool};

/// One audit row.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct AuditEntry {
    pub id: i64,
    pub at: String,
    pub actor: String,
    pub action: String,
    pub entity: String,
    pub entity_id: Option<i64>,
    pub project_id: Option<i64>,
    pub before_json: Option<String>,
    pub after_json: Option<String>,
    pub origin: String,
}

/// What is written for one change.
#[derive(Debug, Clone)]
pub struct Change<'a> {
    pub actor: &'a str,
    pub action: &'a str,
    pub entity: &'a str,
    pub entity_id: Option<i64>,
    pub project_id: Option<i64>,
    pub before: Option<serde_json::Value>,
    pub after: Option<serde_json::Value>,
    pub origin: &'a str,
}

/// Appends an audit row inside the transaction that makes the change.
pub async fn record(tx: &mut Tx<'_>, c: &Change<'_>, now: &str) -> sqlx::Result<()> {
    insert_rows(tx, &[(c, now)]).await
}

/// Rows per multi-row audit INSERT.
pub(super) const INSERT_ROWS: usize = 128;

/// Appends changes, each with its time, [`INSERT_ROWS`] to a statement, inside the
/// transaction that makes them: the one insert of audit rows, single or in bulk.
pub async fn insert_rows(conn: &mut impl AsConn, rows: &[(&Change<'_>, &str)]) -> sqlx::Result<()> {
    let style = Marks::of(conn);
    on_conn!(conn, |conn| {
        for part in rows.chunks(INSERT_ROWS) {
            let values = groups(style, part.len(), 9);
            let sql = format!(
                "INSERT INTO audit_log (at, actor, action, entity, entity_id, project_id, before_json, after_json, origin)
                 VALUES {values}"
            );
            let mut q = sqlx::query(sqlx::AssertSqlSafe(sql));
            for (c, at) in part {
                q = q
                    .bind(*at)
                    .bind(c.actor)
                    .bind(c.action)
                    .bind(c.entity)
                    .bind(c.entity_id)
                    .bind(c.project_id)
                    .bind(c.before.as_ref().map(|v| v.to_string()))
                    .bind(c.after.as_ref().map(|v| v.to_string()))
                    .bind(c.origin);
            }
            q.execute(&mut *conn).await?;
        }
        Ok(())
    })
}

/// Every column of an audit row, in the order of [`AuditEntry`].
const COLUMNS: &str =
    "id, at, actor, action, entity, entity_id, project_id, before_json, after_json, origin";

/// The history of one entity, oldest first.
pub async fn for_entity(
    pool: &Pool,
    entity: &str,
    entity_id: i64,
) -> sqlx::Result<Vec<AuditEntry>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, AuditEntry>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM audit_log WHERE entity = $1 AND entity_id = $2 ORDER BY id"
        ))
    )
    .bind(entity)
    .bind(entity_id)
    .fetch_all(pool)
    .await)
}

/// The import that created test `test_id` of a project, if any: the newest import row
/// whose first created id is at or below the test's (ids of one import are consecutive;
/// the caller checks the last id from the row's `created_ids`).
pub async fn import_covering(
    pool: &Pool,
    project_id: i64,
    test_id: i64,
) -> sqlx::Result<Option<AuditEntry>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, AuditEntry>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM audit_log WHERE entity = 'field_test_import' AND project_id = $1 AND entity_id <= $2
         ORDER BY entity_id DESC LIMIT 1"
        ))
    )
    .bind(project_id)
    .bind(test_id)
    .fetch_optional(pool)
    .await)
}

/// The newest changes in a project.
pub async fn recent(pool: &Pool, project_id: i64, limit: i64) -> sqlx::Result<Vec<AuditEntry>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, AuditEntry>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM audit_log WHERE project_id = $1 ORDER BY id DESC LIMIT $2"
        ))
    )
    .bind(project_id)
    .bind(limit)
    .fetch_all(pool)
    .await)
}

/// Total number of audit rows (used by tests that prove nothing was written).
pub async fn count(pool: &Pool) -> sqlx::Result<i64> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT COUNT(*) FROM audit_log"
    )
    .fetch_one(pool)
    .await)
}

/// Every audit row of a project, oldest first, streamed (a handover archive holds them all).
pub fn for_project(
    pool: &Pool,
    project_id: i64,
) -> futures_util::stream::BoxStream<'_, sqlx::Result<AuditEntry>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, AuditEntry>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS}
         FROM audit_log WHERE project_id = $1 ORDER BY id"
        ))
    )
    .bind(project_id)
    .fetch(pool))
}
