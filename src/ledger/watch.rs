//! Watching the material: drift of field points from their reference curve, and individuals /
//! moving-range control charts of RC and moisture deviation per source, layer or technician.
//! Both read the lots exactly as their lot sheets judge them (counted tests only).

use std::collections::BTreeMap;

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
#[derive(Default)]
pub struct DriftCache(std::sync::Mutex<std::collections::HashMap<i64, (i64, Vec<DriftNote>)>>);

/// Drift notes of a project, recomputed only when its revision moved (every audited change
/// bumps it), so the project home does not judge every test on every view.
pub async fn drift_notes_cached(
    pool: &Pool,
    cache: &DriftCache,
    project_id: i64,
) -> Result<Vec<DriftNote>> {
    let revision = db::projects::revision(pool, project_id).await?.unwrap_or(0);
    if let Some((rev, notes)) = cache
        .0
        .lock()
        .ok()
        .and_then(|c| c.get(&project_id).cloned())
        && rev == revision
    {
        return Ok(notes);
    }
    let notes: Vec<DriftNote> = drift_warnings(pool, project_id)
        .await?
        .iter()
        .map(DriftNote::from)
        .collect();
    if let Ok(mut c) = cache.0.lock() {
        c.insert(project_id, (revision, notes.clone()));
    }
    Ok(notes)
}
