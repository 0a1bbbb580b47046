//! The API's contract: every error under /api/ in the JSON error format (bad path ids, unknown
//! query parameters, unknown routes, wrong methods), and the OpenAPI document kept in step with
//! the route table.

use crate::helpers::test_app;
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use pilot_ledger::auth::Role;
use serde_json::json;

#[tokio::test]
async fn a_bad_path_id_is_a_json_404_naming_the_parameter() {
    let t = test_app(true).await;
    let bad = t.get("/api/v1/zones/abc").await;
    assert_eq!(bad.status, StatusCode::NOT_FOUND);
    assert_eq!(bad.headers[header::CONTENT_TYPE], "application/json");
    assert_eq!(
        bad.json(),
        json!({"error": "no such resource: id: an id is a whole number, not \"abc\"",
               "fields": [{"field": "id", "message": "an id is a whole number, not \"abc\""}]})
    );
    // Positive control: a whole number that names a zone.
    assert_eq!(t.get("/api/v1/zones/1").await.status, StatusCode::OK);

    // Past i64 is no id either.
    let huge = t.get("/api/v1/cases/99999999999999999999").await;
    assert_eq!((huge.status, huge.json()["fields"][0]["field"].clone()), (StatusCode::NOT_FOUND, json!("id")));
    assert_eq!(t.get("/api/v1/cases/1").await.status, StatusCode::OK);

    // The second parameter of a two-parameter path is named as such.
    let controller = t.as_role(Some(Role::Controller));
    let body = r#"{"evidence": "typo"}"#;
    let entry = controller.post_json("/api/v1/zones/1/ledger/x/reverse", body).await;
    assert_eq!(
        (entry.status, entry.json()),
        (
            StatusCode::NOT_FOUND,
            json!({"error": "no such resource: entry: an id is a whole number, not \"x\"",
                   "fields": [{"field": "entry", "message": "an id is a whole number, not \"x\""}]})
        )
    );
    // Control: a numeric id that names no entry is the ordinary 404.
    let missing = controller.post_json("/api/v1/zones/1/ledger/999999/reverse", body).await;
    assert_eq!(missing.status, StatusCode::NOT_FOUND, "{}", missing.text);
    assert_eq!(missing.json()["fields"], json!([]));
}

#[tokio::test]
async fn an_unknown_query_parameter_is_a_422_naming_it() {
    let t = test_app(true).await;
    let typo = t.get("/api/v1/portfolio?rnak=irr").await;
    assert_eq!(
        (typo.status, typo.json()),
        (
            StatusCode::UNPROCESSABLE_ENTITY,
            json!({"error": "some fields are not valid: rnak: unknown query parameter; expected one of: budget, rank, basis, min_readiness, seed",
                   "fields": [{"field": "rnak", "message": "unknown query parameter; expected one of: budget, rank, basis, min_readiness, seed"}]})
        )
    );
    let ok = t.get("/api/v1/portfolio?rank=irr").await;
    assert_eq!((ok.status, ok.json()["rank"].clone()), (StatusCode::OK, json!("irr")));

    // A route that takes no query refuses any.
    let none = t.get("/api/v1/zones?limit=5").await;
    assert_eq!(
        (none.status, none.json()["fields"].clone()),
        (
            StatusCode::UNPROCESSABLE_ENTITY,
            json!([{"field": "limit", "message": "unknown query parameter; expected one of: none"}])
        )
    );
    assert_eq!(t.get("/api/v1/zones").await.status, StatusCode::OK);

    // The same known parameter twice is ambiguous.
    let twice = t.get("/api/v1/portfolio?rank=irr&rank=npv").await;
    assert_eq!(
        (twice.status, twice.json()["fields"].clone()),
        (StatusCode::UNPROCESSABLE_ENTITY, json!([{"field": "rank", "message": "given more than once; give it once"}]))
    );
}

#[tokio::test]
async fn unknown_api_routes_and_methods_answer_json() {
    let t = test_app(false).await;
    let missing = t.get("/api/v1/nothing-here").await;
    assert_eq!(
        (missing.status, missing.headers[header::CONTENT_TYPE].clone(), missing.json()),
        (
            StatusCode::NOT_FOUND,
            "application/json".parse().unwrap(),
            json!({"error": "API route not found", "fields": []})
        )
    );
    // Outside the API the page stays HTML.
    let page = t.get("/nothing-here").await;
    assert_eq!(page.status, StatusCode::NOT_FOUND);
    assert!(page.headers[header::CONTENT_TYPE].to_str().unwrap().starts_with("text/html"));

    let admin = t.as_role(Some(Role::Admin));
    let delete = admin.send(Request::delete("/api/v1/zones").body(Body::empty()).unwrap()).await;
    assert_eq!(delete.status, StatusCode::METHOD_NOT_ALLOWED);
    assert_eq!(delete.headers[header::ALLOW], "GET,HEAD,POST");
    assert_eq!(
        delete.json(),
        json!({"error": "this path does not take this method; the Allow header lists those it takes", "fields": []})
    );
    assert_eq!(admin.get("/api/v1/zones").await.status, StatusCode::OK);
}

#[tokio::test]
async fn an_oversized_declared_body_is_a_json_413() {
    let t = test_app(false).await;
    // Declared above the outer limit: refused before it is read, by tower-http's layer.
    let big = pilot_ledger::web::IMPORT_MAX_BYTES + 2 * 1024 * 1024;
    let req = Request::post("/api/v1/metrics")
        .header(header::CONTENT_TYPE, "application/json")
        .header(header::CONTENT_LENGTH, big.to_string())
        .body(Body::from(vec![b' '; big]))
        .unwrap();
    let a = t.send(req).await;
    assert_eq!(a.status, StatusCode::PAYLOAD_TOO_LARGE);
    assert_eq!(a.json(), json!({"error": "length limit exceeded", "fields": []}));
    let ok = t.post_json("/api/v1/metrics", r#"{"rate": "0.1", "flows": ["-1000", "1100"]}"#).await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
}
