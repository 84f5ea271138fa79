//! Each lot's judged summary kept as a row, so no view judges a whole project.
//!
//! **What marks a lot.** Every change that can alter a lot's verdict marks the lot in its
//! own transaction, by a trigger (migration 0012), so no write path can forget it:
//! - a test of the lot added, changed (a void, a retest link, a re-point, an instrument or
//!   offset correction) or removed;
//! - the lot itself added or changed (its state: submitted, accepted, rejected, reopened;
//!   its curve, its random sample);
//! - a certificate of the lot issued or withdrawn;
//! - the lot's test plan added or replaced;
//! - a one-point check on the lot's source added, changed or removed;
//! - an edit of the lot's clause, source or lab curve (a curve's approval included).
//!
//! **Settling.** [`settle`] judges the marked lots again with the one lot judgement
//! (`lot_report`), stores their summaries, clears exactly the marks it read and moves the
//! project's revision, all in one transaction. Views settle before they read, and a
//! background task ([`spawn_settler`]) settles marked projects between views, so a view
//! right after a change judges only the lots changed since. A write itself judges
//! nothing and touches no row other writers share: the summary of a lot that takes 32
//! tests at once is written once, not 32 times, and no writer waits on another's commit.
//!
//! **Whole passes** happen only on an explicit [`rejudge`] (after a reduction-version
//! change), or when a settling finds most of a project marked (after the upgrade that
//! introduced the summaries).

use std::collections::{BTreeMap, HashMap, HashSet};
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};

use super::lot_report::{self, LotReport, Verdict};
use super::overview::{self, ProjectRows};
use crate::db::{self, Pool, lot_summaries::Mark, lot_summaries::SummaryRow};
use crate::domain::DisplayState;
use crate::error::{AppError, Result};
use crate::reduction::REDUCTION_VERSION;

/// Marked lots judged one by one up to this many; beyond, one streamed pass over the
/// project's tests judges them (reading every test once is then cheaper).
const ONE_BY_ONE: usize = 64;

/// The judged part of a lot's report, as its summary row keeps it (everything but the
/// rows it was judged from, which readers take from the store, and the test lines).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct StoredJudgement {
    pub tests_entered: usize,
    pub verdict: Verdict,
    pub length_m: f64,
    pub width_m: f64,
    pub area_m2: f64,
    pub tests_required: u32,
    pub tests_owed: u32,
    pub failing_without_retest: Vec<String>,
    pub display_state: DisplayState,
    pub submit_blockers: Vec<String>,
    pub certificate_current: bool,
    pub fingerprint: String,
}

impl StoredJudgement {
    fn of(r: &LotReport) -> Self {
        Self {
            tests_entered: r.tests_entered,
            verdict: r.verdict.clone(),
            length_m: r.length_m,
            width_m: r.width_m,
            area_m2: r.area_m2,
            tests_required: r.tests_required,
            tests_owed: r.tests_owed,
            failing_without_retest: r.failing_without_retest.clone(),
            display_state: r.display_state,
            submit_blockers: r.submit_blockers.clone(),
            certificate_current: r.certificate_current,
            fingerprint: r.fingerprint.clone(),
        }
    }
}

/// The summary row of a judged lot.
fn row_of(r: &LotReport) -> Result<SummaryRow> {
    let judged = StoredJudgement::of(r);
    Ok(SummaryRow {
        lot_id: r.lot.id,
        project_id: r.lot.project_id,
        reduction_version: REDUCTION_VERSION.to_string(),
        display_state: r.display_state.code().to_string(),
        accepted: i64::from(r.verdict.accepted),
        tests_entered: i64::try_from(r.tests_entered).unwrap_or(i64::MAX),
        tests_owed: i64::from(r.tests_owed),
        judged_json: serde_json::to_string(&judged).map_err(anyhow::Error::from)?,
        test_results: serde_json::to_string(&results_of(r)).map_err(anyhow::Error::from)?,
        judged_at: crate::clock::now(),
    })
}

/// The lot's test ids by result code, as the test list's result filter reads them.
fn results_of(r: &LotReport) -> BTreeMap<&'static str, Vec<i64>> {
    let mut out: BTreeMap<&'static str, Vec<i64>> = BTreeMap::new();
    for line in &r.tests {
        out.entry(line.result().code())
            .or_default()
            .push(line.test.id);
    }
    out
}

/// The ids of the project's tests (of one layer) whose stored result is `result`.
pub async fn tests_with_result(
    pool: &Pool,
    project_id: i64,
    layer_id: Option<i64>,
    result: &str,
) -> Result<HashSet<i64>> {
    settle(pool, project_id).await?;
    let mut out = HashSet::new();
    for json in db::lot_summaries::test_results(pool, project_id, layer_id).await? {
        let mut by_result: HashMap<String, Vec<i64>> = serde_json::from_str(&json)
            .map_err(|e| anyhow::anyhow!("a stored summary's results cannot be read: {e}"))?;
        out.extend(by_result.remove(result).unwrap_or_default());
    }
    Ok(out)
}

