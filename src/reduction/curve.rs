//! Compaction curve fit: a least-squares polynomial through the lab points,
//! its maximum dry density and optimum water content, typed warnings and a
//! sampled curve for plotting.
//!
//! Rule for the degree (recorded in [`FitMethod`]): a cubic when there are at
//! least five distinct water contents, else a quadratic. A cubic whose highest
//! value over the measured range is at an end, not at an interior peak, is
//! replaced by the quadratic (warning `fit_degree_reduced`). When neither has
//! an interior peak the fit is refused: MDD and OMC would be guesses.

use serde::{Deserialize, Serialize};

use super::quantities::{
    DENSITY_MAX_KG_M3, DENSITY_MIN_KG_M3, Density, QuantityError, SpecificGravity, WaterContent,
};
use super::voids::zero_air_voids_density;

/// Fewest lab points accepted for a curve (common practice; the standards ask for four or more).
pub const MIN_POINTS: usize = 4;
/// Fewest distinct water contents accepted (four specimens at three water contents are refused:
/// the standards ask for four or more specimens at different water contents, from memory).
pub const MIN_DISTINCT_WATER_CONTENTS: usize = 4;
/// Points wanted on each side of the optimum for the peak to count as bracketed (from memory: two).
pub const MIN_POINTS_EACH_SIDE: usize = 2;
/// Water contents closer than this (points of %) count as repeated (common practice: same to 0.1 %).
pub const REPEATED_WATER_TOLERANCE_PCT: f64 = 0.05;
/// How many samples the plotted curve carries.
pub const CURVE_SAMPLES: usize = 50;

/// One point of a compaction curve (lab specimen, fitted sample or a line for plotting).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CurvePoint {
    /// Water content, percent.
    pub water_content_pct: f64,
    /// Dry density, kg/m³.
    pub dry_density_kg_m3: f64,
}

/// How the curve was fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum FitMethod {
    /// Least-squares polynomial of the given degree (2 or 3) in water content.
    Polynomial {
        /// Polynomial degree.
        degree: u32,
    },
}

impl FitMethod {
    /// Stable code stored beside the curve, e.g. "polynomial_3".
    pub fn code(&self) -> String {
        match self {
            Self::Polynomial { degree } => format!("polynomial_{degree}"),
        }
    }
    /// Words for the report, e.g. "least-squares cubic polynomial".
    pub fn label(&self) -> String {
        match self {
            Self::Polynomial { degree: 2 } => "least-squares quadratic polynomial".to_string(),
            Self::Polynomial { degree: 3 } => "least-squares cubic polynomial".to_string(),
            Self::Polynomial { degree } => format!("least-squares polynomial of degree {degree}"),
        }
    }
}

/// A caution about a fitted curve; the fit stands but a reviewer should look.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurveWarning {
    /// Stable code: "peak_not_bracketed", "above_zero_air_voids", "repeated_water_content",
    /// "fit_degree_reduced", "peak_above_zero_air_voids".
    pub code: &'static str,
    /// Plain-words explanation with the numbers.
    pub message: String,
}

/// The fitted polynomial ρd(w) = Σ cₖ tᵏ with t = (w − centre) / scale, kept well-conditioned.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FittedPolynomial {
    /// Centre of the measured water contents, percent.
    pub center_pct: f64,
    /// Half the measured water-content range, percent.
    pub scale_pct: f64,
    /// Coefficients c₀, c₁, … in kg/m³.
    pub coefficients: Vec<f64>,
}

impl FittedPolynomial {
    /// Dry density at a water content (percent), kg/m³.
    pub fn evaluate(&self, water_content_pct: f64) -> f64 {
        let t = (water_content_pct - self.center_pct) / self.scale_pct;
        self.coefficients
            .iter()
            .rev()
            .fold(0.0, |acc, c| acc * t + c)
    }
}

