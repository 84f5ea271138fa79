//! Backups taken by `serve` at intervals: `--backup-dir DIR --backup-every 6h --backup-keep 14`.
//!
//! The first is taken when the server starts, then one every interval. Each is written
//! under a temporary name, checked and renamed (see [`super::take`]); then the oldest
//! beyond `keep` are removed. A failed backup is logged at error level, kept in
//! [`BackupStatus`] for the projects page (admins see it), and never stops the service:
//! the next one is tried at the next interval.

use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};
use std::time::Duration;

use anyhow::{Context, bail};

use crate::db::Location;

/// Prefix and suffix of the files the schedule writes (and prunes: no other file is touched).
const PREFIX: &str = "liftledger-";
const SUFFIX: &str = ".sqlite";

/// How often and where.
#[derive(Debug, Clone)]
pub struct Schedule {
    pub dir: PathBuf,
    pub every: Duration,
    pub keep: usize,
}

/// One attempt's outcome, as the projects page shows it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Attempt {
    /// When it ended (RFC 3339 UTC).
    pub at: String,
    /// The file written, or what went wrong.
    pub detail: String,
}

/// The last good backup and the last failure since it (if any), shared with the pages.
#[derive(Debug, Default)]
pub struct BackupStatus(Mutex<StatusInner>);

#[derive(Debug, Default, Clone)]
struct StatusInner {
    last_good: Option<Attempt>,
    failure: Option<Attempt>,
}

impl BackupStatus {
    /// The last good backup.
    pub fn last_good(&self) -> Option<Attempt> {
        self.0.lock().ok()?.last_good.clone()
    }
    /// The failure of the latest attempt, when it failed.
    pub fn failure(&self) -> Option<Attempt> {
        self.0.lock().ok()?.failure.clone()
    }
    fn succeeded(&self, a: Attempt) {
        if let Ok(mut s) = self.0.lock() {
            s.last_good = Some(a);
            s.failure = None;
        }
    }
    fn failed(&self, a: Attempt) {
        if let Ok(mut s) = self.0.lock() {
            s.failure = Some(a);
        }
    }
}

/// Reads an interval such as `6h`, `90m`, `1d` or `30s`.
pub fn parse_every(text: &str) -> anyhow::Result<Duration> {
    let t = text.trim();
    let split = t.find(|c: char| !c.is_ascii_digit()).unwrap_or(t.len());
    let (digits, unit) = t.split_at(split);
    let n: u64 = digits.parse().ok().filter(|n| *n > 0).with_context(|| {
        format!("--backup-every must be a number and a unit such as 6h, 90m or 1d, not '{text}'")
    })?;
    let secs = match unit {
        "s" => 1,
        "m" => 60,
        "h" => 3600,
        "d" => 86_400,
        _ => bail!("--backup-every must end in s, m, h or d (as in 6h), not '{text}'"),
    };
    Ok(Duration::from_secs(n.saturating_mul(secs)))
}

impl Schedule {
    /// Checks the arguments before the server starts: the directory exists and takes a file.
    pub fn new(dir: PathBuf, every: &str, keep: usize) -> anyhow::Result<Self> {
        let every = parse_every(every)?;
        if keep == 0 {
            bail!("--backup-keep must be at least 1");
        }
        if !dir.is_dir() {
            bail!(
                "--backup-dir {} does not exist or is not a directory; create it first",
                dir.display()
            );
        }
        let probe = dir.join(".liftledger-write-probe");
        std::fs::write(&probe, b"")
            .with_context(|| format!("--backup-dir {} is not writable", dir.display()))?;
        let _ = std::fs::remove_file(&probe);
        Ok(Self { dir, every, keep })
    }
}

/// Starts the schedule in the background.
pub fn spawn(
    location: Location,
    schedule: Schedule,
    status: Arc<BackupStatus>,
) -> tokio::task::JoinHandle<()> {
    tokio::spawn(async move {
        let mut ticks = tokio::time::interval(schedule.every);
        ticks.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
        loop {
            ticks.tick().await;
            run_once(&location, &schedule, &status).await;
        }
    })
}

/// One scheduled backup: take it, record the outcome, prune the old ones.
pub async fn run_once(location: &Location, schedule: &Schedule, status: &BackupStatus) {
    let stamp = time::OffsetDateTime::now_utc()
        .format(time::macros::format_description!(
            "[year][month][day]T[hour][minute][second]Z"
        ))
        .unwrap_or_default();
    let to = schedule.dir.join(format!("{PREFIX}{stamp}{SUFFIX}"));
    match super::take(location, &to, &mut |line| tracing::debug!("backup: {line}")).await {
        Ok(r) => {
            tracing::info!(
                file = %r.path.display(),
                bytes = r.bytes,
                seconds = r.seconds,
                certificates = r.certificates_verified,
                "backup written and checked"
            );
            crate::metrics::set_last_good_backup(time::OffsetDateTime::now_utc().unix_timestamp());
            status.succeeded(Attempt {
                at: crate::clock::now(),
                detail: r.path.display().to_string(),
            });
            if let Err(e) = prune(&schedule.dir, schedule.keep) {
                tracing::error!(error = %format!("{e:#}"), "BACKUP PRUNING FAILED: old backups were not removed");
            }
        }
        Err(e) => {
            let message = format!("{e:#}");
            tracing::error!(error = %message, file = %to.display(), "BACKUP FAILED: no new backup was written; the service keeps running");
            status.failed(Attempt {
                at: crate::clock::now(),
                detail: message,
            });
        }
    }
}

/// The schedule's backups in a directory, oldest first (their names sort by time).
pub fn backups_in(dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .with_context(|| format!("reading {}", dir.display()))?
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| n.starts_with(PREFIX) && n.ends_with(SUFFIX))
        })
        .collect();
    files.sort();
    Ok(files)
}

/// Removes the oldest backups beyond `keep`, and the temporary files of attempts that
/// were cut off (a crash mid-backup); none is being written while this runs.
fn prune(dir: &Path, keep: usize) -> anyhow::Result<()> {
    for entry in std::fs::read_dir(dir)?.filter_map(|e| e.ok()) {
        let name = entry.file_name().to_string_lossy().to_string();
        if name.starts_with(&format!(".{PREFIX}")) && name.ends_with(&format!("{SUFFIX}.partial")) {
            super::remove_sqlite_files(&entry.path());
            tracing::info!(file = %entry.path().display(), "unfinished backup removed");
        }
    }
    let files = backups_in(dir)?;
    let excess = files.len().saturating_sub(keep);
    for old in &files[..excess] {
        super::remove_sqlite_files(old);
        tracing::info!(file = %old.display(), "old backup removed");
    }
    Ok(())
}
