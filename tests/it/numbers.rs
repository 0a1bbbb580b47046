//! The site's number format on every way in and out: forms, CSV import and export, the JSON
//! API (plain decimals, unknown fields refused) and the cached portfolio answers.
//!
//! Expected values are worked by hand from the inputs (0.20 EUR/kWh x 1,250.75 kWh = 250.15).

use crate::helpers::{Answer, TestApp, test_app};
use crate::ledger::{import, zone_with_baseline};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use serde_json::{Value, json};

/// Switch the site to `format` through the admin settings form (as the test site: EUR, 10 %).
pub async fn set_number_format(t: &TestApp, format: &str) {
    let body = format!(
        "plant_name=Test+works&currency=EUR&hurdle_rate=10&tax_rate=&depreciation_years=&default_horizon_months=60&expert_multiplier=3&number_format={format}"
    );
    let a = t.as_role(Some(Role::Admin)).post_form("/admin/settings", &body).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
}

async fn draft_case(t: &TestApp, code: &str) -> i64 {
    let z = t.post_json("/api/v1/zones", &json!({"code": code, "name": "Number test zone"}).to_string()).await;
    let id = z.json()["zone"]["id"].as_i64().unwrap();
    let case = json!({"label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1,
                      "ramp_up_months": 0, "success_probability": "0.8"});
    let c = t.post_json(&format!("/api/v1/zones/{id}/cases"), &case.to_string()).await;
    assert_eq!(c.status, StatusCode::CREATED, "{}", c.text);
    c.json()["case"]["id"].as_i64().unwrap()
}

fn cost_form(amount: &str) -> String {
    format!("label=Sensors&category=hardware&kind=one_off&amount={amount}&month_offset=0&escalation=&capex=on")
}

async fn cost_amounts(t: &TestApp, case: i64) -> Vec<Value> {
    let c = t.get(&format!("/api/v1/cases/{case}")).await.json();
    c["case"]["costs"].as_array().unwrap().iter().map(|c| c["amount"].clone()).collect()
}

/// A form page answered 422 with `message` as the error beside the input `id`.
fn refused_beside(a: &Answer, id: &str, message: &str) {
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    let shown = format!("id=\"{id}-error\">Error: {message}");
    assert!(a.text.contains(&shown), "{shown} not in {}", a.text);
}

async fn entries(t: &TestApp) -> i64 {
    sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap()
}

#[tokio::test]
async fn a_cost_form_reads_the_site_format() {
    let t = test_app(false).await;
    let case = draft_case(&t, "NUM-1").await;
    let path = format!("/cases/{case}/costs");

    // Decimal-point site: `12000,50` could be 12000.50 or a slip in a grouped number.
    let a = t.post_form(&path, &cost_form("12000%2C50")).await;
    refused_beside(
        &a,
        "cost-amount",
        "&#34;12000,50&#34; is ambiguous here (groups of thousands have three digits): use 12000.50</p>",
    );
    assert_eq!(cost_amounts(&t, case).await, Vec::<Value>::new(), "nothing was stored");
    // Positive control: the same amount with a decimal point.
    assert_eq!(t.post_form(&path, &cost_form("12000.50")).await.status, StatusCode::SEE_OTHER);
    assert_eq!(cost_amounts(&t, case).await, vec![json!("12000.5")]);

    // Decimal-comma site: `12000,50` is 12000.50 and `12.000,50` too.
    set_number_format(&t, "decimal_comma").await;
    assert_eq!(t.post_form(&path, &cost_form("12000%2C50")).await.status, StatusCode::SEE_OTHER);
    assert_eq!(t.post_form(&path, &cost_form("12.000%2C50")).await.status, StatusCode::SEE_OTHER);
    assert_eq!(cost_amounts(&t, case).await, vec![json!("12000.5"); 3]);
    // The case page writes the amounts in the site's format.
    let page = t.get(&format!("/cases/{case}")).await;
    assert!(page.text.contains("<td class=\"num\">12.000,50</td>"), "{}", page.text);
}

