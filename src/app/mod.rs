//! The application layer: one write path per action. Pages, the JSON API, CSV import and the
//! command line parse their input, then call these functions, which check it against the
//! stored state and write it with its audit row in one transaction. Rules on values live in
//! `domain`; rules against stored state and all SQL live in `db`.

pub mod cases;
pub mod cpu;
pub mod ledger;
pub mod packs;
pub mod roadmap;
pub mod site;
pub mod users;
pub mod zones;

use crate::db::DbError;
use crate::domain::FieldErrors;

/// Who acts: the name written into `*_by` columns and the audit trail.
pub type Actor<'a> = &'a str;

/// Everything an action can fail with; `web::AppError` maps it to HTTP once.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Input fields were rejected; each names its field.
    #[error("some fields are not valid: {0}")]
    Invalid(FieldErrors),
    /// No such thing.
    #[error("{0} not found")]
    NotFound(&'static str),
    /// The action conflicts with stored state (a lifecycle rule, a taken name).
    #[error("{0}")]
    Conflict(String),
    /// A failure that is ours, not the user's.
    #[error("internal error")]
    Internal(#[source] anyhow::Error),
}

impl From<DbError> for Error {
    fn from(e: DbError) -> Self {
        match e {
            DbError::NotFound(what) => Self::NotFound(what),
            DbError::Conflict(msg) => Self::Conflict(msg),
            DbError::Invalid(fields) => Self::Invalid(fields),
            other => Self::Internal(other.into()),
        }
    }
}

impl From<sqlx::Error> for Error {
    fn from(e: sqlx::Error) -> Self {
        DbError::from(e).into()
    }
}

impl From<FieldErrors> for Error {
    fn from(e: FieldErrors) -> Self {
        Self::Invalid(e)
    }
}

/// Result alias for this layer.
pub type AppResult<T> = Result<T, Error>;

/// A one-field refusal.
fn invalid(field: &str, message: impl Into<String>) -> Error {
    Error::Invalid(FieldErrors::one(field, message))
}
