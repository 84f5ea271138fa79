//! Daily standard counts of nuclear gauges, judged against the gauge's recent accepted
//! counts by the tolerances of the project the count is taken for; the tolerances and
//! the clause policy for tests from an instrument out of check.

use serde::Deserialize;
use serde_json::json;

use super::{audit_row, require_instrument};
use crate::clock;
use crate::db::{self, Pool, instruments::StandardCount};
use crate::error::{AppError, Result};
use crate::ledger::Actor;
use crate::ledger::validate::{date, number};
use crate::reduction::instruments::{CountOutcome, CountTolerances, PastCount, judge_count};

/// Body of a standard count.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CountInput {
    /// The project whose tolerances judge it (the gauge must be assigned to it that day).
    pub project_id: i64,
    pub counted_on: String,
    #[serde(deserialize_with = "crate::ledger::validate::whole::i64")]
    pub density_count: i64,
    #[serde(deserialize_with = "crate::ledger::validate::whole::i64")]
    pub moisture_count: i64,
}

/// Body of a project's tolerances.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TolerancesInput {
    pub density_pct: f64,
    pub moisture_pct: f64,
}

/// Body of a clause's policy for tests from an instrument out of check.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PolicyInput {
    pub record_out_of_check: bool,
}

/// The tolerances a project judges counts by (its own, else the defaults from memory).
pub async fn tolerances_of(pool: &Pool, project_id: i64) -> Result<CountTolerances> {
    Ok(match db::instruments::tolerances(pool, project_id).await? {
        Some((d, m)) => CountTolerances {
            density_pct: d,
            moisture_pct: m,
        },
        None => CountTolerances::default(),
    })
}

/// A positive count, naming its field (a count of zero means the gauge did not count).
fn count(field: &str, v: i64) -> Result<i64> {
    if v <= 0 || v > 10_000_000 {
        return Err(AppError::invalid(
            field,
            format!("{v} is not a count: it must be a whole number from 1 to 10,000,000"),
        ));
    }
    Ok(v)
}

/// Records a gauge's standard count, judged (see `reduction::instruments::judge_count`).
pub async fn record_count(
    pool: &Pool,
    instrument_id: i64,
    input: &CountInput,
    actor: &Actor,
) -> Result<StandardCount> {
    let gauge = require_instrument(pool, instrument_id).await?;
    if gauge.kind != crate::reduction::instruments::InstrumentKind::NuclearGauge {
        return Err(AppError::invalid(
            "instrument_id",
            format!(
                "{} is not a nuclear gauge; only gauges take standard counts",
                gauge.serial
            ),
        ));
    }
    let day = date("counted_on", &input.counted_on)?;
    let density = count("density_count", input.density_count)?;
    let moisture = count("moisture_count", input.moisture_count)?;
    require_assigned(pool, &gauge, input.project_id, &day).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let t = match db::instruments::tolerances_in(&mut tx, input.project_id).await? {
        Some((d, m)) => CountTolerances {
            density_pct: d,
            moisture_pct: m,
        },
        None => CountTolerances::default(),
    };
    let past = baseline(&mut tx, gauge.id, &day).await?;
    let j = judge_count(&past, density as f64, moisture as f64, t);
    let c = db::instruments::insert_count(
        &mut tx,
        &StandardCount {
            id: 0,
            instrument_id: gauge.id,
            project_id: input.project_id,
            counted_on: day,
            density_count: density,
            moisture_count: moisture,
            outcome: j.outcome.code().to_string(),
            density_mean: j.density_mean,
            moisture_mean: j.moisture_mean,
            density_deviation_pct: j.density_deviation_pct,
            moisture_deviation_pct: j.moisture_deviation_pct,
            density_tolerance_pct: t.density_pct,
            moisture_tolerance_pct: t.moisture_pct,
            created_at: now.clone(),
            created_by: actor.name.clone(),
        },
    )
    .await?;
    audit_row(
        &mut tx,
        actor,
        "standard_count",
        c.id,
        Some(c.project_id),
        json!(c),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(c)
}

/// Refuses a count on a day the gauge is not assigned to the project.
async fn require_assigned(
    pool: &Pool,
    gauge: &db::instruments::Instrument,
    project_id: i64,
    day: &str,
) -> Result<()> {
    let assigned = db::instruments::assignments(pool, Some(gauge.id), None)
        .await?
        .iter()
        .any(|a| a.project_id == project_id && a.covers(day));
    if assigned {
        return Ok(());
    }
    Err(AppError::invalid(
        "project_id",
        format!(
            "gauge {} is not assigned to project {project_id} on {day}",
            gauge.serial
        ),
    ))
}

/// The counts a new one is judged against: since the calibration in force on its day
/// (the baseline begins there), up to that day.
async fn baseline(tx: &mut db::Tx<'_>, gauge_id: i64, day: &str) -> Result<Vec<PastCount>> {
    let since = db::instruments::latest_calibration_in(tx, gauge_id, day)
        .await?
        .map(|c| c.done_on)
        .unwrap_or_default();
    Ok(db::instruments::counts_in(tx, gauge_id)
        .await?
        .into_iter()
        .filter(|c| c.counted_on.as_str() >= since.as_str() && c.counted_on.as_str() <= day)
        .filter_map(|c| {
            Some(PastCount {
                density: c.density_count as f64,
                moisture: c.moisture_count as f64,
                outcome: CountOutcome::parse_code(&c.outcome)?,
            })
        })
        .collect())
}

/// Sets a project's standard-count tolerances.
pub async fn set_tolerances(
    pool: &Pool,
    project_id: i64,
    input: &TolerancesInput,
    actor: &Actor,
) -> Result<CountTolerances> {
    crate::ledger::setup::require_project(pool, project_id).await?;
    // 0.1–10 % spans any edition's tolerance (common practice).
    let d = number("density_pct", input.density_pct, 0.1, 10.0, "%")?;
    let m = number("moisture_pct", input.moisture_pct, 0.1, 10.0, "%")?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    db::instruments::set_tolerances(&mut tx, project_id, d, m, &actor.name, &now).await?;
    audit_row(
        &mut tx,
        actor,
        "instrument_tolerances",
        project_id,
        Some(project_id),
        json!({"density_pct": d, "moisture_pct": m}),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(CountTolerances {
        density_pct: d,
        moisture_pct: m,
    })
}

/// Sets whether a clause records tests from an instrument out of check (marked) or refuses them.
pub async fn set_policy(
    pool: &Pool,
    clause: &db::clauses::Clause,
    input: &PolicyInput,
    actor: &Actor,
) -> Result<()> {
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    db::instruments::set_policy(
        &mut tx,
        clause.id,
        input.record_out_of_check,
        &actor.name,
        &now,
    )
    .await?;
    audit_row(
        &mut tx,
        actor,
        "clause_instrument_policy",
        clause.id,
        Some(clause.project_id),
        json!({"record_out_of_check": input.record_out_of_check}),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(())
}
