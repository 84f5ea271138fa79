//! Everything known about one lot, judged now: every test reduced against the
//! lot's reference curve and clause, the lot verdict, tests owed, and whether
//! its certificate still matches the record.

use std::collections::{HashMap, HashSet};

use serde::Serialize;
use sha2::{Digest, Sha256};

use super::setup::{clause_moisture, clause_rule};
use crate::db::{self, Pool};
use crate::domain::{DisplayState, Rule, Standing};
use crate::error::{AppError, Result};
use crate::reduction::acceptance::{LotTestInput, LotVerdict, TestStanding, evaluate_lot_with};
use crate::reduction::frequency::{FrequencyRule, tests_owed, tests_required};
use crate::reduction::plausibility::{PlausibilityFlag, PlausibilityInput, flags};
use crate::reduction::verdict::{Reference, SpecLimits, judge_test, reference_for_coarse_fraction};
use crate::reduction::{Density, WaterContent};

/// One test as judged inside its lot.
#[derive(Debug, Clone, Serialize)]
pub struct TestLine {
    pub test: db::field_tests::FieldTest,
    /// MDD the test was judged against (oversize-corrected when it carries a coarse fraction).
    pub reference_mdd_kg_m3: Option<f64>,
    /// OMC the test was judged against.
    pub reference_omc_pct: Option<f64>,
    pub relative_compaction_pct: Option<f64>,
    pub moisture_deviation_pct: Option<f64>,
    /// Air voids, percent, when the clause sets a maximum.
    pub air_voids_pct: Option<f64>,
    pub passed: bool,
    /// "counted", "voided", "superseded", "cannot_be_judged" or "earlier_sample".
    pub standing: Standing,
    /// Why the test cannot be judged, when it cannot.
    pub unjudged_reason: Option<String>,
    /// Named plausibility warnings (probe depth, zero air voids, RC above the plausible limit).
    pub flags: Vec<PlausibilityFlag>,
    /// The clause's coarse water content, percent, when the oversize correction assumed it.
    pub coarse_water_assumed_pct: Option<f64>,
    pub superseded_by: Option<String>,
    pub retest_of_number: Option<String>,
    pub reasons: Vec<String>,
    /// The one-point check the test was judged against instead of the lot's curve, when one is.
    pub one_point_code: Option<String>,
    /// The test's nearest planned location, when the lot has a plan.
    pub plan_match: Option<crate::reduction::sampling::PlanMatch>,
}

impl TestLine {
    /// The test's result in one word: pass, fail, void, superseded, unjudged or resampled.
    pub fn result(&self) -> crate::domain::TestResult {
        use crate::domain::TestResult;
        match self.standing {
            Standing::Voided => TestResult::Void,
            Standing::Superseded => TestResult::Superseded,
            Standing::EarlierSample => TestResult::Resampled,
            _ if self.unjudged_reason.is_some() => TestResult::Unjudged,
            _ if self.passed => TestResult::Pass,
            _ => TestResult::Fail,
        }
    }

    /// What a reader is told beside the result: "cannot be judged: reason", the flags,
    /// then the test's instrument (see [`instrument_cautions`]).
    pub fn cautions(&self) -> Vec<String> {
        let mut out = self.cautions_without_instrument();
        out.extend(instrument_cautions(&self.test));
        out
    }

    /// [`Self::cautions`] without the instrument's lines (the certificate prints those last).
    pub fn cautions_without_instrument(&self) -> Vec<String> {
        let mut out = Vec::new();
        if let Some(r) = &self.unjudged_reason {
            out.push(format!("cannot be judged: {r}"));
        }
        out.extend(self.flags.iter().map(|f| format!("flag: {}", f.message)));
        if let Some(av) = self.air_voids_pct {
            out.push(format!("air voids {av:.2} %"));
        }
        if let Some(w) = self.coarse_water_assumed_pct {
            out.push(format!(
                "coarse water content assumed {w:.1} % (clause default)"
            ));
        }
        if let Some(code) = &self.one_point_code {
            out.push(format!("reference: one-point check {code}"));
        }
        if let Some(m) = self.plan_match.filter(|m| m.misplaced) {
            out.push(super::planning::misplaced_words(&m));
        }
        out
    }
}

