//! Building pieces shared by the certificate's blocks: section headings,
//! label/value rows, bulleted paragraphs and the two-column split.

use super::canvas::{Canvas, Ink};
use super::layout::{BODY_SIZE, HEADING_HEIGHT, HEADING_SIZE, LABEL_SIZE, LINE};
use super::text::{Face, wrap_limited};

/// Most lines a single value may wrap onto before it is cut with an ellipsis.
pub(super) const MAX_VALUE_LINES: usize = 3;
/// Distance from the top of a text line to its baseline.
pub(super) const BASELINE_DROP: f32 = 7.5;
/// Gap between the two columns of a two-column block.
pub(super) const GUTTER: f32 = 18.0;

/// Label/value pairs, drawn one row each by [`label_rows`].
pub(super) type LabelRows<'a> = &'a [(&'a str, &'a str)];

/// A horizontal band of the page a block may draw in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Column {
    /// x of the left edge.
    pub x: f32,
    /// Width.
    pub width: f32,
}

impl Column {
    /// Splits the column into two equal halves separated by [`GUTTER`].
    pub(super) fn halves(self) -> (Column, Column) {
        let half = (self.width - GUTTER) / 2.0;
        (
            Column {
                x: self.x,
                width: half,
            },
            Column {
                x: self.x + half + GUTTER,
                width: half,
            },
        )
    }

    /// x of the right edge.
    pub(super) fn right(self) -> f32 {
        self.x + self.width
    }
}

/// Draws a section heading with a thin rule under it; returns its height.
pub(super) fn heading(canvas: &mut Canvas, col: Column, top: f32, title: &str) -> f32 {
    canvas.text(
        col.x,
        top - 8.5,
        Face::Bold,
        HEADING_SIZE,
        Ink::Accent,
        title,
    );
    canvas.line(
        (col.x, top - 11.5),
        (col.right(), top - 11.5),
        0.5,
        Ink::Accent,
    );
    HEADING_HEIGHT
}

/// Draws label/value rows (label muted on the left, value wrapped on the right);
/// returns their height.
pub(super) fn label_rows(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    label_width: f32,
    rows: &[(&str, &str)],
) -> f32 {
    let value_x = col.x + label_width;
    let value_width = (col.width - label_width).max(10.0);
    let mut y = top;
    for (label, value) in rows {
        let shown = if value.trim().is_empty() {
            "\u{2014}"
        } else {
            value
        };
        let lines = wrap_limited(
            shown,
            Face::Regular,
            BODY_SIZE,
            value_width,
            MAX_VALUE_LINES,
        );
        muted_label(canvas, col.x, y - BASELINE_DROP, label);
        for (i, line) in lines.iter().enumerate() {
            let baseline = y - BASELINE_DROP - i as f32 * LINE;
            canvas.text(value_x, baseline, Face::Regular, BODY_SIZE, Ink::Text, line);
        }
        y -= lines.len() as f32 * LINE;
    }
    top - y
}

/// A label in the small muted face, on `baseline`.
pub(super) fn muted_label(canvas: &mut Canvas, x: f32, baseline: f32, label: &str) {
    canvas.text(x, baseline, Face::Regular, LABEL_SIZE, Ink::Muted, label);
}

/// Label/value rows in each half of the column, side by side; returns the taller height.
pub(super) fn rows_side_by_side(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    label_width: f32,
    (left_rows, right_rows): (LabelRows<'_>, LabelRows<'_>),
) -> f32 {
    let (left, right) = col.halves();
    let a = label_rows(canvas, left, top, label_width, left_rows);
    let b = label_rows(canvas, right, top, label_width, right_rows);
    a.max(b)
}

/// Draws one bulleted paragraph per item, each wrapped to the column and cut at
/// `max_lines`; returns the height used.
pub(super) fn bullets(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    size: f32,
    line: f32,
    items: &[String],
    max_lines: usize,
) -> f32 {
    let indent = 8.0;
    let mut y = top;
    for item in items {
        let lines = wrap_limited(item, Face::Regular, size, col.width - indent, max_lines);
        canvas.text(
            col.x + 1.0,
            y - BASELINE_DROP,
            Face::Regular,
            size,
            Ink::Text,
            "\u{2022}",
        );
        for (i, text) in lines.iter().enumerate() {
            let baseline = y - BASELINE_DROP - i as f32 * line;
            canvas.text(
                col.x + indent,
                baseline,
                Face::Regular,
                size,
                Ink::Text,
                text,
            );
        }
        y -= lines.len() as f32 * line;
    }
    top - y
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn halves_share_the_width_around_the_gutter() {
        let (a, b) = Column {
            x: 40.0,
            width: 500.0,
        }
        .halves();
        assert_eq!(a.width, b.width);
        assert!((b.right() - 540.0).abs() < 1e-4);
        assert!((b.x - a.right() - GUTTER).abs() < 1e-4);
    }

    #[test]
    fn rows_grow_with_wrapped_values() {
        let col = Column {
            x: 0.0,
            width: 200.0,
        };
        let mut c = Canvas::measuring();
        let short = label_rows(&mut c, col, 500.0, 80.0, &[("Zone", "Fill")]);
        let long = label_rows(
            &mut c,
            col,
            500.0,
            80.0,
            &[(
                "Zone",
                "A long description that needs more than one line to print",
            )],
        );
        assert!((short - LINE).abs() < 1e-3);
        assert!(long > 1.5 * LINE && long < (MAX_VALUE_LINES as f32 + 0.5) * LINE);
    }
}
