//! The thin HTTP layer: state, the route table with each route's permission, middleware, and
//! one file per area.

pub mod admin;
mod answers;
mod api;
pub mod auth;
mod cases;
mod chart;
mod error;
mod figures;
mod ledger;
mod metrics;
mod packs;
mod pages;
mod portfolio;
pub mod problems;
mod roadmap;
mod uncertainty;
mod zones;

pub use crate::domain::ledger_csv::{IMPORT_MAX_BYTES, IMPORT_MAX_ROWS};
pub use error::{ApiError, AppError};
pub use metrics::MAX_FLOWS;

use crate::auth::{Clock, Permission, Throttle};
use crate::domain::FieldErrors;
use crate::domain::NumberFormat;
use axum::extract::{DefaultBodyLimit, FromRequest, FromRequestParts, Request};
use axum::http::request::Parts;
use axum::http::{HeaderValue, Method, StatusCode, header};
use axum::routing::{MethodRouter, get, patch, post};
use axum::{Form, Json, Router};
use serde::Serialize;
use serde::de::DeserializeOwned;
use sqlx::SqlitePool;
use std::collections::HashMap;
use std::sync::Arc;
use std::time::Duration;
use tower_http::compression::CompressionLayer;
use tower_http::csrf::CsrfLayer;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::services::ServeDir;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::timeout::TimeoutLayer;
use tower_http::trace::TraceLayer;

/// Requests served at once; beyond that a request is refused at once with 503 and
/// `Retry-After: 1` instead of queueing (so an overload cannot pile up memory or latency). Two
/// cores and one SQLite writer are saturated well below this.
pub const MAX_IN_FLIGHT: usize = 64;

/// Requests shed since the last warning, and when that was (seconds since the Unix epoch).
static SHED: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
static SHED_WARNED_AT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

/// The answer to a request shed by the concurrency limit. Shed requests are counted and
/// logged once a second at most (they bypass the request trace: under overload, a log line
/// each would add to the load).
async fn overloaded(_: tower::BoxError) -> axum::response::Response {
    use std::sync::atomic::Ordering::Relaxed;
    SHED.fetch_add(1, Relaxed);
    let now = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_secs());
    let last = SHED_WARNED_AT.load(Relaxed);
    if now > last && SHED_WARNED_AT.compare_exchange(last, now, Relaxed, Relaxed).is_ok() {
        let shed = SHED.swap(0, Relaxed);
        tracing::warn!(shed, limit = MAX_IN_FLIGHT, "overloaded: requests refused with 503 since the last warning");
    }
    axum::response::IntoResponse::into_response((
        StatusCode::SERVICE_UNAVAILABLE,
        [(header::RETRY_AFTER, "1")],
        "busy: try again in a second",
    ))
}

/// Largest request body accepted, except by the CSV import (a scenario goes through the CLI).
pub const BODY_LIMIT_BYTES: usize = 2 * 1024 * 1024;
/// A request taking longer than this is answered 408 and dropped.
pub const REQUEST_TIMEOUT: Duration = Duration::from_secs(30);

/// Shared state of every handler.
#[derive(Clone)]
pub struct AppState {
    /// The SQLite pool.
    pub pool: SqlitePool,
    /// Where "now" comes from (tests inject a manual clock).
    pub clock: Arc<dyn Clock>,
    /// Failed sign-in counts.
    pub throttle: Arc<Throttle>,
    /// Whether cookies carry `Secure` (set when served over TLS).
    pub secure_cookies: bool,
    /// Derived figures per zone, recomputed when a zone changes.
    pub figures: Arc<figures::FigureCache>,
    /// Rendered portfolio answers, recomputed when the database has changed.
    pub answers: Arc<answers::AnswerCache>,
    permissions: Arc<HashMap<(Method, String), Permission>>,
    /// Host headers answered (lower case); empty: any (`serve --allowed-host`).
    allowed_hosts: Arc<[String]>,
}

impl AppState {
    /// State for `pool` with the given clock.
    pub fn new(pool: SqlitePool, clock: Arc<dyn Clock>, secure_cookies: bool) -> Self {
        let permissions = routes().into_iter().map(|r| ((r.method, r.path.to_string()), r.permission)).collect();
        Self {
            pool,
            clock,
            throttle: Arc::default(),
            secure_cookies,
            figures: Arc::default(),
            answers: Arc::default(),
            permissions: Arc::new(permissions),
            allowed_hosts: Arc::new([]),
        }
    }

