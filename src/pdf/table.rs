//! The schedule of field density tests: one row per test, flowing over as many
//! pages as needed with the column header repeated on each. Numbers line up on
//! their decimal point; voided and superseded tests print grey with a strike line
//! through their readings, and their note stays legible.

use std::ops::Range;

use super::blocks::{Column, heading};
use super::canvas::{Canvas, Ink};
use super::layout::{HEADING_HEIGHT, PageGeometry};
use super::model::{CertificateDoc, Paper, TestRow};
use super::text::{Face, split_decimal, width, wrap, wrap_limited};

/// Size of the table's body text.
const CELL_SIZE: f32 = 7.0;
/// Size of the column titles.
const TITLE_SIZE: f32 = 6.5;
/// Size of the unit line under the column titles.
const UNIT_SIZE: f32 = 6.0;
/// Horizontal padding inside a cell.
const CELL_PAD: f32 = 3.0;
/// Height of the column header (two title lines and the unit line).
const HEADER_HEIGHT: f32 = 27.0;
/// Height of a one-line row.
pub(super) const ROW_HEIGHT: f32 = 10.0;
/// Extra height for each further wrapped line of a row.
const EXTRA_LINE: f32 = 8.0;
/// Distance from a row's top to the baseline of its first line.
const ROW_BASELINE: f32 = 7.2;
/// Most lines one cell may wrap onto; longer text is cut with an ellipsis.
const MAX_CELL_LINES: usize = 6;
/// Section heading of the schedule.
pub(super) const SCHEDULE_TITLE: &str = "Schedule of field density tests";

/// How a column's cells are placed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Align {
    /// Left-aligned, wrapped to the column.
    Left,
    /// Lined up on the decimal point.
    Decimal,
}

/// What the unit line under a column title shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Unit {
    /// Nothing.
    None,
    /// A fixed unit.
    Fixed(&'static str),
    /// The document's density unit.
    Density,
    /// The document's offset unit.
    Offset,
}

/// One column of the schedule.
struct ColumnSpec {
    title: &'static str,
    unit: Unit,
    /// Width on A4; any extra width of wider paper goes to the note column.
    width: f32,
    align: Align,
    value: fn(&TestRow) -> &str,
    /// Whether the strike line of a not-counted row runs through this column.
    struck: bool,
}

const COLUMNS: [ColumnSpec; 12] = [
    ColumnSpec {
        title: "Test",
        unit: Unit::None,
        width: 30.0,
        align: Align::Left,
        value: |t| &t.number,
        struck: true,
    },
    ColumnSpec {
        title: "Date",
        unit: Unit::None,
        width: 42.0,
        align: Align::Left,
        value: |t| &t.date,
        struck: true,
    },
    ColumnSpec {
        title: "Chainage",
        unit: Unit::None,
        width: 40.0,
        align: Align::Left,
        value: |t| &t.chainage,
        struck: true,
    },
    ColumnSpec {
        title: "Offset",
        unit: Unit::Offset,
        width: 28.0,
        align: Align::Decimal,
        value: |t| &t.offset,
        struck: true,
    },
    ColumnSpec {
        title: "Method",
        unit: Unit::None,
        width: 51.0,
        align: Align::Left,
        value: |t| &t.method,
        struck: true,
    },
    ColumnSpec {
        title: "Wet density",
        unit: Unit::Density,
        width: 30.0,
        align: Align::Decimal,
        value: |t| &t.wet_density,
        struck: true,
    },
    ColumnSpec {
        title: "Water content",
        unit: Unit::Fixed("%"),
        width: 30.0,
        align: Align::Decimal,
        value: |t| &t.water_content,
        struck: true,
    },
    ColumnSpec {
        title: "Dry density",
        unit: Unit::Density,
        width: 30.0,
        align: Align::Decimal,
        value: |t| &t.dry_density,
        struck: true,
    },
    ColumnSpec {
        title: "RC",
        unit: Unit::Fixed("%"),
        width: 28.0,
        align: Align::Decimal,
        value: |t| &t.relative_compaction,
        struck: true,
    },
    ColumnSpec {
        title: "Moisture dev.",
        unit: Unit::Fixed("% pts"),
        width: 34.0,
        align: Align::Decimal,
        value: |t| &t.moisture_deviation,
        struck: true,
    },
    ColumnSpec {
        title: "Result",
        unit: Unit::None,
        width: 43.0,
        align: Align::Left,
        value: |t| &t.result,
        struck: false,
    },
    ColumnSpec {
        title: "Note",
        unit: Unit::None,
        width: 0.0,
        align: Align::Left,
        value: |t| &t.note,
        struck: false,
    },
];

