//! Plausibility of a field test: readings a technician or reviewer should look
//! at twice before a verdict rests on them. A flag never changes a verdict; it
//! travels with the test (entry answer, preview, lot sheet, certificate). Only
//! a point far above the zero-air-voids line is refused at entry unless the
//! technician confirms it (see [`ZAV_REFUSAL_TOLERANCE_PCT`]).

use serde::Serialize;

use super::quantities::SpecificGravity;
use super::voids::{degree_of_saturation_pct, zero_air_voids_density};

/// Default upper plausible relative compaction, percent (common practice: above about 103 %
/// usually means a wrong curve, moisture or Gs).
pub const DEFAULT_RC_PLAUSIBLE_MAX_PCT: f64 = 103.0;

/// How far (percent of the ZAV density) a field point may lie above zero air voids before
/// entry is refused unless confirmed.
///
/// Basis (worked by hand, common practice): at Gs 2.68 and w = 12 % the ZAV density falls by
/// Gs² ρw / (1 + w Gs)² ≈ 41 kg/m³, about 2 %, for each point of water content, and one point
/// is the order of a nuclear gauge's moisture error on an uncorrected material. A point
/// within 2 % above the line may be such an error (flagged); beyond it the reading, the
/// moisture or Gs is wrong and the test is refused until the technician confirms it.
pub const ZAV_REFUSAL_TOLERANCE_PCT: f64 = 2.0;

/// A named plausibility warning on one test.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlausibilityFlag {
    /// Stable code: "probe_deeper_than_layer", "above_zero_air_voids", "rc_above_plausible".
    pub code: &'static str,
    /// Plain words with the numbers.
    pub message: String,
}

/// What the checks read about one test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlausibilityInput {
    /// Probe depth of a nuclear test in direct transmission, mm (None for other methods).
    pub nuclear_probe_depth_mm: Option<f64>,
    /// Compacted thickness of the test's layer, mm, when known.
    pub layer_thickness_mm: Option<f64>,
    /// Field dry density, kg/m³.
    pub dry_density_kg_m3: f64,
    /// Field water content, percent.
    pub water_content_pct: f64,
    /// Gs of the lot's reference curve.
    pub specific_gravity: Option<SpecificGravity>,
    /// Relative compaction when the test could be judged.
    pub relative_compaction_pct: Option<f64>,
    /// The clause's upper plausible relative compaction, percent.
    pub rc_plausible_max_pct: f64,
}

/// How far a point lies above the zero-air-voids density, percent of that density
/// (negative below): (ρd / ρ_zav − 1) × 100, ρ_zav = Gs ρw / (1 + w Gs).
pub fn zav_excess_pct(gs: SpecificGravity, water_content_pct: f64, dry_density_kg_m3: f64) -> f64 {
    (dry_density_kg_m3 / zero_air_voids_density(gs, water_content_pct) - 1.0) * 100.0
}

/// Every plausibility flag of a test, in a fixed order.
pub fn flags(i: &PlausibilityInput) -> Vec<PlausibilityFlag> {
    let mut out = Vec::new();
    if let (Some(depth), Some(layer)) = (i.nuclear_probe_depth_mm, i.layer_thickness_mm)
        && depth > layer
    {
        out.push(PlausibilityFlag {
            code: "probe_deeper_than_layer",
            message: format!(
                "probe depth {depth:.0} mm is greater than the layer's {layer:.0} mm: the gauge read the layer below as well"
            ),
        });
    }
    if let Some(gs) = i.specific_gravity {
        let excess = zav_excess_pct(gs, i.water_content_pct, i.dry_density_kg_m3);
        if excess > 0.0 {
            let saturation = degree_of_saturation_pct(gs, i.water_content_pct, i.dry_density_kg_m3);
            out.push(PlausibilityFlag {
                code: "above_zero_air_voids",
                message: format!(
                    "dry density {:.0} kg/m³ at {:.1} % lies {excess:.1} % above zero air voids for Gs {:.2} (saturation {saturation:.0} %): check the moisture, the density or Gs",
                    i.dry_density_kg_m3,
                    i.water_content_pct,
                    gs.value()
                ),
            });
        }
    }
    if let Some(rc) = i.relative_compaction_pct
        && rc > i.rc_plausible_max_pct
    {
        out.push(PlausibilityFlag {
            code: "rc_above_plausible",
            message: format!(
                "relative compaction {rc:.1} % is above the {:.1} % this clause finds plausible: check the reference curve, the moisture or Gs",
                i.rc_plausible_max_pct
            ),
        });
    }
    out
}

