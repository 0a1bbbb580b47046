//! Server-rendered pages: the demo plant renders everywhere, forms work without JavaScript,
//! errors sit beside their fields, and the demo plant is loaded once only.

use crate::helpers::test_app;
use axum::http::StatusCode;

#[tokio::test]
async fn demo_plant_is_loaded_once_and_every_page_renders() {
    let t = test_app(true).await;
    let zones: Vec<(i64, String)> = sqlx::query_as("SELECT id, status FROM zones").fetch_all(&t.pool).await.unwrap();
    assert!(zones.len() >= 6);
    let statuses: std::collections::HashSet<&str> = zones.iter().map(|(_, s)| s.as_str()).collect();
    assert!(statuses.len() >= 5, "demo zones should span the lifecycle: {statuses:?}");

    let list = t.get("/zones").await;
    assert_eq!(list.status, StatusCode::OK);
    assert!(list.text.contains("PRESS-2") && list.text.contains("EUR"));
    for (id, _) in &zones {
        assert_eq!(t.get(&format!("/zones/{id}")).await.status, StatusCode::OK);
        assert_eq!(t.get(&format!("/zones/{id}/compare")).await.status, StatusCode::OK);
    }
    let cases: Vec<i64> = sqlx::query_scalar("SELECT id FROM case_versions").fetch_all(&t.pool).await.unwrap();
    for id in &cases {
        for page in ["", "/flows", "/flows?view=after_tax", "/edit"] {
            let a = t.get(&format!("/cases/{id}{page}")).await;
            assert_eq!(a.status, StatusCode::OK, "/cases/{id}{page}: {}", a.text);
        }
    }
    let view = t.get(&format!("/cases/{}", cases[0])).await;
    assert!(view.text.contains("<svg") && view.text.contains("Cumulative discounted cash flow"));
    assert_eq!(t.get("/about").await.status, StatusCode::OK);

    // A second start on the same database does not load the demo again.
    let url = t.pool.connect_options().get_filename().display().to_string();
    let again = pilot_ledger::cli::prepare(&format!("sqlite://{url}"), true, t.now()).await.unwrap();
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM zones").fetch_one(&again).await.unwrap();
    assert_eq!(n as usize, zones.len());
}

