//! The storage layer: every SQL statement of liftledger lives under this module.
//!
//! Functions take the pool (or an open transaction) and return plain row types.
//! SQL is written once, with `$1`-style placeholders, and runs on SQLite (the
//! embedded default) and on PostgreSQL through sqlx's `Any` driver. The few
//! places where the engines differ (connection settings, migrations, the write
//! lock) are in this file and nowhere else.

pub mod audit;
pub mod bulk;
pub mod certificates;
pub mod clauses;
pub mod copy;
pub mod field_tests;
pub mod health;
pub mod idempotency;
pub mod instruments;
pub mod lab_tests;
pub mod layers;
pub mod lot_summaries;
pub mod lots;
mod marks;
pub mod moulds;
pub mod numbering;
pub mod planning;
pub mod projects;
pub mod scope;
pub mod snapshot;
pub mod sources;
pub mod users;

use std::path::Path;
use std::sync::Once;
use std::time::Duration;

use anyhow::Context;
use sqlx::Executor;
use sqlx::any::AnyPoolOptions;

/// The connection pool handed to every db function.
pub type Pool = sqlx::AnyPool;
/// An open transaction; several writes that must land together share one.
pub type Tx<'a> = sqlx::Transaction<'a, sqlx::Any>;
/// One connection, for bulk work inside a transaction (`&mut **tx`).
pub type Conn = sqlx::AnyConnection;

/// Which engine holds the data.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Engine {
    /// An embedded SQLite file (the default).
    Sqlite,
    /// A PostgreSQL server shared by several app servers.
    Postgres,
}

/// Where the database is: a URL (`sqlite://file`, `postgres://…`) or a plain file path meaning SQLite.
#[derive(Debug, Clone)]
pub struct Location {
    /// The database URL.
    pub url: String,
    /// Connections this process keeps open.
    pub max_connections: u32,
}

impl Location {
    /// Reads what the user typed; a bare path is an SQLite file.
    pub fn parse(s: &str, max_connections: u32) -> Self {
        let url = if s.starts_with("postgres://")
            || s.starts_with("postgresql://")
            || s.starts_with("sqlite:")
        {
            s.to_string()
        } else {
            format!("sqlite://{s}")
        };
        Self {
            url,
            max_connections,
        }
    }

    /// An SQLite file.
    pub fn sqlite(path: &Path) -> Self {
        Self::parse(&path.display().to_string(), 8)
    }

    /// The engine this location names.
    pub fn engine(&self) -> Engine {
        if self.url.starts_with("postgres") {
            Engine::Postgres
        } else {
            Engine::Sqlite
        }
    }

    /// The file of an SQLite location.
    pub fn sqlite_path(&self) -> Option<std::path::PathBuf> {
        let rest = self
            .url
            .strip_prefix("sqlite://")
            .or_else(|| self.url.strip_prefix("sqlite:"))?;
        Some(rest.split('?').next().unwrap_or(rest).into())
    }

    /// The URL without a password, for logs and messages.
    pub fn redacted(&self) -> String {
        match (self.url.find("://"), self.url.rfind('@')) {
            (Some(a), Some(b)) if b > a => format!("{}://…@{}", &self.url[..a], &self.url[b + 1..]),
            _ => self.url.clone(),
        }
    }
}

/// The engine behind a pool.
pub fn engine_of(pool: &Pool) -> Engine {
    if pool
        .connect_options()
        .database_url
        .as_str()
        .starts_with("postgres")
    {
        Engine::Postgres
    } else {
        Engine::Sqlite
    }
}

/// Opens (creating if missing) an SQLite file and runs migrations.
pub async fn open(path: &Path) -> anyhow::Result<Pool> {
    connect(&Location::sqlite(path)).await
}

/// Connects to the database a location names, configures it and runs migrations.
///
/// SQLite runs in WAL mode with foreign keys on, a busy timeout and
/// `synchronous=FULL` (a commit that returned survives power loss).
#[tracing::instrument(skip(location), fields(db = %location.redacted()))]
pub async fn connect(location: &Location) -> anyhow::Result<Pool> {
    let pool = connect_unmigrated(location).await?;
    migrate(&pool).await?;
    Ok(pool)
}

