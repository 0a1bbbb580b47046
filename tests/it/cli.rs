//! The binary itself: `migrate`, `load FILE` (all-or-nothing), and `serve` on port 0 logging
//! the address it chose and loading the demo plant once.

use std::io::{BufRead, BufReader, Read, Write};
use std::process::{Command, Stdio};

pub(crate) const BIN: &str = env!("CARGO_BIN_EXE_pilot-ledger");

pub(crate) fn db_url(dir: &tempfile::TempDir) -> String {
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

/// A running `serve` child with its stdout lines so far.
pub(crate) struct Served {
    pub(crate) child: std::process::Child,
    pub(crate) addr: String,
    lines: Vec<String>,
    rest: std::io::Lines<BufReader<std::process::ChildStdout>>,
}

impl Drop for Served {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

pub(crate) fn serve(url: &str, log: &str) -> Served {
    serve_with(url, log, &[])
}

/// [`serve`] with more `serve` flags.
pub(crate) fn serve_with(url: &str, log: &str, flags: &[&str]) -> Served {
    let mut child = Command::new(BIN)
        .args(["--database-url", url, "serve", "--addr", "127.0.0.1:0"])
        .args(flags)
        .env("RUST_LOG", log)
        .env("NO_COLOR", "1")
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let rest = BufReader::new(child.stdout.take().unwrap()).lines();
    // Owned by the guard from here on, so that a failed start still kills the child.
    let mut served = Served { child, addr: String::new(), lines: Vec::new(), rest };
    while let Some(Ok(line)) = served.rest.next() {
        let found = line.split("listening on http://").nth(1).map(|r| r.split_whitespace().next().unwrap().to_string());
        served.lines.push(line);
        if let Some(addr) = found {
            served.addr = addr;
            return served;
        }
    }
    panic!("the server never logged its address: {:?}", served.lines);
}

fn http(addr: &str, request_head: &str) -> String {
    let mut stream = std::net::TcpStream::connect(addr).unwrap();
    write!(stream, "{request_head}Host: {addr}\r\nConnection: close\r\n\r\n").unwrap();
    let mut page = String::new();
    stream.read_to_string(&mut page).unwrap();
    page
}

#[test]
fn serve_on_port_zero_logs_the_address_and_prints_demo_accounts_once() {
    let dir = tempfile::tempdir().unwrap();
    let url = db_url(&dir);
    let s = serve(&url, "info");
    assert!(!s.addr.ends_with(":0"));
    let printed = s.lines.join("\n");
    for role in ["lead", "controller", "viewer", "admin"] {
        assert!(printed.lines().any(|l| l.trim_start().starts_with(role)), "no demo account for {role}: {printed}");
    }
    let page = http(&s.addr, "GET /zones HTTP/1.1\r\n");
    assert!(page.starts_with("HTTP/1.1 303"), "{}", &page[..page.len().min(200)]);
    assert!(page.contains("location: /login?next=/zones"));
    assert!(http(&s.addr, "GET /login HTTP/1.1\r\n").starts_with("HTTP/1.1 200"));
    drop(s);
    // The second start finds the data and the accounts and prints no passwords.
    let again = serve(&url, "info");
    assert!(!again.lines.iter().any(|l| l.contains("Demo accounts")), "{:?}", again.lines);
}

/// OWASP ASVS 4.0.3 V7.1.1: no credentials or session tokens in logs. A Bearer token used
/// against a server logging at trace level never appears in its output.
#[test]
fn tokens_never_appear_in_logs() {
    let dir = tempfile::tempdir().unwrap();
    let url = db_url(&dir);
    drop(serve(&url, "info"));
    let out = Command::new(BIN)
        .args(["--database-url", &url, "token", "create", "viewer", "--label", "report"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let token = String::from_utf8_lossy(&out.stdout).trim().to_string();
    assert!(token.starts_with("plt_"));

    let mut s = serve(&url, "trace");
    let ok = http(&s.addr, &format!("GET /api/v1/zones HTTP/1.1\r\nAuthorization: Bearer {token}\r\n"));
    assert!(ok.starts_with("HTTP/1.1 200"), "{}", &ok[..ok.len().min(300)]);
    let bad = http(&s.addr, "GET /api/v1/zones HTTP/1.1\r\nAuthorization: Bearer plt_not-a-token\r\n");
    assert!(bad.starts_with("HTTP/1.1 401"));
    let _ = s.child.kill();
    let _ = s.child.wait();
    let mut log = s.lines.join("\n");
    for line in s.rest.by_ref().map_while(Result::ok) {
        log.push_str(&line);
    }
    let mut err = String::new();
    s.child.stderr.take().unwrap().read_to_string(&mut err).unwrap();
    assert!(log.contains("/api/v1/zones"), "trace logging should show the requests");
    assert!(!log.contains(&token) && !err.contains(&token), "the token leaked into the log");
    assert!(!log.contains(&token[4..]), "part of the token leaked into the log");
}

/// `user add NAME --role ROLE` with its password on standard input.
fn add_user(url: &str, name: &str, role: &str) -> std::process::Output {
    let mut child = Command::new(BIN)
        .args(["--database-url", url, "user", "add", name, "--role", role])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    child.stdin.take().unwrap().write_all(b"a long enough password\n").unwrap();
    child.wait_with_output().unwrap()
}

/// The command line adds users through the same write path as the admin page, so the same
/// name rule holds (a 199-character name once made every Idempotency-Key of its user a 422).
#[test]
fn user_add_follows_the_admin_page_rules() {
    let dir = tempfile::tempdir().unwrap();
    let url = db_url(&dir);
    let add = |name: &str| add_user(&url, name, "controller");
    let long = "c".repeat(199);
    let out = add(&long);
    assert!(!out.status.success());
    assert_eq!(
        String::from_utf8_lossy(&out.stderr).trim(),
        "error: name: 2 to 40 letters, digits, dots, dashes or underscores; nothing was changed"
    );
    // Positive control: a name within the rule is created.
    let out = add("plant.controller");
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(String::from_utf8_lossy(&out.stdout).starts_with("user plant.controller created (id "));
    // And the same name again is refused with the page's message.
    let out = add("plant.controller");
    assert_eq!(
        String::from_utf8_lossy(&out.stderr).trim(),
        "error: name: a user named plant.controller already exists; nothing was changed"
    );
}

/// `token create --days` goes through the admin page's rule (1 to 365, default 90) and says
/// until when the token works.
#[test]
fn token_create_takes_its_life_in_days() {
    let dir = tempfile::tempdir().unwrap();
    let url = db_url(&dir);
    assert!(add_user(&url, "script.owner", "viewer").status.success());
    let create = |days: &str| {
        Command::new(BIN)
            .args(["--database-url", &url, "token", "create", "script.owner", "--days", days])
            .output()
            .unwrap()
    };
    let out = create("366");
    assert!(!out.status.success());
    assert_eq!(
        String::from_utf8_lossy(&out.stderr).trim(),
        "error: days: a whole number of days from 1 to 365 (empty: 90); nothing was changed"
    );
    // Positive control: a week.
    let out = create("7");
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let until = (time::OffsetDateTime::now_utc() + time::Duration::days(7)).date();
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(said.contains(&format!("works until {until} (UTC")), "{said}");
    assert!(String::from_utf8_lossy(&out.stdout).trim().starts_with("plt_"));
}
