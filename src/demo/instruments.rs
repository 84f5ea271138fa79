//! The demo's instrument register, loaded after the demo project through the same
//! ledger functions the API uses. The register starts late in November with two newly
//! registered gauges (earlier tests, from unregistered gauges, stay "instrument not recorded"): two gauges with their daily counts — NG-6310 drifts
//! out of tolerance on 2 December and is caught (its counts fail twice, so the register
//! refuses its tests that day) —, a sand-cone apparatus with a sand batch change, one set
//! of material offsets for NG-6203, and three tests on an open lot that pass the checks.

use anyhow::{Context, anyhow};

use crate::db::{self, Pool};
use crate::ledger::instruments::{
    self as reg, AssignmentInput, InstrumentInput, InstrumentKind, OperatorInput,
    counts::CountInput, offsets::OffsetInput,
};
use crate::ledger::{Actor, field::FieldTestInput};
use crate::reduction::instruments::{GaugeMode, OffsetPair};

fn user_error(e: crate::error::AppError) -> anyhow::Error {
    match e {
        crate::error::AppError::Internal(inner) => inner,
        e => anyhow!("{}: {}", e.field(), e.user_message()),
    }
}

/// Registers an instrument with its first calibration and assigns it to the project.
async fn register(
    pool: &Pool,
    pid: i64,
    input: InstrumentInput,
    from: &str,
    actor: &Actor,
) -> anyhow::Result<i64> {
    register_until(pool, pid, input, from, None, actor).await
}

/// [`register`] with the day the instrument leaves the project.
async fn register_until(
    pool: &Pool,
    pid: i64,
    input: InstrumentInput,
    from: &str,
    to: Option<&str>,
    actor: &Actor,
) -> anyhow::Result<i64> {
    let i = reg::create_instrument(pool, &input, actor)
        .await
        .map_err(user_error)?;
    let to_on = to.map(str::to_string);
    reg::assign(
        pool,
        i.id,
        &AssignmentInput {
            project_id: pid,
            from_on: from.into(),
            to_on,
        },
        actor,
    )
    .await
    .map_err(user_error)?;
    Ok(i.id)
}

fn instrument(
    kind: InstrumentKind,
    serial: &str,
    description: &str,
    calibrated: &str,
    due: Option<&str>,
) -> InstrumentInput {
    InstrumentInput {
        kind,
        serial: serial.into(),
        description: description.into(),
        calibrated_on: Some(calibrated.into()),
        due_on: due.map(str::to_string),
        cone_sand_mass_g: None,
        sand_density_kg_m3: None,
        volume_cm3: None,
    }
}

/// A day's counts of a gauge: (day, density, moisture).
async fn counts(
    pool: &Pool,
    pid: i64,
    gauge: i64,
    rows: &[(&str, i64, i64)],
    actor: &Actor,
) -> anyhow::Result<()> {
    for (day, d, m) in rows {
        let input = CountInput {
            project_id: pid,
            counted_on: (*day).into(),
            density_count: *d,
            moisture_count: *m,
        };
        reg::counts::record_count(pool, gauge, &input, actor)
            .await
            .map_err(user_error)?;
    }
    Ok(())
}

/// The register's gauge operators.
async fn create_operators(pool: &Pool, qc: &Actor) -> anyhow::Result<()> {
    for (code, name) in [("okafor", "R. Okafor"), ("lindqvist", "M. Lindqvist")] {
        let input = OperatorInput {
            code: code.into(),
            name: name.into(),
            certification: format!("gauge operator card GO-{}", code.len() * 1111),
            expires_on: "2027-08-31".into(),
        };
        reg::create_operator(pool, &input, qc)
            .await
            .map_err(user_error)?;
    }
    Ok(())
}

