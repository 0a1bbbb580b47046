//! The binary itself: `migrate`, `load FILE` (all-or-nothing), and `serve` on port 0 logging
//! the address it chose and loading the demo plant once.

use std::io::{BufRead, BufReader, Read, Write};
use std::process::{Command, Stdio};

const BIN: &str = env!("CARGO_BIN_EXE_pilot-ledger");

fn db_url(dir: &tempfile::TempDir) -> String {
    format!("sqlite://{}", dir.path().join("cli.db").display())
}

#[test]
fn migrate_and_load_are_all_or_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let url = db_url(&dir);
    let out = Command::new(BIN).args(["--database-url", &url, "migrate"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));

    // One bad amount deep in the file: nothing is stored and the path of the field is named.
    let mut bad: serde_json::Value = serde_json::from_str(pilot_ledger::cli::DEMO_SCENARIO).unwrap();
    bad["zones"][3]["cases"][0]["costs"][1]["amount"] = "twelve".into();
    let file = dir.path().join("bad.json");
    std::fs::write(&file, bad.to_string()).unwrap();
    let out = Command::new(BIN).args(["--database-url", &url, "load", file.to_str().unwrap()]).output().unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("zones[3].cases[0].costs[1].amount"), "{err}");

    let seed = concat!(env!("CARGO_MANIFEST_DIR"), "/seed/demo-plant.json");
    let out = Command::new(BIN).args(["--database-url", &url, "load", seed]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(String::from_utf8_lossy(&out.stdout).contains("8 zones"));
    // The same zones again collide on their codes, and the whole load is refused.
    let out = Command::new(BIN).args(["--database-url", &url, "load", seed]).output().unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("already exists"));
}

#[test]
fn serve_on_port_zero_logs_the_address_and_answers() {
    let dir = tempfile::tempdir().unwrap();
    let mut child = Command::new(BIN)
        .args(["--database-url", &db_url(&dir), "serve", "--addr", "127.0.0.1:0"])
        .env("RUST_LOG", "info")
        .env("NO_COLOR", "1")
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let stdout = child.stdout.take().unwrap();
    let mut addr = None;
    for line in BufReader::new(stdout).lines().take(50) {
        let line = line.unwrap();
        if let Some(rest) = line.split("listening on http://").nth(1) {
            addr = Some(rest.split_whitespace().next().unwrap().to_string());
            break;
        }
    }
    let addr = addr.expect("the server logs the address it listens on");
    assert!(!addr.ends_with(":0"));
    let mut stream = std::net::TcpStream::connect(&addr).unwrap();
    write!(stream, "GET /zones HTTP/1.1\r\nHost: {addr}\r\nConnection: close\r\n\r\n").unwrap();
    let mut page = String::new();
    stream.read_to_string(&mut page).unwrap();
    let _ = child.kill();
    let _ = child.wait();
    assert!(page.starts_with("HTTP/1.1 200"), "{}", &page[..page.len().min(200)]);
    assert!(page.contains("PRESS-2"), "the demo plant is loaded on first run");
}
