//! The identifying blocks at the top of the certificate: title band, parties,
//! lot and material, reference curve and clause. Each draws at `top` and returns
//! its height, so the flow can measure it first.

use super::blocks::{Column, LabelRows, heading, label_rows, rows_side_by_side};
use super::canvas::{Canvas, Ink};
use super::layout::BODY_SIZE;
use super::model::CertificateDoc;
use super::text::{Face, wrap_limited};

/// Title of the document, printed on the first page and in the running header.
pub(super) const TITLE: &str = "End-of-lift certificate";
/// Width of the label column in the information blocks.
const LABEL_WIDTH: f32 = 82.0;
/// Width kept for the certificate number block at the right of the title band.
const ID_BLOCK_WIDTH: f32 = 190.0;

/// "Revision 2 (supersedes X)" or "Revision 1".
pub(super) fn revision_line(doc: &CertificateDoc) -> String {
    match (&doc.supersedes, doc.revision > 1) {
        (Some(old), true) if !old.trim().is_empty() => {
            format!("Revision {}, supersedes {}", doc.revision, old.trim())
        }
        _ => format!("Revision {}", doc.revision),
    }
}

/// "NRB-EL-0007 rev 2", the short identity used in footers and headers.
pub(super) fn short_identity(doc: &CertificateDoc) -> String {
    format!("{} rev {}", doc.certificate_number, doc.revision)
}

/// Title, subject line and the certificate's identity block.
pub(super) fn title_band(canvas: &mut Canvas, col: Column, top: f32, doc: &CertificateDoc) -> f32 {
    let left_width = col.width - ID_BLOCK_WIDTH - 12.0;
    canvas.text(col.x, top - 17.0, Face::Bold, 19.0, Ink::Accent, TITLE);

    let subject = format!(
        "Lot {} \u{00B7} {} \u{00B7} {}",
        doc.lot.lot_code, doc.lot.zone, doc.lot.layer
    );
    let subject_lines = wrap_limited(&subject, Face::Bold, 9.5, left_width, 2);
    let mut y = top - 32.0;
    for line in &subject_lines {
        canvas.text(col.x, y, Face::Bold, 9.5, Ink::Text, line);
        y -= 11.5;
    }
    let project_lines = wrap_limited(&doc.project_name, Face::Regular, 9.0, left_width, 2);
    for line in &project_lines {
        canvas.text(col.x, y, Face::Regular, 9.0, Ink::Text, line);
        y -= 11.0;
    }
    let left_height = top - y - 4.0;

    let right = col.right();
    let id_width = ID_BLOCK_WIDTH;
    canvas.text_right(
        right,
        top - 7.0,
        Face::Regular,
        6.5,
        Ink::Muted,
        "CERTIFICATE NUMBER",
    );
    let number = wrap_limited(&doc.certificate_number, Face::Bold, 13.0, id_width, 1);
    canvas.text_right(
        right,
        top - 20.0,
        Face::Bold,
        13.0,
        Ink::Text,
        &number.concat(),
    );
    let mut ry = top - 31.0;
    for line in wrap_limited(&revision_line(doc), Face::Regular, BODY_SIZE, id_width, 2) {
        canvas.text_right(right, ry, Face::Regular, BODY_SIZE, Ink::Text, &line);
        ry -= 10.0;
    }
    let issued = format!("Issued {}", doc.issued_at);
    canvas.text_right(right, ry, Face::Regular, BODY_SIZE, Ink::Text, &issued);
    ry -= 10.0;
    let code = format!("Verification code {}", doc.verification_code);
    canvas.text_right(right, ry, Face::Bold, BODY_SIZE, Ink::Text, &code);
    let right_height = top - ry + 4.0;

    let height = left_height.max(right_height);
    canvas.line(
        (col.x, top - height),
        (right, top - height),
        1.4,
        Ink::Accent,
    );
    height + 2.0
}

/// Project, contract, client and contractor.
pub(super) fn parties(canvas: &mut Canvas, col: Column, top: f32, doc: &CertificateDoc) -> f32 {
    rows_side_by_side(
        canvas,
        col,
        top,
        LABEL_WIDTH,
        (
            &[("Project", &doc.project_name), ("Contract", &doc.contract)],
            &[("Client", &doc.client), ("Contractor", &doc.contractor)],
        ),
    )
}

/// The lot's location and size beside the material and its borrow source.
pub(super) fn lot_and_material(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    doc: &CertificateDoc,
) -> f32 {
    let lot = &doc.lot;
    let chainage = format!("{} to {}", lot.chainage_from, lot.chainage_to);
    let m = &doc.material;
    headed_pair(
        canvas,
        col,
        top,
        (
            "Lot",
            &[
                ("Lot code", &lot.lot_code),
                ("Zone", &lot.zone),
                ("Layer", &lot.layer),
                ("Chainage", &chainage),
                ("Offset band", &lot.offset_band),
                ("Length", &lot.length),
                ("Area", &lot.area),
            ],
        ),
        (
            "Material and borrow source",
            &[
                ("Borrow source", &m.source_name),
                ("Description", &m.description),
                ("Classification", &m.classification),
            ],
        ),
    )
}

/// The reference lab curve beside the specification clause.
pub(super) fn reference_and_clause(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    doc: &CertificateDoc,
) -> f32 {
    let r = &doc.reference;
    let c = &doc.clause;
    headed_pair(
        canvas,
        col,
        top,
        (
            "Reference compaction curve",
            &[
                ("Lab test", &r.lab_test_code),
                ("Effort", &r.effort),
                ("Energy", &r.energy),
                ("Max. dry density", &r.mdd),
                ("Optimum moisture", &r.omc),
                ("Specific gravity Gs", &r.specific_gravity),
                ("Curve fit", &r.fit_method),
                ("Curve approval", &r.approval),
                ("Oversize", &r.oversize_note),
            ],
        ),
        (
            "Specification clause",
            &[
                ("Clause", &c.clause_code),
                ("Minimum RC", &c.rc_min),
                ("Moisture window", &c.moisture_window),
                ("Acceptance rule", &c.rule),
                ("Test frequency", &c.frequency),
            ],
        ),
    )
}

/// Headed rows in each half of the column, side by side; returns the taller height.
fn headed_pair(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    (left_title, left_rows): (&str, LabelRows<'_>),
    (right_title, right_rows): (&str, LabelRows<'_>),
) -> f32 {
    let (left, right) = col.halves();
    let a = headed_rows(canvas, left, top, left_title, left_rows);
    let b = headed_rows(canvas, right, top, right_title, right_rows);
    a.max(b)
}

/// A heading with its label/value rows under it; returns their height together.
fn headed_rows(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    title: &str,
    rows: &[(&str, &str)],
) -> f32 {
    let h = heading(canvas, col, top, title);
    h + label_rows(canvas, col, top - h, LABEL_WIDTH, rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn revision_line_names_the_superseded_issue_only_after_the_first() {
        let mut doc = CertificateDoc {
            revision: 1,
            supersedes: Some("X-1 rev 0".into()),
            ..CertificateDoc::default()
        };
        assert_eq!(revision_line(&doc), "Revision 1");
        doc.revision = 2;
        doc.supersedes = Some("X-1 rev 1".into());
        assert_eq!(revision_line(&doc), "Revision 2, supersedes X-1 rev 1");
        doc.supersedes = None;
        assert_eq!(revision_line(&doc), "Revision 2");
    }
}
