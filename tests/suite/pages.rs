//! Pages fetched from a real server holding the demo project, checked as a reader would.

use std::collections::{BTreeSet, VecDeque};

use crate::helpers::{page, spawn_demo, svgs};

/// Internal links (`href="/…"`) of a page, without fragments.
fn links(html: &str) -> Vec<String> {
    html.split("href=\"")
        .skip(1)
        .filter_map(|s| s.split('"').next())
        .filter(|h| h.starts_with('/'))
        .map(|h| h.split('#').next().unwrap_or(h).replace("&amp;", "&"))
        .collect()
}

#[tokio::test]
async fn crawling_the_demo_finds_no_broken_page() {
    let app = spawn_demo().await;
    let mut seen = BTreeSet::new();
    let mut queue = VecDeque::from(["/".to_string()]);
    let mut pdfs = 0;
    while let Some(path) = queue.pop_front() {
        if !seen.insert(path.clone()) || seen.len() > 3000 {
            continue;
        }
        let r = app.client.get(app.url(&path)).send().await.unwrap();
        let status = r.status().as_u16();
        assert_eq!(status, 200, "{path} answered {status}");
        let kind = r
            .headers()
            .get("content-type")
            .and_then(|v| v.to_str().ok())
            .unwrap_or("")
            .to_string();
        if kind.starts_with("application/pdf") {
            pdfs += 1;
            continue;
        }
        let body = r.text().await.unwrap();
        if kind.starts_with("text/html") {
            for svg in svgs(&body) {
                roxmltree::Document::parse(svg)
                    .unwrap_or_else(|e| panic!("bad SVG on {path}: {e}"));
            }
            for l in links(&body) {
                if !seen.contains(&l) {
                    queue.push_back(l);
                }
            }
        }
    }
    // 38 lots, 3 lab curves and the certificates are all reachable from the projects list.
    assert!(
        seen.iter()
            .filter(|p| p.starts_with("/lots/") && !p.contains("entry"))
            .count()
            >= 38,
        "{seen:?}"
    );
    assert!(seen.iter().any(|p| p.starts_with("/lab-tests/")));
    // 19 certified lots plus one lot reissued as revision 2, and the Haul ramp plan's list.
    assert_eq!(pdfs, 21, "certificate and plan PDFs reachable");
    let test_pages = seen
        .iter()
        .filter(|p| p.starts_with("/field-tests/") && !p.ends_with("/retest"))
        .count();
    assert_eq!(
        test_pages, 463,
        "every test has its page (450, 10 on the Haul ramp, 3 of the instrument register)"
    );
}

#[tokio::test]
async fn lot_sheet_shows_every_test_and_the_numbers_of_the_api() {
    let app = spawn_demo().await;
    let (_, lots) = app.get("/api/v1/projects/1/lots?per_page=100").await;
    for lot in lots["lots"].as_array().unwrap().iter().take(12) {
        let id = lot["id"].as_i64().unwrap();
        let (_, report) = app.get(&format!("/api/v1/lots/{id}")).await;
        let (s, html) = page(&app, &format!("/lots/{id}")).await;
        assert_eq!(s, 200);
        assert!(html.contains(&format!("Lot {}", lot["code"].as_str().unwrap())));
        for t in report["tests"].as_array().unwrap() {
            let number = t["test"]["number"].as_str().unwrap();
            let row_start = html
                .find(&format!("id=\"test-{number}\""))
                .unwrap_or_else(|| panic!("{number} missing"));
            let row = &html[row_start..row_start + html[row_start..].find("</tr>").unwrap()];
            if let Some(rc) = t["relative_compaction_pct"].as_f64() {
                assert!(
                    row.contains(&format!("{rc:.1}")),
                    "RC {rc:.1} of {number} not in {row}"
                );
            }
            let expected = match t["standing"].as_str().unwrap() {
                "voided" => "void",
                "superseded" => "superseded",
                _ if t["passed"].as_bool().unwrap() => "pass",
                _ => "fail",
            };
            assert!(
                row.contains(&format!("data-result=\"{expected}\"")),
                "{number}: {row}"
            );
            if expected == "void" || expected == "superseded" {
                assert!(
                    row.contains("class=\"struck\""),
                    "{number} should be struck through"
                );
            }
        }
        let accepted = report["verdict"]["accepted"].as_bool().unwrap();
        let clause = report["clause"]["code"].as_str().unwrap();
        let words = if accepted {
            format!("Meets clause {clause}")
        } else {
            format!("Does not meet clause {clause}")
        };
        assert!(html.contains(&words), "verdict words for lot {id}");
        assert!(
            html.contains("Results describe the tested points only."),
            "cautions on lot {id}"
        );
        assert_eq!(svgs(&html).len(), 1, "one RC chart on lot {id}");
    }
}