/// A fitted compaction curve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurveFit {
    /// Maximum dry density (the fitted peak).
    pub max_dry_density: Density,
    /// Optimum water content (where the peak lies).
    pub optimum_water_content: WaterContent,
    /// How the curve was fitted.
    pub method: FitMethod,
    /// Cautions for the reviewer.
    pub warnings: Vec<CurveWarning>,
    /// About 50 samples across the measured water-content range, for plotting.
    pub curve: Vec<CurvePoint>,
    /// The fitted polynomial itself.
    pub polynomial: FittedPolynomial,
    /// Coefficient of determination of the fit over the lab points.
    pub r_squared: f64,
    /// Root-mean-square residual of the lab points about the curve, kg/m³.
    pub rms_residual_kg_m3: f64,
}

impl CurveFit {
    /// Fitted dry density (kg/m³) at a water content in percent; meaningful inside the measured range.
    pub fn density_at(&self, water_content_pct: f64) -> f64 {
        self.polynomial.evaluate(water_content_pct)
    }
    /// True when a warning with this code was raised.
    pub fn has_warning(&self, code: &str) -> bool {
        self.warnings.iter().any(|w| w.code == code)
    }
}

/// Why a curve could not be fitted.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CurveError {
    /// Fewer lab points than the fit needs.
    #[error("a compaction curve needs at least {needed} points; {got} given")]
    TooFewPoints {
        /// Points given.
        got: usize,
        /// Points needed.
        needed: usize,
    },
    /// A point is not a number or outside plausible bounds.
    #[error("point {} {reason}", index + 1)]
    InvalidPoint {
        /// Zero-based index of the point.
        index: usize,
        /// What is wrong with it.
        reason: String,
    },
    /// Every point has the same water content: no curve can be drawn.
    #[error(
        "all points have the same water content ({water_content_pct} %); specimens must be compacted at different water contents"
    )]
    SameWaterContent {
        /// The shared water content.
        water_content_pct: f64,
    },
    /// Too few distinct water contents for a curve that can peak.
    #[error(
        "only {distinct} distinct water contents; a compaction curve needs specimens at 4 or more different water contents"
    )]
    TooFewDistinctWaterContents {
        /// Distinct water contents found.
        distinct: usize,
    },
    /// The fitted curve has no maximum inside the measured water contents.
    #[error(
        "the fitted curve has no peak between {from_pct:.1} % and {to_pct:.1} %: it keeps {trend}; compact more specimens {advice} to bracket the optimum"
    )]
    NoInteriorPeak {
        /// Driest measured water content, percent.
        from_pct: f64,
        /// Wettest measured water content, percent.
        to_pct: f64,
        /// Which way the curve heads, in words.
        trend: &'static str,
        /// Where to add specimens, in words.
        advice: &'static str,
    },
    /// The least-squares system could not be solved.
    #[error("the points do not determine a curve (the least-squares system is singular)")]
    Singular,
    /// The fitted peak fell outside the bounds of a density or water content.
    #[error("fitted peak is implausible: {0}")]
    PeakOutOfBounds(QuantityError),
}

impl CurveError {
    /// Stable machine code for the refusal.
    pub fn code(&self) -> &'static str {
        match self {
            Self::TooFewPoints { .. } => "too_few_points",
            Self::InvalidPoint { .. } => "invalid_point",
            Self::SameWaterContent { .. } => "same_water_content",
            Self::TooFewDistinctWaterContents { .. } => "too_few_distinct_water_contents",
            Self::NoInteriorPeak { .. } => "no_interior_peak",
            Self::Singular => "singular_fit",
            Self::PeakOutOfBounds(_) => "peak_out_of_bounds",
        }
    }
}

/// Fits a compaction curve by the documented degree rule; `specific_gravity` enables the ZAV checks.
pub fn fit_curve(
    points: &[CurvePoint],
    specific_gravity: Option<SpecificGravity>,
) -> Result<CurveFit, CurveError> {
    fit(points, specific_gravity, None)
}

/// Fits a compaction curve with a forced polynomial degree (2 or 3; others are clamped to that range).
pub fn fit_curve_with_degree(
    points: &[CurvePoint],
    specific_gravity: Option<SpecificGravity>,
    degree: u32,
) -> Result<CurveFit, CurveError> {
    fit(points, specific_gravity, Some(degree.clamp(2, 3)))
}

