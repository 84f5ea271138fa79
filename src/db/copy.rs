//! Moving a whole liftledger database between engines (SQLite ↔ PostgreSQL),
//! then proving the copy: row counts per table and every certificate's SHA-256.

use anyhow::{Context, bail};
use sqlx::any::{AnyRow, AnyTypeInfoKind};
use sqlx::{Column, Row, ValueRef};

use super::{Engine, Pool, engine_of};

/// Every table, parents before children, so foreign keys hold at each insert.
pub const TABLES: [&str; 29] = [
    "projects",
    "users",
    "clauses",
    "sources",
    "lab_tests",
    "zones",
    "layers",
    "lots",
    "field_tests",
    "lot_transitions",
    "certificates",
    "audit_log",
    "memberships",
    "sessions",
    "api_tokens",
    "sign_in_failures",
    "import_mappings",
    "moulds",
    "idempotency_keys",
    "test_plans",
    "one_point_checks",
    "instruments",
    "instrument_records",
    "instrument_assignments",
    "gauge_operators",
    "standard_counts",
    "instrument_tolerances",
    "clause_instrument_policy",
    "gauge_offsets",
];

/// Tables a copy does not move row by row: the lot summaries and their marks, which the
/// target rebuilds (its triggers mark every copied lot, and its first settling judges
/// them), and the test counters, which the target's project trigger creates and the copy
/// then sets to the source's values.
pub const REBUILT: [&str; 3] = ["lot_summaries", "lots_to_judge", "test_counters"];

/// What a copy moved and checked.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CopyReport {
    /// (table, rows) in copy order.
    pub rows: Vec<(String, i64)>,
    /// Certificates whose stored SHA-256 matched their bytes on the target.
    pub certificates_verified: i64,
}

/// One value in transit.
enum Cell {
    Null(AnyTypeInfoKind),
    Int(i64),
    Float(f64),
    Text(String),
    Bytes(Vec<u8>),
}

fn cell(row: &AnyRow, i: usize) -> anyhow::Result<Cell> {
    let raw = row.try_get_raw(i)?;
    let declared = row.columns()[i].type_info().kind();
    if raw.is_null() {
        return Ok(Cell::Null(declared));
    }
    let kind = raw.type_info().kind();
    Ok(match kind {
        AnyTypeInfoKind::Bool => Cell::Int(i64::from(row.try_get::<bool, _>(i)?)),
        AnyTypeInfoKind::SmallInt | AnyTypeInfoKind::Integer | AnyTypeInfoKind::BigInt => {
            Cell::Int(row.try_get::<i64, _>(i)?)
        }
        AnyTypeInfoKind::Real | AnyTypeInfoKind::Double => Cell::Float(row.try_get::<f64, _>(i)?),
        AnyTypeInfoKind::Text => Cell::Text(row.try_get::<String, _>(i)?),
        AnyTypeInfoKind::Blob => Cell::Bytes(row.try_get::<Vec<u8>, _>(i)?),
        AnyTypeInfoKind::Null => Cell::Null(declared),
    })
}

async fn count<'e, E>(db: E, table: &str) -> anyhow::Result<i64>
where
    E: sqlx::Executor<'e, Database = sqlx::Any>,
{
    Ok(
        sqlx::query_scalar(sqlx::AssertSqlSafe(format!("SELECT COUNT(*) FROM {table}")))
            .fetch_one(db)
            .await?,
    )
}

/// Copies every table from `from` into the empty database `to`, keeping ids, then verifies.
pub async fn copy_all(from: &Pool, to: &Pool) -> anyhow::Result<CopyReport> {
    copy_all_with(from, to, &mut |_, _| {}).await
}

