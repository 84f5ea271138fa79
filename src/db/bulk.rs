//! Bulk reads and writes for imports, exports and the large-project generator:
//! multi-row inserts inside one transaction, lookups of many test numbers at once,
//! and the saved column mappings of a project.
//!
//! Functions take a plain connection (`&mut **tx` of a transaction, or a pooled
//! connection) so an import reads and writes through the one transaction it commits.

use super::Conn as SqliteConnection;
use serde::Serialize;

use super::Pool;
use super::Tx;
use super::field_tests::FieldTest;

/// Columns of `field_tests` in the order of [`FieldTest`].
const TEST_COLUMNS: &str = super::field_tests::COLUMNS;

const INSERT_WIDTH: usize = 32;

/// Rows per multi-row INSERT: 64 × 32 parameters stays far below SQLite's 32,766 limit.
pub const INSERT_ROWS: usize = 64;

/// Largest id used so far in `field_tests` (0 when empty).
///
/// An import holds the write lock for its whole transaction, so it can number its rows
/// from here and know every id before it inserts (retests within a file point at ids
/// inserted in the same statement batch).
pub async fn max_field_test_id(conn: &mut SqliteConnection) -> sqlx::Result<i64> {
    sqlx::query_scalar("SELECT COALESCE(MAX(id), 0) FROM field_tests")
        .fetch_one(conn)
        .await
}

/// Makes the transaction the only writer of field tests until it ends, so that ids can
/// be numbered on from [`max_field_test_id`]. SQLite's `BEGIN IMMEDIATE` already holds
/// the one write lock; PostgreSQL takes a table lock that still lets readers read.
pub async fn lock_tests_for_numbering(tx: &mut Tx<'_>) -> sqlx::Result<()> {
    if tx.backend_name() == "PostgreSQL" {
        sqlx::query("LOCK TABLE field_tests IN EXCLUSIVE MODE")
            .execute(&mut **tx)
            .await?;
    }
    Ok(())
}

/// Moves the id generator past ids inserted explicitly (a PostgreSQL identity column
/// does not see them; SQLite takes the next id from the largest one anyway).
pub async fn advance_test_ids(tx: &mut Tx<'_>) -> sqlx::Result<()> {
    if tx.backend_name() == "PostgreSQL" {
        sqlx::query(
            "SELECT setval(pg_get_serial_sequence('field_tests', 'id'), (SELECT MAX(id) FROM field_tests))",
        )
        .fetch_one(&mut **tx)
        .await?;
    }
    Ok(())
}

/// Placeholder counts for number look-ups; a query is padded up to one of these so that
/// few distinct statements are prepared and cached.
const LOOKUP_SIZES: [usize; 5] = [8, 32, 128, 512, 2048];

/// Tests of a project whose numbers are among `numbers` (any order; missing numbers are absent).
pub async fn tests_by_numbers(
    conn: &mut SqliteConnection,
    project_id: i64,
    numbers: &[&str],
) -> sqlx::Result<Vec<FieldTest>> {
    let mut out = Vec::new();
    let max = LOOKUP_SIZES[LOOKUP_SIZES.len() - 1];
    for part in numbers.chunks(max) {
        let Some(last) = part.last() else {
            continue;
        };
        let size = LOOKUP_SIZES
            .iter()
            .copied()
            .find(|s| *s >= part.len())
            .unwrap_or(max);
        let style = Marks::of(conn);
        let marks = marks(style, 2, size);
        let project = if style == Marks::Numbered { "$1" } else { "?" };
        let sql = format!(
            "SELECT {TEST_COLUMNS} FROM field_tests WHERE project_id = {project} AND number IN ({marks})"
        );
        let mut q = sqlx::query_as::<_, FieldTest>(sqlx::AssertSqlSafe(sql)).bind(project_id);
        for n in part {
            q = q.bind(*n);
        }
        for _ in part.len()..size {
            q = q.bind(*last);
        }
        out.extend(q.fetch_all(&mut *conn).await?);
    }
    Ok(out)
}