/// Checks each point is finite and plausible.
fn check_points(points: &[CurvePoint]) -> Result<(), CurveError> {
    if points.len() < MIN_POINTS {
        return Err(CurveError::TooFewPoints {
            got: points.len(),
            needed: MIN_POINTS,
        });
    }
    for (index, p) in points.iter().enumerate() {
        let w = p.water_content_pct;
        let d = p.dry_density_kg_m3;
        let reason = if !w.is_finite() {
            Some(format!("water content is not a finite number ({w})"))
        } else if !(0.0..=100.0).contains(&w) {
            Some(format!("water content {w} % is outside 0–100 %"))
        } else if !d.is_finite() {
            Some(format!("dry density is not a finite number ({d})"))
        } else if !(DENSITY_MIN_KG_M3..=DENSITY_MAX_KG_M3).contains(&d) {
            Some(format!("dry density {d} kg/m³ is outside 500–3000 kg/m³"))
        } else {
            None
        };
        if let Some(reason) = reason {
            return Err(CurveError::InvalidPoint { index, reason });
        }
    }
    Ok(())
}

/// Number of distinct water contents (closer than 1e-9 % counts as the same).
fn distinct_water_contents(sorted_w: &[f64]) -> usize {
    let mut count = 0;
    let mut last = f64::NEG_INFINITY;
    for &w in sorted_w {
        if w - last > 1e-9 {
            count += 1;
            last = w;
        }
    }
    count
}

/// Solves the least-squares polynomial of `degree` in t by normal equations with partial pivoting.
fn least_squares(ts: &[f64], ys: &[f64], degree: usize) -> Option<Vec<f64>> {
    let m = degree + 1;
    let mut a = vec![vec![0.0; m + 1]; m];
    for (&t, &y) in ts.iter().zip(ys) {
        let mut powers = vec![1.0; 2 * m];
        for k in 1..2 * m {
            powers[k] = powers[k - 1] * t;
        }
        for (i, row) in a.iter_mut().enumerate() {
            for (j, cell) in row.iter_mut().take(m).enumerate() {
                *cell += powers[i + j];
            }
            row[m] += powers[i] * y;
        }
    }
    let scale = a.iter().map(|r| r[0].abs()).fold(0.0, f64::max).max(1.0);
    for col in 0..m {
        let pivot = (col..m).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[pivot][col].abs() < 1e-12 * scale {
            return None;
        }
        a.swap(col, pivot);
        let (upper, lower) = a.split_at_mut(col + 1);
        let pivot_row = &upper[col];
        for row in lower.iter_mut() {
            let f = row[col] / pivot_row[col];
            for (cell, p) in row.iter_mut().zip(pivot_row).skip(col) {
                *cell -= f * p;
            }
        }
    }
    let mut c = vec![0.0; m];
    for i in (0..m).rev() {
        let mut s = a[i][m];
        for j in i + 1..m {
            s -= a[i][j] * c[j];
        }
        c[i] = s / a[i][i];
    }
    c.iter().all(|v| v.is_finite()).then_some(c)
}

/// Where a polynomial in t peaks inside (lo, hi): the interior maximum above both ends, if any.
fn interior_peak(c: &[f64], lo: f64, hi: f64) -> Option<f64> {
    let value = |t: f64| c.iter().rev().fold(0.0, |acc, k| acc * t + k);
    let second = |t: f64| match c.len() {
        3 => 2.0 * c[2],
        4 => 2.0 * c[2] + 6.0 * c[3] * t,
        _ => 0.0,
    };
    // Roots of the derivative c1 + 2 c2 t + 3 c3 t².
    let (qa, qb, qc) = match c.len() {
        3 => (0.0, 2.0 * c[2], c[1]),
        4 => (3.0 * c[3], 2.0 * c[2], c[1]),
        _ => return None,
    };
    let mut roots = Vec::new();
    if qa.abs() < 1e-12 * (qb.abs() + qc.abs()).max(1e-300) {
        if qb != 0.0 {
            roots.push(-qc / qb);
        }
    } else {
        let disc = qb * qb - 4.0 * qa * qc;
        if disc >= 0.0 {
            let sq = disc.sqrt();
            let q = -0.5 * (qb + qb.signum() * sq);
            if q != 0.0 {
                roots.push(q / qa);
                roots.push(qc / q);
            } else {
                roots.push(0.0);
            }
        }
    }
    let ends = value(lo).max(value(hi));
    roots
        .into_iter()
        .filter(|&t| t > lo && t < hi && second(t) < 0.0 && value(t) > ends)
        .max_by(|&a, &b| value(a).total_cmp(&value(b)))
}

