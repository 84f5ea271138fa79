//! Creating the frame that tests are judged in: projects, clauses, sources, lab curves, layers and lots.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::validate::{code, date, number, optional_text, quantity, text};
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::domain::CurveStatus;
use crate::domain::Rule;
use crate::error::{AppError, Result};
use crate::reduction::acceptance::{AcceptanceRule, MoistureJudgement};
use crate::reduction::curve::{CurvePoint, fit_curve};
use crate::reduction::lab::{Effort, EffortPreset, reduce_specimen};
use crate::reduction::{self, ChainageStyle, SpecificGravity, UnitSystem, WaterContent};

/// Body of a new project.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProjectInput {
    pub code: String,
    pub name: String,
    #[serde(default)]
    pub contract: String,
    #[serde(default)]
    pub client: String,
    #[serde(default)]
    pub contractor: String,
    #[serde(default = "default_units")]
    pub unit_system: String,
    #[serde(default = "default_chainage_style")]
    pub chainage_style: String,
}

fn default_units() -> String {
    "si".into()
}
fn default_chainage_style() -> String {
    "km_metre".into()
}

async fn audit_insert(
    tx: &mut db::Tx<'_>,
    actor: &Actor,
    entity: &str,
    id: i64,
    project_id: i64,
    after: serde_json::Value,
    now: &str,
) -> Result<()> {
    audit::record(
        tx,
        &audit::Change {
            actor: &actor.name,
            action: "create",
            entity,
            entity_id: Some(id),
            project_id: Some(project_id),
            before: None,
            after: Some(after),
            origin: &actor.origin,
        },
        now,
    )
    .await?;
    Ok(())
}

fn unique(field: &str, what: &str) -> impl FnOnce(sqlx::Error) -> AppError {
    let field = field.to_string();
    let what = what.to_string();
    move |e| {
        if db::is_unique_violation(&e) {
            AppError::conflict(field, format!("{what} already exists"), vec![])
        } else {
            e.into()
        }
    }
}

/// Creates a project.
pub async fn create_project(
    pool: &Pool,
    input: &ProjectInput,
    actor: &Actor,
) -> Result<db::projects::Project> {
    let unit = UnitSystem::parse_code(&input.unit_system)
        .ok_or_else(|| AppError::invalid("unit_system", "must be \"si\" or \"us\""))?;
    let style = ChainageStyle::parse_code(&input.chainage_style).ok_or_else(|| {
        AppError::invalid("chainage_style", "must be \"km_metre\" or \"feet_station\"")
    })?;
    let new = db::projects::NewProject {
        code: code("code", &input.code)?.to_ascii_uppercase(),
        name: text("name", &input.name, 200)?,
        contract: optional_text("contract", &input.contract, 200)?,
        client: optional_text("client", &input.client, 200)?,
        contractor: optional_text("contractor", &input.contractor, 200)?,
        unit_system: unit.code().to_string(),
        chainage_style: style.code().to_string(),
    };
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let p = db::projects::insert(&mut tx, &new, &now)
        .await
        .map_err(unique("code", &format!("a project with code {}", new.code)))?;
    audit_insert(&mut tx, actor, "project", p.id, p.id, json!(p), &now).await?;
    tx.commit().await?;
    Ok(p)
}

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
    match (c.moisture_judgement.as_str(), c.moisture_min_pwl_pct) {
        ("pwl", Some(min_pwl_pct)) => MoistureJudgement::PercentWithinLimits { min_pwl_pct },
        _ => MoistureJudgement::PerTest,
    }
}

