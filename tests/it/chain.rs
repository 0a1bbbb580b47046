//! Tamper evidence (issue 11, point 6): the hash chains of the ledger and the audit trail,
//! `verify`, the start-up check of the kept totals, triggers against INSERT OR REPLACE, users
//! that are deactivated and never reuse an id, owner-only files and the checkpoint at a stop.
//!
//! Tampering is done as someone with write access to the file would: a second connection of
//! the SQLite library (through sqlx) that drops a trigger and edits a row.

use crate::cli::{BIN, serve};
use crate::helpers::{TestApp, test_app};
use crate::ledger::zone_with_baseline;
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use pilot_ledger::auth::Role;
use pilot_ledger::db;
use pilot_ledger::domain::chain::{EntryStamp, audit_row, ledger_entry_row};
use serde_json::json;
use sqlx::sqlite::SqliteConnectOptions;
use sqlx::{Connection, SqliteConnection};
use std::process::Command;
use std::str::FromStr;

fn db_path(t: &TestApp) -> String {
    t.pool.connect_options().get_filename().display().to_string()
}

/// A connection of its own to the same file, foreign keys off (the sqlite3 shell's default).
async fn intruder(path: &str) -> SqliteConnection {
    let options = SqliteConnectOptions::from_str(&format!("sqlite://{path}")).unwrap().foreign_keys(false);
    SqliteConnection::connect_with(&options).await.unwrap()
}

async fn exec(conn: &mut SqliteConnection, sql: &str) -> Result<(), String> {
    sqlx::query(sqlx::AssertSqlSafe(sql.to_string())).execute(conn).await.map(|_| ()).map_err(|e| e.to_string())
}

