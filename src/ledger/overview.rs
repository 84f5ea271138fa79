//! Whole-project views: every lot judged, one lot's tests in memory at a time.
//!
//! [`each_report`] streams a project's tests in lot order and judges each lot as its
//! tests complete, so memory follows the largest lot, not the project. [`summaries`]
//! keeps the judged lots without their test lines per project revision (bumped by
//! every audited change, see `db::projects::revision`), so the lift map and the
//! project home read one row while nothing has changed.

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
    let lots = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            limit: i64::MAX,
            ..Default::default()
        },
    )
    .await?;
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

/// Lots re-judged one by one after a change; beyond this a whole pass is cheaper.
const MAX_PATCHED_LOTS: usize = 64;

/// One project's judged lots and what they show.
#[derive(Clone)]
struct Entry {
    revision: i64,
    /// The newest audit row the lots reflect (SQLite, where audit ids follow commits).
    last_audit: i64,
    lots: Summaries,
}

/// Judged lots without their test lines, per project, tagged with the revision they show.
#[derive(Default)]
pub struct SummaryCache {
    entries: Mutex<HashMap<i64, Entry>>,
    /// One project judged at a time: requests that miss together share one pass.
    computing: tokio::sync::Mutex<()>,
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
/// counts them), in layer then chainage order; reused while the project's revision holds.
///
/// After a change, on SQLite, only the lots the new audit rows name (a test's lot, a
/// lot, a certificate's lot) are judged again; any other kind of change, a new lot, or
/// many changed lots judge the whole project again, as PostgreSQL always does. The
/// revision is read first, so an entry never claims a revision newer than what it shows.
#[tracing::instrument(skip(pool, cache))]
pub async fn summaries(pool: &Pool, cache: &SummaryCache, project_id: i64) -> Result<Summaries> {
    let not_found =
        || AppError::not_found("project_id", format!("project {project_id} does not exist"));
    let revision = db::projects::revision(pool, project_id)
        .await?
        .ok_or_else(not_found)?;
    if let Some(e) = cache.get(project_id).filter(|e| e.revision == revision) {
        return Ok(e.lots);
    }
    let _turn = cache.computing.lock().await;
    let revision = db::projects::revision(pool, project_id)
        .await?
        .ok_or_else(not_found)?;
    let cached = cache.get(project_id);
    if let Some(e) = cached.as_ref().filter(|e| e.revision == revision) {
        return Ok(e.lots.clone());
    }
    let sqlite = db::engine_of(pool) == db::Engine::Sqlite;
    if let Some(old) = cached.filter(|_| sqlite)
        && let Some(entry) = patched(pool, project_id, revision, &old).await?
    {
        let lots = entry.lots.clone();
        cache.store(project_id, entry);
        return Ok(lots);
    }
    let last_audit = db::audit::last_id(pool, project_id).await?;
    let mut out = Vec::new();
    each_report(
        pool,
        project_id,
        |_| true,
        false,
        |r| {
            out.push(Arc::new(r));
            Ok(())
        },
    )
    .await?;
    let lots: Summaries = Arc::new(out);
    cache.store(
        project_id,
        Entry {
            revision,
            last_audit,
            lots: lots.clone(),
        },
    );
    Ok(lots)
}

/// The cached lots with those changed since `old` judged again; `None` when a whole
/// pass is needed (a kind of change that may touch many lots, a new lot, many lots).
async fn patched(
    pool: &Pool,
    project_id: i64,
    revision: i64,
    old: &Entry,
) -> Result<Option<Entry>> {
    let changes = db::audit::changes_since(pool, project_id, old.last_audit).await?;
    let mut lots: Vec<i64> = Vec::new();
    let mut last_audit = old.last_audit;
    for (id, entity, entity_id) in changes {
        last_audit = last_audit.max(id);
        let lot = match (entity.as_str(), entity_id) {
            // Sign-ins, accounts, API tokens and saved mappings change no verdict.
            ("session" | "user" | "api_token" | "import_mapping", _) => None,
            ("lot", Some(lot)) => Some(lot),
            ("field_test", Some(t)) => match db::scope::lot_of_test(pool, t).await? {
                Some(lot) => Some(lot),
                None => return Ok(None),
            },
            ("certificate", Some(c)) => match db::scope::lot_of_certificate(pool, c).await? {
                Some(lot) => Some(lot),
                None => return Ok(None),
            },
            _ => return Ok(None),
        };
        if let Some(lot) = lot.filter(|l| !lots.contains(l)) {
            lots.push(lot);
            if lots.len() > MAX_PATCHED_LOTS {
                return Ok(None);
            }
        }
    }
    let mut next: Vec<Arc<LotReport>> = old.lots.as_ref().clone();
    for lot_id in lots {
        let Some(at) = next.iter().position(|r| r.lot.id == lot_id) else {
            return Ok(None);
        };
        let mut r = lot_report::build(pool, lot_id).await?;
        r.tests = Vec::new();
        next[at] = Arc::new(r);
    }
    Ok(Some(Entry {
        revision,
        last_audit,
        lots: Arc::new(next),
    }))
}
