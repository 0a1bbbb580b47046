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
        ("budgets=1&time_limit=61", "time_limit", "\"61\" is outside 1 to 60: enter a whole number from 1 to 60"),
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
                "carry_over": "on", "one_per_area": "false", "basis": "calibrated_npv", "time_limit": "60"}}"#,
        )
        .await;
    assert_eq!(ok.status, StatusCode::CREATED, "{}", ok.text);
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
        (json!("Three-year roll-out"), json!(1), json!("75000;75000;75000"), json!("2026-12"))
    );
}
