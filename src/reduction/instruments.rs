//! Instrument rules, pure: a nuclear gauge's daily standard count judged against its
//! recent accepted counts (ASTM D6938, from memory), which dated record is in force on a
//! day, calibration due checks, and material offsets from paired results.
//!
//! The tolerances recalled in `DOMAIN.md` ("Instruments") are from memory: 1 % of the
//! density count, 2 % of the moisture count, each against the mean of the last four
//! accepted counts. A project may set its own (its contract's edition rules).

use serde::Serialize;

/// Accepted counts the reference is the mean of (ASTM D6938, from memory).
pub const REFERENCE_COUNTS: usize = 4;
/// Default density-count tolerance, percent of the reference (ASTM D6938, from memory).
pub const DEFAULT_DENSITY_TOLERANCE_PCT: f64 = 1.0;
/// Default moisture-count tolerance, percent of the reference (ASTM D6938, from memory).
pub const DEFAULT_MOISTURE_TOLERANCE_PCT: f64 = 2.0;
/// Fewest paired results an offset is computed from (common practice: "several pairs").
pub const MIN_OFFSET_PAIRS: usize = 3;

/// What the register said of a test's instrument when the test was recorded.
///
/// The rule: a test naming no registered instrument (every test entered before the
/// register existed, and imported rows naming an unregistered serial) is *not recorded*:
/// shown as such and not blocked. A test from a registered gauge is *in check* when the
/// gauge had an accepted standard count that day and its calibration covered the day;
/// otherwise it is refused, or — where the clause allows — recorded *out of check*,
/// kept out of the statistics and blocking submission.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum InstrumentCheck {
    NotRecorded,
    InCheck,
    OutOfCheck,
}

impl InstrumentCheck {
    /// Stored code.
    pub fn code(self) -> &'static str {
        match self {
            Self::NotRecorded => "not_recorded",
            Self::InCheck => "in_check",
            Self::OutOfCheck => "out_of_check",
        }
    }
    /// Every value (a stored code is read back in `crate::domain`, refusing unknown codes).
    pub const ALL: [InstrumentCheck; 3] = [Self::NotRecorded, Self::InCheck, Self::OutOfCheck];
    /// Reads a code written by [`InstrumentCheck::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|c| c.code() == s)
    }
    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            Self::NotRecorded => "instrument not recorded",
            Self::InCheck => "instrument in check",
            Self::OutOfCheck => "instrument out of check",
        }
    }
}

/// A project's standard-count tolerances, percent of the reference mean.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CountTolerances {
    pub density_pct: f64,
    pub moisture_pct: f64,
}

impl Default for CountTolerances {
    fn default() -> Self {
        Self {
            density_pct: DEFAULT_DENSITY_TOLERANCE_PCT,
            moisture_pct: DEFAULT_MOISTURE_TOLERANCE_PCT,
        }
    }
}

/// What an instrument is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum InstrumentKind {
    NuclearGauge,
    SandCone,
    SandBatch,
    Balloon,
    DriveCylinder,
}

impl InstrumentKind {
    /// Every kind.
    pub const ALL: [InstrumentKind; 5] = [
        Self::NuclearGauge,
        Self::SandCone,
        Self::SandBatch,
        Self::Balloon,
        Self::DriveCylinder,
    ];
    /// Stored code.
    pub fn code(self) -> &'static str {
        match self {
            Self::NuclearGauge => "nuclear_gauge",
            Self::SandCone => "sand_cone",
            Self::SandBatch => "sand_batch",
            Self::Balloon => "balloon",
            Self::DriveCylinder => "drive_cylinder",
        }
    }
    /// Reads a code (stored, or a CSV cell).
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|k| k.code() == s.trim())
    }
    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            Self::NuclearGauge => "nuclear gauge",
            Self::SandCone => "sand-cone apparatus",
            Self::SandBatch => "sand batch",
            Self::Balloon => "balloon apparatus",
            Self::DriveCylinder => "drive cylinder",
        }
    }
}

