//! The life of a lot under review: submit, reject, accept, and the certificate that acceptance issues.

use serde_json::json;
use sha2::{Digest, Sha256};

use super::Actor;
use super::accounts::audit_replacing;
use super::certificate_doc;
use super::lot_report::{self, LotReport};
use super::validate::optional_text;
use crate::clock;
use crate::db::{self, Pool};
use crate::domain::LotState::{self, Accepted, Rejected, Submitted};
use crate::error::{AppError, Result};

/// Moves the lot from `from` to `to` inside `tx`, with its audit row; refused when
/// another request changed the lot's state meanwhile.
async fn move_lot(
    tx: &mut db::Tx<'_>,
    report: &LotReport,
    (from, to): (LotState, LotState),
    done: &str,
    comment: &str,
    actor: &Actor,
    now: &str,
) -> Result<()> {
    let moved =
        db::lots::transition(tx, report.lot.id, from, to, &actor.name, comment, now).await?;
    if !moved {
        return Err(refused(
            report,
            done,
            vec!["the lot changed state meanwhile".into()],
        ));
    }
    audit_replacing(
        tx,
        actor,
        "transition",
        ("lot", report.lot.id, Some(report.lot.project_id)),
        Some(json!({"state": from})),
        json!({"state": to, "comment": comment, "verdict_accepted": report.verdict.accepted}),
        now,
    )
    .await
}

fn refused(report: &LotReport, action: &str, reasons: Vec<String>) -> AppError {
    AppError::conflict(
        "state",
        format!(
            "lot {} cannot be {action} while it is {}",
            report.lot.code, report.lot.state
        ),
        reasons,
    )
}

