//! JSON API on a real SQLite file: zones and cases round-trip, the metrics contract, and
//! every bad input answered 422 (or 4xx) with nothing written.

use crate::helpers::test_app;
use axum::http::StatusCode;
use serde_json::{Value, json};

fn num(v: &Value) -> f64 {
    v.as_str().unwrap_or_else(|| panic!("expected a decimal string, got {v}")).parse().unwrap()
}

fn close(actual: f64, expected: f64, rel: f64) {
    assert!((actual - expected).abs() <= rel * expected.abs().max(1.0), "{actual} vs {expected}");
}

/// A 36-month case: 12,000 one-off in month 0 and 1,200 pcs/year at 10 EUR from month 0,
/// i.e. flows [-11000, 1000 x 35] at the monthly equivalent of 10 % a year.
pub fn simple_case() -> Value {
    json!({
        "label": "Base", "horizon_months": 36, "start_month": "2027-01", "go_live_offset": 0,
        "ramp_up_months": 0, "success_probability": "0.9",
        "costs": [{"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "12000", "month_offset": 0, "capex": true}],
        "drivers": [{"label": "Scrap avoided", "kind": "scrap", "qty_low": 800, "qty_likely": 1200, "qty_high": "1500", "unit_value": "10"}]
    })
}

#[tokio::test]
async fn zone_and_case_round_trip_with_metrics() {
    let t = test_app(false).await;
    let created = t.post_json("/api/v1/zones", r#"{"code":"weld-9","name":"Weld cell 9","status":"candidate"}"#).await;
    assert_eq!(created.status, StatusCode::CREATED, "{}", created.text);
    let zone_id = created.json()["zone"]["id"].as_i64().unwrap();
    assert_eq!(created.json()["zone"]["code"], "WELD-9");

    let case = t.post_json(&format!("/api/v1/zones/{zone_id}/cases"), &simple_case().to_string()).await;
    assert_eq!(case.status, StatusCode::CREATED, "{}", case.text);
    let case_id = case.json()["case"]["id"].as_i64().unwrap();

    let read = t.get(&format!("/api/v1/cases/{case_id}")).await.json();
    assert_eq!(read["case"]["version"], 1);
    assert_eq!(read["case"]["costs"][0]["amount"], "12000");
    assert_eq!(read["case"]["drivers"][0]["qty_likely"], "1200");
    let flows = read["monthly_net_flows"].as_array().unwrap();
    assert_eq!(flows.len(), 36);
    assert_eq!(flows[0], "-11000");
    assert_eq!(flows[35], "1000");
    // numpy-financial 1.0.0: npf.npv(1.1 ** (1 / 12) - 1, [-11000] + [1000] * 35) = 19435.143641317074
    close(num(&read["metrics"]["npv"]), 19_435.143_641_317_074, 1e-9);
    // Simple payback: cumulative -11000 + 1000 t reaches 0 exactly at month 11 (hand count).
    assert_eq!(read["metrics"]["payback_months"], "11");

    let zone = t.get(&format!("/api/v1/zones/{zone_id}")).await.json();
    assert_eq!(zone["cases"].as_array().unwrap().len(), 1);
}

#[tokio::test]
async fn metrics_contract_example() {
    let t = test_app(false).await;
    let a = t.post_json("/api/v1/metrics", r#"{"rate": "0.1", "flows": ["-1000", "300", "420", "680"]}"#).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    let v = a.json();
    // numpy-financial 1.0.0: npv(0.1, f) = 130.72877535687434, irr(f) = 0.16340560068898902,
    // mirr(f, 0.1, 0.1) = 0.14598473665110645.
    close(num(&v["npv"]), 130.728_775_356_874_34, 1e-9);
    close(num(&v["irr"]), 0.163_405_600_688_989, 1e-7);
    close(num(&v["mirr"]), 0.145_984_736_651_106, 1e-7);
    assert_eq!(v["irr_roots"].as_array().unwrap().len(), 1);
    // Hand count: cumulative -1000, -700, -280, +400, so 2 + 280 / 680 periods.
    // (answers carry 10 decimal places)
    close(num(&v["payback"]), 2.0 + 280.0 / 680.0, 1e-10);
    // PI = PV(flows after the first) / 1000 = (130.7287... + 1000) / 1000.
    close(num(&v["profitability_index"]), 1.130_728_775_356_874, 1e-9);
    assert!(v.get("xnpv").is_none());

    // Numbers as JSON numbers give the same answer.
    let b = t.post_json("/api/v1/metrics", r#"{"rate": 0.1, "flows": [-1000, 300, 420, 680]}"#).await.json();
    assert_eq!(b["npv"], v["npv"]);
}

#[tokio::test]
async fn metrics_with_dates_and_several_roots() {
    let t = test_app(false).await;
    // -100 + 230 x - 132 x^2 = 0 with x = 1 / (1 + r) has roots x = 1/1.1 and 1/1.2: IRR 10 % and
    // 20 % (hand algebra), so the answer must list both and flag the ambiguity.
    let v = t.post_json("/api/v1/metrics", r#"{"rate": "0.05", "flows": ["-100", "230", "-132"]}"#).await.json();
    let roots: Vec<f64> = v["irr_roots"].as_array().unwrap().iter().map(num).collect();
    assert_eq!(roots.len(), 2, "{v}");
    close(roots[0], 0.1, 1e-7);
    close(roots[1], 0.2, 1e-7);
    assert!(v["warnings"].as_array().unwrap().iter().any(|w| w.as_str().unwrap().contains("ambiguous")));

    let body = r#"{"rate": "0.1", "flows": ["-1000", "1100"], "dates": ["2025-01-01", "2026-01-01"]}"#;
    let v = t.post_json("/api/v1/metrics", body).await.json();
    // 365 days = exactly one year in actual/365, so XNPV = -1000 + 1100 / 1.1 = 0 and XIRR = 10 %.
    close(num(&v["xnpv"]), 0.0, 1e-9);
    close(num(&v["xirr"]), 0.1, 1e-9);
    // Exact boundary: discounted payback lands on the end of period 1.
    assert_eq!(v["discounted_payback"], "1");

    let none = t.post_json("/api/v1/metrics", r#"{"rate": "0.1", "flows": ["100", "200"]}"#).await.json();
    assert_eq!(none["irr"], Value::Null);
    assert_eq!(none["profitability_index"], Value::Null);
    assert!(none["warnings"][0].as_str().unwrap().starts_with("no IRR"));
}

#[tokio::test]
async fn metrics_bad_input_names_the_field() {
    let t = test_app(false).await;
    let cases = [
        (r#"{"rate": "0.1", "flows": []}"#, "flows"),
        (r#"{"rate": "0.1"}"#, "flows"),
        (r#"{"rate": "0.1", "flows": ["-1000", "abc"]}"#, "flows[1]"),
        (r#"{"rate": "ten", "flows": ["-1000", "100"]}"#, "rate"),
        (r#"{"rate": "-1", "flows": ["-1000", "1100"]}"#, "rate"),
        (r#"{"rate": "-1.5", "flows": ["-1000", "1100"]}"#, "rate"),
        (r#"{"flows": ["-1000", "1100"]}"#, "rate"),
        (r#"{"rate": "0.1", "flows": ["-1000", "1100"], "dates": ["2025-01-01"]}"#, "dates"),
        (r#"{"rate": "0.1", "flows": ["-1000", "1100"], "dates": ["2025-01-01", "soon"]}"#, "dates[1]"),
        (r#"{"rate": "0.1", "flows": ["-1000", "1100"], "finance_rate": "-2"}"#, "finance_rate"),
        (r#"{"rate": "0.1", "flows": ["-1000", "1100"], "reinvest_rate": true}"#, "reinvest_rate"),
        (r#"{"rate": "0.1", "flows": "-1000"}"#, "flows"),
    ];
    for (body, field) in cases {
        let a = t.post_json("/api/v1/metrics", body).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{body}: {}", a.text);
        let fields: Vec<String> =
            a.json()["fields"].as_array().unwrap().iter().map(|f| f["field"].as_str().unwrap().to_string()).collect();
        assert!(fields.contains(&field.to_string()), "{body}: expected {field} in {fields:?}");
    }
    let syntax = t.post_json("/api/v1/metrics", "{not json").await;
    assert_eq!(syntax.status, StatusCode::BAD_REQUEST);
    assert!(syntax.json()["error"].is_string());
}

/// `n` flows alternating in sign (the deepest root search there is), one a month from 2000.
fn alternating_flows(n: usize) -> Value {
    let flows: Vec<String> = (0..n).map(|t| if t % 2 == 0 { "-1000" } else { "1000" }.to_string()).collect();
    let start = time::macros::date!(2000 - 01 - 01);
    let dates: Vec<String> = (0..n).map(|t| (start + time::Duration::days(30 * t as i64)).to_string()).collect();
    json!({"rate": "0.01", "flows": flows, "dates": dates})
}

#[tokio::test]
async fn metrics_refuse_more_than_2400_flows() {
    let t = test_app(false).await;
    let over = t.post_json("/api/v1/metrics", &alternating_flows(2401).to_string()).await;
    assert_eq!(over.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", over.text);
    assert_eq!(
        over.json()["fields"],
        json!([{"field": "flows", "message": "at most 2400 flows per request: 2401 given"}])
    );
    // 330,000 short flows (1.8 MB) are refused before they are read into a JSON tree.
    let huge = format!(r#"{{"rate": "0.1", "flows": [{}"1"]}}"#, "\"-1\",".repeat(330_000));
    let a = t.post_json("/api/v1/metrics", &huge).await;
    assert_eq!(a.status, StatusCode::PAYLOAD_TOO_LARGE, "{}", a.text);
    assert_eq!(a.json()["error"], "the body is larger than the 256 KiB this request accepts; nothing was changed");
    // Positive control: exactly at the limit, dated and alternating, it answers (a rate of 0,
    // where the flows cancel).
    let at = t.post_json("/api/v1/metrics", &alternating_flows(2400).to_string()).await;
    assert_eq!(at.status, StatusCode::OK, "{}", at.text);
    let v = at.json();
    assert_eq!(v["irr_roots"], json!(["0"]));
    assert_eq!(v["xirr"], "0");
}

#[tokio::test]
async fn rejected_writes_change_nothing() {
    let t = test_app(false).await;
    let zone = t.post_json("/api/v1/zones", r#"{"code":"PAINT-7","name":"Paint booth 7"}"#).await.json();
    let zone_id = zone["zone"]["id"].as_i64().unwrap();
    let before = t.counts().await;

    let bad_zone = t.post_json("/api/v1/zones", r#"{"code":"bad code!","name":""}"#).await;
    assert_eq!(bad_zone.status, StatusCode::UNPROCESSABLE_ENTITY);
    let dup = t.post_json("/api/v1/zones", r#"{"code":"paint-7","name":"Again"}"#).await;
    assert_eq!(dup.status, StatusCode::CONFLICT);
    assert!(dup.json()["error"].as_str().unwrap().contains("already exists"));

    // The second cost item is bad: the whole case is refused, not half of it.
    let mut case = crate::api::simple_case();
    case["costs"]
        .as_array_mut()
        .unwrap()
        .push(json!({"label": "Licence", "category": "software", "kind": "recurring", "amount": "lots"}));
    let bad_case = t.post_json(&format!("/api/v1/zones/{zone_id}/cases"), &case.to_string()).await;
    assert_eq!(bad_case.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(bad_case.json()["fields"][0]["field"], "costs[1].amount");

    let mut late = crate::api::simple_case();
    late["costs"][0]["month_offset"] = json!(36);
    let a = t.post_json(&format!("/api/v1/zones/{zone_id}/cases"), &late.to_string()).await;
    assert_eq!(a.json()["fields"][0]["field"], "costs[0].month_offset");

    let missing = t.post_json("/api/v1/zones/9999/cases", &crate::api::simple_case().to_string()).await;
    assert_eq!(missing.status, StatusCode::NOT_FOUND);

    assert_eq!(t.counts().await, before, "a rejected request wrote something");
}

#[tokio::test]
async fn openapi_document_lists_the_routes() {
    let t = test_app(false).await;
    let doc = t.get("/api/v1/openapi.json").await.json();
    assert_eq!(doc["openapi"], "3.1.0");
    for path in
        ["/api/v1/metrics", "/api/v1/zones", "/api/v1/zones/{id}", "/api/v1/zones/{id}/cases", "/api/v1/cases/{id}"]
    {
        assert!(doc["paths"].get(path).is_some(), "{path} missing");
    }
}

/// The metrics answer, as JSON, of `body`, which must be accepted.
async fn metrics_of(t: &crate::helpers::TestApp, body: &str) -> Value {
    let a = t.post_json("/api/v1/metrics", body).await;
    assert_eq!(a.status, StatusCode::OK, "{body}: {}", a.text);
    a.json()
}

fn warnings(v: &Value) -> Vec<String> {
    v["warnings"].as_array().unwrap().iter().map(|w| w.as_str().unwrap().to_string()).collect()
}

#[tokio::test]
async fn metrics_leading_zero_flows_are_not_a_payback() {
    let t = test_app(false).await;
    // Common practice: payback is when the cumulative flow turns from negative to
    // non-negative. Hand count: 0, -1000, -400, +200: 2 + 400 / 600 periods, not 0.
    let v = metrics_of(&t, r#"{"rate": "0", "flows": ["0", "-1000", "600", "600"]}"#).await;
    assert_eq!(v["payback"], "2.6666666666666666666666666667");
    assert_eq!(v["discounted_payback"], "2.6666666666666666666666666667");
    // Positive control: without the leading zero, one period earlier.
    let v = metrics_of(&t, r#"{"rate": "0", "flows": ["-1000", "600", "600"]}"#).await;
    assert_eq!(v["payback"], "1.6666666666666666666666666667");
}

#[tokio::test]
async fn metrics_answers_carry_full_precision() {
    let t = test_app(false).await;
    let v = metrics_of(&t, r#"{"rate": "0.1", "flows": ["-1000", "300", "420", "680"]}"#).await;
    // The IRR is the shortest text of the double found, not rounded to 12 places (which left
    // NPV at the returned IRR visibly off zero).
    let irr = v["irr"].as_str().unwrap();
    let places = irr.split('.').nth(1).unwrap().len();
    assert!(places > 12, "{irr}");
    assert_eq!(irr.parse::<f64>().unwrap().to_string(), irr);
    // numpy-financial 1.0.0: irr(f) = 0.16340560068898902 (fixture value, see metrics_contract_example).
    close(num(&v["irr"]), 0.163_405_600_688_989_02, 1e-13);
    let at_irr = metrics_of(&t, &format!(r#"{{"rate": "{irr}", "flows": ["-1000", "300", "420", "680"]}}"#)).await;
    assert!(num(&at_irr["npv"]).abs() < 1e-9, "{}", at_irr["npv"]);
    // Money keeps every digit the Decimal holds: more than the 10 places it was cut to.
    let npv = v["npv"].as_str().unwrap();
    assert!(npv.split('.').nth(1).unwrap().len() > 10, "{npv}");
}

#[tokio::test]
async fn metrics_never_answer_an_irr_at_or_below_minus_one() {
    let t = test_app(false).await;
    // -1 then 1e-20: the root is 1e-20 - 1, which a double cannot tell from -1 (hand algebra).
    let v = metrics_of(&t, r#"{"rate": "0.1", "flows": ["-1", "0.00000000000000000001"]}"#).await;
    // The answer is a rate just above -1 (the root as a double finds it), listed as the one
    // root, with no warning: never -1 or below.
    let irr = num(&v["irr"]);
    assert!(irr > -1.0 && irr < -0.999_999, "{v}");
    assert_eq!(v["irr_roots"], json!([v["irr"]]), "{v}");
    assert_eq!(warnings(&v), Vec::<String>::new(), "{v}");
    // Positive control: a loss of 99 % is a usable rate, answered.
    let v = metrics_of(&t, r#"{"rate": "0.1", "flows": ["-100", "1"]}"#).await;
    close(num(&v["irr"]), -0.99, 1e-12);
}

#[tokio::test]
async fn metrics_a_missing_irr_or_xirr_says_why() {
    let t = test_app(false).await;
    let body = r#"{"rate": "0.1", "flows": ["100", "200"], "dates": ["2025-01-01", "2025-07-01"]}"#;
    let v = metrics_of(&t, body).await;
    assert_eq!(v["irr"], Value::Null);
    assert_eq!(v["xirr"], Value::Null);
    let w = warnings(&v);
    assert!(
        w.contains(&"no IRR: the cash flows never change sign, so there is no internal rate of return".into()),
        "{w:?}"
    );
    assert!(
        w.contains(&"no XIRR: the cash flows never change sign, so there is no internal rate of return".into()),
        "{w:?}"
    );
    // Several sign changes and no root at all: -1, 3, -3 has no real rate (the discriminant of
    // -1 + 3x - 3x^2 is 9 - 12 < 0; hand algebra).
    let v = metrics_of(&t, r#"{"rate": "0.1", "flows": ["-1", "3", "-3"]}"#).await;
    assert_eq!(v["irr"], Value::Null);
    assert!(warnings(&v).contains(&"no IRR: no rate above -100 % makes the present value zero".into()), "{v}");
    // Positive control: a root, and no such warning.
    let body = r#"{"rate": "0.1", "flows": ["-1000", "1100"], "dates": ["2025-01-01", "2026-01-01"]}"#;
    let v = metrics_of(&t, body).await;
    close(num(&v["xirr"]), 0.1, 1e-12);
    assert!(warnings(&v).is_empty(), "{v}");
}

#[tokio::test]
async fn metrics_refuse_a_date_before_the_first() {
    let t = test_app(false).await;
    let body =
        r#"{"rate": "0.1", "flows": ["-1000", "600", "600"], "dates": ["2025-06-01", "2025-01-01", "2026-01-01"]}"#;
    let a = t.post_json("/api/v1/metrics", body).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    let v = a.json();
    assert_eq!(v["fields"][0]["field"], "dates[1]");
    assert_eq!(
        v["fields"][0]["message"],
        "flow 1 is dated 2025-01-01, before the first flow's date 2025-06-01: list the earliest flow first"
    );
    // Positive control: the same flows in date order are answered.
    let body =
        r#"{"rate": "0.1", "flows": ["-1000", "600", "600"], "dates": ["2025-01-01", "2025-06-01", "2026-01-01"]}"#;
    assert!(metrics_of(&t, body).await["xnpv"].is_string());
}

#[tokio::test]
async fn metrics_blame_a_rate_whose_discounting_overflows() {
    let t = test_app(false).await;
    let body = r#"{"rate": "-0.9999999999999999", "flows": ["-1000", "300", "420", "680"]}"#;
    let a = t.post_json("/api/v1/metrics", body).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    let v = a.json();
    assert_eq!(v["fields"].as_array().unwrap().len(), 1, "{v}");
    assert_eq!(v["fields"][0]["field"], "rate", "{v}");
    // Positive control: a loss of 99 % a period is a rate that discounts within range.
    metrics_of(&t, r#"{"rate": "-0.99", "flows": ["-1000", "300", "420", "680"]}"#).await;
}

#[tokio::test]
async fn the_case_answer_carries_what_the_case_page_shows() {
    let t = test_app(false).await;
    let zone = t.post_json("/api/v1/zones", r#"{"code":"weld-9","name":"Weld cell 9","status":"candidate"}"#).await;
    let zone_id = zone.json()["zone"]["id"].as_i64().unwrap();
    let case = t.post_json(&format!("/api/v1/zones/{zone_id}/cases"), &simple_case().to_string()).await;
    let case_id = case.json()["case"]["id"].as_i64().unwrap();
    let u = t.get(&format!("/api/v1/cases/{case_id}")).await.json()["uncertainty"].clone();
    // numpy-financial 1.0.0 (see zone_and_case_round_trip_with_metrics): NPV = 1000 A - 12000 =
    // 19435.143641317074, so the annuity factor A = 31.435143641317074. By hand from it: a yearly
    // quantity q earns q / 12 x 10 a month, so NPV(q) = q x 10 / 12 x A - 12000.
    let a = 31.435_143_641_317_074;
    let npv_at = |q: f64| q * 10.0 / 12.0 * a - 12_000.0;
    let d = &u["drivers"][0];
    assert_eq!(d["label"], "Scrap avoided");
    assert_eq!(d["break_even"], "at");
    close(num(&d["break_even_quantity"]), 12_000.0 * 12.0 / (10.0 * a), 1e-9);
    close(num(&d["npv_at_low"]), npv_at(800.0), 1e-9);
    close(num(&d["npv_at_high"]), npv_at(1500.0), 1e-9);
    // Chance-weighted: 0.9 x PV(benefits) - PV(costs) = 0.9 x 1000 A - 12000.
    close(num(&u["chance_weighted_npv"]), 0.9 * 1000.0 * a - 12_000.0, 1e-9);
    // The deprecated name (kept one release) carries the same figure.
    assert_eq!(u["risk_adjusted_npv"], u["chance_weighted_npv"]);
    // No measured zones: no calibration evidence, the factor is 1.
    assert_eq!(d["calibration"]["factor"], "1");
    assert_eq!(d["calibration"]["measured_over_expected"], Value::Null);
    assert_eq!(u["calibration_zones"], json!([]));
    close(num(&u["calibrated_npv"]), 19_435.143_641_317_074, 1e-9);
    let mc = &u["monte_carlo"];
    assert_eq!(mc["trials"], 10_000);
    assert!(mc["seed"].as_str().unwrap().parse::<u64>().is_ok(), "{mc}");
    // Every trial's quantity lies within 800..1500, so every NPV within npv_at(800)..npv_at(1500).
    for key in ["mean", "p10", "p50", "p90"] {
        let v = num(&mc[key]);
        assert!(npv_at(800.0) <= v && v <= npv_at(1500.0), "{key} = {v}");
    }
    assert!(num(&mc["p10"]) <= num(&mc["p50"]) && num(&mc["p50"]) <= num(&mc["p90"]), "{mc}");
    assert_eq!(mc["chance_npv_below_zero"], "0");
    assert_eq!(mc["probability_npv_below_zero"], "0", "the deprecated name, kept one release");
    // The page shows the same break-even to one decimal (458.1).
    let page = t.get(&format!("/cases/{case_id}")).await.text;
    assert!(page.contains("458.1"), "the page's break-even");
}
