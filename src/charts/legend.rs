//! A legend laid out as a flowing row of swatches and labels that wraps to the chart width.

use super::marks::{self, Paint, Shape};
use super::palette;
use super::svg::{SvgWriter, fit_text, text_width};

/// Width of the swatch drawn before each legend label.
pub const SWATCH_WIDTH: f64 = 22.0;
const SWATCH_GAP: f64 = 6.0;
const ITEM_GAP: f64 = 16.0;

/// What a legend entry shows before its label.
#[derive(Clone, Debug, PartialEq)]
pub enum Swatch {
    /// A data marker.
    Mark {
        /// Marker outline.
        shape: Shape,
        /// Interior colour.
        fill: &'static str,
        /// Outline colour.
        stroke: &'static str,
        /// Outline width.
        stroke_width: f64,
    },
    /// A short line sample.
    Line {
        /// Line colour.
        stroke: &'static str,
        /// Dash pattern, solid when `None`.
        dash: Option<&'static str>,
        /// Line width.
        width: f64,
    },
    /// A filled box (a colour or `url(#pattern)`), optionally with a short text mark on it.
    Fill {
        /// Paint of the box.
        fill: String,
        /// Text mark and its colour.
        mark: Option<(String, &'static str)>,
    },
}

/// One legend entry.
#[derive(Clone, Debug, PartialEq)]
pub struct LegendItem {
    /// The sample drawn.
    pub swatch: Swatch,
    /// What it means.
    pub label: String,
}

/// Where each entry goes: x offset and row index, plus the number of rows.
#[derive(Clone, Debug, PartialEq)]
pub struct LegendLayout {
    /// Left edge of each entry, relative to the legend's left edge.
    pub x: Vec<f64>,
    /// Row of each entry (0 = first).
    pub row: Vec<usize>,
    /// Rows used.
    pub rows: usize,
    /// Labels, shortened where one would not fit the width.
    pub labels: Vec<String>,
}

/// Height of one legend row for `font` size.
pub fn row_height(font: f64) -> f64 {
    font * 1.75
}

/// Flows the entries left to right, wrapping before an entry that would overflow `max_width`.
pub fn layout(items: &[LegendItem], max_width: f64, font: f64) -> LegendLayout {
    let mut out = LegendLayout {
        x: Vec::with_capacity(items.len()),
        row: Vec::with_capacity(items.len()),
        rows: 0,
        labels: Vec::with_capacity(items.len()),
    };
    let label_room = (max_width - SWATCH_WIDTH - SWATCH_GAP).max(font * 3.0);
    let (mut x, mut row) = (0.0, 0usize);
    for item in items {
        let label = fit_text(&item.label, font, label_room);
        let width = SWATCH_WIDTH + SWATCH_GAP + text_width(&label, font);
        if x > 0.0 && x + width > max_width {
            x = 0.0;
            row += 1;
        }
        out.x.push(x);
        out.row.push(row);
        out.labels.push(label);
        x += width + ITEM_GAP;
    }
    out.rows = if items.is_empty() { 0 } else { row + 1 };
    out
}

/// Draws the legend across a chart `chart_width` wide, 12 px in from either side (where
/// the chart's title starts); returns its height.
pub fn draw_across(
    w: &mut SvgWriter,
    items: &[LegendItem],
    y0: f64,
    chart_width: f64,
    font: f64,
) -> f64 {
    draw(w, items, 12.0, y0, chart_width - 24.0, font)
}

/// Draws the legend with its top-left corner at (`x0`, `y0`); returns the height used.
pub fn draw(
    w: &mut SvgWriter,
    items: &[LegendItem],
    x0: f64,
    y0: f64,
    max_width: f64,
    font: f64,
) -> f64 {
    if items.is_empty() {
        return 0.0;
    }
    let placed = layout(items, max_width, font);
    let row_h = row_height(font);
    w.start("g").attr("class", "ll-legend").open();
    for (i, item) in items.iter().enumerate() {
        let x = x0 + placed.x[i];
        let mid = y0 + placed.row[i] as f64 * row_h + row_h / 2.0;
        w.start("g").attr("class", "ll-legend-item").open();
        draw_swatch(w, &item.swatch, x, mid, font);
        w.start("text")
            .num("x", x + SWATCH_WIDTH + SWATCH_GAP)
            .num("y", mid + font * 0.36)
            .num("font-size", font)
            .attr("fill", palette::INK)
            .open()
            .text(&placed.labels[i])
            .close();
        w.close();
    }
    w.close();
    placed.rows as f64 * row_h
}

fn draw_swatch(w: &mut SvgWriter, swatch: &Swatch, x: f64, mid: f64, font: f64) {
    match swatch {
        Swatch::Mark {
            shape,
            fill,
            stroke,
            stroke_width,
        } => {
            let paint = Paint {
                fill,
                stroke,
                stroke_width: *stroke_width,
            };
            let r = if *shape == Shape::Crosshair { 4.5 } else { 4.8 };
            marks::draw(w, *shape, x + SWATCH_WIDTH / 2.0, mid, r, paint);
        }
        Swatch::Line {
            stroke,
            dash,
            width,
        } => {
            w.start("line")
                .num("x1", x)
                .num("y1", mid)
                .num("x2", x + SWATCH_WIDTH)
                .num("y2", mid)
                .attr("stroke", stroke)
                .num("stroke-width", *width);
            if let Some(dash) = dash {
                w.attr("stroke-dasharray", dash);
            }
            w.leaf();
        }
        Swatch::Fill { fill, mark } => {
            let h = font * 1.15;
            w.start("rect")
                .num("x", x)
                .num("y", mid - h / 2.0)
                .num("width", SWATCH_WIDTH)
                .num("height", h)
                .attr("fill", fill)
                .attr("stroke", palette::AXIS)
                .num("stroke-width", 0.6)
                .leaf();
            if let Some((text, ink)) = mark {
                let size = font * 0.82;
                w.start("text")
                    .num("x", x + SWATCH_WIDTH / 2.0)
                    .num("y", mid + size * 0.36)
                    .num("font-size", size)
                    .attr("font-weight", "700")
                    .attr("text-anchor", "middle")
                    .attr("fill", ink)
                    .open()
                    .text(text)
                    .close();
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn item(label: &str) -> LegendItem {
        LegendItem {
            swatch: Swatch::Line {
                stroke: "#000",
                dash: None,
                width: 1.0,
            },
            label: label.to_string(),
        }
    }

    #[test]
    fn wraps_when_the_row_is_full() {
        let items: Vec<LegendItem> = (0..6).map(|i| item(&format!("entry {i}"))).collect();
        let wide = layout(&items, 2000.0, 12.0);
        assert_eq!(wide.rows, 1);
        let narrow = layout(&items, 200.0, 12.0);
        assert!(narrow.rows >= 3, "rows {}", narrow.rows);
        for (x, label) in narrow.x.iter().zip(&narrow.labels) {
            assert!(x + SWATCH_WIDTH + SWATCH_GAP + text_width(label, 12.0) <= 200.0 + 1e-9);
        }
    }

    #[test]
    fn empty_legend_takes_no_room() {
        let mut w = SvgWriter::default();
        assert_eq!(draw(&mut w, &[], 0.0, 0.0, 100.0, 12.0), 0.0);
        assert!(w.is_empty());
    }
}
