//! A small drawing surface that turns text, lines, boxes and dots into printpdf
//! page operations, skipping repeated font, colour and line-width settings.

use printpdf::{
    Color, Greyscale, Line, LineDashPattern, LinePoint, Op, PaintMode, PdfFontHandle, Point,
    Polygon, PolygonRing, Pt, Rect, Rgb, TextItem, WindingOrder,
};

use super::text::{Face, width, win_ansi_safe};

/// The inks of the certificate: near-black text, greys, and one accent colour.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Ink {
    /// Body text.
    Text,
    /// Field labels, axis labels and other secondary text.
    Muted,
    /// Text and strike lines of tests that do not count.
    Struck,
    /// Table rules and box outlines.
    Rule,
    /// Background of alternate table rows.
    Band,
    /// Headings, the title rule and the verdict frame.
    Accent,
    /// Light background of the verdict box and the table header.
    AccentTint,
}

impl Ink {
    fn color(self) -> Color {
        let grey = |percent: f32| {
            Color::Greyscale(Greyscale {
                percent,
                icc_profile: None,
            })
        };
        let rgb = |r: f32, g: f32, b: f32| {
            Color::Rgb(Rgb {
                r,
                g,
                b,
                icc_profile: None,
            })
        };
        match self {
            Ink::Text => grey(0.08),
            Ink::Muted => grey(0.38),
            Ink::Struck => grey(0.56),
            Ink::Rule => grey(0.62),
            Ink::Band => grey(0.955),
            Ink::Accent => rgb(0.10, 0.24, 0.38),
            Ink::AccentTint => rgb(0.925, 0.945, 0.965),
        }
    }
}

/// Collects the operations of one page (or measures a block without drawing it).
#[derive(Debug, Default)]
pub(super) struct Canvas {
    ops: Vec<Op>,
    /// When false the canvas only measures: drawing calls record nothing.
    recording: bool,
    font: Option<(Face, f32)>,
    fill: Option<Ink>,
    stroke: Option<Ink>,
    line_width: Option<f32>,
    dashed: bool,
}

/// Rounds a coordinate to 1/100 pt, which keeps the content stream short.
fn r2(v: f32) -> f32 {
    if v.is_finite() {
        (v * 100.0).round() / 100.0
    } else {
        0.0
    }
}

fn point(x: f32, y: f32) -> Point {
    Point {
        x: Pt(r2(x)),
        y: Pt(r2(y)),
    }
}

fn corner(x: f32, y: f32) -> LinePoint {
    LinePoint {
        p: point(x, y),
        bezier: false,
    }
}

fn handle(x: f32, y: f32) -> LinePoint {
    LinePoint {
        p: point(x, y),
        bezier: true,
    }
}

impl Canvas {
    /// A canvas that records operations for a page.
    pub(super) fn page() -> Self {
        Self {
            recording: true,
            ..Self::default()
        }
    }

    /// A canvas that only measures: blocks are laid out on it to learn their height.
    pub(super) fn measuring() -> Self {
        Self::default()
    }

    /// The recorded operations.
    pub(super) fn into_ops(self) -> Vec<Op> {
        self.ops
    }

    fn set_fill(&mut self, ink: Ink) {
        if self.fill != Some(ink) {
            self.ops.push(Op::SetFillColor { col: ink.color() });
            self.fill = Some(ink);
        }
    }

    fn set_stroke(&mut self, ink: Ink, line_width: f32) {
        if self.stroke != Some(ink) {
            self.ops.push(Op::SetOutlineColor { col: ink.color() });
            self.stroke = Some(ink);
        }
        if self.line_width != Some(line_width) {
            self.ops.push(Op::SetOutlineThickness {
                pt: Pt(r2(line_width)),
            });
            self.line_width = Some(line_width);
        }
    }

    fn set_dash(&mut self, dash: Option<&[f32]>) {
        match dash {
            Some(pattern) => {
                self.ops.push(Op::SetLineDashPattern {
                    dash: LineDashPattern::new(0.0, pattern),
                });
                self.dashed = true;
            }
            None if self.dashed => {
                self.ops.push(Op::SetLineDashPattern {
                    dash: LineDashPattern::solid(),
                });
                self.dashed = false;
            }
            None => {}
        }
    }

    /// Text with its left end at `x` and its baseline at `y`.
    pub(super) fn text(&mut self, x: f32, y: f32, face: Face, size: f32, ink: Ink, text: &str) {
        if !self.recording || text.is_empty() {
            return;
        }
        self.set_fill(ink);
        self.ops.push(Op::StartTextSection);
        if self.font != Some((face, size)) {
            self.ops.push(Op::SetFont {
                font: PdfFontHandle::Builtin(face.builtin()),
                size: Pt(size),
            });
            self.font = Some((face, size));
        }
        self.ops.push(Op::SetTextCursor { pos: point(x, y) });
        self.ops.push(Op::ShowText {
            items: vec![TextItem::Text(win_ansi_safe(text).into_owned())],
        });
        self.ops.push(Op::EndTextSection);
    }

    /// Text with its right end at `x_right`.
    pub(super) fn text_right(
        &mut self,
        x_right: f32,
        y: f32,
        face: Face,
        size: f32,
        ink: Ink,
        text: &str,
    ) {
        let w = width(text, face, size);
        self.text(x_right - w, y, face, size, ink, text);
    }