/// The two nuclear gauges with their leak test; (unit A, unit B).
async fn register_gauges(pool: &Pool, pid: i64, qc: &Actor) -> anyhow::Result<(i64, i64)> {
    let g1 = register(
        pool,
        pid,
        instrument(
            InstrumentKind::NuclearGauge,
            "NG-6203",
            "moisture-density gauge, unit A",
            "2026-02-10",
            Some("2027-02-10"),
        ),
        "2026-11-23",
        qc,
    )
    .await?;
    // Due on 20 December: the project home lists it among calibrations due within 30 days.
    let g2 = register(
        pool,
        pid,
        instrument(
            InstrumentKind::NuclearGauge,
            "NG-6310",
            "moisture-density gauge, unit B",
            "2025-12-20",
            Some("2026-12-20"),
        ),
        "2026-11-23",
        qc,
    )
    .await?;
    let leak_test = reg::RecordInput {
        kind: reg::RecordKind::LeakTest,
        done_on: "2026-06-20".into(),
        due_on: Some("2026-12-20".into()),
        reference: "wipe test WT-6310-2".into(),
        cone_sand_mass_g: None,
        sand_density_kg_m3: None,
        volume_cm3: None,
    };
    reg::add_record(pool, g2, &leak_test, qc)
        .await
        .map_err(user_error)?;
    Ok((g1, g2))
}

/// Each gauge's baseline of four standard counts, then its daily counts: unit A steady,
/// unit B drifting.
async fn standard_counts(
    pool: &Pool,
    pid: i64,
    (g1, g2): (i64, i64),
    tech: &Actor,
) -> anyhow::Result<()> {
    let baseline = [
        ("2026-11-24", 2811, 702),
        ("2026-11-25", 2806, 699),
        ("2026-11-26", 2798, 704),
        ("2026-11-27", 2805, 695),
    ];
    counts(pool, pid, g1, &baseline, tech).await?;
    let daily = [
        ("2026-11-30", 2809, 700),
        ("2026-12-01", 2801, 698),
        ("2026-12-02", 2812, 705),
    ];
    counts(pool, pid, g1, &daily, tech).await?;
    let baseline2 = [
        ("2026-11-24", 3102, 655),
        ("2026-11-25", 3096, 652),
        ("2026-11-26", 3105, 658),
        ("2026-11-27", 3097, 651),
    ];
    counts(pool, pid, g2, &baseline2, tech).await?;
    // Drift: −0.8 % on the 1st (still within 1 %), −1.6 % and −1.5 % on the 2nd (failed twice: caught).
    let daily2 = [
        ("2026-11-30", 3090, 654),
        ("2026-12-01", 3075, 653),
        ("2026-12-02", 3050, 652),
        ("2026-12-02", 3053, 651),
    ];
    counts(pool, pid, g2, &daily2, tech).await
}

/// The sand cone and the two sand batches, the first leaving when the second arrives.
async fn register_sand_cone(pool: &Pool, pid: i64, qc: &Actor) -> anyhow::Result<()> {
    let cone = InstrumentInput {
        cone_sand_mass_g: Some(1655.0),
        ..instrument(
            InstrumentKind::SandCone,
            "SC-07",
            "cone and base plate, 165 mm",
            "2026-09-01",
            Some("2027-09-01"),
        )
    };
    register(pool, pid, cone, "2026-09-01", qc).await?;
    let batch1 = InstrumentInput {
        sand_density_kg_m3: Some(1512.0),
        ..instrument(
            InstrumentKind::SandBatch,
            "SB-1",
            "uniform silica sand, first batch",
            "2026-09-01",
            None,
        )
    };
    register_until(pool, pid, batch1, "2026-09-01", Some("2026-11-25"), qc).await?;
    let batch2 = InstrumentInput {
        sand_density_kg_m3: Some(1488.0),
        ..instrument(
            InstrumentKind::SandBatch,
            "SB-2",
            "uniform silica sand, second batch",
            "2026-11-25",
            None,
        )
    };
    register(pool, pid, batch2, "2026-11-26", qc).await?;
    Ok(())
}

/// Loads the register into the demo project `pid`.
pub async fn load(pool: &Pool, pid: i64) -> anyhow::Result<()> {
    let qc = Actor::system("D. Achterberg (achterberg)");
    let tech = Actor::system("R. Okafor (okafor)");
    create_operators(pool, &qc).await?;
    let gauges = register_gauges(pool, pid, &qc).await?;
    standard_counts(pool, pid, gauges, &tech).await?;
    register_sand_cone(pool, pid, &qc).await?;
    tests_on_an_open_lot(pool, pid, gauges.0, &qc, &tech)
        .await
        .context("demo instrument tests")
}

