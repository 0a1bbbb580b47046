//! The benefit ledger end to end on a real SQLite file: approval freezes the baseline, the
//! database refuses changes to booked rows, reversals net to zero, CSV imports are all or
//! nothing, concurrent writers each book exactly once, and realized returns match references.

use crate::helpers::{TestApp, test_app};
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use pilot_ledger::auth::Role;
use rust_decimal::Decimal;
use serde_json::{Value, json};
use std::str::FromStr;

/// A zone whose approved baseline starts 2025-01 (36 months): one-off "Sensors", recurring
/// "Software", and an "Energy" driver at 0.20 EUR/kWh.
pub struct Zone {
    pub id: i64,
    pub case: i64,
    pub energy: i64,
    pub sensors: i64,
    pub software: i64,
}

pub async fn zone_with_baseline(t: &TestApp, code: &str) -> Zone {
    let z = t.post_json("/api/v1/zones", &json!({"code": code, "name": "Ledger test zone"}).to_string()).await;
    let id = z.json()["zone"]["id"].as_i64().unwrap();
    let case = json!({
        "label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1, "ramp_up_months": 0,
        "success_probability": "0.8",
        "costs": [
            {"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "30000", "month_offset": 0, "capex": true},
            {"label": "Software", "category": "software", "kind": "recurring", "amount": "9600", "month_offset": 2}
        ],
        "drivers": [{"label": "Energy", "kind": "energy", "qty_low": "150000", "qty_likely": "200000", "qty_high": "250000", "unit_value": "0.20"}]
    });
    let c = t.post_json(&format!("/api/v1/zones/{id}/cases"), &case.to_string()).await.json();
    let case_id = c["case"]["id"].as_i64().unwrap();
    assert_eq!(t.post_form(&format!("/cases/{case_id}/submit"), "").await.status, StatusCode::SEE_OTHER);
    // Four eyes: a second person (the admin may edit cases) approves.
    let approver = t.as_role(Some(Role::Admin));
    assert_eq!(approver.post_form(&format!("/cases/{case_id}/approve"), "").await.status, StatusCode::SEE_OTHER);
    let costs = c["case"]["costs"].as_array().unwrap();
    Zone {
        id,
        case: case_id,
        energy: c["case"]["drivers"][0]["id"].as_i64().unwrap(),
        sensors: costs[0]["id"].as_i64().unwrap(),
        software: costs[1]["id"].as_i64().unwrap(),
    }
}

fn dec(v: &Value) -> Decimal {
    Decimal::from_str(v.as_str().unwrap_or_else(|| panic!("decimal string expected: {v}"))).unwrap()
}

async fn book(t: &TestApp, zone: i64, body: Value) -> crate::helpers::Answer {
    t.post_json(&format!("/api/v1/zones/{zone}/ledger"), &body.to_string()).await
}

fn direct(item: i64, period: &str, quantity: &str) -> Value {
    json!({"kind": "saving", "method": "direct", "item": item, "period": period, "quantity": quantity, "evidence": "sub-meter M3 reading"})
}

#[tokio::test]
async fn approval_freezes_the_baseline() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "FRZ-1").await;
    let api = t.get(&format!("/api/v1/cases/{}", z.case)).await.json();
    assert_eq!(api["case"]["state"], "approved");
    // The editor refuses, and so does the database itself.
    let a = t
        .post_form(
            &format!("/cases/{}/costs", z.case),
            "label=More&category=other&kind=one_off&amount=5&month_offset=0",
        )
        .await;
    assert_eq!(a.status, StatusCode::CONFLICT);
    assert!(
        sqlx::query("UPDATE cost_items SET amount = '1' WHERE case_id = ?")
            .bind(z.case)
            .execute(&t.pool)
            .await
            .is_err()
    );
    assert!(sqlx::query("DELETE FROM benefit_drivers WHERE case_id = ?").bind(z.case).execute(&t.pool).await.is_err());
    assert!(
        sqlx::query("UPDATE case_versions SET horizon_months = 12 WHERE id = ?")
            .bind(z.case)
            .execute(&t.pool)
            .await
            .is_err()
    );
    // A copy is a new draft; approving it supersedes the old baseline, which stays frozen.
    let copy = t.post_form(&format!("/cases/{}/copy", z.case), "label=Revised").await;
    let new_id: i64 = copy.location.unwrap().trim_start_matches("/cases/").trim_end_matches("/edit").parse().unwrap();
    t.post_form(&format!("/cases/{new_id}/submit"), "").await;
    t.as_role(Some(Role::Admin)).post_form(&format!("/cases/{new_id}/approve"), "").await;
    let states: Vec<String> = sqlx::query_scalar("SELECT state FROM case_versions WHERE zone_id = ? ORDER BY version")
        .bind(z.id)
        .fetch_all(&t.pool)
        .await
        .unwrap();
    assert_eq!(states, ["superseded", "approved"]);
    let audited: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE action = 'case.approve'")
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(audited, 2);
}

