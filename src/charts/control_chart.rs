//! Individuals and moving-range control charts: points in test order with the centre line and
//! limits drawn as given (computed in `reduction::control_chart`); a point that breaks a run rule
//! is drawn as a filled diamond with its rule in its tooltip, so colour is never the only cue.

use super::axis::{LinearScale, padded, ticks};
use super::frame::{self, Plot, TextStyle};
use super::palette;
use super::svg::{SvgWriter, num};

/// One plotted panel (the individuals or the moving ranges).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ControlPanel {
    pub title: String,
    /// (label, value, broken-rule words or empty) in order.
    pub points: Vec<(String, f64, String)>,
    pub centre: f64,
    pub upper: f64,
    /// None for a moving-range panel (its lower limit is 0 and not drawn).
    pub lower: Option<f64>,
}

const W: f64 = 720.0;
const H: f64 = 260.0;

fn plot() -> Plot {
    Plot {
        left: 56.0,
        top: 34.0,
        right: W - 90.0,
        bottom: H - 30.0,
    }
}

fn hline(w: &mut SvgWriter, p: &Plot, y: f64, dash: &str, label: &str) {
    w.start("line")
        .num("x1", p.left)
        .num("x2", p.right)
        .num("y1", y)
        .num("y2", y)
        .attr("stroke", palette::REFERENCE)
        .attr("stroke-dasharray", dash)
        .leaf();
    frame::text(w, p.right + 4.0, y + 4.0, label, TextStyle::new(11.0));
}

/// "12 points; centre 98.1, upper limit 101.3, lower limit 94.9; 1 break a run rule".
fn describe_panel(input: &ControlPanel) -> String {
    let broken = input.points.iter().filter(|p| !p.2.is_empty()).count();
    format!(
        "{} points; centre {}, upper limit {}{}; {} break a run rule",
        input.points.len(),
        num(input.centre),
        num(input.upper),
        input
            .lower
            .map(|l| format!(", lower limit {}", num(l)))
            .unwrap_or_default(),
        broken
    )
}

/// The value axis: every point and every limit in view, with its labelled grid.
fn value_axis(w: &mut SvgWriter, input: &ControlPanel, p: &Plot) -> LinearScale {
    let mut lo = input.lower.unwrap_or(0.0).min(input.centre);
    let mut hi = input.upper;
    for (_, v, _) in &input.points {
        lo = lo.min(*v);
        hi = hi.max(*v);
    }
    let (lo, hi) = padded(lo, hi, 0.08, 0.5);
    let y = LinearScale::new((lo, hi), (p.bottom, p.top));
    let t = ticks(lo, hi, 5);
    frame::y_grid(w, p, &y, &t);
    for v in &t.values {
        let style = TextStyle::new(11.0).anchor("end");
        frame::text(w, p.left - 6.0, y.map(*v) + 4.0, &num(*v), style);
    }
    y
}

/// The centre line and the control limits.
fn draw_limits(w: &mut SvgWriter, input: &ControlPanel, p: &Plot, y: &LinearScale) {
    let centre = format!("CL {}", num(input.centre));
    hline(w, p, y.map(input.centre), palette::MEAN_DASH, &centre);
    let upper = format!("UCL {}", num(input.upper));
    hline(w, p, y.map(input.upper), palette::LIMIT_DASH, &upper);
    if let Some(l) = input.lower {
        hline(
            w,
            p,
            y.map(l),
            palette::LIMIT_DASH,
            &format!("LCL {}", num(l)),
        );
    }
}

/// One point: a dot, or a diamond when it breaks a run rule (named in its tooltip).
fn draw_point(w: &mut SvgWriter, (label, v, rule): &(String, f64, String), cx: f64, cy: f64) {
    w.start("g")
        .attr("class", if rule.is_empty() { "pt" } else { "pt signal" })
        .open();
    let tip = if rule.is_empty() {
        format!("{label}: {}", num(*v))
    } else {
        format!("{label}: {} — {rule}", num(*v))
    };
    w.simple("title", &tip);
    if rule.is_empty() {
        w.start("circle")
            .num("cx", cx)
            .num("cy", cy)
            .num("r", 3.5)
            .attr("fill", palette::BLUE)
            .leaf();
    } else {
        let d = format!(
            "M{} {}L{} {}L{} {}L{} {}Z",
            num(cx),
            num(cy - 7.0),
            num(cx + 7.0),
            num(cy),
            num(cx),
            num(cy + 7.0),
            num(cx - 7.0),
            num(cy)
        );
        w.start("path")
            .attr("d", &d)
            .attr("fill", palette::VERMILLION)
            .attr("stroke", palette::INK)
            .leaf();
    }
    w.close();
}

/// One panel as a standalone SVG.
pub fn control_panel(input: &ControlPanel) -> String {
    let mut w = SvgWriter::with_capacity(4096 + input.points.len() * 200);
    let desc = describe_panel(input);
    frame::open_root(&mut w, W, H, &input.title, &desc, "chart control-chart");
    frame::text(
        &mut w,
        10.0,
        20.0,
        &input.title,
        TextStyle::new(14.0).bold(),
    );
    let p = plot();
    let y = value_axis(&mut w, input, &p);
    draw_limits(&mut w, input, &p, &y);
    let n = input.points.len().max(2) as f64;
    let x = |i: usize| p.left + (p.right - p.left) * (i as f64 + 0.5) / n;
    let path: Vec<String> = input
        .points
        .iter()
        .enumerate()
        .map(|(i, (_, v, _))| format!("{},{}", num(x(i)), num(y.map(*v))))
        .collect();
    if path.len() > 1 {
        w.start("polyline")
            .attr("points", &path.join(" "))
            .attr("fill", "none")
            .attr("stroke", palette::BLUE)
            .leaf();
    }
    for (i, point) in input.points.iter().enumerate() {
        draw_point(&mut w, point, x(i), y.map(point.1));
    }
    w.close();
    w.finish()
}

