//! Read-back tests of whole certificates: render, parse the PDF with lopdf, and
//! check what a reader would see on each page.

use lopdf::content::Content;
use lopdf::{Document, Object};

use super::render::{document_id, render_with_warnings};
use super::sample::{chainage, date_after, sample_doc, signed};
use super::*;

fn render(doc: &CertificateDoc) -> Vec<u8> {
    render_certificate(doc).expect("sample certificates render")
}

fn load(bytes: &[u8]) -> Document {
    Document::load_mem(bytes).expect("the renderer's output parses as PDF")
}

/// The extracted text of every page, in page order.
fn pages_text(bytes: &[u8]) -> Vec<String> {
    let doc = load(bytes);
    let count = doc.get_pages().len() as u32;
    (1..=count)
        .map(|p| doc.extract_text(&[p]).expect("page text extracts"))
        .collect()
}

/// Each text string drawn on a page is one line of the extracted text.
fn lines(page: &str) -> Vec<&str> {
    page.lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect()
}

fn expected_pages(n_tests: usize, paper: Paper) -> usize {
    1 + n_tests.div_ceil(table_rows_per_page(paper)).max(1)
}

#[test]
fn first_page_shows_lot_verdict_and_revision() {
    let text = pages_text(&render(&sample_doc(50)));
    let first = lines(&text[0]);
    for wanted in [
        "End-of-lift certificate",
        "KRL-EL-0042",
        "Revision 2, supersedes KRL-EL-0042 rev 1",
        "L-EMB-0117",
        "ACCEPTED",
        "Kestrel Ridge Link Road, Stage 2",
        "Quennick Vale County Council",
        "Corvantle Civil Engineering Ltd",
        "LAB-0031",
        "Spec. 6.4.2, embankment fill",
        "9 required, 46 counted: met",
        "Contractor QC manager",
        "Client engineer",
        "Issued 2026-12-01 14:03 UTC",
        "Results describe the tested points only.",
    ] {
        assert!(
            first.contains(&wanted),
            "page 1 lacks {wanted:?}: {first:?}"
        );
    }
}

#[test]
fn first_revision_names_no_superseded_issue() {
    let mut doc = sample_doc(5);
    doc.revision = 1;
    doc.supersedes = None;
    let text = pages_text(&render(&doc));
    assert!(lines(&text[0]).contains(&"Revision 1"));
    assert!(!text[0].contains("supersedes"));
}

#[test]
fn every_test_number_is_listed_exactly_once() {
    let doc = sample_doc(200);
    let text = pages_text(&render(&doc));
    let schedule: Vec<&str> = text[1..].iter().flat_map(|p| lines(p)).collect();
    for test in &doc.tests {
        let hits = schedule.iter().filter(|l| **l == test.number).count();
        assert_eq!(hits, 1, "{} listed {hits} times", test.number);
    }
    // Notes of voided and superseded tests are printed beside them.
    for test in doc.tests.iter().filter(|t| !t.note.is_empty()) {
        assert!(
            schedule.contains(&test.note.as_str()),
            "note {:?} missing",
            test.note
        );
    }
}

#[test]
fn verification_code_identity_and_page_numbers_are_on_every_page() {
    for n in [0, 50, 200] {
        let text = pages_text(&render(&sample_doc(n)));
        let total = text.len();
        for (i, page) in text.iter().enumerate() {
            let l = lines(page);
            assert!(
                l.contains(&"Verification code 7K3Q-XW9D-42PM"),
                "page {} of {n}",
                i + 1
            );
            assert!(
                l.contains(&"Certificate KRL-EL-0042 rev 2"),
                "page {} of {n}",
                i + 1
            );
            let label = format!("Page {} of {total}", i + 1);
            assert!(
                l.contains(&label.as_str()),
                "{label} missing with {n} tests"
            );
        }
    }
}

