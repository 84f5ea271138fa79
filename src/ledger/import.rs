//! Bulk import of field tests: every row checked by the same rules as single entry
//! ([`field::check_loaded`]), a dry run that writes nothing, and a commit that writes
//! every row or none in one transaction.
//!
//! Rows arrive from a [`RowSource`] (a CSV file in `crate::transfer`, or the large-project
//! generator) and are processed in chunks, so memory stays flat in the size of the file:
//! only the problems (capped at [`MAX_PROBLEMS`]) and one small entry per test number
//! seen are kept. Re-importing a file creates nothing: a row whose number is stored with
//! identical content is skipped; a number stored with different content is a conflict,
//! reported, and blocks the commit (nothing is overwritten).
//!
//! Audit: one row per import (file name, size, SHA-256, counts per lot, the range of ids
//! created; ids of one import are consecutive) — [`AuditMode::PerImport`], the default.
//! [`AuditMode::PerTest`] adds the single-entry audit row of every test; it costs about
//! half the import throughput (see docs/performance.md), so it is an option.

use std::collections::hash_map::DefaultHasher;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::hash::{Hash, Hasher};
use std::time::Instant;

use serde::{Deserialize, Serialize};
use serde_json::json;

use super::Actor;
use super::field::{self, FieldTestInput, LotContext, RetestTarget, Spot};
use super::lot_report::reference_of;
use super::setup::{self, LabPointInput, LabTestInput};
use crate::clock;
use crate::db::{self, Pool, audit, bulk, field_tests::FieldTest};
use crate::error::{AppError, Result};

/// Most problems listed in a report; the rest are counted.
pub const MAX_PROBLEMS: usize = 10_000;
/// Rows read before their numbers are looked up in one query.
const CHUNK_ROWS: usize = 512;
/// Rows checked between two chances for the concurrent insert to move on.
const YIELD_ROWS: usize = 32;

/// One thing wrong with one row (or, at row 1, with the header or the mapping).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowProblem {
    /// Line of the file where the row starts (the header is line 1), as a spreadsheet shows it.
    pub row: u64,
    /// The file's column name ("" when the problem is not one column's).
    pub column: String,
    /// The cell as written (cut to 200 characters).
    pub value: String,
    pub reason: String,
}

impl RowProblem {
    /// A problem with a cell.
    pub fn new(row: u64, column: &str, value: &str, reason: impl Into<String>) -> Self {
        let value = if value.chars().count() > 200 {
            let cut: String = value.chars().take(200).collect();
            format!("{cut}…")
        } else {
            value.to_string()
        };
        Self {
            row,
            column: column.to_string(),
            value,
            reason: reason.into(),
        }
    }
}

/// Finds the file column and cell behind a field named by the ledger's validation.
pub trait CellLocator: Send + Sync {
    /// (column name, cell text) for a ledger field such as `chainage_m` or `readings.wet_density_kg_m3`.
    fn locate(&self, field: &str, method: &str) -> (String, String);
}

/// One row read and parsed, ready to be checked.
pub struct ImportRow {
    /// Line of the file where the row starts.
    pub row: u64,
    /// Lot code; may be absent on a retest (the failed test's lot is used).
    pub lot: Option<String>,
    /// Number of the failed test this row retests.
    pub retest_of: Option<String>,
    pub input: FieldTestInput,
    /// Where the row's values came from, to name columns in problems (none for generated rows).
    pub cells: Option<Box<dyn CellLocator>>,
}

impl ImportRow {
    fn locate(&self, field: &str) -> (String, String) {
        match &self.cells {
            Some(c) => c.locate(field, self.input.readings.method_code()),
            None => (field.to_string(), String::new()),
        }
    }

    fn problem(&self, field: &str, reason: impl Into<String>) -> RowProblem {
        let (column, value) = self.locate(field);
        RowProblem::new(self.row, &column, &value, reason)
    }
}

/// A row, or everything wrong with it before it could be read as a test.
pub type RowResult = std::result::Result<ImportRow, Vec<RowProblem>>;

/// Name, size and digest of what a source read.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct SourceOrigin {
    pub file_name: String,
    pub bytes: u64,
    /// SHA-256 of every byte read, hex; complete once the source is exhausted.
    pub sha256: String,
}

/// Where import rows come from.
pub trait RowSource: Send {
    /// The next row, or `None` at the end.
    fn next_row(&mut self) -> Option<RowResult>;
    /// What was read so far (complete after the last row).
    fn origin(&self) -> SourceOrigin;
}

/// How an import is audited.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AuditMode {
    /// One audit row for the import, with the range of ids created.
    #[default]
    PerImport,
    /// The import's row plus one row per test created, as single entry writes.
    PerTest,
}

/// What an import run does.
#[derive(Debug, Clone)]
pub struct ImportOptions {
    /// False: a dry run (nothing written). True: write every row or none.
    pub commit: bool,
    pub audit: AuditMode,
    pub actor: Actor,
}