    /// Answer only requests whose Host header is one of `hosts` (compared without case);
    /// an empty list accepts any host.
    #[must_use]
    pub fn with_allowed_hosts(mut self, hosts: Vec<String>) -> Self {
        self.allowed_hosts = hosts.into_iter().map(|h| h.to_ascii_lowercase()).collect();
        self
    }
}

/// Refuse (400) a request whose Host header is not an allowed host, when a list is set: a page
/// reached through another name (DNS rebinding, a forged Host header) is not served (OWASP Web
/// Security Testing Guide, "Testing for Host Header Injection"). HTTP/2 sends the host as the
/// URI's authority instead.
async fn check_host(
    axum::extract::State(state): axum::extract::State<AppState>,
    req: Request,
    next: axum::middleware::Next,
) -> axum::response::Response {
    if state.allowed_hosts.is_empty() {
        return next.run(req).await;
    }
    let host = req
        .headers()
        .get(header::HOST)
        .and_then(|v| v.to_str().ok())
        .or_else(|| req.uri().authority().map(|a| a.as_str()))
        .unwrap_or_default()
        .to_ascii_lowercase();
    if state.allowed_hosts.contains(&host) {
        return next.run(req).await;
    }
    let shown: String = host.chars().take(100).collect();
    let e = AppError::BadRequest {
        status: StatusCode::BAD_REQUEST,
        message: format!("this server does not answer for host \"{shown}\"; use the address it is published under"),
    };
    e.answer_for(req.uri().path())
}

/// One route: method, path, the permission it needs, and its handler.
pub struct Route {
    /// HTTP method.
    pub method: Method,
    /// Path pattern as axum spells it (`/zones/{id}`).
    pub path: &'static str,
    /// What the caller must hold.
    pub permission: Permission,
    handler: MethodRouter<AppState>,
    /// Largest request body.
    pub body_limit: usize,
}

impl Route {
    /// Accept bodies up to `bytes` on this route.
    fn body_limit(mut self, bytes: usize) -> Self {
        self.body_limit = bytes;
        self
    }
}

/// A route of the table: nothing can be routed without naming its permission.
fn route(method: Method, path: &'static str, permission: Permission, handler: MethodRouter<AppState>) -> Route {
    Route { method, path, permission, handler, body_limit: BODY_LIMIT_BYTES }
}

