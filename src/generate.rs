//! `liftledger generate --db URL --tests N`: the invented large project of `scale.rs`
//! written into a database of either engine, with a progress line on standard error.

use std::io::{IsTerminal, Write};
use std::time::{Duration, Instant};

use liftledger::cli::GenerateArgs;
use liftledger::db;
use liftledger::present::grouped;

use crate::scale::{self, Progress, ScaleOptions};

/// The fewest tests asked for: below it the layout (six lots, at least three tests each)
/// no longer follows the number.
pub const MIN_TESTS: u64 = 100;
/// The most: beyond it a trial run takes hours and tens of gigabytes.
pub const MAX_TESTS: u64 = 5_000_000;

/// Runs the command: refuses a bad count or a project code already held, then builds.
pub async fn run(a: &GenerateArgs) -> anyhow::Result<()> {
    if !(MIN_TESTS..=MAX_TESTS).contains(&a.tests) {
        anyhow::bail!(
            "--tests must be between {} and {} (got {})",
            grouped(MIN_TESTS),
            grouped(MAX_TESTS),
            grouped(a.tests)
        );
    }
    let code = a.code.trim().to_ascii_uppercase();
    let location = a.db.location();
    let pool = db::connect(&location).await?;
    if let Some(p) = db::projects::get_by_code(&pool, &code).await? {
        anyhow::bail!(
            "{} already holds a project with code {code} (id {}); give another --code or a new database",
            location.redacted(),
            p.id
        );
    }
    let opts = ScaleOptions {
        seed: a.seed,
        project_code: code,
        ..ScaleOptions::for_tests(a.tests)
    };
    let mut line = ProgressLine::new();
    let summary = scale::generate_with(&pool, opts, &mut |p| line.show(p)).await;
    line.finish();
    let summary = summary?;
    pool.close().await;
    println!("generated into {}: {summary}", location.redacted());
    println!(
        "project_id={} project_code={} lots={} tests={} retests={} voids={} accepted_lots={} submitted_lots={}",
        summary.project_id,
        summary.project_code,
        summary.lots,
        summary.tests,
        summary.retests,
        summary.voids,
        summary.accepted_lots,
        summary.submitted_lots
    );
    Ok(())
}

/// The progress line on standard error: rewritten in place on a terminal, otherwise one
/// line every few seconds (a log keeps a trail, not thousands of lines).
struct ProgressLine {
    terminal: bool,
    last: Option<Instant>,
    shown: bool,
}

impl ProgressLine {
    fn new() -> Self {
        Self {
            terminal: std::io::stderr().is_terminal(),
            last: None,
            shown: false,
        }
    }

    fn show(&mut self, p: &Progress) {
        let every = if self.terminal {
            Duration::from_millis(200)
        } else {
            Duration::from_secs(2)
        };
        if self.last.is_some_and(|t| t.elapsed() < every) {
            return;
        }
        self.last = Some(Instant::now());
        let text = progress_words(p);
        let mut err = std::io::stderr().lock();
        let _ = if self.terminal {
            write!(err, "\r{text}\x1b[K")
        } else {
            writeln!(err, "{text}")
        };
        let _ = err.flush();
        self.shown = true;
    }

    /// Ends an in-place line so what follows starts on its own line.
    fn finish(&mut self) {
        if self.terminal && self.shown {
            eprintln!();
        }
    }
}

/// "generated 120,000 of 300,000 tests (40 %), 38,000 tests/s".
pub fn progress_words(p: &Progress) -> String {
    let pct = if p.wanted > 0 {
        (p.generated as f64 / p.wanted as f64 * 100.0).min(100.0)
    } else {
        0.0
    };
    let secs = p.elapsed.as_secs_f64();
    let rate = if secs > 0.0 {
        (p.generated as f64 / secs).round() as u64
    } else {
        0
    };
    format!(
        "generated {} of {} tests ({pct:.0} %), {} tests/s",
        grouped(p.generated),
        grouped(p.wanted),
        grouped(rate)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_progress_line_reads_as_counts_share_and_rate() {
        let p = Progress {
            generated: 120_000,
            wanted: 300_000,
            elapsed: Duration::from_secs(3),
        };
        assert_eq!(
            progress_words(&p),
            "generated 120,000 of 300,000 tests (40 %), 40,000 tests/s"
        );
    }
}