/// What an import found, and what it created or would create.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ImportReport {
    pub origin: SourceOrigin,
    /// True when a commit went through: every new row written (none when nothing was new).
    pub committed: bool,
    /// Data rows read (header not counted).
    pub rows: u64,
    /// Tests created (commit) or that a commit would create (dry run).
    pub new_tests: u64,
    /// How many of the new tests are retests.
    pub new_retests: u64,
    /// New tests per lot code.
    pub new_per_lot: BTreeMap<String, u64>,
    /// Rows whose number is stored already with identical content (skipped).
    pub skipped_identical: u64,
    /// Rows repeating an earlier row of the file exactly (skipped).
    pub skipped_repeated: u64,
    /// Rows whose number is stored or earlier in the file with different content.
    pub conflicts: u64,
    /// Rows with at least one problem (conflicts included).
    pub rows_with_problems: u64,
    /// Problems, in file order, at most [`MAX_PROBLEMS`].
    pub problems: Vec<RowProblem>,
    /// Problems found beyond those listed.
    pub problems_not_listed: u64,
    /// First and last id created (consecutive), when committed and not empty.
    pub created_ids: Option<(i64, i64)>,
    pub audit: AuditMode,
    /// Wall time of the run, milliseconds.
    pub elapsed_ms: u64,
}

impl ImportReport {
    /// True when a commit of this file would be (or was) refused.
    pub fn refused(&self) -> bool {
        self.rows_with_problems > 0
    }

    fn add_problems(&mut self, problems: Vec<RowProblem>) {
        if problems.is_empty() {
            return;
        }
        self.rows_with_problems += 1;
        for p in problems {
            if self.problems.len() < MAX_PROBLEMS {
                self.problems.push(p);
            } else {
                self.problems_not_listed += 1;
            }
        }
    }

    /// A one-paragraph account for people (the command line prints it).
    pub fn summary(&self) -> String {
        let mut s = format!(
            "{} ({} bytes, sha256 {}): {} rows; {} new tests ({} retests) on {} lots; {} already stored, {} repeated in the file; {} conflicts; {} rows with problems",
            self.origin.file_name,
            self.origin.bytes,
            self.origin.sha256,
            self.rows,
            self.new_tests,
            self.new_retests,
            self.new_per_lot.len(),
            self.skipped_identical,
            self.skipped_repeated,
            self.conflicts,
            self.rows_with_problems
        );
        s.push_str(if self.committed {
            "; committed"
        } else if self.refused() {
            "; nothing written (fix the rows and import again)"
        } else {
            "; nothing written (dry run)"
        });
        if let Some((a, b)) = self.created_ids {
            s.push_str(&format!(", ids {a}–{b}"));
        }
        s
    }
}

/// What is remembered of a test number met during an import.
#[derive(Debug, Clone, Copy)]
struct Seen {
    /// Content hash of the row (0 for a stored test only referred to).
    hash: u64,
    /// Its id: stored, or the one the import gives it.
    id: i64,
    lot_id: i64,
    /// Line of its first row in the file (0 when only stored).
    row: u64,
    /// Stored before the import.
    stored: bool,
    /// A row of this file carries it.
    in_file: bool,
    passed: bool,
    voided: bool,
    /// It has a live retest (stored or in the file); its number is in `Run::retests`.
    retested: bool,
}

/// Hashes what makes two rows "the same test" (everything entered; not who or when it was imported).
fn content_hash(t: &FieldTest) -> u64 {
    let mut h = DefaultHasher::new();
    t.lot_id.hash(&mut h);
    t.number.hash(&mut h);
    t.tested_at.hash(&mut h);
    t.technician.hash(&mut h);
    t.method.hash(&mut h);
    t.instrument_serial.hash(&mut h);
    for v in [t.chainage_m, t.offset_m] {
        v.to_bits().hash(&mut h);
    }
    for v in [
        t.depth_mm,
        t.coarse_pct,
        t.coarse_water_content_pct,
        t.easting,
        t.northing,
    ] {
        v.map(f64::to_bits).hash(&mut h);
    }
    t.readings_json.hash(&mut h);
    t.retest_of.hash(&mut h);
    h.finish().max(1)
}

