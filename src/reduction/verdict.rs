//! Per-test verdict: relative compaction and moisture deviation against a
//! reference curve, judged against a clause's limits with reasons in words.

use serde::{Deserialize, Serialize};

use super::oversize::{OversizeInput, correct_for_oversize};
use super::quantities::{Density, SpecificGravity, WaterContent};
use super::rounding::Rounding;
use super::voids::air_voids_pct;
use super::water::ReductionError;

/// Slack for comparing percentages so that 95.0 computed as 94.99999999 still meets 95.0.
pub(crate) const COMPARE_EPS: f64 = 1e-9;

/// The reference a field test is judged against: a lab curve's MDD and OMC (perhaps oversize-corrected).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Reference {
    /// Maximum dry density of the reference.
    pub max_dry_density: Density,
    /// Optimum water content of the reference.
    pub optimum_water_content: WaterContent,
    /// Specific gravity of the material judged (the curve's Gs, or the combined Gs of fine and
    /// coarse after an oversize correction); needed only by an air-voids criterion.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub specific_gravity: Option<SpecificGravity>,
}

/// Relative compaction, percent: ρd,field / MDD × 100.
pub fn relative_compaction_pct(dry_density: Density, max_dry_density: Density) -> f64 {
    dry_density.kg_m3() / max_dry_density.kg_m3() * 100.0
}

/// Moisture deviation, percentage points: w_field − OMC (negative = dry of optimum).
pub fn moisture_deviation_pct(water_content: WaterContent, optimum: WaterContent) -> f64 {
    water_content.pct() - optimum.pct()
}

/// How a clause writes its moisture window (DOMAIN.md, "Trusting a verdict": windows come as
/// points of OMC, as a percentage of OMC, or as an absolute range of water content).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "basis", rename_all = "snake_case")]
pub enum MoistureWindow {
    /// w − OMC within −below…+above percentage points (common practice: 2.0 each side).
    PointsOfOmc { below_pct: f64, above_pct: f64 },
    /// w / OMC × 100 within low…high percent of OMC (e.g. 90 to 110 %).
    PercentOfOmc { low_pct: f64, high_pct: f64 },
    /// w itself within min…max percent, whatever the curve's OMC.
    Absolute { min_pct: f64, max_pct: f64 },
}

impl MoistureWindow {
    /// Stable code stored with a clause.
    pub fn code(&self) -> &'static str {
        match self {
            Self::PointsOfOmc { .. } => "points_of_omc",
            Self::PercentOfOmc { .. } => "percent_of_omc",
            Self::Absolute { .. } => "absolute",
        }
    }
    /// The quantity this window bounds, from a water content and the reference's OMC (percent):
    /// points from OMC, percent of OMC, or the water content itself.
    pub fn measure(&self, water_content_pct: f64, optimum_pct: f64) -> f64 {
        match self {
            Self::PointsOfOmc { .. } => water_content_pct - optimum_pct,
            Self::PercentOfOmc { .. } => water_content_pct / optimum_pct * 100.0,
            Self::Absolute { .. } => water_content_pct,
        }
    }
    /// The least and greatest allowed value of [`Self::measure`].
    pub fn bounds(&self) -> (f64, f64) {
        match *self {
            Self::PointsOfOmc {
                below_pct,
                above_pct,
            } => (-below_pct, above_pct),
            Self::PercentOfOmc { low_pct, high_pct } => (low_pct, high_pct),
            Self::Absolute { min_pct, max_pct } => (min_pct, max_pct),
        }
    }
}

/// A clause's limits for one test: RC minimum, the moisture window and, where the contract
/// sets one, a maximum air-voids percentage.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SpecLimits {
    /// Least relative compaction, percent (common practice: 95).
    pub rc_min_pct: f64,
    /// The moisture window and how it is written.
    pub moisture: MoistureWindow,
    /// Greatest air voids allowed, percent of total volume (none: not judged). Values come
    /// from the contract (UK end-product practice, from memory: 5 to 10 %).
    #[serde(default)]
    pub max_air_voids_pct: Option<f64>,
    /// How observed values are compared with these limits (ASTM E29).
    pub rounding: Rounding,
}

