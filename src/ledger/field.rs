//! Field density tests: checked against their lot, stored with their audit row (a test is
//! recorded through [`super::Ledger`]), voided, and their rules loaded ([`rule_rows`]).

use serde_json::json;

use super::Actor;
use super::instruments::check::{Arrival, InstrumentBook, check_with_instruments};
use super::lot_report;
use super::validate::{code, number, optional_text, quantity, text, timestamp};
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::domain::{LotState, Rule};
use crate::error::{AppError, Result};
use crate::reduction::verdict::{Reference, TestVerdict};
use crate::reduction::{self, field::FieldReadings};

mod store;
pub(super) use store::store;
pub(crate) use store::{Landing, land, store_in, test_source};

pub use crate::reduction::site::FieldTestInput;
use crate::reduction::site::{LotRules, SiteError};

/// A test checked and reduced, ready to store.
pub struct CheckedTest {
    pub record: db::field_tests::FieldTest,
}

/// Everything a test on one lot is checked and judged against, loaded once.
///
/// The single-test path loads it per request; the bulk path loads it once per
/// lot and checks every row of a file against it with [`check_loaded`].
#[derive(Debug, Clone)]
pub struct LotContext {
    pub lot: db::lots::Lot,
    pub clause: db::clauses::Clause,
    pub source: db::sources::Source,
    pub lab: db::lab_tests::LabTest,
    /// The lab curve's MDD and OMC (before any oversize correction).
    pub reference: Reference,
    /// The same rules as one pure bundle: what `reduction::site` checks against, here and
    /// on the phone.
    pub rules: LotRules,
}

impl LotContext {
    /// Builds the context from already-loaded rows (no database access).
    pub fn new(
        lot: db::lots::Lot,
        clause: db::clauses::Clause,
        source: db::sources::Source,
        lab: db::lab_tests::LabTest,
    ) -> Result<Self> {
        let reference = lot_report::reference_of(&lab)?;
        let rules = rules_of(&lot, &clause, &source, &lab)?;
        Ok(Self {
            rules,
            lot,
            clause,
            source,
            lab,
            reference,
        })
    }

    /// The lot's clause, source and lab test from `rules`, read from the store only the
    /// first time each is needed.
    pub async fn load_with(pool: &Pool, rules: &RuleCache, lot: &db::lots::Lot) -> Result<Self> {
        let (clause, source, lab) = match rules.get(lot) {
            Some(found) => found,
            None => {
                let ctx = Self::load(pool, lot).await?;
                rules.keep(&ctx);
                return Ok(ctx);
            }
        };
        Self::new(lot.clone(), clause, source, lab)
    }

    /// Loads the clause, source and lab test a lot is judged by.
    pub async fn load(pool: &Pool, lot: &db::lots::Lot) -> Result<Self> {
        let (clause, source, lab) = rule_rows(pool, lot).await?;
        Self::new(lot.clone(), clause, source, lab)
    }

    /// The reference a test with this coarse fraction is judged against (ASTM D4718 when coarse).
    pub fn reference_for(
        &self,
        coarse_pct: Option<f64>,
        coarse_w_pct: Option<f64>,
    ) -> Result<Reference> {
        self.rules
            .reference_for(coarse_pct, coarse_w_pct)
            .map_err(site_error)
    }
}

/// The clause, source and lab test a lot is judged by, read from the store: the one read
/// of a lot's rules (contexts, lot reports and single verdicts all come through here; the
/// project-wide readers take every project's rows at once in `overview::ProjectRows`).
pub async fn rule_rows(
    pool: &Pool,
    lot: &db::lots::Lot,
) -> Result<(
    db::clauses::Clause,
    db::sources::Source,
    db::lab_tests::LabTest,
)> {
    let missing = |what: &str| anyhow::anyhow!("lot {} refers to a missing {what}", lot.id);
    let clause = db::clauses::get(pool, lot.clause_id)
        .await?
        .ok_or_else(|| missing("clause"))?;
    let source = db::sources::get(pool, lot.source_id)
        .await?
        .ok_or_else(|| missing("source"))?;
    let lab = db::lab_tests::get(pool, lot.lab_test_id)
        .await?
        .ok_or_else(|| missing("lab test"))?;
    Ok((clause, source, lab))
}

