//! Axis arithmetic shared by every chart: 1-2-5 tick steps, linear scales and tick label formatting.

/// Narrow no-break space used to group thousands ("1 985"), as SI writing does.
pub const GROUP_SEPARATOR: char = '\u{202F}';

/// The real minus sign, which lines up with digits better than a hyphen.
pub const MINUS: char = '\u{2212}';

/// Most ticks an axis will ever produce, whatever the input.
const MAX_TICKS: usize = 1000;

/// A "nice" step (1, 2 or 5 × 10^k) that cuts `span` into about `target` intervals (nearest on a log scale).
pub fn nice_step(span: f64, target: usize) -> f64 {
    let target = target.clamp(1, 100) as f64;
    if !span.is_finite() || span <= 0.0 {
        return 1.0;
    }
    let raw = span / target;
    let magnitude = 10f64.powf(raw.log10().floor());
    if !magnitude.is_finite() || magnitude <= 0.0 {
        return 1.0;
    }
    let normalised = raw / magnitude;
    // Pick the 1-2-5 value nearest to the raw step on a log scale (thresholds at the geometric means).
    let mantissa = if normalised >= 50f64.sqrt() {
        10.0
    } else if normalised >= 10f64.sqrt() {
        5.0
    } else if normalised >= 2f64.sqrt() {
        2.0
    } else {
        1.0
    };
    mantissa * magnitude
}

/// True when `step` is 1, 2 or 5 times a power of ten.
pub fn is_nice_step(step: f64) -> bool {
    if !step.is_finite() || step <= 0.0 {
        return false;
    }
    let magnitude = 10f64.powf(step.log10().floor());
    let mantissa = step / magnitude;
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .any(|m| (mantissa - m).abs() < 1e-6 * m)
}

/// Tick positions on an axis and the step between them.
#[derive(Clone, Debug, PartialEq)]
pub struct Ticks {
    /// Distance between neighbouring ticks (a nice step).
    pub step: f64,
    /// Tick values in ascending order, all within the requested range.
    pub values: Vec<f64>,
}

/// Ticks at multiples of a nice step that fall inside `[lo, hi]`.
pub fn ticks(lo: f64, hi: f64, target: usize) -> Ticks {
    let (lo, hi) = ordered(lo, hi);
    let step = nice_step(hi - lo, target);
    ticks_with_step(lo, hi, step)
}

/// Ticks at multiples of a given `step` inside `[lo, hi]` (at most a thousand).
pub fn ticks_with_step(lo: f64, hi: f64, step: f64) -> Ticks {
    let (lo, hi) = ordered(lo, hi);
    if !step.is_finite() || step <= 0.0 {
        return Ticks {
            step: 1.0,
            values: Vec::new(),
        };
    }
    let first = (lo / step - 1e-9).ceil();
    let last = (hi / step + 1e-9).floor();
    let count = if last >= first {
        ((last - first) as usize + 1).min(MAX_TICKS)
    } else {
        0
    };
    let values = (0..count)
        .map(|i| round_to_step((first + i as f64) * step, step))
        .collect();
    Ticks { step, values }
}

/// Widens `[lo, hi]` outward to multiples of a nice step; returns `(lo, hi, step)`.
pub fn nice_extent(lo: f64, hi: f64, target: usize) -> (f64, f64, f64) {
    let (lo, hi) = ordered(lo, hi);
    let step = nice_step(hi - lo, target);
    let nice_lo = round_to_step((lo / step + 1e-9).floor() * step, step);
    let nice_hi = round_to_step((hi / step - 1e-9).ceil() * step, step);
    if nice_hi > nice_lo {
        (nice_lo, nice_hi, step)
    } else {
        (nice_lo, nice_lo + step, step)
    }
}

/// Pads `[lo, hi]` by `fraction` of its span on each side; a zero span gets `min_span` around it.
pub fn padded(lo: f64, hi: f64, fraction: f64, min_span: f64) -> (f64, f64) {
    let (lo, hi) = ordered(lo, hi);
    let min_span = if min_span.is_finite() && min_span > 0.0 {
        min_span
    } else {
        1.0
    };
    let span = (hi - lo).max(min_span);
    let mid = (lo + hi) / 2.0;
    let (lo, hi) = (lo.min(mid - span / 2.0), hi.max(mid + span / 2.0));
    let pad = span * fraction.clamp(0.0, 1.0);
    (lo - pad, hi + pad)
}