impl SpecLimits {
    /// True when a relative compaction meets the minimum (compared as the clause rounds).
    pub fn density_ok(&self, rc_pct: f64) -> bool {
        self.rounding.at_least(rc_pct, self.rc_min_pct)
    }
    /// The value the moisture window bounds, for a water content and an OMC (percent).
    pub fn moisture_measure(&self, water_content_pct: f64, optimum_pct: f64) -> f64 {
        self.moisture.measure(water_content_pct, optimum_pct)
    }
    /// True when a moisture measure (see [`MoistureWindow::measure`]) lies inside the window,
    /// compared as the clause rounds.
    pub fn moisture_ok(&self, measure: f64) -> bool {
        let (low, high) = self.moisture.bounds();
        self.rounding.at_least(measure, low) && self.rounding.at_most(measure, high)
    }
    /// True when air voids meet the clause's maximum (always, when it sets none).
    pub fn air_voids_ok(&self, air_voids_pct: f64) -> bool {
        self.max_air_voids_pct
            .is_none_or(|max| self.rounding.at_most(air_voids_pct, max))
    }
    /// The moisture window in words, e.g. "−2.0 to +2.0 points of optimum".
    pub fn moisture_window_words(&self) -> String {
        let text = |v: f64| self.rounding.limit_text(v);
        match self.moisture {
            MoistureWindow::PointsOfOmc {
                below_pct,
                above_pct,
            } => format!(
                "{} to +{} points of optimum",
                if below_pct == 0.0 {
                    text(below_pct)
                } else {
                    format!("−{}", text(below_pct))
                },
                text(above_pct)
            ),
            MoistureWindow::PercentOfOmc { low_pct, high_pct } => {
                format!("{} % to {} % of optimum", text(low_pct), text(high_pct))
            }
            MoistureWindow::Absolute { min_pct, max_pct } => {
                format!("{} % to {} % water content", text(min_pct), text(max_pct))
            }
        }
    }
    /// Where a test's moisture measure lies, in the window's own terms, with the value compared:
    /// "1.3 points wet of optimum", "108.3 % of optimum", "water content 13.2 %".
    pub fn measure_words(&self, measure: f64) -> String {
        match self.moisture {
            MoistureWindow::PointsOfOmc { .. } => self.deviation_words(measure),
            MoistureWindow::PercentOfOmc { low_pct, .. } => format!(
                "{} % of optimum",
                if measure < low_pct {
                    self.rounding.shown_against_lower(measure)
                } else {
                    self.rounding.shown_against_upper(measure)
                }
            ),
            MoistureWindow::Absolute { min_pct, .. } => format!(
                "water content {} %",
                if measure < min_pct {
                    self.rounding.shown_against_lower(measure)
                } else {
                    self.rounding.shown_against_upper(measure)
                }
            ),
        }
    }
    /// A relative compaction against the minimum in words, printing the value compared.
    pub fn density_words(&self, what: &str, rc_pct: f64) -> String {
        format!(
            "{what} {} % {} the {} % minimum",
            self.rounding.shown_against_lower(rc_pct),
            if self.density_ok(rc_pct) {
                "meets"
            } else {
                "is below"
            },
            self.rounding.limit_text(self.rc_min_pct)
        )
    }
    /// A signed deviation in words with the value compared: "1.3 points wet of optimum".
    pub fn deviation_words(&self, deviation_pct: f64) -> String {
        let (shown, side) = if deviation_pct < 0.0 {
            (self.rounding.shown_against_lower(deviation_pct), "dry")
        } else {
            (self.rounding.shown_against_upper(deviation_pct), "wet")
        };
        let magnitude = shown.trim_start_matches('-');
        if magnitude.chars().all(|c| c == '0' || c == '.') {
            "at optimum".to_string()
        } else {
            format!("{magnitude} points {side} of optimum")
        }
    }
}

