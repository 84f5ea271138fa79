//! The interactive API page (`/api/docs`): its operations come from the served OpenAPI
//! document, and a GET sent from it carries the reader's session and shows the server's
//! own answer (refused without a session).

use std::collections::BTreeSet;

use serde_json::Value;

use crate::app::{PROJECT, Rig};
use crate::webdriver::Session;

/// The methods the page lists (the document uses no others; checked below).
const METHODS: [&str; 4] = ["get", "post", "put", "delete"];

/// The box of the projects list: "get /api/v1/projects " begins its search text (the
/// trailing space leaves out the paths under it).
const PROJECTS_LIST: &str = "details.api-op[data-search^='get /api/v1/projects ']";

/// Every "method path" of the served document, read over HTTP as any client would.
async fn document_operations(rig: &Rig) -> BTreeSet<String> {
    let doc: Value = reqwest::get(rig.app.url("/api/v1/openapi.json"))
        .await
        .expect("GET openapi.json")
        .json()
        .await
        .expect("the document is JSON");
    let paths = doc["paths"].as_object().expect("the document has paths");
    let mut ops = BTreeSet::new();
    for (path, item) in paths {
        for method in item.as_object().expect("a path item").keys() {
            assert!(
                METHODS.contains(&method.as_str()),
                "{method} {path}: a method the page would not list"
            );
            ops.insert(format!("{method} {path}"));
        }
    }
    ops
}

/// The operations the page shows, once its script has read the document.
async fn listed_operations(b: &Session) -> BTreeSet<String> {
    b.wait_for("#api-ops details.api-op").await;
    let listed = b
        .script(
            "return Array.from(document.querySelectorAll('#api-ops details.api-op')).map(function (d) {
               return d.querySelector('.api-method').textContent + ' ' + d.querySelector('.api-path').textContent;
             });",
            vec![],
        )
        .await;
    listed
        .as_array()
        .expect("a list of operations")
        .iter()
        .map(|v| v.as_str().expect("an operation's text").to_string())
        .collect()
}

/// Opens the projects-list operation, presses Send, and returns the answer shown once it came.
async fn send_projects_list(b: &Session) -> String {
    let op = b.find(PROJECTS_LIST).await;
    op.find("summary").await.click().await;
    op.find("button[type=submit]").await.click().await;
    b.wait_until("the answer of GET /api/v1/projects", async || {
        let shown = b
            .find(&format!("{PROJECTS_LIST} .api-answer"))
            .await
            .text()
            .await;
        shown.starts_with("HTTP ").then_some(shown)
    })
    .await
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_api_page_lists_the_document_and_sends_a_signed_in_get() {
    let Some(rig) = Rig::start("api-docs").await else {
        return;
    };
    let b = &rig.browser;
    let (name, code): (String, String) =
        sqlx::query_as("SELECT name, code FROM projects WHERE id = $1")
            .bind(PROJECT)
            .fetch_one(&rig.app.sql)
            .await
            .expect("the demo project");

    // The page's list is the served document's operations, one box each.
    rig.open("/api/docs").await;
    let expected = document_operations(&rig).await;
    assert!(
        expected.contains("get /api/v1/projects"),
        "the document holds the projects list"
    );
    assert_eq!(listed_operations(b).await, expected);
    let boxes = b.find_all("#api-ops details.api-op").await.len();
    assert_eq!(boxes, expected.len(), "one box per operation, none twice");
    rig.shot("1-operations").await;

    // Signed in, the GET answers 200 with the demo project, as the server stores it.
    let answer = send_projects_list(b).await;
    assert!(answer.starts_with("HTTP 200"), "{answer}");
    assert!(
        answer.contains(&format!("\"name\": \"{name}\"")),
        "the answer names the demo project {name:?}: {answer}"
    );
    assert!(
        answer.contains(&format!("\"code\": \"{code}\"")),
        "{answer}"
    );
    rig.shot_at("2-signed-in-answer", PROJECTS_LIST).await;

    // A browser without a session gets the server's refusal, and no project.
    let stranger = rig.driver.session(true).await;
    stranger.goto(&rig.app.url("/api/docs")).await;
    assert_eq!(listed_operations(&stranger).await, expected);
    let refused = send_projects_list(&stranger).await;
    assert!(refused.starts_with("HTTP 401"), "{refused}");
    assert!(!refused.contains(&name), "{refused}");
    stranger.quit().await;
    rig.finish().await;
}
