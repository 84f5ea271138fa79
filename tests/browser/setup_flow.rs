//! The whole start of a contract in the browser, on an empty database, with no API
//! call: the first admin makes the project and its people, the QC manager sets up
//! a clause, a source, a mould, a lab curve from raw masses, a layer and its lots,
//! and a technician enters the first test.

use crate::app::DemoApp;
use crate::pages::{mark_page, wait_for_new_page};
use crate::webdriver::{self, Driver, Session};

/// Fills inputs by id (typing, as a person does) and picks select options by value.
async fn fill(b: &Session, fields: &[(&str, &str)]) {
    for (id, value) in fields {
        let el = b.find(&format!("#{}", css_id(id))).await;
        if el.attr("type").await.as_deref() == Some("date") {
            // A date input is typed in the browser's locale; set the ISO value the form posts.
            b.script(
                "document.getElementById(arguments[0]).value = arguments[1]; return true;",
                vec![serde_json::json!(id), serde_json::json!(value)],
            )
            .await;
        } else if el.prop("tagName").await.as_str() == Some("SELECT") {
            b.find(&format!("#{} option[value=\"{value}\"]", css_id(id)))
                .await
                .click()
                .await;
        } else {
            el.type_over(value).await;
        }
    }
}

/// Ids are plain names here; this only guards the selector.
fn css_id(id: &str) -> String {
    id.replace('.', "\\.")
}

/// Clicks a button and waits for the page the browser goes to.
async fn press(b: &Session, css: &str) {
    mark_page(b).await;
    b.find(css).await.click().await;
    wait_for_new_page(b).await;
}

async fn sign_in(b: &Session, app: &DemoApp, user: &str, password: &str) {
    b.goto(&app.url("/sign-in")).await;
    b.wait_for("#sign-in-form").await;
    fill(b, &[("username", user), ("password", password)]).await;
    press(b, "#sign-in").await;
    assert!(
        !b.current_path().await.starts_with("/sign-in"),
        "{user} signed in"
    );
    // A password someone else chose (the first admin's printed one) is changed first.
    if b.try_find("#must-change").await.is_some() {
        let own = format!("{password}-own-choice");
        fill(
            b,
            &[
                ("current_password", password),
                ("new_password", &own),
                ("confirm_password", &own),
            ],
        )
        .await;
        press(b, "#change-password").await;
        assert!(
            b.try_find("#must-change").await.is_none(),
            "{user} changed the password"
        );
        b.goto(&app.url("/")).await;
    }
}

async fn shot(b: &Session, step: &str) {
    b.save_screenshots(&crate::app::shots_dir(), &format!("first-contract-{step}"))
        .await;
}

/// The admin's part: project, two people, their roles. Returns the project's path.
async fn admin_starts(b: &Session, app: &DemoApp, password: &str) -> String {
    sign_in(b, app, "admin", password).await;
    press(b, "#new-project").await;
    fill(
        b,
        &[
            ("code", "QV-2"),
            ("name", "Quarrendel Valley bypass"),
            ("contract", "QVB/2"),
            ("client", "Quarrendel Roads Board"),
            ("contractor", "Halvering Earthworks"),
            ("unit_system", "si"),
            ("chainage_style", "km_metre"),
        ],
    )
    .await;
    press(b, "#save-button").await;
    let setup = b.current_path().await;
    assert!(
        setup.ends_with("/setup"),
        "a new project opens its set-up page, not {setup}"
    );
    for (user, name, pass) in [
        ("m.tessaly", "M. Tessaly", "qc-first-pass-1"),
        ("j.orrin", "J. Orrin", "tech-first-pass-1"),
    ] {
        b.goto(&app.url("/setup/users/new")).await;
        fill(
            b,
            &[
                ("username", user),
                ("display_name", name),
                ("password", pass),
            ],
        )
        .await;
        press(b, "#save-button").await;
        assert_eq!(b.current_path().await, "/setup/users");
    }
    for (user, role) in [("m.tessaly", "qc_manager"), ("j.orrin", "technician")] {
        b.goto(&app.url(&format!("{setup}/members/new"))).await;
        fill(b, &[("username", user), ("role", role)]).await;
        press(b, "#save-button").await;
    }
    let people = b.find("#people").await.text().await;
    assert!(
        people.contains("M. Tessaly (m.tessaly), QC manager"),
        "{people}"
    );
    shot(b, "1-admin").await;
    setup.trim_end_matches("/setup").to_string()
}