/// Checks the verdict terms of a clause body: moisture judgement, plausible RC, rounding.
fn verdict_terms(input: &ClauseInput) -> Result<(String, Option<f64>, f64, String, i64)> {
    // The limits these terms are checked against must be usable first.
    number("rc_min_pct", input.rc_min_pct, 50.0, 110.0, "%")?;
    let judgement = input
        .moisture_judgement
        .as_deref()
        .unwrap_or("per_test")
        .trim();
    let min_pwl = match judgement {
        "per_test" => {
            if input.moisture_min_pwl_pct.is_some() {
                return Err(AppError::invalid(
                    "moisture_min_pwl_pct",
                    "applies only with moisture_judgement \"pwl\"",
                ));
            }
            None
        }
        "pwl" => {
            if input.rule.parse::<Rule>() != Ok(Rule::QualityIndex) {
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
            Some(number("moisture_min_pwl_pct", p, 1.0, 100.0, "%")?)
        }
        other => {
            return Err(AppError::invalid(
                "moisture_judgement",
                format!("unknown moisture judgement '{other}'; use per_test or pwl"),
            ));
        }
    };
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
    let rounding = input.rounding.as_deref().unwrap_or("astm_e29").trim();
    if rounding != "astm_e29" && rounding != "absolute" {
        return Err(AppError::invalid(
            "rounding",
            format!("unknown rounding '{rounding}'; use astm_e29 or absolute"),
        ));
    }
    let decimals = number(
        "limit_decimals",
        input.limit_decimals.unwrap_or(1) as f64,
        0.0,
        3.0,
        "decimals",
    )? as i64;
    let convention = crate::reduction::rounding::Rounding {
        method: crate::reduction::rounding::RoundingMethod::AstmE29,
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
    Ok((
        judgement.to_string(),
        min_pwl,
        rc_max,
        rounding.to_string(),
        decimals,
    ))
}

/// Creates a spec clause in a project.
pub async fn create_clause(
    pool: &Pool,
    project_id: i64,
    input: &ClauseInput,
    actor: &Actor,
) -> Result<db::clauses::Clause> {
    require_project(pool, project_id).await?;
    let effort = input.effort.trim();
    if effort != "any" && effort != "custom" && EffortPreset::parse_code(effort).is_none() {
        let known: Vec<&str> = EffortPreset::ALL.iter().map(|p| p.code()).collect();
        return Err(AppError::invalid(
            "effort",
            format!(
                "unknown effort '{effort}'; use one of {}, custom or any",
                known.join(", ")
            ),
        ));
    }
    let rule = input.rule.parse::<Rule>().map_err(|_| {
        AppError::invalid(
            "rule",
            format!(
                "unknown rule '{}'; use every_test, mean_and_min or quality_index",
                input.rule
            ),
        )
    })?;
    let (allowance, min_pwl) = match rule {
        Rule::EveryTest => (None, None),
        Rule::MeanAndMin => {
            let a = input.allowance_pct.ok_or_else(|| {
                AppError::invalid("allowance_pct", "is required for the mean_and_min rule")
            })?;
            (Some(number("allowance_pct", a, 0.0, 20.0, "%")?), None)
        }
        Rule::QualityIndex => {
            let p = input.min_pwl_pct.ok_or_else(|| {
                AppError::invalid("min_pwl_pct", "is required for the quality_index rule")
            })?;
            (None, Some(number("min_pwl_pct", p, 1.0, 100.0, "%")?))
        }
    };
    let (moisture_judgement, moisture_min_pwl_pct, rc_plausible_max_pct, rounding, limit_decimals) =
        verdict_terms(input)?;
    let moisture = super::moisture_terms::check(&super::moisture_terms::MoistureTermsInput {
        basis: input.moisture_basis.clone(),
        below_pct: input.moisture_below_pct,
        above_pct: input.moisture_above_pct,
        low_pct: input.moisture_low_pct,
        high_pct: input.moisture_high_pct,
        max_air_voids_pct: input.max_air_voids_pct,
    })?;
    let sieve = input.oversize_sieve_mm.unwrap_or(4.75);
    let sieve_limit = reduction::oversize::limit_for_sieve(sieve).ok_or_else(|| {
        AppError::invalid(
            "oversize_sieve_mm",
            format!("{sieve} mm is not an oversize sieve of ASTM D4718; use 4.75 or 19"),
        )
    })?;
    let coarse_water_default_pct = input
        .coarse_water_default_pct
        .map(|w| number("coarse_water_default_pct", w, 0.0, 20.0, "%"))
        .transpose()?;
    let positive = |field: &str, v: Option<f64>, max: f64, unit: &str| -> Result<Option<f64>> {
        v.map(|x| number(field, x, 0.001, max, unit)).transpose()
    };
    let clause = db::clauses::Clause {
        id: 0,
        project_id,
        code: code("code", &input.code)?,
        title: optional_text("title", &input.title, 200)?,
        rc_min_pct: number("rc_min_pct", input.rc_min_pct, 50.0, 110.0, "%")?,
        moisture_below_pct: moisture.below_pct,
        moisture_above_pct: moisture.above_pct,
        effort: effort.to_string(),
        rule,
        allowance_pct: allowance,
        min_pwl_pct: min_pwl,
        area_per_test_m2: positive("area_per_test_m2", input.area_per_test_m2, 1.0e7, "m²")?,
        length_per_test_m: positive("length_per_test_m", input.length_per_test_m, 1.0e6, "m")?,
        min_tests_per_lot: number(
            "min_tests_per_lot",
            input.min_tests_per_lot as f64,
            1.0,
            1000.0,
            "tests",
        )? as i64,
        oversize_limit_pct: number(
            "oversize_limit_pct",
            input.oversize_limit_pct.unwrap_or(sieve_limit),
            0.0,
            70.0,
            "%",
        )?,
        created_at: clock::now(),
        moisture_judgement,
        moisture_min_pwl_pct,
        rc_plausible_max_pct,
        rounding,
        limit_decimals,
        oversize_sieve_mm: sieve,
        coarse_water_default_pct,
        moisture_basis: moisture.basis.to_string(),
        moisture_low_pct: moisture.low_pct,
        moisture_high_pct: moisture.high_pct,
        max_air_voids_pct: moisture.max_air_voids_pct,
    };
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

/// Body of a new borrow source.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SourceInput {
    pub code: String,
    pub name: String,
    #[serde(default)]
    pub description: String,
    #[serde(default)]
    pub uscs_class: String,
    #[serde(default)]
    pub aashto_class: String,
    pub gs_fines: f64,
    /// Bulk (oven-dry) specific gravity of the oversize particles (ASTM C127 / AASHTO T 85), used
    /// by the oversize correction — not the solids Gs of ASTM D854.
    pub gs_coarse: Option<f64>,
}

/// Creates a borrow source in a project.
pub async fn create_source(
    pool: &Pool,
    project_id: i64,
    input: &SourceInput,
    actor: &Actor,
) -> Result<db::sources::Source> {
    require_project(pool, project_id).await?;
    let gs = quantity("gs_fines", SpecificGravity::new(input.gs_fines))?;
    let gs_coarse = input
        .gs_coarse
        .map(|g| quantity("gs_coarse", SpecificGravity::new(g)).map(|g| g.value()))
        .transpose()?;
    let source = db::sources::Source {
        id: 0,
        project_id,
        code: code("code", &input.code)?,
        name: text("name", &input.name, 200)?,
        description: optional_text("description", &input.description, 2000)?,
        uscs_class: optional_text("uscs_class", &input.uscs_class, 20)?,
        aashto_class: optional_text("aashto_class", &input.aashto_class, 20)?,
        gs_fines: gs.value(),
        gs_coarse,
        created_at: clock::now(),
    };
    let mut tx = db::begin_write(pool).await?;
    let s = db::sources::insert(&mut tx, &source)
        .await
        .map_err(unique("code", &format!("source {}", source.code)))?;
    audit_insert(
        &mut tx,
        actor,
        "source",
        s.id,
        project_id,
        json!(s),
        &s.created_at,
    )
    .await?;
    tx.commit().await?;
    Ok(s)
}

/// One lab specimen as entered: either reduced values or the masses they come from.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct LabPointInput {
    pub water_content_pct: Option<f64>,
    pub dry_density_kg_m3: Option<f64>,
    pub mass_mold_and_soil_g: Option<f64>,
    pub mass_mold_g: Option<f64>,
    pub mold_volume_cm3: Option<f64>,
    pub mass_wet_g: Option<f64>,
    pub mass_dry_g: Option<f64>,
    pub mass_tare_g: Option<f64>,
    /// The registered mould's mark, or "nominal (effort)" when the effort's nominal
    /// volume stood in for a calibrated one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mould: Option<String>,
}

/// A custom compaction effort.
#[derive(Debug, Clone, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct CustomEffortInput {
    pub name: String,
    pub blows_per_layer: u32,
    pub layers: u32,
    pub rammer_mass_kg: f64,
    pub drop_m: f64,
    pub mold_volume_m3: f64,
}