/// What a reader is told of a test's instrument: not recorded, its evidence (calibration,
/// that day's standard count, an override) and any offsets applied. A test out of check
/// says so through its "cannot be judged" reason.
pub fn instrument_cautions(t: &db::field_tests::FieldTest) -> Vec<String> {
    use crate::reduction::instruments::InstrumentCheck;
    let mut out = Vec::new();
    match t.instrument_check {
        InstrumentCheck::NotRecorded => out.push(InstrumentCheck::NotRecorded.label().to_string()),
        InstrumentCheck::InCheck => {
            out.extend(t.instrument_note.iter().map(|n| format!("instrument: {n}")));
        }
        InstrumentCheck::OutOfCheck => {}
    }
    if t.density_offset_kg_m3.is_some() || t.moisture_offset_pct.is_some() {
        out.push(format!(
            "gauge offsets applied: density {:+.1} kg/m³, moisture {:+.2} % (raw reading kept)",
            t.density_offset_kg_m3.unwrap_or(0.0),
            t.moisture_offset_pct.unwrap_or(0.0)
        ));
    }
    out
}

/// Which of a lot's test lines a sheet page or an API answer lists; the verdict, statistics,
/// chart and counts always cover every line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TestWindow {
    /// Lines skipped from the first.
    pub offset: usize,
    /// Most lines listed.
    pub limit: usize,
}

impl TestWindow {
    /// Rows on one page of the lot sheet.
    pub const SHEET_ROWS: usize = 500;
    /// Lines of an API lot report when the caller names no limit (a lot of up to this many
    /// tests is answered whole, as before the limit).
    pub const API_DEFAULT: Self = Self {
        offset: 0,
        limit: 1000,
    };
    /// The most lines one API lot report lists.
    pub const API_MAX_LIMIT: usize = 10_000;

    /// Page `page` (from 1) of the lot sheet.
    pub fn sheet_page(page: usize) -> Self {
        Self {
            offset: page.saturating_sub(1).saturating_mul(Self::SHEET_ROWS),
            limit: Self::SHEET_ROWS,
        }
    }

    /// The lines of `total` inside the window (empty when it starts past the end).
    pub fn range(self, total: usize) -> std::ops::Range<usize> {
        let from = self.offset.min(total);
        from..from.saturating_add(self.limit).min(total)
    }
}

impl LotReport {
    /// The lines inside a window.
    pub fn lines_in(&self, w: TestWindow) -> &[TestLine] {
        &self.tests[w.range(self.tests.len())]
    }

    /// Ids of the tests that have a retest not voided (the sheet offers no second retest).
    pub fn tests_with_live_retest(&self) -> HashSet<i64> {
        self.tests
            .iter()
            .filter(|l| l.test.void_reason.is_none())
            .filter_map(|l| l.test.retest_of)
            .collect()
    }
}

/// The statistics and verdict of a lot under its clause's rule.
#[derive(Debug, Clone, Serialize, serde::Deserialize)]
pub struct Verdict {
    pub rule: String,
    pub rule_label: String,
    pub n: usize,
    pub mean: Option<f64>,
    pub std_dev: Option<f64>,
    pub min: Option<f64>,
    pub max: Option<f64>,
    pub quality_index: Option<f64>,
    pub pwl: Option<f64>,
    /// How moisture is judged, in words.
    pub moisture_judgement: String,
    /// The clause's moisture window in its own terms, e.g. "−2.0 to +2.0 points of optimum".
    pub moisture_window: String,
    /// The clause's air-voids maximum in words, when it sets one.
    pub air_voids_limit: Option<String>,
    /// Two-sided moisture percent within limits, when the clause judges moisture so.
    pub moisture_pwl: Option<f64>,
    /// Tests that stand for their location but cannot be judged.
    pub unjudged: usize,
    pub accepted: bool,
    pub reasons: Vec<String>,
}

