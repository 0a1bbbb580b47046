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

fn normalized(item: i64, intensity: &str, volume: &str, consumption: &str) -> Value {
    json!({"kind": "saving", "method": "normalized", "item": item, "period": "2025-04", "baseline_intensity": intensity,
           "reporting_volume": volume, "measured_consumption": consumption, "evidence": "main meter",
           "confirm_implausible": true})
}

#[tokio::test]
async fn a_huge_normalized_saving_is_a_field_error_not_a_panic() {
    let t = test_app(false).await;
    let z = zone_priced(&t, "OVF-1", "100000").await;
    let t = t.as_role(Some(Role::Controller));
    let url = format!("/api/v1/zones/{}/ledger", z.id);
    // 1e12 x 1e12 = 1e24 units avoided, x 100,000 per unit = 1e29: beyond Decimal's 7.9e28.
    let a = t.post_json(&url, &normalized(z.driver, "1000000000000", "1000000000000", "0").to_string()).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(a.json()["fields"][0]["field"], "reporting_volume");
    assert_eq!(
        a.json()["fields"][0]["message"],
        "the avoided quantity (baseline intensity × volume − consumption) must be at most 1,000,000,000,000 in size"
    );
    assert_eq!(entries(&t).await, 0);
    // Positive control (hand arithmetic): 2 h per unit x 3 units - 1 h = 5 h, x 100,000 = 500,000.
    let ok = t.post_json(&url, &normalized(z.driver, "2", "3", "1").to_string()).await;
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
