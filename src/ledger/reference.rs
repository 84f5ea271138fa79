//! Which lab curve may be a lot's reference, the QC manager's approval of a
//! curve with quality concerns, and the start-up re-check of curves stored
//! before the quality rules.
//!
//! Every path that points a lot at a curve — lot creation, superseding a curve
//! (which moves its lots), re-pointing a lot — calls [`check_lot_reference`].

use serde_json::json;

use super::Actor;
use super::setup::{LabPointInput, reduce_lab_point};
use super::validate::text;
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::error::{AppError, Result};
use crate::reduction::SpecificGravity;
use crate::reduction::curve::fit_curve;
use crate::reduction::curve_quality::{CurveConcern, concerns};
use crate::reduction::lab::EffortFamily;

pub use crate::domain::Approval;

/// The effort family of a stored curve.
pub fn lab_family(lab: &db::lab_tests::LabTest) -> EffortFamily {
    lab.effort.family(lab.effort_energy_kj_m3)
}

/// The stored concern messages of a curve.
pub fn concern_messages(lab: &db::lab_tests::LabTest) -> Vec<String> {
    serde_json::from_str::<Vec<serde_json::Value>>(&lab.approval_concerns_json)
        .unwrap_or_default()
        .iter()
        .filter_map(|c| c["message"].as_str().map(str::to_string))
        .collect()
}

/// May `lab` be the reference of a lot judged by `clause`? The one rule for lot creation,
/// superseding a curve and re-pointing a lot: the curve is active, of the clause's effort
/// family, and approved when it needs approval. Refusals name `lab_test_id`.
pub fn check_lot_reference(
    clause: &db::clauses::Clause,
    lab: &db::lab_tests::LabTest,
) -> Result<()> {
    if lab.status != crate::domain::CurveStatus::Active {
        return Err(AppError::invalid(
            "lab_test_id",
            format!(
                "lab test {} is superseded; choose its replacement",
                lab.code
            ),
        ));
    }
    let curve = lab_family(lab);
    if let Some(wanted) = clause.effort.family()
        && wanted != curve
    {
        return Err(AppError::invalid(
            "lab_test_id",
            format!(
                "lab test {} is a {} curve ({}), but clause {} names {} ({}): a lot must be judged against a curve of its clause's effort",
                lab.code,
                curve.label(),
                lab.effort,
                clause.code,
                wanted.label(),
                clause.effort
            ),
        ));
    }
    if lab.approval == Approval::NeedsApproval {
        return Err(AppError::invalid(
            "lab_test_id",
            format!(
                "lab test {} needs a QC manager's approval before it can be a reference: {}",
                lab.code,
                concern_messages(lab).join("; ")
            ),
        ));
    }
    Ok(())
}

/// The approval a freshly fitted curve is stored with, and its concerns as JSON.
pub fn initial_approval(found: &[CurveConcern]) -> (Approval, String) {
    let approval = if found.is_empty() {
        Approval::NotNeeded
    } else {
        Approval::NeedsApproval
    };
    (approval, json!(found).to_string())
}

/// Approves a curve that needs approval, with a written reason (audited).
pub async fn approve(
    pool: &Pool,
    lab_test_id: i64,
    reason: &str,
    actor: &Actor,
) -> Result<db::lab_tests::LabTest> {
    let reason = text("reason", reason, 1000)?;
    let lab = require_lab(pool, lab_test_id).await?;
    let source = db::sources::get(pool, lab.source_id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lab test {lab_test_id} has no source"))?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if !db::lab_tests::approve(&mut tx, lab_test_id, &reason, &actor.name, &now).await? {
        return Err(AppError::conflict(
            "lab_test_id",
            format!(
                "lab test {} is {}; only a curve awaiting approval can be approved",
                lab.code,
                lab.approval.label()
            ),
            vec![],
        ));
    }
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "approve",
            entity: "lab_test",
            entity_id: Some(lab_test_id),
            project_id: Some(source.project_id),
            before: Some(json!({"approval": lab.approval})),
            after: Some(
                json!({"approval": "approved", "reason": reason, "approved_by": actor.name,
                               "concerns": concern_messages(&lab)}),
            ),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    require_lab(pool, lab_test_id).await
}

