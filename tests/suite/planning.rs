//! Where and what to test: lot plans (drawn, reproduced, replanned, matched), one-point
//! references, curve drift and control charts, through the API and the pages, on both engines.

use serde_json::{Value, json};

use crate::helpers::{
    As, Frame, TestApp, answer, build_frame, nuclear_test, page, pdf_pages, spawn_app, svgs,
};

async fn mdd_omc(app: &TestApp, lab: i64) -> (f64, f64) {
    let (_, l) = app.get(&format!("/api/v1/lab-tests/{lab}")).await;
    (
        l["max_dry_density_kg_m3"].as_f64().unwrap(),
        l["optimum_water_content_pct"].as_f64().unwrap(),
    )
}

async fn test_at(app: &TestApp, f: &Frame, number: &str, ch: f64, off: f64, rc: f64) -> Value {
    let (mdd, omc) = mdd_omc(app, f.lab_test).await;
    let mut body = nuclear_test(number, ch, rc * mdd, omc);
    body["offset_m"] = json!(off);
    let (s, t) = app
        .post(&format!("/api/v1/lots/{}/field-tests", f.lot), &body)
        .await;
    assert_eq!(s, 201, "{t}");
    t
}

fn locations(plan: &Value) -> Vec<(f64, f64)> {
    plan["locations"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| {
            (
                l["chainage_m"].as_f64().unwrap(),
                l["offset_m"].as_f64().unwrap(),
            )
        })
        .collect()
}

