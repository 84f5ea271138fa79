//! Lot review and end-of-lift certificates: issue, read back, reissue, verify, refuse.

use base64::Engine;
use serde_json::json;

use crate::helpers::{Frame, TestApp, build_frame, nuclear_test, pdf_pages, spawn_app};

async fn mdd_omc(app: &TestApp, f: &Frame) -> (f64, f64) {
    let (_, lab) = app.get(&format!("/api/v1/lab-tests/{}", f.lab_test)).await;
    (
        lab["max_dry_density_kg_m3"].as_f64().unwrap(),
        lab["optimum_water_content_pct"].as_f64().unwrap(),
    )
}

/// Enters `n` passing tests spread along the lot.
async fn fill(app: &TestApp, f: &Frame, n: usize, prefix: &str) {
    let (mdd, omc) = mdd_omc(app, f).await;
    for i in 0..n {
        let rc = 0.96 + 0.03 * ((i % 7) as f64) / 7.0;
        let ch = 1000.0 + 100.0 * (i as f64 + 0.5) / n as f64;
        let (s, b) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &nuclear_test(&format!("{prefix}-{i:03}"), ch, rc * mdd, omc),
            )
            .await;
        assert_eq!(s, 201, "{b}");
    }
}

async fn pdf_of(app: &TestApp, cert_id: i64) -> Vec<u8> {
    let r = app
        .client
        .get(app.url(&format!("/api/v1/certificates/{cert_id}/pdf")))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    assert_eq!(r.headers()["content-type"], "application/pdf");
    r.bytes().await.unwrap().to_vec()
}

