//! The benefit ledger end to end on a real SQLite file: approval freezes the baseline, the
//! database refuses changes to booked rows, reversals net to zero, CSV imports are all or
//! nothing, concurrent writers each book exactly once, and realized returns match references.

use crate::helpers::{TestApp, test_app, token_in};
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
async fn volume_adjusted_measurement_keeps_its_inputs() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "NRM-1").await;
    // Avoided quantity adjusted to the period's volume (IPMVP's reporting-period basis; common
    // practice, hand arithmetic): 41.5 kWh per unit x 3,100 units - 124,000 kWh metered = 4,650
    // kWh avoided, x 0.20 EUR/kWh = 930.00 EUR.
    let body = json!({"kind": "saving", "method": "volume_adjusted", "item": z.energy, "period": "2025-04",
        "baseline_intensity": "41.5", "reporting_volume": 3100, "measured_consumption": "124000", "evidence": "main meter, MES volume"});
    let e = book(&t, z.id, body).await.json()["entry"].clone();
    assert_eq!(dec(&e["quantity"]), Decimal::from(4650));
    assert_eq!(dec(&e["amount"]), Decimal::from(930));
    // The new field, and the old one kept for one release (deprecated in openapi.json).
    assert_eq!(e["booking_method"], "volume_adjusted");
    assert_eq!(e["method"], "normalized");
    assert_eq!(dec(&e["baseline_intensity"]), Decimal::from_str("41.5").unwrap());
    assert_eq!(dec(&e["reporting_volume"]), Decimal::from(3100));
    // Stored under its old code: the CHECK of migration 0003 and the hash chain keep it.
    let stored: String = sqlx::query_scalar("SELECT method FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(stored, "normalized");
    // The page writes the glossary's words.
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    assert!(
        page.text.contains("<td>adjusted to the period&#39;s volume (41.5 × 3,100 − 124,000)</td>"),
        "{}",
        page.text
    );
    // The CSV export writes the new value.
    let csv = t.get(&format!("/zones/{}/ledger.csv", z.id)).await;
    assert!(
        csv.text.lines().nth(1).unwrap().contains(",saving,") && csv.text.contains(",volume_adjusted,"),
        "{}",
        csv.text
    );
    assert!(!csv.text.contains("normalized"), "{}", csv.text);
}

#[tokio::test]
async fn the_old_method_name_is_still_accepted_for_one_release() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "NRM-2").await;
    // Same numbers as above, sent with the deprecated spelling: the same entry.
    let body = json!({"kind": "saving", "method": "normalized", "item": z.energy, "period": "2025-04",
        "baseline_intensity": "41.5", "reporting_volume": 3100, "measured_consumption": "124000", "evidence": "main meter"});
    let a = book(&t, z.id, body).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(a.json()["entry"]["booking_method"], "volume_adjusted");
    assert_eq!(dec(&a.json()["entry"]["quantity"]), Decimal::from(4650));
    // Refusal beside it: a method neither spelling names.
    let body = json!({"kind": "saving", "method": "normalised", "item": z.energy, "period": "2025-05",
        "baseline_intensity": "41.5", "reporting_volume": 3100, "measured_consumption": "124000", "evidence": "main meter"});
    let a = book(&t, z.id, body).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(a.json()["fields"], json!([{"field": "method", "message": "direct or volume_adjusted"}]));
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
            json!({"kind": "saving", "method": "volume_adjusted", "item": z.energy, "period": "2025-03", "baseline_intensity": "2",
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
    // A future month inside the horizon (2025-01 to 2027-12) says so, on the fixed test clock
    // (2026-11-15); a month after the horizon names the horizon instead.
    let a = book(&t, z.id, direct(z.energy, "2027-12", "10")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "period", "message": "2027-12 is in the future; the latest month that can be booked is 2026-11"}])
    );
    let a = book(&t, z.id, direct(z.energy, "2028-01", "10")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "period", "message": "a month of the baseline's horizon: 2025-01 to 2027-12"}])
    );
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

