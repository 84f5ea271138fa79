//! Re-sampling a quality-index lot after rework: the lot is judged on a new random
//! sample, the first sample staying on record (common practice for statistical
//! specifications: a sample mixing originals and retests is no longer random).

use serde_json::json;

use super::Actor;
use super::field::{require_lot, require_lot_takes_tests};
use super::lot_report::{self, LotReport};
use super::validate::text;
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::error::{AppError, Result};

/// Starts a new random sample of a failed quality-index lot after rework (audited). The
/// tests taken so far become an earlier sample: on record and on the certificate, out of
/// the statistics and the frequency count.
pub async fn resample(pool: &Pool, lot_id: i64, reason: &str, actor: &Actor) -> Result<LotReport> {
    let reason = text("reason", reason, 1000)?;
    let lot = require_lot(pool, lot_id).await?;
    require_lot_takes_tests(&lot)?;
    let report = lot_report::build(pool, lot_id).await?;
    let refuse = |why: String| Err(AppError::conflict("lot_id", why, vec![]));
    if report.clause.rule != crate::domain::Rule::QualityIndex {
        return refuse(format!(
            "lot {} is judged by the {} rule: record retests of failed tests instead of a new sample",
            lot.code, report.clause.rule
        ));
    }
    if report.verdict.n == 0 {
        return refuse(format!(
            "lot {} has no counted tests in sample {}: nothing to re-sample",
            lot.code, lot.sample
        ));
    }
    if report.verdict.accepted {
        return refuse(format!(
            "lot {} meets clause {} on sample {}: a new sample is taken only after a failed lot is reworked",
            lot.code, report.clause.code, lot.sample
        ));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let after = db::lots::last_test_id(&mut tx, lot_id).await?;
    if !db::lots::start_sample(&mut tx, lot_id, lot.sample, after).await? {
        return refuse(format!("lot {} was re-sampled meanwhile", lot.code));
    }
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "resample",
            entity: "lot",
            entity_id: Some(lot_id),
            project_id: Some(lot.project_id),
            before: Some(json!({"sample": lot.sample, "pwl": report.verdict.pwl})),
            after: Some(json!({"sample": lot.sample + 1, "earlier_tests_up_to_id": after, "reason": reason})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    lot_report::build(pool, lot_id).await
}