/// How a standard count was judged.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CountOutcome {
    /// One of the first four counts of a baseline: accepted without a reference to judge by.
    Baseline,
    /// Within the tolerances of the mean of the last four accepted counts.
    Accepted,
    /// Outside a tolerance: the gauge is not in check on the strength of this count.
    Failed,
}

impl CountOutcome {
    /// Stored code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Baseline => "baseline",
            Self::Accepted => "accepted",
            Self::Failed => "failed",
        }
    }
    /// Reads a stored code.
    pub fn parse_code(s: &str) -> Option<Self> {
        [Self::Baseline, Self::Accepted, Self::Failed]
            .into_iter()
            .find(|o| o.code() == s)
    }
    /// True when the count puts the gauge in check for its day.
    pub fn in_check(self) -> bool {
        self != Self::Failed
    }
}

/// A stored count as the judgement of the next one needs it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PastCount {
    pub density: f64,
    pub moisture: f64,
    pub outcome: CountOutcome,
}

/// A new count judged.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CountJudgement {
    pub outcome: CountOutcome,
    /// Mean of the reference counts (None while a baseline is being built).
    pub density_mean: Option<f64>,
    pub moisture_mean: Option<f64>,
    /// (count − mean) / mean × 100.
    pub density_deviation_pct: Option<f64>,
    pub moisture_deviation_pct: Option<f64>,
}

/// Judges a day's density and moisture counts.
///
/// `since_baseline` holds the gauge's counts, oldest first, since its current baseline
/// began (its latest calibration). The rule (ASTM D6938, from memory; stated here):
/// - fewer than four accepted counts since the baseline began (a new gauge, or one
///   just recalibrated): the count is a *baseline* count, accepted without judgement;
/// - otherwise it is accepted when each count is within its tolerance of the mean of
///   the last four accepted counts, else *failed*;
/// - a failed count never enters a mean; the technician retakes it, and the gauge is
///   in check on a day only once an accepted count stands for that day. A gauge that
///   keeps failing is recalibrated, and its calibration record starts a new baseline.
pub fn judge_count(
    since_baseline: &[PastCount],
    density: f64,
    moisture: f64,
    tolerances: CountTolerances,
) -> CountJudgement {
    let accepted: Vec<&PastCount> = since_baseline
        .iter()
        .filter(|c| c.outcome.in_check())
        .collect();
    if accepted.len() < REFERENCE_COUNTS {
        return CountJudgement {
            outcome: CountOutcome::Baseline,
            density_mean: None,
            moisture_mean: None,
            density_deviation_pct: None,
            moisture_deviation_pct: None,
        };
    }
    let last = &accepted[accepted.len() - REFERENCE_COUNTS..];
    let n = REFERENCE_COUNTS as f64;
    let density_mean = last.iter().map(|c| c.density).sum::<f64>() / n;
    let moisture_mean = last.iter().map(|c| c.moisture).sum::<f64>() / n;
    let dd = (density - density_mean) / density_mean * 100.0;
    let md = (moisture - moisture_mean) / moisture_mean * 100.0;
    let within = dd.abs() <= tolerances.density_pct && md.abs() <= tolerances.moisture_pct;
    CountJudgement {
        outcome: if within {
            CountOutcome::Accepted
        } else {
            CountOutcome::Failed
        },
        density_mean: Some(density_mean),
        moisture_mean: Some(moisture_mean),
        density_deviation_pct: Some(dd),
        moisture_deviation_pct: Some(md),
    }
}

/// A dated record (a calibration, leak test, licence or assignment), as far as the
/// question "which is in force on this day" needs it. Dates are ISO `YYYY-MM-DD`, so
/// they compare as text.
pub trait Dated {
    /// The day it took effect.
    fn effective_day(&self) -> &str;
}