/// A lot and everything judged about it.
#[derive(Debug, Clone, Serialize)]
pub struct LotReport {
    pub lot: db::lots::Lot,
    pub project: db::projects::Project,
    pub clause: db::clauses::Clause,
    pub source: db::sources::Source,
    pub lab_test: db::lab_tests::LabTest,
    pub tests: Vec<TestLine>,
    /// Tests entered on the lot, voided and superseded ones included (kept when a
    /// whole-project summary drops the lines themselves).
    pub tests_entered: usize,
    pub verdict: Verdict,
    pub length_m: f64,
    pub width_m: f64,
    pub area_m2: f64,
    pub tests_required: u32,
    pub tests_owed: u32,
    /// Numbers of failed tests that still need a passing retest.
    pub failing_without_retest: Vec<String>,
    /// The state a reader sees: open, owed_tests, failing, submitted, accepted, rejected or certified.
    pub display_state: DisplayState,
    /// What must happen before the lot can be submitted (empty when it can).
    pub submit_blockers: Vec<String>,
    pub certificate: Option<db::certificates::Certificate>,
    /// False when the record changed after the current certificate was issued.
    pub certificate_current: bool,
    /// A hash of everything the verdict depends on; a certificate records it when issued.
    pub fingerprint: String,
}

/// The reference (MDD, OMC) of a stored lab test.
pub fn reference_of(lab: &db::lab_tests::LabTest) -> Result<Reference> {
    let mdd = Density::new(lab.max_dry_density_kg_m3)
        .map_err(|e| anyhow::anyhow!("stored MDD of lab test {} is invalid: {e}", lab.id))?;
    let omc = WaterContent::new(lab.optimum_water_content_pct)
        .map_err(|e| anyhow::anyhow!("stored OMC of lab test {} is invalid: {e}", lab.id))?;
    Ok(Reference {
        max_dry_density: mdd,
        optimum_water_content: omc,
        specific_gravity: crate::reduction::SpecificGravity::new(lab.specific_gravity).ok(),
    })
}

/// The limits of a stored clause (an unknown stored moisture basis is an error, not a guess).
pub fn limits_of(c: &db::clauses::Clause) -> anyhow::Result<SpecLimits> {
    Ok(SpecLimits {
        rc_min_pct: c.rc_min_pct,
        moisture: super::moisture_terms::window_of(c)?,
        max_air_voids_pct: c.max_air_voids_pct,
        rounding: rounding_of(c),
    })
}

/// The comparison convention of a stored clause.
pub fn rounding_of(c: &db::clauses::Clause) -> crate::reduction::rounding::Rounding {
    crate::reduction::rounding::Rounding {
        method: c.rounding,
        decimals: u32::try_from(c.limit_decimals.clamp(0, 3)).unwrap_or(1),
    }
}

/// The coarse water content an oversize correction uses: the test's own, else the clause's
/// default (then shown as assumed); an error reason when neither is known.
fn assumed_coarse_water(
    t: &db::field_tests::FieldTest,
    clause: &db::clauses::Clause,
) -> std::result::Result<f64, String> {
    t.coarse_water_content_pct
        .or(clause.coarse_water_default_pct)
        .ok_or_else(|| {
            format!(
                "no coarse water content was recorded and clause {} assumes none",
                clause.code
            )
        })
}

/// The coarse water content assumed for a corrected test that recorded none.
fn coarse_water_assumed(
    t: &db::field_tests::FieldTest,
    clause: &db::clauses::Clause,
) -> Option<f64> {
    if t.coarse_pct.is_some_and(|c| c > 0.0) && t.coarse_water_content_pct.is_none() {
        clause.coarse_water_default_pct
    } else {
        None
    }
}

/// Judges one test against the lot's reference and limits.
fn judge_line(
    t: &db::field_tests::FieldTest,
    reference: &Reference,
    limits: &SpecLimits,
    source: &db::sources::Source,
    clause: &db::clauses::Clause,
) -> (
    Option<Reference>,
    Option<crate::reduction::verdict::TestVerdict>,
    Vec<String>,
) {
    let reference = match t.coarse_pct {
        Some(c) if c > 0.0 => match (source.gs_coarse, assumed_coarse_water(t, clause)) {
            (_, Err(reason)) => return (None, None, vec![reason]),
            (Some(gs), Ok(coarse_w)) => match reference_for_coarse_fraction(
                reference,
                c,
                gs,
                coarse_w,
                clause.oversize_limit_pct,
            ) {
                Ok(r) => r,
                Err(e) => {
                    return (
                        None,
                        None,
                        vec![format!("cannot correct for oversize: {e}")],
                    );
                }
            },
            (None, _) => {
                return (
                    None,
                    None,
                    vec![
                        "the source has no coarse-fraction Gs; oversize correction impossible"
                            .into(),
                    ],
                );
            }
        },
        _ => *reference,
    };
    let (Ok(dry), Ok(w)) = (
        Density::new(t.dry_density_kg_m3),
        WaterContent::new(t.water_content_pct),
    ) else {
        return (
            Some(reference),
            None,
            vec!["stored reduced values are out of range".into()],
        );
    };
    let v = judge_test(dry, w, &reference, limits);
    let reasons = v.reasons.clone();
    (Some(reference), Some(v), reasons)
}

