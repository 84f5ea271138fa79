//! One-point compaction check (AASHTO T 272, "Family of Curves — One-Point Method"): one specimen
//! of the field material compacted at the reference effort is placed among the family of curves of
//! its material; the curve through it, interpolated between its two neighbours, gives MDD and OMC.
//!
//! Interpolation (stated here, as T 272 leaves the drawing to the user): at the point's water
//! content w, each curve has a density ρᵢ(w). With neighbours ρ_lo(w) ≤ ρ ≤ ρ_hi(w), the fraction
//! f = (ρ − ρ_lo(w)) / (ρ_hi(w) − ρ_lo(w)) gives MDD = MDD_lo + f·(MDD_hi − MDD_lo) and
//! OMC = OMC_lo + f·(OMC_hi − OMC_lo). The point must fall dry of the interpolated optimum, within a
//! window (from memory: on the dry side, a few points; the clause sets the width). A point above
//! the highest or below the lowest curve is outside the family: run a full curve.

use serde::Serialize;

use super::curve::CurvePoint;

/// One member of a family: a lab curve's peak and its shape (fitted samples in water order).
#[derive(Debug, Clone, PartialEq)]
pub struct FamilyCurve {
    pub id: i64,
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
    pub samples: Vec<CurvePoint>,
}

/// The result of a one-point check.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OnePointResult {
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
    /// The neighbouring curves (lower, upper by density at the point's water content).
    pub lower_curve_id: i64,
    pub upper_curve_id: i64,
    /// Where the point lies between them (0 = on the lower, 1 = on the upper).
    pub fraction: f64,
}

/// Why a point cannot be placed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum OnePointError {
    #[error("a family needs at least two curves of the same effort; it has {0}")]
    TooFewCurves(usize),
    #[error(
        "the point ({w:.1} %, {rho:.0} kg/m³) lies outside the family of curves; run a full curve"
    )]
    OutsideFamily { w: f64, rho: f64 },
    #[error(
        "the point is {dev:+.1} points from the interpolated optimum; it must be between {window:.1} points dry and optimum; run a full curve or recompact drier"
    )]
    OutsideWindow { dev: f64, window: f64 },
}

/// Dry density of the compacted specimen, ρd = ρ / (1 + w/100) (the phase relation, as for
/// every field and lab specimen here).
pub fn dry_density_of(wet_density_kg_m3: f64, water_content_pct: f64) -> f64 {
    wet_density_kg_m3 / (1.0 + water_content_pct / 100.0)
}

/// Density of a sampled curve at `w` by linear interpolation; None outside its samples.
pub fn density_on(samples: &[CurvePoint], w: f64) -> Option<f64> {
    samples.windows(2).find_map(|s| {
        let (a, b) = (s[0], s[1]);
        let (w0, w1) = (a.water_content_pct, b.water_content_pct);
        (w >= w0 && w <= w1 && w1 > w0).then(|| {
            a.dry_density_kg_m3 + (w - w0) / (w1 - w0) * (b.dry_density_kg_m3 - a.dry_density_kg_m3)
        })
    })
}

