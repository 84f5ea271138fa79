//! The closing blocks: submission and acceptance record, the two signature
//! panels, and the cautions.

use super::blocks::{BASELINE_DROP, Column, bullets, heading, muted_label, rows_side_by_side};
use super::canvas::{Canvas, Ink};
use super::flow::Block;
use super::layout::{BODY_SIZE, LINE};
use super::model::CertificateDoc;
use super::text::{Face, wrap_limited};

/// Most lines the acceptance comment may take.
const MAX_COMMENT_LINES: usize = 8;
/// Most lines one caution may take.
const MAX_CAUTION_LINES: usize = 6;
/// Size of the caution text.
const CAUTION_SIZE: f32 = 7.5;
/// Line spacing of the caution text.
const CAUTION_LINE: f32 = 9.0;
/// Height of one signature panel.
const PANEL_HEIGHT: f32 = 58.0;

/// Who submitted and accepted the lot and when, then the comment.
pub(super) fn submission_and_acceptance(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    doc: &CertificateDoc,
) -> f32 {
    let s = &doc.signoff;
    let h = heading(canvas, col, top, "Submission and acceptance");
    let rows = rows_side_by_side(
        canvas,
        col,
        top - h,
        82.0,
        (
            &[
                ("Submitted by", &s.submitted_by),
                ("Submitted at", &s.submitted_at),
            ],
            &[
                ("Accepted by", &s.accepted_by),
                ("Accepted at", &s.accepted_at),
            ],
        ),
    );
    let mut y = top - h - rows;
    let comment = if s.acceptance_comment.trim().is_empty() {
        "\u{2014}"
    } else {
        s.acceptance_comment.as_str()
    };
    let lines = wrap_limited(
        comment,
        Face::Regular,
        BODY_SIZE,
        col.width - 82.0,
        MAX_COMMENT_LINES,
    );
    muted_label(canvas, col.x, y - BASELINE_DROP, "Comment");
    for line in &lines {
        canvas.text(
            col.x + 82.0,
            y - BASELINE_DROP,
            Face::Regular,
            BODY_SIZE,
            Ink::Text,
            line,
        );
        y -= LINE;
    }
    top - y
}

/// Two signature panels side by side: contractor QC manager and client engineer.
pub(super) fn signatures(canvas: &mut Canvas, col: Column, top: f32, doc: &CertificateDoc) -> f32 {
    let (left, right) = col.halves();
    let gap = 6.0;
    panel(
        canvas,
        left,
        top - gap,
        "Contractor QC manager",
        &doc.signoff.submitted_by,
    );
    panel(
        canvas,
        right,
        top - gap,
        "Client engineer",
        &doc.signoff.accepted_by,
    );
    PANEL_HEIGHT + gap
}

/// One framed panel with the role, the printed name, and blank signature and date boxes.
fn panel(canvas: &mut Canvas, col: Column, top: f32, role: &str, name: &str) {
    let bottom = top - PANEL_HEIGHT;
    canvas.stroke_rect(col.x, bottom, col.width, PANEL_HEIGHT, 0.6, Ink::Rule);
    canvas.fill_rect(col.x, top - 14.0, col.width, 14.0, Ink::AccentTint);
    canvas.line(
        (col.x, top - 14.0),
        (col.right(), top - 14.0),
        0.6,
        Ink::Rule,
    );
    canvas.text(
        col.x + 5.0,
        top - 10.0,
        Face::Bold,
        BODY_SIZE,
        Ink::Accent,
        role,
    );

    let inner_x = col.x + 5.0;
    let inner_w = col.width - 10.0;
    let name_line = wrap_limited(name, Face::Regular, BODY_SIZE, inner_w - 30.0, 1).concat();
    muted_label(canvas, inner_x, top - 25.0, "Name");
    canvas.text(
        inner_x + 30.0,
        top - 25.0,
        Face::Regular,
        BODY_SIZE,
        Ink::Text,
        &name_line,
    );
    canvas.line(
        (inner_x + 28.0, top - 27.5),
        (col.right() - 5.0, top - 27.5),
        0.4,
        Ink::Rule,
    );

    let date_w = 72.0;
    let sig_w = inner_w - date_w - 6.0;
    let box_top = top - 33.0;
    let box_h = 20.0;
    canvas.stroke_rect(inner_x, box_top - box_h, sig_w, box_h, 0.4, Ink::Rule);
    canvas.stroke_rect(
        inner_x + sig_w + 6.0,
        box_top - box_h,
        date_w,
        box_h,
        0.4,
        Ink::Rule,
    );
    canvas.text(
        inner_x + 3.0,
        box_top - 7.0,
        Face::Regular,
        6.0,
        Ink::Muted,
        "Signature",
    );
    canvas.text(
        inner_x + sig_w + 9.0,
        box_top - 7.0,
        Face::Regular,
        6.0,
        Ink::Muted,
        "Date",
    );
}

/// Cautions as bulleted paragraphs in the small caution type; returns their height.
fn caution_bullets(canvas: &mut Canvas, col: Column, top: f32, cautions: &[String]) -> f32 {
    bullets(
        canvas,
        col,
        top,
        CAUTION_SIZE,
        CAUTION_LINE,
        cautions,
        MAX_CAUTION_LINES,
    )
}

/// The whole cautions section: heading and one bulleted paragraph per caution.
fn all_cautions(canvas: &mut Canvas, col: Column, top: f32, doc: &CertificateDoc) -> f32 {
    let h = heading(canvas, col, top, "Cautions");
    h + caution_bullets(canvas, col, top - h, &doc.cautions)
}

/// The cautions as flow blocks: one block that moves to the next page as a whole
/// when it fits a page (`page_room` high), else the heading with the first caution
/// and one block per further caution, so a very long list can run on.
pub(super) fn caution_blocks(
    doc: &CertificateDoc,
    gap: f32,
    col: Column,
    page_room: f32,
) -> Vec<(f32, Block<'_>)> {
    if doc.cautions.is_empty() {
        return Vec::new();
    }
    let whole = all_cautions(&mut Canvas::measuring(), col, 0.0, doc);
    if whole <= page_room {
        let block: Block<'_> =
            Box::new(move |canvas, col, top| all_cautions(canvas, col, top, doc));
        return vec![(gap, block)];
    }
    doc.cautions
        .iter()
        .enumerate()
        .map(|(i, caution)| {
            let block: Block<'_> = Box::new(move |canvas, col, top| {
                let h = if i == 0 {
                    heading(canvas, col, top, "Cautions")
                } else {
                    0.0
                };
                let item = std::slice::from_ref(caution);
                h + caution_bullets(canvas, col, top - h, item)
            });
            (if i == 0 { gap } else { 0.0 }, block)
        })
        .collect()
}
