//! The compaction curve sheet: lab points, fitted curve, optimum, zero-air-voids and saturation lines,
//! and field tests plotted against the curve.

use super::Series;
use super::axis::{self, LinearScale};
use super::frame::{self, AxisFonts, Plot, TextStyle};
use super::legend::{self, LegendItem, Swatch};
use super::marks::{self, Paint, Shape};
use super::palette;
use super::placement::{self, Obstacles, Spot};
use super::svg::{self, SvgWriter, bold_text_width, fit_text, text_width};

/// Compaction curve sheet: lab points, fitted curve, MDD/OMC marker, ZAV and saturation lines, field tests.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CurveChartInput {
    /// Heading drawn above the plot and used as the accessible name.
    pub title: String,
    /// X axis title with its unit in parentheses, e.g. "Water content (%)".
    pub x_label: String,
    /// Y axis title with its unit in parentheses, e.g. "Dry density (kg/m³)".
    pub y_label: String,
    /// Lab specimens as (water content, dry density).
    pub lab_points: Vec<(f64, f64)>,
    /// The fitted curve, sampled densely enough to look smooth.
    pub fitted: Vec<(f64, f64)>,
    /// (OMC, MDD) of the fitted curve.
    pub optimum: (f64, f64),
    /// The zero-air-voids line for the stated Gs.
    pub zero_air_voids: Vec<(f64, f64)>,
    /// Lines of constant saturation, each labelled, e.g. "S = 80 %".
    pub saturation_lines: Vec<Series>,
    /// Field tests judged against this curve.
    pub field_points: Vec<FieldMark>,
    /// Annotation at the optimum, e.g. "MDD 1 985 kg/m³ at OMC 11.2 %"; when empty it is built from
    /// `optimum` and the units in the axis titles.
    pub optimum_label: String,
}

/// A field test drawn on the curve sheet.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FieldMark {
    /// Test number as shown to people.
    pub label: String,
    /// Water content.
    pub x: f64,
    /// Dry density.
    pub y: f64,
    /// Whether the test met the clause.
    pub passed: bool,
}

const WIDTH: f64 = 460.0;
const PLOT_HEIGHT: f64 = 250.0;
const FONT_TITLE: f64 = 16.0;
const FONT_TICK: f64 = 13.0;
const FONT_AXIS: f64 = 13.0;
const FONT_NOTE: f64 = 12.5;
const FONT_LINE_LABEL: f64 = 12.0;
const FONT_FIELD_LABEL: f64 = 11.0;
const ZAV_LABEL: &str = "zero air voids";
/// Up to this many field tests their numbers are written beside the markers.
const MAX_FIELD_LABELS: usize = 10;

/// The input's points that can be drawn (finite; lines sorted by water content).
struct Data<'a> {
    lab: Vec<(f64, f64)>,
    fitted: Vec<(f64, f64)>,
    zav: Vec<(f64, f64)>,
    field: Vec<&'a FieldMark>,
    optimum: Option<(f64, f64)>,
}

impl<'a> Data<'a> {
    fn of(input: &'a CurveChartInput) -> Self {
        Data {
            lab: finite_points(&input.lab_points),
            fitted: sorted_by_x(finite_points(&input.fitted)),
            zav: sorted_by_x(finite_points(&input.zero_air_voids)),
            field: input
                .field_points
                .iter()
                .filter(|f| f.x.is_finite() && f.y.is_finite())
                .collect(),
            // No curve yet arrives as (0, 0): water content and density are positive, so
            // treat it as absent.
            optimum: Some(input.optimum)
                .filter(|(x, y)| x.is_finite() && y.is_finite() && *x > 0.0 && *y > 0.0),
        }
    }

    /// What the axes must show: the points, else the fitted curve.
    fn extent(&self, y_label: &str) -> (f64, f64, f64, f64) {
        let mut fit_points: Vec<(f64, f64)> = self.lab.clone();
        fit_points.extend(self.field.iter().map(|f| (f.x, f.y)));
        fit_points.extend(self.optimum);
        if fit_points.is_empty() {
            fit_points = self.fitted.clone();
        }
        bounds(&fit_points).unwrap_or_else(|| default_extent(axis::unit_of(y_label)))
    }
}

