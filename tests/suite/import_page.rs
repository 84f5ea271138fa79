//! The import page: a multipart upload checked or committed by a QC manager, refused
//! to other roles, bad forms named by field, and files larger than other bodies may be.

use reqwest::multipart::{Form, Part};
use serde_json::json;

use crate::helpers::{As, Frame, TestApp, build_frame, spawn_app};
use crate::transfer::{csv_bytes, mapping, row};

/// Saves the test mapping as "gauge export" in the frame's project.
async fn save_mapping(app: &TestApp, f: &Frame) {
    let (s, saved) = app
        .post(
            &format!("/api/v1/projects/{}/import-mappings", f.project),
            &json!({"name": "gauge export", "mapping": serde_json::to_value(mapping()).unwrap()}),
        )
        .await;
    assert_eq!(s, 201, "{saved}");
}

/// The form a browser sends: mapping, the file, and the button pressed.
fn form(mapping: &str, mode: &str, file_name: &str, bytes: Vec<u8>) -> Form {
    Form::new()
        .text("mapping", mapping.to_string())
        .part(
            "file",
            Part::bytes(bytes)
                .file_name(file_name.to_string())
                .mime_str("text/csv")
                .unwrap(),
        )
        .text("mode", mode.to_string())
}

/// POSTs a form to the import page as a persona; (status, HTML).
async fn send(app: &TestApp, who: As, f: &Frame, form: Form) -> (u16, String) {
    let r = app
        .client_as(who)
        .post(app.url(&format!("/projects/{}/import", f.project)))
        .multipart(form)
        .send()
        .await
        .expect("POST the import form");
    (r.status().as_u16(), r.text().await.unwrap())
}

/// The text of an element's content, tags stripped (the first element with `id`).
fn text_of(html: &str, id: &str) -> Option<String> {
    let start = html.find(&format!("id=\"{id}\""))?;
    let open_end = start + html[start..].find('>')? + 1;
    let tag_start = html[..start].rfind('<')?;
    let tag: String = html[tag_start + 1..]
        .chars()
        .take_while(|c| c.is_ascii_alphanumeric())
        .collect();
    let close = open_end + html[open_end..].find(&format!("</{tag}>"))?;
    Some(strip_tags(&html[open_end..close]))
}

fn strip_tags(s: &str) -> String {
    let mut out = String::new();
    let mut in_tag = false;
    for c in s.chars() {
        match c {
            '<' => in_tag = true,
            '>' => in_tag = false,
            c if !in_tag => out.push(c),
            _ => {}
        }
    }
    out.trim().to_string()
}

/// The problems table: one (row, column, value, reason) per line, as the page shows them.
fn problems(html: &str) -> Vec<[String; 4]> {
    let Some(start) = html.find("id=\"problems\"") else {
        return Vec::new();
    };
    let body = &html[start..];
    let body = &body[body.find("<tbody>").unwrap()..body.find("</tbody>").unwrap()];
    body.split("<tr>")
        .skip(1)
        .map(|tr| {
            let cells: Vec<String> = tr
                .split("<td")
                .skip(1)
                .map(|td| strip_tags(&format!("<td{td}")))
                .collect();
            assert_eq!(cells.len(), 4, "{tr}");
            [
                cells[0].clone(),
                cells[1].clone(),
                cells[2].clone(),
                cells[3].clone(),
            ]
        })
        .collect()
}

/// Six good rows of the frame's lot.
fn good_rows() -> Vec<Vec<String>> {
    (0..6)
        .map(|i| {
            row(
                &format!("P-{i:02}"),
                &format!("{}", 1010 + 10 * i),
                1900.0,
                11.0,
            )
        })
        .collect()
}

