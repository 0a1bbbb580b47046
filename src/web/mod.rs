//! The thin HTTP layer: state, router, middleware, and one file per area.

mod api;
mod cases;
mod chart;
mod error;
mod metrics;
mod pages;
mod zones;

pub use error::{ApiError, AppError};

use axum::extract::{FromRequest, Request};
use axum::http::{HeaderValue, StatusCode, header};
use axum::routing::{get, post};
use axum::{Form, Json, Router};
use serde::de::DeserializeOwned;
use sqlx::SqlitePool;
use std::time::Duration;
use tower_http::compression::CompressionLayer;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::services::ServeDir;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::timeout::TimeoutLayer;
use tower_http::trace::TraceLayer;

/// Largest request body accepted (a scenario or CSV upload goes through the CLI instead).
pub const BODY_LIMIT_BYTES: usize = 2 * 1024 * 1024;
/// A request taking longer than this is answered 408 and dropped.
pub const REQUEST_TIMEOUT: Duration = Duration::from_secs(30);

/// Shared state of every handler.
#[derive(Clone)]
pub struct AppState {
    /// The SQLite pool.
    pub pool: SqlitePool,
}

/// Who is writing. Accounts arrive with the next issue; until then every write is attributed
/// to this placeholder so that the `*_by` columns are already filled.
pub(crate) const ACTOR: &str = "local-user";

/// The whole application: pages, API, static files and middleware.
pub fn app(state: AppState) -> Router {
    let static_dir = concat!(env!("CARGO_MANIFEST_DIR"), "/static");
    Router::new()
        .route("/", get(pages::home))
        .route("/about", get(pages::about))
        .route("/zones", get(zones::list).post(zones::create))
        .route("/zones/{id}", get(zones::detail).post(zones::update))
        .route("/zones/{id}/cases", post(zones::new_case))
        .route("/zones/{id}/compare", get(cases::compare))
        .route("/cases/{id}", get(cases::view))
        .route("/cases/{id}/flows", get(cases::flows))
        .route("/cases/{id}/edit", get(cases::edit).post(cases::update_header))
        .route("/cases/{id}/costs", post(cases::add_cost))
        .route("/cases/{id}/costs/{item}/delete", post(cases::delete_cost))
        .route("/cases/{id}/drivers", post(cases::add_driver))
        .route("/cases/{id}/drivers/{item}/delete", post(cases::delete_driver))
        .route("/cases/{id}/copy", post(cases::copy))
        .nest("/api/v1", api::router())
        .nest_service("/static", ServeDir::new(static_dir))
        .fallback(pages::not_found)
        .with_state(state)
        .layer(SetResponseHeaderLayer::if_not_present(
            header::CONTENT_SECURITY_POLICY,
            HeaderValue::from_static("default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; frame-ancestors 'none'; form-action 'self'; base-uri 'none'"),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(header::X_CONTENT_TYPE_OPTIONS, HeaderValue::from_static("nosniff")))
        .layer(SetResponseHeaderLayer::if_not_present(header::REFERRER_POLICY, HeaderValue::from_static("same-origin")))
        .layer(CompressionLayer::new())
        .layer(RequestBodyLimitLayer::new(BODY_LIMIT_BYTES))
        .layer(TimeoutLayer::with_status_code(StatusCode::REQUEST_TIMEOUT, REQUEST_TIMEOUT))
        .layer(TraceLayer::new_for_http())
}

/// A JSON body whose rejection is answered as an [`ApiError`] (400 syntax, 415 content type,
/// 422 shape) instead of axum's plain-text default.
pub struct JsonBody<T>(pub T);

impl<S: Send + Sync, T: DeserializeOwned> FromRequest<S> for JsonBody<T> {
    type Rejection = ApiError;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        match Json::<T>::from_request(req, state).await {
            Ok(Json(v)) => Ok(Self(v)),
            Err(rejection) => {
                Err(ApiError(AppError::BadRequest { status: rejection.status(), message: rejection.body_text() }))
            }
        }
    }
}

/// A form body whose rejection is answered with the error page.
pub struct FormBody<T>(pub T);

impl<S: Send + Sync, T: DeserializeOwned> FromRequest<S> for FormBody<T> {
    type Rejection = AppError;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        match Form::<T>::from_request(req, state).await {
            Ok(Form(v)) => Ok(Self(v)),
            Err(rejection) => Err(AppError::BadRequest { status: rejection.status(), message: rejection.body_text() }),
        }
    }
}