pub(crate) fn multipart(name: &str, csv: &str) -> Request<Body> {
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
    *req.uri_mut() = format!("/zones/{zone}/ledger/import?form={}", crate::helpers::form_token()).parse().unwrap();
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
    // Imported on the fixed test clock (helpers::TEST_NOW) by the controller.
    assert!(
        again.text.contains("the same rows as import 1, imported at 2026-11-15T10:00:00Z by t-controller"),
        "{}",
        again.text
    );
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 1000);

    // Several bad rows are all reported, with unknown items and future months among them.
    let many = format!(
        "{header}\n2025-01,saving,Gas,direct,1,,,,,x\n2027-11,saving,Energy,direct,1,,,,,x\n2025-02,spending,Software,,,,,,-5,x\n"
    );
    let a = import(&t, z.id, "many.csv", &many).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains("line 2, column item")
            && a.text.contains(
                "line 3, column period: 2027-11 is in the future; the latest month that can be booked is 2026-11"
            )
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
    let (_, token) =
        pilot_ledger::app::users::issue_token(&t.pool, "test", "t-controller", "load", 90, t.now()).await.unwrap();
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
                // Every tenth request is sent twice, as a client retrying after a lost answer: the
                // first books (201), the retry replays the same entry (200).
                let mut first_id = None;
                for attempt in 0..if i % 10 == 0 { 2 } else { 1 } {
                    let req = Request::post(format!("/api/v1/zones/{zone}/ledger"))
                        .header(header::AUTHORIZATION, format!("Bearer {token}"))
                        .header(header::CONTENT_TYPE, "application/json")
                        .header("idempotency-key", &key)
                        .body(Body::from(body.clone()))
                        .unwrap();
                    let a = app.send(req).await;
                    let expected = if attempt == 0 { StatusCode::CREATED } else { StatusCode::OK };
                    assert_eq!(a.status, expected, "attempt {attempt}: {}", a.text);
                    let id = a.json()["entry"]["id"].as_i64().unwrap();
                    assert_eq!(*first_id.get_or_insert(id), id, "a retry answers the entry the first booked");
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
    let keys: i64 =
        sqlx::query_scalar("SELECT COUNT(DISTINCT entry_id) FROM idempotency_keys").fetch_one(&t.pool).await.unwrap();
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
        .map(|i| format!("2025-{:02},saving,Energy,direct,{},,,,,meter M1 row {i}", i % 12 + 1, i % 50 + 1))
        .collect();
    let csv = format!("{header}\n{}\n", rows.join("\n"));
    assert!(csv.len() > 2 * 1024 * 1024);
    let a = import(&t, z.id, "year.csv", &csv).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", &a.text[..a.text.len().min(400)]);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 40_000);
    // Quantities 1..50 (a direct saving is more than zero) repeat 800 times: 800 x 1,275 =
    // 1,020,000 kWh, x 0.20 EUR/kWh = 204,000 EUR.
    let (amount, quantity, entries): (String, String, i64) =
        sqlx::query_as("SELECT amount, quantity, entries FROM ledger_totals WHERE zone_id = ? AND item = ?")
            .bind(z.id)
            .bind(format!("driver:{}", z.energy))
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!((amount.as_str(), quantity.as_str(), entries), ("204000", "1020000", 40_000));
    // The start-up check sums the entries page by page (db::READ_PAGE rows a page): several
    // pages here agree with the kept totals; a tampered row would be named (tests/it/chain.rs).
    assert_eq!(pilot_ledger::db::totals_problem(&t.pool).await.unwrap(), None);

    // Beyond the import limit the upload is refused before anything is read.
    let huge = format!("{header}\n{}", "2025-01,saving,Energy,direct,1,,,,,x\n".repeat(500_000));
    assert!(huge.len() > pilot_ledger::web::IMPORT_MAX_BYTES + 64 * 1024);
    let a = import(&t, z.id, "huge.csv", &huge).await;
    assert_eq!(a.status, StatusCode::PAYLOAD_TOO_LARGE);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 40_000);
}

#[tokio::test]
async fn an_import_holds_at_most_the_row_limit() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "ROWS-1").await;
    let limit = pilot_ledger::web::IMPORT_MAX_ROWS;
    assert_eq!(limit, 100_000);
    let header =
        "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence";
    let file = |n: usize| format!("{header}\n{}", "2025-01,saving,Energy,direct,1,,,,,x\n".repeat(n));
    // One row over the limit: refused naming the limit, nothing written.
    let a = import(&t, z.id, "over.csv", &file(limit + 1)).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains("at most 100000 rows per import; split the file by month"),
        "{}",
        &a.text[..a.text.len().min(400)]
    );
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0);
    // Positive control: exactly the limit is booked whole.
    let a = import(&t, z.id, "at.csv", &file(limit)).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", &a.text[..a.text.len().min(400)]);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 100_000);
}

// ---------------------------------------------------------------------------------------------
// Ledger rules (issue 11, point 5)
// ---------------------------------------------------------------------------------------------

/// The portfolio's realization of a zone, by code.
async fn portfolio_realization(t: &TestApp, code: &str) -> Value {
    let p = t.get("/api/v1/portfolio").await.json();
    let row = p["zones"].as_array().unwrap().iter().find(|r| r["code"] == code).unwrap().clone();
    row["realization_to_date"].clone()
}