/// Body of a new lab compaction test.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LabTestInput {
    pub code: String,
    pub tested_on: String,
    pub effort: String,
    pub custom_effort: Option<CustomEffortInput>,
    pub specific_gravity: Option<f64>,
    pub points: Vec<LabPointInput>,
    /// A lab test of the same source that this one replaces.
    pub supersedes_lab_test_id: Option<i64>,
    #[serde(default)]
    pub supersede_reason: String,
}

/// Reduces one entered lab point to (water content, dry density), naming `points[i].field` on error.
pub fn reduce_lab_point(i: usize, p: &LabPointInput) -> Result<CurvePoint> {
    let f = |name: &str| format!("points[{i}].{name}");
    let water = match (
        p.water_content_pct,
        p.mass_wet_g,
        p.mass_dry_g,
        p.mass_tare_g,
    ) {
        (Some(w), _, _, _) => quantity(&f("water_content_pct"), WaterContent::new(w))?,
        (None, Some(wet), Some(dry), Some(tare)) => {
            reduction::water::oven_water_content(wet, dry, tare)
                .map_err(|e| AppError::invalid(f(e.field()), e.to_string()))?
        }
        _ => {
            return Err(AppError::invalid(
                f("water_content_pct"),
                "give water_content_pct, or mass_wet_g, mass_dry_g and mass_tare_g",
            ));
        }
    };
    let dry = match (
        p.dry_density_kg_m3,
        p.mass_mold_and_soil_g,
        p.mass_mold_g,
        p.mold_volume_cm3,
    ) {
        (Some(d), _, _, _) => quantity(&f("dry_density_kg_m3"), reduction::Density::new(d))?,
        (None, Some(total), Some(mold), Some(vol)) => {
            reduce_specimen(total, mold, vol, water)
                .map_err(|e| AppError::invalid(f(e.field()), e.to_string()))?
                .dry_density
        }
        _ => {
            return Err(AppError::invalid(
                f("dry_density_kg_m3"),
                "give dry_density_kg_m3, or mass_mold_and_soil_g, mass_mold_g and mold_volume_cm3",
            ));
        }
    };
    Ok(CurvePoint {
        water_content_pct: water.pct(),
        dry_density_kg_m3: dry.kg_m3(),
    })
}

