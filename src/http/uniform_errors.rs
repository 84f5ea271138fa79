//! One error shape per audience: every refusal under `/api` is the JSON error body,
//! every refusal of a page is the HTML error page.
//!
//! Handlers already answer with `AppError` (JSON) or `PageError` (HTML). What is left
//! are axum's own rejections — an unreadable path or query parameter on a page, a wrong
//! method, a body over the limit — which answer plain text; this middleware rewrites
//! those into the audience's shape, keeping their status.

use axum::extract::Request;
use axum::http::{StatusCode, header};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use serde_json::json;

/// Longest plain-text rejection read back to be rewritten.
const MAX_REJECTION_BYTES: usize = 16 * 1024;

fn is_structured(resp: &Response) -> bool {
    resp.headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|ct| ct.starts_with("application/json") || ct.starts_with("text/html"))
}

/// The field a rejection is about, from its status and axum's wording.
fn field_of(status: StatusCode, message: &str) -> &'static str {
    if status == StatusCode::METHOD_NOT_ALLOWED {
        "method"
    } else if message.starts_with("Invalid URL") || message.contains("path param") {
        "path"
    } else if message.contains("query string") {
        "query"
    } else {
        "body"
    }
}

fn message_of(status: StatusCode, text: &str) -> String {
    let text = text.trim();
    if !text.is_empty() {
        return text.to_string();
    }
    match status {
        StatusCode::METHOD_NOT_ALLOWED => "this method is not allowed here".to_string(),
        StatusCode::PAYLOAD_TOO_LARGE => "the request body is too large".to_string(),
        s => s.canonical_reason().unwrap_or("refused").to_string(),
    }
}

/// Rewrites a plain-text (or empty) error answer into JSON under `/api`, HTML elsewhere.
pub async fn uniform(req: Request, next: Next) -> Response {
    let api = req.uri().path().starts_with("/api/");
    let resp = next.run(req).await;
    let status = resp.status();
    if !(status.is_client_error() || status.is_server_error()) || is_structured(&resp) {
        return resp;
    }
    let (parts, body) = resp.into_parts();
    let text = axum::body::to_bytes(body, MAX_REJECTION_BYTES)
        .await
        .map(|b| String::from_utf8_lossy(&b).into_owned())
        .unwrap_or_default();
    let message = message_of(status, &text);
    let field = field_of(status, &message);
    let mut out = if api {
        let mut body = json!({"field": field, "message": message});
        if let Some(id) = crate::http::request_id::RequestId::current() {
            body["request_id"] = json!(id.as_str());
        }
        (status, axum::Json(json!({ "error": body }))).into_response()
    } else {
        crate::http::pages::error_page(status, &message)
    };
    // Keep what the original answer said beyond its body (Retry-After, Allow, …).
    for (name, value) in &parts.headers {
        if name != header::CONTENT_TYPE && name != header::CONTENT_LENGTH {
            out.headers_mut().insert(name.clone(), value.clone());
        }
    }
    out
}
