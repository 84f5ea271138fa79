//! Puts the certificate together: first-page blocks through the flow, then the
//! schedule pages, then header and footer on every page; writes the PDF with
//! metadata dates and document id fixed from the certificate, so the same
//! certificate always gives the same bytes.

use printpdf::{
    Date, Mm, Offset, OffsetDateTime, PdfDocument, PdfPage, PdfSaveOptions, PdfWarnMsg, Time,
};

use super::PdfError;
use super::blocks::Column;
use super::canvas::Canvas;
use super::cover::{self, TITLE, short_identity};
use super::flow::{Block, Flow};
use super::footer;
use super::layout::{BLOCK_GAP, PageGeometry, paper_size_mm};
use super::model::CertificateDoc;
use super::signoff;
use super::table;
use super::verdict;

/// Height of US Letter paper, the shortest page the certificate is laid out on.
const LETTER_HEIGHT_PT: f32 = 792.0;

/// Most tests one certificate may list (about 75 schedule pages on A4).
pub const MAX_TESTS: usize = 5_000;

/// Renders the certificate to PDF bytes; the same `doc` always gives the same bytes.
pub fn render_certificate(doc: &CertificateDoc) -> Result<Vec<u8>, PdfError> {
    render_with_warnings(doc).map(|(bytes, _)| bytes)
}

/// Renders like [`render_certificate`] and also returns the PDF writer's warnings.
pub(super) fn render_with_warnings(
    doc: &CertificateDoc,
) -> Result<(Vec<u8>, Vec<PdfWarnMsg>), PdfError> {
    if doc.tests.len() > MAX_TESTS {
        return Err(PdfError::TooManyTests {
            max: MAX_TESTS,
            found: doc.tests.len(),
        });
    }
    let geometry = PageGeometry::for_paper(doc.paper);
    let mut pages = first_pages(doc, &geometry);
    pages.extend(table::schedule_pages(doc, &geometry));

    let total = pages.len();
    let (width_mm, height_mm) = paper_size_mm(doc.paper);
    let pdf_pages: Vec<PdfPage> = pages
        .into_iter()
        .enumerate()
        .map(|(i, mut canvas)| {
            if i > 0 {
                footer::running_header(&mut canvas, &geometry, doc);
            }
            footer::footer(&mut canvas, &geometry, doc, i + 1, total);
            PdfPage::new(Mm(width_mm), Mm(height_mm), canvas.into_ops())
        })
        .collect();

    let mut pdf = PdfDocument::new(&format!("{TITLE} {}", short_identity(doc)));
    set_metadata(&mut pdf, doc);
    pdf.with_pages(pdf_pages);

    let mut warnings = Vec::new();
    let mut lopdf_doc = pdf.to_lopdf_document(&PdfSaveOptions::default(), &mut warnings);
    // printpdf writes a random /ID pair; replace both entries with the fixed id.
    let id = document_id(doc).into_bytes();
    let entries = lopdf_doc
        .trailer
        .get_mut(b"ID")
        .and_then(|o| o.as_array_mut())
        .map_err(|_| PdfError::MissingDocumentId)?;
    for entry in entries.iter_mut() {
        let bytes = entry
            .as_str_mut()
            .map_err(|_| PdfError::MissingDocumentId)?;
        bytes.clone_from(&id);
    }
    // An empty PDF/X version key would make readers think the file claims PDF/X.
    if let Ok(info_id) = lopdf_doc
        .trailer
        .get(b"Info")
        .and_then(|o| o.as_reference())
        && let Ok(info) = lopdf_doc
            .get_object_mut(info_id)
            .and_then(|o| o.as_dict_mut())
    {
        info.remove(b"GTS_PDFXVersion");
    }
    lopdf_doc.compress();
    let mut bytes = Vec::new();
    lopdf_doc
        .save_to(&mut bytes)
        .map_err(|e| PdfError::Write(e.to_string()))?;
    Ok((bytes, warnings))
}

/// The first page's blocks, in reading order, flowed onto as many pages as needed.
fn first_pages(doc: &CertificateDoc, geometry: &PageGeometry) -> Vec<Canvas> {
    // Taller paper than Letter (A4) spends part of its extra height on the chart.
    let chart_height = verdict::CHART_HEIGHT + (geometry.height - LETTER_HEIGHT_PT).max(0.0) * 0.6;
    let mut blocks: Vec<(f32, Block<'_>)> = vec![
        (
            0.0,
            Box::new(|c, col, top| cover::title_band(c, col, top, doc)),
        ),
        (
            BLOCK_GAP,
            Box::new(|c, col, top| cover::parties(c, col, top, doc)),
        ),
        (
            BLOCK_GAP,
            Box::new(|c, col, top| cover::lot_and_material(c, col, top, doc)),
        ),
        (
            BLOCK_GAP,
            Box::new(|c, col, top| cover::reference_and_clause(c, col, top, doc)),
        ),
        (
            BLOCK_GAP + 2.0,
            Box::new(|c, col, top| verdict::verdict_box(c, col, top, doc)),
        ),
        (
            BLOCK_GAP,
            Box::new(|c, col, top| verdict::statistics_and_chart(c, col, top, doc, chart_height)),
        ),
        (
            BLOCK_GAP,
            Box::new(|c, col, top| signoff::submission_and_acceptance(c, col, top, doc)),
        ),
        (
            0.0,
            Box::new(|c, col, top| signoff::signatures(c, col, top, doc)),
        ),
    ];
    let col = Column {
        x: geometry.left,
        width: geometry.content_width(),
    };
    let page_room = geometry.top_below_running_header() - geometry.bottom;
    blocks.extend(signoff::caution_blocks(doc, BLOCK_GAP, col, page_room));
    let mut flow = Flow::new(geometry);
    for (gap, block) in &blocks {
        flow.place(*gap, block);
    }
    flow.into_pages()
}