fn run_verify(path: &str) -> (bool, String, String) {
    let out = Command::new(BIN).args(["--database-url", &format!("sqlite://{path}"), "verify"]).output().unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

async fn count(t: &TestApp, sql: &'static str) -> i64 {
    sqlx::query_scalar(sql).fetch_one(&t.pool).await.unwrap()
}

/// Book one saving and reverse it through the API (the single-booking and reversal paths;
/// the demo plant's ledger came through the batched path).
async fn book_and_reverse(t: &TestApp) -> i64 {
    let z = zone_with_baseline(t, "CHN-1").await;
    let c = t.as_role(Some(Role::Controller));
    let body = json!({"kind": "saving", "method": "direct", "item": z.energy, "period": "2025-03",
                      "quantity": "1240.5", "evidence": "sub-meter M3 reading"});
    let a = c.post_json(&format!("/api/v1/zones/{}/ledger", z.id), &body.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    let id = a.json()["entry"]["id"].as_i64().unwrap();
    let r =
        c.post_json(&format!("/api/v1/zones/{}/ledger/{id}/reverse", z.id), r#"{"evidence": "meter misread"}"#).await;
    assert_eq!(r.status, StatusCode::CREATED, "{}", r.text);
    id
}

#[tokio::test]
async fn verify_names_the_entry_whose_amount_was_changed() {
    let t = test_app(true).await;
    let booked = book_and_reverse(&t).await;
    let path = db_path(&t);
    let entries = count(&t, "SELECT COUNT(*) FROM ledger_entries").await;
    let audit = count(&t, "SELECT COUNT(*) FROM audit_log").await;
    assert!(entries > 50, "the demo plant has a ledger: {entries}");

    // Positive control: the untouched database verifies, and the summary counts every row.
    let (ok, stdout, stderr) = run_verify(&path);
    assert!(ok, "{stdout}{stderr}");
    assert!(stdout.starts_with(&format!("verify ok: {entries} ledger entries, {audit} audit rows, ")), "{stdout}");
    assert!(stdout.contains("integrity ok"), "{stdout}");

    // The app's own connection is refused; with the trigger dropped the edit goes through.
    let refused = sqlx::query("UPDATE ledger_entries SET amount = '9999' WHERE id = ?").bind(booked).execute(&t.pool);
    assert!(refused.await.unwrap_err().to_string().contains("append-only"));
    let mut raw = intruder(&path).await;
    exec(&mut raw, "DROP TRIGGER ledger_entries_no_update").await.unwrap();
    exec(&mut raw, &format!("UPDATE ledger_entries SET amount = '9999' WHERE id = {booked}")).await.unwrap();

    let (ok, stdout, stderr) = run_verify(&path);
    assert!(!ok, "a changed amount must fail verify: {stdout}");
    assert!(stdout.starts_with("verify FAILED"), "{stdout}");
    assert!(
        stderr.contains(&format!("error: verify failed at ledger_entries id {booked}: its content does not match")),
        "{stderr}"
    );
}

#[tokio::test]
async fn verify_names_a_changed_or_removed_audit_row() {
    let t = test_app(false).await;
    let path = db_path(&t);
    let ids: Vec<i64> = sqlx::query_scalar("SELECT id FROM audit_log ORDER BY id").fetch_all(&t.pool).await.unwrap();
    assert!(ids.len() >= 8, "user creation and sign-ins are audited: {ids:?}");
    assert!(db::verify(&t.pool).await.unwrap().problems.is_empty());

    let mut raw = intruder(&path).await;
    exec(&mut raw, "DROP TRIGGER audit_log_no_update").await.unwrap();
    exec(&mut raw, &format!("UPDATE audit_log SET actor = 'someone else' WHERE id = {}", ids[2])).await.unwrap();
    let v = db::verify(&t.pool).await.unwrap();
    assert_eq!(v.problems.len(), 1, "{:?}", v.problems);
    assert_eq!((v.problems[0].table.as_str(), v.problems[0].row.clone()), ("audit_log", format!("id {}", ids[2])));

    // A removed row breaks the link of the row after it.
    let t = test_app(false).await;
    let ids: Vec<i64> = sqlx::query_scalar("SELECT id FROM audit_log ORDER BY id").fetch_all(&t.pool).await.unwrap();
    let mut raw = intruder(&db_path(&t)).await;
    exec(&mut raw, "DROP TRIGGER audit_log_no_delete").await.unwrap();
    exec(&mut raw, &format!("DELETE FROM audit_log WHERE id = {}", ids[3])).await.unwrap();
    let v = db::verify(&t.pool).await.unwrap();
    assert_eq!(v.problems[0].to_string().split(':').next().unwrap(), format!("audit_log id {}", ids[4]));
}

#[tokio::test]
async fn insert_or_replace_over_an_entry_or_an_audit_row_is_refused() {
    let t = test_app(true).await;
    let booked = book_and_reverse(&t).await;
    let replace = format!(
        "INSERT OR REPLACE INTO ledger_entries (id, zone_id, case_id, kind, driver_id, cost_id, period, method, quantity,
             unit_value, amount, evidence, booked_at, booked_by, hash)
         SELECT id, zone_id, case_id, kind, driver_id, cost_id, period, method, quantity, unit_value, '1', evidence,
             booked_at, booked_by, hash FROM ledger_entries WHERE id = {booked}"
    );
    let mut raw = intruder(&db_path(&t)).await;
    let err = exec(&mut raw, &replace).await.unwrap_err();
    assert!(err.contains("ledger entries are append-only: an existing entry cannot be replaced"), "{err}");
    // A second reversal of the same entry slipped in by REPLACE on `reverses_id`.
    let err = exec(&mut raw, &format!(
        "INSERT OR REPLACE INTO ledger_entries (id, zone_id, case_id, kind, driver_id, period, method, amount, evidence,
             reverses_id, booked_at, booked_by, hash)
         SELECT 900000, zone_id, case_id, kind, driver_id, period, method, '0', 'x', {booked}, booked_at, booked_by, hash
         FROM ledger_entries WHERE id = {booked}"
    ))
    .await
    .unwrap_err();
    assert!(err.contains("this entry has already been reversed"), "{err}");
    let amount: String = sqlx::query_scalar("SELECT amount FROM ledger_entries WHERE id = ?")
        .bind(booked)
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(amount, "248.1", "1,240.5 kWh x 0.20 EUR/kWh, unchanged");

    let err =
        exec(&mut raw, "INSERT OR REPLACE INTO audit_log SELECT * FROM audit_log WHERE id = 1").await.unwrap_err();
    assert!(err.contains("the audit trail is append-only: an existing row cannot be replaced"), "{err}");
    exec(
        &mut raw,
        "INSERT INTO ledger_imports (id, zone_id, content_hash, file_name, row_count, imported_at, imported_by)
                    VALUES (77, 1, 'abc', 'a.csv', 1, '2026-01-01T00:00:00Z', 'x')",
    )
    .await
    .unwrap();
    let err = exec(
        &mut raw,
        "INSERT OR REPLACE INTO ledger_imports (id, zone_id, content_hash, file_name, row_count,
                    imported_at, imported_by) VALUES (78, 1, 'abc', 'b.csv', 9, '2026-01-01T00:00:00Z', 'y')",
    )
    .await
    .unwrap_err();
    assert!(err.contains("imports are append-only: an existing import cannot be replaced"), "{err}");
    // Rows without a hash are refused too: only the app writes chained rows.
    let err = exec(&mut raw, "INSERT INTO audit_log (at, actor, action, subject) VALUES ('x', 'y', 'z', 'w')")
        .await
        .unwrap_err();
    assert!(err.contains("audit rows are hash-chained"), "{err}");

    // Positive control: a normal booking through the app goes through, and everything verifies.
    let c = t.as_role(Some(Role::Controller));
    let zone: i64 = sqlx::query_scalar("SELECT zone_id FROM ledger_entries WHERE id = ?")
        .bind(booked)
        .fetch_one(&t.pool)
        .await
        .unwrap();
    let driver: i64 = sqlx::query_scalar("SELECT driver_id FROM ledger_entries WHERE id = ?")
        .bind(booked)
        .fetch_one(&t.pool)
        .await
        .unwrap();
    let body = json!({"kind": "saving", "method": "direct", "item": driver, "period": "2025-04", "quantity": "10",
                      "evidence": "sub-meter M3 reading"});
    let a = c.post_json(&format!("/api/v1/zones/{zone}/ledger"), &body.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert!(db::verify(&t.pool).await.unwrap().problems.is_empty());

    // With only this trigger dropped, REPLACE goes through although `ledger_entries_no_delete`
    // is still there: REPLACE's delete fires no delete trigger (sqlite.org/lang_conflict.html,
    // REPLACE, recursive_triggers off). The chain names the row.
    exec(&mut raw, "DROP TRIGGER ledger_entries_no_replace").await.unwrap();
    exec(&mut raw, &replace).await.unwrap();
    let v = db::verify(&t.pool).await.unwrap();
    assert_eq!(v.problems[0].to_string().split(':').next().unwrap(), format!("ledger_entries id {booked}"));
}

#[tokio::test]
async fn tampered_totals_are_named_and_the_server_refuses_to_start() {
    let t = test_app(true).await;
    let path = db_path(&t);
    let (zone, code, item, amount): (i64, String, String, String) = sqlx::query_as(
        "SELECT t.zone_id, z.code, t.item, t.amount FROM ledger_totals t JOIN zones z ON z.id = t.zone_id
         WHERE t.item LIKE 'driver:%' ORDER BY t.zone_id, t.item LIMIT 1",
    )
    .fetch_one(&t.pool)
    .await
    .unwrap();
    // Positive control: the kept totals agree, and the server's preparation passes.
    assert_eq!(db::totals_problem(&t.pool).await.unwrap(), None);
    pilot_ledger::cli::prepare(&format!("sqlite://{path}"), true, t.now()).await.unwrap();

    // The app's own connection cannot edit, delete or replace a totals row.
    for sql in [
        "UPDATE ledger_totals SET amount = '1'",
        "DELETE FROM ledger_totals",
        "INSERT OR REPLACE INTO ledger_totals SELECT * FROM ledger_totals",
    ] {
        let err = sqlx::query(sql).execute(&t.pool).await.unwrap_err().to_string();
        assert!(err.contains("ledger totals"), "{sql}: {err}");
    }
    let mut raw = intruder(&path).await;
    exec(&mut raw, "DROP TRIGGER ledger_totals_only_grow").await.unwrap();
    exec(&mut raw, &format!("UPDATE ledger_totals SET amount = '1' WHERE zone_id = {zone} AND item = '{item}'"))
        .await
        .unwrap();

    let v = db::verify(&t.pool).await.unwrap();
    assert_eq!(v.problems.len(), 1, "{:?}", v.problems);
    assert_eq!(
        v.problems[0].to_string(),
        format!(
            "ledger_totals zone {zone} ({code}) item {item}: amount is 1 but the entries sum to {}",
            rust_decimal::Decimal::from_str(&amount).unwrap().normalize()
        )
    );
    let out = Command::new(BIN)
        .args(["--database-url", &format!("sqlite://{path}"), "serve", "--addr", "127.0.0.1:0"])
        .env("NO_COLOR", "1")
        .output()
        .unwrap();
    assert!(!out.status.success(), "the server must not start");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains(&format!("zone {zone} ({code}) item {item}")) && err.contains("pilot-ledger verify"), "{err}");
    assert!(!String::from_utf8_lossy(&out.stdout).contains("listening on"));
}