/// Submits an open or rejected lot for review; refused with reasons while tests are owed or failing.
pub async fn submit(pool: &Pool, lot_id: i64, comment: &str, actor: &Actor) -> Result<LotReport> {
    let comment = optional_text("comment", comment, 1000)?;
    let report = lot_report::build(pool, lot_id).await?;
    let from = report.lot.state;
    if !from.may_become(Submitted) {
        return Err(refused(
            &report,
            "submitted",
            vec!["only open or rejected lots can be submitted".into()],
        ));
    }
    if !report.submit_blockers.is_empty() {
        return Err(AppError::conflict(
            "state",
            format!("lot {} is not ready to submit", report.lot.code),
            report.submit_blockers.clone(),
        ));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let states = (from, Submitted);
    move_lot(&mut tx, &report, states, "submitted", &comment, actor, &now).await?;
    tx.commit().await?;
    lot_report::build(pool, lot_id).await
}

/// Rejects a submitted lot; a reason is required.
pub async fn reject(pool: &Pool, lot_id: i64, comment: &str, actor: &Actor) -> Result<LotReport> {
    let comment = optional_text("comment", comment, 1000)?;
    let report = lot_report::build(pool, lot_id).await?;
    if !report.lot.state.may_become(Rejected) {
        return Err(refused(
            &report,
            "rejected",
            vec!["only submitted lots can be rejected".into()],
        ));
    }
    if comment.is_empty() {
        return Err(AppError::invalid("comment", "a rejection needs a reason"));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let states = (Submitted, Rejected);
    move_lot(&mut tx, &report, states, "rejected", &comment, actor, &now).await?;
    tx.commit().await?;
    lot_report::build(pool, lot_id).await
}

/// Accepts a submitted lot and issues its certificate; on an accepted lot whose record
/// changed since, issues the next revision.
pub async fn accept(pool: &Pool, lot_id: i64, comment: &str, actor: &Actor) -> Result<LotReport> {
    let comment = optional_text("comment", comment, 1000)?;
    let report = lot_report::build(pool, lot_id).await?;
    let reissue = report.lot.state == Accepted;
    if reissue && report.certificate_current {
        return Err(AppError::conflict(
            "state",
            format!(
                "lot {} is accepted and its certificate is current",
                report.lot.code
            ),
            vec!["a new revision is issued only after the lot's record changes".into()],
        ));
    }
    if !reissue && !report.lot.state.may_become(Accepted) {
        return Err(refused(
            &report,
            "accepted",
            vec!["only submitted lots can be accepted".into()],
        ));
    }
    // A reissue passes every check a submission does; so does a first acceptance.
    if !report.submit_blockers.is_empty() {
        return Err(AppError::conflict(
            "state",
            format!("lot {} cannot be accepted", report.lot.code),
            report.submit_blockers.clone(),
        ));
    }
    if !report.verdict.accepted {
        let mut reasons = report.verdict.reasons.clone();
        reasons.insert(
            0,
            format!("the lot does not meet clause {}", report.clause.code),
        );
        return Err(AppError::conflict(
            "state",
            format!("lot {} cannot be accepted", report.lot.code),
            reasons,
        ));
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if !reissue {
        let states = (Submitted, Accepted);
        move_lot(&mut tx, &report, states, "accepted", &comment, actor, &now).await?;
    }
    issue_certificate(&mut tx, &report, &comment, actor, &now).await?;
    tx.commit().await?;
    crate::metrics::certificate_issued();
    lot_report::build(pool, lot_id).await
}

/// A short code printed on every page: 12 characters from an unambiguous alphabet.
fn verification_code(seed: &str) -> String {
    const ALPHABET: &[u8] = b"23456789ABCDEFGHJKLMNPQRSTUVWXYZ";
    let digest = Sha256::digest(seed.as_bytes());
    let chars: Vec<char> = digest
        .iter()
        .take(12)
        .map(|b| ALPHABET[usize::from(*b) % ALPHABET.len()] as char)
        .collect();
    chars
        .chunks(4)
        .map(|c| c.iter().collect::<String>())
        .collect::<Vec<_>>()
        .join("-")
}

/// Issues the lot's next certificate (a first one, or the next revision of the current one)
/// inside `tx`: numbered, rendered, hashed, stored and audited.
async fn issue_certificate(
    tx: &mut db::Tx<'_>,
    report: &LotReport,
    comment: &str,
    actor: &Actor,
    now: &str,
) -> Result<()> {
    // Certificate numbers are per project, unique and without gaps: take the project lock first.
    db::lock_project(tx, report.lot.project_id).await?;
    let previous = db::certificates::current_for_lot_tx(tx, report.lot.id).await?;
    let (sequence, revision) = next_number(tx, report).await?;
    let number = format!("{}-EL-{:04}", report.project.code, sequence);
    let code = verification_code(&format!("{number}|{revision}|{}|{now}", report.fingerprint));
    let transitions = db::lots::transitions_tx(tx, report.lot.id).await?;
    let submitted = transitions.iter().rev().find(|t| t.to_state == Submitted);
    let doc = certificate_doc::build(
        report,
        certificate_doc::Issue {
            number: &number,
            revision,
            supersedes: previous
                .as_ref()
                .map(|p| format!("{} rev {}", p.number, p.revision)),
            verification_code: &code,
            issued_at: now,
            submitted_by: submitted.map(|t| t.actor.as_str()).unwrap_or(""),
            submitted_at: submitted.map(|t| t.at.as_str()).unwrap_or(""),
            accepted_by: &actor.name,
            comment,
        },
    );
    let pdf = crate::pdf::render_certificate(&doc)
        .map_err(|e| anyhow::anyhow!("rendering certificate: {e}"))?;
    if let Some(p) = &previous {
        db::certificates::supersede(tx, p.id, now).await?;
    }
    let issued = Issued {
        sequence,
        revision,
        number: &number,
        code: &code,
        pdf: &pdf,
    };
    store_certificate(tx, report, &issued, previous.as_ref(), actor, now).await
}

/// The certificate's sequence and revision: the lot's own sequence with the next revision
/// once it has one, else the project's next sequence at revision 1.
async fn next_number(tx: &mut db::Tx<'_>, report: &LotReport) -> Result<(i64, i64)> {
    // Reads go through the transaction: a second pooled connection per request could
    // exhaust the pool while writers wait on the project lock.
    let all_for_lot = db::certificates::for_lot_tx(tx, report.lot.id).await?;
    Ok(match all_for_lot.first() {
        Some(latest) => (latest.sequence, latest.revision + 1),
        None => (
            db::certificates::next_sequence(tx, report.lot.project_id).await?,
            1,
        ),
    })
}

/// A rendered certificate about to be stored.
struct Issued<'a> {
    sequence: i64,
    revision: i64,
    number: &'a str,
    code: &'a str,
    pdf: &'a [u8],
}

/// Stores the certificate with its hash, and its audit row (naming the one it supersedes).
async fn store_certificate(
    tx: &mut db::Tx<'_>,
    report: &LotReport,
    c: &Issued<'_>,
    previous: Option<&db::certificates::Certificate>,
    actor: &Actor,
    now: &str,
) -> Result<()> {
    let sha = hex::encode(Sha256::digest(c.pdf));
    let id = db::certificates::insert(
        tx,
        &db::certificates::NewCertificate {
            project_id: report.lot.project_id,
            lot_id: report.lot.id,
            sequence: c.sequence,
            revision: c.revision,
            number: c.number,
            verification_code: c.code,
            sha256: &sha,
            record_fingerprint: &report.fingerprint,
            pdf: c.pdf,
            issued_at: now,
            issued_by: &actor.name,
        },
    )
    .await?;
    audit_replacing(
        tx,
        actor,
        "issue",
        ("certificate", id, Some(report.lot.project_id)),
        previous.map(|p| json!({"supersedes": p.id, "revision": p.revision})),
        json!({"number": c.number, "revision": c.revision, "sha256": sha, "verification_code": c.code,
               "lot_id": report.lot.id}),
        now,
    )
    .await
}
