//! Spec clauses: a clause body checked term by term (each refusal names its field) and
//! stored with its audit row; a stored clause read back as the reduction's rule.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::moisture_terms::{self, MoistureTermsInput};
use super::setup::{audit_insert, unique};
use super::validate::{code, number, optional_text};
use crate::clock;
use crate::db::{self, Pool};
use crate::domain::{ClauseEffort, MoistureMode, Rule};
use crate::error::{AppError, Result};
use crate::reduction;
use crate::reduction::acceptance::{AcceptanceRule, MoistureJudgement};
use crate::reduction::lab::EffortPreset;
use crate::reduction::rounding::{Rounding, RoundingMethod};

/// Body of a new spec clause.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClauseInput {
    pub code: String,
    #[serde(default)]
    pub title: String,
    pub rc_min_pct: f64,
    /// Points allowed below OMC ("points_of_omc" windows only).
    pub moisture_below_pct: Option<f64>,
    /// Points allowed above OMC ("points_of_omc" windows only).
    pub moisture_above_pct: Option<f64>,
    /// How the moisture window is written: "points_of_omc" (default), "percent_of_omc"
    /// (w / OMC × 100 within low…high) or "absolute" (w within low…high).
    pub moisture_basis: Option<String>,
    /// Lower bound of a percent-of-OMC or absolute window, percent.
    pub moisture_low_pct: Option<f64>,
    /// Upper bound of a percent-of-OMC or absolute window, percent.
    pub moisture_high_pct: Option<f64>,
    /// Greatest air voids allowed, percent (none: air voids are not judged).
    pub max_air_voids_pct: Option<f64>,
    pub effort: String,
    pub rule: String,
    pub allowance_pct: Option<f64>,
    pub min_pwl_pct: Option<f64>,
    pub area_per_test_m2: Option<f64>,
    pub length_per_test_m: Option<f64>,
    #[serde(deserialize_with = "crate::ledger::validate::whole::i64")]
    pub min_tests_per_lot: i64,
    pub oversize_limit_pct: Option<f64>,
    /// "per_test" (default, under every rule) or "pwl" (quality-index clauses only).
    pub moisture_judgement: Option<String>,
    /// Least moisture percent within limits under "pwl".
    pub moisture_min_pwl_pct: Option<f64>,
    /// Relative compaction above this is flagged implausible (default 103 %, common practice).
    pub rc_plausible_max_pct: Option<f64>,
    /// "astm_e29" (default) or "absolute".
    pub rounding: Option<String>,
    /// Decimals the contract writes its limits with (default 1, as in "95.0 %").
    pub limit_decimals: Option<i64>,
    /// Sieve the oversize is retained on, mm: 4.75 (default) or 19; sets the default coarse limit.
    pub oversize_sieve_mm: Option<f64>,
    /// Coarse water content assumed when a test gives none, percent (none: tests must give it).
    pub coarse_water_default_pct: Option<f64>,
}

/// Reads a clause's stored rule back as the reduction's rule; a stored rule without its
/// parameter is an error, never a default.
pub fn clause_rule(c: &db::clauses::Clause) -> anyhow::Result<AcceptanceRule> {
    c.rule
        .with(c.allowance_pct, c.min_pwl_pct)
        .map_err(|(field, message)| {
            anyhow::anyhow!("clause {} ({}): {field}: {message}", c.code, c.id)
        })
}

/// Reads a clause's stored moisture judgement back as the reduction's.
pub fn clause_moisture(c: &db::clauses::Clause) -> MoistureJudgement {
    match (c.moisture_judgement, c.moisture_min_pwl_pct) {
        (MoistureMode::Pwl, Some(min_pwl_pct)) => {
            MoistureJudgement::PercentWithinLimits { min_pwl_pct }
        }
        _ => MoistureJudgement::PerTest,
    }
}

/// Creates a spec clause in a project.
pub async fn create_clause(
    pool: &Pool,
    project_id: i64,
    input: &ClauseInput,
    actor: &Actor,
) -> Result<db::clauses::Clause> {
    super::setup::require_project(pool, project_id).await?;
    let clause = clause_record(project_id, input)?;
    let mut tx = db::begin_write(pool).await?;
    let c = db::clauses::insert(&mut tx, &clause)
        .await
        .map_err(unique("code", &format!("clause {}", clause.code)))?;
    audit_insert(
        &mut tx,
        actor,
        "clause",
        c.id,
        project_id,
        json!(c),
        &c.created_at,
    )
    .await?;
    tx.commit().await?;
    Ok(c)
}