#[tokio::test]
async fn the_import_page_checks_a_file_lists_its_bad_rows_then_imports_the_fixed_file() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    save_mapping(&app, &f).await;

    let r = app
        .client
        .get(app.url(&format!("/projects/{}/import", f.project)))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 200);
    let html = r.text().await.unwrap();
    for needle in [
        "enctype=\"multipart/form-data\"",
        "<option value=\"gauge export\" selected>",
        "type=\"file\"",
        "value=\"check\"",
        "value=\"commit\"",
        "/static/import.js",
    ] {
        assert!(html.contains(needle), "the form should have {needle}");
    }
    let (_, home) = crate::helpers::page(&app, &format!("/projects/{}", f.project)).await;
    assert!(
        home.contains("id=\"import-link\""),
        "the QC manager's project home links the import page"
    );

    let before = app.count("field_tests").await;
    let audits_before = app.count("audit_log").await;
    let mut rows = good_rows();
    rows[1][4] = "9+999.000".into(); // file line 3
    rows[3][7] = "<dense>".into(); // file line 5, markup that must come back as text
    let (s, html) = send(
        &app,
        As::Qc,
        &f,
        form(
            "gauge export",
            "check",
            "site.csv",
            csv_bytes(b',', false, &rows),
        ),
    )
    .await;
    assert_eq!(s, 422, "a file with bad rows: {html}");
    let listed = problems(&html);
    assert_eq!(listed.len(), 2, "{listed:?}");
    assert_eq!(listed[0][0], "3");
    assert_eq!(listed[0][1], "Chainage");
    assert!(listed[0][3].contains("outside lot LOT-1"), "{listed:?}");
    assert_eq!(listed[1][0], "5");
    assert_eq!(listed[1][1], "Wet density");
    assert_eq!(listed[1][2], "&#60;dense&#62;", "cells are escaped");
    assert!(listed[1][3].contains("not a number"), "{listed:?}");
    assert!(!html.contains("<dense>"));
    assert_eq!(
        text_of(&html, "count-problem-rows").as_deref(),
        Some("2"),
        "{html}"
    );
    assert!(
        text_of(&html, "result-heading")
            .unwrap()
            .contains("site.csv")
    );
    assert_eq!(
        app.count("field_tests").await,
        before,
        "a check writes nothing"
    );

    // The same bad file committed is refused whole.
    let (s, html) = send(
        &app,
        As::Qc,
        &f,
        form(
            "gauge export",
            "commit",
            "site.csv",
            csv_bytes(b',', false, &rows),
        ),
    )
    .await;
    assert_eq!(s, 422);
    assert!(html.contains("The import was refused; nothing was written."));
    assert_eq!(app.count("field_tests").await, before);
    assert_eq!(app.count("audit_log").await, audits_before);

    // Fixed: the check is clean and offers the import again.
    let fixed = csv_bytes(b',', false, &good_rows());
    let (s, html) = send(
        &app,
        As::Qc,
        &f,
        form("gauge export", "check", "site.csv", fixed.clone()),
    )
    .await;
    assert_eq!(s, 200, "{html}");
    assert!(problems(&html).is_empty());
    assert_eq!(text_of(&html, "would-create").as_deref(), Some("6"));
    assert!(html.contains("choose the same file again"), "{html}");
    assert!(
        html.contains("id=\"import-file\">Import</button>"),
        "Import is the button offered next"
    );
    assert_eq!(app.count("field_tests").await, before);

    let (s, html) = send(
        &app,
        As::Qc,
        &f,
        form("gauge export", "commit", "site.csv", fixed.clone()),
    )
    .await;
    assert_eq!(s, 200, "{html}");
    assert_eq!(text_of(&html, "created").as_deref(), Some("6"));
    assert_eq!(text_of(&html, "per-lot").as_deref(), Some("LOT-1: 6"));
    assert_eq!(app.count("field_tests").await, before + 6);
    let numbers: Vec<String> =
        sqlx::query_scalar("SELECT number FROM field_tests WHERE project_id = $1 ORDER BY number")
            .bind(f.project)
            .fetch_all(&app.sql)
            .await
            .unwrap();
    assert_eq!(numbers, ["P-00", "P-01", "P-02", "P-03", "P-04", "P-05"]);
    // Checked again after the import: nothing new, and Import is not the button offered.
    let (s, html) = send(
        &app,
        As::Qc,
        &f,
        form("gauge export", "check", "site.csv", fixed),
    )
    .await;
    assert_eq!(s, 200);
    assert!(
        text_of(&html, "result-heading")
            .unwrap()
            .starts_with("Nothing new in site.csv"),
        "{html}"
    );
    assert!(html.contains("id=\"import-file\" class=\"secondary\""));
    let who: String = sqlx::query_scalar(
        "SELECT actor FROM audit_log WHERE entity = 'field_test_import' ORDER BY id DESC",
    )
    .fetch_one(&app.sql)
    .await
    .unwrap();
    assert!(
        who.contains("T. Quality"),
        "the import is audited as its user: {who}"
    );
}

