//! One field test checked and previewed against its lot's rules, with no store behind it.
//!
//! The server builds [`LotRules`] from its rows; the phone gets the same bundle as JSON
//! and runs this very module compiled to WebAssembly (`wasm/`), so an offline preview
//! gives the server's numbers, flags and field-named refusals.

use serde::{Deserialize, Serialize};

use super::field::{FieldReadings, reduce_field};
use super::instrument_check::{self, Register, TestAtInstrument};
use super::instruments::InstrumentCheck;
use super::plausibility::{self, PlausibilityFlag, PlausibilityInput};
use super::verdict::{Reference, SpecLimits, judge_test, reference_for_coarse_fraction};
use super::{Chainage, Density, Offset, SpecificGravity, WaterContent};

/// Body of a new field test (also of a retest, whose location defaults to the failed test's).
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FieldTestInput {
    /// Test number, unique in the project; generated when absent.
    pub number: Option<String>,
    /// When the test was taken (RFC 3339); now when absent.
    pub tested_at: Option<String>,
    pub technician: String,
    #[serde(default)]
    pub instrument_serial: String,
    pub chainage_m: Option<f64>,
    pub offset_m: Option<f64>,
    pub depth_mm: Option<f64>,
    pub coarse_pct: Option<f64>,
    pub coarse_water_content_pct: Option<f64>,
    pub easting: Option<f64>,
    pub northing: Option<f64>,
    pub readings: FieldReadings,
    /// The technician confirms a reading far above zero air voids (refused otherwise).
    #[serde(default)]
    pub confirm_implausible: bool,
    /// Why a sand-cone test uses a cone mass or sand density other than the calibration
    /// in force on its date (required for such an override; see `ledger::instruments`).
    #[serde(default)]
    pub calibration_override_reason: Option<String>,
}

/// What a test on one lot is checked and judged against: the lot's place, its clause's
/// limits and the reference curve (the bundle a phone keeps for the day).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LotRules {
    pub lot_id: i64,
    pub lot_code: String,
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
    pub offset_left_m: f64,
    pub offset_right_m: f64,
    pub layer_thickness_mm: Option<f64>,
    pub clause_code: String,
    pub limits: SpecLimits,
    pub rc_plausible_max_pct: f64,
    pub oversize_limit_pct: f64,
    pub oversize_sieve_mm: f64,
    pub coarse_water_default_pct: Option<f64>,
    pub source_code: String,
    /// Bulk specific gravity of the oversize, when the source has one.
    pub gs_coarse: Option<f64>,
    /// Gs of the reference curve's fines.
    pub specific_gravity: f64,
    pub max_dry_density_kg_m3: f64,
    pub optimum_water_content_pct: f64,
}

/// A refusal naming the input field (API names: `chainage_m`, `readings.wet_density_kg_m3`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteError {
    pub field: String,
    pub message: String,
}

impl SiteError {
    pub(crate) fn new(field: impl Into<String>, message: impl Into<String>) -> Self {
        Self {
            field: field.into(),
            message: message.into(),
        }
    }
}

/// A test's place and readings after every pure check.
#[derive(Debug, Clone, PartialEq)]
pub struct CheckedEntry {
    pub chainage_m: f64,
    pub offset_m: f64,
    pub depth_mm: Option<f64>,
    pub coarse_pct: Option<f64>,
    pub coarse_water_content_pct: Option<f64>,
    pub wet_density_kg_m3: f64,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    pub moisture_source: super::field::MoistureSource,
}

/// Whether a chainage lies on a lot; a small tolerance at the ends lets a test on the
/// boundary chainage belong to either lot. The message names the lot and its range.
pub fn chainage_in_lot(r: &LotRules, metres: f64) -> Result<(), String> {
    if metres < r.chainage_from_m - 0.5 || metres > r.chainage_to_m + 0.5 {
        return Err(format!(
            "{:.3} m is outside lot {} ({:.3}–{:.3} m)",
            metres, r.lot_code, r.chainage_from_m, r.chainage_to_m
        ));
    }
    Ok(())
}