/// Why a test recorded from an instrument out of check cannot be judged (None otherwise):
/// it stays on record, out of the statistics, and blocks submission.
fn out_of_check(t: &db::field_tests::FieldTest) -> Option<String> {
    use crate::reduction::instruments::InstrumentCheck;
    (t.instrument_check == InstrumentCheck::OutOfCheck).then(|| {
        format!(
            "instrument out of check ({})",
            t.instrument_note.as_deref().unwrap_or("no record")
        )
    })
}

/// Builds the report of a lot from the store.
#[tracing::instrument(skip(pool))]
pub async fn build(pool: &Pool, lot_id: i64) -> Result<LotReport> {
    let lot = db::lots::get(pool, lot_id)
        .await?
        .ok_or_else(|| AppError::not_found("lot_id", format!("lot {lot_id} does not exist")))?;
    let missing = |what: &str| anyhow::anyhow!("lot {lot_id} refers to a missing {what}");
    let project = db::projects::get(pool, lot.project_id)
        .await?
        .ok_or_else(|| missing("project"))?;
    let (clause, source, lab_test) = super::field::rule_rows(pool, &lot).await?;
    let tests = db::field_tests::for_lot(pool, lot_id).await?;
    let certificate = db::certificates::for_lot(pool, lot_id)
        .await?
        .into_iter()
        .find(|c| c.superseded_at.is_none());
    let extras = super::planning::LotExtras::for_lot(pool, &lot).await?;
    assemble(
        lot,
        project,
        clause,
        source,
        lab_test,
        tests,
        certificate,
        &extras,
    )
}

/// A test judged: the reference it was judged against, its verdict, and why it has none.
type Judged = (
    Option<Reference>,
    Option<crate::reduction::verdict::TestVerdict>,
    Vec<String>,
);

/// Every test judged against its own reference (one-point, where the clause allows) or
/// the lot's; a test out of instrument check is not judged.
fn judge_tests(
    tests: &[db::field_tests::FieldTest],
    reference: &Reference,
    limits: &SpecLimits,
    source: &db::sources::Source,
    clause: &db::clauses::Clause,
    extras: &super::planning::LotExtras,
) -> Vec<Judged> {
    tests
        .iter()
        .map(|t| match out_of_check(t) {
            Some(reason) => (None, None, vec![reason]),
            None => {
                let own = extras.reference_of_test(t.id, reference.specific_gravity);
                judge_line(t, own.as_ref().unwrap_or(reference), limits, source, clause)
            }
        })
        .collect()
}

/// The lot acceptance's view of each judged test.
fn lot_inputs(
    lot: &db::lots::Lot,
    tests: &[db::field_tests::FieldTest],
    judged: &[Judged],
) -> Vec<LotTestInput> {
    tests
        .iter()
        .zip(judged)
        .map(|(t, (_, v, reasons))| LotTestInput {
            id: t.id,
            label: t.number.clone(),
            // A test that cannot be judged carries no figure: NaN never passes for 0 %.
            relative_compaction_pct: v.as_ref().map_or(f64::NAN, |v| v.relative_compaction_pct),
            moisture_measure: v.as_ref().map_or(f64::NAN, |v| v.moisture_measure),
            air_voids_ok: v.as_ref().is_none_or(|v| v.air_voids_ok),
            passed: v.as_ref().is_some_and(|v| v.passed),
            voided: t.void_reason.is_some(),
            retest_of: t.retest_of,
            tested_at: t.tested_at.clone(),
            unjudged: v.is_none().then(|| reasons.join("; ")),
            earlier_sample: lot.sample_after_test_id.is_some_and(|after| t.id <= after),
        })
        .collect()
}

