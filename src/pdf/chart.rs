//! The small chart of relative compaction per test against the minimum, drawn
//! with PDF vector operations: axes, ticks, labels, the limit line and one dot
//! per test. Counted tests are filled dots, superseded ones hollow; voided tests
//! (no RC value) leave their slot empty.

use super::canvas::{Canvas, Ink};
use super::model::TestRow;
use super::text::{Face, width};

const TICK_SIZE: f32 = 6.0;
const AXIS_LABEL_WIDTH: f32 = 26.0;
const X_LABEL_HEIGHT: f32 = 19.0;
const LEGEND_HEIGHT: f32 = 13.0;

/// The rectangle the chart may use; (x, y) is its lower-left corner.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct ChartArea {
    /// x of the left edge.
    pub x: f32,
    /// y of the bottom edge.
    pub y: f32,
    /// Width.
    pub width: f32,
    /// Height.
    pub height: f32,
}

/// The value axis: lowest and highest value and the tick step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Scale {
    /// Value at the bottom of the plot.
    pub low: f64,
    /// Value at the top of the plot.
    pub high: f64,
    /// Distance between ticks.
    pub step: f64,
}

/// A "nice" step (1, 2, 2.5 or 5 times a power of ten) giving about `target` ticks.
pub(super) fn nice_step(span: f64, target: f64) -> f64 {
    if !(span.is_finite() && span > 0.0) {
        return 1.0;
    }
    let raw = span / target.max(1.0);
    let magnitude = 10f64.powf(raw.log10().floor());
    let fraction = raw / magnitude;
    let nice = if fraction <= 1.0 {
        1.0
    } else if fraction <= 2.0 {
        2.0
    } else if fraction <= 2.5 {
        2.5
    } else if fraction <= 5.0 {
        5.0
    } else {
        10.0
    };
    nice * magnitude
}

/// The value axis covering every finite RC value and the limit, with a little room.
pub(super) fn rc_scale(values: &[f64], limit: f64) -> Scale {
    let mut finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    if limit.is_finite() {
        finite.push(limit);
    }
    let (mut low, mut high) = finite
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
            (lo.min(v), hi.max(v))
        });
    if !(low.is_finite() && high.is_finite()) {
        low = 90.0;
        high = 100.0;
    }
    if high - low < 2.0 {
        let mid = (high + low) / 2.0;
        low = mid - 1.0;
        high = mid + 1.0;
    }
    let pad = (high - low) * 0.08;
    let step = nice_step(high - low + 2.0 * pad, 4.0);
    Scale {
        low: ((low - pad) / step).floor() * step,
        high: ((high + pad) / step).ceil() * step,
        step,
    }
}

/// Decimal places needed to print ticks of `step` without rounding them away.
fn tick_decimals(step: f64) -> usize {
    (0..3)
        .find(|&d| {
            let scaled = step * 10f64.powi(d as i32);
            (scaled - scaled.round()).abs() < 1e-6
        })
        .unwrap_or(3)
}

/// The plot inside a chart area and its value scale (PDF units, y growing upwards).
struct PlotArea {
    x: f32,
    y: f32,
    w: f32,
    h: f32,
    scale: Scale,
}

impl PlotArea {
    fn to_y(&self, v: f64) -> f32 {
        let t = (v - self.scale.low) / (self.scale.high - self.scale.low);
        self.y + (t.clamp(0.0, 1.0) as f32) * self.h
    }
}

