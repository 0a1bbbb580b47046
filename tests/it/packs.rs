//! Decision packs: the stored figures are the case's at the time, a reprint is the same bytes
//! after a booking and an approval, the database refuses changing a pack, a viewer reads but
//! does not make one, and a portfolio pack lists what changed since the last.

use crate::helpers::{TestApp, test_app};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use serde_json::{Value, json};

fn num(v: &Value) -> f64 {
    v.as_str().unwrap_or_else(|| panic!("expected a decimal string, got {v}")).parse().unwrap()
}

/// A zone with `crate::api::simple_case()` starting 2025-01 (so months can be booked on the
/// real-date test clock): flows [-11000, 1000 x 35]. Returns (zone id, case id, driver id).
async fn zone_with_case(t: &TestApp, code: &str) -> (i64, i64, i64) {
    let z = t.post_json("/api/v1/zones", &json!({"code": code, "name": "Pack test zone"}).to_string()).await;
    assert_eq!(z.status, StatusCode::CREATED, "{}", z.text);
    let zone = z.json()["zone"]["id"].as_i64().unwrap();
    let mut case = crate::api::simple_case();
    case["start_month"] = json!("2025-01");
    let c = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await;
    assert_eq!(c.status, StatusCode::CREATED, "{}", c.text);
    let c = c.json();
    (zone, c["case"]["id"].as_i64().unwrap(), c["case"]["drivers"][0]["id"].as_i64().unwrap())
}

async fn make_case_pack(t: &TestApp, case: i64) -> Value {
    let a = t.post_json(&format!("/api/v1/cases/{case}/packs"), "").await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    a.json()["pack"].clone()
}

#[tokio::test]
async fn case_pack_keeps_its_figures_after_an_approval_and_a_booking() {
    let t = test_app(false).await;
    let (zone, case, driver) = zone_with_case(&t, "PACK-1").await;
    let pack = make_case_pack(&t, case).await;
    let id = pack["id"].as_i64().unwrap();
    assert_eq!(pack["kind"], "case");
    assert_eq!(pack["subject"], case.to_string());
    assert_eq!(pack["title"], "PACK-1 v1 Base");
    assert_eq!(pack["made_by"], "t-lead");
    let made_at = t.now().format(&time::format_description::well_known::Rfc3339).unwrap();
    assert_eq!(pack["made_at"], made_at, "made at the app clock's time");
    assert_eq!(pack["database_state"]["ledger_entries"], 0);
    // numpy-financial 1.0.0: npf.npv(1.1 ** (1 / 12) - 1, [-11000] + [1000] * 35) = 19435.143641317074
    // (the fixture of tests/it/api.rs); the pack stores the case's figure of the day.
    let npv = num(&pack["figures"]["npv"]);
    assert!((npv - 19_435.143_641_317_074).abs() < 1e-6, "{npv}");
    let live = t.get(&format!("/api/v1/cases/{case}")).await.json();
    assert_eq!(pack["figures"]["npv"], live["metrics"]["npv"]);
    assert_eq!(pack["figures"]["state"], "draft");

    let first = t.get(&format!("/packs/{id}")).await;
    assert_eq!(first.status, StatusCode::OK);
    let npv_card = format!("<dd class=\"num\" id=\"npv\"><a href=\"/cases/{case}/flows\">19,435.14</a>");
    assert!(first.text.contains(&npv_card), "the page shows the NPV to the cent");
    // Made at the test clock's instant (helpers::TEST_NOW), shown to the minute in the plant's
    // time zone (UTC on this site), the exact value in the title attribute.
    assert_eq!(made_at, "2026-11-15T10:00:00Z");
    assert!(
        first
            .text
            .contains("<time datetime=\"2026-11-15T10:00:00Z\" title=\"2026-11-15T10:00:00Z\">2026-11-15 10:00</time>")
    );
    assert!(first.text.contains("@page { size: A4 portrait; margin: 12mm; }"));
    assert!(first.text.contains("break-inside: avoid"));
    assert!(
        first.text.contains(
            "Percentiles count from the low end: 1 in 10 simulated outcomes falls below the 10th percentile."
        )
    );
    let policy = first.headers.get("content-security-policy").unwrap().to_str().unwrap().to_string();
    assert!(policy.starts_with("default-src 'none'; style-src 'sha256-"), "{policy}");

    // An approval (four eyes: the admin approves what the lead submitted) changes the case...
    assert_eq!(t.post_form(&format!("/cases/{case}/submit"), "").await.status, StatusCode::SEE_OTHER);
    let admin = t.as_role(Some(Role::Admin));
    assert_eq!(admin.post_form(&format!("/cases/{case}/approve"), "comment=go").await.status, StatusCode::SEE_OTHER);
    let after_approval = t.get(&format!("/packs/{id}")).await;
    assert_eq!(after_approval.text, first.text, "the reprint is the stored snapshot, byte for byte");

    // ...and so does a booking; the pack stays as it was.
    let controller = t.as_role(Some(Role::Controller));
    let booked = controller
        .post_json(
            &format!("/api/v1/zones/{zone}/ledger"),
            &json!({"kind": "saving", "method": "direct", "item": driver, "period": "2025-02", "quantity": "90",
                    "evidence": "scrap count"})
            .to_string(),
        )
        .await;
    assert_eq!(booked.status, StatusCode::CREATED, "{}", booked.text);
    let after_booking = t.get(&format!("/packs/{id}")).await;
    assert_eq!(after_booking.text, first.text);
    let stored = t.get(&format!("/api/v1/packs/{id}")).await.json();
    assert_eq!(stored["pack"]["figures"], pack["figures"]);
    assert_eq!(stored["pack"]["sha256"], pack["sha256"]);

    // A new pack of the same version records the new state: one more ledger entry, approved.
    let second = make_case_pack(&t, case).await;
    assert_eq!(second["database_state"]["ledger_entries"], 1);
    assert_eq!(second["figures"]["state"], "approved");
    assert_ne!(second["database_state"]["generation"], pack["database_state"]["generation"]);
    // Its approval record names the signers: the lead submitted, the admin approved.
    let record = t.get(&format!("/packs/{}", second["id"])).await.text;
    assert!(record.contains("<tr><td>submitted</td><td class=\"nowrap\">t-lead</td>"), "{record}");
    assert!(record.contains("<tr><td>approved</td><td class=\"nowrap\">t-admin</td>"), "{record}");
    assert!(record.contains("<td>go; four eyes: approved by a second person</td>"), "{record}");
    assert!(!first.text.contains("<tr><td>approved</td>"), "the first pack was made before the approval");
    let listed = t.get(&format!("/api/v1/packs?kind=case&subject={case}")).await.json();
    let ids: Vec<i64> = listed["packs"].as_array().unwrap().iter().map(|p| p["id"].as_i64().unwrap()).collect();
    assert_eq!(ids, [second["id"].as_i64().unwrap(), id], "newest first");

    // Every pack made is in the audit trail.
    let audited: i64 =
        sqlx::query_scalar("SELECT COUNT(*) FROM audit_log WHERE action = 'pack.make' AND actor = 't-lead'")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!(audited, 2);
}