/// Why a test is refused at entry unless confirmed: its point lies more than
/// [`ZAV_REFUSAL_TOLERANCE_PCT`] above zero air voids.
pub fn refusal_without_confirmation(
    gs: SpecificGravity,
    water_content_pct: f64,
    dry_density_kg_m3: f64,
) -> Option<String> {
    let excess = zav_excess_pct(gs, water_content_pct, dry_density_kg_m3);
    (excess > ZAV_REFUSAL_TOLERANCE_PCT).then(|| {
        format!(
            "dry density {dry_density_kg_m3:.0} kg/m³ at {water_content_pct:.1} % lies {excess:.1} % above zero air voids for Gs {:.2}, more than the {ZAV_REFUSAL_TOLERANCE_PCT:.1} % tolerated; check the readings, or send confirm_implausible: true to record it as read",
            gs.value()
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input(dry: f64, w: f64) -> PlausibilityInput {
        PlausibilityInput {
            nuclear_probe_depth_mm: Some(200.0),
            layer_thickness_mm: Some(250.0),
            dry_density_kg_m3: dry,
            water_content_pct: w,
            specific_gravity: Some(SpecificGravity::new(2.68).unwrap()),
            relative_compaction_pct: Some(98.0),
            rc_plausible_max_pct: DEFAULT_RC_PLAUSIBLE_MAX_PCT,
        }
    }

    #[test]
    fn zav_excess_follows_the_phase_relation() {
        // Das: ρ_zav = Gs ρw / (1 + w Gs) = 2680 / (1 + 0.12 × 2.68) = 2027.84 kg/m³ (by hand).
        let gs = SpecificGravity::new(2.68).unwrap();
        assert!((zav_excess_pct(gs, 12.0, 2027.84)).abs() < 1e-3);
        // 2060 / 2027.84 − 1 = 1.586 % (by hand): flagged, not refused.
        assert!((zav_excess_pct(gs, 12.0, 2060.0) - 1.586).abs() < 1e-3);
        assert!(refusal_without_confirmation(gs, 12.0, 2060.0).is_none());
        // 2080 / 2027.84 − 1 = 2.572 % (by hand): refused unless confirmed.
        let r = refusal_without_confirmation(gs, 12.0, 2080.0).unwrap();
        assert!(r.contains("2.6 % above zero air voids"), "{r}");
    }

    #[test]
    fn a_plain_test_has_no_flag() {
        assert!(flags(&input(1900.0, 12.0)).is_empty());
    }

    #[test]
    fn each_flag_is_named() {
        let mut i = input(2060.0, 12.0);
        i.nuclear_probe_depth_mm = Some(300.0);
        i.relative_compaction_pct = Some(104.2);
        let codes: Vec<&str> = flags(&i).iter().map(|f| f.code).collect();
        assert_eq!(
            codes,
            vec![
                "probe_deeper_than_layer",
                "above_zero_air_voids",
                "rc_above_plausible"
            ]
        );
        // Saturation S = w Gs / e, e = 2680 / 2060 − 1 = 0.30097: S = 0.12 × 2.68 / 0.30097 = 106.9 % (by hand).
        let zav = &flags(&i)[1].message;
        assert!(zav.contains("saturation 107 %"), "{zav}");
        // Exactly at the limit is not above it.
        i.relative_compaction_pct = Some(103.0);
        i.nuclear_probe_depth_mm = Some(250.0);
        assert_eq!(flags(&i).len(), 1);
    }
}
