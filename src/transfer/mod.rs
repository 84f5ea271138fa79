//! Bulk transfer of the record in open formats: CSV import of field tests and lab
//! points through a saved column mapping, and CSV, JSON and GeoJSON export.
//!
//! File formats live here; what an import does to the record (checks, duplicates,
//! the one transaction) lives in `crate::ledger::import`.

pub mod csv_import;
pub mod csv_safe;
pub mod export;
pub mod geojson;
pub mod mapping;

use std::path::Path;

use anyhow::Context;

use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use crate::ledger::import::{self, AuditMode, ImportOptions, ImportReport};
use crate::ledger::setup::LabTestInput;
use crate::ledger::{Actor, import::RowProblem};
use crate::reduction::{ChainageStyle, UnitSystem};
use csv_import::{CsvFieldTests, CsvLabPoints};
use mapping::{ImportMapping, LabPointMapping};

/// Checks (dry run) or imports (commit) a CSV file of field tests into a project.
pub async fn import_csv<R: std::io::Read + Send>(
    pool: &Pool,
    project_id: i64,
    file: R,
    file_name: &str,
    mapping: &ImportMapping,
    opts: &ImportOptions,
) -> Result<ImportReport> {
    let mut rows = CsvFieldTests::new(file, file_name, mapping);
    import::import_field_tests(pool, project_id, &mut rows, opts).await
}

/// Creates a lab compaction test from a CSV file of its points (`input.points` is ignored).
pub async fn import_lab_points_csv<R: std::io::Read>(
    pool: &Pool,
    source_id: i64,
    input: LabTestInput,
    file: R,
    file_name: &str,
    mapping: &LabPointMapping,
    actor: &Actor,
) -> Result<std::result::Result<db::lab_tests::LabTest, Vec<RowProblem>>> {
    let points = CsvLabPoints::read(file, file_name, mapping);
    let rows = points.rows.clone();
    import::import_lab_test(
        pool,
        source_id,
        input,
        rows,
        &|line, field| points.locate(line, field),
        actor,
    )
    .await
}

/// Saves a column mapping under a name in a project (replacing one of the same name).
pub async fn save_mapping(
    pool: &Pool,
    project_id: i64,
    name: &str,
    mapping: &ImportMapping,
    actor: &Actor,
) -> Result<i64> {
    let problems = mapping.problems();
    if !problems.is_empty() {
        return Err(AppError::invalid("mapping", problems.join("; ")));
    }
    let value = serde_json::to_value(mapping).map_err(anyhow::Error::from)?;
    import::save_mapping(pool, project_id, name, &value, actor).await
}

/// Reads a saved column mapping of a project.
pub async fn load_mapping(pool: &Pool, project_id: i64, name: &str) -> Result<ImportMapping> {
    let value = import::load_mapping(pool, project_id, name).await?;
    serde_json::from_value(value)
        .map_err(|e| anyhow::anyhow!("stored mapping '{name}' no longer reads: {e}").into())
}

/// Problems printed by the command line before it says "and N more".
const CLI_PROBLEMS_SHOWN: usize = 50;

/// What `liftledger import` runs: read a mapping file, check or import a CSV file into a
/// project, print the report. Fails (non-zero exit) when the file has problems.
pub async fn run_cli_import(
    location: &db::Location,
    project_code: &str,
    mapping_path: &Path,
    units: &str,
    chainage: &str,
    file: &Path,
    commit: bool,
) -> anyhow::Result<ImportReport> {
    let units = UnitSystem::parse_code(units)
        .ok_or_else(|| anyhow::anyhow!("--units must be si or us, not '{units}'"))?;
    let chainage = ChainageStyle::parse_code(chainage).ok_or_else(|| {
        anyhow::anyhow!("--chainage must be km_metre or feet_station, not '{chainage}'")
    })?;
    let text = std::fs::read_to_string(mapping_path)
        .with_context(|| format!("reading mapping {}", mapping_path.display()))?;
    let mut mapping: ImportMapping = serde_json::from_str(&text)
        .with_context(|| format!("mapping {} is not a column mapping", mapping_path.display()))?;
    mapping.units = units;
    mapping.chainage = chainage;
    let pool = db::connect(location).await?;
    let project = db::projects::get_by_code(&pool, &project_code.trim().to_ascii_uppercase())
        .await?
        .ok_or_else(|| anyhow::anyhow!("no project with code {project_code}"))?;
    let reader =
        std::fs::File::open(file).with_context(|| format!("opening {}", file.display()))?;
    let name = file.file_name().map_or_else(
        || file.display().to_string(),
        |n| n.to_string_lossy().to_string(),
    );
    let opts = ImportOptions {
        commit,
        audit: AuditMode::PerImport,
        actor: Actor::system("command-line import"),
    };
    let report = import_csv(
        &pool,
        project.id,
        std::io::BufReader::new(reader),
        &name,
        &mapping,
        &opts,
    )
    .await
    .map_err(|e| match e {
        AppError::Internal(e) => e,
        e => anyhow::anyhow!("{}: {}", e.field(), e.user_message()),
    })?;
    pool.close().await;
    println!("{}", report.summary());
    for p in report.problems.iter().take(CLI_PROBLEMS_SHOWN) {
        println!(
            "  row {}, column '{}', value '{}': {}",
            p.row, p.column, p.value, p.reason
        );
    }
    let more = report.problems.len().saturating_sub(CLI_PROBLEMS_SHOWN) as u64
        + report.problems_not_listed;
    if more > 0 {
        println!("  … and {more} more problems");
    }
    if report.refused() {
        anyhow::bail!(
            "{} rows have problems; nothing was written",
            report.rows_with_problems
        );
    }
    Ok(report)
}
