//! The storage layer: every SQL statement of liftledger lives under this module.
//!
//! Functions take the pool (or an open transaction) and return plain row types.
//! SQL is written once, with `$1`-style placeholders, and runs on SQLite (the
//! embedded default) and on PostgreSQL through each engine's native sqlx driver.
//! [`Pool`], [`Tx`] and [`Conn`] are enums over the two engines' types; a statement is
//! written once inside [`on_pool!`], [`on_tx!`] or [`on_conn!`], which expand to a `match`
//! with the same body in each arm, so the one text is compiled for each engine (no bounds
//! on every function as a generic `sqlx::Database` would need, no second copy of the SQL
//! as a trait per engine would). Both engines keep sqlx's prepared-statement cache. The
//! few places where the engines differ (connection settings, migrations, the write lock)
//! are in this file and match on the enum.

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
use std::str::FromStr;
use std::time::Duration;

use anyhow::Context;
use sqlx::pool::PoolConnection;
use sqlx::postgres::{PgConnectOptions, PgPoolOptions};
use sqlx::sqlite::{SqliteConnectOptions, SqliteJournalMode, SqlitePoolOptions, SqliteSynchronous};
use sqlx::{PgConnection, Postgres, Sqlite, SqliteConnection};

/// The connection pool handed to every db function: one engine's native pool.
#[derive(Debug, Clone)]
pub enum Pool {
    /// An embedded SQLite file.
    Sqlite(sqlx::SqlitePool),
    /// A PostgreSQL server.
    Postgres(sqlx::PgPool),
}

/// An open transaction; several writes that must land together share one.
#[derive(Debug)]
pub enum Tx<'a> {
    /// On SQLite.
    Sqlite(sqlx::Transaction<'a, Sqlite>),
    /// On PostgreSQL.
    Postgres(sqlx::Transaction<'a, Postgres>),
}

/// One pooled connection, held for several statements (an import's reader, or the import's
/// own writer from [`bulk_connection`]).
#[derive(Debug)]
pub enum Conn {
    /// On SQLite.
    Sqlite(PoolConnection<Sqlite>),
    /// On PostgreSQL.
    Postgres(PoolConnection<Postgres>),
}

/// A borrowed connection of either engine: what a transaction or a [`Conn`] lends to
/// functions that run on both (bulk reads and writes).
pub enum ConnRef<'c> {
    /// On SQLite.
    Sqlite(&'c mut SqliteConnection),
    /// On PostgreSQL.
    Postgres(&'c mut PgConnection),
}

/// Something statements can run on for a while: a transaction or a held connection.
pub trait AsConn: Send {
    /// The connection underneath, borrowed.
    fn as_conn(&mut self) -> ConnRef<'_>;
}

impl AsConn for Tx<'_> {
    fn as_conn(&mut self) -> ConnRef<'_> {
        match self {
            Tx::Sqlite(t) => ConnRef::Sqlite(t),
            Tx::Postgres(t) => ConnRef::Postgres(t),
        }
    }
}

impl AsConn for Conn {
    fn as_conn(&mut self) -> ConnRef<'_> {
        match self {
            Conn::Sqlite(c) => ConnRef::Sqlite(c),
            Conn::Postgres(c) => ConnRef::Postgres(c),
        }
    }
}

/// Runs `body` once per engine with `$p` bound to the native pool (`&SqlitePool` or
/// `&PgPool`): the statement is written once and compiled for each engine.
#[macro_export]
macro_rules! on_pool {
    ($pool:expr, |$p:ident| $body:expr) => {
        match $pool {
            $crate::db::Pool::Sqlite($p) => $body,
            $crate::db::Pool::Postgres($p) => $body,
        }
    };
}

/// Runs `body` once per engine with `$t` bound to the native transaction
/// (`&mut sqlx::Transaction<'_, Sqlite>` or `<'_, Postgres>`; `&mut **$t` is its connection).
#[macro_export]
macro_rules! on_tx {
    ($tx:expr, |$t:ident| $body:expr) => {
        match $tx {
            $crate::db::Tx::Sqlite($t) => $body,
            $crate::db::Tx::Postgres($t) => $body,
        }
    };
}