#[tokio::test]
async fn a_form_booking_reads_back_in_the_site_format() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "NUM-2").await;
    let c = t.as_role(Some(Role::Controller));
    // Each submit carries a fresh one-time form token, as the page writes it.
    let path = || format!("/zones/{}/ledger?form={}", z.id, crate::helpers::form_token());
    let form = |q: &str| {
        format!("kind=saving&method=direct&item={}&period=2025-03&quantity={q}&evidence=sub-meter+M3", z.energy)
    };

    // Decimal-point site: `1.250,75` is refused, naming the field.
    let a = c.post_form(&path(), &form("1.250%2C75")).await;
    refused_beside(
        &a,
        "direct-quantity",
        "&#34;1.250,75&#34; is written with a decimal comma; this site writes digits with a decimal point, \
         grouped in threes by comma or space or not at all, e.g. 1,250.75 or 1250.75</p>",
    );
    assert_eq!(entries(&t).await, 0);

    set_number_format(&t, "decimal_comma").await;
    // Decimal-comma site: a decimal point with comma grouping is refused (the control follows).
    let a = c.post_form(&path(), &form("1%2C250.75")).await;
    refused_beside(
        &a,
        "direct-quantity",
        "&#34;1,250.75&#34; is written with a decimal point; this site writes digits",
    );
    assert_eq!(entries(&t).await, 0);
    let booked = c.post_form(&path(), &form("1.250%2C75")).await;
    assert_eq!(booked.status, StatusCode::SEE_OTHER, "{}", booked.text);

    let api = c.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json();
    assert_eq!(api["entries"][0]["quantity"], "1250.75");
    assert_eq!(api["entries"][0]["amount"], "250.15");
    let page = c.get(&format!("/zones/{}/ledger", z.id)).await;
    assert!(page.text.contains("<td class=\"num\">1.250,75</td>"), "quantity in the site format");
    assert!(page.text.contains("<td class=\"num\">250,15</td>"), "amount in the site format");
}

#[tokio::test]
async fn a_decimal_comma_csv_uses_semicolons_and_reads_back() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "NUM-3").await;
    let c = t.as_role(Some(Role::Controller));
    set_number_format(&t, "decimal_comma").await;
    let header =
        "period;kind;item;method;quantity;baseline_intensity;reporting_volume;measured_consumption;amount;evidence";

    // Line 3 has a decimal-point number: the file is refused whole, naming line and column.
    let bad = format!(
        "{header}\n2025-03;saving;Energy;direct;1.250,75;;;;;meter\n2025-04;saving;Energy;direct;1,250.75;;;;;meter\n"
    );
    let a = import(&c, z.id, "bad.csv", &bad).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains("line 3, column quantity: &#34;1,250.75&#34; is written with a decimal point"),
        "{}",
        a.text
    );
    // A comma-separated file on this site is refused by its header.
    let commas = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n2025-03,saving,Energy,direct,5,,,,,meter\n";
    let a = import(&c, z.id, "commas.csv", commas).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("(this site separates columns by &#39;;&#39;)"), "{}", a.text);
    assert_eq!(entries(&t).await, 0);

    // Positive control: the same file with the right number.
    let good = format!(
        "{header}\n2025-03;saving;Energy;direct;1.250,75;;;;;meter\n2025-03;spending;Sensors;;;;;;12.000,50;invoice\n"
    );
    let a = import(&c, z.id, "good.csv", &good).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    let api = c.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json();
    let entries: Vec<(Value, Value)> =
        api["entries"].as_array().unwrap().iter().map(|e| (e["quantity"].clone(), e["amount"].clone())).collect();
    assert_eq!(entries, vec![(json!("1250.75"), json!("250.15")), (Value::Null, json!("-12000.5"))]);

    // The export writes the same format, ungrouped, so that the importer reads it back.
    let csv = c.get(&format!("/zones/{}/ledger.csv", z.id)).await.text;
    assert!(csv.starts_with("entry;zone;period;kind;item;method;quantity;"), "{csv}");
    assert!(csv.contains(";saving;") && csv.contains(";direct;1250,75;;;;;meter;;;0,2;"), "{csv}");
    assert!(csv.contains(";12000,5;invoice;"), "{csv}");
}