/// What judging a marked lot gave.
enum Outcome {
    Judged(Box<SummaryRow>),
    /// The lot no longer exists.
    Gone,
}

/// A marked lot judged, with the newest mark it answers.
struct Judgement {
    lot_id: i64,
    newest_mark: i64,
    outcome: Outcome,
}

/// Judges the marked lots of a project again and stores their summaries; returns how
/// many lots were judged. Cheap when nothing is marked (one indexed read).
pub async fn settle(pool: &Pool, project_id: i64) -> Result<usize> {
    settle_with(pool, project_id, &mut |_, _| {}).await
}

/// [`settle`], telling `progress` (lots judged, lots marked) as it goes.
///
/// Settlings of one server take turns (an in-process lock, waited for without holding a
/// connection), so concurrent views do not judge the same lots twice; the marks are read
/// once the turn is taken.
pub async fn settle_with(
    pool: &Pool,
    project_id: i64,
    progress: &mut (dyn FnMut(usize, usize) + Send),
) -> Result<usize> {
    if db::lot_summaries::marks(pool, project_id).await?.is_empty() {
        return Ok(0);
    }
    static TURN: tokio::sync::Mutex<()> = tokio::sync::Mutex::const_new(());
    let _turn = TURN.lock().await;
    if db::lot_summaries::marks_follow_commits(pool) {
        // SQLite: judge before taking the one write lock, so writers do not wait on the
        // judging; a summary judged from an older mark never replaces a newer one.
        let marks = db::lot_summaries::marks(pool, project_id).await?;
        if marks.is_empty() {
            return Ok(0);
        }
        let judged = judge_marked(pool, project_id, &marks, progress).await?;
        let mut tx = db::begin_write(pool).await?;
        write(&mut tx, project_id, &judged, &marks, true).await?;
        tx.commit().await?;
        Ok(judged.len())
    } else {
        // PostgreSQL: one settling per project at a time across app servers, holding an
        // advisory lock (writers of tests never take it), marks read under it.
        let mut tx = hold_settling(pool, project_id).await?;
        let marks = db::lot_summaries::marks_in(&mut tx, project_id).await?;
        if marks.is_empty() {
            tx.rollback().await?;
            return Ok(0);
        }
        let judged = judge_marked(pool, project_id, &marks, progress).await?;
        write(&mut tx, project_id, &judged, &marks, false).await?;
        tx.commit().await?;
        Ok(judged.len())
    }
}

/// A write transaction holding the project's settling lock (PostgreSQL). The lock is
/// tried, not waited for: a settling on another server may need more connections of
/// this pool's database than are free while this one waits, so the connection is given
/// back between tries.
async fn hold_settling(pool: &Pool, project_id: i64) -> Result<db::Tx<'static>> {
    let started = Instant::now();
    loop {
        let mut tx = db::begin_write(pool).await?;
        if db::lot_summaries::try_hold_settling(&mut tx, project_id).await? {
            return Ok(tx);
        }
        tx.rollback().await?;
        if started.elapsed() > Duration::from_secs(20) {
            return Err(anyhow::anyhow!(
                "the lot summaries of project {project_id} are being judged elsewhere for over 20 s"
            )
            .into());
        }
        tokio::time::sleep(Duration::from_millis(5)).await;
    }
}

/// Stores the judged summaries, clears the marks they answer and moves the revision.
async fn write(
    tx: &mut db::Tx<'_>,
    project_id: i64,
    judged: &[Judgement],
    marks: &[Mark],
    newer_only: bool,
) -> Result<()> {
    for j in judged {
        match &j.outcome {
            Outcome::Judged(row) => {
                db::lot_summaries::store(tx, row, j.newest_mark, newer_only).await?;
            }
            Outcome::Gone => db::lot_summaries::forget(tx, j.lot_id).await?,
        }
    }
    let ids: Vec<i64> = marks.iter().map(|m| m.id).collect();
    db::lot_summaries::clear(tx, &ids).await?;
    db::lot_summaries::bump_revision(tx, project_id).await?;
    Ok(())
}

/// The newest mark of each marked lot.
fn newest_marks(marks: &[Mark]) -> BTreeMap<i64, i64> {
    let mut newest = BTreeMap::new();
    for m in marks {
        let e = newest.entry(m.lot_id).or_insert(m.id);
        *e = (*e).max(m.id);
    }
    newest
}