/// The entered fields in which two tests differ (empty when the same test).
fn differences(new: &FieldTest, stored: &FieldTest) -> Vec<&'static str> {
    let mut d = Vec::new();
    let same_f = |a: f64, b: f64| a.to_bits() == b.to_bits() || (a - b).abs() < 1e-9;
    let same_o = |a: Option<f64>, b: Option<f64>| match (a, b) {
        (Some(a), Some(b)) => same_f(a, b),
        (None, None) => true,
        _ => false,
    };
    if new.lot_id != stored.lot_id {
        d.push("lot");
    }
    if new.tested_at != stored.tested_at {
        d.push("tested_at");
    }
    if new.technician != stored.technician {
        d.push("technician");
    }
    if new.instrument_serial != stored.instrument_serial {
        d.push("instrument_serial");
    }
    if !same_f(new.chainage_m, stored.chainage_m) {
        d.push("chainage");
    }
    if !same_f(new.offset_m, stored.offset_m) {
        d.push("offset");
    }
    if !same_o(new.depth_mm, stored.depth_mm) {
        d.push("depth_mm");
    }
    if !same_o(new.coarse_pct, stored.coarse_pct)
        || !same_o(
            new.coarse_water_content_pct,
            stored.coarse_water_content_pct,
        )
    {
        d.push("coarse fraction");
    }
    if !same_o(new.easting, stored.easting) || !same_o(new.northing, stored.northing) {
        d.push("coordinates");
    }
    if new.method != stored.method {
        d.push("method");
    } else if !same_readings(&new.readings_json, &stored.readings_json) {
        d.push("readings");
    }
    if new.retest_of != stored.retest_of {
        d.push("retest_of");
    }
    d
}

fn same_readings(a: &str, b: &str) -> bool {
    if a == b {
        return true;
    }
    match (
        serde_json::from_str::<serde_json::Value>(a),
        serde_json::from_str::<serde_json::Value>(b),
    ) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Every lot of a project, by code, with what its tests are judged against.
async fn load_lots(pool: &Pool, project_id: i64) -> Result<Lots> {
    let lots = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            limit: i64::MAX,
            ..Default::default()
        },
    )
    .await?;
    let rows = super::overview::ProjectRows::load(pool, project_id).await?;
    let mut out = Lots::default();
    for lot in lots {
        let (clause, source, lab) = rows.rules_of(&lot)?;
        reference_of(&lab)?;
        out.by_code.insert(lot.code.clone(), out.all.len());
        out.by_id.insert(lot.id, out.all.len());
        out.all.push(LotContext::new(lot, clause, source, lab)?);
    }
    Ok(out)
}

/// The lots of a project, findable by code and id.
#[derive(Default)]
struct Lots {
    all: Vec<LotContext>,
    by_code: HashMap<String, usize>,
    by_id: HashMap<i64, usize>,
}

impl Lots {
    fn by_id(&self, id: i64) -> Option<&LotContext> {
        self.by_id.get(&id).map(|i| &self.all[*i])
    }
}

/// The running state of one import.
struct Run<'a> {
    project_id: i64,
    lots: &'a Lots,
    /// The instrument register as the project's tests are checked against it.
    instruments: &'a super::instruments::check::InstrumentBook,
    opts: &'a ImportOptions,
    now: String,
    next_id: i64,
    seen: HashMap<Box<str>, Seen>,
    /// Spots of failed tests (the fallback location of their retests).
    failed_spots: HashMap<Box<str>, Spot>,
    /// Failed number → number of its live retest.
    retests: HashMap<Box<str>, Box<str>>,
    /// Numbers of rows refused for problems of their own.
    refused_numbers: HashSet<Box<str>>,
    /// New tests to land with the next insert (none once the commit is refused).
    pending: Vec<FieldTest>,
    report: ImportReport,
}

/// Why a row's check stopped short of a new test.
enum Halt {
    /// The row has problems of its own (its number is remembered as refused).
    Refused(Vec<RowProblem>),
    /// The row's number is already taken by other content.
    Conflict(RowProblem),
    /// Not the row's fault: the import stops.
    Fault(AppError),
}

impl Halt {
    /// A refusal of the ledger's checks named at the row's column; a fault stays one.
    fn of(row: &ImportRow, e: AppError) -> Self {
        match e {
            AppError::Internal(_) => Halt::Fault(e),
            e => Halt::Refused(vec![row.problem(e.field(), e.user_message())]),
        }
    }
}

/// A row that passed every check, ready to be numbered and queued.
struct Checked<'a> {
    ctx: &'a LotContext,
    record: FieldTest,
    target: Option<(String, Seen)>,
    hash: u64,
}

/// Both parts of a row an import cannot do without.
fn required_fields(row: &ImportRow, number: &str) -> std::result::Result<(), Halt> {
    let mut problems = Vec::new();
    if number.is_empty() {
        problems.push(row.problem(
            "number",
            "is required in an import: a re-upload is matched by test number",
        ));
    }
    if row
        .input
        .tested_at
        .as_deref()
        .is_none_or(|t| t.trim().is_empty())
    {
        problems.push(row.problem(
            "tested_at",
            "is required in an import: when was the test taken?",
        ));
    }
    if problems.is_empty() {
        Ok(())
    } else {
        Err(Halt::Refused(problems))
    }
}

/// Most refused numbers remembered (to explain a retest of a refused row).
const MAX_REFUSED_NUMBERS: usize = 100_000;

