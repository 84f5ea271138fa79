//! Comparing an observed value with a specification limit (ASTM E29).
//!
//! - The *rounding method* rounds the observed value to the limit's last written
//!   decimal before comparing (94.96 meets "95.0"); a digit 5 followed only by zeros
//!   rounds to the even neighbour (E29 §6.4.3: increase the last retained digit if it
//!   is odd, leave it if even). Rounding is done in decimal, from the shortest decimal
//!   text of the computed value, so 94.95 is an exact trailing 5, not 94.9499999…
//! - The *absolute method* compares the unrounded value.
//!
//! Either way the limit keeps its written precision, and a reason prints the value
//! it compared — never "95.0 % is below the 95.0 % minimum".

use std::str::FromStr;

use rust_decimal::{Decimal, RoundingStrategy};
use serde::{Deserialize, Serialize};

/// How observed values are compared with limits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RoundingMethod {
    /// ASTM E29 rounding method: round to the limit's decimals, then compare (the default).
    #[default]
    AstmE29,
    /// ASTM E29 absolute method: compare the unrounded value.
    Absolute,
}

impl RoundingMethod {
    /// Both methods, the default first.
    pub const ALL: [RoundingMethod; 2] = [Self::AstmE29, Self::Absolute];

    /// Stable code used in JSON and the database: "astm_e29" or "absolute".
    pub fn code(self) -> &'static str {
        match self {
            Self::AstmE29 => "astm_e29",
            Self::Absolute => "absolute",
        }
    }

    /// Reads a code written by [`RoundingMethod::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|m| m.code() == s.trim())
    }
}

/// A clause's comparison convention: the method and the decimals its limits are written with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Rounding {
    /// Rounding or absolute method.
    pub method: RoundingMethod,
    /// Decimals the limits are written with (1 for "95.0 %").
    pub decimals: u32,
}

impl Default for Rounding {
    fn default() -> Self {
        Self::E29_ONE_DECIMAL
    }
}

/// Decimals a computed value is cleaned to before any comparison: binary arithmetic leaves
/// noise in the 15th–17th significant digit (1804.05 / 1900 × 100 = 94.94999999999999 in
/// f64), far below any written limit; cleaning at 9 decimals keeps a true trailing 5 a 5.
const CLEAN_DECIMALS: u32 = 9;

/// The decimal value of a computed number: its shortest round-trip decimal text, cleaned.
fn decimal(v: f64) -> Option<Decimal> {
    if !v.is_finite() {
        return None;
    }
    Decimal::from_str(&format!("{v}"))
        .ok()
        .map(|d| d.round_dp_with_strategy(CLEAN_DECIMALS, RoundingStrategy::MidpointNearestEven))
}

impl Rounding {
    /// The default: ASTM E29 rounding method, limits written to one decimal.
    pub const E29_ONE_DECIMAL: Rounding = Rounding {
        method: RoundingMethod::AstmE29,
        decimals: 1,
    };

