//! The readiness probe's questions to the database: does it answer, and is its schema
//! the one this build expects?
//!
//! On SQLite the pool alone cannot tell: a connection keeps its file open, so when the
//! file is moved, removed or made unreadable the pooled connections go on answering
//! from the old inode (and whatever they write is lost at the next start). The probe
//! therefore also opens the file anew by its path, read-only and without creating it,
//! and asks that connection for the schema version.

use std::path::{Path, PathBuf};
use std::time::Duration;

use sqlx::ConnectOptions;

use super::{Engine, Pool, engine_of, migrator, on_pool};

/// Why the database cannot serve requests now.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NotReady {
    /// The pool's query failed: the server refused or dropped the connection.
    Unreachable,
    /// The SQLite file cannot be opened at its path (moved, removed, unreadable).
    FileUnavailable,
    /// The schema's newest applied migration is not this build's newest.
    Schema {
        /// The newest applied migration, `None` when the migrations table is missing.
        applied: Option<i64>,
        /// The newest migration embedded in this build.
        expected: i64,
    },
}

impl NotReady {
    /// Which check failed, for the probe's answer: `database` or `migrations`.
    pub fn check(&self) -> &'static str {
        match self {
            Self::Unreachable | Self::FileUnavailable => "database",
            Self::Schema { .. } => "migrations",
        }
    }

    /// The reason in words, without names or addresses from the error itself.
    pub fn reason(&self) -> String {
        match self {
            Self::Unreachable => "the database refused or dropped the connection".into(),
            Self::FileUnavailable => "the SQLite file cannot be opened at its path".into(),
            Self::Schema {
                applied: None,
                expected,
            } => format!("no migrations are applied; this build expects {expected}"),
            Self::Schema {
                applied: Some(a),
                expected,
            } => format!("the schema is at migration {a}; this build expects {expected}"),
        }
    }
}

/// The newest migration this build embeds for an engine.
pub fn expected_version(engine: Engine) -> i64 {
    migrator(engine)
        .iter()
        .filter(|m| m.migration_type.is_up_migration())
        .map(|m| m.version)
        .max()
        .unwrap_or(0)
}

const NEWEST_APPLIED: &str = "SELECT MAX(version) FROM _sqlx_migrations WHERE success";

/// Checks the database behind `pool`; `Ok` carries the schema's migration version.
/// Errors are logged at warn level with their detail; the caller bounds the time.
pub async fn readiness(pool: &Pool) -> Result<i64, NotReady> {
    let engine = engine_of(pool);
    on_pool!(pool, |pool| sqlx::query_scalar::<_, i32>("SELECT 1")
        .fetch_one(pool)
        .await)
    .map_err(|e| {
        tracing::warn!(error = %e, "readiness: the pool's query failed");
        NotReady::Unreachable
    })?;
    let applied = match sqlite_file(pool) {
        Some(path) => applied_on_disk(&path).await?,
        None => on_pool!(pool, |pool| sqlx::query_scalar::<_, Option<i64>>(
            NEWEST_APPLIED
        )
        .fetch_one(pool)
        .await)
        .unwrap_or_else(|e| {
            tracing::warn!(error = %e, "readiness: the migrations table cannot be read");
            None
        }),
    };
    let expected = expected_version(engine);
    match applied {
        Some(a) if a == expected => Ok(a),
        applied => Err(NotReady::Schema { applied, expected }),
    }
}

/// The file of an SQLite pool.
fn sqlite_file(pool: &Pool) -> Option<PathBuf> {
    match pool {
        Pool::Sqlite(p) => Some(p.connect_options().get_filename().to_path_buf()),
        Pool::Postgres(_) => None,
    }
}

/// The newest applied migration as read by a new read-only connection to the file.
async fn applied_on_disk(path: &Path) -> Result<Option<i64>, NotReady> {
    let unavailable = |e: sqlx::Error| {
        tracing::warn!(error = %e, file = %path.display(), "readiness: the SQLite file cannot be read");
        NotReady::FileUnavailable
    };
    let mut conn = sqlx::sqlite::SqliteConnectOptions::new()
        .filename(path)
        .create_if_missing(false)
        .read_only(true)
        .busy_timeout(Duration::from_secs(1))
        .connect()
        .await
        .map_err(unavailable)?;
    // Reading the schema makes SQLite read the file's header: a file that is not a
    // database (or not readable) fails here rather than at open.
    sqlx::query("SELECT COUNT(*) FROM sqlite_master")
        .fetch_one(&mut conn)
        .await
        .map_err(unavailable)?;
    let applied = sqlx::query_scalar::<_, Option<i64>>(NEWEST_APPLIED)
        .fetch_one(&mut conn)
        .await
        .unwrap_or(None);
    let _ = sqlx::Connection::close(conn).await;
    Ok(applied)
}

/// The settings an SQLite connection of the pool runs with, as SQLite reports them.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SqliteSettings {
    /// `wal` when commits go to the write-ahead log.
    pub journal_mode: String,
    /// Whether foreign keys are enforced.
    pub foreign_keys: bool,
    /// 2 is `FULL`: a commit that returned survives power loss.
    pub synchronous: i64,
}

/// What one of the pool's own connections is set to (`None` on PostgreSQL, which is
/// configured on its server).
pub async fn sqlite_settings(pool: &Pool) -> sqlx::Result<Option<SqliteSettings>> {
    let Pool::Sqlite(pool) = pool else {
        return Ok(None);
    };
    let mut conn = pool.acquire().await?;
    let journal_mode = sqlx::query_scalar("PRAGMA journal_mode")
        .fetch_one(&mut *conn)
        .await?;
    let foreign_keys: i64 = sqlx::query_scalar("PRAGMA foreign_keys")
        .fetch_one(&mut *conn)
        .await?;
    let synchronous = sqlx::query_scalar("PRAGMA synchronous")
        .fetch_one(&mut *conn)
        .await?;
    Ok(Some(SqliteSettings {
        journal_mode,
        foreign_keys: foreign_keys == 1,
        synchronous,
    }))
}
