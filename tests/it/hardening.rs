//! Hardening (issue 11 review): overflow on a booking's amount, panics answered as 500s,
//! INSERT OR REPLACE refused on every keyed table, user ids after an upgrade, bookings only on
//! zones that are under way, CSV identity per zone, form tokens bound to user and zone,
//! idempotency on the parsed booking, `verify` without migrating, and four eyes over every
//! editor of a version.

use crate::helpers::{TestApp, test_app};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use serde_json::{Value, json};

/// A zone with an approved baseline from 2025-01 (36 months): one-off "Sensors" (30,000) and
/// a driver "Press time" of `unit_value` per unit (quantities up to 250,000 a year).
struct Zone {
    id: i64,
    case: i64,
    driver: i64,
    sensors: i64,
}

async fn zone_priced(t: &TestApp, code: &str, unit_value: &str) -> Zone {
    let z = t.post_json("/api/v1/zones", &json!({"code": code, "name": "Hardening zone"}).to_string()).await;
    let id = z.json()["zone"]["id"].as_i64().unwrap();
    let case = json!({
        "label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1, "ramp_up_months": 0,
        "success_probability": "0.8",
        "costs": [{"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "30000", "month_offset": 0}],
        "drivers": [{"label": "Press time", "kind": "downtime", "unit": "h", "qty_low": "150000", "qty_likely": "200000",
                     "qty_high": "250000", "unit_value": unit_value}]
    });
    let c = t.post_json(&format!("/api/v1/zones/{id}/cases"), &case.to_string()).await.json();
    let case_id = c["case"]["id"].as_i64().unwrap();
    assert_eq!(t.post_json(&format!("/api/v1/cases/{case_id}/submit"), "{}").await.status, StatusCode::OK);
    let approve = t.as_role(Some(Role::Admin)).post_json(&format!("/api/v1/cases/{case_id}/approve"), "{}").await;
    assert_eq!(approve.status, StatusCode::OK, "{}", approve.text);
    Zone {
        id,
        case: case_id,
        driver: c["case"]["drivers"][0]["id"].as_i64().unwrap(),
        sensors: c["case"]["costs"][0]["id"].as_i64().unwrap(),
    }
}

async fn entries(t: &TestApp) -> i64 {
    sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap()
}

fn volume_adjusted(item: i64, intensity: &str, volume: &str, consumption: &str) -> Value {
    json!({"kind": "saving", "method": "volume_adjusted", "item": item, "period": "2025-04", "baseline_intensity": intensity,
           "reporting_volume": volume, "measured_consumption": consumption, "evidence": "main meter",
           "confirm_implausible": true})
}

#[tokio::test]
async fn a_huge_volume_adjusted_saving_is_a_field_error_not_a_panic() {
    let t = test_app(false).await;
    let z = zone_priced(&t, "OVF-1", "100000").await;
    let t = t.as_role(Some(Role::Controller));
    let url = format!("/api/v1/zones/{}/ledger", z.id);
    // 1e12 x 1e12 = 1e24 units avoided, x 100,000 per unit = 1e29: beyond Decimal's 7.9e28.
    let a = t.post_json(&url, &volume_adjusted(z.driver, "1000000000000", "1000000000000", "0").to_string()).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(a.json()["fields"][0]["field"], "reporting_volume");
    assert_eq!(
        a.json()["fields"][0]["message"],
        "the avoided quantity (baseline intensity × volume − consumption) must be at most 1,000,000,000,000 in size"
    );
    assert_eq!(entries(&t).await, 0);
    // Positive control (hand arithmetic): 2 h per unit x 3 units - 1 h = 5 h, x 100,000 = 500,000.
    let ok = t.post_json(&url, &volume_adjusted(z.driver, "2", "3", "1").to_string()).await;
    assert_eq!(ok.status, StatusCode::CREATED, "{}", ok.text);
    assert_eq!(ok.json()["entry"]["amount"], "500000");
    assert_eq!(entries(&t).await, 1);
}

#[tokio::test]
async fn a_panicking_handler_answers_500_without_detail() {
    use axum::routing::get;
    async fn boom() -> &'static str {
        panic!("secret detail")
    }
    let router = pilot_ledger::web::answer_panics(
        axum::Router::new()
            .route("/api/v1/boom", get(boom))
            .route("/boom", get(boom))
            .route("/fine", get(|| async { "fine" })),
    );
    let mut t = test_app(false).await.as_role(None);
    t.router = router;
    let api = t.get("/api/v1/boom").await;
    assert_eq!(api.status, StatusCode::INTERNAL_SERVER_ERROR);
    assert_eq!(
        api.json()["error"],
        "Something went wrong on our side; nothing was changed. The details are in the server log."
    );
    let page = t.get("/boom").await;
    assert_eq!(page.status, StatusCode::INTERNAL_SERVER_ERROR);
    assert!(page.text.contains("Something went wrong on our side") && !page.text.contains("secret"), "{}", page.text);
    // Positive control: a handler that does not panic answers as usual.
    let fine = t.get("/fine").await;
    assert_eq!((fine.status, fine.text.as_str()), (StatusCode::OK, "fine"));
}

async fn book_keyed(t: &TestApp, path: &str, key: &str, body: &str) -> crate::helpers::Answer {
    use axum::body::Body;
    use axum::http::{Request, header};
    let req = Request::post(path)
        .header(header::CONTENT_TYPE, "application/json")
        .header("idempotency-key", key)
        .body(Body::from(body.to_string()))
        .unwrap();
    t.send(req).await
}

/// The error of raw SQL that a trigger must refuse.
async fn refused(t: &TestApp, sql: &'static str, binds: &[i64]) -> String {
    let mut q = sqlx::query(sql);
    for b in binds {
        q = q.bind(*b);
    }
    q.execute(&t.pool).await.expect_err(sql).to_string()
}

#[tokio::test]
async fn insert_or_replace_is_refused_on_every_keyed_table() {
    let t = test_app(false).await;
    let z = zone_priced(&t, "RPL-1", "0.20").await;
    let controller = t.as_role(Some(Role::Controller));
    let path = format!("/api/v1/zones/{}/ledger", z.id);
    let body = json!({"kind": "saving", "method": "direct", "item": z.driver, "period": "2025-03", "quantity": "100",
                      "evidence": "meter"})
    .to_string();
    let first = book_keyed(&controller, &path, "rpl-1", &body).await;
    assert_eq!(first.status, StatusCode::CREATED, "{}", first.text);
    let copy = t.post_json(&format!("/api/v1/cases/{}/copy", z.case), r#"{"label": "Draft"}"#).await;
    assert_eq!(copy.status, StatusCode::CREATED, "{}", copy.text);
    let draft = copy.json()["case"]["id"].as_i64().unwrap();
    sqlx::query("INSERT INTO form_submissions (token, user_id, outcome, used_at) VALUES ('tok-1', 1, 'entry 1', 'x')")
        .execute(&t.pool)
        .await
        .unwrap();

    let cases = [
        (
            refused(&t, "INSERT OR REPLACE INTO idempotency_keys (user_id, key, fingerprint, entry_id, used_at) \
                         SELECT user_id, key, 'forged', entry_id, used_at FROM idempotency_keys", &[])
            .await,
            "idempotency keys are append-only: an existing key cannot be replaced",
        ),
        (
            refused(&t, "REPLACE INTO form_submissions (token, user_id, outcome, used_at) VALUES ('tok-1', 1, 'entry 9', 'x')", &[])
                .await,
            "form submissions are append-only: an existing token cannot be replaced",
        ),
        (refused(&t, "REPLACE INTO user_ids (id, last) VALUES (1, 0)", &[]).await, "user ids are never reused"),
        (
            // Over the approved baseline, by id: its frozen settings and approval would go.
            refused(
                &t,
                "REPLACE INTO case_versions (id, zone_id, version, label, horizon_months, start_month, go_live_offset,
                     ramp_up_months, success_probability, state, created_at, created_by, updated_at, updated_by)
                 VALUES (?, ?, 7, 'Rewritten', 12, '2025-01', 0, 0, '1', 'draft', 'x', 'x', 'x', 'x')",
                &[z.case, z.id],
            )
            .await,
            "case versions cannot be replaced: save a new scenario version",
        ),
        (
            // By (zone, version) under a new id.
            refused(
                &t,
                "REPLACE INTO case_versions (id, zone_id, version, label, horizon_months, start_month, go_live_offset,
                     ramp_up_months, success_probability, state, created_at, created_by, updated_at, updated_by)
                 VALUES (9999, ?, 1, 'Rewritten', 12, '2025-01', 0, 0, '1', 'draft', 'x', 'x', 'x', 'x')",
                &[z.id],
            )
            .await,
            "case versions cannot be replaced: save a new scenario version",
        ),
        (
            // The approved item's id moved into the draft: it would leave the baseline.
            refused(
                &t,
                "REPLACE INTO cost_items (id, case_id, label, category, kind, amount, month_offset, escalation, capex,
                     created_at, created_by) VALUES (?, ?, 'X', 'other', 'one_off', '1', 0, '0', 0, 'x', 'x')",
                &[z.sensors, draft],
            )
            .await,
            "cost items cannot be replaced: add a new item",
        ),
        (
            refused(
                &t,
                "REPLACE INTO benefit_drivers (id, case_id, label, kind, unit, qty_low, qty_likely, qty_high, unit_value,
                     escalation, created_at, created_by) VALUES (?, ?, 'X', 'other', 'h', '1', '1', '1', '1', '0', 'x', 'x')",
                &[z.driver, draft],
            )
            .await,
            "benefit drivers cannot be replaced: add a new driver",
        ),
    ];
    for (error, message) in cases {
        assert!(error.contains(message), "{error}");
    }
    let baseline: (String, String, Option<String>) =
        sqlx::query_as("SELECT label, state, approved_by FROM case_versions WHERE id = ?")
            .bind(z.case)
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!(baseline, ("Base".into(), "approved".into(), Some("t-admin".into())));

    // Positive controls: the app's own paths still write these tables.
    let replay = book_keyed(&controller, &path, "rpl-1", &body).await;
    assert_eq!(replay.status, StatusCode::OK, "{}", replay.text);
    assert_eq!(replay.json()["entry"]["id"], first.json()["entry"]["id"]);
    let form = "label=Cabling&category=hardware&kind=one_off&amount=500&month_offset=0";
    assert_eq!(t.post_form(&format!("/cases/{draft}/costs"), form).await.status, StatusCode::SEE_OTHER);
    let second = book_keyed(&controller, &path, "rpl-2", &body.replace("2025-03", "2025-04")).await;
    assert_eq!(second.status, StatusCode::CREATED, "{}", second.text);
    assert!(t.as_new_user("t-second-lead", Role::Lead).await.cookie.is_some());
}

