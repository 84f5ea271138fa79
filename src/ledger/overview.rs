//! Whole-project views: every lot judged, one lot's tests in memory at a time.
//!
//! [`each_report`] streams a project's tests in lot order and judges each lot as its
//! tests complete, so memory follows the largest lot, not the project; it serves
//! `liftledger rejudge`, exports and archives, never a view of the lift map or home.
//! [`summaries`] reads the stored lot summaries (`lot_summaries`) and keeps them per
//! project revision (moved whenever summaries are judged again), so the lift map and
//! the project home read one row while nothing has changed.

use std::collections::HashMap;
use std::sync::{Arc, Mutex};

use futures_util::TryStreamExt;

use super::lot_report::{self, LotReport};
use crate::db::{self, Pool};
use crate::error::{AppError, Result};

/// What every lot of a project shares, read once per pass: the project, its clauses,
/// sources and lab tests by id, and the current certificate of each lot.
pub struct ProjectRows {
    pub project: db::projects::Project,
    clauses: HashMap<i64, db::clauses::Clause>,
    sources: HashMap<i64, db::sources::Source>,
    labs: HashMap<i64, db::lab_tests::LabTest>,
    certificates: HashMap<i64, db::certificates::Certificate>,
    extras: HashMap<i64, super::planning::LotExtras>,
}

impl ProjectRows {
    /// Reads the rows; 404 naming `project_id` when the project does not exist.
    pub async fn load(pool: &Pool, project_id: i64) -> Result<Self> {
        let project = db::projects::get(pool, project_id).await?.ok_or_else(|| {
            AppError::not_found("project_id", format!("project {project_id} does not exist"))
        })?;
        let clauses = db::clauses::list(pool, project_id).await?;
        let sources = db::sources::list(pool, project_id).await?;
        let labs = db::lab_tests::list_for_project(pool, project_id).await?;
        let clauses = clauses.into_iter().map(|c| (c.id, c)).collect();
        let sources = sources.into_iter().map(|s| (s.id, s)).collect();
        let labs = labs.into_iter().map(|l| (l.id, l)).collect();
        let certificates = db::certificates::for_project(pool, project_id)
            .await?
            .into_iter()
            .filter(|c| c.superseded_at.is_none())
            .map(|c| (c.lot_id, c))
            .collect();
        let extras = super::planning::LotExtras::for_project(pool, project_id).await?;
        Ok(Self {
            project,
            clauses,
            sources,
            labs,
            certificates,
            extras,
        })
    }

    /// The clause, source and lab test a lot is judged by.
    pub fn rules_of(
        &self,
        lot: &db::lots::Lot,
    ) -> Result<(
        db::clauses::Clause,
        db::sources::Source,
        db::lab_tests::LabTest,
    )> {
        let missing = |what: &str| anyhow::anyhow!("lot {} refers to a missing {what}", lot.id);
        let clause = self
            .clauses
            .get(&lot.clause_id)
            .ok_or_else(|| missing("clause"))?;
        let source = self
            .sources
            .get(&lot.source_id)
            .ok_or_else(|| missing("source"))?;
        let lab = self
            .labs
            .get(&lot.lab_test_id)
            .ok_or_else(|| missing("lab test"))?;
        Ok((clause.clone(), source.clone(), lab.clone()))
    }

    /// A lot's report from its stored judgement, without test lines (each lot once: its
    /// certificate is handed over).
    pub fn with_judgement(
        &mut self,
        lot: db::lots::Lot,
        j: super::lot_summaries::StoredJudgement,
    ) -> Result<LotReport> {
        let (clause, source, lab_test) = self.rules_of(&lot)?;
        let certificate = self.certificates.remove(&lot.id);
        Ok(LotReport {
            lot,
            project: self.project.clone(),
            clause,
            source,
            lab_test,
            tests: Vec::new(),
            tests_entered: j.tests_entered,
            verdict: j.verdict,
            length_m: j.length_m,
            width_m: j.width_m,
            area_m2: j.area_m2,
            tests_required: j.tests_required,
            tests_owed: j.tests_owed,
            failing_without_retest: j.failing_without_retest,
            display_state: j.display_state,
            submit_blockers: j.submit_blockers,
            certificate,
            certificate_current: j.certificate_current,
            fingerprint: j.fingerprint,
        })
    }

    /// Judges one lot from its tests (each lot once: its certificate is handed over).
    pub fn judge(
        &mut self,
        lot: db::lots::Lot,
        tests: Vec<db::field_tests::FieldTest>,
    ) -> Result<LotReport> {
        let (clause, source, lab) = self.rules_of(&lot)?;
        let certificate = self.certificates.remove(&lot.id);
        let extras = self.extras.remove(&lot.id).unwrap_or_default();
        lot_report::assemble(
            lot,
            self.project.clone(),
            clause,
            source,
            lab,
            tests,
            certificate,
            &extras,
        )
    }
}

/// Every lot of a project, in layer then chainage order.
pub(super) async fn every_lot(pool: &Pool, project_id: i64) -> Result<Vec<db::lots::Lot>> {
    let all = db::lots::LotFilter {
        limit: i64::MAX,
        ..Default::default()
    };
    Ok(db::lots::list(pool, project_id, &all).await?)
}

