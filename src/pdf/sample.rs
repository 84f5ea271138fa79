//! A realistic certificate of an invented project, for the renderer's tests and the
//! certificate benchmark. Readings are generated deterministically from the row index
//! and every number shown is the reduction's.
//!
//! Not part of the library's surface: `pdf` mounts it for its tests only, and
//! `benches/certificate_bench.rs` by `#[path]`, which is why it names the library
//! `liftledger::` (the library calls itself so too, `extern crate self` in `lib.rs`).

use liftledger::pdf::{
    CertificateDoc, ClauseBlock, LotBlock, MaterialBlock, Paper, ReferenceBlock, SignoffBlock,
    SummaryBlock, TestRow,
};
use liftledger::reduction::field::{FieldReadings, reduce_field};
use liftledger::reduction::verdict::{moisture_deviation_pct, relative_compaction_pct};
use liftledger::reduction::{Density, WaterContent};

/// Maximum dry density of the sample's reference curve, kg/m³.
const SAMPLE_MDD: f64 = 1962.0;
/// Optimum moisture content of the sample's reference curve, %.
const SAMPLE_OMC: f64 = 12.4;
/// Minimum relative compaction of the sample's clause, %.
const SAMPLE_RC_MIN: f64 = 95.0;
/// Start chainage of the sample lot, metres.
const LOT_START_M: f64 = 1240.0;
/// Length of the sample lot, metres.
const LOT_LENGTH_M: f64 = 180.0;
/// Area of the sample lot, m² (180 m × 24 m).
const LOT_AREA_M2: f64 = 4320.0;
/// Area per test the sample clause asks for, m².
const AREA_PER_TEST_M2: f64 = 500.0;

/// A pseudo-random value in [0, 1) from an index and a stream number (SplitMix64).
fn unit(index: usize, stream: u64) -> f64 {
    let mut z = (index as u64)
        .wrapping_mul(0x9E37_79B9_7F4A_7C15)
        .wrapping_add(stream.wrapping_mul(0xBF58_476D_1CE4_E5B9));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64
}

/// A signed value with one decimal; a value that rounds to zero prints as "0.0".
pub(super) fn signed(v: f64) -> String {
    let rounded = (v * 10.0).round() / 10.0;
    if rounded == 0.0 {
        "0.0".to_string()
    } else {
        format!("{rounded:+.1}")
    }
}

/// Chainage in km+m style, e.g. 1+240.000.
pub(super) fn chainage(metres: f64) -> String {
    let km = (metres / 1000.0).floor();
    format!("{}+{:07.3}", km as i64, metres - km * 1000.0)
}

/// The calendar date `days` after 2026-11-09.
pub(super) fn date_after(days: usize) -> String {
    const MONTH_DAYS: [usize; 12] = [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];
    let (mut year, mut month, mut day) = (2026usize, 11usize, 9 + days);
    loop {
        let leap = year % 4 == 0 && (year % 100 != 0 || year % 400 == 0);
        let in_month = MONTH_DAYS[month - 1] + usize::from(month == 2 && leap);
        if day <= in_month {
            return format!("{year:04}-{month:02}-{day:02}");
        }
        day -= in_month;
        month += 1;
        if month > 12 {
            month = 1;
            year += 1;
        }
    }
}

/// What the generator makes of row `i` of `n`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Plain,
    Superseded,
    Retest,
    Void,
}

fn kind(i: usize, n: usize) -> Kind {
    if i % 23 == 6 && i + 1 < n {
        Kind::Superseded
    } else if i % 23 == 7 && i >= 1 {
        Kind::Retest
    } else if i % 29 == 11 {
        Kind::Void
    } else {
        Kind::Plain
    }
}

/// What a gauge read at the sample's test `i`, with an oven water content of OMC ± 1.5:
/// a superseded test's wet density (2000–2060 kg/m³) stays below RC 95 % whatever its
/// water, every other test's (2137–2197 kg/m³) reaches it.
fn readings(kind: Kind, i: usize) -> FieldReadings {
    let (low, high) = match kind {
        Kind::Superseded => (2000.0, 2060.0),
        _ => (2137.0, 2197.0),
    };
    FieldReadings::Nuclear {
        wet_density_kg_m3: unit(i, 3).mul_add(high - low, low),
        moisture_density_kg_m3: None,
        water_content_pct: None,
        oven_water_content_pct: Some(SAMPLE_OMC + unit(i, 4).mul_add(3.0, -1.5)),
        gauge_serial: None,
        probe_depth_mm: Some(200.0),
    }
}