impl<'a> Run<'a> {
    /// The state of an import before its first row; its tests are numbered from `next_id`.
    fn new(
        project_id: i64,
        lots: &'a Lots,
        instruments: &'a super::instruments::check::InstrumentBook,
        opts: &'a ImportOptions,
        next_id: i64,
    ) -> Self {
        Self {
            project_id,
            lots,
            instruments,
            opts,
            now: clock::now(),
            next_id,
            seen: HashMap::new(),
            failed_spots: HashMap::new(),
            refused_numbers: HashSet::new(),
            retests: HashMap::new(),
            pending: Vec::with_capacity(CHUNK_ROWS),
            report: ImportReport {
                audit: opts.audit,
                ..Default::default()
            },
        }
    }

    /// Remembers a stored test met as a retest target or a repeated number.
    fn remember_stored(&mut self, t: &FieldTest, stored: &Stored) -> Seen {
        if let Some(s) = self.seen.get(t.number.as_str()) {
            return *s;
        }
        let passed = self
            .lots
            .by_id(t.lot_id)
            .and_then(|ctx| field::judge(ctx, t).ok())
            .is_some_and(|v| v.passed);
        let retest = stored.live_retests.get(&t.id);
        let retested = retest.is_some();
        if let Some(r) = retest {
            self.retests
                .insert(t.number.as_str().into(), r.as_str().into());
        }
        let s = Seen {
            hash: 0,
            id: t.id,
            lot_id: t.lot_id,
            row: 0,
            stored: true,
            in_file: false,
            passed,
            voided: t.void_reason.is_some(),
            retested,
        };
        self.seen.insert(t.number.as_str().into(), s);
        if !passed {
            self.failed_spots
                .insert(t.number.as_str().into(), Spot::of(t));
        }
        s
    }

    /// Checks one row; queues it for insertion when it is new and sound. No database
    /// access: what the row needs of the store was looked up for its chunk.
    fn process(&mut self, row: ImportRow, stored: &Stored) -> Result<()> {
        let number = row
            .input
            .number
            .as_deref()
            .map(str::trim)
            .unwrap_or("")
            .to_string();
        match self.check_row(&row, &number, stored) {
            Ok(Some(checked)) => {
                self.accept(&row, number, checked);
                Ok(())
            }
            Ok(None) => Ok(()),
            Err(Halt::Refused(problems)) => {
                self.refuse(&number, problems);
                Ok(())
            }
            Err(Halt::Conflict(problem)) => {
                self.report.conflicts += 1;
                self.refuse("", vec![problem]);
                Ok(())
            }
            Err(Halt::Fault(e)) => Err(e),
        }
    }

