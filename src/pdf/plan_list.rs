//! The printable list of a lot's planned test locations: a heading, the plan's facts (seed,
//! revision, edge distance, exclusions) and one row per location in chainage order, on A4 pages.

use printpdf::{Mm, PdfDocument, PdfPage, PdfSaveOptions};

use super::PdfError;
use super::canvas::{Canvas, Ink};
use super::text::Face;

/// What the list shows, already formatted.
#[derive(Debug, Clone, Default)]
pub struct PlanListDoc {
    pub title: String,
    /// Lines under the title (lot, plan revision, seed, edge, exclusions, tolerance).
    pub facts: Vec<String>,
    /// (sub-lot, chainage, offset, tested by / note) per location.
    pub rows: Vec<[String; 4]>,
}

const WIDTH_MM: f32 = 210.0;
const HEIGHT_MM: f32 = 297.0;
const PT_PER_MM: f32 = 72.0 / 25.4;
const ROWS_PER_PAGE: usize = 34;

fn header(c: &mut Canvas, doc: &PlanListDoc, page: usize, pages: usize) -> f32 {
    let left = 50.0;
    let mut y = HEIGHT_MM * PT_PER_MM - 60.0;
    c.text(left, y, Face::Bold, 15.0, Ink::Accent, &doc.title);
    y -= 20.0;
    for f in &doc.facts {
        c.text(left, y, Face::Regular, 10.0, Ink::Text, f);
        y -= 14.0;
    }
    c.text_right(
        WIDTH_MM * PT_PER_MM - 50.0,
        40.0,
        Face::Regular,
        8.0,
        Ink::Muted,
        &format!("Page {page} of {pages}"),
    );
    y -= 10.0;
    let cols = [
        "Sub-lot",
        "Chainage",
        "Offset",
        "Tested (test no., or initials and time)",
    ];
    for (i, h) in cols.iter().enumerate() {
        c.text(left + COL_X[i], y, Face::Bold, 10.0, Ink::Text, h);
    }
    y -= 6.0;
    c.line((left, y), (WIDTH_MM * PT_PER_MM - 50.0, y), 0.6, Ink::Rule);
    y - 16.0
}

const COL_X: [f32; 4] = [0.0, 70.0, 190.0, 290.0];

/// Renders the list; the same document gives the same bytes apart from printpdf's id pair.
pub fn render_plan_list(doc: &PlanListDoc) -> Result<Vec<u8>, PdfError> {
    let chunks: Vec<&[[String; 4]]> = if doc.rows.is_empty() {
        vec![&[]]
    } else {
        doc.rows.chunks(ROWS_PER_PAGE).collect()
    };
    let total = chunks.len();
    let pages: Vec<PdfPage> = chunks
        .iter()
        .enumerate()
        .map(|(i, rows)| {
            let mut c = Canvas::page();
            let mut y = header(&mut c, doc, i + 1, total);
            for r in rows.iter() {
                for (k, cell) in r.iter().enumerate() {
                    c.text(50.0 + COL_X[k], y, Face::Regular, 10.0, Ink::Text, cell);
                }
                c.line(
                    (50.0, y - 5.0),
                    (WIDTH_MM * PT_PER_MM - 50.0, y - 5.0),
                    0.3,
                    Ink::Rule,
                );
                y -= 18.0;
            }
            PdfPage::new(Mm(WIDTH_MM), Mm(HEIGHT_MM), c.into_ops())
        })
        .collect();
    let mut pdf = PdfDocument::new(&doc.title);
    pdf.metadata.info.creator = "liftledger".to_string();
    pdf.with_pages(pages);
    let mut warnings = Vec::new();
    Ok(pdf.save(&PdfSaveOptions::default(), &mut warnings))
}