fn bearer(token: &str) -> Request<Body> {
    Request::get("/api/v1/zones").header(header::AUTHORIZATION, format!("Bearer {token}")).body(Body::empty()).unwrap()
}

#[tokio::test]
async fn a_deactivated_users_session_and_token_stop_at_once() {
    let t = test_app(false).await;
    let (_, token) =
        pilot_ledger::app::users::issue_token(&t.pool, "test", "t-viewer", "report", 90, t.now()).await.unwrap();
    let viewer = t.as_role(Some(Role::Viewer));
    let anon = t.as_role(None);
    // Positive control: both work before.
    assert_eq!(viewer.get("/api/v1/zones").await.status, StatusCode::OK);
    assert_eq!(anon.send(bearer(&token)).await.status, StatusCode::OK);
    let id: i64 = sqlx::query_scalar("SELECT id FROM users WHERE name = 't-viewer'").fetch_one(&t.pool).await.unwrap();
    let admin = t.as_role(Some(Role::Admin));
    let a = admin.post_form(&format!("/admin/users/{id}"), "role=viewer").await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    assert_eq!(viewer.get("/api/v1/zones").await.status, StatusCode::UNAUTHORIZED);
    assert_eq!(anon.send(bearer(&token)).await.status, StatusCode::UNAUTHORIZED);
    // Reactivated, the token stays revoked (issue 12: deactivation ends it, in the same
    // transaction, with an audit row); the session stays ended.
    admin.post_form(&format!("/admin/users/{id}"), "role=viewer&active=on").await;
    assert_eq!(anon.send(bearer(&token)).await.status, StatusCode::UNAUTHORIZED);
    assert_eq!(viewer.get("/api/v1/zones").await.status, StatusCode::UNAUTHORIZED);
    let trail: Vec<(String, String)> = sqlx::query_as(
        "SELECT action, detail FROM audit_log WHERE action IN ('user.update', 'token.revoke') ORDER BY id",
    )
    .fetch_all(&t.pool)
    .await
    .unwrap();
    let token_id: i64 = sqlx::query_scalar("SELECT id FROM api_tokens").fetch_one(&t.pool).await.unwrap();
    assert_eq!(
        trail,
        [
            ("token.revoke".into(), "of t-viewer: user deactivated".into()),
            (
                "user.update".into(),
                format!(
                    "t-viewer: role viewer -> viewer, active true -> false; sessions ended; revoked token {token_id}"
                )
            ),
            ("user.update".into(), "t-viewer: role viewer -> viewer, active false -> true; sessions ended".into()),
        ]
    );
}