/// Column edges on the page: x of each column's left edge and its width.
fn column_edges(geometry: &PageGeometry) -> Vec<(f32, f32)> {
    let fixed: f32 = COLUMNS.iter().map(|c| c.width).sum();
    let note = (geometry.content_width() - fixed).max(40.0);
    let mut x = geometry.left;
    COLUMNS
        .iter()
        .map(|c| {
            let w = if c.width > 0.0 { c.width } else { note };
            let edge = (x, w);
            x += w;
            edge
        })
        .collect()
}

/// Rows of the schedule that fit on one page of `paper` when every row is one
/// line high (rows with wrapped notes take more room).
pub fn table_rows_per_page(paper: Paper) -> usize {
    let g = PageGeometry::for_paper(paper);
    (table_capacity(&g) / ROW_HEIGHT + 1e-3).floor() as usize
}

/// Height available for rows on a schedule page.
fn table_capacity(g: &PageGeometry) -> f32 {
    g.top_below_running_header() - HEADING_HEIGHT - HEADER_HEIGHT - g.bottom
}

/// Face and ink of a cell, from the row's standing and the column.
fn cell_style(row: &TestRow, column: usize) -> (Face, Ink) {
    let is_note = column == COLUMNS.len() - 1;
    let is_result = column == COLUMNS.len() - 2;
    if !row.counted {
        let face = if is_note {
            Face::Oblique
        } else {
            Face::Regular
        };
        return (face, Ink::Struck);
    }
    if is_result && row.result.trim().eq_ignore_ascii_case("fail") {
        return (Face::Bold, Ink::Text);
    }
    (Face::Regular, Ink::Text)
}

/// A cell ready to draw: its lines, or its two halves around the decimal point.
enum Cell {
    Lines(Vec<String>),
    Decimal { whole: String, fraction: String },
}

/// One row laid out: its cells and height.
struct LaidRow {
    cells: Vec<Cell>,
    height: f32,
}

/// Width reserved right of the decimal point in each decimal column.
fn fraction_widths(tests: &[TestRow]) -> Vec<f32> {
    COLUMNS
        .iter()
        .map(|c| {
            if c.align != Align::Decimal {
                return 0.0;
            }
            tests
                .iter()
                .map(|t| {
                    width(
                        split_decimal((c.value)(t).trim()).1,
                        Face::Regular,
                        CELL_SIZE,
                    )
                })
                .fold(0.0, f32::max)
        })
        .collect()
}

fn lay_out_row(row: &TestRow, edges: &[(f32, f32)], fractions: &[f32]) -> LaidRow {
    let mut lines_needed = 1usize;
    let cells = COLUMNS
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let text = (c.value)(row).trim();
            let inner = edges[i].1 - 2.0 * CELL_PAD;
            let (face, _) = cell_style(row, i);
            if c.align == Align::Decimal {
                let (whole, fraction) = split_decimal(text);
                let whole_room = inner - fractions[i];
                if width(whole, face, CELL_SIZE) <= whole_room
                    && width(fraction, face, CELL_SIZE) <= fractions[i] + 0.01
                {
                    return Cell::Decimal {
                        whole: whole.to_string(),
                        fraction: fraction.to_string(),
                    };
                }
            }
            let lines = wrap_limited(text, face, CELL_SIZE, inner, MAX_CELL_LINES);
            lines_needed = lines_needed.max(lines.len());
            Cell::Lines(lines)
        })
        .collect();
    LaidRow {
        cells,
        height: ROW_HEIGHT + (lines_needed - 1) as f32 * EXTRA_LINE,
    }
}