/// The core fit shared by [`fit_curve`] and [`fit_curve_with_degree`].
fn fit(
    points: &[CurvePoint],
    gs: Option<SpecificGravity>,
    forced: Option<u32>,
) -> Result<CurveFit, CurveError> {
    check_points(points)?;
    let mut sorted: Vec<CurvePoint> = points.to_vec();
    sorted.sort_by(|a, b| a.water_content_pct.total_cmp(&b.water_content_pct));
    let ws: Vec<f64> = sorted.iter().map(|p| p.water_content_pct).collect();
    let ys: Vec<f64> = sorted.iter().map(|p| p.dry_density_kg_m3).collect();
    let distinct = check_spread(&ws)?;
    let (w_min, w_max) = (ws[0], ws[ws.len() - 1]);
    let center = (w_min + w_max) / 2.0;
    let scale = (w_max - w_min) / 2.0;
    let ts: Vec<f64> = ws.iter().map(|w| (w - center) / scale).collect();

    let preferred = forced.unwrap_or(if distinct >= 5 { 3 } else { 2 });
    let chosen = choose_polynomial(&ts, &ys, preferred, distinct, (w_min, w_max))?;
    let mut warnings = Vec::new();
    if chosen.cubic_fell_back {
        warnings.push(CurveWarning {
            code: "fit_degree_reduced",
            message: "the cubic fit had no peak inside the measured range, so a quadratic was fitted instead".to_string(),
        });
    }
    let polynomial = FittedPolynomial {
        center_pct: center,
        scale_pct: scale,
        coefficients: chosen.coefficients,
    };
    let omc = center + scale * chosen.t_peak;
    let mdd = polynomial.evaluate(omc);
    let max_dry_density =
        Density::named("maximum dry density", mdd).map_err(CurveError::PeakOutOfBounds)?;
    let optimum_water_content =
        WaterContent::named("optimum water content", omc).map_err(CurveError::PeakOutOfBounds)?;

    warnings.extend(bracketing_warning(&ws, omc));
    warnings.extend(repeated_water_warnings(&sorted));
    if let Some(gs) = gs {
        warnings.extend(zero_air_voids_warnings(points, gs, omc, mdd));
    }
    let (r_squared, rms_residual_kg_m3) = goodness_of_fit(&ws, &ys, &polynomial);
    Ok(CurveFit {
        max_dry_density,
        optimum_water_content,
        method: FitMethod::Polynomial {
            degree: chosen.degree,
        },
        warnings,
        curve: sample_curve(&polynomial, w_min, w_max),
        polynomial,
        r_squared,
        rms_residual_kg_m3,
    })
}

/// How many distinct water contents the points have, refusing a set too narrow to fit.
fn check_spread(ws: &[f64]) -> Result<usize, CurveError> {
    let distinct = distinct_water_contents(ws);
    if distinct == 1 {
        return Err(CurveError::SameWaterContent {
            water_content_pct: ws[0],
        });
    }
    if distinct < MIN_DISTINCT_WATER_CONTENTS {
        return Err(CurveError::TooFewDistinctWaterContents { distinct });
    }
    Ok(distinct)
}

/// The polynomial chosen for the points, in the scaled water content t ∈ [−1, 1].
struct ChosenPolynomial {
    degree: u32,
    coefficients: Vec<f64>,
    t_peak: f64,
    /// A cubic was fitted but had no interior peak, so the quadratic stands.
    cubic_fell_back: bool,
}