/// The plot rectangle, its scales and ticks.
struct Axes {
    plot: Plot,
    x_scale: LinearScale,
    y_scale: LinearScale,
    x_ticks: axis::Ticks,
    y_ticks: axis::Ticks,
    x_step: f64,
    y_step: f64,
    /// Decimals of a density read off the y axis.
    y_decimals: usize,
}

fn axes(input: &CurveChartInput, data: &Data) -> Axes {
    let (x_min, x_max, y_min, y_max) = data.extent(&input.y_label);
    // Padding never pushes a non-negative quantity (water content, density) below zero.
    let floor_at_zero = |lo: f64, data_min: f64| if data_min >= 0.0 { lo.max(0.0) } else { lo };
    let (x_lo, x_hi) = axis::padded(x_min, x_max, 0.06, 2.0);
    let (x_lo, x_hi, x_step) = axis::nice_extent(floor_at_zero(x_lo, x_min), x_hi, 6);
    let y_min_span = ((y_min + y_max).abs() / 2.0 * 0.03).max(1e-6);
    let (y_lo, y_hi) = axis::padded(y_min, y_max, 0.08, y_min_span);
    let y_lo = floor_at_zero(y_lo, y_min);
    let (y_lo, y_hi, y_step) = axis::nice_extent(y_lo, y_hi, 5);

    let top = frame::plot_top(&input.title);
    let plot = Plot {
        left: 68.0,
        top,
        right: WIDTH - 16.0,
        bottom: top + PLOT_HEIGHT,
    };
    // Leave room above the optimum for its annotation.
    let headroom = data.optimum.map(|(_, mdd)| (mdd, 38.0));
    let (y_scale, y_hi) = frame::y_scale_with_headroom(&plot, (y_lo, y_hi), y_step, headroom);
    Axes {
        plot,
        x_scale: LinearScale::new((x_lo, x_hi), (plot.left, plot.right)),
        y_scale,
        x_ticks: axis::ticks_with_step(x_lo, x_hi, x_step),
        y_ticks: axis::ticks_with_step(y_lo, y_hi, y_step),
        x_step,
        y_step,
        y_decimals: density_decimals(y_max.max(y_min.abs())),
    }
}

/// The units of the two axes, as their titles give them.
#[derive(Clone, Copy)]
struct Units<'a> {
    x: &'a str,
    y: &'a str,
    y_decimals: usize,
}

impl Units<'_> {
    /// "water content 11.2 %, dry density 1 985 kg/m³".
    fn point(&self, x: f64, y: f64) -> String {
        format!(
            "water content {}{}, dry density {}{}",
            axis::format_number(x, 1),
            spaced_unit(self.x),
            axis::format_number(y, self.y_decimals),
            spaced_unit(self.y)
        )
    }
}

/// The annotation at the optimum: the input's, else MDD and OMC with their units.
fn optimum_text(input: &CurveChartInput, optimum: Option<(f64, f64)>, u: Units) -> Option<String> {
    optimum.map(|(omc, mdd)| {
        if input.optimum_label.trim().is_empty() {
            format!(
                "MDD {}{} at OMC {}{}",
                axis::format_number(mdd, u.y_decimals),
                spaced_unit(u.y),
                axis::format_number(omc, 1),
                spaced_unit(u.x)
            )
        } else {
            input.optimum_label.clone()
        }
    })
}

/// Every point and line in viewBox units.
struct Pixels {
    saturation: Vec<Vec<(f64, f64)>>,
    zav: Vec<(f64, f64)>,
    fitted: Vec<(f64, f64)>,
    lab: Vec<(f64, f64)>,
    field: Vec<(f64, f64)>,
    optimum: Option<(f64, f64)>,
}

fn pixels(input: &CurveChartInput, data: &Data, a: &Axes) -> Pixels {
    let to_px = |p: &(f64, f64)| (a.x_scale.map(p.0), a.y_scale.map(p.1));
    Pixels {
        saturation: input
            .saturation_lines
            .iter()
            .map(|series| {
                sorted_by_x(finite_points(&series.points))
                    .iter()
                    .map(to_px)
                    .collect()
            })
            .collect(),
        zav: data.zav.iter().map(to_px).collect(),
        fitted: data.fitted.iter().map(to_px).collect(),
        lab: data.lab.iter().map(to_px).collect(),
        field: data.field.iter().map(|f| to_px(&(f.x, f.y))).collect(),
        optimum: data.optimum.map(|p| to_px(&p)),
    }
}