/// A pure check's refusal as the service's error (422 naming the field).
pub fn site_error(e: SiteError) -> AppError {
    AppError::invalid(e.field, e.message)
}

/// The bundle of rules a lot's tests are checked against, from its stored rows.
pub fn rules_of(
    lot: &db::lots::Lot,
    clause: &db::clauses::Clause,
    source: &db::sources::Source,
    lab: &db::lab_tests::LabTest,
) -> anyhow::Result<LotRules> {
    Ok(LotRules {
        lot_id: lot.id,
        lot_code: lot.code.clone(),
        chainage_from_m: lot.chainage_from_m,
        chainage_to_m: lot.chainage_to_m,
        offset_left_m: lot.offset_left_m,
        offset_right_m: lot.offset_right_m,
        layer_thickness_mm: lot.layer_thickness_mm,
        clause_code: clause.code.clone(),
        limits: lot_report::limits_of(clause)?,
        rc_plausible_max_pct: clause.rc_plausible_max_pct,
        oversize_limit_pct: clause.oversize_limit_pct,
        oversize_sieve_mm: clause.oversize_sieve_mm,
        coarse_water_default_pct: clause.coarse_water_default_pct,
        source_code: source.code.clone(),
        gs_coarse: source.gs_coarse,
        specific_gravity: lab.specific_gravity,
        max_dry_density_kg_m3: lab.max_dry_density_kg_m3,
        optimum_water_content_pct: lab.optimum_water_content_pct,
    })
}

/// Clauses, sources and lab tests by id, kept once read.
///
/// These rows are never changed once written (a lab test is only marked superseded,
/// with its lots moved to the new curve, and the status is not part of any check), so a
/// copy stays right on every app server and needs no invalidation.
#[derive(Default)]
pub struct RuleCache {
    rows: std::sync::Mutex<RuleRows>,
}

#[derive(Default)]
struct RuleRows {
    clauses: std::collections::HashMap<i64, db::clauses::Clause>,
    sources: std::collections::HashMap<i64, db::sources::Source>,
    labs: std::collections::HashMap<i64, db::lab_tests::LabTest>,
}

impl RuleCache {
    fn get(
        &self,
        lot: &db::lots::Lot,
    ) -> Option<(
        db::clauses::Clause,
        db::sources::Source,
        db::lab_tests::LabTest,
    )> {
        let rows = self.rows.lock().unwrap_or_else(|e| e.into_inner());
        Some((
            rows.clauses.get(&lot.clause_id)?.clone(),
            rows.sources.get(&lot.source_id)?.clone(),
            rows.labs.get(&lot.lab_test_id)?.clone(),
        ))
    }

    /// True when the lot's clause, source and lab test are all held (read once already).
    pub fn holds(&self, lot: &db::lots::Lot) -> bool {
        self.get(lot).is_some()
    }

    fn keep(&self, ctx: &LotContext) {
        let mut rows = self.rows.lock().unwrap_or_else(|e| e.into_inner());
        rows.clauses.insert(ctx.clause.id, ctx.clause.clone());
        rows.sources.insert(ctx.source.id, ctx.source.clone());
        rows.labs.insert(ctx.lab.id, ctx.lab.clone());
    }
}

/// Where a test was taken; a retest falls back on its failed test's spot.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Spot {
    pub chainage_m: f64,
    pub offset_m: f64,
}

impl Spot {
    /// The spot of a stored test.
    pub fn of(t: &db::field_tests::FieldTest) -> Self {
        Self {
            chainage_m: t.chainage_m,
            offset_m: t.offset_m,
        }
    }
}

