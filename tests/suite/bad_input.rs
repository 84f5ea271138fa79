//! Every route answers bad input with a 4xx naming the field, and writes nothing.

use serde_json::{Value, json};

use crate::helpers::{build_frame, nuclear_test, spawn_app};

#[tokio::test]
async fn every_route_refuses_bad_input_and_changes_nothing() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (_, t) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &nuclear_test("OK-1", 1010.0, 1900.0, 11.0),
        )
        .await;
    let test_id = t["id"].as_i64().unwrap();
    let before = app.all_counts().await;
    let p = f.project;
    let lot = f.lot;
    let good_lot = json!({"code": "LOT-9", "layer_id": f.layer, "chainage_from_m": 0.0, "chainage_to_m": 50.0,
                          "offset_left_m": -5.0, "offset_right_m": 5.0, "clause_id": f.clause, "lab_test_id": f.lab_test});
    let with = |base: &Value, key: &str, v: Value| {
        let mut b = base.clone();
        b[key] = v;
        b
    };
    let mut nuclear_bad = nuclear_test("BAD-1", 1010.0, 1900.0, 11.0);
    nuclear_bad["readings"]["wet_density_kg_m3"] = json!(-5.0);
    let mut cone_bad = nuclear_test("BAD-2", 1010.0, 1900.0, 11.0);
    cone_bad["readings"] = json!({"method": "sand_cone", "mass_sand_used_g": 1000.0, "mass_sand_in_cone_g": 1600.0,
                                  "sand_density_kg_m3": 1400.0, "mass_wet_soil_g": 4800.0, "water_content_pct": 10.0});
    let mut unknown_method = nuclear_test("BAD-3", 1010.0, 1900.0, 11.0);
    unknown_method["readings"] = json!({"method": "guesswork", "wet_density_kg_m3": 2000.0});

    // (path, body, expected status, expected field)
    let cases: Vec<(String, Value, u16, &str)> = vec![
        (
            "/api/v1/projects".into(),
            json!({"name": "No code"}),
            400,
            "code",
        ),
        (
            "/api/v1/projects".into(),
            json!({"code": "TST", "name": "Duplicate"}),
            409,
            "code",
        ),
        (
            "/api/v1/projects".into(),
            json!({"code": "X1", "name": "Units", "unit_system": "imperial"}),
            422,
            "unit_system",
        ),
        (
            "/api/v1/projects".into(),
            json!({"code": "bad code!", "name": "x"}),
            422,
            "code",
        ),
        (
            format!("/api/v1/projects/{p}/clauses"),
            json!({"code": "C9", "rc_min_pct": 250.0, "moisture_below_pct": 2.0,
            "moisture_above_pct": 2.0, "effort": "astm_d698_4in", "rule": "every_test", "min_tests_per_lot": 3}),
            422,
            "rc_min_pct",
        ),
        (
            format!("/api/v1/projects/{p}/clauses"),
            json!({"code": "C9", "rc_min_pct": 95.0, "moisture_below_pct": 2.0,
            "moisture_above_pct": 2.0, "effort": "astm_d698_4in", "rule": "mean_and_min", "min_tests_per_lot": 3}),
            422,
            "allowance_pct",
        ),
        (
            format!("/api/v1/projects/{p}/clauses"),
            json!({"code": "C9", "rc_min_pct": 95.0, "moisture_below_pct": 2.0,
            "moisture_above_pct": 2.0, "effort": "heavy-ish", "rule": "every_test", "min_tests_per_lot": 3}),
            422,
            "effort",
        ),
        (
            "/api/v1/projects/999/clauses".into(),
            json!({"code": "C9", "rc_min_pct": 95.0, "moisture_below_pct": 2.0,
            "moisture_above_pct": 2.0, "effort": "astm_d698_4in", "rule": "every_test", "min_tests_per_lot": 3}),
            404,
            "project_id",
        ),
        (
            format!("/api/v1/projects/{p}/sources"),
            json!({"code": "S9", "name": "x", "gs_fines": 4.1}),
            422,
            "gs_fines",
        ),
        (
            format!("/api/v1/projects/{p}/sources"),
            json!({"code": "S9", "name": "x", "gs_fines": "heavy"}),
            400,
            "gs_fines",
        ),
        (
            format!("/api/v1/sources/{}/lab-tests", f.source),
            json!({"code": "L9", "tested_on": "2026-11-02",
            "effort": "astm_d1557_4in", "points": [{"water_content_pct": 8.0, "dry_density_kg_m3": 1900.0}]}),
            422,
            "points",
        ),
        (
            format!("/api/v1/sources/{}/lab-tests", f.source),
            json!({"code": "L9", "tested_on": "yesterday",
            "effort": "astm_d1557_4in", "points": crate::helpers::lab_points()}),
            422,
            "tested_on",
        ),
        (
            format!("/api/v1/sources/{}/lab-tests", f.source),
            json!({"code": "L9", "tested_on": "2026-11-02",
            "effort": "astm_d1557_4in", "points": [{"water_content_pct": 8.0, "dry_density_kg_m3": 9000.0}]}),
            422,
            "points[0].dry_density_kg_m3",
        ),
        (
            "/api/v1/sources/999/lab-tests".into(),
            json!({"code": "L9", "tested_on": "2026-11-02",
            "effort": "astm_d1557_4in", "points": crate::helpers::lab_points()}),
            404,
            "source_id",
        ),
        (
            format!("/api/v1/projects/{p}/layers"),
            json!({"zone": "", "number": 2}),
            422,
            "zone",
        ),
        (
            format!("/api/v1/projects/{p}/layers"),
            json!({"zone": "Fill", "number": 1}),
            409,
            "number",
        ),
        (
            format!("/api/v1/projects/{p}/lots"),
            with(&good_lot, "chainage_to_m", json!(-3.0)),
            422,
            "chainage_to_m",
        ),
        (
            format!("/api/v1/projects/{p}/lots"),
            with(&good_lot, "offset_right_m", json!(-6.0)),
            422,
            "offset_right_m",
        ),
        (
            format!("/api/v1/projects/{p}/lots"),
            with(&good_lot, "clause_id", json!(12345)),
            422,
            "clause_id",
        ),
        (
            format!("/api/v1/projects/{p}/lots"),
            with(&good_lot, "code", json!("LOT-1")),
            409,
            "code",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            nuclear_bad.clone(),
            422,
            "readings.wet_density_kg_m3",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            cone_bad,
            422,
            "readings.mass_sand_in_cone_g",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            unknown_method,
            400,
            "readings.method",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            nuclear_test("BAD-4", 5000.0, 1900.0, 11.0),
            422,
            "chainage_m",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            nuclear_test("OK-1", 1010.0, 1900.0, 11.0),
            409,
            "number",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            with(
                &nuclear_test("BAD-5", 1010.0, 1900.0, 11.0),
                "offset_m",
                json!(40.0),
            ),
            422,
            "offset_m",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            with(
                &nuclear_test("BAD-6", 1010.0, 1900.0, 11.0),
                "tested_at",
                json!("noon"),
            ),
            422,
            "tested_at",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests"),
            with(
                &nuclear_test("BAD-7", 1010.0, 1900.0, 11.0),
                "technician",
                json!(" "),
            ),
            422,
            "technician",
        ),
        (
            "/api/v1/lots/999/field-tests".into(),
            nuclear_test("BAD-8", 1010.0, 1900.0, 11.0),
            404,
            "lot_id",
        ),
        (
            format!("/api/v1/lots/{lot}/field-tests/preview"),
            nuclear_bad,
            422,
            "readings.wet_density_kg_m3",
        ),
        (
            format!("/api/v1/field-tests/{test_id}/void"),
            json!({"reason": ""}),
            422,
            "reason",
        ),
        (
            format!("/api/v1/field-tests/{test_id}/void"),
            json!({}),
            400,
            "reason",
        ),
        (
            "/api/v1/field-tests/999/void".into(),
            json!({"reason": "x"}),
            404,
            "test_id",
        ),
        (
            format!("/api/v1/field-tests/{test_id}/retests"),
            nuclear_test("BAD-9", 1010.0, 1900.0, 11.0),
            409,
            "test_id",
        ),
        (
            format!("/api/v1/lots/{lot}/submit"),
            json!({}),
            409,
            "state",
        ),
        (
            format!("/api/v1/lots/{lot}/accept"),
            json!({}),
            409,
            "state",
        ),
        (
            format!("/api/v1/lots/{lot}/reject"),
            json!({"comment": "no"}),
            409,
            "state",
        ),
        ("/api/v1/lots/999/submit".into(), json!({}), 404, "lot_id"),
        (
            "/api/v1/calc/lab-curve".into(),
            json!({"specific_gravity": 9.0, "points": []}),
            422,
            "specific_gravity",
        ),
        (
            "/api/v1/calc/field-density".into(),
            json!({"method": "balloon", "hole_volume_cm3": 0.0,
            "mass_wet_soil_g": 4000.0, "water_content_pct": 8.0}),
            422,
            "hole_volume_cm3",
        ),
        (
            "/api/v1/calc/field-density".into(),
            json!({"method": "nuclear"}),
            400,
            "wet_density_kg_m3",
        ),
        (
            "/api/v1/calc/oversize".into(),
            json!({"fine_dry_density_kg_m3": 1900.0}),
            400,
            "fine_water_content_pct",
        ),
        (
            "/api/v1/calc/acceptance".into(),
            json!({"rule": "vibes", "values": [95.0], "lower_limit": 95.0}),
            422,
            "rule",
        ),
        (
            "/api/v1/calc/acceptance".into(),
            json!({"rule": "every_test", "values": [95.0, -1.0], "lower_limit": 95.0}),
            422,
            "values[1]",
        ),
        ("/api/v1/verify".into(), json!({}), 422, "body"),
        // A second way to name the certificate, set to null, is refused by its name.
        (
            "/api/v1/verify".into(),
            json!({"code": "7K2M-Q9XD", "pdf_base64": null}),
            400,
            "pdf_base64",
        ),
    ];
    for (path, body, status, field) in &cases {
        let (s, e) = app.post(path, body).await;
        assert_eq!(s, *status, "POST {path} {body} → {e}");
        assert_eq!(e["error"]["field"], *field, "POST {path} {body} → {e}");
        assert!(
            !e["error"]["message"].as_str().unwrap_or("").is_empty(),
            "message for {path}"
        );
    }
    // Malformed JSON and wrong shapes are 400s with a message, not 500s.
    for raw in ["{", "[]", "null", "{\"code\": 5}", ""] {
        let (s, e) = app.post_raw("/api/v1/projects", raw).await;
        assert_eq!(s, 400, "{raw} → {e}");
        assert!(e["error"]["message"].is_string());
    }
    // Bad query parameters and unknown ids on reads.
    for (path, status, field) in [
        (
            format!("/api/v1/projects/{p}/lots?state=done"),
            422,
            "state",
        ),
        (
            format!("/api/v1/projects/{p}/lots?per_page=0"),
            422,
            "per_page",
        ),
        (
            format!("/api/v1/projects/{p}/lots?chainage_from_m=abc"),
            400,
            "chainage_from_m",
        ),
        (
            format!("/api/v1/projects/{p}/field-tests?tested_from=someday"),
            422,
            "tested_from",
        ),
        ("/api/v1/lots/424242".to_string(), 404, "lot_id"),
        ("/api/v1/field-tests/424242".to_string(), 404, "test_id"),
        (
            "/api/v1/certificates/424242".to_string(),
            404,
            "certificate_id",
        ),
        ("/api/v1/nothing-here".to_string(), 404, "path"),
    ] {
        let (s, e) = app.get(&path).await;
        assert_eq!(s, status, "GET {path} → {e}");
        assert_eq!(e["error"]["field"], field, "GET {path} → {e}");
    }
    assert_eq!(
        app.all_counts().await,
        before,
        "a refused request wrote something"
    );
}