fn rate(v: &Value) -> f64 {
    v.as_str().unwrap_or_else(|| panic!("rate string expected: {v}")).parse().unwrap()
}

#[tokio::test]
async fn a_reversed_later_booking_does_not_stretch_the_elapsed_months() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "ELP-1").await;
    // Hand arithmetic: the Energy driver expects 200,000 kWh a year x 0.20 EUR/kWh / 12 =
    // 3,333.3333 EUR a month (the schedule rounds each month to 4 places) from go-live in
    // month 1 (2025-02); month 0 (2025-01) expects nothing. Booked: 15,000 kWh in 2025-02 and
    // in 2025-03 = 3,000 EUR each. Three months elapsed: 6,000 / 6,666.6666 = 0.900000009
    // (90.00 %).
    for period in ["2025-02", "2025-03"] {
        assert_eq!(book(&t, z.id, direct(z.energy, period, "15000")).await.status, StatusCode::CREATED);
    }
    let expected = 6000.0 / 6666.6666;
    let realized = || async { t.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json()["realized"].clone() };
    let before = realized().await;
    assert_eq!(before["elapsed_months"], 3);
    assert!((rate(&before["savings_realization"]) - expected).abs() < 1e-12, "{before}");
    assert!((rate(&portfolio_realization(&t, "ELP-1").await) - expected).abs() < 1e-12);

    // A booking in 2025-06, then its reversal: on today's code the window stretched to six
    // months (6,000 / 16,666.6665 = 36.00 %) on both pages.
    let late = book(&t, z.id, direct(z.energy, "2025-06", "15000")).await.json();
    let late_id = late["entry"]["id"].as_i64().unwrap();
    let rev = t
        .post_json(&format!("/api/v1/zones/{}/ledger/{late_id}/reverse", z.id), r#"{"evidence": "wrong month"}"#)
        .await;
    assert_eq!(rev.status, StatusCode::CREATED, "{}", rev.text);
    let after = realized().await;
    assert_eq!(after["elapsed_months"], 3, "{after}");
    assert_eq!(dec(&after["savings_expected_to_date"]), Decimal::from_str("6666.6666").unwrap());
    assert!((rate(&after["savings_realization"]) - expected).abs() < 1e-12, "{after}");
    assert!((rate(&portfolio_realization(&t, "ELP-1").await) - expected).abs() < 1e-12, "the portfolio agrees");
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    assert!(page.text.contains("(3 months booked)") && page.text.contains(">90.00 %<"), "{}", page.text);

    // Positive control: a live booking in 2025-06 does extend the window to six months:
    // expected 5 x 3,333.3333 = 16,666.6665, measured 9,000: 54.00 %.
    assert_eq!(book(&t, z.id, direct(z.energy, "2025-06", "15000")).await.status, StatusCode::CREATED);
    let live = realized().await;
    assert_eq!(live["elapsed_months"], 6);
    assert!((rate(&live["savings_realization"]) - 9000.0 / 16666.6665).abs() < 1e-12, "{live}");
    assert!((rate(&portfolio_realization(&t, "ELP-1").await) - 9000.0 / 16666.6665).abs() < 1e-12);
}

#[tokio::test]
async fn direct_savings_are_more_than_zero_and_volume_adjusted_ones_may_be_negative() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "SGN-1").await;
    let refusal = "an avoided quantity, more than zero: a period that did worse than its baseline is booked with \
                   the method volume_adjusted (adjusted to the period's volume); a wrong entry is corrected by reversal";
    for q in ["0", "-5", "-0.01"] {
        let a = book(&t, z.id, direct(z.energy, "2025-03", q)).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{q}: {}", a.text);
        assert_eq!(a.json()["fields"], json!([{"field": "quantity", "message": refusal}]), "{q}");
    }
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0);
    // Positive control: the smallest positive quantity is a saving.
    assert_eq!(book(&t, z.id, direct(z.energy, "2025-03", "0.01")).await.status, StatusCode::CREATED);
    // A saving adjusted to the period's volume may be negative (hand arithmetic): 41.5 kWh per
    // unit x 2,900 units = 120,350 kWh adjusted baseline; 124,000 kWh metered: -3,650 kWh x 0.20
    // EUR/kWh = -730.00 EUR.
    let body = json!({"kind": "saving", "method": "volume_adjusted", "item": z.energy, "period": "2025-04",
        "baseline_intensity": "41.5", "reporting_volume": "2900", "measured_consumption": "124000", "evidence": "main meter"});
    let a = book(&t, z.id, body).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(dec(&a.json()["entry"]["quantity"]), Decimal::from(-3650));
    assert_eq!(dec(&a.json()["entry"]["amount"]), Decimal::from(-730));
    // The page shows it with a minus sign.
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    assert!(page.text.contains("<td class=\"num\">-730.00</td>"), "{}", page.text);
    assert!(page.text.contains("<td class=\"num\">-3,650</td>"), "{}", page.text);
}