/// Resolves the effort named in a lab test body.
pub fn resolve_effort(effort: &str, custom: Option<&CustomEffortInput>) -> Result<Effort> {
    if effort == "custom" {
        let c = custom.ok_or_else(|| {
            AppError::invalid("custom_effort", "is required when effort is custom")
        })?;
        return Effort::custom(
            &c.name,
            c.blows_per_layer,
            c.layers,
            c.rammer_mass_kg,
            c.drop_m,
            c.mold_volume_m3,
        )
        .map_err(|e| AppError::invalid(format!("custom_effort.{}", e.field()), e.to_string()));
    }
    EffortPreset::parse_code(effort)
        .map(EffortPreset::effort)
        .ok_or_else(|| {
            let known: Vec<&str> = EffortPreset::ALL.iter().map(|p| p.code()).collect();
            AppError::invalid(
                "effort",
                format!(
                    "unknown effort '{effort}'; use one of {} or custom",
                    known.join(", ")
                ),
            )
        })
}

/// Creates a lab compaction test for a source, fitting its curve; may supersede an earlier one.
pub async fn create_lab_test(
    pool: &Pool,
    source_id: i64,
    input: &LabTestInput,
    actor: &Actor,
) -> Result<db::lab_tests::LabTest> {
    let source = db::sources::get(pool, source_id).await?.ok_or_else(|| {
        AppError::not_found("source_id", format!("source {source_id} does not exist"))
    })?;
    let effort = resolve_effort(input.effort.trim(), input.custom_effort.as_ref())?;
    let gs = quantity(
        "specific_gravity",
        SpecificGravity::new(input.specific_gravity.unwrap_or(source.gs_fines)),
    )?;
    let points = input
        .points
        .iter()
        .enumerate()
        .map(|(i, p)| reduce_lab_point(i, p))
        .collect::<Result<Vec<_>>>()?;
    let fit =
        fit_curve(&points, Some(gs)).map_err(|e| AppError::invalid("points", e.to_string()))?;
    let (approval, concerns_json) =
        super::reference::initial_approval(&reduction::curve_quality::concerns(&points, &fit));
    let warnings: Vec<_> = fit
        .warnings
        .iter()
        .map(|w| json!({"code": w.code, "message": w.message}))
        .collect();
    if let Some(old) = input.supersedes_lab_test_id {
        let prior = db::lab_tests::get(pool, old).await?;
        if prior.as_ref().is_none_or(|p| p.source_id != source_id) {
            return Err(AppError::invalid(
                "supersedes_lab_test_id",
                format!("lab test {old} is not a test of source {}", source.code),
            ));
        }
        if input.supersede_reason.trim().is_empty() {
            return Err(AppError::invalid(
                "supersede_reason",
                "is required when superseding a lab test",
            ));
        }
    }
    let now = clock::now();
    let record = db::lab_tests::LabTest {
        id: 0,
        source_id,
        code: code("code", &input.code)?,
        tested_on: date("tested_on", &input.tested_on)?,
        effort: if input.effort.trim() == "custom" {
            format!("custom: {}", effort.name)
        } else {
            input.effort.trim().to_string()
        },
        effort_energy_kj_m3: effort.energy_kj_m3(),
        specific_gravity: gs.value(),
        points_json: serde_json::to_string(&input.points).map_err(anyhow::Error::from)?,
        max_dry_density_kg_m3: fit.max_dry_density.kg_m3(),
        optimum_water_content_pct: fit.optimum_water_content.pct(),
        fit_method: fit.method.code(),
        warnings_json: serde_json::Value::Array(warnings).to_string(),
        reduction_version: reduction::REDUCTION_VERSION.to_string(),
        status: CurveStatus::Active,
        superseded_reason: None,
        superseded_at: None,
        created_at: now.clone(),
        created_by: actor.name.clone(),
        approval,
        approval_concerns_json: concerns_json,
        approval_reason: None,
        approved_by: None,
        approved_at: None,
        quality_checked: 1,
    };
    if let Some(old) = input.supersedes_lab_test_id {
        check_superseding_curve(pool, old, &record).await?;
    }
    let mut tx = db::begin_write(pool).await?;
    if let Some(old) = input.supersedes_lab_test_id
        && !db::lab_tests::supersede(&mut tx, old, input.supersede_reason.trim(), &now).await?
    {
        return Err(AppError::conflict(
            "supersedes_lab_test_id",
            format!("lab test {old} is already superseded"),
            vec![],
        ));
    }
    let t = db::lab_tests::insert(&mut tx, &record)
        .await
        .map_err(unique("code", &format!("lab test {}", record.code)))?;
    if let Some(old) = input.supersedes_lab_test_id {
        // No lot moves: an accepted lot keeps the curve it was accepted against, and an
        // open one moves only when a QC manager re-points it (`ledger::repoint`).
        audit::record(
            &mut tx,
            &audit::Change {
                actor: &actor.name,
                action: "supersede",
                entity: "lab_test",
                entity_id: Some(old),
                project_id: Some(source.project_id),
                before: Some(json!({"status": "active"})),
                after: Some(
                    json!({"status": "superseded", "replaced_by": t.id, "lots_moved": 0,
                                   "reason": input.supersede_reason.trim()}),
                ),
                origin: &actor.origin,
            },
            &now,
        )
        .await?;
    }
    audit_insert(
        &mut tx,
        actor,
        "lab_test",
        t.id,
        source.project_id,
        json!(t),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(t)
}

/// Refuses a superseding curve that cannot be the reference of every lot it would take over
/// (effort family, approval): the lots keep judging against the old curve.
async fn check_superseding_curve(
    pool: &Pool,
    old: i64,
    new: &db::lab_tests::LabTest,
) -> Result<()> {
    for (lot_code, clause_id) in db::lots::using_lab_test(pool, old).await? {
        let clause = db::clauses::get(pool, clause_id)
            .await?
            .ok_or_else(|| anyhow::anyhow!("lot {lot_code} refers to a missing clause"))?;
        super::reference::check_lot_reference(&clause, new).map_err(|e| {
            AppError::invalid(
                "lab_test_id",
                format!(
                    "the new curve cannot replace lab test {old} for lot {lot_code}: {}",
                    e.user_message()
                ),
            )
        })?;
    }
    Ok(())
}

/// Body of a new layer.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayerInput {
    pub zone: String,
    pub number: i64,
    pub thickness_mm: Option<f64>,
}

