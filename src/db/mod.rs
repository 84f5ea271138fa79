//! The storage layer: every SQL statement of liftledger lives under this module.
//!
//! Functions take the pool (or an open transaction) and return plain row types.
//! SQL is kept portable (no SQLite-only functions in queries) so that a second
//! engine can be added behind the same functions.

pub mod audit;
pub mod bulk;
pub mod certificates;
pub mod clauses;
pub mod field_tests;
pub mod lab_tests;
pub mod layers;
pub mod lots;
pub mod projects;
pub mod scope;
pub mod sources;
pub mod users;

use std::path::Path;
use std::str::FromStr;
use std::time::Duration;

use anyhow::Context;
use sqlx::sqlite::{SqliteConnectOptions, SqliteJournalMode, SqlitePoolOptions, SqliteSynchronous};

/// The connection pool handed to every db function.
pub type Pool = sqlx::SqlitePool;
/// An open transaction; several writes that must land together share one.
pub type Tx<'a> = sqlx::Transaction<'a, sqlx::Sqlite>;

/// Opens (creating if missing) the SQLite file in WAL mode with durable commits and runs migrations.
#[tracing::instrument]
pub async fn open(path: &Path) -> anyhow::Result<Pool> {
    let options = SqliteConnectOptions::from_str("sqlite://")
        .context("building SQLite options")?
        .filename(path)
        .create_if_missing(true)
        .journal_mode(SqliteJournalMode::Wal)
        // FULL: a commit that returned survives power loss, not just a process crash.
        .synchronous(SqliteSynchronous::Full)
        .foreign_keys(true)
        .busy_timeout(Duration::from_secs(10));
    let pool = SqlitePoolOptions::new()
        .max_connections(8)
        .connect_with(options)
        .await
        .with_context(|| format!("opening database {}", path.display()))?;
    migrate(&pool).await?;
    Ok(pool)
}

/// Applies the embedded migrations in `migrations/` that are not yet applied.
pub async fn migrate(pool: &Pool) -> anyhow::Result<()> {
    sqlx::migrate!("./migrations")
        .run(pool)
        .await
        .context("running database migrations")?;
    Ok(())
}

/// True when the error is a UNIQUE constraint violation (a duplicate code or number).
pub fn is_unique_violation(err: &sqlx::Error) -> bool {
    err.as_database_error()
        .is_some_and(|e| e.is_unique_violation())
}

/// True when the error is a foreign-key violation (a reference to a row that does not exist).
pub fn is_foreign_key_violation(err: &sqlx::Error) -> bool {
    err.as_database_error()
        .is_some_and(|e| e.is_foreign_key_violation())
}

/// Starts a write transaction. On SQLite it takes the write lock at once
/// (`BEGIN IMMEDIATE`) so concurrent writers queue on the busy timeout instead
/// of failing when a read turns into a write.
pub async fn begin_write(pool: &Pool) -> sqlx::Result<Tx<'static>> {
    pool.begin_with("BEGIN IMMEDIATE").await
}
