//! Snapshots of a live database and the checks a backup must pass.
//!
//! On SQLite `VACUUM INTO` writes a consistent copy from one read transaction while
//! the server keeps writing (WAL readers do not block writers). A copy is then checked
//! on its own: SQLite's integrity and foreign-key checks, the rows of every table, and
//! every certificate's SHA-256 against its stored bytes.

use std::path::Path;

use anyhow::{Context, bail};
use futures_util::TryStreamExt;
use sha2::{Digest, Sha256};

use super::on_pool;
use super::{Engine, Pool, engine_of};

/// Writes a consistent copy of a live SQLite database to `path` (which must not exist).
pub async fn vacuum_into(pool: &Pool, path: &Path) -> anyhow::Result<()> {
    if engine_of(pool) != Engine::Sqlite {
        bail!("VACUUM INTO is an SQLite statement; PostgreSQL is copied table by table");
    }
    on_pool!(pool, |pool| sqlx::query("VACUUM INTO $1")
        .bind(path.display().to_string())
        .execute(pool)
        .await
        .map(|r| r.rows_affected()))
    .with_context(|| format!("writing the snapshot {}", path.display()))?;
    Ok(())
}

/// Problems SQLite's integrity and foreign-key checks find (empty when the file is sound).
pub async fn sqlite_problems(pool: &Pool) -> anyhow::Result<Vec<String>> {
    let integrity: Vec<String> =
        on_pool!(pool, |pool| sqlx::query_scalar("PRAGMA integrity_check")
            .fetch_all(pool)
            .await)
        .context("running the integrity check")?;
    let mut problems: Vec<String> = integrity.into_iter().filter(|l| l != "ok").collect();
    let foreign: Vec<(String, i64)> = on_pool!(pool, |pool| sqlx::query_as(
        "SELECT \"table\", rowid FROM pragma_foreign_key_check"
    )
    .fetch_all(pool)
    .await)
    .context("running the foreign-key check")?;
    problems.extend(
        foreign
            .into_iter()
            .map(|(t, row)| format!("row {row} of {t} refers to a missing row")),
    );
    Ok(problems)
}

/// The database's own tables (migration bookkeeping left out), by name.
pub async fn table_names(pool: &Pool) -> anyhow::Result<Vec<String>> {
    let sql = match engine_of(pool) {
        Engine::Sqlite => {
            "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'
               AND name <> '_sqlx_migrations' ORDER BY name"
        }
        Engine::Postgres => {
            "SELECT CAST(table_name AS TEXT) FROM information_schema.tables
             WHERE table_schema = current_schema() AND table_type = 'BASE TABLE'
               AND table_name <> '_sqlx_migrations' ORDER BY table_name"
        }
    };
    Ok(on_pool!(pool, |pool| sqlx::query_scalar(sql)
        .fetch_all(pool)
        .await)?)
}

/// Rows in every table, by table name.
pub async fn table_counts(pool: &Pool) -> anyhow::Result<Vec<(String, i64)>> {
    let mut out = Vec::new();
    for t in table_names(pool).await? {
        let n: i64 = on_pool!(pool, |pool| sqlx::query_scalar(sqlx::AssertSqlSafe(
            format!("SELECT COUNT(*) FROM \"{t}\"")
        ))
        .fetch_one(pool)
        .await)
        .with_context(|| format!("counting {t}"))?;
        out.push((t, n));
    }
    Ok(out)
}

/// The first table holding rows, if any: a restore writes only into an empty database.
pub async fn first_table_with_rows(pool: &Pool) -> anyhow::Result<Option<(String, i64)>> {
    Ok(table_counts(pool).await?.into_iter().find(|(_, n)| *n > 0))
}

/// Checks every certificate's stored SHA-256 against its PDF bytes, one row in memory at
/// a time; returns how many were checked, or names the first that does not match.
pub async fn verify_certificates(pool: &Pool) -> anyhow::Result<i64> {
    let mut rows = on_pool!(pool, |pool| sqlx::query_as::<
        _,
        (i64, String, i64, String, Vec<u8>),
    >(
        "SELECT id, number, revision, sha256, pdf FROM certificates ORDER BY id",
    )
    .fetch(pool));
    let mut n = 0;
    while let Some((id, number, revision, sha, pdf)) = rows.try_next().await? {
        if hex::encode(Sha256::digest(&pdf)) != sha {
            bail!("certificate {number} revision {revision} (id {id}) does not match its SHA-256");
        }
        n += 1;
    }
    Ok(n)
}
