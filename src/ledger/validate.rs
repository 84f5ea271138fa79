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
