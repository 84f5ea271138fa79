//! Field density tests: readings exactly as entered, their reduction, retest links and voids.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};
use crate::domain::Method;
use crate::reduction::instruments::InstrumentCheck;

/// A stored field test.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct FieldTest {
    pub id: i64,
    pub project_id: i64,
    pub lot_id: i64,
    pub number: String,
    pub tested_at: String,
    pub technician: String,
    pub method: Method,
    pub instrument_serial: String,
    pub chainage_m: f64,
    pub offset_m: f64,
    pub depth_mm: Option<f64>,
    pub coarse_pct: Option<f64>,
    pub coarse_water_content_pct: Option<f64>,
    pub easting: Option<f64>,
    pub northing: Option<f64>,
    pub readings_json: String,
    pub wet_density_kg_m3: f64,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    pub moisture_source: String,
    pub reduction_version: String,
    pub retest_of: Option<i64>,
    pub void_reason: Option<String>,
    pub voided_by: Option<String>,
    pub voided_at: Option<String>,
    pub created_at: String,
    pub created_by: String,
    /// What the register said of the instrument: "not_recorded", "in_check" or "out_of_check"
    /// (see `ledger::instruments::check`).
    pub instrument_check: InstrumentCheck,
    /// The instrument's evidence as recorded (calibration, that day's standard count), the
    /// reason it was out of check, or the reason a calibrated value was overridden.
    pub instrument_note: Option<String>,
    /// The registered gauge operator who ran the test.
    pub operator_id: Option<i64>,
    /// Material offsets applied to the gauge reading (the raw reading stays in `readings_json`).
    pub density_offset_kg_m3: Option<f64>,
    pub moisture_offset_pct: Option<f64>,
}

/// The columns of `field_tests` after `id`, in the order of [`FieldTest`], with the
/// expression given for `readings_json`: the one list every SELECT and INSERT of whole
/// tests is written from (here and in `bulk`).
macro_rules! columns_after_id {
    ($readings_json:literal) => {
        concat!(
            "project_id, lot_id, number, tested_at, technician, method, instrument_serial, chainage_m,
    offset_m, depth_mm, coarse_pct, coarse_water_content_pct, easting, northing, ",
            $readings_json,
            ", wet_density_kg_m3,
    water_content_pct, dry_density_kg_m3, moisture_source, reduction_version, retest_of, void_reason, voided_by,
    voided_at, created_at, created_by, instrument_check, instrument_note, operator_id, density_offset_kg_m3,
    moisture_offset_pct"
        )
    };
}

/// Every column of a stored test, in the order of [`FieldTest`].
pub(crate) const COLUMNS: &str = concat!("id, ", columns_after_id!("readings_json"));

/// The columns of a test the lot verdict and the whole-project views need.
///
/// Same as [`FieldTest`] without `readings_json`, the one large text no whole-project
/// view shows; see [`stream_for_views`].
const VIEW_COLUMNS: &str = concat!("id, ", columns_after_id!("'' AS readings_json"));

/// Filters for listing tests across a project; `None` means "any".
#[derive(Debug, Clone, Default)]
pub struct TestFilter {
    pub lot_id: Option<i64>,
    pub layer_id: Option<i64>,
    pub chainage_from_m: Option<f64>,
    pub chainage_to_m: Option<f64>,
    pub tested_from: Option<String>,
    pub tested_before: Option<String>,
    pub method: Option<String>,
    pub limit: i64,
    pub offset: i64,
}

