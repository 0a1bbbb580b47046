//! Approval with four eyes, returns with a comment, the one-person setting, the zone lifecycle,
//! settings frozen at approval and the currency lock, through pages and the API.
//! Segregation of duties in capital approval is common practice; the rules and messages here
//! are our own (README, "Approval").

use crate::helpers::{TestApp, test_app};
use crate::ledger::zone_with_baseline;
use axum::http::{Method, StatusCode};
use pilot_ledger::auth::{Permission, Role};
use serde_json::{Value, json};

const SELF_APPROVAL: &str =
    "you submitted or last edited this version: a second person must approve it (segregation of duties)";

/// A zone with one draft (one-off 30,000 in month 0, 200,000 kWh a year at 0.20) made by `t`.
async fn zone_with_draft(t: &TestApp, code: &str) -> (i64, i64) {
    let z = t.post_json("/api/v1/zones", &json!({"code": code, "name": "Approval test zone"}).to_string()).await;
    assert_eq!(z.status, StatusCode::CREATED, "{}", z.text);
    let zone = z.json()["zone"]["id"].as_i64().unwrap();
    let case = json!({
        "label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1, "ramp_up_months": 0,
        "success_probability": "0.8",
        "costs": [{"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "30000", "month_offset": 0, "capex": true}],
        "drivers": [{"label": "Energy", "kind": "energy", "qty_low": "150000", "qty_likely": "200000", "qty_high": "250000", "unit_value": "0.20"}]
    });
    let c = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await;
    assert_eq!(c.status, StatusCode::CREATED, "{}", c.text);
    (zone, c.json()["case"]["id"].as_i64().unwrap())
}

async fn case_json(t: &TestApp, id: i64) -> Value {
    t.get(&format!("/api/v1/cases/{id}")).await.json()
}

fn npv(case: &Value) -> String {
    case["metrics"]["npv"].as_str().unwrap().to_string()
}

async fn audit(t: &TestApp, action: &str) -> Vec<(String, String)> {
    sqlx::query_as("SELECT actor, detail FROM audit_log WHERE action = ? ORDER BY id")
        .bind(action)
        .fetch_all(&t.pool)
        .await
        .unwrap()
}

#[tokio::test]
async fn the_submitter_or_last_editor_cannot_approve_and_a_second_person_can() {
    let t = test_app(false).await;
    let (_, case) = zone_with_draft(&t, "FOUR-1").await;
    let submit = t.post_json(&format!("/api/v1/cases/{case}/submit"), r#"{"comment":"ready for review"}"#).await;
    assert_eq!(submit.status, StatusCode::OK, "{}", submit.text);
    // The submitter: refused by page and API alike, and nothing changes.
    let own = t.post_json(&format!("/api/v1/cases/{case}/approve"), "{}").await;
    assert_eq!(own.status, StatusCode::CONFLICT);
    assert_eq!(own.json(), json!({"error": SELF_APPROVAL, "fields": []}));
    let own_page = t.post_form(&format!("/cases/{case}/approve"), "comment=").await;
    assert_eq!(own_page.status, StatusCode::CONFLICT);
    assert!(own_page.text.contains(SELF_APPROVAL));
    assert_eq!(case_json(&t, case).await["case"]["state"], "submitted");
    assert!(audit(&t, "case.approve").await.is_empty());

    // The last editor is refused too: the admin edits a draft that a second lead submits.
    let admin = t.as_role(Some(Role::Admin));
    let lead2 = t.as_new_user("t-lead-two", Role::Lead).await;
    let (_, other) = zone_with_draft(&t, "FOUR-2").await;
    let edit = admin
        .post_form(
            &format!("/cases/{other}/costs"),
            "label=Cabling&category=hardware&kind=one_off&amount=500&month_offset=0",
        )
        .await;
    assert_eq!(edit.status, StatusCode::SEE_OTHER);
    assert_eq!(lead2.post_json(&format!("/api/v1/cases/{other}/submit"), "{}").await.status, StatusCode::OK);
    let by_editor = admin.post_json(&format!("/api/v1/cases/{other}/approve"), "{}").await;
    assert_eq!((by_editor.status, by_editor.json()["error"].clone()), (StatusCode::CONFLICT, json!(SELF_APPROVAL)));

    // Positive control: a second person approves, and who, when and the comment are kept.
    let ok = admin.post_json(&format!("/api/v1/cases/{case}/approve"), r#"{"comment":"fits the budget"}"#).await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
    let c = &ok.json()["case"];
    assert_eq!(c["state"], "approved");
    assert_eq!(c["approved_by"], "t-admin");
    assert_eq!(c["approval_kind"], "second_person");
    assert_eq!(c["approve_comment"], "fits the budget");
    assert_eq!(c["submitted_by"], "t-lead");
    assert_eq!(c["submit_comment"], "ready for review");
    // Stamped with the clock's time (the fixed test clock, helpers::TEST_NOW).
    assert_eq!(c["approved_at"], "2026-11-15T10:00:00Z");
    assert_eq!(
        audit(&t, "case.approve").await,
        [("t-admin".to_string(), "second_person: fits the budget".to_string())]
    );
    // The third lead may approve the version the admin edited and the second lead submitted.
    let lead3 = t.as_new_user("t-lead-three", Role::Lead).await;
    assert_eq!(lead3.post_json(&format!("/api/v1/cases/{other}/approve"), "{}").await.status, StatusCode::OK);
    // The database refuses a second-person approval stamped with the submitter's name.
    let (_, third) = zone_with_draft(&t, "FOUR-3").await;
    t.post_json(&format!("/api/v1/cases/{third}/submit"), "{}").await;
    let raw = sqlx::query(
        "UPDATE case_versions SET state = 'approved', approved_by = 't-lead', approval_kind = 'second_person' WHERE id = ?",
    )
    .bind(third)
    .execute(&t.pool)
    .await;
    assert!(raw.unwrap_err().to_string().contains("four eyes"));
}

#[tokio::test]
async fn with_the_one_person_setting_self_approval_works_and_every_page_says_so() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let on = admin.patch_json("/api/v1/site", r#"{"one_person_approval": true}"#).await;
    assert_eq!(on.status, StatusCode::OK, "{}", on.text);
    assert_eq!(on.json()["site"]["one_person_approval"], true);
    let (zone, case) = zone_with_draft(&t, "SOLO-1").await;
    assert_eq!(t.post_form(&format!("/cases/{case}/submit"), "comment=").await.status, StatusCode::SEE_OTHER);
    assert_eq!(
        t.post_form(&format!("/cases/{case}/approve"), "comment=small+plant").await.status,
        StatusCode::SEE_OTHER
    );
    let c = case_json(&t, case).await;
    assert_eq!(
        (c["case"]["state"].clone(), c["case"]["approval_kind"].clone()),
        (json!("approved"), json!("one_person"))
    );
    let said = "Self-approved: t-lead approved this version alone on";
    for page in [format!("/cases/{case}"), format!("/zones/{zone}"), format!("/zones/{zone}/ledger")] {
        let a = t.get(&page).await;
        assert_eq!(a.status, StatusCode::OK, "{page}");
        assert!(a.text.contains(said), "{page} does not say it was self-approved");
        // The baseline starts 2025-01, before its approval today: allowed and flagged.
        assert!(a.text.contains("Starts 2025-01, before its approval on"), "{page} has no early-start flag");
    }
    assert_eq!(c["notes"][1]["kind"], "self-approved");
    assert_eq!(audit(&t, "case.approve").await, [("t-lead".to_string(), "one_person: small plant".to_string())]);
}

#[tokio::test]
async fn a_returned_version_keeps_who_when_and_why_and_is_editable_again() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let (_, case) = zone_with_draft(&t, "BACK-1").await;
    t.post_json(&format!("/api/v1/cases/{case}/submit"), "{}").await;
    // Refusal: a return needs a reason, and a typo in the body is not ignored.
    let bare = admin.post_json(&format!("/api/v1/cases/{case}/reject"), r#"{"comment":"  "}"#).await;
    assert_eq!(bare.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        bare.json()["fields"],
        json!([{"field": "comment", "message": "say why the version goes back, e.g. what to change"}])
    );
    let typo = admin.post_json(&format!("/api/v1/cases/{case}/reject"), r#"{"coment":"x"}"#).await;
    assert_eq!(typo.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(typo.json()["error"].as_str().unwrap().contains("unknown field `coment`"), "{}", typo.text);
    // A submitted version cannot be edited.
    let cost = "label=Cabling&category=hardware&kind=one_off&amount=500&month_offset=0";
    assert_eq!(t.post_form(&format!("/cases/{case}/costs"), cost).await.status, StatusCode::CONFLICT);

    let back = admin.post_form(&format!("/cases/{case}/reject"), "comment=add+the+spare+parts").await;
    assert_eq!(back.status, StatusCode::SEE_OTHER);
    let c = case_json(&t, case).await;
    assert_eq!(c["case"]["state"], "draft");
    assert_eq!(c["case"]["returned_by"], "t-admin");
    assert_eq!(c["case"]["return_comment"], "add the spare parts");
    let at = c["case"]["returned_at"].as_str().unwrap();
    assert!(time::OffsetDateTime::parse(at, &time::format_description::well_known::Rfc3339).is_ok(), "{at}");
    assert_eq!(audit(&t, "case.reject").await, [("t-admin".to_string(), "add the spare parts".to_string())]);
    let page = t.get(&format!("/cases/{case}")).await.text;
    assert!(page.contains("Returned to draft by t-admin on"), "the page does not show the return");
    assert!(page.contains(": add the spare parts"));
    // Editable again; the returner did not become its editor, so the admin can approve later.
    assert_eq!(t.post_form(&format!("/cases/{case}/costs"), cost).await.status, StatusCode::SEE_OTHER);
    t.post_json(&format!("/api/v1/cases/{case}/submit"), "{}").await;
    assert_eq!(admin.post_json(&format!("/api/v1/cases/{case}/approve"), "{}").await.status, StatusCode::OK);
    // Only a submitted version can be returned.
    let again = admin.post_json(&format!("/api/v1/cases/{case}/reject"), r#"{"comment":"late"}"#).await;
    assert_eq!(again.status, StatusCode::CONFLICT);
    assert_eq!(again.json()["error"], "version 1 is approved: only a submitted version can be returned");
}

#[tokio::test]
async fn the_zone_lifecycle_only_moves_forward() {
    let t = test_app(false).await;
    let (zone, _) = zone_with_draft(&t, "LIFE-1").await;
    let status = |s: &str| json!({ "status": s }).to_string();
    let url = format!("/api/v1/zones/{zone}/status");
    let skip = t.post_json(&url, &status("measuring")).await;
    assert_eq!(skip.status, StatusCode::CONFLICT);
    assert_eq!(
        skip.json()["error"],
        "a zone cannot move from candidate to measuring; allowed next states: approved, shelved"
    );
    // A new zone starts as a candidate: no skipping the lifecycle at creation (positive
    // control: the candidate above).
    let born = t.post_json("/api/v1/zones", r#"{"code":"LIFE-0","name":"Born measuring","status":"measuring"}"#).await;
    assert_eq!(born.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        born.json()["fields"],
        json!([{"field": "status", "message": "a new zone starts as candidate or shelved, not measuring: later states follow its lifecycle"}])
    );
    let unapproved = t.post_json(&url, &status("approved")).await;
    assert_eq!(unapproved.status, StatusCode::CONFLICT);
    assert_eq!(
        unapproved.json()["error"],
        "a zone becomes approved with its business case: approve a case version first; allowed next states: approved, shelved"
    );
    // Positive controls: shelve and bring back a zone with nothing booked.
    let shelved = t.post_json(&url, &status("shelved")).await;
    assert_eq!((shelved.status, shelved.json()["zone"]["status"].clone()), (StatusCode::OK, json!("shelved")));
    assert_eq!(t.post_json(&url, &status("candidate")).await.status, StatusCode::OK);
    assert_eq!(audit(&t, "zone.status").await.len(), 2);
    assert_eq!(audit(&t, "zone.status").await[0].1, "candidate -> shelved");

    // A zone with booked money never returns to candidate: not by the API, the form or SQL.
    let z = zone_with_baseline(&t, "LIFE-2").await;
    let url = format!("/api/v1/zones/{}/status", z.id);
    assert_eq!(t.post_json(&url, &status("piloting")).await.status, StatusCode::OK);
    let booking =
        json!({"kind": "spending", "item": z.sensors, "period": "2025-01", "amount": "1000", "evidence": "invoice 17"});
    let booked = t
        .as_role(Some(Role::Controller))
        .post_json(&format!("/api/v1/zones/{}/ledger", z.id), &booking.to_string())
        .await;
    assert_eq!(booked.status, StatusCode::CREATED, "{}", booked.text);
    assert_eq!(t.post_json(&url, &status("shelved")).await.status, StatusCode::OK);
    let back = t.post_json(&url, &status("candidate")).await;
    assert_eq!(back.status, StatusCode::CONFLICT);
    assert_eq!(
        back.json()["error"],
        "a zone cannot move from shelved to candidate (money is booked on this zone, so it never returns to candidate); allowed next states: none"
    );
    let form = t.post_form(&format!("/zones/{}", z.id), "code=LIFE-2&name=Ledger+test+zone&status=candidate").await;
    assert_eq!(form.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(form.text.contains("money is booked on this zone"));
    let raw = sqlx::query("UPDATE zones SET status = 'candidate' WHERE id = ?").bind(z.id).execute(&t.pool).await;
    assert!(raw.unwrap_err().to_string().contains("never returns to candidate"));
    let api = t.get(&format!("/api/v1/zones/{}", z.id)).await.json();
    assert_eq!(api["zone"]["status"], "shelved");
}

#[tokio::test]
async fn a_new_hurdle_rate_leaves_approved_figures_as_they_were_and_moves_drafts() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let z = zone_with_baseline(&t, "FRZ-9").await;
    // A copy of the baseline is a draft with the same items; another zone has only a draft.
    let copy = t.post_json(&format!("/api/v1/cases/{}/copy", z.case), r#"{"label":"Revised"}"#).await;
    let draft = copy.json()["case"]["id"].as_i64().unwrap();
    zone_with_draft(&t, "DRAFT-9").await;
    let (approved_before, draft_before) = (case_json(&t, z.case).await, case_json(&t, draft).await);
    // The same items at the same 10 %: the same NPV before the change.
    assert_eq!(npv(&approved_before), npv(&draft_before));
    let portfolio_npv = |p: &Value, code: &str| {
        p["zones"].as_array().unwrap().iter().find(|r| r["code"] == code).unwrap()["npv"].clone()
    };
    let p_before = t.get("/api/v1/portfolio").await.json();
    let ledger_before = t.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json();

    let changed = admin.patch_json("/api/v1/site", r#"{"hurdle_rate": "0.2", "tax_rate": "0.25"}"#).await;
    assert_eq!(changed.status, StatusCode::OK, "{}", changed.text);
    let (approved, drafted) = (case_json(&t, z.case).await, case_json(&t, draft).await);
    assert_eq!(npv(&approved), npv(&approved_before), "the approved NPV moved with the settings");
    assert_eq!((approved["settings"].clone(), approved["hurdle_rate"].clone()), (json!("at_approval"), json!("0.1")));
    // Nor does its after-tax view appear: the site had no tax rate at approval.
    assert_eq!(approved["after_tax_metrics"], Value::Null);
    assert_ne!(npv(&drafted), npv(&draft_before), "the draft should use today's rate");
    assert_eq!((drafted["settings"].clone(), drafted["hurdle_rate"].clone()), (json!("today"), json!("0.2")));
    assert!(drafted["after_tax_metrics"].is_object());
    // The cached portfolio follows: the baseline's NPV stays, marked as frozen; the draft's moves.
    let p = t.get("/api/v1/portfolio").await.json();
    assert_eq!(portfolio_npv(&p, "FRZ-9"), portfolio_npv(&p_before, "FRZ-9"));
    assert_ne!(portfolio_npv(&p, "DRAFT-9"), portfolio_npv(&p_before, "DRAFT-9"));
    let row = |code: &str| p["zones"].as_array().unwrap().iter().find(|r| r["code"] == code).unwrap().clone();
    assert_eq!(
        (row("FRZ-9")["hurdle_rate"].clone(), row("FRZ-9")["hurdle_rate_basis"].clone()),
        (json!("0.1"), json!("at_approval"))
    );
    assert_eq!(
        (row("DRAFT-9")["hurdle_rate"].clone(), row("DRAFT-9")["hurdle_rate_basis"].clone()),
        (json!("0.2"), json!("today"))
    );
    let ledger = t.get(&format!("/api/v1/zones/{}/ledger", z.id)).await.json();
    assert_eq!(ledger["realized"], ledger_before["realized"]);
    assert_eq!(ledger["hurdle_rate"], "0.1");
    // The pages say which settings they use.
    let page = t.get(&format!("/cases/{}", z.case)).await.text;
    assert!(
        page.contains(
            "Figures at approval: hurdle rate 10 % (today 20 %), currency EUR, tax rate none (today 25 %), depreciation not set."
        ),
        "the case page does not show the settings at approval"
    );
    assert!(t.get(&format!("/zones/{}", z.id)).await.text.contains("10 % at approval"));
    assert!(t.get("/portfolio").await.text.contains("at approval: 10 %"));
    assert!(t.get(&format!("/zones/{}/ledger", z.id)).await.text.contains("hurdle rate 10 % (today 20 %)"));
    // Back to 10 %: the draft returns to its first NPV (it follows today's settings).
    admin.patch_json("/api/v1/site", r#"{"hurdle_rate": "0.1", "tax_rate": null}"#).await;
    assert_eq!(npv(&case_json(&t, draft).await), npv(&draft_before));
}

#[tokio::test]
async fn the_currency_cannot_change_once_cases_hold_money() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    // Positive control: an empty site may change its currency.
    let empty = admin.patch_json("/api/v1/site", r#"{"currency": "usd"}"#).await;
    assert_eq!((empty.status, empty.json()["site"]["currency"].clone()), (StatusCode::OK, json!("USD")));
    zone_with_draft(&t, "CUR-1").await;
    let refused = admin.patch_json("/api/v1/site", r#"{"currency": "EUR"}"#).await;
    assert_eq!(refused.status, StatusCode::UNPROCESSABLE_ENTITY);
    let message = "cannot change from USD: business cases already hold amounts in USD, and a new code would relabel \
                   them without converting them";
    assert_eq!(refused.json()["fields"], json!([{"field": "currency", "message": message}]));
    let form = "plant_name=Test+works&currency=EUR&hurdle_rate=10&tax_rate=&depreciation_years=&default_horizon_months=60&expert_multiplier=3";
    let page = admin.post_form("/admin/settings", form).await;
    assert_eq!(page.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(page.text.contains(message));
    // Unchanged, and other settings still change.
    let ok = admin.patch_json("/api/v1/site", r#"{"plant_name": "Test works 2"}"#).await;
    assert_eq!((ok.status, ok.json()["site"]["currency"].clone()), (StatusCode::OK, json!("USD")));
}

#[tokio::test]
async fn every_new_endpoint_answers_and_refuses() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let (zone, case) = zone_with_draft(&t, "API-1").await;
    // Copy: 201 with the new draft, 422 without a label or with an unknown field.
    let copy = t.post_json(&format!("/api/v1/cases/{case}/copy"), r#"{"label":"Lean"}"#).await;
    assert_eq!(copy.status, StatusCode::CREATED, "{}", copy.text);
    let copied = copy.json();
    assert_eq!((copied["case"]["version"].clone(), copied["case"]["label"].clone()), (json!(2), json!("Lean")));
    assert_eq!(copy.location.as_deref(), Some(format!("/api/v1/cases/{}", copied["case"]["id"]).as_str()));
    let no_label = t.post_json(&format!("/api/v1/cases/{case}/copy"), "{}").await;
    assert_eq!(
        (no_label.status, no_label.json()["fields"][0]["field"].clone()),
        (StatusCode::UNPROCESSABLE_ENTITY, json!("label"))
    );
    assert_eq!(t.post_json("/api/v1/cases/99999/copy", r#"{"label":"x"}"#).await.status, StatusCode::NOT_FOUND);
    // Submit: 200, then 409 (no longer a draft).
    assert_eq!(t.post_json(&format!("/api/v1/cases/{case}/submit"), "{}").await.status, StatusCode::OK);
    let twice = t.post_json(&format!("/api/v1/cases/{case}/submit"), "{}").await;
    assert_eq!(twice.status, StatusCode::CONFLICT);
    assert_eq!(
        twice.json()["error"],
        "version 1 is submitted and cannot be changed; save a new scenario version instead"
    );
    // Approve: 409 by the submitter (above), 200 by a second person; reject: 422 / 200 (above),
    // 409 on a draft.
    assert_eq!(admin.post_json(&format!("/api/v1/cases/{case}/approve"), "{}").await.status, StatusCode::OK);
    let draft = copied["case"]["id"].as_i64().unwrap();
    let not_submitted = admin.post_json(&format!("/api/v1/cases/{draft}/approve"), "{}").await;
    assert_eq!(not_submitted.status, StatusCode::CONFLICT);
    assert_eq!(not_submitted.json()["error"], "version 2 is draft: only a submitted version can be approved");
    // Zone status: 200 forward, 422 for an unknown status.
    let on = t.post_json(&format!("/api/v1/zones/{zone}/status"), r#"{"status":"piloting"}"#).await;
    assert_eq!((on.status, on.json()["zone"]["status"].clone()), (StatusCode::OK, json!("piloting")));
    let odd = t.post_json(&format!("/api/v1/zones/{zone}/status"), r#"{"status":"paused"}"#).await;
    assert_eq!(odd.status, StatusCode::UNPROCESSABLE_ENTITY);
    // Site: admin only; a typo is a 422 naming it, and changes nothing.
    let site = admin.get("/api/v1/site").await;
    assert_eq!((site.status, site.json()["site"]["hurdle_rate"].clone()), (StatusCode::OK, json!("0.1")));
    assert_eq!(t.get("/api/v1/site").await.status, StatusCode::FORBIDDEN);
    assert_eq!(t.patch_json("/api/v1/site", r#"{"hurdle_rate":"0.2"}"#).await.status, StatusCode::FORBIDDEN);
    let typo = admin.patch_json("/api/v1/site", r#"{"hurdle_rat":"0.2"}"#).await;
    assert_eq!(typo.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(typo.json()["error"].as_str().unwrap().contains("unknown field `hurdle_rat`"), "{}", typo.text);
    let bad = admin.patch_json("/api/v1/site", r#"{"hurdle_rate":"-2"}"#).await;
    assert_eq!(bad.json()["fields"][0]["field"], "hurdle_rate");
    assert_eq!(admin.get("/api/v1/site").await.json()["site"]["hurdle_rate"], "0.1");
}

#[test]
fn the_role_table_and_the_openapi_document_cover_the_new_endpoints() {
    let table: Vec<(Method, &str, Permission)> =
        pilot_ledger::web::routes().into_iter().map(|r| (r.method, r.path, r.permission)).collect();
    let doc: Value = serde_json::from_str(include_str!("../../src/web/openapi.json")).unwrap();
    for (method, path, permission) in [
        (Method::POST, "/api/v1/cases/{id}/copy", Permission::EditCases),
        (Method::POST, "/api/v1/cases/{id}/submit", Permission::EditCases),
        (Method::POST, "/api/v1/cases/{id}/approve", Permission::EditCases),
        (Method::POST, "/api/v1/cases/{id}/reject", Permission::EditCases),
        (Method::POST, "/api/v1/zones/{id}/status", Permission::EditCases),
        (Method::GET, "/api/v1/site", Permission::Admin),
        (Method::PATCH, "/api/v1/site", Permission::Admin),
        (Method::POST, "/cases/{id}/reject", Permission::EditCases),
    ] {
        assert!(table.contains(&(method.clone(), path, permission)), "{method} {path} missing from the role table");
        if path.starts_with("/api/") {
            let op = method.as_str().to_ascii_lowercase();
            assert!(doc["paths"][path][op.as_str()].is_object(), "{method} {path} missing from the OpenAPI document");
        }
    }
}
