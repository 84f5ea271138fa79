//! Lot acceptance: which tests count, the lot statistics, and the decision
//! under one of three rules with reasons a reviewer reads. The percent-within-
//! limits estimate of the quality-index method lives in [`super::pwl`] and is
//! re-exported here.
//!
//! One location, one value (common practice): a test and its chain of retests
//! are one location, and the chain's latest non-voided test stands for it in
//! every statistic and in the frequency count; the others stay on record as
//! superseded. Tests of an earlier random sample (a quality-index lot re-sampled
//! after rework) and tests that cannot be judged are out of the statistics; a
//! test that cannot be judged also keeps the lot from being accepted.
//!
//! Moisture is the clause's choice ([`MoistureJudgement`]): by default every
//! counted test must lie inside the moisture window, under every rule; a
//! quality-index clause may instead judge moisture by a two-sided percent within
//! limits, PWL = PWL_U + PWL_L − 100 (AASHTO R 9), against its own threshold.

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

pub use super::pwl::{ln_gamma, percent_within_limits, regularized_incomplete_beta};
use super::rounding::Rounding;
use super::verdict::{COMPARE_EPS, SpecLimits};
use super::water::ReductionError;

/// How a lot is accepted.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "rule", rename_all = "snake_case")]
pub enum AcceptanceRule {
    /// Every counted test meets RC_min and the moisture window.
    EveryTest,
    /// Lot mean ≥ RC_min and every counted test ≥ RC_min − allowance (and inside the moisture window).
    MeanAndMin {
        /// Points below RC_min a single test may fall.
        allowance_pct: f64,
    },
    /// Estimated percent within limits (lower limit RC_min) ≥ the threshold.
    QualityIndex {
        /// Least percent within limits to accept.
        min_pwl_pct: f64,
    },
}

impl AcceptanceRule {
    /// Stable code: "every_test", "mean_and_min", "quality_index".
    pub fn code(&self) -> &'static str {
        match self {
            Self::EveryTest => "every_test",
            Self::MeanAndMin { .. } => "mean_and_min",
            Self::QualityIndex { .. } => "quality_index",
        }
    }
    /// The rule in words, for clause listings and certificates.
    pub fn label(&self) -> String {
        match self {
            Self::EveryTest => "every test meets the minimum and the moisture window".to_string(),
            Self::MeanAndMin { allowance_pct } => format!(
                "lot mean meets the minimum and no test is more than {allowance_pct:.1} points below it"
            ),
            Self::QualityIndex { min_pwl_pct } => {
                format!(
                    "estimated percent within limits of at least {min_pwl_pct:.1} % (quality index)"
                )
            }
        }
    }
}

/// One test as the lot sees it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LotTestInput {
    /// Test id (links retests and standings).
    pub id: i64,
    /// What reasons call the test, e.g. its number "T-0014"; empty means "test {id}".
    pub label: String,
    /// Relative compaction, percent.
    pub relative_compaction_pct: f64,
    /// The value the clause's moisture window bounds (`SpecLimits::moisture_measure`): points
    /// from OMC under the default window, percent of OMC, or the water content itself.
    pub moisture_measure: f64,
    /// The test's own verdict when reduced.
    pub passed: bool,
    /// Voided by the QC manager: out of every statistic.
    pub voided: bool,
    /// The test this one retests, if any.
    pub retest_of: Option<i64>,
    /// When the test was taken (RFC 3339); orders a retest chain after its links.
    #[serde(default)]
    pub tested_at: String,
    /// Why the test cannot be judged, when it cannot (its figures are then meaningless).
    #[serde(default)]
    pub unjudged: Option<String>,
    /// Taken for an earlier random sample of a re-sampled lot: on record, out of the statistics.
    #[serde(default)]
    pub earlier_sample: bool,
    /// Air voids at most the clause's maximum (true when the clause sets none).
    #[serde(default = "air_voids_ok_by_default")]
    pub air_voids_ok: bool,
}

fn air_voids_ok_by_default() -> bool {
    true
}

impl LotTestInput {
    /// The words reasons use for this test.
    pub fn name(&self) -> String {
        if self.label.is_empty() {
            format!("test {}", self.id)
        } else {
            format!("test {}", self.label)
        }
    }
}

/// Whether a test counts towards acceptance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "standing", rename_all = "snake_case")]
pub enum TestStanding {
    /// In the statistics.
    Counted,
    /// Voided: out of every statistic, still on record.
    Voided,
    /// Not the latest non-voided test of its retest chain: out of the statistics, still on record.
    Superseded {
        /// The chain's latest non-voided test, which stands for the location.
        by: i64,
    },
    /// Stands for its location but cannot be judged (see the test's reason): out of the
    /// statistics, and the lot cannot be accepted until it is voided or retested.
    CannotBeJudged,
    /// Taken for an earlier random sample of a re-sampled lot: on record, out of the statistics.
    EarlierSample,
}

impl TestStanding {
    /// Stable code: "counted", "voided", "superseded".
    pub fn code(&self) -> &'static str {
        match self {
            Self::Counted => "counted",
            Self::Voided => "voided",
            Self::Superseded { .. } => "superseded",
            Self::CannotBeJudged => "cannot_be_judged",
            Self::EarlierSample => "earlier_sample",
        }
    }
}

/// The decision on a lot with its statistics over the counted tests.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LotVerdict {
    /// Counted tests.
    pub n: usize,
    /// Mean relative compaction, percent.
    pub mean: Option<f64>,
    /// Sample standard deviation (n − 1), points; needs n ≥ 2.
    pub std_dev: Option<f64>,
    /// Lowest relative compaction.
    pub min: Option<f64>,
    /// Highest relative compaction.
    pub max: Option<f64>,
    /// Q_L = (x̄ − L) / s; None without spread or under n = 2.
    pub quality_index: Option<f64>,
    /// Estimated percent within limits (quality-index rule only).
    pub pwl: Option<f64>,
    /// The lot is accepted.
    pub accepted: bool,
    /// Plain-words reasons, decisive ones first.
    pub reasons: Vec<String>,
    /// Standing of every test, in input order.
    pub standings: Vec<(i64, TestStanding)>,
    /// Counted failed tests with no retest yet.
    pub failing_without_retest: Vec<i64>,
    /// Tests that stand for their location but cannot be judged.
    pub unjudged: Vec<i64>,
    /// Two-sided moisture percent within limits, when the clause judges moisture so.
    pub moisture_pwl: Option<f64>,
}

