//! The roadmap's API: plan inputs refused by field, named plan versions (saved, read back,
//! numbered, append-only, for the roles that change cases), and an answer on a small fixture
//! checked by hand.

use crate::helpers::{TestApp, test_app};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use serde_json::{Value, json};

/// The 422 body naming one field.
fn one_field(field: &str, message: &str) -> Value {
    json!({"error": format!("some fields are not valid: {field}: {message}"), "fields": [{"field": field, "message": message}]})
}

#[tokio::test]
async fn each_bad_input_is_a_422_naming_its_field() {
    let t = test_app(false).await;
    let cases = [
        ("start=2026-13&budgets=1", "start", "a month as YYYY-MM, e.g. 2026-03"),
        ("years=11&budgets=1", "years", "\"11\" is outside 1 to 10: enter a whole number from 1 to 10"),
        (
            "years=2",
            "budgets",
            "required: the capital budget of each plan year separated by ';', or one for every year, such as 250000.00",
        ),
        (
            "years=2&budgets=1;2;3",
            "budgets",
            "3 amounts for a plan of 2 years: enter one for every year, or exactly 2 separated by ';'",
        ),
        ("years=2&budgets=5;-1", "budgets", "year 2: an amount from 0 to 1000000000000"),
        ("budgets=1&capacity=0", "capacity", "\"0\" is outside 1 to 20: enter a whole number from 1 to 20"),
        ("budgets=1&carry_over=yes", "carry_over", "\"yes\" is not true or false"),
        ("budgets=1&one_per_area=2", "one_per_area", "\"2\" is not true or false"),
        ("budgets=1&basis=irr", "basis", "one of npv, chance_weighted_npv, calibrated_npv"),
        ("budgets=1&time_limit=26", "time_limit", "\"26\" is outside 1 to 25: enter a whole number from 1 to 25"),
        ("plan=x", "plan", "the id of a stored plan version, such as 1"),
        ("plan=1&budgets=5", "plan", "give either a stored plan version or the plan inputs, not both"),
        (
            "budget=5",
            "budget",
            "unknown query parameter; expected one of: start, years, budgets, capacity, carry_over, one_per_area, basis, time_limit, plan",
        ),
    ];
    for (query, field, message) in cases {
        let a = t.get(&format!("/api/v1/roadmap?{query}")).await;
        assert_eq!((a.status, a.json()), (StatusCode::UNPROCESSABLE_ENTITY, one_field(field, message)), "{query}");
    }
    // A stored version that does not exist is a 404.
    let missing = t.get("/api/v1/roadmap?plan=99").await;
    assert_eq!(
        (missing.status, missing.json()["error"].clone()),
        (StatusCode::NOT_FOUND, json!("plan version not found"))
    );
    // Positive control: the same inputs, valid, are saved as a plan (the answer itself needs
    // the solver: see the fixture test below).
    let ok = t
        .post_json(
            "/api/v1/roadmap/plans",
            r#"{"name": "Control", "inputs": {"start": "2027-01", "years": "2", "budgets": "5;0", "capacity": "20",
                "carry_over": "on", "one_per_area": "false", "basis": "calibrated_npv", "time_limit": "25"}}"#,
        )
        .await;
    assert_eq!(ok.status, StatusCode::CREATED, "{}", ok.text);
    // A typo in the body is not ignored (the API's reader refuses fields it does not know, by
    // name): nothing is saved.
    let typo = t.post_json("/api/v1/roadmap/plans", r#"{"name": "Typo", "input": {"budgets": "5"}}"#).await;
    assert_eq!(
        (typo.status, typo.json()["fields"].clone()),
        (
            StatusCode::UNPROCESSABLE_ENTITY,
            json!([{"field": "input", "message": "unknown field; expected one of: inputs, name"}])
        )
    );
    let names: Vec<Value> = t.get("/api/v1/roadmap/plans").await.json()["plans"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].clone())
        .collect();
    assert_eq!(names, vec![json!("Control")]);
}

async fn save(t: &TestApp, name: &str, budgets: &str) -> crate::helpers::Answer {
    let body = json!({"name": name, "inputs": {"start": "2027-01", "years": "2", "budgets": budgets}});
    t.post_json("/api/v1/roadmap/plans", &body.to_string()).await
}