#[tokio::test]
async fn accepting_issues_a_certificate_that_reads_back_and_reissues_as_revision_two() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    fill(&app, &f, 4, "C").await;
    let (s, r) = app
        .post(
            &format!("/api/v1/lots/{}/submit", f.lot),
            &json!({"comment": "all in"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    assert_eq!(r["lot"]["state"], "submitted");
    let (_, queue) = app
        .get(&format!("/api/v1/projects/{}/review-queue", f.project))
        .await;
    assert_eq!(queue.as_array().unwrap().len(), 1);

    let (s, r) = app
        .post(
            &format!("/api/v1/lots/{}/accept", f.lot),
            &json!({"comment": "released"}),
        )
        .await;
    assert_eq!(s, 200, "{r}");
    assert_eq!(r["display_state"], "certified");
    let cert = r["certificate"].clone();
    assert_eq!(cert["number"], "TST-EL-0001");
    assert_eq!(cert["revision"], 1);
    let rev1 = pdf_of(&app, cert["id"].as_i64().unwrap()).await;
    assert_eq!(
        hex_sha(&rev1),
        cert["sha256"].as_str().unwrap(),
        "stored hash is the SHA-256 of the bytes"
    );

    let pages = pdf_pages(&rev1);
    let all = pages.join("\n");
    for needle in [
        "LOT-1",
        "TST-EL-0001",
        "C-000",
        "C-001",
        "C-002",
        "C-003",
        "Test Link",
        "MEETS CLAUSE",
    ] {
        assert!(
            all.contains(needle),
            "{needle} missing from the certificate text"
        );
    }
    let code = cert["verification_code"].as_str().unwrap();
    for (i, p) in pages.iter().enumerate() {
        assert!(
            p.contains(code),
            "verification code missing on page {}",
            i + 1
        );
        assert!(
            p.contains(&format!("{} of {}", i + 1, pages.len())),
            "page x of y on page {}",
            i + 1
        );
    }
    assert!(all.contains("T. Engineer (t.engineer)"), "who accepted");
    assert!(all.contains("T. Quality (t.qc)"), "who submitted");

    // Verify by code, by hash and by the PDF itself.
    for body in [
        json!({"code": code}),
        json!({"sha256": cert["sha256"]}),
        json!({"pdf_base64": base64::engine::general_purpose::STANDARD.encode(&rev1)}),
    ] {
        let (s, v) = app.post("/api/v1/verify", &body).await;
        assert_eq!(s, 200);
        assert_eq!(v["found"], true, "{v}");
        assert_eq!(v["current"], true, "{v}");
    }
    // An altered PDF does not verify.
    let mut altered = rev1.clone();
    let mid = altered.len() / 2;
    altered[mid] ^= 0x20;
    let (_, v) = app
        .post(
            "/api/v1/verify",
            &json!({"pdf_base64": base64::engine::general_purpose::STANDARD.encode(&altered)}),
        )
        .await;
    assert_eq!(v["found"], false, "{v}");

    // Accepting again with nothing changed is refused.
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/accept", f.lot), &json!({}))
        .await;
    assert_eq!(s, 409, "{e}");

    // A correction after acceptance: the client engineer reopens the lot (its certificate is
    // withdrawn), the test is voided, and the next acceptance issues revision 2.
    let first_test = r["tests"][0]["test"]["id"].as_i64().unwrap();
    let (s, _) = app
        .post_as(
            crate::helpers::As::Engineer,
            &format!("/api/v1/lots/{}/reopen", f.lot),
            &json!({"reason": "a test was entered twice"}),
        )
        .await;
    assert_eq!(s, 200);
    let (s, _) = app
        .post(
            &format!("/api/v1/field-tests/{first_test}/void"),
            &json!({"reason": "entered twice"}),
        )
        .await;
    assert_eq!(s, 200);
    let (_, stale) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(stale["certificate_current"], false);
    assert_eq!(stale["lot"]["state"], "open");
    let (s, _) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200);
    let (s, r2) = app
        .post(
            &format!("/api/v1/lots/{}/accept", f.lot),
            &json!({"comment": "reissued"}),
        )
        .await;
    assert_eq!(s, 200, "{r2}");
    assert_eq!(r2["certificate"]["revision"], 2);
    assert_eq!(
        r2["certificate"]["number"], "TST-EL-0001",
        "a revision keeps its number"
    );
    let rev2 = pdf_of(&app, r2["certificate"]["id"].as_i64().unwrap()).await;
    let text2 = pdf_pages(&rev2).join("\n");
    assert!(
        text2.contains("TST-EL-0001 rev 1"),
        "revision 2 says what it supersedes"
    );
    assert!(
        text2.contains("entered twice"),
        "the voided test is listed with its reason"
    );

    // Revision 1 is still there, byte for byte, and verify calls it superseded.
    let again = pdf_of(&app, cert["id"].as_i64().unwrap()).await;
    assert_eq!(again, rev1, "an issued PDF never changes");
    let (_, v) = app.post("/api/v1/verify", &json!({"code": code})).await;
    assert_eq!(v["found"], true);
    assert_eq!(v["current"], false, "{v}");
    assert!(v["message"].as_str().unwrap().contains("WITHDRAWN"));
    let (_, list) = app
        .get(&format!("/api/v1/projects/{}/certificates", f.project))
        .await;
    assert_eq!(list.as_array().unwrap().len(), 2);

    // The pages show the same.
    let (_, html) = crate::helpers::page(&app, &format!("/certificates/{}", cert["id"])).await;
    assert!(html.contains("Withdrawn"));
    assert!(html.contains(cert["sha256"].as_str().unwrap()));
}

fn hex_sha(bytes: &[u8]) -> String {
    use sha2::Digest;
    hex::encode(sha2::Sha256::digest(bytes))
}

#[tokio::test]
async fn a_two_hundred_test_lot_flows_onto_the_expected_number_of_pages() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    fill(&app, &f, 200, "B").await;
    app.post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    let (s, r) = app
        .post(&format!("/api/v1/lots/{}/accept", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{r}");
    let bytes = pdf_of(&app, r["certificate"]["id"].as_i64().unwrap()).await;
    let pages = pdf_pages(&bytes);
    // Page 1 carries the certificate; the schedule of tests starts on page 2 at a fixed number of rows per page.
    let per_page = liftledger::pdf::table_rows_per_page(liftledger::pdf::Paper::A4);
    let expected = 1 + 200_usize.div_ceil(per_page);
    assert_eq!(pages.len(), expected, "{per_page} rows per page");
    let all = pages.join("\n");
    for i in 0..200 {
        assert!(all.contains(&format!("B-{i:03}")), "test B-{i:03} missing");
    }
    for p in &pages[1..] {
        assert!(
            p.contains("RC"),
            "table header repeated on every schedule page"
        );
    }
}

#[tokio::test]
async fn refused_transitions_answer_with_reasons_and_change_nothing() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    fill(&app, &f, 1, "R").await;
    let before = app.all_counts().await;
    // Submitting with tests owed: 3 required, 1 counted.
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 409, "{e}");
    assert!(
        e["error"]["reasons"][0].as_str().unwrap().contains("owed"),
        "{e}"
    );
    // Accepting or rejecting an open lot.
    let (s, e) = app
        .post(&format!("/api/v1/lots/{}/accept", f.lot), &json!({}))
        .await;
    assert_eq!(s, 409, "{e}");
    let (s, e) = app
        .post(
            &format!("/api/v1/lots/{}/reject", f.lot),
            &json!({"comment": "x"}),
        )
        .await;
    assert_eq!(s, 409, "{e}");
    assert_eq!(app.all_counts().await, before);

    // Rejecting without a reason, once submitted.
    fill(&app, &f, 3, "S").await;
    let (s, _) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200);
    let before = app.all_counts().await;
    let (s, e) = app
        .post(
            &format!("/api/v1/lots/{}/reject", f.lot),
            &json!({"comment": "  "}),
        )
        .await;
    assert_eq!(s, 422, "{e}");
    assert_eq!(e["error"]["field"], "comment");
    // No new tests while under review.
    let (s, e) = app
        .post(
            &format!("/api/v1/lots/{}/field-tests", f.lot),
            &nuclear_test("LATE", 1050.0, 1900.0, 11.0),
        )
        .await;
    assert_eq!(s, 409, "{e}");
    assert_eq!(app.all_counts().await, before);

    // Rejected with a reason: back to rework, then submitted again and accepted.
    let (s, r) = app
        .post(
            &format!("/api/v1/lots/{}/reject", f.lot),
            &json!({"comment": "proof-roll showed a soft spot"}),
        )
        .await;
    assert_eq!(s, 200);
    assert_eq!(r["lot"]["state"], "rejected");
    let (s, _) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200);
    let (s, r) = app
        .post(&format!("/api/v1/lots/{}/accept", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200);
    let (_, hist) = app.get(&format!("/api/v1/lots/{}/history", f.lot)).await;
    let moves: Vec<String> = hist["transitions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| {
            format!(
                "{}>{}",
                t["from_state"].as_str().unwrap(),
                t["to_state"].as_str().unwrap()
            )
        })
        .collect();
    assert_eq!(
        moves,
        [
            "open>submitted",
            "submitted>rejected",
            "rejected>submitted",
            "submitted>accepted"
        ]
    );
    assert_eq!(
        hist["transitions"][1]["comment"],
        "proof-roll showed a soft spot"
    );
    assert_eq!(r["certificate"]["revision"], 1);
}

#[tokio::test]
async fn statistical_rule_allows_submitting_with_a_low_test_and_says_so() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "quality_index", "min_pwl_pct": 70.0})).await;
    let (mdd, omc) = mdd_omc(&app, &f).await;
    for (i, rc) in [0.98, 0.99, 0.97, 0.985, 0.945, 0.975].iter().enumerate() {
        let (s, _) = app
            .post(
                &format!("/api/v1/lots/{}/field-tests", f.lot),
                &nuclear_test(&format!("Q-{i}"), 1005.0 + 15.0 * i as f64, rc * mdd, omc),
            )
            .await;
        assert_eq!(s, 201);
    }
    let (_, lot) = app.get(&format!("/api/v1/lots/{}", f.lot)).await;
    assert_eq!(lot["failing_without_retest"], json!(["Q-4"]));
    assert_eq!(lot["verdict"]["accepted"], true, "{}", lot["verdict"]);
    let (s, r) = app
        .post(&format!("/api/v1/lots/{}/submit", f.lot), &json!({}))
        .await;
    assert_eq!(s, 200, "{r}");
}
