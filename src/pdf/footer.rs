//! What every page carries: the footer (certificate identity, verification code,
//! "page x of y") and, after the first page, a running header.

use super::canvas::{Canvas, Ink};
use super::cover::{TITLE, short_identity};
use super::layout::{PageGeometry, RUNNING_HEADER_HEIGHT};
use super::model::CertificateDoc;
use super::text::{Face, wrap_limited};

/// Size of footer and running-header text.
const SMALL: f32 = 7.0;

/// "Page x of y", as printed in the footer.
pub(super) fn page_label(page: usize, total: usize) -> String {
    format!("Page {page} of {total}")
}

/// The footer of page `page` (1-based) of `total`.
pub(super) fn footer(
    canvas: &mut Canvas,
    g: &PageGeometry,
    doc: &CertificateDoc,
    page: usize,
    total: usize,
) {
    let rule_y = g.footer_baseline + 9.0;
    canvas.line((g.left, rule_y), (g.right, rule_y), 0.5, Ink::Rule);
    let third = g.content_width() / 3.0;
    let identity = format!("Certificate {}", short_identity(doc));
    let identity = wrap_limited(&identity, Face::Regular, SMALL, third * 1.2, 1).concat();
    canvas.text(
        g.left,
        g.footer_baseline,
        Face::Regular,
        SMALL,
        Ink::Text,
        &identity,
    );
    let code = format!("Verification code {}", doc.verification_code);
    let code = wrap_limited(&code, Face::Bold, SMALL, third * 1.1, 1).concat();
    canvas.text_centre(
        g.left + g.content_width() * 0.56,
        g.footer_baseline,
        Face::Bold,
        SMALL,
        Ink::Text,
        &code,
    );
    let label = page_label(page, total);
    canvas.text_right(
        g.right,
        g.footer_baseline,
        Face::Regular,
        SMALL,
        Ink::Text,
        &label,
    );
}

/// The running header of every page after the first: title, identity and lot.
pub(super) fn running_header(canvas: &mut Canvas, g: &PageGeometry, doc: &CertificateDoc) {
    let baseline = g.top - 9.0;
    let left = format!("{TITLE} \u{00B7} {}", short_identity(doc));
    canvas.text(
        g.left,
        baseline,
        Face::Bold,
        SMALL + 0.5,
        Ink::Accent,
        &left,
    );
    let lot = format!("Lot {} \u{00B7} {}", doc.lot.lot_code, doc.project_name);
    let lot = wrap_limited(&lot, Face::Regular, SMALL, g.content_width() * 0.5, 1).concat();
    canvas.text_right(g.right, baseline, Face::Regular, SMALL, Ink::Muted, &lot);
    let rule_y = g.top - RUNNING_HEADER_HEIGHT + 8.0;
    canvas.line((g.left, rule_y), (g.right, rule_y), 0.5, Ink::Rule);
}
