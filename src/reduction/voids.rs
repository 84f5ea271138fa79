//! Phase relations: zero-air-voids, saturation and air-voids lines, and the
//! void ratio, saturation and air voids of one point (Das, *Principles of
//! Geotechnical Engineering*, compaction chapter). Water content is in percent
//! at the API and a fraction inside.

use super::curve::CurvePoint;
use super::quantities::SpecificGravity;

/// Density of water used in the phase relations, kg/m³ (common practice: 1000).
pub const WATER_DENSITY_KG_M3: f64 = 1000.0;

/// Dry density at full saturation, kg/m³: ρ_zav = Gs ρw / (1 + w Gs).
pub fn zero_air_voids_density(gs: SpecificGravity, water_content_pct: f64) -> f64 {
    let w = water_content_pct / 100.0;
    gs.value() * WATER_DENSITY_KG_M3 / (1.0 + w * gs.value())
}

/// Dry density on the line of saturation S (percent), kg/m³: ρd = Gs ρw / (1 + w Gs / S).
pub fn saturation_line_density(
    gs: SpecificGravity,
    water_content_pct: f64,
    saturation_pct: f64,
) -> f64 {
    let w = water_content_pct / 100.0;
    let s = saturation_pct / 100.0;
    gs.value() * WATER_DENSITY_KG_M3 / (1.0 + w * gs.value() / s)
}

/// Dry density on the line of air voids n_a (percent of total volume), kg/m³: ρd = (1 − n_a) Gs ρw / (1 + w Gs).
pub fn air_voids_line_density(
    gs: SpecificGravity,
    water_content_pct: f64,
    air_voids_pct: f64,
) -> f64 {
    let na = air_voids_pct / 100.0;
    (1.0 - na) * zero_air_voids_density(gs, water_content_pct)
}

/// Void ratio of a point: e = Gs ρw / ρd − 1.
pub fn void_ratio(gs: SpecificGravity, dry_density_kg_m3: f64) -> f64 {
    gs.value() * WATER_DENSITY_KG_M3 / dry_density_kg_m3 - 1.0
}

/// Degree of saturation of a point, percent: S = w Gs / e.
pub fn degree_of_saturation_pct(
    gs: SpecificGravity,
    water_content_pct: f64,
    dry_density_kg_m3: f64,
) -> f64 {
    let w = water_content_pct / 100.0;
    w * gs.value() / void_ratio(gs, dry_density_kg_m3) * 100.0
}

/// Air voids of a point, percent of total volume: n_a = 1 − ρd (1/(Gs ρw) + w/ρw).
pub fn air_voids_pct(gs: SpecificGravity, water_content_pct: f64, dry_density_kg_m3: f64) -> f64 {
    let w = water_content_pct / 100.0;
    let solids = dry_density_kg_m3 / (gs.value() * WATER_DENSITY_KG_M3);
    let water = dry_density_kg_m3 * w / WATER_DENSITY_KG_M3;
    (1.0 - solids - water) * 100.0
}

/// Evenly spaced water contents from `from_pct` to `to_pct` inclusive (at least two when asked for any).
fn sample_water(from_pct: f64, to_pct: f64, samples: usize) -> Vec<f64> {
    if !from_pct.is_finite() || !to_pct.is_finite() || samples == 0 {
        return Vec::new();
    }
    if samples == 1 {
        return vec![from_pct];
    }
    let step = (to_pct - from_pct) / (samples - 1) as f64;
    (0..samples).map(|i| from_pct + step * i as f64).collect()
}

/// Points of the zero-air-voids line for plotting.
pub fn zero_air_voids_line(
    gs: SpecificGravity,
    from_pct: f64,
    to_pct: f64,
    samples: usize,
) -> Vec<CurvePoint> {
    saturation_line(gs, 100.0, from_pct, to_pct, samples)
}

/// Points of a line of constant saturation (percent) for plotting.
pub fn saturation_line(
    gs: SpecificGravity,
    saturation_pct: f64,
    from_pct: f64,
    to_pct: f64,
    samples: usize,
) -> Vec<CurvePoint> {
    sample_water(from_pct, to_pct, samples)
        .into_iter()
        .map(|w| CurvePoint {
            water_content_pct: w,
            dry_density_kg_m3: saturation_line_density(gs, w, saturation_pct),
        })
        .collect()
}