/// Title, subject, keywords and the fixed dates of the PDF's information dictionary.
fn set_metadata(pdf: &mut PdfDocument, doc: &CertificateDoc) {
    let info = &mut pdf.metadata.info;
    let issued = issued_date(&doc.issued_at);
    info.creation_date = issued;
    info.modification_date = issued;
    info.metadata_date = issued;
    info.author = doc.contractor.clone();
    info.creator = "liftledger".to_string();
    info.producer = "liftledger certificate renderer".to_string();
    info.subject = format!("Lot {} \u{2014} {}", doc.lot.lot_code, doc.project_name);
    info.identifier = short_identity(doc);
    info.keywords = vec![
        "end-of-lift certificate".to_string(),
        doc.lot.lot_code.clone(),
        doc.verification_code.clone(),
    ];
}

/// The issue time as a PDF date: "YYYY-MM-DD[ HH:MM[:SS]]" read from the start of
/// `issued_at` (taken as UTC); anything unreadable gives the fixed date 1970-01-01.
pub(super) fn issued_date(issued_at: &str) -> OffsetDateTime {
    let digits = |s: &str| -> Option<u32> {
        (!s.is_empty() && s.bytes().all(|b| b.is_ascii_digit()))
            .then(|| s.parse().ok())
            .flatten()
    };
    let s = issued_at.trim();
    let field = |range: std::ops::Range<usize>| s.get(range).and_then(digits);
    let date = (|| {
        let (year, month, day) = (field(0..4)?, field(5..7)?, field(8..10)?);
        let separators_ok = s.get(4..5) == Some("-") && s.get(7..8) == Some("-");
        let valid = separators_ok && (1..=12).contains(&month) && (1..=31).contains(&day);
        valid.then_some((year, month, day))
    })();
    let Some((year, month, day)) = date else {
        return OffsetDateTime::epoch();
    };
    let time_sep_ok = matches!(s.get(10..11), Some(" ") | Some("T"));
    let hour = field(11..13)
        .filter(|h| time_sep_ok && *h < 24)
        .unwrap_or(0);
    let minute = field(14..16)
        .filter(|m| time_sep_ok && *m < 60)
        .unwrap_or(0);
    let second = field(17..19)
        .filter(|s| time_sep_ok && *s < 60)
        .unwrap_or(0);
    OffsetDateTime::new_in_offset(
        Date {
            year: year as i32,
            month: month as u8,
            day: day as u8,
        },
        Time {
            hour: hour as u8,
            minute: minute as u8,
            second: second as u8,
            millisecond: 0,
        },
        Offset {
            hours: 0,
            minutes: 0,
            seconds: 0,
            milliseconds: 0,
        },
    )
}

/// 64-bit FNV-1a (public-domain hash by Fowler, Noll and Vo) from a chosen start value.
fn fnv1a(bytes: &[u8], start: u64) -> u64 {
    bytes.iter().fold(start, |hash, &b| {
        (hash ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01B3)
    })
}

/// The PDF document id: 32 hex digits derived from certificate number and revision,
/// so every revision has its own id and re-rendering one keeps it.
pub(super) fn document_id(doc: &CertificateDoc) -> String {
    let key = format!("{}\u{0}{}", doc.certificate_number, doc.revision);
    let high = fnv1a(key.as_bytes(), 0xCBF2_9CE4_8422_2325);
    let low = fnv1a(key.as_bytes(), high ^ 0x9E37_79B9_7F4A_7C15);
    format!("{high:016X}{low:016X}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn issue_time_becomes_the_metadata_date() {
        let d = issued_date("2026-12-01 14:03 UTC");
        assert_eq!((d.year(), u8::from(d.month()), d.day()), (2026, 12, 1));
        assert_eq!((d.hour(), d.minute(), d.second()), (14, 3, 0));
        let d = issued_date("2026-02-28T08:15:42Z");
        assert_eq!((d.hour(), d.minute(), d.second()), (8, 15, 42));
    }

    #[test]
    fn unreadable_issue_time_gives_the_fixed_epoch() {
        for s in [
            "",
            "yesterday",
            "2026-13-01",
            "2026/12/01",
            "20261201",
            "ÿÿÿÿ-ÿ",
        ] {
            let d = issued_date(s);
            assert_eq!(
                (d.year(), u8::from(d.month()), d.day()),
                (1970, 1, 1),
                "{s}"
            );
        }
    }

    #[test]
    fn fnv1a_matches_the_published_test_vectors() {
        // FNV-1a 64-bit reference values (Fowler/Noll/Vo test suite): "" and "a".
        assert_eq!(fnv1a(b"", 0xCBF2_9CE4_8422_2325), 0xCBF2_9CE4_8422_2325);
        assert_eq!(fnv1a(b"a", 0xCBF2_9CE4_8422_2325), 0xAF63_DC4C_8601_EC8C);
    }

    #[test]
    fn document_id_depends_on_number_and_revision_only() {
        let mut doc = CertificateDoc {
            certificate_number: "KRL-EL-0042".into(),
            revision: 1,
            ..CertificateDoc::default()
        };
        let first = document_id(&doc);
        assert_eq!(first.len(), 32);
        assert!(first.bytes().all(|b| b.is_ascii_hexdigit()));
        doc.project_name = "renamed".into();
        assert_eq!(document_id(&doc), first);
        doc.revision = 2;
        assert_ne!(document_id(&doc), first);
    }
}
