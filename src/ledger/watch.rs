//! Watching the material: drift of field points from their reference curve, and individuals /
//! moving-range control charts of RC and moisture deviation per source, layer or technician.
//! Both read the lots exactly as their lot sheets judge them (counted tests only).

use std::collections::{BTreeMap, HashMap};
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};

use super::lot_report::TestLine;
use super::one_point::fitted_samples;
use super::overview::each_report;
use crate::db::{self, Pool};
use crate::error::Result;
use crate::reduction::control_chart::{ImrChart, imr_chart};
use crate::reduction::drift::{DriftFinding, DriftPoint, DriftRules, drift};

/// The warning every drift finding raises.
pub const DRIFT_WARNING: &str = "material may have changed: new curve or one-point check due";

/// One counted test with what the charts need, in test order.
#[derive(Debug, Clone, Serialize)]
pub struct WatchedTest {
    pub test_id: i64,
    pub number: String,
    pub tested_at: String,
    pub technician: String,
    pub source_id: i64,
    pub layer_id: i64,
    pub layer_label: String,
    pub lab_test_id: i64,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    pub relative_compaction_pct: f64,
    pub moisture_deviation_pct: f64,
}

fn watched(lot: &db::lots::Lot, l: &TestLine) -> Option<WatchedTest> {
    Some(WatchedTest {
        test_id: l.test.id,
        number: l.test.number.clone(),
        tested_at: l.test.tested_at.clone(),
        technician: l.test.technician.clone(),
        source_id: lot.source_id,
        layer_id: lot.layer_id,
        layer_label: format!("{} layer {}", lot.zone_name, lot.layer_number),
        lab_test_id: lot.lab_test_id,
        water_content_pct: l.test.water_content_pct,
        dry_density_kg_m3: l.test.dry_density_kg_m3,
        relative_compaction_pct: l.relative_compaction_pct?,
        moisture_deviation_pct: l.moisture_deviation_pct?,
    })
}

/// Every counted test of the project (or of lots on one curve), oldest first.
pub async fn counted_tests(
    pool: &Pool,
    project_id: i64,
    lab_test_id: Option<i64>,
) -> Result<Vec<WatchedTest>> {
    let mut out = Vec::new();
    each_report(
        pool,
        project_id,
        |lot| lab_test_id.is_none_or(|id| lot.lab_test_id == id),
        true,
        |r| {
            out.extend(
                r.tests
                    .iter()
                    .filter(|l| l.standing.counted())
                    .filter_map(|l| watched(&r.lot, l)),
            );
            Ok(())
        },
    )
    .await?;
    out.sort_by(|a, b| {
        a.tested_at
            .cmp(&b.tested_at)
            .then(a.test_id.cmp(&b.test_id))
    });
    Ok(out)
}

/// Drift of one curve's field points, with the test numbers of each finding.
#[derive(Debug, Clone, Serialize)]
pub struct CurveDrift {
    pub lab_test_id: i64,
    pub lab_code: String,
    pub rules: DriftRules,
    pub findings: Vec<DriftFinding>,
    /// Test numbers per finding, in the findings' order.
    pub test_numbers: Vec<Vec<String>>,
}

impl CurveDrift {
    /// True when the material may have changed.
    pub fn warned(&self) -> bool {
        !self.findings.is_empty()
    }
}

fn curve_drift(lab: &db::lab_tests::LabTest, tests: &[WatchedTest]) -> CurveDrift {
    let mine: Vec<&WatchedTest> = tests.iter().filter(|t| t.lab_test_id == lab.id).collect();
    let points: Vec<DriftPoint> = mine
        .iter()
        .map(|t| DriftPoint {
            test_id: t.test_id,
            water_content_pct: t.water_content_pct,
            dry_density_kg_m3: t.dry_density_kg_m3,
            relative_compaction_pct: t.relative_compaction_pct,
        })
        .collect();
    let rules = DriftRules::default();
    let samples = fitted_samples(lab).unwrap_or_default();
    let findings = drift(&samples, &points, &rules);
    let number = |id: &i64| {
        mine.iter()
            .find(|t| t.test_id == *id)
            .map(|t| t.number.clone())
    };
    let test_numbers = findings
        .iter()
        .map(|f| f.test_ids.iter().filter_map(number).collect())
        .collect();
    CurveDrift {
        lab_test_id: lab.id,
        lab_code: lab.code.clone(),
        rules,
        findings,
        test_numbers,
    }
}