#[tokio::test]
async fn the_api_reads_plain_decimals_only() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "NUM-4").await;
    // Whatever the site's format: the API is plain.
    set_number_format(&t, "decimal_comma").await;
    let c = t.as_role(Some(Role::Controller));
    let path = format!("/api/v1/zones/{}/ledger", z.id);
    let body = |q: &str| {
        json!({"kind": "saving", "method": "direct", "item": z.energy, "period": "2025-03", "quantity": q,
               "evidence": "sub-meter M3"})
        .to_string()
    };
    let a = c.post_json(&path, &body("1,5")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        a.json(),
        json!({"error": "some fields are not valid: quantity: not a number: \"1,5\"; enter a plain decimal: digits with a decimal point and no grouping, e.g. 1250.75",
               "fields": [{"field": "quantity", "message": "not a number: \"1,5\"; enter a plain decimal: digits with a decimal point and no grouping, e.g. 1250.75"}]})
    );
    let a = c.post_json(&path, &body("1.5")).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(a.json()["entry"]["quantity"], "1.5");
    // A JSON number is plain too.
    let mut n: Value = serde_json::from_str(&body("0")).unwrap();
    n["quantity"] = json!(2.25);
    let a = c.post_json(&path, &n.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(a.json()["entry"]["quantity"], "2.25");

    // An unknown field is refused by name, nothing booked.
    let mut typo: Value = serde_json::from_str(&body("3")).unwrap();
    typo["evidenc"] = json!("x");
    let a = c.post_json(&path, &typo.to_string()).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(a.json()["fields"][0]["field"], "evidenc");
    assert_eq!(entries(&t).await, 2);
}

#[tokio::test]
async fn api_bodies_refuse_unknown_fields() {
    let t = test_app(false).await;
    let metrics =
        |extra: &str| format!(r#"{{"rate": "0.1", "flows": ["-1000", "300", "420", "680"], {extra}: "0.12"}}"#);
    let a = t.post_json("/api/v1/metrics", &metrics("\"finance_rat\"")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        a.json(),
        json!({"error": "some fields are not valid: finance_rat: unknown field; expected one of: dates, finance_rate, flows, rate, reinvest_rate",
               "fields": [{"field": "finance_rat", "message": "unknown field; expected one of: dates, finance_rate, flows, rate, reinvest_rate"}]})
    );
    // Positive control: the field spelled right is used.
    let a = t.post_json("/api/v1/metrics", &metrics("\"finance_rate\"")).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);

    // Zone and case bodies, nested fields named by their path; nothing stored.
    let before = t.counts().await;
    let a = t.post_json("/api/v1/zones", r#"{"code": "NUM-5", "nmae": "x"}"#).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(a.json()["fields"][0]["field"], "nmae");
    let a = t.post_json("/api/v1/zones", r#"{"code": "NUM-5", "name": "Numbers"}"#).await;
    assert_eq!(a.status, StatusCode::CREATED);
    let zone = a.json()["zone"]["id"].as_i64().unwrap();
    let case = |amount_key: &str| {
        format!(
            r#"{{"label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1, "ramp_up_months": 0,
                "success_probability": "0.8", "costs": [{{"label": "Sensors", "category": "hardware", "kind": "one_off", "{amount_key}": "100"}}]}}"#
        )
    };
    let a = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case("amout")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(a.json()["fields"][0]["field"], "costs[0].amout");
    assert_eq!(t.counts().await, [before[0] + 1, before[1], before[2], before[3]]);
    let a = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case("amount")).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
}

