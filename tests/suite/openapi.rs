//! The OpenAPI document lists exactly the routes the router registers.

use std::collections::BTreeSet;

use crate::helpers::spawn_app;

/// Every `/api/v1/…` path literal in the route modules (the router registers each one with `.route`).
fn registered_api_routes() -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/src/http/api");
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        let text = std::fs::read_to_string(&path).unwrap();
        // The operation table is what is checked (its own route is added below); mod.rs only merges.
        if path.ends_with("openapi.rs") || path.ends_with("mod.rs") {
            continue;
        }
        assert!(
            text.contains(".route("),
            "{} registers no routes",
            path.display()
        );
        for part in text.split("\"/api/v1/").skip(1) {
            out.insert(format!("/api/v1/{}", part.split('"').next().unwrap()));
        }
    }
    out.insert("/api/v1/openapi.json".to_string());
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
