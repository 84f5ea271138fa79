//! The served OpenAPI document against the running server: every documented operation is
//! routed and no other method is, no route bypasses the document, every example validates
//! against its schema (checked by an independent JSON Schema validator), every request-body
//! example is readable by its route, and every body schema lists exactly the fields the
//! server reads.

use std::collections::BTreeSet;

use serde_json::{Value, json};

use crate::helpers::{As, answer, spawn_app};

const METHODS: [&str; 5] = ["get", "post", "put", "delete", "patch"];

/// A documented path made concrete (`{id}` → 1, `{kind}` → an export kind).
fn concrete(path: &str) -> String {
    path.replace("{id}", "1").replace("{kind}", "tests_csv")
}

fn request(client: &reqwest::Client, method: &str, url: &str) -> reqwest::RequestBuilder {
    let m = reqwest::Method::from_bytes(method.to_uppercase().as_bytes()).unwrap();
    client.request(m, url)
}

/// True when the router itself refused the request: no route (the fallback's message) or
/// no such method on the route.
fn unrouted(status: u16, body: &Value) -> bool {
    status == 405
        || (status == 404
            && body["error"]["message"]
                .as_str()
                .is_some_and(|m| m.starts_with("no such page or resource")))
}

#[tokio::test]
async fn the_document_describes_the_api_and_its_security() {
    let app = spawn_app().await;
    let (s, doc) = answer(app.anonymous.get(app.url("/api/v1/openapi.json"))).await;
    assert_eq!(s, 200);
    assert_eq!(doc["openapi"], "3.1.0");
    let schemes = &doc["components"]["securitySchemes"];
    assert_eq!(schemes["session"]["type"], "apiKey");
    assert_eq!(schemes["session"]["in"], "cookie");
    assert_eq!(schemes["session"]["name"], "liftledger_session");
    assert_eq!(schemes["token"]["type"], "http");
    assert_eq!(schemes["token"]["scheme"], "bearer");
    let error = &doc["components"]["schemas"]["ErrorBody"];
    assert_eq!(error["required"], json!(["error"]), "{error}");
    let mut ids = BTreeSet::new();
    for (path, item) in doc["paths"].as_object().unwrap() {
        for (method, op) in item.as_object().unwrap() {
            let where_ = format!("{method} {path}");
            assert!(
                op["summary"].as_str().is_some_and(|s| !s.is_empty()),
                "{where_} has a summary"
            );
            assert!(
                ids.insert(op["operationId"].as_str().unwrap().to_string()),
                "{where_}: unique operationId"
            );
            let responses = op["responses"].as_object().unwrap();
            assert!(
                responses.keys().any(|k| k.starts_with('2')),
                "{where_} documents its success"
            );
            if path != "/api/v1/openapi.json" {
                for code in ["400", "401", "403", "404", "409", "422"] {
                    let r = &responses[code];
                    assert_eq!(
                        r["content"]["application/json"]["schema"]["$ref"],
                        "#/components/schemas/ErrorBody",
                        "{where_} {code} refers to the one error body"
                    );
                }
            }
        }
    }
    // The enums the ledger checks are listed, not left as free strings.
    let schemas = &doc["components"]["schemas"];
    assert!(
        schemas["ClauseEffort"]["enum"]
            .as_array()
            .unwrap()
            .contains(&json!("astm_d698_4in"))
    );
    assert_eq!(
        schemas["LotState"]["enum"],
        json!(["open", "submitted", "accepted", "rejected"])
    );
    assert_eq!(
        schemas["ClauseInput"]["properties"]["rc_min_pct"]["minimum"].as_f64(),
        Some(50.0),
        "bounds the ledger enforces are in the document"
    );
}

#[tokio::test]
async fn the_document_and_the_router_are_in_step() {
    let app = spawn_app().await;
    let (_, doc) = app.get("/api/v1/openapi.json").await;
    let admin = app.client_as(As::Admin);
    for (path, item) in doc["paths"].as_object().unwrap() {
        let url = app.url(&concrete(path));
        let documented: Vec<&str> = item
            .as_object()
            .unwrap()
            .keys()
            .map(String::as_str)
            .collect();
        for method in METHODS {
            let mut r = request(admin, method, &url).header("origin", app.url(""));
            if method != "get" {
                r = r.header("content-type", "application/json").body("{}");
            }
            let (s, body) = answer(r).await;
            if documented.contains(&method) {
                assert!(
                    !unrouted(s, &body),
                    "{method} {path} is documented but not routed: {s} {body}"
                );
            } else {
                assert_eq!(
                    s, 405,
                    "{method} {path} is routed but not documented: {body}"
                );
            }
        }
    }
    // Every API route goes through the documented routers: no `.route("/api/…` bypasses them.
    for file in rust_files(concat!(env!("CARGO_MANIFEST_DIR"), "/src")) {
        let text = std::fs::read_to_string(&file).unwrap();
        assert!(
            !text.contains(".route(\"/api/v1"),
            "{} registers an /api/v1 route outside the OpenAPI routers",
            file.display()
        );
    }
    // A path nobody documented is not served.
    let (s, _) = app.get("/api/v1/not-a-resource").await;
    assert_eq!(s, 404);
}