/// The clause a body describes, every term checked (nothing is written here).
fn clause_record(project_id: i64, input: &ClauseInput) -> Result<db::clauses::Clause> {
    let effort = clause_effort(&input.effort)?;
    let (rule, allowance_pct, min_pwl_pct) = rule_terms(input)?;
    let verdict = verdict_terms(input, rule)?;
    let moisture = moisture_terms::check(&MoistureTermsInput {
        basis: input.moisture_basis.clone(),
        below_pct: input.moisture_below_pct,
        above_pct: input.moisture_above_pct,
        low_pct: input.moisture_low_pct,
        high_pct: input.moisture_high_pct,
        max_air_voids_pct: input.max_air_voids_pct,
    })?;
    let oversize = oversize_terms(input)?;
    Ok(db::clauses::Clause {
        id: 0,
        project_id,
        code: code("code", &input.code)?,
        title: optional_text("title", &input.title, 200)?,
        rc_min_pct: number("rc_min_pct", input.rc_min_pct, 50.0, 110.0, "%")?,
        moisture_below_pct: moisture.below_pct,
        moisture_above_pct: moisture.above_pct,
        effort,
        rule,
        allowance_pct,
        min_pwl_pct,
        area_per_test_m2: positive("area_per_test_m2", input.area_per_test_m2, 1.0e7, "m²")?,
        length_per_test_m: positive("length_per_test_m", input.length_per_test_m, 1.0e6, "m")?,
        min_tests_per_lot: number(
            "min_tests_per_lot",
            input.min_tests_per_lot as f64,
            1.0,
            1000.0,
            "tests",
        )? as i64,
        oversize_limit_pct: oversize.limit_pct,
        created_at: clock::now(),
        moisture_judgement: verdict.moisture_judgement,
        moisture_min_pwl_pct: verdict.moisture_min_pwl_pct,
        rc_plausible_max_pct: verdict.rc_plausible_max_pct,
        rounding: verdict.rounding,
        limit_decimals: verdict.limit_decimals,
        oversize_sieve_mm: oversize.sieve_mm,
        coarse_water_default_pct: oversize.coarse_water_default_pct,
        moisture_basis: moisture.basis,
        moisture_low_pct: moisture.low_pct,
        moisture_high_pct: moisture.high_pct,
        max_air_voids_pct: moisture.max_air_voids_pct,
    })
}

/// An optional positive quantity (frequency terms), checked when given.
fn positive(field: &str, v: Option<f64>, max: f64, unit: &str) -> Result<Option<f64>> {
    v.map(|x| number(field, x, 0.001, max, unit)).transpose()
}

/// The effort a clause names: a preset, custom or any.
fn clause_effort(effort: &str) -> Result<ClauseEffort> {
    ClauseEffort::parse_code(effort).ok_or_else(|| {
        let presets: Vec<&str> = EffortPreset::ALL.iter().map(|p| p.code()).collect();
        AppError::invalid(
            "effort",
            format!(
                "unknown effort '{}'; use one of {}, custom or any",
                effort.trim(),
                presets.join(", ")
            ),
        )
    })
}

/// The acceptance rule with its one parameter (the other must be absent from the record).
fn rule_terms(input: &ClauseInput) -> Result<(Rule, Option<f64>, Option<f64>)> {
    let rule = input.rule.parse::<Rule>().map_err(|_| {
        AppError::invalid(
            "rule",
            format!(
                "unknown rule '{}'; use every_test, mean_and_min or quality_index",
                input.rule
            ),
        )
    })?;
    Ok(match rule {
        Rule::EveryTest => (rule, None, None),
        Rule::MeanAndMin => {
            let a = input.allowance_pct.ok_or_else(|| {
                AppError::invalid("allowance_pct", "is required for the mean_and_min rule")
            })?;
            (
                rule,
                Some(number("allowance_pct", a, 0.0, 20.0, "%")?),
                None,
            )
        }
        Rule::QualityIndex => {
            let p = input.min_pwl_pct.ok_or_else(|| {
                AppError::invalid("min_pwl_pct", "is required for the quality_index rule")
            })?;
            (rule, None, Some(number("min_pwl_pct", p, 1.0, 100.0, "%")?))
        }
    })
}

/// The oversize terms: the sieve, the coarse limit (by default the sieve's) and the assumed
/// coarse water content.
struct OversizeTerms {
    sieve_mm: f64,
    limit_pct: f64,
    coarse_water_default_pct: Option<f64>,
}

fn oversize_terms(input: &ClauseInput) -> Result<OversizeTerms> {
    let sieve_mm = input.oversize_sieve_mm.unwrap_or(4.75);
    let sieve_limit = reduction::oversize::limit_for_sieve(sieve_mm).ok_or_else(|| {
        AppError::invalid(
            "oversize_sieve_mm",
            format!("{sieve_mm} mm is not an oversize sieve of ASTM D4718; use 4.75 or 19"),
        )
    })?;
    Ok(OversizeTerms {
        sieve_mm,
        limit_pct: number(
            "oversize_limit_pct",
            input.oversize_limit_pct.unwrap_or(sieve_limit),
            0.0,
            70.0,
            "%",
        )?,
        coarse_water_default_pct: input
            .coarse_water_default_pct
            .map(|w| number("coarse_water_default_pct", w, 0.0, 20.0, "%"))
            .transpose()?,
    })
}