/// Every route of the application with its permission: the router is built from this list,
/// the authorization middleware reads it, and the role x route test walks it.
pub fn routes() -> Vec<Route> {
    use Permission::{Admin, EditCases, Ledger, Public, Read, SignedIn};
    let (g, p) = (Method::GET, Method::POST);
    vec![
        route(g.clone(), "/login", Public, get(auth::login_page)),
        route(p.clone(), "/login", Public, post(auth::login)),
        route(p.clone(), "/logout", SignedIn, post(auth::logout)),
        route(g.clone(), "/about", Public, get(pages::about)),
        route(g.clone(), "/", SignedIn, get(pages::home)),
        route(g.clone(), "/zones", Read, get(zones::list)),
        route(p.clone(), "/zones", EditCases, post(zones::create)),
        route(g.clone(), "/zones/{id}", Read, get(zones::detail)),
        route(p.clone(), "/zones/{id}", EditCases, post(zones::update)),
        route(p.clone(), "/zones/{id}/cases", EditCases, post(zones::new_case)),
        route(p.clone(), "/zones/{id}/readiness", EditCases, post(zones::rate_readiness)),
        route(g.clone(), "/zones/{id}/compare", Read, get(cases::compare)),
        route(g.clone(), "/cases/{id}", Read, get(cases::view)),
        route(g.clone(), "/cases/{id}/flows", Read, get(cases::flows)),
        route(g.clone(), "/cases/{id}/edit", Read, get(cases::edit)),
        route(p.clone(), "/cases/{id}/edit", EditCases, post(cases::update_header)),
        route(p.clone(), "/cases/{id}/costs", EditCases, post(cases::add_cost)),
        route(p.clone(), "/cases/{id}/costs/{item}/delete", EditCases, post(cases::delete_cost)),
        route(p.clone(), "/cases/{id}/drivers", EditCases, post(cases::add_driver)),
        route(p.clone(), "/cases/{id}/drivers/{item}/delete", EditCases, post(cases::delete_driver)),
        route(p.clone(), "/cases/{id}/copy", EditCases, post(cases::copy)),
        route(p.clone(), "/cases/{id}/submit", EditCases, post(cases::submit)),
        route(p.clone(), "/cases/{id}/approve", EditCases, post(cases::approve)),
        route(p.clone(), "/cases/{id}/reject", EditCases, post(cases::reject)),
        route(g.clone(), "/zones/{id}/ledger", Read, get(ledger::show)),
        route(p.clone(), "/zones/{id}/ledger", Ledger, post(ledger::book)),
        route(p.clone(), "/zones/{id}/ledger/{entry}/reverse", Ledger, post(ledger::reverse)),
        // The file plus room for the multipart framing.
        route(p.clone(), "/zones/{id}/ledger/import", Ledger, post(ledger::import))
            .body_limit(IMPORT_MAX_BYTES + 64 * 1024),
        route(g.clone(), "/zones/{id}/ledger.csv", Read, get(ledger::export_zone)),
        route(g.clone(), "/ledger.csv", Read, get(ledger::export_all)),
        route(g.clone(), "/portfolio", Read, get(portfolio::page)),
        route(g.clone(), "/portfolio.csv", Read, get(portfolio::csv)),
        route(g.clone(), "/api/v1/portfolio", Read, get(portfolio::api)),
        // The roadmap page, its CSV and the save form.
        route(g.clone(), "/roadmap", Read, get(roadmap::page::page)),
        route(g.clone(), "/roadmap.csv", Read, get(roadmap::csv::csv)),
        route(p.clone(), "/roadmap/plans", EditCases, post(roadmap::page::save)),
        route(g.clone(), "/admin", Admin, get(admin::page)),
        route(p.clone(), "/admin/users", Admin, post(admin::add_user)),
        route(p.clone(), "/admin/users/{id}", Admin, post(admin::update_user)),
        route(p.clone(), "/admin/users/{id}/password", Admin, post(admin::reset_password)),
        route(p.clone(), "/admin/tokens", Admin, post(admin::create_token)),
        route(p.clone(), "/admin/tokens/{id}/revoke", Admin, post(admin::revoke_token)),
        route(p.clone(), "/admin/settings", Admin, post(admin::update_settings)),
        route(p.clone(), "/admin/readiness", Admin, post(admin::update_weights)),
        route(g.clone(), "/admin/audit", Admin, get(admin::audit)),
        route(g.clone(), "/api/v1/openapi.json", Public, get(api::openapi)),
        route(p.clone(), "/api/v1/metrics", Read, post(metrics::metrics)).body_limit(metrics::METRICS_MAX_BYTES),
        route(g.clone(), "/api/v1/zones", Read, get(api::list_zones)),
        route(p.clone(), "/api/v1/zones", EditCases, post(api::create_zone)),
        route(g.clone(), "/api/v1/zones/{id}", Read, get(api::get_zone)),
        route(Method::PATCH, "/api/v1/zones/{id}", EditCases, patch(api::patch_zone)),
        route(p.clone(), "/api/v1/zones/{id}/cases", EditCases, post(api::create_case)),
        route(g.clone(), "/api/v1/cases/{id}", Read, get(api::get_case)),
        route(p.clone(), "/api/v1/cases/{id}/copy", EditCases, post(api::copy_case)),
        route(p.clone(), "/api/v1/cases/{id}/submit", EditCases, post(api::submit_case)),
        route(p.clone(), "/api/v1/cases/{id}/approve", EditCases, post(api::approve_case)),
        route(p.clone(), "/api/v1/cases/{id}/reject", EditCases, post(api::reject_case)),
        route(p.clone(), "/api/v1/zones/{id}/status", EditCases, post(api::zone_status)),
        route(g.clone(), "/api/v1/site", Admin, get(api::get_site)),
        route(Method::PATCH, "/api/v1/site", Admin, patch(api::patch_site)),
        route(g.clone(), "/api/v1/zones/{id}/ledger", Read, get(ledger::api_show)),
        route(p.clone(), "/api/v1/zones/{id}/ledger", Ledger, post(ledger::api_book)),
        route(p.clone(), "/api/v1/zones/{id}/ledger/{entry}/reverse", Ledger, post(ledger::api_reverse)),
        // Decision packs: made by whoever edits cases, read by every role.
        // The roadmap's API (issue 14).
        route(g.clone(), "/api/v1/roadmap", Read, get(roadmap::api)),
        route(g.clone(), "/api/v1/roadmap/plans", Read, get(roadmap::api_plans)),
        route(p.clone(), "/api/v1/roadmap/plans", EditCases, post(roadmap::api_save_plan)),
        route(g.clone(), "/api/v1/roadmap/plans/{id}", Read, get(roadmap::api_plan)),
        route(g.clone(), "/packs", Read, get(packs::list)),
        route(g.clone(), "/packs/{id}", Read, get(packs::show)),
        route(p.clone(), "/cases/{id}/packs", EditCases, post(packs::page_make_case)),
        route(p.clone(), "/portfolio/packs", EditCases, post(packs::page_make_portfolio)),
        route(g.clone(), "/api/v1/packs", Read, get(packs::api_list)),
        route(g, "/api/v1/packs/{id}", Read, get(packs::api_get)),
        route(p.clone(), "/api/v1/cases/{id}/packs", EditCases, post(packs::api_make_case)),
        route(p, "/api/v1/portfolio/packs", EditCases, post(packs::api_make_portfolio)),
    ]
}