/// A finite value within `min..=max`, else a refusal naming `field`.
pub fn number(field: &str, value: f64, min: f64, max: f64, unit: &str) -> Result<f64, SiteError> {
    if !value.is_finite() {
        return Err(SiteError::new(field, "must be a finite number"));
    }
    if value < min || value > max {
        return Err(SiteError::new(
            field,
            format!("{value} {unit} is outside {min}–{max} {unit}"),
        ));
    }
    Ok(value)
}

impl LotRules {
    /// The lab curve's MDD and OMC (before any oversize correction).
    pub fn reference(&self) -> Result<Reference, SiteError> {
        let bad = |e: super::QuantityError| SiteError::new("lab_test_id", e.to_string());
        Ok(Reference {
            max_dry_density: Density::new(self.max_dry_density_kg_m3).map_err(bad)?,
            optimum_water_content: WaterContent::new(self.optimum_water_content_pct)
                .map_err(bad)?,
            specific_gravity: super::SpecificGravity::new(self.specific_gravity).ok(),
        })
    }

    /// The reference a test with this coarse fraction is judged against (ASTM D4718 when coarse).
    pub fn reference_for(
        &self,
        coarse_pct: Option<f64>,
        coarse_w_pct: Option<f64>,
    ) -> Result<Reference, SiteError> {
        let reference = self.reference()?;
        let Some(coarse) = coarse_pct.filter(|c| *c > 0.0) else {
            return Ok(reference);
        };
        let Some(gs_coarse) = self.gs_coarse else {
            return Err(SiteError::new(
                "coarse_pct",
                format!(
                    "source {} has no coarse-fraction specific gravity to correct with",
                    self.source_code
                ),
            ));
        };
        let coarse_w = coarse_w_pct.or(self.coarse_water_default_pct).ok_or_else(|| {
            SiteError::new(
                "coarse_water_content_pct",
                format!(
                    "is required with a coarse fraction: clause {} assumes no coarse water content",
                    self.clause_code
                ),
            )
        })?;
        reference_for_coarse_fraction(
            &reference,
            coarse,
            gs_coarse,
            coarse_w,
            self.oversize_limit_pct,
        )
        .map_err(|e| {
            SiteError::new(
                "coarse_pct",
                format!(
                    "{e} (oversize retained on the {} mm sieve)",
                    self.oversize_sieve_mm
                ),
            )
        })
    }
}

/// The pure checks of one test on a lot, in the order the server applies them: readings,
/// chainage, offset band, depth, coarse fraction and its correction. `fallback` is a
/// retest's (chainage, offset) of the failed test.
pub fn check_entry(
    r: &LotRules,
    input: &FieldTestInput,
    fallback: Option<(f64, f64)>,
) -> Result<CheckedEntry, SiteError> {
    let reduced = reduce_field(&input.readings)
        .map_err(|e| SiteError::new(format!("readings.{}", e.field()), e.to_string()))?;
    let chainage_m = input
        .chainage_m
        .or(fallback.map(|s| s.0))
        .ok_or_else(|| SiteError::new("chainage_m", "is required"))?;
    let chainage =
        Chainage::new(chainage_m).map_err(|e| SiteError::new("chainage_m", e.to_string()))?;
    chainage_in_lot(r, chainage.metres()).map_err(|m| SiteError::new("chainage_m", m))?;
    let offset_m = input.offset_m.or(fallback.map(|s| s.1)).unwrap_or(0.0);
    let offset = Offset::new(offset_m).map_err(|e| SiteError::new("offset_m", e.to_string()))?;
    if offset.metres() < r.offset_left_m - 0.01 || offset.metres() > r.offset_right_m + 0.01 {
        return Err(SiteError::new(
            "offset_m",
            format!(
                "{:.2} m is outside the lot's offset band {:.2} to {:.2} m",
                offset.metres(),
                r.offset_left_m,
                r.offset_right_m
            ),
        ));
    }
    let depth_mm = input
        .depth_mm
        .map(|d| number("depth_mm", d, 0.0, 1000.0, "mm"))
        .transpose()?;
    let coarse_pct = input
        .coarse_pct
        .map(|c| number("coarse_pct", c, 0.0, 100.0, "%"))
        .transpose()?;
    let coarse_w = input
        .coarse_water_content_pct
        .map(|c| number("coarse_water_content_pct", c, 0.0, 20.0, "%"))
        .transpose()?;
    if coarse_pct.is_some_and(|c| c > 0.0) {
        r.reference_for(coarse_pct, coarse_w)?;
    }
    Ok(CheckedEntry {
        chainage_m: chainage.metres(),
        offset_m: offset.metres(),
        depth_mm,
        coarse_pct,
        coarse_water_content_pct: coarse_w,
        wet_density_kg_m3: reduced.wet_density.kg_m3(),
        water_content_pct: reduced.water_content.pct(),
        dry_density_kg_m3: reduced.dry_density.kg_m3(),
        moisture_source: reduced.moisture_source,
    })
}

