//! A tiny SVG writer: every attribute value and text node is XML-escaped, every element it opens it closes.

use std::fmt::Write as _;

/// Builds SVG markup into a string; tag and attribute names are trusted literals, values are escaped.
#[derive(Debug, Default)]
pub struct SvgWriter {
    out: String,
    stack: Vec<&'static str>,
    pending: Option<&'static str>,
}

impl SvgWriter {
    /// A writer with room reserved for about `bytes` of output.
    pub fn with_capacity(bytes: usize) -> Self {
        Self {
            out: String::with_capacity(bytes),
            stack: Vec::new(),
            pending: None,
        }
    }

    /// Begins a start tag `<name`; follow with attributes, then [`open`](Self::open) or [`leaf`](Self::leaf).
    pub fn start(&mut self, name: &'static str) -> &mut Self {
        self.seal_as_leaf();
        self.out.push('<');
        self.out.push_str(name);
        self.pending = Some(name);
        self
    }

    /// Adds a text attribute, escaped (ignored when no start tag is pending).
    pub fn attr(&mut self, key: &str, value: &str) -> &mut Self {
        if self.pending.is_some() {
            self.out.push(' ');
            self.out.push_str(key);
            self.out.push_str("=\"");
            escape_into(&mut self.out, value, true);
            self.out.push('"');
        }
        self
    }

    /// Adds a numeric attribute written compactly (at most two decimals).
    pub fn num(&mut self, key: &str, value: f64) -> &mut Self {
        if self.pending.is_some() {
            self.out.push(' ');
            self.out.push_str(key);
            self.out.push_str("=\"");
            push_num(&mut self.out, value);
            self.out.push('"');
        }
        self
    }

    /// Ends the pending start tag with `>` so children may follow; close it with [`close`](Self::close).
    pub fn open(&mut self) -> &mut Self {
        if let Some(name) = self.pending.take() {
            self.out.push('>');
            self.stack.push(name);
        }
        self
    }

    /// Ends the pending start tag as an empty element `/>`.
    pub fn leaf(&mut self) -> &mut Self {
        self.seal_as_leaf();
        self
    }

    /// Closes the innermost open element (or ends a pending tag as empty).
    pub fn close(&mut self) -> &mut Self {
        if self.pending.is_some() {
            self.seal_as_leaf();
        } else if let Some(name) = self.stack.pop() {
            self.out.push_str("</");
            self.out.push_str(name);
            self.out.push('>');
        }
        self
    }

    /// Writes escaped character data inside the current element.
    pub fn text(&mut self, content: &str) -> &mut Self {
        self.open();
        escape_into(&mut self.out, content, false);
        self
    }

    /// Writes `<name>content</name>` with no attributes, e.g. `<title>`.
    pub fn simple(&mut self, name: &'static str, content: &str) -> &mut Self {
        self.start(name).open().text(content).close()
    }

    /// Closes everything still open and returns the markup.
    pub fn finish(mut self) -> String {
        self.seal_as_leaf();
        while !self.stack.is_empty() {
            self.close();
        }
        self.out
    }

    /// Bytes written so far.
    pub fn len(&self) -> usize {
        self.out.len()
    }

    /// True when nothing has been written.
    pub fn is_empty(&self) -> bool {
        self.out.is_empty()
    }

    fn seal_as_leaf(&mut self) {
        if self.pending.take().is_some() {
            self.out.push_str("/>");
        }
    }
}

/// Escapes text for XML; characters XML 1.0 forbids are dropped so the output always parses.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    escape_into(&mut out, text, true);
    out
}

fn escape_into(out: &mut String, text: &str, in_attribute: bool) {
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' if in_attribute => out.push_str("&quot;"),
            '\n' if in_attribute => out.push_str("&#10;"),
            '\t' if in_attribute => out.push_str("&#9;"),
            '\r' => {}
            '\n' | '\t' => out.push(c),
            c if (c as u32) < 0x20 => {}
            '\u{FFFE}' | '\u{FFFF}' => {}
            c => out.push(c),
        }
    }
}

/// Writes a coordinate with at most two decimals, no trailing zeros, no "-0"; non-finite becomes 0.
pub fn push_num(out: &mut String, value: f64) {
    let v = if value.is_finite() {
        value.clamp(-1e9, 1e9)
    } else {
        0.0
    };
    let hundredths = (v * 100.0).round() as i64;
    if hundredths < 0 {
        out.push('-');
    }
    let abs = hundredths.unsigned_abs();
    let whole = abs / 100;
    let frac = abs % 100;
    let _ = write!(out, "{whole}");
    if frac != 0 {
        if frac.is_multiple_of(10) {
            let _ = write!(out, ".{}", frac / 10);
        } else {
            let _ = write!(out, ".{frac:02}");
        }
    }
}

/// A coordinate as a compact string (see [`push_num`]).
pub fn num(value: f64) -> String {
    let mut s = String::new();
    push_num(&mut s, value);
    s
}