/// Grid lines and value ticks, with the axis title "RC %".
fn value_ticks(canvas: &mut Canvas, p: &PlotArea, area: &ChartArea) {
    let decimals = tick_decimals(p.scale.step);
    let ticks = ((p.scale.high - p.scale.low) / p.scale.step)
        .round()
        .clamp(1.0, 40.0) as usize;
    for i in 0..=ticks {
        let v = p.scale.low + i as f64 * p.scale.step;
        let y = p.to_y(v);
        if i > 0 {
            canvas.line((p.x, y), (p.x + p.w, y), 0.3, Ink::Band);
        }
        canvas.line((p.x - 2.5, y), (p.x, y), 0.5, Ink::Muted);
        let label = format!("{v:.decimals$}");
        canvas.text_right(
            p.x - 4.0,
            y - 2.2,
            Face::Regular,
            TICK_SIZE,
            Ink::Muted,
            &label,
        );
    }
    let baseline = area.y + area.height - 7.0;
    canvas.text(area.x, baseline, Face::Bold, TICK_SIZE, Ink::Muted, "RC %");
}

/// Test ticks along the bottom (slot i holds the i-th row of the table), numbered 1 and
/// every few tests, with the axis title.
fn test_ticks(
    canvas: &mut Canvas,
    p: &PlotArea,
    area: &ChartArea,
    n: usize,
    slot_x: &dyn Fn(usize) -> f32,
) {
    if n > 0 {
        let step = nice_step(n as f64, 8.0).max(1.0).round() as usize;
        let mut numbers = vec![1usize];
        numbers.extend(
            (1..)
                .map(|k| k * step)
                .take_while(|&k| k <= n)
                .filter(|&k| k > 1),
        );
        for number in numbers {
            let x = slot_x(number - 1);
            canvas.line((x, p.y), (x, p.y - 2.5), 0.5, Ink::Muted);
            let label = number.to_string();
            canvas.text_centre(x, p.y - 9.0, Face::Regular, TICK_SIZE, Ink::Muted, &label);
        }
    }
    let axis_label = "Test, in table order";
    let label_x = p.x + p.w / 2.0 - width(axis_label, Face::Regular, TICK_SIZE) / 2.0;
    canvas.text(
        label_x,
        area.y + 1.0,
        Face::Regular,
        TICK_SIZE,
        Ink::Muted,
        axis_label,
    );
}

/// Draws the chart of `tests` against `limit` into `area`.
pub(super) fn draw(canvas: &mut Canvas, area: ChartArea, tests: &[TestRow], limit: f64) {
    let values: Vec<f64> = tests.iter().filter_map(|t| t.rc_value).collect();
    let p = PlotArea {
        x: area.x + AXIS_LABEL_WIDTH,
        y: area.y + X_LABEL_HEIGHT,
        w: (area.width - AXIS_LABEL_WIDTH - 4.0).max(10.0),
        h: (area.height - X_LABEL_HEIGHT - LEGEND_HEIGHT).max(10.0),
        scale: rc_scale(&values, limit),
    };
    legend(canvas, p.x, area.y + area.height - 7.0, limit);
    value_ticks(canvas, &p, &area);

    // Axes.
    canvas.line((p.x, p.y), (p.x, p.y + p.h), 0.6, Ink::Muted);
    canvas.line((p.x, p.y), (p.x + p.w, p.y), 0.6, Ink::Muted);

    let n = tests.len();
    let slot = p.w / n.max(1) as f32;
    let slot_x = |i: usize| p.x + (i as f32 + 0.5) * slot;
    test_ticks(canvas, &p, &area, n, &slot_x);

    // Limit line.
    if limit.is_finite() {
        let y = p.to_y(limit);
        canvas.dashed_line((p.x, y), (p.x + p.w, y), 0.9, Ink::Accent, &[3.0, 2.0]);
    }

    // One dot per test that has a value.
    let radius = (slot * 0.38).clamp(1.1, 2.1);
    for (i, test) in tests.iter().enumerate() {
        let Some(v) = test.rc_value.filter(|v| v.is_finite()) else {
            continue;
        };
        let (x, y) = (slot_x(i), p.to_y(v));
        if test.counted {
            canvas.dot(x, y, radius, Ink::Text, false);
        } else {
            canvas.dot(x, y, radius, Ink::Struck, true);
        }
    }
}

