//! The one error type of liftledger and how it maps to HTTP.
//!
//! Use `Invalid` for a value that breaks a rule (422), `BadRequest` for a body
//! that cannot be read at all (400), `NotFound` (404), `Conflict` for a request
//! the current state refuses (409, with the reasons listed), and let anything
//! else become `Internal`: logged in full, answered with a generic 500.
//!
//! The JSON body is `{"error": {"field", "message", "reasons"?, "request_id"}}`; the
//! request id is the one on the request's log lines and its `X-Request-Id` header.

use axum::Json;
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use serde_json::json;

/// Result with the app's error.
pub type Result<T, E = AppError> = std::result::Result<T, E>;

/// Every way a request can fail.
#[derive(Debug, thiserror::Error)]
pub enum AppError {
    /// The body could not be parsed as the expected JSON or form.
    #[error("{field}: {message}")]
    BadRequest { field: String, message: String },
    /// A value was read but breaks a rule.
    #[error("{field}: {message}")]
    Invalid { field: String, message: String },
    /// A referenced record does not exist.
    #[error("{field}: {message}")]
    NotFound { field: String, message: String },
    /// No valid session or token was presented.
    #[error("{message}")]
    Unauthorized { message: String },
    /// The caller is known but their role does not allow this.
    #[error("{message}")]
    Forbidden { message: String },
    /// Too many attempts; try again after `retry_after_secs`.
    #[error("{message}")]
    TooManyRequests {
        message: String,
        retry_after_secs: u64,
    },
    /// The record's current state refuses the request.
    #[error("{field}: {message}")]
    Conflict {
        field: String,
        message: String,
        reasons: Vec<String>,
    },
    /// A fault of the server, not of the user.
    #[error(transparent)]
    Internal(#[from] anyhow::Error),
}

impl AppError {
    /// A rule broken by the value of `field`.
    pub fn invalid(field: impl Into<String>, message: impl Into<String>) -> Self {
        Self::Invalid {
            field: field.into(),
            message: message.into(),
        }
    }

    /// A missing record named by `field`.
    pub fn not_found(field: impl Into<String>, message: impl Into<String>) -> Self {
        Self::NotFound {
            field: field.into(),
            message: message.into(),
        }
    }

    /// A refusal for lack of rights, naming what the role cannot do.
    pub fn forbidden(message: impl Into<String>) -> Self {
        Self::Forbidden {
            message: message.into(),
        }
    }

    /// A request without a valid session or token.
    pub fn unauthorized(message: impl Into<String>) -> Self {
        Self::Unauthorized {
            message: message.into(),
        }
    }

    /// A refusal by the record's state, with the reasons a user must fix.
    pub fn conflict(
        field: impl Into<String>,
        message: impl Into<String>,
        reasons: Vec<String>,
    ) -> Self {
        Self::Conflict {
            field: field.into(),
            message: message.into(),
            reasons,
        }
    }

    /// The HTTP status for this error.
    pub fn status(&self) -> StatusCode {
        match self {
            Self::BadRequest { .. } => StatusCode::BAD_REQUEST,
            Self::Invalid { .. } => StatusCode::UNPROCESSABLE_ENTITY,
            Self::NotFound { .. } => StatusCode::NOT_FOUND,
            Self::Conflict { .. } => StatusCode::CONFLICT,
            Self::Unauthorized { .. } => StatusCode::UNAUTHORIZED,
            Self::Forbidden { .. } => StatusCode::FORBIDDEN,
            Self::TooManyRequests { .. } => StatusCode::TOO_MANY_REQUESTS,
            Self::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }

    /// The field the error names ("" for a server fault).
    pub fn field(&self) -> &str {
        match self {
            Self::BadRequest { field, .. }
            | Self::Invalid { field, .. }
            | Self::NotFound { field, .. }
            | Self::Conflict { field, .. } => field,
            Self::Unauthorized { .. }
            | Self::Forbidden { .. }
            | Self::TooManyRequests { .. }
            | Self::Internal(_) => "",
        }
    }

    /// The message shown to the user; server faults get a generic one.
    pub fn user_message(&self) -> String {
        match self {
            Self::BadRequest { message, .. }
            | Self::Invalid { message, .. }
            | Self::NotFound { message, .. }
            | Self::Conflict { message, .. }
            | Self::Unauthorized { message }
            | Self::Forbidden { message }
            | Self::TooManyRequests { message, .. } => message.clone(),
            Self::Internal(_) => "internal error; the server log has the details".to_string(),
        }
    }

    /// The reasons listed with a refusal.
    pub fn reasons(&self) -> &[String] {
        match self {
            Self::Conflict { reasons, .. } => reasons,
            _ => &[],
        }
    }
}

impl From<sqlx::Error> for AppError {
    fn from(err: sqlx::Error) -> Self {
        Self::Internal(anyhow::Error::new(err).context("database error"))
    }
}

impl IntoResponse for AppError {
    fn into_response(self) -> Response {
        if let Self::Internal(err) = &self {
            tracing::error!(error = ?err, "request failed");
        }
        let mut body = json!({"field": self.field(), "message": self.user_message()});
        if !self.reasons().is_empty() {
            body["reasons"] = json!(self.reasons());
        }
        // The id of the request being served (also in its log lines and `X-Request-Id`),
        // so a user's report leads to the server's log.
        if let Some(id) = crate::http::request_id::RequestId::current() {
            body["request_id"] = json!(id.as_str());
        }
        let mut response = (self.status(), Json(json!({ "error": body }))).into_response();
        if let Self::TooManyRequests {
            retry_after_secs, ..
        } = &self
            && let Ok(v) = axum::http::HeaderValue::from_str(&retry_after_secs.to_string())
        {
            response
                .headers_mut()
                .insert(axum::http::header::RETRY_AFTER, v);
        }
        response
    }
}
