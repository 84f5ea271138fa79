//! The same readings sent three ways (the API's JSON, the entry form, a CSV import) are
//! stored alike and refused alike, naming the same field.

use liftledger::db;
use serde_json::{Value, json};

use crate::helpers::{Frame, TestApp, build_frame, spawn_app};

/// One test's readings as typed, by form input name (the CSV columns carry the same names).
struct Typed {
    method: &'static str,
    cells: &'static [(&'static str, &'static str)],
}

/// The readings compared: a nuclear test with only an oven water content, one with the
/// gauge's moisture density, and a rubber balloon test.
const CASES: [Typed; 3] = [
    Typed {
        method: "nuclear",
        cells: &[
            ("wet_density", "2113.5"),
            ("oven_water_content_pct", "11.2"),
        ],
    },
    Typed {
        method: "nuclear",
        cells: &[("wet_density", "2100.0"), ("moisture_density", "190.0")],
    },
    Typed {
        method: "balloon",
        cells: &[
            ("hole_volume_cm3", "1000.0"),
            ("mass_wet_soil_g", "2080.0"),
            ("water_content_pct", "9.8"),
        ],
    },
];

/// Every column of the import file, named as the form's inputs.
const COLUMNS: [&str; 14] = [
    "number",
    "tested_at",
    "technician",
    "lot",
    "chainage",
    "offset_m",
    "method",
    "wet_density",
    "moisture_density",
    "gauge_water_content_pct",
    "oven_water_content_pct",
    "hole_volume_cm3",
    "mass_wet_soil_g",
    "water_content_pct",
];

const TESTED_AT: &str = "2026-11-20T09:00:00Z";
const CHAINAGE: &str = "1+050.0";

/// The API's member of `readings` for a form input.
fn api_member(input: &str, method: &str) -> &'static str {
    match input {
        "wet_density" => "wet_density_kg_m3",
        "moisture_density" => "moisture_density_kg_m3",
        "gauge_water_content_pct" => "water_content_pct",
        "oven_water_content_pct" => "oven_water_content_pct",
        "hole_volume_cm3" => "hole_volume_cm3",
        "mass_wet_soil_g" => "mass_wet_soil_g",
        "water_content_pct" if method != "nuclear" => "water_content_pct",
        other => panic!("no API member for {other}"),
    }
}

fn api_body(number: &str, t: &Typed) -> Value {
    let mut readings = json!({"method": t.method});
    for (k, v) in t.cells {
        readings[api_member(k, t.method)] = json!(v.parse::<f64>().unwrap());
    }
    json!({"number": number, "tested_at": TESTED_AT, "technician": "A. Tester",
           "chainage_m": 1050.0, "offset_m": 1.5, "readings": readings})
}

fn form_body(number: &str, t: &Typed) -> Vec<(&'static str, String)> {
    let mut form = vec![
        ("action", "save".to_string()),
        ("number", number.to_string()),
        ("tested_at", TESTED_AT.to_string()),
        ("technician", "A. Tester".to_string()),
        ("chainage", CHAINAGE.to_string()),
        ("offset_m", "1.5".to_string()),
        ("method", t.method.to_string()),
    ];
    form.extend(t.cells.iter().map(|(k, v)| (*k, v.to_string())));
    form
}

fn csv_file(rows: &[(String, &Typed)]) -> Vec<u8> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(COLUMNS).unwrap();
    for (number, t) in rows {
        let record = COLUMNS.map(|c| match c {
            "number" => number.clone(),
            "tested_at" => TESTED_AT.to_string(),
            "technician" => "A. Tester".to_string(),
            "lot" => "LOT-1".to_string(),
            "chainage" => CHAINAGE.to_string(),
            "offset_m" => "1.5".to_string(),
            "method" => t.method.to_string(),
            c => t
                .cells
                .iter()
                .find(|(k, _)| *k == c)
                .map_or(String::new(), |(_, v)| v.to_string()),
        });
        w.write_record(record).unwrap();
    }
    w.into_inner().unwrap()
}

async fn save_mapping(app: &TestApp, f: &Frame) {
    let columns: serde_json::Map<String, Value> =
        COLUMNS.iter().map(|c| (c.to_string(), json!(c))).collect();
    let (s, v) = app
        .post(
            &format!("/api/v1/projects/{}/import-mappings", f.project),
            &json!({"name": "same", "mapping": {"columns": columns}}),
        )
        .await;
    assert_eq!(s, 201, "{v}");
}