/// A passing nuclear reading for a lot's curve at a spot.
fn nuclear(
    lot: &db::lots::Lot,
    mdd: f64,
    omc: f64,
    serial: &str,
    day: &str,
    k: f64,
) -> anyhow::Result<FieldTestInput> {
    let dry = mdd * (0.97 + k);
    Ok(serde_json::from_value(serde_json::json!({
        "tested_at": format!("{day}T08:30:00Z"),
        "technician": "R. Okafor",
        "instrument_serial": serial,
        "chainage_m": lot.chainage_from_m + (lot.chainage_to_m - lot.chainage_from_m) * (0.3 + k * 10.0),
        "offset_m": (lot.offset_left_m + lot.offset_right_m) / 2.0,
        "depth_mm": 200,
        "readings": {"method": "nuclear", "wet_density_kg_m3": dry * (1.0 + omc / 100.0),
                     "moisture_density_kg_m3": dry * omc / 100.0, "probe_depth_mm": 200}
    }))?)
}

async fn tests_on_an_open_lot(
    pool: &Pool,
    pid: i64,
    g1: i64,
    qc: &Actor,
    tech: &Actor,
) -> anyhow::Result<()> {
    let lots = db::lots::list(
        pool,
        pid,
        &db::lots::LotFilter {
            state: Some(crate::domain::LotState::Open),
            limit: 1000,
            ..Default::default()
        },
    )
    .await?;
    // Not a Haul ramp lot: those carry the planning demo, whose drift warning rests on
    // their latest tests (src/demo/planning.rs).
    let lot = lots
        .iter()
        .rev()
        .find(|l| !l.code.starts_with("HR"))
        .ok_or_else(|| anyhow!("the demo has no open lot"))?;
    let lab = db::lab_tests::get(pool, lot.lab_test_id)
        .await?
        .ok_or_else(|| anyhow!("lab test"))?;
    let (mdd, omc) = (lab.max_dry_density_kg_m3, lab.optimum_water_content_pct);
    let pairs = [
        (2105.0, 2086.0, 10.9, 11.6),
        (2088.0, 2074.0, 11.4, 11.9),
        (2120.0, 2096.0, 10.6, 11.5),
    ]
    .map(|(g, r, gw, ow)| OffsetPair {
        gauge_wet_density_kg_m3: g,
        reference_wet_density_kg_m3: r,
        gauge_water_content_pct: gw,
        oven_water_content_pct: ow,
    });
    let offset = OffsetInput {
        source_id: lot.source_id,
        mode: GaugeMode::DirectTransmission,
        effective_on: "2026-11-30".into(),
        pairs: pairs.to_vec(),
    };
    reg::offsets::create_offset(pool, g1, &offset, qc)
        .await
        .map_err(user_error)?;
    let record = |input: FieldTestInput| async move {
        crate::ledger::Ledger::new(pool.clone())
            .record_test(lot.id, &input, tech)
            .await
            .map_err(user_error)
    };
    record(nuclear(lot, mdd, omc, "NG-6203", "2026-12-01", 0.01)?).await?;
    record(nuclear(lot, mdd, omc, "NG-6310", "2026-12-01", 0.005)?).await?;
    let sand = serde_json::from_value(serde_json::json!({
        "tested_at": "2026-12-01T11:00:00Z", "technician": "M. Lindqvist", "instrument_serial": "SC-07",
        "chainage_m": lot.chainage_from_m + (lot.chainage_to_m - lot.chainage_from_m) * 0.6,
        "offset_m": (lot.offset_left_m + lot.offset_right_m) / 2.0,
        "readings": {"method": "sand_cone", "mass_sand_used_g": 5240.0,
                     "mass_wet_soil_g": mdd * 0.975 * (1.0 + omc / 100.0) * (5240.0 - 1655.0) / 1488.0,
                     "water_content_pct": omc}
    }))?;
    record(sand).await?;
    Ok(())
}