#[tokio::test]
async fn the_import_page_is_refused_to_other_roles_and_they_write_nothing() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    save_mapping(&app, &f).await;
    let before = app.count("field_tests").await;
    let path = format!("/projects/{}/import", f.project);
    for who in [As::Tech, As::Viewer, As::Engineer] {
        let r = app.client_as(who).get(app.url(&path)).send().await.unwrap();
        assert_eq!(r.status().as_u16(), 403, "{who:?} opens the form");
        let (s, html) = send(
            &app,
            who,
            &f,
            form(
                "gauge export",
                "commit",
                "site.csv",
                csv_bytes(b',', false, &good_rows()),
            ),
        )
        .await;
        assert_eq!(s, 403, "{who:?} posts a file: {html}");
        assert!(html.contains("may not"), "{html}");
        let home = app
            .client_as(who)
            .get(app.url(&format!("/projects/{}", f.project)))
            .send()
            .await
            .unwrap()
            .text()
            .await
            .unwrap();
        assert!(
            !home.contains("id=\"import-link\""),
            "{who:?} sees no import link"
        );
    }
    assert_eq!(app.count("field_tests").await, before, "nothing written");
    // Anonymous callers are sent to sign in, as on every page.
    let r = app.anonymous.get(app.url(&path)).send().await.unwrap();
    assert_eq!(r.status().as_u16(), 303);
    assert!(
        r.headers()["location"]
            .to_str()
            .unwrap()
            .starts_with("/sign-in")
    );
    let r = app
        .anonymous
        .post(app.url(&path))
        .multipart(form("gauge export", "commit", "x.csv", b"a\n1\n".to_vec()))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 303);
    assert_eq!(app.count("field_tests").await, before);
}

