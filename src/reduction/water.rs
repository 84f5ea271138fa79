//! Oven water content (ASTM D2216; AASHTO T 265) and the error type shared by
//! every reduction that takes raw inputs.

use super::quantities::{QuantityError, WaterContent, num};

/// Why a reduction refused its inputs; every variant names the JSON input field.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ReductionError {
    /// The input was NaN or infinite.
    #[error("{what} must be a finite number (got {value})")]
    NotFinite {
        /// JSON field name of the input.
        field: &'static str,
        /// Plain-words name of the input.
        what: &'static str,
        /// The refused value.
        value: f64,
    },
    /// The input was zero or negative where only positive values make sense.
    #[error("{what} must be greater than zero (got {})", num(*value))]
    NotPositive {
        /// JSON field name of the input.
        field: &'static str,
        /// Plain-words name of the input.
        what: &'static str,
        /// The refused value.
        value: f64,
    },
    /// The input lies outside the range the method accepts.
    #[error("{reason}")]
    OutOfRange {
        /// JSON field name of the input.
        field: &'static str,
        /// Full sentence, e.g. "sand density 3100 kg/m³ is outside 1000–2000 kg/m³".
        reason: String,
    },
    /// Two inputs contradict each other (e.g. cone sand heavier than all sand used).
    #[error("{reason}")]
    Inconsistent {
        /// JSON field name of the input judged wrong.
        field: &'static str,
        /// Full sentence naming both values.
        reason: String,
    },
    /// A derived quantity fell outside its bounds.
    #[error("{source}")]
    Quantity {
        /// JSON field name of the input the quantity came from.
        field: &'static str,
        /// The quantity's own error, naming quantity and bound.
        source: QuantityError,
    },
    /// A required input was missing.
    #[error("{reason}")]
    Missing {
        /// JSON field name of the missing input.
        field: &'static str,
        /// What is needed instead.
        reason: String,
    },
    /// Too few values for the asked statistic.
    #[error("{reason}")]
    TooFewValues {
        /// JSON field name of the value list.
        field: &'static str,
        /// How many were needed and how many came.
        reason: String,
    },
}

impl ReductionError {
    /// The JSON field name of the input that caused the refusal.
    pub fn field(&self) -> &'static str {
        match self {
            Self::NotFinite { field, .. }
            | Self::NotPositive { field, .. }
            | Self::OutOfRange { field, .. }
            | Self::Inconsistent { field, .. }
            | Self::Quantity { field, .. }
            | Self::Missing { field, .. }
            | Self::TooFewValues { field, .. } => field,
        }
    }
    /// A stable machine code for the kind of refusal.
    pub fn code(&self) -> &'static str {
        match self {
            Self::NotFinite { .. } => "not_finite",
            Self::NotPositive { .. } => "not_positive",
            Self::OutOfRange { .. } => "out_of_range",
            Self::Inconsistent { .. } => "inconsistent",
            Self::Quantity { .. } => "out_of_bounds",
            Self::Missing { .. } => "missing",
            Self::TooFewValues { .. } => "too_few_values",
        }
    }
    /// Wraps a quantity error with the field it came from.
    pub fn quantity(field: &'static str, source: QuantityError) -> Self {
        Self::Quantity { field, source }
    }
}

/// Refuses NaN and infinities, naming the field.
pub(crate) fn finite(
    field: &'static str,
    what: &'static str,
    value: f64,
) -> Result<f64, ReductionError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(ReductionError::NotFinite { field, what, value })
    }
}

/// Refuses NaN, infinities, zero and negatives, naming the field.
pub(crate) fn positive(
    field: &'static str,
    what: &'static str,
    value: f64,
) -> Result<f64, ReductionError> {
    finite(field, what, value)?;
    if value > 0.0 {
        Ok(value)
    } else {
        Err(ReductionError::NotPositive { field, what, value })
    }
}

/// Refuses NaN, infinities and values outside `[min, max]`, naming the field and the bound.
pub(crate) fn within(
    field: &'static str,
    what: &'static str,
    value: f64,
    min: f64,
    max: f64,
    unit: &str,
) -> Result<f64, ReductionError> {
    finite(field, what, value)?;
    if value < min || value > max {
        let sep = if unit.is_empty() { "" } else { " " };
        return Err(ReductionError::OutOfRange {
            field,
            reason: format!(
                "{what} {}{sep}{unit} is outside {}–{}{sep}{unit}",
                num(value),
                num(min),
                num(max)
            ),
        });
    }
    Ok(value)
}

