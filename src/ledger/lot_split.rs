//! A whole layer split into lots every N metres between two chainages, in one step.
//!
//! The plan is checked lot by lot exactly as a single lot is (layer, clause, active
//! curve, chainage), against the lots the layer already has, and then written in one
//! transaction: either every lot of the split exists afterwards or none does.

use serde::Deserialize;

use super::Actor;
use super::setup::{LotInput, check_lot, insert_lot};
use crate::clock;
use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use crate::reduction::split::split_range;

/// Body of a split: the stretch, the lot length, how lots are named, and what judges them.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SplitInput {
    pub layer_id: i64,
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
    pub every_m: f64,
    /// Lot codes are this prefix followed by a running number.
    pub code_prefix: String,
    #[serde(default = "one")]
    #[serde(deserialize_with = "crate::ledger::validate::whole::i64")]
    pub first_number: i64,
    pub offset_left_m: f64,
    pub offset_right_m: f64,
    pub clause_id: i64,
    pub lab_test_id: i64,
}

fn one() -> i64 {
    1
}

/// The lots a split would make, each checked; nothing is written.
pub async fn plan(
    pool: &Pool,
    project_id: i64,
    input: &SplitInput,
) -> Result<Vec<db::lots::NewLot>> {
    let pieces =
        split_range(input.chainage_from_m, input.chainage_to_m, input.every_m).map_err(|e| {
            let field = match e {
                crate::reduction::split::SplitError::Empty => "chainage_to_m",
                _ => "every_m",
            };
            AppError::invalid(field, e.to_string())
        })?;
    if !(0..=99_999).contains(&input.first_number) {
        return Err(AppError::invalid(
            "first_number",
            "must be between 0 and 99999",
        ));
    }
    let mut lots = Vec::with_capacity(pieces.len());
    for (i, (from, to)) in pieces.into_iter().enumerate() {
        let lot = LotInput {
            code: format!(
                "{}{}",
                input.code_prefix.trim(),
                input.first_number + i as i64
            ),
            layer_id: input.layer_id,
            chainage_from_m: from,
            chainage_to_m: to,
            offset_left_m: input.offset_left_m,
            offset_right_m: input.offset_right_m,
            clause_id: input.clause_id,
            lab_test_id: input.lab_test_id,
        };
        lots.push(
            check_lot(pool, project_id, &lot)
                .await
                .map_err(|e| rename_code(e, "code_prefix"))?,
        );
    }
    refuse_overlap(pool, project_id, input, &lots).await?;
    Ok(lots)
}

/// A lot code problem belongs to the prefix that made the code.
fn rename_code(e: AppError, to: &str) -> AppError {
    if e.field() == "code" {
        AppError::invalid(to, e.user_message())
    } else {
        e
    }
}

/// Refuses a split that runs over a lot the layer already has.
async fn refuse_overlap(
    pool: &Pool,
    project_id: i64,
    input: &SplitInput,
    lots: &[db::lots::NewLot],
) -> Result<()> {
    let existing = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            layer_id: Some(input.layer_id),
            limit: 100_000,
            ..Default::default()
        },
    )
    .await?;
    let (from, to) = (
        lots.first()
            .map_or(input.chainage_from_m, |l| l.chainage_from_m),
        lots.last().map_or(input.chainage_to_m, |l| l.chainage_to_m),
    );
    if let Some(hit) = existing
        .iter()
        .find(|l| l.chainage_from_m < to && l.chainage_to_m > from)
    {
        return Err(AppError::invalid(
            "chainage_from_m",
            format!(
                "the stretch runs over lot {} ({:.1}–{:.1} m) of this layer",
                hit.code, hit.chainage_from_m, hit.chainage_to_m
            ),
        ));
    }
    Ok(())
}

/// Makes every lot of the split in one transaction; returns their ids in chainage order.
pub async fn create(
    pool: &Pool,
    project_id: i64,
    input: &SplitInput,
    actor: &Actor,
) -> Result<Vec<i64>> {
    let lots = plan(pool, project_id, input).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let mut ids = Vec::with_capacity(lots.len());
    for lot in &lots {
        ids.push(
            insert_lot(&mut tx, lot, actor, &now)
                .await
                .map_err(|e| rename_code(e, "code_prefix"))?,
        );
    }
    tx.commit().await?;
    Ok(ids)
}
