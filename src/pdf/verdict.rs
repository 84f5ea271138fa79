//! The outcome blocks: the framed verdict with its reasons and the test-frequency
//! outcome, then the statistics of the counted tests beside the RC chart.

use super::blocks::{BASELINE_DROP, Column, GUTTER, bullets, heading, label_rows};
use super::canvas::{Canvas, Ink};
use super::chart::{self, ChartArea};
use super::layout::{BODY_SIZE, LINE};
use super::model::CertificateDoc;
use super::text::{Face, width, wrap_limited};

/// Width of the left cell of the verdict box, which holds the verdict word.
const VERDICT_CELL_WIDTH: f32 = 132.0;
/// Inner padding of the verdict box.
const PAD: f32 = 7.0;
/// Most lines one reason may take.
const MAX_REASON_LINES: usize = 4;
/// Most reasons printed in the box; more are summarised in one closing line.
const MAX_REASONS: usize = 8;
/// Height of the chart area under its heading on the shortest paper (Letter).
pub(super) const CHART_HEIGHT: f32 = 104.0;
/// Width of the statistics column beside the chart.
const STATS_WIDTH: f32 = 172.0;

/// The reasons as printed: empty list explained, overly long list shortened.
fn printed_reasons(doc: &CertificateDoc) -> Vec<String> {
    let reasons = &doc.summary.reasons;
    if reasons.is_empty() {
        return vec!["No reasons were recorded with this verdict.".to_string()];
    }
    let mut out: Vec<String> = reasons.iter().take(MAX_REASONS).cloned().collect();
    if reasons.len() > MAX_REASONS {
        out.push(format!(
            "and {} further reasons in the lot record",
            reasons.len() - MAX_REASONS
        ));
    }
    out
}

/// The verdict's own cell: its label and the verdict in large type.
fn verdict_cell(canvas: &mut Canvas, col: Column, top: f32, verdict_lines: &[String]) {
    let x = col.x + PAD + 1.0;
    canvas.text(x, top - PAD - 6.0, Face::Bold, 6.5, Ink::Muted, "VERDICT");
    for (i, line) in verdict_lines.iter().enumerate() {
        let baseline = top - PAD - 24.0 - i as f32 * 17.0;
        canvas.text(x, baseline, Face::Bold, 15.0, Ink::Accent, line);
    }
}

/// "Test frequency: 9 required, 12 counted: met", on one line under the reasons.
fn frequency_line(canvas: &mut Canvas, reasons_col: Column, y: f32, doc: &CertificateDoc) {
    let label = "Test frequency: ";
    canvas.text(reasons_col.x, y, Face::Bold, BODY_SIZE, Ink::Text, label);
    let value_x = reasons_col.x + width(label, Face::Bold, BODY_SIZE);
    let value_width = reasons_col.right() - value_x;
    let frequency = wrap_limited(
        &doc.summary.frequency,
        Face::Regular,
        BODY_SIZE,
        value_width,
        1,
    );
    let text = frequency.concat();
    canvas.text(value_x, y, Face::Regular, BODY_SIZE, Ink::Text, &text);
}

/// Framed verdict, its reasons and the test-frequency outcome.
pub(super) fn verdict_box(canvas: &mut Canvas, col: Column, top: f32, doc: &CertificateDoc) -> f32 {
    let reasons_col = Column {
        x: col.x + VERDICT_CELL_WIDTH + PAD,
        width: col.width - VERDICT_CELL_WIDTH - 2.0 * PAD,
    };
    let reasons = printed_reasons(doc);
    let reasons_height = bullets(
        &mut Canvas::measuring(),
        reasons_col,
        0.0,
        BODY_SIZE,
        LINE,
        &reasons,
        MAX_REASON_LINES,
    );
    let verdict_lines = wrap_limited(
        &doc.summary.verdict,
        Face::Bold,
        15.0,
        VERDICT_CELL_WIDTH - 2.0 * PAD,
        2,
    );
    let verdict_height = 20.0 + verdict_lines.len() as f32 * 17.0;
    let inner = (reasons_height + LINE + 5.0).max(verdict_height);
    let height = inner + 2.0 * PAD - 4.0;

    canvas.fill_rect(col.x, top - height, col.width, height, Ink::AccentTint);
    canvas.stroke_rect(col.x, top - height, col.width, height, 0.9, Ink::Accent);
    let divider_x = col.x + VERDICT_CELL_WIDTH;
    let divider = ((divider_x, top - 5.0), (divider_x, top - height + 5.0));
    canvas.line(divider.0, divider.1, 0.5, Ink::Accent);
    verdict_cell(canvas, col, top, &verdict_lines);

    let reasons_top = top - PAD + 2.0;
    bullets(
        canvas,
        reasons_col,
        reasons_top,
        BODY_SIZE,
        LINE,
        &reasons,
        MAX_REASON_LINES,
    );
    let frequency_y = reasons_top - reasons_height - 3.0 - BASELINE_DROP;
    frequency_line(canvas, reasons_col, frequency_y, doc);
    height
}

/// Statistics of the counted tests beside the RC-per-test chart, which is
/// `chart_height` tall.
pub(super) fn statistics_and_chart(
    canvas: &mut Canvas,
    col: Column,
    top: f32,
    doc: &CertificateDoc,
    chart_height: f32,
) -> f32 {
    let stats = Column {
        x: col.x,
        width: STATS_WIDTH,
    };
    let chart_col = Column {
        x: col.x + STATS_WIDTH + GUTTER,
        width: col.width - STATS_WIDTH - GUTTER,
    };
    let s = &doc.summary;
    let h = heading(canvas, stats, top, "Statistics of counted tests");
    let left = h + label_rows(
        canvas,
        stats,
        top - h,
        92.0,
        &[
            ("Tests counted", &s.n),
            ("Mean RC", &s.mean),
            ("Standard deviation", &s.std_dev),
            ("Lowest RC", &s.min),
            ("Highest RC", &s.max),
            ("Quality index QL", &s.quality_index),
            ("Percent within limits", &s.pwl),
        ],
    );
    let h = heading(canvas, chart_col, top, "Relative compaction of each test");
    let area = ChartArea {
        x: chart_col.x,
        y: top - h - chart_height,
        width: chart_col.width,
        height: chart_height,
    };
    chart::draw(canvas, area, &doc.tests, s.rc_limit);
    left.max(h + chart_height)
}
