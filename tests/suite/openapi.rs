//! The OpenAPI document lists exactly the routes the router registers.

use std::collections::BTreeSet;

use crate::helpers::spawn_app;

/// Every `.route("/api/...")` path registered in the source, read from the files themselves.
fn registered_api_routes() -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/src/http/api");
    for entry in std::fs::read_dir(dir).unwrap() {
        let text = std::fs::read_to_string(entry.unwrap().path()).unwrap();
        for part in text.split(".route(\"").skip(1) {
            let path = part.split('"').next().unwrap();
            if path.starts_with("/api/") {
                out.insert(path.to_string());
            }
        }
    }
    out
}

#[tokio::test]
async fn openapi_document_matches_the_router() {
    let app = spawn_app().await;
    let (s, doc) = app.get("/api/v1/openapi.json").await;
    assert_eq!(s, 200);
    assert_eq!(doc["openapi"], "3.1.0");
    let documented: BTreeSet<String> = doc["paths"].as_object().unwrap().keys().cloned().collect();
    assert_eq!(documented, registered_api_routes());
    // Every documented body schema exists.
    let schemas = doc["components"]["schemas"].as_object().unwrap();
    for o in liftledger::http::api::openapi::OPERATIONS {
        if let Some(b) = o.body {
            assert!(schemas.contains_key(b), "schema {b} missing");
        }
    }
}
