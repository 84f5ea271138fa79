//! The demo's "where and what to test" part: the invented Haul ramp on the Halvery cut fill, with
//! a drawn plan (one test placed far from its location), a one-point check that is its test's
//! reference, a curve whose field points drift above it and a control chart that breaks a rule.

use anyhow::{Context, anyhow};
use serde::de::DeserializeOwned;
use serde_json::{Value, json};

use crate::db::Pool;
use crate::ledger::{self, Actor};
use crate::reduction::one_point::one_point;

fn parse<T: DeserializeOwned>(v: Value) -> anyhow::Result<T> {
    Ok(serde_json::from_value(v)?)
}

fn err(e: crate::error::AppError) -> anyhow::Error {
    anyhow!("{}: {}", e.field(), e.user_message())
}

fn curve(points: &[(f64, f64)]) -> Value {
    points
        .iter()
        .map(|(w, d)| json!({"water_content_pct": w, "dry_density_kg_m3": d}))
        .collect()
}

/// A nuclear reading giving dry density `dry` at water content `w` %.
fn reading(dry: f64, w: f64) -> Value {
    let water = dry * w / 100.0;
    json!({"method": "nuclear", "wet_density_kg_m3": ((dry + water) * 10.0).round() / 10.0,
        "moisture_density_kg_m3": (water * 10.0).round() / 10.0, "gauge_serial": "NG-5120", "probe_depth_mm": 200})
}

/// Relative compaction aimed at per test against curve HX4-A (its 8th test onwards creep above 100 %).
const RC_TARGETS: [f64; 9] = [96.0, 95.6, 96.3, 95.9, 96.4, 96.1, 100.6, 100.9, 101.3];

/// The haul ramp's clause, which allows one-point references.
async fn create_clause(
    pool: &Pool,
    pid: i64,
    setup: &Actor,
) -> anyhow::Result<crate::db::clauses::Clause> {
    let clause = ledger::setup::create_clause(
        pool,
        pid,
        &parse(json!({"code": "F-95H", "title": "Haul ramp fill, one-point references allowed", "rc_min_pct": 95.0,
            "moisture_below_pct": 2.0, "moisture_above_pct": 2.0, "effort": "astm_d698_4in", "rule": "mean_and_min",
            "allowance_pct": 3.0, "area_per_test_m2": 400.0, "min_tests_per_lot": 3}))?,
        setup,
    )
    .await
    .map_err(err)?;
    let terms = ledger::planning::TermsInput {
        plan_tolerance_m: 5.0,
        one_point_allowed: true,
        one_point_dry_window_pct: 4.0,
    };
    ledger::planning::set_terms(pool, clause.id, &terms, setup)
        .await
        .map_err(err)?;
    Ok(clause)
}

/// The cut's source and its two curves, the family the one-point checks are placed in.
async fn create_source_and_curves(
    pool: &Pool,
    pid: i64,
    setup: &Actor,
) -> anyhow::Result<(
    crate::db::sources::Source,
    Vec<crate::db::lab_tests::LabTest>,
)> {
    let source = ledger::setup::create_source(
        pool,
        pid,
        &parse(json!({"code": "HX4", "name": "Halvery cut 4", "description": "Grey silty sand, variable fines",
            "uscs_class": "SM", "aashto_class": "A-2-4", "gs_fines": 2.68}))?,
        setup,
    )
    .await
    .map_err(err)?;
    let mut labs = Vec::new();
    for (code, pts) in [
        (
            "HX4-A",
            [
                (11.0, 1690.0),
                (13.0, 1735.0),
                (15.0, 1760.0),
                (17.0, 1738.0),
                (19.0, 1690.0),
            ],
        ),
        (
            "HX4-B",
            [
                (7.0, 1820.0),
                (9.0, 1875.0),
                (11.0, 1900.0),
                (13.0, 1880.0),
                (15.0, 1830.0),
            ],
        ),
    ] {
        let input = json!({"code": code, "tested_on": "2026-10-05", "effort": "astm_d698_4in", "points": curve(&pts)});
        labs.push(
            ledger::setup::create_lab_test(pool, source.id, &parse(input)?, setup)
                .await
                .map_err(err)?,
        );
    }
    Ok((source, labs))
}

/// The ramp's layer and its two lots on curve HX4-A.
async fn create_lots(
    pool: &Pool,
    pid: i64,
    clause_id: i64,
    lab_test_id: i64,
    setup: &Actor,
) -> anyhow::Result<Vec<crate::db::lots::Lot>> {
    let layer = ledger::setup::create_layer(
        pool,
        pid,
        &parse(json!({"zone": "Haul ramp", "number": 1, "thickness_mm": 250}))?,
        setup,
    )
    .await
    .map_err(err)?;
    let mut lots = Vec::new();
    for (code, from, to) in [("HR01-1", 0.0, 200.0), ("HR01-2", 200.0, 400.0)] {
        let input = json!({"code": code, "layer_id": layer.id, "chainage_from_m": from, "chainage_to_m": to,
            "offset_left_m": -5.0, "offset_right_m": 5.0, "clause_id": clause_id, "lab_test_id": lab_test_id});
        lots.push(
            ledger::setup::create_lot(pool, pid, &parse(input)?, setup)
                .await
                .map_err(err)?,
        );
    }
    Ok(lots)
}