/// How a clause judges moisture.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "moisture_judgement", rename_all = "snake_case")]
pub enum MoistureJudgement {
    /// Every counted test inside the moisture window (the default, under every rule).
    PerTest,
    /// Two-sided percent within limits of the moisture deviations, PWL = PWL_U + PWL_L − 100.
    PercentWithinLimits {
        /// Least moisture percent within limits to accept.
        min_pwl_pct: f64,
    },
}

impl MoistureJudgement {
    /// Stable code: "per_test" or "pwl".
    pub fn code(&self) -> &'static str {
        match self {
            Self::PerTest => "per_test",
            Self::PercentWithinLimits { .. } => "pwl",
        }
    }
    /// The judgement in words, for clause listings and certificates.
    pub fn label(&self) -> String {
        match self {
            Self::PerTest => "every counted test inside the moisture window".to_string(),
            Self::PercentWithinLimits { min_pwl_pct } => {
                format!("two-sided moisture percent within limits of at least {min_pwl_pct:.1} %")
            }
        }
    }
}

/// The decision on a plain list of values (the calculator endpoint).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ValuesSummary {
    /// Number of values.
    pub n: usize,
    /// Mean.
    pub mean: f64,
    /// Sample standard deviation (n − 1); needs n ≥ 2.
    pub std_dev: Option<f64>,
    /// Q_L = (x̄ − L) / s; None without spread.
    pub quality_index: Option<f64>,
    /// Estimated percent within limits (quality-index rule only).
    pub pwl: Option<f64>,
    /// The values meet the rule.
    pub accepted: bool,
    /// Plain-words reasons.
    pub reasons: Vec<String>,
}

/// Summary statistics of a non-empty list.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Summary {
    /// Count.
    pub n: usize,
    /// Mean.
    pub mean: f64,
    /// Sample standard deviation (n − 1), None for n < 2.
    pub std_dev: Option<f64>,
    /// Least value.
    pub min: f64,
    /// Greatest value.
    pub max: f64,
}

/// Mean, sample standard deviation (two-pass), min and max; None when empty.
pub fn summarize(values: &[f64]) -> Option<Summary> {
    if values.is_empty() {
        return None;
    }
    let n = values.len();
    let mean = values.iter().sum::<f64>() / n as f64;
    let std_dev = (n >= 2).then(|| {
        let ss: f64 = values.iter().map(|v| (v - mean).powi(2)).sum();
        (ss / (n - 1) as f64).sqrt()
    });
    let min = values.iter().copied().fold(f64::INFINITY, f64::min);
    let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Some(Summary {
        n,
        mean,
        std_dev,
        min,
        max,
    })
}

/// Works out each test's standing: voided, earlier sample, or — one location, one value —
/// the latest non-voided test of each retest chain counted (or cannot be judged) and the
/// rest of the chain superseded by it.
pub fn standings(tests: &[LotTestInput]) -> Vec<(i64, TestStanding)> {
    let index: HashMap<i64, usize> = tests.iter().enumerate().map(|(i, t)| (t.id, i)).collect();
    // Union-find over retest links (voided links too: a voided retest still names its place).
    let mut parent: Vec<usize> = (0..tests.len()).collect();
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    for (i, t) in tests.iter().enumerate() {
        if let Some(&j) = t.retest_of.and_then(|p| index.get(&p)) {
            let (a, b) = (root(&mut parent, i), root(&mut parent, j));
            parent[a] = b;
        }
    }
    // Depth down the chain (cycle-safe), then time, then id: the latest link stands.
    let depth = |i: usize| {
        let mut d = 0usize;
        let mut at = i;
        while let Some(&p) = tests[at].retest_of.and_then(|p| index.get(&p)) {
            d += 1;
            at = p;
            if d > tests.len() {
                break;
            }
        }
        d
    };
    let live = |t: &LotTestInput| !t.voided && !t.earlier_sample;
    let mut standing: HashMap<usize, usize> = HashMap::new();
    for (i, t) in tests.iter().enumerate() {
        if !live(t) {
            continue;
        }
        let r = root(&mut parent, i);
        let key = |k: usize| (depth(k), tests[k].tested_at.clone(), tests[k].id);
        match standing.get(&r) {
            Some(&best) if key(best) >= key(i) => {}
            _ => {
                standing.insert(r, i);
            }
        }
    }
    (0..tests.len())
        .map(|i| {
            let t = &tests[i];
            let s = if t.voided {
                TestStanding::Voided
            } else if t.earlier_sample {
                TestStanding::EarlierSample
            } else {
                let best = standing[&root(&mut parent, i)];
                if best != i {
                    TestStanding::Superseded { by: tests[best].id }
                } else if t.unjudged.is_some() {
                    TestStanding::CannotBeJudged
                } else {
                    TestStanding::Counted
                }
            };
            (t.id, s)
        })
        .collect()
}

/// The density part of a decision, shared by lots and plain value lists.
struct DensityDecision {
    accepted: bool,
    reasons: Vec<String>,
    quality_index: Option<f64>,
    pwl: Option<f64>,
}

/// Judges labelled values against a lower limit under a rule (no moisture here), comparing
/// and printing each value as the clause rounds.
fn decide_density(
    labelled: &[(String, f64)],
    lower: f64,
    rule: &AcceptanceRule,
    summary: &Summary,
    noun: &str,
    rounding: &Rounding,
) -> DensityDecision {
    let judged = Judged {
        labelled,
        lower,
        summary,
        noun,
        rounding,
    };
    match rule {
        AcceptanceRule::EveryTest => judged.every_test(),
        AcceptanceRule::MeanAndMin { allowance_pct } => judged.mean_and_min(*allowance_pct),
        AcceptanceRule::QualityIndex { min_pwl_pct } => judged.quality_index(*min_pwl_pct),
    }
}

/// The values, limit and rounding one density decision works on.
struct Judged<'a> {
    labelled: &'a [(String, f64)],
    lower: f64,
    summary: &'a Summary,
    noun: &'a str,
    rounding: &'a Rounding,
}