    /// The steps of a row's check, in order; `None` for a row already stored or already
    /// met in this file with the same content (counted, nothing queued).
    fn check_row(
        &mut self,
        row: &ImportRow,
        number: &str,
        stored: &Stored,
    ) -> std::result::Result<Option<Checked<'a>>, Halt> {
        required_fields(row, number)?;
        let target = self.retest_target(row, stored)?;
        let ctx = self.lot_of(row, target.as_ref())?;
        let fallback = target
            .as_ref()
            .and_then(|(n, _)| self.failed_spots.get(n.as_str()).copied());
        let mut record = super::instruments::check::check_with_instruments(
            self.instruments,
            ctx,
            &row.input,
            fallback,
            &self.opts.actor,
            &self.now,
            super::instruments::check::Arrival::Import,
        )
        .map_err(|e| Halt::of(row, e))?
        .record;
        record.retest_of = target.as_ref().map(|(_, s)| s.id);
        let hash = content_hash(&record);
        if self.met_before(row, number, hash, &record, stored)? {
            return Ok(None);
        }
        self.retest_rules(row, ctx, target.as_ref())?;
        if let Err(e) = field::require_lot_takes_tests(&ctx.lot) {
            return Err(Halt::Refused(vec![row.problem("lot", e.user_message())]));
        }
        Ok(Some(Checked {
            ctx,
            record,
            target,
            hash,
        }))
    }

    /// The failed test a row retests, if it names one: met earlier in this file or stored.
    fn retest_target(
        &mut self,
        row: &ImportRow,
        stored: &Stored,
    ) -> std::result::Result<Option<(String, Seen)>, Halt> {
        let Some(failed) = row
            .retest_of
            .as_deref()
            .map(str::trim)
            .filter(|s| !s.is_empty())
        else {
            return Ok(None);
        };
        let found = match self.seen.get(failed) {
            Some(s) => Some(*s),
            None => stored
                .tests
                .get(failed)
                .map(|t| self.remember_stored(t, stored)),
        };
        match found {
            Some(s) => Ok(Some((failed.to_string(), s))),
            None => {
                let reason = if self.refused_numbers.contains(failed) {
                    format!("test {failed} is on an earlier row that has problems of its own")
                } else {
                    format!("test {failed} is neither stored nor on an earlier row of this file")
                };
                Err(Halt::Refused(vec![row.problem("retest_of", reason)]))
            }
        }
    }

    /// The row's lot: named, or the failed test's; a retest stays on the failed test's lot.
    fn lot_of(
        &self,
        row: &ImportRow,
        target: Option<&(String, Seen)>,
    ) -> std::result::Result<&'a LotContext, Halt> {
        let lots = self.lots;
        let lot_code = row.lot.as_deref().map(str::trim).filter(|s| !s.is_empty());
        let ctx = match (lot_code, target) {
            (Some(code), _) => match lots.by_code.get(code) {
                Some(i) => &lots.all[*i],
                None => {
                    let reason = format!("lot {code} does not exist in this project");
                    return Err(Halt::Refused(vec![row.problem("lot", reason)]));
                }
            },
            (None, Some((_, s))) => lots.by_id(s.lot_id).ok_or_else(|| {
                Halt::Fault(anyhow::anyhow!("test on unknown lot {}", s.lot_id).into())
            })?,
            (None, None) => return Err(Halt::Refused(vec![row.problem("lot", "is required")])),
        };
        if let Some((failed, s)) = target
            && s.lot_id != ctx.lot.id
        {
            let other = lots
                .by_id(s.lot_id)
                .map_or("another lot".to_string(), |l| format!("lot {}", l.lot.code));
            let reason =
                format!("test {failed} is on {other}; a retest belongs to the failed test's lot");
            return Err(Halt::Refused(vec![row.problem("lot", reason)]));
        }
        Ok(ctx)
    }

    /// Whether the row's number was met before with the same content (true: counted as
    /// skipped); a conflict when the content differs. Nothing stored is overwritten.
    fn met_before(
        &mut self,
        row: &ImportRow,
        number: &str,
        hash: u64,
        record: &FieldTest,
        stored: &Stored,
    ) -> std::result::Result<bool, Halt> {
        if let Some(prev) = self.seen.get(number).copied()
            && prev.in_file
        {
            if prev.hash != hash {
                return Err(Halt::Conflict(row.problem(
                    "number",
                    format!(
                        "test number {number} is already on row {} of this file with different content",
                        prev.row
                    ),
                )));
            }
            self.report.skipped_repeated += 1;
            return Ok(true);
        }
        let Some(old) = stored.tests.get(number) else {
            return Ok(false);
        };
        let diff = differences(record, old);
        if !diff.is_empty() {
            return Err(Halt::Conflict(row.problem(
                "number",
                format!(
                    "test number {number} is already stored with a different {}; nothing is overwritten",
                    diff.join(", ")
                ),
            )));
        }
        self.report.skipped_identical += 1;
        let mut s = self.remember_stored(old, stored);
        s.hash = hash;
        s.in_file = true;
        s.row = row.row;
        self.seen.insert(number.into(), s);
        Ok(true)
    }

    /// The retest rules of single entry: a lot judged on a sample takes no retests, and
    /// only a live failed test without a retest may be retested.
    fn retest_rules(
        &self,
        row: &ImportRow,
        ctx: &LotContext,
        target: Option<&(String, Seen)>,
    ) -> std::result::Result<(), Halt> {
        let Some((failed, s)) = target else {
            return Ok(());
        };
        let refusal = field::sampled_lot_refusal(&ctx.lot, &ctx.clause).or_else(|| {
            field::retest_refusal(RetestTarget {
                number: failed,
                voided: s.voided,
                passed: s.passed,
                existing_retest: if s.retested {
                    Some(self.retests.get(failed.as_str()).map_or("", |r| r))
                } else {
                    None
                },
            })
        });
        match refusal {
            Some(e) => Err(Halt::Refused(vec![
                row.problem("retest_of", e.user_message()),
            ])),
            None => Ok(()),
        }
    }

    /// A new test: numbered, remembered for later rows, counted, and queued while the
    /// commit can still go ahead.
    fn accept(&mut self, row: &ImportRow, number: String, checked: Checked<'a>) {
        let Checked {
            ctx,
            mut record,
            target,
            hash,
        } = checked;
        let passed = field::judge(ctx, &record).is_ok_and(|v| v.passed);
        record.id = self.next_id;
        record.number = number.clone();
        self.next_id += 1;
        if let Some((failed, _)) = &target {
            if let Some(s) = self.seen.get_mut(failed.as_str()) {
                s.retested = true;
            }
            self.retests
                .insert(failed.as_str().into(), number.as_str().into());
            self.report.new_retests += 1;
        }
        if !passed {
            self.failed_spots
                .insert(number.as_str().into(), Spot::of(&record));
        }
        self.seen.insert(
            number.as_str().into(),
            Seen {
                hash,
                id: record.id,
                lot_id: ctx.lot.id,
                row: row.row,
                stored: false,
                in_file: true,
                passed,
                voided: false,
                retested: false,
            },
        );
        self.report.new_tests += 1;
        *self
            .report
            .new_per_lot
            .entry(ctx.lot.code.clone())
            .or_default() += 1;
        if self.opts.commit && self.report.rows_with_problems == 0 {
            self.pending.push(record);
        }
    }

    fn refuse(&mut self, number: &str, problems: Vec<RowProblem>) {
        if !number.is_empty() && self.refused_numbers.len() < MAX_REFUSED_NUMBERS {
            self.refused_numbers.insert(number.into());
        }
        // Once a commit is refused, queued rows will never be written.
        self.pending.clear();
        self.report.add_problems(problems);
    }
}