/// The rows a lot's set-up gives every test line, and its tests' numbers and standings
/// by id (looked up once per line: a lot may hold tens of thousands of tests).
struct LineContext<'a> {
    lot: &'a db::lots::Lot,
    lab_test: &'a db::lab_tests::LabTest,
    clause: &'a db::clauses::Clause,
    numbers: HashMap<i64, &'a str>,
    standings: HashMap<i64, &'a TestStanding>,
    extras: &'a super::planning::LotExtras,
}

impl LineContext<'_> {
    fn number_of(&self, id: i64) -> Option<String> {
        self.numbers.get(&id).map(|n| n.to_string())
    }

    /// How a test stands in the lot's verdict, and the retest superseding it.
    fn standing(&self, t: &db::field_tests::FieldTest) -> (Standing, Option<String>) {
        match self.standings.get(&t.id).copied() {
            Some(TestStanding::Voided) => (Standing::Voided, None),
            Some(TestStanding::Superseded { by }) => (Standing::Superseded, self.number_of(*by)),
            Some(TestStanding::CannotBeJudged) => (Standing::CannotBeJudged, None),
            Some(TestStanding::EarlierSample) => (Standing::EarlierSample, None),
            _ if t.void_reason.is_some() => (Standing::Voided, None),
            _ => (Standing::Counted, None),
        }
    }

    fn line(&self, t: &db::field_tests::FieldTest, judged: Judged) -> TestLine {
        let (r, v, reasons) = judged;
        let (standing, superseded_by) = self.standing(t);
        let rc = v.as_ref().map(|v| v.relative_compaction_pct);
        TestLine {
            unjudged_reason: v.is_none().then(|| reasons.join("; ")),
            flags: flags_of(t, self.lot, self.lab_test, self.clause, rc),
            coarse_water_assumed_pct: coarse_water_assumed(t, self.clause),
            test: t.clone(),
            reference_mdd_kg_m3: r.as_ref().map(|r| r.max_dry_density.kg_m3()),
            reference_omc_pct: r.as_ref().map(|r| r.optimum_water_content.pct()),
            relative_compaction_pct: rc,
            moisture_deviation_pct: v.as_ref().map(|v| v.moisture_deviation_pct),
            air_voids_pct: v.as_ref().and_then(|v| v.air_voids_pct),
            passed: v.as_ref().is_some_and(|v| v.passed),
            standing,
            superseded_by,
            retest_of_number: t.retest_of.and_then(|id| self.number_of(id)),
            reasons,
            one_point_code: self.extras.one_point_of(t.id).map(|c| c.code.clone()),
            plan_match: self.extras.match_test(t),
        }
    }
}

/// What a lot still owes and why it cannot be submitted yet.
struct Owing {
    required: u32,
    owed: u32,
    failing_without_retest: Vec<String>,
}

impl LineContext<'_> {
    /// The tests a lot of this size owes under its clause's frequency, and its failures
    /// still waiting for a passing retest.
    fn owing(&self, length_m: f64, width_m: f64, lv: &LotVerdict) -> Owing {
        let clause = self.clause;
        let frequency = FrequencyRule {
            min_per_lot: u32::try_from(clause.min_tests_per_lot).unwrap_or(1),
            area_per_test_m2: clause.area_per_test_m2,
            length_per_test_m: clause.length_per_test_m,
        };
        let required = tests_required(&frequency, length_m, width_m);
        Owing {
            required,
            owed: tests_owed(required, lv.n),
            failing_without_retest: lv
                .failing_without_retest
                .iter()
                .filter_map(|id| self.number_of(*id))
                .collect(),
        }
    }
}

/// Whether a certificate was issued for the record as it stands now (and not withdrawn).
fn issued_for(certificate: Option<&db::certificates::Certificate>, fingerprint: &str) -> bool {
    certificate.is_some_and(|c| c.withdrawn_at.is_none() && c.record_fingerprint == fingerprint)
}