#[tokio::test]
async fn an_implausible_booking_needs_an_explicit_confirmation() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "PLS-1").await;
    // Threshold (our rule, README): 10 x the high quantity per month, 10 x 250,000 / 12 =
    // 208,333.33 kWh.
    let how = "if it is right, tick \"confirm this implausible figure\" and book again (API: \
               \"confirm_implausible\": true; CSV: a confirm_implausible column with yes)";
    let a = book(&t, z.id, direct(z.energy, "2025-03", "99999999999")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    let message = format!(
        "implausible: 99,999,999,999.00 kWh is more than 10 times the driver's monthly high quantity \
         (10 × 250,000.00 / 12 = 208,333.33 kWh); {how}"
    );
    assert_eq!(a.json()["fields"], json!([{"field": "quantity", "message": message}]));
    let a = book(&t, z.id, direct(z.energy, "2025-03", "208333.34")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "just above the threshold");
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0);
    // Positive control: at the threshold it books without a confirmation, and is not flagged.
    let a = book(&t, z.id, direct(z.energy, "2025-03", "208333.33")).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(a.json()["entry"]["implausible_confirmed"], false);
    // Confirmed, the implausible figure books; the entry and the audit trail keep the confirmation.
    let mut body = direct(z.energy, "2025-04", "99999999999");
    body["confirm_implausible"] = json!(true);
    let a = book(&t, z.id, body).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    let id = a.json()["entry"]["id"].as_i64().unwrap();
    assert_eq!(a.json()["entry"]["implausible_confirmed"], true);
    let flag: i64 = sqlx::query_scalar("SELECT implausible_confirmed FROM ledger_entries WHERE id = ?")
        .bind(id)
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(flag, 1);
    let detail: String =
        sqlx::query_scalar("SELECT detail FROM audit_log WHERE action = 'ledger.book' AND subject = ?")
            .bind(format!("entry {id}"))
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert!(detail.ends_with("(beyond the plausibility threshold, confirmed by the author)"), "{detail}");

    // Spending: a one-off above 10 x its amount (10 x 30,000.00 = 300,000.00), a recurring
    // item above 10 x its monthly amount (10 x 9,600.00 / 12 = 8,000.00).
    let spend = |item: i64, amount: &str| json!({"kind": "spending", "item": item, "period": "2025-03", "amount": amount, "evidence": "invoice"});
    let a = book(&t, z.id, spend(z.sensors, "300000.01")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    let message = format!(
        "implausible: 300,000.01 is more than 10 times the cost item's amount (10 × 30,000.00 = 300,000.00); {how}"
    );
    assert_eq!(a.json()["fields"], json!([{"field": "amount", "message": message}]));
    let a = book(&t, z.id, spend(z.software, "8000.01")).await;
    assert_eq!(a.json()["fields"][0]["field"], "amount");
    assert!(a.json()["fields"][0]["message"].as_str().unwrap().contains("(10 × 9,600.00 / 12 = 8,000.00)"));
    assert_eq!(book(&t, z.id, spend(z.sensors, "300000")).await.status, StatusCode::CREATED);
    assert_eq!(book(&t, z.id, spend(z.software, "8000")).await.status, StatusCode::CREATED);

    // The form: the first refusal shows the confirmation checkbox; ticked, it books.
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    assert!(!page.text.contains("name=\"confirm_implausible\""), "no checkbox before a refusal");
    let action = format!("/zones/{}/ledger?form=", z.id);
    let form =
        format!("kind=saving&method=direct&item={}&period=2025-05&quantity=99999999999&evidence=meter", z.energy);
    let a = t.post_form(&format!("{action}{}", token_in(&page.text, &action)), &form).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    // Beside the direct form that was refused, and only there.
    assert!(a.text.contains("id=\"direct-confirm\"") && a.text.contains("208,333.33 kWh"), "{}", a.text);
    assert_eq!(a.text.matches("name=\"confirm_implausible\"").count(), 1);
    let again = format!("{action}{}", token_in(&a.text, &action));
    let a = t.post_form(&again, &format!("{form}&confirm_implausible=on")).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    // CSV: the optional column confirms a row.
    let header =
        "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence";
    let csv = format!("{header},confirm_implausible\n2025-06,saving,Energy,direct,99999999999,,,,,meter,\n");
    let a = import(&t, z.id, "big.csv", &csv).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("line 2, column quantity"), "{}", a.text);
    let csv = format!("{header},confirm_implausible\n2025-06,saving,Energy,direct,99999999999,,,,,meter,yes\n");
    assert_eq!(import(&t, z.id, "big.csv", &csv).await.status, StatusCode::SEE_OTHER);
    let confirmed: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries WHERE implausible_confirmed = 1")
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(confirmed, 3, "API, form and CSV");
}

