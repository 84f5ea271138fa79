//! WinAnsi-safe text: substitution of characters the built-in fonts cannot show,
//! width measurement with the Helvetica metrics, and word wrapping.
//!
//! The built-in PDF fonts are written with `/WinAnsiEncoding` (one byte per
//! character). Anything outside that set would print as `?`, so it is replaced
//! here first: Greek letters become their names ("rho"), comparison signs become
//! ASCII (">="), the minus sign becomes a hyphen. `³`, `²`, `°`, `±`, `×` and `µ`
//! are WinAnsi characters and are kept.

use std::borrow::Cow;

use printpdf::BuiltinFont;

use super::font_metrics::{HELVETICA, HELVETICA_BOLD};

/// The font faces the certificate uses; all are built-in Helvetica variants.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Face {
    /// Body text and numbers.
    Regular,
    /// Headings, labels that must stand out, the verdict.
    Bold,
    /// Notes of voided and superseded tests.
    Oblique,
}

impl Face {
    /// The printpdf built-in font for this face.
    pub(super) fn builtin(self) -> BuiltinFont {
        match self {
            Face::Regular => BuiltinFont::Helvetica,
            Face::Bold => BuiltinFont::HelveticaBold,
            Face::Oblique => BuiltinFont::HelveticaOblique,
        }
    }

    fn widths(self) -> &'static [u16; 224] {
        match self {
            Face::Regular | Face::Oblique => &HELVETICA,
            Face::Bold => &HELVETICA_BOLD,
        }
    }
}

/// Replaces every character the WinAnsi built-in fonts cannot show with a readable
/// stand-in; borrows when nothing needs replacing.
pub(super) fn win_ansi_safe(text: &str) -> Cow<'_, str> {
    if text.chars().all(|c| win_ansi_byte(c).is_some()) {
        return Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        if win_ansi_byte(c).is_some() {
            out.push(c);
        } else {
            out.push_str(substitute(c));
        }
    }
    Cow::Owned(out)
}

/// The stand-in for one character outside WinAnsi.
fn substitute(c: char) -> &'static str {
    match c {
        '\t' | '\n' | '\r' | '\u{2028}' | '\u{2029}' => " ",
        '\u{2000}'..='\u{200A}' | '\u{202F}' | '\u{205F}' | '\u{3000}' => " ",
        '\u{200B}'..='\u{200D}' | '\u{2060}' | '\u{FEFF}' | '\u{00AD}' => "",
        '\u{2010}' | '\u{2011}' | '\u{2012}' | '\u{2212}' | '\u{2043}' | '\u{FE63}' => "-",
        '\u{2015}' => "\u{2014}",
        '\u{2032}' => "'",
        '\u{2033}' => "\"",
        '\u{2264}' | '\u{2A7D}' => "<=",
        '\u{2265}' | '\u{2A7E}' => ">=",
        '\u{2260}' => "<>",
        '\u{2248}' | '\u{2243}' | '\u{223C}' => "~",
        '\u{22C5}' | '\u{2219}' => "\u{00B7}",
        '\u{2192}' => "->",
        '\u{2190}' => "<-",
        '\u{221A}' => "sqrt",
        '\u{221E}' => "infinity",
        '\u{2205}' => "empty",
        '\u{2070}' => "^0",
        '\u{2074}' => "^4",
        '\u{2075}' => "^5",
        '\u{2076}' => "^6",
        '\u{2077}' => "^7",
        '\u{2078}' => "^8",
        '\u{2079}' => "^9",
        '\u{207B}' => "^-",
        '\u{2080}' => "0",
        '\u{2081}' => "1",
        '\u{2082}' => "2",
        '\u{2083}' => "3",
        '\u{2084}' => "4",
        '\u{2085}' => "5",
        '\u{2086}' => "6",
        '\u{2087}' => "7",
        '\u{2088}' => "8",
        '\u{2089}' => "9",
        '\u{2090}' => "a",
        '\u{2091}' => "e",
        '\u{2092}' => "o",
        '\u{2093}' => "x",
        '\u{2099}' => "n",
        '\u{2096}' => "k",
        '\u{209A}' => "p",
        '\u{209B}' => "s",
        '\u{209C}' => "t",
        '\u{1D48}' => "d",
        '\u{2113}' => "l",
        '\u{2116}' => "No.",
        '\u{2103}' => "\u{00B0}C",
        '\u{2109}' => "\u{00B0}F",
        other => greek_name(other).unwrap_or("?"),
    }
}

