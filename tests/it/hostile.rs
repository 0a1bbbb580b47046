//! Hostile input: generated and malformed CSV files, scenario files and JSON bodies (huge
//! numbers, NaN-like strings, deep nesting, wrong content types, oversized bodies) never get a
//! 5xx or a panic, and a refused input writes nothing. Each property reports how many inputs it
//! tried (`cargo test --test it hostile -- --nocapture`).

use crate::helpers::{TestApp, test_app};
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use pilot_ledger::auth::Role;
use pilot_ledger::domain::Scenario;
use proptest::prelude::*;
use proptest::test_runner::{Config, TestRunner};
use serde_json::Value;
use std::cell::Cell;

/// Inputs per property.
const CASES: u32 = 400;

/// Tokens that break naive parsers.
const NASTY: &[&str] = &[
    "",
    " ",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "Infinity",
    "1e400",
    "-1e400",
    "1e-400",
    "-0",
    "0x1F",
    "1_000",
    "1,5",
    "１２",
    "99999999999999999999999999999999999",
    "-99999999999999999999999999999999999",
    "0.0000000000000000000000000000001",
    "2025-13",
    "2025-00",
    "9999-12",
    "2025-1",
    "\"",
    "\"\"",
    ",",
    "\n",
    "\r\n",
    "\u{0}",
    "🙂",
    "<script>",
    "'; DROP TABLE x;--",
    "saving",
    "spending",
    "direct",
    "normalized",
    "volume_adjusted",
    "1",
    "-1",
    "12.5",
    "true",
    "null",
];

fn nasty() -> impl Strategy<Value = String> {
    prop_oneof![
        3 => prop::sample::select(NASTY).prop_map(str::to_string),
        1 => "\\PC{0,12}",
        1 => any::<f64>().prop_map(|f| f.to_string()),
        1 => any::<i64>().prop_map(|i| i.to_string()),
    ]
}

/// Keep every 5xx out, and a refused request from writing: `counts` before and after.
async fn ledger_rows(t: &TestApp) -> i64 {
    sqlx::query_scalar("SELECT COUNT(*) FROM ledger_entries").fetch_one(&t.pool).await.unwrap()
}

fn runtime() -> tokio::runtime::Runtime {
    tokio::runtime::Builder::new_current_thread().enable_all().build().unwrap()
}

fn runner() -> TestRunner {
    TestRunner::new(Config { cases: CASES, failure_persistence: None, ..Config::default() })
}

const COLUMNS: &str =
    "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence";

/// One CSV cell, quoted when it holds a comma, a quote or a line break (RFC 4180).
fn csv_cell(c: &str) -> String {
    if c.contains([',', '"', '\n']) { format!("\"{}\"", c.replace('"', "\"\"")) } else { c.to_string() }
}

fn csv_text() -> impl Strategy<Value = String> {
    let row = prop::collection::vec(nasty(), 0..12)
        .prop_map(|cells| cells.iter().map(|c| csv_cell(c)).collect::<Vec<_>>().join(","));
    // A valid row of PRESS-2, with one cell sometimes swapped for a nasty value.
    let good = (1u32..10, 1u32..500, prop::option::weighted(0.3, (0usize..10, nasty()))).prop_map(|(m, q, swap)| {
        let mut cells: Vec<String> = format!("2026-0{m},saving,Split and wrinkled blanks,direct,{q},,,,,shift report")
            .split(',')
            .map(str::to_string)
            .collect();
        if let Some((i, v)) = swap {
            cells[i] = csv_cell(&v);
        }
        cells.join(",")
    });
    prop_oneof![
        1 => "\\PC{0,200}",
        1 => prop::collection::vec(any::<u8>(), 0..300).prop_map(|b| String::from_utf8_lossy(&b).into_owned()),
        3 => prop::collection::vec(row, 0..6).prop_map(|rows| format!("{COLUMNS}\n{}", rows.join("\n"))),
        3 => prop::collection::vec(good, 1..6).prop_map(|rows| format!("{COLUMNS}\n{}", rows.join("\n"))),
    ]
}

fn multipart(zone: i64, csv: &str) -> Request<Body> {
    let boundary = "----hostile-boundary";
    let body = format!(
        "--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"x.csv\"\r\nContent-Type: text/csv\r\n\r\n{csv}\r\n--{boundary}--\r\n"
    );
    Request::post(format!("/zones/{zone}/ledger/import?form={}", crate::helpers::form_token()))
        .header(header::CONTENT_TYPE, format!("multipart/form-data; boundary={boundary}"))
        .body(Body::from(body))
        .unwrap()
}