/// The verdict on one field test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TestVerdict {
    /// Relative compaction, percent.
    pub relative_compaction_pct: f64,
    /// Moisture deviation, percentage points.
    pub moisture_deviation_pct: f64,
    /// The value the clause's moisture window bounds (points, percent of OMC or water content).
    pub moisture_measure: f64,
    /// Air voids, percent, when the clause sets a maximum and the material's Gs is known.
    pub air_voids_pct: Option<f64>,
    /// RC meets the minimum.
    pub density_ok: bool,
    /// Water content inside the window.
    pub moisture_ok: bool,
    /// Air voids at most the clause's maximum (true when it sets none).
    pub air_voids_ok: bool,
    /// Every criterion met.
    pub passed: bool,
    /// One sentence on density, one on moisture, and one on air voids when judged.
    pub reasons: Vec<String>,
}

/// The moisture sentence of a verdict, in the window's own terms.
fn moisture_words(
    limits: &SpecLimits,
    water_content: WaterContent,
    reference: &Reference,
    measure: f64,
    ok: bool,
) -> String {
    let inside = if ok { "inside" } else { "outside" };
    let window = limits.moisture_window_words();
    let w = water_content.pct();
    let omc = reference.optimum_water_content.pct();
    match limits.moisture {
        MoistureWindow::PointsOfOmc { .. } | MoistureWindow::PercentOfOmc { .. } => format!(
            "water content {w:.1} % is {} ({omc:.1} %), {inside} the window of {window}",
            limits.measure_words(measure),
        ),
        MoistureWindow::Absolute { .. } => format!(
            "{} (optimum {omc:.1} %) is {inside} the window of {window}",
            limits.measure_words(measure),
        ),
    }
}

/// Air voids of a test and their sentence, when the clause judges them.
fn air_voids_judgement(
    dry_density: Density,
    water_content: WaterContent,
    reference: &Reference,
    limits: &SpecLimits,
) -> Option<(f64, bool, String)> {
    let max = limits.max_air_voids_pct?;
    let Some(gs) = reference.specific_gravity else {
        return Some((
            f64::NAN,
            false,
            "air voids cannot be judged: the material's specific gravity is not known".into(),
        ));
    };
    let av = air_voids_pct(gs, water_content.pct(), dry_density.kg_m3());
    let ok = limits.air_voids_ok(av);
    let words = format!(
        "air voids {} % {} the {} % maximum (Gs {:.3})",
        limits.rounding.shown_against_upper(av),
        if ok { "meet" } else { "exceed" },
        limits.rounding.limit_text(max),
        gs.value()
    );
    Some((av, ok, words))
}

/// Judges one test: RC ≥ RC_min, the moisture measure inside the window and, where the clause
/// sets one, air voids ≤ the maximum — each compared as the clause rounds.
pub fn judge_test(
    dry_density: Density,
    water_content: WaterContent,
    reference: &Reference,
    limits: &SpecLimits,
) -> TestVerdict {
    let rc = relative_compaction_pct(dry_density, reference.max_dry_density);
    let dev = moisture_deviation_pct(water_content, reference.optimum_water_content);
    let measure =
        limits.moisture_measure(water_content.pct(), reference.optimum_water_content.pct());
    let density_ok = limits.density_ok(rc);
    let moisture_ok = limits.moisture_ok(measure);
    let mut reasons = vec![
        limits.density_words("relative compaction", rc),
        moisture_words(limits, water_content, reference, measure, moisture_ok),
    ];
    let air = air_voids_judgement(dry_density, water_content, reference, limits);
    let air_voids_ok = air.as_ref().is_none_or(|(_, ok, _)| *ok);
    let air_voids_pct = air.map(|(av, _, words)| {
        reasons.push(words);
        av
    });
    TestVerdict {
        relative_compaction_pct: rc,
        moisture_deviation_pct: dev,
        moisture_measure: measure,
        air_voids_pct: air_voids_pct.filter(|v| v.is_finite()),
        density_ok,
        moisture_ok,
        air_voids_ok,
        passed: density_ok && moisture_ok && air_voids_ok,
        reasons,
    }
}

/// The specific gravity of a fine and a coarse fraction together, weighted by dry mass:
/// G = 1 / (P_f / (100 G_f) + P_c / (100 G_c)) (ASTM C127, average of size fractions; from memory).
pub fn combined_specific_gravity(fine_gs: f64, coarse_gs: f64, coarse_pct: f64) -> f64 {
    let fine_pct = 100.0 - coarse_pct;
    100.0 / (fine_pct / fine_gs + coarse_pct / coarse_gs)
}