#[tokio::test]
async fn user_ids_are_never_reused_even_after_a_delete_behind_the_apps_back() {
    let t = test_app(false).await;
    let err = sqlx::query("DELETE FROM users WHERE name = 't-admin'").execute(&t.pool).await.unwrap_err();
    assert!(err.to_string().contains("users are deactivated, not deleted"), "{err}");
    let (last, name): (i64, String) =
        sqlx::query_as("SELECT id, name FROM users ORDER BY id DESC LIMIT 1").fetch_one(&t.pool).await.unwrap();
    let (_, token) = pilot_ledger::app::users::issue_token(&t.pool, "test", &name, "old", 90, t.now()).await.unwrap();
    let anon = t.as_role(None);
    assert_eq!(anon.send(bearer(&token)).await.status, StatusCode::OK, "positive control");

    let mut raw = intruder(&db_path(&t)).await;
    exec(&mut raw, "DROP TRIGGER users_no_delete").await.unwrap();
    exec(&mut raw, &format!("DELETE FROM users WHERE id = {last}")).await.unwrap();
    let new_id =
        pilot_ledger::app::users::add_user(&t.pool, "test", "newcomer", Role::Admin, crate::helpers::PASSWORD, t.now())
            .await
            .unwrap();
    assert_eq!(new_id.0, last + 1, "the next id, not the freed one");
    // A name taken (in any case) is still a clear conflict, not the trigger's raw error.
    let mut tx = db::begin_write(&t.pool).await.unwrap();
    let hash = pilot_ledger::auth::hash_password(crate::helpers::PASSWORD).unwrap();
    match db::insert_user(&mut tx, "NEWCOMER", Role::Viewer, &hash, "t", "test").await {
        Err(db::DbError::Conflict(m)) => assert_eq!(m, "a user named NEWCOMER already exists"),
        other => panic!("expected a conflict: {other:?}"),
    }
    drop(tx);
    assert_eq!(anon.send(bearer(&token)).await.status, StatusCode::UNAUTHORIZED, "the old token acts for no one");
    let v = db::verify(&t.pool).await.unwrap();
    let orphan = v.problems.iter().find(|p| p.table == "api_tokens").expect("the orphan token is reported");
    assert_eq!(orphan.what, "refers to a row of users that does not exist");
}