/// Puts a range in ascending order and replaces non-finite or empty ranges with something drawable.
pub fn ordered(a: f64, b: f64) -> (f64, f64) {
    match (a.is_finite(), b.is_finite()) {
        (true, true) if a < b => (a, b),
        (true, true) if a > b => (b, a),
        (true, true) => {
            let half = (a.abs() * 0.05).max(0.5);
            (a - half, a + half)
        }
        (true, false) => (a - 0.5, a + 0.5),
        (false, true) => (b - 0.5, b + 0.5),
        (false, false) => (0.0, 1.0),
    }
}

/// Maps a data interval linearly onto a pixel interval (the pixel interval may run backwards).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LinearScale {
    domain: (f64, f64),
    range: (f64, f64),
}

impl LinearScale {
    /// A scale from `domain` (data units) to `range` (pixels); a degenerate domain is widened.
    pub fn new(domain: (f64, f64), range: (f64, f64)) -> Self {
        let domain = if domain.0.is_finite() && domain.1.is_finite() && domain.0 != domain.1 {
            domain
        } else {
            ordered(domain.0, domain.1)
        };
        let range = (finite_or(range.0, 0.0), finite_or(range.1, 1.0));
        Self { domain, range }
    }

    /// Pixel position of a data value.
    pub fn map(&self, value: f64) -> f64 {
        let (d0, d1) = self.domain;
        let (r0, r1) = self.range;
        r0 + (value - d0) / (d1 - d0) * (r1 - r0)
    }

    /// Data value at a pixel position.
    pub fn invert(&self, pixel: f64) -> f64 {
        let (d0, d1) = self.domain;
        let (r0, r1) = self.range;
        if r1 == r0 {
            return d0;
        }
        d0 + (pixel - r0) / (r1 - r0) * (d1 - d0)
    }

    /// The data interval.
    pub fn domain(&self) -> (f64, f64) {
        self.domain
    }

    /// The pixel interval.
    pub fn range(&self) -> (f64, f64) {
        self.range
    }

    /// True when `value` lies inside the domain (inclusive, either direction).
    pub fn contains(&self, value: f64) -> bool {
        let (lo, hi) = ordered(self.domain.0, self.domain.1);
        value >= lo && value <= hi
    }
}

/// Decimals needed to show every multiple of `step` exactly (0 for 1, 2, 5, 10…; 1 for 0.5; 2 for 0.05).
pub fn decimals_for(step: f64) -> usize {
    if !step.is_finite() || step <= 0.0 {
        return 0;
    }
    for decimals in 0..=6 {
        let scaled = step * 10f64.powi(decimals as i32);
        if (scaled - scaled.round()).abs() < 1e-6 * scaled.max(1.0) {
            return decimals;
        }
    }
    6
}

/// A tick label for `value` with as many decimals as `step` needs.
pub fn format_tick(value: f64, step: f64) -> String {
    format_number(value, decimals_for(step))
}

/// A number with fixed decimals, thousands grouped by a narrow space, a true minus sign, never "−0".
pub fn format_number(value: f64, decimals: usize) -> String {
    if !value.is_finite() {
        return "–".to_string();
    }
    let decimals = decimals.min(6);
    let text = format!("{:.*}", decimals, value.abs());
    let is_zero = text.chars().all(|c| c == '0' || c == '.');
    let (int_part, frac_part) = match text.split_once('.') {
        Some((i, f)) => (i, Some(f)),
        None => (text.as_str(), None),
    };
    let mut out = String::with_capacity(text.len() + 4);
    if value < 0.0 && !is_zero {
        out.push(MINUS);
    }
    let digits = int_part.len();
    for (i, c) in int_part.chars().enumerate() {
        if i > 0 && digits >= 4 && (digits - i) % 3 == 0 {
            out.push(GROUP_SEPARATOR);
        }
        out.push(c);
    }
    if let Some(f) = frac_part {
        out.push('.');
        out.push_str(f);
    }
    out
}

/// The text between the last pair of parentheses of an axis label: "Dry density (kg/m³)" → "kg/m³".
pub fn unit_of(label: &str) -> &str {
    match (label.rfind('('), label.rfind(')')) {
        (Some(open), Some(close)) if close > open => label[open + 1..close].trim(),
        _ => "",
    }
}

