//! Moving a whole liftledger database between engines (SQLite ↔ PostgreSQL),
//! then proving the copy: row counts per table and every certificate's SHA-256.

use anyhow::{Context, bail};
use sqlx::{Column, Row, TypeInfo, ValueRef};

use super::{Pool, Tx, on_pool, on_tx};

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
/// then sets to the source's numbers (`db::numbering::counters`); and the register's revision, a number the target's
/// own migration starts and its triggers move (only caches read it).
pub const REBUILT: [&str; 4] = [
    "lot_summaries",
    "lots_to_judge",
    "test_counters",
    "register_revision",
];

/// What a copy moved and checked.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CopyReport {
    /// (table, rows) in copy order.
    pub rows: Vec<(String, i64)>,
    /// Certificates whose stored SHA-256 matched their bytes on the target.
    pub certificates_verified: i64,
}

/// What a column or a value holds, by the engine's type name; the same four on both
/// engines (the PostgreSQL schema uses BIGINT, DOUBLE PRECISION, TEXT and BYTEA only).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Int,
    Float,
    Text,
    Bytes,
}

impl Kind {
    /// The kind of an SQLite declared type or storage class, or of a PostgreSQL type;
    /// `None` for NULL (a value without a type) or a type the schema does not use.
    fn of(type_name: &str) -> Option<Kind> {
        Some(match type_name.to_ascii_uppercase().as_str() {
            "INTEGER" | "INT" | "BIGINT" | "INT8" | "INT4" | "INT2" | "BOOLEAN" | "BOOL" => {
                Kind::Int
            }
            "REAL" | "DOUBLE" | "DOUBLE PRECISION" | "FLOAT8" | "FLOAT4" => Kind::Float,
            "TEXT" | "VARCHAR" | "CHAR" | "BPCHAR" | "NAME" => Kind::Text,
            "BLOB" | "BYTEA" => Kind::Bytes,
            _ => return None,
        })
    }
}

/// One value in transit.
#[derive(Debug, Clone, PartialEq)]
enum Cell {
    /// NULL, bound as its column's kind (a statement's slot keeps one type on every row).
    Null(Kind),
    Int(i64),
    Float(f64),
    Text(String),
    Bytes(Vec<u8>),
}

/// One table's rows as read from the source: column names and typed cells.
struct Rows {
    columns: Vec<String>,
    rows: Vec<Vec<Cell>>,
}

/// Reads every value of `rows` by the type the engine gives it, then makes it its column's
/// kind (an integral REAL of a loosely typed SQLite file becomes an integer in a BIGINT
/// column), so each slot of the insert is bound with one type on every row.
fn read_rows<R: Row>(rows: &[R]) -> anyhow::Result<Rows>
where
    usize: sqlx::ColumnIndex<R>,
    for<'r> bool: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> i16: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> i32: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> i64: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> f32: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> f64: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> String: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> Vec<u8>: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
{
    let Some(first) = rows.first() else {
        return Ok(Rows {
            columns: Vec::new(),
            rows: Vec::new(),
        });
    };
    let columns: Vec<String> = first
        .columns()
        .iter()
        .map(|c| c.name().to_string())
        .collect();
    let declared: Vec<Option<Kind>> = first
        .columns()
        .iter()
        .map(|c| Kind::of(c.type_info().name()))
        .collect();
    let mut out = Vec::with_capacity(rows.len());
    for row in rows {
        let mut cells = Vec::with_capacity(columns.len());
        for (i, kind) in declared.iter().enumerate() {
            let read = cell(row, i)?;
            cells.push(as_kind(read, *kind).with_context(|| format!("column {}", columns[i]))?);
        }
        out.push(cells);
    }
    Ok(Rows { columns, rows: out })
}

/// One value of a row, read by the type of the value itself.
fn cell<R: Row>(row: &R, i: usize) -> anyhow::Result<Cell>
where
    usize: sqlx::ColumnIndex<R>,
    for<'r> bool: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> i16: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> i32: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> i64: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> f32: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> f64: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> String: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
    for<'r> Vec<u8>: sqlx::Decode<'r, R::Database> + sqlx::Type<R::Database>,
{
    let raw = row.try_get_raw(i)?;
    if raw.is_null() {
        let declared = Kind::of(row.columns()[i].type_info().name());
        return Ok(Cell::Null(declared.unwrap_or(Kind::Int)));
    }
    let name = raw.type_info().name().to_ascii_uppercase();
    Ok(match name.as_str() {
        "BOOL" | "BOOLEAN" => Cell::Int(i64::from(row.try_get::<bool, _>(i)?)),
        "INT2" => Cell::Int(i64::from(row.try_get::<i16, _>(i)?)),
        "INT4" => Cell::Int(i64::from(row.try_get::<i32, _>(i)?)),
        "FLOAT4" => Cell::Float(f64::from(row.try_get::<f32, _>(i)?)),
        other => match Kind::of(other) {
            Some(Kind::Int) => Cell::Int(row.try_get::<i64, _>(i)?),
            Some(Kind::Float) => Cell::Float(row.try_get::<f64, _>(i)?),
            Some(Kind::Text) => Cell::Text(row.try_get::<String, _>(i)?),
            Some(Kind::Bytes) => Cell::Bytes(row.try_get::<Vec<u8>, _>(i)?),
            None => bail!("a value of type {other} cannot be copied"),
        },
    })
}