/// Corrects a reference for a coarse fraction (ASTM D4718) before judging tests of the whole material.
pub fn reference_for_coarse_fraction(
    reference: &Reference,
    coarse_pct: f64,
    coarse_specific_gravity: f64,
    coarse_water_content_pct: f64,
    limit_pct: f64,
) -> Result<Reference, ReductionError> {
    let corrected = correct_for_oversize(
        &OversizeInput {
            fine_dry_density_kg_m3: reference.max_dry_density.kg_m3(),
            fine_water_content_pct: reference.optimum_water_content.pct(),
            coarse_pct,
            coarse_specific_gravity,
            coarse_water_content_pct,
        },
        limit_pct,
    )?;
    Ok(Reference {
        max_dry_density: corrected.dry_density,
        optimum_water_content: corrected.water_content,
        specific_gravity: reference.specific_gravity.and_then(|fine| {
            SpecificGravity::new(combined_specific_gravity(
                fine.value(),
                coarse_specific_gravity,
                coarse_pct,
            ))
            .ok()
        }),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn d(v: f64) -> Density {
        Density::new(v).unwrap()
    }
    fn w(v: f64) -> WaterContent {
        WaterContent::new(v).unwrap()
    }
    fn reference() -> Reference {
        Reference {
            max_dry_density: d(1900.0),
            optimum_water_content: w(12.0),
            specific_gravity: Some(SpecificGravity::new(2.70).unwrap()),
        }
    }
    const LIMITS: SpecLimits = SpecLimits {
        rc_min_pct: 95.0,
        moisture: MoistureWindow::PointsOfOmc {
            below_pct: 2.0,
            above_pct: 2.0,
        },
        max_air_voids_pct: None,
        rounding: Rounding::E29_ONE_DECIMAL,
    };

    #[test]
    fn relative_compaction_and_moisture_deviation() {
        // RC = ρd / MDD × 100 (definition): 1805 / 1900 = 95.0 %.
        assert!((relative_compaction_pct(d(1805.0), d(1900.0)) - 95.0).abs() < 1e-12);
        assert!((moisture_deviation_pct(w(10.5), w(12.0)) + 1.5).abs() < 1e-12);
    }

    #[test]
    fn judge_passes_on_the_boundary_and_fails_just_below() {
        let v = judge_test(d(1805.0), w(10.0), &reference(), &LIMITS);
        assert!(v.passed && v.density_ok && v.moisture_ok, "{v:?}");
        assert_eq!(
            v.reasons[0],
            "relative compaction 95.0 % meets the 95.0 % minimum"
        );
        assert_eq!(
            v.reasons[1],
            "water content 10.0 % is 2.0 points dry of optimum (12.0 %), inside the window of −2.0 to +2.0 points of optimum"
        );
        let v = judge_test(d(1804.0), w(12.0), &reference(), &LIMITS);
        assert!(!v.passed && !v.density_ok && v.moisture_ok);
        assert_eq!(
            v.reasons[0],
            "relative compaction 94.9 % is below the 95.0 % minimum"
        );
        assert!(v.reasons[1].contains("at optimum"));
        let v = judge_test(d(1850.0), w(14.2), &reference(), &LIMITS);
        assert!(!v.passed && v.density_ok && !v.moisture_ok);
        assert!(
            v.reasons[1].contains("2.2 points wet of optimum (12.0 %), outside the window"),
            "{}",
            v.reasons[1]
        );
    }

    #[test]
    fn the_clause_rounding_decides_the_boundary_and_the_words() {
        // 1804.05 / 1900 × 100 = 94.95 exactly in decimal (by hand): E29 §6.4.3 rounds 94.95 → 95.0
        // (9 is odd), so it meets "95.0"; the absolute method compares 94.95 < 95.0.
        let v = judge_test(d(1804.05), w(12.0), &reference(), &LIMITS);
        assert!(v.density_ok, "{v:?}");
        assert_eq!(
            v.reasons[0],
            "relative compaction 95.0 % meets the 95.0 % minimum"
        );
        let abs = SpecLimits {
            rounding: Rounding {
                method: super::super::rounding::RoundingMethod::Absolute,
                decimals: 1,
            },
            ..LIMITS
        };
        let v = judge_test(d(1804.05), w(12.0), &reference(), &abs);
        assert!(!v.density_ok);
        assert_eq!(
            v.reasons[0],
            "relative compaction 94.95 % is below the 95.0 % minimum"
        );
        // 2.04 points dry: E29 rounds to 2.0 (inside); the absolute method compares 2.04 (outside).
        assert!(judge_test(d(1850.0), w(9.96), &reference(), &LIMITS).moisture_ok);
        let v = judge_test(d(1850.0), w(9.96), &reference(), &abs);
        assert!(!v.moisture_ok);
        assert!(
            v.reasons[1].contains("2.04 points dry of optimum"),
            "{}",
            v.reasons[1]
        );
    }

    #[test]
    fn asymmetric_moisture_window() {
        let limits = SpecLimits {
            rc_min_pct: 90.0,
            moisture: MoistureWindow::PointsOfOmc {
                below_pct: 1.0,
                above_pct: 3.0,
            },
            max_air_voids_pct: None,
            rounding: Rounding::E29_ONE_DECIMAL,
        };
        assert!(judge_test(d(1800.0), w(14.5), &reference(), &limits).moisture_ok);
        assert!(!judge_test(d(1800.0), w(10.5), &reference(), &limits).moisture_ok);
        assert_eq!(
            limits.moisture_window_words(),
            "−1.0 to +3.0 points of optimum"
        );
    }

    #[test]
    fn a_window_as_percent_of_optimum_bounds_w_over_omc() {
        // w / OMC × 100 in [90, 110] (DOMAIN.md, windows as a percentage of OMC). By hand with
        // OMC 12.0 %: 13.2 / 12 = 110.0 % (inside, on the bound), 13.3 / 12 = 110.83 % (outside),
        // 10.8 / 12 = 90.0 % (inside), 10.7 / 12 = 89.17 % (outside).
        let limits = SpecLimits {
            moisture: MoistureWindow::PercentOfOmc {
                low_pct: 90.0,
                high_pct: 110.0,
            },
            ..LIMITS
        };
        let at = |wc: f64| judge_test(d(1850.0), w(wc), &reference(), &limits);
        assert!(at(13.2).moisture_ok && at(10.8).moisture_ok);
        assert!(!at(13.3).moisture_ok && !at(10.7).moisture_ok);
        assert!((at(13.3).moisture_measure - 110.833_333).abs() < 1e-5);
        assert_eq!(
            at(13.3).reasons[1],
            "water content 13.3 % is 110.8 % of optimum (12.0 %), outside the window of 90.0 % to 110.0 % of optimum"
        );
        // The deviation in points is still reported beside it: 13.3 − 12.0 = 1.3.
        assert!((at(13.3).moisture_deviation_pct - 1.3).abs() < 1e-9);
    }

    #[test]
    fn an_absolute_window_ignores_the_optimum() {
        // An absolute range of w (DOMAIN.md): 9.0 to 14.0 % whatever the OMC.
        let limits = SpecLimits {
            moisture: MoistureWindow::Absolute {
                min_pct: 9.0,
                max_pct: 14.0,
            },
            ..LIMITS
        };
        let at = |wc: f64| judge_test(d(1850.0), w(wc), &reference(), &limits);
        // 14.0 is 2.0 points wet (inside points-of-OMC too); 8.9 is 3.1 dry: outside both.
        assert!(at(14.0).moisture_ok && at(9.0).moisture_ok);
        assert!(!at(14.1).moisture_ok && !at(8.9).moisture_ok);
        // 9.5 is 2.5 points dry: outside ±2 points of OMC but inside this absolute range.
        assert!(
            at(9.5).moisture_ok
                && !judge_test(d(1850.0), w(9.5), &reference(), &LIMITS).moisture_ok
        );
        assert_eq!(
            at(14.1).reasons[1],
            "water content 14.1 % (optimum 12.0 %) is outside the window of 9.0 % to 14.0 % water content"
        );
    }

    #[test]
    fn a_maximum_air_voids_criterion_fails_a_dense_enough_but_airy_test() {
        // n_a = 1 − ρd/(Gs ρw) − ρd w/ρw (Das, compaction chapter). By hand, Gs 2.70, ρw 1000:
        // ρd 1805, w 10 %: 1 − 0.668519 − 0.1805 = 0.150981 → 15.1 %;
        // ρd 1950, w 10 %: 1 − 0.722222 − 0.1950 = 0.082778 → 8.3 %.
        let limits = SpecLimits {
            max_air_voids_pct: Some(10.0),
            ..LIMITS
        };
        let airy = judge_test(d(1805.0), w(10.0), &reference(), &limits);
        assert!(airy.density_ok && airy.moisture_ok && !airy.air_voids_ok && !airy.passed);
        assert!((airy.air_voids_pct.unwrap() - 15.0981).abs() < 1e-3);
        assert_eq!(
            airy.reasons[2],
            "air voids 15.1 % exceed the 10.0 % maximum (Gs 2.700)"
        );
        let tight = judge_test(d(1950.0), w(10.0), &reference(), &limits);
        assert!(tight.air_voids_ok && tight.passed);
        assert!((tight.air_voids_pct.unwrap() - 8.2778).abs() < 1e-3);
        // Without a maximum nothing is judged and no sentence is added.
        let none = judge_test(d(1805.0), w(10.0), &reference(), &LIMITS);
        assert!(none.air_voids_pct.is_none() && none.air_voids_ok && none.reasons.len() == 2);
        // Without a known Gs the criterion cannot be met, and says why.
        let unknown = Reference {
            specific_gravity: None,
            ..reference()
        };
        let v = judge_test(d(1950.0), w(10.0), &unknown, &limits);
        assert!(!v.passed && v.reasons[2].contains("specific gravity is not known"));
    }

    #[test]
    fn combined_specific_gravity_weights_by_mass() {
        // 1 / (0.8/2.70 + 0.2/2.60) by hand = 1 / (0.296296 + 0.076923) = 1 / 0.373219 = 2.679389.
        assert!((combined_specific_gravity(2.70, 2.60, 20.0) - 2.679_389).abs() < 1e-5);
        assert!((combined_specific_gravity(2.70, 2.60, 0.0) - 2.70).abs() < 1e-12);
    }

    #[test]
    fn coarse_fraction_corrects_the_reference() {
        // ASTM D4718 worked by hand: 1900 kg/m³ / 12 % with 20 % coarse of Gs 2.65 at 1 % → 2014.0 / 9.8 %.
        let r = reference_for_coarse_fraction(&reference(), 20.0, 2.65, 1.0, 40.0).unwrap();
        assert!((r.max_dry_density.kg_m3() - 2014.0).abs() < 1e-9);
        assert!((r.optimum_water_content.pct() - 9.8).abs() < 1e-12);
        // 1950 kg/m³ is 102.6 % of the fine MDD but only 96.8 % of the corrected one.
        let v = judge_test(d(1950.0), w(10.0), &r, &LIMITS);
        assert!((v.relative_compaction_pct - 96.822_244).abs() < 1e-5);
        let e = reference_for_coarse_fraction(&reference(), 45.0, 2.65, 1.0, 40.0).unwrap_err();
        assert_eq!(e.field(), "coarse_pct");
    }

    proptest! {
        #[test]
        fn rc_is_unchanged_when_both_densities_scale_alike(
            field in 1000.0f64..2400.0, mdd in 1500.0f64..2400.0, k in 0.5f64..1.2,
        ) {
            prop_assume!((500.0..=3000.0).contains(&(field * k)) && (500.0..=3000.0).contains(&(mdd * k)));
            let a = relative_compaction_pct(d(field), d(mdd));
            let b = relative_compaction_pct(d(field * k), d(mdd * k));
            prop_assert!((a - b).abs() < 1e-9 * a.max(1.0));
        }
    }
}
