//! Shared test helpers: a fresh database file per test, a signed-in user per role, a manual
//! clock, in-process requests and a real loopback listener.

use axum::Router;
use axum::body::Body;
use axum::http::{HeaderMap, Request, StatusCode, header};
use http_body_util::BodyExt;
use pilot_ledger::auth::{ManualClock, Role};
use pilot_ledger::{AppState, app, cli};
use serde_json::Value;
use sqlx::SqlitePool;
use std::collections::HashMap;
use std::net::SocketAddr;
use std::sync::Arc;
use tempfile::TempDir;
use tower::ServiceExt;

/// The password of every test account.
pub const PASSWORD: &str = "correct horse battery staple";

/// Where every test's clock starts: a fixed instant, so that no test depends on the day it
/// runs (months "in the future", elapsed months, token expiry). Tests move it with
/// `t.clock.advance` or start elsewhere with [`test_app_at`].
pub const TEST_NOW: time::OffsetDateTime = time::macros::datetime!(2026-11-15 10:00:00 UTC);

/// An application on its own temporary SQLite file, with one account per role (`t-lead`,
/// `t-controller`, `t-viewer`, `t-admin`); requests go out as `as_role` says (lead by default).
#[derive(Clone)]
pub struct TestApp {
    pub pool: SqlitePool,
    pub router: Router,
    pub clock: Arc<ManualClock>,
    pub cookies: HashMap<Role, String>,
    pub cookie: Option<String>,
    _dir: Arc<TempDir>,
}

/// A fresh database, migrated, with the demo plant when `demo`, on the clock at [`TEST_NOW`].
pub async fn test_app(demo: bool) -> TestApp {
    test_app_at(demo, TEST_NOW).await
}

/// [`test_app`] with the clock (and the demo's load) at `now`.
pub async fn test_app_at(demo: bool, now: time::OffsetDateTime) -> TestApp {
    let dir = tempfile::tempdir().unwrap();
    let url = format!("sqlite://{}", dir.path().join("test.db").display());
    let pool = cli::prepare(&url, demo, now).await.unwrap();
    if !demo {
        // Tests without the demo use a 10 % hurdle rate.
        let site = r#"{"format":"pilot-ledger-scenario","version":1,
            "site":{"plant_name":"Test works","currency":"EUR","hurdle_rate":"0.1"},"zones":[]}"#;
        cli::load_text(&pool, site, now).await.unwrap();
    }
    let clock = Arc::new(ManualClock::new(now));
    let router = app(AppState::new(pool.clone(), clock.clone(), false));
    let mut t = TestApp { pool, router, clock, cookies: HashMap::new(), cookie: None, _dir: Arc::new(dir) };
    for role in Role::ALL {
        let name = format!("t-{role}");
        pilot_ledger::app::users::add_user(&t.pool, "test", &name, role, PASSWORD, now).await.unwrap();
        let cookie = t.sign_in(&name, PASSWORD).await.expect("test account signs in");
        t.cookies.insert(role, cookie);
    }
    t.cookie = t.cookies.get(&Role::Lead).cloned();
    t
}

/// A response read whole.
pub struct Answer {
    pub status: StatusCode,
    pub headers: HeaderMap,
    pub location: Option<String>,
    pub text: String,
}

impl Answer {
    pub fn json(&self) -> Value {
        serde_json::from_str(&self.text).unwrap_or_else(|e| panic!("not JSON ({e}): {}", self.text))
    }

    /// The `name=value` part of a Set-Cookie for `name`, with the whole header line.
    pub fn set_cookie(&self, name: &str) -> Option<(String, String)> {
        self.headers.get_all(header::SET_COOKIE).iter().filter_map(|v| v.to_str().ok()).find_map(|line| {
            let pair = line.split(';').next()?.trim();
            pair.starts_with(&format!("{name}=")).then(|| (pair.to_string(), line.to_string()))
        })
    }
}

impl TestApp {
    /// The test clock's time.
    pub fn now(&self) -> time::OffsetDateTime {
        pilot_ledger::auth::Clock::now(self.clock.as_ref())
    }

    /// The same app, sending requests as `role` (or anonymously with `None`).
    pub fn as_role(&self, role: Option<Role>) -> TestApp {
        let mut t = self.clone();
        t.cookie = role.and_then(|r| self.cookies.get(&r).cloned());
        t
    }