/// Builds a water content from percent, naming the field on refusal.
pub(crate) fn water_field(field: &'static str, pct: f64) -> Result<WaterContent, ReductionError> {
    finite(field, "water content", pct)?;
    WaterContent::new(pct).map_err(|e| ReductionError::quantity(field, e))
}

/// Water content from oven-dried masses in grams (ASTM D2216): w = (m_wet − m_dry) / (m_dry − m_tare) × 100.
pub fn oven_water_content(
    mass_wet_g: f64,
    mass_dry_g: f64,
    mass_tare_g: f64,
) -> Result<WaterContent, ReductionError> {
    finite("mass_wet_g", "wet mass", mass_wet_g)?;
    finite("mass_dry_g", "dry mass", mass_dry_g)?;
    finite("mass_tare_g", "tare mass", mass_tare_g)?;
    if mass_tare_g < 0.0 {
        return Err(ReductionError::OutOfRange {
            field: "mass_tare_g",
            reason: format!("tare mass {} g must not be negative", num(mass_tare_g)),
        });
    }
    if mass_dry_g <= mass_tare_g {
        return Err(ReductionError::Inconsistent {
            field: "mass_dry_g",
            reason: format!(
                "dry mass {} g is not more than tare {} g",
                num(mass_dry_g),
                num(mass_tare_g)
            ),
        });
    }
    if mass_wet_g < mass_dry_g {
        return Err(ReductionError::Inconsistent {
            field: "mass_wet_g",
            reason: format!(
                "wet mass {} g is less than dry mass {} g",
                num(mass_wet_g),
                num(mass_dry_g)
            ),
        });
    }
    let w = (mass_wet_g - mass_dry_g) / (mass_dry_g - mass_tare_g) * 100.0;
    WaterContent::new(w).map_err(|e| ReductionError::quantity("mass_wet_g", e))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn oven_water_content_from_masses() {
        // ASTM D2216 formula, worked by hand: (250 − 220) / (220 − 50) × 100 = 17.647 %.
        let w = oven_water_content(250.0, 220.0, 50.0).unwrap();
        assert!((w.pct() - 17.647_058_8).abs() < 1e-6);
        // Oven-dry soil with no water: 0 % (same formula).
        assert_eq!(oven_water_content(120.0, 120.0, 20.0).unwrap().pct(), 0.0);
        // Zero tare is allowed (same formula): (115 − 100) / 100 × 100 = 15 %.
        assert!((oven_water_content(115.0, 100.0, 0.0).unwrap().pct() - 15.0).abs() < 1e-12);
    }

    #[test]
    fn oven_water_content_errors_name_their_field() {
        let cases = [
            (
                (f64::NAN, 220.0, 50.0),
                "mass_wet_g",
                "wet mass must be a finite number",
            ),
            (
                (250.0, f64::INFINITY, 50.0),
                "mass_dry_g",
                "dry mass must be a finite number",
            ),
            (
                (250.0, 220.0, -1.0),
                "mass_tare_g",
                "tare mass -1 g must not be negative",
            ),
            (
                (250.0, 40.0, 50.0),
                "mass_dry_g",
                "dry mass 40 g is not more than tare 50 g",
            ),
            (
                (200.0, 220.0, 50.0),
                "mass_wet_g",
                "wet mass 200 g is less than dry mass 220 g",
            ),
            (
                (500.0, 100.0, 50.0),
                "mass_wet_g",
                "water content 800 % is outside 0–100 %",
            ),
        ];
        for ((wet, dry, tare), field, message) in cases {
            let e = oven_water_content(wet, dry, tare).unwrap_err();
            assert_eq!(e.field(), field, "{wet} {dry} {tare}");
            assert!(e.to_string().contains(message), "{e}");
        }
    }

    #[test]
    fn error_codes_are_stable() {
        let e = oven_water_content(250.0, 40.0, 50.0).unwrap_err();
        assert_eq!(e.code(), "inconsistent");
        let e = oven_water_content(f64::NAN, 40.0, 50.0).unwrap_err();
        assert_eq!(e.code(), "not_finite");
    }
}
