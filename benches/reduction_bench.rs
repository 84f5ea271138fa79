//! Times the reduction library on a season's worth of data: 100,000 field
//! tests reduced, judged and evaluated into lots, and 10,000 curve fits.

use std::hint::black_box;
use std::time::Instant;

use liftledger::reduction::acceptance::{AcceptanceRule, LotTestInput, evaluate_lot};
use liftledger::reduction::curve::{CurvePoint, fit_curve};
use liftledger::reduction::field::{FieldReadings, reduce_field};
use liftledger::reduction::verdict::{Reference, SpecLimits, judge_test};
use liftledger::reduction::{Density, SpecificGravity, WaterContent};

/// Small deterministic generator so every run times the same inputs.
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
    fn around(&mut self, centre: f64, spread: f64) -> f64 {
        centre + (self.next() - 0.5) * 2.0 * spread
    }
}

fn field_readings(rng: &mut Lcg, i: usize) -> FieldReadings {
    let w = rng.around(12.0, 2.5);
    match i % 4 {
        0 => {
            let wet = rng.around(2050.0, 60.0);
            FieldReadings::Nuclear {
                wet_density_kg_m3: wet,
                moisture_density_kg_m3: Some(wet - wet / (1.0 + w / 100.0)),
                water_content_pct: None,
                oven_water_content_pct: i.is_multiple_of(8).then_some(w + 0.3),
                gauge_serial: Some("G-1042".to_string()),
                probe_depth_mm: Some(200.0),
            }
        }
        1 => FieldReadings::SandCone {
            mass_sand_used_g: rng.around(6000.0, 300.0),
            mass_sand_in_cone_g: 1600.0,
            sand_density_kg_m3: 1500.0,
            mass_wet_soil_g: rng.around(5900.0, 250.0),
            water_content_pct: w,
        },
        2 => FieldReadings::Balloon {
            hole_volume_cm3: rng.around(1500.0, 100.0),
            mass_wet_soil_g: rng.around(3050.0, 120.0),
            water_content_pct: w,
        },
        _ => FieldReadings::DriveCylinder {
            cylinder_volume_cm3: 943.9,
            mass_wet_soil_g: rng.around(1930.0, 60.0),
            water_content_pct: w,
        },
    }
}

fn bench_field_and_lots(n_tests: usize, lot_size: usize) {
    let mut rng = Lcg(42);
    let readings: Vec<FieldReadings> = (0..n_tests).map(|i| field_readings(&mut rng, i)).collect();
    let reference = Reference {
        max_dry_density: Density::new(1880.0).expect("valid density"),
        optimum_water_content: WaterContent::new(12.0).expect("valid water content"),
        specific_gravity: None,
    };
    let limits = SpecLimits {
        rc_min_pct: 95.0,
        moisture: liftledger::reduction::verdict::MoistureWindow::PointsOfOmc {
            below_pct: 2.0,
            above_pct: 2.0,
        },
        max_air_voids_pct: None,
        rounding: liftledger::reduction::rounding::Rounding::E29_ONE_DECIMAL,
    };
    let rules = [
        AcceptanceRule::EveryTest,
        AcceptanceRule::MeanAndMin { allowance_pct: 2.0 },
        AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 },
    ];

    let start = Instant::now();
    let mut lot_inputs = Vec::with_capacity(n_tests);
    let mut refused = 0usize;
    for (i, r) in readings.iter().enumerate() {
        match reduce_field(black_box(r)) {
            Ok(fd) => {
                let v = judge_test(fd.dry_density, fd.water_content, &reference, &limits);
                lot_inputs.push(LotTestInput {
                    id: i as i64,
                    label: String::new(),
                    relative_compaction_pct: v.relative_compaction_pct,
                    moisture_measure: v.moisture_measure,
                    air_voids_ok: v.air_voids_ok,
                    passed: v.passed,
                    voided: i.is_multiple_of(97),
                    retest_of: (i % 10 == 9).then_some(i as i64 - 1),
                    tested_at: String::new(),
                    unjudged: None,
                    earlier_sample: false,
                });
            }
            Err(_) => refused += 1,
        }
    }
    let reduced = start.elapsed();
    let mut accepted = 0usize;
    let lots_start = Instant::now();
    for (k, lot) in lot_inputs.chunks(lot_size).enumerate() {
        let v = evaluate_lot(black_box(lot), &rules[k % rules.len()], &limits);
        accepted += usize::from(v.accepted);
    }
    let lots = lots_start.elapsed();
    let total = start.elapsed();
    let n_lots = lot_inputs.len().div_ceil(lot_size);
    println!(
        "field: {n_tests} tests reduced and judged in {:.1} ms ({:.2} µs/test, {refused} refused)",
        reduced.as_secs_f64() * 1e3,
        reduced.as_secs_f64() * 1e6 / n_tests as f64
    );
    println!(
        "lots: {n_lots} lots of {lot_size} evaluated in {:.1} ms ({:.2} µs/lot, {accepted} accepted)",
        lots.as_secs_f64() * 1e3,
        lots.as_secs_f64() * 1e6 / n_lots as f64
    );
    println!("field + lots total: {:.1} ms", total.as_secs_f64() * 1e3);
}

fn bench_curves(n_curves: usize) {
    let mut rng = Lcg(7);
    let gs = SpecificGravity::new(2.70).ok();
    let sets: Vec<Vec<CurvePoint>> = (0..n_curves)
        .map(|i| {
            let omc = rng.around(13.0, 3.0);
            let mdd = rng.around(1850.0, 100.0);
            let k = rng.around(6.0, 3.0);
            let n = 4 + i % 3;
            (0..n)
                .map(|j| {
                    let w = omc - 4.0 + 8.0 * j as f64 / (n - 1) as f64 + rng.around(0.0, 0.3);
                    CurvePoint {
                        water_content_pct: w,
                        dry_density_kg_m3: mdd - k * (w - omc).powi(2) + rng.around(0.0, 4.0),
                    }
                })
                .collect()
        })
        .collect();
    let start = Instant::now();
    let mut fitted = 0usize;
    for set in &sets {
        if fit_curve(black_box(set), gs).is_ok() {
            fitted += 1;
        }
    }
    let took = start.elapsed();
    println!(
        "curves: {n_curves} fits in {:.1} ms ({:.2} µs/fit, {fitted} fitted)",
        took.as_secs_f64() * 1e3,
        took.as_secs_f64() * 1e6 / n_curves as f64
    );
}

fn main() {
    bench_field_and_lots(100_000, 10);
    bench_curves(10_000);
}
