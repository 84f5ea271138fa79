//! Lab compaction curves: a lab test body's specimens reduced, its curve fitted and checked
//! for the concerns that need a QC manager's approval, stored with its audit row; an earlier
//! curve of the source superseded in the same transaction.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::setup::{audit_insert, unique};
use super::validate::{code, date, quantity};
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::domain::{CurveStatus, LabEffort};
use crate::error::{AppError, Result};
use crate::reduction::curve::{CurveFit, CurvePoint, fit_curve};
use crate::reduction::lab::{Effort, EffortPreset, reduce_specimen};
use crate::reduction::{self, SpecificGravity, WaterContent};

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

/// Resolves the effort named in a lab test body: a preset's, or the custom effort given.
pub fn resolve_effort(effort: &str, custom: Option<&CustomEffortInput>) -> Result<Effort> {
    resolve_lab_effort(effort, custom).map(|(_, e)| e)
}

/// The effort of a lab test body as stored (the preset, or the custom effort by its name)
/// and as the reduction computes with it.
fn resolve_lab_effort(
    effort: &str,
    custom: Option<&CustomEffortInput>,
) -> Result<(LabEffort, Effort)> {
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
        .map(|e| (LabEffort::Custom(e.name.clone()), e))
        .map_err(|e| AppError::invalid(format!("custom_effort.{}", e.field()), e.to_string()));
    }
    EffortPreset::parse_code(effort)
        .map(|p| (LabEffort::Preset(p), p.effort()))
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
    let record = lab_test_record(&source, input, actor)?;
    if let Some(old) = input.supersedes_lab_test_id {
        check_superseded(pool, old, &source, input).await?;
        check_superseding_curve(pool, old, &record).await?;
    }
    let mut tx = db::begin_write(pool).await?;
    if let Some(old) = input.supersedes_lab_test_id {
        supersede_in(&mut tx, old, &record, input).await?;
    }
    let t = db::lab_tests::insert(&mut tx, &record)
        .await
        .map_err(unique("code", &format!("lab test {}", record.code)))?;
    if let Some(old) = input.supersedes_lab_test_id {
        audit_supersede(&mut tx, old, &t, source.project_id, input, actor).await?;
    }
    audit_insert(
        &mut tx,
        actor,
        "lab_test",
        t.id,
        source.project_id,
        json!(t),
        &record.created_at,
    )
    .await?;
    tx.commit().await?;
    Ok(t)
}

/// The lab test a body describes: its specimens reduced and its curve fitted (nothing is
/// written here).
fn lab_test_record(
    source: &db::sources::Source,
    input: &LabTestInput,
    actor: &Actor,
) -> Result<db::lab_tests::LabTest> {
    let (stored_effort, effort) =
        resolve_lab_effort(input.effort.trim(), input.custom_effort.as_ref())?;
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
    let now = clock::now();
    Ok(db::lab_tests::LabTest {
        id: 0,
        source_id: source.id,
        code: code("code", &input.code)?,
        tested_on: date("tested_on", &input.tested_on)?,
        effort: stored_effort,
        effort_energy_kj_m3: effort.energy_kj_m3(),
        specific_gravity: gs.value(),
        points_json: serde_json::to_string(&input.points).map_err(anyhow::Error::from)?,
        max_dry_density_kg_m3: fit.max_dry_density.kg_m3(),
        optimum_water_content_pct: fit.optimum_water_content.pct(),
        fit_method: fit.method.code(),
        warnings_json: warnings_json(&fit),
        reduction_version: reduction::REDUCTION_VERSION.to_string(),
        status: CurveStatus::Active,
        superseded_reason: None,
        superseded_at: None,
        created_at: now,
        created_by: actor.name.clone(),
        approval,
        approval_concerns_json: concerns_json,
        approval_reason: None,
        approved_by: None,
        approved_at: None,
        quality_checked: 1,
    })
}

/// The fit's warnings as stored (`[{code, message}]`).
fn warnings_json(fit: &CurveFit) -> String {
    let warnings: Vec<_> = fit
        .warnings
        .iter()
        .map(|w| json!({"code": w.code, "message": w.message}))
        .collect();
    serde_json::Value::Array(warnings).to_string()
}

/// The curve to supersede must be the same source's, and a reason must be given.
async fn check_superseded(
    pool: &Pool,
    old: i64,
    source: &db::sources::Source,
    input: &LabTestInput,
) -> Result<()> {
    let prior = db::lab_tests::get(pool, old).await?;
    if prior.as_ref().is_none_or(|p| p.source_id != source.id) {
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
    Ok(())
}

/// Marks the old curve superseded inside the new curve's transaction (a conflict when
/// another request superseded it first).
async fn supersede_in(
    tx: &mut db::Tx<'_>,
    old: i64,
    record: &db::lab_tests::LabTest,
    input: &LabTestInput,
) -> Result<()> {
    if !db::lab_tests::supersede(tx, old, input.supersede_reason.trim(), &record.created_at).await?
    {
        return Err(AppError::conflict(
            "supersedes_lab_test_id",
            format!("lab test {old} is already superseded"),
            vec![],
        ));
    }
    Ok(())
}

/// The supersede's audit row. No lot moves: an accepted lot keeps the curve it was accepted
/// against, and an open one moves only when a QC manager re-points it (`ledger::repoint`).
async fn audit_supersede(
    tx: &mut db::Tx<'_>,
    old: i64,
    new: &db::lab_tests::LabTest,
    project_id: i64,
    input: &LabTestInput,
    actor: &Actor,
) -> Result<()> {
    audit::record(
        tx,
        &audit::Change {
            actor: &actor.name,
            action: "supersede",
            entity: "lab_test",
            entity_id: Some(old),
            project_id: Some(project_id),
            before: Some(json!({"status": "active"})),
            after: Some(
                json!({"status": "superseded", "replaced_by": new.id, "lots_moved": 0,
                               "reason": input.supersede_reason.trim()}),
            ),
            origin: &actor.origin,
        },
        &new.created_at,
    )
    .await?;
    Ok(())
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