impl<T: Dated> Dated for &T {
    fn effective_day(&self) -> &str {
        (*self).effective_day()
    }
}

/// The record in force on `day`: the latest taking effect on or before it (ties: the
/// later in the list, i.e. the later entered).
pub fn in_force_on<'a, T: Dated>(records: &'a [T], day: &str) -> Option<&'a T> {
    records
        .iter()
        .filter(|r| r.effective_day() <= day)
        .max_by(|a, b| a.effective_day().cmp(b.effective_day()))
}

/// Whether a calibration due on `due` still covers `day` (the due day itself is covered).
pub fn covers(due: Option<&str>, day: &str) -> bool {
    due.is_none_or(|d| day <= d)
}

/// Whole days from `today` to `due` (negative when overdue), from ISO dates.
pub fn days_until(today: &str, due: &str) -> Option<i64> {
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    let a = time::Date::parse(today, &fmt).ok()?;
    let b = time::Date::parse(due, &fmt).ok()?;
    Some((b - a).whole_days())
}

/// Whether a record due on `due` falls due within `window_days` of `today` (overdue ones too).
pub fn due_within(today: &str, due: &str, window_days: i64) -> bool {
    days_until(today, due).is_some_and(|d| d <= window_days)
}

/// The gauge geometry an offset belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum GaugeMode {
    /// Source rod lowered into the soil (probe depth above zero).
    DirectTransmission,
    /// Source on the surface (probe depth zero or none).
    Backscatter,
}

impl GaugeMode {
    /// Both modes.
    pub const ALL: [GaugeMode; 2] = [Self::DirectTransmission, Self::Backscatter];

    /// Stored code.
    pub fn code(self) -> &'static str {
        match self {
            Self::DirectTransmission => "direct_transmission",
            Self::Backscatter => "backscatter",
        }
    }
    /// Reads a stored code.
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|m| m.code() == s)
    }
    /// The mode of a reading with this probe depth (common practice: 0 mm is backscatter).
    pub fn of_probe_depth(depth_mm: Option<f64>) -> Self {
        if depth_mm.is_some_and(|d| d > 0.0) {
            Self::DirectTransmission
        } else {
            Self::Backscatter
        }
    }
}

/// One spot tested both ways: the gauge's readings and the reference method's results.
#[derive(Debug, Clone, Copy, PartialEq, serde::Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct OffsetPair {
    /// Wet density read by the gauge, kg/m³.
    pub gauge_wet_density_kg_m3: f64,
    /// Wet density by sand cone (or another volume method) on the same spot, kg/m³.
    pub reference_wet_density_kg_m3: f64,
    /// Water content shown by the gauge, percent.
    pub gauge_water_content_pct: f64,
    /// Oven water content of the same material (ASTM D2216), percent.
    pub oven_water_content_pct: f64,
}

/// A gauge's offsets for one material and mode.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Offsets {
    /// Added to the gauge's wet density, kg/m³.
    pub density_kg_m3: f64,
    /// Added to the gauge's water content, percentage points.
    pub moisture_pct: f64,
}

/// Why offsets cannot be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum OffsetError {
    #[error("{got} pairs given; an offset needs at least {MIN_OFFSET_PAIRS}")]
    TooFewPairs { got: usize },
    #[error("pair {index}: {what} must be above {} and at most {}", .range.0, .range.1)]
    BadValue {
        index: usize,
        what: &'static str,
        /// The open lower and closed upper bound the value must lie in.
        range: (f64, f64),
    },
}