/// Spelled-out names of the Greek letters (mu becomes the WinAnsi micro sign).
fn greek_name(c: char) -> Option<&'static str> {
    const LOWER: [&str; 25] = [
        "alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa",
        "lambda", "\u{00B5}", "nu", "xi", "omicron", "pi", "rho", "sigma", "sigma", "tau",
        "upsilon", "phi", "chi", "psi", "omega",
    ];
    const UPPER: [&str; 25] = [
        "Alpha", "Beta", "Gamma", "Delta", "Epsilon", "Zeta", "Eta", "Theta", "Iota", "Kappa",
        "Lambda", "Mu", "Nu", "Xi", "Omicron", "Pi", "Rho", "", "Sigma", "Tau", "Upsilon", "Phi",
        "Chi", "Psi", "Omega",
    ];
    let code = c as u32;
    match code {
        0x03B1..=0x03C9 => LOWER.get((code - 0x03B1) as usize).copied(),
        0x0391..=0x03A9 => UPPER
            .get((code - 0x0391) as usize)
            .copied()
            .filter(|n| !n.is_empty()),
        0x03D1 => Some("theta"),
        0x03D5 => Some("phi"),
        0x03F1 => Some("rho"),
        0x2126 => Some("Omega"),
        _ => None,
    }
}

/// The WinAnsi code of `c`, or `None` where the encoding has no such character
/// (PDF 32000-1 Annex D.2; the same table printpdf encodes built-in text with).
pub(super) fn win_ansi_byte(c: char) -> Option<u8> {
    match c as u32 {
        cp @ 0x20..=0x7E => return Some(cp as u8),
        cp @ 0xA1..=0xFF => return Some(cp as u8),
        _ => {}
    }
    Some(match c {
        '\u{00A0}' => 0xA0,
        '\u{20AC}' => 0x80,
        '\u{201A}' => 0x82,
        '\u{0192}' => 0x83,
        '\u{201E}' => 0x84,
        '\u{2026}' => 0x85,
        '\u{2020}' => 0x86,
        '\u{2021}' => 0x87,
        '\u{02C6}' => 0x88,
        '\u{2030}' => 0x89,
        '\u{0160}' => 0x8A,
        '\u{2039}' => 0x8B,
        '\u{0152}' => 0x8C,
        '\u{017D}' => 0x8E,
        '\u{2018}' => 0x91,
        '\u{2019}' => 0x92,
        '\u{201C}' => 0x93,
        '\u{201D}' => 0x94,
        '\u{2022}' => 0x95,
        '\u{2013}' => 0x96,
        '\u{2014}' => 0x97,
        '\u{02DC}' => 0x98,
        '\u{2122}' => 0x99,
        '\u{0161}' => 0x9A,
        '\u{203A}' => 0x9B,
        '\u{0153}' => 0x9C,
        '\u{017E}' => 0x9E,
        '\u{0178}' => 0x9F,
        _ => return None,
    })
}

/// Width in points of `text` set in `face` at `size`; characters outside WinAnsi
/// are measured as the stand-in they will print as.
pub(super) fn width(text: &str, face: Face, size: f32) -> f32 {
    let safe = win_ansi_safe(text);
    let widths = face.widths();
    let units: u32 = safe
        .chars()
        .map(|c| {
            win_ansi_byte(c)
                .and_then(|b| widths.get(usize::from(b).saturating_sub(0x20)))
                .map_or(556, |w| u32::from(*w))
        })
        .sum();
    units as f32 * size / 1000.0
}

