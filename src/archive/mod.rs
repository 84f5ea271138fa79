//! The handover archive: one zip file holding a project's whole record for the client
//! to keep after the contract ends — every certificate revision as issued, the records
//! as CSV and JSON, the project's audit log, a manifest of every file with its SHA-256
//! and what it holds, and a README for a reader years later.
//!
//! Everything is read through the readers the exports and whole-project views use
//! (`ledger::overview`, `transfer::export`, `db::*::list`); nothing here judges a lot.
//! [`verify`] checks an archive file against its manifest.

mod packer;
mod readme;
mod records;
pub mod verify;

use std::io::{Seek, Write};
use std::path::Path;

use anyhow::{Context, bail};

use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use packer::Packer;

/// The manifest's name inside the archive.
pub const MANIFEST: &str = "manifest.json";
/// The same hashes in the `sha256sum -c` format, for a reader without liftledger.
pub const SUMS: &str = "SHA256SUMS";
/// The archive format written here (the manifest says which one a file follows).
pub const FORMAT_VERSION: i64 = 1;

/// What an archive holds, in a few numbers.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ArchiveSummary {
    pub project_code: String,
    pub files: usize,
    pub certificates: usize,
    pub lots: usize,
    pub field_tests: u64,
    pub audit_rows: usize,
    /// Bytes of the files before compression.
    pub content_bytes: u64,
}

/// Writes the handover archive of a project into `out`; `made_by` is recorded in the
/// manifest (a person's name, or the command line).
pub async fn write<W: Write + Seek>(
    pool: &Pool,
    project_id: i64,
    made_by: &str,
    out: W,
) -> Result<(W, ArchiveSummary)> {
    let project = crate::ledger::setup::require_project(pool, project_id).await?;
    let mut pack = Packer::new(out);
    let counts = records::write_all(pool, &project, &mut pack).await?;
    let certificates = records::write_certificates(pool, &project, &mut pack).await?;
    let audit_rows = records::write_audit(pool, &project, &mut pack).await?;
    let summary = ArchiveSummary {
        project_code: project.code.clone(),
        files: pack.entries().len() + 3,
        certificates,
        lots: counts.lots,
        field_tests: counts.field_tests,
        audit_rows,
        content_bytes: pack.entries().iter().map(|e| e.bytes).sum(),
    };
    let text = readme::text(&project, &summary, made_by);
    pack.add_text(
        "README.txt",
        "what this archive is and how to check it",
        &text,
    )?;
    let out = pack.finish(&project, made_by)?;
    Ok((out, summary))
}

/// What `liftledger archive --db URL --project CODE --to FILE.zip` runs: the archive
/// is written under a temporary name, checked against its own manifest, then renamed.
pub async fn write_file(
    location: &db::Location,
    project_code: &str,
    to: &Path,
) -> anyhow::Result<ArchiveSummary> {
    if to.extension().and_then(|e| e.to_str()) != Some("zip") {
        bail!("--to must name a .zip file, not {}", to.display());
    }
    crate::backup::check_target(to)?;
    crate::backup::check_source(location)?;
    let pool = db::connect(location).await?;
    let code = project_code.trim().to_ascii_uppercase();
    let found = db::projects::get_by_code(&pool, &code).await;
    let project = match found {
        Ok(Some(p)) => p,
        Ok(None) => {
            pool.close().await;
            bail!("no project with code {project_code}");
        }
        Err(e) => {
            pool.close().await;
            return Err(e.into());
        }
    };
    let partial = crate::backup::partial_name(to);
    let written = write_to(&pool, project.id, &partial).await;
    pool.close().await;
    let summary = match written.and_then(|s| verify::verify_file(&partial).map(|_| s)) {
        Ok(s) => s,
        Err(e) => {
            let _ = std::fs::remove_file(&partial);
            return Err(e);
        }
    };
    std::fs::rename(&partial, to)
        .with_context(|| format!("renaming {} to {}", partial.display(), to.display()))?;
    Ok(summary)
}

async fn write_to(pool: &Pool, project_id: i64, path: &Path) -> anyhow::Result<ArchiveSummary> {
    let file =
        std::fs::File::create(path).with_context(|| format!("creating {}", path.display()))?;
    let (file, summary) = write(
        pool,
        project_id,
        "command line",
        std::io::BufWriter::new(file),
    )
    .await
    .map_err(|e| match e {
        AppError::Internal(e) => e,
        e => anyhow::anyhow!("{}: {}", e.field(), e.user_message()),
    })?;
    let file = file.into_inner().map_err(|e| e.into_error())?;
    file.sync_all()?;
    Ok(summary)
}

/// The archive's download name, e.g. `MLR-handover-2026-12-02.zip`.
pub fn file_name(project_code: &str) -> String {
    format!(
        "{project_code}-handover-{}.zip",
        crate::clock::date_of(&crate::clock::now())
    )
}
