//! Cells that are safe to open in a spreadsheet.
//!
//! A cell starting with `=`, `+`, `-`, `@`, a tab or a carriage return is read by
//! spreadsheet programs as a formula, so a technician's name or a void reason typed as
//! `=HYPERLINK(…)` would run when the engineer opens the export (OWASP, "CSV Injection").
//! Such a cell is prefixed with a single quote, which the spreadsheet shows as text.
//! Numbers the service itself writes (`-0.35`, `+2`) are left exactly as they are.

use std::borrow::Cow;

/// Characters that make a spreadsheet treat a cell as a formula.
const TRIGGERS: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// A plain decimal number: optional sign, digits, optional fraction.
fn is_plain_number(s: &str) -> bool {
    let body = s.strip_prefix(['+', '-']).unwrap_or(s);
    let (int, frac) = body.split_once('.').unwrap_or((body, "0"));
    !int.is_empty()
        && !frac.is_empty()
        && int.bytes().all(|b| b.is_ascii_digit())
        && frac.bytes().all(|b| b.is_ascii_digit())
}

/// The cell as written to a CSV file: neutralised when a spreadsheet would run it.
pub fn cell(value: &str) -> Cow<'_, str> {
    if value.starts_with(TRIGGERS) && !is_plain_number(value) {
        Cow::Owned(format!("'{value}"))
    } else {
        Cow::Borrowed(value)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formulas_are_neutralised_and_numbers_kept() {
        // Trigger characters from OWASP's CSV injection page.
        for bad in [
            "=1+1",
            "+SUM(A1)",
            "-2+3",
            "@cmd",
            "\tx",
            "\rx",
            "-",
            "=HYPERLINK(\"x\")",
        ] {
            assert_eq!(cell(bad), format!("'{bad}"), "{bad:?}");
        }
        for kept in ["-0.35", "+2", "-12", "1950.0", "A. Tester", "", "0+400"] {
            assert_eq!(cell(kept), kept, "{kept:?}");
        }
    }
}