/// The columns of the chained tables as created by migrations 0002 and 0003.
const LEDGER_0003: [&str; 20] = [
    "id",
    "zone_id",
    "case_id",
    "kind",
    "driver_id",
    "cost_id",
    "period",
    "method",
    "quantity",
    "unit_value",
    "amount",
    "baseline_intensity",
    "reporting_volume",
    "measured_consumption",
    "evidence",
    "reverses_id",
    "idempotency_key",
    "import_id",
    "booked_at",
    "booked_by",
];
const AUDIT_0002: [&str; 6] = ["id", "at", "actor", "action", "subject", "detail"];

/// Every stored column is in the chained row, and a column added since is nullable without a
/// default (so older rows keep their hashes). See `domain::chain` for how to add one.
#[tokio::test]
async fn every_column_is_chained() {
    let t = test_app(false).await;
    let entry = pilot_ledger::domain::NewEntry {
        case_id: 1,
        item: pilot_ledger::domain::LedgerItem::Driver(pilot_ledger::domain::DriverId(1)),
        period: pilot_ledger::domain::Month::parse("2025-01").unwrap(),
        method: pilot_ledger::domain::Method::Direct,
        quantity: None,
        unit_value: None,
        amount: rust_decimal::Decimal::ONE,
        inputs: [None; 3],
        evidence: "x".into(),
        paid_on: None,
        implausible_confirmed: false,
    };
    let stamp = EntryStamp {
        id: 1,
        zone_id: 1,
        reverses_id: None,
        idempotency_key: None,
        import_id: None,
        booked_at: "",
        booked_by: "",
        on_behalf_by: None,
    };
    let tables = [
        ("ledger_entries", ledger_entry_row(&entry, &stamp), &LEDGER_0003[..]),
        ("audit_log", audit_row(1, "", "", "", "", ""), &AUDIT_0002[..]),
    ];
    for (table, row, original) in tables {
        let info: Vec<(String, i64, Option<String>)> = sqlx::query_as(sqlx::AssertSqlSafe(format!(
            "SELECT name, \"notnull\", dflt_value FROM pragma_table_info('{table}')"
        )))
        .fetch_all(&t.pool)
        .await
        .unwrap();
        let mut stored: Vec<&str> = info.iter().map(|(n, _, _)| n.as_str()).filter(|n| *n != "hash").collect();
        let mut chained: Vec<&str> = row.iter().map(|(n, _)| *n).collect();
        stored.sort_unstable();
        chained.sort_unstable();
        assert_eq!(chained, stored, "{table}: add the new column to domain::chain");
        for (name, notnull, default) in &info {
            if !original.contains(&name.as_str()) {
                assert!(
                    *notnull == 0 && default.is_none(),
                    "{table}.{name}: a column added to a chained table must be nullable without a DEFAULT"
                );
            }
        }
    }
}