#[tokio::test]
async fn ids_of_users_deleted_before_the_upgrade_are_never_given_again() {
    use sqlx::Connection;
    let dir = tempfile::tempdir().unwrap();
    let pool = crate::helpers::pool_before(dir.path(), "0007").await;
    // Users 1 to 3 with a token and a session each; then user 3 is deleted with the sqlite3
    // shell (foreign keys off, as it starts), and a token of a user 4 deleted earlier remains.
    let mut conn = pool.acquire().await.unwrap();
    for sql in [
        "INSERT INTO users (id, name, role, password_hash, created_at, created_by, updated_at, updated_by)
         VALUES (1, 'ann', 'admin', '$argon2id$x', 't', 'u', 't', 'u'), (2, 'bo', 'lead', '$argon2id$x', 't', 'u', 't', 'u'),
                (3, 'cy', 'controller', '$argon2id$x', 't', 'u', 't', 'u')",
        "INSERT INTO api_tokens (id, user_id, label, token_hash, created_at, created_by)
         VALUES (1, 1, 'a', 'h1', 't', 'u'), (2, 3, 'c', 'h3', 't', 'u')",
        "INSERT INTO sessions (id_hash, user_id, created_at, last_seen_at) VALUES ('s1', 1, 't', 't'), ('s3', 3, 't', 't')",
        "PRAGMA foreign_keys = OFF",
        "DELETE FROM users WHERE id = 3",
        "INSERT INTO api_tokens (id, user_id, label, token_hash, created_at, created_by) VALUES (3, 4, 'd', 'h4', 't', 'u')",
        "PRAGMA foreign_keys = ON",
    ] {
        sqlx::query(sql).execute(&mut *conn).await.unwrap();
    }
    conn.detach().close().await.unwrap();
    pilot_ledger::db::migrate(&pool).await.unwrap();

    let last: i64 = sqlx::query_scalar("SELECT last FROM user_ids").fetch_one(&pool).await.unwrap();
    assert_eq!(last, 4);
    let tokens: Vec<(i64, Option<String>)> =
        sqlx::query_as("SELECT id, revoked_by FROM api_tokens ORDER BY id").fetch_all(&pool).await.unwrap();
    // Positive control: the token of user 1, who still exists, keeps working.
    assert_eq!(tokens, [(1, None), (2, Some("migration 0012".into())), (3, Some("migration 0012".into()))]);
    let sessions: Vec<String> = sqlx::query_scalar("SELECT id_hash FROM sessions").fetch_all(&pool).await.unwrap();
    assert_eq!(sessions, ["s1"]);
    // The next user created gets id 5: no token or session names it.
    let id = pilot_ledger::app::users::add_user(
        &pool,
        "test",
        "newcomer",
        Role::Admin,
        crate::helpers::PASSWORD,
        crate::helpers::TEST_NOW,
    )
    .await
    .unwrap();
    assert_eq!(id.0, 5);
}