#[tokio::test]
async fn a_format_change_is_never_served_stale() {
    let t = test_app(false).await;
    zone_with_baseline(&t, "NUM-6").await;
    let csv = t.get("/portfolio.csv?budget=40000").await.text;
    assert!(csv.starts_with("rank,code,"), "{csv}");
    assert!(csv.contains(",30000,"), "investment written plain: {csv}");
    let page = t.get("/portfolio?budget=40000").await.text;
    assert!(page.contains("40,000.00"), "budget in the decimal-point format");

    set_number_format(&t, "decimal_comma").await;
    // The same query after the change: the format is read and written anew.
    let refused = t.get("/portfolio.csv?budget=40000.5").await;
    assert_eq!(refused.status, StatusCode::UNPROCESSABLE_ENTITY);
    let csv = t.get("/portfolio.csv?budget=40000").await.text;
    assert!(csv.starts_with("rank;code;"), "{csv}");
    assert!(csv.contains(";30000;"), "{csv}");
    let page = t.get("/portfolio?budget=40000").await.text;
    assert!(page.contains("40.000,00"), "budget in the decimal-comma format");
    // The API stays plain.
    let api = t.get("/api/v1/portfolio?budget=40000.5").await.json();
    assert_eq!(api["choice"]["budget"], "40000.5");
}

#[tokio::test]
async fn the_settings_form_reads_and_shows_the_site_format() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let form = |hurdle: &str, format: &str| {
        format!(
            "plant_name=Test+works&currency=EUR&hurdle_rate={hurdle}&tax_rate=&depreciation_years=&default_horizon_months=60&expert_multiplier=1%2C5&number_format={format}"
        )
    };
    // Only the two site formats exist; nothing is saved otherwise.
    let a = admin.post_form("/admin/settings", &form("10", "plain")).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("Error: decimal_point (1,250.75) or decimal_comma (1.250,75)"), "{}", a.text);
    set_number_format(&t, "decimal_comma").await;
    // The form is read in the format it was shown in: `9.5` is ambiguous here, `9,5` is 9.5 %.
    let a = admin.post_form("/admin/settings", &form("9.5", "decimal_comma")).await;
    refused_beside(
        &a,
        "hurdle_rate",
        "&#34;9.5&#34; is ambiguous here (groups of thousands have three digits): use 9,5 or 9.500",
    );
    let a = admin.post_form("/admin/settings", &form("9%2C5", "decimal_comma")).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    let site = pilot_ledger::db::get_site(&t.pool).await.unwrap();
    assert_eq!((site.hurdle_rate.to_string(), site.expert_multiplier.to_string()), ("0.095".into(), "1.5".into()));
    let page = admin.get("/admin").await.text;
    assert!(page.contains("name=\"hurdle_rate\" value=\"9,5\"") && page.contains("value=\"1,5\""), "{page}");
}

