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

#[cfg(test)]
mod tests {
    use super::*;

    fn rule(area: Option<f64>, length: Option<f64>) -> FrequencyRule {
        FrequencyRule {
            min_per_lot: 3,
            area_per_test_m2: area,
            length_per_test_m: length,
        }
    }

    #[test]
    fn required_is_the_largest_of_the_three() {
        // 200 m × 12.5 m = 2500 m²; one per 500 m² (common practice) → 5.
        assert_eq!(tests_required(&rule(Some(500.0), None), 200.0, 12.5), 5);
        // 2501 m² rounds up → 6.
        assert_eq!(tests_required(&rule(Some(500.0), None), 200.08, 12.5), 6);
        // Small lot: the minimum of 3 rules.
        assert_eq!(tests_required(&rule(Some(1000.0), None), 50.0, 10.0), 3);
        // One per 100 m of chainage over 750 m → 8, more than the 2 by area.
        assert_eq!(
            tests_required(&rule(Some(5000.0), Some(100.0)), 750.0, 10.0),
            8
        );
        // Float noise just above a whole number does not add a test: 0.1 × 30 / 0.3 m².
        assert_eq!(tests_required(&rule(Some(0.3), None), 0.1 * 30.0, 1.0), 10);
        assert_eq!(tests_required(&rule(None, None), 1e9, 1e9), 3);
    }

    #[test]
    fn unusable_inputs_fall_back_to_the_minimum() {
        assert_eq!(tests_required(&rule(Some(0.0), Some(-5.0)), 100.0, 10.0), 3);
        assert_eq!(tests_required(&rule(Some(f64::NAN), None), 100.0, 10.0), 3);
        assert_eq!(tests_required(&rule(Some(500.0), None), f64::NAN, 10.0), 3);
        assert_eq!(tests_required(&rule(Some(1e-3), None), 1e6, 1e6), u32::MAX);
        assert_eq!(tests_required(&rule(Some(1.0), None), 1e300, 1e300), 3);
    }

    #[test]
    fn owed_never_goes_negative() {
        assert_eq!(tests_owed(5, 3), 2);
        assert_eq!(tests_owed(5, 5), 0);
        assert_eq!(tests_owed(5, 9), 0);
        assert_eq!(tests_owed(3, usize::MAX), 0);
    }
}