/// Where the labels go, each kept clear of the data and of the labels placed before it.
struct Labels {
    field: Vec<Spot>,
    annotation: Option<Spot>,
    lines: Vec<(Spot, String)>,
}

fn place_labels(
    input: &CurveChartInput,
    data: &Data,
    px: &Pixels,
    plot: &Plot,
    optimum_text: Option<&str>,
) -> Labels {
    // Line ids: saturation lines 0.., ZAV, fitted curve.
    let zav_id = px.saturation.len();
    let mut obstacles = Obstacles::default();
    for p in &px.lab {
        obstacles.add_point(*p, 5.0);
    }
    for p in &px.field {
        obstacles.add_point(*p, 5.5);
    }
    if let Some(p) = px.optimum {
        obstacles.add_point(p, 9.0);
    }
    for (i, pts) in px.saturation.iter().enumerate() {
        obstacles.add_line(i, pts);
    }
    obstacles.add_line(zav_id, &px.zav);
    obstacles.add_line(zav_id + 1, &px.fitted);
    let mut field = Vec::new();
    if data.field.len() <= MAX_FIELD_LABELS {
        for (f, p) in data.field.iter().zip(&px.field) {
            if f.label.is_empty() {
                continue;
            }
            let text = fit_text(&f.label, FONT_FIELD_LABEL, 60.0);
            let width = text_width(&text, FONT_FIELD_LABEL);
            let spot =
                placement::horizontal(p.0 + 7.0, p.1 + 3.8, width, FONT_FIELD_LABEL, "start");
            obstacles.add_box(spot.area);
            field.push(spot);
        }
    }
    let annotation = match (px.optimum, optimum_text) {
        (Some(p), Some(text)) => place_annotation(plot, p, text, &mut obstacles),
        _ => None,
    };
    let mut lines: Vec<(Spot, String)> = Vec::new();
    for (i, pts) in px.saturation.iter().enumerate() {
        let label = input.saturation_lines[i].label.trim();
        if let Some(spot) = place_line_label(plot, pts, i, label, &mut obstacles) {
            lines.push((spot, label.to_string()));
        }
    }
    if let Some(spot) = place_line_label(plot, &px.zav, zav_id, ZAV_LABEL, &mut obstacles) {
        lines.push((spot, ZAV_LABEL.to_string()));
    }
    Labels {
        field,
        annotation,
        lines,
    }
}

/// Opens the sheet: root, the plot's clip path, the heading and the grids.
fn open_sheet(w: &mut SvgWriter, input: &CurveChartInput, a: &Axes, clip_id: &str) {
    w.start("defs").open();
    w.start("clipPath").attr("id", clip_id).open();
    w.start("rect")
        .num("x", a.plot.left)
        .num("y", a.plot.top)
        .num("width", a.plot.width())
        .num("height", a.plot.height())
        .leaf();
    w.close().close();
    frame::chart_title(w, &input.title, FONT_TITLE, WIDTH);
    frame::y_grid(w, &a.plot, &a.y_scale, &a.y_ticks);
    frame::x_grid(w, &a.plot, &a.x_scale, &a.x_ticks);
}

/// The saturation lines, the zero-air-voids line and the fitted curve, clipped to the plot.
fn draw_lines(w: &mut SvgWriter, px: &Pixels, clip_id: &str) {
    w.start("g")
        .attr("class", "ll-lines")
        .attr("clip-path", &format!("url(#{clip_id})"))
        .attr("fill", "none")
        .open();
    for (i, pts) in px.saturation.iter().enumerate() {
        let dash = palette::SATURATION_DASHES[i % palette::SATURATION_DASHES.len()];
        line(w, pts, palette::REFERENCE, 1.1, Some(dash), "ll-saturation");
    }
    line(
        w,
        &px.zav,
        palette::INK,
        1.5,
        Some(palette::ZAV_DASH),
        "ll-zav",
    );
    line(w, &px.fitted, palette::BLUE, 2.2, None, "ll-fitted");
    w.close();
}

