//! Marker shapes for data points; shape and fill (not colour alone) tell kinds of points apart.

use super::svg::{SvgWriter, push_num};

/// The outline of a data marker.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    /// A disc or ring.
    Circle,
    /// An upright square.
    Square,
    /// A triangle pointing down ("below").
    TriangleDown,
    /// A square on its corner.
    Diamond,
    /// A diagonal cross, drawn with strokes only.
    Cross,
    /// A ring with four ticks: a target, used for an optimum.
    Crosshair,
}

/// Fill and outline of a marker.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Paint<'a> {
    /// Interior colour, or "none".
    pub fill: &'a str,
    /// Outline colour, or "none".
    pub stroke: &'a str,
    /// Outline width.
    pub stroke_width: f64,
}

/// Draws one marker of `shape` centred on (`cx`, `cy`) with radius-like size `r`.
pub fn draw(w: &mut SvgWriter, shape: Shape, cx: f64, cy: f64, r: f64, paint: Paint<'_>) {
    match shape {
        Shape::Circle => {
            w.start("circle").num("cx", cx).num("cy", cy).num("r", r);
        }
        Shape::Square => {
            let side = r * 1.8;
            w.start("rect")
                .num("x", cx - side / 2.0)
                .num("y", cy - side / 2.0)
                .num("width", side)
                .num("height", side);
        }
        Shape::TriangleDown => {
            let d = polygon(&[
                (cx - r * 1.15, cy - r * 0.8),
                (cx + r * 1.15, cy - r * 0.8),
                (cx, cy + r * 1.2),
            ]);
            w.start("path").attr("d", &d);
        }
        Shape::Diamond => {
            let d = polygon(&[
                (cx, cy - r * 1.3),
                (cx + r * 1.05, cy),
                (cx, cy + r * 1.3),
                (cx - r * 1.05, cy),
            ]);
            w.start("path").attr("d", &d);
        }
        Shape::Cross => {
            let mut d = String::new();
            segment(&mut d, (cx - r, cy - r), (cx + r, cy + r));
            segment(&mut d, (cx + r, cy - r), (cx - r, cy + r));
            w.start("path")
                .attr("d", &d)
                .attr("fill", "none")
                .attr("stroke", paint.stroke)
                .num("stroke-width", paint.stroke_width.max(1.4))
                .attr("stroke-linecap", "round")
                .leaf();
            return;
        }
        Shape::Crosshair => {
            let mut d = String::new();
            let (inner, outer) = (r * 0.45, r * 1.7);
            segment(&mut d, (cx - outer, cy), (cx - inner, cy));
            segment(&mut d, (cx + inner, cy), (cx + outer, cy));
            segment(&mut d, (cx, cy - outer), (cx, cy - inner));
            segment(&mut d, (cx, cy + inner), (cx, cy + outer));
            w.start("circle")
                .num("cx", cx)
                .num("cy", cy)
                .num("r", r)
                .attr("fill", paint.fill)
                .attr("stroke", paint.stroke)
                .num("stroke-width", paint.stroke_width)
                .leaf();
            w.start("path")
                .attr("d", &d)
                .attr("fill", "none")
                .attr("stroke", paint.stroke)
                .num("stroke-width", paint.stroke_width)
                .leaf();
            return;
        }
    }
    w.attr("fill", paint.fill);
    if paint.stroke != "none" && paint.stroke_width > 0.0 {
        w.attr("stroke", paint.stroke)
            .num("stroke-width", paint.stroke_width)
            .attr("stroke-linejoin", "round");
    }
    w.leaf();
}

/// An SVG path through `points` in order, as a polyline (not closed).
pub fn polyline(points: &[(f64, f64)]) -> String {
    let mut d = String::with_capacity(points.len() * 14);
    for (i, (x, y)) in points.iter().enumerate() {
        d.push(if i == 0 { 'M' } else { 'L' });
        push_num(&mut d, *x);
        d.push(' ');
        push_num(&mut d, *y);
    }
    d
}

fn polygon(points: &[(f64, f64)]) -> String {
    let mut d = polyline(points);
    d.push('Z');
    d
}

fn segment(d: &mut String, a: (f64, f64), b: (f64, f64)) {
    d.push('M');
    push_num(d, a.0);
    d.push(' ');
    push_num(d, a.1);
    d.push('L');
    push_num(d, b.0);
    d.push(' ');
    push_num(d, b.1);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_shape_is_one_or_two_elements() {
        let paint = Paint {
            fill: "#000",
            stroke: "#fff",
            stroke_width: 1.0,
        };
        for (shape, tag) in [
            (Shape::Circle, "circle"),
            (Shape::Square, "rect"),
            (Shape::TriangleDown, "path"),
            (Shape::Diamond, "path"),
            (Shape::Cross, "path"),
        ] {
            let mut w = SvgWriter::default();
            w.start("g").open();
            draw(&mut w, shape, 10.0, 10.0, 4.0, paint);
            let out = w.finish();
            let doc = roxmltree::Document::parse(&out).expect("well-formed");
            let first = doc.root_element().first_element_child().expect("one mark");
            assert_eq!(first.tag_name().name(), tag, "{shape:?}");
        }
    }

    #[test]
    fn polyline_is_compact() {
        assert_eq!(polyline(&[(0.0, 1.5), (2.25, 3.0)]), "M0 1.5L2.25 3");
    }
}