#[tokio::test]
async fn booked_rows_cannot_be_changed_even_by_raw_sql() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let lead = t.as_role(Some(Role::Lead));
    let z = zone_with_baseline(&lead, "RAW-1").await;
    assert_eq!(book(&t, z.id, direct(z.energy, "2025-03", "1240")).await.status, StatusCode::CREATED);
    let update = sqlx::query("UPDATE ledger_entries SET amount = '0'").execute(&t.pool).await;
    assert!(update.unwrap_err().to_string().contains("append-only"));
    assert!(sqlx::query("DELETE FROM ledger_entries").execute(&t.pool).await.is_err());
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 1);
}

#[tokio::test]
async fn a_reversal_nets_to_exactly_zero_and_happens_once() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "REV-1").await;
    let first = book(&t, z.id, direct(z.energy, "2025-03", "1240.5")).await.json();
    let id = first["entry"]["id"].as_i64().unwrap();
    // 1,240.5 kWh x 0.20 EUR/kWh = 248.10 EUR, the unit value frozen on the entry.
    assert_eq!(dec(&first["entry"]["amount"]), Decimal::from_str("248.1").unwrap());
    assert_eq!(dec(&first["entry"]["unit_value"]), Decimal::from_str("0.2").unwrap());
    let spend = json!({"kind": "spending", "item": z.sensors, "period": "2025-01", "amount": "29999.99", "evidence": "invoice 1187"});
    let s = book(&t, z.id, spend).await.json();
    assert_eq!(dec(&s["entry"]["amount"]), Decimal::from_str("-29999.99").unwrap());

    let rev =
        t.post_json(&format!("/api/v1/zones/{}/ledger/{id}/reverse", z.id), r#"{"evidence": "wrong meter"}"#).await;
    assert_eq!(rev.status, StatusCode::CREATED, "{}", rev.text);
    let rev_id = rev.json()["entry"]["id"].as_i64().unwrap();
    let amounts: Vec<String> = sqlx::query_scalar("SELECT amount FROM ledger_entries WHERE id IN (?, ?)")
        .bind(id)
        .bind(rev_id)
        .fetch_all(&t.pool)
        .await
        .unwrap();
    let sum: Decimal = amounts.iter().map(|a| Decimal::from_str(a).unwrap()).sum();
    assert_eq!(sum, Decimal::ZERO);

    let twice = t.post_json(&format!("/api/v1/zones/{}/ledger/{id}/reverse", z.id), r#"{"evidence": "again"}"#).await;
    assert_eq!(twice.status, StatusCode::CONFLICT);
    assert!(twice.json()["error"].as_str().unwrap().contains("already been reversed"));
    let of_reversal =
        t.post_json(&format!("/api/v1/zones/{}/ledger/{rev_id}/reverse", z.id), r#"{"evidence": "x"}"#).await;
    assert_eq!(of_reversal.status, StatusCode::CONFLICT);
    let ledger = t.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json();
    let entries = ledger["entries"].as_array().unwrap();
    assert_eq!(entries.len(), 3, "the history shows the original, the spend and the reversal");
    assert_eq!(entries[0]["reversed_by"], rev_id);
    // The answers to the bookings are what was stored (built from the written row, not re-read).
    let mut answered = first["entry"].clone();
    answered["reversed_by"] = json!(rev_id);
    assert_eq!(entries[0], answered);
    assert_eq!(entries[1], s["entry"]);
    assert_eq!(entries[2], rev.json()["entry"]);
}

#[tokio::test]
async fn normalized_measurement_keeps_its_inputs() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "NRM-1").await;
    // Avoided quantity adjusted to reporting conditions (the IPMVP idea; common practice, hand
    // arithmetic): 41.5 kWh per unit x 3,100 units - 124,000 kWh metered = 4,650 kWh avoided,
    // x 0.20 EUR/kWh = 930.00 EUR.
    let body = json!({"kind": "saving", "method": "normalized", "item": z.energy, "period": "2025-04",
        "baseline_intensity": "41.5", "reporting_volume": 3100, "measured_consumption": "124000", "evidence": "main meter, MES volume"});
    let e = book(&t, z.id, body).await.json()["entry"].clone();
    assert_eq!(dec(&e["quantity"]), Decimal::from(4650));
    assert_eq!(dec(&e["amount"]), Decimal::from(930));
    assert_eq!(e["method"], "normalized");
    assert_eq!(dec(&e["baseline_intensity"]), Decimal::from_str("41.5").unwrap());
    assert_eq!(dec(&e["reporting_volume"]), Decimal::from(3100));
}