/// Judges every lot of the project that `keep` accepts, calling `each` with the lots
/// in layer then chainage order.
///
/// Tests are read in one streamed query in lot-id order; each lot is judged as soon as
/// its tests are complete and handed over in the lots' own order (reports that arrive
/// early wait, without their tests when `keep_lines` is false).
pub async fn each_report(
    pool: &Pool,
    project_id: i64,
    keep: impl Fn(&db::lots::Lot) -> bool,
    keep_lines: bool,
    mut each: impl FnMut(LotReport) -> Result<()>,
) -> Result<()> {
    let mut shared = ProjectRows::load(pool, project_id).await?;
    let lots = every_lot(pool, project_id).await?;
    // Position of each kept lot in display order, and the lot rows by id.
    let mut order: HashMap<i64, usize> = HashMap::new();
    let mut rows: HashMap<i64, db::lots::Lot> = HashMap::new();
    for lot in lots.into_iter().filter(|l| keep(l)) {
        order.insert(lot.id, order.len());
        rows.insert(lot.id, lot);
    }
    let mut done: Vec<Option<LotReport>> = (0..order.len()).map(|_| None).collect();
    let mut next = 0usize;
    let mut hand_over = |done: &mut Vec<Option<LotReport>>, next: &mut usize| -> Result<()> {
        while let Some(slot) = done.get_mut(*next) {
            let Some(r) = slot.take() else { break };
            each(r)?;
            *next += 1;
        }
        Ok(())
    };
    let finish = |shared: &mut ProjectRows,
                  rows: &mut HashMap<i64, db::lots::Lot>,
                  done: &mut Vec<Option<LotReport>>,
                  lot_id: i64,
                  tests: Vec<db::field_tests::FieldTest>|
     -> Result<()> {
        if let Some(lot) = rows.remove(&lot_id) {
            let mut r = shared.judge(lot, tests)?;
            if !keep_lines {
                r.tests = Vec::new();
            }
            done[order[&lot_id]] = Some(r);
        }
        Ok(())
    };

    let mut stream = db::field_tests::stream_for_views(pool, project_id, !keep_lines);
    let mut current: Option<(i64, Vec<db::field_tests::FieldTest>)> = None;
    while let Some(t) = stream.try_next().await? {
        match &mut current {
            Some((lot_id, tests)) if *lot_id == t.lot_id => tests.push(t),
            _ => {
                if let Some((lot_id, tests)) = current.take() {
                    finish(&mut shared, &mut rows, &mut done, lot_id, tests)?;
                    hand_over(&mut done, &mut next)?;
                }
                let lot_id = t.lot_id;
                current = Some((lot_id, vec![t]));
            }
        }
    }
    drop(stream);
    if let Some((lot_id, tests)) = current.take() {
        finish(&mut shared, &mut rows, &mut done, lot_id, tests)?;
    }
    // Lots without a single test.
    let empty: Vec<i64> = rows.keys().copied().collect();
    for lot_id in empty {
        finish(&mut shared, &mut rows, &mut done, lot_id, Vec::new())?;
    }
    hand_over(&mut done, &mut next)
}

/// Every lot of a project judged, with its test lines, in layer then chainage order.
#[tracing::instrument(skip(pool))]
pub async fn project_reports(pool: &Pool, project_id: i64) -> Result<Vec<LotReport>> {
    let mut out = Vec::new();
    each_report(
        pool,
        project_id,
        |_| true,
        true,
        |r| {
            out.push(r);
            Ok(())
        },
    )
    .await?;
    Ok(out)
}

/// A project's judged lots without test lines, shared by the readers of one revision.
pub type Summaries = Arc<Vec<Arc<LotReport>>>;

/// One project's judged lots and the revision they show.
#[derive(Clone)]
struct Entry {
    revision: i64,
    lots: Summaries,
}

/// The stored summaries of a project as last read, per project, tagged with the revision
/// they show: a view of a project nothing has changed in decodes nothing.
#[derive(Default)]
pub struct SummaryCache {
    entries: Mutex<HashMap<i64, Entry>>,
    /// One project read at a time: requests that miss together share one reading.
    reading: tokio::sync::Mutex<()>,
}

impl SummaryCache {
    fn get(&self, project_id: i64) -> Option<Entry> {
        let entries = self.entries.lock().unwrap_or_else(|e| e.into_inner());
        entries.get(&project_id).cloned()
    }

    fn store(&self, project_id: i64, e: Entry) {
        let mut entries = self.entries.lock().unwrap_or_else(|e| e.into_inner());
        entries.insert(project_id, e);
    }
}

/// Every lot of a project judged, without test lines (`tests` is empty; `tests_entered`
/// counts them), in layer then chainage order, from the stored lot summaries.
///
/// The marked lots are settled first (judged again: only those changed since the last
/// settling, see `lot_summaries`); the revision the settling moves is read after it, so
/// an entry never claims a revision newer than what it shows.
#[tracing::instrument(skip(pool, cache))]
pub async fn summaries(pool: &Pool, cache: &SummaryCache, project_id: i64) -> Result<Summaries> {
    super::lot_summaries::settle(pool, project_id).await?;
    let revision = revision_of(pool, project_id).await?;
    if let Some(e) = cache.get(project_id).filter(|e| e.revision == revision) {
        return Ok(e.lots);
    }
    let _turn = cache.reading.lock().await;
    let revision = revision_of(pool, project_id).await?;
    if let Some(e) = cache.get(project_id).filter(|e| e.revision == revision) {
        return Ok(e.lots);
    }
    let reports = super::lot_summaries::read(pool, project_id).await?;
    let lots: Summaries = Arc::new(reports.into_iter().map(Arc::new).collect());
    cache.store(
        project_id,
        Entry {
            revision,
            lots: lots.clone(),
        },
    );
    Ok(lots)
}

/// The project's revision; 404 naming `project_id` when it does not exist.
async fn revision_of(pool: &Pool, project_id: i64) -> Result<i64> {
    db::projects::revision(pool, project_id)
        .await?
        .ok_or_else(|| {
            AppError::not_found("project_id", format!("project {project_id} does not exist"))
        })
}