#[tokio::test]
async fn a_plan_version_is_saved_and_read_back_with_its_author_and_date() {
    let t = test_app(false).await;
    let first = save(&t, "  Two-year plan ", "100000").await;
    assert_eq!(first.status, StatusCode::CREATED, "{}", first.text);
    let id = first.json()["plan"]["id"].as_i64().unwrap();
    assert_eq!(first.location.as_deref(), Some(format!("/api/v1/roadmap/plans/{id}").as_str()));
    // The name is trimmed; one budget for both years is stored once per year; the author is the
    // lead who saved it, the date the fixed clock's.
    let expected = json!({"plan": {
        "id": id, "name": "Two-year plan", "version": 1,
        "inputs": {"start": "2027-01", "years": "2", "budgets": "100000;100000", "capacity": "", "carry_over": "",
                   "one_per_area": "", "basis": "", "time_limit": ""},
        "created_at": "2026-11-15T10:00:00Z", "created_by": "t-lead"}});
    assert_eq!(first.json(), expected);
    let read = t.as_role(Some(Role::Viewer)).get(&format!("/api/v1/roadmap/plans/{id}")).await;
    assert_eq!((read.status, read.json()), (StatusCode::OK, expected));

    // The next save under the same name is version 2; another name starts at 1.
    let second = save(&t, "Two-year plan", "90000;110000.5").await.json();
    assert_eq!(
        (second["plan"]["version"].clone(), second["plan"]["inputs"]["budgets"].clone()),
        (json!(2), json!("90000;110000.5"))
    );
    let other = save(&t, "Other", "1").await.json();
    assert_eq!(other["plan"]["version"], 1);
    let list = t.get("/api/v1/roadmap/plans").await.json();
    let rows: Vec<(String, i64)> = list["plans"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| (p["name"].as_str().unwrap().to_string(), p["version"].as_i64().unwrap()))
        .collect();
    assert_eq!(rows, [("Other".to_string(), 1), ("Two-year plan".to_string(), 2), ("Two-year plan".to_string(), 1)]);

    // Each save is in the audit trail as a sentence.
    let audited: Vec<(String, String, String)> =
        sqlx::query_as("SELECT actor, subject, detail FROM audit_log WHERE action = 'roadmap.save' ORDER BY id")
            .fetch_all(&t.pool)
            .await
            .unwrap();
    assert_eq!(audited[0], ("t-lead".to_string(), format!("plan {id}"), "v1 of Two-year plan".to_string()));
    assert_eq!(audited.len(), 3);
    let trail = t.as_role(Some(Role::Admin)).get("/admin/audit").await.text;
    assert!(trail.contains(&format!("t-lead saved plan version v2 of Two-year plan (plan {})", id + 1)), "{trail}");

    // A bad name or bad inputs are refused by field and write nothing.
    let unnamed = save(&t, "   ", "1").await;
    assert_eq!(
        (unnamed.status, unnamed.json()),
        (
            StatusCode::UNPROCESSABLE_ENTITY,
            one_field("name", "required: a name for the plan, such as Three-year roll-out")
        )
    );
    let long = save(&t, &"x".repeat(81), "1").await;
    assert_eq!(long.json(), one_field("name", "at most 80 characters (this one has 81)"));
    let unfit = save(&t, "Two-year plan", "1;2;3").await;
    assert_eq!(
        unfit.json(),
        one_field(
            "budgets",
            "3 amounts for a plan of 2 years: enter one for every year, or exactly 2 separated by ';'"
        )
    );
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM roadmap_plans").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 3);
    // Positive control beside them: 80 characters are accepted.
    assert_eq!(save(&t, &"x".repeat(80), "1").await.status, StatusCode::CREATED);
}

