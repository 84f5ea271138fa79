//! The stateless calculators, checked against hand calculations from the published formulas.

use serde_json::json;

use crate::helpers::spawn_app;

fn close(a: &serde_json::Value, b: f64, tol: f64) -> bool {
    a.as_f64().is_some_and(|a| (a - b).abs() <= tol)
}

#[tokio::test]
async fn field_density_nuclear_sand_cone_balloon_and_cylinder() {
    let app = spawn_app().await;
    let before = app.all_counts().await;
    // ASTM D6938: ρd = ρ − ρm; w = ρm / ρd × 100 → 2100 − 210 = 1890 kg/m³, w = 11.11 %.
    let (s, r) = app
        .post(
            "/api/v1/calc/field-density",
            &json!({"method": "nuclear", "wet_density_kg_m3": 2100.0, "moisture_density_kg_m3": 210.0,
                    "max_dry_density_kg_m3": 1950.0, "optimum_water_content_pct": 12.0}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    assert!(close(&r["dry_density_kg_m3"], 1890.0, 1e-6), "{r}");
    assert!(
        close(&r["water_content_pct"], 210.0 / 1890.0 * 100.0, 1e-6),
        "{r}"
    );
    // RC = 1890 / 1950 × 100 = 96.92 %; deviation = 11.11 − 12 = −0.89 points.
    assert!(
        close(&r["relative_compaction_pct"], 1890.0 / 1950.0 * 100.0, 1e-6),
        "{r}"
    );
    assert!(
        close(
            &r["moisture_deviation_pct"],
            210.0 / 1890.0 * 100.0 - 12.0,
            1e-6
        ),
        "{r}"
    );

    // ASTM D6938 with an oven moisture (ASTM D2216) replacing the gauge's: ρd = ρ / (1 + w/100).
    let (_, r) = app
        .post(
            "/api/v1/calc/field-density",
            &json!({"method": "nuclear", "wet_density_kg_m3": 2100.0, "moisture_density_kg_m3": 210.0,
                    "oven_water_content_pct": 12.5}),
        )
        .await;
    assert!(close(&r["dry_density_kg_m3"], 2100.0 / 1.125, 1e-6), "{r}");
    assert_eq!(r["moisture_source"], "oven");

    // ASTM D1556: sand in hole = 5000 − 1600 = 3400 g; V = 3400 g / 1.400 g/cm³ = 2428.57 cm³;
    // ρ = 4800 g / V = 1976.47 kg/m³; ρd = ρ / 1.10 = 1796.79 kg/m³.
    let (s, r) = app
        .post(
            "/api/v1/calc/field-density",
            &json!({"method": "sand_cone", "mass_sand_used_g": 5000.0, "mass_sand_in_cone_g": 1600.0,
                    "sand_density_kg_m3": 1400.0, "mass_wet_soil_g": 4800.0, "water_content_pct": 10.0}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    let rho = 4800.0 / (3400.0 / 1.4) * 1000.0;
    assert!(close(&r["wet_density_kg_m3"], rho, 1e-6), "{r}");
    assert!(close(&r["dry_density_kg_m3"], rho / 1.1, 1e-6), "{r}");
    assert!(
        r.get("relative_compaction_pct").is_none(),
        "no reference given, no RC"
    );

    // ASTM D2167: ρ = 4000 g / 2000 cm³ = 2000 kg/m³; ρd = 2000 / 1.08.
    let (_, r) = app
        .post(
            "/api/v1/calc/field-density",
            &json!({"method": "balloon", "hole_volume_cm3": 2000.0, "mass_wet_soil_g": 4000.0, "water_content_pct": 8.0}),
        )
        .await;
    assert!(close(&r["dry_density_kg_m3"], 2000.0 / 1.08, 1e-6), "{r}");

    // ASTM D2937: ρ = 1900 g / 944 cm³.
    let (_, r) = app
        .post(
            "/api/v1/calc/field-density",
            &json!({"method": "drive_cylinder", "cylinder_volume_cm3": 944.0, "mass_wet_soil_g": 1900.0, "water_content_pct": 15.0}),
        )
        .await;
    assert!(
        close(&r["wet_density_kg_m3"], 1900.0 / 944.0 * 1000.0, 1e-6),
        "{r}"
    );
    assert_eq!(app.all_counts().await, before, "calculators store nothing");
}

#[tokio::test]
async fn oversize_correction_matches_the_standard_formula() {
    let app = spawn_app().await;
    // ASTM D4718: k = 2.65 × 1000; ρd = 100 ρf k / (ρf Pc + k Pf)
    //   = 100 × 1900 × 2650 / (1900 × 20 + 2650 × 80) = 2014.0 kg/m³;  w = (12 × 80 + 2 × 20) / 100 = 10.0 %.
    let (s, r) = app
        .post(
            "/api/v1/calc/oversize",
            &json!({"fine_dry_density_kg_m3": 1900.0, "fine_water_content_pct": 12.0, "coarse_pct": 20.0,
                    "coarse_specific_gravity": 2.65, "coarse_water_content_pct": 2.0}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    assert!(close(&r["dry_density_kg_m3"], 2014.0, 1e-9), "{r}");
    assert!(close(&r["water_content_pct"], 10.0, 1e-9), "{r}");
    // Beyond the coarse-fraction limit the correction is refused, naming the field.
    let (s, e) = app
        .post(
            "/api/v1/calc/oversize",
            &json!({"fine_dry_density_kg_m3": 1900.0, "fine_water_content_pct": 12.0, "coarse_pct": 55.0,
                    "coarse_specific_gravity": 2.65, "coarse_water_content_pct": 2.0}),
        )
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "coarse_pct");
}

#[tokio::test]
async fn acceptance_quality_index_cross_checked_with_statrs() {
    let app = spawn_app().await;
    let values = [96.0, 97.0, 98.0, 95.0, 99.0];
    let (s, r) = app
        .post(
            "/api/v1/calc/acceptance",
            &json!({"rule": "quality_index", "values": values, "lower_limit": 95.0, "min_pwl": 90.0}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    // AASHTO R 9 quality index: x̄ = 97, s = √2.5, Q_L = (97 − 95)/s.
    let sd = 2.5f64.sqrt();
    let q = 2.0 / sd;
    assert_eq!(r["n"], 5);
    assert!(close(&r["mean_pct"], 97.0, 1e-9));
    assert!(close(&r["std_dev_pct"], sd, 1e-9));
    assert!(close(&r["quality_index"], q, 1e-9));
    // PWL = 100 (1 − I_x(a, a)), a = (n − 2)/2, x = 1/2 − Q √n / (2(n − 1)); I from statrs (reference library).
    let n = 5.0f64;
    let x = 0.5 - q * n.sqrt() / (2.0 * (n - 1.0));
    let a = (n - 2.0) / 2.0;
    let expected = 100.0 * (1.0 - statrs::function::beta::beta_reg(a, a, x));
    assert!(
        close(&r["pwl_pct"], expected, 1e-6),
        "pwl {} vs {expected}",
        r["pwl_pct"]
    );
    assert_eq!(r["accepted"], expected >= 90.0);
    assert!(!r["reasons"].as_array().unwrap().is_empty());

    let (_, r) = app
        .post(
            "/api/v1/calc/acceptance",
            &json!({"rule": "mean_and_min", "values": [96.0, 97.0, 93.5], "lower_limit": 95.0, "allowance": 2.0}),
        )
        .await;
    // Mean-and-minimum rule (common practice): mean 95.5 ≥ 95 and the lowest, 93.5, is above the 93.0 floor.
    assert_eq!(r["accepted"], true, "{r}");
    let (_, r) = app
        .post(
            "/api/v1/calc/acceptance",
            &json!({"rule": "every_test", "values": [96.0, 97.0, 94.9], "lower_limit": 95.0}),
        )
        .await;
    assert_eq!(r["accepted"], false, "{r}");
}

#[tokio::test]
async fn lab_curve_returns_fit_curve_and_zero_air_voids() {
    let app = spawn_app().await;
    let (s, r) = app
        .post(
            "/api/v1/calc/lab-curve",
            &json!({"specific_gravity": 2.70, "points": crate::helpers::lab_points()}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    for key in [
        "max_dry_density_kg_m3",
        "optimum_water_content_pct",
        "fit_method",
        "warnings",
        "curve",
        "zero_air_voids",
    ] {
        assert!(r.get(key).is_some(), "missing {key} in {r}");
    }
    assert!(r["curve"].as_array().unwrap().len() >= 20);
    // Zero air voids (Das, compaction chapter): ρ = Gs ρw / (1 + w Gs).
    for p in r["zero_air_voids"].as_array().unwrap() {
        let w = p["water_content_pct"].as_f64().unwrap() / 100.0;
        let expected = 2.70 * 1000.0 / (1.0 + w * 2.70);
        assert!(close(&p["dry_density_kg_m3"], expected, 1e-6), "{p}");
    }
    // Three points only: refused, naming the points.
    let (s, e) = app
        .post(
            "/api/v1/calc/lab-curve",
            &json!({"specific_gravity": 2.70, "points": [
                {"water_content_pct": 8.0, "dry_density_kg_m3": 1850.0},
                {"water_content_pct": 10.0, "dry_density_kg_m3": 1900.0},
                {"water_content_pct": 12.0, "dry_density_kg_m3": 1880.0}]}),
        )
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "points");
}