fn rust_files(dir: &str) -> Vec<std::path::PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![std::path::PathBuf::from(dir)];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else if p.extension().is_some_and(|x| x == "rs") {
                out.push(p);
            }
        }
    }
    out
}

/// Every `example` in the document with the schema it belongs to (its pointer for messages).
fn examples(v: &Value, pointer: &str, out: &mut Vec<(String, Value, Value)>) {
    match v {
        Value::Object(map) => {
            if let Some(ex) = map.get("example") {
                let schema = match map.get("schema") {
                    // A parameter or media type: the example is of its `schema`.
                    Some(s) if !map.contains_key("type") => s.clone(),
                    _ => {
                        let mut s = v.clone();
                        s.as_object_mut().unwrap().remove("example");
                        s
                    }
                };
                out.push((pointer.to_string(), schema, ex.clone()));
            }
            for (k, child) in map {
                examples(child, &format!("{pointer}/{k}"), out);
            }
        }
        Value::Array(items) => {
            for (i, child) in items.iter().enumerate() {
                examples(child, &format!("{pointer}/{i}"), out);
            }
        }
        _ => {}
    }
}

#[tokio::test]
async fn every_example_validates_against_its_schema() {
    let app = spawn_app().await;
    let (_, doc) = app.get("/api/v1/openapi.json").await;
    let mut found = Vec::new();
    examples(&doc, "", &mut found);
    assert!(
        found.len() >= 30,
        "the document carries examples ({} found)",
        found.len()
    );
    for (pointer, schema, example) in found {
        // The schema with the document's components beside it, so its `$ref`s resolve.
        let mut root = schema.clone();
        if let Some(o) = root.as_object_mut() {
            o.insert("components".into(), doc["components"].clone());
        } else {
            continue;
        }
        let validator = jsonschema::draft202012::new(&root)
            .unwrap_or_else(|e| panic!("schema at {pointer} is not valid JSON Schema: {e}"));
        let errors: Vec<String> = validator
            .iter_errors(&example)
            .map(|e| e.to_string())
            .collect();
        assert!(
            errors.is_empty(),
            "example at {pointer} does not match its schema: {errors:?}\n{example}"
        );
    }
}

/// The body schema of an operation, resolved, when it is a JSON object schema.
fn body_schema<'a>(doc: &'a Value, op: &Value) -> Option<&'a Value> {
    let r = op["requestBody"]["content"]["application/json"]["schema"]["$ref"].as_str()?;
    let name = r.strip_prefix("#/components/schemas/")?;
    Some(&doc["components"]["schemas"][name])
}

#[tokio::test]
async fn body_schemas_match_what_the_server_reads() {
    let app = spawn_app().await;
    let (_, doc) = app.get("/api/v1/openapi.json").await;
    let admin = app.client_as(As::Admin);
    let mut checked = 0;
    for (path, item) in doc["paths"].as_object().unwrap() {
        for (method, op) in item.as_object().unwrap() {
            let Some(schema) = body_schema(&doc, op) else {
                continue;
            };
            let url = app.url(&concrete(path));
            let send = |body: &Value| {
                request(admin, method, &url)
                    .header("origin", app.url(""))
                    .json(body)
            };
            // The example is readable: whatever the record's state, it is never a 400.
            if let Some(example) = schema.get("example") {
                let (s, e) = answer(send(example)).await;
                assert_ne!(s, 400, "{method} {path}: its example is unreadable: {e}");
            }
            // An unknown field is refused with the list of fields the server reads.
            let Some(props) = schema["properties"].as_object() else {
                continue;
            };
            let (s, e) = answer(send(&json!({"zz_not_a_field": 1}))).await;
            let message = e["error"]["message"].as_str().unwrap_or_default();
            if s != 400 || !message.contains("unknown field") {
                continue;
            }
            let read: BTreeSet<String> = message
                .split_once("expected")
                .map(|(_, list)| {
                    list.split('`')
                        .skip(1)
                        .step_by(2)
                        .map(str::to_string)
                        .collect()
                })
                .unwrap_or_default();
            let documented: BTreeSet<String> = props.keys().cloned().collect();
            assert_eq!(
                documented, read,
                "{method} {path}: documented fields vs the fields the server reads"
            );
            checked += 1;
        }
    }
    assert!(checked >= 25, "field lists compared for {checked} bodies");
}

#[tokio::test]
async fn the_api_page_and_its_script_are_served() {
    let app = spawn_app().await;
    let r = app
        .anonymous
        .get(app.url("/api/docs"))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    assert!(
        r.headers()["content-type"]
            .to_str()
            .unwrap()
            .starts_with("text/html")
    );
    let html = r.text().await.unwrap();
    assert!(html.contains("src=\"/static/api-docs.js\""), "{html}");
    assert!(
        !html.contains("<script>"),
        "no inline script (the CSP forbids it)"
    );
    assert!(!html.contains("https://"), "nothing loaded from elsewhere");
    let r = app
        .anonymous
        .get(app.url("/static/api-docs.js"))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    assert!(
        r.headers()["content-type"]
            .to_str()
            .unwrap()
            .starts_with("text/javascript")
    );
    let js = r.text().await.unwrap();
    assert!(
        js.contains("/api/v1/openapi.json"),
        "the page reads the served document"
    );
    assert!(
        js.contains("same-origin"),
        "requests carry the session cookie, same-origin only"
    );
}