#[tokio::test]
async fn the_database_refuses_changing_or_removing_a_pack() {
    let t = test_app(false).await;
    let (_, case, _) = zone_with_case(&t, "PACK-2").await;
    // Positive control: a pack is inserted (through the app) and reads back.
    let id = make_case_pack(&t, case).await["id"].as_i64().unwrap();
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM decision_packs").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 1);
    let refused = "decision packs are append-only: make a new pack instead";
    let err = |r: Result<sqlx::sqlite::SqliteQueryResult, sqlx::Error>| match r {
        Err(sqlx::Error::Database(e)) => e.message().to_string(),
        other => panic!("expected a refusal, got {other:?}"),
    };
    let update = sqlx::query("UPDATE decision_packs SET body = 'changed' WHERE id = ?").bind(id).execute(&t.pool).await;
    assert_eq!(err(update), refused);
    let delete = sqlx::query("DELETE FROM decision_packs WHERE id = ?").bind(id).execute(&t.pool).await;
    assert_eq!(err(delete), refused);
    let replace = sqlx::query(
        "INSERT OR REPLACE INTO decision_packs (id, kind, subject, title, made_at, made_by, ledger_tip_id,
             ledger_entries, generation, body, figures, sha256)
         VALUES (?, 'case', '1', 't', 'now', 'x', 0, 0, 0, 'b', '{}', 'h')",
    )
    .bind(id)
    .execute(&t.pool)
    .await;
    assert_eq!(err(replace), refused);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM decision_packs").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 1, "nothing was replaced");

    // `verify` checks each pack's hash: all is well, then a pack changed behind the triggers'
    // back names itself.
    assert!(pilot_ledger::db::verify(&t.pool).await.unwrap().problems.is_empty());
    sqlx::query("DROP TRIGGER decision_packs_no_update").execute(&t.pool).await.unwrap();
    sqlx::query("UPDATE decision_packs SET body = 'changed' WHERE id = ?").bind(id).execute(&t.pool).await.unwrap();
    let problems = pilot_ledger::db::verify(&t.pool).await.unwrap().problems;
    assert_eq!(
        problems.iter().map(ToString::to_string).collect::<Vec<_>>(),
        [format!("decision_packs id {id}: its content does not match its hash: the pack was changed")]
    );
}

