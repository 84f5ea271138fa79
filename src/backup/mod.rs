//! Backups of a live database and restoring one.
//!
//! A backup is always one SQLite file, whatever the engine it came from, so it opens with
//! `serve --db FILE`: on SQLite it is written by `VACUUM INTO` beside the running server;
//! on PostgreSQL it is copied table by table from one repeatable-read transaction. It is
//! written under a temporary name, checked (integrity, rows of every table, every
//! certificate's SHA-256), then renamed into place, so a file with the final name is
//! always a checked backup. [`schedule`] takes them at intervals inside `serve`;
//! [`restore`] writes one into a new, empty database.

pub mod restore;
pub mod schedule;

use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::{Context, bail};

use crate::db::{self, Engine, Location, snapshot};

/// What a backup wrote and checked.
#[derive(Debug, Clone)]
pub struct BackupReport {
    /// The backup file.
    pub path: PathBuf,
    /// Its size.
    pub bytes: u64,
    /// Rows of every table in the backup.
    pub rows: Vec<(String, i64)>,
    /// Certificates whose bytes matched their SHA-256.
    pub certificates_verified: i64,
    /// Time from start to the renamed, checked file.
    pub seconds: f64,
    /// When the snapshot was taken (RFC 3339 UTC).
    pub taken_at: String,
}

/// What a check of a backup file found.
#[derive(Debug, Clone)]
pub struct CheckedFile {
    pub rows: Vec<(String, i64)>,
    pub certificates_verified: i64,
}

/// Refuses a target a backup must not be written to: a missing directory or an existing file.
pub fn check_target(to: &Path) -> anyhow::Result<()> {
    let dir = parent_dir(to);
    if !dir.is_dir() {
        bail!(
            "the directory {} does not exist; create it first",
            dir.display()
        );
    }
    if to.exists() {
        bail!("{} already exists; nothing is overwritten", to.display());
    }
    Ok(())
}