/// Validates and reduces one field test against an already-loaded lot: the one set of
/// rules for single entry, previews and bulk imports. Pure: no database, no clock
/// (`now` stands in for a missing `tested_at` and is the creation time). The caller
/// sets `retest_of` and, when absent from the input, the number.
pub fn check_loaded(
    ctx: &LotContext,
    input: &FieldTestInput,
    fallback: Option<Spot>,
    actor: &Actor,
    now: &str,
) -> Result<CheckedTest> {
    let entry = reduction::site::check_entry(
        &ctx.rules,
        input,
        fallback.map(|s| (s.chainage_m, s.offset_m)),
    )
    .map_err(site_error)?;
    let checked = check_record(&ctx.lot, input, &entry, actor, now)?;
    if let Some(refusal) = reduction::site::implausible_refusal(&ctx.rules, input, &entry) {
        return Err(site_error(refusal));
    }
    Ok(checked)
}

/// The rules of [`check_loaded`] beyond the pure ones of `reduction::site::check_entry`
/// (codes, times, texts), and the record to store.
fn check_record(
    lot: &db::lots::Lot,
    input: &FieldTestInput,
    entry: &reduction::site::CheckedEntry,
    actor: &Actor,
    now: &str,
) -> Result<CheckedTest> {
    let easting = input
        .easting
        .map(|v| number("easting", v, -1.0e8, 1.0e8, "m"))
        .transpose()?;
    let northing = input
        .northing
        .map(|v| number("northing", v, -1.0e8, 1.0e8, "m"))
        .transpose()?;
    if easting.is_some() != northing.is_some() {
        return Err(AppError::invalid(
            "northing",
            "give both easting and northing, or neither",
        ));
    }
    let number = match &input.number {
        Some(n) => code("number", n)?,
        None => String::new(),
    };
    let tested_at = match &input.tested_at {
        Some(t) => timestamp("tested_at", t)?,
        None => now.to_string(),
    };
    let instrument = match &input.readings {
        FieldReadings::Nuclear {
            gauge_serial: Some(s),
            ..
        } if input.instrument_serial.trim().is_empty() => s.clone(),
        _ => input.instrument_serial.clone(),
    };
    let record = db::field_tests::FieldTest {
        id: 0,
        project_id: lot.project_id,
        lot_id: lot.id,
        number,
        tested_at,
        technician: text("technician", &input.technician, 80)?,
        method: crate::domain::Method::of(&input.readings),
        instrument_serial: optional_text("instrument_serial", &instrument, 40)?,
        chainage_m: entry.chainage_m,
        offset_m: entry.offset_m,
        depth_mm: entry.depth_mm,
        coarse_pct: entry.coarse_pct,
        coarse_water_content_pct: entry.coarse_water_content_pct,
        easting,
        northing,
        readings_json: serde_json::to_string(&input.readings).map_err(anyhow::Error::from)?,
        wet_density_kg_m3: entry.wet_density_kg_m3,
        water_content_pct: entry.water_content_pct,
        dry_density_kg_m3: entry.dry_density_kg_m3,
        moisture_source: entry.moisture_source.to_string(),
        reduction_version: reduction::REDUCTION_VERSION.to_string(),
        retest_of: None,
        void_reason: None,
        voided_by: None,
        voided_at: None,
        created_at: now.to_string(),
        created_by: actor.name.clone(),
        instrument_check: crate::reduction::instruments::InstrumentCheck::NotRecorded,
        instrument_note: None,
        operator_id: None,
        density_offset_kg_m3: None,
        moisture_offset_pct: None,
    };
    Ok(CheckedTest { record })
}

/// Judges a checked or stored test against its lot's reference (oversize-corrected when
/// coarse) and clause: the verdict a preview shows and a retest decision rests on.
pub fn judge(ctx: &LotContext, r: &db::field_tests::FieldTest) -> Result<TestVerdict> {
    let reference = ctx.reference_for(r.coarse_pct, r.coarse_water_content_pct)?;
    let dry = quantity("readings", reduction::Density::new(r.dry_density_kg_m3))?;
    let w = quantity(
        "readings",
        reduction::WaterContent::new(r.water_content_pct),
    )?;
    Ok(reduction::verdict::judge_test(
        dry,
        w,
        &reference,
        &lot_report::limits_of(&ctx.clause)?,
    ))
}