#[test]
fn two_hundred_tests_take_the_computed_page_count_with_the_header_on_each() {
    for paper in [Paper::A4, Paper::Letter] {
        let mut doc = sample_doc(200);
        doc.paper = paper;
        let text = pages_text(&render(&doc));
        assert_eq!(text.len(), expected_pages(200, paper), "{paper:?}");
        let rows = table_rows_per_page(paper);
        for (k, page) in text[1..].iter().enumerate() {
            let l = lines(page);
            for title in [
                "Test", "Date", "Chainage", "Method", "RC", "Result", "Note", "kg/m³",
            ] {
                assert!(
                    l.contains(&title),
                    "{paper:?} schedule page {} lacks {title}",
                    k + 1
                );
            }
            assert!(page.contains("Schedule of field density tests"));
            let first = k * rows + 1;
            let last = ((k + 1) * rows).min(200);
            let range = format!("rows {first}\u{2013}{last} of 200");
            assert!(
                page.contains(&range),
                "{paper:?} page {} lacks {range}",
                k + 2
            );
        }
    }
    // The page geometry gives these capacities (see table::rows_per_page_follow_from_the_geometry).
    assert_eq!(table_rows_per_page(Paper::A4), 68);
    assert_eq!(table_rows_per_page(Paper::Letter), 63);
}

fn media_boxes(bytes: &[u8]) -> Vec<Vec<f32>> {
    let doc = load(bytes);
    doc.get_pages()
        .values()
        .map(|&id| {
            let page = doc.get_dictionary(id).expect("page dictionary");
            page.get(b"MediaBox")
                .and_then(Object::as_array)
                .expect("MediaBox array")
                .iter()
                .map(|o| o.as_float().expect("MediaBox number"))
                .collect()
        })
        .collect()
}

#[test]
fn a4_and_letter_have_their_media_boxes() {
    let mut doc = sample_doc(80);
    for (paper, w, h) in [(Paper::A4, 595.28, 841.89), (Paper::Letter, 612.0, 792.0)] {
        // ISO 216 A4 210 × 297 mm; US Letter 8.5 × 11 in; 72 pt per inch.
        doc.paper = paper;
        let boxes = media_boxes(&render(&doc));
        assert_eq!(boxes.len(), expected_pages(80, paper));
        for b in boxes {
            assert_eq!(b.len(), 4);
            assert_eq!((b[0], b[1]), (0.0, 0.0));
            assert!(
                (b[2] - w).abs() < 0.01 && (b[3] - h).abs() < 0.01,
                "{paper:?}: {b:?}"
            );
        }
    }
}

#[test]
fn same_document_gives_the_same_bytes() {
    let doc = sample_doc(120);
    let first = render(&doc);
    let second = render(&doc.clone());
    assert_eq!(first, second);
    let mut letter = doc.clone();
    letter.paper = Paper::Letter;
    assert_eq!(render(&letter), render(&letter));
    let mut next = doc;
    next.revision = 3;
    assert_ne!(render(&next), first);
}

#[test]
fn document_id_and_dates_are_fixed_from_the_certificate() {
    let doc = sample_doc(10);
    let pdf = load(&render(&doc));
    let ids = pdf
        .trailer
        .get(b"ID")
        .and_then(Object::as_array)
        .expect("trailer /ID");
    let expected = document_id(&doc);
    assert_eq!(ids.len(), 2);
    for id in ids {
        assert_eq!(id.as_str().expect("id string"), expected.as_bytes());
    }
    let info_id = pdf
        .trailer
        .get(b"Info")
        .and_then(Object::as_reference)
        .expect("trailer /Info");
    let info = pdf.get_dictionary(info_id).expect("info dictionary");
    for key in [b"CreationDate".as_slice(), b"ModDate".as_slice()] {
        let date = info.get(key).and_then(Object::as_str).expect("date");
        // PDF 32000-1 7.9.4 date format, from issued_at "2026-12-01 14:03 UTC".
        assert_eq!(date, b"D:20261201140300+00'00'");
    }
    assert!(info.get(b"GTS_PDFXVersion").is_err());
}

#[test]
fn characters_outside_win_ansi_are_substituted_and_superscripts_survive() {
    let mut doc = sample_doc(3);
    doc.tests[0].note = "ρd below σ limit".into();
    doc.clause.rule = "every test: RC ≥ 95 and w − OMC ≤ 2".into();
    doc.signoff.acceptance_comment = "Checked at 20 °C ± 2; μ-fine 漢".into();
    let text = pages_text(&render(&doc)).join("\n");
    assert!(text.contains("rhod below sigma limit"));
    assert!(text.contains("every test: RC >= 95 and w - OMC <= 2"));
    assert!(text.contains("Checked at 20 °C ± 2; µ-fine ?"));
    // ³ is WinAnsi 0xB3 and reads back as itself.
    assert!(text.contains("kg/m³"));
    assert!(!text.contains('ρ') && !text.contains('≥'));
}

