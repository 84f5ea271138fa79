//! Test-location plans, one-point checks and the clause terms that govern them (migration 0009).

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// A stored plan (the current one has no `superseded_at`).
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct TestPlan {
    pub id: i64,
    pub project_id: i64,
    pub lot_id: i64,
    pub revision: i64,
    pub seed: i64,
    pub location_count: i64,
    pub edge_m: f64,
    pub exclusions_json: String,
    pub locations_json: String,
    pub created_at: String,
    pub created_by: String,
    pub superseded_at: Option<String>,
    pub superseded_reason: Option<String>,
}

const PLAN_COLUMNS: &str =
    "id, project_id, lot_id, revision, seed, location_count, edge_m, exclusions_json,
    locations_json, created_at, created_by, superseded_at, superseded_reason";

/// Every plan of a lot, newest first.
pub async fn plans_for_lot(pool: &Pool, lot_id: i64) -> sqlx::Result<Vec<TestPlan>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, TestPlan>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {PLAN_COLUMNS} FROM test_plans WHERE lot_id = $1 ORDER BY revision DESC"
        ))
    )
    .bind(lot_id)
    .fetch_all(pool)
    .await)
}

/// The current plan's revision of a lot, read inside the write.
pub async fn current_revision(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<Option<i64>> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "SELECT MAX(revision) FROM test_plans WHERE lot_id = $1"
    )
    .bind(lot_id)
    .fetch_one(&mut **tx)
    .await)
}

/// Marks the current plan of a lot superseded.
pub async fn supersede(tx: &mut Tx<'_>, lot_id: i64, reason: &str, now: &str) -> sqlx::Result<u64> {
    Ok(on_tx!(tx, |tx| sqlx::query(
        "UPDATE test_plans SET superseded_at = $1, superseded_reason = $2
          WHERE lot_id = $3 AND superseded_at IS NULL",
    )
    .bind(now)
    .bind(reason)
    .bind(lot_id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?)
}

/// Inserts a plan; `id`, `superseded_*` are ignored.
pub async fn insert_plan(tx: &mut Tx<'_>, p: &TestPlan) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| {
        sqlx::query_scalar(
        "INSERT INTO test_plans (project_id, lot_id, revision, seed, location_count, edge_m, exclusions_json,
             locations_json, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10) RETURNING id",
    )
    .bind(p.project_id)
    .bind(p.lot_id)
    .bind(p.revision)
    .bind(p.seed)
    .bind(p.location_count)
    .bind(p.edge_m)
    .bind(&p.exclusions_json)
    .bind(&p.locations_json)
    .bind(&p.created_at)
    .bind(&p.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// A clause's planning terms.
#[derive(Debug, Clone, Copy, Serialize, sqlx::FromRow)]
pub struct ClauseTerms {
    pub plan_tolerance_m: f64,
    /// 1 when a one-point check may be a test's reference.
    pub one_point_allowed: i64,
    pub one_point_dry_window_pct: f64,
}

/// The planning terms of a clause.
pub async fn clause_terms(pool: &Pool, clause_id: i64) -> sqlx::Result<Option<ClauseTerms>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, ClauseTerms>(
        "SELECT plan_tolerance_m, one_point_allowed, one_point_dry_window_pct FROM clauses WHERE id = $1",
    )
    .bind(clause_id)
    .fetch_optional(pool)
    .await
    })
}

/// Sets the planning terms of a clause.
pub async fn set_clause_terms(
    tx: &mut Tx<'_>,
    clause_id: i64,
    t: &ClauseTerms,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE clauses SET plan_tolerance_m = $1, one_point_allowed = $2, one_point_dry_window_pct = $3
          WHERE id = $4",
    )
    .bind(t.plan_tolerance_m)
    .bind(t.one_point_allowed)
    .bind(t.one_point_dry_window_pct)
    .bind(clause_id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(())
}

/// A stored one-point check.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct OnePointCheck {
    pub id: i64,
    pub project_id: i64,
    pub source_id: i64,
    pub field_test_id: Option<i64>,
    pub code: String,
    pub tested_on: String,
    /// The family's effort (a lab effort).
    pub effort: crate::domain::LabEffort,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    pub dry_window_pct: f64,
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
    pub lower_lab_test_id: i64,
    pub upper_lab_test_id: i64,
    pub fraction: f64,
    pub created_at: String,
    pub created_by: String,
}

const OP_COLUMNS: &str = "id, project_id, source_id, field_test_id, code, tested_on, effort, water_content_pct,
    dry_density_kg_m3, dry_window_pct, max_dry_density_kg_m3, optimum_water_content_pct, lower_lab_test_id,
    upper_lab_test_id, fraction, created_at, created_by";

