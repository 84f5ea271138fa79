//! Times chart generation and reports output size: `cargo bench --bench charts_bench`.

#[path = "common/mod.rs"]
mod common;

use std::hint::black_box;
use std::time::{Duration, Instant};

use liftledger::charts::{curve_chart, lift_map, rc_chart};

fn measure(name: &str, runs: u32, mut make: impl FnMut() -> String) {
    let mut best = Duration::MAX;
    let mut total = Duration::ZERO;
    let mut bytes = 0;
    for _ in 0..runs {
        let start = Instant::now();
        let svg = black_box(make());
        let took = start.elapsed();
        bytes = svg.len();
        best = best.min(took);
        total += took;
    }
    println!(
        "{name:<44} {:>9} bytes  mean {:>7.2} ms  best {:>7.2} ms  ({runs} runs)",
        bytes,
        total.as_secs_f64() * 1000.0 / f64::from(runs),
        best.as_secs_f64() * 1000.0
    );
}

fn main() {
    let realistic = common::big_map(1200, false);
    let scrambled = common::big_map(1200, true);
    let phone = common::big_map(360, true);
    let wide = common::big_map(3000, true);
    let lots = realistic.lots.len();
    measure(
        &format!("lift map {lots} lots, works front, 1200 px"),
        20,
        || lift_map(&realistic),
    );
    measure(
        &format!("lift map {lots} lots, random states, 1200 px"),
        20,
        || lift_map(&scrambled),
    );
    measure(
        &format!("lift map {lots} lots, random states, 360 px"),
        20,
        || lift_map(&phone),
    );
    measure(
        &format!("lift map {lots} lots, random states, 3000 px"),
        20,
        || lift_map(&wide),
    );
    let section = common::map(960, 12, 3_000.0, 150, false);
    measure("lift map 150 lots, 12 layers, 960 px", 200, || {
        lift_map(&section)
    });
    let many = common::big_rc(500);
    measure("relative compaction chart, 500 tests", 200, || {
        rc_chart(&many)
    });
    let curve = common::demo_curve();
    measure("compaction curve chart", 500, || curve_chart(&curve));
}