impl Judged<'_> {
    fn meets(&self, v: f64, limit: f64) -> bool {
        self.rounding.at_least(v, limit)
    }

    fn shown(&self, v: f64) -> String {
        self.rounding.shown_against_lower(v)
    }

    fn lim(&self, v: f64) -> String {
        self.rounding.limit_text(v)
    }

    /// The labelled values below `limit`, as the clause rounds.
    fn below(&self, limit: f64) -> Vec<&(String, f64)> {
        self.labelled
            .iter()
            .filter(|(_, v)| !self.meets(*v, limit))
            .collect()
    }

    /// Every counted value must reach the minimum.
    fn every_test(&self) -> DensityDecision {
        let (noun, lower) = (self.noun, self.lower);
        let below = self.below(lower);
        let reasons = if below.is_empty() {
            vec![format!(
                "all {} counted {noun}s are at or above the {} % minimum (lowest {} %)",
                self.summary.n,
                self.lim(lower),
                self.shown(self.summary.min)
            )]
        } else {
            below
                .iter()
                .map(|(label, v)| {
                    format!(
                        "{label} at {} % is below the {} % minimum",
                        self.shown(*v),
                        self.lim(lower)
                    )
                })
                .collect()
        };
        DensityDecision::plain(below.is_empty(), reasons)
    }

    /// The mean must reach the minimum and every value the floor (minimum less the allowance).
    fn mean_and_min(&self, allowance_pct: f64) -> DensityDecision {
        let (noun, lower) = (self.noun, self.lower);
        if !allowance_pct.is_finite() || allowance_pct < 0.0 {
            return DensityDecision::plain(
                false,
                vec![format!(
                    "the allowance {allowance_pct} is not a usable number of points; the lot cannot be judged"
                )],
            );
        }
        let floor = lower - allowance_pct;
        let mean_ok = self.meets(self.summary.mean, lower);
        let mut reasons = vec![format!(
            "mean relative compaction {} % {} the {} % minimum",
            self.shown(self.summary.mean),
            if mean_ok { "meets" } else { "is below" },
            self.lim(lower)
        )];
        let below = self.below(floor);
        let floor_words = format!(
            "{} % floor ({} % less {} allowance)",
            self.lim(floor),
            self.lim(lower),
            self.lim(allowance_pct)
        );
        if below.is_empty() {
            reasons.push(format!(
                "every counted {noun} is at or above the {floor_words}; lowest {} %",
                self.shown(self.summary.min)
            ));
        } else {
            for (label, v) in &below {
                reasons.push(format!(
                    "{label} at {} % is below the {floor_words}",
                    self.shown(*v)
                ));
            }
        }
        DensityDecision::plain(mean_ok && below.is_empty(), reasons)
    }

    /// The estimated percent within limits from the quality index must reach the minimum.
    fn quality_index(&self, min_pwl_pct: f64) -> DensityDecision {
        let (noun, lower, summary) = (self.noun, self.lower, self.summary);
        if summary.n < 3 {
            return DensityDecision::plain(
                false,
                vec![format!(
                    "the quality-index rule needs at least 3 counted {noun}s; there {} {}",
                    if summary.n == 1 { "is" } else { "are" },
                    summary.n
                )],
            );
        }
        let mut reasons = Vec::new();
        let mut quality_index = None;
        let s = summary.std_dev.unwrap_or(0.0);
        let no_spread = s <= 1e-12 * summary.mean.abs().max(1.0);
        let estimate = if no_spread {
            let p = if self.meets(summary.mean, lower) {
                100.0
            } else {
                0.0
            };
            reasons.push(format!(
                "all {} counted {noun}s read {:.1} %: with no spread the percent within limits is {p:.0} %",
                summary.n, summary.mean
            ));
            p
        } else {
            let q = (summary.mean - lower) / s;
            quality_index = Some(q);
            reasons.push(format!(
                "quality index {q:.2} = (mean {:.2} % − limit {lower:.1} %) / standard deviation {s:.2} over {} {noun}s",
                summary.mean, summary.n
            ));
            percent_within_limits(summary.n, q).unwrap_or(0.0)
        };
        let accepted = estimate >= min_pwl_pct - COMPARE_EPS;
        reasons.push(format!(
            "estimated percent within limits {estimate:.1} % {} the {min_pwl_pct:.1} % required",
            if accepted { "meets" } else { "is below" }
        ));
        DensityDecision {
            accepted,
            reasons,
            quality_index,
            pwl: Some(estimate),
        }
    }
}

impl DensityDecision {
    /// A decision with no quality-index figures.
    fn plain(accepted: bool, reasons: Vec<String>) -> Self {
        Self {
            accepted,
            reasons,
            quality_index: None,
            pwl: None,
        }
    }
}

/// Decides a lot with the per-test moisture window (the default judgement).
pub fn evaluate_lot(
    tests: &[LotTestInput],
    rule: &AcceptanceRule,
    limits: &SpecLimits,
) -> LotVerdict {
    evaluate_lot_with(tests, rule, limits, &MoistureJudgement::PerTest)
}

/// Decides a lot: standings, statistics over counted tests, the density rule, then moisture
/// as the clause judges it (see the module doc).
pub fn evaluate_lot_with(
    tests: &[LotTestInput],
    rule: &AcceptanceRule,
    limits: &SpecLimits,
    moisture: &MoistureJudgement,
) -> LotVerdict {
    let standings = standings(tests);
    let sorted = SortedTests::of(tests, &standings);
    let counted = &sorted.counted;
    let values: Vec<f64> = counted.iter().map(|t| t.relative_compaction_pct).collect();
    let summary = summarize(&values);
    let mut verdict = LotVerdict {
        n: counted.len(),
        mean: summary.map(|s| s.mean),
        std_dev: summary.and_then(|s| s.std_dev),
        min: summary.map(|s| s.min),
        max: summary.map(|s| s.max),
        quality_index: None,
        pwl: None,
        accepted: false,
        reasons: Vec::new(),
        standings: standings.clone(),
        failing_without_retest: counted.iter().filter(|t| !t.passed).map(|t| t.id).collect(),
        unjudged: sorted.unjudged.iter().map(|t| t.id).collect(),
        moisture_pwl: None,
    };
    let unjudged_reasons = sorted.unjudged_reasons();
    let Some(summary) = summary else {
        verdict.reasons.push(format!(
            "no counted tests in the lot ({} voided, {} superseded): nothing to accept",
            sorted.voided, sorted.superseded
        ));
        verdict.reasons.extend(unjudged_reasons);
        return verdict;
    };
    if let Some(t) = counted
        .iter()
        .find(|t| !t.relative_compaction_pct.is_finite() || !t.moisture_measure.is_finite())
    {
        verdict.reasons.push(format!(
            "{} has no usable relative compaction or moisture deviation; the lot cannot be judged",
            t.name()
        ));
        return verdict;
    }
    let labelled: Vec<(String, f64)> = counted
        .iter()
        .map(|t| (t.name(), t.relative_compaction_pct))
        .collect();
    let density = decide_density(
        &labelled,
        limits.rc_min_pct,
        rule,
        &summary,
        "test",
        &limits.rounding,
    );
    let mut accepted = density.accepted;
    let mut reasons = density.reasons;
    let m = decide_moisture(counted, rule, limits, moisture);
    accepted &= m.accepted;
    reasons.extend(m.reasons);
    verdict.moisture_pwl = m.pwl;
    reasons.extend(air_voids_reasons(counted, limits, &mut accepted));
    if !unjudged_reasons.is_empty() {
        accepted = false;
        reasons.extend(unjudged_reasons);
    }
    reasons.extend(sorted.out_of_statistics_reasons());
    verdict.accepted = accepted;
    verdict.reasons = reasons;
    verdict.quality_index = density.quality_index;
    verdict.pwl = density.pwl;
    verdict
}