/// The whole application: pages, API, static files and middleware.
pub fn app(state: AppState) -> Router {
    let static_dir = concat!(env!("CARGO_MANIFEST_DIR"), "/static");
    let mut router = Router::new();
    for r in routes() {
        // axum's extractors (form, JSON, multipart) stop reading at the route's limit with a 413.
        let limit = r.body_limit;
        let handler = r.handler.layer(DefaultBodyLimit::max(limit)).layer(axum::middleware::from_fn(
            move |req: Request, next: axum::middleware::Next| name_the_limit(limit, req, next),
        ));
        router = router.route(r.path, handler);
    }
    let router = router
        .method_not_allowed_fallback(method_not_allowed)
        .route_layer(axum::middleware::from_fn_with_state(state.clone(), auth::authorize))
        .route_layer(axum::middleware::from_fn_with_state(state.clone(), site_numbers))
        .nest_service("/static", ServeDir::new(static_dir))
        .fallback(pages::not_found)
        .with_state(state.clone());
    let hosts = axum::middleware::from_fn_with_state(state.clone(), check_host);
    answer_panics(router)
        .layer(hosts)
        // Cross-site form posts are refused by Sec-Fetch-Site / Origin (no token state needed).
        // Scripts with a Bearer token send neither header and pass; browsers cannot attach a
        // Bearer token by themselves.
        .layer(CsrfLayer::new())
        .layer(SetResponseHeaderLayer::if_not_present(
            header::CONTENT_SECURITY_POLICY,
            HeaderValue::from_static(
                "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; frame-ancestors 'none'; form-action 'self'; base-uri 'none'",
            ),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(header::X_CONTENT_TYPE_OPTIONS, HeaderValue::from_static("nosniff")))
        .layer(SetResponseHeaderLayer::if_not_present(header::X_FRAME_OPTIONS, HeaderValue::from_static("DENY")))
        .layer(SetResponseHeaderLayer::if_not_present(header::REFERRER_POLICY, HeaderValue::from_static("same-origin")))
        .layer(SetResponseHeaderLayer::if_not_present(header::CACHE_CONTROL, HeaderValue::from_static("no-store")))
        .layer(CompressionLayer::new())
        // Above every route's own limit: refuses a declared oversized body before it is read.
        .layer(RequestBodyLimitLayer::new(IMPORT_MAX_BYTES + 1024 * 1024))
        .layer(TimeoutLayer::with_status_code(StatusCode::REQUEST_TIMEOUT, REQUEST_TIMEOUT))
        .layer(TraceLayer::new_for_http())
        .layer(
            tower::ServiceBuilder::new()
                .layer(axum::error_handling::HandleErrorLayer::new(overloaded))
                .load_shed()
                .concurrency_limit(MAX_IN_FLIGHT),
        )
        .layer(axum::middleware::from_fn(api_errors_as_json))
}

/// A known path asked with a method it does not have: 405 (axum adds the `Allow` header), in
/// the JSON error format under `/api/`.
async fn method_not_allowed(uri: axum::http::Uri) -> axum::response::Response {
    let error = AppError::BadRequest {
        status: StatusCode::METHOD_NOT_ALLOWED,
        message: "this path does not take this method; the Allow header lists those it takes".into(),
    };
    error.answer_for(uri.path())
}

/// Answer a body refused by the route's size limit with a message that names the limit (the
/// extractors' own message, "length limit exceeded", does not say what the limit is).
async fn name_the_limit(limit: usize, req: Request, next: axum::middleware::Next) -> axum::response::Response {
    let path = req.uri().path().to_string();
    let res = next.run(req).await;
    if res.status() != StatusCode::PAYLOAD_TOO_LARGE {
        return res;
    }
    // An import's limit carries room for the multipart framing: name the file's whole MiB.
    let size = if limit >= 1 << 20 { format!("{} MiB", limit >> 20) } else { format!("{} KiB", limit >> 10) };
    let error = AppError::BadRequest {
        status: StatusCode::PAYLOAD_TOO_LARGE,
        message: format!("the body is larger than the {size} this request accepts; nothing was changed"),
    };
    error.answer_for(&path)
}

/// Marks the answer to a request whose handler panicked.
#[derive(Clone, Copy)]
struct Panicked;

/// Answer a panic in `router` as a 500 without detail (the error page, or JSON under `/api/`)
/// instead of dropping the connection; the panic message goes to the log. The write
/// transaction of a panicked request is dropped, so nothing is written.
pub fn answer_panics(router: Router) -> Router {
    router
        .layer(tower_http::catch_panic::CatchPanicLayer::custom(|panic: Box<dyn std::any::Any + Send>| {
            let what = panic
                .downcast_ref::<String>()
                .map(String::as_str)
                .or_else(|| panic.downcast_ref::<&str>().copied())
                .unwrap_or("(no message)");
            tracing::error!(panic = what, "a request handler panicked");
            let mut res = axum::response::IntoResponse::into_response(AppError::Internal(anyhow::anyhow!("panic")));
            res.extensions_mut().insert(Panicked);
            res
        }))
        .layer(axum::middleware::from_fn(|req: Request, next: axum::middleware::Next| async move {
            let api = req.uri().path().starts_with("/api/");
            let res = next.run(req).await;
            if api && res.extensions().get::<Panicked>().is_some() {
                return axum::response::IntoResponse::into_response(ApiError(AppError::Internal(anyhow::anyhow!(
                    "panic"
                ))));
            }
            res
        }))
}

/// Answer a page or export with the site's number format as [`NumberFormat::current`], which
/// `Display` of money and percentages and every form reader use, and the plant's time zone as
/// [`crate::domain::PlantZone::current`], in which pages show timestamps. The API reads and
/// writes plain decimals and stored UTC timestamps whatever the site's settings, so its
/// requests skip the lookup.
async fn site_numbers(
    axum::extract::State(state): axum::extract::State<AppState>,
    req: Request,
    next: axum::middleware::Next,
) -> axum::response::Response {
    use axum::response::IntoResponse;
    if req.uri().path().starts_with("/api/") {
        return next.run(req).await;
    }
    let (numbers, zone) = match crate::db::page_settings(&state.pool).await {
        Ok(settings) => settings,
        Err(e) => {
            // Guessing a format could misread a figure by a factor of 1000; refuse instead.
            tracing::error!(error = ?e, "number format unreadable; answering 503");
            return numbers_unavailable().into_response();
        }
    };
    let answer = async move {
        // A GET form (the portfolio query) carries its shown format in the query string.
        let shown = axum::extract::Query::<ShownFormat>::try_from_uri(req.uri()).ok();
        match shown.map_or(Ok(()), |q| q.0.check()) {
            Ok(()) => next.run(req).await,
            Err(e) => e.into_response(),
        }
    };
    numbers.scope(zone.scope(answer)).await
}

/// The answer when the site's number format cannot be read: no figure can be read or written
/// safely, so nothing is served (the API does not depend on it and is not refused).
fn numbers_unavailable() -> AppError {
    AppError::BadRequest {
        status: StatusCode::SERVICE_UNAVAILABLE,
        message: "the site's number format cannot be read just now; nothing was changed, try again shortly".into(),
    }
}

/// The refusal of a form shown in another number format than the site's current one.
pub const FORMAT_CHANGED: &str =
    "the site's number format changed since this form was shown; check the figures and submit again";

/// The format a form that carries numbers was shown in, from its hidden field
/// `shown_number_format` (not `number_format`: the settings form's field of that name is the
/// new setting); absent (a script posting a form) means the current format.
#[derive(serde::Deserialize)]
struct ShownFormat {
    shown_number_format: Option<String>,
}

impl ShownFormat {
    /// Refuse (422) a form shown in another format than [`NumberFormat::current`]: `1.250` is
    /// valid in both formats, so reading it in the new one would be silently wrong.
    fn check(&self) -> Result<(), AppError> {
        match self.shown_number_format.as_deref().map(str::trim) {
            Some(shown) if !shown.is_empty() && shown != NumberFormat::current().as_str() => {
                Err(AppError::BadRequest { status: StatusCode::UNPROCESSABLE_ENTITY, message: FORMAT_CHANGED.into() })
            }
            _ => Ok(()),
        }
    }
}

/// A JSON body whose rejection is answered as an [`ApiError`] (400 syntax, 415 content type,
/// 422 shape) instead of axum's plain-text default. A field the body type does not have is a
/// 422 naming it (`costs[0].amout`): a typo is never silently ignored.
///
/// Unknown fields are found by comparing the keys sent with the keys of the parsed body written
/// back, rather than by `#[serde(deny_unknown_fields)]`, which cannot be combined with the
/// `flatten` that scenario files use on the same input types.
pub struct JsonBody<T>(pub T);

impl<S: Send + Sync, T: DeserializeOwned + Serialize> FromRequest<S> for JsonBody<T> {
    type Rejection = ApiError;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        // One parse into a `Value` (content type, syntax, nesting depth and number range are
        // checked here, answered 415 or 400), then the body type is built from that same value:
        // a second parse of the bytes could fail where the first passed (an ignored field
        // holding `1e400`), which would be a 500.
        let Json(sent) = Json::<serde_json::Value>::from_request(req, state)
            .await
            .map_err(|r| ApiError(AppError::BadRequest { status: r.status(), message: r.body_text() }))?;
        // serde builds a struct from an array too (`[null, null]` as its first two fields); a
        // body is an object of named fields. (A type with `flatten` refuses an array itself.)
        if !struct_fields::<T>().is_empty() && !sent.is_object() {
            return Err(not_an_object());
        }
        let parsed = serde_path_to_error::deserialize(&sent).map_err(|e| {
            ApiError(AppError::BadRequest {
                status: StatusCode::UNPROCESSABLE_ENTITY,
                message: format!("Failed to deserialize the JSON body into the target type: {e}"),
            })
        })?;
        let known = serde_json::to_value(&parsed).map_err(|e| ApiError(AppError::Internal(e.into())))?;
        let mut unknown = FieldErrors::default();
        unknown_fields(&sent, &known, "", &mut unknown);
        if unknown.is_empty() { Ok(Self(parsed)) } else { Err(ApiError(AppError::Invalid(unknown))) }
    }
}