/// A value made its column's kind (`None`: a column without a declared type keeps the
/// value's own).
fn as_kind(cell: Cell, kind: Option<Kind>) -> anyhow::Result<Cell> {
    let Some(kind) = kind else {
        return Ok(cell);
    };
    Ok(match (cell, kind) {
        (Cell::Null(_), k) => Cell::Null(k),
        (Cell::Int(v), Kind::Float) => Cell::Float(v as f64),
        (Cell::Float(v), Kind::Int) if v.fract() == 0.0 && v.abs() < 9.0e15 => Cell::Int(v as i64),
        (c @ Cell::Int(_), Kind::Int)
        | (c @ Cell::Float(_), Kind::Float)
        | (c @ Cell::Text(_), Kind::Text)
        | (c @ Cell::Bytes(_), Kind::Bytes) => c,
        (c, k) => bail!("the value {c:?} does not fit a column of kind {k:?}"),
    })
}

/// Rows of a table, through a pool or a connection of one engine.
macro_rules! count {
    ($on:expr, $table:expr) => {
        sqlx::query_scalar::<_, i64>(sqlx::AssertSqlSafe(format!(
            "SELECT COUNT(*) FROM {}",
            $table
        )))
        .fetch_one($on)
        .await
    };
}

/// Rows of a table of the target.
async fn count_in(pool: &Pool, table: &str) -> anyhow::Result<i64> {
    Ok(on_pool!(pool, |pool| count!(pool, table))?)
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
        if count_in(to, t).await? > 0 {
            bail!(
                "the target database is not empty (table {t} has rows); copy only into a new database"
            );
        }
    }
    let mut snapshot = match from {
        Pool::Postgres(p) => Tx::Postgres(
            p.begin_with("BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY")
                .await?,
        ),
        Pool::Sqlite(p) => Tx::Sqlite(p.begin().await?),
    };
    let mut tx = to.begin().await?;
    let mut rows = Vec::new();
    for table in TABLES {
        let source = read_table(&mut snapshot, table)
            .await
            .with_context(|| format!("reading {table}"))?;
        let n = insert_rows(&mut tx, table, &source).await?;
        if let (Tx::Postgres(tx), true) = (&mut tx, n > 0) {
            // Ids were copied as they were; move each identity past the largest one.
            sqlx::query(sqlx::AssertSqlSafe(format!(
                "SELECT setval(pg_get_serial_sequence('{table}', 'id'), (SELECT MAX(id) FROM {table}))"
            )))
            .fetch_one(&mut **tx)
            .await?;
        }
        progress(table, n);
        rows.push((table.to_string(), n));
    }
    // Each copied project was given a counter at zero; it takes the source's number.
    for (project_id, last_number) in super::numbering::counters(&mut snapshot)
        .await
        .context("reading the test counters")?
    {
        super::numbering::follow_number(&mut tx, project_id, last_number).await?;
    }
    tx.commit().await?;
    let report = verify(&mut snapshot, to, rows).await;
    snapshot.rollback().await?;
    report
}

/// Every row of a table of the source, read in the snapshot.
async fn read_table(snapshot: &mut Tx<'_>, table: &str) -> anyhow::Result<Rows> {
    let sql = format!("SELECT * FROM {table} ORDER BY id");
    on_tx!(snapshot, |tx| {
        let rows = sqlx::query(sqlx::AssertSqlSafe(sql))
            .fetch_all(&mut **tx)
            .await?;
        read_rows(&rows)
    })
}

/// Writes rows read from one table into the same table of the target; returns the count.
async fn insert_rows(tx: &mut Tx<'_>, table: &str, source: &Rows) -> anyhow::Result<i64> {
    if source.rows.is_empty() {
        return Ok(0);
    }
    let marks: Vec<String> = (1..=source.columns.len())
        .map(|i| format!("${i}"))
        .collect();
    let sql = format!(
        "INSERT INTO {table} ({}) VALUES ({})",
        source.columns.join(", "),
        marks.join(", ")
    );
    for row in &source.rows {
        on_tx!(&mut *tx, |tx| {
            let mut q = sqlx::query(sqlx::AssertSqlSafe(sql.as_str()));
            for c in row {
                q = match c {
                    Cell::Null(Kind::Int) => q.bind(Option::<i64>::None),
                    Cell::Null(Kind::Float) => q.bind(Option::<f64>::None),
                    Cell::Null(Kind::Text) => q.bind(Option::<String>::None),
                    Cell::Null(Kind::Bytes) => q.bind(Option::<Vec<u8>>::None),
                    Cell::Int(v) => q.bind(*v),
                    Cell::Float(v) => q.bind(*v),
                    Cell::Text(v) => q.bind(v.as_str()),
                    Cell::Bytes(v) => q.bind(v.as_slice()),
                };
            }
            q.execute(&mut **tx).await.map(|_| ())
        })
        .with_context(|| format!("writing {table}"))?;
    }
    Ok(source.rows.len() as i64)
}

async fn verify(
    from: &mut Tx<'static>,
    to: &Pool,
    rows: Vec<(String, i64)>,
) -> anyhow::Result<CopyReport> {
    for (table, n) in &rows {
        let a = on_tx!(&mut *from, |from| count!(&mut **from, table))?;
        let b = count_in(to, table).await?;
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