/// A lot's tests sorted by standing: those counted, those that cannot be judged, and how
/// many are out of the statistics for each other reason.
struct SortedTests<'a> {
    counted: Vec<&'a LotTestInput>,
    unjudged: Vec<&'a LotTestInput>,
    voided: usize,
    superseded: usize,
    earlier: usize,
}

impl<'a> SortedTests<'a> {
    fn of(tests: &'a [LotTestInput], standings: &[(i64, TestStanding)]) -> Self {
        let mut sorted = SortedTests {
            counted: Vec::new(),
            unjudged: Vec::new(),
            voided: 0,
            superseded: 0,
            earlier: 0,
        };
        for (t, (_, s)) in tests.iter().zip(standings) {
            match s {
                TestStanding::Counted => sorted.counted.push(t),
                TestStanding::CannotBeJudged => sorted.unjudged.push(t),
                TestStanding::Voided => sorted.voided += 1,
                TestStanding::Superseded { .. } => sorted.superseded += 1,
                TestStanding::EarlierSample => sorted.earlier += 1,
            }
        }
        sorted
    }

    /// One reason per test that cannot be judged: it blocks acceptance until voided or retested.
    fn unjudged_reasons(&self) -> Vec<String> {
        self.unjudged
            .iter()
            .map(|t| {
                format!(
                    "{} cannot be judged: {}; it is out of the statistics and the lot cannot be accepted until it is voided or retested",
                    t.name(),
                    t.unjudged.as_deref().unwrap_or("no usable figures")
                )
            })
            .collect()
    }

    /// What is on record but out of the statistics, said so on the verdict.
    fn out_of_statistics_reasons(&self) -> Vec<String> {
        let (voided, superseded, earlier) = (self.voided, self.superseded, self.earlier);
        let mut reasons = Vec::new();
        if voided + superseded > 0 {
            reasons.push(format!(
                "{voided} voided and {superseded} superseded test(s) are on record but out of the statistics"
            ));
        }
        if earlier > 0 {
            reasons.push(format!(
                "{earlier} test(s) of an earlier sample are on record but out of the statistics: the lot is judged on its latest random sample"
            ));
        }
        reasons
    }
}

/// The air-voids part of a lot decision: a per-test criterion under every rule, when the
/// clause sets a maximum.
fn air_voids_reasons(
    counted: &[&LotTestInput],
    limits: &SpecLimits,
    accepted: &mut bool,
) -> Vec<String> {
    let Some(max) = limits.max_air_voids_pct else {
        return Vec::new();
    };
    let failing: Vec<String> = counted
        .iter()
        .filter(|t| !t.air_voids_ok)
        .map(|t| {
            format!(
                "{} has air voids above the clause's maximum; under this clause that fails the lot",
                t.name()
            )
        })
        .collect();
    if failing.is_empty() {
        return vec![format!(
            "every counted test has air voids at most {} %",
            limits.rounding.limit_text(max)
        )];
    }
    *accepted = false;
    failing
}

/// The moisture part of a lot decision.
struct MoistureDecision {
    accepted: bool,
    reasons: Vec<String>,
    pwl: Option<f64>,
}

/// Judges the counted tests' moisture as the clause says: per test, or by two-sided PWL.
fn decide_moisture(
    counted: &[&LotTestInput],
    rule: &AcceptanceRule,
    limits: &SpecLimits,
    moisture: &MoistureJudgement,
) -> MoistureDecision {
    let window = limits.moisture_window_words();
    let mut reasons = Vec::new();
    let mut accepted = true;
    if let MoistureJudgement::PercentWithinLimits { min_pwl_pct } = moisture {
        let devs: Vec<f64> = counted.iter().map(|t| t.moisture_measure).collect();
        let (low, high) = limits.moisture.bounds();
        let pwl = two_sided_pwl(&devs, low, high);
        return match pwl {
            Some(p) if p >= min_pwl_pct - COMPARE_EPS => MoistureDecision {
                accepted: true,
                reasons: vec![format!(
                    "moisture percent within limits {p:.1} % (window {window}) meets the {min_pwl_pct:.1} % required"
                )],
                pwl: Some(p),
            },
            Some(p) => MoistureDecision {
                accepted: false,
                reasons: vec![format!(
                    "moisture percent within limits {p:.1} % (window {window}) is below the {min_pwl_pct:.1} % required"
                )],
                pwl: Some(p),
            },
            None => MoistureDecision {
                accepted: false,
                reasons: vec![format!(
                    "moisture percent within limits needs at least 3 counted tests; there are {}",
                    devs.len()
                )],
                pwl: None,
            },
        };
    }
    let failures: Vec<&&LotTestInput> = counted
        .iter()
        .filter(|t| !limits.moisture_ok(t.moisture_measure))
        .collect();
    if failures.is_empty() {
        reasons.push(format!(
            "every counted test is inside the moisture window of {window}"
        ));
    } else {
        accepted = false;
        for t in &failures {
            reasons.push(format!(
                "{} at {} is outside the moisture window of {window}; under this clause that fails the lot",
                t.name(),
                limits.measure_words(t.moisture_measure)
            ));
        }
    }
    if matches!(rule, AcceptanceRule::EveryTest) {
        for t in counted.iter().filter(|t| {
            !t.passed
                && t.air_voids_ok
                && limits.density_ok(t.relative_compaction_pct)
                && limits.moisture_ok(t.moisture_measure)
        }) {
            accepted = false;
            reasons.push(format!(
                "{} was judged failed when reduced, though its figures meet these limits; re-judge it or retest",
                t.name()
            ));
        }
    }
    MoistureDecision {
        accepted,
        reasons,
        pwl: None,
    }
}