#[tokio::test]
async fn lift_map_lists_every_lot_with_a_state_mark_and_zooms() {
    let app = spawn_demo().await;
    let (s, html) = page(&app, "/projects/1/map").await;
    assert_eq!(s, 200);
    // 38 lots of the main demo and 2 of the Haul ramp (src/demo/planning.rs).
    assert_eq!(html.matches("<tr data-state=").count(), 40);
    let svg = svgs(&html)[0];
    let doc = roxmltree::Document::parse(svg).unwrap();
    let links: Vec<_> = doc.descendants().filter(|n| n.has_tag_name("a")).collect();
    assert!(
        links.len() >= 38,
        "each lot is a link ({} found)",
        links.len()
    );
    for state in ["failing", "submitted", "rejected", "certified", "owed"] {
        assert!(
            html.contains(&format!("data-state=\"{state}\"")),
            "no lot in state {state}"
        );
    }
    // Zoom to the first 400 m: only the lots that reach into it remain.
    let (s, zoomed) = page(&app, "/projects/1/map?from=0%2B000&to=0%2B400").await;
    assert_eq!(s, 200);
    assert_eq!(
        zoomed.matches("<tr data-state=").count(),
        8 + 3 + 2, // and the Haul ramp's two lots (0–200 m, 200–400 m)
        "8 fill lots, 3 capping lots and 2 Haul ramp lots reach into 0+000–0+400"
    );
    let (s, _) = page(&app, "/projects/1/map?from=later").await;
    assert_eq!(s, 422);
}

/// The demo's invented names reach the pages and the API as loaded from demo-data/project.json.
#[tokio::test]
async fn demo_loads_with_its_coined_names() {
    let app = spawn_demo().await;
    let (_, project) = app.get("/api/v1/projects/1").await;
    assert_eq!(project["client"], "Orlenvade County Highways");
    let (s, html) = page(&app, "/lab-tests/1").await;
    assert_eq!(s, 200);
    assert!(html.contains("Brenquist borrow pit 2"), "source of BP2-S1");
    let (s, html) = page(&app, "/lab-tests/3").await;
    assert_eq!(s, 200);
    assert!(html.contains("Tarrowvane cutting C3"), "source of C3-M1");
}

#[tokio::test]
async fn curve_sheet_plots_lab_points_and_field_tests() {
    let app = spawn_demo().await;
    let (_, lab) = app.get("/api/v1/lab-tests/1").await;
    let (s, html) = page(&app, "/lab-tests/1").await;
    assert_eq!(s, 200);
    let mdd = lab["max_dry_density_kg_m3"].as_f64().unwrap();
    assert!(html.contains(&format!("{mdd:.0} kg/m³")), "MDD shown");
    assert!(html.contains("zero air voids"));
    assert!(html.contains("S = 90 %"));
    let svg = svgs(&html)[0];
    roxmltree::Document::parse(svg).unwrap();
    let (_, tests) = app
        .get("/api/v1/projects/1/field-tests?per_page=1000")
        .await;
    let on_curve = tests["field_tests"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|t| t["void_reason"].is_null())
        .filter(|t| t["lot_id"].as_i64().unwrap() <= 38)
        .count();
    assert!(on_curve > 0);
    assert!(html.contains("counted tests plotted"));
}

#[tokio::test]
async fn test_list_filters_and_downloads_what_it_shows() {
    let app = spawn_demo().await;
    let (_, all) = page(&app, "/projects/1/tests").await;
    let total: usize = all
        .split("id=\"total\">")
        .nth(1)
        .unwrap()
        .split('<')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    // 450 tests of the main demo, 10 of the Haul ramp (src/demo/planning.rs) and 3 of the
    // instrument register (src/demo/instruments.rs).
    assert_eq!(total, 463);
    let (_, failed) = page(&app, "/projects/1/tests?verdict=fail").await;
    let n_fail: usize = failed
        .split("id=\"total\">")
        .nth(1)
        .unwrap()
        .split('<')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!(n_fail > 0 && n_fail < total);
    let r = app
        .client
        .get(app.url("/projects/1/tests.csv?verdict=fail"))
        .send()
        .await
        .unwrap();
    assert!(
        r.headers()["content-type"]
            .to_str()
            .unwrap()
            .starts_with("text/csv")
    );
    let bytes = r.bytes().await.unwrap();
    assert_eq!(&bytes[..3], b"\xEF\xBB\xBF", "UTF-8 BOM for spreadsheets");
    let mut reader = csv::Reader::from_reader(&bytes[3..]);
    let rows: Vec<_> = reader.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), n_fail, "CSV holds exactly the filtered rows");
    assert!(rows.iter().all(|r| &r[15] == "fail"));
    let (_, ch) = page(&app, "/projects/1/tests?from=0%2B100&to=0%2B200").await;
    let n_ch: usize = ch
        .split("id=\"total\">")
        .nth(1)
        .unwrap()
        .split('<')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!(n_ch > 0 && n_ch < total);
    let (_, bad) = page(&app, "/projects/1/tests?from=soon").await;
    assert!(bad.contains("from:"), "bad filter is named");
}

