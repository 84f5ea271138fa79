//! Test-location plans (ASTM D3665, stratified): drawn when a lot is declared ready for testing,
//! stored with their seed, replanned with a reason (the old plan kept), and every entered test
//! matched to its nearest planned location; plus the clause terms that govern plans and
//! one-point references, and what a lot report needs of both ([`LotExtras`]).

use std::collections::HashMap;

use serde::{Deserialize, Serialize};
use serde_json::json;

use super::Actor;
use super::field::{require_lot, require_lot_takes_tests};
use super::lot_report;
use super::validate::{number, optional_text};
use crate::clock;
use crate::db::planning::{ClauseTerms, OnePointCheck, TestPlan};
use crate::db::{self, Pool, audit};
use crate::error::{AppError, Result};
use crate::reduction::sampling::{
    Exclusion, PlanError, PlanInput, PlanMatch, PlannedLocation, draw_plan, match_test,
};
use crate::reduction::verdict::Reference;
use crate::reduction::{Density, WaterContent};

/// What a lot report needs beyond its own rows: one-point references and the current plan.
#[derive(Debug, Clone, Default)]
pub struct LotExtras {
    /// One-point checks that are their test's reference, by field test id.
    pub one_points: HashMap<i64, OnePointCheck>,
    /// The current plan's locations and the clause's tolerance, metres.
    pub plan: Option<(Vec<PlannedLocation>, f64)>,
}

impl LotExtras {
    /// The extras of one lot.
    pub async fn for_lot(pool: &Pool, lot: &db::lots::Lot) -> Result<Self> {
        let mut all = Self::load(pool, lot.project_id, Some(lot.id)).await?;
        Ok(all.remove(&lot.id).unwrap_or_default())
    }

    /// The extras of every lot of a project that has any, by lot id.
    pub async fn for_project(pool: &Pool, project_id: i64) -> Result<HashMap<i64, Self>> {
        Self::load(pool, project_id, None).await
    }

    async fn load(pool: &Pool, project_id: i64, lot: Option<i64>) -> Result<HashMap<i64, Self>> {
        let mut out: HashMap<i64, Self> = HashMap::new();
        for (lot_id, c) in db::planning::reference_one_points(pool, project_id, lot).await? {
            if let Some(t) = c.field_test_id {
                out.entry(lot_id).or_default().one_points.insert(t, c);
            }
        }
        for (p, tolerance) in db::planning::current_plans(pool, project_id, lot).await? {
            out.entry(p.lot_id).or_default().plan = Some((locations_of(&p)?, tolerance));
        }
        Ok(out)
    }

    /// The one-point check a test is judged against, if any.
    pub fn one_point_of(&self, test_id: i64) -> Option<&OnePointCheck> {
        self.one_points.get(&test_id)
    }

    /// The reference a one-point check gives its test, if any. A one-point check records no
    /// Gs of its own: the material's is the one given (the lot curve's, of the same source).
    pub fn reference_of_test(
        &self,
        test_id: i64,
        specific_gravity: Option<crate::reduction::SpecificGravity>,
    ) -> Option<Reference> {
        let c = self.one_point_of(test_id)?;
        Some(Reference {
            max_dry_density: Density::new(c.max_dry_density_kg_m3).ok()?,
            optimum_water_content: WaterContent::new(c.optimum_water_content_pct).ok()?,
            specific_gravity,
        })
    }

    /// A test's nearest planned location, when the lot has a plan.
    pub fn match_test(&self, t: &db::field_tests::FieldTest) -> Option<PlanMatch> {
        let (plan, tolerance) = self.plan.as_ref()?;
        match_test(plan, t.chainage_m, t.offset_m, *tolerance)
    }

    /// What the one-point references add to a lot's fingerprint (None without any).
    pub fn fingerprint_part(&self) -> Option<String> {
        if self.one_points.is_empty() {
            return None;
        }
        let mut parts: Vec<String> = self
            .one_points
            .iter()
            .map(|(t, c)| {
                format!(
                    "op {t} {} {} {}",
                    c.id, c.max_dry_density_kg_m3, c.optimum_water_content_pct
                )
            })
            .collect();
        parts.sort();
        Some(parts.join("|"))
    }
}

/// A misplaced test in words, for the lot sheet and the certificate.
pub fn misplaced_words(m: &PlanMatch) -> String {
    format!(
        "{:.1} m from planned location {} (chainage {:+.1} m, offset {:+.1} m): not at a planned location",
        m.distance_m, m.sublot, m.chainage_diff_m, m.offset_diff_m
    )
}

