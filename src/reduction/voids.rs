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
