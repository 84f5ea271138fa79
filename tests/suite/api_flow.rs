//! The whole path through the API: project → clause → source → lab test → layer → lot → tests → verdict.

use serde_json::json;

use crate::helpers::{build_frame, nuclear_test, spawn_app};

#[tokio::test]
async fn full_flow_reaches_a_verdict_that_follows_the_tests() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;

    let (s, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    assert_eq!(s, 200);
    let mdd = lab["max_dry_density_kg_m3"].as_f64().unwrap();
    let omc = lab["optimum_water_content_pct"].as_f64().unwrap();
    // The fitted peak lies between the measured points (11.4 %, 1958 kg/m³ is the highest point).
    assert!((1950.0..1975.0).contains(&mdd), "MDD {mdd}");
    assert!((10.5..12.5).contains(&omc), "OMC {omc}");
    assert_eq!(lab["status"], "active");
    assert_eq!(lab["points"].as_array().unwrap().len(), 5);

    // Lot: 100 m × 10 m = 1000 m² at one test per 500 m², minimum 3 → 3 tests required.
    let (s, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(s, 200);
    assert_eq!(lot["tests_required"], 3);
    assert_eq!(lot["tests_owed"], 3);
    assert_eq!(lot["display_state"], "owed_tests");

    // Two passing tests at 98 % of MDD, at OMC.
    for (i, ch) in [1010.0, 1040.0].iter().enumerate() {
        let (s, t) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &nuclear_test(&format!("T-{}", i + 1), *ch, 0.98 * mdd, omc),
            )
            .await;
        assert_eq!(s, 201, "{t}");
        // RC = field dry density / MDD × 100 (definition of relative compaction).
        let rc = t["relative_compaction_pct"].as_f64().unwrap();
        assert!((rc - 98.0).abs() < 0.01, "rc {rc}");
        assert_eq!(t["passed"], true);
        assert_eq!(
            t["reduction_version"],
            liftledger::reduction::REDUCTION_VERSION
        );
    }
    // A failing test at 91 %.
    let (s, failed) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &nuclear_test("T-3", 1070.0, 0.91 * mdd, omc),
        )
        .await;
    assert_eq!(s, 201);
    assert_eq!(failed["passed"], false);
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(lot["display_state"], "failing");
    assert_eq!(lot["verdict"]["accepted"], false);
    assert_eq!(lot["failing_without_retest"], json!(["T-3"]));

    // Submitting now is refused, with the failing test named.
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 409, "{e}");
    let reasons = e["error"]["reasons"].to_string();
    assert!(reasons.contains("T-3"), "{reasons}");

    // A passing retest at the same spot supersedes the failure, which stays on record.
    let mut body = nuclear_test("T-3R", 0.0, 0.975 * mdd, omc + 0.5);
    body.as_object_mut().unwrap().remove("chainage_m");
    let (s, retest) = app
        .post(
            &format!("/api/v1/field-tests/{}/retests", failed["id"]),
            &body,
        )
        .await;
    assert_eq!(s, 201, "{retest}");
    assert_eq!(
        retest["chainage_m"], 1070.0,
        "a retest defaults to the failed test's spot"
    );
    assert_eq!(retest["retest_of"], failed["id"]);

    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(lot["verdict"]["n"], 3);
    assert_eq!(lot["verdict"]["accepted"], true, "{}", lot["verdict"]);
    assert_eq!(lot["tests_owed"], 0);
    let standings: Vec<_> = lot["tests"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["standing"].clone())
        .collect();
    assert_eq!(
        standings,
        vec![
            json!("counted"),
            json!("counted"),
            json!("superseded"),
            json!("counted")
        ]
    );
    assert_eq!(lot["tests"][2]["superseded_by"], "T-3R");
    // mean of 98, 98, 97.5 (the retest replaces the failure)
    let mean = lot["verdict"]["mean_pct"].as_f64().unwrap();
    assert!(
        (mean - (98.0 + 98.0 + 97.5) / 3.0).abs() < 0.01,
        "mean {mean}"
    );

    // Voiding a test takes it out of the statistics and brings back a test owed.
    let (s, v) = app
        .post(
            &format!("/api/v1/field-tests/{}/void", lot["tests"][0]["test"]["id"]),
            &json!({"reason": "wrong layer"}),
        )
        .await;
    assert_eq!(s, 200, "{v}");
    assert_eq!(v["void_reason"], "wrong layer");
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(lot["verdict"]["n"], 2);
    assert_eq!(lot["tests_owed"], 1);
    assert_eq!(lot["tests"][0]["standing"], "voided");

    // Lists filter by chainage and page.
    let (s, list) = app
        .get(&format!(
            "/api/v1/projects/{}/field-tests?chainage_from_m=1030&chainage_to_m=1080",
            f.project
        ))
        .await;
    assert_eq!(s, 200);
    let numbers: Vec<_> = list["field_tests"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["number"].clone())
        .collect();
    assert_eq!(numbers.len(), 3, "{numbers:?}");
    let (_, page) = app
        .get(&format!(
            "/api/v1/projects/{}/field-tests?per_page=2&page=2",
            f.project
        ))
        .await;
    assert_eq!(page["field_tests"].as_array().unwrap().len(), 2);
    let (_, lots) = app
        .get(&format!("/api/v1/projects/{}/lots?state=open", f.project))
        .await;
    assert_eq!(lots["lots"].as_array().unwrap().len(), 1);
    let (_, none) = app
        .get(&format!(
            "/api/v1/projects/{}/lots?state=accepted",
            f.project
        ))
        .await;
    assert_eq!(none["lots"].as_array().unwrap().len(), 0);

    // Every change left an audit row.
    let (_, hist) = app
        .get(&format!(
            "/api/v1/field-tests/{}/history",
            lot["tests"][0]["test"]["id"]
        ))
        .await;
    let actions: Vec<_> = hist
        .as_array()
        .unwrap()
        .iter()
        .map(|h| h["action"].clone())
        .collect();
    assert_eq!(actions, vec![json!("create"), json!("void")]);
    assert_eq!(hist[1]["actor"], "T. Quality (t.qc)");
}

#[tokio::test]
async fn superseding_a_lab_curve_leaves_its_lots_on_it_until_re_pointed() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (s, new) = app
        .post(
            &format!("/api/v1/sources/{}/lab-tests", f.source),
            &json!({"code": "L2", "tested_on": "2026-11-10", "effort": "astm_d1557_4in",
                    "points": crate::helpers::lab_points(), "supersedes_lab_test_id": f.lab_test,
                    "supersede_reason": "new material face opened"}),
        )
        .await;
    assert_eq!(s, 201, "{new}");
    let (_, old) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    assert_eq!(old["status"], "superseded");
    assert_eq!(old["superseded_reason"], "new material face opened");
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(
        lot["lot"]["lab_test_id"], f.lab_test,
        "no lot moves by itself"
    );
}
