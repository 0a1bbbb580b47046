//! Sign-in answer times for the three failures an attacker can tell apart only by timing: a
//! known name with a wrong password, an unknown name, and a disabled account with its right
//! password. All three should cost one argon2id verification (about 20 ms), the same.
//! `cargo bench --bench signin`; prints the median and 90th percentile per kind.
//!
//! Each sample gets a fresh application state (untimed) and its own address, so that the
//! sign-in throttle's back-off and delays never enter the figures.
#![expect(clippy::unwrap_used, reason = "a benchmark binary, not a request path")]

use axum::body::Body;
use axum::extract::ConnectInfo;
use axum::http::{Request, StatusCode, header};
use http_body_util::BodyExt;
use pilot_ledger::auth::{Role, SystemClock};
use pilot_ledger::domain::UserId;
use pilot_ledger::{AppState, app, cli};
use std::net::SocketAddr;
use std::sync::Arc;
use std::time::{Duration, Instant};
use tower::ServiceExt;

const PASSWORD: &str = "correct horse battery staple";
const SAMPLES: usize = 40;

fn main() {
    let rt = tokio::runtime::Runtime::new().unwrap();
    rt.block_on(async {
        let dir = tempfile::tempdir().unwrap();
        let url = format!("sqlite://{}", dir.path().join("bench.db").display());
        let now = time::OffsetDateTime::now_utc();
        let pool = cli::prepare(&url, false, now).await.unwrap();
        pilot_ledger::app::users::add_user(&pool, "bench", "known", Role::Viewer, PASSWORD, now).await.unwrap();
        let gone =
            pilot_ledger::app::users::add_user(&pool, "bench", "gone", Role::Viewer, PASSWORD, now).await.unwrap();
        pilot_ledger::app::users::update_user(&pool, "bench", UserId(-1), gone, Role::Viewer, false, now)
            .await
            .unwrap();
        let kinds = [
            ("known name, wrong password", "known", "wrong password 123"),
            ("unknown name", "nobody", "wrong password 123"),
            ("disabled account, right password", "gone", PASSWORD),
        ];
        let mut times: Vec<Vec<Duration>> = vec![Vec::new(); kinds.len()];
        // The first sign-in also computes the dummy hash once: warm it up untimed.
        for i in 0..=SAMPLES {
            // Interleaved, so that a change in machine load hits every kind alike.
            for (k, (_, name, password)) in kinds.iter().enumerate() {
                let router = app(AppState::new(pool.clone(), Arc::new(SystemClock), false));
                let mut req = Request::post("/login")
                    .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
                    .body(Body::from(format!("name={name}&password={}", password.replace(' ', "+"))))
                    .unwrap();
                let from: SocketAddr = format!("10.1.{}.{}:40000", i / 250, i % 250 + 1).parse().unwrap();
                req.extensions_mut().insert(ConnectInfo(from));
                let started = Instant::now();
                let res = router.oneshot(req).await.unwrap();
                let status = res.status();
                res.into_body().collect().await.unwrap();
                let took = started.elapsed();
                assert_eq!(status, StatusCode::UNAUTHORIZED, "{name}");
                if i > 0 {
                    times[k].push(took);
                }
            }
        }
        println!("sign-in failures, {SAMPLES} samples each (median, p90):");
        for ((label, _, _), t) in kinds.iter().zip(&mut times) {
            t.sort();
            let ms = |d: Duration| d.as_secs_f64() * 1e3;
            println!("  {label:<34} {:>6.1} ms {:>6.1} ms", ms(t[t.len() / 2]), ms(t[t.len() * 9 / 10]));
        }
    });
}