/// Splits `text` into lines no wider than `max_width`, breaking at spaces and, for
/// a word longer than a line, inside the word. Always returns at least one line.
pub(super) fn wrap(text: &str, face: Face, size: f32, max_width: f32) -> Vec<String> {
    wrap_upto(text, face, size, max_width, usize::MAX)
}

/// Like [`wrap`], but stops once more than `limit` lines are made, so very long
/// text costs no more than the lines that can be shown.
fn wrap_upto(text: &str, face: Face, size: f32, max_width: f32, limit: usize) -> Vec<String> {
    let safe = win_ansi_safe(text);
    let mut lines = Vec::new();
    let mut current = String::new();
    for word in safe.split(' ').filter(|w| !w.is_empty()) {
        if lines.len() > limit {
            break;
        }
        let candidate = if current.is_empty() {
            word.to_string()
        } else {
            format!("{current} {word}")
        };
        if width(&candidate, face, size) <= max_width {
            current = candidate;
            continue;
        }
        if !current.is_empty() {
            lines.push(std::mem::take(&mut current));
        }
        if width(word, face, size) <= max_width {
            current = word.to_string();
        } else {
            for piece in break_word(word, face, size, max_width) {
                if !current.is_empty() {
                    lines.push(std::mem::take(&mut current));
                }
                current = piece;
            }
        }
    }
    if !current.is_empty() || lines.is_empty() {
        lines.push(current);
    }
    lines
}

/// Cuts one over-long word into pieces that each fit `max_width` (at least one
/// character per piece, so the loop always advances).
fn break_word(word: &str, face: Face, size: f32, max_width: f32) -> Vec<String> {
    let mut pieces = Vec::new();
    let mut piece = String::new();
    for c in word.chars() {
        piece.push(c);
        if width(&piece, face, size) > max_width && piece.chars().count() > 1 {
            piece.pop();
            pieces.push(std::mem::take(&mut piece));
            piece.push(c);
        }
    }
    if !piece.is_empty() {
        pieces.push(piece);
    }
    pieces
}

/// Wraps like [`wrap`] but keeps at most `max_lines` lines; when text is cut, the
/// last kept line ends in an ellipsis so a reader sees that it continues elsewhere.
pub(super) fn wrap_limited(
    text: &str,
    face: Face,
    size: f32,
    max_width: f32,
    max_lines: usize,
) -> Vec<String> {
    let keep = max_lines.max(1);
    let mut lines = wrap_upto(text, face, size, max_width, keep);
    if lines.len() > keep {
        lines.truncate(keep);
        if let Some(last) = lines.last_mut() {
            *last = with_ellipsis(last, face, size, max_width);
        }
    }
    lines
}

/// `line` shortened until it fits `max_width` with a trailing ellipsis.
fn with_ellipsis(line: &str, face: Face, size: f32, max_width: f32) -> String {
    let mut kept: String = line.to_string();
    loop {
        let candidate = format!("{}\u{2026}", kept.trim_end());
        if width(&candidate, face, size) <= max_width || kept.is_empty() {
            return candidate;
        }
        kept.pop();
    }
}

