//! The web layer's one error type, mapped to HTTP in one place. Pages get the error template;
//! `/api/v1` gets JSON (the [`ApiError`] wrapper). Details are logged, never shown.

use crate::db::DbError;
use crate::domain::FieldErrors;
use askama::Template;
use axum::Json;
use axum::http::StatusCode;
use axum::response::{Html, IntoResponse, Response};
use serde_json::json;

/// Everything a handler can fail with.
#[derive(Debug, thiserror::Error)]
pub enum AppError {
    /// Input fields were rejected (422); each names its field.
    #[error("some fields are not valid: {0}")]
    Invalid(FieldErrors),
    /// A path parameter cannot name anything (404); each names its parameter (`id`).
    #[error("no such resource: {0}")]
    InvalidPath(FieldErrors),
    /// Request headers were rejected (400); each names its header (`Idempotency-Key`).
    #[error("some request headers are not valid: {0}")]
    InvalidHeader(FieldErrors),
    /// The body could not be read as the expected format (400 or 415).
    #[error("{message}")]
    BadRequest {
        /// Status to answer with.
        status: StatusCode,
        /// What was wrong.
        message: String,
    },
    /// Not signed in, or the token is unknown or revoked (401).
    #[error("sign in first, or send a valid API token as Authorization: Bearer <token>")]
    Unauthenticated,
    /// The API token has expired (401), on this day (UTC).
    #[error("this token expired on {0}; ask an admin for a new one")]
    TokenExpired(time::Date),
    /// Signed in, but the role does not allow this (403).
    #[error("your role does not allow this")]
    Forbidden,
    /// No such thing (404).
    #[error("{0} not found")]
    NotFound(&'static str),
    /// The request conflicts with stored state (409), e.g. a taken zone code.
    #[error("{0}")]
    Conflict(String),
    /// A failure that is ours, not the user's (500; logged with detail).
    #[error("internal error")]
    Internal(#[source] anyhow::Error),
}

impl AppError {
    /// The HTTP status for this error.
    pub fn status(&self) -> StatusCode {
        match self {
            Self::Invalid(_) => StatusCode::UNPROCESSABLE_ENTITY,
            Self::InvalidPath(_) => StatusCode::NOT_FOUND,
            Self::InvalidHeader(_) => StatusCode::BAD_REQUEST,
            Self::BadRequest { status, .. } => *status,
            Self::Unauthenticated | Self::TokenExpired(_) => StatusCode::UNAUTHORIZED,
            Self::Forbidden => StatusCode::FORBIDDEN,
            Self::NotFound(_) => StatusCode::NOT_FOUND,
            Self::Conflict(_) => StatusCode::CONFLICT,
            Self::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }

    /// What the user is told.
    pub fn public_message(&self) -> String {
        match self {
            Self::Internal(_) => {
                "Something went wrong on our side; nothing was changed. The details are in the server log.".into()
            }
            other => other.to_string(),
        }
    }

    fn log(&self) {
        if let Self::Internal(e) = self {
            tracing::error!(error = ?e, "request failed");
        }
    }
}

impl From<DbError> for AppError {
    fn from(e: DbError) -> Self {
        match e {
            DbError::NotFound(what) => Self::NotFound(what),
            DbError::Conflict(msg) => Self::Conflict(msg),
            DbError::Invalid(fields) => Self::Invalid(fields),
            other => Self::Internal(other.into()),
        }
    }
}

impl From<crate::app::Error> for AppError {
    fn from(e: crate::app::Error) -> Self {
        use crate::app::Error as E;
        match e {
            E::Invalid(fields) => Self::Invalid(fields),
            E::NotFound(what) => Self::NotFound(what),
            E::Conflict(msg) => Self::Conflict(msg),
            E::Internal(e) => Self::Internal(e),
        }
    }
}

impl From<FieldErrors> for AppError {
    fn from(e: FieldErrors) -> Self {
        Self::Invalid(e)
    }
}

impl From<askama::Error> for AppError {
    fn from(e: askama::Error) -> Self {
        Self::Internal(e.into())
    }
}

impl From<sqlx::Error> for AppError {
    fn from(e: sqlx::Error) -> Self {
        DbError::from(e).into()
    }
}

/// The error page.
#[derive(Template)]
#[template(path = "error.html")]
struct ErrorPage {
    nav: super::auth::Nav,
    status: u16,
    reason: &'static str,
    message: String,
    fields: FieldErrors,
}

impl IntoResponse for AppError {
    fn into_response(self) -> Response {
        self.log();
        let status = self.status();
        let fields = match &self {
            Self::Invalid(f) | Self::InvalidPath(f) | Self::InvalidHeader(f) => f.clone(),
            _ => FieldErrors::default(),
        };
        let page = ErrorPage {
            nav: super::auth::Nav::default(),
            status: status.as_u16(),
            reason: status.canonical_reason().unwrap_or("Error"),
            message: self.public_message(),
            fields,
        };
        match page.render() {
            Ok(html) => (status, Html(html)).into_response(),
            Err(e) => {
                tracing::error!(error = ?e, "error page failed to render");
                (status, self.public_message()).into_response()
            }
        }
    }
}

/// [`AppError`] answered as JSON: `{"error": "...", "fields": [{"field", "message"}]}`.
#[derive(Debug)]
pub struct ApiError(pub AppError);

impl<E: Into<AppError>> From<E> for ApiError {
    fn from(e: E) -> Self {
        Self(e.into())
    }
}

impl AppError {
    /// This error answered in the format of `path`: the JSON error format under `/api/`, the
    /// error page elsewhere (for answers written outside a handler: middleware, fallbacks).
    pub fn answer_for(self, path: &str) -> Response {
        if path.starts_with("/api/") { ApiError(self).into_response() } else { self.into_response() }
    }
}

impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        self.0.log();
        let fields = match &self.0 {
            AppError::Invalid(f) | AppError::InvalidPath(f) | AppError::InvalidHeader(f) => f.clone(),
            _ => FieldErrors::default(),
        };
        let body = json!({ "error": self.0.public_message(), "fields": fields });
        let mut res = (self.0.status(), Json(body)).into_response();
        // RFC 6750 section 3: a bad (here: expired) token is `error="invalid_token"`.
        let challenge = match self.0 {
            AppError::Unauthenticated => Some("Bearer"),
            AppError::TokenExpired(_) => Some("Bearer error=\"invalid_token\""),
            _ => None,
        };
        if let Some(challenge) = challenge {
            res.headers_mut()
                .insert(axum::http::header::WWW_AUTHENTICATE, axum::http::HeaderValue::from_static(challenge));
        }
        res
    }
}