    /// Text centred on `x_centre`.
    pub(super) fn text_centre(
        &mut self,
        x_centre: f32,
        y: f32,
        face: Face,
        size: f32,
        ink: Ink,
        text: &str,
    ) {
        let w = width(text, face, size);
        self.text(x_centre - w / 2.0, y, face, size, ink, text);
    }

    /// A straight solid line.
    pub(super) fn line(&mut self, from: (f32, f32), to: (f32, f32), line_width: f32, ink: Ink) {
        self.stroke_path(&[from, to], line_width, ink, None);
    }

    /// A straight dashed line; `pattern` alternates dash and gap lengths.
    pub(super) fn dashed_line(
        &mut self,
        from: (f32, f32),
        to: (f32, f32),
        line_width: f32,
        ink: Ink,
        pattern: &[f32],
    ) {
        self.stroke_path(&[from, to], line_width, ink, Some(pattern));
    }

    fn stroke_path(
        &mut self,
        points: &[(f32, f32)],
        line_width: f32,
        ink: Ink,
        dash: Option<&[f32]>,
    ) {
        if !self.recording || points.len() < 2 {
            return;
        }
        self.set_stroke(ink, line_width);
        self.set_dash(dash);
        self.ops.push(Op::DrawLine {
            line: Line {
                points: points.iter().map(|&(x, y)| corner(x, y)).collect(),
                is_closed: false,
            },
        });
        if dash.is_some() {
            self.set_dash(None);
        }
    }

    /// A filled rectangle; (x, y) is its lower-left corner.
    pub(super) fn fill_rect(&mut self, x: f32, y: f32, w: f32, h: f32, ink: Ink) {
        if !self.recording {
            return;
        }
        self.set_fill(ink);
        self.ops.push(Op::DrawRectangle {
            rectangle: rect(x, y, w, h, PaintMode::Fill),
        });
    }

    /// An outlined rectangle; (x, y) is its lower-left corner.
    pub(super) fn stroke_rect(
        &mut self,
        x: f32,
        y: f32,
        w: f32,
        h: f32,
        line_width: f32,
        ink: Ink,
    ) {
        if !self.recording {
            return;
        }
        self.set_stroke(ink, line_width);
        self.set_dash(None);
        self.ops.push(Op::DrawRectangle {
            rectangle: rect(x, y, w, h, PaintMode::Stroke),
        });
    }

    /// A dot of radius `r`: filled with `ink`, or a ring in `ink` when `hollow`.
    pub(super) fn dot(&mut self, cx: f32, cy: f32, r: f32, ink: Ink, hollow: bool) {
        if !self.recording {
            return;
        }
        // Four cubic Bezier quarter arcs; 0.5523 is the usual circle constant 4(sqrt 2 - 1)/3.
        let k = 0.5523 * r;
        let points = vec![
            corner(cx + r, cy),
            handle(cx + r, cy + k),
            handle(cx + k, cy + r),
            corner(cx, cy + r),
            handle(cx - k, cy + r),
            handle(cx - r, cy + k),
            corner(cx - r, cy),
            handle(cx - r, cy - k),
            handle(cx - k, cy - r),
            corner(cx, cy - r),
            handle(cx + k, cy - r),
            handle(cx + r, cy - k),
            corner(cx + r, cy),
        ];
        let mode = if hollow {
            self.set_stroke(ink, 0.6);
            self.set_dash(None);
            PaintMode::Stroke
        } else {
            self.set_fill(ink);
            PaintMode::Fill
        };
        self.ops.push(Op::DrawPolygon {
            polygon: Polygon {
                rings: vec![PolygonRing { points }],
                mode,
                winding_order: WindingOrder::NonZero,
            },
        });
    }
}

fn rect(x: f32, y: f32, w: f32, h: f32, mode: PaintMode) -> Rect {
    Rect {
        x: Pt(r2(x)),
        y: Pt(r2(y)),
        width: Pt(r2(w)),
        height: Pt(r2(h)),
        mode: Some(mode),
        winding_order: Some(WindingOrder::NonZero),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn measuring_canvas_records_nothing() {
        let mut c = Canvas::measuring();
        c.text(10.0, 10.0, Face::Regular, 8.0, Ink::Text, "hello");
        c.line((0.0, 0.0), (10.0, 0.0), 1.0, Ink::Rule);
        assert!(c.into_ops().is_empty());
    }

    #[test]
    fn repeated_font_and_colour_are_set_once() {
        let mut c = Canvas::page();
        c.text(10.0, 10.0, Face::Regular, 8.0, Ink::Text, "a");
        c.text(10.0, 20.0, Face::Regular, 8.0, Ink::Text, "b");
        let ops = c.into_ops();
        let fonts = ops
            .iter()
            .filter(|o| matches!(o, Op::SetFont { .. }))
            .count();
        let fills = ops
            .iter()
            .filter(|o| matches!(o, Op::SetFillColor { .. }))
            .count();
        assert_eq!((fonts, fills), (1, 1));
    }

    #[test]
    fn coordinates_are_rounded_and_never_nan() {
        assert_eq!(r2(12.3456), 12.35);
        assert_eq!(r2(f32::NAN), 0.0);
    }
}