/// Points of a line of constant air voids (percent) for plotting.
pub fn air_voids_line(
    gs: SpecificGravity,
    air_voids_pct: f64,
    from_pct: f64,
    to_pct: f64,
    samples: usize,
) -> Vec<CurvePoint> {
    sample_water(from_pct, to_pct, samples)
        .into_iter()
        .map(|w| CurvePoint {
            water_content_pct: w,
            dry_density_kg_m3: air_voids_line_density(gs, w, air_voids_pct),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn gs(v: f64) -> SpecificGravity {
        SpecificGravity::new(v).unwrap()
    }

    #[test]
    fn zav_worked_examples() {
        // Das formula ρ = Gs ρw / (1 + w Gs), worked in textbook form (from memory of the style):
        // Gs 2.70, w 15 %: 2700 / 1.405 = 1921.7 kg/m³.
        assert!((zero_air_voids_density(gs(2.70), 15.0) - 1921.7082).abs() < 1e-3);
        // Gs 2.65, w 20 %: 2650 / 1.53 = 1732.03 kg/m³.
        assert!((zero_air_voids_density(gs(2.65), 20.0) - 1732.0261).abs() < 1e-3);
        // At w = 0 the ZAV density is the solids density Gs ρw.
        assert_eq!(zero_air_voids_density(gs(2.70), 0.0), 2700.0);
    }

    #[test]
    fn a_point_on_zav_is_saturated_with_no_air() {
        // Identities of the phase relations (Das): on the ZAV line S = 100 % and n_a = 0.
        for (g, w) in [(2.60, 8.0), (2.70, 15.0), (2.75, 22.0)] {
            let d = zero_air_voids_density(gs(g), w);
            assert!((degree_of_saturation_pct(gs(g), w, d) - 100.0).abs() < 1e-9);
            assert!(air_voids_pct(gs(g), w, d).abs() < 1e-9);
            assert!((saturation_line_density(gs(g), w, 100.0) - d).abs() < 1e-9);
            assert!((air_voids_line_density(gs(g), w, 0.0) - d).abs() < 1e-9);
        }
    }

    #[test]
    fn lines_and_point_properties_agree() {
        let g = gs(2.70);
        // e = Gs ρw / ρd − 1: 2700 / 1800 − 1 = 0.5 (Das); S = w Gs / e = 0.15 × 2.7 / 0.5 = 81 %.
        assert!((void_ratio(g, 1800.0) - 0.5).abs() < 1e-12);
        assert!((degree_of_saturation_pct(g, 15.0, 1800.0) - 81.0).abs() < 1e-9);
        // A point on the 80 % saturation line has S = 80 %; one on the 5 % air-voids line has n_a = 5 %.
        let d80 = saturation_line_density(g, 14.0, 80.0);
        assert!((degree_of_saturation_pct(g, 14.0, d80) - 80.0).abs() < 1e-9);
        let d5 = air_voids_line_density(g, 14.0, 5.0);
        assert!((air_voids_pct(g, 14.0, d5) - 5.0).abs() < 1e-9);
        let line = zero_air_voids_line(g, 5.0, 25.0, 21);
        assert_eq!(line.len(), 21);
        assert_eq!(line[0].water_content_pct, 5.0);
        assert!((line[20].water_content_pct - 25.0).abs() < 1e-12);
        assert!((line[10].dry_density_kg_m3 - zero_air_voids_density(g, 15.0)).abs() < 1e-9);
        assert_eq!(saturation_line(g, 90.0, 5.0, 25.0, 0).len(), 0);
        assert_eq!(saturation_line(g, 90.0, 5.0, f64::NAN, 5).len(), 0);
        assert_eq!(air_voids_line(g, 5.0, 5.0, 25.0, 3).len(), 3);
    }

    proptest! {
        #[test]
        fn zav_density_falls_as_water_rises(g in 2.0f64..3.2, w in 0.0f64..60.0, dw in 0.01f64..20.0) {
            let g = gs(g);
            prop_assert!(zero_air_voids_density(g, w + dw) < zero_air_voids_density(g, w));
        }

        #[test]
        fn lower_saturation_lines_lie_below_zav(g in 2.0f64..3.2, w in 1.0f64..40.0, s in 50.0f64..99.0) {
            let g = gs(g);
            prop_assert!(saturation_line_density(g, w, s) < zero_air_voids_density(g, w));
        }
    }
}