/// A zone (1) with a draft case (1) and its driver (1), written as raw SQL into a database of
/// an older schema (a test of what a later migration does with older rows adds its own).
pub(crate) const OLD_ZONE: [&str; 3] = [
    "INSERT INTO zones (id, code, name, status, created_at, created_by, updated_at, updated_by)
     VALUES (1, 'OLD-1', 'Old zone', 'measuring', 't', 'u', 't', 'u')",
    "INSERT INTO case_versions (id, zone_id, version, label, horizon_months, start_month, go_live_offset,
         ramp_up_months, success_probability, state, created_at, created_by, updated_at, updated_by)
     VALUES (1, 1, 1, 'Base', 36, '2025-01', 0, 0, '1', 'draft', 't', 'u', 't', 'u')",
    "INSERT INTO benefit_drivers (id, case_id, label, kind, unit, qty_low, qty_likely, qty_high, unit_value,
         escalation, created_at, created_by) VALUES (1, 1, 'Energy', 'energy', 'kWh', '1', '2', '3', '0.2', '0', 't', 'u')",
];

/// Rows written before migration 0007 are sealed once, in id order; a row slipped in without
/// a hash later is not sealed but reported.
#[tokio::test]
async fn rows_from_before_the_chain_are_sealed_once() {
    let dir = tempfile::tempdir().unwrap();
    let pool = crate::helpers::pool_before(dir.path(), "0007").await;
    for sql in OLD_ZONE.into_iter().chain([
        "UPDATE case_versions SET state = 'approved' WHERE id = 1",
        "INSERT INTO ledger_entries (zone_id, case_id, kind, driver_id, period, method, quantity, unit_value, amount,
             evidence, booked_at, booked_by)
         VALUES (1, 1, 'saving', 1, '2025-02', 'direct', '100', '0.2', '20', 'meter', 't', 'u'),
                (1, 1, 'saving', 1, '2025-03', 'direct', '50', '0.2', '10', 'meter', 't', 'u')",
        "INSERT INTO audit_log (at, actor, action, subject) VALUES ('t', 'u', 'zone.create', 'zone 1'),
                                                                  ('t', 'u', 'ledger.book', 'entry 1')",
    ]) {
        sqlx::query(sql).execute(&pool).await.unwrap();
    }
    db::migrate(&pool).await.unwrap();
    let v = db::verify(&pool).await.unwrap();
    assert!(v.problems.is_empty(), "{:?}", v.problems);
    assert_eq!((v.entries, v.audit_rows, v.totals), (2, 3, 1));
    let detail: String =
        sqlx::query_scalar("SELECT detail FROM audit_log WHERE action = 'chain.seal'").fetch_one(&pool).await.unwrap();
    assert_eq!(detail, "sealed 2 rows of ledger_entries and 2 rows of audit_log written before hash chains");

    // Sealing happens once: a row without a hash slipped in later stays unsealed and is named.
    sqlx::query("DROP TRIGGER audit_log_chained").execute(&pool).await.unwrap();
    sqlx::query("INSERT INTO audit_log (at, actor, action, subject) VALUES ('t', 'u', 'forged', 'x')")
        .execute(&pool)
        .await
        .unwrap();
    db::migrate(&pool).await.unwrap();
    let v = db::verify(&pool).await.unwrap();
    assert_eq!(
        v.problems[0].to_string(),
        "audit_log id 4: has no hash: written behind the app's back, or its hash was removed"
    );
}