async fn book_keyed(t: &TestApp, path: &str, key: &[u8], body: &Value) -> crate::helpers::Answer {
    let req = Request::post(path)
        .header(header::CONTENT_TYPE, "application/json")
        .header("idempotency-key", axum::http::HeaderValue::from_bytes(key).unwrap())
        .body(Body::from(body.to_string()))
        .unwrap();
    t.send(req).await
}

#[tokio::test]
async fn an_idempotency_key_belongs_to_its_user_and_its_request() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "IDK-1").await;
    let other = zone_with_baseline(&t.as_role(Some(Role::Lead)), "IDK-2").await;
    let path = format!("/api/v1/zones/{}/ledger", z.id);
    let body = direct(z.energy, "2025-03", "100");
    let entries = || async {
        sqlx::query_scalar::<_, i64>("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap()
    };
    let first = book_keyed(&t, &path, b"k-1", &body).await;
    assert_eq!(first.status, StatusCode::CREATED);
    let id = first.json()["entry"]["id"].as_i64().unwrap();
    // Positive control: the same request again replays the first entry.
    let replay = book_keyed(&t, &path, b"k-1", &body).await;
    assert_eq!(replay.status, StatusCode::OK);
    assert_eq!(replay.json()["entry"]["id"], id);
    // The same key with another body, or on another zone's URL: 409, nothing booked.
    let conflict = format!(
        "the Idempotency-Key \"k-1\" was already used by you for a different request (another body or URL), which \
         booked entry {id}; nothing was booked: use a new key for a new booking"
    );
    let a = book_keyed(&t, &path, b"k-1", &direct(z.energy, "2025-03", "101")).await;
    assert_eq!(a.status, StatusCode::CONFLICT);
    assert_eq!(a.json()["error"], conflict);
    let a =
        book_keyed(&t, &format!("/api/v1/zones/{}/ledger", other.id), b"k-1", &direct(other.energy, "2025-03", "100"))
            .await;
    assert_eq!(a.status, StatusCode::CONFLICT);
    assert_eq!(a.json()["error"], conflict);
    assert_eq!(entries().await, 1);
    // The key belongs to its user: the admin's "k-1" is a booking of its own.
    let admin = t.as_role(Some(Role::Admin));
    let a = book_keyed(&admin, &path, b"k-1", &body).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_ne!(a.json()["entry"]["id"], id);
    assert_eq!(entries().await, 2);
    // A key that is not printable ASCII, or longer than 100 characters: 400 naming the header.
    let rule = "1 to 100 printable ASCII characters (letters, digits, punctuation, space)";
    for key in ["caf\u{e9}".as_bytes(), "tab\there".as_bytes(), &[b'x'; 101][..]] {
        let a = book_keyed(&t, &path, key, &direct(z.energy, "2025-04", "5")).await;
        assert_eq!(a.status, StatusCode::BAD_REQUEST, "{key:?}: {}", a.text);
        assert_eq!(a.json()["fields"], json!([{"field": "Idempotency-Key", "message": rule}]));
    }
    assert_eq!(entries().await, 2);
    // Positive control: 100 characters with a space inside are a key.
    let long = format!("a b{}", "c".repeat(97));
    assert_eq!(
        book_keyed(&t, &path, long.as_bytes(), &direct(z.energy, "2025-04", "5")).await.status,
        StatusCode::CREATED
    );
}

