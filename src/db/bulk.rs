//! Bulk reads and writes for imports, exports and the large-project generator:
//! multi-row inserts inside one transaction, lookups of many test numbers at once,
//! and the saved column mappings of a project.
//!
//! Functions take anything [`AsConn`] (the import's transaction, or a held pooled
//! connection) so an import reads and writes through the one transaction it commits.

use serde::Serialize;

use super::{AsConn, on_conn, on_pool, on_tx};

use super::marks::{Marks, groups, marks, padded_parts};
use super::{Pool, Tx};
use super::{audit, field_tests, field_tests::FieldTest};

/// Columns of `field_tests` in the order of [`FieldTest`].
const TEST_COLUMNS: &str = super::field_tests::COLUMNS;

/// Rows per multi-row INSERT: 64 × 32 parameters stays far below SQLite's 32,766 limit.
pub const INSERT_ROWS: usize = 64;

/// Largest id used so far in `field_tests` (0 when empty).
///
/// An import holds the write lock for its whole transaction, so it can number its rows
/// from here and know every id before it inserts (retests within a file point at ids
/// inserted in the same statement batch).
pub async fn max_field_test_id(conn: &mut impl AsConn) -> sqlx::Result<i64> {
    on_conn!(conn, |conn| sqlx::query_scalar(
        "SELECT COALESCE(MAX(id), 0) FROM field_tests"
    )
    .fetch_one(conn)
    .await)
}

/// Makes the transaction the only writer of field tests until it ends, so that ids can
/// be numbered on from [`max_field_test_id`]. SQLite's `BEGIN IMMEDIATE` already holds
/// the one write lock; PostgreSQL takes a table lock that still lets readers read.
pub async fn lock_tests_for_numbering(tx: &mut Tx<'_>) -> sqlx::Result<()> {
    if let Tx::Postgres(tx) = tx {
        sqlx::query("LOCK TABLE field_tests IN EXCLUSIVE MODE")
            .execute(&mut **tx)
            .await?;
    }
    Ok(())
}

/// Moves the id generator past ids inserted explicitly (a PostgreSQL identity column
/// does not see them; SQLite takes the next id from the largest one anyway).
pub async fn advance_test_ids(tx: &mut Tx<'_>) -> sqlx::Result<()> {
    if let Tx::Postgres(tx) = tx {
        sqlx::query(
            "SELECT setval(pg_get_serial_sequence('field_tests', 'id'), (SELECT MAX(id) FROM field_tests))",
        )
        .fetch_one(&mut **tx)
        .await?;
    }
    Ok(())
}

/// Tests of a project whose numbers are among `numbers` (any order; missing numbers are absent).
pub async fn tests_by_numbers(
    conn: &mut impl AsConn,
    project_id: i64,
    numbers: &[&str],
) -> sqlx::Result<Vec<FieldTest>> {
    let mut out = Vec::new();
    for part in padded_parts(numbers) {
        let style = Marks::of(&mut *conn);
        let marks = marks(style, 2, part.len());
        let project = if style == Marks::Numbered { "$1" } else { "?" };
        let sql = format!(
            "SELECT {TEST_COLUMNS} FROM field_tests WHERE project_id = {project} AND number IN ({marks})"
        );
        out.extend(on_conn!(conn, |conn| {
            let mut q = sqlx::query_as::<_, FieldTest>(sqlx::AssertSqlSafe(sql)).bind(project_id);
            for n in part {
                q = q.bind(n);
            }
            q.fetch_all(conn).await?
        }));
    }
    Ok(out)
}

/// Smallest and largest id of a project's tests (None when it has none).
pub async fn test_id_range(pool: &Pool, project_id: i64) -> sqlx::Result<Option<(i64, i64)>> {
    let r: (Option<i64>, Option<i64>) = on_pool!(pool, |pool| sqlx::query_as(
        "SELECT MIN(id), MAX(id) FROM field_tests WHERE project_id = $1"
    )
    .bind(project_id)
    .fetch_one(pool)
    .await)?;
    Ok(r.0.zip(r.1))
}

/// (failed test id, retest number) of every live (not void) retest of the given tests,
/// the latest first (collected into a map, the earliest retest of each test wins).
pub async fn live_retests_of(
    conn: &mut impl AsConn,
    ids: &[i64],
) -> sqlx::Result<Vec<(i64, String)>> {
    let mut out = Vec::new();
    for part in padded_parts(ids) {
        let marks = marks(Marks::of(&mut *conn), 1, part.len());
        let sql = format!(
            "SELECT retest_of, number FROM field_tests
             WHERE void_reason IS NULL AND retest_of IN ({marks}) ORDER BY id DESC"
        );
        out.extend(on_conn!(conn, |conn| {
            let mut q = sqlx::query_as::<_, (i64, String)>(sqlx::AssertSqlSafe(sql));
            for id in part {
                q = q.bind(id);
            }
            q.fetch_all(conn).await?
        }));
    }
    Ok(out)
}

/// Inserts tests with the ids they carry, [`INSERT_ROWS`] to a statement.
///
/// Statements are prepared once per connection and reused (sqlx caches them by text),
/// so a long import pays for two statement shapes at most.
pub async fn insert_field_tests(conn: &mut impl AsConn, rows: &[FieldTest]) -> sqlx::Result<()> {
    for part in rows.chunks(INSERT_ROWS) {
        let values = groups(Marks::of(&mut *conn), part.len(), field_tests::WIDTH);
        let sql = format!("INSERT INTO field_tests ({TEST_COLUMNS}) VALUES {values}");
        on_conn!(conn, |conn| {
            let mut q = sqlx::query(sqlx::AssertSqlSafe(sql));
            for t in part {
                q = field_tests::bind_after_id!(q.bind(t.id), t);
            }
            q.execute(conn).await?;
        });
    }
    Ok(())
}