#[tokio::test]
async fn forms_create_edit_and_refuse_with_field_errors() {
    let t = test_app(false).await;
    let created = t.post_form("/zones", "code=eol-3&name=Test+bay+3&owner=Quality&status=candidate&description=").await;
    assert_eq!(created.status, StatusCode::SEE_OTHER);
    let zone_url = created.location.unwrap();

    // Two refusals, each with its own message beside its field, and nothing written.
    let before = t.counts().await;
    let bad = t.post_form("/zones", "code=EOL-4&name=&status=candidate").await;
    assert_eq!(bad.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(bad.text.contains("Error: required: enter some text</p>"), "{}", bad.text);
    assert!(!bad.text.contains("already exists"), "{}", bad.text);
    let taken = t.post_form("/zones", "code=EOL-3&name=Another+bay&status=candidate").await;
    assert_eq!(taken.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(taken.text.contains("Error: a zone with code EOL-3 already exists</p>"), "{}", taken.text);
    assert!(!taken.text.contains("required: enter some text"), "{}", taken.text);
    assert_eq!(t.counts().await, before);

    let case = t.post_form(&format!("{zone_url}/cases"), "").await;
    let edit_url = case.location.unwrap();
    let case_url = edit_url.trim_end_matches("/edit").to_string();

    let before = t.counts().await;
    let bad_cost = t
        .post_form(
            &format!("{case_url}/costs"),
            "label=Sensors&category=hardware&kind=one_off&amount=abc&month_offset=0",
        )
        .await;
    assert_eq!(bad_cost.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(bad_cost.text.contains("id=\"cost-amount-error\""), "error must sit beside the amount field");
    let bad_driver = t
        .post_form(
            &format!("{case_url}/drivers"),
            "label=Scrap&kind=scrap&qty_low=5&qty_likely=1&qty_high=9&unit_value=2",
        )
        .await;
    assert_eq!(bad_driver.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(bad_driver.text.contains("must not exceed the likely quantity"));
    assert_eq!(t.counts().await, before);

    let ok = t
        .post_form(
            &format!("{case_url}/costs"),
            "label=Sensors&category=hardware&kind=one_off&amount=12%2C000&month_offset=0&capex=on",
        )
        .await;
    assert_eq!(ok.status, StatusCode::SEE_OTHER);
    let ok = t
        .post_form(
            &format!("{case_url}/drivers"),
            "label=Scrap&kind=scrap&unit=&qty_low=800&qty_likely=1200&qty_high=1500&unit_value=10&escalation=",
        )
        .await;
    assert_eq!(ok.status, StatusCode::SEE_OTHER);
    let header =
        "label=Base&horizon_months=36&start_month=2027-01&go_live_offset=0&ramp_up_months=0&success_probability=90";
    assert_eq!(t.post_form(&edit_url, header).await.status, StatusCode::SEE_OTHER);
    let id = case_url.rsplit('/').next().unwrap();
    let api = t.get(&format!("/api/v1/cases/{id}")).await.json();
    assert_eq!(api["case"]["success_probability"], "0.9");
    // Same case as api::simple_case, so the same NPV (numpy-financial 1.0.0, see api.rs).
    let npv: f64 = api["metrics"]["npv"].as_str().unwrap().parse().unwrap();
    assert!((npv - 19_435.143_641_317_074).abs() < 1e-6);

    // A scenario copy is version 2, and the comparison shows both.
    let copy = t.post_form(&format!("{case_url}/copy"), "label=Two+shifts").await;
    assert_eq!(copy.status, StatusCode::SEE_OTHER);
    let compare = t.get(&format!("{zone_url}/compare")).await;
    assert!(compare.text.contains("v1 Base") && compare.text.contains("v2 Two shifts"));
}

#[tokio::test]
async fn unknown_pages_and_ids_are_404() {
    let t = test_app(false).await;
    let a = t.get("/no/such/page").await;
    assert_eq!(a.status, StatusCode::NOT_FOUND);
    assert!(a.text.contains("404"));
    assert_eq!(t.get("/cases/424242").await.status, StatusCode::NOT_FOUND);
    assert_eq!(t.get("/zones/not-a-number").await.status.as_u16() / 100, 4);
}

#[tokio::test]
async fn a_reader_of_a_draft_is_told_who_changes_it_not_that_it_is_frozen() {
    use pilot_ledger::auth::Role;
    let t = test_app(false).await;
    let lead = t.as_role(Some(Role::Lead));
    let zone = lead.post_json("/api/v1/zones", r#"{"code":"weld-9","name":"Weld cell 9","status":"candidate"}"#).await;
    let zone_id = zone.json()["zone"]["id"].as_i64().unwrap();
    let case = lead.post_json(&format!("/api/v1/zones/{zone_id}/cases"), &crate::api::simple_case().to_string()).await;
    let case_id = case.json()["case"]["id"].as_i64().unwrap();
    let draft = t.as_role(Some(Role::Viewer)).get(&format!("/cases/{case_id}/edit")).await;
    assert_eq!(draft.status, StatusCode::OK);
    assert!(
        draft.text.contains("This draft can be read here; a programme lead or an admin changes it."),
        "{}",
        draft.text
    );
    assert!(!draft.text.contains("frozen"), "a draft is not frozen");
    // Positive control: once submitted, every role reads it as frozen.
    let submitted = lead.post_json(&format!("/api/v1/cases/{case_id}/submit"), "{}").await;
    assert_eq!(submitted.status, StatusCode::OK, "{}", submitted.text);
    let page = lead.get(&format!("/cases/{case_id}/edit")).await;
    assert!(page.text.contains("and frozen. Save a new scenario version to change it."), "{}", page.text);
}
