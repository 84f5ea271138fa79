//! Material offsets of a nuclear gauge: computed from paired results, stored with an
//! effective date, and applied to the gauge's readings from that date on — to tests on
//! lots still taking tests (open or rejected), never to submitted or accepted lots —
//! with the raw reading kept.

use serde::Deserialize;
use serde_json::json;

use super::check::{apply_offset, material_offset};
use super::{audit_row, require_instrument};
use crate::clock;
use crate::db::{self, Pool, audit, instruments::GaugeOffset};
use crate::error::{AppError, Result};
use crate::ledger::Actor;
use crate::ledger::validate::date;
use crate::reduction::field::FieldReadings;
use crate::reduction::instruments::{GaugeMode, OffsetError, OffsetPair, offsets_from_pairs};

/// Body of a new set of offsets.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OffsetInput {
    pub source_id: i64,
    pub mode: GaugeMode,
    pub effective_on: String,
    pub pairs: Vec<OffsetPair>,
}

/// What a new offset did.
#[derive(Debug, Clone, serde::Serialize)]
pub struct OffsetResult {
    pub offset: GaugeOffset,
    /// Numbers of stored tests re-reduced with it.
    pub applied_to: Vec<String>,
}

/// Computes and stores a gauge's offsets, and applies them to its stored readings from
/// the effective date on (lots open or rejected only), each change audited.
pub async fn create_offset(
    pool: &Pool,
    instrument_id: i64,
    input: &OffsetInput,
    actor: &Actor,
) -> Result<OffsetResult> {
    let gauge = require_instrument(pool, instrument_id).await?;
    if gauge.kind != crate::reduction::instruments::InstrumentKind::NuclearGauge {
        return Err(AppError::invalid(
            "instrument_id",
            format!("{} is not a nuclear gauge", gauge.serial),
        ));
    }
    let source = db::sources::get(pool, input.source_id)
        .await?
        .ok_or_else(|| {
            AppError::not_found(
                "source_id",
                format!("source {} does not exist", input.source_id),
            )
        })?;
    let effective_on = date("effective_on", &input.effective_on)?;
    let o = offsets_from_pairs(&input.pairs).map_err(|e| match &e {
        OffsetError::TooFewPairs { .. } => AppError::invalid("pairs", e.to_string()),
        OffsetError::BadValue { index, what, .. } => {
            AppError::invalid(format!("pairs[{index}].{what}"), e.to_string())
        }
    })?;
    let mut known = db::instruments::offsets(pool, Some(gauge.id), None).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let offset = db::instruments::insert_offset(
        &mut tx,
        &GaugeOffset {
            id: 0,
            instrument_id: gauge.id,
            source_id: source.id,
            mode: input.mode.code().to_string(),
            effective_on: effective_on.clone(),
            density_offset_kg_m3: o.density_kg_m3,
            moisture_offset_pct: o.moisture_pct,
            pairs: i64::try_from(input.pairs.len()).unwrap_or(i64::MAX),
            pairs_json: serde_json::to_string(&input.pairs).map_err(anyhow::Error::from)?,
            created_at: now.clone(),
            created_by: actor.name.clone(),
        },
    )
    .await?;
    audit_row(
        &mut tx,
        actor,
        "gauge_offset",
        offset.id,
        Some(source.project_id),
        json!(offset),
        &now,
    )
    .await?;
    known.push(offset.clone());
    known.retain(|k| k.source_id == offset.source_id && k.mode == offset.mode);
    let applied_to =
        apply_to_stored_tests(&mut tx, &gauge.serial, &offset, &known, actor, &now).await?;
    tx.commit().await?;
    Ok(OffsetResult { offset, applied_to })
}

/// Re-reduces the gauge's stored readings that the new offset governs: same mode, and no
/// later offset in force on the test's day. Each change is audited; returns the numbers.
async fn apply_to_stored_tests(
    tx: &mut db::Tx<'_>,
    serial: &str,
    offset: &GaugeOffset,
    known: &[GaugeOffset],
    actor: &Actor,
    now: &str,
) -> Result<Vec<String>> {
    let material = material_offset(offset)?;
    let mut applied_to = Vec::new();
    for mut t in
        db::instruments::tests_for_offset(tx, serial, offset.source_id, &offset.effective_on)
            .await?
    {
        let Ok(readings) = serde_json::from_str::<FieldReadings>(&t.readings_json) else {
            continue;
        };
        let FieldReadings::Nuclear { probe_depth_mm, .. } = &readings else {
            continue;
        };
        let day = clock::date_of(&t.tested_at);
        // A later offset already in force on the test's day keeps its test.
        let in_force = crate::reduction::instruments::in_force_on(known, &day).map(|k| k.id);
        if GaugeMode::of_probe_depth(*probe_depth_mm).code() != offset.mode
            || in_force != Some(offset.id)
        {
            continue;
        }
        let before = json!({"wet_density_kg_m3": t.wet_density_kg_m3, "water_content_pct": t.water_content_pct,
            "dry_density_kg_m3": t.dry_density_kg_m3, "density_offset_kg_m3": t.density_offset_kg_m3,
            "moisture_offset_pct": t.moisture_offset_pct});
        apply_offset(&mut t, &readings, &material)?;
        db::instruments::set_offset_reduction(tx, &t).await?;
        audit::record(
            tx,
            &audit::Change {
                actor: &actor.name,
                action: "apply_offset",
                entity: "field_test",
                entity_id: Some(t.id),
                project_id: Some(t.project_id),
                before: Some(before),
                after: Some(json!({"wet_density_kg_m3": t.wet_density_kg_m3, "water_content_pct": t.water_content_pct,
                    "dry_density_kg_m3": t.dry_density_kg_m3, "density_offset_kg_m3": t.density_offset_kg_m3,
                    "moisture_offset_pct": t.moisture_offset_pct, "gauge_offset_id": offset.id})),
                origin: &actor.origin,
            },
            now,
        )
        .await?;
        applied_to.push(t.number.clone());
    }
    Ok(applied_to)
}
