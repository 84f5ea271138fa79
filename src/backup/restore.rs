//! Restoring a backup file into a new, empty database on either engine.
//!
//! The backup itself is never opened for writing: it is copied to a temporary file,
//! which is brought up to this build's schema and checked, then copied into the target
//! through the copy path, which checks rows and certificate hashes again on arrival.

use std::path::Path;

use anyhow::{Context, bail};

use super::{check_file, remove_sqlite_files};
use crate::db::{self, Engine, Location, copy, snapshot};

/// What a restore wrote.
#[derive(Debug, Clone)]
pub struct RestoreReport {
    /// Rows copied, per table.
    pub rows: Vec<(String, i64)>,
    /// Certificates whose bytes matched their SHA-256 in the restored database.
    pub certificates_verified: i64,
}

/// Refuses a target a restore must not write to: a missing directory, an existing
/// SQLite file, a PostgreSQL database holding rows. Writes nothing.
pub async fn check_target(target: &Location) -> anyhow::Result<()> {
    match target.engine() {
        Engine::Sqlite => {
            let path = target
                .sqlite_path()
                .context("the target is not an SQLite file")?;
            let dir = super::parent_dir(&path);
            if !dir.is_dir() {
                bail!(
                    "the directory {} does not exist; create it first",
                    dir.display()
                );
            }
            let len = std::fs::metadata(&path).map(|m| m.len()).ok();
            if len.is_some_and(|n| n > 0) {
                bail!(
                    "{} already exists; restore only into a new database",
                    path.display()
                );
            }
        }
        Engine::Postgres => {
            let pool = db::connect_unmigrated(&Location {
                url: target.url.clone(),
                max_connections: 1,
            })
            .await?;
            let busy = snapshot::first_table_with_rows(&pool).await;
            pool.close().await;
            if let Some((table, n)) = busy? {
                bail!(
                    "the target database is not empty (table {table} has {n} rows); restore only into a new database"
                );
            }
        }
    }
    Ok(())
}

/// Restores the backup file `from` into the new, empty database `target`.
pub async fn restore(
    from: &Path,
    target: &Location,
    progress: &mut (dyn FnMut(&str) + Send),
) -> anyhow::Result<RestoreReport> {
    if !from.is_file() {
        bail!("there is no backup file at {}", from.display());
    }
    check_target(target).await?;
    let work = tempfile::tempdir().context("making a working directory")?;
    let copy_path = work.path().join("backup.sqlite");
    std::fs::copy(from, &copy_path).with_context(|| format!("reading {}", from.display()))?;
    let checked = check_file(&copy_path)
        .await
        .with_context(|| format!("{} is not a sound backup", from.display()))?;
    progress(&format!(
        "backup checked: integrity ok, {} certificates match their SHA-256",
        checked.certificates_verified
    ));
    if let Some((t, _)) = checked.rows.iter().find(|(t, n)| {
        *n > 0 && !copy::TABLES.contains(&t.as_str()) && !copy::REBUILT.contains(&t.as_str())
    }) {
        bail!("the backup holds table {t}, which this build cannot restore; use a newer build");
    }
    let source = db::open(&copy_path).await?;
    let result = copy_into(&source, target, progress).await;
    source.close().await;
    if result.is_err()
        && target.engine() == Engine::Sqlite
        && let Some(path) = target.sqlite_path()
    {
        remove_sqlite_files(&path);
    }
    result
}

async fn copy_into(
    source: &db::Pool,
    target: &Location,
    progress: &mut (dyn FnMut(&str) + Send),
) -> anyhow::Result<RestoreReport> {
    let pool = db::connect(target).await?;
    let copied = copy::copy_all_with(source, &pool, &mut |table, n| {
        progress(&format!("restored {table:<18} {n:>9} rows"))
    })
    .await;
    let checked = match (&copied, target.engine()) {
        (Ok(_), Engine::Sqlite) => snapshot::sqlite_problems(&pool).await.map(Some),
        _ => Ok(None),
    };
    pool.close().await;
    let copied = copied?;
    if let Some(problems) = checked?
        && !problems.is_empty()
    {
        bail!(
            "the restored database fails its integrity check: {}",
            problems.join("; ")
        );
    }
    Ok(RestoreReport {
        rows: copied.rows,
        certificates_verified: copied.certificates_verified,
    })
}