/// The optimum's crosshair, the line labels and the optimum's annotation.
fn draw_annotations(
    w: &mut SvgWriter,
    plot: &Plot,
    px: &Pixels,
    labels: &Labels,
    optimum_text: Option<&str>,
) {
    if let Some(p) = px.optimum {
        draw_crosshair(w, plot, p);
    }
    w.start("g").attr("class", "ll-line-labels").open();
    for (spot, label) in &labels.lines {
        spot_text(w, spot, label, FONT_LINE_LABEL, false);
    }
    w.close();
    if let (Some(spot), Some(text)) = (&labels.annotation, optimum_text) {
        w.start("g").attr("class", "ll-optimum-label").open();
        let text = fit_text(text, FONT_NOTE, plot.width() - 8.0);
        spot_text(w, spot, &text, FONT_NOTE, true);
        w.close();
    }
}

fn draw_lab_points(w: &mut SvgWriter, data: &Data, px: &Pixels, u: Units) {
    w.start("g").attr("class", "ll-lab-points").open();
    for ((x, y), p) in data.lab.iter().zip(&px.lab) {
        w.start("g").attr("class", "ll-lab").open();
        w.simple("title", &format!("Lab specimen: {}", u.point(*x, *y)));
        let paint = Paint {
            fill: palette::PAPER,
            stroke: palette::INK,
            stroke_width: 1.6,
        };
        marks::draw(w, Shape::Circle, p.0, p.1, 4.2, paint);
        w.close();
    }
    w.close();
}

/// The field tests' markers, and their numbers where there are few enough.
fn draw_field_points(w: &mut SvgWriter, data: &Data, px: &Pixels, labels: &Labels, u: Units) {
    w.start("g").attr("class", "ll-field-points").open();
    for (mark, p) in data.field.iter().zip(&px.field) {
        let (shape, paint, verdict, class) = field_style(mark.passed);
        w.start("g").attr("class", class).open();
        let title = format!("{}: {}, {verdict}", mark.label, u.point(mark.x, mark.y));
        w.simple("title", &title);
        marks::draw(w, shape, p.0, p.1, 4.6, paint);
        w.close();
    }
    w.close();
    if labels.field.is_empty() {
        return;
    }
    w.start("g").attr("class", "ll-field-labels").open();
    let named = data.field.iter().filter(|f| !f.label.is_empty());
    for (spot, mark) in labels.field.iter().zip(named) {
        let text = fit_text(&mark.label, FONT_FIELD_LABEL, 60.0);
        let style = TextStyle::new(FONT_FIELD_LABEL).fill(palette::MUTED).halo();
        frame::text(w, spot.x, spot.y, &text, style);
    }
    w.close();
}

fn draw_axes(w: &mut SvgWriter, input: &CurveChartInput, a: &Axes, fonts: AxisFonts) {
    let (x_step, y_step) = (a.x_step, a.y_step);
    frame::y_axis(
        w,
        &a.plot,
        &a.y_scale,
        &a.y_ticks,
        &input.y_label,
        fonts,
        &|v| axis::format_tick(v, y_step),
    );
    frame::x_axis(
        w,
        &a.plot,
        &a.x_scale,
        &a.x_ticks,
        &input.x_label,
        fonts,
        WIDTH,
        &|v| axis::format_tick(v, x_step),
    );
}