/// Smallest and largest id of a project's tests (None when it has none).
pub async fn test_id_range(pool: &Pool, project_id: i64) -> sqlx::Result<Option<(i64, i64)>> {
    let r: (Option<i64>, Option<i64>) =
        sqlx::query_as("SELECT MIN(id), MAX(id) FROM field_tests WHERE project_id = $1")
            .bind(project_id)
            .fetch_one(pool)
            .await?;
    Ok(r.0.zip(r.1))
}

/// (failed test id, retest number) of every live (not void) retest of the given tests,
/// the latest first (collected into a map, the earliest retest of each test wins).
pub async fn live_retests_of(
    conn: &mut SqliteConnection,
    ids: &[i64],
) -> sqlx::Result<Vec<(i64, String)>> {
    let mut out = Vec::new();
    let max = LOOKUP_SIZES[LOOKUP_SIZES.len() - 1];
    for part in ids.chunks(max) {
        let Some(last) = part.last() else {
            continue;
        };
        let size = LOOKUP_SIZES
            .iter()
            .copied()
            .find(|s| *s >= part.len())
            .unwrap_or(max);
        let marks = marks(Marks::of(conn), 1, size);
        let sql = format!(
            "SELECT retest_of, number FROM field_tests
             WHERE void_reason IS NULL AND retest_of IN ({marks}) ORDER BY id DESC"
        );
        let mut q = sqlx::query_as::<_, (i64, String)>(sqlx::AssertSqlSafe(sql));
        for id in part {
            q = q.bind(*id);
        }
        for _ in part.len()..size {
            q = q.bind(*last);
        }
        out.extend(q.fetch_all(&mut *conn).await?);
    }
    Ok(out)
}

fn insert_sql(style: Marks, rows: usize) -> String {
    let values = groups(style, rows, INSERT_WIDTH);
    format!("INSERT INTO field_tests ({TEST_COLUMNS}) VALUES {values}")
}

/// How a connection's engine wants long parameter lists written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Marks {
    /// `$1, $2, …`: PostgreSQL's only form.
    Numbered,
    /// `?, ?, …`: SQLite binds these by position. It also reads `$N`, but as names,
    /// and finding each name walks the statement's list of names: a 1,728-parameter
    /// insert then spends most of its time binding (measured: a fifth of the rows/s).
    Positional,
}

impl Marks {
    fn of(conn: &SqliteConnection) -> Self {
        if conn.backend_name() == "PostgreSQL" {
            Marks::Numbered
        } else {
            Marks::Positional
        }
    }
}

/// `n` placeholders from parameter `from` on, in the engine's form.
fn marks(style: Marks, from: usize, n: usize) -> String {
    match style {
        Marks::Numbered => placeholders(from, n),
        Marks::Positional => vec!["?"; n].join(", "),
    }
}