/// The directory a file is in ("." for a bare name).
pub fn parent_dir(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// The temporary name a file is written under before it is renamed into place.
pub fn partial_name(to: &Path) -> PathBuf {
    let name = to
        .file_name()
        .map_or_else(|| "backup".into(), |n| n.to_string_lossy().to_string());
    parent_dir(to).join(format!(".{name}.partial"))
}

/// Refuses a source that is not there (opening a missing SQLite file would create it).
pub fn check_source(location: &Location) -> anyhow::Result<()> {
    if let Some(path) = location.sqlite_path()
        && !path.is_file()
    {
        bail!("there is no database file at {}", path.display());
    }
    Ok(())
}

/// Takes a checked backup of the database at `location` into the new file `to`,
/// calling `progress` with a line for each step.
pub async fn take(
    location: &Location,
    to: &Path,
    progress: &mut (dyn FnMut(&str) + Send),
) -> anyhow::Result<BackupReport> {
    check_source(location)?;
    check_target(to)?;
    let started = Instant::now();
    let partial = partial_name(to);
    remove_sqlite_files(&partial);
    let taken_at = crate::clock::now();
    let written = write_snapshot(location, &partial, progress).await;
    let checked = match written {
        Ok(bounds) => check_file_within(&partial, bounds.as_ref()).await,
        Err(e) => Err(e),
    };
    let checked = match checked {
        Ok(c) => c,
        Err(e) => {
            remove_sqlite_files(&partial);
            return Err(e);
        }
    };
    progress(&format!(
        "checked: integrity ok, {} tables, {} certificates match their SHA-256",
        checked.rows.len(),
        checked.certificates_verified
    ));
    put_in_place(&partial, to)?;
    let bytes = std::fs::metadata(to)?.len();
    Ok(BackupReport {
        path: to.to_path_buf(),
        bytes,
        rows: checked.rows,
        certificates_verified: checked.certificates_verified,
        seconds: started.elapsed().as_secs_f64(),
        taken_at,
    })
}

/// Row counts of the live database read just before and just after a snapshot: rows are
/// only ever added (sign-in failures aside), so each table of the snapshot lies between.
struct Bounds {
    before: Vec<(String, i64)>,
    after: Vec<(String, i64)>,
}

/// Writes the snapshot file; returns the live database's row counts around it (SQLite).
async fn write_snapshot(
    location: &Location,
    partial: &Path,
    progress: &mut (dyn FnMut(&str) + Send),
) -> anyhow::Result<Option<Bounds>> {
    let source = db::connect_unmigrated(&Location {
        url: location.url.clone(),
        max_connections: 2,
    })
    .await?;
    let result = match location.engine() {
        Engine::Sqlite => {
            let before = snapshot::table_counts(&source).await?;
            progress(&format!(
                "writing a snapshot of {} to {}",
                location.redacted(),
                partial.display()
            ));
            snapshot::vacuum_into(&source, partial).await?;
            let after = snapshot::table_counts(&source).await?;
            Ok(Some(Bounds { before, after }))
        }
        Engine::Postgres => copy_postgres(&source, partial, progress)
            .await
            .map(|_| None),
    };
    source.close().await;
    result
}

/// Copies a PostgreSQL database into a new SQLite file through the copy path.
async fn copy_postgres(
    source: &db::Pool,
    partial: &Path,
    progress: &mut (dyn FnMut(&str) + Send),
) -> anyhow::Result<()> {
    let target = db::connect(&Location::sqlite(partial)).await?;
    let copied = db::copy::copy_all_with(source, &target, &mut |table, n| {
        progress(&format!("copied {table:<18} {n:>9} rows"))
    })
    .await;
    target.close().await;
    copied.map(|_| ())
}

/// Opens an existing SQLite file (never creating one) with a single connection.
pub async fn open_existing(path: &Path) -> anyhow::Result<db::Pool> {
    db::connect_unmigrated(&Location::parse(
        &format!("sqlite://{}?mode=rw", path.display()),
        1,
    ))
    .await
}

/// Checks a backup file on its own: integrity and foreign keys, rows per table, and
/// every certificate's SHA-256.
pub async fn check_file(path: &Path) -> anyhow::Result<CheckedFile> {
    check_file_within(path, None).await
}

/// [`check_file`], with each table's rows inside `bounds` when given.
async fn check_file_within(path: &Path, bounds: Option<&Bounds>) -> anyhow::Result<CheckedFile> {
    let pool = open_existing(path).await?;
    let checked = check_pool(&pool, bounds).await;
    pool.close().await;
    checked.with_context(|| format!("checking {}", path.display()))
}

async fn check_pool(pool: &db::Pool, bounds: Option<&Bounds>) -> anyhow::Result<CheckedFile> {
    let problems = snapshot::sqlite_problems(pool).await?;
    if !problems.is_empty() {
        bail!("the integrity check failed: {}", problems.join("; "));
    }
    let rows = snapshot::table_counts(pool).await?;
    if let Some(b) = bounds {
        check_bounds(&rows, b)?;
    }
    let certificates_verified = snapshot::verify_certificates(pool).await?;
    Ok(CheckedFile {
        rows,
        certificates_verified,
    })
}

fn check_bounds(rows: &[(String, i64)], b: &Bounds) -> anyhow::Result<()> {
    let of = |list: &[(String, i64)], t: &str| list.iter().find(|(n, _)| n == t).map(|(_, n)| *n);
    for (table, n) in rows {
        let (Some(lo), Some(hi)) = (of(&b.before, table), of(&b.after, table)) else {
            bail!("table {table} is in the snapshot but not in the live database");
        };
        // A table that shrank while the snapshot ran (old sign-in failures are deleted)
        // gives no bounds to check against.
        if lo <= hi && !(lo..=hi).contains(n) {
            bail!(
                "table {table} has {n} rows in the snapshot, outside the live database's {lo}–{hi}"
            );
        }
    }
    if let Some((t, _)) = b.before.iter().find(|(t, _)| of(rows, t).is_none()) {
        bail!("table {t} of the live database is missing from the snapshot");
    }
    Ok(())
}

/// Flushes the checked file to disk and renames it to its final name.
fn put_in_place(partial: &Path, to: &Path) -> anyhow::Result<()> {
    std::fs::File::open(partial)
        .and_then(|f| f.sync_all())
        .with_context(|| format!("flushing {}", partial.display()))?;
    if to.exists() {
        remove_sqlite_files(partial);
        bail!(
            "{} appeared while the backup ran; not overwritten",
            to.display()
        );
    }
    std::fs::rename(partial, to)
        .with_context(|| format!("renaming {} to {}", partial.display(), to.display()))?;
    if let Ok(dir) = std::fs::File::open(parent_dir(to)) {
        let _ = dir.sync_all();
    }
    Ok(())
}

/// Removes an SQLite file and the WAL files beside it, if present.
pub fn remove_sqlite_files(path: &Path) {
    for suffix in ["", "-wal", "-shm", "-journal"] {
        let mut p = path.as_os_str().to_owned();
        p.push(suffix);
        let _ = std::fs::remove_file(PathBuf::from(p));
    }
}