/// Offsets as the mean difference reference − gauge over the pairs (ASTM D6938 annex on
/// offsets, from memory; DOMAIN.md: "mean difference, several pairs"). The rule: at least
/// three pairs, every density above 0 and at most 3,000 kg/m³ and every water content above
/// 0 and at most 100 % (the bounds a field reading has elsewhere; a value beyond them is a
/// typing slip, and the mean of such values would not even be finite).
pub fn offsets_from_pairs(pairs: &[OffsetPair]) -> Result<Offsets, OffsetError> {
    if pairs.len() < MIN_OFFSET_PAIRS {
        return Err(OffsetError::TooFewPairs { got: pairs.len() });
    }
    for (i, p) in pairs.iter().enumerate() {
        const DENSITY: (f64, f64) = (0.0, 3000.0);
        const WATER: (f64, f64) = (0.0, 100.0);
        let checks = [
            (
                p.gauge_wet_density_kg_m3,
                "gauge_wet_density_kg_m3",
                DENSITY,
            ),
            (
                p.reference_wet_density_kg_m3,
                "reference_wet_density_kg_m3",
                DENSITY,
            ),
            (p.gauge_water_content_pct, "gauge_water_content_pct", WATER),
            (p.oven_water_content_pct, "oven_water_content_pct", WATER),
        ];
        let outside = |v: f64, (low, high): (f64, f64)| !(v.is_finite() && v > low && v <= high);
        if let Some(&(_, what, range)) = checks.iter().find(|(v, _, r)| outside(*v, *r)) {
            return Err(OffsetError::BadValue {
                index: i,
                what,
                range,
            });
        }
    }
    let n = pairs.len() as f64;
    Ok(Offsets {
        density_kg_m3: pairs
            .iter()
            .map(|p| p.reference_wet_density_kg_m3 - p.gauge_wet_density_kg_m3)
            .sum::<f64>()
            / n,
        moisture_pct: pairs
            .iter()
            .map(|p| p.oven_water_content_pct - p.gauge_water_content_pct)
            .sum::<f64>()
            / n,
    })
}