/// The numbers a sample row shows, from the reduction.
struct Shown {
    wet: f64,
    water: f64,
    dry: f64,
    rc: f64,
    deviation: f64,
}

fn reduced(readings: &FieldReadings) -> Shown {
    let d = reduce_field(readings).expect("the sample's readings reduce");
    let mdd = Density::new(SAMPLE_MDD).expect("the sample's MDD is a density");
    let omc = WaterContent::new(SAMPLE_OMC).expect("the sample's OMC is a water content");
    Shown {
        wet: d.wet_density.kg_m3(),
        water: d.water_content.pct(),
        dry: d.dry_density.kg_m3(),
        rc: relative_compaction_pct(d.dry_density, mdd),
        deviation: moisture_deviation_pct(d.water_content, omc),
    }
}

fn test_row(i: usize, n: usize) -> TestRow {
    let kind = kind(i, n);
    // A retest is taken at the spot of the failed test before it.
    let spot = if kind == Kind::Retest { i - 1 } else { i };
    let metres = LOT_START_M + ((spot * 37) % 179) as f64 + unit(spot, 1) * 0.9;
    let offset = unit(spot, 2).mul_add(22.0, -11.0);
    let shown = reduced(&readings(kind, i));
    let rc = shown.rc;
    let number = |k: usize| format!("T-{:04}", k + 1);
    let (result, note, counted, rc_value) = match kind {
        Kind::Plain => ("pass", String::new(), true, Some(rc)),
        Kind::Superseded => (
            "superseded",
            format!("superseded by {}", number(i + 1)),
            false,
            Some(rc),
        ),
        Kind::Retest => (
            "pass",
            format!("retest of {}", number(i - 1)),
            true,
            Some(rc),
        ),
        Kind::Void if i.is_multiple_of(2) => (
            "void",
            "void: gauge standardisation failed".into(),
            false,
            None,
        ),
        Kind::Void => (
            "void",
            "void: probe rod bent, reading discarded".into(),
            false,
            None,
        ),
    };
    TestRow {
        number: number(i),
        date: date_after(i / 12),
        chainage: chainage(metres),
        offset: signed(offset),
        method: "nuclear gauge".to_string(),
        wet_density: format!("{:.0}", shown.wet),
        water_content: format!("{:.1}", shown.water),
        dry_density: format!("{:.0}", shown.dry),
        relative_compaction: format!("{rc:.1}"),
        moisture_deviation: signed(shown.deviation),
        result: result.to_string(),
        note,
        rc_value,
        counted,
    }
}

/// Statistics, verdict and reasons over the counted rows of the sample.
fn summary(tests: &[TestRow]) -> SummaryBlock {
    let counted: Vec<f64> = tests
        .iter()
        .filter(|t| t.counted)
        .filter_map(|t| t.rc_value)
        .collect();
    let n = counted.len();
    let voided = tests.iter().filter(|t| t.result == "void").count();
    let superseded = tests.iter().filter(|t| t.result == "superseded").count();
    let required = ((LOT_AREA_M2 / AREA_PER_TEST_M2).ceil() as usize).max(3);
    let met = n >= required;
    let dash = "\u{2014}".to_string();
    let (mean, sd, min, max) = if n == 0 {
        (f64::NAN, f64::NAN, f64::NAN, f64::NAN)
    } else {
        let mean = counted.iter().sum::<f64>() / n as f64;
        let var = if n > 1 {
            counted.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1) as f64
        } else {
            f64::NAN
        };
        let min = counted.iter().copied().fold(f64::INFINITY, f64::min);
        let max = counted.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (mean, var.sqrt(), min, max)
    };
    let show = |v: f64, digits: usize, unit: &str| {
        if v.is_finite() {
            format!("{v:.digits$}{unit}")
        } else {
            dash.clone()
        }
    };
    let accepted = n > 0 && met && min >= SAMPLE_RC_MIN;
    let mut reasons = vec![
        format!(
            "All {n} counted tests reach RC ≥ {SAMPLE_RC_MIN:.1} % of the modified MDD; the lowest is {}.",
            show(min, 1, " %")
        ),
        "All counted tests lie within the moisture window of −2.0 to +2.0 points of OMC."
            .to_string(),
    ];
    if voided + superseded > 0 {
        reasons.push(format!(
            "{voided} voided and {superseded} superseded tests are left out of every statistic; each superseded test has a passing retest at the same spot."
        ));
    }
    SummaryBlock {
        n: n.to_string(),
        mean: show(mean, 1, " %"),
        std_dev: show(sd, 2, " %"),
        min: show(min, 1, " %"),
        max: show(max, 1, " %"),
        quality_index: show((mean - SAMPLE_RC_MIN) / sd, 2, ""),
        pwl: "not used by this rule".to_string(),
        verdict: if accepted { "ACCEPTED" } else { "NOT ACCEPTED" }.to_string(),
        reasons,
        frequency: format!(
            "{required} required, {n} counted: {}",
            if met { "met" } else { "not met" }
        ),
        rc_limit: SAMPLE_RC_MIN,
    }
}

