//! Spec clauses: what a lot must achieve and how it is judged.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};
use crate::domain::{ClauseEffort, MoistureBasis, MoistureMode, Rule};
use crate::reduction::rounding::RoundingMethod;

/// A stored specification clause.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Clause {
    pub id: i64,
    pub project_id: i64,
    pub code: String,
    pub title: String,
    pub rc_min_pct: f64,
    pub moisture_below_pct: f64,
    pub moisture_above_pct: f64,
    pub effort: ClauseEffort,
    pub rule: Rule,
    pub allowance_pct: Option<f64>,
    pub min_pwl_pct: Option<f64>,
    pub area_per_test_m2: Option<f64>,
    pub length_per_test_m: Option<f64>,
    pub min_tests_per_lot: i64,
    pub oversize_limit_pct: f64,
    pub created_at: String,
    /// The moisture window for every test, or two-sided percent within limits.
    pub moisture_judgement: MoistureMode,
    /// Least moisture percent within limits under "pwl".
    pub moisture_min_pwl_pct: Option<f64>,
    /// Relative compaction above this is flagged implausible.
    pub rc_plausible_max_pct: f64,
    /// ASTM E29 rounding to the limits' written decimals, or the absolute method.
    pub rounding: RoundingMethod,
    /// Decimals the contract writes its limits with.
    pub limit_decimals: i64,
    /// Sieve the oversize is retained on, mm (4.75 or 19).
    pub oversize_sieve_mm: f64,
    /// Coarse water content assumed when a test gives none, percent (None: the test must give it).
    pub coarse_water_default_pct: Option<f64>,
    /// Points of OMC (below/above), percent of OMC or absolute (low/high).
    pub moisture_basis: MoistureBasis,
    /// Least allowed w / OMC × 100 or w, percent, under the other two forms.
    pub moisture_low_pct: Option<f64>,
    /// Greatest allowed w / OMC × 100 or w, percent, under the other two forms.
    pub moisture_high_pct: Option<f64>,
    /// Greatest air voids allowed, percent (None: not judged).
    pub max_air_voids_pct: Option<f64>,
}

/// Every column, in the struct's order.
const COLUMNS: &str = "id, project_id, code, title, rc_min_pct, moisture_below_pct, moisture_above_pct, effort, rule,
    allowance_pct, min_pwl_pct, area_per_test_m2, length_per_test_m, min_tests_per_lot, oversize_limit_pct, created_at,
    moisture_judgement, moisture_min_pwl_pct, rc_plausible_max_pct, rounding, limit_decimals, oversize_sieve_mm,
    coarse_water_default_pct, moisture_basis, moisture_low_pct, moisture_high_pct, max_air_voids_pct";

/// Inserts a clause; `c.id` and `c.created_at` are ignored and filled by the database.
pub async fn insert(tx: &mut Tx<'_>, c: &Clause) -> sqlx::Result<Clause> {
    on_tx!(tx, |tx| {
        sqlx::query_as::<_, Clause>(sqlx::AssertSqlSafe(format!(
        "INSERT INTO clauses (project_id, code, title, rc_min_pct, moisture_below_pct, moisture_above_pct, effort, rule,
             allowance_pct, min_pwl_pct, area_per_test_m2, length_per_test_m, min_tests_per_lot, oversize_limit_pct, created_at,
             moisture_judgement, moisture_min_pwl_pct, rc_plausible_max_pct, rounding, limit_decimals,
             oversize_sieve_mm, coarse_water_default_pct, moisture_basis, moisture_low_pct, moisture_high_pct,
             max_air_voids_pct)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20, $21, $22,
             $23, $24, $25, $26)
         RETURNING {COLUMNS}"
    )))
    .bind(c.project_id)
    .bind(&c.code)
    .bind(&c.title)
    .bind(c.rc_min_pct)
    .bind(c.moisture_below_pct)
    .bind(c.moisture_above_pct)
    .bind(c.effort)
    .bind(c.rule)
    .bind(c.allowance_pct)
    .bind(c.min_pwl_pct)
    .bind(c.area_per_test_m2)
    .bind(c.length_per_test_m)
    .bind(c.min_tests_per_lot)
    .bind(c.oversize_limit_pct)
    .bind(&c.created_at)
    .bind(c.moisture_judgement)
    .bind(c.moisture_min_pwl_pct)
    .bind(c.rc_plausible_max_pct)
    .bind(c.rounding)
    .bind(c.limit_decimals)
    .bind(c.oversize_sieve_mm)
    .bind(c.coarse_water_default_pct)
    .bind(c.moisture_basis)
    .bind(c.moisture_low_pct)
    .bind(c.moisture_high_pct)
    .bind(c.max_air_voids_pct)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every clause of a project.
pub async fn list(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<Clause>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Clause>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM clauses WHERE project_id = $1 ORDER BY code"
        ))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// One clause by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<Clause>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Clause>(
        sqlx::AssertSqlSafe(format!("SELECT {COLUMNS} FROM clauses WHERE id = $1"))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}