#[tokio::test]
async fn a_form_submitted_twice_books_once() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "TWC-1").await;
    let count = || async {
        sqlx::query_scalar::<_, i64>("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap()
    };
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    let action = format!("/zones/{}/ledger?form=", z.id);
    let url = format!("{action}{}", token_in(&page.text, &action));
    let form = format!("kind=saving&method=direct&item={}&period=2025-03&quantity=120&evidence=meter", z.energy);
    let first = t.post_form(&url, &form).await;
    assert_eq!(first.status, StatusCode::SEE_OTHER);
    assert_eq!(first.location.as_deref(), Some(format!("/zones/{}/ledger#entries", z.id).as_str()));
    let id: i64 = sqlx::query_scalar("SELECT MAX(id) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    // The double click: the same token again books nothing and shows the entry already booked.
    let second = t.post_form(&url, &form).await;
    assert_eq!(second.status, StatusCode::SEE_OTHER);
    let there = format!("/zones/{}/ledger?already=entry-{id}#entries", z.id);
    assert_eq!(second.location.as_deref(), Some(there.as_str()));
    assert_eq!(count().await, 1);
    let shown = t.get(&there).await;
    assert!(
        shown.text.contains("that form was already submitted: it booked entry #")
            && shown.text.contains(&format!("entry #{id}; nothing was booked again.")),
        "{}",
        shown.text
    );
    // Without its token the form is refused (it did not come from the page).
    let a = t.post_form(&format!("/zones/{}/ledger", z.id), &form).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("its one-time token is missing"));
    assert_eq!(count().await, 1);
    // Positive control: a fresh page's token books again.
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    assert_eq!(
        t.post_form(&format!("{action}{}", token_in(&page.text, &action)), &form).await.status,
        StatusCode::SEE_OTHER
    );
    assert_eq!(count().await, 2);
    // The reversal form twice: one reversal, the second submit shows it.
    let reverse = format!("/zones/{}/ledger/{id}/reverse?form=", z.id);
    let url = format!("{reverse}{}", token_in(&page.text, &reverse));
    assert_eq!(t.post_form(&url, "evidence=counted+twice").await.status, StatusCode::SEE_OTHER);
    let again = t.post_form(&url, "evidence=counted+twice").await;
    assert_eq!(again.status, StatusCode::SEE_OTHER);
    assert!(again.location.unwrap().contains("?already=entry-"), "the second submit is not a 409");
    assert_eq!(count().await, 3);
    // The import form twice: booked once, even with "import again" ticked the second time.
    let import_action = format!("/zones/{}/ledger/import?form=", z.id);
    let token = token_in(&page.text, &import_action);
    let csv = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n\
               2025-05,saving,Energy,direct,10,,,,,meter\n";
    assert_eq!(import_with(&t, z.id, &token, csv, false).await.status, StatusCode::SEE_OTHER);
    let again = import_with(&t, z.id, &token, csv, true).await;
    assert_eq!(again.status, StatusCode::SEE_OTHER);
    assert!(again.location.unwrap().contains("?already=import-1"));
    assert_eq!(count().await, 4);
}

/// Import with a given form token and the "import again" checkbox.
async fn import_with(t: &TestApp, zone: i64, token: &str, csv: &str, again: bool) -> crate::helpers::Answer {
    let boundary = "----pilot-ledger-test-boundary";
    let mut body = format!(
        "--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"month.csv\"\r\nContent-Type: text/csv\r\n\r\n{csv}\r\n"
    );
    if again {
        body.push_str(&format!("--{boundary}\r\nContent-Disposition: form-data; name=\"again\"\r\n\r\non\r\n"));
    }
    body.push_str(&format!("--{boundary}--\r\n"));
    let req = Request::post(format!("/zones/{zone}/ledger/import?form={token}"))
        .header(header::CONTENT_TYPE, format!("multipart/form-data; boundary={boundary}"))
        .body(Body::from(body))
        .unwrap();
    t.send(req).await
}

#[tokio::test]
async fn a_csv_file_with_the_old_method_name_is_the_same_file_as_with_the_new() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "SAM-2").await;
    let old = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n\
               2025-03,saving,Energy,normalized,,41.5,3100,124000,,main meter\n";
    let a = import_with(&t, z.id, &crate::helpers::form_token(), old, false).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    // Hand arithmetic: 41.5 x 3,100 - 124,000 = 4,650 kWh.
    let q: String = sqlx::query_scalar("SELECT quantity FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(q, "4650");
    let new = old.replace(",normalized,", ",volume_adjusted,");
    let a = import_with(&t, z.id, &crate::helpers::form_token(), &new, false).await;
    assert_eq!(a.status, StatusCode::CONFLICT, "{}", a.text);
    assert!(a.text.contains("this file has the same rows as import 1, imported at "), "{}", a.text);
    // Positive control: another volume is another file.
    let other = new.replace(",3100,", ",3000,");
    let a = import_with(&t, z.id, &crate::helpers::form_token(), &other, false).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 2);
}

