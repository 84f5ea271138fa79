//! Individuals and moving-range control charts with the Western Electric run rules.
//!
//! Limits (NIST/SEMATECH e-Handbook of Statistical Methods, §6.3.2.2, "Individuals Control
//! Charts"): MRᵢ = |xᵢ − xᵢ₋₁|, MR̄ their mean; individuals chart centre x̄, limits x̄ ± 2.66 MR̄
//! (2.66 = 3/d₂ with d₂ = 1.128 for n = 2); moving-range chart centre MR̄, upper limit 3.267 MR̄
//! (D₄ for n = 2), lower limit 0. σ̂ = MR̄ / 1.128 sets the 1σ and 2σ zones of the run rules.
//!
//! Run rules (Western Electric, as listed in the e-Handbook §6.3.2): 1 point beyond 3σ; 2 of 3
//! successive points beyond 2σ on one side; 4 of 5 beyond 1σ on one side; 8 in a row on one side.

use serde::Serialize;

/// d₂ for subgroups of 2 (NIST/SEMATECH e-Handbook §6.3.2.2).
pub const D2: f64 = 1.128;
/// Individuals-chart factor 3/d₂, as the e-Handbook rounds it.
pub const E2: f64 = 2.66;
/// Moving-range upper factor D₄ for n = 2 (e-Handbook §6.3.2.2).
pub const D4: f64 = 3.267;

/// A broken run rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RunRule {
    /// One point beyond 3σ.
    BeyondThreeSigma,
    /// Two of three successive points beyond 2σ on one side.
    TwoOfThreeBeyondTwoSigma,
    /// Four of five successive points beyond 1σ on one side.
    FourOfFiveBeyondOneSigma,
    /// Eight successive points on one side of the centre line.
    EightOnOneSide,
}

impl RunRule {
    /// The rule in words.
    pub fn words(self) -> &'static str {
        match self {
            Self::BeyondThreeSigma => "1 point beyond 3σ",
            Self::TwoOfThreeBeyondTwoSigma => "2 of 3 beyond 2σ on one side",
            Self::FourOfFiveBeyondOneSigma => "4 of 5 beyond 1σ on one side",
            Self::EightOnOneSide => "8 in a row on one side",
        }
    }
}

/// A rule broken at a point (the last point of the run that breaks it).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Signal {
    /// 0-based index of the point.
    pub index: usize,
    pub rule: RunRule,
}

/// Both charts of a series.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ImrChart {
    pub values: Vec<f64>,
    /// Moving ranges; `moving_ranges[i]` belongs to point i + 1.
    pub moving_ranges: Vec<f64>,
    pub mean: f64,
    pub mean_moving_range: f64,
    pub sigma: f64,
    pub ucl: f64,
    pub lcl: f64,
    pub mr_ucl: f64,
    pub signals: Vec<Signal>,
    /// Indices of moving ranges above their upper limit (`moving_ranges[i]`, point i + 1).
    pub mr_beyond: Vec<usize>,
}

/// Builds the charts; None with fewer than two points (no moving range exists).
pub fn imr_chart(values: &[f64]) -> Option<ImrChart> {
    if values.len() < 2 || values.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let moving_ranges: Vec<f64> = values.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    let mr_bar = moving_ranges.iter().sum::<f64>() / moving_ranges.len() as f64;
    let sigma = mr_bar / D2;
    let signals = run_rules(values, mean, sigma);
    let mr_ucl = D4 * mr_bar;
    let mr_beyond = (0..moving_ranges.len())
        .filter(|&i| moving_ranges[i] > mr_ucl)
        .collect();
    Some(ImrChart {
        values: values.to_vec(),
        moving_ranges,
        mean,
        mean_moving_range: mr_bar,
        sigma,
        ucl: mean + E2 * mr_bar,
        lcl: mean - E2 * mr_bar,
        mr_ucl,
        signals,
        mr_beyond,
    })
}

/// Points of the window ending at `i` (length `len`) beyond `k`σ on the side `sign`.
fn beyond(values: &[f64], i: usize, len: usize, mean: f64, k_sigma: f64, sign: f64) -> usize {
    let start = (i + 1).saturating_sub(len);
    values[start..=i]
        .iter()
        .filter(|v| sign * (*v - mean) > k_sigma)
        .count()
}

