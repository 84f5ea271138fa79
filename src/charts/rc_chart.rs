//! Relative compaction per test against the clause minimum: one marker per test, in test order.

use super::axis::{self, LinearScale};
use super::frame::{self, AxisFonts, Plot, TextStyle};
use super::legend::{self, LegendItem, Swatch};
use super::marks::{self, Paint, Shape};
use super::palette;
use super::placement::{self, Obstacles, Spot};
use super::svg::{self, SvgWriter, bold_text_width, fit_text, text_width};

/// Relative compaction per test against the limit (lot sheet).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RcChartInput {
    /// Heading drawn above the plot and used as the accessible name.
    pub title: String,
    /// Tests in the order they were taken.
    pub tests: Vec<RcBar>,
    /// The clause minimum, in percent.
    pub limit_pct: f64,
    /// The lot mean over counted tests, when there is one.
    pub mean_pct: Option<f64>,
}

/// One test on the lot sheet chart.
#[derive(Clone, Debug, PartialEq)]
pub struct RcBar {
    /// Test number as shown to people.
    pub label: String,
    /// Relative compaction in percent.
    pub rc_pct: f64,
    /// How the test counts.
    pub status: RcStatus,
    /// Link to the test's page.
    pub href: Option<String>,
}

/// How one test counts for acceptance.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum RcStatus {
    /// Meets the minimum.
    Pass,
    /// Below the minimum.
    Fail,
    /// Failed, then replaced for acceptance by a passing retest (stays on record).
    Superseded,
    /// Voided with a reason; out of every statistic.
    Voided,
}

impl RcStatus {
    /// Every status, in legend order.
    pub const ALL: [RcStatus; 4] = [
        RcStatus::Pass,
        RcStatus::Fail,
        RcStatus::Superseded,
        RcStatus::Voided,
    ];

    /// Words for legends and tooltips.
    pub fn label(self) -> &'static str {
        match self {
            RcStatus::Pass => "pass",
            RcStatus::Fail => "fail",
            RcStatus::Superseded => "fail, superseded by retest",
            RcStatus::Voided => "voided, not counted",
        }
    }

    /// Short token used in class names.
    pub fn code(self) -> &'static str {
        match self {
            RcStatus::Pass => "pass",
            RcStatus::Fail => "fail",
            RcStatus::Superseded => "superseded",
            RcStatus::Voided => "voided",
        }
    }

    /// Marker shape: disc, triangle, hollow triangle, cross.
    pub fn shape(self) -> Shape {
        match self {
            RcStatus::Pass => Shape::Circle,
            RcStatus::Fail | RcStatus::Superseded => Shape::TriangleDown,
            RcStatus::Voided => Shape::Cross,
        }
    }

    fn paint(self) -> Paint<'static> {
        match self {
            RcStatus::Pass => Paint {
                fill: palette::BLUE,
                stroke: palette::PAPER,
                stroke_width: 0.8,
            },
            RcStatus::Fail => Paint {
                fill: palette::VERMILLION,
                stroke: palette::PAPER,
                stroke_width: 0.8,
            },
            RcStatus::Superseded => Paint {
                fill: palette::PAPER,
                stroke: palette::VERMILLION,
                stroke_width: 1.5,
            },
            RcStatus::Voided => Paint {
                fill: "none",
                stroke: "#707070",
                stroke_width: 1.6,
            },
        }
    }
}

const WIDTH: f64 = 460.0;
const PLOT_HEIGHT: f64 = 190.0;
const FONT_TITLE: f64 = 16.0;
const FONT_TICK: f64 = 13.0;
const FONT_AXIS: f64 = 13.0;
const FONT_NOTE: f64 = 12.5;
const FONT_VALUE: f64 = 12.0;
const FONT_EMPTY: f64 = 15.0;
/// Up to this many tests the RC value is printed over each marker.
const MAX_VALUE_LABELS: usize = 15;
/// Up to this many tests a thin stem joins each marker to the limit line.
const MAX_STEMS: usize = 60;