/// Key to the symbols, on one line above the plot.
fn legend(canvas: &mut Canvas, x: f32, baseline: f32, limit: f64) {
    let mut x = x + 22.0;
    let mid = baseline + 2.2;
    canvas.dot(x + 2.0, mid, 1.8, Ink::Text, false);
    x += 6.0;
    canvas.text(x, baseline, Face::Regular, TICK_SIZE, Ink::Muted, "counted");
    x += width("counted", Face::Regular, TICK_SIZE) + 9.0;
    canvas.dot(x + 2.0, mid, 1.8, Ink::Struck, true);
    x += 6.0;
    let not_counted = "not counted (superseded)";
    canvas.text(
        x,
        baseline,
        Face::Regular,
        TICK_SIZE,
        Ink::Muted,
        not_counted,
    );
    x += width(not_counted, Face::Regular, TICK_SIZE) + 9.0;
    canvas.dashed_line((x, mid), (x + 12.0, mid), 0.9, Ink::Accent, &[3.0, 2.0]);
    x += 15.0;
    let limit_label = if limit.is_finite() {
        format!("minimum RC {limit:.1} %")
    } else {
        "minimum RC not set".to_string()
    };
    canvas.text(
        x,
        baseline,
        Face::Regular,
        TICK_SIZE,
        Ink::Muted,
        &limit_label,
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_steps_are_one_two_two_and_a_half_or_five_times_ten_to_a_power() {
        // Common practice for axis ticks.
        assert_eq!(nice_step(10.0, 4.0), 2.5);
        assert_eq!(nice_step(8.0, 4.0), 2.0);
        assert_eq!(nice_step(200.0, 8.0), 25.0);
        assert_eq!(nice_step(0.4, 4.0), 0.1);
        assert_eq!(nice_step(f64::NAN, 4.0), 1.0);
    }

    #[test]
    fn tick_labels_keep_the_decimals_of_the_step() {
        assert_eq!(tick_decimals(2.0), 0);
        assert_eq!(tick_decimals(2.5), 1);
        assert_eq!(tick_decimals(0.25), 2);
    }

    #[test]
    fn scale_covers_values_and_limit() {
        let s = rc_scale(&[96.2, 101.4, 98.0], 95.0);
        assert!(s.low <= 95.0 && s.high >= 101.4);
        assert!(s.step > 0.0);
        let ticks = (s.high - s.low) / s.step;
        assert!((ticks - ticks.round()).abs() < 1e-9);
    }

    #[test]
    fn scale_survives_no_values_and_non_finite_input() {
        let s = rc_scale(&[f64::NAN, f64::INFINITY], f64::NAN);
        assert!(s.low < s.high && s.low.is_finite() && s.high.is_finite());
        let flat = rc_scale(&[97.0, 97.0], 97.0);
        assert!(flat.high - flat.low >= 2.0);
    }

    #[test]
    fn voided_tests_are_not_plotted_and_superseded_ones_are_hollow() {
        let tests = vec![
            TestRow {
                rc_value: Some(97.0),
                counted: true,
                ..TestRow::default()
            },
            TestRow {
                rc_value: None,
                counted: false,
                ..TestRow::default()
            },
            TestRow {
                rc_value: Some(93.0),
                counted: false,
                ..TestRow::default()
            },
        ];
        let mut with = Canvas::page();
        draw(
            &mut with,
            ChartArea {
                x: 0.0,
                y: 0.0,
                width: 300.0,
                height: 120.0,
            },
            &tests,
            95.0,
        );
        let mut without = Canvas::page();
        draw(
            &mut without,
            ChartArea {
                x: 0.0,
                y: 0.0,
                width: 300.0,
                height: 120.0,
            },
            &[],
            95.0,
        );
        let polygons = |c: Canvas| {
            c.into_ops()
                .iter()
                .filter(|o| matches!(o, printpdf::Op::DrawPolygon { .. }))
                .count()
        };
        // Two legend symbols always; then one dot for each test with a value.
        assert_eq!(polygons(without), 2);
        assert_eq!(polygons(with), 4);
    }
}