/// Places a one-point (water content %, dry density kg/m³) in its family.
pub fn one_point(
    family: &[FamilyCurve],
    water_content_pct: f64,
    dry_density_kg_m3: f64,
    dry_window_pct: f64,
) -> Result<OnePointResult, OnePointError> {
    if family.len() < 2 {
        return Err(OnePointError::TooFewCurves(family.len()));
    }
    let (w, rho) = (water_content_pct, dry_density_kg_m3);
    let outside = OnePointError::OutsideFamily { w, rho };
    let mut at: Vec<(f64, &FamilyCurve)> = family
        .iter()
        .filter_map(|c| density_on(&c.samples, w).map(|d| (d, c)))
        .collect();
    at.sort_by(|a, b| a.0.total_cmp(&b.0));
    let pair = at
        .windows(2)
        .find(|p| rho >= p[0].0 && rho <= p[1].0)
        .ok_or(outside)?;
    let ((d_lo, lo), (d_hi, hi)) = (pair[0], pair[1]);
    let f = if d_hi > d_lo {
        (rho - d_lo) / (d_hi - d_lo)
    } else {
        0.0
    };
    let lerp = |a: f64, b: f64| a + f * (b - a);
    let omc = lerp(lo.optimum_water_content_pct, hi.optimum_water_content_pct);
    let dev = w - omc;
    if dev > 0.0 || dev < -dry_window_pct {
        return Err(OnePointError::OutsideWindow {
            dev,
            window: dry_window_pct,
        });
    }
    Ok(OnePointResult {
        max_dry_density_kg_m3: lerp(lo.max_dry_density_kg_m3, hi.max_dry_density_kg_m3),
        optimum_water_content_pct: omc,
        lower_curve_id: lo.id,
        upper_curve_id: hi.id,
        fraction: f,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(pts: &[(f64, f64)]) -> Vec<CurvePoint> {
        pts.iter()
            .map(|&(w, d)| CurvePoint {
                water_content_pct: w,
                dry_density_kg_m3: d,
            })
            .collect()
    }

    /// Two straight-sided stand-ins for curves, dry limbs only (hand-drawn for arithmetic).
    fn family() -> Vec<FamilyCurve> {
        vec![
            FamilyCurve {
                id: 1,
                max_dry_density_kg_m3: 1800.0,
                optimum_water_content_pct: 14.0,
                samples: line(&[(8.0, 1700.0), (14.0, 1800.0), (18.0, 1740.0)]),
            },
            FamilyCurve {
                id: 2,
                max_dry_density_kg_m3: 2000.0,
                optimum_water_content_pct: 10.0,
                samples: line(&[(6.0, 1900.0), (10.0, 2000.0), (14.0, 1940.0)]),
            },
        ]
    }

    #[test]
    fn interpolates_between_neighbours() {
        // Hand arithmetic: at w = 9 %, curve 1 gives 1700 + 1/6·100 = 1716.67, curve 2 gives
        // 1900 + 3/4·100 = 1975. ρ = 1846 → f = (1846 − 1716.67)/(1975 − 1716.67) = 0.5006;
        // MDD = 1800 + 0.5006·200 = 1900.1; OMC = 14 − 0.5006·4 = 11.998 (w − OMC = −3.0, dry).
        let r = one_point(&family(), 9.0, 1846.0, 4.0).unwrap();
        let f = (1846.0 - (1700.0 + 100.0 / 6.0)) / (1975.0 - (1700.0 + 100.0 / 6.0));
        assert!((r.fraction - f).abs() < 1e-12);
        assert!((r.fraction - 0.5006).abs() < 1e-4);
        assert!((r.max_dry_density_kg_m3 - 1900.1).abs() < 0.05);
        assert!((r.optimum_water_content_pct - 11.998).abs() < 1e-3);
        assert_eq!((r.lower_curve_id, r.upper_curve_id), (1, 2));
    }

    #[test]
    fn outside_the_family_or_the_window_is_refused() {
        // Above the upper curve at 9 % (1975): outside the family.
        assert!(matches!(
            one_point(&family(), 9.0, 1990.0, 4.0),
            Err(OnePointError::OutsideFamily { .. })
        ));
        // Below the lower curve.
        assert!(matches!(
            one_point(&family(), 9.0, 1700.0, 4.0),
            Err(OnePointError::OutsideFamily { .. })
        ));
        // 3.0 points dry with a 2-point window: outside the window.
        assert!(matches!(
            one_point(&family(), 9.0, 1846.0, 2.0),
            Err(OnePointError::OutsideWindow { .. })
        ));
        assert_eq!(
            one_point(&family()[..1], 9.0, 1846.0, 4.0),
            Err(OnePointError::TooFewCurves(1))
        );
    }

    #[test]
    fn dry_density_from_wet() {
        // Hand arithmetic: 2070 / 1.15 = 1800 kg/m³.
        assert!((dry_density_of(2070.0, 15.0) - 1800.0).abs() < 1e-9);
    }

    #[test]
    fn density_on_a_sampled_curve() {
        let s = line(&[(8.0, 1700.0), (14.0, 1800.0)]);
        assert_eq!(density_on(&s, 11.0), Some(1750.0)); // hand: midway
        assert_eq!(density_on(&s, 7.0), None);
    }
}