#[tokio::test]
async fn the_database_refuses_changing_or_removing_a_plan_version() {
    let t = test_app(false).await;
    // Positive control: a version is inserted through the app and reads back.
    let id = save(&t, "Kept", "1").await.json()["plan"]["id"].as_i64().unwrap();
    assert_eq!(t.get(&format!("/api/v1/roadmap/plans/{id}")).await.status, StatusCode::OK);
    let refused = "plan versions are append-only: save a new version instead";
    let err = |r: Result<sqlx::sqlite::SqliteQueryResult, sqlx::Error>| match r {
        Err(sqlx::Error::Database(e)) => e.message().to_string(),
        other => panic!("expected a refusal, got {other:?}"),
    };
    let update = sqlx::query("UPDATE roadmap_plans SET name = 'changed' WHERE id = ?").bind(id).execute(&t.pool).await;
    assert_eq!(err(update), refused);
    let delete = sqlx::query("DELETE FROM roadmap_plans WHERE id = ?").bind(id).execute(&t.pool).await;
    assert_eq!(err(delete), refused);
    let replace = sqlx::query(
        "INSERT OR REPLACE INTO roadmap_plans (id, name, version, inputs, created_at, created_by)
         VALUES (?, 'Kept', 1, '{}', 'now', 'x')",
    )
    .bind(id)
    .execute(&t.pool)
    .await;
    assert_eq!(err(replace), refused);
    let read: (String, String) = sqlx::query_as("SELECT name, created_by FROM roadmap_plans WHERE id = ?")
        .bind(id)
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(read, ("Kept".to_string(), "t-lead".to_string()), "nothing was changed");
}

#[tokio::test]
async fn a_viewer_may_read_plans_but_not_save_one() {
    let t = test_app(false).await;
    let viewer = t.as_role(Some(Role::Viewer));
    let refused = save(&viewer, "Viewer's plan", "1").await;
    assert_eq!(
        (refused.status, refused.json()["error"].clone()),
        (StatusCode::FORBIDDEN, json!("your role does not allow this"))
    );
    let controller = save(&t.as_role(Some(Role::Controller)), "Controller's plan", "1").await;
    assert_eq!(controller.status, StatusCode::FORBIDDEN);
    // Beside it, the lead saves, and the viewer reads the list.
    assert_eq!(save(&t, "Lead's plan", "1").await.status, StatusCode::CREATED);
    let list = viewer.get("/api/v1/roadmap/plans").await;
    assert_eq!(list.status, StatusCode::OK);
    assert_eq!(list.json()["plans"].as_array().unwrap().len(), 1);
}

#[tokio::test]
async fn the_demo_has_a_named_plan() {
    let t = test_app(true).await;
    let list = t.get("/api/v1/roadmap/plans").await.json();
    let plan = &list["plans"][0];
    assert_eq!(
        (
            plan["name"].clone(),
            plan["version"].clone(),
            plan["inputs"]["budgets"].clone(),
            plan["inputs"]["start"].clone()
        ),
        (json!("Three-year roll-out"), json!(1), json!("80000;80000;80000"), json!("2026-12"))
    );
    assert_eq!((plan["inputs"]["capacity"].clone(), plan["inputs"]["carry_over"].clone()), (json!("1"), json!("true")));
    let a = t.get("/api/v1/roadmap?plan=1").await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    let a = a.json();
    let zone = |plan: &str, code: &str| {
        let zones = a[plan]["zones"].as_array().unwrap();
        zones.iter().find(|z| z["code"] == code).unwrap_or_else(|| panic!("{code} in {plan}")).clone()
    };
    let row = |z: &Value| (z["start"].clone(), z["what_would_start_it_a_quarter_earlier"].clone());
    // The candidates' one-off outlays: CNC-5 55,500, EOL-1 31,000, PAINT-1 66,000, each inside
    // the plan year it starts in. EOL-1 needs ASSY-3, live from 2027-01.
    // The budget binds: CNC-5 first (2027-03, after WELD-4's and ASSY-3's introductions hold
    // the one place) and EOL-1 in plan year 1 too would spend 55,500 + 31,000 = 86,500 of 80,000,
    // 6,500 over, so EOL-1 waits for plan year 2 (from 2027-12).
    assert_eq!(
        row(&zone("optimal", "EOL-1")),
        (json!("2027-12"), json!("6,500.00 more budget in plan year 1 (from 2026-12)"))
    );
    // The capacity binds: PAINT-1 waits for EOL-1's introduction (2027-12 to 2028-04) to end.
    assert_eq!(
        row(&zone("optimal", "PAINT-1")),
        (json!("2028-06"), json!("one more introduction at a time in 2028-03"))
    );
    assert_eq!(zone("optimal", "CNC-5")["start"], "2027-03");
    // Carried forward: plan year 2 may spend 80,000 + 80,000 - 55,500 = 104,500, and spends
    // 31,000 + 66,000 = 97,000; plan year 3 gets the 7,500 left over and its own 80,000.
    let used: Vec<(Value, Value)> = a["optimal"]["capital_use"]
        .as_array()
        .unwrap()
        .iter()
        .map(|y| (y["used"].clone(), y["available"].clone()))
        .collect();
    assert_eq!(
        used,
        vec![(json!("55500"), json!("80000")), (json!("97000"), json!("104500")), (json!("0"), json!("87500"))]
    );
    // The simple plan takes EOL-1 first (profitability index 16,999.15 / 31,000 = 0.55 against
    // CNC-5's 20,038.92 / 55,500 = 0.36), so CNC-5 no longer fits plan year 1 and starts later:
    // the optimal plan is worth more.
    assert_eq!(
        (zone("simple", "EOL-1")["start"].clone(), zone("simple", "CNC-5")["start"].clone()),
        (json!("2027-03"), json!("2027-12"))
    );
    assert!(money(&a["gain_over_simple"]) > 0.0, "{}", a["gain_over_simple"]);
}