/// Splits rows of the given heights into pages holding at most `capacity` each;
/// a row taller than a page still gets a page of its own.
fn paginate(heights: &[f32], capacity: f32) -> Vec<Range<usize>> {
    let mut pages = Vec::new();
    let mut start = 0usize;
    let mut used = 0.0f32;
    for (i, &h) in heights.iter().enumerate() {
        if i > start && used + h > capacity + 1e-3 {
            pages.push(start..i);
            start = i;
            used = 0.0;
        }
        used += h;
    }
    if start < heights.len() || pages.is_empty() {
        pages.push(start..heights.len());
    }
    pages
}

/// Draws the column header with its top at `top`.
fn draw_header(canvas: &mut Canvas, doc: &CertificateDoc, edges: &[(f32, f32)], top: f32) {
    let (x0, _) = edges[0];
    let (xn, wn) = edges[edges.len() - 1];
    let right = xn + wn;
    canvas.fill_rect(
        x0,
        top - HEADER_HEIGHT,
        right - x0,
        HEADER_HEIGHT,
        Ink::AccentTint,
    );
    canvas.line(
        (x0, top - HEADER_HEIGHT),
        (right, top - HEADER_HEIGHT),
        0.8,
        Ink::Accent,
    );
    for (i, c) in COLUMNS.iter().enumerate() {
        let (x, w) = edges[i];
        let inner = w - 2.0 * CELL_PAD;
        let title = wrap(c.title, Face::Bold, TITLE_SIZE, inner);
        let unit = match c.unit {
            Unit::None => "",
            Unit::Fixed(u) => u,
            Unit::Density => doc.density_unit.as_str(),
            Unit::Offset => doc.offset_unit.as_str(),
        };
        // Titles sit on the lower of two lines, so one-line and two-line titles end level.
        let first_line = 2usize.saturating_sub(title.len().min(2));
        for (k, line) in title.iter().take(2).enumerate() {
            let baseline = top - 8.5 - (first_line + k) as f32 * 7.5;
            place(
                canvas,
                c.align,
                x,
                w,
                baseline,
                Face::Bold,
                TITLE_SIZE,
                Ink::Accent,
                line,
            );
        }
        place(
            canvas,
            c.align,
            x,
            w,
            top - 23.0,
            Face::Regular,
            UNIT_SIZE,
            Ink::Muted,
            unit,
        );
    }
}

/// Header text: left-aligned for text columns, right-aligned over numbers.
#[allow(clippy::too_many_arguments)]
fn place(
    canvas: &mut Canvas,
    align: Align,
    x: f32,
    w: f32,
    baseline: f32,
    face: Face,
    size: f32,
    ink: Ink,
    text: &str,
) {
    match align {
        Align::Left => canvas.text(x + CELL_PAD, baseline, face, size, ink, text),
        Align::Decimal => canvas.text_right(x + w - CELL_PAD, baseline, face, size, ink, text),
    }
}