/// How a clause's verdicts are reached beyond its limits: the moisture judgement, the
/// plausible RC ceiling and the comparison convention.
struct VerdictTerms {
    moisture_judgement: MoistureMode,
    moisture_min_pwl_pct: Option<f64>,
    rc_plausible_max_pct: f64,
    rounding: RoundingMethod,
    limit_decimals: i64,
}

/// Checks the verdict terms of a clause body: moisture judgement, plausible RC, rounding.
fn verdict_terms(input: &ClauseInput, rule: Rule) -> Result<VerdictTerms> {
    // The limits these terms are checked against must be usable first.
    number("rc_min_pct", input.rc_min_pct, 50.0, 110.0, "%")?;
    let (moisture_judgement, moisture_min_pwl_pct) = moisture_judgement_terms(input, rule)?;
    let rc_plausible_max_pct = plausible_rc_max(input)?;
    let (rounding, limit_decimals) = rounding_terms(input)?;
    Ok(VerdictTerms {
        moisture_judgement,
        moisture_min_pwl_pct,
        rc_plausible_max_pct,
        rounding,
        limit_decimals,
    })
}

/// Per test (default, under every rule) or a moisture PWL (quality-index clauses only).
fn moisture_judgement_terms(
    input: &ClauseInput,
    rule: Rule,
) -> Result<(MoistureMode, Option<f64>)> {
    let given = input.moisture_judgement.as_deref().unwrap_or("per_test");
    let mode = MoistureMode::parse_code(given.trim()).ok_or_else(|| {
        AppError::invalid(
            "moisture_judgement",
            format!(
                "unknown moisture judgement '{}'; use per_test or pwl",
                given.trim()
            ),
        )
    })?;
    match mode {
        MoistureMode::PerTest => {
            if input.moisture_min_pwl_pct.is_some() {
                return Err(AppError::invalid(
                    "moisture_min_pwl_pct",
                    "applies only with moisture_judgement \"pwl\"",
                ));
            }
            Ok((mode, None))
        }
        MoistureMode::Pwl => {
            if rule != Rule::QualityIndex {
                return Err(AppError::invalid(
                    "moisture_judgement",
                    "a moisture percent within limits needs a random sample: use it with the quality_index rule, or per_test",
                ));
            }
            let p = input.moisture_min_pwl_pct.ok_or_else(|| {
                AppError::invalid(
                    "moisture_min_pwl_pct",
                    "is required when moisture_judgement is \"pwl\"",
                )
            })?;
            Ok((
                mode,
                Some(number("moisture_min_pwl_pct", p, 1.0, 100.0, "%")?),
            ))
        }
    }
}

/// The RC above which a test is flagged implausible: above the minimum, 103 % by default.
fn plausible_rc_max(input: &ClauseInput) -> Result<f64> {
    let rc_max = number(
        "rc_plausible_max_pct",
        input
            .rc_plausible_max_pct
            .unwrap_or(reduction::plausibility::DEFAULT_RC_PLAUSIBLE_MAX_PCT),
        90.0,
        150.0,
        "%",
    )?;
    if rc_max <= input.rc_min_pct {
        return Err(AppError::invalid(
            "rc_plausible_max_pct",
            format!("{rc_max} % is not above the {} % minimum", input.rc_min_pct),
        ));
    }
    Ok(rc_max)
}

/// The comparison method and the decimals the limits are written with; every limit given
/// must be written to those decimals.
fn rounding_terms(input: &ClauseInput) -> Result<(RoundingMethod, i64)> {
    let given = input.rounding.as_deref().unwrap_or("astm_e29");
    let method = RoundingMethod::parse_code(given).ok_or_else(|| {
        AppError::invalid(
            "rounding",
            format!(
                "unknown rounding '{}'; use astm_e29 or absolute",
                given.trim()
            ),
        )
    })?;
    let decimals = number(
        "limit_decimals",
        input.limit_decimals.unwrap_or(1) as f64,
        0.0,
        3.0,
        "decimals",
    )? as i64;
    check_written_precision(input, decimals)?;
    Ok((method, decimals))
}

/// Refuses a limit with more decimals than the clause says its limits are written with.
fn check_written_precision(input: &ClauseInput, decimals: i64) -> Result<()> {
    let convention = Rounding {
        method: RoundingMethod::AstmE29,
        decimals: decimals as u32,
    };
    for (field, v) in [
        ("rc_min_pct", Some(input.rc_min_pct)),
        ("moisture_below_pct", input.moisture_below_pct),
        ("moisture_above_pct", input.moisture_above_pct),
        ("moisture_low_pct", input.moisture_low_pct),
        ("moisture_high_pct", input.moisture_high_pct),
        ("max_air_voids_pct", input.max_air_voids_pct),
        ("allowance_pct", input.allowance_pct),
    ] {
        if let Some(v) = v.filter(|v| v.is_finite())
            && !convention.is_written_precision(v)
        {
            return Err(AppError::invalid(
                field,
                format!(
                    "{v} has more decimals than the clause writes its limits with ({decimals}); give limit_decimals to match the contract"
                ),
            ));
        }
    }
    Ok(())
}