/// The stored locations of a plan.
pub fn locations_of(p: &TestPlan) -> Result<Vec<PlannedLocation>> {
    serde_json::from_str(&p.locations_json)
        .map_err(|e| anyhow::anyhow!("plan {} has unreadable locations: {e}", p.id).into())
}

/// The stored exclusions of a plan.
pub fn exclusions_of(p: &TestPlan) -> Vec<Exclusion> {
    serde_json::from_str(&p.exclusions_json).unwrap_or_default()
}

/// A request to draw (or redraw) a lot's plan.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlanRequest {
    /// The seed; a fresh random one when absent (stored either way).
    #[serde(default, deserialize_with = "crate::ledger::validate::whole::opt_u64")]
    pub seed: Option<u64>,
    /// Least distance from the lot's edges, metres (common practice: 0.3 m).
    #[serde(default = "default_edge")]
    pub edge_m: f64,
    #[serde(default)]
    pub exclusions: Vec<Exclusion>,
    /// Why the lot is replanned (required when it already has a plan).
    #[serde(default)]
    pub reason: String,
}

fn default_edge() -> f64 {
    0.3
}

/// Largest seed accepted (stored as a signed 64-bit integer on both engines).
const MAX_SEED: u64 = i64::MAX as u64;

fn fresh_seed() -> Result<u64> {
    let mut b = [0u8; 8];
    getrandom::fill(&mut b).map_err(|e| anyhow::anyhow!("no randomness available: {e}"))?;
    Ok(u64::from_le_bytes(b) & MAX_SEED)
}

fn check_request(req: &PlanRequest, lot: &db::lots::Lot) -> Result<u64> {
    number("edge_m", req.edge_m, 0.0, 1000.0, "m")?;
    for (i, e) in req.exclusions.iter().enumerate() {
        let field = format!("exclusions[{i}]");
        if !(e.chainage_from_m.is_finite() && e.chainage_to_m.is_finite())
            || e.chainage_to_m <= e.chainage_from_m
        {
            return Err(AppError::invalid(
                field,
                "chainage_to_m must be above chainage_from_m",
            ));
        }
        if e.chainage_to_m <= lot.chainage_from_m || e.chainage_from_m >= lot.chainage_to_m {
            return Err(AppError::invalid(
                field,
                format!("lies outside lot {}", lot.code),
            ));
        }
    }
    match req.seed {
        Some(s) if s > MAX_SEED => Err(AppError::invalid(
            "seed",
            format!("must be at most {MAX_SEED}"),
        )),
        Some(s) => Ok(s),
        None => fresh_seed(),
    }
}

