//! Crash safety: the server is killed with SIGKILL in the middle of concurrent ledger writes,
//! and every write a client saw acknowledged must survive, exactly once, in a database whose
//! integrity check passes; the server then starts again on the same file.

use crate::cli::{BIN, db_url, serve};
use std::io::{Read, Write};
use std::net::TcpStream;
use std::process::Command;
use std::sync::{Arc, Mutex};
use std::time::Duration;

/// POST a JSON booking; the status code, or `None` when the connection failed.
fn book(addr: &str, path: &str, token: &str, key: &str, body: &str) -> Option<u16> {
    let mut stream = TcpStream::connect(addr).ok()?;
    stream.set_read_timeout(Some(Duration::from_secs(10))).ok()?;
    write!(
        stream,
        "POST {path} HTTP/1.1\r\nHost: {addr}\r\nAuthorization: Bearer {token}\r\nIdempotency-Key: {key}\r\n\
         Content-Type: application/json\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{body}",
        body.len()
    )
    .ok()?;
    let mut answer = String::new();
    stream.read_to_string(&mut answer).ok()?;
    answer.split_whitespace().nth(1)?.parse().ok()
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn sigkill_during_concurrent_bookings_loses_no_acknowledged_write() {
    let dir = tempfile::tempdir().unwrap();
    let url = db_url(&dir);
    drop(serve(&url, "info")); // first start: migrations and the demo plant
    let out = Command::new(BIN).args(["--database-url", &url, "token", "create", "controller"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let token = String::from_utf8_lossy(&out.stdout).trim().to_string();
    let pool = sqlx::SqlitePool::connect(&url).await.unwrap();
    let zone: i64 = sqlx::query_scalar("SELECT id FROM zones WHERE code = 'PRESS-2'").fetch_one(&pool).await.unwrap();
    let driver: i64 = sqlx::query_scalar(
        "SELECT d.id FROM benefit_drivers d JOIN case_versions c ON c.id = d.case_id
         WHERE c.zone_id = ? AND c.state = 'approved' ORDER BY d.id LIMIT 1",
    )
    .bind(zone)
    .fetch_one(&pool)
    .await
    .unwrap();
    pool.close().await;

    let mut server = serve(&url, "info");
    let addr = server.addr.clone();
    let acked = Arc::new(Mutex::new(Vec::<String>::new()));
    let writers: Vec<_> = (0..8)
        .map(|w| {
            let (addr, token, acked) = (addr.clone(), token.clone(), acked.clone());
            std::thread::spawn(move || {
                for i in 0.. {
                    let key = format!("crash-{w}-{i}");
                    let body = format!(
                        r#"{{"kind": "saving", "method": "direct", "item": {driver}, "period": "2026-0{}", "quantity": "{}", "evidence": "{key}"}}"#,
                        1 + i % 9,
                        1 + i % 50
                    );
                    match book(&addr, &format!("/api/v1/zones/{zone}/ledger"), &token, &key, &body) {
                        Some(201) => acked.lock().unwrap().push(key),
                        Some(code) => panic!("booking {key} answered {code}"),
                        None => return, // the server is gone
                    }
                }
            })
        })
        .collect();
    // Let the writers get going, then pull the plug without warning.
    while acked.lock().unwrap().len() < 200 {
        assert!(!writers.iter().all(|w| w.is_finished()), "the writers stopped before the kill");
        tokio::time::sleep(Duration::from_millis(5)).await;
    }
    server.child.kill().unwrap(); // SIGKILL
    server.child.wait().unwrap();
    for w in writers {
        w.join().unwrap();
    }
    let acked = acked.lock().unwrap().clone();

    let pool = sqlx::SqlitePool::connect(&url).await.unwrap();
    let check: String = sqlx::query_scalar("PRAGMA integrity_check").fetch_one(&pool).await.unwrap();
    assert_eq!(check, "ok");
    // The server keeps keys per user, with the entry each booked (migration 0009).
    let stored: Vec<String> =
        sqlx::query_scalar("SELECT key FROM idempotency_keys WHERE key LIKE 'crash-%'").fetch_all(&pool).await.unwrap();
    let unique: std::collections::HashSet<&String> = stored.iter().collect();
    assert_eq!(unique.len(), stored.len(), "no key booked twice");
    for key in &acked {
        assert!(unique.contains(key), "acknowledged booking {key} was lost");
    }
    // Every stored row is whole: its evidence is its own key.
    let torn: i64 = sqlx::query_scalar(
        "SELECT COUNT(*) FROM idempotency_keys k JOIN ledger_entries e ON e.id = k.entry_id
         WHERE k.key LIKE 'crash-%' AND e.evidence <> k.key",
    )
    .fetch_one(&pool)
    .await
    .unwrap();
    assert_eq!(torn, 0);
    pool.close().await;
    eprintln!(
        "crash test: {} bookings acknowledged before SIGKILL, {} stored (the rest were in flight), all acknowledged present once",
        acked.len(),
        stored.len()
    );

    // The server starts again on the same file and serves the ledger.
    let again = serve(&url, "info");
    let mut stream = TcpStream::connect(&again.addr).unwrap();
    write!(
        stream,
        "GET /api/v1/zones/{zone}/ledger HTTP/1.1\r\nHost: x\r\nAuthorization: Bearer {token}\r\nConnection: close\r\n\r\n"
    )
    .unwrap();
    let mut page = String::new();
    stream.read_to_string(&mut page).unwrap();
    assert!(page.starts_with("HTTP/1.1 200"), "{}", &page[..page.len().min(200)]);
}
