//! The request id: one short tag per request that ties its log lines, its error body
//! and its response header together.
//!
//! A proxy in front may set `X-Request-Id` (nginx's `$request_id`, a balancer's trace
//! id); a well-formed one is kept so the proxy's log and ours name the same request.
//! It is only a correlation tag, never trusted for anything else, so a client may send
//! one too; anything too long or with other characters is replaced by a fresh id.

use std::fmt;

use axum::http::HeaderMap;

/// The header a proxy sets and the response echoes.
pub const HEADER: &str = "x-request-id";

/// Longest id accepted from a proxy (a UUID is 36, a W3C trace id 32).
pub const MAX_LEN: usize = 64;

/// A request's id: 1–64 characters of `A–Z a–z 0–9 - _ . :`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RequestId(String);

tokio::task_local! {
    /// The id of the request this task is serving, read where no request is at hand
    /// (the JSON error body is built in `AppError::into_response`).
    static CURRENT: RequestId;
}

impl RequestId {
    /// Keeps a proxy's id when it is well formed.
    pub fn parse(s: &str) -> Option<Self> {
        let ok = !s.is_empty()
            && s.len() <= MAX_LEN
            && s.bytes()
                .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.' | b':'));
        ok.then(|| Self(s.to_string()))
    }

    /// A fresh random id: 16 bytes as 32 hex digits (the shape nginx's `$request_id` has).
    pub fn new() -> Self {
        let mut bytes = [0u8; 16];
        if getrandom::fill(&mut bytes).is_err() {
            // Without randomness the id still has to be unique enough to find a log line.
            let nanos = std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_nanos())
                .unwrap_or_default();
            bytes = nanos.to_be_bytes();
        }
        Self(hex::encode(bytes))
    }

    /// The proxy's id from the headers when well formed, else a fresh one.
    pub fn from_headers(headers: &HeaderMap) -> Self {
        headers
            .get(HEADER)
            .and_then(|v| v.to_str().ok())
            .and_then(Self::parse)
            .unwrap_or_default()
    }

    /// The id as text.
    pub fn as_str(&self) -> &str {
        &self.0
    }

    /// Runs `fut` with this id as the current request's.
    pub async fn scope<F: Future>(self, fut: F) -> F::Output {
        CURRENT.scope(self, fut).await
    }

    /// The id of the request being served on this task, if any.
    pub fn current() -> Option<Self> {
        CURRENT.try_with(Clone::clone).ok()
    }
}

impl Default for RequestId {
    fn default() -> Self {
        Self::new()
    }
}

impl fmt::Display for RequestId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn proxy_ids_are_kept_only_when_short_and_plain() {
        let cases = [
            ("4bf92f3577b34da6a3ce929d0e0e4736", true, "a W3C trace id"),
            ("f47ac10b-58cc-4372-a567-0e02b2c3d479", true, "a UUID"),
            ("lb:edge-1.req_42", true, "colons, dots and underscores"),
            ("", false, "empty"),
            ("has space", false, "a space"),
            ("a\"b", false, "a quote (would break a log line)"),
            ("é", false, "non-ASCII"),
        ];
        for (id, kept, why) in cases {
            assert_eq!(RequestId::parse(id).is_some(), kept, "{why}: {id:?}");
        }
        assert!(
            RequestId::parse(&"a".repeat(MAX_LEN)).is_some(),
            "64 characters"
        );
        assert!(
            RequestId::parse(&"a".repeat(MAX_LEN + 1)).is_none(),
            "65 characters"
        );
    }

    #[test]
    fn fresh_ids_differ_and_parse() {
        let (a, b) = (RequestId::new(), RequestId::new());
        assert_ne!(a, b);
        assert_eq!(a.as_str().len(), 32);
        assert_eq!(RequestId::parse(a.as_str()), Some(a));
    }
}