/// The refusal of a point far above zero air voids that the technician has not confirmed.
pub fn implausible_refusal(
    r: &LotRules,
    input: &FieldTestInput,
    c: &CheckedEntry,
) -> Option<SiteError> {
    if input.confirm_implausible {
        return None;
    }
    let gs = SpecificGravity::new(r.specific_gravity).ok()?;
    plausibility::refusal_without_confirmation(gs, c.water_content_pct, c.dry_density_kg_m3)
        .map(|reason| SiteError::new("confirm_implausible", reason))
}

/// The reduced values, verdict and flags shown before a test is saved.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Preview {
    pub flags: Vec<PlausibilityFlag>,
    pub wet_density_kg_m3: f64,
    pub water_content_pct: f64,
    pub dry_density_kg_m3: f64,
    pub moisture_source: super::field::MoistureSource,
    pub reference_mdd_kg_m3: f64,
    pub reference_omc_pct: f64,
    pub relative_compaction_pct: f64,
    pub moisture_deviation_pct: f64,
    pub passed: bool,
    pub reasons: Vec<String>,
    pub saved: bool,
    /// How the test's instrument stands, when the register was given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub instrument_check: Option<InstrumentCheck>,
    /// The instrument's evidence (and why it is out of check), when it is registered.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub instrument_note: Option<String>,
}

/// The probe depth the layer check reads: a nuclear test's own, else the test depth.
fn nuclear_probe_depth_mm(input: &FieldTestInput, c: &CheckedEntry) -> Option<f64> {
    match &input.readings {
        FieldReadings::Nuclear { probe_depth_mm, .. } => probe_depth_mm.or(c.depth_mm),
        _ => None,
    }
}

/// Judges a checked test against the lot (oversize-corrected when coarse) and flags it.
pub fn preview_checked(
    r: &LotRules,
    input: &FieldTestInput,
    c: &CheckedEntry,
) -> Result<Preview, SiteError> {
    let reference = r.reference_for(c.coarse_pct, c.coarse_water_content_pct)?;
    let dry =
        Density::new(c.dry_density_kg_m3).map_err(|e| SiteError::new("readings", e.to_string()))?;
    let w = WaterContent::new(c.water_content_pct)
        .map_err(|e| SiteError::new("readings", e.to_string()))?;
    let v = judge_test(dry, w, &reference, &r.limits);
    let flags = plausibility::flags(&PlausibilityInput {
        nuclear_probe_depth_mm: r.layer_thickness_mm.and(nuclear_probe_depth_mm(input, c)),
        layer_thickness_mm: r.layer_thickness_mm,
        dry_density_kg_m3: c.dry_density_kg_m3,
        water_content_pct: c.water_content_pct,
        specific_gravity: SpecificGravity::new(r.specific_gravity).ok(),
        relative_compaction_pct: Some(v.relative_compaction_pct),
        rc_plausible_max_pct: r.rc_plausible_max_pct,
    });
    Ok(Preview {
        flags,
        wet_density_kg_m3: c.wet_density_kg_m3,
        water_content_pct: c.water_content_pct,
        dry_density_kg_m3: c.dry_density_kg_m3,
        moisture_source: c.moisture_source,
        reference_mdd_kg_m3: reference.max_dry_density.kg_m3(),
        reference_omc_pct: reference.optimum_water_content.pct(),
        relative_compaction_pct: v.relative_compaction_pct,
        moisture_deviation_pct: v.moisture_deviation_pct,
        passed: v.passed,
        reasons: v.reasons,
        saved: false,
        instrument_check: None,
        instrument_note: None,
    })
}