/// Where everything of the chart goes: the plot, the y scale and a slot per test.
struct Layout {
    /// The clause minimum (none when unset) and the lot mean, as drawn.
    limit: Option<f64>,
    mean: Option<f64>,
    plot: Plot,
    y_scale: LinearScale,
    ticks: axis::Ticks,
    step: f64,
    /// Width given to each test.
    slot: f64,
    radius: f64,
    /// Whether each test's RC is printed over its marker.
    show_values: bool,
}

impl Layout {
    fn x_of(&self, i: usize) -> f64 {
        self.plot.left + (i as f64 + 0.5) * self.slot
    }
}

fn layout(input: &RcChartInput) -> Layout {
    let n = input.tests.len();
    // A minimum of 0 % (or less) is no minimum: it is what an unset limit looks like.
    let limit = Some(input.limit_pct).filter(|v| v.is_finite() && *v > 0.0);
    let mean = input.mean_pct.filter(|v| v.is_finite());
    let values: Vec<f64> = input
        .tests
        .iter()
        .map(|t| t.rc_pct)
        .filter(|v| v.is_finite())
        .collect();
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for v in values.iter().chain(limit.iter()).chain(mean.iter()) {
        lo = lo.min(*v);
        hi = hi.max(*v);
    }
    if !lo.is_finite() {
        (lo, hi) = (90.0, 100.0);
    }
    let (lo, hi) = axis::padded(lo, hi, 0.08, 4.0);
    let (y_lo, y_hi, step) = axis::nice_extent(lo, hi, 5);
    let top = frame::plot_top(&input.title);
    let plot = Plot {
        left: 54.0,
        top,
        right: WIDTH - 14.0,
        bottom: top + PLOT_HEIGHT,
    };
    let slot = plot.width() / n.max(1) as f64;
    let show_values = n <= MAX_VALUE_LABELS && slot >= 26.0;
    // Leave room above the highest marker for its value.
    let headroom = show_values
        .then(|| values.iter().copied().reduce(f64::max))
        .flatten()
        .map(|top_value| (top_value, 22.0));
    let (y_scale, y_hi) = frame::y_scale_with_headroom(&plot, (y_lo, y_hi), step, headroom);
    Layout {
        limit,
        mean,
        plot,
        y_scale,
        ticks: axis::ticks_with_step(y_lo, y_hi, step),
        step,
        slot,
        radius: (slot * 0.3).clamp(1.6, 5.0),
        show_values,
    }
}

/// The limit and mean lines, and the stems joining few enough markers to the limit.
fn draw_reference_lines(w: &mut SvgWriter, input: &RcChartInput, l: &Layout) {
    if let Some(limit) = l.limit {
        let y = l.y_scale.map(limit);
        reference_line(
            w,
            &l.plot,
            y,
            palette::VERMILLION,
            palette::LIMIT_DASH,
            "ll-limit",
        );
    }
    if let Some(mean) = l.mean {
        let y = l.y_scale.map(mean);
        reference_line(w, &l.plot, y, palette::INK, palette::MEAN_DASH, "ll-mean");
    }
    if input.tests.len() <= MAX_STEMS
        && let Some(limit) = l.limit
    {
        draw_stems(w, input, &l.y_scale, l.y_scale.map(limit), &|i| l.x_of(i));
    }
}

/// What a label must keep clear of: every marker and, when shown, its value.
fn test_obstacles(input: &RcChartInput, l: &Layout) -> Obstacles {
    let mut obstacles = Obstacles::default();
    for (i, test) in input.tests.iter().enumerate() {
        if test.rc_pct.is_finite() {
            let y = l.y_scale.map(test.rc_pct).clamp(l.plot.top, l.plot.bottom);
            obstacles.add_point((l.x_of(i), y), l.radius + 1.0);
            if l.show_values {
                obstacles.add_point((l.x_of(i), y - l.radius - 10.0), 12.0);
            }
        }
    }
    obstacles
}

