//! The instrument rules on an invented register. Expected values are worked by hand beside
//! each check (the register's dates and values are invented).

use super::*;

const GAUGE: i64 = 1;
const CONE: i64 = 2;
const BATCH: i64 = 3;
const BALLOON: i64 = 4;
const CLAUSE: i64 = 7;
const SOURCE: i64 = 9;

fn register() -> Register {
    let instrument = |id, kind, serial: &str| RegisteredInstrument {
        id,
        kind,
        serial: serial.into(),
    };
    let calibration = |id, instrument_id, done: &str, due: Option<&str>| Calibration {
        id,
        instrument_id,
        done_on: done.into(),
        due_on: due.map(Into::into),
        cone_sand_mass_g: None,
        sand_density_kg_m3: None,
        volume_cm3: None,
    };
    let on_project = |instrument_id| OnProject {
        instrument_id,
        from_on: "2026-03-01".into(),
        to_on: Some("2026-09-30".into()),
    };
    Register {
        instruments: vec![
            instrument(GAUGE, InstrumentKind::NuclearGauge, "NG-11"),
            instrument(CONE, InstrumentKind::SandCone, "SC-2"),
            instrument(BATCH, InstrumentKind::SandBatch, "SB-5"),
            instrument(BALLOON, InstrumentKind::Balloon, "BA-1"),
        ],
        calibrations: vec![
            calibration(10, GAUGE, "2026-01-15", Some("2026-07-15")),
            Calibration {
                cone_sand_mass_g: Some(1520.0),
                ..calibration(11, CONE, "2026-03-01", None)
            },
            Calibration {
                cone_sand_mass_g: Some(1534.0),
                ..calibration(12, CONE, "2026-05-01", None)
            },
            Calibration {
                sand_density_kg_m3: Some(1410.0),
                ..calibration(13, BATCH, "2026-03-01", None)
            },
            Calibration {
                volume_cm3: Some(2832.4),
                ..calibration(14, BALLOON, "2026-02-20", None)
            },
        ],
        assignments: vec![
            on_project(GAUGE),
            on_project(CONE),
            on_project(BATCH),
            on_project(BALLOON),
        ],
        counts: vec![
            DayCount {
                instrument_id: GAUGE,
                counted_on: "2026-05-12".into(),
                density_count: 2810,
                moisture_count: 640,
                outcome: CountOutcome::Accepted,
            },
            DayCount {
                instrument_id: GAUGE,
                counted_on: "2026-05-13".into(),
                density_count: 2500,
                moisture_count: 600,
                outcome: CountOutcome::Failed,
            },
        ],
        operators: vec![GaugeOperator {
            id: 21,
            code: "OP-3".into(),
            name: "Tamsin Velloway".into(),
            certification: "RSO-4471".into(),
            expires_on: "2026-06-30".into(),
        }],
        offsets: vec![
            MaterialOffset {
                id: 31,
                instrument_id: GAUGE,
                source_id: SOURCE,
                mode: GaugeMode::DirectTransmission,
                effective_on: "2026-04-01".into(),
                density_offset_kg_m3: -20.0,
                moisture_offset_pct: 1.0,
            },
            MaterialOffset {
                id: 32,
                instrument_id: GAUGE,
                source_id: SOURCE,
                mode: GaugeMode::Backscatter,
                effective_on: "2026-04-01".into(),
                density_offset_kg_m3: -35.0,
                moisture_offset_pct: 0.5,
            },
        ],
        clauses_recording_out_of_check: Vec::new(),
    }
}

fn nuclear(probe_depth_mm: Option<f64>) -> FieldReadings {
    FieldReadings::Nuclear {
        wet_density_kg_m3: 2100.0,
        moisture_density_kg_m3: None,
        water_content_pct: Some(10.0),
        oven_water_content_pct: None,
        gauge_serial: None,
        probe_depth_mm,
    }
}

fn sand_cone(cone_g: f64, sand_kg_m3: f64) -> FieldReadings {
    FieldReadings::SandCone {
        mass_sand_used_g: 5200.0,
        mass_sand_in_cone_g: cone_g,
        sand_density_kg_m3: sand_kg_m3,
        mass_wet_soil_g: 4800.0,
        water_content_pct: 9.0,
    }
}

fn at<'a>(serial: &'a str, readings: &'a FieldReadings, day: &'a str) -> TestAtInstrument<'a> {
    TestAtInstrument {
        serial,
        readings,
        technician: "op-3",
        day,
        clause_id: CLAUSE,
        clause_code: "C-4",
        source_id: SOURCE,
        override_reason: None,
    }
}