/// Drift of one curve.
pub async fn drift_of(
    pool: &Pool,
    project_id: i64,
    lab: &db::lab_tests::LabTest,
) -> Result<CurveDrift> {
    let tests = counted_tests(pool, project_id, Some(lab.id)).await?;
    Ok(curve_drift(lab, &tests))
}

/// Every curve of the project whose material may have changed.
pub async fn drift_warnings(pool: &Pool, project_id: i64) -> Result<Vec<CurveDrift>> {
    let tests = counted_tests(pool, project_id, None).await?;
    let labs = db::lab_tests::list_for_project(pool, project_id).await?;
    Ok(labs
        .iter()
        .map(|l| curve_drift(l, &tests))
        .filter(CurveDrift::warned)
        .collect())
}

/// How the points of a chart are grouped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum GroupBy {
    #[default]
    Source,
    Layer,
    Technician,
}

/// What a chart plots.
impl GroupBy {
    /// Every grouping.
    pub const ALL: [GroupBy; 3] = [Self::Source, Self::Layer, Self::Technician];

    /// The code in a query string.
    pub fn code(self) -> &'static str {
        match self {
            Self::Source => "source",
            Self::Layer => "layer",
            Self::Technician => "technician",
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Measure {
    /// Relative compaction, percent.
    #[default]
    Rc,
    /// Moisture deviation from OMC, percentage points.
    Moisture,
}

impl Measure {
    /// Both measures.
    pub const ALL: [Measure; 2] = [Self::Rc, Self::Moisture];

    /// The code in a query string.
    pub fn code(self) -> &'static str {
        match self {
            Self::Rc => "rc",
            Self::Moisture => "moisture",
        }
    }

    pub fn label(self) -> &'static str {
        match self {
            Self::Rc => "relative compaction, %",
            Self::Moisture => "moisture deviation, points",
        }
    }
    fn of(self, t: &WatchedTest) -> f64 {
        match self {
            Self::Rc => t.relative_compaction_pct,
            Self::Moisture => t.moisture_deviation_pct,
        }
    }
}

/// One group's chart and its points.
#[derive(Debug, Clone, Serialize)]
pub struct ChartGroup {
    pub key: String,
    pub label: String,
    pub tests: Vec<WatchedTest>,
    /// None with fewer than two points.
    pub chart: Option<ImrChart>,
}

/// The charts of a project, one per group, groups in name order.
pub async fn control_charts(
    pool: &Pool,
    project_id: i64,
    by: GroupBy,
    measure: Measure,
) -> Result<Vec<ChartGroup>> {
    let tests = counted_tests(pool, project_id, None).await?;
    let sources: BTreeMap<i64, String> = db::sources::list(pool, project_id)
        .await?
        .into_iter()
        .map(|s| (s.id, format!("{} {}", s.code, s.name)))
        .collect();
    let mut groups: BTreeMap<String, (String, Vec<WatchedTest>)> = BTreeMap::new();
    for t in tests {
        let (key, label) = match by {
            GroupBy::Source => (
                format!("source-{}", t.source_id),
                sources.get(&t.source_id).cloned().unwrap_or_default(),
            ),
            GroupBy::Layer => (format!("layer-{}", t.layer_id), t.layer_label.clone()),
            GroupBy::Technician => (format!("tech-{}", t.technician), t.technician.clone()),
        };
        groups
            .entry(key)
            .or_insert_with(|| (label, Vec::new()))
            .1
            .push(t);
    }
    Ok(groups
        .into_iter()
        .map(|(key, (label, tests))| {
            let values: Vec<f64> = tests.iter().map(|t| measure.of(t)).collect();
            ChartGroup {
                key,
                label,
                chart: imr_chart(&values),
                tests,
            }
        })
        .collect())
}

/// A drift warning as a page shows it: the curve, the warning, one line per rule broken.
#[derive(Debug, Clone, Serialize)]
pub struct DriftNote {
    pub lab_test_id: i64,
    pub lab_code: String,
    pub warning: &'static str,
    pub lines: Vec<String>,
}