/// (status, body text) of an entry form POST.
async fn post_form(app: &TestApp, f: &Frame, form: &[(&'static str, String)]) -> (u16, String) {
    let r = app
        .client
        .post(app.url(&format!("/lots/{}/entry", f.lot)))
        .form(form)
        .send()
        .await
        .unwrap();
    (r.status().as_u16(), r.text().await.unwrap())
}

/// (status, JSON report) of a committed CSV import.
async fn import(app: &TestApp, f: &Frame, file: Vec<u8>) -> (u16, Value) {
    let r = app
        .client
        .post(app.url(&format!(
            "/api/v1/projects/{}/imports?mapping=same&commit=true&file_name=same.csv",
            f.project
        )))
        .body(file)
        .send()
        .await
        .unwrap();
    (r.status().as_u16(), r.json().await.unwrap())
}

/// The message the form shows beside an input.
fn form_error<'h>(html: &'h str, input: &str) -> &'h str {
    html.split(&format!("id=\"{input}-err\" role=\"status\">"))
        .nth(1)
        .and_then(|rest| rest.split('<').next())
        .unwrap_or("")
}

/// What was stored and judged of a test, without what tells the three apart.
async fn stored(app: &TestApp, t: &db::field_tests::FieldTest) -> Value {
    let (s, v) = app.get(&format!("/api/v1/field-tests/{}", t.id)).await;
    assert_eq!(s, 200, "{v}");
    json!({
        "method": t.method, "chainage_m": t.chainage_m, "offset_m": t.offset_m,
        "readings": v["readings"], "wet": t.wet_density_kg_m3, "water": t.water_content_pct,
        "dry": t.dry_density_kg_m3, "moisture_source": t.moisture_source,
        "rc": v["relative_compaction_pct"], "passed": v["passed"], "reasons": v["reasons"],
    })
}

#[tokio::test]
async fn the_same_readings_are_stored_alike_through_the_api_the_form_and_an_import() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    save_mapping(&app, &f).await;
    let mut csv_rows = Vec::new();
    for (i, t) in CASES.iter().enumerate() {
        let (s, v) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &api_body(&format!("A-{i}"), t),
            )
            .await;
        assert_eq!(s, 201, "API, case {i}: {v}");
        let (s, html) = post_form(&app, &f, &form_body(&format!("F-{i}"), t)).await;
        assert_eq!(s, 303, "form, case {i}: {html}");
        csv_rows.push((format!("C-{i}"), t));
    }
    let (s, report) = import(&app, &f, csv_file(&csv_rows)).await;
    assert_eq!(s, 201, "{report}");

    let tests = db::field_tests::for_lot(&app.pool, f.lot).await.unwrap();
    assert_eq!(tests.len(), 3 * CASES.len());
    let by_number = |n: &str| tests.iter().find(|t| t.number == n).expect(n);
    for i in 0..CASES.len() {
        let api = stored(&app, by_number(&format!("A-{i}"))).await;
        let form = stored(&app, by_number(&format!("F-{i}"))).await;
        let csv = stored(&app, by_number(&format!("C-{i}"))).await;
        assert_eq!(form, api, "form and API, case {i}");
        assert_eq!(csv, api, "import and API, case {i}");
    }
    // The oven-only nuclear test: ρd = ρ / (1 + w/100) (ASTM D6938), w from the oven.
    let oven = by_number("F-0");
    assert_eq!(oven.moisture_source, "oven");
    assert!(
        (oven.dry_density_kg_m3 - 2113.5 / 1.112).abs() < 1e-9,
        "{}",
        oven.dry_density_kg_m3
    );
}

#[tokio::test]
async fn bad_readings_are_refused_alike_naming_the_same_field() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    save_mapping(&app, &f).await;
    let no_moisture = Typed {
        method: "nuclear",
        cells: &[("wet_density", "2100.0")],
    };
    let negative_wet = Typed {
        method: "nuclear",
        cells: &[("wet_density", "-5"), ("moisture_density", "190.0")],
    };
    // (readings, the form input and CSV column named, the API field named)
    let cases = [
        (
            no_moisture,
            "moisture_density",
            "readings.moisture_density_kg_m3",
        ),
        (negative_wet, "wet_density", "readings.wet_density_kg_m3"),
    ];
    let before = app.all_counts().await;
    for (i, (t, input, api_field)) in cases.iter().enumerate() {
        let (s, e) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &api_body(&format!("A-{i}"), t),
            )
            .await;
        assert_eq!(s, 422, "API, case {i}: {e}");
        assert_eq!(e["error"]["field"], *api_field, "API, case {i}: {e}");
        let message = e["error"]["message"].as_str().unwrap().to_string();
        assert!(!message.is_empty());

        let (s, html) = post_form(&app, &f, &form_body(&format!("F-{i}"), t)).await;
        assert_eq!(s, 422, "form, case {i}");
        assert_eq!(form_error(&html, input), message, "form, case {i}");

        let (s, report) = import(&app, &f, csv_file(&[(format!("C-{i}"), t)])).await;
        assert_eq!(s, 422, "import, case {i}: {report}");
        let problem = &report["report"]["problems"][0];
        assert_eq!(problem["column"], *input, "import, case {i}: {report}");
        assert_eq!(problem["reason"], message.as_str(), "import, case {i}");
    }
    assert_eq!(app.all_counts().await, before, "nothing written");
}
