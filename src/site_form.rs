//! The site entry form, parsed and answered without a store: the one parser and preview
//! of the entry page, used by the server and, compiled to WebAssembly with
//! `crate::reduction` and `crate::present` (`wasm/`), by the phone when it has no signal.
//! Pure: no I/O.

use std::collections::BTreeMap;

use serde::Deserialize;
use serde_json::json;

use crate::present::Units;
use crate::readings::{DensityUnits, ReadingField, parse_number, parse_readings};
use crate::reduction::field::FieldReadings;
use crate::reduction::instruments::InstrumentCheck;
use crate::reduction::site::{FieldTestInput, LotInstruments, LotRules};
use crate::reduction::{Chainage, UnitSystem};

/// The form exactly as typed; every value is text until parsed.
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(default)]
pub struct EntryForm {
    pub action: String,
    pub number: String,
    pub tested_at: String,
    pub technician: String,
    pub instrument_serial: String,
    pub chainage: String,
    pub offset_m: String,
    pub depth_mm: String,
    pub coarse_pct: String,
    pub coarse_water_content_pct: String,
    pub method: String,
    pub wet_density: String,
    pub moisture_density: String,
    pub gauge_water_content_pct: String,
    pub oven_water_content_pct: String,
    pub mass_sand_used_g: String,
    pub mass_sand_in_cone_g: String,
    pub sand_density_kg_m3: String,
    pub hole_volume_cm3: String,
    pub cylinder_volume_cm3: String,
    pub mass_wet_soil_g: String,
    pub water_content_pct: String,
    /// "on" when the technician confirms a reading far above zero air voids.
    pub confirm_implausible: String,
}

/// Field name → message, shown beside each input.
pub type Errors = BTreeMap<String, String>;

fn num(errors: &mut Errors, field: &str, v: &str, required: bool) -> Option<f64> {
    let v = v.trim();
    if v.is_empty() {
        if required {
            errors.insert(field.into(), "is required".into());
        }
        return None;
    }
    let x = parse_number(v);
    if x.is_none() {
        errors.insert(field.into(), format!("'{v}' is not a number"));
    }
    x
}

/// The form input that holds a reading.
fn typed(f: &EntryForm, field: ReadingField) -> &str {
    match field {
        ReadingField::Method => &f.method,
        ReadingField::WetDensity => &f.wet_density,
        ReadingField::MoistureDensity => &f.moisture_density,
        ReadingField::GaugeWaterContent => &f.gauge_water_content_pct,
        ReadingField::OvenWaterContent => &f.oven_water_content_pct,
        ReadingField::MassSandUsed => &f.mass_sand_used_g,
        ReadingField::MassSandInCone => &f.mass_sand_in_cone_g,
        ReadingField::SandDensity => &f.sand_density_kg_m3,
        ReadingField::HoleVolume => &f.hole_volume_cm3,
        ReadingField::CylinderVolume => &f.cylinder_volume_cm3,
        ReadingField::MassWetSoil => &f.mass_wet_soil_g,
        ReadingField::WaterContent => &f.water_content_pct,
    }
}

/// The readings through the one parser (`crate::readings`), each problem put beside
/// the input it came from, named as a refusal of the ledger would be.
fn readings(
    f: &EntryForm,
    u: &Units,
    depth: Option<f64>,
    errors: &mut Errors,
) -> Option<FieldReadings> {
    let units = DensityUnits {
        bulk: u.system,
        // The form asks for the sand density in kg/m³ whatever the project's units.
        sand: UnitSystem::Si,
    };
    match parse_readings(&f.method, units, depth, |field| Some(typed(f, field))) {
        Ok(r) => Some(r),
        Err(problems) => {
            for p in problems {
                errors
                    .entry(form_field(p.field.api_field(), &f.method))
                    .or_insert(p.reason);
            }
            None
        }
    }
}

/// The chainage in metres (none on a retest left empty: the failed test's spot is used).
fn chainage(f: &EntryForm, u: &Units, retest: bool, errors: &mut Errors) -> Option<f64> {
    if retest && f.chainage.trim().is_empty() {
        return None;
    }
    match Chainage::parse(f.chainage.trim(), u.chainage) {
        Ok(c) => Some(c.metres()),
        Err(err) => {
            errors.insert("chainage".into(), err.to_string());
            None
        }
    }
}