#[test]
fn csv_importer_refuses_garbage_whole() {
    let rt = runtime();
    let t = rt.block_on(test_app(true)).as_role(Some(Role::Controller));
    let zone: i64 =
        rt.block_on(sqlx::query_scalar("SELECT id FROM zones WHERE code = 'PRESS-2'").fetch_one(&t.pool)).unwrap();
    let accepted = Cell::new(0);
    runner()
        .run(&csv_text(), |csv| {
            rt.block_on(async {
                let before = ledger_rows(&t).await;
                let a = t.send(multipart(zone, &csv)).await;
                prop_assert!(a.status.as_u16() < 500, "{} for {csv:?}: {}", a.status, a.text);
                let after = ledger_rows(&t).await;
                if a.status.is_success() || a.status.is_redirection() {
                    accepted.set(accepted.get() + 1);
                } else {
                    prop_assert_eq!(before, after, "a refused import wrote rows: {:?}", csv);
                }
                Ok(())
            })
        })
        .unwrap();
    eprintln!(
        "hostile CSV: {CASES} files tried, {} accepted whole, the rest refused with nothing written",
        accepted.get()
    );
    // An importer that refused everything would pass the property: a fifth of the generated
    // files are valid rows, and some must have been booked.
    assert!(accepted.get() > 0, "no generated file was accepted");
    rt.block_on(async {
        // Positive control: one valid row books exactly one entry at the driver's unit value
        // (14.20 EUR a piece, seed/demo-plant.json): 7 x 14.20 = 99.40 EUR (hand arithmetic).
        let before = ledger_rows(&t).await;
        let good = format!("{COLUMNS}\n2026-10,saving,Split and wrinkled blanks,direct,7,,,,,control row\n");
        let a = t.send(multipart(zone, &good)).await;
        assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
        assert_eq!(ledger_rows(&t).await, before + 1);
        let amount: String = sqlx::query_scalar("SELECT amount FROM ledger_entries WHERE evidence = 'control row'")
            .fetch_one(&t.pool)
            .await
            .unwrap();
        assert_eq!(amount.parse::<rust_decimal::Decimal>().unwrap(), rust_decimal::Decimal::new(9940, 2));
        // The same row with the quantity broken: refused naming its line and column, nothing written.
        let bad = format!("{COLUMNS}\n2026-10,saving,Split and wrinkled blanks,direct,NaN,,,,,control row 2\n");
        let a = t.send(multipart(zone, &bad)).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
        assert!(a.text.contains("line 2, column quantity: not a number: &#34;NaN&#34;; enter digits with a decimal point, grouped in threes by comma or space or not at all, e.g. 1,250.75 or 1250.75"), "{}", a.text);
        assert_eq!(ledger_rows(&t).await, before + 1);
    });
}

/// A JSON value with hostile leaves, nested up to a few levels.
fn json_value() -> impl Strategy<Value = Value> {
    let leaf = prop_oneof![
        nasty().prop_map(Value::String),
        any::<i64>().prop_map(Value::from),
        any::<f64>().prop_map(|f| serde_json::Number::from_f64(f).map_or(Value::Null, Value::Number)),
        any::<bool>().prop_map(Value::Bool),
        Just(Value::Null),
    ];
    let keys = prop::sample::select(vec![
        "rate",
        "flows",
        "dates",
        "finance_rate",
        "reinvest_rate",
        "code",
        "name",
        "status",
        "label",
        "horizon_months",
        "start_month",
        "go_live_offset",
        "ramp_up_months",
        "success_probability",
        "costs",
        "drivers",
        "amount",
        "kind",
        "category",
        "month_offset",
        "capex",
        "qty_low",
        "qty_likely",
        "qty_high",
        "unit_value",
        "item",
        "period",
        "method",
        "quantity",
        "evidence",
        "escalation",
        "unit",
    ]);
    leaf.prop_recursive(4, 64, 8, move |inner| {
        prop_oneof![
            prop::collection::vec(inner.clone(), 0..8).prop_map(Value::Array),
            prop::collection::btree_map(keys.clone().prop_map(str::to_string), inner, 0..10)
                .prop_map(|m| Value::Object(m.into_iter().collect())),
        ]
    })
}

async fn write_counts(t: &TestApp) -> [i64; 5] {
    let c = t.counts().await;
    [c[0], c[1], c[2], c[3], ledger_rows(t).await]
}