async fn move_zone(t: &TestApp, zone: i64, to: &str) -> crate::helpers::Answer {
    t.post_json(&format!("/api/v1/zones/{zone}/status"), &json!({"status": to}).to_string()).await
}

fn saving(item: i64, period: &str) -> String {
    json!({"kind": "saving", "method": "direct", "item": item, "period": period, "quantity": "10", "evidence": "meter"})
        .to_string()
}

#[tokio::test]
async fn money_is_booked_only_on_zones_under_way() {
    let t = test_app(false).await;
    let c = t.as_role(Some(Role::Controller));
    let z = zone_priced(&t, "LIFE-1", "0.20").await;
    let url = format!("/api/v1/zones/{}/ledger", z.id);
    // Positive controls: approved, piloting and measuring zones book.
    for (status, period) in [("approved", "2025-02"), ("piloting", "2025-03"), ("measuring", "2025-04")] {
        if status != "approved" {
            assert_eq!(move_zone(&t, z.id, status).await.status, StatusCode::OK);
        }
        let a = c.post_json(&url, &saving(z.driver, period)).await;
        assert_eq!(a.status, StatusCode::CREATED, "{status}: {}", a.text);
    }
    let csv = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n\
               2025-05,saving,Press time,direct,10,,,,,meter\n";
    let refusal = |s: &str| {
        format!(
            "the zone is {s}: money is booked only while a zone is approved, piloting or measuring; nothing was booked"
        )
    };
    for status in ["shelved"] {
        assert_eq!(move_zone(&t, z.id, status).await.status, StatusCode::OK);
        let a = c.post_json(&url, &saving(z.driver, "2025-05")).await;
        assert_eq!(a.status, StatusCode::CONFLICT, "{}", a.text);
        assert_eq!(a.json()["error"], refusal(status));
        let a = crate::ledger::import(&c, z.id, "more.csv", csv).await;
        assert_eq!(a.status, StatusCode::CONFLICT, "{}", a.text);
        assert!(a.text.contains(&refusal(status)), "{}", a.text);
    }
    assert_eq!(entries(&t).await, 3);

    // A closed zone books nothing more.
    let closed = zone_priced(&t, "LIFE-2", "0.20").await;
    for status in ["piloting", "measuring", "closed"] {
        assert_eq!(move_zone(&t, closed.id, status).await.status, StatusCode::OK);
    }
    let a = c.post_json(&format!("/api/v1/zones/{}/ledger", closed.id), &saving(closed.driver, "2025-05")).await;
    assert_eq!((a.status, a.json()["error"].clone()), (StatusCode::CONFLICT, json!(refusal("closed"))));

    // Shelved with an approved baseline (no money booked): never a candidate again.
    let shelved = zone_priced(&t, "LIFE-3", "0.20").await;
    assert_eq!(move_zone(&t, shelved.id, "shelved").await.status, StatusCode::OK);
    let a = move_zone(&t, shelved.id, "candidate").await;
    assert_eq!(a.status, StatusCode::CONFLICT);
    assert_eq!(
        a.json()["error"],
        "a zone cannot move from shelved to candidate (the zone has an approved baseline, so it never returns to \
         candidate); allowed next states: none"
    );
    let by_sql =
        sqlx::query("UPDATE zones SET status = 'candidate' WHERE id = ?").bind(shelved.id).execute(&t.pool).await;
    assert!(by_sql.unwrap_err().to_string().contains("a zone with an approved baseline never returns to candidate"));
    // Positive control: a shelved zone without a baseline or money may be a candidate again.
    let fresh = t.post_json("/api/v1/zones", r#"{"code": "LIFE-4", "name": "Fresh"}"#).await.json()["zone"]["id"]
        .as_i64()
        .unwrap();
    assert_eq!(move_zone(&t, fresh, "shelved").await.status, StatusCode::OK);
    assert_eq!(move_zone(&t, fresh, "candidate").await.status, StatusCode::OK);
}

#[tokio::test]
async fn the_same_file_may_be_imported_once_into_each_zone() {
    let t = test_app(false).await;
    let c = t.as_role(Some(Role::Controller));
    let (a, b) = (zone_priced(&t, "CSVZ-1", "0.20").await, zone_priced(&t, "CSVZ-2", "0.20").await);
    // Items named by label: each zone reads them as its own "Press time" and "Sensors".
    let csv = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n\
               2025-03,saving,Press time,direct,10,,,,,meter\n2025-03,spending,Sensors,,,,,,500,invoice 7\n";
    let first = crate::ledger::import(&c, a.id, "march.csv", csv).await;
    assert_eq!(first.status, StatusCode::SEE_OTHER, "{}", first.text);
    let second = crate::ledger::import(&c, b.id, "march.csv", csv).await;
    assert_eq!(second.status, StatusCode::SEE_OTHER, "{}", second.text);
    let items: Vec<(i64, Option<i64>, Option<i64>)> =
        sqlx::query_as("SELECT zone_id, driver_id, cost_id FROM ledger_entries ORDER BY id")
            .fetch_all(&t.pool)
            .await
            .unwrap();
    assert_eq!(
        items,
        [
            (a.id, Some(a.driver), None),
            (a.id, None, Some(a.sensors)),
            (b.id, Some(b.driver), None),
            (b.id, None, Some(b.sensors))
        ]
    );
    // Positive control: a repeat in the same zone is still refused, naming the first import there.
    let repeat = crate::ledger::import(&c, b.id, "march-again.csv", csv).await;
    assert_eq!(repeat.status, StatusCode::CONFLICT, "{}", repeat.text);
    let first_in_b: i64 = sqlx::query_scalar("SELECT id FROM ledger_imports WHERE zone_id = ?")
        .bind(b.id)
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert!(
        repeat.text.contains(&format!("this file has the same rows as import {first_in_b}, imported at ")),
        "{}",
        repeat.text
    );
    assert_eq!(entries(&t).await, 4);
}

#[tokio::test]
async fn a_form_token_belongs_to_its_user_and_zone() {
    let t = test_app(false).await;
    let c = t.as_role(Some(Role::Controller));
    let (a, b) = (zone_priced(&t, "TOK-1", "0.20").await, zone_priced(&t, "TOK-2", "0.20").await);
    let token = crate::helpers::form_token();
    let form = |item: i64| format!("kind=saving&method=direct&item={item}&period=2025-03&quantity=12&evidence=meter");
    let first = c.post_form(&format!("/zones/{}/ledger?form={token}", a.id), &form(a.driver)).await;
    assert_eq!(first.status, StatusCode::SEE_OTHER, "{}", first.text);
    let id: i64 = sqlx::query_scalar("SELECT MAX(id) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    let refusal = "this form was already submitted by another user or on another zone&#39;s page; nothing was booked: \
                   reload the ledger page and use its form";
    // Another user with the same token on the same page, and the same user on another zone.
    let admin = t.as_role(Some(Role::Admin));
    for (who, zone, item) in [(&admin, a.id, a.driver), (&c, b.id, b.driver)] {
        let again = who.post_form(&format!("/zones/{zone}/ledger?form={token}"), &form(item)).await;
        assert_eq!(again.status, StatusCode::CONFLICT, "{}", again.text);
        assert!(again.text.contains(refusal), "{}", again.text);
        assert!(!again.text.contains(&format!("entry #{id}")), "{}", again.text);
    }
    assert_eq!(entries(&t).await, 1);
    // Positive control: the same user on the same page is told what the first submit booked.
    let twice = c.post_form(&format!("/zones/{}/ledger?form={token}", a.id), &form(a.driver)).await;
    assert_eq!(twice.location, Some(format!("/zones/{}/ledger?already=entry-{id}#entries", a.id)));
    assert_eq!(entries(&t).await, 1);
}

#[tokio::test]
async fn a_retry_with_the_same_numbers_written_differently_replays() {
    let t = test_app(false).await;
    let c = t.as_role(Some(Role::Controller));
    let z = zone_priced(&t, "IDN-1", "0.20").await;
    let path = format!("/api/v1/zones/{}/ledger", z.id);
    let with = |item: Value, quantity: Value| {
        json!({"kind": "saving", "method": "direct", "item": item, "period": "2025-03", "quantity": quantity,
               "evidence": "meter"})
        .to_string()
    };
    let first = book_keyed(&c, &path, "idn-1", &with(json!(z.driver), json!("1.50"))).await;
    assert_eq!(first.status, StatusCode::CREATED, "{}", first.text);
    let id = first.json()["entry"]["id"].as_i64().unwrap();
    // The same booking with the number as JSON 1.5 and the item id as a string: a retry.
    let retry = book_keyed(&c, &path, "idn-1", &with(json!(z.driver.to_string()), json!(1.5))).await;
    assert_eq!(retry.status, StatusCode::OK, "{}", retry.text);
    assert_eq!(retry.json()["entry"]["id"], id);
    assert_eq!(retry.headers["idempotent-replayed"], "true");
    // Positive control: another quantity under the same key is a different request.
    let other = book_keyed(&c, &path, "idn-1", &with(json!(z.driver), json!("1.51"))).await;
    assert_eq!(other.status, StatusCode::CONFLICT, "{}", other.text);
    assert_eq!(
        other.json()["error"],
        format!(
            "the Idempotency-Key \"idn-1\" was already used by you for a different request (another body or URL), \
             which booked entry {id}; nothing was booked: use a new key for a new booking"
        )
    );
    assert_eq!(entries(&t).await, 1);
}

fn run_verify(path: &str) -> (bool, String, String) {
    let url = format!("sqlite://{path}");
    let out = std::process::Command::new(crate::cli::BIN).args(["--database-url", &url, "verify"]).output().unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[tokio::test]
async fn verify_reads_the_file_as_it_is_and_never_seals_it() {
    use sqlx::Connection;
    let t = test_app(false).await;
    let z = zone_priced(&t, "VFY-1", "0.20").await;
    let c = t.as_role(Some(Role::Controller));
    for period in ["2025-03", "2025-04"] {
        assert_eq!(
            c.post_json(&format!("/api/v1/zones/{}/ledger", z.id), &saving(z.driver, period)).await.status,
            StatusCode::CREATED
        );
    }
    let path = t.pool.connect_options().get_filename().display().to_string();
    // Positive control: the untouched file verifies.
    let (ok, stdout, stderr) = run_verify(&path);
    assert!(ok && stdout.starts_with("verify ok: 2 ledger entries, "), "{stdout}{stderr}");

    // Every hash removed behind the app's back (trigger dropped with the sqlite3 library).
    let options = sqlx::sqlite::SqliteConnectOptions::new().filename(&path);
    let mut raw = sqlx::SqliteConnection::connect_with(&options).await.unwrap();
    sqlx::query("DROP TRIGGER ledger_entries_no_update").execute(&mut raw).await.unwrap();
    sqlx::query("UPDATE ledger_entries SET hash = NULL").execute(&mut raw).await.unwrap();
    let first: i64 = sqlx::query_scalar("SELECT MIN(id) FROM ledger_entries").fetch_one(&mut raw).await.unwrap();
    let (ok, stdout, stderr) = run_verify(&path);
    assert!(!ok, "{stdout}");
    assert!(
        stderr.contains(&format!(
            "error: verify failed at ledger_entries id {first}: has no hash: written behind the app's back, or its hash \
             was removed"
        )),
        "{stderr}"
    );
    // Verifying did not seal them: they still have no hash, and a second run says the same.
    let unhashed: i64 =
        sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries WHERE hash IS NULL").fetch_one(&mut raw).await.unwrap();
    assert_eq!(unhashed, 2);
    assert!(!run_verify(&path).0);

    // A database whose migrations are not this build's is refused, not migrated.
    let last: i64 = sqlx::query_scalar("SELECT MAX(version) FROM _sqlx_migrations").fetch_one(&mut raw).await.unwrap();
    sqlx::query("DELETE FROM _sqlx_migrations WHERE version = ?").bind(last).execute(&mut raw).await.unwrap();
    let (ok, _, stderr) = run_verify(&path);
    assert!(!ok);
    assert!(stderr.contains(&format!("error: verify refused: migration {last} (")), "{stderr}");
    assert!(stderr.contains(") is not applied: run `pilot-ledger migrate` first (on a copy)"), "{stderr}");
    let still: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM _sqlx_migrations WHERE version = ?")
        .bind(last)
        .fetch_one(&mut raw)
        .await
        .unwrap();
    assert_eq!(still, 0);
}

#[tokio::test]
async fn four_eyes_cover_everyone_who_edited_the_version() {
    let t = test_app(false).await;
    // A (t-lead) writes the case; B makes a trivial edit and submits it.
    let zone = t.post_json("/api/v1/zones", r#"{"code": "EYE-1", "name": "Four eyes"}"#).await.json()["zone"]["id"]
        .as_i64()
        .unwrap();
    let case = json!({"label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1,
        "ramp_up_months": 0, "success_probability": "0.8",
        "costs": [{"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "30000", "month_offset": 0}]});
    let id = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await.json()["case"]["id"]
        .as_i64()
        .unwrap();
    let cost = "label=Cabling&category=hardware&kind=one_off&amount=500&month_offset=0";
    assert_eq!(t.post_form(&format!("/cases/{id}/costs"), cost).await.status, StatusCode::SEE_OTHER);
    let b = t.as_new_user("t-lead-b", Role::Lead).await;
    let typo =
        "label=Base.&horizon_months=36&start_month=2025-01&go_live_offset=1&ramp_up_months=0&success_probability=80";
    let edit = b.post_form(&format!("/cases/{id}/edit"), typo).await;
    assert_eq!(edit.status, StatusCode::SEE_OTHER, "{}", edit.text);
    assert_eq!(b.post_json(&format!("/api/v1/cases/{id}/submit"), "{}").await.status, StatusCode::OK);
    let state = |t: &TestApp| {
        let t = t.clone();
        async move { t.get(&format!("/api/v1/cases/{id}")).await.json()["case"]["state"].clone() }
    };
    assert_eq!(state(&t).await, "submitted");

    // A is neither the submitter nor the last editor, but wrote the content: refused.
    let by_a = t.post_json(&format!("/api/v1/cases/{id}/approve"), "{}").await;
    assert_eq!(by_a.status, StatusCode::CONFLICT, "{}", by_a.text);
    assert_eq!(
        by_a.json()["error"],
        "you submitted or last edited this version: a second person must approve it (segregation of duties)"
    );
    // The database refuses it too.
    let raw = sqlx::query(
        "UPDATE case_versions SET state = 'approved', approved_by = 't-lead', approval_kind = 'second_person' WHERE id = ?",
    )
    .bind(id)
    .execute(&t.pool)
    .await;
    assert!(raw.unwrap_err().to_string().contains("four eyes: whoever edited a version cannot approve it"));
    assert_eq!(state(&t).await, "submitted");

    // Positive control: C, who never touched it, approves.
    let c = t.as_role(Some(Role::Admin));
    let ok = c.post_json(&format!("/api/v1/cases/{id}/approve"), "{}").await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
    assert_eq!(ok.json()["case"]["approved_by"], "t-admin");
}