/// Loads a lab test or fails with 404 naming `lab_test_id`.
pub async fn require_lab(pool: &Pool, id: i64) -> Result<db::lab_tests::LabTest> {
    db::lab_tests::get(pool, id)
        .await?
        .ok_or_else(|| AppError::not_found("lab_test_id", format!("lab test {id} does not exist")))
}

/// The concerns of a stored curve, from its points as entered (a curve the fit now
/// refuses, e.g. with fewer than four distinct water contents, is one concern).
fn stored_concerns(lab: &db::lab_tests::LabTest) -> Vec<CurveConcern> {
    let refused = |message: String| {
        vec![CurveConcern {
            code: "refit_refused",
            message,
        }]
    };
    let inputs: Vec<LabPointInput> = match serde_json::from_str(&lab.points_json) {
        Ok(p) => p,
        Err(e) => return refused(format!("the stored points cannot be read: {e}")),
    };
    let points = match inputs
        .iter()
        .enumerate()
        .map(|(i, p)| reduce_lab_point(i, p))
        .collect::<Result<Vec<_>>>()
    {
        Ok(p) => p,
        Err(e) => {
            return refused(format!(
                "a stored point no longer reduces: {}",
                e.user_message()
            ));
        }
    };
    match fit_curve(&points, SpecificGravity::new(lab.specific_gravity).ok()) {
        Ok(fit) => concerns(&points, &fit),
        Err(e) => refused(format!("the curve no longer passes the fit rules: {e}")),
    }
}

/// What the start-up re-check changed.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RecheckReport {
    /// Curves checked.
    pub checked: usize,
    /// Codes of curves now awaiting approval.
    pub needing_approval: Vec<String>,
}

/// Re-checks every curve stored before the quality rules (migration 0004 leaves them
/// unchecked): a curve with a concern becomes *needs approval* (an approved one stays
/// approved). Lots keep their reference, and accepted lots their certificate; an open lot
/// on such a curve cannot be submitted until it is approved. Each change is audited.
pub async fn recheck_curves(pool: &Pool) -> Result<RecheckReport> {
    let mut report = RecheckReport::default();
    for lab in db::lab_tests::unchecked(pool).await? {
        let found = stored_concerns(&lab);
        let before = lab.approval;
        let after = match (before, found.is_empty()) {
            (Approval::Approved, _) => Approval::Approved,
            (_, true) => Approval::NotNeeded,
            (_, false) => Approval::NeedsApproval,
        };
        let project_id = db::sources::get(pool, lab.source_id)
            .await?
            .map(|s| s.project_id);
        let now = clock::now();
        let mut tx = db::begin_write(pool).await?;
        db::lab_tests::mark_checked(&mut tx, lab.id, after.code(), &json!(found).to_string())
            .await?;
        audit::record(
            &mut tx,
            &audit::Change {
                actor: "liftledger (start-up curve check)",
                action: "quality_check",
                entity: "lab_test",
                entity_id: Some(lab.id),
                project_id,
                before: Some(json!({"approval": before.code()})),
                after: Some(json!({"approval": after.code(), "concerns": found})),
                origin: "cli",
            },
            &now,
        )
        .await?;
        tx.commit().await?;
        report.checked += 1;
        if after == Approval::NeedsApproval {
            report.needing_approval.push(lab.code.clone());
        }
    }
    if report.checked > 0 {
        tracing::info!(
            checked = report.checked,
            needing_approval = report.needing_approval.len(),
            curves = %report.needing_approval.join(", "),
            "curve quality re-check: {} stored curve(s) checked, {} now await approval ({}); lots keep their reference and accepted lots their certificate",
            report.checked,
            report.needing_approval.len(),
            report.needing_approval.join(", ")
        );
    }
    Ok(report)
}
