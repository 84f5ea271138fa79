//! Lot acceptance: which tests count (voids and superseded failures are out),
//! the lot statistics, and the decision under one of three rules with reasons
//! a reviewer reads. Also the percent-within-limits estimate of the quality-index
//! method (AASHTO R 9; FHWA quality-assurance practice) and the regularised
//! incomplete beta function it rests on.
//!
//! Moisture: under `every_test` and `mean_and_min` a counted test outside the
//! moisture window fails the lot and the reasons say so. Under `quality_index`
//! the statistic is on density alone: moisture failures are listed as reasons
//! (so the reviewer sees them and can order rework) but the percent within
//! limits decides. A single-sided density statistic cannot weigh a two-sided
//! moisture window, and mixing the two would hide which one failed.

use std::collections::{HashMap, HashSet, VecDeque};

use serde::{Deserialize, Serialize};

use super::verdict::{COMPARE_EPS, SpecLimits, deviation_words};
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
    /// Test id (also used in reasons: "test 14").
    pub id: i64,
    /// Relative compaction, percent.
    pub relative_compaction_pct: f64,
    /// Moisture deviation from OMC, points.
    pub moisture_deviation_pct: f64,
    /// The test's own verdict when reduced.
    pub passed: bool,
    /// Voided by the QC manager: out of every statistic.
    pub voided: bool,
    /// The test this one retests, if any.
    pub retest_of: Option<i64>,
}

/// Whether a test counts towards acceptance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "standing", rename_all = "snake_case")]
pub enum TestStanding {
    /// In the statistics.
    Counted,
    /// Voided: out of every statistic, still on record.
    Voided,
    /// A failure with a passing retest down its retest chain: out of the statistics, still on record.
    Superseded {
        /// The passing retest.
        by: i64,
    },
}

