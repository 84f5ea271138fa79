//! Pieces every chart shares: the root element, the plot area, axes with ticks and grid, and text.

use super::axis::{LinearScale, Ticks};
use super::palette;
use super::svg::{SvgWriter, text_width};

/// Font stack: the platform's UI face, with common fallbacks.
pub const FONT_FAMILY: &str =
    "system-ui, -apple-system, 'Segoe UI', Roboto, 'Noto Sans', 'DejaVu Sans', sans-serif";

/// The rectangle data is drawn in, in viewBox units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Plot {
    /// Left edge.
    pub left: f64,
    /// Top edge.
    pub top: f64,
    /// Right edge.
    pub right: f64,
    /// Bottom edge.
    pub bottom: f64,
}

impl Plot {
    /// Horizontal extent.
    pub fn width(&self) -> f64 {
        self.right - self.left
    }

    /// Vertical extent.
    pub fn height(&self) -> f64 {
        self.bottom - self.top
    }

    /// Horizontal centre.
    pub fn mid_x(&self) -> f64 {
        (self.left + self.right) / 2.0
    }

    /// Vertical centre.
    pub fn mid_y(&self) -> f64 {
        (self.top + self.bottom) / 2.0
    }
}

/// How a piece of text is set.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TextStyle<'a> {
    /// Font size in viewBox units.
    pub size: f64,
    /// Text colour.
    pub fill: &'a str,
    /// "start", "middle" or "end".
    pub anchor: &'a str,
    /// Bold when true.
    pub bold: bool,
    /// A paper-coloured outline behind the glyphs so text stays legible over lines and marks.
    pub halo: bool,
}

impl<'a> TextStyle<'a> {
    /// Plain ink text, left-anchored.
    pub fn new(size: f64) -> Self {
        Self {
            size,
            fill: palette::INK,
            anchor: "start",
            bold: false,
            halo: false,
        }
    }

    /// Same style with another anchor.
    pub fn anchor(mut self, anchor: &'a str) -> Self {
        self.anchor = anchor;
        self
    }

    /// Same style with another colour.
    pub fn fill(mut self, fill: &'a str) -> Self {
        self.fill = fill;
        self
    }

    /// Same style, bold.
    pub fn bold(mut self) -> Self {
        self.bold = true;
        self
    }

    /// Same style with a halo.
    pub fn halo(mut self) -> Self {
        self.halo = true;
        self
    }
}

/// Writes one line of text with its baseline at `y`.
pub fn text(w: &mut SvgWriter, x: f64, y: f64, content: &str, style: TextStyle<'_>) {
    w.start("text").num("x", x).num("y", y);
    write_text_style(w, style);
    w.open().text(content).close();
}

fn write_text_style(w: &mut SvgWriter, style: TextStyle<'_>) {
    w.num("font-size", style.size).attr("fill", style.fill);
    if style.anchor != "start" {
        w.attr("text-anchor", style.anchor);
    }
    if style.bold {
        w.attr("font-weight", "600");
    }
    if style.halo {
        w.attr("stroke", palette::PAPER)
            .num("stroke-width", 3.0)
            .attr("stroke-linejoin", "round")
            .attr("paint-order", "stroke");
    }
}

/// Opens the root `<svg>` (viewBox, 100 % width, `role="img"`), with `<title>`, `<desc>` and a paper background.
pub fn open_root(w: &mut SvgWriter, width: f64, height: f64, title: &str, desc: &str, class: &str) {
    open_root_as(w, "img", width, height, title, desc, class);
}

/// Opens the root `<svg>` of a chart whose marks are links, as `role="group"`: an image's
/// children are presentational, so links inside `role="img"` would be hidden from a screen
/// reader and from keyboard users' assistive tools (axe rule nested-interactive).
pub fn open_linked_root(
    w: &mut SvgWriter,
    width: f64,
    height: f64,
    title: &str,
    desc: &str,
    class: &str,
) {
    open_root_as(w, "group", width, height, title, desc, class);
}

fn open_root_as(
    w: &mut SvgWriter,
    role: &str,
    width: f64,
    height: f64,
    title: &str,
    desc: &str,
    class: &str,
) {
    let view_box = format!("0 0 {} {}", super::svg::num(width), super::svg::num(height));
    w.start("svg")
        .attr("xmlns", "http://www.w3.org/2000/svg")
        .attr("viewBox", &view_box)
        .attr("width", "100%")
        .attr("role", role)
        .attr("aria-label", title)
        .attr("class", class)
        .attr("font-family", FONT_FAMILY)
        .open();
    w.simple("title", title);
    w.simple("desc", desc);
    w.start("rect")
        .num("width", width)
        .num("height", height)
        .attr("fill", palette::PAPER)
        .leaf();
}