/// Judges every marked lot: one by one when few, else in one streamed pass.
async fn judge_marked(
    pool: &Pool,
    project_id: i64,
    marks: &[Mark],
    progress: &mut (dyn FnMut(usize, usize) + Send),
) -> Result<Vec<Judgement>> {
    let newest = newest_marks(marks);
    let total = newest.len();
    let mut out = Vec::with_capacity(total);
    if total <= ONE_BY_ONE {
        for (&lot_id, &newest_mark) in &newest {
            let outcome = match lot_report::build(pool, lot_id).await {
                Ok(r) => Outcome::Judged(Box::new(row_of(&r)?)),
                Err(AppError::NotFound { .. }) => Outcome::Gone,
                Err(e) => return Err(e),
            };
            out.push(Judgement {
                lot_id,
                newest_mark,
                outcome,
            });
            progress(out.len(), total);
        }
        return Ok(out);
    }
    let mut seen = HashSet::new();
    overview::each_report(
        pool,
        project_id,
        |lot| newest.contains_key(&lot.id),
        // The lines are needed for the stored results, then dropped.
        true,
        |r| {
            seen.insert(r.lot.id);
            let row = row_of(&r)?;
            out.push(Judgement {
                lot_id: r.lot.id,
                newest_mark: newest[&r.lot.id],
                outcome: Outcome::Judged(Box::new(row)),
            });
            progress(out.len(), total);
            Ok(())
        },
    )
    .await?;
    for (&lot_id, &newest_mark) in newest.iter().filter(|(l, _)| !seen.contains(l)) {
        out.push(Judgement {
            lot_id,
            newest_mark,
            outcome: Outcome::Gone,
        });
    }
    Ok(out)
}

/// Every lot of a project with its stored judgement, without test lines, in layer then
/// chainage order: the lift map's and the home page's reading, after the caller settled
/// the project (`overview::summaries`).
pub async fn read(pool: &Pool, project_id: i64) -> Result<Vec<LotReport>> {
    let mut rows = ProjectRows::load(pool, project_id).await?;
    let lots = overview::every_lot(pool, project_id).await?;
    let mut stored: HashMap<i64, SummaryRow> = db::lot_summaries::for_project(pool, project_id)
        .await?
        .into_iter()
        .map(|s| (s.lot_id, s))
        .collect();
    let mut out = Vec::with_capacity(lots.len());
    for lot in lots {
        let report = match stored.remove(&lot.id) {
            Some(s) => rows.with_judgement(lot, judgement_of(&s)?)?,
            // Not settled yet (created by a writer this server has not seen settle).
            None => {
                let mut r = lot_report::build(pool, lot.id).await?;
                r.tests = Vec::new();
                r
            }
        };
        out.push(report);
    }
    Ok(out)
}

fn judgement_of(s: &SummaryRow) -> Result<StoredJudgement> {
    serde_json::from_str(&s.judged_json).map_err(|e| {
        AppError::Internal(anyhow::anyhow!(
            "the stored summary of lot {} cannot be read: {e}",
            s.lot_id
        ))
    })
}

/// Judges every lot again (of one project, or all) and stores the summaries: after a
/// change of the reduction library's version. `progress` hears (project id, lots judged,
/// lots marked).
pub async fn rejudge(
    pool: &Pool,
    project_id: Option<i64>,
    progress: &mut (dyn FnMut(i64, usize, usize) + Send),
) -> Result<usize> {
    db::lot_summaries::mark_all(pool, project_id).await?;
    let projects = match project_id {
        Some(id) => vec![id],
        None => db::lot_summaries::marked_projects(pool).await?,
    };
    let mut judged = 0;
    for id in projects {
        judged += settle_with(pool, id, &mut |done, total| progress(id, done, total)).await?;
    }
    Ok(judged)
}

/// Settles every marked project now and then, so views seldom have anything to judge.
/// The pause after a round is ten times the round's own time (at least a second), so a
/// busy project's judging never takes more than a tenth of the machine. `None` outside a
/// tokio runtime.
pub fn spawn_settler(pool: &Pool) -> Option<tokio::task::JoinHandle<()>> {
    let runtime = tokio::runtime::Handle::try_current().ok()?;
    let pool = pool.clone();
    Some(runtime.spawn(async move {
        loop {
            let started = Instant::now();
            if let Err(e) = settle_marked(&pool).await {
                tracing::warn!(error = %e, "settling lot summaries failed; retried later");
            }
            let pause = (started.elapsed() * 10).max(Duration::from_secs(1));
            tokio::time::sleep(pause).await;
            if pool.is_closed() {
                break;
            }
        }
    }))
}

async fn settle_marked(pool: &Pool) -> Result<()> {
    for project_id in db::lot_summaries::marked_projects(pool).await? {
        settle(pool, project_id).await?;
    }
    Ok(())
}