/// [`copy_all`], calling `progress(table, rows)` after each table.
///
/// The source is read inside one read-only transaction (repeatable read on PostgreSQL,
/// a WAL read snapshot on SQLite), so a copy taken while servers keep writing is the
/// database as it was at one moment, and its row counts are checked against that moment.
pub async fn copy_all_with(
    from: &Pool,
    to: &Pool,
    progress: &mut (dyn FnMut(&str, i64) + Send),
) -> anyhow::Result<CopyReport> {
    for t in TABLES {
        if count(to, t).await? > 0 {
            bail!(
                "the target database is not empty (table {t} has rows); copy only into a new database"
            );
        }
    }
    let mut snapshot = match engine_of(from) {
        Engine::Postgres => {
            from.begin_with("BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY")
                .await?
        }
        Engine::Sqlite => from.begin().await?,
    };
    let mut tx = to.begin().await?;
    let mut rows = Vec::new();
    for table in TABLES {
        let source_rows = sqlx::query(sqlx::AssertSqlSafe(format!(
            "SELECT * FROM {table} ORDER BY id"
        )))
        .fetch_all(&mut *snapshot)
        .await
        .with_context(|| format!("reading {table}"))?;
        let n = insert_rows(&mut tx, table, &source_rows).await?;
        if engine_of(to) == Engine::Postgres && n > 0 {
            // Ids were copied as they were; move each identity past the largest one.
            sqlx::query(sqlx::AssertSqlSafe(format!(
                "SELECT setval(pg_get_serial_sequence('{table}', 'id'), (SELECT MAX(id) FROM {table}))"
            )))
            .fetch_one(&mut *tx)
            .await?;
        }
        progress(table, n);
        rows.push((table.to_string(), n));
    }
    // Each copied project was given a counter at zero; it takes the source's number.
    let counters: Vec<(i64, i64)> =
        sqlx::query_as("SELECT project_id, last_number FROM test_counters ORDER BY project_id")
            .fetch_all(&mut *snapshot)
            .await
            .context("reading test_counters")?;
    for (project_id, last_number) in counters {
        sqlx::query("UPDATE test_counters SET last_number = $1 WHERE project_id = $2")
            .bind(last_number)
            .bind(project_id)
            .execute(&mut *tx)
            .await?;
    }
    tx.commit().await?;
    let report = verify(&mut snapshot, to, rows).await;
    snapshot.rollback().await?;
    report
}

/// Writes rows read from one table into the same table of the target; returns the count.
async fn insert_rows(
    tx: &mut super::Tx<'_>,
    table: &str,
    source_rows: &[AnyRow],
) -> anyhow::Result<i64> {
    let mut n = 0i64;
    for row in source_rows {
        let names: Vec<&str> = row.columns().iter().map(|c| c.name()).collect();
        let marks: Vec<String> = (1..=names.len()).map(|i| format!("${i}")).collect();
        let sql = format!(
            "INSERT INTO {table} ({}) VALUES ({})",
            names.join(", "),
            marks.join(", ")
        );
        let mut q = sqlx::query(sqlx::AssertSqlSafe(sql));
        for i in 0..names.len() {
            q = match cell(row, i)? {
                Cell::Null(AnyTypeInfoKind::Real | AnyTypeInfoKind::Double) => {
                    q.bind(Option::<f64>::None)
                }
                Cell::Null(AnyTypeInfoKind::Text) => q.bind(Option::<String>::None),
                Cell::Null(AnyTypeInfoKind::Blob) => q.bind(Option::<Vec<u8>>::None),
                Cell::Null(_) => q.bind(Option::<i64>::None),
                Cell::Int(v) => q.bind(v),
                Cell::Float(v) => q.bind(v),
                Cell::Text(v) => q.bind(v),
                Cell::Bytes(v) => q.bind(v),
            };
        }
        q.execute(&mut **tx)
            .await
            .with_context(|| format!("writing {table}"))?;
        n += 1;
    }
    Ok(n)
}

async fn verify(
    from: &mut super::Tx<'static>,
    to: &Pool,
    rows: Vec<(String, i64)>,
) -> anyhow::Result<CopyReport> {
    for (table, n) in &rows {
        let (a, b) = (count(&mut **from, table).await?, count(to, table).await?);
        if a != b || b != *n {
            bail!("row count of {table} differs after the copy: source {a}, target {b}");
        }
    }
    let certificates_verified = super::snapshot::verify_certificates(to)
        .await
        .context("after the copy")?;
    Ok(CopyReport {
        rows,
        certificates_verified,
    })
}
