//! Baselines that keep their history (README, "The ledger"): items keep their identity across
//! versions, and every month is measured against the baseline in force in it, so approving a
//! new version never hides or re-prices months already booked. Values by hand arithmetic.

use crate::helpers::{TestApp, test_app};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use pilot_ledger::domain::Month;
use serde_json::{Value, json};

/// The month `n` months after `m` (negative: before).
fn shift(m: Month, n: i32) -> Month {
    let i = m.year * 12 + i32::from(m.month) - 1 + n;
    Month { year: i.div_euclid(12), month: (i.rem_euclid(12) + 1) as u8 }
}

/// Month `i` of the case, as text.
fn month(start: Month, i: i32) -> String {
    shift(start, i).to_string()
}

async fn ledger(t: &TestApp, zone: i64) -> Value {
    let a = t.get(&format!("/api/v1/zones/{zone}/ledger")).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    a.json()
}

fn strs(v: &Value, n: usize) -> Vec<String> {
    v.as_array().unwrap().iter().take(n).map(|x| x.as_str().unwrap().to_string()).collect()
}

fn rate(row: &Value) -> f64 {
    row["realization_to_date"].as_str().unwrap_or_else(|| panic!("rate expected: {row}")).parse().unwrap()
}

fn portfolio_row(p: &Value, code: &str) -> Value {
    p["zones"].as_array().unwrap().iter().find(|r| r["code"] == code).unwrap().clone()
}