/// Two-sided percent within limits [lower, upper] (AASHTO R 9): PWL_U + PWL_L − 100 with
/// Q_L = (x̄ − L)/s and Q_U = (U − x̄)/s; 100 or 0 without spread; None for n < 3.
pub fn two_sided_pwl(values: &[f64], lower: f64, upper: f64) -> Option<f64> {
    let s = summarize(values)?;
    if s.n < 3 {
        return None;
    }
    let sd = s.std_dev.unwrap_or(0.0);
    if sd <= 1e-12 * s.mean.abs().max(1.0) {
        let inside = s.mean >= lower - COMPARE_EPS && s.mean <= upper + COMPARE_EPS;
        return Some(if inside { 100.0 } else { 0.0 });
    }
    let pwl_l = percent_within_limits(s.n, (s.mean - lower) / sd)?;
    let pwl_u = percent_within_limits(s.n, (upper - s.mean) / sd)?;
    Some((pwl_u + pwl_l - 100.0).clamp(0.0, 100.0))
}

/// Judges a plain list of values against a lower limit (the calculator endpoint); refuses unusable input.
pub fn evaluate_values(
    values: &[f64],
    lower_limit: f64,
    rule: &AcceptanceRule,
) -> Result<ValuesSummary, ReductionError> {
    if !lower_limit.is_finite() {
        return Err(ReductionError::NotFinite {
            field: "lower_limit",
            what: "lower limit",
            value: lower_limit,
        });
    }
    if let Some(v) = values.iter().find(|v| !v.is_finite()) {
        return Err(ReductionError::NotFinite {
            field: "values",
            what: "every value",
            value: *v,
        });
    }
    match rule {
        AcceptanceRule::MeanAndMin { allowance_pct }
            if !allowance_pct.is_finite() || *allowance_pct < 0.0 =>
        {
            return Err(ReductionError::OutOfRange {
                field: "allowance_pct",
                reason: format!(
                    "allowance {allowance_pct} must be a number of points, zero or more"
                ),
            });
        }
        AcceptanceRule::QualityIndex { min_pwl_pct } if !(0.0..=100.0).contains(min_pwl_pct) => {
            return Err(ReductionError::OutOfRange {
                field: "min_pwl_pct",
                reason: format!(
                    "required percent within limits {min_pwl_pct} must lie within 0–100 %"
                ),
            });
        }
        AcceptanceRule::QualityIndex { .. } if values.len() < 3 => {
            return Err(ReductionError::TooFewValues {
                field: "values",
                reason: format!(
                    "the quality-index rule needs at least 3 values; {} given",
                    values.len()
                ),
            });
        }
        _ => {}
    }
    let Some(summary) = summarize(values) else {
        return Err(ReductionError::TooFewValues {
            field: "values",
            reason: "no values given".to_string(),
        });
    };
    let labelled: Vec<(String, f64)> = values
        .iter()
        .enumerate()
        .map(|(i, v)| (format!("value {}", i + 1), *v))
        .collect();
    let d = decide_density(
        &labelled,
        lower_limit,
        rule,
        &summary,
        "value",
        &Rounding::default(),
    );
    Ok(ValuesSummary {
        n: summary.n,
        mean: summary.mean,
        std_dev: summary.std_dev,
        quality_index: d.quality_index,
        pwl: d.pwl,
        accepted: d.accepted,
        reasons: d.reasons,
    })
}

#[cfg(test)]
mod tests {
    use super::super::verdict::MoistureWindow;
    use super::*;
    use proptest::prelude::*;

    const LIMITS: SpecLimits = SpecLimits {
        rc_min_pct: 95.0,
        moisture: MoistureWindow::PointsOfOmc {
            below_pct: 2.0,
            above_pct: 2.0,
        },
        max_air_voids_pct: None,
        rounding: Rounding::E29_ONE_DECIMAL,
    };

    fn t(id: i64, rc: f64, dev: f64) -> LotTestInput {
        LotTestInput {
            id,
            label: String::new(),
            relative_compaction_pct: rc,
            moisture_measure: dev,
            passed: rc >= 95.0 && dev.abs() <= 2.0,
            voided: false,
            retest_of: None,
            tested_at: String::new(),
            unjudged: None,
            air_voids_ok: true,
            earlier_sample: false,
        }
    }

    #[test]
    fn sample_statistics_use_n_minus_one() {
        // Sample standard deviation of 1, 2, 3, 4 = √(5/3) = 1.290994 (n − 1 divisor).
        let s = summarize(&[1.0, 2.0, 3.0, 4.0]).unwrap();
        assert!((s.std_dev.unwrap() - 1.290_994_448_7).abs() < 1e-9);
        assert_eq!((s.n, s.mean, s.min, s.max), (4, 2.5, 1.0, 4.0));
        assert_eq!(summarize(&[7.0]).unwrap().std_dev, None);
        assert!(summarize(&[]).is_none());
    }