/// Two candidates with one-off outlays of 12,000 in their first month, live a month later:
/// A saves 1,000 a month (simple_case), B 1,250 a month, for 36 months.
async fn two_candidates(t: &TestApp) {
    for (code, qty) in [("RM-A", 1200), ("RM-B", 1500)] {
        let zone = t.post_json("/api/v1/zones", &json!({"code": code, "name": code}).to_string()).await;
        assert_eq!(zone.status, StatusCode::CREATED, "{}", zone.text);
        let id = zone.json()["zone"]["id"].as_i64().unwrap();
        let mut case = crate::api::simple_case();
        case["drivers"][0]["qty_likely"] = json!(qty);
        let made = t.post_json(&format!("/api/v1/zones/{id}/cases"), &case.to_string()).await;
        assert_eq!(made.status, StatusCode::CREATED, "{}", made.text);
    }
}

fn money(v: &Value) -> f64 {
    v.as_str().unwrap_or_else(|| panic!("money is a string: {v}")).parse().unwrap()
}

#[tokio::test]
async fn a_small_plan_checked_by_hand() {
    let t = test_app(false).await;
    two_candidates(&t).await;
    // numpy-financial 1.0.0: npf.npv(1.1 ** (1 / 12) - 1, [-11000] + [1000] * 35) = 19435.143641317074
    // (tests/it/api.rs), so the 36 monthly benefits are worth 31.435143641317074 times a month's
    // at the hurdle rate of 10 %; B's 1,250 a month: -12,000 + 1,250 x 31.4351... = 27,293.93.
    let factor = (19_435.143_641_317_074 + 12_000.0) / 1_000.0;
    let (v_a, v_b) = (19_435.14, ((-12_000.0 + 1_250.0 * factor) * 100.0_f64).round() / 100.0);
    assert_eq!(v_b, 27_293.93);
    let a = t.get("/api/v1/roadmap?start=2027-01&years=2&budgets=12000").await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    let a = a.json();
    // 12,000 a plan year fits one zone a year. B first, A a year later is worth
    // 27,293.93 + 19,435.14 / 1.1 = 44,962.24; the other way 19,435.14 + 27,293.93 / 1.1 =
    // 44,247.80. A's value at plan start after 12 months: 19,435.14 / 1.1 = 17,668.31.
    let opt = &a["optimal"];
    let zones = opt["zones"].as_array().unwrap();
    let by_code = |code: &str| zones.iter().find(|z| z["code"] == code).unwrap().clone();
    let (za, zb) = (by_code("RM-A"), by_code("RM-B"));
    assert_eq!(
        (zb["start"].clone(), zb["live"].clone(), zb["quarter"].clone(), zb["one_off_by_plan_year"].clone()),
        (json!("2027-01"), json!("2027-02"), json!(1), json!(["12000", "0"]))
    );
    assert_eq!(
        (za["start"].clone(), za["live"].clone(), za["quarter"].clone(), za["one_off_by_plan_year"].clone()),
        (json!("2028-01"), json!("2028-02"), json!(5), json!(["0", "12000"]))
    );
    assert_eq!((money(&zb["value_at_plan_start"]), money(&za["value_at_plan_start"])), (v_b, 17_668.31));
    assert_eq!(((v_a / 1.1_f64) * 100.0).round() / 100.0, 17_668.31);
    assert_eq!(money(&opt["value"]), 44_962.24);
    assert_eq!((opt["proven"].clone(), money(&opt["gap"])), (json!(true), 0.0));
    // A quarter's delay: V (1 - 1.1^(-1/4)), each value to the cent (so within a cent).
    let delay = |v: f64, q: f64| v * 1.1_f64.powf(-q / 4.0) * (1.0 - 1.1_f64.powf(-0.25));
    assert!((money(&zb["cost_of_a_quarters_delay"]) - delay(v_b, 0.0)).abs() <= 0.011, "{zb}");
    assert!((money(&za["cost_of_a_quarters_delay"]) - delay(v_a, 4.0)).abs() <= 0.011, "{za}");
    // B starts in quarter 1: nothing earlier. A a quarter earlier would be in plan year 1, whose
    // 12,000 B spends.
    assert_eq!(zb["what_would_start_it_a_quarter_earlier"], Value::Null);
    let earlier = za["what_would_start_it_a_quarter_earlier"].as_str().unwrap();
    assert!(earlier.ends_with(" more budget in plan year 1 (from 2027-01)") && earlier.contains("12"), "{earlier}");
    assert_eq!(
        (za["reason"].clone(), za["committed"].clone(), za["status"].clone()),
        (Value::Null, json!(false), json!("candidate"))
    );
    // Capital use per plan year against the budget, and one introduction in months 0 and 12.
    assert_eq!(
        opt["capital_use"],
        json!([
            {"plan_year": 1, "from": "2027-01", "budget": "12000", "available": "12000", "used": "12000"},
            {"plan_year": 2, "from": "2028-01", "budget": "12000", "available": "12000", "used": "12000"}
        ])
    );
    let intro: Vec<i64> =
        opt["introductions"].as_array().unwrap().iter().map(|m| m["introductions"].as_i64().unwrap()).collect();
    let mut expected = vec![0; 24];
    expected[0] = 1;
    expected[12] = 1;
    assert_eq!(intro, expected);
    assert_eq!(opt["introductions"][12]["month"], "2028-01");
    // The simple plan (B has the higher profitability index) is the same here: no gain.
    assert_eq!((money(&a["simple"]["value"]), money(&a["gain_over_simple"])), (44_962.24, 0.0));
    assert_eq!(a["simple"]["zones"][0]["cost_of_a_quarters_delay"], Value::Null);
    assert_eq!((a["overruns"].clone(), a["left_out"].clone(), a["plan"].clone()), (json!([]), json!([]), Value::Null));
    assert_eq!(
        a["inputs"],
        json!({"start": "2027-01", "years": 2, "budgets": ["12000", "12000"], "capacity": 2, "carry_over": false,
               "one_per_area": false, "basis": "npv", "time_limit": 10})
    );

    // In a one-year plan A finds no quarter within the budget.
    let one = t.get("/api/v1/roadmap?start=2027-01&years=1&budgets=12000").await.json();
    let za = one["optimal"]["zones"].as_array().unwrap().iter().find(|z| z["code"] == "RM-A").unwrap().clone();
    assert_eq!((za["start"].clone(), za["reason"].clone()), (Value::Null, json!("budget")));
    assert_eq!(za["one_off_by_plan_year"], json!(["0"]));

    // A stored version gives the same answer, and names itself.
    let saved = save(&t, "By hand", "12000").await.json();
    let id = saved["plan"]["id"].as_i64().unwrap();
    let stored = t.as_role(Some(Role::Viewer)).get(&format!("/api/v1/roadmap?plan={id}")).await.json();
    assert_eq!(stored["optimal"], a["optimal"]);
    assert_eq!(stored["plan"]["name"], "By hand");
}