/// Horizontal grid lines at each y tick.
pub fn y_grid(w: &mut SvgWriter, plot: &Plot, scale: &LinearScale, ticks: &Ticks) {
    let mut d = String::new();
    for v in &ticks.values {
        let y = scale.map(*v);
        d.push_str(&format!(
            "M{} {}H{}",
            super::svg::num(plot.left),
            super::svg::num(y),
            super::svg::num(plot.right)
        ));
    }
    grid_path(w, &d);
}

/// Vertical grid lines at each x tick.
pub fn x_grid(w: &mut SvgWriter, plot: &Plot, scale: &LinearScale, ticks: &Ticks) {
    let mut d = String::new();
    for v in &ticks.values {
        let x = scale.map(*v);
        d.push_str(&format!(
            "M{} {}V{}",
            super::svg::num(x),
            super::svg::num(plot.top),
            super::svg::num(plot.bottom)
        ));
    }
    grid_path(w, &d);
}

fn grid_path(w: &mut SvgWriter, d: &str) {
    if d.is_empty() {
        return;
    }
    w.start("path")
        .attr("class", "ll-grid")
        .attr("d", d)
        .attr("stroke", palette::GRID)
        .num("stroke-width", 1.0)
        .attr("fill", "none")
        .leaf();
}

/// Top of a chart's plot: room above it for the title line when there is one.
pub fn plot_top(title: &str) -> f64 {
    if title.trim().is_empty() { 14.0 } else { 40.0 }
}

/// The chart's title at its top left, cut to the chart's width (nothing when it has none).
pub fn chart_title(w: &mut SvgWriter, title: &str, font: f64, chart_width: f64) {
    if !title.trim().is_empty() {
        let heading = super::svg::fit_text(title, font * 1.1, chart_width - 24.0);
        text(w, 12.0, 24.0, &heading, TextStyle::new(font).bold());
    }
}

/// A value scale from `y_lo` up to `y_hi` over the plot's height. With `headroom`
/// (a value, the room in px it needs above it), the top is raised by up to four `step`s
/// until that value stands far enough below the plot's top. Returns the scale and its top.
pub fn y_scale_with_headroom(
    plot: &Plot,
    (y_lo, mut y_hi): (f64, f64),
    step: f64,
    headroom: Option<(f64, f64)>,
) -> (LinearScale, f64) {
    let mut y_scale = LinearScale::new((y_lo, y_hi), (plot.bottom, plot.top));
    if let Some((value, room)) = headroom {
        for _ in 0..4 {
            if y_scale.map(value) - plot.top >= room {
                break;
            }
            y_hi += step;
            y_scale = LinearScale::new((y_lo, y_hi), (plot.bottom, plot.top));
        }
    }
    (y_scale, y_hi)
}

/// Sizes used by an axis.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AxisFonts {
    /// Tick labels.
    pub tick: f64,
    /// Axis title.
    pub title: f64,
}

/// An axis line from `start`, vertical (`V`) or horizontal (`H`) to `end`, with a tick
/// mark drawn by the path data `mark` from each point, as one path.
fn axis_with_marks(
    w: &mut SvgWriter,
    start: (f64, f64),
    (direction, end): (char, f64),
    marks: impl Iterator<Item = (f64, f64)>,
    mark: &str,
) {
    use super::svg::num;
    let mut d = format!("M{} {}{direction}{}", num(start.0), num(start.1), num(end));
    for (x, y) in marks {
        d.push_str(&format!("M{} {}{mark}", num(x), num(y)));
    }
    axis_path(w, &d);
}

