//! Whether a fitted compaction curve can be a lot's reference without a QC
//! manager's written approval. A curve with any concern found here is stored
//! as *needs approval*; the fit itself stands (MDD and OMC are kept), but no
//! lot may be judged against it until someone signs for it.
//!
//! The concerns and their thresholds:
//! - `peak_not_bracketed`: fewer than two points on either side of the fitted
//!   optimum (from memory: the standards ask for two each side);
//! - `densest_point_at_end`: the densest specimen is the driest or the wettest,
//!   so the measured points never turn over;
//! - `above_zero_air_voids` / `peak_above_zero_air_voids`: a point or the peak
//!   above the zero-air-voids line at the curve's Gs (Das, compaction chapter:
//!   no real point lies above it);
//! - `poor_fit`: RMS residual of the points about the curve above
//!   [`MAX_RMS_RESIDUAL_PCT_OF_MDD`] % of MDD;
//! - `peak_outside_range`: the fitted optimum outside the measured water contents;
//! - `peak_far_above_points`: the fitted MDD more than [`MAX_PEAK_RISE_PCT`] %
//!   above the densest measured point.

use serde::Serialize;

use super::curve::{CurveFit, CurvePoint, CurveWarning};

/// Largest RMS residual about the curve, percent of MDD, accepted without approval.
///
/// Basis (from memory): the single-operator repeatability of a compacted specimen's dry
/// density in ASTM D698/D1557 precision statements is of the order of 0.5–1 % of MDD, so
/// points scattered by more than 1 % about a smooth curve point at a mis-weighed specimen,
/// a wrong water content or mixed material — a reviewer should look before it is used.
pub const MAX_RMS_RESIDUAL_PCT_OF_MDD: f64 = 1.0;

/// Largest rise of the fitted peak above the densest measured point, percent, accepted
/// without approval.
///
/// Basis (worked by hand, common practice): a curve ρd = MDD − k (w − OMC)² falls about 2.5 %
/// over two points of water content either side of optimum (k ≈ 0.006 MDD per point²);
/// with the optimum midway between specimens Δw apart the peak rises k (Δw/2)² above them:
/// 0.6 % for Δw = 2 points (the spacing the standards ask for), 1.4 % for Δw = 3. A rise
/// beyond 1.5 % means the curve's peak is drawn by the fit rather than by the specimens.
pub const MAX_PEAK_RISE_PCT: f64 = 1.5;

/// Codes of fit warnings that make a curve need approval.
const FIT_CONCERNS: [&str; 3] = [
    "peak_not_bracketed",
    "above_zero_air_voids",
    "peak_above_zero_air_voids",
];

/// Why a curve needs a QC manager's approval before it can be a reference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurveConcern {
    /// Stable code (see the module doc).
    pub code: &'static str,
    /// Plain-words explanation with the numbers.
    pub message: String,
}

impl From<&CurveWarning> for CurveConcern {
    fn from(w: &CurveWarning) -> Self {
        Self {
            code: w.code,
            message: w.message.clone(),
        }
    }
}

