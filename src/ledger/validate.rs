//! Small helpers that turn raw input into checked values, naming the field on failure.

use crate::error::AppError;
use crate::reduction::QuantityError;

/// Maps a quantity parse error onto the input field it came from.
pub fn quantity<T>(field: &str, r: Result<T, QuantityError>) -> Result<T, AppError> {
    r.map_err(|e| AppError::invalid(field, e.to_string()))
}

/// A required, trimmed, non-empty text of at most `max` characters.
pub fn text(field: &str, value: &str, max: usize) -> Result<String, AppError> {
    let v = value.trim();
    if v.is_empty() {
        return Err(AppError::invalid(field, "is required"));
    }
    optional_text(field, v, max)
}

/// A trimmed text that may be empty, of at most `max` characters.
pub fn optional_text(field: &str, value: &str, max: usize) -> Result<String, AppError> {
    let v = value.trim();
    if v.chars().count() > max {
        return Err(AppError::invalid(
            field,
            format!("is longer than {max} characters"),
        ));
    }
    if v.chars().any(|c| c.is_control() && c != '\n') {
        return Err(AppError::invalid(field, "contains control characters"));
    }
    Ok(v.to_string())
}

/// A short identifier: letters, digits, `-`, `_`, `.` and `/`, 1 to 24 characters.
pub fn code(field: &str, value: &str) -> Result<String, AppError> {
    let v = text(field, value, 24)?;
    if !v
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || "-_./".contains(c))
    {
        return Err(AppError::invalid(
            field,
            format!("'{v}' may only hold letters, digits and - _ . /"),
        ));
    }
    Ok(v)
}

/// A finite number within `[min, max]`, with its unit for the message.
pub fn number(field: &str, value: f64, min: f64, max: f64, unit: &str) -> Result<f64, AppError> {
    if !value.is_finite() {
        return Err(AppError::invalid(field, "must be a finite number"));
    }
    if value < min || value > max {
        return Err(AppError::invalid(
            field,
            format!("{value} {unit} is outside {min}–{max} {unit}"),
        ));
    }
    Ok(value)
}

/// A timestamp in RFC 3339 (or a bare date, taken as midnight UTC), normalised to stored form.
pub fn timestamp(field: &str, value: &str) -> Result<String, AppError> {
    let v = value.trim();
    if let Some(t) = crate::clock::parse(v) {
        return Ok(crate::clock::format(t));
    }
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    if let Ok(d) = time::Date::parse(v, &fmt) {
        return Ok(crate::clock::format(d.midnight().assume_utc()));
    }
    let local = time::macros::format_description!("[year]-[month]-[day]T[hour]:[minute]");
    if let Ok(t) = time::PrimitiveDateTime::parse(v, &local) {
        return Ok(crate::clock::format(t.assume_utc()));
    }
    Err(AppError::invalid(
        field,
        format!("'{v}' is not a date-time like 2026-12-01T14:30:00Z"),
    ))
}

/// A calendar date `YYYY-MM-DD`.
pub fn date(field: &str, value: &str) -> Result<String, AppError> {
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    time::Date::parse(value.trim(), &fmt)
        .map(|d| d.to_string())
        .map_err(|_| {
            AppError::invalid(
                field,
                format!("'{}' is not a date like 2026-12-01", value.trim()),
            )
        })
}

/// Serde readers for whole-number fields that also take a JSON number written with a zero
/// fraction (`132.0`): JSON Schema's `integer` includes it, and clients that hold every
/// number as a float send it so. A fraction that is not zero is still refused.
pub mod whole {
    use serde::de::{Deserialize, Deserializer, Error};

    /// Integers above this no longer name one integer as an `f64`.
    const EXACT: f64 = 9_007_199_254_740_992.0;

    /// A JSON number as a whole number, or why it is not one.
    fn integral(v: &serde_json::Number) -> Result<f64, String> {
        let f = v.as_f64().unwrap_or(f64::NAN);
        if !(f.is_finite() && f.fract() == 0.0) {
            Err(format!("{v} is not a whole number"))
        } else if f.abs() > EXACT {
            Err(format!("{v} is too large"))
        } else {
            Ok(f)
        }
    }

    /// A whole number (in the range an `f64` holds exactly, when written with a fraction).
    pub fn i64<'de, D: Deserializer<'de>>(d: D) -> Result<i64, D::Error> {
        let v = serde_json::Number::deserialize(d)?;
        if let Some(i) = v.as_i64() {
            return Ok(i);
        }
        integral(&v).map(|f| f as i64).map_err(D::Error::custom)
    }

    /// An optional whole, non-negative number.
    pub fn opt_u64<'de, D: Deserializer<'de>>(d: D) -> Result<Option<u64>, D::Error> {
        let Some(v) = Option::<serde_json::Number>::deserialize(d)? else {
            return Ok(None);
        };
        if let Some(u) = v.as_u64() {
            return Ok(Some(u));
        }
        match integral(&v) {
            Ok(f) if f >= 0.0 => Ok(Some(f as u64)),
            Ok(_) => Err(D::Error::custom(format!("{v} is below 0"))),
            Err(e) => Err(D::Error::custom(e)),
        }
    }
}

#[cfg(test)]
mod whole_tests {
    #[derive(Debug, serde::Deserialize)]
    struct N {
        #[serde(deserialize_with = "super::whole::i64")]
        n: i64,
        #[serde(default, deserialize_with = "super::whole::opt_u64")]
        seed: Option<u64>,
    }

    fn read(json: &str) -> Result<N, String> {
        serde_json::from_str::<N>(json).map_err(|e| e.to_string())
    }

    #[test]
    fn whole_numbers_are_read_with_or_without_a_zero_fraction() {
        assert_eq!(read(r#"{"n": 132}"#).unwrap().n, 132);
        assert_eq!(read(r#"{"n": 132.0}"#).unwrap().n, 132);
        assert_eq!(read(r#"{"n": -4}"#).unwrap().n, -4);
        let r = read(r#"{"n": 1, "seed": 4388.0}"#).unwrap();
        assert_eq!(r.seed, Some(4388));
        assert_eq!(read(r#"{"n": 1}"#).unwrap().seed, None);
        assert!(
            read(r#"{"n": 132.5}"#)
                .unwrap_err()
                .contains("not a whole number")
        );
        assert!(read(r#"{"n": "132"}"#).is_err());
        assert!(read(r#"{"n": 1, "seed": -1}"#).is_err());
        assert!(read(r#"{"n": 1e300}"#).unwrap_err().contains("too large"));
    }
}