#[tokio::test]
async fn a_csv_file_is_the_same_file_whatever_its_line_ends_spaces_or_column_order() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "SAM-1").await;
    let count = || async {
        sqlx::query_scalar::<_, i64>("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap()
    };
    let original = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n\
                    2025-03,saving,Energy,direct,120,,,,,meter M1\n\
                    2025-03,spending,Software,,,,,,800,invoice 7\n";
    assert_eq!(
        import_with(&t, z.id, &crate::helpers::form_token(), original, false).await.status,
        StatusCode::SEE_OTHER
    );
    let (at, by): (String, String) =
        sqlx::query_as("SELECT imported_at, imported_by FROM ledger_imports").fetch_one(&t.pool).await.unwrap();
    assert_eq!(by, "t-controller");
    let crlf = original.replace('\n', "\r\n");
    let spaces = original.replace(",meter M1\n", ",meter M1  \n").replace("invoice 7\n", "invoice 7 ");
    let reordered = "evidence,amount,measured_consumption,reporting_volume,baseline_intensity,quantity,method,item,kind,period\n\
                     meter M1,,,,,120,direct,Energy,saving,2025-03\n\
                     invoice 7,800,,,,,,Software,spending,2025-03\n";
    let message = format!(
        "this file has the same rows as import 1, imported at {at} by t-controller (line ends, spaces around cells, \
         the final newline and the column order do not count); nothing was booked. To book it again anyway, tick \
         \"import again although the same rows were imported\""
    );
    for (what, copy) in [("CRLF", crlf.as_str()), ("trailing spaces", spaces.as_str()), ("reordered", reordered)] {
        let a = import_with(&t, z.id, &crate::helpers::form_token(), copy, false).await;
        assert_eq!(a.status, StatusCode::CONFLICT, "{what}");
        // Beside the import form, and in the summary at the top that links to it.
        let shown = message.replace('"', "&#34;");
        assert!(a.text.contains(&format!("<li>{shown}</li>")), "{what}: {}", a.text);
        assert!(
            a.text.contains(&format!("<a href=\"#import-problems\">Import a month from CSV: {shown}</a>")),
            "{what}: {}",
            a.text
        );
        assert_eq!(count().await, 2, "{what}");
    }
    // Positive control: one row different is another file.
    let other = original.replace(",120,", ",121,");
    assert_eq!(import_with(&t, z.id, &crate::helpers::form_token(), &other, false).await.status, StatusCode::SEE_OTHER);
    assert_eq!(count().await, 4);
    // The explicit override books the copy anyway, and the audit trail says so.
    let a = import_with(&t, z.id, &crate::helpers::form_token(), &crlf, true).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    assert_eq!(count().await, 6);
    let repeats: Option<i64> =
        sqlx::query_scalar("SELECT repeats_import_id FROM ledger_imports ORDER BY id DESC LIMIT 1")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!(repeats, Some(1));
    let detail: String =
        sqlx::query_scalar("SELECT detail FROM audit_log WHERE action = 'ledger.import' ORDER BY id DESC LIMIT 1")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!(
        detail,
        format!("month.csv: 2 rows; the same rows as import 1 of {at} by t-controller, booked again on purpose")
    );
    // A byte-identical repeat can be overridden too (the stored content hash stays unique).
    assert_eq!(
        import_with(&t, z.id, &crate::helpers::form_token(), original, true).await.status,
        StatusCode::SEE_OTHER
    );
    assert_eq!(count().await, 8);
}