fn not_an_object() -> ApiError {
    ApiError(AppError::BadRequest {
        status: StatusCode::UNPROCESSABLE_ENTITY,
        message: "the body must be a JSON object of named fields".into(),
    })
}

/// Record every key of `sent` that `known` (the parsed body written back) lacks, by its path.
fn unknown_fields(sent: &serde_json::Value, known: &serde_json::Value, path: &str, out: &mut FieldErrors) {
    use serde_json::Value;
    let join = |key: &str| if path.is_empty() { key.to_string() } else { format!("{path}.{key}") };
    match (sent, known) {
        (Value::Object(sent), Value::Object(known)) => {
            for (key, value) in sent {
                match known.get(key) {
                    Some(k) => unknown_fields(value, k, &join(key), out),
                    None => {
                        let expected: Vec<&str> = known.keys().map(String::as_str).collect();
                        out.push(join(key), format!("unknown field; expected one of: {}", expected.join(", ")));
                    }
                }
            }
        }
        (Value::Array(sent), Value::Array(known)) => {
            for (i, (s, k)) in sent.iter().zip(known).enumerate() {
                unknown_fields(s, k, &format!("{path}[{i}]"), out);
            }
        }
        _ => {}
    }
}

/// A form body whose rejection is answered with the error page. A form shown in another
/// number format than the site's current one is refused (hidden field `shown_number_format`).
pub struct FormBody<T>(pub T);