/// A gauge reading corrected by offsets: ρ' = ρ + Δρ; w' = w + Δw unless the moisture
/// came from the oven (then the gauge moisture was not used); ρd = ρ' / (1 + w'/100).
pub fn apply_offsets(
    raw: super::field::FieldDensity,
    offsets: Offsets,
) -> Result<super::field::FieldDensity, super::QuantityError> {
    let wet = super::Density::named(
        "wet density",
        raw.wet_density.kg_m3() + offsets.density_kg_m3,
    )?;
    let w = if raw.moisture_source == super::field::MoistureSource::Oven {
        raw.water_content
    } else {
        super::WaterContent::new(raw.water_content.pct() + offsets.moisture_pct)?
    };
    let dry = super::Density::named("dry density", wet.kg_m3() / (1.0 + w.fraction()))?;
    Ok(super::field::FieldDensity {
        wet_density: wet,
        water_content: w,
        dry_density: dry,
        moisture_source: raw.moisture_source,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn accepted(d: f64, m: f64) -> PastCount {
        PastCount {
            density: d,
            moisture: m,
            outcome: CountOutcome::Accepted,
        }
    }

    #[test]
    fn the_first_four_counts_of_a_gauge_build_its_baseline() {
        // Rule stated in judge_count (ASTM D6938, from memory): < 4 accepted → baseline.
        let mut past = Vec::new();
        for i in 0..4 {
            let j = judge_count(
                &past,
                2800.0 + f64::from(i),
                700.0,
                CountTolerances::default(),
            );
            assert_eq!(j.outcome, CountOutcome::Baseline, "count {i}");
            assert_eq!(j.density_mean, None);
            past.push(PastCount {
                density: 2800.0,
                moisture: 700.0,
                outcome: j.outcome,
            });
        }
    }

    #[test]
    fn a_count_is_judged_against_the_mean_of_the_last_four_accepted() {
        // Hand arithmetic: last four accepted densities 2790, 2800, 2810, 2800 → mean 2800;
        // the oldest (3000) and the failed one (2500) do not enter. Moisture mean 700.
        let past = vec![
            accepted(3000.0, 650.0),
            accepted(2790.0, 690.0),
            accepted(2800.0, 700.0),
            PastCount {
                density: 2500.0,
                moisture: 500.0,
                outcome: CountOutcome::Failed,
            },
            accepted(2810.0, 710.0),
            accepted(2800.0, 700.0),
        ];
        let t = CountTolerances::default();
        // 2828 is +1.0 % of 2800 (the tolerance itself, from memory): accepted.
        let j = judge_count(&past, 2828.0, 714.0, t);
        assert_eq!(j.density_mean, Some(2800.0));
        assert_eq!(j.moisture_mean, Some(700.0));
        assert_eq!(j.outcome, CountOutcome::Accepted);
        assert!((j.density_deviation_pct.unwrap() - 1.0).abs() < 1e-9);
        // 714 is +2.0 % of 700: on the moisture tolerance; 715 (+2.14 %) fails.
        assert!((j.moisture_deviation_pct.unwrap() - 2.0).abs() < 1e-9);
        assert_eq!(
            judge_count(&past, 2800.0, 715.0, t).outcome,
            CountOutcome::Failed
        );
        // 2771 is −1.04 % of 2800: fails on density.
        assert_eq!(
            judge_count(&past, 2771.0, 700.0, t).outcome,
            CountOutcome::Failed
        );
        // A project's wider tolerance (1.5 %) accepts it.
        let wide = CountTolerances {
            density_pct: 1.5,
            moisture_pct: 2.0,
        };
        assert_eq!(
            judge_count(&past, 2771.0, 700.0, wide).outcome,
            CountOutcome::Accepted
        );
    }

    #[test]
    fn a_baseline_with_a_failed_count_needs_four_accepted_ones() {
        let mut past = vec![accepted(2800.0, 700.0); 3];
        past.push(PastCount {
            density: 2000.0,
            moisture: 700.0,
            outcome: CountOutcome::Failed,
        });
        let j = judge_count(&past, 2000.0, 700.0, CountTolerances::default());
        assert_eq!(j.outcome, CountOutcome::Baseline);
    }

    struct R(&'static str);
    impl Dated for R {
        fn effective_day(&self) -> &str {
            self.0
        }
    }

    #[test]
    fn the_record_in_force_is_the_latest_taking_effect_on_or_before_the_day() {
        let rs = [R("2026-01-10"), R("2026-06-01"), R("2026-03-05")];
        assert_eq!(in_force_on(&rs, "2026-01-09").map(|r| r.0), None);
        assert_eq!(
            in_force_on(&rs, "2026-01-10").map(|r| r.0),
            Some("2026-01-10")
        );
        assert_eq!(
            in_force_on(&rs, "2026-05-31").map(|r| r.0),
            Some("2026-03-05")
        );
        assert_eq!(
            in_force_on(&rs, "2026-12-31").map(|r| r.0),
            Some("2026-06-01")
        );
    }

    #[test]
    fn calibration_due_dates_cover_their_own_day_and_count_down() {
        assert!(covers(Some("2026-12-01"), "2026-12-01"));
        assert!(!covers(Some("2026-12-01"), "2026-12-02"));
        assert!(covers(None, "2030-01-01"));
        // Calendar arithmetic: 2026-12-03 → 2027-01-02 is 30 days (31 in December − 3 + 2).
        assert_eq!(days_until("2026-12-03", "2027-01-02"), Some(30));
        assert!(due_within("2026-12-03", "2027-01-02", 30));
        assert!(!due_within("2026-12-03", "2027-01-03", 30));
        assert!(
            due_within("2026-12-03", "2026-11-01", 30),
            "overdue counts as due"
        );
    }

    #[test]
    fn offsets_are_the_mean_differences_of_at_least_three_pairs() {
        let p = |g: f64, r: f64, gw: f64, ow: f64| OffsetPair {
            gauge_wet_density_kg_m3: g,
            reference_wet_density_kg_m3: r,
            gauge_water_content_pct: gw,
            oven_water_content_pct: ow,
        };
        // Hand arithmetic: differences −20, −10, −30 → −20 kg/m³; +1.0, +0.5, +1.5 → +1.0 %.
        let pairs = [
            p(2100.0, 2080.0, 10.0, 11.0),
            p(2050.0, 2040.0, 11.0, 11.5),
            p(2120.0, 2090.0, 9.5, 11.0),
        ];
        let o = offsets_from_pairs(&pairs).unwrap();
        // Cross-check with statrs: the mean of the differences.
        use statrs::statistics::Statistics;
        let d: Vec<f64> = pairs
            .iter()
            .map(|p| p.reference_wet_density_kg_m3 - p.gauge_wet_density_kg_m3)
            .collect();
        assert!((o.density_kg_m3 - d.mean()).abs() < 1e-12);
        assert!((o.density_kg_m3 + 20.0).abs() < 1e-9);
        assert!((o.moisture_pct - 1.0).abs() < 1e-9);
        assert_eq!(
            offsets_from_pairs(&pairs[..2]),
            Err(OffsetError::TooFewPairs { got: 2 })
        );
        let mut bad = pairs;
        bad[1].oven_water_content_pct = f64::NAN;
        assert!(matches!(
            offsets_from_pairs(&bad),
            Err(OffsetError::BadValue { index: 1, .. })
        ));
        // A typing slip far beyond a reading's bounds is refused, not averaged into a
        // non-finite offset.
        let mut huge = pairs;
        huge[2].gauge_wet_density_kg_m3 = 3.98e307;
        let e = offsets_from_pairs(&huge).unwrap_err();
        assert!(matches!(
            e,
            OffsetError::BadValue {
                index: 2,
                what: "gauge_wet_density_kg_m3",
                ..
            }
        ));
        assert_eq!(
            e.to_string(),
            "pair 2: gauge_wet_density_kg_m3 must be above 0 and at most 3000"
        );
    }

    #[test]
    fn offsets_correct_the_gauge_reading_and_keep_oven_moisture() {
        use crate::reduction::field::FieldDensity;
        use crate::reduction::{Density, WaterContent};
        let raw = FieldDensity {
            wet_density: Density::new(2100.0).unwrap(),
            water_content: WaterContent::new(10.0).unwrap(),
            dry_density: Density::new(2100.0 / 1.1).unwrap(),
            moisture_source: super::super::field::MoistureSource::Gauge,
        };
        let o = Offsets {
            density_kg_m3: -20.0,
            moisture_pct: 1.0,
        };
        // ρ' = 2080, w' = 11.0 %, ρd = 2080 / 1.11 = 1873.87 (hand arithmetic).
        let c = apply_offsets(raw, o).unwrap();
        assert!((c.wet_density.kg_m3() - 2080.0).abs() < 1e-9);
        assert!((c.water_content.pct() - 11.0).abs() < 1e-9);
        assert!((c.dry_density.kg_m3() - 1_873.873_873_873_874).abs() < 1e-6);
        let oven = FieldDensity {
            moisture_source: super::super::field::MoistureSource::Oven,
            ..raw
        };
        let c = apply_offsets(oven, o).unwrap();
        assert!(
            (c.water_content.pct() - 10.0).abs() < 1e-9,
            "oven moisture is not offset"
        );
        assert!((c.dry_density.kg_m3() - 2080.0 / 1.1).abs() < 1e-6);
    }

    #[test]
    fn the_gauge_mode_follows_the_probe_depth() {
        assert_eq!(
            GaugeMode::of_probe_depth(Some(200.0)),
            GaugeMode::DirectTransmission
        );
        assert_eq!(GaugeMode::of_probe_depth(Some(0.0)), GaugeMode::Backscatter);
        assert_eq!(GaugeMode::of_probe_depth(None), GaugeMode::Backscatter);
    }
}