/// Runs `body` once per engine with `$c` bound to the native connection
/// (`&mut SqliteConnection` or `&mut PgConnection`) of anything [`AsConn`].
#[macro_export]
macro_rules! on_conn {
    ($conn:expr, |$c:ident| $body:expr) => {
        match $crate::db::AsConn::as_conn($conn) {
            $crate::db::ConnRef::Sqlite($c) => $body,
            $crate::db::ConnRef::Postgres($c) => $body,
        }
    };
}

pub use crate::{on_conn, on_pool, on_tx};

impl Pool {
    /// True once the pool was closed (a task holding a copy then stops).
    pub fn is_closed(&self) -> bool {
        on_pool!(self, |p| p.is_closed())
    }

    /// The engine behind the pool.
    pub fn engine(&self) -> Engine {
        match self {
            Pool::Sqlite(_) => Engine::Sqlite,
            Pool::Postgres(_) => Engine::Postgres,
        }
    }

    /// Starts a transaction (a deferred one on SQLite: see [`begin_write`] for writes).
    pub async fn begin(&self) -> sqlx::Result<Tx<'static>> {
        Ok(match self {
            Pool::Sqlite(p) => Tx::Sqlite(p.begin().await?),
            Pool::Postgres(p) => Tx::Postgres(p.begin().await?),
        })
    }

    /// Holds one pooled connection.
    pub async fn acquire(&self) -> sqlx::Result<Conn> {
        Ok(match self {
            Pool::Sqlite(p) => Conn::Sqlite(p.acquire().await?),
            Pool::Postgres(p) => Conn::Postgres(p.acquire().await?),
        })
    }

    /// Closes every connection; waits for those in use to come back.
    pub async fn close(&self) {
        on_pool!(self, |p| p.close().await)
    }

    /// Connections open now (in use or idle).
    pub fn size(&self) -> u32 {
        on_pool!(self, |p| p.size())
    }

    /// Idle connections now.
    pub fn num_idle(&self) -> usize {
        on_pool!(self, |p| p.num_idle())
    }

    /// The most connections the pool opens.
    pub fn max_connections(&self) -> u32 {
        on_pool!(self, |p| p.options().get_max_connections())
    }
}

impl<'a> Tx<'a> {
    /// The engine the transaction runs on.
    pub fn engine(&self) -> Engine {
        match self {
            Tx::Sqlite(_) => Engine::Sqlite,
            Tx::Postgres(_) => Engine::Postgres,
        }
    }

    /// Commits.
    pub async fn commit(self) -> sqlx::Result<()> {
        match self {
            Tx::Sqlite(t) => t.commit().await,
            Tx::Postgres(t) => t.commit().await,
        }
    }

    /// Rolls back.
    pub async fn rollback(self) -> sqlx::Result<()> {
        match self {
            Tx::Sqlite(t) => t.rollback().await,
            Tx::Postgres(t) => t.rollback().await,
        }
    }

    /// A savepoint inside this transaction: committing it keeps its writes in the
    /// transaction, rolling it back undoes only them.
    pub async fn begin(&mut self) -> sqlx::Result<Tx<'_>> {
        Ok(match self {
            Tx::Sqlite(t) => Tx::Sqlite(sqlx::Acquire::begin(&mut **t).await?),
            Tx::Postgres(t) => Tx::Postgres(sqlx::Acquire::begin(&mut **t).await?),
        })
    }
}

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
    pool.engine()
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
///
/// Both engines keep sqlx's per-connection cache of prepared statements (100 by default,
/// or the URL's `statement-cache-capacity`): a statement is parsed and planned once per
/// connection, then only bound and run.
pub async fn connect_unmigrated(location: &Location) -> anyhow::Result<Pool> {
    let opening = || format!("opening database {}", location.redacted());
    let connections = location.max_connections.max(1);
    let acquire = Duration::from_secs(30);
    Ok(match location.engine() {
        Engine::Sqlite => {
            let options = sqlite_options(&location.url).with_context(opening)?;
            Pool::Sqlite(
                SqlitePoolOptions::new()
                    .max_connections(connections)
                    .acquire_timeout(acquire)
                    .connect_with(options)
                    .await
                    .with_context(opening)?,
            )
        }
        Engine::Postgres => {
            let options = PgConnectOptions::from_str(&location.url).with_context(opening)?;
            Pool::Postgres(
                PgPoolOptions::new()
                    .max_connections(connections)
                    .acquire_timeout(acquire)
                    .connect_with(options)
                    .await
                    .with_context(opening)?,
            )
        }
    })
}