fn round_to_step(value: f64, step: f64) -> f64 {
    let factor = 10f64.powi(decimals_for(step) as i32 + 1);
    let rounded = (value * factor).round() / factor;
    if rounded == 0.0 { 0.0 } else { rounded }
}

fn finite_or(value: f64, fallback: f64) -> f64 {
    if value.is_finite() { value } else { fallback }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn steps_follow_one_two_five() {
        // Expected values worked by hand from the 1-2-5 rule (common practice for chart axes).
        let cases = [
            (10.0, 5, 2.0),
            (100.0, 5, 20.0),
            (7.0, 5, 1.0),
            (0.9, 4, 0.2),
            (105.0, 5, 20.0),
            (60_000.0, 8, 10_000.0),
            (3.0, 6, 0.5),
            (1.0, 10, 0.1),
        ];
        for (span, target, want) in cases {
            let got = nice_step(span, target);
            assert!(
                (got - want).abs() < 1e-9,
                "span {span} target {target}: {got}"
            );
        }
    }

    #[test]
    fn bad_spans_give_unit_step() {
        assert_eq!(nice_step(0.0, 5), 1.0);
        assert_eq!(nice_step(f64::NAN, 5), 1.0);
        assert_eq!(nice_step(-3.0, 5), 1.0);
    }

    #[test]
    fn ticks_are_clean_multiples() {
        let t = ticks(0.1, 0.7, 6);
        assert_eq!(t.step, 0.1);
        assert_eq!(t.values, vec![0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7]);
        let t = ticks(1862.0, 1993.0, 5);
        assert_eq!(t.step, 20.0);
        assert_eq!(
            t.values,
            vec![1880.0, 1900.0, 1920.0, 1940.0, 1960.0, 1980.0]
        );
    }

    #[test]
    fn extent_snaps_outward() {
        assert_eq!(nice_extent(6.4, 15.6, 5), (6.0, 16.0, 2.0));
        assert_eq!(nice_extent(91.3, 99.2, 5), (90.0, 100.0, 2.0));
    }

    #[test]
    fn scale_maps_both_ways_and_can_flip() {
        let s = LinearScale::new((90.0, 100.0), (200.0, 0.0));
        assert_eq!(s.map(95.0), 100.0);
        assert_eq!(s.map(90.0), 200.0);
        assert_eq!(s.invert(50.0), 97.5);
        assert!(s.contains(92.0));
        let degenerate = LinearScale::new((5.0, 5.0), (0.0, 10.0));
        assert!(degenerate.map(5.0).is_finite());
    }

    #[test]
    fn labels_have_sensible_decimals() {
        assert_eq!(decimals_for(0.5), 1);
        assert_eq!(decimals_for(0.05), 2);
        assert_eq!(decimals_for(20.0), 0);
        assert_eq!(format_tick(12.0, 2.0), "12");
        assert_eq!(format_tick(12.5, 0.5), "12.5");
        assert_eq!(format_tick(1900.0, 20.0), "1\u{202F}900");
        assert_eq!(format_tick(-0.0, 1.0), "0");
        assert_eq!(format_number(-0.04, 1), "0.0");
        assert_eq!(format_number(-2.5, 1), "\u{2212}2.5");
        assert_eq!(format_number(1234567.0, 0), "1\u{202F}234\u{202F}567");
        assert_eq!(format_number(999.0, 0), "999");
    }

    #[test]
    fn units_come_from_parentheses() {
        assert_eq!(unit_of("Dry density (kg/m³)"), "kg/m³");
        assert_eq!(unit_of("Water content (%)"), "%");
        assert_eq!(unit_of("Water content"), "");
    }

    proptest! {
        #[test]
        fn any_range_gives_nice_bounded_ticks(lo in -1e6f64..1e6, span in 1e-3f64..1e6, target in 1usize..12) {
            let t = ticks(lo, lo + span, target);
            prop_assert!(is_nice_step(t.step));
            prop_assert!(t.values.len() <= target * 3 + 2);
            for v in &t.values {
                prop_assert!(*v >= lo - t.step * 1e-6 && *v <= lo + span + t.step * 1e-6);
            }
            let (a, b, step) = nice_extent(lo, lo + span, target);
            prop_assert!(a <= lo && b >= lo + span);
            prop_assert!(is_nice_step(step));
        }
    }
}