#[tokio::test]
async fn a_plan_is_drawn_from_its_seed_replanned_on_record_and_tests_are_matched() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let url = format!("/api/v1/lots/{}/plan", f.lot);
    let body = json!({"seed": 977, "edge_m": 0.5, "exclusions": [{"chainage_from_m": 1040.0, "chainage_to_m": 1045.0}]});
    let (s, p1) = app.post(&url, &body).await;
    assert_eq!(s, 201, "{p1}");
    // Lot 1000–1100 × 10 m = 1000 m², one test per 500 m², at least 3 → 3 locations
    // (clause frequency, hand arithmetic); one per 33 m sub-lot of 1000.5–1099.5 (ASTM D3665).
    let locs = locations(&p1);
    assert_eq!(locs.len(), 3);
    for (k, (ch, off)) in locs.iter().enumerate() {
        let start = 1000.5 + 33.0 * k as f64;
        assert!(
            *ch >= start && *ch < start + 33.0,
            "{ch} outside sub-lot {k}"
        );
        assert!(!(1040.0..=1045.0).contains(ch), "{ch} in the exclusion");
        assert!((-4.5..=4.5).contains(off), "{off} inside the edge distance");
    }
    assert_eq!(p1["current"]["seed"], 977);
    assert_eq!(p1["current"]["revision"], 1);

    // A replan without a reason is refused and writes nothing.
    let (s, e) = app.post(&url, &body).await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "reason");
    assert_eq!(app.count("test_plans").await, 1);

    // Replanning with the same seed reproduces the plan; the first stays on record.
    let mut again = body.clone();
    again["reason"] = json!("culvert moved; same seed to check reproduction");
    let (s, p2) = app.post(&url, &again).await;
    assert_eq!(s, 201, "{p2}");
    assert_eq!(locations(&p2), locs, "same seed, same plan");
    assert_eq!(p2["current"]["revision"], 2);
    let history = p2["history"].as_array().unwrap();
    assert_eq!(history.len(), 2);
    assert!(history[1]["superseded_at"].is_string());
    assert_eq!(
        history[1]["superseded_reason"],
        "culvert moved; same seed to check reproduction"
    );

    // One test 1 m off its location, one 30 m away (tolerance 5 m, the default clause term).
    let (c0, o0) = locs[0];
    test_at(&app, &f, "P-1", c0 + 0.6, o0 + 0.8, 0.97).await; // hand: √(0.36+0.64) = 1.0 m
    test_at(&app, &f, "P-2", locs[1].0 + 30.0, 0.0, 0.97).await;
    test_at(&app, &f, "P-3", locs[2].0, locs[2].1, 0.97).await;
    let (_, v) = app.get(&url).await;
    let m = v["matches"].as_array().unwrap();
    assert_eq!(m[0]["number"], "P-1");
    assert!((m[0]["distance_m"].as_f64().unwrap() - 1.0).abs() < 1e-6);
    assert_eq!(m[0]["misplaced"], false);
    assert_eq!(m[1]["misplaced"], true);

    // Flagged on the lot sheet and on the certificate.
    let (s, html) = page(&app, &format!("/lots/{}", f.lot)).await;
    assert_eq!(s, 200);
    assert_eq!(
        html.matches("not at a planned location").count(),
        1,
        "only P-2 is flagged"
    );
    let (s, r) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{r}");
    let (s, r) = app
        .post_as(
            As::Engineer,
            &format!("/api/v1/lots/{}/accept", f.lot),
            &json!({}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let cert = r["certificate"]["id"].as_i64().unwrap();
    let pdf = app
        .client
        .get(app.url(&format!("/api/v1/certificates/{cert}/pdf")))
        .send()
        .await
        .unwrap();
    let text = pdf_pages(&pdf.bytes().await.unwrap()).join(" ");
    let text = text.split_whitespace().collect::<Vec<_>>().join(" "); // notes wrap in the PDF
    assert_eq!(
        text.matches("not at a planned location").count(),
        1,
        "certificate flags P-2: {text}"
    );

    // An accepted lot is frozen: no replan.
    let (s, e) = app.post(&url, &again).await;
    assert_eq!(s, 409, "{e}");
}

#[tokio::test]
async fn the_plan_page_lists_locations_and_the_pdf_reads_back() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let (s, html) = page(&app, &format!("/lots/{}/plan", f.lot)).await;
    assert_eq!(s, 200);
    assert!(html.contains("id=\"no-plan\""));
    // The page's form draws the plan.
    let r = app
        .client
        .post(app.url(&format!("/lots/{}/plan", f.lot)))
        .form(&[
            ("edge_m", "0.5"),
            ("exclusions", "1010-1020"),
            ("seed", "31"),
        ])
        .send()
        .await
        .unwrap();
    assert!(
        r.status().is_success() || r.status().is_redirection(),
        "{}",
        r.status()
    );
    let (_, v) = app.get(&format!("/api/v1/lots/{}/plan", f.lot)).await;
    assert_eq!(v["current"]["seed"], 31);
    let (_, html) = page(&app, &format!("/lots/{}/plan", f.lot)).await;
    assert_eq!(html.matches("data-sublot=").count(), 3);
    // A bad band is re-shown with its field named and nothing written.
    let r = app
        .client
        .post(app.url(&format!("/lots/{}/plan", f.lot)))
        .form(&[("edge_m", "0.5"), ("exclusions", "1010"), ("reason", "x")])
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 422);
    assert!(r.text().await.unwrap().contains("exclusions"));
    assert_eq!(app.count("test_plans").await, 1);

    let r = app
        .client
        .get(app.url(&format!("/lots/{}/plan.pdf", f.lot)))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    assert_eq!(r.headers()["content-type"], "application/pdf");
    let text = pdf_pages(&r.bytes().await.unwrap()).join("\n");
    assert!(text.contains("Test locations: lot LOT-1"), "{text}");
    assert!(text.contains("seed 31"), "{text}");
    let first = v["locations"][0]["chainage_m"].as_f64().unwrap();
    // The project's chainage style (km+metre, 3 decimals): e.g. 1+012.345.
    let km = format!(
        "{}+{:07.3}",
        (first / 1000.0).floor() as i64,
        first % 1000.0
    );
    assert!(text.contains(&km), "{km} in {text}");
}

#[tokio::test]
async fn plan_refusals_name_their_field() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let url = format!("/api/v1/lots/{}/plan", f.lot);
    for (body, field) in [
        (json!({"edge_m": 5.0}), "edge_m"), // 10 m wide lot less 2 × 5 m: no room
        (
            json!({"exclusions": [{"chainage_from_m": 2000.0, "chainage_to_m": 2010.0}]}),
            "exclusions[0]",
        ),
        (
            json!({"exclusions": [{"chainage_from_m": 1000.0, "chainage_to_m": 1100.0}]}),
            "exclusions",
        ),
        (json!({"seed": -1}), "seed"),
    ] {
        let (s, e) = app.post(&url, &body).await;
        assert!(s == 422 || s == 400, "{body}: {e}");
        assert!(
            e["error"]["field"]
                .as_str()
                .unwrap()
                .starts_with(field.split('[').next().unwrap()),
            "{body}: {e}"
        );
    }
    assert_eq!(app.count("test_plans").await, 0);
}