/// The QC manager's frame: clause, source, mould, layer.
async fn qc_frame(b: &Session, app: &DemoApp, project: &str) {
    b.goto(&app.url(project)).await;
    press(b, "#setup-link").await;
    let steps: [(&str, Vec<(&str, &str)>); 4] = [
        (
            "clauses/new",
            vec![
                ("code", "4.2.1"),
                ("title", "Embankment fill"),
                ("effort", "astm_d1557_4in"),
                ("rc_min_pct", "95"),
                ("moisture_below_pct", "2"),
                ("moisture_above_pct", "2"),
                ("rule", "every_test"),
                ("min_tests_per_lot", "3"),
            ],
        ),
        (
            "sources/new",
            vec![
                ("code", "BP-1"),
                ("name", "Fennock borrow pit"),
                ("gs_fines", "2.68"),
            ],
        ),
        (
            "moulds/new",
            vec![
                ("code", "M-4"),
                ("volume_cm3", "944.0"),
                ("mass_g", "4200"),
                ("calibrated_on", "2026-11-02"),
            ],
        ),
        (
            "layers/new",
            vec![
                ("zone", "Embankment fill"),
                ("number", "1"),
                ("thickness_mm", "200"),
            ],
        ),
    ];
    for (path, fields) in steps {
        b.goto(&app.url(&format!("{project}/setup/{path}"))).await;
        b.wait_for("#setup-form").await;
        fill(b, &fields).await;
        press(b, "#save-button").await;
        assert!(b.current_path().await.ends_with("/setup"), "{path} saved");
    }
}

/// The lab curve from raw masses, previewed (live and by button) then saved.
async fn qc_lab_curve(b: &Session) {
    press(b, "#sources a[href$=\"/lab-curves/new\"]").await;
    fill(
        b,
        &[
            ("code", "LC-01"),
            ("tested_on", "2026-11-20"),
            ("effort", "astm_d1557_4in"),
            ("mould", "M-4"),
        ],
    )
    .await;
    let specimens = [
        ["6050", "20.0", "120.0", "112.0"],
        ["6150", "20.0", "120.0", "111.0"],
        ["6230", "20.0", "120.0", "110.0"],
        ["6220", "20.0", "120.0", "109.0"],
        ["6160", "20.0", "120.0", "108.0"],
    ];
    for (i, [total, tare, wet, dry]) in specimens.iter().enumerate() {
        fill(
            b,
            &[
                (&format!("p{i}_mass_mold_and_soil_g"), total),
                (&format!("p{i}_mass_tare_g"), tare),
                (&format!("p{i}_mass_wet_g"), wet),
                (&format!("p{i}_mass_dry_g"), dry),
            ],
        )
        .await;
    }
    // The live preview (the page's script) draws the curve while typing.
    b.wait_until("the live curve preview", async || {
        b.try_find("#preview #pv-mdd").await.map(|_| ())
    })
    .await;
    press(b, "#preview-button").await;
    let mdd = b.find("#pv-mdd").await.text().await;
    assert!(mdd.ends_with("kg/m³"), "{mdd}");
    shot(b, "2-lab-preview").await;
    press(b, "#save-button").await;
    assert!(
        b.current_path().await.starts_with("/lab-tests/"),
        "the curve sheet opens"
    );
}