/// What a chunk of rows needs of the store: its stored tests by number, and their live retests.
#[derive(Default)]
struct Stored {
    tests: HashMap<String, FieldTest>,
    /// Stored test id → number of its live retest.
    live_retests: HashMap<i64, String>,
}

/// Looks up every stored test a chunk names (its numbers and retest targets) in a few queries.
async fn look_up(
    conn: &mut crate::db::Conn,
    project_id: i64,
    chunk: &[RowResult],
    seen: &HashMap<Box<str>, Seen>,
    empty_project: bool,
) -> Result<Stored> {
    if empty_project {
        return Ok(Stored::default());
    }
    let mut wanted: Vec<&str> = Vec::new();
    for r in chunk.iter().flatten() {
        for n in [r.input.number.as_deref(), r.retest_of.as_deref()]
            .into_iter()
            .flatten()
        {
            let n = n.trim();
            // A number this import creates is never looked for (it is not stored yet).
            if !n.is_empty() && seen.get(n).is_none_or(|s| s.stored) {
                wanted.push(n);
            }
        }
    }
    if wanted.is_empty() {
        return Ok(Stored::default());
    }
    wanted.sort_unstable();
    wanted.dedup();
    let tests: HashMap<String, FieldTest> = bulk::tests_by_numbers(conn, project_id, &wanted)
        .await?
        .into_iter()
        .map(|t| (t.number.clone(), t))
        .collect();
    let ids: Vec<i64> = tests.values().map(|t| t.id).collect();
    let live_retests = bulk::live_retests_of(conn, &ids)
        .await?
        .into_iter()
        .collect();
    Ok(Stored {
        tests,
        live_retests,
    })
}

/// What landing an import's tests needs besides the tests.
struct Lander<'a> {
    lots: &'a Lots,
    actor: &'a Actor,
    /// Each test gets the single-entry audit row ([`AuditMode::PerTest`]).
    audited: bool,
    batch: bulk::Batch<'a>,
}

impl<'a> Lander<'a> {
    /// Lands queued tests through the one record path of every new test, the lot's state
    /// the one read with the lots (the import holds the write lock since), and inserts them.
    async fn land(&mut self, tx: &mut db::Tx<'_>, tests: Vec<FieldTest>) -> Result<()> {
        // The highest number of the automatic form, which the project's counter follows.
        let mut highest: Option<(i64, i64)> = None;
        for record in tests {
            if let Some(n) = db::numbering::automatic_number(&record.number) {
                highest = Some((record.project_id, highest.map_or(n, |(_, h)| h.max(n))));
            }
            let lot_state = self
                .lots
                .by_id(record.lot_id)
                .map(|ctx| ctx.lot.state)
                .ok_or_else(|| anyhow::anyhow!("test on unknown lot {}", record.lot_id))?;
            let action = if record.retest_of.is_some() {
                "retest"
            } else {
                "create"
            };
            let how = field::Landing::Batch {
                batch: &mut self.batch,
                lot_state,
                audited: self.audited,
            };
            field::land(tx, record, self.actor, action, how).await?;
        }
        self.batch.flush(tx).await?;
        if let Some((project_id, n)) = highest {
            db::numbering::follow_number(tx, project_id, n).await?;
        }
        Ok(())
    }
}

/// Reads up to a chunk of rows from the source.
fn read_chunk(source: &mut dyn RowSource) -> Vec<RowResult> {
    let mut chunk = Vec::with_capacity(CHUNK_ROWS);
    while chunk.len() < CHUNK_ROWS {
        match source.next_row() {
            Some(r) => chunk.push(r),
            None => break,
        }
    }
    chunk
}