#[tokio::test]
async fn site_entry_without_javascript_previews_then_saves() {
    let app = spawn_demo().await;
    // An open lot still owed tests: lot EF07-1.
    let (_, lots) = app.get("/api/v1/projects/1/lots?per_page=100").await;
    let lot = lots["lots"]
        .as_array()
        .unwrap()
        .iter()
        .find(|l| l["code"] == "EF07-1")
        .unwrap()
        .clone();
    let id = lot["id"].as_i64().unwrap();
    let (_, before) = app.get(&format!("/api/v1/lots/{id}")).await;
    let n_before = before["tests"].as_array().unwrap().len();
    let mdd = before["lab_test"]["max_dry_density_kg_m3"]
        .as_f64()
        .unwrap();
    let omc = before["lab_test"]["optimum_water_content_pct"]
        .as_f64()
        .unwrap();
    let dry = 0.985 * mdd;
    let form = |action: &str, wet: String| {
        vec![
            ("action", action.to_string()),
            ("chainage", "0+250.0".to_string()),
            ("offset_m", "1.5".to_string()),
            ("technician", "P. Site".to_string()),
            ("method", "nuclear".to_string()),
            ("wet_density", wet),
            ("moisture_density", format!("{:.1}", dry * omc / 100.0)),
        ]
    };
    let wet = format!("{:.1}", dry * (1.0 + omc / 100.0));
    let r = app
        .client
        .post(app.url(&format!("/lots/{id}/entry")))
        .form(&form("check", wet.clone()))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let html = r.text().await.unwrap();
    assert!(
        html.contains("This test passes (not saved yet)"),
        "preview shown"
    );
    assert!(html.contains("98.5 %"), "RC previewed");
    let (_, mid) = app.get(&format!("/api/v1/lots/{id}")).await;
    assert_eq!(
        mid["tests"].as_array().unwrap().len(),
        n_before,
        "check saves nothing"
    );

    // Bad value: 422, error beside the field, nothing saved.
    let r = app
        .client
        .post(app.url(&format!("/lots/{id}/entry")))
        .form(&form("save", "heavy".into()))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 422);
    let html = r.text().await.unwrap();
    let err = html
        .split("id=\"wet_density-err\" role=\"status\">")
        .nth(1)
        .unwrap()
        .split('<')
        .next()
        .unwrap();
    assert!(err.contains("not a number"), "inline error: {err}");

    let r = app
        .client
        .post(app.url(&format!("/lots/{id}/entry")))
        .form(&form("save", wet))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 303);
    assert!(
        r.headers()["location"]
            .to_str()
            .unwrap()
            .starts_with(&format!("/lots/{id}#test-"))
    );
    let (_, after) = app.get(&format!("/api/v1/lots/{id}")).await;
    assert_eq!(after["tests"].as_array().unwrap().len(), n_before + 1);
}

#[tokio::test]
async fn a_test_page_shows_readings_as_entered_and_its_history() {
    let app = spawn_demo().await;
    let (_, tests) = app
        .get("/api/v1/projects/1/field-tests?per_page=1000")
        .await;
    let voided = tests["field_tests"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["void_reason"].is_string())
        .expect("the demo has a voided test")
        .clone();
    let (s, html) = page(&app, &format!("/field-tests/{}", voided["id"])).await;
    assert_eq!(s, 200);
    assert!(html.contains(voided["void_reason"].as_str().unwrap()));
    let history = html.split("id=\"history\"").nth(1).unwrap();
    assert!(
        history.contains("<td>create</td>") && history.contains("<td>void</td>"),
        "history lists create and void"
    );
    assert!(
        history.contains("D. Achterberg (achterberg)"),
        "who voided it"
    );
    let wet = voided["readings"]["wet_density_kg_m3"].as_f64().unwrap();
    assert!(
        html.contains(&format!("{wet}")),
        "the reading exactly as entered"
    );
}

/// The state a lot shows in the lift map's lot table.
fn map_state_of(html: &str, lot_code: &str) -> String {
    let at = html
        .find(&format!(">{lot_code}</a>"))
        .unwrap_or_else(|| panic!("lot {lot_code} not on the map"));
    let row = &html[..at];
    let start = row.rfind("<tr data-state=\"").expect("row") + "<tr data-state=\"".len();
    row[start..].split('"').next().unwrap().to_string()
}

