//! Shared test helpers: a fresh database file per test, in-process requests, a real listener.

use axum::Router;
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use http_body_util::BodyExt;
use pilot_ledger::{AppState, app, cli};
use serde_json::Value;
use sqlx::SqlitePool;
use std::net::SocketAddr;
use tempfile::TempDir;
use tower::ServiceExt;

/// An application on its own temporary SQLite file.
pub struct TestApp {
    pub pool: SqlitePool,
    pub router: Router,
    _dir: TempDir,
}

/// A fresh database, migrated, with the demo plant when `demo`.
pub async fn test_app(demo: bool) -> TestApp {
    let dir = tempfile::tempdir().unwrap();
    let url = format!("sqlite://{}", dir.path().join("test.db").display());
    let pool = cli::prepare(&url, demo).await.unwrap();
    if !demo {
        // The site row is what a first run creates; tests without the demo still need one.
        let site = r#"{"format":"pilot-ledger-scenario","version":1,
            "site":{"plant_name":"Test works","currency":"EUR","hurdle_rate":"0.1"},"zones":[]}"#;
        cli::load_text(&pool, site).await.unwrap();
    }
    let router = app(AppState { pool: pool.clone() });
    TestApp { pool, router, _dir: dir }
}

/// A response read whole.
pub struct Answer {
    pub status: StatusCode,
    pub location: Option<String>,
    pub text: String,
}

impl Answer {
    pub fn json(&self) -> Value {
        serde_json::from_str(&self.text).unwrap_or_else(|e| panic!("not JSON ({e}): {}", self.text))
    }
}

impl TestApp {
    pub async fn send(&self, req: Request<Body>) -> Answer {
        let res = self.router.clone().oneshot(req).await.unwrap();
        let status = res.status();
        let location = res.headers().get(header::LOCATION).map(|v| v.to_str().unwrap().to_string());
        let bytes = res.into_body().collect().await.unwrap().to_bytes();
        Answer { status, location, text: String::from_utf8_lossy(&bytes).into_owned() }
    }

    pub async fn get(&self, uri: &str) -> Answer {
        self.send(Request::get(uri).body(Body::empty()).unwrap()).await
    }

    pub async fn post_json(&self, uri: &str, body: &str) -> Answer {
        let req = Request::post(uri)
            .header(header::CONTENT_TYPE, "application/json")
            .body(Body::from(body.to_string()))
            .unwrap();
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
        tokio::spawn(async move { axum::serve(listener, router).await });
        addr
    }
}