/// Checks every row of the source chunk by chunk and, on a commit, inserts what passed.
///
/// A pipeline: while the write connection inserts chunk k, chunk k + 1 is checked and
/// chunk k + 2 looked up on a second connection (`reader`), which sees the store as it
/// was before this import (the import's writes are not committed, and no one else can
/// commit). A project without tests (`empty`, a first import) has nothing to look up.
async fn check_and_insert<'a>(
    run: &mut Run<'a>,
    source: &mut dyn RowSource,
    tx: &mut db::Tx<'_>,
    reader: &mut crate::db::Conn,
    empty: bool,
) -> Result<()> {
    let (project_id, commit) = (run.project_id, run.opts.commit);
    let (lots, opts): (&'a Lots, &'a ImportOptions) = (run.lots, run.opts);
    let mut lander = Lander {
        lots,
        actor: &opts.actor,
        audited: opts.audit == AuditMode::PerTest,
        batch: bulk::Batch::default(),
    };
    let mut chunk = read_chunk(source);
    let mut stored = look_up(reader, project_id, &chunk, &run.seen, empty).await?;
    while !chunk.is_empty() {
        let tests = std::mem::take(&mut run.pending);
        let checking = async {
            for (i, r) in chunk.drain(..).enumerate() {
                run.report.rows += 1;
                match r {
                    Ok(row) => run.process(row, &stored)?,
                    Err(problems) => run.refuse("", problems),
                }
                if i % YIELD_ROWS == YIELD_ROWS - 1 {
                    // Lets the insert beside it send its next statement.
                    tokio::task::yield_now().await;
                }
            }
            let next = read_chunk(source);
            let next_stored = look_up(reader, project_id, &next, &run.seen, empty).await?;
            Ok::<_, AppError>((next, next_stored))
        };
        let (inserted, next) = if commit && !tests.is_empty() {
            tokio::join!(lander.land(tx, tests), checking)
        } else {
            (Ok(()), checking.await)
        };
        inserted?;
        (chunk, stored) = next?;
    }
    if commit && run.report.rows_with_problems == 0 {
        let tests = std::mem::take(&mut run.pending);
        lander.land(tx, tests).await?;
    }
    Ok(())
}

/// What the import's one audit row records: the file, what it created and skipped.
fn import_audit(report: &ImportReport) -> serde_json::Value {
    json!({
        "file_name": report.origin.file_name,
        "bytes": report.origin.bytes,
        "sha256": report.origin.sha256,
        "rows": report.rows,
        "created": report.new_tests,
        "retests": report.new_retests,
        "created_ids": report.created_ids.map(|(a, b)| json!({"first": a, "last": b})),
        "per_lot": report.new_per_lot,
        "skipped_identical": report.skipped_identical,
        "skipped_repeated": report.skipped_repeated,
        "audit": report.audit,
    })
}

/// Checks (dry run) or imports (commit) every row of a source into a project.
///
/// A dry run writes nothing. A commit writes all rows or none, in one write transaction
/// holding the write lock from start to end; any problem or conflict refuses it. A
/// commit with nothing new (every row already stored) writes nothing either and
/// reports `committed` with no ids.
#[tracing::instrument(skip(pool, source, opts), fields(commit = opts.commit))]
pub async fn import_field_tests(
    pool: &Pool,
    project_id: i64,
    source: &mut dyn RowSource,
    opts: &ImportOptions,
) -> Result<ImportReport> {
    let started = Instant::now();
    setup::require_project(pool, project_id).await?;
    // Take the write lock first: what the rows are checked against cannot change before commit.
    let mut own = if opts.commit {
        db::bulk_connection(pool).await?
    } else {
        None
    };
    let mut tx = begin_import(pool, own.as_mut(), project_id, opts.commit).await?;
    let lots = load_lots(pool, project_id).await?;
    let book = super::instruments::check::InstrumentBook::load(pool, project_id).await?;
    let first_id = bulk::max_field_test_id(&mut tx).await? + 1;
    let mut run = Run::new(project_id, &lots, &book, opts, first_id);
    let mut reader = pool.acquire().await?;
    let empty = bulk::test_id_range(pool, project_id).await?.is_none();
    check_and_insert(&mut run, source, &mut tx, &mut reader, empty).await?;
    run.report.origin = source.origin();
    let mut report = finish(tx, run.report, first_id, project_id, opts).await?;
    report.elapsed_ms = started.elapsed().as_millis() as u64;
    Ok(report)
}

/// The import's transaction: for a commit a write transaction (on the import's own
/// connection when there is one) holding the project and the numbering of tests until it
/// ends; for a dry run a plain one that is rolled back.
async fn begin_import<'c>(
    pool: &Pool,
    own: Option<&'c mut db::Conn>,
    project_id: i64,
    commit: bool,
) -> Result<db::Tx<'c>> {
    if !commit {
        return Ok(pool.begin().await?);
    }
    let mut tx = match own {
        Some(conn) => db::begin_write_on(conn).await?,
        None => db::begin_write(pool).await?,
    };
    // PostgreSQL: the project's row and the tests table are this import's until it ends
    // (SQLite's BEGIN IMMEDIATE already holds the one write lock).
    db::lock_project(&mut tx, project_id).await?;
    bulk::lock_tests_for_numbering(&mut tx).await?;
    Ok(tx)
}