/// Parses the form into the ledger's input, collecting every field's problem at once.
pub fn parse_entry(f: &EntryForm, u: &Units, retest: bool) -> Result<FieldTestInput, Errors> {
    let mut e = Errors::new();
    let chainage = chainage(f, u, retest, &mut e);
    let offset = num(&mut e, "offset_m", &f.offset_m, !retest);
    let depth = num(&mut e, "depth_mm", &f.depth_mm, false);
    let coarse = num(&mut e, "coarse_pct", &f.coarse_pct, false);
    let coarse_w = num(
        &mut e,
        "coarse_water_content_pct",
        &f.coarse_water_content_pct,
        false,
    );
    let readings = readings(f, u, depth, &mut e);
    if f.technician.trim().is_empty() {
        e.insert("technician".into(), "is required".into());
    }
    match readings {
        Some(readings) if e.is_empty() => Ok(FieldTestInput {
            number: Some(f.number.trim().to_string()).filter(|n| !n.is_empty()),
            tested_at: Some(f.tested_at.trim().to_string()).filter(|t| !t.is_empty()),
            technician: f.technician.clone(),
            instrument_serial: f.instrument_serial.clone(),
            chainage_m: chainage,
            offset_m: offset,
            depth_mm: depth,
            coarse_pct: coarse,
            coarse_water_content_pct: coarse_w,
            easting: None,
            northing: None,
            readings,
            confirm_implausible: !f.confirm_implausible.trim().is_empty(),
            calibration_override_reason: None,
        }),
        _ => Err(e),
    }
}

/// "0+650.000 is outside lot EF06-1 (0+000.000 to 0+400.000)", in the project's style.
pub fn outside_lot_words(lot: &LotRules, u: &Units, metres: f64) -> String {
    format!(
        "{} is outside lot {} ({} to {})",
        u.chainage(metres),
        lot.lot_code,
        u.chainage(lot.chainage_from_m),
        u.chainage(lot.chainage_to_m)
    )
}

/// Maps a ledger error's field onto the form input it came from.
pub fn form_field(api_field: &str, method: &str) -> String {
    match api_field {
        "chainage_m" => "chainage".into(),
        "readings.wet_density_kg_m3" => "wet_density".into(),
        "readings.moisture_density_kg_m3" => "moisture_density".into(),
        "readings.water_content_pct" if method == "nuclear" => "gauge_water_content_pct".into(),
        "readings.probe_depth_mm" => "depth_mm".into(),
        other => other.strip_prefix("readings.").unwrap_or(other).to_string(),
    }
}

/// The reduced values and verdict shown before saving.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct PreviewView {
    pub wet: String,
    pub water: String,
    pub dry: String,
    pub rc: String,
    pub dev: String,
    pub reference: String,
    pub passed: bool,
    pub verdict: String,
    pub reasons: Vec<String>,
    /// The instrument's standing and evidence, when it was checked ("" otherwise).
    pub instrument: String,
}

pub fn preview_view(v: &serde_json::Value, u: &Units) -> PreviewView {
    let f = |k: &str| v[k].as_f64().unwrap_or(0.0);
    let passed = v["passed"].as_bool().unwrap_or(false);
    PreviewView {
        wet: u.density_with_unit(f("wet_density_kg_m3")),
        water: format!(
            "{:.1} % ({})",
            f("water_content_pct"),
            v["moisture_source"].as_str().unwrap_or("")
        ),
        dry: u.density_with_unit(f("dry_density_kg_m3")),
        rc: format!("{:.1} %", f("relative_compaction_pct")),
        dev: format!("{:+.1} points", f("moisture_deviation_pct")),
        reference: format!(
            "MDD {}, OMC {:.1} %",
            u.density_with_unit(f("reference_mdd_kg_m3")),
            f("reference_omc_pct")
        ),
        passed,
        instrument: instrument_words(v),
        verdict: if passed { "passes" } else { "fails" }.to_string(),
        reasons: v["reasons"]
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(|r| r.as_str().map(str::to_string))
            .chain(
                v["flags"]
                    .as_array()
                    .into_iter()
                    .flatten()
                    .filter_map(|f| f["message"].as_str().map(|m| format!("flag: {m}"))),
            )
            .collect(),
    }
}

/// "instrument in check: gauge NG-11: calibrated …", from a preview's values.
fn instrument_words(v: &serde_json::Value) -> String {
    let Ok(check) = serde_json::from_value::<InstrumentCheck>(v["instrument_check"].clone()) else {
        return String::new();
    };
    match v["instrument_note"].as_str() {
        Some(note) => format!("{}: {note}", check.label()),
        None => check.label().to_string(),
    }
}