/// The months a test can book: the case starts eight months before the fixed test clock's month
/// (helpers::TEST_NOW, 2026-11), in 2026-03, so the seven months 1 to 7 (2026-04 to 2026-10)
/// are in the past and month 8 (2026-11, today) is bookable.
#[tokio::test]
async fn a_rebaseline_keeps_seven_booked_months_and_measures_later_months_against_the_new_one() {
    let base = test_app(false).await;
    let (lead, admin, controller) =
        (base.as_role(Some(Role::Lead)), base.as_role(Some(Role::Admin)), base.as_role(Some(Role::Controller)));
    let today = Month::parse("2026-11").unwrap();
    let start = Month::parse("2026-03").unwrap();
    assert_eq!(Month::of(base.now().date()), today, "the fixed test clock");
    let z = lead.post_json("/api/v1/zones", &json!({"code": "HIST-1", "name": "History zone"}).to_string()).await;
    let zone = z.json()["zone"]["id"].as_i64().unwrap();
    // Energy: 200,000 kWh a year at 0.20 EUR from go-live in month 1: 200,000 x 0.20 / 12 =
    // 3,333.3333 EUR a month (the schedule keeps 4 places). Scrap: 1,200 pcs a year at 5.00 EUR
    // = 500 EUR a month. Sensors: a one-off 30,000 EUR in month 0.
    let case = json!({
        "label": "Base", "horizon_months": 36, "start_month": start.to_string(), "go_live_offset": 1,
        "ramp_up_months": 0, "success_probability": "0.8",
        "costs": [{"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "30000", "month_offset": 0, "capex": true}],
        "drivers": [
            {"label": "Energy", "kind": "energy", "qty_low": "150000", "qty_likely": "200000", "qty_high": "250000", "unit_value": "0.20"},
            {"label": "Scrap", "kind": "scrap", "qty_low": "1000", "qty_likely": "1200", "qty_high": "1500", "unit_value": "5.00"}
        ]
    });
    let c = lead.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await.json();
    let v1 = c["case"]["id"].as_i64().unwrap();
    let (energy1, scrap1) =
        (c["case"]["drivers"][0]["id"].as_i64().unwrap(), c["case"]["drivers"][1]["id"].as_i64().unwrap());
    let sensors = c["case"]["costs"][0]["id"].as_i64().unwrap();
    // A new item is its own identity.
    assert_eq!(c["case"]["drivers"][0]["item_uid"].as_i64(), Some(energy1));
    assert_eq!(lead.post_json(&format!("/api/v1/cases/{v1}/submit"), "{}").await.status, StatusCode::OK);
    let ok = admin.post_json(&format!("/api/v1/cases/{v1}/approve"), r#"{"comment":"pilot funded"}"#).await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
    for status in ["piloting", "measuring"] {
        let s = lead.post_json(&format!("/api/v1/zones/{zone}/status"), &json!({ "status": status }).to_string()).await;
        assert_eq!(s.status, StatusCode::OK, "{}", s.text);
    }
    // A second zone, never booked, whose calibrated NPV reads this zone's evidence.
    let other = lead.post_json("/api/v1/zones", &json!({"code": "HIST-2", "name": "Reader"}).to_string()).await;
    let other = other.json()["zone"]["id"].as_i64().unwrap();
    let oc = json!({"label": "Plan", "horizon_months": 24, "start_month": today.to_string(), "go_live_offset": 0,
        "ramp_up_months": 0, "success_probability": "0.9", "costs": [],
        "drivers": [{"label": "Kiln energy", "kind": "energy", "qty_low": "50000", "qty_likely": "60000", "qty_high": "70000", "unit_value": "0.20"}]});
    assert_eq!(
        lead.post_json(&format!("/api/v1/zones/{other}/cases"), &oc.to_string()).await.status,
        StatusCode::CREATED
    );

    // Seven months booked: Energy 15,000 kWh (3,000 EUR) and Scrap 80 pcs (400 EUR) in months 1
    // to 7, the sensors' 30,000 EUR in month 0.
    let book = |body: Value| {
        let controller = &controller;
        async move {
            let a = controller.post_json(&format!("/api/v1/zones/{zone}/ledger"), &body.to_string()).await;
            assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
        }
    };
    let saving = |item: i64, m: String, q: &str| json!({"kind": "saving", "method": "direct", "item": item, "period": m, "quantity": q, "evidence": "meter"});
    book(json!({"kind": "spending", "item": sensors, "period": month(start, 0), "amount": "30000", "evidence": "invoice"}))
        .await;
    for i in 1..=7 {
        book(saving(energy1, month(start, i), "15000")).await;
        book(saving(scrap1, month(start, i), "80")).await;
    }
    let before = ledger(&controller, zone).await;
    let r = &before["realized"];
    // Eight months elapsed (0 to 7): expected 7 x 3,333.3333 = 23,333.3331 (Energy) + 7 x 500 =
    // 3,500 (Scrap) = 26,833.3331; measured 7 x 3,000 + 7 x 400 = 23,800.
    assert_eq!(r["elapsed_months"], 8);
    assert_eq!(r["savings_expected_to_date"], "26833.3331");
    assert_eq!(r["savings_measured_to_date"], "23800");
    let months = |v: &Value, d: usize, what: &str| strs(&v["realized"]["drivers"][d][what], 9);
    let energy_expected: Vec<String> = ["0"].into_iter().chain(["3333.3333"; 8]).map(String::from).collect();
    assert_eq!(months(&before, 0, "expected"), energy_expected);
    let energy_measured: Vec<String> = ["0"].into_iter().chain(["3000"; 7]).chain(["0"]).map(String::from).collect();
    assert_eq!(months(&before, 0, "measured"), energy_measured);
    let p_before = lead.get("/api/v1/portfolio").await.json();
    assert!((rate(&portfolio_row(&p_before, "HIST-1")) - 23800.0 / 26833.3331).abs() < 1e-12);

    // Re-baseline: the lead copies v1, changes Energy's likely quantity to 260,000 kWh (delete
    // and add again under the same label: the same item), retires Scrap, submits; the admin
    // approves as the second person.
    let copy = lead.post_json(&format!("/api/v1/cases/{v1}/copy"), r#"{"label":"Rebaselined"}"#).await;
    assert_eq!(copy.status, StatusCode::CREATED, "{}", copy.text);
    let v2 = copy.json()["case"]["id"].as_i64().unwrap();
    let copied = lead.get(&format!("/api/v1/cases/{v2}")).await.json();
    let drivers = copied["case"]["drivers"].as_array().unwrap().clone();
    assert_eq!(
        drivers.iter().map(|d| d["item_uid"].as_i64().unwrap()).collect::<Vec<_>>(),
        [energy1, scrap1],
        "a copy carries the identities"
    );
    for d in &drivers {
        let del = lead.post_form(&format!("/cases/{v2}/drivers/{}/delete", d["id"]), "").await;
        assert_eq!(del.status, StatusCode::SEE_OTHER, "{}", del.text);
    }
    let add = lead
        .post_form(
            &format!("/cases/{v2}/drivers"),
            "label=Energy&kind=energy&unit=kWh&qty_low=150000&qty_likely=260000&qty_high=300000&unit_value=0.20&escalation=0",
        )
        .await;
    assert_eq!(add.status, StatusCode::SEE_OTHER, "{}", add.text);
    let v2_case = lead.get(&format!("/api/v1/cases/{v2}")).await.json();
    let energy2 = v2_case["case"]["drivers"][0]["id"].as_i64().unwrap();
    assert_ne!(energy2, energy1);
    assert_eq!(v2_case["case"]["drivers"][0]["item_uid"].as_i64(), Some(energy1), "re-added: the same item");
    assert_eq!(lead.post_json(&format!("/api/v1/cases/{v2}/submit"), "{}").await.status, StatusCode::OK);
    let ok = admin
        .post_json(&format!("/api/v1/cases/{v2}/approve"), r#"{"comment":"meter data shows more idle running"}"#)
        .await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
    assert_eq!(ok.json()["case"]["in_force_from"], today.to_string());

    // The seven months are exactly as they were: per month, per driver, and in total. Months
    // 8 on expect the new figure for Energy: 260,000 x 0.20 / 12 = 4,333.3333.
    let after = ledger(&controller, zone).await;
    let ra = &after["realized"];
    for key in [
        "elapsed_months",
        "savings_expected_to_date",
        "savings_measured_to_date",
        "savings_realization",
        "spending_to_date",
        "xnpv",
        "xirr",
    ] {
        assert_eq!(ra[key], r[key], "{key}: {ra}");
    }
    // Forecast at completion (earned-value EAC transposed, src/finance/realized.rs): 23,800 to
    // date + the 28 months left (8 to 35) at the new 4,333.3333 = 121,333.3324, at the
    // realization 23,800 / 26,833.3331: 131,417.391412325... (hand arithmetic).
    let forecast: f64 = ra["savings_forecast_at_completion"].as_str().unwrap().parse().unwrap();
    assert!((forecast - 131_417.391_412_325).abs() < 1e-6, "{ra}");
    assert_eq!(ra["drivers"][0]["id"].as_i64(), Some(energy2), "shown as the current baseline's driver");
    assert_eq!(ra["drivers"][0]["item_uid"].as_i64(), Some(energy1));
    assert_eq!(months(&after, 0, "expected")[..8], energy_expected[..8]);
    assert_eq!(months(&after, 0, "expected")[8], "4333.3333");
    assert_eq!(months(&after, 0, "measured"), energy_measured);
    // Scrap is retired: its seven months still count, and it expects nothing from month 8.
    assert_eq!(ra["drivers"][1]["label"], "Scrap");
    assert_eq!(ra["drivers"][1]["current"], false);
    assert_eq!(months(&after, 1, "measured")[1..8], ["400"; 7]);
    assert_eq!(months(&after, 1, "expected")[7..9], ["500", "0"]);
    assert_eq!(ra["drivers"][1]["measured_to_date"], "2800");
    // The portfolio's realization and the other zone's calibrated NPV are unchanged.
    let p_after = lead.get("/api/v1/portfolio").await.json();
    assert_eq!(
        portfolio_row(&p_after, "HIST-1")["realization_to_date"],
        portfolio_row(&p_before, "HIST-1")["realization_to_date"]
    );
    let reader = portfolio_row(&p_after, "HIST-2");
    assert_eq!(reader["calibrated_npv"], portfolio_row(&p_before, "HIST-2")["calibrated_npv"]);
    assert_ne!(reader["calibrated_npv"], reader["npv"], "the evidence does apply to the reader");
    // Old entries show under the current item's name.
    let page = controller.get(&format!("/zones/{zone}/ledger")).await;
    assert!(!page.text.contains("item of version"), "{}", page.text);
    assert!(page.text.contains("<td>Scrap (retired)</td>"), "{}", page.text);
    assert!(page.text.contains(&format!("<td>from {today} (current)</td>")), "the ledger page lists the history too");
    assert!(
        page.text.contains("<td>pilot funded</td>")
            && page.text.contains("<td>meter data shows more idle running</td>")
    );

    // Both baselines on the zone page, with approver, how and why.
    let zp = lead.get(&format!("/zones/{zone}")).await.text;
    let v1_row = format!("<td>from {start} to 2026-10</td>\n    <td>by t-admin on ");
    assert!(zp.contains(&v1_row), "{zp}");
    assert!(zp.contains(&format!("<td>from {today} (current)</td>")), "{zp}");
    assert!(zp.contains("pilot funded") && zp.contains("meter data shows more idle running"), "{zp}");
    assert_eq!(zp.matches("four eyes: approved by a second person").count(), 2, "{zp}");
    let bl = &after["baselines"];
    assert_eq!((bl[0]["case_id"].as_i64(), bl[1]["case_id"].as_i64()), (Some(v1), Some(v2)));
    assert_eq!(bl[1]["comment"], "meter data shows more idle running");

    // Positive control: a booking in month 8 is measured against the new baseline: 20,000 kWh
    // = 4,000 EUR against 4,333.3333. Nine months: expected 26,833.3331 + 4,333.3333 =
    // 31,166.6664, measured 27,800.
    book(saving(energy2, month(start, 8), "20000")).await;
    let later = ledger(&controller, zone).await;
    assert_eq!(later["realized"]["elapsed_months"], 9);
    assert_eq!(later["realized"]["savings_expected_to_date"], "31166.6664");
    assert_eq!(later["realized"]["savings_measured_to_date"], "27800");
    assert_eq!(later["realized"]["drivers"][0]["expected_to_date"], "27666.6664");
    let p = lead.get("/api/v1/portfolio").await.json();
    assert!((rate(&portfolio_row(&p, "HIST-1")) - 27800.0 / 31166.6664).abs() < 1e-12);
    // A booking against the retired driver is refused: new bookings use the current baseline.
    let retired = controller
        .post_json(&format!("/api/v1/zones/{zone}/ledger"), &saving(scrap1, month(start, 8), "10").to_string())
        .await;
    assert_eq!(retired.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", retired.text);
    // The kept totals still equal the entries.
    assert!(pilot_ledger::db::totals_problem(&base.pool).await.unwrap().is_none());
}

/// A database from before migration 0011: items get identities by label (the earliest
/// version's item), baselines their months (the approval month), and the realized view then
/// reads entries of both versions; copies carry identities, a re-added label takes its old
/// identity once, and an identity never changes.
#[tokio::test]
async fn migration_0011_gives_old_items_their_identity_and_old_baselines_their_months() {
    use pilot_ledger::db;
    use pilot_ledger::domain::{DriverKind, NewBenefitDriver, realized_view};
    let dir = tempfile::tempdir().unwrap();
    // Before the hash chain, so that raw entries can be written (0007 seals them).
    let pool = crate::helpers::pool_before(dir.path(), "0007").await;
    // v1 (approved 2025-01-10, then superseded): Energy 120,000 kWh a year at 0.10 = 1,000 EUR
    // a month, Scrap 1,200 pcs at 1.00 = 100 EUR a month. v2 (approved 2025-04-05): Energy
    // 240,000 kWh = 2,000 EUR a month, Air 12,000 at 0.10 = 100 EUR a month. Go-live month 0.
    for sql in [
        "INSERT INTO site_settings (id, plant_name, currency, hurdle_rate, default_horizon_months, expert_multiplier,
             updated_at, updated_by) VALUES (1, 'Test works', 'EUR', '0.1', 36, '3', 't', 'u')",
        "INSERT INTO zones (id, code, name, status, created_at, created_by, updated_at, updated_by)
         VALUES (1, 'OLD-1', 'Old zone', 'measuring', 't', 'u', 't', 'u')",
        "INSERT INTO case_versions (id, zone_id, version, label, horizon_months, start_month, go_live_offset,
             ramp_up_months, success_probability, state, created_at, created_by, updated_at, updated_by)
         VALUES (1, 1, 1, 'Base', 24, '2025-01', 0, 0, '1', 'draft', 't', 'lead', 't', 'lead'),
                (2, 1, 2, 'More', 24, '2025-01', 0, 0, '1', 'draft', 't', 'lead', 't', 'lead')",
        "INSERT INTO benefit_drivers (id, case_id, label, kind, unit, qty_low, qty_likely, qty_high, unit_value,
             escalation, created_at, created_by)
         VALUES (1, 1, 'Energy', 'energy', 'kWh', '1', '120000', '200000', '0.1', '0', 't', 'u'),
                (2, 1, 'Scrap', 'scrap', 'pcs', '1', '1200', '2000', '1', '0', 't', 'u'),
                (3, 2, 'Energy', 'energy', 'kWh', '1', '240000', '300000', '0.1', '0', 't', 'u'),
                (4, 2, 'Air', 'other', 'Nm3', '1', '12000', '20000', '0.1', '0', 't', 'u')",
        "UPDATE case_versions SET state = 'superseded', approved_at = '2025-01-10T08:00:00Z', approved_by = 'admin'
         WHERE id = 1",
        "UPDATE case_versions SET state = 'approved', approved_at = '2025-04-05T08:00:00Z', approved_by = 'admin'
         WHERE id = 2",
        // Energy: 900 EUR in each of 2025-01 to 2025-03 against v1, 1,800 EUR in 2025-04 against v2.
        "INSERT INTO ledger_entries (zone_id, case_id, kind, driver_id, period, method, quantity, unit_value, amount,
             evidence, booked_at, booked_by)
         VALUES (1, 1, 'saving', 1, '2025-01', 'direct', '9000', '0.1', '900', 'meter', 't', 'u'),
                (1, 1, 'saving', 1, '2025-02', 'direct', '9000', '0.1', '900', 'meter', 't', 'u'),
                (1, 1, 'saving', 1, '2025-03', 'direct', '9000', '0.1', '900', 'meter', 't', 'u'),
                (1, 2, 'saving', 3, '2025-04', 'direct', '18000', '0.1', '1800', 'meter', 't', 'u')",
    ] {
        sqlx::query(sql).execute(&pool).await.unwrap();
    }
    db::migrate(&pool).await.unwrap();
    let uids: Vec<(i64, i64)> =
        sqlx::query_as("SELECT id, item_uid FROM benefit_drivers ORDER BY id").fetch_all(&pool).await.unwrap();
    assert_eq!(uids, [(1, 1), (2, 2), (3, 1), (4, 4)], "v2's Energy is v1's Energy");
    let froms: Vec<(i64, String)> =
        sqlx::query_as("SELECT id, in_force_from FROM case_versions ORDER BY id").fetch_all(&pool).await.unwrap();
    assert_eq!(froms, [(1, "2025-01".to_string()), (2, "2025-04".to_string())]);

    // Four months elapsed. Expected: Energy 3 x 1,000 (v1) + 2,000 (v2) = 5,000; Scrap 3 x 100
    // = 300 (v1 only); Air 100 (April, v2): 5,400. Measured: 3 x 900 + 1,800 = 4,500.
    let history = db::baseline_history(&pool, 1).await.unwrap();
    let site = db::get_site(&pool).await.unwrap();
    let entries = db::ledger::zone_entries(&pool, 1).await.unwrap();
    let view = realized_view(&db::history_of(&history).unwrap(), &entries, &site).unwrap();
    assert_eq!(view.elapsed, 4);
    assert_eq!(view.savings.expected_to_date.normalize().to_string(), "5400");
    assert_eq!(view.savings.measured_to_date.normalize().to_string(), "4500");
    let lines: Vec<(i64, String, String, String)> = view
        .drivers
        .iter()
        .map(|d| {
            let r = &d.realization;
            (
                d.uid,
                d.label.clone(),
                r.expected_to_date.normalize().to_string(),
                r.measured_to_date.normalize().to_string(),
            )
        })
        .collect();
    assert_eq!(
        lines,
        [
            (1, "Energy".into(), "5000".into(), "4500".into()),
            (4, "Air".into(), "100".into(), "0".into()),
            (2, "Scrap".into(), "300".into(), "0".into()),
        ]
    );

    // A copy of v2 carries its identities; Scrap added again takes its old identity, a second
    // Scrap its own id.
    let mut tx = db::begin_write(&pool).await.unwrap();
    let v3 = db::copy_case(&mut tx, 2, "Copy", "lead", "2026-11-15T10:00:00Z").await.unwrap();
    let scrap = NewBenefitDriver {
        label: "Scrap".into(),
        kind: DriverKind::Scrap,
        unit: "pcs".into(),
        qty_low: 1.into(),
        qty_likely: 2.into(),
        qty_high: 3.into(),
        unit_value: 1.into(),
        escalation: 0.into(),
        expert_hours: None,
        source: String::new(),
    };
    let again = db::add_driver(&mut tx, v3, &scrap, "lead", "2026-11-15T10:00:00Z").await.unwrap();
    let second = db::add_driver(&mut tx, v3, &scrap, "lead", "2026-11-15T10:00:00Z").await.unwrap();
    tx.commit().await.unwrap();
    let v3_uids: Vec<i64> = sqlx::query_scalar("SELECT item_uid FROM benefit_drivers WHERE case_id = ? ORDER BY id")
        .bind(v3)
        .fetch_all(&pool)
        .await
        .unwrap();
    assert_eq!(v3_uids, [1, 4, 2, second]);
    // An identity never changes, even in a draft; other fields of a draft's item may.
    let changed = sqlx::query("UPDATE benefit_drivers SET item_uid = 77 WHERE id = ?").bind(again).execute(&pool).await;
    assert!(changed.unwrap_err().to_string().contains("an item keeps its identity across versions"));
    let edited =
        sqlx::query("UPDATE benefit_drivers SET qty_likely = '5' WHERE id = ?").bind(again).execute(&pool).await;
    assert_eq!(edited.unwrap().rows_affected(), 1);
    // Items of an approved or superseded version stay frozen after the migration.
    let frozen = sqlx::query("UPDATE benefit_drivers SET qty_likely = '5' WHERE id = 1").execute(&pool).await;
    assert!(frozen.unwrap_err().to_string().contains("an approved business case is frozen"));
    assert!(db::totals_problem(&pool).await.unwrap().is_none());
}

/// A month already booked when a new baseline is approved stays with the old one: the new
/// baseline is in force from the month after the latest booked month when that is later than
/// the approval month.
#[tokio::test]
async fn a_month_booked_before_the_approval_keeps_its_baseline() {
    let t = test_app(false).await;
    let (admin, controller) = (t.as_role(Some(Role::Admin)), t.as_role(Some(Role::Controller)));
    let z = crate::ledger::zone_with_baseline(&t, "HIST-3").await;
    // The fixed test clock's month (helpers::TEST_NOW), and its index in the case from 2025-01
    // (36 months, so through 2027-12): 12 months of 2025, then 2026-01 is 12, 2026-11 is 22.
    let today = Month::parse("2026-11").unwrap();
    assert_eq!(Month::of(t.now().date()), today, "the fixed test clock");
    let start = Month::parse("2025-01").unwrap();
    let idx = 22;
    let body = json!({"kind": "saving", "method": "direct", "item": z.energy, "period": today.to_string(),
        "quantity": "15000", "evidence": "meter"});
    let a = controller.post_json(&format!("/api/v1/zones/{}/ledger", z.id), &body.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    let copy = t.post_json(&format!("/api/v1/cases/{}/copy", z.case), r#"{"label":"Copy"}"#).await.json();
    let v2 = copy["case"]["id"].as_i64().unwrap();
    // Energy at 260,000 kWh a year in v2: 260,000 x 0.20 / 12 = 4,333.3333 a month.
    let energy = copy["case"]["drivers"][0]["id"].as_i64().unwrap();
    assert_eq!(t.post_form(&format!("/cases/{v2}/drivers/{energy}/delete"), "").await.status, StatusCode::SEE_OTHER);
    let form = "label=Energy&kind=energy&unit=kWh&qty_low=150000&qty_likely=260000&qty_high=300000&unit_value=0.20";
    assert_eq!(t.post_form(&format!("/cases/{v2}/drivers"), form).await.status, StatusCode::SEE_OTHER);
    assert_eq!(t.post_json(&format!("/api/v1/cases/{v2}/submit"), "{}").await.status, StatusCode::OK);
    let ok = admin.post_json(&format!("/api/v1/cases/{v2}/approve"), "{}").await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
    assert_eq!(ok.json()["case"]["in_force_from"], "2026-12");
    let l = ledger(&t, z.id).await;
    assert_eq!(l["baselines"][0]["in_force_from"], start.to_string());
    assert_eq!(l["baselines"][0]["in_force_until"], today.to_string());
    assert_eq!(l["baselines"][1]["in_force_from"], "2026-12");
    // Today's entry is measured against v1's expectation of 200,000 x 0.20 / 12 = 3,333.3333.
    assert_eq!(l["realized"]["drivers"][0]["expected"][idx], "3333.3333");
    assert_eq!(l["realized"]["drivers"][0]["measured"][idx], "3000");
    assert_eq!(l["realized"]["drivers"][0]["expected"][idx + 1], "4333.3333", "the new baseline from next month");
    assert_eq!(l["realized"]["drivers"][0]["item_uid"].as_i64(), Some(z.energy));
}