/// Binds a test's columns after `id`, in the order of [`columns_after_id!`], on any sqlx
/// query: the one bind list of the single insert here and the multi-row insert of `bulk`.
macro_rules! bind_after_id {
    ($q:expr, $t:expr) => {
        $q.bind($t.project_id)
            .bind($t.lot_id)
            .bind(&$t.number)
            .bind(&$t.tested_at)
            .bind(&$t.technician)
            .bind($t.method)
            .bind(&$t.instrument_serial)
            .bind($t.chainage_m)
            .bind($t.offset_m)
            .bind($t.depth_mm)
            .bind($t.coarse_pct)
            .bind($t.coarse_water_content_pct)
            .bind($t.easting)
            .bind($t.northing)
            .bind(&$t.readings_json)
            .bind($t.wet_density_kg_m3)
            .bind($t.water_content_pct)
            .bind($t.dry_density_kg_m3)
            .bind(&$t.moisture_source)
            .bind(&$t.reduction_version)
            .bind($t.retest_of)
            .bind(&$t.void_reason)
            .bind(&$t.voided_by)
            .bind(&$t.voided_at)
            .bind(&$t.created_at)
            .bind(&$t.created_by)
            .bind($t.instrument_check)
            .bind(&$t.instrument_note)
            .bind($t.operator_id)
            .bind($t.density_offset_kg_m3)
            .bind($t.moisture_offset_pct)
    };
}
pub(super) use bind_after_id;

/// Parameters of one whole test row ([`COLUMNS`]).
pub(super) const WIDTH: usize = 32;

/// Inserts a test (`id` ignored) and returns its id.
pub async fn insert(tx: &mut Tx<'_>, t: &FieldTest) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| {
        let q = sqlx::query_scalar(concat!(
            "INSERT INTO field_tests (",
            columns_after_id!("readings_json"),
            ") VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20,
                 $21, $22, $23, $24, $25, $26, $27, $28, $29, $30, $31) RETURNING id"
        ));
        bind_after_id!(q, t).fetch_one(&mut **tx).await
    })
}

/// One test by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<FieldTest>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, FieldTest>(
        sqlx::AssertSqlSafe(format!("SELECT {COLUMNS} FROM field_tests WHERE id = $1"))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// Every test of a lot in the order they were taken.
pub async fn for_lot(pool: &Pool, lot_id: i64) -> sqlx::Result<Vec<FieldTest>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, FieldTest>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM field_tests WHERE lot_id = $1 ORDER BY tested_at, id"
        ))
    )
    .bind(lot_id)
    .fetch_all(pool)
    .await)
}

/// Where a [`TestFilter`] selects: `$1` is the project, `$2`..`$15` come from
/// [`bind_filter!`]; each filter is off when its value is NULL.
const FILTER_WHERE: &str = "WHERE t.project_id = $1
           AND ($2 IS NULL OR t.lot_id = $3)
           AND ($4 IS NULL OR t.lot_id IN (SELECT id FROM lots WHERE layer_id = $5))
           AND ($6 IS NULL OR t.chainage_m >= $7)
           AND ($8 IS NULL OR t.chainage_m <= $9)
           AND ($10 IS NULL OR t.tested_at >= $11)
           AND ($12 IS NULL OR t.tested_at < $13)
           AND ($14 IS NULL OR t.method = $15)";

/// Binds `$1`..`$15` of [`FILTER_WHERE`] on any sqlx query.
macro_rules! bind_filter {
    ($q:expr, $project_id:expr, $f:expr) => {
        $q.bind($project_id)
            .bind($f.lot_id)
            .bind($f.lot_id)
            .bind($f.layer_id)
            .bind($f.layer_id)
            .bind($f.chainage_from_m)
            .bind($f.chainage_from_m)
            .bind($f.chainage_to_m)
            .bind($f.chainage_to_m)
            .bind(&$f.tested_from)
            .bind(&$f.tested_from)
            .bind(&$f.tested_before)
            .bind(&$f.tested_before)
            .bind(&$f.method)
            .bind(&$f.method)
    };
}

/// How many tests of a project match the filter (its limit and offset ignored).
pub async fn count_matching(pool: &Pool, project_id: i64, f: &TestFilter) -> sqlx::Result<i64> {
    on_pool!(pool, |pool| {
        let q = sqlx::query_scalar(sqlx::AssertSqlSafe(format!(
            "SELECT COUNT(*) FROM field_tests t {FILTER_WHERE}"
        )));
        bind_filter!(q, project_id, f).fetch_one(pool).await
    })
}