/// Draws one row with its top at `top`; `band` shades it.
fn draw_row(
    canvas: &mut Canvas,
    row: &TestRow,
    laid: &LaidRow,
    edges: &[(f32, f32)],
    fractions: &[f32],
    top: f32,
    band: bool,
) {
    let (x0, _) = edges[0];
    let (xn, wn) = edges[edges.len() - 1];
    if band {
        canvas.fill_rect(x0, top - laid.height, xn + wn - x0, laid.height, Ink::Band);
    }
    let baseline = top - ROW_BASELINE;
    for (i, cell) in laid.cells.iter().enumerate() {
        let (x, w) = edges[i];
        let (face, ink) = cell_style(row, i);
        match cell {
            Cell::Decimal { whole, fraction } => {
                let point_x = x + w - CELL_PAD - fractions[i];
                canvas.text_right(point_x, baseline, face, CELL_SIZE, ink, whole);
                canvas.text(point_x, baseline, face, CELL_SIZE, ink, fraction);
            }
            Cell::Lines(lines) => {
                for (k, line) in lines.iter().enumerate() {
                    let y = baseline - k as f32 * EXTRA_LINE;
                    canvas.text(x + CELL_PAD, y, face, CELL_SIZE, ink, line);
                }
            }
        }
    }
    if !row.counted {
        let struck: Vec<&(f32, f32)> = edges
            .iter()
            .zip(COLUMNS.iter())
            .filter(|(_, c)| c.struck)
            .map(|(e, _)| e)
            .collect();
        if let (Some(first), Some(last)) = (struck.first(), struck.last()) {
            let y = baseline + 2.3;
            let from = first.0 + CELL_PAD - 0.5;
            let to = last.0 + last.1 - CELL_PAD + 0.5;
            canvas.line((from, y), (to, y), 0.55, Ink::Struck);
        }
    }
}

/// The heading line of a schedule page with the rows it shows.
fn draw_heading(
    canvas: &mut Canvas,
    geometry: &PageGeometry,
    top: f32,
    rows: &Range<usize>,
    total: usize,
    first_page: bool,
) {
    let col = Column {
        x: geometry.left,
        width: geometry.content_width(),
    };
    let title = if first_page {
        SCHEDULE_TITLE.to_string()
    } else {
        format!("{SCHEDULE_TITLE} (continued)")
    };
    heading(canvas, col, top, &title);
    let range = if total == 0 {
        "no tests".to_string()
    } else {
        format!("rows {}\u{2013}{} of {}", rows.start + 1, rows.end, total)
    };
    let legend = format!(
        "Grey struck rows are voided or superseded tests and count in no statistic \u{00B7} {range}"
    );
    canvas.text_right(
        col.right(),
        top - 8.5,
        Face::Regular,
        6.5,
        Ink::Muted,
        &legend,
    );
}