/// The map and the home page reuse judged lots while nothing changes; every kind of
/// change (a test, a void, a retest, a clause edit through a new lot curve) shows at once.
#[tokio::test]
async fn lift_map_and_home_follow_every_change_at_once() {
    use crate::helpers::{build_frame, nuclear_test, spawn_app};
    use serde_json::json;
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    let map = format!("/projects/{}/map", f.project);
    let home = format!("/projects/{}", f.project);
    let (mdd, omc) = {
        let (_, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
        (
            lab["max_dry_density_kg_m3"].as_f64().unwrap(),
            lab["optimum_water_content_pct"].as_f64().unwrap(),
        )
    };
    let (_, html) = page(&app, &map).await;
    assert_eq!(map_state_of(&html, "LOT-1"), "owed");
    // Read twice with no change between: the same answer.
    let (_, again) = page(&app, &map).await;
    assert_eq!(map_state_of(&again, "LOT-1"), "owed");

    let (s, failed) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &nuclear_test("T-1", 1010.0, 0.90 * mdd, omc),
        )
        .await;
    assert_eq!(s, 201, "{failed}");
    let (_, html) = page(&app, &map).await;
    assert_eq!(
        map_state_of(&html, "LOT-1"),
        "failing",
        "a failing test shows at once"
    );
    let (_, h) = page(&app, &home).await;
    assert!(h.contains("awaiting retest: T-1"), "home lists the failure");

    // Voiding the failure takes it off the map and off the home page's list.
    let (s, v) = app
        .post(
            &format!("/api/v1/field-tests/{}/void", failed["id"]),
            &json!({"reason": "gauge not standardised"}),
        )
        .await;
    assert_eq!(s, 200, "{v}");
    let (_, html) = page(&app, &map).await;
    assert_eq!(map_state_of(&html, "LOT-1"), "owed");
    let (_, h) = page(&app, &home).await;
    assert!(
        !h.contains("awaiting retest: T-1"),
        "home forgot the voided failure"
    );

    // Three passing tests: nothing owed any more, the lot is open and clean.
    for (i, ch) in [1020.0, 1050.0, 1080.0].iter().enumerate() {
        let (s, t) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &nuclear_test(&format!("T-{}", i + 2), *ch, 0.98 * mdd, omc),
            )
            .await;
        assert_eq!(s, 201, "{t}");
    }
    let (_, html) = page(&app, &map).await;
    assert_eq!(map_state_of(&html, "LOT-1"), "open");
    // Submitting moves it on the map too.
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{e}");
    let (_, html) = page(&app, &map).await;
    assert_eq!(map_state_of(&html, "LOT-1"), "submitted");
}

/// (number, result) of each row the test list shows, in its order.
fn listed_rows(html: &str) -> Vec<(String, String)> {
    html.split("<tr><td>")
        .skip(1)
        .map(|row| {
            let number = row.split('<').next().unwrap().to_string();
            let result = row
                .split("<span class=\"tag ")
                .nth(1)
                .and_then(|t| t.split('"').next())
                .unwrap_or_default()
                .to_string();
            (number, result)
        })
        .collect()
}

/// The first page of the list is picked by the database and only its lots are judged;
/// the CSV judges every lot. Under each filter both give the same tests, order and results.
#[tokio::test]
async fn test_list_page_agrees_with_the_whole_project_csv_under_every_filter() {
    let app = spawn_demo().await;
    let (_, layers) = app.get("/api/v1/projects/1/layers").await;
    let layer = layers[0]["id"].as_i64().unwrap();
    for q in [
        String::new(),
        "from=0%2B100&to=0%2B200".into(),
        "date_from=2026-10-01&date_to=2026-10-31".into(),
        "date_from=2026-11-30&date_to=2026-11-30".into(),
        "method=nuclear".into(),
        format!("layer={layer}"),
        "verdict=fail".into(),
    ] {
        let (s, html) = page(&app, &format!("/projects/1/tests?{q}")).await;
        assert_eq!(s, 200, "{q}");
        let shown = listed_rows(&html);
        let bytes = app
            .client
            .get(app.url(&format!("/projects/1/tests.csv?{q}")))
            .send()
            .await
            .unwrap()
            .bytes()
            .await
            .unwrap();
        let mut reader = csv::Reader::from_reader(&bytes[3..]);
        let csv: Vec<(String, String)> = reader
            .records()
            .map(|r| {
                let r = r.unwrap();
                (r[0].to_string(), r[15].to_string())
            })
            .collect();
        assert!(!csv.is_empty(), "filter {q} selects something");
        assert_eq!(shown, csv, "filter {q}");
        assert!(
            html.contains(&format!("id=\"total\">{}<", csv.len())),
            "total under {q}"
        );
    }
}