    /// The same app as a new account `name` with `role` (a second lead for four-eyes tests).
    pub async fn as_new_user(&self, name: &str, role: Role) -> TestApp {
        pilot_ledger::app::users::add_user(&self.pool, "test", name, role, PASSWORD, self.now()).await.unwrap();
        let mut t = self.clone();
        t.cookie = Some(self.sign_in(name, PASSWORD).await.expect("new account signs in"));
        t
    }

    pub async fn patch_json(&self, uri: &str, body: &str) -> Answer {
        self.send_json(Request::patch(uri), body).await
    }

    /// Sign in through the form; the session cookie on success.
    pub async fn sign_in(&self, name: &str, password: &str) -> Option<String> {
        let body = format!("name={name}&password={}", password.replace(' ', "+"));
        let a = self.as_role(None).post_form("/login", &body).await;
        a.set_cookie("pl_session").map(|(pair, _)| pair)
    }

    pub async fn send(&self, mut req: Request<Body>) -> Answer {
        if let Some(c) = &self.cookie {
            req.headers_mut().insert(header::COOKIE, c.parse().unwrap());
        }
        let res = self.router.clone().oneshot(req).await.unwrap();
        let status = res.status();
        let headers = res.headers().clone();
        let location = headers.get(header::LOCATION).map(|v| v.to_str().unwrap().to_string());
        let bytes = res.into_body().collect().await.unwrap().to_bytes();
        Answer { status, headers, location, text: String::from_utf8_lossy(&bytes).into_owned() }
    }

    pub async fn get(&self, uri: &str) -> Answer {
        self.send(Request::get(uri).body(Body::empty()).unwrap()).await
    }

    pub async fn post_json(&self, uri: &str, body: &str) -> Answer {
        self.send_json(Request::post(uri), body).await
    }

    async fn send_json(&self, req: axum::http::request::Builder, body: &str) -> Answer {
        let req = req.header(header::CONTENT_TYPE, "application/json").body(Body::from(body.to_string())).unwrap();
        self.send(req).await
    }

    pub async fn post_form(&self, uri: &str, body: &str) -> Answer {
        let req = Request::post(uri)
            .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
            .body(Body::from(body.to_string()))
            .unwrap();
        self.send(req).await
    }

    /// Row counts of the business-case tables, to prove a rejected request wrote nothing.
    pub async fn counts(&self) -> [i64; 4] {
        let mut out = [0; 4];
        for (i, table) in ["zones", "case_versions", "cost_items", "benefit_drivers"].iter().enumerate() {
            let sql = format!("SELECT COUNT(*) FROM {table}");
            out[i] = sqlx::query_scalar(sqlx::AssertSqlSafe(sql)).fetch_one(&self.pool).await.unwrap();
        }
        out
    }

    /// Serve this app on a real loopback listener (port 0); returns its address.
    pub async fn listen(&self) -> SocketAddr {
        let listener = tokio::net::TcpListener::bind("127.0.0.1:0").await.unwrap();
        let addr = listener.local_addr().unwrap();
        let router = self.router.clone();
        tokio::spawn(
            async move { axum::serve(listener, router.into_make_service_with_connect_info::<SocketAddr>()).await },
        );
        addr
    }
}

/// A one-time form token as the ledger page writes into its forms' action URLs (any fresh
/// value works: the server records it when the form books).
pub fn form_token() -> String {
    static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(1);
    format!("test-{}", NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed))
}

/// The one-time token in the first action URL of `page` that starts with `action` (e.g.
/// `/zones/3/ledger?form=`).
pub fn token_in(page: &str, action: &str) -> String {
    let at = page.find(action).unwrap_or_else(|| panic!("no form posting to {action}")) + action.len();
    page[at..].chars().take_while(|c| c.is_ascii_alphanumeric() || *c == '-' || *c == '_').collect()
}

/// A database file in `dir` migrated only up to (not including) migration `before` (e.g.
/// `"0007"`), for tests of what a later migration does with older rows.
pub async fn pool_before(dir: &std::path::Path, before: &str) -> SqlitePool {
    let old = dir.join("old-migrations");
    std::fs::create_dir(&old).unwrap();
    for f in std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/migrations")).unwrap() {
        let f = f.unwrap();
        let name = f.file_name().into_string().unwrap();
        if name.as_str() < before {
            std::fs::copy(f.path(), old.join(&name)).unwrap();
        }
    }
    let url = format!("sqlite://{}", dir.join("old.db").display());
    let pool = pilot_ledger::db::connect(&url).await.unwrap();
    sqlx::migrate::Migrator::new(old.as_path()).await.unwrap().run(&pool).await.unwrap();
    pool
}