/// One curve of a family chart.
#[derive(Clone, Debug, PartialEq)]
pub struct FamilyLine {
    pub label: String,
    pub points: Vec<(f64, f64)>,
}

/// (x min, x max, y min, y max) of every curve and check; none when there are none.
fn family_extent(
    curves: &[FamilyLine],
    checks: &[(String, f64, f64)],
) -> Option<(f64, f64, f64, f64)> {
    let all = curves
        .iter()
        .flat_map(|c| c.points.iter().copied())
        .chain(checks.iter().map(|c| (c.1, c.2)));
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for (a, b) in all {
        x0 = x0.min(a);
        x1 = x1.max(a);
        y0 = y0.min(b);
        y1 = y1.max(b);
    }
    (x0 <= x1).then_some((x0, x1, y0, y1))
}

/// Grids, tick labels and the water-content title of the family chart, over `x` and
/// `y` (the scales' data ranges).
fn family_axes(
    w: &mut SvgWriter,
    p: &Plot,
    (xs, x): (&LinearScale, (f64, f64)),
    (ys, y): (&LinearScale, (f64, f64)),
    height: f64,
) {
    let (tx, ty) = (ticks(x.0, x.1, 6), ticks(y.0, y.1, 6));
    frame::y_grid(w, p, ys, &ty);
    frame::x_grid(w, p, xs, &tx);
    for v in &ty.values {
        let style = TextStyle::new(11.0).anchor("end");
        frame::text(w, p.left - 6.0, ys.map(*v) + 4.0, &num(*v), style);
    }
    for v in &tx.values {
        let style = TextStyle::new(11.0).anchor("middle");
        frame::text(w, xs.map(*v), p.bottom + 16.0, &num(*v), style);
    }
    let style = TextStyle::new(12.0).anchor("middle");
    frame::text(w, p.mid_x(), height - 8.0, "water content, %", style);
}

/// Each curve, the first solid and the others dashed, labelled at its wet end.
fn family_curves(w: &mut SvgWriter, curves: &[FamilyLine], xs: &LinearScale, ys: &LinearScale) {
    for (i, c) in curves.iter().enumerate() {
        let pts: Vec<String> = c
            .points
            .iter()
            .map(|(a, b)| format!("{},{}", num(xs.map(*a)), num(ys.map(*b))))
            .collect();
        let dash = palette::SATURATION_DASHES[i % palette::SATURATION_DASHES.len()];
        w.start("polyline")
            .attr("points", &pts.join(" "))
            .attr("fill", "none")
            .attr("stroke", palette::INK)
            .attr("stroke-dasharray", if i == 0 { "" } else { dash })
            .leaf();
        if let Some(last) = c.points.last() {
            let (x, y) = (xs.map(last.0) + 4.0, ys.map(last.1));
            frame::text(w, x, y, &c.label, TextStyle::new(11.0));
        }
    }
}

/// The one-point checks: a square each, named beside it.
fn family_checks(
    w: &mut SvgWriter,
    checks: &[(String, f64, f64)],
    xs: &LinearScale,
    ys: &LinearScale,
) {
    for (label, a, b) in checks {
        let (cx, cy) = (xs.map(*a), ys.map(*b));
        w.start("g").attr("class", "one-point").open();
        w.simple(
            "title",
            &format!("{label}: {} %, {} kg/m³", num(*a), num(*b)),
        );
        w.start("rect")
            .num("x", cx - 5.0)
            .num("y", cy - 5.0)
            .num("width", 10.0)
            .num("height", 10.0)
            .attr("fill", palette::ORANGE)
            .attr("stroke", palette::INK)
            .leaf();
        w.close();
        let style = TextStyle::new(11.0).bold().halo();
        frame::text(w, cx + 8.0, cy - 6.0, label, style);
    }
}

/// The family of curves with the one-point checks placed on it (water content %, dry density).
pub fn family_chart(title: &str, curves: &[FamilyLine], checks: &[(String, f64, f64)]) -> String {
    let mut w = SvgWriter::with_capacity(8192);
    let desc = format!(
        "{} curves of the family; {} one-point checks",
        curves.len(),
        checks.len()
    );
    let (width, height) = (720.0, 420.0);
    frame::open_root(&mut w, width, height, title, &desc, "chart family-chart");
    frame::text(&mut w, 10.0, 20.0, title, TextStyle::new(14.0).bold());
    let p = Plot {
        left: 64.0,
        top: 34.0,
        right: width - 110.0,
        bottom: height - 40.0,
    };
    let Some((x0, x1, y0, y1)) = family_extent(curves, checks) else {
        frame::empty_note(&mut w, &p, "no curves in this family", 13.0);
        w.close();
        return w.finish();
    };
    let (x0, x1) = padded(x0, x1, 0.05, 1.0);
    let (y0, y1) = padded(y0, y1, 0.05, 20.0);
    let xs = LinearScale::new((x0, x1), (p.left, p.right));
    let ys = LinearScale::new((y0, y1), (p.bottom, p.top));
    family_axes(&mut w, &p, (&xs, (x0, x1)), (&ys, (y0, y1)), height);
    family_curves(&mut w, curves, &xs, &ys);
    family_checks(&mut w, checks, &xs, &ys);
    w.close();
    w.finish()
}