/// Everything that stops a submission, in the order a QC manager would deal with it.
fn submit_blockers(
    s: &Owing,
    lv: &LotVerdict,
    lines: &[TestLine],
    clause: &db::clauses::Clause,
    lab_test: &db::lab_tests::LabTest,
) -> Vec<String> {
    let mut blockers = Vec::new();
    if s.owed > 0 {
        blockers.push(format!(
            "{} more test{} owed: {} required, {} counted",
            s.owed,
            if s.owed == 1 { " is" } else { "s are" },
            s.required,
            lv.n
        ));
    }
    // Under every_test a failure needs its passing retest; the other rules tolerate
    // some low tests and let the lot verdict decide.
    let failing = &s.failing_without_retest;
    if !failing.is_empty() && clause.rule == Rule::EveryTest {
        blockers.push(format!(
            "failed test{} without a passing retest: {}",
            if failing.len() == 1 { "" } else { "s" },
            failing.join(", ")
        ));
    }
    for l in lines
        .iter()
        .filter(|l| l.standing == Standing::CannotBeJudged)
    {
        blockers.push(format!(
            "test {} cannot be judged: {}; void it or retest",
            l.test.number,
            l.unjudged_reason.as_deref().unwrap_or("no usable figures")
        ));
    }
    if lab_test.approval == super::reference::Approval::NeedsApproval {
        blockers.push(format!(
            "the reference curve {} awaits a QC manager's approval: {}",
            lab_test.code,
            super::reference::concern_messages(lab_test).join("; ")
        ));
    }
    if !lv.accepted && lv.n > 0 && s.owed == 0 {
        blockers.push(format!("the lot does not meet clause {}", clause.code));
        blockers.extend(lv.reasons.iter().cloned());
    } else if lv.n == 0 && s.owed == 0 {
        blockers.push("the lot has no counted tests".to_string());
    }
    blockers
}

/// The state shown for a lot: its stored state, told apart further for open and
/// accepted lots.
fn display_state(
    lot: &db::lots::Lot,
    certified: bool,
    s: &Owing,
    every_test: bool,
    accepted: bool,
) -> DisplayState {
    DisplayState::of(
        lot.state,
        crate::domain::Judged {
            certificate_current: certified,
            failing: !s.failing_without_retest.is_empty() && (every_test || !accepted),
            owed: s.owed > 0,
        },
    )
}

/// The lot verdict in the report's words.
fn verdict_of(
    rule: &crate::reduction::acceptance::AcceptanceRule,
    moisture: &crate::reduction::acceptance::MoistureJudgement,
    limits: &SpecLimits,
    lv: LotVerdict,
) -> Verdict {
    Verdict {
        rule: rule.code().to_string(),
        rule_label: rule.label(),
        n: lv.n,
        mean: lv.mean,
        std_dev: lv.std_dev,
        min: lv.min,
        max: lv.max,
        quality_index: lv.quality_index,
        pwl: lv.pwl,
        moisture_judgement: moisture.label(),
        moisture_window: limits.moisture_window_words(),
        air_voids_limit: limits
            .max_air_voids_pct
            .map(|m| format!("at most {} %", limits.rounding.limit_text(m))),
        moisture_pwl: lv.moisture_pwl,
        unjudged: lv.unjudged.len(),
        accepted: lv.accepted,
        reasons: lv.reasons,
    }
}

/// The lot's fingerprint with its one-point references, where it has any.
fn fingerprint_with(
    lot: &db::lots::Lot,
    clause: &db::clauses::Clause,
    lab_test: &db::lab_tests::LabTest,
    tests: &[db::field_tests::FieldTest],
    extras: &super::planning::LotExtras,
) -> String {
    let fingerprint = fingerprint(lot, clause, lab_test, tests);
    match extras.fingerprint_part() {
        // Only a lot with one-point references changes its fingerprint, so older
        // certificates stay current.
        Some(extra) => format!("{:x}", Sha256::digest(format!("{fingerprint}|{extra}"))),
        None => fingerprint,
    }
}