#[cfg(unix)]
fn mode(path: &std::path::Path) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    std::fs::metadata(path).unwrap_or_else(|e| panic!("{}: {e}", path.display())).permissions().mode() & 0o777
}

/// The database, its -wal and -shm files and a backup are readable by their owner only; an
/// existing world-readable database is narrowed when opened.
#[cfg(unix)]
#[tokio::test]
async fn database_wal_shm_and_backups_are_owner_only() {
    use std::os::unix::fs::PermissionsExt;
    let t = test_app(false).await;
    let path = std::path::PathBuf::from(db_path(&t));
    for suffix in ["", "-wal", "-shm"] {
        let file = std::path::PathBuf::from(format!("{}{suffix}", path.display()));
        assert_eq!(mode(&file), 0o600, "{}", file.display());
    }
    let backup = path.with_file_name("copy.db");
    db::backup(&t.pool, &backup).await.unwrap();
    assert_eq!(mode(&backup), 0o600);
    assert!(std::fs::metadata(&backup).unwrap().len() > 0);
    // The refused second backup leaves the first as it was.
    assert!(db::backup(&t.pool, &backup).await.is_err());
    assert!(std::fs::metadata(&backup).unwrap().len() > 0);

    // Positive control of the narrowing: the file really was readable by others before.
    std::fs::set_permissions(&backup, std::fs::Permissions::from_mode(0o644)).unwrap();
    assert_eq!(mode(&backup), 0o644);
    let pool = db::connect(&format!("sqlite://{}", backup.display())).await.unwrap();
    assert_eq!(mode(&backup), 0o600);
    pool.close().await;
}

/// SIGTERM stops the real server gracefully: the WAL is checkpointed, so it is empty or gone,
/// and the .db file alone holds everything.
#[cfg(unix)]
#[test]
fn a_graceful_stop_leaves_the_database_file_complete() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("cli.db");
    let url = format!("sqlite://{}", path.display());
    let mut s = serve(&url, "info");
    let wal = dir.path().join("cli.db-wal");
    // Positive control: the demo load left pages in the WAL.
    assert!(std::fs::metadata(&wal).unwrap().len() > 0);
    let sent = Command::new("kill").args(["-TERM", &s.child.id().to_string()]).status().unwrap();
    assert!(sent.success());
    let status = s.child.wait().unwrap();
    assert!(status.success(), "a graceful stop exits 0: {status}");
    assert_eq!(std::fs::metadata(&wal).map(|m| m.len()).unwrap_or(0), 0, "the WAL was checkpointed");

    // The .db file alone, copied elsewhere, verifies with the whole ledger in it.
    let alone = tempfile::tempdir().unwrap();
    let copy = alone.path().join("alone.db");
    std::fs::copy(&path, &copy).unwrap();
    let (ok, stdout, stderr) = run_verify(copy.to_str().unwrap());
    assert!(ok, "{stdout}{stderr}");
    let entries: usize = stdout.split("verify ok: ").nth(1).unwrap().split(' ').next().unwrap().parse().unwrap();
    assert!(entries > 50, "{stdout}");
}
