//! The instrument register through the API: standard counts judged, tests checking their
//! gauge, out-of-check tests kept out of the statistics, sand calibrations in force,
//! material offsets, the CSV import, the certificate read back and calibrations due.
//!
//! Tolerances and the four-count reference are ASTM D6938 as recalled in DOMAIN.md
//! ("from memory"); check values are hand arithmetic beside each assertion.

use serde_json::{Value, json};

use crate::helpers::{As, Frame, TestApp, build_frame, nuclear_test, pdf_pages, spawn_app};

async fn put_as(app: &TestApp, who: As, path: &str, body: &Value) -> (u16, Value) {
    let r = app
        .client_as(who)
        .put(app.url(path))
        .json(body)
        .send()
        .await
        .expect("PUT");
    let s = r.status().as_u16();
    (s, r.json().await.unwrap_or(Value::Null))
}

/// Registers a gauge (as the admin), assigns it to the frame's project from 2026-11-01.
async fn gauge(app: &TestApp, f: &Frame, serial: &str, calibrated: &str, due: &str) -> i64 {
    let (s, g) = app
        .post_as(
            As::Admin,
            "/api/v1/instruments",
            &json!({"kind": "nuclear_gauge", "serial": serial, "description": "test gauge",
                    "calibrated_on": calibrated, "due_on": due}),
        )
        .await;
    assert_eq!(s, 201, "{g}");
    let id = g["id"].as_i64().unwrap();
    let (s, a) = app
        .post(
            &format!("/api/v1/instruments/{id}/assignments"),
            &json!({"project_id": f.project, "from_on": "2026-11-01"}),
        )
        .await;
    assert_eq!(s, 201, "{a}");
    id
}

async fn count(app: &TestApp, f: &Frame, gauge: i64, day: &str, d: i64, m: i64) -> (u16, Value) {
    app.post_as(
        As::Tech,
        &format!("/api/v1/instruments/{gauge}/standard-counts"),
        &json!({"project_id": f.project, "counted_on": day, "density_count": d, "moisture_count": m}),
    )
    .await
}

/// The four baseline counts of 2026-11-16 … 19: densities 2800, 2810, 2790, 2800 (mean
/// 2800), moisture 700 each.
async fn baseline(app: &TestApp, f: &Frame, g: i64) {
    for (day, d) in [("16", 2800), ("17", 2810), ("18", 2790), ("19", 2800)] {
        let (s, c) = count(app, f, g, &format!("2026-11-{day}"), d, 700).await;
        assert_eq!(s, 201, "{c}");
        assert_eq!(
            c["outcome"], "baseline",
            "fewer than four accepted: baseline (rule stated in judge_count)"
        );
    }
}

fn gauge_test(number: &str, ch: f64, day: &str, serial: &str) -> Value {
    let mut t = nuclear_test(number, ch, 1880.0, 11.4);
    t["tested_at"] = json!(format!("{day}T09:00:00Z"));
    t["instrument_serial"] = json!(serial);
    t["readings"]["probe_depth_mm"] = json!(200);
    t
}

async fn operator(app: &TestApp) {
    let (s, o) = app
        .post_as(
            As::Admin,
            "/api/v1/gauge-operators",
            &json!({"code": "op-1", "name": "A. Tester", "certification": "RSO-77", "expires_on": "2027-06-30"}),
        )
        .await;
    assert_eq!(s, 201, "{o}");
}

