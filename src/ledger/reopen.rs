//! Reopening an accepted lot: the only way to change a lot after sign-off.
//!
//! An accepted lot takes no test, retest or void. To correct it, a client engineer
//! reopens it with a reason: its certificate is withdrawn (verification says so and
//! why), the lot is open again, and the next acceptance issues the next revision.

use serde_json::json;

use super::Actor;
use super::lot_report::{self, LotReport};
use super::validate::text;
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::domain::LotState;
use crate::error::{AppError, Result};

/// Reopens an accepted lot and withdraws its certificate; a reason is required.
pub async fn reopen(pool: &Pool, lot_id: i64, reason: &str, actor: &Actor) -> Result<LotReport> {
    let reason = text("reason", reason, 1000)?;
    let report = lot_report::build(pool, lot_id).await?;
    let lot = &report.lot;
    if !lot.state.may_become(LotState::Open) {
        return Err(AppError::conflict(
            "state",
            format!(
                "lot {} cannot be reopened while it is {}",
                lot.code, lot.state
            ),
            vec!["only accepted lots are reopened".into()],
        ));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if !db::lots::transition(
        &mut tx,
        lot_id,
        LotState::Accepted,
        LotState::Open,
        &actor.name,
        &reason,
        &now,
    )
    .await?
    {
        return Err(AppError::conflict(
            "state",
            format!("lot {} changed state meanwhile", lot.code),
            vec![],
        ));
    }
    let withdrawn =
        db::certificates::withdraw_for_lot(&mut tx, lot_id, &actor.name, &reason, &now).await?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "transition",
            entity: "lot",
            entity_id: Some(lot_id),
            project_id: Some(lot.project_id),
            before: Some(json!({"state": LotState::Accepted})),
            after: Some(json!({"state": LotState::Open, "comment": reason, "reopened": true})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    if let Some(cert) = withdrawn {
        audit::record(
            &mut tx,
            &audit::Change {
                actor: &actor.name,
                action: "withdraw",
                entity: "certificate",
                entity_id: Some(cert),
                project_id: Some(lot.project_id),
                before: None,
                after: Some(json!({"lot_id": lot_id, "reason": reason})),
                origin: &actor.origin,
            },
            &now,
        )
        .await?;
    }
    tx.commit().await?;
    lot_report::build(pool, lot_id).await
}
