//! What every request leaves behind: a request id, a span that puts it on every log
//! line of the request, the access-log line, the request metrics and the
//! `X-Request-Id` response header.

use std::time::Instant;

use axum::extract::{MatchedPath, Request};
use axum::http::HeaderValue;
use axum::middleware::Next;
use axum::response::Response;
use tracing::Instrument;

use super::request_id::{self, RequestId};

/// Paths a load balancer polls every few seconds: logged only at debug level.
const QUIET_PATHS: [&str; 2] = ["/healthz", "/readyz"];

/// Route label of a request that matched no route (a raw path would let any client
/// create new series).
const UNMATCHED: &str = "unmatched";

/// The middleware: wraps the request in its span and task-local id, then logs and counts it.
pub async fn observe(req: Request, next: Next) -> Response {
    let id = RequestId::from_headers(req.headers());
    let route = req
        .extensions()
        .get::<MatchedPath>()
        .map_or(UNMATCHED, MatchedPath::as_str)
        .to_string();
    let method = req.method().clone();
    let path = req.uri().path().to_string();
    let span = tracing::info_span!("request", request_id = %id, method = %method, path = %path);
    let started = Instant::now();
    let header = HeaderValue::from_str(id.as_str()).ok();
    let mut response = id.scope(next.run(req)).instrument(span.clone()).await;
    let elapsed = started.elapsed();
    let status = response.status().as_u16();
    let latency_ms = elapsed.as_secs_f64() * 1000.0;
    span.in_scope(|| {
        if QUIET_PATHS.contains(&path.as_str()) {
            tracing::debug!(status, latency_ms, route, "request finished");
        } else {
            tracing::info!(status, latency_ms, route, "request finished");
        }
    });
    crate::metrics::request_answered(method.as_str(), &route, status, elapsed);
    if let Some(h) = header {
        response.headers_mut().insert(request_id::HEADER, h);
    }
    response
}