/// The layer split into lots, previewed on the lift map, then saved.
async fn qc_lots(b: &Session, app: &DemoApp, project: &str) {
    b.goto(&app.url(&format!("{project}/setup/lots/split")))
        .await;
    let layer = b
        .find("#layer_id option:not([value=\"\"])")
        .await
        .attr("value")
        .await
        .expect("layer");
    let clause = b
        .find("#clause_id option:not([value=\"\"])")
        .await
        .attr("value")
        .await
        .expect("clause");
    let curve = b
        .find("#lab_test_id option:not([value=\"\"])")
        .await
        .attr("value")
        .await
        .expect("curve");
    fill(
        b,
        &[
            ("layer_id", &layer),
            ("chainage_from_m", "0+000"),
            ("chainage_to_m", "0+300"),
            ("every_m", "100"),
            ("code_prefix", "EF1-"),
            ("offset_left_m", "-7.5"),
            ("offset_right_m", "7.5"),
            ("clause_id", &clause),
            ("lab_test_id", &curve),
        ],
    )
    .await;
    press(b, "#preview-button").await;
    assert!(
        b.find("#split-plan h2")
            .await
            .text()
            .await
            .starts_with("3 lots planned")
    );
    b.find("#split-map svg").await;
    shot(b, "3-split-preview").await;
    press(b, "#save-button").await;
    assert!(
        b.current_path().await.ends_with("/map"),
        "the lift map opens"
    );
}

/// The technician's first test on lot EF1-2, seen on the lift map and the lot sheet.
async fn tech_first_test(b: &Session, app: &DemoApp, project: &str) {
    b.goto(&app.url(&format!("{project}/map"))).await;
    let link = b.find("#lot-table a[href^=\"/lots/\"]").await;
    let href = link.attr("href").await.expect("lot link");
    b.goto(&app.url(&format!("{href}/entry"))).await;
    b.wait_for("#entry-form").await;
    fill(
        b,
        &[
            ("chainage", "0+050"),
            ("offset_m", "1.5"),
            ("technician", "J. Orrin"),
            ("wet_density", "2080"),
            ("gauge_water_content_pct", "10.5"),
        ],
    )
    .await;
    let save = b.find("#entry-form button[value=\"save\"]").await;
    mark_page(b).await;
    save.click().await;
    wait_for_new_page(b).await;
    let after = b.find("main").await.text().await;
    let saved: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM field_tests")
        .fetch_one(&app.sql)
        .await
        .expect("count");
    assert_eq!(saved, 1, "the entry form saved the test: {after}");
    b.goto(&app.url(&href)).await;
    let rows = b.find_all("tr[data-result]").await;
    assert_eq!(rows.len(), 1, "the lot sheet lists the one test");
    let row = rows[0].text().await;
    assert!(row.contains("0+050.000"), "at its chainage: {row}");
    b.goto(&app.url(&format!("{project}/map"))).await;
    b.find("svg").await;
    shot(b, "4-lift-map").await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_contract_is_started_in_the_browser_from_an_empty_database() {
    let Some(browsers) = webdriver::browsers_or_skip() else {
        return;
    };
    let (app, admin_password) = DemoApp::spawn_empty().await;
    let driver = Driver::start(&browsers).await;

    let admin = driver.session(true).await;
    let project = admin_starts(&admin, &app, &admin_password).await;
    admin.quit().await;

    let qc = driver.session(true).await;
    sign_in(&qc, &app, "m.tessaly", "qc-first-pass-1").await;
    qc_frame(&qc, &app, &project).await;
    qc_lab_curve(&qc).await;
    qc_lots(&qc, &app, &project).await;
    qc.quit().await;

    let tech = driver.session(true).await;
    sign_in(&tech, &app, "j.orrin", "tech-first-pass-1").await;
    let home = tech.find("main").await.text().await;
    assert!(home.contains("Quarrendel Valley bypass"), "{home}");
    tech_first_test(&tech, &app, &project).await;
    tech.quit().await;

    let tests: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM field_tests")
        .fetch_one(&app.sql)
        .await
        .expect("count");
    assert_eq!(tests, 1, "one test, entered through the form");
    let lots: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM lots")
        .fetch_one(&app.sql)
        .await
        .expect("count");
    assert_eq!(lots, 3);
    drop(driver);
}