impl<S: Send + Sync, T: DeserializeOwned> FromRequest<S> for FormBody<T> {
    type Rejection = AppError;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        let (parts, body) = req.into_parts();
        let bytes = axum::body::Bytes::from_request(Request::from_parts(parts.clone(), body), state)
            .await
            .map_err(|r| AppError::BadRequest { status: r.status(), message: r.body_text() })?;
        // Other fields are ignored here; a malformed body is refused by the typed read below.
        if let Ok(shown) = serde_urlencoded::from_bytes::<ShownFormat>(&bytes) {
            shown.check()?;
        }
        match Form::<T>::from_request(Request::from_parts(parts, axum::body::Body::from(bytes)), state).await {
            Ok(Form(v)) => Ok(Self(v)),
            Err(rejection) => Err(AppError::BadRequest { status: rejection.status(), message: rejection.body_text() }),
        }
    }
}

/// A path extractor for the API whose rejection is an [`ApiError`]: a parameter that cannot
/// name anything (`/api/v1/zones/abc`) is a 404 whose `fields` names the parameter, instead of
/// axum's plain-text 400.
pub struct ApiPath<T>(pub T);

impl<S: Send + Sync, T: DeserializeOwned + Send> FromRequestParts<S> for ApiPath<T> {
    type Rejection = ApiError;

