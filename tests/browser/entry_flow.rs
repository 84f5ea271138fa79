//! Entering a field test on the site-entry form: preview, save, and refusals.

use std::time::Duration;

use serde_json::json;

use crate::app::{Rig, km_m, nuclear_reading, test_number_in};
use crate::pages::{self, mark_page, wait_for_new_page, wait_for_path};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn new_test_with_preview_then_save_changes_the_lot_state() {
    let Some(rig) = Rig::start("new-test").await else {
        return;
    };
    let b = &rig.browser;

    // A lot one test short of its frequency.
    let (lot_id, code) = pages::open_lot_from_map_owing(&rig, "owed", Some(1)).await;
    let tag = b.find("#lot-state").await;
    assert_eq!(tag.text().await, "tests owed");
    let state_before = tag.attr("data-state").await.unwrap_or_default();
    assert_eq!(b.find("#owed").await.text().await, "1");
    let count_before = rig.app.field_test_count().await;
    let lot = rig.app.lot(lot_id).await;
    let chainage_m = ((lot.chainage_from_m + lot.chainage_to_m) / 2.0).round() + 0.5;
    let chainage = km_m(chainage_m);
    let mdd = lot.mdd;
    let (wet, moisture) = nuclear_reading(0.99 * mdd, lot.omc);
    let entry_path = format!("/lots/{lot_id}/entry");

    // The form, reached from the lot sheet.
    b.find("#add-test").await.click().await;
    wait_for_path(b, &entry_path).await;
    b.wait_for("#entry-form").await;
    assert_eq!(b.find("h1").await.text().await, "New field test");
    assert!(b.find(".entry .sub").await.text().await.contains(&code));
    assert_eq!(
        pages::sideways_overflow(b).await,
        0,
        "the entry form should fit a 360 px screen without sideways scrolling"
    );

    b.find("#chainage").await.type_over(&chainage).await;
    b.find("#offset_m").await.type_over("1.5").await;
    b.find("#technician").await.type_over("R. Okafor").await;
    b.find("#wet_density").await.type_over(&wet).await;
    b.find("#moisture_density").await.type_over(&moisture).await;

    // Live preview while typing.
    let heading = b
        .wait_until("the live preview", async || {
            let rc = b.try_find("#preview-result #pv-rc").await?.text().await;
            (rc == "99.0 %").then_some(())?;
            Some(b.find("#preview-result h2").await.text().await)
        })
        .await;
    assert_eq!(heading, "This test passes (not saved yet)");
    let live_dry = b.find("#pv-dry").await.text().await;
    assert_eq!(live_dry, format!("{:.0} kg/m³", 0.99 * mdd));
    rig.shot("1-live-preview").await;
    rig.shot_at("1-live-preview-result", "#preview").await;

    // The Check button posts the form; the server renders the same preview in a new page.
    mark_page(b).await;
    b.find("#check").await.click().await;
    wait_for_new_page(b).await;
    assert_eq!(
        b.current_path().await,
        entry_path,
        "Check stays on the form"
    );
    assert_eq!(
        b.find("#preview-result h2").await.text().await,
        "This test passes (not saved yet)"
    );
    assert_eq!(b.find("#pv-rc").await.text().await, "99.0 %");
    assert_eq!(b.find("#pv-dry").await.text().await, live_dry);
    for (field, typed) in [
        ("chainage", chainage.as_str()),
        ("wet_density", &wet),
        ("technician", "R. Okafor"),
    ] {
        assert_eq!(
            b.find(&format!("#{field}")).await.prop("value").await,
            json!(typed),
            "{field} after Check"
        );
    }
    rig.shot("2-check").await;

    // With scripts off there is no live preview, and Check alone shows the result.
    {
        let plain = rig.driver.session(false).await;
        rig.sign_in(&plain).await;
        plain.goto(&rig.app.url(&entry_path)).await;
        plain.wait_for("#entry-form").await;
        plain.find("#chainage").await.type_over(&chainage).await;
        plain.find("#offset_m").await.type_over("1.5").await;
        plain.find("#technician").await.type_over("R. Okafor").await;
        plain.find("#wet_density").await.type_over(&wet).await;
        plain
            .find("#moisture_density")
            .await
            .type_over(&moisture)
            .await;
        tokio::time::sleep(Duration::from_millis(1200)).await;
        assert!(
            plain.try_find("#preview-result").await.is_none(),
            "with scripts off nothing should preview before Check"
        );
        plain.find("#check").await.click().await;
        let heading = plain.wait_for("#preview-result h2").await.text().await;
        assert_eq!(heading, "This test passes (not saved yet)");
        assert_eq!(plain.find("#pv-rc").await.text().await, "99.0 %");
        assert_eq!(plain.find("#pv-dry").await.text().await, live_dry);
        plain
            .save_screenshots(&crate::app::shots_dir(), "new-test-2-check-without-script")
            .await;
        plain.quit().await;
    }
    assert_eq!(
        rig.app.field_test_count().await,
        count_before,
        "previews and checks must save nothing"
    );

    // Save: the lot sheet, at the new row.
    mark_page(b).await;
    b.find("#save").await.click().await;
    wait_for_new_page(b).await;
    let landed = b.current_path().await;
    assert!(
        landed.starts_with(&format!("/lots/{lot_id}#")),
        "after saving: {landed}"
    );
    let number = test_number_in(&landed).expect("saved test's anchor in the URL");
    let row = b.find(&format!("#tests tr[id=\"test-{number}\"]")).await;
    assert_eq!(row.attr("data-result").await.as_deref(), Some("pass"));
    assert_eq!(row.find("td").await.text().await, number);
    assert_eq!(row.find("td:nth-child(3)").await.text().await, chainage);
    // The offset column is hidden at phone width; it is still in the row.
    assert_eq!(
        row.find("td:nth-child(4)").await.prop("textContent").await,
        "1.5 m R"
    );
    assert_eq!(row.find("td:nth-child(9)").await.text().await, "99.0");

    // One test more, and the lot is no longer owed one.
    assert_eq!(rig.app.field_test_count().await, count_before + 1);
    let saved = rig.app.tests_numbered(&number).await;
    assert_eq!(saved.len(), 1, "one saved test numbered {number}");
    assert_eq!(saved[0].lot_id, lot_id);
    assert_eq!(saved[0].technician, "R. Okafor");
    assert!(
        (saved[0].chainage_m - chainage_m).abs() < 1e-6,
        "saved at {} m",
        saved[0].chainage_m
    );
    assert_eq!(saved[0].retest_of, None);
    assert_eq!(b.find("#owed").await.text().await, "0");
    let tag = b.find("#lot-state").await;
    assert_ne!(
        tag.attr("data-state").await.unwrap_or_default(),
        state_before
    );
    assert_ne!(tag.text().await, "tests owed");
    rig.shot("3-lot").await;

    let (on_map, _) = pages::map_state_of(&rig, lot_id).await;
    assert_ne!(
        on_map, "owed",
        "lot {code} on the lift map after its last owed test"
    );
    rig.finish().await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn bad_value_shows_inline_error_and_saves_nothing() {
    let Some(rig) = Rig::start("bad-value").await else {
        return;
    };
    let b = &rig.browser;

    let (lot_id, _code) = pages::open_lot_from_map(&rig, "owed").await;
    let to = rig.app.lot(lot_id).await.chainage_to_m;
    let outside = km_m(to + 250.0);
    let count_before = rig.app.field_test_count().await;
    let lot_tests_before = rig.app.lot_test_count(lot_id).await;
    let entry_path = format!("/lots/{lot_id}/entry");

    b.find("#add-test").await.click().await;
    wait_for_path(b, &entry_path).await;
    b.wait_for("#entry-form").await;
    b.find("#chainage").await.type_over(&outside).await;
    b.find("#offset_m").await.type_over("1.0").await;
    b.find("#technician").await.type_over("R. Okafor").await;
    b.find("#wet_density").await.type_over("abc").await;
    b.find("#moisture_density").await.type_over("200").await;

    // Already while typing, the bad number is named beside its field.
    b.wait_until("the live error beside the wet density", async || {
        let t = b.find("#wet_density-err").await.text().await;
        (!t.is_empty()).then_some(())
    })
    .await;

    mark_page(b).await;
    b.find("#save").await.click().await;
    wait_for_new_page(b).await;
    assert_eq!(
        b.current_path().await,
        entry_path,
        "a refused save stays on the form"
    );
    rig.shot("1-errors").await;
    rig.shot_at("1-errors-wet-density", "#wet_density-field")
        .await;

    let wet_err = b.find("#wet_density-err").await.text().await;
    assert!(
        wet_err.contains("abc"),
        "error beside the wet density: {wet_err:?}"
    );
    let chainage_err = b.find("#chainage-err").await.text().await;
    assert!(
        !chainage_err.is_empty(),
        "chainage {outside} is outside the lot (ends at {to} m), yet nothing is said beside it; wet density says {wet_err:?}"
    );
    for field in ["wet_density", "chainage"] {
        assert_eq!(
            b.find(&format!("#{field}"))
                .await
                .attr("aria-invalid")
                .await
                .as_deref(),
            Some("true"),
            "{field} marked invalid"
        );
        let wrapper = b
            .find(&format!("#{field}-field"))
            .await
            .attr("class")
            .await
            .unwrap_or_default();
        assert!(
            wrapper.contains("has-error"),
            "{field} wrapper class {wrapper:?}"
        );
    }
    assert_eq!(
        b.find("#wet_density").await.prop("value").await,
        json!("abc"),
        "typed value kept"
    );
    assert_eq!(
        b.find("#chainage").await.prop("value").await,
        json!(outside),
        "typed value kept"
    );
    assert!(
        b.try_find("#preview-result").await.is_none(),
        "no preview for a bad form"
    );

    assert_eq!(
        rig.app.field_test_count().await,
        count_before,
        "nothing saved"
    );
    assert_eq!(
        rig.app.lot_test_count(lot_id).await,
        lot_tests_before,
        "nothing saved on the lot"
    );
    rig.finish().await;
}