#[tokio::test]
async fn standard_counts_are_judged_and_tests_check_their_gauge() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;

    // Bad input names its field and writes nothing.
    let before = app.count("instruments").await;
    let (s, e) = app
        .post_as(
            As::Admin,
            "/api/v1/instruments",
            &json!({"kind": "nuclear_gauge", "serial": "GX-101", "calibrated_on": "2026-01-05", "due_on": "2025-12-01"}),
        )
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "due_on");
    assert_eq!(app.count("instruments").await, before);
    // A technician may not edit the register.
    let (s, _) = app
        .post_as(
            As::Tech,
            "/api/v1/instruments",
            &json!({"kind": "sand_cone", "serial": "X-1"}),
        )
        .await;
    assert_eq!(s, 403);

    let g = gauge(&app, &f, "GX-101", "2026-01-05", "2027-01-05").await;
    operator(&app).await;
    let (s, e) = count(&app, &f, g, "2026-11-16", 0, 700).await;
    assert_eq!(
        (s, e["error"]["field"].as_str()),
        (422, Some("density_count")),
        "{e}"
    );
    let (s, e) = count(&app, &f, 99_999, "2026-11-16", 2800, 700).await;
    assert_eq!(
        (s, e["error"]["field"].as_str()),
        (404, Some("instrument_id")),
        "{e}"
    );
    assert_eq!(app.count("standard_counts").await, 0);
    baseline(&app, &f, g).await;
    // 2828 = 2800 + 1.0 % and 714 = 700 + 2.0 %: on the tolerances (from memory), accepted.
    let (s, c) = count(&app, &f, g, "2026-11-20", 2828, 714).await;
    assert_eq!(s, 201, "{c}");
    assert_eq!(c["outcome"], "accepted");
    assert_eq!(c["density_mean"], 2800.0);
    assert_eq!(c["moisture_mean"], 700.0);

    let lot = format!("/api/v1/lots/{}/field-tests", f.lot);
    let (s, t) = app
        .post(&lot, &gauge_test("G-1", 1010.0, "2026-11-20", "GX-101"))
        .await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(t["instrument_check"], "in_check");
    let note = t["instrument_note"].as_str().unwrap();
    assert!(
        note.contains("calibrated 2026-01-05")
            && note.contains("standard count 2026-11-20: density 2828"),
        "{note}"
    );
    assert_eq!(t["technician"], "A. Tester");

    // No count on the 21st: refused, nothing written.
    let tests_before = app.count("field_tests").await;
    let (s, e) = app
        .post(&lot, &gauge_test("G-2", 1020.0, "2026-11-21", "GX-101"))
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "instrument_serial");
    assert!(
        e["error"]["message"]
            .as_str()
            .unwrap()
            .contains("no standard count on 2026-11-21"),
        "{e}"
    );
    // 2750 is −1.79 % of 2800: failed; the test is still refused.
    let (_, c) = count(&app, &f, g, "2026-11-21", 2750, 700).await;
    assert_eq!(c["outcome"], "failed");
    let (s, e) = app
        .post(&lot, &gauge_test("G-2", 1020.0, "2026-11-21", "GX-101"))
        .await;
    assert_eq!(s, 422);
    assert!(
        e["error"]["message"].as_str().unwrap().contains("failed"),
        "{e}"
    );
    // An unregistered tester is refused.
    let mut t = gauge_test("G-3", 1020.0, "2026-11-20", "GX-101");
    t["technician"] = json!("Somebody Else");
    let (s, e) = app.post(&lot, &t).await;
    assert_eq!((s, e["error"]["field"].as_str()), (422, Some("technician")));
    assert_eq!(app.count("field_tests").await, tests_before);

    // The clause lets such tests be recorded: marked out of check, out of the statistics,
    // blocking submission.
    let (s, p) = put_as(
        &app,
        As::Qc,
        &format!("/api/v1/clauses/{}/instrument-policy", f.clause),
        &json!({"record_out_of_check": true}),
    )
    .await;
    assert_eq!(s, 200, "{p}");
    let (s, t) = app
        .post(&lot, &gauge_test("G-2", 1020.0, "2026-11-21", "GX-101"))
        .await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(t["instrument_check"], "out_of_check");
    // A test naming an unregistered serial is not recorded, and not blocked.
    let (s, t) = app
        .post(&lot, &gauge_test("G-6", 1050.0, "2026-11-21", "NOPE-9"))
        .await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(t["instrument_check"], "not_recorded");
    // Nor is one naming no instrument.
    let mut plain = gauge_test("G-4", 1030.0, "2026-11-20", "");
    plain["readings"]
        .as_object_mut()
        .unwrap()
        .remove("gauge_serial");
    let (s, t) = app.post(&lot, &plain).await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(t["instrument_check"], "not_recorded");

    let (_, r) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    let line = |n: &str| {
        r["tests"]
            .as_array()
            .unwrap()
            .iter()
            .find(|l| l["test"]["number"] == n)
            .unwrap()
            .clone()
    };
    assert_eq!(line("G-2")["standing"], "cannot_be_judged");
    assert_eq!(
        r["verdict"]["n"], 3,
        "G-1, G-4 and G-6 count; G-2 is out of the statistics"
    );
    assert!(
        r["submit_blockers"]
            .as_array()
            .unwrap()
            .iter()
            .any(|b| b.as_str().unwrap().contains("instrument out of check")),
        "{}",
        r["submit_blockers"]
    );
    // The lot sheet shows each test's instrument standing.
    let (_, html) = crate::helpers::page(&app, &format!("/lots/{}", f.lot)).await;
    assert!(
        html.contains("instrument not recorded"),
        "lot sheet names the unrecorded instrument"
    );
    assert!(html.contains("instrument out of check"));

    // A second gauge past its calibration due date is out of check even with a count.
    let g2 = gauge(&app, &f, "GX-202", "2025-11-01", "2026-11-19").await;
    let (_, c) = count(&app, &f, g2, "2026-11-20", 2900, 720).await;
    assert_eq!(c["outcome"], "baseline");
    let (s, t) = app
        .post(&lot, &gauge_test("G-5", 1040.0, "2026-11-20", "GX-202"))
        .await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(t["instrument_check"], "out_of_check");
    assert!(
        t["instrument_note"]
            .as_str()
            .unwrap()
            .contains("was due on 2026-11-19"),
        "{t}"
    );
}