/// The highest degree up to `preferred` whose least-squares fit peaks inside the range;
/// refuses (saying which way the points trend) when neither the cubic nor the quadratic does.
fn choose_polynomial(
    ts: &[f64],
    ys: &[f64],
    preferred: u32,
    distinct: usize,
    (w_min, w_max): (f64, f64),
) -> Result<ChosenPolynomial, CurveError> {
    let mut tried_cubic = false;
    for degree in [3u32, 2] {
        if degree > preferred || (degree == 3 && distinct < 4) {
            continue;
        }
        let Some(c) = least_squares(ts, ys, degree as usize) else {
            continue;
        };
        if degree == 3 {
            tried_cubic = true;
        }
        if let Some(t_peak) = interior_peak(&c, -1.0, 1.0) {
            return Ok(ChosenPolynomial {
                degree,
                coefficients: c,
                t_peak,
                cubic_fell_back: tried_cubic && degree == 2,
            });
        }
    }
    let c = least_squares(ts, ys, 2).ok_or(CurveError::Singular)?;
    // The quadratic's value at t = +1 less that at t = −1 is 2 c₁: its sign tells the trend.
    let (trend, advice) = if c[1] > 0.0 {
        (
            "rising towards the wettest point",
            "wetter than the wettest point",
        )
    } else {
        (
            "falling from the driest point",
            "drier than the driest point",
        )
    };
    Err(CurveError::NoInteriorPeak {
        from_pct: w_min,
        to_pct: w_max,
        trend,
        advice,
    })
}

/// Bracketing: points strictly drier and wetter than the optimum (from memory: two each side).
fn bracketing_warning(ws: &[f64], omc: f64) -> Option<CurveWarning> {
    let drier = ws.iter().filter(|&&w| w < omc).count();
    let wetter = ws.iter().filter(|&&w| w > omc).count();
    (drier < MIN_POINTS_EACH_SIDE || wetter < MIN_POINTS_EACH_SIDE).then(|| CurveWarning {
        code: "peak_not_bracketed",
        message: format!(
            "{drier} point(s) drier and {wetter} wetter than the optimum {omc:.1} %; \
             at least {MIN_POINTS_EACH_SIDE} are wanted on each side for the peak to be bracketed"
        ),
    })
}

/// Neighbouring specimens (sorted by water content) closer than the repeat tolerance.
fn repeated_water_warnings(sorted: &[CurvePoint]) -> Vec<CurveWarning> {
    sorted
        .windows(2)
        .filter(|pair| pair[1].water_content_pct - pair[0].water_content_pct < REPEATED_WATER_TOLERANCE_PCT)
        .map(|pair| CurveWarning {
            code: "repeated_water_content",
            message: format!(
                "two points share a water content of {:.1} % ({:.0} and {:.0} kg/m³); each specimen should be at a new water content",
                pair[0].water_content_pct, pair[0].dry_density_kg_m3, pair[1].dry_density_kg_m3
            ),
        })
        .collect()
}

/// Specimens and the fitted peak lying above the zero-air-voids line at Gs.
fn zero_air_voids_warnings(
    points: &[CurvePoint],
    gs: SpecificGravity,
    omc: f64,
    mdd: f64,
) -> Vec<CurveWarning> {
    let mut warnings: Vec<CurveWarning> = points
        .iter()
        .filter_map(|p| {
            let zav = zero_air_voids_density(gs, p.water_content_pct);
            (p.dry_density_kg_m3 > zav).then(|| CurveWarning {
                code: "above_zero_air_voids",
                message: format!(
                    "point at {:.1} % and {:.0} kg/m³ lies above the zero-air-voids density {:.0} kg/m³ for Gs {:.2}; check the masses, the water content or Gs",
                    p.water_content_pct,
                    p.dry_density_kg_m3,
                    zav,
                    gs.value()
                ),
            })
        })
        .collect();
    let zav_peak = zero_air_voids_density(gs, omc);
    if mdd > zav_peak {
        warnings.push(CurveWarning {
            code: "peak_above_zero_air_voids",
            message: format!(
                "fitted peak {mdd:.0} kg/m³ at {omc:.1} % lies above the zero-air-voids density {zav_peak:.0} kg/m³ for Gs {:.2}",
                gs.value()
            ),
        });
    }
    warnings
}

