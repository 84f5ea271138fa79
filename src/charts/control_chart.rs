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

/// One panel as a standalone SVG.
pub fn control_panel(input: &ControlPanel) -> String {
    let mut w = SvgWriter::with_capacity(4096 + input.points.len() * 200);
    let broken = input.points.iter().filter(|p| !p.2.is_empty()).count();
    let desc = format!(
        "{} points; centre {}, upper limit {}{}; {} break a run rule",
        input.points.len(),
        num(input.centre),
        num(input.upper),
        input
            .lower
            .map(|l| format!(", lower limit {}", num(l)))
            .unwrap_or_default(),
        broken
    );
    frame::open_root(&mut w, W, H, &input.title, &desc, "chart control-chart");
    frame::text(
        &mut w,
        10.0,
        20.0,
        &input.title,
        TextStyle::new(14.0).bold(),
    );
    let p = plot();
    let mut lo = input.lower.unwrap_or(0.0).min(input.centre);
    let mut hi = input.upper;
    for (_, v, _) in &input.points {
        lo = lo.min(*v);
        hi = hi.max(*v);
    }
    let (lo, hi) = padded(lo, hi, 0.08, 0.5);
    let y = LinearScale::new((lo, hi), (p.bottom, p.top));
    let t = ticks(lo, hi, 5);
    frame::y_grid(&mut w, &p, &y, &t);
    for v in &t.values {
        frame::text(
            &mut w,
            p.left - 6.0,
            y.map(*v) + 4.0,
            &num(*v),
            TextStyle::new(11.0).anchor("end"),
        );
    }
    hline(
        &mut w,
        &p,
        y.map(input.centre),
        palette::MEAN_DASH,
        &format!("CL {}", num(input.centre)),
    );
    hline(
        &mut w,
        &p,
        y.map(input.upper),
        palette::LIMIT_DASH,
        &format!("UCL {}", num(input.upper)),
    );
    if let Some(l) = input.lower {
        hline(
            &mut w,
            &p,
            y.map(l),
            palette::LIMIT_DASH,
            &format!("LCL {}", num(l)),
        );
    }
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
    for (i, (label, v, rule)) in input.points.iter().enumerate() {
        let (cx, cy) = (x(i), y.map(*v));
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
    w.close();
    w.finish()
}

/// One curve of a family chart.
#[derive(Clone, Debug, PartialEq)]
pub struct FamilyLine {
    pub label: String,
    pub points: Vec<(f64, f64)>,
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
    if x0 > x1 {
        frame::empty_note(&mut w, &p, "no curves in this family", 13.0);
        w.close();
        return w.finish();
    }
    let (x0, x1) = padded(x0, x1, 0.05, 1.0);
    let (y0, y1) = padded(y0, y1, 0.05, 20.0);
    let xs = LinearScale::new((x0, x1), (p.left, p.right));
    let ys = LinearScale::new((y0, y1), (p.bottom, p.top));
    let (tx, ty) = (ticks(x0, x1, 6), ticks(y0, y1, 6));
    frame::y_grid(&mut w, &p, &ys, &ty);
    frame::x_grid(&mut w, &p, &xs, &tx);
    for v in &ty.values {
        frame::text(
            &mut w,
            p.left - 6.0,
            ys.map(*v) + 4.0,
            &num(*v),
            TextStyle::new(11.0).anchor("end"),
        );
    }
    for v in &tx.values {
        frame::text(
            &mut w,
            xs.map(*v),
            p.bottom + 16.0,
            &num(*v),
            TextStyle::new(11.0).anchor("middle"),
        );
    }
    frame::text(
        &mut w,
        p.mid_x(),
        height - 8.0,
        "water content, %",
        TextStyle::new(12.0).anchor("middle"),
    );
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
            frame::text(
                &mut w,
                xs.map(last.0) + 4.0,
                ys.map(last.1),
                &c.label,
                TextStyle::new(11.0),
            );
        }
    }
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
        frame::text(
            &mut w,
            cx + 8.0,
            cy - 6.0,
            label,
            TextStyle::new(11.0).bold().halo(),
        );
    }
    w.close();
    w.finish()
}