fn checked(f: Option<Checked>) -> Checked {
    f.expect("a checked instrument")
}

#[test]
fn no_serial_or_an_unknown_one_is_not_recorded_and_never_blocks() {
    let r = register();
    let readings = nuclear(Some(200.0));
    assert_eq!(check(&r, &at("", &readings, "2026-05-12")), Ok(None));
    assert_eq!(check(&r, &at("NG-99", &readings, "2026-05-12")), Ok(None));
}

#[test]
fn a_gauge_in_check_names_its_operator_evidence_and_offset_for_its_mode() {
    let r = register();
    let direct = nuclear(Some(200.0));
    let c = checked(check(&r, &at("NG-11", &direct, "2026-05-12")).unwrap());
    assert_eq!(c.check, InstrumentCheck::InCheck);
    // The technician is named by code in another case: the operator's name is recorded.
    assert_eq!(c.operator, Some((21, "Tamsin Velloway".to_string())));
    assert_eq!(
        c.note,
        "gauge NG-11: calibrated 2026-01-15 (due 2026-07-15); standard count 2026-05-12: density 2810, moisture 640 (accepted)"
    );
    assert_eq!(c.offset.as_ref().map(|o| o.id), Some(31));
    // Probe depth 0 is backscatter (common practice): the other offset.
    let surface = nuclear(Some(0.0));
    let c = checked(check(&r, &at("NG-11", &surface, "2026-05-12")).unwrap());
    assert_eq!(c.offset.as_ref().map(|o| o.id), Some(32));
    // Before the offsets' effective date (2026-04-01) none is in force.
    assert_eq!(r.offset_for(GAUGE, SOURCE, &direct, "2026-03-20"), None);
    assert_eq!(
        r.offset_for(GAUGE, SOURCE, &direct, "2026-04-01")
            .map(|o| o.id),
        Some(31)
    );
}

#[test]
fn a_gauge_without_an_accepted_count_is_refused_unless_the_clause_records_it_out_of_check() {
    let mut r = register();
    let readings = nuclear(Some(200.0));
    let refused = check(&r, &at("NG-11", &readings, "2026-05-13")).unwrap_err();
    assert_eq!(refused.field, "instrument_serial");
    assert_eq!(
        refused.message,
        "gauge NG-11 is out of check on 2026-05-13: its standard count on 2026-05-13 failed; the test is refused (clause C-4 does not record tests from an instrument out of check)"
    );
    r.clauses_recording_out_of_check.push(CLAUSE);
    let c = checked(check(&r, &at("NG-11", &readings, "2026-05-13")).unwrap());
    assert_eq!(c.check, InstrumentCheck::OutOfCheck);
    assert!(
        c.note
            .ends_with("; out of check: its standard count on 2026-05-13 failed"),
        "{}",
        c.note
    );
    // After the calibration's due date the gauge is out of check for that reason too
    // (the operator's certification renewed, so only the gauge is judged).
    r.operators[0].expires_on = "2026-12-31".into();
    let late = check(&r, &at("NG-11", &readings, "2026-07-20")).unwrap();
    assert!(checked(late).note.contains(
        "its calibration of 2026-01-15 was due on 2026-07-15; no standard count on 2026-07-20"
    ));
}

#[test]
fn a_nuclear_test_needs_a_registered_operator_certified_on_the_day() {
    let r = register();
    let readings = nuclear(Some(200.0));
    let mut t = at("NG-11", &readings, "2026-05-12");
    t.technician = "someone else";
    let e = check(&r, &t).unwrap_err();
    assert_eq!(e.field, "technician");
    let mut t = at("NG-11", &readings, "2026-07-01");
    t.technician = "Tamsin Velloway";
    let e = check(&r, &t).unwrap_err();
    assert_eq!(
        (e.field.as_str(), e.message.as_str()),
        (
            "technician",
            "Tamsin Velloway's certification (RSO-4471) expired on 2026-06-30"
        )
    );
}

#[test]
fn an_instrument_off_the_project_or_of_the_wrong_kind_is_refused() {
    let r = register();
    let readings = nuclear(Some(200.0));
    let e = check(&r, &at("NG-11", &readings, "2026-10-01")).unwrap_err();
    assert_eq!(
        e.message,
        "NG-11 is not assigned to this project on 2026-10-01"
    );
    let e = check(&r, &at("SC-2", &readings, "2026-05-12")).unwrap_err();
    assert_eq!(
        e.message,
        "SC-2 is a sand-cone apparatus, not an instrument for a nuclear test"
    );
}