/// Ends the import's transaction: rolled back for a dry run, a refused file or a file with
/// nothing new (not even an audit row is written); otherwise committed with the import's
/// one audit row, the ids it created recorded in the report.
async fn finish(
    mut tx: db::Tx<'_>,
    mut report: ImportReport,
    first_id: i64,
    project_id: i64,
    opts: &ImportOptions,
) -> Result<ImportReport> {
    if !opts.commit || report.refused() {
        tx.rollback().await?;
        return Ok(report);
    }
    if report.new_tests == 0 {
        // Nothing new (a re-upload): nothing is written, not even an audit row.
        tx.rollback().await?;
        report.committed = true;
        return Ok(report);
    }
    let last_id = first_id + report.new_tests as i64 - 1;
    report.created_ids = Some((first_id, last_id));
    // The ids were given explicitly: move the engine's id generator past them.
    bulk::advance_test_ids(&mut tx).await?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &opts.actor.name,
            action: "import",
            entity: "field_test_import",
            entity_id: Some(first_id),
            project_id: Some(project_id),
            before: None,
            after: Some(import_audit(&report)),
            origin: &opts.actor.origin,
        },
        &clock::now(),
    )
    .await?;
    tx.commit().await?;
    crate::metrics::field_tests_recorded(crate::metrics::TestSource::Import, report.new_tests);
    report.committed = true;
    Ok(report)
}

/// One row of a lab points file, parsed.
pub type LabPointRow = std::result::Result<(u64, LabPointInput), Vec<RowProblem>>;

/// Creates a lab compaction test whose points come from a file; the curve is fitted and
/// checked exactly as for points typed in. Problems name the file's row and column.
pub async fn import_lab_test(
    pool: &Pool,
    source_id: i64,
    mut input: LabTestInput,
    rows: impl IntoIterator<Item = LabPointRow>,
    locate: &dyn Fn(u64, &str) -> (String, String),
    actor: &Actor,
) -> Result<std::result::Result<db::lab_tests::LabTest, Vec<RowProblem>>> {
    let mut problems = Vec::new();
    let mut lines = Vec::new();
    input.points.clear();
    for r in rows {
        match r {
            Ok((line, p)) => {
                lines.push(line);
                input.points.push(p);
            }
            Err(p) => problems.extend(p),
        }
    }
    if !problems.is_empty() {
        return Ok(Err(problems));
    }
    match setup::create_lab_test(pool, source_id, &input, actor).await {
        Ok(t) => Ok(Ok(t)),
        Err(AppError::Internal(e)) => Err(AppError::Internal(e)),
        Err(e) => {
            // "points[3].dry_density_kg_m3" → row of the 4th point, its column.
            let field = e.field().to_string();
            let point = field
                .strip_prefix("points[")
                .and_then(|r| r.split_once("]."))
                .and_then(|(i, f)| i.parse::<usize>().ok().map(|i| (i, f.to_string())));
            let problem = match point.and_then(|(i, f)| lines.get(i).map(|l| (*l, f))) {
                Some((line, f)) => {
                    let (column, value) = locate(line, &f);
                    RowProblem::new(line, &column, &value, e.user_message())
                }
                None => RowProblem::new(0, &field, "", e.user_message()),
            };
            Ok(Err(vec![problem]))
        }
    }
}

/// Saves (or replaces) a named column mapping of a project, with its audit row.
pub async fn save_mapping(
    pool: &Pool,
    project_id: i64,
    name: &str,
    mapping: &serde_json::Value,
    actor: &Actor,
) -> Result<i64> {
    setup::require_project(pool, project_id).await?;
    let name = super::validate::text("name", name, 80)?;
    let body = mapping.to_string();
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let (id, action) = match db::bulk::get_mapping(pool, project_id, &name).await? {
        Some(old) => {
            db::bulk::update_mapping(&mut tx, project_id, &name, &body).await?;
            (old.id, "update")
        }
        None => (
            db::bulk::insert_mapping(&mut tx, project_id, &name, &body, &actor.name, &now).await?,
            "create",
        ),
    };
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action,
            entity: "import_mapping",
            entity_id: Some(id),
            project_id: Some(project_id),
            before: None,
            after: Some(json!({"name": name, "mapping": mapping})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(id)
}

/// Reads a named mapping of a project, or fails naming `name`.
pub async fn load_mapping(pool: &Pool, project_id: i64, name: &str) -> Result<serde_json::Value> {
    let saved = db::bulk::get_mapping(pool, project_id, name)
        .await?
        .ok_or_else(|| AppError::not_found("name", format!("no mapping named '{name}'")))?;
    serde_json::from_str(&saved.mapping_json)
        .map_err(|e| anyhow::anyhow!("stored mapping {} is not JSON: {e}", saved.id).into())
}
