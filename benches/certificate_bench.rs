//! Render time and size of sample certificates: median of 20 renders at 50 and
//! 500 tests (targets at 50 tests: under 50 ms and under 200 KB).

use std::hint::black_box;
use std::time::{Duration, Instant};

use liftledger::pdf::render_certificate;

#[path = "../src/pdf/sample.rs"]
mod sample;

use sample::sample_doc;

const RUNS: usize = 20;

fn median(mut times: Vec<Duration>) -> Duration {
    times.sort();
    times[times.len() / 2]
}

fn main() {
    for n in [50usize, 500] {
        let doc = sample_doc(n);
        let mut size = 0;
        let mut times = Vec::with_capacity(RUNS);
        for run in 0..RUNS + 2 {
            let start = Instant::now();
            let bytes = match render_certificate(black_box(&doc)) {
                Ok(bytes) => bytes,
                Err(e) => {
                    eprintln!("render failed: {e}");
                    std::process::exit(1);
                }
            };
            let elapsed = start.elapsed();
            size = bytes.len();
            // The first two runs warm caches and are not counted.
            if run >= 2 {
                times.push(elapsed);
            }
        }
        let m = median(times);
        println!(
            "certificate with {n:>3} tests: median {:>7.2} ms over {RUNS} runs, {:>7.1} KB",
            m.as_secs_f64() * 1000.0,
            size as f64 / 1024.0
        );
    }
}