/// The concerns about a fitted curve; empty when it can be a reference as it is.
pub fn concerns(points: &[CurvePoint], fit: &CurveFit) -> Vec<CurveConcern> {
    let mut out: Vec<CurveConcern> = fit
        .warnings
        .iter()
        .filter(|w| FIT_CONCERNS.contains(&w.code))
        .map(CurveConcern::from)
        .collect();
    let Some(densest) = points
        .iter()
        .max_by(|a, b| a.dry_density_kg_m3.total_cmp(&b.dry_density_kg_m3))
    else {
        return out;
    };
    let w_min = points
        .iter()
        .map(|p| p.water_content_pct)
        .fold(f64::INFINITY, f64::min);
    let w_max = points
        .iter()
        .map(|p| p.water_content_pct)
        .fold(f64::NEG_INFINITY, f64::max);
    let mdd = fit.max_dry_density.kg_m3();
    let omc = fit.optimum_water_content.pct();
    if densest.water_content_pct <= w_min || densest.water_content_pct >= w_max {
        out.push(CurveConcern {
            code: "densest_point_at_end",
            message: format!(
                "the densest specimen ({:.0} kg/m³ at {:.1} %) is the {} one: the measured points do not turn over",
                densest.dry_density_kg_m3,
                densest.water_content_pct,
                if densest.water_content_pct <= w_min {
                    "driest"
                } else {
                    "wettest"
                }
            ),
        });
    }
    let rms_pct = fit.rms_residual_kg_m3 / mdd * 100.0;
    if rms_pct > MAX_RMS_RESIDUAL_PCT_OF_MDD {
        out.push(CurveConcern {
            code: "poor_fit",
            message: format!(
                "the points scatter about the curve by {:.1} kg/m³ RMS ({rms_pct:.2} % of MDD), more than the {MAX_RMS_RESIDUAL_PCT_OF_MDD:.1} % accepted without approval",
                fit.rms_residual_kg_m3
            ),
        });
    }
    if omc < w_min || omc > w_max {
        out.push(CurveConcern {
            code: "peak_outside_range",
            message: format!(
                "the fitted optimum {omc:.1} % lies outside the measured water contents {w_min:.1}–{w_max:.1} %"
            ),
        });
    }
    let rise_pct = (mdd / densest.dry_density_kg_m3 - 1.0) * 100.0;
    if rise_pct > MAX_PEAK_RISE_PCT {
        out.push(CurveConcern {
            code: "peak_far_above_points",
            message: format!(
                "the fitted peak {mdd:.0} kg/m³ is {rise_pct:.1} % above the densest specimen ({:.0} kg/m³), more than the {MAX_PEAK_RISE_PCT:.1} % accepted without approval",
                densest.dry_density_kg_m3
            ),
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::reduction::SpecificGravity;
    use crate::reduction::curve::fit_curve;

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

    #[test]
    fn a_well_bracketed_curve_has_no_concern() {
        // Invented silty clay, two points each side of a peak near 14 %.
        let p = pts(&[
            (10.0, 1720.0),
            (12.0, 1765.0),
            (14.0, 1790.0),
            (16.0, 1772.0),
            (18.0, 1730.0),
        ]);
        let f = fit_curve(&p, gs(2.70)).unwrap();
        assert!(concerns(&p, &f).is_empty(), "{:?}", concerns(&p, &f));
    }

    #[test]
    fn one_point_wet_of_optimum_needs_approval() {
        let p = pts(&[
            (10.0, 1720.0),
            (12.0, 1765.0),
            (14.0, 1790.0),
            (16.0, 1772.0),
        ]);
        let f = fit_curve(&p, gs(2.70)).unwrap();
        let codes: Vec<&str> = concerns(&p, &f).iter().map(|c| c.code).collect();
        assert!(codes.contains(&"peak_not_bracketed"), "{codes:?}");
    }

    #[test]
    fn a_point_above_zero_air_voids_needs_approval() {
        // At Gs 2.60 and 18 %: ZAV = 2600 / (1 + 0.18 × 2.6) = 1771.1 kg/m³ (Das formula); 1775 lies above.
        let p = pts(&[
            (10.0, 1700.0),
            (12.0, 1745.0),
            (14.0, 1790.0),
            (16.0, 1792.0),
            (18.0, 1775.0),
        ]);
        let f = fit_curve(&p, gs(2.60)).unwrap();
        let codes: Vec<&str> = concerns(&p, &f).iter().map(|c| c.code).collect();
        assert!(codes.contains(&"above_zero_air_voids"), "{codes:?}");
    }

    #[test]
    fn scattered_points_are_a_poor_fit() {
        // Zig-zag of ±40 kg/m³ about a smooth peak: RMS well above 1 % of ~1800 kg/m³ (18 kg/m³).
        let p = pts(&[
            (8.0, 1700.0),
            (10.0, 1800.0),
            (12.0, 1740.0),
            (14.0, 1830.0),
            (16.0, 1720.0),
            (18.0, 1700.0),
        ]);
        let f = fit_curve(&p, None).unwrap();
        let c = concerns(&p, &f);
        assert!(c.iter().any(|c| c.code == "poor_fit"), "{c:?}");
    }

    #[test]
    fn a_peak_drawn_by_the_fit_far_above_the_points_needs_approval() {
        // Least-squares quadratic worked by hand with t = w − 12: ρd = 1822.5 + 0.75 t − 7.5 t²,
        // peak 1822.52 kg/m³ at t = 0.05 (12.05 %), 1.53 % above the densest specimen 1795.
        let p = pts(&[
            (8.0, 1700.0),
            (10.0, 1790.0),
            (14.0, 1795.0),
            (16.0, 1705.0),
        ]);
        let f = fit_curve(&p, None).unwrap();
        assert!((f.max_dry_density.kg_m3() - 1822.519).abs() < 0.01);
        assert!((f.optimum_water_content.pct() - 12.05).abs() < 1e-9);
        let c = concerns(&p, &f);
        let codes: Vec<&str> = c.iter().map(|c| c.code).collect();
        assert_eq!(codes, vec!["peak_far_above_points"], "{c:?}");
        assert!(c[0].message.contains("1.5 % above"), "{}", c[0].message);
    }
}