    async fn from_request_parts(parts: &mut Parts, state: &S) -> Result<Self, Self::Rejection> {
        use axum::extract::path::ErrorKind;
        use axum::extract::rejection::PathRejection;
        let e = match axum::extract::Path::<T>::from_request_parts(parts, state).await {
            Ok(axum::extract::Path(v)) => return Ok(Self(v)),
            Err(PathRejection::FailedToDeserializePathParams(e)) => e,
            Err(other) => return Err(ApiError(AppError::Internal(anyhow::anyhow!("path parameters: {other}")))),
        };
        // Tuples report a position; the route's parameters give its name.
        let names: Vec<String> = axum::extract::RawPathParams::from_request_parts(parts, state)
            .await
            .map(|raw| raw.iter().map(|(k, _)| k.to_string()).collect())
            .unwrap_or_default();
        let (key, value) = match e.kind() {
            ErrorKind::ParseErrorAtKey { key, value, .. } | ErrorKind::DeserializeError { key, value, .. } => {
                (key.clone(), value.clone())
            }
            ErrorKind::ParseErrorAtIndex { index, value, .. } => {
                (names.get(*index).cloned().unwrap_or_else(|| format!("#{index}")), value.clone())
            }
            ErrorKind::ParseError { value, .. } => (names.first().cloned().unwrap_or_default(), value.clone()),
            ErrorKind::InvalidUtf8InPathParam { key } => (key.clone(), String::new()),
            other => return Err(ApiError(AppError::Internal(anyhow::anyhow!("path parameters: {other}")))),
        };
        let message = format!("an id is a whole number, not {value:?}");
        Err(ApiError(AppError::InvalidPath(FieldErrors::one(key, message))))
    }
}

/// A query extractor for the API whose rejection is an [`ApiError`] 422 naming the parameter:
/// a parameter the query type does not have is refused (`rnak=irr` is never silently ignored),
/// as [`JsonBody`] does for body fields. `T` is a struct of optional text fields.
pub struct ApiQuery<T>(pub T);

impl<S: Send + Sync, T: DeserializeOwned> FromRequestParts<S> for ApiQuery<T> {
    type Rejection = ApiError;

