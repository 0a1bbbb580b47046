//! A plant group's scale: the figures are warmed up in the background at start, a request
//! during the warm-up answers with the zones that are ready and says how many are pending, and
//! an answer recomputed after a booking (only that zone's row rendered again) is the very text
//! a cold server computes.
#![expect(clippy::unwrap_used)]

use crate::helpers::{TestApp, test_app};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use pilot_ledger::{AppState, app};
use serde_json::Value;
use std::sync::Arc;
use tokio::sync::Notify;

const API: &str = "/api/v1/portfolio?budget=250000";

/// `t` served by a fresh state (empty caches), returned beside it.
fn fresh(t: &TestApp) -> (TestApp, AppState) {
    let state = AppState::new(t.pool.clone(), t.clock.clone(), false);
    let mut fresh = t.clone();
    fresh.router = app(state.clone());
    (fresh, state)
}

/// The fields of a row that come from the zone's own figures (not from the portfolio around it).
fn own_figures(row: &Value) -> Value {
    let keys = ["zone_id", "code", "name", "status", "case", "investment", "npv", "chance_weighted_npv", "irr"];
    let more = ["payback_months", "profitability_index", "chance_npv_below_zero", "mean_npv", "p10_npv"];
    let last = ["p50_npv", "p90_npv", "realization_to_date", "problem", "hurdle_rate", "hurdle_rate_basis"];
    keys.iter().chain(&more).chain(&last).map(|k| (k.to_string(), row[*k].clone())).collect()
}

#[tokio::test]
async fn the_warm_up_fills_the_cache_and_a_request_meanwhile_answers_what_is_ready() {
    let t = test_app(true).await;
    // The reference: every zone computed on demand by a server without a warm-up.
    let reference = t.get(API).await;
    assert_eq!(reference.status, StatusCode::OK);
    let reference_json = reference.json();
    let all = reference_json["zones"].as_array().unwrap().len();
    assert_eq!(all, 8, "the demo plant's zones");
    assert_eq!(reference_json["zones_pending"], 0);

    // A warm-up held after its first chunk of 3 zones.
    let (w, state) = fresh(&t);
    let (reached, release) = (Arc::new(Notify::new()), Arc::new(Notify::new()));
    let warm = {
        let (state, reached, release) = (state.clone(), reached.clone(), release.clone());
        tokio::spawn(async move {
            state
                .figures
                .warm_up_with(&state.pool, 3, |done, _| {
                    let (reached, release) = (reached.clone(), release.clone());
                    async move {
                        if done == 3 {
                            reached.notify_one();
                            release.notified().await;
                        }
                    }
                })
                .await
        })
    };
    reached.notified().await;
    assert!(state.figures.warming());
    assert_eq!(state.figures.len(), 3);

    // Meanwhile: the 3 ready zones, each with the figures the reference has; 5 pending.
    let during = w.get(API).await;
    assert_eq!(during.status, StatusCode::OK);
    let during = during.json();
    assert_eq!(during["zones_pending"], 5);
    let rows = during["zones"].as_array().unwrap();
    assert_eq!(rows.len(), 3);
    for row in rows {
        let code = row["code"].as_str().unwrap();
        let whole = reference_json["zones"].as_array().unwrap().iter().find(|z| z["code"] == code).unwrap();
        assert_eq!(own_figures(row), own_figures(whole), "{code}");
    }
    let page = w.get("/portfolio?budget=250000").await;
    assert_eq!(page.status, StatusCode::OK);
    assert!(page.text.contains("Figures for 5 of 8 zones are still\nbeing computed"), "{}", page.text);
    // The CSV is a file: it waits for the warm-up rather than leave zones out.
    let csv = tokio::spawn({
        let w = w.clone();
        async move { w.get("/portfolio.csv?budget=250000").await }
    });

    release.notify_one();
    assert_eq!(warm.await.unwrap().unwrap(), 8);
    assert!(!state.figures.warming());
    assert_eq!(state.figures.len(), 8);
    let csv = csv.await.unwrap();
    assert_eq!(csv.status, StatusCode::OK);
    assert_eq!(csv.text, t.get("/portfolio.csv?budget=250000").await.text);

    // After it: the partial answer was not kept; the whole one is the reference, to the byte.
    let after = w.get(API).await;
    assert_eq!(after.text, reference.text);
    let page = w.get("/portfolio?budget=250000").await;
    assert!(!page.text.contains("still\nbeing computed"));
}

#[tokio::test]
async fn a_warm_up_that_finishes_at_once_is_waited_for() {
    let t = test_app(true).await;
    let reference = t.get(API).await;
    let (w, state) = fresh(&t);
    let warm = tokio::spawn(pilot_ledger::cli::warm_up(state.clone()));
    // Started before the request: the request waits (at most a second) rather than answer
    // with part of the plant.
    let first = w.get(API).await;
    assert_eq!(first.json()["zones_pending"], 0);
    assert_eq!(first.text, reference.text);
    warm.await.unwrap();
    assert_eq!(state.figures.len(), 8);
}