/// Fill colour in force when each text string of a page is drawn.
fn text_fills(bytes: &[u8], page: u32) -> Vec<(String, Vec<f32>)> {
    let doc = load(bytes);
    let page_id = doc.get_pages()[&page];
    let content = Content::decode(&doc.get_page_content(page_id)).expect("content decodes");
    let mut fill = Vec::new();
    let mut out = Vec::new();
    for op in content.operations {
        match op.operator.as_str() {
            "g" | "rg" => {
                fill = op
                    .operands
                    .iter()
                    .filter_map(|o| o.as_float().ok())
                    .collect();
            }
            "Tj" => {
                if let Some(s) = op.operands.first().and_then(|o| o.as_str().ok()) {
                    out.push((String::from_utf8_lossy(s).into_owned(), fill.clone()));
                }
            }
            _ => {}
        }
    }
    out
}

#[test]
fn voided_and_superseded_rows_print_grey_and_counted_rows_dark() {
    let doc = sample_doc(50);
    let bytes = render(&doc);
    let fills = text_fills(&bytes, 2);
    let grey_of = |number: &str| {
        fills
            .iter()
            .find(|(t, _)| t == number)
            .map(|(_, f)| f.clone())
            .expect("number printed on page 2")
    };
    for test in &doc.tests {
        let fill = grey_of(&test.number);
        assert_eq!(fill.len(), 1, "grey fill for {}", test.number);
        if test.counted {
            assert!(fill[0] < 0.2, "{} should be dark", test.number);
        } else {
            assert!(
                (fill[0] - 0.56).abs() < 1e-3,
                "{} should be grey",
                test.number
            );
        }
    }
}

#[test]
fn a_certificate_without_tests_still_renders_its_schedule() {
    let text = pages_text(&render(&sample_doc(0)));
    assert_eq!(text.len(), 2);
    assert!(text[1].contains("No field density tests are recorded for this lot."));
    assert!(text[1].contains("Page 2 of 2"));
}

#[test]
fn too_many_tests_is_refused() {
    let mut doc = sample_doc(1);
    doc.tests = vec![TestRow::default(); MAX_TESTS + 1];
    assert!(matches!(
        render_certificate(&doc),
        Err(PdfError::TooManyTests { found, .. }) if found == MAX_TESTS + 1
    ));
}

#[test]
fn the_pdf_writer_reports_no_warnings() {
    let (_, warnings) = render_with_warnings(&sample_doc(60)).expect("renders");
    assert!(warnings.is_empty(), "{warnings:?}");
}

#[test]
fn odd_input_renders_without_panicking() {
    let mut doc = sample_doc(12);
    doc.summary.rc_limit = f64::NAN;
    doc.tests[0].rc_value = Some(f64::INFINITY);
    doc.tests[1].rc_value = Some(f64::NAN);
    doc.tests[2].relative_compaction = "123456789012345678901234567890".into();
    doc.tests[3].method = "a-method-name-without-any-space-that-is-far-too-long".into();
    doc.project_name = "🚧 ".repeat(200);
    doc.certificate_number = String::new();
    doc.verification_code = "x".repeat(300);
    doc.issued_at = "not a date".into();
    doc.summary.verdict = String::new();
    doc.summary.reasons = vec!["r".repeat(2000); 30];
    let bytes = render(&doc);
    let text = pages_text(&bytes);
    assert!(text.len() >= 2);
    assert!(text[0].contains("and 22 further reasons in the lot record"));
}