/// Tests of a project matching the filter, newest first.
pub async fn list(pool: &Pool, project_id: i64, f: &TestFilter) -> sqlx::Result<Vec<FieldTest>> {
    on_pool!(pool, |pool| {
        let q = sqlx::query_as::<_, FieldTest>(sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM field_tests t {FILTER_WHERE}
             ORDER BY t.tested_at DESC, t.id DESC LIMIT $16 OFFSET $17"
        )));
        bind_filter!(q, project_id, f)
            .bind(f.limit)
            .bind(f.offset)
            .fetch_all(pool)
            .await
    })
}

/// (id, lot id) of every test of a project matching the filter (its limit and offset
/// ignored), newest first: the test list's result filter picks from these.
pub async fn ids_matching(
    pool: &Pool,
    project_id: i64,
    f: &TestFilter,
) -> sqlx::Result<Vec<(i64, i64)>> {
    on_pool!(pool, |pool| {
        let q = sqlx::query_as::<_, (i64, i64)>(sqlx::AssertSqlSafe(format!(
            "SELECT t.id, t.lot_id FROM field_tests t {FILTER_WHERE}
             ORDER BY t.tested_at DESC, t.id DESC"
        )));
        bind_filter!(q, project_id, f).fetch_all(pool).await
    })
}

/// Voids a test with a reason; false when it was already void.
pub async fn void(
    tx: &mut Tx<'_>,
    id: i64,
    reason: &str,
    actor: &str,
    now: &str,
) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE field_tests SET void_reason = $1, voided_by = $2, voided_at = $3 WHERE id = $4 AND void_reason IS NULL",
    )
    .bind(reason)
    .bind(actor)
    .bind(now)
    .bind(id)
        .execute(&mut **tx)
        .await?
        .rows_affected()
    });
    Ok(super::changed_one(q))
}

/// Counts of tests in a project taken at or after each of the given times.
pub async fn count_since(pool: &Pool, project_id: i64, since: &str) -> sqlx::Result<i64> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT COUNT(*) FROM field_tests WHERE project_id = $1 AND tested_at >= $2"
    )
    .bind(project_id)
    .bind(since)
    .fetch_one(pool)
    .await)
}

/// Every test of a project, counted row by row: for tools and benches (views count from
/// the lots' stored summaries).
pub async fn count(pool: &Pool, project_id: i64) -> sqlx::Result<i64> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT COUNT(*) FROM field_tests WHERE project_id = $1"
    )
    .bind(project_id)
    .fetch_one(pool)
    .await)
}

/// The newest test in a project, if any.
pub async fn latest(pool: &Pool, project_id: i64) -> sqlx::Result<Option<FieldTest>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, FieldTest>(sqlx::AssertSqlSafe(format!(
        "SELECT {COLUMNS} FROM field_tests WHERE project_id = $1 ORDER BY created_at DESC, id DESC LIMIT 1"
    )))
    .bind(project_id)
    .fetch_optional(pool)
    .await
    })
}

/// Every test of a project by lot then time, without `readings_json` (and with only the
/// verdict's columns when `verdict_only`), as a stream: a whole-project view judges one
/// lot at a time and never holds the project's tests at once.
pub fn stream_for_views(
    pool: &Pool,
    project_id: i64,
    verdict_only: bool,
) -> futures_util::stream::BoxStream<'_, sqlx::Result<FieldTest>> {
    let columns = if verdict_only {
        super::bulk::VERDICT_COLUMNS
    } else {
        VIEW_COLUMNS
    };
    on_pool!(pool, |pool| sqlx::query_as::<_, FieldTest>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {columns} FROM field_tests WHERE project_id = $1 ORDER BY lot_id, tested_at, id"
        ))
    )
    .bind(project_id)
    .fetch(pool))
}
