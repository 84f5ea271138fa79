//! Test frequency: how many field tests a lot needs and how many are still owed.

use serde::{Deserialize, Serialize};

/// A clause's frequency: a minimum per lot and optionally one test per area or per length.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FrequencyRule {
    /// Fewest tests in any lot (common practice: 3).
    pub min_per_lot: u32,
    /// One test per this many m² of layer (common practice: 500–1000 m²).
    pub area_per_test_m2: Option<f64>,
    /// One test per this many metres of chainage.
    pub length_per_test_m: Option<f64>,
}

/// ⌈quantity / per⌉, ignoring unusable inputs and tolerating float noise just above a whole number.
fn per(quantity: f64, per: Option<f64>) -> u32 {
    match per {
        Some(p) if p.is_finite() && p > 0.0 && quantity.is_finite() && quantity > 0.0 => {
            let ratio = quantity / p;
            let ceil = (ratio - 1e-9 * ratio.max(1.0)).ceil();
            if ceil >= f64::from(u32::MAX) {
                u32::MAX
            } else {
                ceil.max(0.0) as u32
            }
        }
        _ => 0,
    }
}

/// Required tests: max(n_min, ⌈area / area_per_test⌉, ⌈length / length_per_test⌉), area = length × width.
pub fn tests_required(rule: &FrequencyRule, length_m: f64, width_m: f64) -> u32 {
    let length = if length_m.is_finite() {
        length_m.abs()
    } else {
        0.0
    };
    let width = if width_m.is_finite() {
        width_m.abs()
    } else {
        0.0
    };
    rule.min_per_lot
        .max(per(length * width, rule.area_per_test_m2))
        .max(per(length, rule.length_per_test_m))
}

/// Tests still owed: required less counted, never below zero.
pub fn tests_owed(required: u32, counted: usize) -> u32 {
    let counted = u32::try_from(counted).unwrap_or(u32::MAX);
    required.saturating_sub(counted)
}