/// What is known of a test someone wants to retest.
#[derive(Debug, Clone, Copy)]
pub struct RetestTarget<'a> {
    pub number: &'a str,
    pub voided: bool,
    pub passed: bool,
    /// The number of its live (not void) retest, if it has one.
    pub existing_retest: Option<&'a str>,
}

/// Why a test may not be retested, if it may not (the one rule for single and bulk entry).
pub fn retest_refusal(t: RetestTarget<'_>) -> Option<AppError> {
    let reason = if t.voided {
        format!(
            "test {} is void; record a new test instead of a retest",
            t.number
        )
    } else if t.passed {
        format!(
            "test {} passed; a retest is recorded only after a failure",
            t.number
        )
    } else if let Some(existing) = t.existing_retest {
        format!(
            "test {} already has retest {existing}; retest that one if it failed",
            t.number
        )
    } else {
        return None;
    };
    Some(AppError::conflict("test_id", reason, vec![]))
}

/// Why a retest may not be recorded on a lot judged by the quality-index rule (the one rule
/// for single entry and imports): such a lot is re-sampled after rework, not patched test by
/// test — a sample mixing originals and retests is no longer random (common practice).
pub fn sampled_lot_refusal(lot: &db::lots::Lot, clause: &db::clauses::Clause) -> Option<AppError> {
    (clause.rule == Rule::QualityIndex).then(|| {
        AppError::conflict(
            "test_id",
            format!(
                "lot {} is judged by the quality-index rule: a failed lot is not patched test by test; after rework take a new random sample (POST /api/v1/lots/{}/resample)",
                lot.code, lot.id
            ),
            vec![],
        )
    })
}

/// Fails unless the lot accepts new tests (open or rejected for rework).
pub fn require_lot_takes_tests(lot: &db::lots::Lot) -> Result<()> {
    if lot.state.takes_tests() {
        return Ok(());
    }
    Err(AppError::conflict(
        "lot_id",
        format!(
            "lot {} is {}; tests can be added only while it is open or rejected",
            lot.code, lot.state
        ),
        vec![],
    ))
}

/// Loads a lot or fails with 404 naming `lot_id`.
pub async fn require_lot(pool: &Pool, lot_id: i64) -> Result<db::lots::Lot> {
    db::lots::get(pool, lot_id)
        .await?
        .ok_or_else(|| AppError::not_found("lot_id", format!("lot {lot_id} does not exist")))
}

/// Loads a field test or fails with 404 naming `test_id`.
pub async fn require_test(pool: &Pool, test_id: i64) -> Result<db::field_tests::FieldTest> {
    db::field_tests::get(pool, test_id).await?.ok_or_else(|| {
        AppError::not_found("test_id", format!("field test {test_id} does not exist"))
    })
}