async fn second_curve(app: &TestApp, f: &Frame) -> i64 {
    // A denser, drier member of the same family (same source, same effort).
    let (s, lab) = app
        .post(
            &format!("/api/v1/sources/{}/lab-tests", f.source),
            &json!({"code": "L2", "tested_on": "2026-11-03", "effort": "astm_d1557_4in", "points": [
                {"water_content_pct": 5.8, "dry_density_kg_m3": 1990.0},
                {"water_content_pct": 7.7, "dry_density_kg_m3": 2050.0},
                {"water_content_pct": 9.4, "dry_density_kg_m3": 2080.0},
                {"water_content_pct": 11.2, "dry_density_kg_m3": 2052.0},
                {"water_content_pct": 13.1, "dry_density_kg_m3": 1990.0}]}),
        )
        .await;
    assert_eq!(s, 201, "{lab}");
    lab["id"].as_i64().unwrap()
}

#[tokio::test]
async fn a_one_point_check_is_its_tests_reference_where_the_clause_allows() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    second_curve(&app, &f).await;
    let t = test_at(&app, &f, "Q-1", 1020.0, 0.0, 0.97).await;
    let tid = t["id"].as_i64().unwrap();
    let url = format!("/api/v1/sources/{}/one-point-checks", f.source);
    // 2016 kg/m³ wet at 10 % → ρd = 2016/1.10 = 1832.7 (hand): below L1 at 10 % (≈1940), outside.
    let outside = json!({"code": "OP-0", "tested_on": "2026-11-20", "effort": "astm_d1557_4in",
        "wet_density_kg_m3": 2016.0, "water_content_pct": 10.0});
    let (s, e) = app.post(&url, &outside).await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "water_content_pct");
    assert!(
        e["error"]["message"]
            .as_str()
            .unwrap()
            .contains("run a full curve"),
        "{e}"
    );
    assert_eq!(app.count("one_point_checks").await, 0);

    // 2.20 t/m³ wet at 9 % → ρd = 2018.3 kg/m³, between the curves at 9 %, dry of both optima.
    let body = json!({"code": "OP-1", "tested_on": "2026-11-20", "effort": "astm_d1557_4in",
        "wet_density_kg_m3": 2200.0, "water_content_pct": 9.0, "field_test_id": tid});
    let (s, a) = app.post(&url, &body).await;
    assert_eq!(s, 201, "{a}");
    let c = &a["check"];
    assert!((c["dry_density_kg_m3"].as_f64().unwrap() - 2200.0 / 1.09).abs() < 1e-9);
    let (mdd1, omc1) = mdd_omc(&app, f.lab_test).await;
    let (mdd, omc) = (
        c["max_dry_density_kg_m3"].as_f64().unwrap(),
        c["optimum_water_content_pct"].as_f64().unwrap(),
    );
    let fr = c["fraction"].as_f64().unwrap();
    assert!(fr > 0.0 && fr < 1.0);
    assert!(mdd > mdd1 && mdd < 2090.0 && omc < omc1, "{a}");
    assert_eq!(a["lower_curve"], "L1");
    assert_eq!(a["upper_curve"], "L2");

    // The clause does not allow it yet: the test is still judged on the lot's curve.
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(
        lot["tests"][0]["reference_mdd_kg_m3"].as_f64().unwrap(),
        mdd1,
        "{lot}"
    );
    let terms = json!({"plan_tolerance_m": 5.0, "one_point_allowed": true, "one_point_dry_window_pct": 4.0});
    let (s, r) = answer(
        app.client
            .put(app.url(&format!("/api/v1/clauses/{}/planning-terms", f.clause)))
            .json(&terms),
    )
    .await;
    assert_eq!(s, 200, "{r}");
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    let line = &lot["tests"][0];
    assert_eq!(line["reference_mdd_kg_m3"].as_f64().unwrap(), mdd);
    assert_eq!(line["one_point_code"], "OP-1");
    // RC against the one-point reference: ρd / MDD × 100 (ASTM D1557 definition of RC).
    let dry = line["test"]["dry_density_kg_m3"].as_f64().unwrap();
    assert!((line["relative_compaction_pct"].as_f64().unwrap() - dry / mdd * 100.0).abs() < 1e-9);
    let (_, html) = page(&app, &format!("/lots/{}", f.lot)).await;
    assert!(html.contains("reference: one-point check OP-1"));
    let (s, html) = page(&app, &format!("/sources/{}/family", f.source)).await;
    assert_eq!(s, 200);
    assert_eq!(svgs(&html).len(), 1);
    roxmltree::Document::parse(svgs(&html)[0]).expect("family chart is well-formed");
    assert!(html.contains("OP-1"));

    // A second check for the same test is refused.
    let mut dup = body.clone();
    dup["code"] = json!("OP-2");
    let (s, e) = app.post(&url, &dup).await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(app.count("one_point_checks").await, 1);
}

