//! Steps a user takes through the pages, shared by the flows.

use serde_json::json;

use crate::app::{PROJECT, Rig};
use crate::webdriver::Session;

/// Opens the lift map, clicks the first lot listed in `state`, and waits for its sheet.
/// Returns the lot's id and code.
pub async fn open_lot_from_map(rig: &Rig, state: &str) -> (i64, String) {
    open_lot_from_map_owing(rig, state, None).await
}

/// Like `open_lot_from_map`, but when `owed` is given, only a lot whose "Owed" column shows it.
pub async fn open_lot_from_map_owing(rig: &Rig, state: &str, owed: Option<u32>) -> (i64, String) {
    let b = &rig.browser;
    rig.open(&format!("/projects/{PROJECT}/map")).await;
    b.wait_for("#lot-table").await;
    let mut chosen = None;
    for row in b
        .find_all(&format!("#lot-table tbody tr[data-state=\"{state}\"]"))
        .await
    {
        let shows = row.find("td:nth-child(8)").await.text().await;
        if owed.is_none_or(|n| shows == n.to_string()) {
            chosen = Some(row);
            break;
        }
    }
    let row =
        chosen.unwrap_or_else(|| panic!("no lot in state {state} owing {owed:?} on the lift map"));
    let link = row.find("a[href^=\"/lots/\"]").await;
    let code = link.text().await;
    let href = link.attr("href").await.expect("lot link href");
    let id: i64 = href
        .trim_start_matches("/lots/")
        .parse()
        .unwrap_or_else(|_| panic!("lot link {href}"));
    link.click().await;
    wait_for_path(b, &href).await;
    b.wait_for("#lot-state").await;
    let h1 = b.find("h1").await.text().await;
    assert!(
        h1.contains(&code),
        "the lot sheet heading {h1:?} should name lot {code}"
    );
    (id, code)
}

/// A lot's row on the lift map (opens the map): its state code and the state as written.
pub async fn map_state_of(rig: &Rig, lot_id: i64) -> (String, String) {
    let b = &rig.browser;
    rig.open(&format!("/projects/{PROJECT}/map")).await;
    let row = b
        .find(&format!("#lot-table tr:has(a[href=\"/lots/{lot_id}\"])"))
        .await;
    let code = row.attr("data-state").await.expect("row data-state");
    let label = row.find("td:nth-child(6)").await.text().await;
    (code, label)
}

/// Waits until the address bar's path (without the fragment) is `path`.
pub async fn wait_for_path(b: &Session, path: &str) {
    b.wait_until(&format!("the browser to reach {path}"), async || {
        let now = b.current_path().await;
        (now.split('#').next() == Some(path)).then_some(())
    })
    .await;
}

/// Tags the current document so that `wait_for_new_page` can tell when it was replaced.
pub async fn mark_page(b: &Session) {
    b.script("window.__liftledgerOldPage = true; return true;", vec![])
        .await;
}

/// Waits until the tagged document has been replaced by a loaded new one.
pub async fn wait_for_new_page(b: &Session) {
    b.wait_until("a new page to load", async || {
        let v = b
            .script(
                "return window.__liftledgerOldPage === undefined && document.readyState === 'complete';",
                vec![],
            )
            .await;
        (v == json!(true)).then_some(())
    })
    .await;
}

/// The value shown next to a `<dt>` label inside the first element matching `scope`.
pub async fn fact(b: &Session, scope: &str, label: &str) -> String {
    let v = b
        .script(
            "var s = document.querySelector(arguments[0]);
             if (!s) return null;
             var dts = s.querySelectorAll('dt');
             for (var i = 0; i < dts.length; i++) {
               if (dts[i].textContent.trim() === arguments[1]) return dts[i].nextElementSibling.textContent.trim();
             }
             return null;",
            vec![json!(scope), json!(label)],
        )
        .await;
    v.as_str()
        .unwrap_or_else(|| panic!("no fact {label:?} in {scope}"))
        .to_string()
}

/// How far the page is wider than the phone screen, in CSS pixels (0 when it fits).
pub async fn sideways_overflow(b: &Session) -> i64 {
    b.script(
        "return document.documentElement.scrollWidth - document.documentElement.clientWidth;",
        vec![],
    )
    .await
    .as_i64()
    .unwrap_or(0)
}

/// The width of the page's layout viewport in CSS pixels.
pub async fn viewport_width(b: &Session) -> i64 {
    b.script("return window.innerWidth;", vec![])
        .await
        .as_i64()
        .unwrap_or(0)
}