#[tokio::test]
async fn a_body_that_parses_once_is_never_a_500() {
    let t = test_app(false).await;
    // An ignored field holding a number past f64 was accepted by the typed parse and failed the
    // second, generic one: a 500. One parse now: 400 naming the problem and where.
    let a = t.post_json("/api/v1/metrics", r#"{"rate":"0.1","flows":["-100","110"],"x":1e400}"#).await;
    assert_eq!(a.status, StatusCode::BAD_REQUEST, "{}", a.text);
    assert_eq!(
        a.json(),
        json!({"error": "Failed to parse the request body as JSON: x: number out of range at line 1 column 46", "fields": []})
    );
    // More than 128 nested arrays (serde_json's recursion limit) in an unknown field: 400 too.
    let deep = format!(r#"{{"rate":"0.1","flows":["-100","110"],"x":{}{}}}"#, "[".repeat(200), "]".repeat(200));
    let a = t.post_json("/api/v1/metrics", &deep).await;
    assert_eq!(a.status, StatusCode::BAD_REQUEST, "{}", a.text);
    // The body object and 127 arrays are the 128 levels allowed: the path shows 126 indices.
    let path = format!("x{}", "[0]".repeat(126));
    assert_eq!(
        a.json(),
        json!({"error": format!("Failed to parse the request body as JSON: {path}: recursion limit exceeded at line 1 column 168"),
               "fields": []})
    );
    // A shape error keeps its path; a plain unknown field is the 422 naming it.
    let a = t.post_json("/api/v1/zones", r#"{"code": 5, "name": "Numbers"}"#).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
    assert_eq!(
        a.json(),
        json!({"error": "Failed to deserialize the JSON body into the target type: code: invalid type: integer `5`, expected a string",
               "fields": []})
    );
    let a = t.post_json("/api/v1/metrics", r#"{"rate":"0.1","flows":["-100","110"],"x":1}"#).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(a.json()["fields"][0]["field"], "x");
    // Positive control: the body without the extra field is answered.
    let a = t.post_json("/api/v1/metrics", r#"{"rate":"0.1","flows":["-100","110"]}"#).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
}

#[tokio::test]
async fn a_form_shown_in_another_format_is_refused() {
    let t = test_app(false).await;
    let case = draft_case(&t, "NUM-7").await;
    let path = format!("/cases/{case}/costs");
    // The form carries the format it was shown in.
    let edit = t.get(&format!("/cases/{case}/edit")).await.text;
    assert!(edit.contains(r#"<input type="hidden" name="shown_number_format" value="decimal_point">"#), "{edit}");
    set_number_format(&t, "decimal_comma").await;
    // Shown on the decimal-point site, `1.250` meant 1.25; read now it would be 1250.
    let a = t.post_form(&path, &format!("{}&shown_number_format=decimal_point", cost_form("1.250"))).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains(
            "the site&#39;s number format changed since this form was shown; check the figures and submit again"
        ),
        "{}",
        a.text
    );
    assert_eq!(cost_amounts(&t, case).await, Vec::<Value>::new(), "nothing was stored");
    // Positive controls: shown in the current format, or without the field (a script), it is read.
    let a = t.post_form(&path, &format!("{}&shown_number_format=decimal_comma", cost_form("1.250"))).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    assert_eq!(t.post_form(&path, &cost_form("2.500")).await.status, StatusCode::SEE_OTHER);
    assert_eq!(cost_amounts(&t, case).await, vec![json!("1250"), json!("2500")]);
    let edit = t.get(&format!("/cases/{case}/edit")).await.text;
    assert!(edit.contains(r#"<input type="hidden" name="shown_number_format" value="decimal_comma">"#));

    // The portfolio query form (a GET) likewise.
    let a = t.get("/portfolio?budget=1.250&shown_number_format=decimal_point").await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("the site&#39;s number format changed since this form was shown"), "{}", a.text);
    let a = t.get("/portfolio?budget=1.250&shown_number_format=decimal_comma").await;
    assert_eq!(a.status, StatusCode::OK);
    assert!(a.text.contains("1.250,00"), "{}", a.text);
}

#[tokio::test]
async fn whole_numbers_refuse_a_sign() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let form = |months: &str| {
        format!(
            "plant_name=Test+works&currency=EUR&hurdle_rate=10&tax_rate=&depreciation_years=&default_horizon_months={months}&expert_multiplier=3&number_format=decimal_point"
        )
    };
    let a = admin.post_form("/admin/settings", &form("%2B36")).await;
    refused_beside(
        &a,
        "default_horizon_months",
        "&#34;+36&#34; is not a whole number from 1 to 240: enter digits only (no sign, grouping or decimals)",
    );
    assert_eq!(pilot_ledger::db::get_site(&t.pool).await.unwrap().default_horizon_months, 60);
    // Positive control.
    assert_eq!(admin.post_form("/admin/settings", &form("36")).await.status, StatusCode::SEE_OTHER);
    assert_eq!(pilot_ledger::db::get_site(&t.pool).await.unwrap().default_horizon_months, 36);
}

#[tokio::test]
async fn pages_are_refused_when_the_number_format_cannot_be_read() {
    let t = test_app(false).await;
    // Positive control: readable, the page is served.
    assert_eq!(t.get("/login").await.status, StatusCode::OK);
    // The database gone: no guessed format, a 503 error page.
    t.pool.close().await;
    let a = t.get("/login").await;
    assert_eq!(a.status, StatusCode::SERVICE_UNAVAILABLE, "{}", a.text);
    assert!(
        a.text.contains("the site&#39;s number format cannot be read just now; nothing was changed, try again shortly"),
        "{}",
        a.text
    );
}