#[tokio::test]
async fn after_a_booking_the_stitched_answer_is_what_a_cold_server_computes() {
    let t = test_app(true).await;
    let c = t.as_role(Some(Role::Controller));
    let (zone, driver): (i64, i64) = sqlx::query_as(
        "SELECT c.zone_id, MIN(d.id) FROM case_versions c JOIN benefit_drivers d ON d.case_id = c.id
         WHERE c.state = 'approved' GROUP BY c.zone_id ORDER BY c.zone_id LIMIT 1",
    )
    .fetch_one(&t.pool)
    .await
    .unwrap();
    let before = c.get(API).await;
    assert_eq!(before.status, StatusCode::OK);
    let body = format!(
        r#"{{"kind": "saving", "method": "direct", "item": {driver}, "period": "2026-06", "quantity": "40", "evidence": "meter export"}}"#
    );
    let booked = c.post_json(&format!("/api/v1/zones/{zone}/ledger"), &body).await;
    assert_eq!(booked.status, StatusCode::CREATED, "{}", booked.text);
    // This server keeps the other zones' rows; a fresh one renders every row anew.
    let after = c.get(API).await;
    let (cold, _) = fresh(&c);
    let cold = cold.get(API).await;
    assert_eq!(after.text, cold.text);
    assert_ne!(after.text, before.text, "the booking moved the zone's realization");
    // The stitched row keeps the field order of a serialized row.
    let first_row = &after.text[after.text.find(r#""zones":[{"#).unwrap()..];
    let keys = [
        "rank",
        "zone_id",
        "code",
        "name",
        "status",
        "standing",
        "taken_by_profitability_index",
        "in_pi_order_set",
        "case",
        "investment",
        "npv",
        "chance_weighted_npv",
        "risk_adjusted_npv",
        "calibrated_npv",
        "irr",
        "payback_months",
        "profitability_index",
        "chance_npv_below_zero",
        "probability_npv_below_zero",
        "mean_npv",
        "p10_npv",
        "p50_npv",
        "p90_npv",
        "realization_to_date",
        "readiness",
        "problem",
        "hurdle_rate",
        "hurdle_rate_basis",
    ];
    let mut at = 0;
    for key in keys {
        let found = first_row[at..].find(&format!(r#""{key}":"#)).unwrap_or_else(|| panic!("{key} after {at}"));
        at += found;
    }
    assert!(first_row[at..].find('}').unwrap() < first_row[at..].find(r#""rank":"#).unwrap(), "one row");
}

#[tokio::test]
async fn the_page_shows_the_head_of_a_long_ranking_and_says_so() {
    let t = test_app(false).await;
    let zones: Vec<Value> = (1..=251)
        .map(|z| {
            serde_json::json!({"code": format!("MANY-{z:03}"), "name": format!("Zone {z}"), "status": "candidate",
             "cases": [{"label": "Base", "horizon_months": 24, "start_month": "2026-01", "go_live_offset": 0,
                        "ramp_up_months": 0, "success_probability": "0.8",
                        "costs": [{"label": "Kit", "category": "hardware", "kind": "one_off", "amount": "10000", "month_offset": 0, "capex": true}],
                        "drivers": [{"label": "Energy", "kind": "energy", "unit": "kWh", "qty_low": "1000",
                                     "qty_likely": (5000 + z * 10).to_string(), "qty_high": "60000", "unit_value": "2"}]}]})
        })
        .collect();
    let scenario = serde_json::json!({"format": "pilot-ledger-scenario", "version": 1, "zones": zones});
    pilot_ledger::cli::load_text(&t.pool, &scenario.to_string(), t.now()).await.unwrap();
    let page = t.get("/portfolio?budget=50000").await;
    assert_eq!(page.status, StatusCode::OK);
    assert!(page.text.contains("The charts and the table show the first 250 of 251 zones in ranking\norder"));
    assert_eq!(page.text.matches("<tr class=\"standing-").count(), 250);
    // Ranked by NPV: the largest likely quantity first, the smallest is the one left off the page.
    assert!(page.text.contains(r#"data-code="MANY-251""#));
    assert!(!page.text.contains(r#"data-code="MANY-001""#));
    // The budget choice counts every zone; the CSV lists them all.
    let api = t.get("/api/v1/portfolio?budget=50000").await.json();
    assert_eq!(api["zones"].as_array().unwrap().len(), 251);
    assert_eq!(api["choice"]["recommended"].as_array().unwrap().len(), 5);
    let csv = t.get("/portfolio.csv?budget=50000").await;
    assert_eq!(csv.text.lines().count(), 1 + 251);

    // Positive control: a plant of 8 zones shows them all, without the note.
    let demo = test_app(true).await;
    let page = demo.get("/portfolio?budget=50000").await;
    assert_eq!(page.text.matches("<tr class=\"standing-").count(), 8);
    assert!(!page.text.contains("The charts and the table show the first"));
}