#[tokio::test]
async fn a_bad_import_form_is_a_4xx_page_naming_the_field() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    save_mapping(&app, &f).await;
    let counts = app.all_counts().await;
    let good = || csv_bytes(b',', false, &good_rows());
    let no_file = Form::new()
        .text("mapping", "gauge export")
        .text("mode", "check");
    // A browser with no file chosen sends an empty part without a name.
    let unchosen = Form::new()
        .text("mapping", "gauge export")
        .part("file", Part::bytes(Vec::new()).file_name(""))
        .text("mode", "commit");
    let no_mode = Form::new()
        .text("mapping", "gauge export")
        .part("file", Part::bytes(good()).file_name("site.csv"));
    let extra = form("gauge export", "check", "site.csv", good()).text("lot", "LOT-1");
    let cases: Vec<(&str, Form, u16, &str)> = vec![
        ("no file part", no_file, 422, "file: choose a CSV file"),
        ("no file chosen", unchosen, 422, "file: choose a CSV file"),
        (
            "empty file",
            form("gauge export", "commit", "empty.csv", Vec::new()),
            422,
            "file: &#39;empty.csv&#39; is empty",
        ),
        (
            "unknown mapping",
            form("other export", "commit", "site.csv", good()),
            422,
            "mapping: this project has no saved mapping named &#39;other export&#39;",
        ),
        (
            "no mapping",
            form("", "commit", "site.csv", good()),
            422,
            "mapping: choose one of the project",
        ),
        (
            "wrong mode",
            form("gauge export", "save", "site.csv", good()),
            422,
            "mode: must be check or commit, not &#39;save&#39;",
        ),
        ("no mode", no_mode, 422, "mode: press Check file or Import"),
        (
            "unknown field",
            extra,
            422,
            "lot: is not a field of the import form",
        ),
    ];
    for (what, body, status, message) in cases {
        let (s, html) = send(&app, As::Qc, &f, body).await;
        assert_eq!(s, status, "{what}: {html}");
        let error = text_of(&html, "import-error").unwrap_or_else(|| panic!("{what}: {html}"));
        assert!(
            html.contains(message),
            "{what}: the page should say {message:?}, says {error:?}"
        );
        assert!(
            error.starts_with("Nothing was imported."),
            "{what}: {error}"
        );
        assert!(
            html.contains("id=\"import-form\""),
            "{what}: the form is shown again"
        );
    }
    // Not multipart at all.
    let r = app
        .client
        .post(app.url(&format!("/projects/{}/import", f.project)))
        .form(&[("mapping", "gauge export"), ("mode", "check")])
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 400);
    let html = r.text().await.unwrap();
    assert!(
        html.contains("file: the form must be sent as multipart/form-data"),
        "{html}"
    );
    assert_eq!(
        app.all_counts().await,
        counts,
        "nothing written by a bad form"
    );
}

/// A file larger than the ordinary body limit (8 MiB) and axum's buffered default (2 MiB):
/// one row repeated (skipped after the first), then a last row naming a lot that does not
/// exist, so the report shows the file was read to its end. Returns (bytes, last line).
fn large_file() -> (Vec<u8>, usize) {
    let mut bytes = csv_bytes(b',', false, &[row("X-0", "1050", 1900.0, 11.0)]);
    let line = bytes[bytes.iter().position(|b| *b == b'\n').unwrap() + 1..].to_vec();
    let mut lines = 2;
    while bytes.len() < 9 * 1024 * 1024 {
        bytes.extend_from_slice(&line);
        lines += 1;
    }
    let mut last = row("X-1", "1050", 1900.0, 11.0);
    last[3] = "LOT-9".into();
    let with_header = csv_bytes(b',', false, &[last]);
    let header_end = with_header.iter().position(|b| *b == b'\n').unwrap() + 1;
    bytes.extend_from_slice(&with_header[header_end..]);
    (bytes, lines + 1)
}

#[tokio::test]
async fn page_and_api_uploads_may_be_larger_than_other_bodies() {
    let app = spawn_app().await;
    let f = build_frame(&app, json!({"rule": "every_test"})).await;
    save_mapping(&app, &f).await;
    let (bytes, last_line) = large_file();
    let size = bytes.len() as u64;

    let (s, html) = send(
        &app,
        As::Qc,
        &f,
        form("gauge export", "check", "big.csv", bytes.clone()),
    )
    .await;
    assert_eq!(s, 422, "{}", &html[..html.len().min(2000)]);
    let listed = problems(&html);
    assert_eq!(listed.len(), 1, "{listed:?}");
    assert_eq!(listed[0][0], last_line.to_string());
    assert_eq!(listed[0][1], "Lot");
    assert!(
        html.contains(&format!("big.csv ({size} bytes")),
        "the whole file arrived"
    );

    let r = app
        .client
        .post(app.url(&format!(
            "/api/v1/projects/{}/imports?mapping=gauge%20export&file_name=big.csv",
            f.project
        )))
        .body(bytes)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 422);
    let report: serde_json::Value = r.json().await.unwrap();
    assert_eq!(report["report"]["origin"]["bytes"], size, "{report}");
    assert_eq!(
        report["report"]["problems"][0]["row"], last_line,
        "{report}"
    );
    assert_eq!(app.count("field_tests").await, 0);
}