/// Judges a lot from already-loaded rows (also used for bulk views). `extras` holds the
/// one-point references of its tests (where the clause allows) and its current plan.
#[allow(clippy::too_many_arguments)]
pub fn assemble(
    lot: db::lots::Lot,
    project: db::projects::Project,
    clause: db::clauses::Clause,
    source: db::sources::Source,
    lab_test: db::lab_tests::LabTest,
    tests: Vec<db::field_tests::FieldTest>,
    certificate: Option<db::certificates::Certificate>,
    extras: &super::planning::LotExtras,
) -> Result<LotReport> {
    let reference = reference_of(&lab_test)?;
    let limits = limits_of(&clause)?;
    let rule = clause_rule(&clause)?;
    let moisture = clause_moisture(&clause);
    let judged = judge_tests(&tests, &reference, &limits, &source, &clause, extras);
    let lv = evaluate_lot_with(
        &lot_inputs(&lot, &tests, &judged),
        &rule,
        &limits,
        &moisture,
    );
    let cx = LineContext {
        lot: &lot,
        lab_test: &lab_test,
        clause: &clause,
        numbers: tests.iter().map(|t| (t.id, t.number.as_str())).collect(),
        standings: lv.standings.iter().map(|(id, s)| (*id, s)).collect(),
        extras,
    };
    let lines: Vec<TestLine> = tests
        .iter()
        .zip(judged)
        .map(|(t, j)| cx.line(t, j))
        .collect();

    let length_m = lot.chainage_to_m - lot.chainage_from_m;
    let width_m = lot.offset_right_m - lot.offset_left_m;
    let standing = cx.owing(length_m, width_m, &lv);
    let submit_blockers = submit_blockers(&standing, &lv, &lines, &clause, &lab_test);

    let fingerprint = fingerprint_with(&lot, &clause, &lab_test, &tests, extras);
    let certificate_current = issued_for(certificate.as_ref(), &fingerprint);
    let certified = certificate.is_some() && certificate_current;
    let every_test = clause.rule == Rule::EveryTest;
    let display_state = display_state(&lot, certified, &standing, every_test, lv.accepted);
    let verdict = verdict_of(&rule, &moisture, &limits, lv);
    Ok(LotReport {
        lot,
        project,
        clause,
        source,
        lab_test,
        tests_entered: lines.len(),
        tests: lines,
        verdict,
        length_m,
        width_m,
        area_m2: length_m * width_m,
        tests_required: standing.required,
        tests_owed: standing.owed,
        failing_without_retest: standing.failing_without_retest,
        display_state,
        submit_blockers,
        certificate,
        certificate_current,
        fingerprint,
    })
}

/// A SHA-256 over every input of the verdict, so a later change to the record is noticed.
fn fingerprint(
    lot: &db::lots::Lot,
    clause: &db::clauses::Clause,
    lab: &db::lab_tests::LabTest,
    tests: &[db::field_tests::FieldTest],
) -> String {
    let mut h = Sha256::new();
    h.update(format!(
        "lot {} {} {} {} {}|clause {} {} {} {} {} {:?} {:?}|lab {} {} {}|",
        lot.id,
        lot.chainage_from_m,
        lot.chainage_to_m,
        lot.offset_left_m,
        lot.offset_right_m,
        clause.id,
        clause.rc_min_pct,
        clause.moisture_below_pct,
        clause.moisture_above_pct,
        clause.rule,
        clause.allowance_pct,
        clause.min_pwl_pct,
        lab.id,
        lab.max_dry_density_kg_m3,
        lab.optimum_water_content_pct
    ));
    // Terms added later enter only when they differ from what older records meant, so a
    // certificate issued before them stays current.
    if let Some(after) = lot.sample_after_test_id {
        h.update(format!("sample {} after {after}|", lot.sample));
    }
    if clause.moisture_judgement != crate::domain::MoistureMode::PerTest {
        h.update(format!(
            "moisture {} {:?}|",
            clause.moisture_judgement, clause.moisture_min_pwl_pct
        ));
    }
    for t in tests {
        h.update(format!(
            "t {} {} {} {} {:?} {:?} {:?}|",
            t.id,
            t.number,
            t.dry_density_kg_m3,
            t.water_content_pct,
            t.coarse_pct,
            t.retest_of,
            t.void_reason
        ));
        if t.instrument_check == crate::reduction::instruments::InstrumentCheck::OutOfCheck {
            h.update("instrument out of check|");
        }
    }
    hex::encode(h.finalize())
}