#[test]
fn a_sand_cone_takes_the_calibrations_in_force_and_needs_a_reason_to_differ() {
    let r = register();
    // 0 and 0: both filled from the calibrations in force on 2026-05-12 (cone 1534 g from
    // 2026-05-01, not 1520 g from 2026-03-01; sand 1410 kg/m³).
    let blank = sand_cone(0.0, 0.0);
    let c = checked(check(&r, &at("SC-2", &blank, "2026-05-12")).unwrap());
    assert_eq!(c.readings, sand_cone(1534.0, 1410.0));
    assert_eq!(
        c.note,
        "cone SC-2 calibrated 2026-05-01: 1534 g in cone and plate; sand batch SB-5 calibrated 2026-03-01: 1410 kg/m³"
    );
    // Within 0.05 g and 0.5 kg/m³ the entered values are the calibrated ones.
    let same = sand_cone(1534.04, 1410.4);
    assert!(check(&r, &at("SC-2", &same, "2026-05-12")).is_ok());
    let other = sand_cone(1540.0, 0.0);
    let e = check(&r, &at("SC-2", &other, "2026-05-12")).unwrap_err();
    assert_eq!(e.field, "readings.mass_sand_in_cone_g");
    let mut t = at("SC-2", &other, "2026-05-12");
    t.override_reason = Some("  cone re-weighed on site  ");
    let c = checked(check(&r, &t).unwrap());
    assert!(c.note.ends_with(
        "; overridden (mass_sand_in_cone_g 1540 g instead of 1534 g): cone re-weighed on site"
    ));
    let long = "x".repeat(301);
    t.override_reason = Some(&long);
    assert_eq!(
        check(&r, &t).unwrap_err().field,
        "calibration_override_reason"
    );
}

#[test]
fn a_balloon_is_in_check_with_its_calibrated_volume_as_evidence() {
    let r = register();
    let readings = FieldReadings::Balloon {
        hole_volume_cm3: 2400.0,
        mass_wet_soil_g: 4700.0,
        water_content_pct: 8.0,
    };
    let c = checked(check(&r, &at("BA-1", &readings, "2026-05-12")).unwrap());
    assert_eq!(c.check, InstrumentCheck::InCheck);
    assert_eq!(
        c.note,
        "balloon apparatus BA-1: calibrated 2026-02-20, 2832.4 cm³"
    );
}

#[test]
fn an_offset_corrects_the_gauge_reading_but_not_an_oven_water_content() {
    let offset = &register().offsets[0];
    // Wet 2100 − 20 = 2080 kg/m³; w 10.0 + 1.0 = 11.0 %; dry 2080 / 1.11 = 1873.87 kg/m³.
    let d = with_offset(&nuclear(Some(200.0)), offset).unwrap();
    assert!((d.wet_density.kg_m3() - 2080.0).abs() < 1e-9);
    assert!((d.water_content.pct() - 11.0).abs() < 1e-9);
    assert!((d.dry_density.kg_m3() - 1_873.873_873_9).abs() < 1e-6);
    // An oven water content of 9.0 % stands: dry 2080 / 1.09 = 1908.26 kg/m³.
    let oven = FieldReadings::Nuclear {
        wet_density_kg_m3: 2100.0,
        moisture_density_kg_m3: None,
        water_content_pct: Some(10.0),
        oven_water_content_pct: Some(9.0),
        gauge_serial: None,
        probe_depth_mm: Some(200.0),
    };
    let d = with_offset(&oven, offset).unwrap();
    assert!((d.water_content.pct() - 9.0).abs() < 1e-9);
    assert!((d.dry_density.kg_m3() - 1_908.256_880_7).abs() < 1e-6);
}

#[test]
fn the_serial_is_the_instrument_serial_else_the_gauge_serial_of_the_readings() {
    let readings = FieldReadings::Nuclear {
        wet_density_kg_m3: 2100.0,
        moisture_density_kg_m3: None,
        water_content_pct: Some(10.0),
        oven_water_content_pct: None,
        gauge_serial: Some(" NG-11 ".into()),
        probe_depth_mm: None,
    };
    assert_eq!(serial_named("  ", &readings), "NG-11");
    assert_eq!(serial_named(" NG-12", &readings), "NG-12");
}