/// Adds the lot-range problem of a readable chainage, so every problem shows at once.
pub fn lot_range_error(lot: &LotRules, u: &Units, form: &EntryForm, errors: &mut Errors) {
    if errors.contains_key("chainage") || form.chainage.trim().is_empty() {
        return;
    }
    if let Ok(c) = Chainage::parse(form.chainage.trim(), u.chainage)
        && crate::reduction::site::chainage_in_lot(lot, c.metres()).is_err()
    {
        errors.insert("chainage".into(), outside_lot_words(lot, u, c.metres()));
    }
}

/// The message beside a form field for a refusal of the pure checks (a chainage off the
/// lot in the project's style).
pub fn refusal_words(
    lot: &LotRules,
    u: &Units,
    form: &EntryForm,
    field: &str,
    message: &str,
) -> String {
    if field == "chainage"
        && let Ok(ch) = Chainage::parse(form.chainage.trim(), u.chainage)
        && crate::reduction::site::chainage_in_lot(lot, ch.metres()).is_err()
    {
        return outside_lot_words(lot, u, ch.metres());
    }
    message.to_string()
}

/// The live preview's answer to a form: `{"errors": {field: message}}`, or no errors with
/// `preview` (the words shown), `values` (the numbers, unformatted) and `input` (the API
/// body the site app's queue sends).
///
/// With the register (`instruments`), the test's instrument is checked as the ledger checks
/// it when the test is stored; `today` is the day of a test whose form gives no time.
pub fn answer(
    lot: &LotRules,
    instruments: Option<&LotInstruments>,
    u: &Units,
    form: &EntryForm,
    retest: bool,
    today: &str,
) -> serde_json::Value {
    let input = match parse_entry(form, u, retest) {
        Ok(i) => i,
        Err(mut errors) => {
            lot_range_error(lot, u, form, &mut errors);
            return json!({ "errors": errors });
        }
    };
    let previewed = match instruments {
        Some(reg) => crate::reduction::site::preview_at_instrument(lot, reg, &input, today),
        None => crate::reduction::site::preview(lot, &input, None),
    };
    match previewed {
        Ok(p) => {
            let v = serde_json::to_value(&p).unwrap_or_default();
            json!({"errors": {}, "preview": preview_view(&v, u), "values": v, "input": input})
        }
        Err(e) => {
            let field = form_field(&e.field, &form.method);
            let msg = refusal_words(lot, u, form, &field, &e.message);
            json!({ "errors": { field: msg } })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::reduction::ChainageStyle;

    fn si() -> Units {
        Units {
            system: UnitSystem::Si,
            chainage: ChainageStyle::KmMetre,
        }
    }

    #[test]
    fn every_bad_field_is_named_at_once() {
        let f = EntryForm {
            method: "nuclear".into(),
            chainage: "zero".into(),
            offset_m: "left".into(),
            wet_density: "".into(),
            ..Default::default()
        };
        let e = parse_entry(&f, &si(), false).unwrap_err();
        for k in [
            "chainage",
            "offset_m",
            "wet_density",
            "technician",
            "moisture_density",
        ] {
            assert!(e.contains_key(k), "{k} missing from {e:?}");
        }
    }

    #[test]
    fn a_complete_nuclear_form_parses_with_chainage_in_metres() {
        let f = EntryForm {
            method: "nuclear".into(),
            chainage: "1+012.5".into(),
            offset_m: "-2".into(),
            wet_density: "2100".into(),
            moisture_density: "210".into(),
            technician: "A".into(),
            ..Default::default()
        };
        let i = parse_entry(&f, &si(), false).unwrap();
        assert_eq!(i.chainage_m, Some(1012.5));
        assert_eq!(i.offset_m, Some(-2.0));
    }

    #[test]
    fn api_fields_map_to_form_inputs() {
        assert_eq!(
            form_field("readings.wet_density_kg_m3", "nuclear"),
            "wet_density"
        );
        assert_eq!(
            form_field("readings.water_content_pct", "nuclear"),
            "gauge_water_content_pct"
        );
        assert_eq!(
            form_field("readings.water_content_pct", "balloon"),
            "water_content_pct"
        );
        assert_eq!(form_field("chainage_m", "balloon"), "chainage");
    }
}