/// Declares a lot ready for testing by drawing its plan: one location per required test
/// (the clause's frequency), audited. A lot with a plan is replanned only with a reason; the
/// old plan stays on record, superseded.
pub async fn draw(pool: &Pool, lot_id: i64, req: &PlanRequest, actor: &Actor) -> Result<TestPlan> {
    let lot = require_lot(pool, lot_id).await?;
    require_lot_takes_tests(&lot)?;
    let seed = check_request(req, &lot)?;
    let reason = optional_text("reason", &req.reason, 1000)?;
    let report = lot_report::build(pool, lot_id).await?;
    let input = PlanInput {
        chainage_from_m: lot.chainage_from_m,
        chainage_to_m: lot.chainage_to_m,
        offset_left_m: lot.offset_left_m,
        offset_right_m: lot.offset_right_m,
        count: report.tests_required.max(1),
        edge_m: req.edge_m,
        exclusions: req.exclusions.clone(),
        seed,
    };
    let locations = draw_plan(&input).map_err(|e| plan_error(&e))?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let previous = db::planning::current_revision(&mut tx, lot_id).await?;
    if previous.is_some() && reason.is_empty() {
        return Err(AppError::invalid(
            "reason",
            format!(
                "lot {} already has a plan: say why it is replanned",
                lot.code
            ),
        ));
    }
    db::planning::supersede(&mut tx, lot_id, &reason, &now).await?;
    let mut plan = TestPlan {
        id: 0,
        project_id: lot.project_id,
        lot_id,
        revision: previous.unwrap_or(0) + 1,
        seed: i64::try_from(seed).unwrap_or(i64::MAX),
        location_count: i64::from(input.count),
        edge_m: req.edge_m,
        exclusions_json: serde_json::to_string(&req.exclusions).map_err(anyhow::Error::from)?,
        locations_json: serde_json::to_string(&locations).map_err(anyhow::Error::from)?,
        created_at: now.clone(),
        created_by: actor.name.clone(),
        superseded_at: None,
        superseded_reason: None,
    };
    plan.id = db::planning::insert_plan(&mut tx, &plan).await?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: if previous.is_some() { "replan" } else { "plan" },
            entity: "test_plan",
            entity_id: Some(plan.id),
            project_id: Some(lot.project_id),
            before: previous.map(|r| json!({"revision": r})),
            after: Some(json!({"lot_id": lot_id, "revision": plan.revision, "seed": seed,
                "locations": locations, "edge_m": req.edge_m, "exclusions": req.exclusions, "reason": reason})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(plan)
}

fn plan_error(e: &PlanError) -> AppError {
    let field = match e {
        PlanError::EdgeTooWide(_) => "edge_m",
        PlanError::SublotExcluded(_) => "exclusions",
        PlanError::NoLocations => "lot_id",
        PlanError::NotFinite(f) => f,
    };
    AppError::invalid(field, e.to_string())
}

/// A plan and how the lot's tests lie against it.
#[derive(Debug, Clone, Serialize)]
pub struct PlanView {
    pub lot: db::lots::Lot,
    pub current: Option<TestPlan>,
    pub locations: Vec<PlannedLocation>,
    pub exclusions: Vec<Exclusion>,
    pub tolerance_m: f64,
    /// Every plan of the lot, newest first (superseded ones kept).
    pub history: Vec<TestPlan>,
    /// (test number, match) of the lot's tests that are not voided.
    pub matches: Vec<(String, PlanMatch)>,
}

/// The lot's plans and matches.
pub async fn view(pool: &Pool, lot_id: i64) -> Result<PlanView> {
    let report = lot_report::build(pool, lot_id).await?;
    let history = db::planning::plans_for_lot(pool, lot_id).await?;
    let current = history.iter().find(|p| p.superseded_at.is_none()).cloned();
    let locations = current
        .as_ref()
        .map(locations_of)
        .transpose()?
        .unwrap_or_default();
    let exclusions = current.as_ref().map(exclusions_of).unwrap_or_default();
    let terms = clause_terms(pool, report.lot.clause_id).await?;
    let matches = report
        .tests
        .iter()
        .filter(|l| l.standing != crate::domain::Standing::Voided)
        .filter_map(|l| l.plan_match.map(|m| (l.test.number.clone(), m)))
        .collect();
    Ok(PlanView {
        lot: report.lot,
        current,
        locations,
        exclusions,
        tolerance_m: terms.plan_tolerance_m,
        history,
        matches,
    })
}

/// A clause's planning terms (404 naming `clause_id`).
pub async fn clause_terms(pool: &Pool, clause_id: i64) -> Result<ClauseTerms> {
    db::planning::clause_terms(pool, clause_id)
        .await?
        .ok_or_else(|| {
            AppError::not_found("clause_id", format!("clause {clause_id} does not exist"))
        })
}

/// New planning terms of a clause.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TermsInput {
    pub plan_tolerance_m: f64,
    pub one_point_allowed: bool,
    pub one_point_dry_window_pct: f64,
}

/// Sets a clause's planning terms (audited).
pub async fn set_terms(
    pool: &Pool,
    clause_id: i64,
    input: &TermsInput,
    actor: &Actor,
) -> Result<ClauseTerms> {
    let before = clause_terms(pool, clause_id).await?;
    let clause = db::clauses::get(pool, clause_id).await?.ok_or_else(|| {
        AppError::not_found("clause_id", format!("clause {clause_id} does not exist"))
    })?;
    let terms = ClauseTerms {
        plan_tolerance_m: number("plan_tolerance_m", input.plan_tolerance_m, 0.1, 1000.0, "m")?,
        one_point_allowed: i64::from(input.one_point_allowed),
        one_point_dry_window_pct: number(
            "one_point_dry_window_pct",
            input.one_point_dry_window_pct,
            0.1,
            10.0,
            "percentage points",
        )?,
    };
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    db::planning::set_clause_terms(&mut tx, clause_id, &terms).await?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "set_planning_terms",
            entity: "clause",
            entity_id: Some(clause_id),
            project_id: Some(clause.project_id),
            before: Some(json!(before)),
            after: Some(json!(terms)),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(terms)
}