/// Creates a layer (and its zone when new).
pub async fn create_layer(
    pool: &Pool,
    project_id: i64,
    input: &LayerInput,
    actor: &Actor,
) -> Result<db::layers::Layer> {
    require_project(pool, project_id).await?;
    let zone = text("zone", &input.zone, 80)?;
    let number = number("number", input.number as f64, 1.0, 999.0, "")? as i64;
    let thickness = input
        .thickness_mm
        .map(|t| number_mm("thickness_mm", t))
        .transpose()?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let z = db::layers::zone_by_name_or_insert(&mut tx, project_id, &zone).await?;
    let id = db::layers::insert(&mut tx, project_id, z.id, number, thickness, &now)
        .await
        .map_err(unique("number", &format!("layer {number} of zone {zone}")))?;
    audit_insert(
        &mut tx,
        actor,
        "layer",
        id,
        project_id,
        json!({"zone": zone, "number": number, "thickness_mm": thickness}),
        &now,
    )
    .await?;
    tx.commit().await?;
    db::layers::get(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("layer {id} vanished after insert").into())
}

fn number_mm(field: &str, v: f64) -> Result<f64> {
    number(field, v, 10.0, 2000.0, "mm")
}

/// Body of a new lot.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LotInput {
    pub code: String,
    pub layer_id: i64,
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
    pub offset_left_m: f64,
    pub offset_right_m: f64,
    pub clause_id: i64,
    pub lab_test_id: i64,
}

