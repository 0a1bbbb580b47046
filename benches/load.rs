//! A bounded load test against a running server (see `benches/load.sh`, which starts one on
//! the scale data and passes its address, token and database here through the environment):
//!
//! 1. single requests: the portfolio page, its API and a zone page, sequentially (p50, p99);
//!    then the API right after a booking each time (the answer is recomputed);
//! 2. mixed load: `LOAD_CONNECTIONS` keep-alive connections for `LOAD_SECONDS`, each request a
//!    portfolio read (API) or a ledger booking with its own idempotency key;
//! 3. overload: four times the server's concurrency limit, portfolio reads for 10 s: excess
//!    requests must get a fast 503, and the server must still answer afterwards;
//! 4. every booking acknowledged in phase 2 is in the database exactly once.
#![expect(clippy::unwrap_used, clippy::expect_used, reason = "a load-test binary, not a request path")]

use axum::body::Bytes;
use http_body_util::{BodyExt, Full};
use hyper_util::client::legacy::Client;
use hyper_util::client::legacy::connect::HttpConnector;
use hyper_util::rt::TokioExecutor;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

type Http = Client<HttpConnector, Full<Bytes>>;

fn env(name: &str, default: &str) -> String {
    std::env::var(name).unwrap_or_else(|_| default.to_string())
}

struct Ctx {
    client: Http,
    base: String,
    token: String,
    zones: Vec<(i64, i64)>,
}

impl Ctx {
    async fn send(&self, method: &str, path: &str, body: Option<(String, String)>) -> (u16, Duration) {
        let mut req = axum::http::Request::builder()
            .method(method)
            .uri(format!("{}{path}", self.base))
            .header("authorization", format!("Bearer {}", self.token));
        let payload = match body {
            Some((key, json)) => {
                req = req.header("content-type", "application/json").header("idempotency-key", key);
                Full::new(Bytes::from(json))
            }
            None => Full::new(Bytes::new()),
        };
        let start = Instant::now();
        match self.client.request(req.body(payload).unwrap()).await {
            Ok(res) => {
                let status = res.status().as_u16();
                let _ = res.into_body().collect().await;
                (status, start.elapsed())
            }
            Err(_) => (0, start.elapsed()),
        }
    }
}

fn pct(sorted: &[Duration], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let i = ((sorted.len() - 1) as f64 * p / 100.0).round() as usize;
    sorted[i].as_secs_f64() * 1e3
}

fn report(label: &str, mut times: Vec<Duration>, seconds: f64) {
    times.sort();
    println!(
        "{label:42} n={:7} {:8.1} req/s  p50 {:7.2} ms  p99 {:7.2} ms",
        times.len(),
        times.len() as f64 / seconds,
        pct(&times, 50.0),
        pct(&times, 99.0)
    );
}