/// Places of a line's label to try: at either end (the preferred side first), then
/// along it, above and below.
fn line_label_candidates(
    plot: &Plot,
    y: f64,
    width: f64,
    sides: [&'static str; 2],
    id: usize,
) -> Vec<(Spot, Option<usize>)> {
    let mut candidates = Vec::new();
    let mut above_and_below = |x: f64, anchor: &'static str| {
        for y in [y - 5.0, y + 5.0 + FONT_NOTE * 0.8] {
            candidates.push((
                placement::horizontal(x, y, width, FONT_NOTE, anchor),
                Some(id),
            ));
        }
    };
    for side in sides {
        let x = if side == "end" {
            plot.right - 4.0
        } else {
            plot.left + 6.0
        };
        above_and_below(x, side);
    }
    for fraction in [0.5, 0.25, 0.75] {
        above_and_below(plot.left + plot.width() * fraction, "middle");
    }
    candidates
}

/// The limit's and the mean's labels, where they cover the fewest markers, value labels
/// and each other.
fn draw_line_labels(w: &mut SvgWriter, l: &Layout, obstacles: &mut Obstacles) {
    let lines: Vec<(f64, String, &str, [&'static str; 2])> = l
        .limit
        .map(|v| {
            (
                l.y_scale.map(v),
                format!("minimum {} %", axis::format_number(v, 1)),
                palette::VERMILLION,
                ["end", "start"],
            )
        })
        .into_iter()
        .chain(l.mean.map(|v| {
            (
                l.y_scale.map(v),
                format!("mean {} %", axis::format_number(v, 1)),
                palette::INK,
                ["start", "end"],
            )
        }))
        .collect();
    for (id, (y, _, _, _)) in lines.iter().enumerate() {
        obstacles.add_line(id, &[(l.plot.left, *y), (l.plot.right, *y)]);
    }
    for (id, (y, label, colour, sides)) in lines.iter().enumerate() {
        let width = bold_text_width(label, FONT_NOTE);
        let candidates = line_label_candidates(&l.plot, *y, width, *sides, id);
        if let Some(spot) = placement::best(&candidates, obstacles, &l.plot) {
            obstacles.add_box(spot.area);
            let style = TextStyle::new(FONT_NOTE)
                .anchor(spot.anchor)
                .fill(colour)
                .bold()
                .halo();
            frame::text(w, spot.x, spot.y, label, style);
        }
    }
}

/// "no tests yet", where it covers the fewest of the line labels.
fn draw_empty_note(w: &mut SvgWriter, plot: &Plot, obstacles: &Obstacles) {
    let message = "no tests yet";
    let width = text_width(message, FONT_EMPTY);
    let candidates: Vec<(Spot, Option<usize>)> = [0.5, 0.3, 0.7, 0.15, 0.85]
        .iter()
        .map(|f| {
            let y = plot.top + plot.height() * f + FONT_EMPTY * 0.35;
            (
                placement::horizontal(plot.mid_x(), y, width, FONT_EMPTY, "middle"),
                None,
            )
        })
        .collect();
    if let Some(spot) = placement::best(&candidates, obstacles, plot) {
        w.start("g").attr("class", "ll-empty").open();
        let style = TextStyle::new(FONT_EMPTY)
            .anchor("middle")
            .fill(palette::MUTED);
        frame::text(w, spot.x, spot.y, message, style);
        w.close();
    }
}

/// Draws relative compaction per test against the limit, with an optional mean line and a legend.
pub fn rc_chart(input: &RcChartInput) -> String {
    let n = input.tests.len();
    let l = layout(input);
    let legend_items = legend_items(input);
    let fonts = AxisFonts {
        tick: FONT_TICK,
        title: FONT_AXIS,
    };
    let legend_top = l.plot.bottom + frame::x_axis_depth(fonts, true) + 4.0;
    let legend_layout = legend::layout(&legend_items, WIDTH - 2.0 * 12.0, FONT_NOTE);
    let height = legend_top + legend_layout.rows as f64 * legend::row_height(FONT_NOTE) + 8.0;

    let mut w = SvgWriter::with_capacity(2048 + n * 260);
    let title = if input.title.trim().is_empty() {
        "Relative compaction per test"
    } else {
        input.title.as_str()
    };
    // A dense chart draws no per-test links.
    let open = if n < DENSE_FROM && input.tests.iter().any(|t| t.href.is_some()) {
        frame::open_linked_root
    } else {
        frame::open_root
    };
    let desc = describe(input, l.limit, l.mean);
    open(&mut w, WIDTH, height, title, &desc, "ll-chart ll-rc-chart");
    frame::chart_title(&mut w, &input.title, FONT_TITLE, WIDTH);
    frame::y_grid(&mut w, &l.plot, &l.y_scale, &l.ticks);
    draw_reference_lines(&mut w, input, &l);
    let step = l.step;
    frame::y_axis(
        &mut w,
        &l.plot,
        &l.y_scale,
        &l.ticks,
        "Relative compaction (%)",
        fonts,
        &|v| axis::format_tick(v, step),
    );
    ordinal_axis(&mut w, input, &l.plot, l.slot, &|i| l.x_of(i));
    let mut obstacles = test_obstacles(input, &l);
    draw_line_labels(&mut w, &l, &mut obstacles);
    // Markers after the labels, so a label never hides a test.
    w.start("g").attr("class", "ll-tests").open();
    if n >= DENSE_FROM {
        draw_dense(&mut w, input, &l);
    }
    for (i, test) in input
        .tests
        .iter()
        .enumerate()
        .take_while(|_| n < DENSE_FROM)
    {
        let (x, slot, radius) = (l.x_of(i), l.slot, l.radius);
        draw_test(
            &mut w,
            test,
            x,
            slot,
            radius,
            &l.plot,
            &l.y_scale,
            l.show_values,
        );
    }
    w.close();
    if n == 0 {
        draw_empty_note(&mut w, &l.plot, &obstacles);
    }
    legend::draw_across(&mut w, &legend_items, legend_top, WIDTH, FONT_NOTE);
    w.finish()
}

fn describe(input: &RcChartInput, limit: Option<f64>, mean: Option<f64>) -> String {
    let n = input.tests.len();
    if n == 0 {
        return "No tests yet.".to_string();
    }
    let mut text = format!(
        "{n} test{} in order of testing",
        if n == 1 { "" } else { "s" }
    );
    let fails = input
        .tests
        .iter()
        .filter(|t| t.status == RcStatus::Fail)
        .count();
    if let Some(limit) = limit {
        text.push_str(&format!(
            "; {fails} failing against the minimum of {} %",
            axis::format_number(limit, 1)
        ));
    }
    if let Some(mean) = mean {
        text.push_str(&format!("; mean {} %", axis::format_number(mean, 1)));
    }
    text.push('.');
    text
}

fn legend_items(input: &RcChartInput) -> Vec<LegendItem> {
    RcStatus::ALL
        .iter()
        .filter(|s| input.tests.iter().any(|t| t.status == **s))
        .map(|s| {
            let paint = s.paint();
            LegendItem {
                swatch: Swatch::Mark {
                    shape: s.shape(),
                    fill: paint.fill,
                    stroke: if paint.stroke == palette::PAPER {
                        "none"
                    } else {
                        paint.stroke
                    },
                    stroke_width: paint.stroke_width,
                },
                label: s.label().to_string(),
            }
        })
        .collect()
}

fn reference_line(w: &mut SvgWriter, plot: &Plot, y: f64, colour: &str, dash: &str, class: &str) {
    w.start("line")
        .attr("class", class)
        .num("x1", plot.left)
        .num("y1", y)
        .num("x2", plot.right)
        .num("y2", y)
        .attr("stroke", colour)
        .num("stroke-width", 1.6)
        .attr("stroke-dasharray", dash)
        .leaf();
}

/// From this many tests on, each status's tests are drawn as one path of dots: a mark and
/// a tooltip per test would weigh megabytes on a lot of tens of thousands of tests.
const DENSE_FROM: usize = 2_000;

/// Every test as a dot in one path per status (its colour; the legend names them), with
/// the status's count as the path's title.
fn draw_dense(w: &mut SvgWriter, input: &RcChartInput, l: &Layout) {
    for status in RcStatus::ALL {
        let mut d = String::new();
        let mut count = 0usize;
        for (i, test) in input.tests.iter().enumerate() {
            if test.status != status || !test.rc_pct.is_finite() {
                continue;
            }
            let y = l.y_scale.map(test.rc_pct).clamp(l.plot.top, l.plot.bottom);
            d.push('M');
            svg::push_num(&mut d, l.x_of(i));
            d.push(' ');
            svg::push_num(&mut d, y);
            d.push_str("h0");
            count += 1;
        }
        if count == 0 {
            continue;
        }
        let paint = status.paint();
        let colour = if paint.fill == "none" || paint.fill == palette::PAPER {
            paint.stroke
        } else {
            paint.fill
        };
        w.start("path")
            .attr("class", &format!("ll-test-cloud ll-{}", status.code()))
            .attr("d", &d)
            .attr("fill", "none")
            .attr("stroke", colour)
            .num("stroke-width", (l.radius * 2.0).max(2.0))
            .attr("stroke-linecap", "round")
            .open();
        w.simple("title", &format!("{count} tests: {}", status.label()));
        w.close();
    }
}

fn draw_stems(
    w: &mut SvgWriter,
    input: &RcChartInput,
    y_scale: &LinearScale,
    y_limit: f64,
    x_of: &dyn Fn(usize) -> f64,
) {
    let mut d = String::new();
    for (i, test) in input.tests.iter().enumerate() {
        if test.status == RcStatus::Voided || !test.rc_pct.is_finite() {
            continue;
        }
        d.push('M');
        svg::push_num(&mut d, x_of(i));
        d.push(' ');
        svg::push_num(&mut d, y_limit);
        d.push('V');
        svg::push_num(&mut d, y_scale.map(test.rc_pct));
    }
    if !d.is_empty() {
        w.start("path")
            .attr("class", "ll-stems")
            .attr("d", &d)
            .attr("stroke", "#bdbdbd")
            .num("stroke-width", 1.0)
            .attr("fill", "none")
            .leaf();
    }
}

#[allow(clippy::too_many_arguments)]
fn draw_test(
    w: &mut SvgWriter,
    test: &RcBar,
    x: f64,
    slot: f64,
    radius: f64,
    plot: &Plot,
    y_scale: &LinearScale,
    show_value: bool,
) {
    let class = format!("ll-test ll-{}", test.status.code());
    match test.href.as_deref().and_then(svg::safe_href) {
        Some(href) => w.start("a").attr("href", href),
        None => w.start("g"),
    };
    w.attr("class", &class).open();
    let value_text = if test.rc_pct.is_finite() {
        format!("RC {} %", axis::format_number(test.rc_pct, 1))
    } else {
        "no RC value".to_string()
    };
    w.simple(
        "title",
        &format!("Test {}: {value_text}, {}", test.label, test.status.label()),
    );
    if slot >= 3.0 {
        // An invisible full-height column makes small markers easy to hit on a touch screen.
        w.start("rect")
            .num("x", x - slot / 2.0)
            .num("y", plot.top)
            .num("width", slot)
            .num("height", plot.height())
            .attr("fill", "#000")
            .num("fill-opacity", 0.0)
            .leaf();
    }
    if test.rc_pct.is_finite() {
        let y = y_scale.map(test.rc_pct).clamp(plot.top, plot.bottom);
        marks::draw(w, test.status.shape(), x, y, radius, test.status.paint());
        if show_value {
            frame::text(
                w,
                x,
                y - radius - 6.0,
                &axis::format_number(test.rc_pct, 1),
                TextStyle::new(FONT_VALUE)
                    .anchor("middle")
                    .fill(palette::MUTED)
                    .halo(),
            );
        }
    } else {
        let paint = Paint {
            fill: "none",
            stroke: palette::MUTED,
            stroke_width: 1.0,
        };
        marks::draw(
            w,
            Shape::Square,
            x,
            plot.bottom - radius - 2.0,
            radius,
            paint,
        );
    }
    w.close();
}

fn ordinal_axis(
    w: &mut SvgWriter,
    input: &RcChartInput,
    plot: &Plot,
    slot: f64,
    x_of: &dyn Fn(usize) -> f64,
) {
    const MAX_LABEL: f64 = 72.0;
    let labels: Vec<String> = input
        .tests
        .iter()
        .map(|t| fit_text(&t.label, FONT_TICK, MAX_LABEL))
        .collect();
    let widest = labels
        .iter()
        .map(|l| text_width(l, FONT_TICK))
        .fold(0.0, f64::max);
    let every = ordinal_step(slot, widest + 10.0);
    w.start("g").attr("class", "ll-axis ll-axis-x").open();
    let mut d = format!(
        "M{} {}H{}",
        svg::num(plot.left),
        svg::num(plot.bottom),
        svg::num(plot.right)
    );
    let shown: Vec<usize> = (0..labels.len()).filter(|i| i % every == 0).collect();
    for i in &shown {
        d.push_str(&format!(
            "M{} {}v5",
            svg::num(x_of(*i)),
            svg::num(plot.bottom)
        ));
    }
    w.start("path")
        .attr("d", &d)
        .attr("stroke", palette::AXIS)
        .num("stroke-width", 1.0)
        .attr("fill", "none")
        .leaf();
    for i in shown {
        let half = text_width(&labels[i], FONT_TICK) / 2.0;
        let x = x_of(i).clamp(half + 2.0, WIDTH - half - 2.0);
        frame::text(
            w,
            x,
            plot.bottom + 7.0 + FONT_TICK,
            &labels[i],
            TextStyle::new(FONT_TICK).anchor("middle"),
        );
    }
    frame::text(
        w,
        plot.mid_x(),
        plot.bottom + 14.0 + FONT_TICK + FONT_AXIS,
        "Test, in order taken",
        TextStyle::new(FONT_AXIS)
            .anchor("middle")
            .fill(palette::MUTED),
    );
    w.close();
}

/// Label every k-th test, k from 1, 2, 5, 10, 20, 50… so labels never overlap.
fn ordinal_step(slot: f64, label_room: f64) -> usize {
    if slot <= 0.0 || !slot.is_finite() {
        return 1;
    }
    let mut magnitude = 1usize;
    loop {
        for m in [1usize, 2, 5] {
            let k = m * magnitude;
            if k as f64 * slot >= label_room || k >= 1_000_000 {
                return k;
            }
        }
        magnitude *= 10;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ordinal_steps_are_nice_and_leave_room() {
        assert_eq!(ordinal_step(40.0, 30.0), 1);
        assert_eq!(ordinal_step(20.0, 30.0), 2);
        assert_eq!(ordinal_step(7.0, 30.0), 5);
        assert_eq!(ordinal_step(0.8, 30.0), 50);
        assert_eq!(ordinal_step(0.0, 30.0), 1);
    }

    #[test]
    fn every_status_has_a_distinct_shape_or_fill() {
        for (i, a) in RcStatus::ALL.iter().enumerate() {
            for b in &RcStatus::ALL[i + 1..] {
                let same_shape = a.shape() == b.shape();
                let same_fill = a.paint().fill == b.paint().fill;
                assert!(!(same_shape && same_fill), "{a:?} vs {b:?}");
            }
        }
    }
}