/// Checks a lot's body against the project: its layer, clause and active lab curve,
/// its chainage and offsets. Nothing is written.
pub async fn check_lot(pool: &Pool, project_id: i64, input: &LotInput) -> Result<db::lots::NewLot> {
    require_project(pool, project_id).await?;
    let layer = db::layers::get(pool, input.layer_id).await?;
    if layer.as_ref().is_none_or(|l| l.project_id != project_id) {
        return Err(AppError::invalid(
            "layer_id",
            format!("layer {} is not a layer of this project", input.layer_id),
        ));
    }
    let clause = db::clauses::get(pool, input.clause_id).await?;
    if clause.as_ref().is_none_or(|c| c.project_id != project_id) {
        return Err(AppError::invalid(
            "clause_id",
            format!("clause {} is not a clause of this project", input.clause_id),
        ));
    }
    let lab = db::lab_tests::get(pool, input.lab_test_id)
        .await?
        .ok_or_else(|| {
            AppError::invalid(
                "lab_test_id",
                format!("lab test {} does not exist", input.lab_test_id),
            )
        })?;
    let source = db::sources::get(pool, lab.source_id)
        .await?
        .filter(|s| s.project_id == project_id)
        .ok_or_else(|| {
            AppError::invalid(
                "lab_test_id",
                "the lab test's source is not in this project",
            )
        })?;
    super::reference::check_lot_reference(
        clause
            .as_ref()
            .ok_or_else(|| anyhow::anyhow!("clause vanished"))?,
        &lab,
    )?;
    let from = quantity(
        "chainage_from_m",
        reduction::Chainage::new(input.chainage_from_m),
    )?;
    let to = quantity(
        "chainage_to_m",
        reduction::Chainage::new(input.chainage_to_m),
    )?;
    if to.metres() <= from.metres() {
        return Err(AppError::invalid(
            "chainage_to_m",
            "must be greater than chainage_from_m",
        ));
    }
    let left = quantity("offset_left_m", reduction::Offset::new(input.offset_left_m))?;
    let right = quantity(
        "offset_right_m",
        reduction::Offset::new(input.offset_right_m),
    )?;
    if right.metres() <= left.metres() {
        return Err(AppError::invalid(
            "offset_right_m",
            "must be greater than offset_left_m",
        ));
    }
    Ok(db::lots::NewLot {
        project_id,
        layer_id: input.layer_id,
        code: code("code", &input.code)?,
        chainage_from_m: from.metres(),
        chainage_to_m: to.metres(),
        offset_left_m: left.metres(),
        offset_right_m: right.metres(),
        clause_id: input.clause_id,
        source_id: source.id,
        lab_test_id: lab.id,
    })
}

