//! CSV exports cannot run as formulas. OWASP "CSV Injection"
//! (https://owasp.org/www-community/attacks/CSV_Injection): a spreadsheet runs a cell that
//! begins with `=`, `+`, `-` or `@` (a leading tab or carriage return can hide one), so every
//! text cell that begins so is prefixed with a single quote. Numbers stay numbers.
//!
//! Tab and carriage return cannot reach a stored text (forms, CSV and the API trim text and
//! refuse control characters); `domain::csv_safe`'s unit test covers them.

use crate::helpers::test_app;
use crate::ledger::zone_with_baseline;
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use serde_json::json;

/// Evidence notes starting with each formula character (OWASP "CSV Injection").
const NOTES: [&str; 4] = ["=1+2", "+1+2", "-1+2", "@SUM(A1:A2)"];

fn rows(text: &str) -> (csv::StringRecord, Vec<csv::StringRecord>) {
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let head = reader.headers().unwrap().clone();
    (head, reader.records().map(|r| r.unwrap()).collect())
}

/// A zone coded `-INJ` whose entries were booked by `-ctl` (a user name may start with a dash): four savings with the notes above
/// and a saving adjusted to the period's volume of -3,650 kWh.
async fn booked() -> (crate::helpers::TestApp, i64) {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "-INJ").await;
    let ctl = t.as_new_user("-ctl", Role::Controller).await;
    for (i, note) in NOTES.iter().enumerate() {
        let body = json!({"kind": "saving", "method": "direct", "item": z.energy, "period": format!("2025-0{}", i + 2),
                          "quantity": "100", "evidence": note});
        let a = ctl.post_json(&format!("/api/v1/zones/{}/ledger", z.id), &body.to_string()).await;
        assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    }
    // A period worse than its baseline (hand arithmetic): 41.5 kWh per unit x 2,900 units =
    // 120,350 kWh adjusted baseline; 124,000 kWh metered: -3,650 kWh x 0.20 EUR/kWh.
    let worse = json!({"kind": "saving", "method": "volume_adjusted", "item": z.energy, "period": "2025-06",
                       "baseline_intensity": "41.5", "reporting_volume": "2900", "measured_consumption": "124000",
                       "evidence": "sub-meter M3"});
    let a = ctl.post_json(&format!("/api/v1/zones/{}/ledger", z.id), &worse.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    (t, z.id)
}

fn check_ledger(text: &str) {
    let (head, rows) = rows(text);
    let col = |name: &str| head.iter().position(|h| h == name).unwrap();
    assert_eq!(rows.len(), 5);
    let notes: Vec<&str> = rows.iter().map(|r| &r[col("evidence")]).collect();
    // Each formula start is quoted (OWASP "CSV Injection"); a plain note is written as typed.
    assert_eq!(notes, ["'=1+2", "'+1+2", "'-1+2", "'@SUM(A1:A2)", "sub-meter M3"]);
    for r in &rows {
        assert_eq!(&r[col("zone")], "'-INJ");
        assert_eq!(&r[col("booked_by")], "'-ctl");
    }
    // Numbers stay numbers: the negative quantity is -3650, not the text '-3650.
    assert_eq!(&rows[4][col("quantity")], "-3650");
}

#[tokio::test]
async fn zone_ledger_export_quotes_formula_cells_and_keeps_numbers() {
    let (t, zone) = booked().await;
    let csv = t.get(&format!("/zones/{zone}/ledger.csv")).await;
    assert_eq!(csv.status, StatusCode::OK);
    check_ledger(&csv.text);
}

#[tokio::test]
async fn whole_ledger_export_quotes_formula_cells_and_keeps_numbers() {
    let (t, _) = booked().await;
    let csv = t.get("/ledger.csv").await;
    assert_eq!(csv.status, StatusCode::OK);
    check_ledger(&csv.text);
}

#[tokio::test]
async fn portfolio_export_quotes_formula_cells_and_keeps_numbers() {
    let t = test_app(false).await;
    // Zone names starting with each formula character (OWASP "CSV Injection"), and a plain one.
    let names = ["=HYPERLINK(\"x\")", "+cmd", "-2+3", "@SUM(A1)", "Press line 2"];
    for (i, name) in names.iter().enumerate() {
        let z = t.post_json("/api/v1/zones", &json!({"code": format!("-Z{i}"), "name": name}).to_string()).await;
        assert_eq!(z.status, StatusCode::CREATED, "{}", z.text);
    }
    let csv = t.get("/portfolio.csv").await;
    assert_eq!(csv.status, StatusCode::OK);
    let (head, rows) = rows(&csv.text);
    let col = |name: &str| head.iter().position(|h| h == name).unwrap();
    let mut got: Vec<(String, String)> =
        rows.iter().map(|r| (r[col("code")].to_string(), r[col("name")].to_string())).collect();
    got.sort();
    let want = [
        ("'-Z0", "'=HYPERLINK(\"x\")"),
        ("'-Z1", "'+cmd"),
        ("'-Z2", "'-2+3"),
        ("'-Z3", "'@SUM(A1)"),
        ("'-Z4", "Press line 2"),
    ];
    assert_eq!(got, want.map(|(c, n)| (c.to_string(), n.to_string())));
}
