//! End-of-lift certificate renderer: turns a filled [`CertificateDoc`] into a
//! PDF with the built-in Helvetica fonts and vector drawing only.
//!
//! Page 1 carries the certificate itself (identity, lot, material, reference
//! curve, clause, verdict, statistics and chart, sign-off, cautions); the
//! schedule of tests follows on as many pages as it needs, with its column
//! header repeated. Every page has a footer with the certificate number and
//! revision, the verification code and "Page x of y". The output is a pure
//! function of the document: metadata dates come from `issued_at` and the PDF
//! id from certificate number and revision.

mod blocks;
mod canvas;
mod chart;
mod cover;
mod flow;
mod font_metrics;
mod footer;
mod layout;
mod model;
mod plan_list;
mod render;
#[cfg(test)]
mod sample;
mod signoff;
mod table;
mod text;
mod verdict;

#[cfg(test)]
mod tests;

pub use model::{
    CertificateDoc, ClauseBlock, LotBlock, MaterialBlock, Paper, ReferenceBlock, SignoffBlock,
    SummaryBlock, TestRow,
};
pub use plan_list::{PlanListDoc, render_plan_list};
pub use render::{MAX_TESTS, render_certificate};
pub use table::table_rows_per_page;

/// Why a certificate could not be rendered.
#[derive(Debug, thiserror::Error)]
pub enum PdfError {
    /// The document lists more tests than one certificate may carry.
    #[error("a certificate lists at most {max} tests; this one has {found}")]
    TooManyTests {
        /// The limit, [`MAX_TESTS`].
        max: usize,
        /// Tests in the document.
        found: usize,
    },
    /// The PDF writer produced no document id to replace with the fixed one.
    #[error("the PDF writer left no document id to fix")]
    MissingDocumentId,
    /// Writing the PDF bytes failed.
    #[error("writing the PDF failed: {0}")]
    Write(String),
}
