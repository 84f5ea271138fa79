//! Wall-clock time as stored: RFC 3339 text in UTC, second precision.

use time::OffsetDateTime;
use time::format_description::well_known::Rfc3339;

/// The current UTC time as RFC 3339 text, e.g. `2026-12-01T14:03:22Z`.
pub fn now() -> String {
    format(OffsetDateTime::now_utc())
}

/// Formats a timestamp the way every stored time is written.
pub fn format(t: OffsetDateTime) -> String {
    let t = t.replace_nanosecond(0).unwrap_or(t);
    t.format(&Rfc3339)
        .unwrap_or_else(|_| t.unix_timestamp().to_string())
}

/// Parses an RFC 3339 time (as entered or stored) into UTC.
pub fn parse(s: &str) -> Option<OffsetDateTime> {
    OffsetDateTime::parse(s, &Rfc3339)
        .ok()
        .map(|t| t.to_offset(time::UtcOffset::UTC))
}

/// Shows a stored time for people: `2026-12-01 14:03 UTC`.
pub fn display(stored: &str) -> String {
    match parse(stored) {
        Some(t) => format!(
            "{:04}-{:02}-{:02} {:02}:{:02} UTC",
            t.year(),
            u8::from(t.month()),
            t.day(),
            t.hour(),
            t.minute()
        ),
        None => stored.to_string(),
    }
}

/// The date part (`2026-12-01`) of a stored time.
pub fn date_of(stored: &str) -> String {
    stored.get(..10).unwrap_or(stored).to_string()
}