#[test]
fn long_sign_off_and_many_cautions_flow_onto_a_further_page() {
    let mut doc = sample_doc(30);
    doc.signoff.acceptance_comment = "Reviewed on site with the QC manager. ".repeat(30);
    doc.cautions = (1..=25)
        .map(|i| format!("Caution number {i}: read the clause."))
        .collect();
    let text = pages_text(&render(&doc));
    let cover_pages = text.len() - 30usize.div_ceil(table_rows_per_page(Paper::A4));
    assert!(cover_pages >= 2, "cover took {cover_pages} page(s)");
    let all = text.join("\n");
    for i in 1..=25 {
        assert!(all.contains(&format!("Caution number {i}: read the clause.")));
    }
    // The schedule still starts on its own page, after the flowed blocks.
    assert!(text[cover_pages].contains("Schedule of field density tests"));
    assert!(!text[cover_pages].contains("(continued)"));
}

#[test]
fn cautions_longer_than_a_page_run_on_over_pages() {
    let mut doc = sample_doc(5);
    doc.cautions = (1..=150)
        .map(|i| format!("Caution {i} of a very long list."))
        .collect();
    let text = pages_text(&render(&doc));
    let all = text.join("\n");
    for i in 1..=150 {
        assert!(
            all.contains(&format!("Caution {i} of a very long list.")),
            "caution {i}"
        );
    }
    // The list needs about 150 lines of 9 pt, more than one page.
    assert!(text.len() >= 4, "{} pages", text.len());
}

#[test]
fn fifty_tests_stay_small() {
    let bytes = render(&sample_doc(50));
    assert!(bytes.len() < 200 * 1024, "{} bytes", bytes.len());
    assert!(bytes.starts_with(b"%PDF-"));
}

// The sample itself (src/pdf/sample.rs, mounted here for tests only).

#[test]
fn dates_roll_over_months_and_years() {
    assert_eq!(date_after(0), "2026-11-09");
    assert_eq!(date_after(21), "2026-11-30");
    assert_eq!(date_after(22), "2026-12-01");
    assert_eq!(date_after(53), "2027-01-01");
}

#[test]
fn signed_values_never_print_minus_zero() {
    assert_eq!(signed(-0.04), "0.0");
    assert_eq!(signed(0.96), "+1.0");
    assert_eq!(signed(-1.25), "-1.3");
}

#[test]
fn chainage_is_km_plus_metres() {
    // Common practice: km+mmm.mmm.
    assert_eq!(chainage(1240.0), "1+240.000");
    assert_eq!(chainage(1005.5), "1+005.500");
}

#[test]
fn every_superseded_test_is_followed_by_its_retest() {
    let doc = sample_doc(200);
    for (i, t) in doc.tests.iter().enumerate() {
        if t.result == "superseded" {
            let next = &doc.tests[i + 1];
            assert_eq!(next.note, format!("retest of {}", t.number));
            assert_eq!(next.chainage, t.chainage);
            assert!(next.counted && !t.counted);
        }
        if t.result == "void" {
            assert!(t.rc_value.is_none() && !t.counted);
        }
    }
    assert!(doc.tests.iter().any(|t| t.result == "void"));
    assert!(doc.tests.iter().any(|t| t.result == "superseded"));
    assert_eq!(doc.summary.verdict, "ACCEPTED");
}

#[test]
fn sample_statistics_follow_the_counted_rows() {
    let doc = sample_doc(50);
    let counted = doc.tests.iter().filter(|t| t.counted).count();
    assert_eq!(doc.summary.n, counted.to_string());
    assert_eq!(
        doc.summary.frequency,
        format!("9 required, {counted} counted: met")
    );
    let empty = sample_doc(0);
    assert_eq!(empty.summary.n, "0");
    assert_eq!(empty.summary.mean, "\u{2014}");
}

#[test]
fn sample_rows_show_dry_density_reduced_from_wet_density_and_water() {
    // ρd = ρ / (1 + w/100) (ASTM D6938), within the rounding of the printed figures
    // (wet and dry to 1 kg/m³, water to 0.1 %).
    for t in sample_doc(60).tests {
        let wet: f64 = t.wet_density.parse().unwrap();
        let water: f64 = t.water_content.parse().unwrap();
        let dry: f64 = t.dry_density.parse().unwrap();
        assert!(
            (dry - wet / (1.0 + water / 100.0)).abs() < 2.0,
            "{}: {wet} at {water} % shown as {dry}",
            t.number
        );
    }
}
