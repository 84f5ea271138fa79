//! Moving an open lot to another lab curve: the only way a lot's reference changes.
//!
//! Superseding a curve moves no lot. An accepted lot keeps the curve it was accepted
//! against for good; an open (or rejected) lot moves only when a QC manager re-points
//! it here, with a reason, and the move is audited with the curve before and after.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::field::require_lot;
use super::lot_report::{self, LotReport};
use super::validate::text;
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::domain::CurveStatus;
use crate::error::{AppError, Result};

/// Body of `POST /api/v1/lots/{id}/reference`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RepointInput {
    /// The lab test (curve) the lot is judged against from now on.
    pub lab_test_id: i64,
    /// Why (kept in the lot's history).
    pub reason: String,
}

/// Points an open or rejected lot at another active curve of its own source.
pub async fn repoint(
    pool: &Pool,
    lot_id: i64,
    input: &RepointInput,
    actor: &Actor,
) -> Result<LotReport> {
    let reason = text("reason", &input.reason, 500)?;
    let lot = require_lot(pool, lot_id).await?;
    if !lot.state.takes_tests() {
        return Err(AppError::conflict(
            "lot_id",
            format!(
                "lot {} is {}; only an open or rejected lot moves to another curve",
                lot.code, lot.state
            ),
            vec!["an accepted lot keeps the curve it was accepted against; reopen it first".into()],
        ));
    }
    let lab = db::lab_tests::get(pool, input.lab_test_id)
        .await?
        .filter(|l| l.source_id == lot.source_id)
        .ok_or_else(|| {
            AppError::invalid(
                "lab_test_id",
                format!(
                    "lab test {} is not a curve of this lot's source",
                    input.lab_test_id
                ),
            )
        })?;
    if lab.status != CurveStatus::Active {
        return Err(AppError::invalid(
            "lab_test_id",
            format!(
                "lab test {} is superseded; choose an active curve",
                lab.code
            ),
        ));
    }
    // The same rule as a new lot's reference: the clause's effort family, an approved curve.
    let clause = db::clauses::get(pool, lot.clause_id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lot {} has no clause", lot.code))?;
    super::reference::check_lot_reference(&clause, &lab)?;
    if lab.id == lot.lab_test_id {
        return Err(AppError::invalid(
            "lab_test_id",
            format!("lot {} is already judged against {}", lot.code, lab.code),
        ));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if !db::lots::set_lab_test(&mut tx, lot_id, lot.lab_test_id, lab.id).await? {
        return Err(AppError::conflict(
            "lot_id",
            format!("lot {} changed meanwhile; try again", lot.code),
            vec![],
        ));
    }
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "repoint",
            entity: "lot",
            entity_id: Some(lot_id),
            project_id: Some(lot.project_id),
            before: Some(json!({"lab_test_id": lot.lab_test_id})),
            after: Some(
                json!({"lab_test_id": lab.id, "lab_test_code": lab.code, "reason": reason}),
            ),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    lot_report::build(pool, lot_id).await
}