/// Draws the compaction curve sheet.
pub fn curve_chart(input: &CurveChartInput) -> String {
    let data = Data::of(input);
    let a = axes(input, &data);
    let units = Units {
        x: non_empty_or(axis::unit_of(&input.x_label), "%"),
        y: axis::unit_of(&input.y_label),
        y_decimals: a.y_decimals,
    };
    let fonts = AxisFonts {
        tick: FONT_TICK,
        title: FONT_AXIS,
    };
    let legend_items = legend_items(Shown {
        lab: !data.lab.is_empty(),
        fitted: data.fitted.len() >= 2,
        optimum: data.optimum.is_some(),
        zav: data.zav.len() >= 2,
        field_pass: data.field.iter().any(|f| f.passed),
        field_fail: data.field.iter().any(|f| !f.passed),
    });
    let legend_top = a.plot.bottom + frame::x_axis_depth(fonts, true) + 4.0;
    let legend_rows = legend::layout(&legend_items, WIDTH - 24.0, FONT_NOTE).rows;
    let height = legend_top + legend_rows as f64 * legend::row_height(FONT_NOTE) + 8.0;

    let title = if input.title.trim().is_empty() {
        "Compaction curve"
    } else {
        input.title.as_str()
    };
    let optimum_text = optimum_text(input, data.optimum, units);
    let desc = describe(data.lab.len(), optimum_text.as_deref(), &data.field);
    let seed = format!(
        "{title}|{}|{}|{}",
        data.lab.len(),
        data.field.len(),
        data.fitted.len()
    );
    let clip_id = format!("{}-plot", svg::id_prefix("c", &seed));

    let px = pixels(input, &data, &a);
    let labels = place_labels(input, &data, &px, &a.plot, optimum_text.as_deref());
    let points = data.fitted.len() + data.lab.len() + data.field.len();
    let mut w = SvgWriter::with_capacity(8192 + 64 * points);
    frame::open_root(
        &mut w,
        WIDTH,
        height,
        title,
        &desc,
        "ll-chart ll-curve-chart",
    );
    open_sheet(&mut w, input, &a, &clip_id);
    draw_lines(&mut w, &px, &clip_id);
    draw_annotations(&mut w, &a.plot, &px, &labels, optimum_text.as_deref());
    // Markers last, so nothing is ever drawn over data.
    draw_lab_points(&mut w, &data, &px, units);
    draw_field_points(&mut w, &data, &px, &labels, units);
    draw_axes(&mut w, input, &a, fonts);
    if data.lab.is_empty() && data.field.is_empty() {
        frame::empty_note(&mut w, &a.plot, "no lab points yet", 15.0);
    }
    legend::draw_across(&mut w, &legend_items, legend_top, WIDTH, FONT_NOTE);
    w.finish()
}

fn field_style(passed: bool) -> (Shape, Paint<'static>, &'static str, &'static str) {
    if passed {
        (
            Shape::Square,
            Paint {
                fill: palette::BLUISH_GREEN,
                stroke: palette::INK,
                stroke_width: 0.9,
            },
            "pass",
            "ll-field ll-pass",
        )
    } else {
        (
            Shape::TriangleDown,
            Paint {
                fill: palette::VERMILLION,
                stroke: palette::INK,
                stroke_width: 0.9,
            },
            "fail",
            "ll-field ll-fail",
        )
    }
}

/// Which kinds of things the chart draws, so the legend lists only those.
#[derive(Clone, Copy)]
struct Shown {
    lab: bool,
    fitted: bool,
    optimum: bool,
    zav: bool,
    field_pass: bool,
    field_fail: bool,
}

fn legend_items(shown: Shown) -> Vec<LegendItem> {
    let mut items = Vec::new();
    if shown.lab {
        items.push(LegendItem {
            swatch: Swatch::Mark {
                shape: Shape::Circle,
                fill: palette::PAPER,
                stroke: palette::INK,
                stroke_width: 1.6,
            },
            label: "lab specimen".to_string(),
        });
    }
    if shown.fitted {
        items.push(LegendItem {
            swatch: Swatch::Line {
                stroke: palette::BLUE,
                dash: None,
                width: 2.2,
            },
            label: "fitted curve".to_string(),
        });
    }
    if shown.optimum {
        items.push(LegendItem {
            swatch: Swatch::Mark {
                shape: Shape::Crosshair,
                fill: "none",
                stroke: palette::INK,
                stroke_width: 1.3,
            },
            label: "optimum".to_string(),
        });
    }
    if shown.zav {
        items.push(LegendItem {
            swatch: Swatch::Line {
                stroke: palette::INK,
                dash: Some(palette::ZAV_DASH),
                width: 1.5,
            },
            label: "zero air voids".to_string(),
        });
    }
    for (present, passed) in [(shown.field_pass, true), (shown.field_fail, false)] {
        if !present {
            continue;
        }
        let (shape, paint, verdict, _) = field_style(passed);
        items.push(LegendItem {
            swatch: Swatch::Mark {
                shape,
                fill: paint.fill,
                stroke: paint.stroke,
                stroke_width: paint.stroke_width,
            },
            label: format!("field test, {verdict}"),
        });
    }
    items
}

