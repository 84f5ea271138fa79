//! The certificate view model: plain, already-formatted strings the service fills
//! from a lot, its tests and its acceptance record.

/// Everything printed on one end-of-lift certificate (one revision of it).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CertificateDoc {
    /// Paper size the certificate is laid out on.
    pub paper: Paper,
    /// Project name, printed under the title.
    pub project_name: String,
    /// Contract reference or title.
    pub contract: String,
    /// The owner's organisation.
    pub client: String,
    /// The earthworks contractor's organisation.
    pub contractor: String,
    /// Certificate number, e.g. "NRB-EL-0007".
    pub certificate_number: String,
    /// Revision number, 1 for the first issue.
    pub revision: u32,
    /// The revision this one replaces, e.g. "NRB-EL-0007 rev 1" (revision > 1 only).
    pub supersedes: Option<String>,
    /// Short code printed on every page so a copy can be checked against the record.
    pub verification_code: String,
    /// Issue time, e.g. "2026-12-01 14:03 UTC"; also the PDF's fixed metadata dates.
    pub issued_at: String,
    /// The lot being certified.
    pub lot: LotBlock,
    /// The fill material and where it came from.
    pub material: MaterialBlock,
    /// The laboratory compaction curve the tests are judged against.
    pub reference: ReferenceBlock,
    /// The specification clause that sets the acceptance rule.
    pub clause: ClauseBlock,
    /// Unit of the density columns, e.g. "kg/m³" or "lb/ft³".
    pub density_unit: String,
    /// Unit of the offset column, e.g. "m" or "ft"; empty prints no unit.
    pub offset_unit: String,
    /// Every test on the lot in table order, voided and superseded ones included.
    pub tests: Vec<TestRow>,
    /// Statistics and verdict over the counted tests.
    pub summary: SummaryBlock,
    /// Who submitted and accepted the lot, and when.
    pub signoff: SignoffBlock,
    /// The cautions printed at the end of the certificate, one paragraph each.
    pub cautions: Vec<String>,
}

/// Paper size of the certificate.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Paper {
    /// ISO A4, 210 × 297 mm.
    #[default]
    A4,
    /// US Letter, 8.5 × 11 in.
    Letter,
}

/// Identification of the lot: where the layer lies and how big it is.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LotBlock {
    /// Lot code, e.g. "L-EMB-0117".
    pub lot_code: String,
    /// Zone of the works, e.g. "Embankment fill".
    pub zone: String,
    /// Layer (lift) within the zone, e.g. "Layer 7".
    pub layer: String,
    /// Start chainage, formatted in the project's style.
    pub chainage_from: String,
    /// End chainage, formatted in the project's style.
    pub chainage_to: String,
    /// Offset band, e.g. "-12.0 to +12.0 m".
    pub offset_band: String,
    /// Lot area with unit.
    pub area: String,
    /// Lot length with unit.
    pub length: String,
}

/// The fill material and its borrow source.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MaterialBlock {
    /// Borrow source name.
    pub source_name: String,
    /// Material description.
    pub description: String,
    /// Soil classification (e.g. USCS group symbol, AASHTO class).
    pub classification: String,
}

/// The reference laboratory compaction curve.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReferenceBlock {
    /// Lab test code.
    pub lab_test_code: String,
    /// Compaction effort and its standard.
    pub effort: String,
    /// Compaction energy with unit.
    pub energy: String,
    /// Maximum dry density with unit.
    pub mdd: String,
    /// Optimum moisture content with unit.
    pub omc: String,
    /// Specific gravity of solids.
    pub specific_gravity: String,
    /// How the curve was fitted.
    pub fit_method: String,
    /// The curve's approval: not needed, or who approved it and why.
    pub approval: String,
    /// Oversize correction applied, or a note that none was.
    pub oversize_note: String,
}

/// The specification clause that rules acceptance.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ClauseBlock {
    /// Clause code.
    pub clause_code: String,
    /// Minimum relative compaction, in words with unit.
    pub rc_min: String,
    /// Allowed moisture deviation window.
    pub moisture_window: String,
    /// Acceptance rule in words.
    pub rule: String,
    /// Required test frequency in words.
    pub frequency: String,
}

/// One field density test as printed in the table.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TestRow {
    /// Test number, e.g. "T-0012".
    pub number: String,
    /// Test date.
    pub date: String,
    /// Chainage of the test point.
    pub chainage: String,
    /// Offset of the test point from the centreline.
    pub offset: String,
    /// Test method, e.g. "nuclear gauge".
    pub method: String,
    /// Wet (bulk) density.
    pub wet_density: String,
    /// Water content, %.
    pub water_content: String,
    /// Dry density.
    pub dry_density: String,
    /// Relative compaction, %.
    pub relative_compaction: String,
    /// Moisture deviation from OMC, percentage points.
    pub moisture_deviation: String,
    /// "pass", "fail", "void" or "superseded".
    pub result: String,
    /// Retest link or void reason, e.g. "retest of T-0012".
    pub note: String,
    /// Relative compaction for the chart; `None` for voided tests.
    pub rc_value: Option<f64>,
    /// Whether the test counts for acceptance; false rows print grey and struck.
    pub counted: bool,
}

/// Statistics over the counted tests and the resulting verdict.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SummaryBlock {
    /// Number of counted tests.
    pub n: String,
    /// Mean relative compaction.
    pub mean: String,
    /// Sample standard deviation of relative compaction.
    pub std_dev: String,
    /// Lowest counted relative compaction.
    pub min: String,
    /// Highest counted relative compaction.
    pub max: String,
    /// Quality index Q_L.
    pub quality_index: String,
    /// Estimated percent within limits.
    pub pwl: String,
    /// Verdict word, e.g. "ACCEPTED".
    pub verdict: String,
    /// Why the verdict is what it is, one sentence each.
    pub reasons: Vec<String>,
    /// Test frequency outcome, e.g. "12 required, 14 counted: met".
    pub frequency: String,
    /// Minimum relative compaction, %, drawn as the chart's limit line.
    pub rc_limit: f64,
}

/// Submission and acceptance record of the lot.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SignoffBlock {
    /// QC manager who submitted the lot.
    pub submitted_by: String,
    /// When the lot was submitted.
    pub submitted_at: String,
    /// Client engineer who accepted (or rejected) the lot.
    pub accepted_by: String,
    /// When the lot was accepted (or rejected).
    pub accepted_at: String,
    /// The client engineer's comment.
    pub acceptance_comment: String,
}