/// Lays the schedule out on as many pages as it needs, each with its own header.
pub(super) fn schedule_pages(doc: &CertificateDoc, geometry: &PageGeometry) -> Vec<Canvas> {
    let edges = column_edges(geometry);
    let fractions = fraction_widths(&doc.tests);
    let laid: Vec<LaidRow> = doc
        .tests
        .iter()
        .map(|t| lay_out_row(t, &edges, &fractions))
        .collect();
    let heights: Vec<f32> = laid.iter().map(|r| r.height).collect();
    let capacity = table_capacity(geometry);
    let table_right = edges.last().map_or(geometry.right, |(x, w)| x + w);

    paginate(&heights, capacity)
        .into_iter()
        .enumerate()
        .map(|(page_index, rows)| {
            let mut canvas = Canvas::page();
            let top = geometry.top_below_running_header();
            draw_heading(
                &mut canvas,
                geometry,
                top,
                &rows,
                doc.tests.len(),
                page_index == 0,
            );
            let header_top = top - HEADING_HEIGHT;
            draw_header(&mut canvas, doc, &edges, header_top);
            let mut y = header_top - HEADER_HEIGHT;
            if doc.tests.is_empty() {
                canvas.text(
                    geometry.left + CELL_PAD,
                    y - ROW_BASELINE - 2.0,
                    Face::Oblique,
                    CELL_SIZE + 1.0,
                    Ink::Muted,
                    "No field density tests are recorded for this lot.",
                );
                y -= ROW_HEIGHT + 4.0;
            }
            for i in rows.clone() {
                draw_row(
                    &mut canvas,
                    &doc.tests[i],
                    &laid[i],
                    &edges,
                    &fractions,
                    y,
                    i % 2 == 1,
                );
                y -= laid[i].height;
            }
            canvas.line((geometry.left, y), (table_right, y), 0.6, Ink::Rule);
            canvas
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_fill_the_text_width_on_both_papers() {
        for paper in [Paper::A4, Paper::Letter] {
            let g = PageGeometry::for_paper(paper);
            let edges = column_edges(&g);
            let (x, w) = edges[edges.len() - 1];
            assert!((x + w - g.right).abs() < 0.01, "{paper:?}");
            assert!(w >= 110.0, "note column {w} on {paper:?}");
        }
    }

    #[test]
    fn column_titles_break_only_between_words() {
        let g = PageGeometry::for_paper(Paper::A4);
        for (c, (_, w)) in COLUMNS.iter().zip(column_edges(&g)) {
            let lines = wrap(c.title, Face::Bold, TITLE_SIZE, w - 2.0 * CELL_PAD);
            assert!(lines.len() <= 2, "{}", c.title);
            assert_eq!(lines.join(" "), c.title);
        }
    }

    #[test]
    fn rows_per_page_follow_from_the_geometry() {
        // A4: 841.89 pt high; text area from 39.69 pt below the top to 56.69 pt above
        // the bottom, less running header 22, heading 15 and column header 27 pt.
        let a4: f64 = (841.89 - 39.69 - 22.0 - 15.0 - 27.0 - 56.69) / 10.0;
        assert_eq!(table_rows_per_page(Paper::A4), a4.floor() as usize);
        let letter: f64 = (792.0 - 39.69 - 22.0 - 15.0 - 27.0 - 56.69) / 10.0;
        assert_eq!(table_rows_per_page(Paper::Letter), letter.floor() as usize);
        assert!(table_rows_per_page(Paper::Letter) < table_rows_per_page(Paper::A4));
    }

    #[test]
    fn pagination_keeps_every_row_once_and_in_order() {
        let heights = vec![10.0; 25];
        let pages = paginate(&heights, 100.0);
        assert_eq!(pages, vec![0..10, 10..20, 20..25]);
        let mixed = [10.0, 18.0, 10.0, 26.0, 10.0];
        assert_eq!(paginate(&mixed, 40.0), vec![0..3, 3..5]);
        assert_eq!(paginate(&[], 100.0), vec![0..0]);
        // A row taller than a page gets its own page instead of looping.
        assert_eq!(
            paginate(&[10.0, 500.0, 10.0], 100.0),
            vec![0..1, 1..2, 2..3]
        );
    }

    #[test]
    fn long_notes_wrap_and_make_the_row_taller() {
        let g = PageGeometry::for_paper(Paper::A4);
        let edges = column_edges(&g);
        let row = TestRow {
            note: "void: the gauge failed its daily standard count twice and the reading was discarded by the QC manager".into(),
            counted: false,
            ..TestRow::default()
        };
        let fractions = fraction_widths(std::slice::from_ref(&row));
        let laid = lay_out_row(&row, &edges, &fractions);
        assert!(laid.height > ROW_HEIGHT);
        let Cell::Lines(lines) = &laid.cells[COLUMNS.len() - 1] else {
            panic!("note is a text cell");
        };
        assert_eq!(lines.join(" "), row.note);
    }

    #[test]
    fn decimals_line_up_on_the_point() {
        let rows: Vec<TestRow> = ["98.6", "101.25", "97"]
            .iter()
            .map(|rc| TestRow {
                relative_compaction: rc.to_string(),
                counted: true,
                ..TestRow::default()
            })
            .collect();
        let fractions = fraction_widths(&rows);
        // ".25" in Helvetica: period 278 + two digits 556 each (AFM), at 7 pt.
        assert!((fractions[8] - 1.39 * 7.0).abs() < 1e-3);
        let g = PageGeometry::for_paper(Paper::A4);
        let edges = column_edges(&g);
        for row in &rows {
            let laid = lay_out_row(row, &edges, &fractions);
            assert!(matches!(laid.cells[8], Cell::Decimal { .. }));
        }
    }
}