#[tokio::main]
async fn main() {
    let base = env("LOAD_BASE", "http://127.0.0.1:8099");
    let token = std::env::var("LOAD_TOKEN").expect("LOAD_TOKEN: an API token of a controller");
    let db = std::env::var("LOAD_DB").expect("LOAD_DB: the server's database URL");
    let seconds: u64 = env("LOAD_SECONDS", "60").parse().unwrap();
    let connections: usize = env("LOAD_CONNECTIONS", "32").parse().unwrap();
    let limit: usize = env("LOAD_LIMIT", &pilot_ledger::web::MAX_IN_FLIGHT.to_string()).parse().unwrap();
    let pool = sqlx::SqlitePool::connect(&db).await.unwrap();
    let zones: Vec<(i64, i64)> = sqlx::query_as(
        "SELECT c.zone_id, MIN(d.id) FROM case_versions c JOIN benefit_drivers d ON d.case_id = c.id
         WHERE c.state = 'approved' GROUP BY c.zone_id",
    )
    .fetch_all(&pool)
    .await
    .unwrap();
    let client: Http = Client::builder(TokioExecutor::new()).pool_max_idle_per_host(4 * limit).build_http();
    let ctx = Arc::new(Ctx { client, base, token, zones });
    println!(
        "{} zones with a baseline; {connections} connections for {seconds} s; server limit {limit}",
        ctx.zones.len()
    );

    // 1. Single requests.
    let zone = ctx.zones[0].0;
    for (label, path) in [
        ("portfolio page, one at a time", "/portfolio?budget=5000000".to_string()),
        ("portfolio API, one at a time", "/api/v1/portfolio?budget=5000000".to_string()),
        ("zone page, one at a time", format!("/zones/{zone}")),
    ] {
        let _ = ctx.send("GET", &path, None).await; // warm the cache
        let mut times = Vec::new();
        let start = Instant::now();
        for _ in 0..200 {
            let (status, t) = ctx.send("GET", &path, None).await;
            assert_eq!(status, 200, "{path}");
            times.push(t);
        }
        report(label, times, start.elapsed().as_secs_f64());
    }

    // 1b. A read right after each booking: the answer is recomputed every time.
    let run = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_secs();
    let (zone, driver) = ctx.zones[1];
    for (label, path) in [
        ("portfolio page after a booking, one at a time", "/portfolio?budget=5000000"),
        ("portfolio API after a booking, one at a time", "/api/v1/portfolio?budget=5000000"),
    ] {
        let mut times = Vec::new();
        let start = Instant::now();
        for i in 0..100 {
            let body = format!(
                r#"{{"kind": "saving", "method": "direct", "item": {driver}, "period": "2026-06", "quantity": "1", "evidence": "load test"}}"#
            );
            let key = format!("probe-{run}-{path}-{i}");
            let (s, _) = ctx.send("POST", &format!("/api/v1/zones/{zone}/ledger"), Some((key, body))).await;
            assert_eq!(s, 201);
            let (s, t) = ctx.send("GET", path, None).await;
            assert_eq!(s, 200, "{path}");
            times.push(t);
        }
        report(label, times, start.elapsed().as_secs_f64());
    }

    // 2. Mixed load.
    let acked = Arc::new(Mutex::new(Vec::<String>::new()));
    let reads = Arc::new(Mutex::new(Vec::new()));
    let writes = Arc::new(Mutex::new(Vec::new()));
    let errors = Arc::new(Mutex::new(Vec::<u16>::new()));
    let deadline = Instant::now() + Duration::from_secs(seconds);
    let start = Instant::now();
    let tasks: Vec<_> = (0..connections)
        .map(|c| {
            let (ctx, acked, reads, writes, errors) =
                (ctx.clone(), acked.clone(), reads.clone(), writes.clone(), errors.clone());
            tokio::spawn(async move {
                let mut i: u64 = 0;
                while Instant::now() < deadline {
                    i += 1;
                    if i % 5 < 3 {
                        let (s, t) = ctx.send("GET", "/api/v1/portfolio?budget=5000000", None).await;
                        if s == 200 { reads.lock().unwrap().push(t) } else { errors.lock().unwrap().push(s) }
                    } else {
                        let (zone, driver) = ctx.zones[(i as usize * 7 + c * 13) % ctx.zones.len()];
                        let key = format!("load-{run}-{c}-{i}");
                        let body = format!(
                            r#"{{"kind": "saving", "method": "direct", "item": {driver}, "period": "2026-{:02}", "quantity": "{}", "evidence": "load test {key}"}}"#,
                            1 + i % 11,
                            1 + i % 90
                        );
                        let (s, t) =
                            ctx.send("POST", &format!("/api/v1/zones/{zone}/ledger"), Some((key.clone(), body))).await;
                        if s == 201 {
                            writes.lock().unwrap().push(t);
                            acked.lock().unwrap().push(key);
                        } else {
                            errors.lock().unwrap().push(s);
                        }
                    }
                }
            })
        })
        .collect();
    for t in tasks {
        t.await.unwrap();
    }
    let took = start.elapsed().as_secs_f64();
    report("mixed: portfolio reads (API)", reads.lock().unwrap().clone(), took);
    report("mixed: ledger bookings", writes.lock().unwrap().clone(), took);
    let errs = errors.lock().unwrap().clone();
    let five = errs.iter().filter(|s| **s >= 500 || **s == 0).count();
    let mut by_status = std::collections::BTreeMap::<u16, usize>::new();
    for s in &errs {
        *by_status.entry(*s).or_default() += 1;
    }
    println!("mixed: {} non-success answers {by_status:?}, of them {five} 5xx or failed connections", errs.len());

    // 3. Overload.
    let over = 4 * limit;
    let shed = Arc::new(Mutex::new(Vec::new()));
    let served = Arc::new(Mutex::new(Vec::new()));
    let deadline = Instant::now() + Duration::from_secs(10);
    let start = Instant::now();
    let tasks: Vec<_> = (0..over)
        .map(|_| {
            let (ctx, shed, served) = (ctx.clone(), shed.clone(), served.clone());
            tokio::spawn(async move {
                while Instant::now() < deadline {
                    match ctx.send("GET", "/api/v1/portfolio?budget=5000000", None).await {
                        (200, t) => served.lock().unwrap().push(t),
                        (503, t) => shed.lock().unwrap().push(t),
                        (s, _) => panic!("overload answered {s}"),
                    }
                }
            })
        })
        .collect();
    for t in tasks {
        t.await.unwrap();
    }
    let took = start.elapsed().as_secs_f64();
    report(&format!("overload ({over} connections): served"), served.lock().unwrap().clone(), took);
    report(&format!("overload ({over} connections): 503"), shed.lock().unwrap().clone(), took);
    let (after, _) = ctx.send("GET", "/api/v1/zones", None).await;
    println!("after the overload the server answers {after}");

    // 4. Every acknowledged booking exactly once.
    let acked = acked.lock().unwrap().clone();
    // Each booking's evidence names its key, so a booking stored twice shows as two rows; one
    // scan of the ledger for all of them (the evidence is not indexed).
    let stored: Vec<(String, i64)> =
        sqlx::query_as("SELECT evidence, COUNT(*) FROM ledger_entries WHERE evidence LIKE ? GROUP BY evidence")
            .bind(format!("load test load-{run}-%"))
            .fetch_all(&pool)
            .await
            .unwrap();
    let stored: std::collections::HashMap<String, i64> = stored.into_iter().collect();
    let missing = acked.iter().filter(|key| !stored.contains_key(&format!("load test {key}"))).count();
    let doubled = stored.values().filter(|n| **n > 1).count();
    println!("{} acknowledged bookings checked: {missing} missing, {doubled} stored twice", acked.len());
}