/// Settings of every SQLite connection: WAL, a durable commit (`synchronous=FULL`), foreign
/// keys, and a wait of 10 s for the write lock instead of an error. A URL without options
/// creates the file when it is missing.
fn sqlite_options(url: &str) -> sqlx::Result<SqliteConnectOptions> {
    let options = SqliteConnectOptions::from_str(url)?;
    let options = if url.contains('?') {
        options
    } else {
        options.create_if_missing(true)
    };
    Ok(options
        .journal_mode(SqliteJournalMode::Wal)
        .synchronous(SqliteSynchronous::Full)
        .foreign_keys(true)
        .busy_timeout(Duration::from_secs(10)))
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
    let migrator = migrator(engine_of(pool));
    on_pool!(pool, |p| migrator.run(p).await).context("running database migrations")?;
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
    Ok(match pool {
        Pool::Sqlite(p) => Tx::Sqlite(p.begin_with("BEGIN IMMEDIATE").await?),
        Pool::Postgres(p) => Tx::Postgres(p.begin().await?),
    })
}

/// A connection of its own for one large write on SQLite, with a 64 MiB page cache
/// (a pooled connection's is 2 MiB): an import's inserts land in index pages spread
/// over the file, and a larger cache keeps them from being written out and read back.
/// It comes from a one-connection pool of its own and is closed when dropped, so the
/// cache does not stay with the server. `None` on PostgreSQL, whose server keeps its
/// own cache.
pub async fn bulk_connection(pool: &Pool) -> sqlx::Result<Option<Conn>> {
    let Pool::Sqlite(shared) = pool else {
        return Ok(None);
    };
    let options = (*shared.connect_options())
        .clone()
        .pragma("cache_size", "-65536");
    let own = SqlitePoolOptions::new()
        .max_connections(1)
        .connect_with(options)
        .await?;
    let mut conn = own.acquire().await?;
    conn.close_on_drop();
    Ok(Some(Conn::Sqlite(conn)))
}

/// True when an UPDATE or DELETE guarded by the state it expects changed exactly one row
/// (false: the row was no longer in that state, or is gone). Takes the statement's
/// `rows_affected()`.
pub(crate) fn changed_one(rows_affected: u64) -> bool {
    rows_affected == 1
}

/// [`begin_write`] on a connection from [`bulk_connection`].
pub async fn begin_write_on(conn: &mut Conn) -> sqlx::Result<Tx<'_>> {
    use sqlx::Connection;
    Ok(match conn {
        Conn::Sqlite(c) => Tx::Sqlite(c.begin_with("BEGIN IMMEDIATE").await?),
        Conn::Postgres(c) => Tx::Postgres(c.begin().await?),
    })
}

/// Serialises writers that number things per project (certificates, test numbers).
///
/// On PostgreSQL this locks the project's row until the transaction ends, so
/// two app servers issuing at once take turns and numbers stay unique and
/// consecutive; on SQLite `BEGIN IMMEDIATE` already holds the only write lock.
pub async fn lock_project(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<()> {
    if let Tx::Postgres(tx) = tx {
        sqlx::query("SELECT id FROM projects WHERE id = $1 FOR NO KEY UPDATE")
            .bind(project_id)
            .fetch_optional(&mut **tx)
            .await?;
    }
    Ok(())
}