/// POSTs a field test with an `Idempotency-Key` (the site app's offline queue).
async fn post_keyed(app: &TestApp, lot: i64, key: &str, body: &Value) -> (u16, Value) {
    let r = app
        .client_as(As::Tech)
        .post(app.url(&format!("/api/v1/lots/{lot}/field-tests")))
        .header("Idempotency-Key", key)
        .json(body)
        .send()
        .await
        .expect("POST");
    let s = r.status().as_u16();
    (s, r.json().await.unwrap_or(Value::Null))
}

#[tokio::test]
async fn a_test_sent_from_the_phones_queue_checks_its_instrument_like_any_other() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let g = gauge(&app, &f, "GX-202", "2026-01-05", "2027-01-05").await;
    operator(&app).await;
    baseline(&app, &f, g).await;
    // No standard count on the 21st: refused with the key as without it, nothing written,
    // and the key not used up.
    let before = app.count("field_tests").await;
    let late = gauge_test("Q-1", 1020.0, "2026-11-21", "GX-202");
    let (s, e) = post_keyed(&app, f.lot, "queue-key-0001", &late).await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "instrument_serial");
    assert!(
        e["error"]["message"]
            .as_str()
            .unwrap()
            .contains("no standard count on 2026-11-21"),
        "{e}"
    );
    assert_eq!(app.count("field_tests").await, before);
    assert_eq!(app.count("idempotency_keys").await, 0);
    // The 19th had a (baseline) count: in check, the operator's name recorded.
    let (s, t) = post_keyed(
        &app,
        f.lot,
        "queue-key-0002",
        &gauge_test("Q-2", 1020.0, "2026-11-19", "GX-202"),
    )
    .await;
    assert_eq!(s, 201, "{t}");
    assert_eq!(t["instrument_check"], "in_check");
    assert_eq!(t["technician"], "A. Tester");
    assert!(
        t["instrument_note"]
            .as_str()
            .is_some_and(|n| n.contains("standard count 2026-11-19")),
        "{t}"
    );
}