/// [`connect`] without running migrations: for reading a database this build must not
/// change (the live database a backup copies, a target a restore first checks is empty).
pub async fn connect_unmigrated(location: &Location) -> anyhow::Result<Pool> {
    static DRIVERS: Once = Once::new();
    DRIVERS.call_once(sqlx::any::install_default_drivers);
    let engine = location.engine();
    let url = match engine {
        Engine::Sqlite if !location.url.contains('?') => format!("{}?mode=rwc", location.url),
        // The Any driver types a NULL float as single precision; with cached statements
        // a later non-NULL double in the same slot is then refused, so PostgreSQL
        // statements are prepared per execution.
        Engine::Postgres if !location.url.contains("statement-cache-capacity") => {
            let sep = if location.url.contains('?') { '&' } else { '?' };
            format!("{}{sep}statement-cache-capacity=0", location.url)
        }
        _ => location.url.clone(),
    };
    let pool = AnyPoolOptions::new()
        .max_connections(location.max_connections.max(1))
        .acquire_timeout(Duration::from_secs(30))
        .after_connect(move |conn, _meta| {
            Box::pin(async move {
                if engine == Engine::Sqlite {
                    conn.execute(SQLITE_PRAGMAS).await?;
                }
                Ok(())
            })
        })
        .connect(&url)
        .await
        .with_context(|| format!("opening database {}", location.redacted()))?;
    Ok(pool)
}

/// The migrations embedded in this build for an engine.
pub fn migrator(engine: Engine) -> &'static sqlx::migrate::Migrator {
    static SQLITE: sqlx::migrate::Migrator = sqlx::migrate!("./migrations/sqlite");
    static POSTGRES: sqlx::migrate::Migrator = sqlx::migrate!("./migrations/postgres");
    match engine {
        Engine::Sqlite => &SQLITE,
        Engine::Postgres => &POSTGRES,
    }
}

/// Applies the embedded migrations of the pool's engine that are not yet applied.
pub async fn migrate(pool: &Pool) -> anyhow::Result<()> {
    migrator(engine_of(pool))
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
/// of failing when a read turns into a write; PostgreSQL uses row locks
/// ([`lock_project`]) where two writers could otherwise collide.
pub async fn begin_write(pool: &Pool) -> sqlx::Result<Tx<'static>> {
    match engine_of(pool) {
        Engine::Sqlite => pool.begin_with("BEGIN IMMEDIATE").await,
        Engine::Postgres => pool.begin().await,
    }
}

/// Settings of every SQLite connection: WAL, a durable commit, foreign keys, and a wait
/// for the write lock instead of an error.
const SQLITE_PRAGMAS: &str = "PRAGMA journal_mode = WAL; PRAGMA synchronous = FULL; \
    PRAGMA foreign_keys = ON; PRAGMA busy_timeout = 10000;";

/// A connection of its own for one large write on SQLite, with a 64 MiB page cache
/// (a pooled connection's is 2 MiB): an import's inserts land in index pages spread
/// over the file, and a larger cache keeps them from being written out and read back.
/// Dropped after the import, so the cache does not stay with the server. `None` on
/// PostgreSQL, whose server keeps its own cache.
pub async fn bulk_connection(pool: &Pool) -> sqlx::Result<Option<Conn>> {
    use sqlx::ConnectOptions;
    if engine_of(pool) != Engine::Sqlite {
        return Ok(None);
    }
    let mut conn = pool.connect_options().connect().await?;
    conn.execute(SQLITE_PRAGMAS).await?;
    conn.execute("PRAGMA cache_size = -65536").await?;
    Ok(Some(conn))
}

/// A statement of the `Any` driver with its parameters bound.
pub(crate) type Statement<'q> = sqlx::query::Query<'q, sqlx::Any, sqlx::any::AnyArguments>;

/// Runs an UPDATE or DELETE guarded by the state it expects, in `tx`; true when it changed
/// exactly one row (false: the row was no longer in that state, or is gone).
pub(crate) async fn changed_one(tx: &mut Tx<'_>, q: Statement<'_>) -> sqlx::Result<bool> {
    Ok(q.execute(&mut **tx).await?.rows_affected() == 1)
}

/// [`begin_write`] on a connection from [`bulk_connection`].
pub async fn begin_write_on(conn: &mut Conn) -> sqlx::Result<Tx<'_>> {
    sqlx::Connection::begin_with(conn, "BEGIN IMMEDIATE").await
}

/// Serialises writers that number things per project (certificates, test numbers).
///
/// On PostgreSQL this locks the project's row until the transaction ends, so
/// two app servers issuing at once take turns and numbers stay unique and
/// consecutive; on SQLite `BEGIN IMMEDIATE` already holds the only write lock.
pub async fn lock_project(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<()> {
    if tx.backend_name() == "PostgreSQL" {
        sqlx::query("SELECT id FROM projects WHERE id = $1 FOR NO KEY UPDATE")
            .bind(project_id)
            .fetch_optional(&mut **tx)
            .await?;
    }
    Ok(())
}