/// New tests with the ids their import gave them, and their audit rows, queued for
/// multi-row inserts through the import's transaction.
///
/// On PostgreSQL the revision and test-count triggers run once per statement: a row a
/// statement would update the project's row once per test (see migration 0003).
#[derive(Default)]
pub struct Batch<'a> {
    tests: Vec<FieldTest>,
    audits: Vec<(audit::Change<'a>, String)>,
}

impl<'a> Batch<'a> {
    /// Queues a test; inserts the queue once it fills a statement.
    pub async fn push_test(&mut self, conn: &mut impl AsConn, t: FieldTest) -> sqlx::Result<()> {
        self.tests.push(t);
        if self.tests.len() >= INSERT_ROWS {
            self.flush_tests(conn).await?;
        }
        Ok(())
    }

    /// Queues an audit row made at `at`; inserts the queue once it fills a statement.
    pub async fn push_audit(
        &mut self,
        conn: &mut impl AsConn,
        change: audit::Change<'a>,
        at: &str,
    ) -> sqlx::Result<()> {
        self.audits.push((change, at.to_string()));
        if self.audits.len() >= audit::INSERT_ROWS {
            self.flush_audits(conn).await?;
        }
        Ok(())
    }

    /// Inserts everything queued.
    pub async fn flush(&mut self, conn: &mut impl AsConn) -> sqlx::Result<()> {
        self.flush_tests(conn).await?;
        self.flush_audits(conn).await
    }

    async fn flush_tests(&mut self, conn: &mut impl AsConn) -> sqlx::Result<()> {
        if !self.tests.is_empty() {
            insert_field_tests(conn, &self.tests).await?;
            self.tests.clear();
        }
        Ok(())
    }

    async fn flush_audits(&mut self, conn: &mut impl AsConn) -> sqlx::Result<()> {
        if !self.audits.is_empty() {
            let rows: Vec<(&audit::Change<'_>, &str)> =
                self.audits.iter().map(|(c, at)| (c, at.as_str())).collect();
            audit::insert_rows(conn, &rows).await?;
            self.audits.clear();
        }
        Ok(())
    }
}

/// The columns a lot verdict needs and nothing more (other texts left empty; the method,
/// a stored code, is read as it is): what the judged-lot summaries of the lift map and
/// home page read, decoded at a third of the cost.
pub const VERDICT_COLUMNS: &str = "id, project_id, lot_id, number, '' AS tested_at, '' AS technician, method,
    '' AS instrument_serial, chainage_m, offset_m, depth_mm, coarse_pct, coarse_water_content_pct, easting, northing,
    '' AS readings_json, wet_density_kg_m3, water_content_pct, dry_density_kg_m3, '' AS moisture_source,
    '' AS reduction_version, retest_of, void_reason, CAST(NULL AS TEXT) AS voided_by, CAST(NULL AS TEXT) AS voided_at, '' AS created_at,
    '' AS created_by, instrument_check, instrument_note, operator_id, density_offset_kg_m3, moisture_offset_pct";

/// A saved column mapping of a project.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct SavedMapping {
    pub id: i64,
    pub project_id: i64,
    pub name: String,
    pub mapping_json: String,
    pub created_at: String,
    pub created_by: String,
}

/// Every column of a saved mapping, in the order of [`SavedMapping`].
const MAPPING_COLUMNS: &str = "id, project_id, name, mapping_json, created_at, created_by";

/// Saves a new named mapping; fails with a unique violation when the name is taken.
pub async fn insert_mapping(
    tx: &mut Tx<'_>,
    project_id: i64,
    name: &str,
    mapping_json: &str,
    actor: &str,
    now: &str,
) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "INSERT INTO import_mappings (project_id, name, mapping_json, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5) RETURNING id",
    )
    .bind(project_id)
    .bind(name)
    .bind(mapping_json)
    .bind(now)
    .bind(actor)
    .fetch_one(&mut **tx)
    .await)
}

/// Replaces the content of a named mapping; false when there is none by that name.
pub async fn update_mapping(
    tx: &mut Tx<'_>,
    project_id: i64,
    name: &str,
    mapping_json: &str,
) -> sqlx::Result<bool> {
    let n = on_tx!(tx, |tx| sqlx::query(
        "UPDATE import_mappings SET mapping_json = $1 WHERE project_id = $2 AND name = $3",
    )
    .bind(mapping_json)
    .bind(project_id)
    .bind(name)
    .execute(&mut **tx)
    .await?
    .rows_affected());
    Ok(super::changed_one(n))
}

/// One saved mapping by name.
pub async fn get_mapping(
    pool: &Pool,
    project_id: i64,
    name: &str,
) -> sqlx::Result<Option<SavedMapping>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, SavedMapping>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {MAPPING_COLUMNS}
         FROM import_mappings WHERE project_id = $1 AND name = $2"
        ))
    )
    .bind(project_id)
    .bind(name)
    .fetch_optional(pool)
    .await)
}

/// Every saved mapping of a project, by name.
pub async fn list_mappings(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<SavedMapping>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, SavedMapping>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {MAPPING_COLUMNS}
         FROM import_mappings WHERE project_id = $1 ORDER BY name"
        ))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}