fn describe(lab: usize, optimum: Option<&str>, field: &[&FieldMark]) -> String {
    let mut text = format!(
        "Compaction curve from {lab} lab specimen{}",
        if lab == 1 { "" } else { "s" }
    );
    if let Some(optimum) = optimum {
        text.push_str(&format!(", {optimum}"));
    }
    let failing = field.iter().filter(|f| !f.passed).count();
    text.push_str(&format!(
        "; {} field test{}, {failing} failing.",
        field.len(),
        if field.len() == 1 { "" } else { "s" }
    ));
    text
}

/// Guide lines from the optimum to both axes and a crosshair on it.
fn draw_crosshair(w: &mut SvgWriter, plot: &Plot, (x, y): (f64, f64)) {
    w.start("g").attr("class", "ll-optimum").open();
    let mut d = String::new();
    d.push('M');
    svg::push_num(&mut d, plot.left);
    d.push(' ');
    svg::push_num(&mut d, y);
    d.push('H');
    svg::push_num(&mut d, x);
    d.push('V');
    svg::push_num(&mut d, plot.bottom);
    w.start("path")
        .attr("d", &d)
        .attr("fill", "none")
        .attr("stroke", palette::MUTED)
        .num("stroke-width", 1.0)
        .attr("stroke-dasharray", palette::GUIDE_DASH)
        .leaf();
    let paint = Paint {
        fill: "none",
        stroke: palette::INK,
        stroke_width: 1.4,
    };
    marks::draw(w, Shape::Crosshair, x, y, 5.5, paint);
    w.close();
}

/// Picks where the optimum annotation covers least: above, higher above, right, left, below.
fn place_annotation(
    plot: &Plot,
    (x, y): (f64, f64),
    label: &str,
    obstacles: &mut Obstacles,
) -> Option<Spot> {
    let label = fit_text(label, FONT_NOTE * 1.1, plot.width() - 8.0);
    let width = bold_text_width(&label, FONT_NOTE);
    let inside = |left: f64| {
        left.clamp(
            plot.left + 4.0,
            (plot.right - 4.0 - width).max(plot.left + 4.0),
        )
    };
    let candidates: Vec<(Spot, Option<usize>)> = [
        (x - width / 2.0, y - 16.0),
        (x - width / 2.0, y - 30.0),
        (x + 14.0, y + 4.5),
        (x - 14.0 - width, y + 4.5),
        (x + 12.0, y + 24.0),
        (x - width / 2.0, y + 30.0),
    ]
    .iter()
    .map(|(left, baseline)| {
        (
            placement::horizontal(inside(*left), *baseline, width, FONT_NOTE, "start"),
            None,
        )
    })
    .collect();
    let spot = placement::best(&candidates, obstacles, plot)?;
    obstacles.add_box(spot.area);
    Some(spot)
}

/// Picks a spot near a line's visible end for its label: beside it, or along it.
fn place_line_label(
    plot: &Plot,
    pts: &[(f64, f64)],
    id: usize,
    label: &str,
    obstacles: &mut Obstacles,
) -> Option<Spot> {
    if label.is_empty() || pts.len() < 2 {
        return None;
    }
    let width = text_width(label, FONT_LINE_LABEL);
    let size = FONT_LINE_LABEL;
    let mut candidates = Vec::new();
    for (p, angle) in placement::back_from_end(pts, plot, &[4.0, 24.0, 48.0, 76.0, 110.0, 150.0]) {
        candidates.push((
            placement::horizontal(p.0 - 6.0, p.1 + 4.0, width, size, "end"),
            Some(id),
        ));
        candidates.push((
            placement::horizontal(p.0 + 6.0, p.1 + 4.0, width, size, "start"),
            Some(id),
        ));
        if angle.abs() <= 60.0 {
            candidates.push((placement::along(p.0, p.1, angle, width, size), Some(id)));
        }
    }
    let spot = placement::best(&candidates, obstacles, plot)?;
    obstacles.add_box(spot.area);
    Some(spot)
}