/// The left axis: line, ticks, tick labels and a rotated title at the chart's left edge.
pub fn y_axis(
    w: &mut SvgWriter,
    plot: &Plot,
    scale: &LinearScale,
    ticks: &Ticks,
    title: &str,
    fonts: AxisFonts,
    label: &dyn Fn(f64) -> String,
) {
    w.start("g").attr("class", "ll-axis ll-axis-y").open();
    let marks = ticks.values.iter().map(|v| (plot.left, scale.map(*v)));
    axis_with_marks(w, (plot.left, plot.top), ('V', plot.bottom), marks, "h-5");
    let style = TextStyle::new(fonts.tick).anchor("end").fill(palette::INK);
    for v in &ticks.values {
        let y = scale.map(*v) + fonts.tick * 0.35;
        text(w, plot.left - 8.0, y, &label(*v), style);
    }
    if !title.is_empty() {
        let (x, y) = (fonts.title + 1.0, plot.mid_y());
        w.start("text")
            .attr("class", "ll-axis-title")
            .num("x", x)
            .num("y", y)
            .attr(
                "transform",
                &format!("rotate(-90 {} {})", super::svg::num(x), super::svg::num(y)),
            );
        write_text_style(
            w,
            TextStyle::new(fonts.title)
                .anchor("middle")
                .fill(palette::MUTED),
        );
        w.open().text(title).close();
    }
    w.close();
}

/// The bottom axis: line, ticks, tick labels kept inside `[0, chart_width]`, and a centred title.
#[allow(clippy::too_many_arguments)]
pub fn x_axis(
    w: &mut SvgWriter,
    plot: &Plot,
    scale: &LinearScale,
    ticks: &Ticks,
    title: &str,
    fonts: AxisFonts,
    chart_width: f64,
    label: &dyn Fn(f64) -> String,
) {
    w.start("g").attr("class", "ll-axis ll-axis-x").open();
    let marks = ticks.values.iter().map(|v| (scale.map(*v), plot.bottom));
    axis_with_marks(w, (plot.left, plot.bottom), ('H', plot.right), marks, "v5");
    let y = plot.bottom + 7.0 + fonts.tick;
    for v in &ticks.values {
        let text_value = label(*v);
        let half = text_width(&text_value, fonts.tick) / 2.0;
        let x = scale
            .map(*v)
            .clamp(half + 2.0, (chart_width - half - 2.0).max(half + 2.0));
        text(
            w,
            x,
            y,
            &text_value,
            TextStyle::new(fonts.tick).anchor("middle"),
        );
    }
    if !title.is_empty() {
        let ty = y + 7.0 + fonts.title;
        text(
            w,
            plot.mid_x(),
            ty,
            title,
            TextStyle::new(fonts.title)
                .anchor("middle")
                .fill(palette::MUTED),
        );
    }
    w.close();
}

/// Space below the plot that [`x_axis`] uses for tick labels and title.
pub fn x_axis_depth(fonts: AxisFonts, has_title: bool) -> f64 {
    let ticks = 7.0 + fonts.tick;
    if has_title {
        ticks + 7.0 + fonts.title + 4.0
    } else {
        ticks + 4.0
    }
}

fn axis_path(w: &mut SvgWriter, d: &str) {
    w.start("path")
        .attr("d", d)
        .attr("stroke", palette::AXIS)
        .num("stroke-width", 1.0)
        .attr("fill", "none")
        .leaf();
}

/// A centred note in the plot, e.g. "no tests yet".
pub fn empty_note(w: &mut SvgWriter, plot: &Plot, message: &str, size: f64) {
    w.start("g").attr("class", "ll-empty").open();
    text(
        w,
        plot.mid_x(),
        plot.mid_y() + size * 0.35,
        message,
        TextStyle::new(size).anchor("middle").fill(palette::MUTED),
    );
    w.close();
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::charts::axis;

    #[test]
    fn axes_write_one_label_per_tick() {
        let plot = Plot {
            left: 50.0,
            top: 10.0,
            right: 450.0,
            bottom: 210.0,
        };
        let scale = LinearScale::new((90.0, 100.0), (plot.bottom, plot.top));
        let ticks = axis::ticks(90.0, 100.0, 5);
        let mut w = SvgWriter::default();
        w.start("svg").open();
        let fonts = AxisFonts {
            tick: 12.0,
            title: 13.0,
        };
        y_axis(&mut w, &plot, &scale, &ticks, "RC (%)", fonts, &|v| {
            axis::format_tick(v, ticks.step)
        });
        let out = w.finish();
        let doc = roxmltree::Document::parse(&out).expect("well-formed");
        let labels: Vec<&str> = doc
            .descendants()
            .filter(|n| n.has_tag_name("text"))
            .filter_map(|n| n.text())
            .collect();
        assert_eq!(labels, vec!["90", "92", "94", "96", "98", "100", "RC (%)"]);
    }
}