#[test]
fn json_api_never_answers_5xx_and_refusals_write_nothing() {
    let rt = runtime();
    let t = rt.block_on(test_app(true));
    let zone: i64 =
        rt.block_on(sqlx::query_scalar("SELECT id FROM zones WHERE code = 'PRESS-2'").fetch_one(&t.pool)).unwrap();
    let paths = [
        "/api/v1/metrics".to_string(),
        "/api/v1/zones".into(),
        format!("/api/v1/zones/{zone}/cases"),
        format!("/api/v1/zones/{zone}/ledger"),
    ];
    let types =
        ["application/json", "application/json; charset=utf-8", "text/plain", "application/x-www-form-urlencoded", ""];
    let strategy = (json_value(), 0..paths.len(), 0..types.len(), any::<bool>());
    let admin = t.as_role(Some(Role::Admin));
    let tried = Cell::new(0);
    runner()
        .run(&strategy, |(body, p, ty, mangle)| {
            rt.block_on(async {
                let mut bytes = body.to_string().into_bytes();
                if mangle {
                    bytes.truncate(bytes.len() / 2); // malformed: cut in the middle, maybe inside a character
                }
                let text = String::from_utf8_lossy(&bytes).into_owned();
                let mut req = Request::post(paths[p].as_str());
                if !types[ty].is_empty() {
                    req = req.header(header::CONTENT_TYPE, types[ty]);
                }
                let before = write_counts(&admin).await;
                let a = admin.send(req.body(Body::from(bytes)).unwrap()).await;
                tried.set(tried.get() + 1);
                prop_assert!(a.status.as_u16() < 500, "{} {} for {text}: {}", a.status, paths[p], a.text);
                if !a.status.is_success() {
                    prop_assert_eq!(before, write_counts(&admin).await, "refused but written: {}", text);
                }
                Ok(())
            })
        })
        .unwrap();
    eprintln!("hostile JSON: {} bodies tried against {} endpoints, no 5xx, no partial write", tried.get(), paths.len());

    // The extremes, once each.
    rt.block_on(async {
        let deep = format!("{}{}", "[".repeat(100_000), "]".repeat(100_000));
        let a = admin.post_json("/api/v1/metrics", &deep).await;
        // serde_json stops at its recursion limit (128): a syntax error, 400.
        assert_eq!(a.status, StatusCode::BAD_REQUEST, "deep JSON: {}", &a.text[..200]);
        let big = format!(r#"{{"rate": "0.1", "flows": [{}"1"]}}"#, "\"1\",".repeat(1_200_000));
        assert_eq!(admin.post_json("/api/v1/metrics", &big).await.status, StatusCode::PAYLOAD_TOO_LARGE);
        for rate in ["NaN", "inf", "1e400", "-1", "99999999999999999999999999999"] {
            let a = admin.post_json("/api/v1/metrics", &format!(r#"{{"rate": "{rate}", "flows": ["-1", "2"]}}"#)).await;
            assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "rate {rate}: {}", a.text);
            assert!(a.text.contains("\"field\":\"rate\""), "{}", a.text);
        }
        // Positive controls beside the refusals: a valid body to each write endpoint is
        // accepted and writes exactly its one row; the same body with one field broken is
        // refused with that field's message and writes nothing.
        let before = write_counts(&admin).await;
        let a = admin.post_json("/api/v1/zones", r#"{"code": "CTRL-1", "name": "Control zone"}"#).await;
        assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
        assert_eq!(a.json()["zone"]["code"], "CTRL-1");
        let after = write_counts(&admin).await;
        assert_eq!(after, [before[0] + 1, before[1], before[2], before[3], before[4]]);
        let a = admin.post_json("/api/v1/zones", r#"{"code": "CTRL-2", "name": " "}"#).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
        assert_eq!(a.json()["fields"], serde_json::json!([{"field": "name", "message": "required: enter some text"}]));
        assert_eq!(write_counts(&admin).await, after);
        // A saving on PRESS-2's first driver (14.20 EUR a piece, seed/demo-plant.json):
        // 7 x 14.20 = 99.40 EUR (hand arithmetic).
        let driver: i64 = sqlx::query_scalar(
            "SELECT d.id FROM benefit_drivers d JOIN case_versions c ON c.id = d.case_id
             WHERE c.zone_id = ? AND c.state = 'approved' AND d.label = 'Split and wrinkled blanks'",
        )
        .bind(zone)
        .fetch_one(&t.pool)
        .await
        .unwrap();
        let body = serde_json::json!({"kind": "saving", "method": "direct", "item": driver, "period": "2026-10",
            "quantity": "7", "evidence": "control"});
        let a = admin.post_json(&format!("/api/v1/zones/{zone}/ledger"), &body.to_string()).await;
        assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
        assert_eq!(a.json()["entry"]["amount"], "99.4");
        assert_eq!(write_counts(&admin).await, [after[0], after[1], after[2], after[3], after[4] + 1]);
        let mut broken = body.clone();
        broken["quantity"] = "NaN".into();
        let a = admin.post_json(&format!("/api/v1/zones/{zone}/ledger"), &broken.to_string()).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", a.text);
        assert_eq!(a.json()["fields"], serde_json::json!([{"field": "quantity", "message": "not a number: \"NaN\"; enter a plain decimal: digits with a decimal point and no grouping, e.g. 1250.75"}]));
        assert_eq!(write_counts(&admin).await, [after[0], after[1], after[2], after[3], after[4] + 1]);
        // Metrics: -100 now and 110 in a period have an IRR of exactly 10 % (hand arithmetic).
        let a = admin.post_json("/api/v1/metrics", r#"{"rate": "0.1", "flows": ["-100", "110"]}"#).await;
        assert_eq!(a.status, StatusCode::OK, "{}", a.text);
        let irr: f64 = a.json()["irr"].as_str().unwrap().parse().unwrap();
        assert!((irr - 0.1).abs() < 1e-12, "{}", a.text);
    });
}

#[test]
fn scenario_loader_refuses_mangled_files_whole() {
    let rt = runtime();
    rt.block_on(async {
        // Positive control: the unmangled demo file loads whole: 8 zones, 9 case versions and
        // 176 ledger entries (counted in seed/demo-plant.json).
        let fresh = test_app(false).await;
        let summary =
            pilot_ledger::cli::load_text(&fresh.pool, pilot_ledger::cli::DEMO_SCENARIO, fresh.now()).await.unwrap();
        assert_eq!((summary.zones, summary.cases, summary.entries), (8, 9, 176));
        // The same file with one value broken is refused naming it, and writes nothing.
        let fresh = test_app(false).await;
        let before = write_counts(&fresh).await;
        let broken =
            pilot_ledger::cli::DEMO_SCENARIO.replacen(r#""hurdle_rate": "0.09""#, r#""hurdle_rate": "NaN""#, 1);
        assert_ne!(broken, pilot_ledger::cli::DEMO_SCENARIO);
        let err = pilot_ledger::cli::load_text(&fresh.pool, &broken, fresh.now()).await.unwrap_err();
        assert_eq!(
            err.to_string(),
            "the scenario is not valid; nothing was stored:\n  site.hurdle_rate: not a number: \"NaN\"; enter digits with a \
             decimal point, grouped in threes by comma or space or not at all, e.g. 1,250.75 or 1250.75"
        );
        assert_eq!(write_counts(&fresh).await, before);
    });
    let t = rt.block_on(test_app(false));
    let demo = pilot_ledger::cli::DEMO_SCENARIO.as_bytes().to_vec();
    // Mutations of the demo file: bytes replaced, cut short, or a value swapped for a nasty one.
    let mutation = prop_oneof![
        prop::collection::vec((0..demo.len(), any::<u8>()), 1..6).prop_map(|edits| ("bytes", edits, String::new())),
        (0..demo.len()).prop_map(|cut| ("cut", vec![(cut, 0)], String::new())),
        (0..demo.len(), nasty()).prop_map(|(at, v)| ("value", vec![(at, 0)], v)),
    ];
    let (tried, parsed) = (Cell::new(0), Cell::new(0));
    runner()
        .run(&mutation, |(how, edits, value)| {
            let mut text = demo.clone();
            match how {
                "bytes" => edits.iter().for_each(|&(i, b)| text[i] = b),
                "cut" => text.truncate(edits[0].0),
                _ => {
                    // Replace the next quoted string after the position with the nasty value.
                    let s = String::from_utf8_lossy(&text).into_owned();
                    if let Some(start) = s[edits[0].0..].find(": \"").map(|i| i + edits[0].0 + 3)
                        && let Some(len) = s[start..].find('"')
                    {
                        let escaped = value.replace('\\', "\\\\").replace('"', "\\\"");
                        text = format!("{}{escaped}{}", &s[..start], &s[start + len..]).into_bytes();
                    }
                }
            }
            let text = String::from_utf8_lossy(&text).into_owned();
            tried.set(tried.get() + 1);
            if Scenario::parse(&text, pilot_ledger::domain::NumberFormat::default()).is_ok() {
                parsed.set(parsed.get() + 1);
            }
            rt.block_on(async {
                let before = write_counts(&t).await;
                // A harmless mutation loads once; later ones then collide on the zone codes,
                // which must refuse the whole file just the same.
                if pilot_ledger::cli::load_text(&t.pool, &text, t.now()).await.is_err() {
                    prop_assert_eq!(before, write_counts(&t).await, "a refused load wrote rows");
                }
                Ok(())
            })
        })
        .unwrap();
    eprintln!(
        "hostile scenarios: {} mangled demo files tried, {} still valid, the rest refused with nothing written",
        tried.get(),
        parsed.get()
    );
}