    #[test]
    fn mean_and_min_reads_as_a_reviewer_expects() {
        let tests = [
            t(11, 97.0, 0.5),
            t(12, 96.5, -0.5),
            t(14, 91.8, 0.0),
            t(15, 98.0, 1.0),
            t(16, 97.7, -1.0),
        ];
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
            &LIMITS,
        );
        assert!(!v.accepted);
        assert_eq!(v.n, 5);
        assert!((v.mean.unwrap() - 96.2).abs() < 1e-9);
        assert_eq!((v.min, v.max), (Some(91.8), Some(98.0)));
        assert!(
            v.reasons
                .contains(&"mean relative compaction 96.2 % meets the 95.0 % minimum".to_string()),
            "{:?}",
            v.reasons
        );
        assert!(v.reasons.contains(
            &"test 14 at 91.8 % is below the 93.0 % floor (95.0 % less 2.0 allowance)".to_string()
        ));
        assert_eq!(v.failing_without_retest, vec![14]);
        // Raise test 14 to 93.5 %: above the floor, lot accepted although one test is below 95.
        let mut tests = tests;
        tests[2].relative_compaction_pct = 93.5;
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
            &LIMITS,
        );
        assert!(v.accepted, "{:?}", v.reasons);
        assert!(v.reasons[1].starts_with("every counted test is at or above the 93.0 % floor"));
    }

    #[test]
    fn every_test_rule_lists_each_failure() {
        let tests = [t(1, 96.0, 0.0), t(2, 94.1, 0.0), t(3, 97.0, 2.6)];
        let v = evaluate_lot(&tests, &AcceptanceRule::EveryTest, &LIMITS);
        assert!(!v.accepted);
        assert!(
            v.reasons
                .contains(&"test 2 at 94.1 % is below the 95.0 % minimum".to_string()),
            "{:?}",
            v.reasons
        );
        assert!(
            v.reasons.iter().any(|r| r
                .starts_with("test 3 at 2.6 points wet of optimum is outside the moisture window")
                && r.ends_with("under this clause that fails the lot"))
        );
        let ok = [t(1, 96.0, 0.0), t(2, 95.0, -2.0), t(3, 97.0, 1.9)];
        let v = evaluate_lot(&ok, &AcceptanceRule::EveryTest, &LIMITS);
        assert!(v.accepted, "{:?}", v.reasons);
        assert_eq!(
            v.reasons[0],
            "all 3 counted tests are at or above the 95.0 % minimum (lowest 95.0 %)"
        );
        // A test judged failed when reduced fails the lot even if these limits would pass it.
        let mut odd = ok;
        odd[0].passed = false;
        let v = evaluate_lot(&odd, &AcceptanceRule::EveryTest, &LIMITS);
        assert!(
            !v.accepted
                && v.reasons
                    .iter()
                    .any(|r| r.contains("test 1 was judged failed"))
        );
    }

    #[test]
    fn an_air_voids_maximum_fails_the_lot_under_every_rule() {
        let limits = SpecLimits {
            max_air_voids_pct: Some(8.0),
            ..LIMITS
        };
        let mut tests = vec![t(1, 97.0, 0.0), t(2, 98.0, 0.5), t(3, 97.5, -0.5)];
        for rule in [
            AcceptanceRule::EveryTest,
            AcceptanceRule::MeanAndMin { allowance_pct: 3.0 },
        ] {
            let v = evaluate_lot(&tests, &rule, &limits);
            assert!(v.accepted, "{rule:?}: {:?}", v.reasons);
            assert!(
                v.reasons
                    .iter()
                    .any(|r| r == "every counted test has air voids at most 8.0 %")
            );
        }
        tests[1].air_voids_ok = false;
        tests[1].passed = false;
        for rule in [
            AcceptanceRule::EveryTest,
            AcceptanceRule::MeanAndMin { allowance_pct: 3.0 },
        ] {
            let v = evaluate_lot(&tests, &rule, &limits);
            assert!(!v.accepted, "{rule:?}");
            assert!(
                v.reasons
                    .iter()
                    .any(|r| r.contains("test 2 has air voids above")),
                "{:?}",
                v.reasons
            );
            // Not mistaken for a test judged failed with figures inside the limits.
            assert!(
                !v.reasons
                    .iter()
                    .any(|r| r.contains("though its figures meet"))
            );
        }
    }

    #[test]
    fn moisture_window_holds_under_every_rule_by_default() {
        let tests = [
            t(1, 97.0, 0.0),
            t(2, 98.0, -2.5),
            t(3, 99.0, 0.5),
            t(4, 98.5, 1.0),
        ];
        for rule in [
            AcceptanceRule::EveryTest,
            AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
            AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
        ] {
            let v = evaluate_lot(&tests, &rule, &LIMITS);
            assert!(!v.accepted, "{rule:?} {:?}", v.reasons);
            assert!(
                v.reasons
                    .iter()
                    .any(|r| r.contains("test 2 at 2.5 points dry of optimum")
                        && r.contains("fails the lot")),
                "{rule:?} {:?}",
                v.reasons
            );
        }
        // Every test 4 points wet: dense enough, but the quality-index lot is not accepted.
        let wet = [
            t(1, 97.0, 4.0),
            t(2, 98.0, 4.1),
            t(3, 99.0, 3.9),
            t(4, 98.5, 4.0),
        ];
        let v = evaluate_lot(
            &wet,
            &AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
            &LIMITS,
        );
        assert!(!v.accepted && v.pwl == Some(100.0), "{:?}", v.reasons);
    }

    #[test]
    fn two_sided_moisture_pwl_is_the_sum_less_one_hundred() {
        // Deviations −1.0, 0.0, 0.5, 1.0, 1.5 in a −2 to +2 window: x̄ = 0.4, s = 0.9618 (n − 1).
        let devs = [-1.0, 0.0, 0.5, 1.0, 1.5];
        let mean: f64 = 0.4;
        let sd: f64 = (((-1.4f64).powi(2) + 0.16 + 0.01 + 0.36 + 1.21) / 4.0).sqrt();
        // PWL_L and PWL_U each 100 (1 − I_x(1.5, 1.5)), x = 1/2 − Q √5 / 8 (AASHTO R 9), via statrs.
        let side = |q: f64| {
            100.0
                * (1.0
                    - statrs::function::beta::beta_reg(
                        1.5,
                        1.5,
                        (0.5 - q * 5f64.sqrt() / 8.0).clamp(0.0, 1.0),
                    ))
        };
        let expected = side((mean + 2.0) / sd) + side((2.0 - mean) / sd) - 100.0;
        let got = two_sided_pwl(&devs, -2.0, 2.0).unwrap();
        assert!((got - expected).abs() < 1e-9, "{got} vs {expected}");
        // Pinned: the same sum with Python mpmath 1.3.0 betainc = 98.8997 %.
        assert!((got - 98.8997).abs() < 1e-3, "{got}");
        let tests: Vec<LotTestInput> = devs
            .iter()
            .enumerate()
            .map(|(i, d)| t(i as i64 + 1, 97.0 + i as f64 * 0.3, *d))
            .collect();
        let rule = AcceptanceRule::QualityIndex { min_pwl_pct: 80.0 };
        let pass = evaluate_lot_with(
            &tests,
            &rule,
            &LIMITS,
            &MoistureJudgement::PercentWithinLimits {
                min_pwl_pct: expected.floor(),
            },
        );
        assert!(pass.accepted, "{:?}", pass.reasons);
        assert!((pass.moisture_pwl.unwrap() - expected).abs() < 1e-9);
        let fail = evaluate_lot_with(
            &tests,
            &rule,
            &LIMITS,
            &MoistureJudgement::PercentWithinLimits {
                min_pwl_pct: expected.ceil(),
            },
        );
        assert!(!fail.accepted);
        assert!(
            fail.reasons
                .iter()
                .any(|r| r.starts_with("moisture percent within limits") && r.contains("is below"))
        );
        assert_eq!(two_sided_pwl(&[0.0, 1.0], -2.0, 2.0), None);
    }

    #[test]
    fn a_chain_of_two_failed_retests_counts_once() {
        // fail → fail → pass at one location: only the last counts, under every rule.
        let mut a = t(1, 90.0, 0.0);
        a.tested_at = "2026-09-01T08:00:00Z".into();
        let mut b = t(2, 91.0, 0.0);
        b.retest_of = Some(1);
        b.tested_at = "2026-09-02T08:00:00Z".into();
        let mut c = t(3, 96.0, 0.0);
        c.retest_of = Some(2);
        c.tested_at = "2026-09-03T08:00:00Z".into();
        let d = t(4, 98.0, 0.0);
        let tests = [a, b.clone(), c, d];
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::MeanAndMin { allowance_pct: 3.0 },
            &LIMITS,
        );
        assert_eq!(v.n, 2);
        // Mean of 96 and 98 = 97.0 (arithmetic).
        assert_eq!(v.mean, Some(97.0));
        // fail → fail: the latest failure stands alone.
        let v = evaluate_lot(&tests[..2], &AcceptanceRule::EveryTest, &LIMITS);
        assert_eq!(
            v.standings,
            vec![
                (1, TestStanding::Superseded { by: 2 }),
                (2, TestStanding::Counted)
            ]
        );
        assert_eq!((v.n, v.failing_without_retest.clone()), (1, vec![2]));
    }

    #[test]
    fn a_test_that_cannot_be_judged_is_out_and_blocks() {
        let mut bad = t(2, 0.0, 0.0);
        bad.unjudged = Some("oversize correction refused".into());
        bad.passed = false;
        let tests = [t(1, 97.0, 0.0), bad, t(3, 96.0, 0.0), t(4, 98.0, 0.0)];
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
            &LIMITS,
        );
        assert_eq!(v.n, 3);
        assert_eq!(v.min, Some(96.0));
        assert_eq!(v.unjudged, vec![2]);
        assert!(!v.accepted);
        assert!(
            v.reasons
                .iter()
                .any(|r| r.starts_with("test 2 cannot be judged: oversize correction refused"))
        );
        assert_eq!(TestStanding::CannotBeJudged.code(), "cannot_be_judged");
    }

    #[test]
    fn an_earlier_sample_is_on_record_only() {
        let mut old = t(1, 80.0, 0.0);
        old.earlier_sample = true;
        let tests = [old, t(2, 97.0, 0.0), t(3, 97.5, 0.0), t(4, 98.0, 0.0)];
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
            &LIMITS,
        );
        assert_eq!(v.standings[0], (1, TestStanding::EarlierSample));
        assert_eq!(v.n, 3);
        assert!(v.accepted, "{:?}", v.reasons);
    }

    #[test]
    fn quality_index_figures() {
        let tests = [
            t(1, 96.0, 0.0),
            t(2, 97.5, 0.0),
            t(3, 95.5, 0.0),
            t(4, 94.5, 0.0),
            t(5, 98.0, 0.0),
        ];
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
            &LIMITS,
        );
        // x̄ = 96.3, s = 1.4405 (n − 1), Q_L = 1.3/1.4405 = 0.9025; PWL from the beta formula (AASHTO R 9).
        assert!((v.mean.unwrap() - 96.3).abs() < 1e-9);
        assert!((v.std_dev.unwrap() - 1.440_486_0).abs() < 1e-6);
        let q = v.quality_index.unwrap();
        assert!((q - 0.902_473_8).abs() < 1e-6, "{q}");
        // PWL = 100 (1 − I_x(1.5, 1.5)), x = 1/2 − Q √5 / 8, cross-checked with statrs' beta_reg.
        let x = 0.5 - q * 5f64.sqrt() / 8.0;
        let reference = 100.0 * (1.0 - statrs::function::beta::beta_reg(1.5, 1.5, x));
        assert!((v.pwl.unwrap() - reference).abs() < 1e-9);
        // Pinned: Python mpmath 1.3.0, 100 (1 − betainc(1.5, 1.5, 0, 0.247751, regularized)) = 80.6975 %.
        assert!((v.pwl.unwrap() - 80.6975).abs() < 1e-3, "{:?}", v.pwl);
        assert!(!v.accepted, "{:?}", v.reasons);
        assert!(
            v.reasons
                .iter()
                .any(|r| r.contains("is below the 90.0 % required"))
        );
        let v = evaluate_lot(
            &tests,
            &AcceptanceRule::QualityIndex { min_pwl_pct: 75.0 },
            &LIMITS,
        );
        assert!(
            v.accepted
                && v.reasons
                    .iter()
                    .any(|r| r.contains("meets the 75.0 % required"))
        );
    }

    #[test]
    fn no_spread_is_all_or_nothing() {
        let rule = AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 };
        let high = [t(1, 96.0, 0.0), t(2, 96.0, 0.0), t(3, 96.0, 0.0)];
        let v = evaluate_lot(&high, &rule, &LIMITS);
        assert_eq!(
            (v.pwl, v.quality_index, v.accepted),
            (Some(100.0), None, true)
        );
        assert!(v.reasons[0].contains("with no spread the percent within limits is 100 %"));
        let low = [t(1, 94.0, 0.0), t(2, 94.0, 0.0), t(3, 94.0, 0.0)];
        let v = evaluate_lot(&low, &rule, &LIMITS);
        assert_eq!((v.pwl, v.accepted), (Some(0.0), false));
        let two = [t(1, 96.0, 0.0), t(2, 97.0, 0.0)];
        let v = evaluate_lot(&two, &rule, &LIMITS);
        assert!(
            !v.accepted && v.reasons[0].contains("needs at least 3 counted tests; there are 2")
        );
    }

    #[test]
    fn voided_and_superseded_tests_are_out_of_the_statistics() {
        let mut a = t(1, 90.0, 0.0); // failed
        let mut b = t(2, 92.0, 0.0); // failed retest of 1
        b.retest_of = Some(1);
        let mut c = t(3, 96.0, 0.0); // passing retest of 2: supersedes 1 and 2
        c.retest_of = Some(2);
        let mut v_ = t(4, 80.0, 0.0);
        v_.voided = true;
        let d = t(5, 97.0, 0.0);
        let e = t(6, 93.0, 0.0); // failed, retest voided: still owed
        let mut f = t(7, 99.0, 0.0);
        f.retest_of = Some(6);
        f.voided = true;
        let tests = [a.clone(), b.clone(), c, v_, d, e, f];
        let v = evaluate_lot(&tests, &AcceptanceRule::EveryTest, &LIMITS);
        assert_eq!(
            v.standings,
            vec![
                (1, TestStanding::Superseded { by: 3 }),
                (2, TestStanding::Superseded { by: 3 }),
                (3, TestStanding::Counted),
                (4, TestStanding::Voided),
                (5, TestStanding::Counted),
                (6, TestStanding::Counted),
                (7, TestStanding::Voided),
            ]
        );
        assert_eq!(v.n, 3);
        assert_eq!(v.min, Some(93.0));
        assert_eq!(v.failing_without_retest, vec![6]);
        assert!(
            v.reasons.iter().any(|r| r
                == "2 voided and 2 superseded test(s) are on record but out of the statistics")
        );
        // A cycle in retest links (bad data) does not hang: one location, one value.
        a.retest_of = Some(2);
        b.retest_of = Some(1);
        let s = standings(&[a, b]);
        assert_eq!(
            s,
            vec![
                (1, TestStanding::Superseded { by: 2 }),
                (2, TestStanding::Counted)
            ]
        );
        assert_eq!(TestStanding::Superseded { by: 3 }.code(), "superseded");
    }

    #[test]
    fn empty_lot_is_not_accepted() {
        let v = evaluate_lot(&[], &AcceptanceRule::EveryTest, &LIMITS);
        assert!(!v.accepted && v.n == 0 && v.mean.is_none());
        assert!(v.reasons[0].starts_with("no counted tests in the lot"));
        let mut only = t(1, 99.0, 0.0);
        only.voided = true;
        let v = evaluate_lot(
            &[only],
            &AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
            &LIMITS,
        );
        assert!(!v.accepted && v.reasons[0].contains("1 voided"));
        let v = evaluate_lot(&[t(1, f64::NAN, 0.0)], &AcceptanceRule::EveryTest, &LIMITS);
        assert!(!v.accepted && v.reasons[0].contains("no usable relative compaction"));
    }

    #[test]
    fn values_calculator() {
        let s = evaluate_values(
            &[96.0, 97.5, 95.5, 94.5, 98.0],
            95.0,
            &AcceptanceRule::QualityIndex { min_pwl_pct: 75.0 },
        )
        .unwrap();
        assert!(s.accepted && s.n == 5 && s.pwl.is_some());
        let s = evaluate_values(
            &[96.0, 94.0],
            95.0,
            &AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
        )
        .unwrap();
        assert!(
            s.accepted
                && s.reasons[0] == "mean relative compaction 95.0 % meets the 95.0 % minimum"
        );
        let s = evaluate_values(&[96.0, 94.0], 95.0, &AcceptanceRule::EveryTest).unwrap();
        assert!(!s.accepted && s.reasons[0] == "value 2 at 94.0 % is below the 95.0 % minimum");
        let bad = [
            (
                evaluate_values(&[], 95.0, &AcceptanceRule::EveryTest),
                "values",
            ),
            (
                evaluate_values(&[96.0, f64::NAN], 95.0, &AcceptanceRule::EveryTest),
                "values",
            ),
            (
                evaluate_values(
                    &[96.0, 97.0],
                    95.0,
                    &AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
                ),
                "values",
            ),
            (
                evaluate_values(&[96.0], f64::INFINITY, &AcceptanceRule::EveryTest),
                "lower_limit",
            ),
            (
                evaluate_values(
                    &[96.0],
                    95.0,
                    &AcceptanceRule::MeanAndMin {
                        allowance_pct: -1.0,
                    },
                ),
                "allowance_pct",
            ),
            (
                evaluate_values(
                    &[96.0; 4],
                    95.0,
                    &AcceptanceRule::QualityIndex { min_pwl_pct: 190.0 },
                ),
                "min_pwl_pct",
            ),
        ];
        for (result, field) in bad {
            assert_eq!(result.unwrap_err().field(), field);
        }
    }

    #[test]
    fn rule_codes_labels_and_json() {
        let rules = [
            (
                AcceptanceRule::EveryTest,
                "every_test",
                serde_json::json!({"rule": "every_test"}),
            ),
            (
                AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
                "mean_and_min",
                serde_json::json!({"rule": "mean_and_min", "allowance_pct": 2.0}),
            ),
            (
                AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
                "quality_index",
                serde_json::json!({"rule": "quality_index", "min_pwl_pct": 90.0}),
            ),
        ];
        for (rule, code, json) in rules {
            assert_eq!(rule.code(), code);
            assert_eq!(serde_json::to_value(rule).unwrap(), json);
            assert_eq!(
                serde_json::from_value::<AcceptanceRule>(json).unwrap(),
                rule
            );
            assert!(!rule.label().is_empty());
        }
    }

    proptest! {
        #[test]
        fn lot_evaluation_never_panics(
            raw in proptest::collection::vec((0i64..12, 60.0f64..110.0, -5.0f64..5.0, any::<bool>(), any::<bool>(), proptest::option::of(0i64..12)), 0..14),
            rule_kind in 0u8..3,
        ) {
            let tests: Vec<LotTestInput> = raw.iter().map(|&(id, rc, dev, passed, voided, retest_of)| LotTestInput {
                id,
                label: String::new(), relative_compaction_pct: rc, moisture_measure: dev, passed, voided, retest_of,
                tested_at: String::new(), unjudged: None, earlier_sample: false, air_voids_ok: true,
            }).collect();
            let rule = match rule_kind {
                0 => AcceptanceRule::EveryTest,
                1 => AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
                _ => AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
            };
            let v = evaluate_lot(&tests, &rule, &LIMITS);
            prop_assert_eq!(v.standings.len(), tests.len());
            prop_assert!(v.n <= tests.len());
            prop_assert!(!v.reasons.is_empty());
        }
    }
}