#[tokio::test]
async fn offsets_apply_from_their_date_never_to_accepted_lots_and_the_certificate_names_the_gauge()
{
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let g = gauge(&app, &f, "GX-300", "2026-01-05", "2027-01-05").await;
    operator(&app).await;
    baseline(&app, &f, g).await;
    let (_, c) = count(&app, &f, g, "2026-11-20", 2805, 702).await;
    assert_eq!(c["outcome"], "accepted");
    let lot1 = format!("/api/v1/lots/{}/field-tests", f.lot);
    for (i, ch) in [1010.0, 1040.0, 1080.0].iter().enumerate() {
        let (s, t) = app
            .post(
                &lot1,
                &gauge_test(&format!("A-{i}"), *ch, "2026-11-20", "GX-300"),
            )
            .await;
        assert_eq!(s, 201, "{t}");
    }
    let (s, r) = app
        .post(
            &format!("/api/v1/lots/{}/submit", f.lot),
            &json!({"comment": "in"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let (s, r) = app
        .post(
            &format!("/api/v1/lots/{}/accept", f.lot),
            &json!({"comment": "ok"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let accepted_dry: Vec<f64> = r["tests"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["test"]["dry_density_kg_m3"].as_f64().unwrap())
        .collect();

    // The certificate names each test's gauge, its calibration and that day's count.
    let cert = r["certificate"]["id"].as_i64().unwrap();
    let bytes = app
        .client
        .get(app.url(&format!("/api/v1/certificates/{cert}/pdf")))
        .send()
        .await
        .unwrap()
        .bytes()
        .await
        .unwrap();
    let text = pdf_pages(&bytes)
        .join(" ")
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ");
    assert!(text.contains("GX-300"), "gauge serial on the certificate");
    assert!(
        text.contains("calibrated 2026-01-05"),
        "calibration date on the certificate"
    );
    assert!(
        text.contains("density 2805"),
        "that day's standard count on the certificate"
    );

    // A second, open lot with a test from the same gauge.
    let (s, lot2) = app
        .post(
            &format!("/api/v1/projects/{}/lots", f.project),
            &json!({"code": "LOT-2", "layer_id": f.layer, "chainage_from_m": 1100.0, "chainage_to_m": 1200.0,
                    "offset_left_m": -5.0, "offset_right_m": 5.0, "clause_id": f.clause, "lab_test_id": f.lab_test}),
        )
        .await;
    assert_eq!(s, 201, "{lot2}");
    let lot2 = lot2["id"].as_i64().unwrap();
    let raw = gauge_test("B-1", 1150.0, "2026-11-20", "GX-300");
    let (s, t) = app
        .post(&format!("/api/v1/lots/{lot2}/field-tests"), &raw)
        .await;
    assert_eq!(s, 201, "{t}");

    let pair = |g: f64, r: f64, gw: f64, ow: f64| {
        json!({"gauge_wet_density_kg_m3": g, "reference_wet_density_kg_m3": r,
        "gauge_water_content_pct": gw, "oven_water_content_pct": ow})
    };
    let path = format!("/api/v1/instruments/{g}/offsets");
    let two = json!({"source_id": f.source, "mode": "direct_transmission", "effective_on": "2026-11-01",
        "pairs": [pair(2100.0, 2080.0, 10.0, 11.0), pair(2050.0, 2040.0, 11.0, 11.5)]});
    let (s, e) = app.post(&path, &two).await;
    assert_eq!(
        (s, e["error"]["field"].as_str()),
        (422, Some("pairs")),
        "at least three pairs"
    );
    assert_eq!(app.count("gauge_offsets").await, 0);
    // Hand arithmetic: differences −20, −10, −30 → −20 kg/m³; +1.0, +0.5, +1.5 → +1.0 %.
    let three = json!({"source_id": f.source, "mode": "direct_transmission", "effective_on": "2026-11-01",
        "pairs": [pair(2100.0, 2080.0, 10.0, 11.0), pair(2050.0, 2040.0, 11.0, 11.5), pair(2120.0, 2090.0, 9.5, 11.0)]});
    let (s, o) = app.post(&path, &three).await;
    assert_eq!(s, 201, "{o}");
    assert!((o["offset"]["density_offset_kg_m3"].as_f64().unwrap() + 20.0).abs() < 1e-9);
    assert!((o["offset"]["moisture_offset_pct"].as_f64().unwrap() - 1.0).abs() < 1e-9);
    assert_eq!(
        o["applied_to"],
        json!(["B-1"]),
        "the accepted lot's tests are not touched"
    );

    // B-1 re-reduced from its raw reading: ρ = W − 20, w = ρm/(W − ρm)·100 + 1, ρd = ρ/(1 + w/100).
    let wet = raw["readings"]["wet_density_kg_m3"].as_f64().unwrap();
    let m = raw["readings"]["moisture_density_kg_m3"].as_f64().unwrap();
    let w = m / (wet - m) * 100.0 + 1.0;
    let expect_dry = (wet - 20.0) / (1.0 + w / 100.0);
    let (_, t) = app.get(&format!("/api/v1/field-tests/{}", t["id"])).await;
    assert!(
        (t["dry_density_kg_m3"].as_f64().unwrap() - expect_dry).abs() < 0.01,
        "{t}"
    );
    assert_eq!(
        t["readings"]["wet_density_kg_m3"].as_f64().unwrap(),
        wet,
        "raw reading kept"
    );
    assert_eq!(t["density_offset_kg_m3"], -20.0);
    let (_, r1) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    let still: Vec<f64> = r1["tests"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["test"]["dry_density_kg_m3"].as_f64().unwrap())
        .collect();
    assert_eq!(still, accepted_dry);
    // A new test after the offset gets it at once.
    let (s, t) = app
        .post(
            &format!("/api/v1/lots/{lot2}/field-tests"),
            &gauge_test("B-2", 1160.0, "2026-11-20", "GX-300"),
        )
        .await;
    assert_eq!(s, 201, "{t}");
    assert!((t["dry_density_kg_m3"].as_f64().unwrap() - expect_dry).abs() < 0.01);
    let (_, html) = crate::helpers::page(&app, &format!("/lots/{lot2}")).await;
    assert!(
        html.contains("gauge offsets applied: density -20.0 kg/m³"),
        "offset on the lot sheet"
    );
}

#[tokio::test]
async fn sand_cone_tests_take_the_calibration_in_force_and_overrides_need_a_reason() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    for (kind, serial, on, field, value) in [
        (
            "sand_cone",
            "SC-1",
            "2026-10-01",
            "cone_sand_mass_g",
            1650.0,
        ),
        (
            "sand_batch",
            "SB-A",
            "2026-10-01",
            "sand_density_kg_m3",
            1520.0,
        ),
        (
            "sand_batch",
            "SB-B",
            "2026-11-15",
            "sand_density_kg_m3",
            1480.0,
        ),
    ] {
        let mut body = json!({"kind": kind, "serial": serial, "calibrated_on": on});
        body[field] = json!(value);
        let (s, i) = app.post("/api/v1/instruments", &body).await;
        assert_eq!(s, 201, "{i}");
        let (s, a) = app
            .post(
                &format!("/api/v1/instruments/{}/assignments", i["id"]),
                &json!({"project_id": f.project, "from_on": on}),
            )
            .await;
        assert_eq!(s, 201, "{a}");
    }
    let cone = |n: &str, day: &str| {
        json!({"number": n, "tested_at": format!("{day}T10:00:00Z"), "technician": "B. Digger",
        "instrument_serial": "SC-1", "chainage_m": 1050.0, "offset_m": 0.0,
        "readings": {"method": "sand_cone", "mass_sand_used_g": 5000.0, "mass_wet_soil_g": 4300.0, "water_content_pct": 11.0}})
    };
    let lot = format!("/api/v1/lots/{}/field-tests", f.lot);
    // ASTM D1556 arithmetic by hand: sand in hole 5000 − 1650 = 3350 g.
    // On 2026-11-20 batch SB-B (1480 kg/m³): V = 3350 / 1.480 = 2263.51 cm³, ρ = 4300 / V = 1899.70 kg/m³.
    let (s, t) = app.post(&lot, &cone("S-1", "2026-11-20")).await;
    assert_eq!(s, 201, "{t}");
    assert!(
        (t["wet_density_kg_m3"].as_f64().unwrap() - 1899.70).abs() < 0.01,
        "{t}"
    );
    assert!(
        t["instrument_note"]
            .as_str()
            .unwrap()
            .contains("sand batch SB-B"),
        "{t}"
    );
    // On 2026-11-10 batch SB-A (1520 kg/m³): V = 2203.95 cm³, ρ = 1951.05 kg/m³.
    let (s, t) = app.post(&lot, &cone("S-2", "2026-11-10")).await;
    assert_eq!(s, 201, "{t}");
    assert!(
        (t["wet_density_kg_m3"].as_f64().unwrap() - 1951.05).abs() < 0.01,
        "{t}"
    );
    // Another sand density needs a reason.
    let mut over = cone("S-3", "2026-11-20");
    over["readings"]["sand_density_kg_m3"] = json!(1500.0);
    let (s, e) = app.post(&lot, &over).await;
    assert_eq!(
        (s, e["error"]["field"].as_str()),
        (422, Some("readings.sand_density_kg_m3")),
        "{e}"
    );
    over["calibration_override_reason"] = json!("batch re-checked on site the same morning");
    let (s, t) = app.post(&lot, &over).await;
    assert_eq!(s, 201, "{t}");
    assert!(
        t["instrument_note"]
            .as_str()
            .unwrap()
            .contains("overridden"),
        "{t}"
    );
}

#[tokio::test]
async fn the_register_imports_from_csv_all_or_nothing_and_lists_calibrations_due() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let post_csv = |body: String| {
        let c = app
            .client_as(As::Admin)
            .post(app.url("/api/v1/instruments/import"))
            .body(body);
        async move {
            let r = c.send().await.unwrap();
            let s = r.status().as_u16();
            (s, r.json::<Value>().await.unwrap_or(Value::Null))
        }
    };
    let header = "kind,serial,description,calibrated_on,due_on,cone_sand_mass_g,sand_density_kg_m3,volume_cm3\n";
    let bad = format!(
        "{header}nuclear_gauge,CSV-1,a gauge,2026-01-10,2027-01-10,,,\nnuclear_gauge,CSV-2,late,2026-03-01,2026-02-01,,,\n"
    );
    let (s, e) = post_csv(bad).await;
    assert_eq!(
        (s, e["error"]["field"].as_str()),
        (422, Some("rows[2].due_on")),
        "{e}"
    );
    assert_eq!(
        app.count("instruments").await,
        0,
        "one bad row refuses the file"
    );
    let today = liftledger::clock::date_of(&liftledger::clock::now());
    let soon = (time::OffsetDateTime::now_utc() + time::Duration::days(10))
        .date()
        .to_string();
    let good = format!(
        "{header}nuclear_gauge,CSV-1,a gauge,2026-01-10,{soon},,,\ndrive_cylinder,DC-1,cylinder,2026-01-10,2028-01-10,,,944.0\n"
    );
    let (s, r) = post_csv(good).await;
    assert_eq!(s, 201, "{r}");
    assert_eq!(r["created"], 2);
    let id = r["instruments"][0]["id"].as_i64().unwrap();
    let (s, _) = app
        .post(
            &format!("/api/v1/instruments/{id}/assignments"),
            &json!({"project_id": f.project, "from_on": today}),
        )
        .await;
    assert_eq!(s, 201);
    let (_, due) = app
        .get(&format!("/api/v1/projects/{}/calibrations-due", f.project))
        .await;
    assert_eq!(due[0]["serial"], "CSV-1", "{due}");
    assert_eq!(due[0]["days_left"], 10);
    let (_, html) = crate::helpers::page(&app, &format!("/projects/{}", f.project)).await;
    assert!(
        html.contains("CSV-1"),
        "the project home lists the calibration due"
    );
    // Every register change is audited.
    let audited: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE entity IN ('instrument', 'instrument_record', 'instrument_assignment')")
        .fetch_one(&app.sql)
        .await
        .unwrap();
    assert_eq!(audited, 2 + 2 + 1);
}

#[tokio::test]
async fn the_instrument_page_charts_counts_and_its_form_refuses_a_zero_count() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let g = gauge(&app, &f, "GX-400", "2026-01-05", "2027-01-05").await;
    baseline(&app, &f, g).await;
    // 2750 is −1.79 % of the baseline mean 2800 (hand arithmetic): failed, drawn red.
    let (_, c) = count(&app, &f, g, "2026-11-20", 2750, 700).await;
    assert_eq!(c["outcome"], "failed");
    let (s, html) = crate::helpers::page(&app, &format!("/instruments/{g}")).await;
    assert_eq!(s, 200);
    let svgs = crate::helpers::svgs(&html);
    assert_eq!(svgs.len(), 1, "one control chart");
    assert!(svgs[0].contains("tolerance-band") && svgs[0].contains("count failed"));
    assert_eq!(svgs[0].matches("<circle").count(), 5, "one mark per count");
    let (_, list) = crate::helpers::page(&app, "/instruments").await;
    assert!(list.contains("GX-400") && list.contains("2027-01-05"));

    // The form: a zero count is re-shown with its field named, and nothing is saved.
    let before = app.count("standard_counts").await;
    let form = [
        ("project_id", f.project.to_string()),
        ("counted_on", "2026-11-21".into()),
        ("density_count", "0".into()),
        ("moisture_count", "700".into()),
    ];
    let r = app
        .client_as(As::Tech)
        .post(app.url(&format!("/instruments/{g}/standard-counts")))
        .form(&form)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 422);
    assert!(
        r.text()
            .await
            .unwrap()
            .contains("density_count: 0 is not a count")
    );
    assert_eq!(app.count("standard_counts").await, before);
    // A viewer may not enter counts.
    let mut ok = form.clone();
    ok[2].1 = "2801".into();
    let r = app
        .client_as(As::Viewer)
        .post(app.url(&format!("/instruments/{g}/standard-counts")))
        .form(&ok)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 403);
    let r = app
        .client_as(As::Tech)
        .post(app.url(&format!("/instruments/{g}/standard-counts")))
        .form(&ok)
        .send()
        .await
        .unwrap();
    assert!(
        r.status().is_success() || r.status().is_redirection(),
        "{}",
        r.status()
    );
    assert_eq!(app.count("standard_counts").await, before + 1);
}