/// Inserts a one-point check; `id` is ignored.
pub async fn insert_one_point(tx: &mut Tx<'_>, c: &OnePointCheck) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| {
        sqlx::query_scalar(
        "INSERT INTO one_point_checks (project_id, source_id, field_test_id, code, tested_on, effort,
             water_content_pct, dry_density_kg_m3, dry_window_pct, max_dry_density_kg_m3,
             optimum_water_content_pct, lower_lab_test_id, upper_lab_test_id, fraction, created_at, created_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16) RETURNING id",
    )
    .bind(c.project_id)
    .bind(c.source_id)
    .bind(c.field_test_id)
    .bind(&c.code)
    .bind(&c.tested_on)
    .bind(&c.effort)
    .bind(c.water_content_pct)
    .bind(c.dry_density_kg_m3)
    .bind(c.dry_window_pct)
    .bind(c.max_dry_density_kg_m3)
    .bind(c.optimum_water_content_pct)
    .bind(c.lower_lab_test_id)
    .bind(c.upper_lab_test_id)
    .bind(c.fraction)
    .bind(&c.created_at)
    .bind(&c.created_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// One-point checks of a source, oldest first.
pub async fn one_points_for_source(
    pool: &Pool,
    source_id: i64,
) -> sqlx::Result<Vec<OnePointCheck>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, OnePointCheck>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {OP_COLUMNS} FROM one_point_checks WHERE source_id = $1 ORDER BY id"
        ))
    )
    .bind(source_id)
    .fetch_all(pool)
    .await)
}

/// The one-point checks that are their paired test's reference (the test's lot's clause allows
/// it), with the lot id, for a whole project (`lot_id` None) or one lot.
pub async fn reference_one_points(
    pool: &Pool,
    project_id: i64,
    lot_id: Option<i64>,
) -> sqlx::Result<Vec<(i64, OnePointCheck)>> {
    let cols = qualified(OP_COLUMNS, "op");
    let rows = on_pool!(pool, |pool| sqlx::query_as::<_, LotOnePoint>(
        sqlx::AssertSqlSafe(format!(
            "SELECT ft.lot_id AS paired_lot_id, {cols} FROM one_point_checks op
           JOIN field_tests ft ON ft.id = op.field_test_id
           JOIN lots lo ON lo.id = ft.lot_id
           JOIN clauses c ON c.id = lo.clause_id
          WHERE op.project_id = $1 AND c.one_point_allowed = 1 AND ($2 IS NULL OR ft.lot_id = $3)
          ORDER BY op.id"
        ))
    )
    .bind(project_id)
    .bind(lot_id)
    .bind(lot_id)
    .fetch_all(pool)
    .await)?;
    Ok(rows
        .into_iter()
        .map(|r| (r.paired_lot_id, r.check))
        .collect())
}

#[derive(sqlx::FromRow)]
struct LotOnePoint {
    paired_lot_id: i64,
    #[sqlx(flatten)]
    check: OnePointCheck,
}

/// Plans with their clause's tolerance: (plan, tolerance m), current plans of a project or a lot.
pub async fn current_plans(
    pool: &Pool,
    project_id: i64,
    lot_id: Option<i64>,
) -> sqlx::Result<Vec<(TestPlan, f64)>> {
    let cols = qualified(PLAN_COLUMNS, "p");
    let rows = on_pool!(pool, |pool| sqlx::query_as::<_, PlanWithTolerance>(
        sqlx::AssertSqlSafe(format!(
            "SELECT c.plan_tolerance_m AS tolerance_m, {cols} FROM test_plans p
           JOIN lots lo ON lo.id = p.lot_id JOIN clauses c ON c.id = lo.clause_id
          WHERE p.project_id = $1 AND p.superseded_at IS NULL AND ($2 IS NULL OR p.lot_id = $3)
          ORDER BY p.lot_id"
        ))
    )
    .bind(project_id)
    .bind(lot_id)
    .bind(lot_id)
    .fetch_all(pool)
    .await)?;
    Ok(rows.into_iter().map(|r| (r.plan, r.tolerance_m)).collect())
}

#[derive(sqlx::FromRow)]
struct PlanWithTolerance {
    tolerance_m: f64,
    #[sqlx(flatten)]
    plan: TestPlan,
}

/// A column list with each column prefixed by a table's alias (`id, code` → `p.id, p.code`).
fn qualified(columns: &str, alias: &str) -> String {
    columns
        .split(',')
        .map(|c| format!("{alias}.{}", c.trim()))
        .collect::<Vec<_>>()
        .join(", ")
}