/// A complete certificate of an invented project with `n_tests` tests, including
/// voided tests, superseded tests and their retests.
pub fn sample_doc(n_tests: usize) -> CertificateDoc {
    let tests: Vec<TestRow> = (0..n_tests).map(|i| test_row(i, n_tests)).collect();
    let summary = summary(&tests);
    CertificateDoc {
        paper: Paper::A4,
        project_name: "Kestrel Ridge Link Road, Stage 2".into(),
        contract: "KRL/C2 Earthworks and Drainage".into(),
        client: "Quennick Vale County Council".into(),
        contractor: "Corvantle Civil Engineering Ltd".into(),
        certificate_number: "KRL-EL-0042".into(),
        revision: 2,
        supersedes: Some("KRL-EL-0042 rev 1".into()),
        verification_code: "7K3Q-XW9D-42PM".into(),
        issued_at: "2026-12-01 14:03 UTC".into(),
        lot: LotBlock {
            lot_code: "L-EMB-0117".into(),
            zone: "Embankment fill".into(),
            layer: "Layer 7".into(),
            chainage_from: chainage(LOT_START_M),
            chainage_to: chainage(LOT_START_M + LOT_LENGTH_M),
            offset_band: "-12.0 to +12.0 m".into(),
            area: "4 320 m²".into(),
            length: "180.0 m".into(),
        },
        material: MaterialBlock {
            source_name: "Borrow pit BP-3, Skerrowmoss Cut".into(),
            description: "Firm brown sandy CLAY with some fine to medium gravel".into(),
            classification: "CL (USCS, ASTM D2487); A-6 (AASHTO M 145)".into(),
        },
        reference: ReferenceBlock {
            lab_test_code: "LAB-0031".into(),
            effort: "Modified (ASTM D1557)".into(),
            energy: "2 700 kJ/m³".into(),
            mdd: format!("{SAMPLE_MDD:.0} kg/m³"),
            omc: format!("{SAMPLE_OMC:.1} %"),
            specific_gravity: "2.68".into(),
            fit_method: "least-squares cubic polynomial, 6 points".into(),
            approval: "not needed (no quality concern)".into(),
            oversize_note: "none applied (3 % retained on 19 mm)".into(),
        },
        clause: ClauseBlock {
            clause_code: "Spec. 6.4.2, embankment fill".into(),
            rc_min: format!("{SAMPLE_RC_MIN:.1} % of modified MDD"),
            moisture_window: "−2.0 to +2.0 points of OMC".into(),
            rule: "every test: RC ≥ minimum and moisture within the window".into(),
            frequency: "1 test per 500 m², at least 3 per lot".into(),
        },
        density_unit: "kg/m³".into(),
        offset_unit: "m".into(),
        tests,
        summary,
        signoff: SignoffBlock {
            submitted_by: "R. Okonkwo-Hale".into(),
            submitted_at: "2026-11-30 16:40 UTC".into(),
            accepted_by: "M. Lindqvist".into(),
            accepted_at: "2026-12-01 13:58 UTC".into(),
            acceptance_comment: "Layer 7 released for placing layer 8. The failed spots were reworked with two further passes of the padfoot roller and retested in my presence.".into(),
        },
        cautions: vec![
            "Results describe the tested points only.".into(),
            "The software reduces and records; it does not replace the engineer's judgement, the contract specification or local codes, which rule wherever they differ from a default here.".into(),
            "Nuclear gauges carry radioactive sources: their use needs licensed, trained operators.".into(),
            "Only the revision shown is in force; check the verification code against the project record before relying on a copy.".into(),
        ],
    }
}