/// Checks, reduces and judges one test on a lot: the whole preview, or its first refusal.
pub fn preview(
    r: &LotRules,
    input: &FieldTestInput,
    fallback: Option<(f64, f64)>,
) -> Result<Preview, SiteError> {
    let c = check_entry(r, input, fallback)?;
    if let Some(refusal) = implausible_refusal(r, input, &c) {
        return Err(refusal);
    }
    preview_checked(r, input, &c)
}

/// The instrument register as a lot's tests are checked against it: the project's
/// register, and the lot's clause and source (the bundle a phone keeps beside [`LotRules`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LotInstruments {
    pub register: Register,
    pub clause_id: i64,
    pub source_id: i64,
}

/// The day a test was taken (UTC), as the ledger reads `tested_at`: an RFC 3339 time, a
/// date, or a `YYYY-MM-DDTHH:MM` time taken as UTC; `today` when absent.
pub fn test_day(tested_at: Option<&str>, today: &str) -> Result<String, SiteError> {
    let Some(v) = tested_at.map(str::trim).filter(|v| !v.is_empty()) else {
        return Ok(today.to_string());
    };
    let rfc = time::format_description::well_known::Rfc3339;
    if let Ok(t) = time::OffsetDateTime::parse(v, &rfc) {
        return Ok(t.to_offset(time::UtcOffset::UTC).date().to_string());
    }
    let day = time::macros::format_description!("[year]-[month]-[day]");
    if let Ok(d) = time::Date::parse(v, &day) {
        return Ok(d.to_string());
    }
    let local = time::macros::format_description!("[year]-[month]-[day]T[hour]:[minute]");
    if let Ok(t) = time::PrimitiveDateTime::parse(v, &local) {
        return Ok(t.date().to_string());
    }
    Err(SiteError::new(
        "tested_at",
        format!("'{v}' is not a date-time like 2026-12-01T14:30:00Z"),
    ))
}