/// Writes text at a chosen spot, with a halo so lines behind it stay readable.
fn spot_text(w: &mut SvgWriter, spot: &Spot, text: &str, size: f64, bold: bool) {
    w.start("text").num("x", spot.x).num("y", spot.y);
    if spot.dy != 0.0 {
        w.num("dy", spot.dy);
    }
    if spot.angle != 0.0 {
        let rotate = format!(
            "rotate({} {} {})",
            svg::num(spot.angle),
            svg::num(spot.x),
            svg::num(spot.y)
        );
        w.attr("transform", &rotate);
    }
    w.num("font-size", size).attr("fill", palette::INK);
    if spot.anchor != "start" {
        w.attr("text-anchor", spot.anchor);
    }
    if bold {
        w.attr("font-weight", "600");
    }
    w.attr("stroke", palette::PAPER)
        .num("stroke-width", 3.0)
        .attr("stroke-linejoin", "round")
        .attr("paint-order", "stroke")
        .open()
        .text(text)
        .close();
}

fn line(
    w: &mut SvgWriter,
    pts: &[(f64, f64)],
    colour: &str,
    width: f64,
    dash: Option<&str>,
    class: &str,
) {
    if pts.len() < 2 {
        return;
    }
    w.start("path")
        .attr("class", class)
        .attr("d", &marks::polyline(pts))
        .attr("stroke", colour)
        .num("stroke-width", width)
        .attr("stroke-linejoin", "round");
    if let Some(dash) = dash {
        w.attr("stroke-dasharray", dash);
    }
    w.leaf();
}

fn finite_points(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    points
        .iter()
        .copied()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect()
}

fn sorted_by_x(mut points: Vec<(f64, f64)>) -> Vec<(f64, f64)> {
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    points
}

fn bounds(points: &[(f64, f64)]) -> Option<(f64, f64, f64, f64)> {
    let first = points.first()?;
    Some(points.iter().fold(
        (first.0, first.0, first.1, first.1),
        |(x0, x1, y0, y1), (x, y)| (x0.min(*x), x1.max(*x), y0.min(*y), y1.max(*y)),
    ))
}

/// Axis extent with nothing to fit: water content 0–25 % and a usual fill density range in the y unit
/// (1 600–2 200 kg/m³, common practice).
fn default_extent(y_unit: &str) -> (f64, f64, f64, f64) {
    let unit = y_unit.to_ascii_lowercase();
    let (lo, hi) = if unit.starts_with("mg") || unit.starts_with("g/") || unit.starts_with("t/") {
        (1.6, 2.2)
    } else if unit.starts_with("kn") {
        (15.7, 21.6)
    } else if unit.starts_with("lb") || unit.starts_with("pcf") {
        (100.0, 137.0)
    } else {
        (1600.0, 2200.0)
    };
    (0.0, 25.0, lo, hi)
}

/// Decimals for a density: none for kg/m³ or lb/ft³, one for kN/m³, three for Mg/m³ (common practice).
fn density_decimals(magnitude: f64) -> usize {
    if magnitude >= 100.0 {
        0
    } else if magnitude >= 10.0 {
        1
    } else {
        3
    }
}

fn non_empty_or<'a>(value: &'a str, fallback: &'a str) -> &'a str {
    if value.is_empty() { fallback } else { value }
}

fn spaced_unit(unit: &str) -> String {
    if unit.is_empty() {
        String::new()
    } else {
        format!(" {unit}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn empty_sheet_uses_the_unit_of_the_axis() {
        assert_eq!(default_extent("kg/m³"), (0.0, 25.0, 1600.0, 2200.0));
        assert_eq!(default_extent("Mg/m³"), (0.0, 25.0, 1.6, 2.2));
        assert_eq!(default_extent("lb/ft³").2, 100.0);
    }

    #[test]
    fn density_decimals_follow_the_unit_size() {
        assert_eq!(density_decimals(1985.0), 0);
        assert_eq!(density_decimals(19.5), 1);
        assert_eq!(density_decimals(1.985), 3);
    }
}