/// R² and the RMS residual (kg/m³) of the fitted polynomial over the specimens.
fn goodness_of_fit(ws: &[f64], ys: &[f64], polynomial: &FittedPolynomial) -> (f64, f64) {
    let mean = ys.iter().sum::<f64>() / ys.len() as f64;
    let ss_tot: f64 = ys.iter().map(|y| (y - mean).powi(2)).sum();
    let ss_res: f64 = ws
        .iter()
        .zip(ys)
        .map(|(&w, &y)| (y - polynomial.evaluate(w)).powi(2))
        .sum();
    let r_squared = if ss_tot > 0.0 {
        1.0 - ss_res / ss_tot
    } else {
        1.0
    };
    (r_squared, (ss_res / ys.len() as f64).sqrt())
}

/// The fitted curve sampled evenly across the measured range, for charts.
fn sample_curve(polynomial: &FittedPolynomial, w_min: f64, w_max: f64) -> Vec<CurvePoint> {
    let step = (w_max - w_min) / (CURVE_SAMPLES - 1) as f64;
    (0..CURVE_SAMPLES)
        .map(|i| {
            let w = w_min + step * i as f64;
            CurvePoint {
                water_content_pct: w,
                dry_density_kg_m3: polynomial.evaluate(w),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn pts(v: &[(f64, f64)]) -> Vec<CurvePoint> {
        v.iter()
            .map(|&(w, d)| CurvePoint {
                water_content_pct: w,
                dry_density_kg_m3: d,
            })
            .collect()
    }

    fn gs(v: f64) -> Option<SpecificGravity> {
        Some(SpecificGravity::new(v).unwrap())
    }

    /// An invented, realistic standard-effort curve of a silty clay.
    fn realistic() -> Vec<CurvePoint> {
        pts(&[
            (10.0, 1720.0),
            (12.0, 1765.0),
            (14.0, 1790.0),
            (16.0, 1772.0),
            (18.0, 1730.0),
        ])
    }

    #[test]
    fn realistic_curve_fits_with_cubic_and_no_warnings() {
        let f = fit_curve(&realistic(), gs(2.70)).unwrap();
        assert_eq!(f.method, FitMethod::Polynomial { degree: 3 });
        assert_eq!(f.method.code(), "polynomial_3");
        assert_eq!(f.method.label(), "least-squares cubic polynomial");
        assert!(f.warnings.is_empty(), "{:?}", f.warnings);
        // The peak lies between the measured points, close to the best one.
        let omc = f.optimum_water_content.pct();
        assert!(omc > 13.0 && omc < 15.0, "{omc}");
        let mdd = f.max_dry_density.kg_m3();
        assert!(mdd > 1780.0 && mdd < 1800.0, "{mdd}");
        assert!((f.density_at(omc) - f.max_dry_density.kg_m3()).abs() < 1e-9);
        assert_eq!(f.curve.len(), CURVE_SAMPLES);
        assert_eq!(f.curve[0].water_content_pct, 10.0);
        assert!((f.curve[CURVE_SAMPLES - 1].water_content_pct - 18.0).abs() < 1e-12);
        assert!(
            f.curve
                .iter()
                .all(|p| p.dry_density_kg_m3 <= f.max_dry_density.kg_m3() + 1e-9)
        );
        assert!(f.r_squared > 0.99 && f.rms_residual_kg_m3 < 5.0);
        assert!(!f.has_warning("above_zero_air_voids"));
    }

    #[test]
    fn no_achieved_point_lies_on_or_above_zav() {
        // Das (compaction chapter): no real point lies above the ZAV line; check the invented data at Gs 2.70.
        let gs = SpecificGravity::new(2.70).unwrap();
        for p in realistic() {
            assert!(p.dry_density_kg_m3 < zero_air_voids_density(gs, p.water_content_pct));
        }
        let f = fit_curve(&realistic(), Some(gs)).unwrap();
        assert!(
            f.curve
                .iter()
                .all(|p| p.dry_density_kg_m3 < zero_air_voids_density(gs, p.water_content_pct))
        );
    }

    #[test]
    fn four_points_use_a_quadratic() {
        let f = fit_curve(&realistic()[..4], None).unwrap();
        assert_eq!(f.method.code(), "polynomial_2");
        assert_eq!(f.method.label(), "least-squares quadratic polynomial");
        // Only one point wetter than the peak: flagged (from memory: two each side wanted).
        assert!(f.has_warning("peak_not_bracketed"), "{:?}", f.warnings);
    }

    #[test]
    fn refuses_too_few_points() {
        let e = fit_curve(&realistic()[..3], None).unwrap_err();
        assert_eq!(e, CurveError::TooFewPoints { got: 3, needed: 4 });
        assert_eq!(e.code(), "too_few_points");
        assert_eq!(
            e.to_string(),
            "a compaction curve needs at least 4 points; 3 given"
        );
        assert_eq!(fit_curve(&[], None).unwrap_err().code(), "too_few_points");
    }

    #[test]
    fn refuses_degenerate_water_contents_without_panicking() {
        let same = pts(&[
            (12.0, 1700.0),
            (12.0, 1750.0),
            (12.0, 1800.0),
            (12.0, 1760.0),
        ]);
        let e = fit_curve(&same, None).unwrap_err();
        assert_eq!(e.code(), "same_water_content");
        assert!(e.to_string().contains("same water content (12 %)"), "{e}");
        // Four specimens at three water contents (two at 14 %): refused, four distinct are needed.
        let three = pts(&[
            (10.0, 1700.0),
            (12.0, 1750.0),
            (14.0, 1800.0),
            (14.0, 1790.0),
        ]);
        assert_eq!(
            fit_curve(&three, None).unwrap_err(),
            CurveError::TooFewDistinctWaterContents { distinct: 3 }
        );
        let two = pts(&[
            (12.0, 1700.0),
            (12.0, 1750.0),
            (14.0, 1800.0),
            (14.0, 1760.0),
        ]);
        assert_eq!(
            fit_curve(&two, None).unwrap_err(),
            CurveError::TooFewDistinctWaterContents { distinct: 2 }
        );
    }

    #[test]
    fn refuses_bad_points_by_index() {
        let mut p = realistic();
        p[2].dry_density_kg_m3 = f64::NAN;
        let e = fit_curve(&p, None).unwrap_err();
        assert_eq!(e.code(), "invalid_point");
        assert!(matches!(e, CurveError::InvalidPoint { index: 2, .. }));
        assert!(
            e.to_string()
                .starts_with("point 3 dry density is not a finite number"),
            "{e}"
        );
        let mut p = realistic();
        p[0].water_content_pct = -4.0;
        assert!(
            fit_curve(&p, None)
                .unwrap_err()
                .to_string()
                .contains("outside 0–100 %")
        );
        let mut p = realistic();
        p[4].dry_density_kg_m3 = 17_300.0;
        assert!(matches!(
            fit_curve(&p, None),
            Err(CurveError::InvalidPoint { index: 4, .. })
        ));
    }

    #[test]
    fn refuses_a_curve_without_interior_peak() {
        // Straight line upwards: no peak anywhere in range.
        let rising = pts(&[
            (8.0, 1700.0),
            (10.0, 1720.0),
            (12.0, 1740.0),
            (14.0, 1760.0),
            (16.0, 1780.0),
        ]);
        let e = fit_curve(&rising, None).unwrap_err();
        assert_eq!(e.code(), "no_interior_peak");
        assert!(
            e.to_string().contains("rising towards the wettest point"),
            "{e}"
        );
        assert!(e.to_string().contains("between 8.0 % and 16.0 %"), "{e}");
        let falling = pts(&[
            (8.0, 1800.0),
            (10.0, 1780.0),
            (12.0, 1750.0),
            (14.0, 1700.0),
        ]);
        let e = fit_curve(&falling, None).unwrap_err();
        assert!(e.to_string().contains("drier than the driest point"), "{e}");
    }

    #[test]
    fn cubic_without_peak_falls_back_to_quadratic_with_warnings() {
        let p = pts(&[
            (10.0, 1800.0),
            (12.0, 1850.0),
            (14.0, 1870.0),
            (16.0, 1872.0),
            (18.0, 1875.0),
        ]);
        let f = fit_curve(&p, None).unwrap();
        assert_eq!(f.method.code(), "polynomial_2");
        assert!(f.has_warning("fit_degree_reduced"));
        assert!(f.has_warning("peak_not_bracketed"));
    }

    #[test]
    fn warns_of_points_above_zav_and_repeated_water_contents() {
        // At Gs 2.60 and 18 %: ZAV = 2600 / (1 + 0.18 × 2.6) = 1771.1 kg/m³ (Das formula); 1800 lies above.
        let p = pts(&[
            (10.0, 1720.0),
            (12.0, 1765.0),
            (14.0, 1790.0),
            (14.02, 1788.0),
            (18.0, 1800.0),
            (16.0, 1800.0),
        ]);
        let f = fit_curve(&p, gs(2.60)).unwrap();
        let above: Vec<&CurveWarning> = f
            .warnings
            .iter()
            .filter(|w| w.code == "above_zero_air_voids")
            .collect();
        assert_eq!(above.len(), 1, "{:?}", f.warnings);
        assert!(
            above[0].message.contains("18.0 % and 1800 kg/m³"),
            "{}",
            above[0].message
        );
        assert!(
            above[0].message.contains("1771 kg/m³"),
            "{}",
            above[0].message
        );
        let repeated: Vec<&CurveWarning> = f
            .warnings
            .iter()
            .filter(|w| w.code == "repeated_water_content")
            .collect();
        assert_eq!(repeated.len(), 1);
        assert!(repeated[0].message.contains("14.0 %"));
        // Without Gs, no ZAV check is possible.
        assert!(
            !fit_curve(&p, None)
                .unwrap()
                .has_warning("above_zero_air_voids")
        );
    }

    #[test]
    fn forced_degree_is_recorded() {
        let f = fit_curve_with_degree(&realistic(), None, 2).unwrap();
        assert_eq!(f.method, FitMethod::Polynomial { degree: 2 });
        assert_eq!(
            fit_curve_with_degree(&realistic(), None, 9)
                .unwrap()
                .method
                .code(),
            "polynomial_3"
        );
        let json = serde_json::to_value(f.method).unwrap();
        assert_eq!(json, serde_json::json!({"kind": "polynomial", "degree": 2}));
    }

    proptest! {
        #[test]
        fn noise_free_parabola_vertex_is_recovered(
            omc in 6.0f64..25.0,
            mdd in 1500.0f64..2200.0,
            k in 1.0f64..15.0,
            step in 1.0f64..2.5,
            shift in -0.9f64..0.9,
            n in 4usize..8,
        ) {
            // ρd = MDD − k (w − OMC)²: spread the points around the vertex, at least two each side.
            let start = omc - step * ((n as f64 - 1.0) / 2.0) + shift * step * 0.4;
            let p: Vec<CurvePoint> = (0..n).map(|i| {
                let w = start + step * i as f64;
                CurvePoint { water_content_pct: w, dry_density_kg_m3: mdd - k * (w - omc).powi(2) }
            }).collect();
            prop_assume!(p.iter().all(|q| q.dry_density_kg_m3 >= 500.0 && q.water_content_pct >= 0.0));
            let f = fit_curve(&p, None).unwrap();
            prop_assert!((f.optimum_water_content.pct() - omc).abs() < 1e-6, "{} vs {omc}", f.optimum_water_content.pct());
            prop_assert!((f.max_dry_density.kg_m3() - mdd).abs() < 1e-6);
        }

        #[test]
        fn fit_never_panics(raw in proptest::collection::vec((-5.0f64..120.0, 0.0f64..4000.0), 0..9)) {
            let p: Vec<CurvePoint> = raw.iter().map(|&(w, d)| CurvePoint { water_content_pct: w, dry_density_kg_m3: d }).collect();
            let _ = fit_curve(&p, gs(2.65));
        }
    }
}
