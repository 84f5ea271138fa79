//! Extractors that turn unreadable input into the app's own error shape, naming the field.

use axum::extract::{FromRequest, FromRequestParts, Request};
use axum::http::request::Parts;
use serde::de::DeserializeOwned;

use crate::error::AppError;

/// A JSON body; a parse failure names the offending field.
pub struct ApiJson<T>(pub T);

impl<S, T> FromRequest<S> for ApiJson<T>
where
    S: Send + Sync,
    T: DeserializeOwned,
{
    type Rejection = AppError;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        let bytes = axum::body::Bytes::from_request(req, state)
            .await
            .map_err(|e| AppError::BadRequest {
                field: "body".into(),
                message: format!("could not read the request body: {e}"),
            })?;
        parse_json(&bytes).map(ApiJson)
    }
}

/// Parses JSON bytes into `T`, reporting the path of the first bad field.
pub fn parse_json<T: DeserializeOwned>(bytes: &[u8]) -> Result<T, AppError> {
    let mut de = serde_json::Deserializer::from_slice(bytes);
    serde_path_to_error::deserialize(&mut de).map_err(|e| {
        let path = e.path().to_string();
        let inner = e.into_inner();
        let message = inner.to_string();
        let field = field_from(&path, &message);
        let kind = if inner.is_syntax() || inner.is_eof() {
            "malformed JSON"
        } else {
            "invalid value"
        };
        AppError::BadRequest {
            field,
            message: format!("{kind}: {}", strip_position(&message)),
        }
    })
}

/// Query-string parameters; a parse failure names the parameter.
pub struct ApiQuery<T>(pub T);

impl<S, T> FromRequestParts<S> for ApiQuery<T>
where
    S: Send + Sync,
    T: DeserializeOwned,
{
    type Rejection = AppError;

    async fn from_request_parts(parts: &mut Parts, _state: &S) -> Result<Self, Self::Rejection> {
        let q = parts.uri.query().unwrap_or("");
        parse_form(q.as_bytes()).map(ApiQuery)
    }
}

/// Parses URL-encoded bytes (query string or form body) into `T`, naming the bad field.
pub fn parse_form<T: DeserializeOwned>(bytes: &[u8]) -> Result<T, AppError> {
    let de = serde_urlencoded::Deserializer::new(form_urlencoded_parse(bytes));
    serde_path_to_error::deserialize(de).map_err(|e| {
        let path = e.path().to_string();
        let message = e.into_inner().to_string();
        AppError::BadRequest {
            field: field_from(&path, &message),
            message: format!("invalid value: {message}"),
        }
    })
}

fn form_urlencoded_parse(bytes: &[u8]) -> form_urlencoded::Parse<'_> {
    form_urlencoded::parse(bytes)
}

/// The field a serde error is about: the path, or the name quoted in a "missing field" message.
fn field_from(path: &str, message: &str) -> String {
    let quoted = message
        .split('`')
        .nth(1)
        .filter(|_| message.starts_with("missing field") || message.starts_with("unknown field"));
    match (path, quoted) {
        ("." | "", Some(q)) => q.to_string(),
        (p, Some(q)) => format!("{p}.{q}"),
        ("." | "", None) => "body".to_string(),
        (p, None) => p.to_string(),
    }
}

fn strip_position(message: &str) -> &str {
    message.split(" at line ").next().unwrap_or(message)
}

/// A path parameter; an unreadable one (`/lots/abc`) names the parameter in the JSON error.
pub struct ApiPath<T>(pub T);

impl<S, T> FromRequestParts<S> for ApiPath<T>
where
    S: Send + Sync,
    T: DeserializeOwned + Send,
{
    type Rejection = AppError;

    async fn from_request_parts(parts: &mut Parts, state: &S) -> Result<Self, Self::Rejection> {
        use axum::extract::path::{ErrorKind, Path};
        use axum::extract::rejection::PathRejection;
        match Path::<T>::from_request_parts(parts, state).await {
            Ok(Path(v)) => Ok(ApiPath(v)),
            Err(PathRejection::FailedToDeserializePathParams(e)) => {
                let field = match e.kind() {
                    ErrorKind::ParseErrorAtKey { key, .. }
                    | ErrorKind::InvalidUtf8InPathParam { key }
                    | ErrorKind::DeserializeError { key, .. } => key.clone(),
                    // A lone parameter is parsed without its name: take it from the route.
                    _ => sole_parameter(parts).unwrap_or_else(|| "path".to_string()),
                };
                Err(AppError::BadRequest {
                    field,
                    message: e.body_text(),
                })
            }
            Err(other) => Err(AppError::Internal(anyhow::anyhow!(
                "path parameters: {}",
                other.body_text()
            ))),
        }
    }
}

/// The name of the route's only path parameter (`id` in `/api/v1/lots/{id}`), if it has one.
fn sole_parameter(parts: &Parts) -> Option<String> {
    let route = parts
        .extensions
        .get::<axum::extract::MatchedPath>()?
        .as_str();
    let mut names = route
        .split('/')
        .filter_map(|seg| seg.strip_prefix('{')?.strip_suffix('}'));
    let first = names.next()?;
    names.next().is_none().then(|| first.to_string())
}