/// Every rule broken, point by point (a point may break several rules).
pub fn run_rules(values: &[f64], mean: f64, sigma: f64) -> Vec<Signal> {
    let mut out = Vec::new();
    if sigma <= 0.0 {
        return out;
    }
    for i in 0..values.len() {
        let mut hit = |rule| out.push(Signal { index: i, rule });
        if (values[i] - mean).abs() > 3.0 * sigma {
            hit(RunRule::BeyondThreeSigma);
        }
        for sign in [1.0, -1.0] {
            if i >= 2 && beyond(values, i, 3, mean, 2.0 * sigma, sign) >= 2 {
                hit(RunRule::TwoOfThreeBeyondTwoSigma);
            }
            if i >= 4 && beyond(values, i, 5, mean, sigma, sign) >= 4 {
                hit(RunRule::FourOfFiveBeyondOneSigma);
            }
            if i >= 7 && beyond(values, i, 8, mean, 0.0, sign) == 8 {
                hit(RunRule::EightOnOneSide);
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_by_hand() {
        // Hand arithmetic, written down: x = 10, 12, 11, 14, 13 → x̄ = 60/5 = 12;
        // MR = 2, 1, 3, 1 → MR̄ = 7/4 = 1.75; UCL = 12 + 2.66·1.75 = 16.655,
        // LCL = 12 − 4.655 = 7.345; UCL_MR = 3.267·1.75 = 5.71725; σ̂ = 1.75/1.128 = 1.55142.
        let c = imr_chart(&[10.0, 12.0, 11.0, 14.0, 13.0]).unwrap();
        assert_eq!(c.moving_ranges, vec![2.0, 1.0, 3.0, 1.0]);
        assert!((c.mean - 12.0).abs() < 1e-12);
        assert!((c.mean_moving_range - 1.75).abs() < 1e-12);
        assert!((c.ucl - 16.655).abs() < 1e-9);
        assert!((c.lcl - 7.345).abs() < 1e-9);
        assert!((c.mr_ucl - 5.717_25).abs() < 1e-9);
        assert!((c.sigma - 1.551_42).abs() < 1e-5);
        assert!(c.signals.is_empty());
        assert!(c.mr_beyond.is_empty());
        // Hand arithmetic: 0, 0, 0, 6 → MR 0, 0, 6, MR̄ = 2, UCL_MR = 6.534: not beyond;
        // 0, 0, 0, 0, 9 → MR̄ = 9/4 = 2.25, UCL_MR = 7.35: the last range (9) is beyond.
        assert!(
            imr_chart(&[0.0, 0.0, 0.0, 6.0])
                .unwrap()
                .mr_beyond
                .is_empty()
        );
        assert_eq!(
            imr_chart(&[0.0, 0.0, 0.0, 0.0, 9.0]).unwrap().mr_beyond,
            vec![3]
        );
    }

    #[test]
    fn each_run_rule_is_flagged() {
        // Constructed with mean 0, σ = 1 (rules as the e-Handbook §6.3.2 lists them).
        let s = run_rules(&[0.0, 3.5], 0.0, 1.0);
        assert_eq!(
            s,
            vec![Signal {
                index: 1,
                rule: RunRule::BeyondThreeSigma
            }]
        );
        let s = run_rules(&[2.5, 0.0, 2.2], 0.0, 1.0);
        assert_eq!(
            s,
            vec![Signal {
                index: 2,
                rule: RunRule::TwoOfThreeBeyondTwoSigma
            }]
        );
        let s = run_rules(&[-1.5, -1.2, 0.5, -1.1, -1.4], 0.0, 1.0);
        assert_eq!(
            s,
            vec![Signal {
                index: 4,
                rule: RunRule::FourOfFiveBeyondOneSigma
            }]
        );
        let s = run_rules(&[0.2; 8], 0.0, 1.0);
        assert_eq!(
            s,
            vec![Signal {
                index: 7,
                rule: RunRule::EightOnOneSide
            }]
        );
        // Two beyond 2σ but on opposite sides break nothing.
        assert!(run_rules(&[2.5, 0.0, -2.5], 0.0, 1.0).is_empty());
    }

    #[test]
    fn too_few_points() {
        assert_eq!(imr_chart(&[1.0]), None);
        assert_eq!(imr_chart(&[1.0, f64::NAN]), None);
    }
}
