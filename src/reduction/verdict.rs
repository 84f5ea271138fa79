//! Per-test verdict: relative compaction and moisture deviation against a
//! reference curve, judged against a clause's limits with reasons in words.

use serde::{Deserialize, Serialize};

use super::oversize::{OversizeInput, correct_for_oversize};
use super::quantities::{Density, WaterContent};
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
}

impl SpecLimits {
    /// True when a relative compaction meets the minimum.
    pub fn density_ok(&self, rc_pct: f64) -> bool {
        rc_pct >= self.rc_min_pct - COMPARE_EPS
    }
    /// True when a moisture deviation lies inside the window.
    pub fn moisture_ok(&self, deviation_pct: f64) -> bool {
        deviation_pct >= -self.moisture_below_pct - COMPARE_EPS
            && deviation_pct <= self.moisture_above_pct + COMPARE_EPS
    }
    /// The moisture window in words, e.g. "−2.0 to +2.0 points of optimum".
    pub fn moisture_window_words(&self) -> String {
        format!(
            "{} to +{:.1} points of optimum",
            signed_minus(self.moisture_below_pct),
            self.moisture_above_pct
        )
    }
}

/// "−2.0" for 2.0 (a true minus sign reads better in reports).
fn signed_minus(v: f64) -> String {
    if v == 0.0 {
        "0.0".to_string()
    } else {
        format!("−{:.1}", v.abs())
    }
}

/// A signed deviation in words: "1.3 points wet of optimum", "0.4 points dry of optimum", "at optimum".
pub(crate) fn deviation_words(deviation_pct: f64) -> String {
    if deviation_pct.abs() < 0.05 {
        "at optimum".to_string()
    } else if deviation_pct > 0.0 {
        format!("{:.1} points wet of optimum", deviation_pct)
    } else {
        format!("{:.1} points dry of optimum", -deviation_pct)
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

/// Judges one test: RC ≥ RC_min and −below ≤ w − OMC ≤ +above (no rounding before comparing).
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
    let density_reason = if density_ok {
        format!(
            "relative compaction {rc:.1} % meets the {:.1} % minimum",
            limits.rc_min_pct
        )
    } else {
        format!(
            "relative compaction {rc:.1} % is below the {:.1} % minimum",
            limits.rc_min_pct
        )
    };
    let moisture_reason = format!(
        "water content {:.1} % is {} ({:.1} %), {} the window of {}",
        water_content.pct(),
        deviation_words(dev),
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