    /// Stable code of the method: "astm_e29" or "absolute".
    pub fn code(&self) -> &'static str {
        self.method.code()
    }

    /// The convention in words, for clauses and certificates.
    pub fn label(&self) -> String {
        match self.method {
            RoundingMethod::AstmE29 => format!(
                "ASTM E29 rounding method: values rounded to {} decimal(s) before comparing",
                self.decimals
            ),
            RoundingMethod::Absolute => {
                "ASTM E29 absolute method: unrounded values compared".to_string()
            }
        }
    }

    /// The value as compared: rounded half-to-even to the limit's decimals (rounding
    /// method) or unrounded (absolute method); None when not a number.
    pub fn compared(&self, v: f64) -> Option<Decimal> {
        let d = decimal(v)?;
        Some(match self.method {
            RoundingMethod::AstmE29 => {
                d.round_dp_with_strategy(self.decimals, RoundingStrategy::MidpointNearestEven)
            }
            RoundingMethod::Absolute => d,
        })
    }

    /// The limit at its written precision.
    fn limit(&self, limit: f64) -> Option<Decimal> {
        decimal(limit)
            .map(|d| d.round_dp_with_strategy(self.decimals, RoundingStrategy::MidpointNearestEven))
    }

    /// True when `v` meets a lower limit.
    pub fn at_least(&self, v: f64, limit: f64) -> bool {
        matches!((self.compared(v), self.limit(limit)), (Some(a), Some(b)) if a >= b)
    }

    /// True when `v` meets an upper limit.
    pub fn at_most(&self, v: f64, limit: f64) -> bool {
        matches!((self.compared(v), self.limit(limit)), (Some(a), Some(b)) if a <= b)
    }

    /// The limit as written, e.g. "95.0".
    pub fn limit_text(&self, limit: f64) -> String {
        self.limit(limit).map_or_else(
            || format!("{limit}"),
            |d| format!("{:.*}", self.decimals as usize, d),
        )
    }

    /// The value a lower-limit comparison used, as printed. Rounding method: the rounded
    /// value. Absolute method: one decimal more than the limit, rounded down, so a value
    /// below the limit never prints as the limit itself.
    pub fn shown_against_lower(&self, v: f64) -> String {
        self.shown(v, RoundingStrategy::ToNegativeInfinity)
    }

    /// The value an upper-limit comparison used, as printed (rounded up under the absolute method).
    pub fn shown_against_upper(&self, v: f64) -> String {
        self.shown(v, RoundingStrategy::ToPositiveInfinity)
    }

    fn shown(&self, v: f64, absolute: RoundingStrategy) -> String {
        let Some(d) = decimal(v) else {
            return format!("{v}");
        };
        match self.method {
            RoundingMethod::AstmE29 => format!(
                "{:.*}",
                self.decimals as usize,
                d.round_dp_with_strategy(self.decimals, RoundingStrategy::MidpointNearestEven)
            ),
            RoundingMethod::Absolute => {
                let dp = self.decimals + 1;
                format!("{:.*}", dp as usize, d.round_dp_with_strategy(dp, absolute))
            }
        }
    }

    /// True when a limit is written with no more decimals than the clause's convention.
    pub fn is_written_precision(&self, limit: f64) -> bool {
        match (decimal(limit), self.limit(limit)) {
            (Some(a), Some(b)) => a == b,
            _ => false,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const ABS: Rounding = Rounding {
        method: RoundingMethod::Absolute,
        decimals: 1,
    };

    #[test]
    fn rounding_method_rounds_to_the_limit_before_comparing() {
        let e29 = Rounding::E29_ONE_DECIMAL;
        // ASTM E29 (from the rounding method's own example, common practice): 94.96 → 95.0 meets "95.0".
        assert!(e29.at_least(94.96, 95.0));
        assert_eq!(e29.shown_against_lower(94.96), "95.0");
        assert!(!e29.at_least(94.94, 95.0));
        assert_eq!(e29.shown_against_lower(94.94), "94.9");
        // E29 §6.4.3 (quoted in Iowa DOT IM 202): an exact trailing 5 goes to the even digit.
        assert!(
            e29.at_least(94.95, 95.0),
            "94.95 → 95.0 (9 is odd, rounds up)"
        );
        assert_eq!(
            e29.shown_against_lower(94.85),
            "94.8",
            "94.85 → 94.8 (8 is even)"
        );
        assert!(!e29.at_least(94.85, 94.9));
        // In binary 94.85 is 94.8499999999999943…: decimal rounding still sees the trailing 5.
        assert!(format!("{:.20}", 94.85f64).starts_with("94.849"));
        // 1804.05 / 1900 × 100 is exactly 94.95 (by hand) but 94.94999999999999 in f64.
        let rc = 1804.05 / 1900.0 * 100.0;
        assert!(e29.at_least(rc, 95.0), "{rc}");
        assert_eq!(e29.shown_against_lower(0.25), "0.2");
        assert_eq!(e29.shown_against_lower(0.35), "0.4");
    }

    #[test]
    fn absolute_method_compares_unrounded_and_never_prints_the_limit_below_it() {
        assert!(!ABS.at_least(94.96, 95.0));
        assert_eq!(ABS.shown_against_lower(94.96), "94.96");
        assert_eq!(ABS.shown_against_lower(94.9999), "94.99");
        assert!(ABS.at_least(95.0, 95.0));
        assert_eq!(ABS.shown_against_lower(95.0), "95.00");
        assert!(!ABS.at_most(2.0001, 2.0));
        assert_eq!(ABS.shown_against_upper(2.0001), "2.01");
    }

    #[test]
    fn limits_keep_their_written_precision() {
        let e29 = Rounding::E29_ONE_DECIMAL;
        assert_eq!(e29.limit_text(95.0), "95.0");
        assert!(e29.is_written_precision(92.5));
        assert!(!e29.is_written_precision(92.55));
        let whole = Rounding {
            method: RoundingMethod::AstmE29,
            decimals: 0,
        };
        assert_eq!(whole.limit_text(95.0), "95");
        // 94.5 → 94 (4 is even) under whole-number limits: below "95".
        assert!(!whole.at_least(94.5, 95.0));
        assert!(whole.at_least(95.5, 96.0), "95.5 → 96 (5 is odd)");
        assert!(!e29.at_least(f64::NAN, 95.0));
    }
}