/// Writes a checked lot with its audit row inside the caller's transaction.
pub async fn insert_lot(
    tx: &mut db::Tx<'_>,
    new: &db::lots::NewLot,
    actor: &Actor,
    now: &str,
) -> Result<i64> {
    let id = db::lots::insert(tx, new, &actor.name, now)
        .await
        .map_err(unique("code", &format!("lot {}", new.code)))?;
    audit_insert(
        tx,
        actor,
        "lot",
        id,
        new.project_id,
        json!({"code": new.code, "layer_id": new.layer_id, "chainage_from_m": new.chainage_from_m,
               "chainage_to_m": new.chainage_to_m, "offset_left_m": new.offset_left_m,
               "offset_right_m": new.offset_right_m, "clause_id": new.clause_id, "lab_test_id": new.lab_test_id}),
        now,
    )
    .await?;
    Ok(id)
}

/// Creates a lot on a layer, judged by a clause against an active lab curve.
pub async fn create_lot(
    pool: &Pool,
    project_id: i64,
    input: &LotInput,
    actor: &Actor,
) -> Result<db::lots::Lot> {
    let new = check_lot(pool, project_id, input).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let id = insert_lot(&mut tx, &new, actor, &now).await?;
    tx.commit().await?;
    db::lots::get(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lot {id} vanished after insert").into())
}

/// Fails with 404 naming `project_id` when the project does not exist.
pub async fn require_project(pool: &Pool, project_id: i64) -> Result<db::projects::Project> {
    db::projects::get(pool, project_id).await?.ok_or_else(|| {
        AppError::not_found("project_id", format!("project {project_id} does not exist"))
    })
}