/// [`preview`] with the test's instrument checked against the register first, as the
/// ledger checks it when the test is stored: a refusal names its field, a sand cone's
/// calibrated values are filled in, a gauge's offsets in force are applied.
pub fn preview_at_instrument(
    r: &LotRules,
    instruments: &LotInstruments,
    input: &FieldTestInput,
    today: &str,
) -> Result<Preview, SiteError> {
    let day = test_day(input.tested_at.as_deref(), today)?;
    let serial = instrument_check::serial_named(&input.instrument_serial, &input.readings);
    let found = instrument_check::check(
        &instruments.register,
        &TestAtInstrument {
            serial: &serial,
            readings: &input.readings,
            technician: &input.technician,
            day: &day,
            clause_id: instruments.clause_id,
            clause_code: &r.clause_code,
            source_id: instruments.source_id,
            override_reason: input.calibration_override_reason.as_deref(),
        },
    )?;
    let Some(found) = found else {
        let mut p = preview(r, input, None)?;
        p.instrument_check = Some(InstrumentCheck::NotRecorded);
        return Ok(p);
    };
    let mut input = input.clone();
    input.readings = found.readings.clone();
    let mut c = check_entry(r, &input, None)?;
    // As the ledger stores it: the plausibility refusal reads the gauge's own reading, the
    // offsets then correct the values judged.
    if let Some(refusal) = implausible_refusal(r, &input, &c) {
        return Err(refusal);
    }
    if let Some(o) = &found.offset {
        let corrected = instrument_check::with_offset(&input.readings, o)?;
        c.wet_density_kg_m3 = corrected.wet_density.kg_m3();
        c.water_content_pct = corrected.water_content.pct();
        c.dry_density_kg_m3 = corrected.dry_density.kg_m3();
    }
    let mut p = preview_checked(r, &input, &c)?;
    p.instrument_check = Some(found.check);
    p.instrument_note = Some(found.note);
    Ok(p)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::reduction::rounding::{Rounding, RoundingMethod};

    /// An invented lot: 1000–1100 m, ±5 m, MDD 2000 kg/m³ at 10 % (round numbers so the
    /// expected values are worked by hand).
    fn lot() -> LotRules {
        LotRules {
            lot_id: 1,
            lot_code: "L-1".into(),
            chainage_from_m: 1000.0,
            chainage_to_m: 1100.0,
            offset_left_m: -5.0,
            offset_right_m: 5.0,
            layer_thickness_mm: Some(150.0),
            clause_code: "C1".into(),
            limits: SpecLimits {
                rc_min_pct: 95.0,
                moisture: super::super::verdict::MoistureWindow::PointsOfOmc {
                    below_pct: 2.0,
                    above_pct: 2.0,
                },
                max_air_voids_pct: None,
                rounding: Rounding {
                    method: RoundingMethod::AstmE29,
                    decimals: 1,
                },
            },
            rc_plausible_max_pct: 103.0,
            oversize_limit_pct: 40.0,
            oversize_sieve_mm: 4.75,
            coarse_water_default_pct: None,
            source_code: "S1".into(),
            gs_coarse: None,
            specific_gravity: 2.70,
            max_dry_density_kg_m3: 2000.0,
            optimum_water_content_pct: 10.0,
        }
    }

    /// A nuclear test: wet 2090, moisture 190 → dry 1900 kg/m³, w = 10 % (worked by hand).
    fn input(chainage_m: f64, offset_m: f64, depth_mm: f64) -> FieldTestInput {
        FieldTestInput {
            number: None,
            tested_at: None,
            technician: "A".into(),
            instrument_serial: String::new(),
            chainage_m: Some(chainage_m),
            offset_m: Some(offset_m),
            depth_mm: Some(depth_mm),
            coarse_pct: None,
            coarse_water_content_pct: None,
            easting: None,
            northing: None,
            readings: FieldReadings::Nuclear {
                wet_density_kg_m3: 2090.0,
                moisture_density_kg_m3: Some(190.0),
                water_content_pct: None,
                oven_water_content_pct: None,
                gauge_serial: None,
                probe_depth_mm: None,
            },
            confirm_implausible: false,
            calibration_override_reason: None,
        }
    }

    #[test]
    fn a_test_on_the_lot_is_reduced_judged_and_flagged() {
        let p = preview(&lot(), &input(1050.0, 1.0, 200.0), None).unwrap();
        // ρd = 2090 − 190 = 1900 kg/m³; RC = 1900 / 2000 = 95.0 % (hand arithmetic).
        assert!((p.dry_density_kg_m3 - 1900.0).abs() < 1e-9);
        assert!((p.relative_compaction_pct - 95.0).abs() < 1e-9);
        assert!(p.passed, "{p:?}");
        // A 200 mm probe in a 150 mm layer is flagged.
        assert!(
            p.flags.iter().any(|f| f.code == "probe_deeper_than_layer"),
            "{p:?}"
        );
    }

    #[test]
    fn refusals_name_the_field_in_the_servers_order() {
        let r = lot();
        let e = preview(&r, &input(2000.0, 9.0, 100.0), None).unwrap_err();
        assert_eq!(e.field, "chainage_m", "chainage before offset: {e:?}");
        let e = preview(&r, &input(1050.0, 9.0, 100.0), None).unwrap_err();
        assert_eq!(e.field, "offset_m");
        let e = preview(&r, &input(1050.0, 0.0, 1500.0), None).unwrap_err();
        assert_eq!(e.field, "depth_mm");
        let mut coarse = input(1050.0, 0.0, 100.0);
        coarse.coarse_pct = Some(20.0);
        let e = preview(&r, &coarse, None).unwrap_err();
        assert_eq!(e.field, "coarse_pct", "no coarse Gs on the source: {e:?}");
    }

    #[test]
    fn a_retest_falls_back_on_the_failed_tests_spot() {
        let mut i = input(0.0, 0.0, 100.0);
        i.chainage_m = None;
        i.offset_m = None;
        let c = check_entry(&lot(), &i, Some((1020.0, -2.0))).unwrap();
        assert_eq!((c.chainage_m, c.offset_m), (1020.0, -2.0));
        assert_eq!(
            check_entry(&lot(), &i, None).unwrap_err().field,
            "chainage_m"
        );
    }
}