#[tokio::test]
async fn a_payment_date_dates_the_spending_in_xnpv() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "PAY-1").await;
    let spend = |period: &str, paid_on: &str| json!({"kind": "spending", "item": z.sensors, "period": period, "amount": "30000", "paid_on": paid_on, "evidence": "invoice"});
    let a = book(&t, z.id, spend("2025-01", "2025-02-03")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "paid_on", "message": "a day of the booked month 2025-01 (YYYY-MM-DD)"}])
    );
    let a = book(&t, z.id, spend("2025-01", "12.01.2025")).await;
    assert_eq!(a.json()["fields"], json!([{"field": "paid_on", "message": "a date as YYYY-MM-DD, e.g. 2025-12-12"}]));
    let mut saving = direct(z.energy, "2025-12", "100000");
    saving["paid_on"] = json!("2025-12-12");
    let a = book(&t, z.id, saving).await;
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "paid_on", "message": "only spending carries a payment date: leave it empty for a saving"}])
    );
    // A payment date later this month than today is in the future: on the fixed test clock
    // (2026-11-15) the 16th is refused.
    let a = book(&t, z.id, spend("2026-11", "2026-11-16")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "paid_on", "message": "2026-11-16 is in the future; the latest payment date is 2026-11-15"}])
    );
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0);

    // A tiny ledger: 30,000 EUR paid on 2025-01-12, 100,000 kWh x 0.20 = 20,000 EUR saved in
    // 2025-12 (dated at the month's end, 2025-12-31).
    let a = book(&t, z.id, spend("2025-01", "2025-01-12")).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(a.json()["entry"]["paid_on"], "2025-01-12");
    assert_eq!(book(&t, z.id, direct(z.energy, "2025-12", "100000")).await.status, StatusCode::CREATED);
    // Spreadsheet XNPV convention (actual/365 from the first date; the public XNPV function
    // reference), by hand: 2025-01-12 to 2025-12-31 is 19 + 334 = 353 days.
    let expected = -30000.0 + 20000.0 / 1.1f64.powf(353.0 / 365.0);
    let r = t.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json()["realized"].clone();
    let xnpv: f64 = r["xnpv"].as_str().unwrap().parse().unwrap();
    assert!((xnpv - expected).abs() < 1e-6, "{xnpv} vs {expected}");
    // Control: dated at the month's end (2025-01-31, 334 days) the XNPV differs.
    let month_end = -30000.0 + 20000.0 / 1.1f64.powf(334.0 / 365.0);
    assert!((xnpv - month_end).abs() > 10.0);
    // The export carries the payment date.
    let csv = t.get(&format!("/zones/{}/ledger.csv", z.id)).await.text;
    assert!(csv.lines().nth(1).unwrap().contains(",invoice,2025-01-12,"), "{csv}");
}

#[tokio::test]
async fn an_ambiguous_realized_xirr_lists_every_root() {
    let t = test_app(false).await.as_role(Some(Role::Controller));
    let z = zone_with_baseline(&t.as_role(Some(Role::Lead)), "AMB-1").await;
    // -1,600 on 2025-01-31 (month end), +10,000 on 2025-07-31 (50,000 kWh x 0.20, month end),
    // -10,000 paid on 2026-01-28: equal gaps of 181 days. By hand (actual/365): the XNPV is
    // -1,600 + 10,000 v - 10,000 v^2 with v = (1 + r)^(-181/365), zero at v = 0.2 or 0.8, so
    // r = 5^(365/181) - 1 or 1.25^(365/181) - 1 (the pump flows of Lorie and Savage, 1955,
    // from memory; the roots follow from the quadratic whatever their source).
    let spend = |period: &str, amount: &str, paid_on: &str| json!({"kind": "spending", "item": z.sensors, "period": period, "amount": amount, "paid_on": paid_on, "evidence": "invoice"});
    assert_eq!(book(&t, z.id, spend("2025-01", "1600", "")).await.status, StatusCode::CREATED);
    assert_eq!(book(&t, z.id, direct(z.energy, "2025-07", "50000")).await.status, StatusCode::CREATED);
    assert_eq!(book(&t, z.id, spend("2026-01", "10000", "2026-01-28")).await.status, StatusCode::CREATED);
    let low = 1.25f64.powf(365.0 / 181.0) - 1.0;
    let high = 5f64.powf(365.0 / 181.0) - 1.0;
    let r = t.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json()["realized"].clone();
    assert_eq!(r["xirr_ambiguous"], true, "{r}");
    let roots: Vec<f64> = r["xirr_roots"].as_array().unwrap().iter().map(rate).collect();
    assert_eq!(roots.len(), 2, "{r}");
    assert!((roots[0] - low).abs() < 1e-9 && (roots[1] - high).abs() < 1e-9, "{roots:?} vs {low}, {high}");
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await;
    let caution = format!(
        "Caution: The cash flow changes sign more than once: XIRR is ambiguous (roots {}, {}); let XNPV decide.",
        pilot_ledger::domain::Percent(low),
        pilot_ledger::domain::Percent(high)
    );
    assert!(page.text.contains(&caution), "{caution}\n{}", page.text);
    // Control: one sign change is not ambiguous (the first two flows alone).
    let z2 = zone_with_baseline(&t.as_role(Some(Role::Lead)), "AMB-2").await;
    let spend2 =
        json!({"kind": "spending", "item": z2.sensors, "period": "2025-01", "amount": "1600", "evidence": "invoice"});
    assert_eq!(book(&t, z2.id, spend2).await.status, StatusCode::CREATED);
    assert_eq!(book(&t, z2.id, direct(z2.energy, "2025-07", "50000")).await.status, StatusCode::CREATED);
    let r = t.get(&format!("/api/v1/zones/{}/ledger", z2.id)).await.json()["realized"].clone();
    assert_eq!(r["xirr_ambiguous"], false);
    assert_eq!(r["xirr_roots"].as_array().unwrap().len(), 1);
}