impl From<&CurveDrift> for DriftNote {
    fn from(d: &CurveDrift) -> Self {
        Self {
            lab_test_id: d.lab_test_id,
            lab_code: d.lab_code.clone(),
            warning: DRIFT_WARNING,
            lines: d
                .findings
                .iter()
                .zip(&d.test_numbers)
                .map(|(f, n)| format!("{}: {}", f.message, n.join(", ")))
                .collect(),
        }
    }
}

/// Drift notes per project with the revision they show (held in the app state).
///
/// The notes read every counted test of each curve, so they are worked out by a task of
/// their own, never on a view's path: a view shows the notes of the last finished run and
/// starts the next when the project's revision moved. It waits for that run only while
/// runs are quick (a small project sees its notes at once); on a large one it shows the
/// last notes and says a newer run is under way.
#[derive(Default)]
pub struct DriftCache(std::sync::Arc<std::sync::Mutex<HashMap<i64, DriftEntry>>>);

/// One project's notes and the run that brings them up to date.
#[derive(Default)]
struct DriftEntry {
    /// The notes of the last finished run, with the revision it read.
    shown: Option<(i64, Vec<DriftNote>)>,
    /// The run under way, which flips to true when it has stored its notes.
    running: Option<tokio::sync::watch::Receiver<bool>>,
    /// How long the last run took.
    last_took: Duration,
}

/// A view waits for a run at most this long, and only when the last run was shorter.
const WAIT_FOR_QUICK_RUN: Duration = Duration::from_millis(100);

/// Drift notes as a view shows them.
#[derive(Debug, Clone, Default)]
pub struct DriftView {
    pub notes: Vec<DriftNote>,
    /// True while a newer run than the notes shown is under way.
    pub pending: bool,
}

/// The drift notes of a project for a view (see [`DriftCache`]).
pub async fn drift_notes_cached(
    pool: &Pool,
    cache: &DriftCache,
    project_id: i64,
) -> Result<DriftView> {
    let revision = db::projects::revision(pool, project_id).await?.unwrap_or(0);
    let (run, wait) = {
        let mut all = cache.0.lock().unwrap_or_else(|e| e.into_inner());
        let e = all.entry(project_id).or_default();
        if let Some((rev, notes)) = &e.shown
            && *rev == revision
        {
            return Ok(DriftView {
                notes: notes.clone(),
                pending: false,
            });
        }
        let run = match &e.running {
            Some(run) => run.clone(),
            None => {
                let run = start_drift_run(pool, cache, project_id, revision);
                e.running = Some(run.clone());
                run
            }
        };
        (run, e.last_took < WAIT_FOR_QUICK_RUN)
    };
    if wait {
        let mut run = run;
        let _ = tokio::time::timeout(WAIT_FOR_QUICK_RUN, run.wait_for(|done| *done)).await;
    }
    let all = cache.0.lock().unwrap_or_else(|e| e.into_inner());
    let shown = all.get(&project_id).and_then(|e| e.shown.clone());
    Ok(match shown {
        Some((rev, notes)) => DriftView {
            notes,
            pending: rev != revision,
        },
        None => DriftView {
            notes: Vec::new(),
            pending: true,
        },
    })
}

/// Starts a run working out a project's notes at `revision`; its receiver flips when done.
fn start_drift_run(
    pool: &Pool,
    cache: &DriftCache,
    project_id: i64,
    revision: i64,
) -> tokio::sync::watch::Receiver<bool> {
    let (done, run) = tokio::sync::watch::channel(false);
    let pool = pool.clone();
    let entries = cache.0.clone();
    // On a thread of its own: judging every counted test is long stretches of CPU between
    // awaits, which on a runtime worker would hold back the requests queued behind it.
    let runtime = tokio::runtime::Handle::current();
    tokio::task::spawn_blocking(move || {
        let started = Instant::now();
        let notes = runtime
            .block_on(drift_warnings(&pool, project_id))
            .map(|d| d.iter().map(DriftNote::from).collect::<Vec<_>>());
        let mut all = entries.lock().unwrap_or_else(|e| e.into_inner());
        let e = all.entry(project_id).or_default();
        e.running = None;
        e.last_took = started.elapsed();
        match notes {
            Ok(notes) => e.shown = Some((revision, notes)),
            Err(err) => tracing::warn!(error = %err, project_id, "working out drift notes failed"),
        }
        let _ = done.send(true);
    });
    run
}