/// One newly stored test judged on its own (a new test always counts; only a later
/// retest can supersede it), without loading the rest of its lot.
pub async fn judge_new(pool: &Pool, t: &db::field_tests::FieldTest) -> Result<TestLine> {
    let lot = db::lots::get(pool, t.lot_id)
        .await?
        .ok_or_else(|| AppError::not_found("lot_id", format!("lot {} does not exist", t.lot_id)))?;
    let (clause, source, lab) = super::field::rule_rows(pool, &lot).await?;
    let retest_of_number = match t.retest_of {
        Some(id) => db::field_tests::get(pool, id).await?.map(|o| o.number),
        None => None,
    };
    judge_alone(t, &lot, &clause, &source, &lab, retest_of_number)
}

/// One newly stored test judged on its own, from its lot's already-loaded rows.
pub fn judge_alone(
    t: &db::field_tests::FieldTest,
    lot: &db::lots::Lot,
    clause: &db::clauses::Clause,
    source: &db::sources::Source,
    lab: &db::lab_tests::LabTest,
    retest_of_number: Option<String>,
) -> Result<TestLine> {
    let reference = reference_of(lab)?;
    let (r, v, reasons) = match out_of_check(t) {
        Some(reason) => (None, None, vec![reason]),
        None => judge_line(t, &reference, &limits_of(clause)?, source, clause),
    };
    let rc = v.as_ref().map(|v| v.relative_compaction_pct);
    Ok(TestLine {
        unjudged_reason: v.is_none().then(|| reasons.join("; ")),
        flags: flags_of(t, lot, lab, clause, rc),
        coarse_water_assumed_pct: coarse_water_assumed(t, clause),
        test: t.clone(),
        reference_mdd_kg_m3: r.as_ref().map(|r| r.max_dry_density.kg_m3()),
        reference_omc_pct: r.as_ref().map(|r| r.optimum_water_content.pct()),
        relative_compaction_pct: v.as_ref().map(|v| v.relative_compaction_pct),
        moisture_deviation_pct: v.as_ref().map(|v| v.moisture_deviation_pct),
        air_voids_pct: v.as_ref().and_then(|v| v.air_voids_pct),
        passed: v.as_ref().is_some_and(|v| v.passed),
        standing: if t.void_reason.is_some() {
            Standing::Voided
        } else if v.is_none() {
            Standing::CannotBeJudged
        } else {
            Standing::Counted
        },
        superseded_by: None,
        retest_of_number,
        reasons,
        one_point_code: None,
        plan_match: None,
    })
}

/// The probe depth of a nuclear test: the gauge reading's, else the test's depth.
fn nuclear_probe_depth_mm(t: &db::field_tests::FieldTest) -> Option<f64> {
    #[derive(serde::Deserialize)]
    struct Probe {
        probe_depth_mm: Option<f64>,
    }
    if t.method != crate::domain::Method::Nuclear {
        return None;
    }
    serde_json::from_str::<Probe>(&t.readings_json)
        .ok()
        .and_then(|p| p.probe_depth_mm)
        .or(t.depth_mm)
}

/// The plausibility flags of a test in its lot (layer thickness, the curve's Gs, the clause's
/// plausible RC limit); the one source for entry answers, previews, lot sheets and certificates.
pub fn flags_of(
    t: &db::field_tests::FieldTest,
    lot: &db::lots::Lot,
    lab: &db::lab_tests::LabTest,
    clause: &db::clauses::Clause,
    relative_compaction_pct: Option<f64>,
) -> Vec<PlausibilityFlag> {
    let layer_thickness_mm = lot.layer_thickness_mm;
    flags(&PlausibilityInput {
        nuclear_probe_depth_mm: layer_thickness_mm.and(nuclear_probe_depth_mm(t)),
        layer_thickness_mm,
        dry_density_kg_m3: t.dry_density_kg_m3,
        water_content_pct: t.water_content_pct,
        specific_gravity: crate::reduction::SpecificGravity::new(lab.specific_gravity).ok(),
        relative_compaction_pct,
        rc_plausible_max_pct: clause.rc_plausible_max_pct,
    })
}