#[tokio::test]
async fn drift_is_flagged_and_control_charts_break_a_rule() {
    let app = spawn_app().await;
    let f = build_frame(
        &app,
        json!({"rule": "every_test", "area_per_test_m2": 100.0}),
    )
    .await;
    let rcs = [0.96, 0.962, 0.958, 0.961, 0.959, 0.96, 1.006, 1.009, 1.013];
    for (i, rc) in rcs.iter().enumerate() {
        test_at(
            &app,
            &f,
            &format!("D-{i}"),
            1005.0 + 10.0 * i as f64,
            0.0,
            *rc,
        )
        .await;
    }
    let (s, d) = app
        .get(&format!("/api/v1/lab-tests/{}/drift", f.lab_test))
        .await;
    assert_eq!(s, 200, "{d}");
    let rules: Vec<&str> = d["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["rule"].as_str().unwrap())
        .collect();
    // Stated rules (reduction::drift): RC > 100 % in 2 of the last 3; at OMC, ρd above the
    // curve by more than 2 % (RC 100.6–101.3 % at OMC is not, so only the RC rule fires).
    assert!(rules.contains(&"rc_over100"), "{d}");
    assert_eq!(
        d["test_numbers"][rules.iter().position(|r| *r == "rc_over100").unwrap()],
        json!(["D-6", "D-7", "D-8"])
    );
    let (_, html) = page(&app, &format!("/lab-tests/{}", f.lab_test)).await;
    assert!(html.contains("material may have changed: new curve or one-point check due"));
    let (_, html) = page(&app, &format!("/projects/{}", f.project)).await;
    assert!(
        html.contains("material may have changed"),
        "project home warns"
    );

    let (s, charts) = app
        .get(&format!(
            "/api/v1/projects/{}/control-charts?by=source&measure=rc",
            f.project
        ))
        .await;
    assert_eq!(s, 200, "{charts}");
    let c = &charts[0]["chart"];
    // Limits against hand arithmetic of the values returned: x̄ ± 2.66·MR̄ (NIST/SEMATECH 6.3.2.2).
    let vals: Vec<f64> = c["values"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let mean = vals.iter().sum::<f64>() / vals.len() as f64;
    let mr = vals.windows(2).map(|w| (w[1] - w[0]).abs()).sum::<f64>() / (vals.len() - 1) as f64;
    assert!((c["ucl"].as_f64().unwrap() - (mean + 2.66 * mr)).abs() < 1e-9);
    assert!((c["mr_ucl"].as_f64().unwrap() - 3.267 * mr).abs() < 1e-9);
    let broke: Vec<&str> = c["signals"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["rule"].as_str().unwrap())
        .collect();
    assert!(broke.contains(&"beyond_three_sigma"), "{c}");

    let (s, html) = page(
        &app,
        &format!(
            "/projects/{}/control-charts?by=technician&measure=moisture",
            f.project
        ),
    )
    .await;
    assert_eq!(s, 200);
    for svg in svgs(&html) {
        roxmltree::Document::parse(svg).expect("chart SVG is well-formed");
    }
    let (_, html) = page(&app, &format!("/projects/{}/control-charts", f.project)).await;
    assert!(html.contains("1 point beyond 3σ"));
    let csv = app
        .client
        .get(app.url(&format!(
            "/projects/{}/control-charts.csv?by=layer",
            f.project
        )))
        .send()
        .await
        .unwrap();
    assert!(
        csv.headers()["content-type"]
            .to_str()
            .unwrap()
            .starts_with("text/csv")
    );
    let text = csv.text().await.unwrap();
    let mut rd = csv::Reader::from_reader(text.as_bytes());
    assert_eq!(rd.records().count(), rcs.len());
    assert!(text.contains("1 point beyond 3σ"));
}