#[tokio::test]
async fn bad_bookings_name_their_field_and_write_nothing() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "BAD-1").await;
    let cases = [
        (direct(999_999, "2025-03", "10"), "item"),
        (json!({"kind": "spending", "item": 999_998, "period": "2025-03", "amount": "10", "evidence": "x"}), "item"),
        (direct(z.energy, "2024-12", "10"), "period"),
        (direct(z.energy, "2027-12", "10"), "period"),
        (direct(z.energy, "2025-13", "10"), "period"),
        (direct(z.energy, "2025-03", "ten"), "quantity"),
        (
            json!({"kind": "saving", "method": "normalized", "item": z.energy, "period": "2025-03", "baseline_intensity": "2",
                "reporting_volume": "-5", "measured_consumption": "1", "evidence": "x"}),
            "reporting_volume",
        ),
        (
            json!({"kind": "spending", "item": z.sensors, "period": "2025-03", "amount": "12,5x", "evidence": "x"}),
            "amount",
        ),
        (
            json!({"kind": "saving", "method": "direct", "item": z.energy, "period": "2025-03", "quantity": "1", "evidence": " "}),
            "evidence",
        ),
        (json!({"kind": "gift", "item": z.energy, "period": "2025-03", "evidence": "x"}), "kind"),
    ];
    for (body, field) in cases {
        let a = book(&t, z.id, body.clone()).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{body}: {}", a.text);
        let fields: Vec<String> =
            a.json()["fields"].as_array().unwrap().iter().map(|f| f["field"].as_str().unwrap().to_string()).collect();
        assert!(fields.contains(&field.to_string()), "{body}: {fields:?}");
    }
    // A future month inside the horizon says so.
    let a = book(&t, z.id, direct(z.energy, "2027-12", "10")).await;
    assert!(a.text.contains("in the future") || a.text.contains("horizon"), "{}", a.text);
    // A zone without an approved baseline cannot be booked.
    let other =
        t.as_role(Some(Role::Lead)).post_json("/api/v1/zones", r#"{"code":"NOB-1","name":"No baseline"}"#).await.json();
    let a = book(&t, other["zone"]["id"].as_i64().unwrap(), direct(z.energy, "2025-03", "1")).await;
    assert_eq!(a.status, StatusCode::CONFLICT);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0);
    // A viewer may read the ledger but not book.
    let v = t.as_role(Some(Role::Viewer));
    assert_eq!(book(&v, z.id, direct(z.energy, "2025-03", "1")).await.status, StatusCode::FORBIDDEN);
    assert_eq!(v.get(&format!("/zones/{}/ledger", z.id)).await.status, StatusCode::OK);
}

fn multipart(name: &str, csv: &str) -> Request<Body> {
    let boundary = "----pilot-ledger-test-boundary";
    let body = format!(
        "--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"{name}\"\r\nContent-Type: text/csv\r\n\r\n{csv}\r\n--{boundary}--\r\n"
    );
    Request::post("/zones/ZONE/ledger/import")
        .header(header::CONTENT_TYPE, format!("multipart/form-data; boundary={boundary}"))
        .body(Body::from(body))
        .unwrap()
}

pub async fn import(t: &TestApp, zone: i64, name: &str, csv: &str) -> crate::helpers::Answer {
    let mut req = multipart(name, csv);
    *req.uri_mut() = format!("/zones/{zone}/ledger/import").parse().unwrap();
    t.send(req).await
}