/// Voids a test with a reason: it leaves every statistic but stays on record.
pub async fn void_test(
    pool: &Pool,
    test_id: i64,
    reason: &str,
    actor: &Actor,
) -> Result<db::field_tests::FieldTest> {
    let reason = text("reason", reason, 500)?;
    let test = require_test(pool, test_id).await?;
    let lot = require_lot(pool, test.lot_id).await?;
    match lot.state {
        LotState::Submitted => {
            return Err(AppError::conflict(
                "test_id",
                format!(
                    "lot {} is under review; ask the reviewer to reject it before voiding tests",
                    lot.code
                ),
                vec![],
            ));
        }
        LotState::Accepted => {
            return Err(AppError::conflict(
                "test_id",
                format!(
                    "lot {} is accepted and frozen; a client engineer must reopen it before a test is voided",
                    lot.code
                ),
                vec![],
            ));
        }
        LotState::Open | LotState::Rejected => {}
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    // The lot may have been submitted or accepted since it was read: hold its state.
    let state = db::lots::state_for_write(&mut tx, lot.id).await?;
    if let Some(state) = state.filter(|s| matches!(s, LotState::Submitted | LotState::Accepted)) {
        return Err(AppError::conflict(
            "test_id",
            format!(
                "lot {} became {state} meanwhile; nothing was voided",
                lot.code
            ),
            vec![],
        ));
    }
    if !db::field_tests::void(&mut tx, test_id, &reason, &actor.name, &now).await? {
        return Err(AppError::conflict(
            "test_id",
            format!("test {} is already void", test.number),
            vec![],
        ));
    }
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "void",
            entity: "field_test",
            entity_id: Some(test_id),
            project_id: Some(test.project_id),
            before: Some(json!({"void_reason": null})),
            after: Some(json!({"void_reason": reason, "voided_by": actor.name, "voided_at": now})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    require_test(pool, test_id).await
}

/// A test's history, oldest first: its own audit rows and, for an imported test, the
/// import that created it (who, when, the file's name and SHA-256).
pub async fn history(
    pool: &Pool,
    test: &db::field_tests::FieldTest,
) -> Result<Vec<db::audit::AuditEntry>> {
    let mut rows = db::audit::for_entity(pool, "field_test", test.id).await?;
    if let Some(import) = db::audit::import_covering(pool, test.project_id, test.id).await? {
        let last = import
            .after_json
            .as_deref()
            .and_then(|j| serde_json::from_str::<serde_json::Value>(j).ok())
            .and_then(|v| v["created_ids"]["last"].as_i64());
        if last.is_some_and(|last| test.id <= last) {
            rows.push(import);
        }
    }
    rows.sort_by_key(|r| r.id);
    Ok(rows)
}

/// A single entry checked against its lot and the instrument register in force, as
/// recording and previewing it both need.
async fn check_single(
    pool: &Pool,
    ctx: &LotContext,
    input: &FieldTestInput,
    actor: &Actor,
) -> Result<CheckedTest> {
    let book = InstrumentBook::load(pool, ctx.lot.project_id).await?;
    check_with_instruments(
        &book,
        ctx,
        input,
        None,
        actor,
        &clock::now(),
        Arrival::Single,
    )
}

/// Reduces and judges a field test against its lot without saving it (the site-entry preview).
pub async fn preview(
    pool: &Pool,
    lot_id: i64,
    input: &FieldTestInput,
    actor: &Actor,
) -> Result<serde_json::Value> {
    let lot = require_lot(pool, lot_id).await?;
    let ctx = LotContext::load(pool, &lot).await?;
    let checked = check_single(pool, &ctx, input, actor).await?;
    let r = &checked.record;
    let reference = ctx.reference_for(r.coarse_pct, r.coarse_water_content_pct)?;
    let v = judge(&ctx, r)?;
    let flags = lot_report::flags_of(
        r,
        &ctx.lot,
        &ctx.lab,
        &ctx.clause,
        Some(v.relative_compaction_pct),
    );
    Ok(json!({
        "flags": flags,
        "wet_density_kg_m3": r.wet_density_kg_m3,
        "water_content_pct": r.water_content_pct,
        "dry_density_kg_m3": r.dry_density_kg_m3,
        "moisture_source": r.moisture_source,
        "instrument_check": r.instrument_check,
        "instrument_note": r.instrument_note,
        "density_offset_kg_m3": r.density_offset_kg_m3,
        "moisture_offset_pct": r.moisture_offset_pct,
        "reference_mdd_kg_m3": reference.max_dry_density.kg_m3(),
        "reference_omc_pct": reference.optimum_water_content.pct(),
        "relative_compaction_pct": v.relative_compaction_pct,
        "moisture_deviation_pct": v.moisture_deviation_pct,
        "passed": v.passed,
        "reasons": v.reasons,
        "saved": false,
    }))
}