/// Rough advance width of `text` in a proportional sans-serif at `font_size` (for layout, not typesetting).
pub fn text_width(text: &str, font_size: f64) -> f64 {
    let em: f64 = text
        .chars()
        .map(|c| match c {
            'i' | 'j' | 'l' | '.' | ',' | ':' | ';' | '\'' | '|' | '!' | 'I' | '\u{202F}' => 0.3,
            ' ' | 'f' | 't' | 'r' | '(' | ')' | '[' | ']' | '-' | '/' => 0.38,
            'm' | 'w' | 'M' | 'W' | '%' | '@' => 0.9,
            '0'..='9' => 0.62,
            c if c.is_ascii_uppercase() => 0.7,
            c if (c as u32) >= 0x2E80 => 1.0,
            _ => 0.6,
        })
        .sum();
    em * font_size
}

/// Rough advance width of bold text, which runs about a tenth wider than regular.
pub fn bold_text_width(text: &str, font_size: f64) -> f64 {
    text_width(text, font_size) * 1.1
}

/// Shortens `text` with an ellipsis so it fits in `max_width` at `font_size`.
pub fn fit_text(text: &str, font_size: f64, max_width: f64) -> String {
    if text_width(text, font_size) <= max_width {
        return text.to_string();
    }
    let mut kept = String::new();
    for c in text.chars() {
        let mut trial = kept.clone();
        trial.push(c);
        trial.push('…');
        if text_width(&trial, font_size) > max_width {
            break;
        }
        kept.push(c);
    }
    kept.push('…');
    kept
}

/// Breaks `text` at spaces into lines no wider than `max_width` (a long word stays whole).
pub fn wrap_text(text: &str, font_size: f64, max_width: f64) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let trial = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if !line.is_empty() && text_width(&trial, font_size) > max_width {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = trial;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// Keeps a link target only when it cannot run script (no `javascript:`, `vbscript:` or `data:` scheme).
pub fn safe_href(href: &str) -> Option<&str> {
    let trimmed = href.trim();
    if trimmed.is_empty() {
        return None;
    }
    let lowered: String = trimmed
        .chars()
        .filter(|c| !c.is_whitespace() && !c.is_control())
        .take(12)
        .collect::<String>()
        .to_ascii_lowercase();
    let blocked = ["javascript:", "vbscript:", "data:"];
    if blocked.iter().any(|b| lowered.starts_with(b)) {
        None
    } else {
        Some(trimmed)
    }
}

/// A short stable id prefix (FNV-1a of `seed`) so several charts on one page keep distinct ids.
pub fn id_prefix(kind: &str, seed: &str) -> String {
    let mut hash: u32 = 0x811c_9dc5;
    for byte in kind.bytes().chain(seed.bytes()) {
        hash ^= u32::from(byte);
        hash = hash.wrapping_mul(0x0100_0193);
    }
    format!("ll{kind}{hash:08x}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_markup_in_text_and_attributes() {
        let mut w = SvgWriter::default();
        w.start("text")
            .attr("data-x", "a\"<&>")
            .open()
            .text("<&>\"");
        let out = w.finish();
        assert_eq!(
            out,
            "<text data-x=\"a&quot;&lt;&amp;&gt;\">&lt;&amp;&gt;\"</text>"
        );
        assert!(roxmltree::Document::parse(&out).is_ok());
    }

    #[test]
    fn drops_characters_xml_forbids() {
        assert_eq!(escape("a\u{0}b\u{1b}c\u{FFFF}"), "abc");
    }

    #[test]
    fn finish_closes_open_elements() {
        let mut w = SvgWriter::default();
        w.start("svg")
            .open()
            .start("g")
            .open()
            .start("rect")
            .num("x", 1.0);
        assert_eq!(w.finish(), "<svg><g><rect x=\"1\"/></g></svg>");
    }

    #[test]
    fn numbers_are_compact_and_never_negative_zero() {
        let cases = [
            (0.0, "0"),
            (-0.001, "0"),
            (1.5, "1.5"),
            (2.25, "2.25"),
            (-3.1, "-3.1"),
            (10.004, "10"),
            (f64::NAN, "0"),
            (f64::INFINITY, "0"),
        ];
        for (v, want) in cases {
            assert_eq!(num(v), want, "value {v}");
        }
    }

    #[test]
    fn unsafe_links_are_refused() {
        assert_eq!(safe_href(" /lots/12 "), Some("/lots/12"));
        assert_eq!(safe_href("JavaScript:alert(1)"), None);
        assert_eq!(safe_href("java\tscript:x"), None);
        assert_eq!(safe_href("data:text/html,x"), None);
        assert_eq!(safe_href(""), None);
    }

    #[test]
    fn text_fits_and_wraps() {
        let long = "a very long layer description indeed";
        let fitted = fit_text(long, 10.0, 60.0);
        assert!(fitted.ends_with('…'));
        assert!(text_width(&fitted, 10.0) <= 60.0);
        let lines = wrap_text(long, 10.0, 80.0);
        assert!(lines.len() > 1);
        assert_eq!(lines.join(" "), long);
    }

    #[test]
    fn id_prefix_is_stable() {
        assert_eq!(id_prefix("m", "x"), id_prefix("m", "x"));
        assert_ne!(id_prefix("m", "x"), id_prefix("m", "y"));
    }
}