#[tokio::test]
async fn csv_import_is_all_or_nothing_and_once_only() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "CSV-1").await;
    let header =
        "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence";
    let mut rows: Vec<String> = (0..1000)
        .map(|i| match i % 4 {
            3 => format!("2025-{:02},spending,Software,,,,,,800.00,invoice {i}", i % 12 + 1),
            _ => format!("2025-{:02},saving,Energy,direct,{},,,,,meter M1 row {i}", i % 12 + 1, 100 + i),
        })
        .collect();
    let good = format!("{header}\n{}\n", rows.join("\n"));
    // Row 516 of the data (line 517 of the file, after the header) gets a bad quantity.
    rows[515] = "2025-04,saving,Energy,direct,abc,,,,,meter M1".to_string();
    let bad = format!("{header}\n{}\n", rows.join("\n"));

    let a = import(&t, z.id, "march.csv", &bad).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", &a.text[..a.text.len().min(400)]);
    assert!(a.text.contains("line 517, column quantity"), "the bad row and column are named");
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0, "nothing of the bad file was booked");

    let a = import(&t, z.id, "march.csv", &good).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", &a.text[..a.text.len().min(400)]);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 1000);
    let again = import(&t, z.id, "march-copy.csv", &good).await;
    assert_eq!(again.status, StatusCode::CONFLICT);
    assert!(again.text.contains("already imported"));
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 1000);

    // Several bad rows are all reported, with unknown items and future months among them.
    let many = format!(
        "{header}\n2025-01,saving,Gas,direct,1,,,,,x\n2027-11,saving,Energy,direct,1,,,,,x\n2025-02,spending,Software,,,,,,-5,x\n"
    );
    let a = import(&t, z.id, "many.csv", &many).await;
    assert!(
        a.text.contains("line 2, column item")
            && a.text.contains("line 3, column period")
            && a.text.contains("line 4, column amount"),
        "{}",
        a.text
    );

    // Export carries every entry in the import layout.
    let csv = t.get(&format!("/zones/{}/ledger.csv", z.id)).await;
    assert_eq!(csv.headers.get(header::CONTENT_TYPE).unwrap(), "text/csv; charset=utf-8");
    assert_eq!(csv.text.lines().count(), 1001);
    assert!(csv.text.starts_with("entry,zone,period,kind,item,method,quantity"));
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn eight_writers_book_four_thousand_entries_exactly_once() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "CON-1").await;
    let (_, token) = pilot_ledger::web::admin::issue_token(&t.pool, "t-controller", "load", "test").await.unwrap();
    let anon = t.as_role(None);
    let mut writers = Vec::new();
    for w in 0..8 {
        let (app, token) = (anon.clone(), token.clone());
        let (zone, energy) = (z.id, z.energy);
        writers.push(tokio::spawn(async move {
            let mut sent = Decimal::ZERO;
            for i in 0..500 {
                let quantity = Decimal::new(1000 + w * 500 + i, 1); // 100.0, 100.1, ... kWh
                let body = direct(energy, &format!("2025-{:02}", i % 12 + 1), &quantity.to_string()).to_string();
                let key = format!("w{w}-{i}");
                // Every tenth request is sent twice, as a client retrying after a lost answer.
                for _ in 0..if i % 10 == 0 { 2 } else { 1 } {
                    let req = Request::post(format!("/api/v1/zones/{zone}/ledger"))
                        .header(header::AUTHORIZATION, format!("Bearer {token}"))
                        .header(header::CONTENT_TYPE, "application/json")
                        .header("idempotency-key", &key)
                        .body(Body::from(body.clone()))
                        .unwrap();
                    let a = app.send(req).await;
                    assert!(a.status == StatusCode::CREATED || a.status == StatusCode::OK, "{} {}", a.status, a.text);
                }
                sent += quantity * Decimal::from_str("0.20").unwrap();
            }
            sent
        }));
    }
    let mut sent = Decimal::ZERO;
    for w in writers {
        sent += w.await.unwrap();
    }
    let amounts: Vec<String> =
        sqlx::query_scalar("SELECT amount FROM ledger_entries").fetch_all(&t.pool).await.unwrap();
    assert_eq!(amounts.len(), 4000, "each booking present exactly once");
    let keys: i64 = sqlx::query_scalar("SELECT COUNT(DISTINCT idempotency_key) FROM ledger_entries")
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(keys, 4000);
    let booked: Decimal = amounts.iter().map(|a| Decimal::from_str(a).unwrap()).sum();
    assert_eq!(booked, sent);
}