/// Splits a decimal number string at its decimal point: (integer part, point and
/// fraction). Used to line numbers up on the point in the test table.
pub(super) fn split_decimal(text: &str) -> (&str, &str) {
    match text.find('.') {
        Some(i) if text[..i].chars().any(|c| c.is_ascii_digit()) => text.split_at(i),
        _ => (text, ""),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn greek_letters_become_words() {
        assert_eq!(win_ansi_safe("ρd = ρ/(1+w)"), "rhod = rho/(1+w)");
        assert_eq!(win_ansi_safe("σ and Δw"), "sigma and Deltaw");
        // Greek mu maps onto the WinAnsi micro sign 0xB5.
        assert_eq!(win_ansi_safe("μm"), "\u{00B5}m");
    }

    #[test]
    fn superscripts_and_degree_are_kept_because_win_ansi_has_them() {
        // 0xB3 threesuperior, 0xB2 twosuperior, 0xB0 degree, 0xB1 plusminus (CP1252).
        assert_eq!(
            win_ansi_safe("kg/m³, m², 20 °C, ±2"),
            "kg/m³, m², 20 °C, ±2"
        );
        assert_eq!(win_ansi_byte('³'), Some(0xB3));
        assert_eq!(win_ansi_byte('°'), Some(0xB0));
    }

    #[test]
    fn signs_outside_win_ansi_become_ascii() {
        assert_eq!(
            win_ansi_safe("RC ≥ 95 %, w − OMC ≤ 2"),
            "RC >= 95 %, w - OMC <= 2"
        );
        assert_eq!(win_ansi_safe("2\u{202F}145"), "2 145");
        assert_eq!(win_ansi_safe("漢"), "?");
        assert_eq!(win_ansi_safe("line\nbreak"), "line break");
    }

    #[test]
    fn ascii_is_borrowed_unchanged() {
        assert!(matches!(win_ansi_safe("T-0012 pass"), Cow::Borrowed(_)));
    }

    #[test]
    fn widths_follow_the_helvetica_metrics() {
        // Helvetica AFM: every digit 556, period 278 (Adobe Core 14 metrics).
        assert!((width("1962.5", Face::Regular, 10.0) - 30.58).abs() < 1e-3);
        // Helvetica-Bold AFM: "A" 722.
        assert!((width("A", Face::Bold, 10.0) - 7.22).abs() < 1e-4);
        assert_eq!(width("", Face::Regular, 10.0), 0.0);
    }

    #[test]
    fn wrap_keeps_every_word_and_respects_the_width() {
        let text = "void: gauge standardisation failed on the morning check";
        let lines = wrap(text, Face::Regular, 7.0, 60.0);
        assert!(lines.len() > 1);
        for line in &lines {
            assert!(width(line, Face::Regular, 7.0) <= 60.0, "{line}");
        }
        assert_eq!(lines.join(" "), text);
    }

    #[test]
    fn wrap_breaks_a_word_longer_than_the_line() {
        let lines = wrap("ABCDEFGHIJKLMNOPQRSTUVWXYZ", Face::Regular, 10.0, 30.0);
        assert!(lines.len() > 3);
        assert_eq!(lines.concat(), "ABCDEFGHIJKLMNOPQRSTUVWXYZ");
        assert_eq!(wrap("", Face::Regular, 10.0, 30.0), vec![String::new()]);
    }

    #[test]
    fn limited_wrap_marks_the_cut_with_an_ellipsis() {
        let lines = wrap_limited(
            "one two three four five six seven eight",
            Face::Regular,
            10.0,
            40.0,
            2,
        );
        assert_eq!(lines.len(), 2);
        assert!(lines[1].ends_with('\u{2026}'));
        assert!(width(&lines[1], Face::Regular, 10.0) <= 40.0);
    }

    #[test]
    fn limited_wrap_of_huge_text_is_quick_and_short() {
        let huge = "word ".repeat(200_000);
        let lines = wrap_limited(&huge, Face::Regular, 8.0, 200.0, 3);
        assert_eq!(lines.len(), 3);
        assert!(lines[2].ends_with('\u{2026}'));
    }

    #[test]
    fn decimal_split() {
        assert_eq!(split_decimal("1962.5"), ("1962", ".5"));
        assert_eq!(split_decimal("-1.2"), ("-1", ".2"));
        assert_eq!(split_decimal("2 145"), ("2 145", ""));
        assert_eq!(split_decimal("n/a"), ("n/a", ""));
        assert_eq!(split_decimal(".5"), (".5", ""));
    }
}