impl TestStanding {
    /// Stable code: "counted", "voided", "superseded".
    pub fn code(&self) -> &'static str {
        match self {
            Self::Counted => "counted",
            Self::Voided => "voided",
            Self::Superseded { .. } => "superseded",
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

/// Works out each test's standing: voided, superseded by a passing retest anywhere down its chain, or counted.
pub fn standings(tests: &[LotTestInput]) -> Vec<(i64, TestStanding)> {
    let mut children: HashMap<i64, Vec<usize>> = HashMap::new();
    for (i, t) in tests.iter().enumerate() {
        if let Some(parent) = t.retest_of
            && parent != t.id
            && !t.voided
        {
            children.entry(parent).or_default().push(i);
        }
    }
    tests
        .iter()
        .map(|t| {
            if t.voided {
                return (t.id, TestStanding::Voided);
            }
            if t.passed {
                return (t.id, TestStanding::Counted);
            }
            // Breadth-first down the retest chain: the nearest passing retest supersedes.
            let mut seen = HashSet::from([t.id]);
            let mut queue = VecDeque::from([t.id]);
            while let Some(id) = queue.pop_front() {
                for &ci in children.get(&id).map(Vec::as_slice).unwrap_or(&[]) {
                    let child = &tests[ci];
                    if !seen.insert(child.id) {
                        continue;
                    }
                    if child.passed {
                        return (t.id, TestStanding::Superseded { by: child.id });
                    }
                    queue.push_back(child.id);
                }
            }
            (t.id, TestStanding::Counted)
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

/// Judges labelled values against a lower limit under a rule (no moisture here).
fn decide_density(
    labelled: &[(String, f64)],
    lower: f64,
    rule: &AcceptanceRule,
    summary: &Summary,
) -> DensityDecision {
    let mut reasons = Vec::new();
    let mut accepted = true;
    let mut quality_index = None;
    let mut pwl = None;
    let meets = |v: f64, limit: f64| v >= limit - COMPARE_EPS;
    match rule {
        AcceptanceRule::EveryTest => {
            let below: Vec<&(String, f64)> =
                labelled.iter().filter(|(_, v)| !meets(*v, lower)).collect();
            if below.is_empty() {
                reasons.push(format!(
                    "all {} counted are at or above the {lower:.1} % minimum (lowest {:.1} %)",
                    summary.n, summary.min
                ));
            } else {
                accepted = false;
                for (label, v) in below {
                    reasons.push(format!(
                        "{label} at {v:.1} % is below the {lower:.1} % minimum"
                    ));
                }
            }
        }
        AcceptanceRule::MeanAndMin { allowance_pct } => {
            if !allowance_pct.is_finite() || *allowance_pct < 0.0 {
                return DensityDecision {
                    accepted: false,
                    reasons: vec![format!(
                        "the allowance {allowance_pct} is not a usable number of points; the lot cannot be judged"
                    )],
                    quality_index,
                    pwl,
                };
            }
            let floor = lower - allowance_pct;
            if meets(summary.mean, lower) {
                reasons.push(format!(
                    "mean relative compaction {:.1} % meets the {lower:.1} % minimum",
                    summary.mean
                ));
            } else {
                accepted = false;
                reasons.push(format!(
                    "mean relative compaction {:.1} % is below the {lower:.1} % minimum",
                    summary.mean
                ));
            }
            let below: Vec<&(String, f64)> =
                labelled.iter().filter(|(_, v)| !meets(*v, floor)).collect();
            if below.is_empty() {
                reasons.push(format!(
                    "every counted test is at or above the {floor:.1} % floor ({lower:.1} % less {allowance_pct:.1} allowance); lowest {:.1} %",
                    summary.min
                ));
            } else {
                accepted = false;
                for (label, v) in below {
                    reasons.push(format!(
                        "{label} at {v:.1} % is below the {floor:.1} % floor ({lower:.1} % less {allowance_pct:.1} allowance)"
                    ));
                }
            }
        }
        AcceptanceRule::QualityIndex { min_pwl_pct } => {
            if summary.n < 3 {
                return DensityDecision {
                    accepted: false,
                    reasons: vec![format!(
                        "the quality-index rule needs at least 3 counted tests; there {} {}",
                        if summary.n == 1 { "is" } else { "are" },
                        summary.n
                    )],
                    quality_index,
                    pwl,
                };
            }
            let s = summary.std_dev.unwrap_or(0.0);
            let no_spread = s <= 1e-12 * summary.mean.abs().max(1.0);
            let estimate = if no_spread {
                let p = if meets(summary.mean, lower) {
                    100.0
                } else {
                    0.0
                };
                reasons.push(format!(
                    "all {} counted tests read {:.1} %: with no spread the percent within limits is {p:.0} %",
                    summary.n, summary.mean
                ));
                p
            } else {
                let q = (summary.mean - lower) / s;
                quality_index = Some(q);
                reasons.push(format!(
                    "quality index {q:.2} = (mean {:.2} % − limit {lower:.1} %) / standard deviation {s:.2} over {} tests",
                    summary.mean, summary.n
                ));
                percent_within_limits(summary.n, q).unwrap_or(0.0)
            };
            pwl = Some(estimate);
            if estimate >= min_pwl_pct - COMPARE_EPS {
                reasons.push(format!(
                    "estimated percent within limits {estimate:.1} % meets the {min_pwl_pct:.1} % required"
                ));
            } else {
                accepted = false;
                reasons.push(format!(
                    "estimated percent within limits {estimate:.1} % is below the {min_pwl_pct:.1} % required"
                ));
            }
        }
    }
    DensityDecision {
        accepted,
        reasons,
        quality_index,
        pwl,
    }
}

/// Decides a lot: standings, statistics over counted tests, then the rule; see the module doc for moisture.
pub fn evaluate_lot(
    tests: &[LotTestInput],
    rule: &AcceptanceRule,
    limits: &SpecLimits,
) -> LotVerdict {
    let standings = standings(tests);
    let counted: Vec<&LotTestInput> = tests
        .iter()
        .zip(&standings)
        .filter(|(_, (_, s))| *s == TestStanding::Counted)
        .map(|(t, _)| t)
        .collect();
    let has_live_retest: HashSet<i64> = tests
        .iter()
        .filter(|t| !t.voided && t.retest_of != Some(t.id))
        .filter_map(|t| t.retest_of)
        .collect();
    let failing_without_retest: Vec<i64> = counted
        .iter()
        .filter(|t| !t.passed && !has_live_retest.contains(&t.id))
        .map(|t| t.id)
        .collect();
    let voided = standings
        .iter()
        .filter(|(_, s)| *s == TestStanding::Voided)
        .count();
    let superseded = standings
        .iter()
        .filter(|(_, s)| matches!(s, TestStanding::Superseded { .. }))
        .count();
    let values: Vec<f64> = counted.iter().map(|t| t.relative_compaction_pct).collect();
    let bad_value = counted
        .iter()
        .find(|t| !t.relative_compaction_pct.is_finite() || !t.moisture_deviation_pct.is_finite());
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
        standings,
        failing_without_retest,
    };
    let Some(summary) = summary else {
        verdict.reasons.push(format!(
            "no counted tests in the lot ({voided} voided, {superseded} superseded): nothing to accept"
        ));
        return verdict;
    };
    if let Some(t) = bad_value {
        verdict.reasons.push(format!(
            "test {} has no usable relative compaction or moisture deviation; the lot cannot be judged",
            t.id
        ));
        return verdict;
    }
    let labelled: Vec<(String, f64)> = counted
        .iter()
        .map(|t| (format!("test {}", t.id), t.relative_compaction_pct))
        .collect();
    let density = decide_density(&labelled, limits.rc_min_pct, rule, &summary);
    let mut accepted = density.accepted;
    let mut reasons = density.reasons;

    let moisture_failures: Vec<&&LotTestInput> = counted
        .iter()
        .filter(|t| !limits.moisture_ok(t.moisture_deviation_pct))
        .collect();
    let window = limits.moisture_window_words();
    match rule {
        AcceptanceRule::EveryTest | AcceptanceRule::MeanAndMin { .. } => {
            if moisture_failures.is_empty() {
                reasons.push(format!(
                    "every counted test is inside the moisture window of {window}"
                ));
            } else {
                accepted = false;
                for t in &moisture_failures {
                    reasons.push(format!(
                        "test {} at {} is outside the moisture window of {window}; under this rule that fails the lot",
                        t.id,
                        deviation_words(t.moisture_deviation_pct)
                    ));
                }
            }
            if matches!(rule, AcceptanceRule::EveryTest) {
                for t in counted.iter().filter(|t| {
                    !t.passed
                        && limits.density_ok(t.relative_compaction_pct)
                        && limits.moisture_ok(t.moisture_deviation_pct)
                }) {
                    accepted = false;
                    reasons.push(format!(
                        "test {} was judged failed when reduced, though its figures meet these limits; re-judge it or retest",
                        t.id
                    ));
                }
            }
        }
        AcceptanceRule::QualityIndex { .. } => {
            for t in &moisture_failures {
                reasons.push(format!(
                    "test {} at {} is outside the moisture window of {window} (noted: under the quality-index rule the density statistic decides)",
                    t.id,
                    deviation_words(t.moisture_deviation_pct)
                ));
            }
        }
    }
    if voided + superseded > 0 {
        reasons.push(format!(
            "{voided} voided and {superseded} superseded test(s) are on record but out of the statistics"
        ));
    }
    verdict.accepted = accepted;
    verdict.reasons = reasons;
    verdict.quality_index = density.quality_index;
    verdict.pwl = density.pwl;
    verdict
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
    let d = decide_density(&labelled, lower_limit, rule, &summary);
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

/// Estimated percent within limits from the quality index (AASHTO R 9): 100 (1 − I_x(a, a)),
/// a = (n − 2)/2, x = clamp(1/2 − Q √n / (2(n − 1)), 0, 1). None for n < 3 or Q not a number.
pub fn percent_within_limits(n: usize, quality_index: f64) -> Option<f64> {
    if n < 3 || quality_index.is_nan() {
        return None;
    }
    let nf = n as f64;
    let a = (nf - 2.0) / 2.0;
    let x = (0.5 - quality_index * nf.sqrt() / (2.0 * (nf - 1.0))).clamp(0.0, 1.0);
    let pwl = 100.0 * (1.0 - regularized_incomplete_beta(x, a, a));
    Some(pwl.clamp(0.0, 100.0))
}

/// Natural log of the gamma function for x > 0 (Lanczos, g = 7, nine terms; reflection below 1/2).
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const COEFFS: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Γ(x) Γ(1 − x) = π / sin(π x)
        let s = (std::f64::consts::PI * x).sin().abs();
        return std::f64::consts::PI.ln() - s.ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut sum = COEFFS[0];
    for (i, c) in COEFFS.iter().enumerate().skip(1) {
        sum += c / (x + i as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + sum.ln()
}

/// Continued fraction for the incomplete beta by the modified Lentz method (Numerical Recipes, betacf).
fn beta_continued_fraction(x: f64, a: f64, b: f64) -> f64 {
    const MAX_ITER: usize = 500;
    const EPS: f64 = 1e-15;
    const TINY: f64 = 1e-300;
    let qab = a + b;
    let qap = a + 1.0;
    let qam = a - 1.0;
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..=MAX_ITER {
        let m = m as f64;
        let m2 = 2.0 * m;
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        h *= d * c;
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        let del = d * c;
        h *= del;
        if (del - 1.0).abs() < EPS {
            break;
        }
    }
    h
}

/// Regularised incomplete beta I_x(a, b) (Numerical Recipes betai); NaN for a, b ≤ 0 or x not a number.
pub fn regularized_incomplete_beta(x: f64, a: f64, b: f64) -> f64 {
    if x.is_nan() || a.is_nan() || b.is_nan() || a <= 0.0 || b <= 0.0 {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let ln_front = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln();
    let front = ln_front.exp();
    let value = if x < (a + 1.0) / (a + b + 2.0) {
        front * beta_continued_fraction(x, a, b) / a
    } else {
        1.0 - front * beta_continued_fraction(1.0 - x, b, a) / b
    };
    value.clamp(0.0, 1.0)
}