#[tokio::test]
async fn realized_xirr_of_a_scripted_zone_matches_scipy() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "XIR-1").await;
    let c = t.as_role(Some(Role::Controller));
    // tests/fixtures/scripted_zone.py (scipy 1.17.1, brentq) on the same dated flows.
    let fx: Value = serde_json::from_str(include_str!("../fixtures/scripted_zone.json")).unwrap();
    for b in fx["bookings"].as_array().unwrap() {
        let period = b["period"].as_str().unwrap();
        let value = b["value"].as_str().unwrap();
        let body = if b["kind"] == "saving" {
            direct(z.energy, period, value)
        } else {
            let item = if value == "30000.00" { z.sensors } else { z.software };
            json!({"kind": "spending", "item": item, "period": period, "amount": value, "evidence": "invoice"})
        };
        assert_eq!(book(&c, z.id, body).await.status, StatusCode::CREATED);
    }
    let r = c.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json()["realized"].clone();
    let xirr: f64 = r["xirr"].as_str().unwrap().parse().unwrap();
    let xnpv: f64 = r["xnpv"].as_str().unwrap().parse().unwrap();
    let (ref_xirr, ref_xnpv) = (fx["xirr"].as_f64().unwrap(), fx["xnpv"].as_f64().unwrap());
    assert!((xirr - ref_xirr).abs() < 1e-7, "{xirr} vs scipy {ref_xirr}");
    assert!((xnpv - ref_xnpv).abs() <= 1e-9 * ref_xnpv.abs(), "{xnpv} vs {ref_xnpv}");
    assert_eq!(r["elapsed_months"], 12);
    // The page shows the same figures to every role.
    let page = t.as_role(Some(Role::Viewer)).get(&format!("/zones/{}/ledger", z.id)).await;
    assert!(page.text.contains("id=\"xirr\"") && page.text.contains("<svg"));
}

#[tokio::test]
async fn backup_is_a_consistent_copy() {
    let t = test_app(true).await;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("copy.db");
    let bytes = pilot_ledger::db::backup(&t.pool, &path).await.unwrap();
    assert!(bytes > 0);
    let copy = pilot_ledger::db::connect(&format!("sqlite://{}", path.display())).await.unwrap();
    let (a, b): (i64, i64) = (
        sqlx::query_scalar("SELECT COUNT(*) FROM zones").fetch_one(&t.pool).await.unwrap(),
        sqlx::query_scalar("SELECT COUNT(*) FROM zones").fetch_one(&copy).await.unwrap(),
    );
    assert_eq!(a, b);
    let ok: String = sqlx::query_scalar("PRAGMA integrity_check").fetch_one(&copy).await.unwrap();
    assert_eq!(ok, "ok");
    assert!(pilot_ledger::db::backup(&t.pool, &path).await.is_err(), "an existing file is not overwritten");
}

#[tokio::test]
async fn a_large_import_is_booked_whole_with_its_totals() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "BIG-1").await;
    let header =
        "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence";
    // 40,000 rows, about 2.6 MB: more than the 2 MiB other requests may carry.
    let rows: Vec<String> = (0..40_000)
        .map(|i| format!("2025-{:02},saving,Energy,direct,{},,,,,meter M1 row {i}", i % 12 + 1, i % 50))
        .collect();
    let csv = format!("{header}\n{}\n", rows.join("\n"));
    assert!(csv.len() > 2 * 1024 * 1024);
    let a = import(&t, z.id, "year.csv", &csv).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", &a.text[..a.text.len().min(400)]);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 40_000);
    // Quantities 0..49 repeat 800 times: 800 x 1,225 = 980,000 kWh, x 0.20 EUR/kWh = 196,000 EUR.
    let (amount, quantity, entries): (String, String, i64) =
        sqlx::query_as("SELECT amount, quantity, entries FROM ledger_totals WHERE zone_id = ? AND item = ?")
            .bind(z.id)
            .bind(format!("driver:{}", z.energy))
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!((amount.as_str(), quantity.as_str(), entries), ("196000", "980000", 40_000));

    // Beyond the import limit the upload is refused before anything is read.
    let huge = format!("{header}\n{}", "2025-01,saving,Energy,direct,1,,,,,x\n".repeat(500_000));
    assert!(huge.len() > pilot_ledger::web::IMPORT_MAX_BYTES + 64 * 1024);
    let a = import(&t, z.id, "huge.csv", &huge).await;
    assert_eq!(a.status, StatusCode::PAYLOAD_TOO_LARGE);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 40_000);
}
