//! Per-test verdict: relative compaction and moisture deviation against a
//! reference curve, judged against a clause's limits with reasons in words.

use serde::{Deserialize, Serialize};

use super::oversize::{OversizeInput, correct_for_oversize};
use super::quantities::{Density, WaterContent};
use super::rounding::Rounding;
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
}

/// Relative compaction, percent: ρd,field / MDD × 100.
pub fn relative_compaction_pct(dry_density: Density, max_dry_density: Density) -> f64 {
    dry_density.kg_m3() / max_dry_density.kg_m3() * 100.0
}

/// Moisture deviation, percentage points: w_field − OMC (negative = dry of optimum).
pub fn moisture_deviation_pct(water_content: WaterContent, optimum: WaterContent) -> f64 {
    water_content.pct() - optimum.pct()
}

/// A clause's limits for one test: RC minimum and the moisture window about OMC.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SpecLimits {
    /// Least relative compaction, percent (common practice: 95).
    pub rc_min_pct: f64,
    /// Points allowed below OMC, a positive number (common practice: 2.0).
    pub moisture_below_pct: f64,
    /// Points allowed above OMC (common practice: 2.0).
    pub moisture_above_pct: f64,
    /// How observed values are compared with these limits (ASTM E29).
    pub rounding: Rounding,
}

impl SpecLimits {
    /// True when a relative compaction meets the minimum (compared as the clause rounds).
    pub fn density_ok(&self, rc_pct: f64) -> bool {
        self.rounding.at_least(rc_pct, self.rc_min_pct)
    }
    /// True when a moisture deviation lies inside the window (compared as the clause rounds).
    pub fn moisture_ok(&self, deviation_pct: f64) -> bool {
        self.rounding
            .at_least(deviation_pct, -self.moisture_below_pct)
            && self
                .rounding
                .at_most(deviation_pct, self.moisture_above_pct)
    }
    /// The moisture window in words, e.g. "−2.0 to +2.0 points of optimum".
    pub fn moisture_window_words(&self) -> String {
        let below = self.rounding.limit_text(self.moisture_below_pct);
        format!(
            "{} to +{} points of optimum",
            if self.moisture_below_pct == 0.0 {
                below
            } else {
                format!("−{below}")
            },
            self.rounding.limit_text(self.moisture_above_pct)
        )
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
    /// RC meets the minimum.
    pub density_ok: bool,
    /// Water content inside the window.
    pub moisture_ok: bool,
    /// Both met.
    pub passed: bool,
    /// One sentence on density and one on moisture.
    pub reasons: Vec<String>,
}

/// Judges one test: RC ≥ RC_min and −below ≤ w − OMC ≤ +above, compared as the clause rounds.
pub fn judge_test(
    dry_density: Density,
    water_content: WaterContent,
    reference: &Reference,
    limits: &SpecLimits,
) -> TestVerdict {
    let rc = relative_compaction_pct(dry_density, reference.max_dry_density);
    let dev = moisture_deviation_pct(water_content, reference.optimum_water_content);
    let density_ok = limits.density_ok(rc);
    let moisture_ok = limits.moisture_ok(dev);
    let density_reason = limits.density_words("relative compaction", rc);
    let moisture_reason = format!(
        "water content {:.1} % is {} ({:.1} %), {} the window of {}",
        water_content.pct(),
        limits.deviation_words(dev),
        reference.optimum_water_content.pct(),
        if moisture_ok { "inside" } else { "outside" },
        limits.moisture_window_words()
    );
    TestVerdict {
        relative_compaction_pct: rc,
        moisture_deviation_pct: dev,
        density_ok,
        moisture_ok,
        passed: density_ok && moisture_ok,
        reasons: vec![density_reason, moisture_reason],
    }
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
        }
    }
    const LIMITS: SpecLimits = SpecLimits {
        rc_min_pct: 95.0,
        moisture_below_pct: 2.0,
        moisture_above_pct: 2.0,
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
            moisture_below_pct: 1.0,
            moisture_above_pct: 3.0,
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