    async fn from_request_parts(parts: &mut Parts, _: &S) -> Result<Self, Self::Rejection> {
        let query = parts.uri.query().unwrap_or_default();
        let pairs: Vec<(String, String)> = serde_urlencoded::from_str(query).map_err(|e| {
            ApiError(AppError::BadRequest {
                status: StatusCode::BAD_REQUEST,
                message: format!("the query string cannot be read: {e}"),
            })
        })?;
        let known = struct_fields::<T>();
        let mut errors = FieldErrors::default();
        for (name, _) in &pairs {
            if !known.contains(&name.as_str()) {
                let expected = if known.is_empty() { "none".to_string() } else { known.join(", ") };
                errors.push(name.clone(), format!("unknown query parameter; expected one of: {expected}"));
            }
        }
        let mut seen = std::collections::HashSet::new();
        for (name, _) in &pairs {
            if known.contains(&name.as_str()) && !seen.insert(name.as_str()) {
                errors.push(name.clone(), "given more than once; give it once");
            }
        }
        if !errors.is_empty() {
            return Err(ApiError(AppError::Invalid(errors)));
        }
        serde_urlencoded::from_str(query).map(Self).map_err(|e| {
            ApiError(AppError::BadRequest {
                status: StatusCode::UNPROCESSABLE_ENTITY,
                message: format!("the query string does not fit: {e}"),
            })
        })
    }
}

/// The query of an API route that takes none: any parameter is refused with 422 naming it.
#[derive(serde::Deserialize)]
pub struct NoQuery {}

/// The field names of the struct `T` deserializes as, read from what serde's derive passes to
/// `deserialize_struct` (so a field added to the query type is known at once); empty for other
/// types.
fn struct_fields<T: DeserializeOwned>() -> &'static [&'static str] {
    use serde::de::{self, Visitor};
    struct Names(&'static [&'static str]);
    impl<'de> de::Deserializer<'de> for &mut Names {
        type Error = de::value::Error;
        fn deserialize_any<V: Visitor<'de>>(self, _: V) -> Result<V::Value, Self::Error> {
            Err(de::Error::custom("only a struct's field names are read"))
        }
        fn deserialize_struct<V: Visitor<'de>>(
            self,
            _: &'static str,
            fields: &'static [&'static str],
            _: V,
        ) -> Result<V::Value, Self::Error> {
            self.0 = fields;
            Err(de::Error::custom("only a struct's field names are read"))
        }
        serde::forward_to_deserialize_any! {
            bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string bytes byte_buf option unit
            unit_struct newtype_struct seq tuple tuple_struct map enum identifier ignored_any
        }
    }
    let mut names = Names(&[]);
    let _ = T::deserialize(&mut names);
    names.0
}

/// Answer every error under `/api/` in the JSON error format, including those no handler
/// wrote: the body limit's 413, the timeout's 408, the overload 503 and the CSRF refusal.
async fn api_errors_as_json(req: Request, next: axum::middleware::Next) -> axum::response::Response {
    use axum::response::IntoResponse;
    if !req.uri().path().starts_with("/api/") {
        return next.run(req).await;
    }
    let res = next.run(req).await;
    let status = res.status();
    let is_json = res
        .headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.starts_with("application/json"));
    if status.as_u16() < 400 || is_json {
        return res;
    }
    let (mut parts, body) = res.into_parts();
    let text = axum::body::to_bytes(body, 4096).await.ok().and_then(|b| String::from_utf8(b.to_vec()).ok());
    let reason = status.canonical_reason().unwrap_or("error").to_lowercase();
    let message = match text.as_deref().map(str::trim) {
        Some(t) if !t.is_empty() && !t.starts_with('<') => t.to_string(),
        _ => reason,
    };
    parts.headers.remove(header::CONTENT_TYPE);
    parts.headers.remove(header::CONTENT_LENGTH);
    parts.headers.remove(header::CONTENT_ENCODING);
    let json = ApiError(AppError::BadRequest { status, message }).into_response();
    let (json_parts, json_body) = json.into_parts();
    parts.headers.extend(json_parts.headers);
    axum::response::Response::from_parts(parts, json_body)
}