/// `rows` groups of `width` placeholders, in the engine's form.
fn groups(style: Marks, rows: usize, width: usize) -> String {
    (0..rows)
        .map(|r| format!("({})", marks(style, 1 + r * width, width)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// `$from, $from+1, …` — `n` numbered placeholders (the form both engines read).
fn placeholders(from: usize, n: usize) -> String {
    (from..from + n)
        .map(|i| format!("${i}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Inserts tests with the ids they carry, [`INSERT_ROWS`] to a statement.
///
/// Statements are prepared once per connection and reused (sqlx caches them by text),
/// so a long import pays for two statement shapes at most.
pub async fn insert_field_tests(
    conn: &mut SqliteConnection,
    rows: &[FieldTest],
) -> sqlx::Result<()> {
    for part in rows.chunks(INSERT_ROWS) {
        let sql = insert_sql(Marks::of(conn), part.len());
        let mut q = sqlx::query(sqlx::AssertSqlSafe(sql));
        for t in part {
            q = q
                .bind(t.id)
                .bind(t.project_id)
                .bind(t.lot_id)
                .bind(&t.number)
                .bind(&t.tested_at)
                .bind(&t.technician)
                .bind(t.method)
                .bind(&t.instrument_serial)
                .bind(t.chainage_m)
                .bind(t.offset_m)
                .bind(t.depth_mm)
                .bind(t.coarse_pct)
                .bind(t.coarse_water_content_pct)
                .bind(t.easting)
                .bind(t.northing)
                .bind(&t.readings_json)
                .bind(t.wet_density_kg_m3)
                .bind(t.water_content_pct)
                .bind(t.dry_density_kg_m3)
                .bind(&t.moisture_source)
                .bind(&t.reduction_version)
                .bind(t.retest_of)
                .bind(&t.void_reason)
                .bind(&t.voided_by)
                .bind(&t.voided_at)
                .bind(&t.created_at)
                .bind(&t.created_by)
                .bind(t.instrument_check)
                .bind(&t.instrument_note)
                .bind(t.operator_id)
                .bind(t.density_offset_kg_m3)
                .bind(t.moisture_offset_pct);
        }
        q.execute(&mut *conn).await?;
    }
    Ok(())
}

/// One audit row to append in bulk (the columns `audit::record` writes).
#[derive(Debug, Clone)]
pub struct AuditRow {
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

/// Rows per multi-row audit INSERT.
const AUDIT_ROWS: usize = 128;

/// Appends many audit rows inside the transaction that makes the changes.
pub async fn insert_audit_rows(conn: &mut SqliteConnection, rows: &[AuditRow]) -> sqlx::Result<()> {
    for part in rows.chunks(AUDIT_ROWS) {
        let values = groups(Marks::of(conn), part.len(), 9);
        let sql = format!(
            "INSERT INTO audit_log (at, actor, action, entity, entity_id, project_id, before_json, after_json, origin)
             VALUES {values}"
        );
        let mut q = sqlx::query(sqlx::AssertSqlSafe(sql));
        for a in part {
            q = q
                .bind(&a.at)
                .bind(&a.actor)
                .bind(&a.action)
                .bind(&a.entity)
                .bind(a.entity_id)
                .bind(a.project_id)
                .bind(&a.before_json)
                .bind(&a.after_json)
                .bind(&a.origin);
        }
        q.execute(&mut *conn).await?;
    }
    Ok(())
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

/// Saves a new named mapping; fails with a unique violation when the name is taken.
pub async fn insert_mapping(
    tx: &mut Tx<'_>,
    project_id: i64,
    name: &str,
    mapping_json: &str,
    actor: &str,
    now: &str,
) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "INSERT INTO import_mappings (project_id, name, mapping_json, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5) RETURNING id",
    )
    .bind(project_id)
    .bind(name)
    .bind(mapping_json)
    .bind(now)
    .bind(actor)
    .fetch_one(&mut **tx)
    .await
}

/// Replaces the content of a named mapping; false when there is none by that name.
pub async fn update_mapping(
    tx: &mut Tx<'_>,
    project_id: i64,
    name: &str,
    mapping_json: &str,
) -> sqlx::Result<bool> {
    let done = sqlx::query(
        "UPDATE import_mappings SET mapping_json = $1 WHERE project_id = $2 AND name = $3",
    )
    .bind(mapping_json)
    .bind(project_id)
    .bind(name)
    .execute(&mut **tx)
    .await?;
    Ok(done.rows_affected() == 1)
}

/// One saved mapping by name.
pub async fn get_mapping(
    pool: &Pool,
    project_id: i64,
    name: &str,
) -> sqlx::Result<Option<SavedMapping>> {
    sqlx::query_as::<_, SavedMapping>(
        "SELECT id, project_id, name, mapping_json, created_at, created_by
         FROM import_mappings WHERE project_id = $1 AND name = $2",
    )
    .bind(project_id)
    .bind(name)
    .fetch_optional(pool)
    .await
}

/// Every saved mapping of a project, by name.
pub async fn list_mappings(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<SavedMapping>> {
    sqlx::query_as::<_, SavedMapping>(
        "SELECT id, project_id, name, mapping_json, created_at, created_by
         FROM import_mappings WHERE project_id = $1 ORDER BY name",
    )
    .bind(project_id)
    .fetch_all(pool)
    .await
}