/// Loads the part into project `pid`.
pub async fn load(pool: &Pool, pid: i64, setup: &Actor, entry: &Actor) -> anyhow::Result<()> {
    let clause = create_clause(pool, pid, setup).await?;
    let (source, labs) = create_source_and_curves(pool, pid, setup).await?;
    let lots = create_lots(pool, pid, clause.id, labs[0].id, setup).await?;
    let plan_req = ledger::planning::PlanRequest {
        seed: Some(4_417_202_611),
        edge_m: 0.5,
        exclusions: vec![crate::reduction::sampling::Exclusion {
            chainage_from_m: 120.0,
            chainage_to_m: 128.0,
        }],
        reason: String::new(),
    };
    let plan = ledger::planning::draw(pool, lots[0].id, &plan_req, setup)
        .await
        .map_err(err)?;
    let locations = ledger::planning::locations_of(&plan).map_err(err)?;
    load_tests(pool, &lots, &locations, &labs, source.id, entry, setup).await
}

/// The field tests: HR01-1 at its planned locations (its third 25 m off), HR01-2 spread along it;
/// the first test paired with a one-point check.
async fn load_tests(
    pool: &Pool,
    lots: &[crate::db::lots::Lot],
    locations: &[crate::reduction::sampling::PlannedLocation],
    labs: &[crate::db::lab_tests::LabTest],
    source_id: i64,
    entry: &Actor,
    setup: &Actor,
) -> anyhow::Result<()> {
    // The one-point check's result, worked out first so its paired test can be aimed at it.
    let d698 =
        crate::domain::LabEffort::Preset(crate::reduction::lab::EffortPreset::AstmD698Mold4in);
    let family = ledger::one_point::family(pool, source_id, &d698)
        .await
        .map_err(err)?;
    let curves: Vec<_> = family.iter().map(|(_, c)| c.clone()).collect();
    let (op_w, op_dry) = (12.0, 1800.0);
    let op = one_point(&curves, op_w, op_dry, 4.0).map_err(|e| anyhow!("demo one-point: {e}"))?;
    let mdd = labs[0].max_dry_density_kg_m3;
    let omc = labs[0].optimum_water_content_pct;
    let mut first_id = None;
    for k in 0..10usize {
        let (lot, chainage, offset) = match locations.get(k) {
            Some(l) if k < 5 => (
                &lots[0],
                l.chainage_m + if k == 2 { 25.0 } else { 0.8 },
                l.offset_m - 0.4,
            ),
            _ => (
                &lots[1],
                215.0 + 38.0 * (k - 5) as f64,
                [-2.0, 1.5, 3.0, -3.5, 0.5][k % 5],
            ),
        };
        let (dry, w) = if k == 0 {
            (
                0.962 * op.max_dry_density_kg_m3,
                op.optimum_water_content_pct - 0.6,
            )
        } else {
            (
                RC_TARGETS[k - 1] / 100.0 * mdd,
                omc + [-0.8, 0.4, -0.3, 0.6, -0.5, 0.2, -0.4, 0.3, -0.6][k - 1],
            )
        };
        let input = json!({"number": format!("H-{:03}", k + 1), "tested_at": format!("2026-11-{:02}T09:{:02}:00Z", 16 + k, 10 + k),
            "technician": if k % 2 == 0 { "S. Ilvane" } else { "M. Torrick" }, "chainage_m": (chainage * 10.0).round() / 10.0,
            "offset_m": (offset * 10.0).round() / 10.0, "depth_mm": 200, "readings": reading(dry, w)});
        let (t, _) = ledger::Ledger::new(pool.clone())
            .record_test(lot.id, &parse(input)?, entry)
            .await
            .map_err(err)
            .with_context(|| format!("demo test H-{:03}", k + 1))?;
        first_id.get_or_insert(t.id);
    }
    let op_input = ledger::one_point::OnePointInput {
        code: "OP-1".into(),
        tested_on: "2026-11-16".into(),
        effort: "astm_d698_4in".into(),
        wet_density_kg_m3: op_dry * (1.0 + op_w / 100.0),
        water_content_pct: op_w,
        field_test_id: first_id,
    };
    ledger::one_point::record(pool, source_id, &op_input, setup)
        .await
        .map_err(err)?;
    Ok(())
}
