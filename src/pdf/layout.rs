//! Page geometry (paper sizes, margins, the footer band) and the type scale the
//! certificate uses. All lengths are PDF points (1/72 in), origin bottom-left.

use super::model::Paper;

/// Points per millimetre.
pub(super) const PT_PER_MM: f32 = 72.0 / 25.4;

/// Left and right margin.
const SIDE_MARGIN_MM: f32 = 13.0;
/// Margin above the first line of a page.
const TOP_MARGIN_MM: f32 = 14.0;
/// Height kept free for the footer at the bottom of every page.
const FOOTER_BAND_MM: f32 = 20.0;
/// Baseline of the footer text above the bottom edge.
const FOOTER_BASELINE_MM: f32 = 10.0;

/// Body text size.
pub(super) const BODY_SIZE: f32 = 8.0;
/// Size of field labels in the information blocks.
pub(super) const LABEL_SIZE: f32 = 7.0;
/// Size of section headings.
pub(super) const HEADING_SIZE: f32 = 8.5;
/// Baseline-to-baseline distance of body lines.
pub(super) const LINE: f32 = 9.6;
/// Height of a section heading including its rule and the gap under it.
pub(super) const HEADING_HEIGHT: f32 = 15.0;
/// Vertical gap between two blocks.
pub(super) const BLOCK_GAP: f32 = 8.0;
/// Height of the running header printed on every page after the first.
pub(super) const RUNNING_HEADER_HEIGHT: f32 = 22.0;

/// Where things go on one page of the chosen paper.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct PageGeometry {
    /// Paper width.
    pub width: f32,
    /// Paper height.
    pub height: f32,
    /// x of the left edge of the text area.
    pub left: f32,
    /// x of the right edge of the text area.
    pub right: f32,
    /// y of the top of the text area.
    pub top: f32,
    /// Lowest y content may reach; the footer lives below it.
    pub bottom: f32,
    /// Baseline of the footer text.
    pub footer_baseline: f32,
}

impl PageGeometry {
    /// Geometry for a paper size.
    pub(super) fn for_paper(paper: Paper) -> Self {
        let (width_mm, height_mm) = paper_size_mm(paper);
        let width = width_mm * PT_PER_MM;
        let height = height_mm * PT_PER_MM;
        let margin = SIDE_MARGIN_MM * PT_PER_MM;
        Self {
            width,
            height,
            left: margin,
            right: width - margin,
            top: height - TOP_MARGIN_MM * PT_PER_MM,
            bottom: FOOTER_BAND_MM * PT_PER_MM,
            footer_baseline: FOOTER_BASELINE_MM * PT_PER_MM,
        }
    }

    /// Width of the text area.
    pub(super) fn content_width(&self) -> f32 {
        self.right - self.left
    }

    /// Top of the text area on a page that carries the running header.
    pub(super) fn top_below_running_header(&self) -> f32 {
        self.top - RUNNING_HEADER_HEIGHT
    }
}

/// Paper width and height in millimetres (ISO 216 A4; US Letter 8.5 × 11 in).
pub(super) fn paper_size_mm(paper: Paper) -> (f32, f32) {
    match paper {
        Paper::A4 => (210.0, 297.0),
        Paper::Letter => (215.9, 279.4),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a4_is_595_by_842_points() {
        // ISO 216: A4 = 210 × 297 mm = 595.28 × 841.89 pt.
        let g = PageGeometry::for_paper(Paper::A4);
        assert!((g.width - 595.28).abs() < 0.01);
        assert!((g.height - 841.89).abs() < 0.01);
    }

    #[test]
    fn letter_is_612_by_792_points() {
        // US Letter: 8.5 × 11 in = 612 × 792 pt.
        let g = PageGeometry::for_paper(Paper::Letter);
        assert!((g.width - 612.0).abs() < 0.01);
        assert!((g.height - 792.0).abs() < 0.01);
    }

    #[test]
    fn text_area_sits_inside_the_margins() {
        let g = PageGeometry::for_paper(Paper::A4);
        assert!(g.left > 36.0 && g.right < g.width - 36.0);
        assert!(g.bottom > g.footer_baseline && g.top < g.height);
        assert!((g.content_width() - (g.width - 2.0 * g.left)).abs() < 1e-3);
    }
}