#[tokio::test]
async fn a_viewer_reads_packs_but_cannot_make_one() {
    let t = test_app(false).await;
    let (_, case, _) = zone_with_case(&t, "PACK-3").await;
    let viewer = t.as_role(Some(Role::Viewer));
    let refused = viewer.post_json(&format!("/api/v1/cases/{case}/packs"), "").await;
    assert_eq!(refused.status, StatusCode::FORBIDDEN);
    assert_eq!(refused.json()["error"], "your role does not allow this");
    let page = viewer.post_form(&format!("/cases/{case}/packs"), "").await;
    assert_eq!(page.status, StatusCode::FORBIDDEN);
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM decision_packs").fetch_one(&t.pool).await.unwrap();
    assert_eq!(n, 0, "nothing was made");

    // Positive control: the lead makes one by the page's button, and the viewer reads it.
    let made = t.post_form(&format!("/cases/{case}/packs"), "").await;
    assert_eq!(made.status, StatusCode::SEE_OTHER);
    let at = made.location.unwrap();
    assert!(at.starts_with("/packs/"), "{at}");
    let read = viewer.get(&at).await;
    assert_eq!(read.status, StatusCode::OK);
    assert!(read.text.contains("Decision pack: PACK-3 · v1 Base"));
    let list = viewer.get("/packs").await;
    assert_eq!(list.status, StatusCode::OK);
    assert!(list.text.contains("PACK-3 v1 Base"));
    assert!(list.text.contains("t-lead"));
    let bad = viewer.get("/api/v1/packs?kind=zone").await;
    assert_eq!(bad.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(bad.json()["fields"][0]["field"], "kind");
    assert_eq!(bad.json()["fields"][0]["message"], "case or portfolio");
    assert_eq!(viewer.get("/api/v1/packs/999").await.status, StatusCode::NOT_FOUND);
}

#[tokio::test]
async fn a_portfolio_pack_lists_the_changes_since_the_last() {
    let t = test_app(false).await;
    zone_with_case(&t, "PACK-4").await;
    let first = t.post_json("/api/v1/portfolio/packs", r#"{"budget": "50000"}"#).await;
    assert_eq!(first.status, StatusCode::CREATED, "{}", first.text);
    let first = first.json()["pack"].clone();
    assert_eq!(first["kind"], "portfolio");
    let quarter = pilot_ledger::domain::pack::quarter_of(t.now());
    assert_eq!(first["subject"], quarter);
    assert_eq!(first["figures"]["changes"], json!([]));
    assert_eq!(first["figures"]["changes_since_pack"], Value::Null);
    // The one candidate costs 12,000 of one-off outlays: it fits the budget of 50,000.
    assert_eq!(first["figures"]["choice"]["recommended"], json!(["PACK-4"]));
    let page = t.get(&format!("/packs/{}", first["id"])).await.text;
    assert!(page.contains("@page { size: A4 landscape; margin: 10mm; }"));
    assert!(page.contains("This is the first portfolio pack: nothing to compare with."));

    // A zone added since: the next pack names it, and nothing else changed.
    let z = t.post_json("/api/v1/zones", r#"{"code": "PACK-5", "name": "Added later"}"#).await;
    assert_eq!(z.status, StatusCode::CREATED);
    let second = t.post_json("/api/v1/portfolio/packs", r#"{"budget": "50000"}"#).await.json()["pack"].clone();
    assert_eq!(second["figures"]["changes_since_pack"], first["id"]);
    assert_eq!(second["figures"]["changes"], json!(["PACK-5 (Added later) added, status candidate"]));
    let page = t.get(&format!("/packs/{}", second["id"])).await.text;
    assert!(page.contains("<li>PACK-5 (Added later) added, status candidate</li>"));
    let reprint = t.get(&format!("/packs/{}", first["id"])).await.text;
    assert!(!reprint.contains("PACK-5"), "the first pack is as it was made");
    assert!(reprint.contains("This is the first portfolio pack: nothing to compare with."));

    // The page's button posts the page's settings; a bad budget is refused by name.
    let bad = t.post_form("/portfolio/packs", "budget=lots").await;
    assert_eq!(bad.status, StatusCode::UNPROCESSABLE_ENTITY);
    let good = t.post_form("/portfolio/packs", "budget=50000").await;
    assert_eq!(good.status, StatusCode::SEE_OTHER);
}

/// A pack made through the API reads as the plant's pages do: the demo plant's number format
/// and time zone (Europe/Berlin, UTC+1 in November: the tz database's EU rule, from memory),
/// not the API's plain numbers and UTC.
#[tokio::test]
async fn a_pack_made_through_the_api_reads_in_the_plants_format_and_time() {
    let t = test_app(true).await;
    let api = t.get("/api/v1/portfolio").await.json();
    let paint = api["zones"].as_array().unwrap().iter().find(|z| z["code"] == "PAINT-1").unwrap();
    let case = paint["case"]["id"].as_i64().unwrap();
    let pack = make_case_pack(&t, case).await;
    assert_eq!(pack["made_at"], "2026-11-15T10:00:00Z");
    let page = t.get(&format!("/packs/{}", pack["id"])).await;
    assert_eq!(page.status, StatusCode::OK);
    assert!(
        page.text
            .contains("<time datetime=\"2026-11-15T10:00:00Z\" title=\"2026-11-15T10:00:00Z\">2026-11-15 11:00</time>"),
        "{}",
        page.text
    );
    // The case page, read as a page, shows the NPV card the pack froze (same format).
    let live = t.get(&format!("/cases/{case}")).await;
    let card = |text: &str| text.split("id=\"npv\"").nth(1).and_then(|s| s.split("</dd>").next()).map(str::to_string);
    assert_eq!(card(&page.text), card(&live.text));
    assert!(card(&page.text).is_some());
}

#[tokio::test]
async fn every_input_carries_its_source_note_into_the_pack() {
    let t = test_app(false).await;
    let z = t.post_json("/api/v1/zones", &json!({"code": "SRC-1", "name": "Source notes"}).to_string()).await;
    let zone = z.json()["zone"]["id"].as_i64().unwrap();
    let mut case = crate::api::simple_case();
    case["costs"][0]["source"] = json!("  supplier quote Q-118 of 2026-10 ");
    case["costs"].as_array_mut().unwrap().push(json!({"label": "Gateway", "category": "hardware",
        "kind": "one_off", "amount": "800", "month_offset": 0}));
    case["drivers"][0]["source"] = json!("scrap log 2026-01 to 2026-06");

    // Refused: a note one character too long; nothing is written.
    let before = t.counts().await;
    let mut long = case.clone();
    long["costs"][1]["source"] = json!("n".repeat(301));
    let a = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &long.to_string()).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(a.json()["fields"], json!([{"field": "costs[1].source", "message": "at most 300 characters"}]));
    assert_eq!(t.counts().await, before);
    // Positive control: 300 characters are taken.
    long["costs"][1]["source"] = json!("n".repeat(300));
    let a = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &long.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);

    let c = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await;
    assert_eq!(c.status, StatusCode::CREATED, "{}", c.text);
    let id = c.json()["case"]["id"].as_i64().unwrap();
    let read = t.get(&format!("/api/v1/cases/{id}")).await.json();
    let costs = &read["case"]["costs"];
    assert_eq!((&costs[0]["source"], &costs[1]["source"]), (&json!("supplier quote Q-118 of 2026-10"), &json!("")));
    assert_eq!(read["case"]["drivers"][0]["source"], "scrap log 2026-01 to 2026-06");
    // A copy keeps the notes.
    let copy = t.post_json(&format!("/api/v1/cases/{id}/copy"), r#"{"label":"Lean"}"#).await;
    assert_eq!(copy.status, StatusCode::CREATED, "{}", copy.text);
    assert_eq!(copy.json()["case"]["costs"][0]["source"], "supplier quote Q-118 of 2026-10");

    let page = t.get(&format!("/cases/{id}")).await;
    assert!(page.text.contains("<br><small class=\"meta\">Source: supplier quote Q-118 of 2026-10</small>"));
    let pack = make_case_pack(&t, id).await;
    let text = t.get(&format!("/packs/{}", pack["id"])).await.text;
    let entered = "case v2 by t-lead; last edit 2026-11-15 10:00 by t-lead";
    for row in [
        format!(
            "<td>Cost: Sensors (hardware, capex)</td><td>12,000.00 in month 0</td><td>supplier quote Q-118 of 2026-10; {entered}</td>"
        ),
        format!("<td>Cost: Gateway (hardware, opex)</td><td>800.00 in month 0</td><td>no source note; {entered}</td>"),
    ] {
        assert!(text.contains(&row), "missing {row}");
    }
    assert!(text.contains(&format!("escalating 0 % a year</td><td>scrap log 2026-01 to 2026-06; {entered}</td>")));
}
