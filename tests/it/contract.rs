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

/// The document as served and as compiled in.
fn document() -> serde_json::Value {
    serde_json::from_str(include_str!("../../src/web/openapi.json")).unwrap()
}

fn permission_name(p: pilot_ledger::auth::Permission) -> &'static str {
    use pilot_ledger::auth::Permission::*;
    match p {
        Public => "public",
        SignedIn => "signed_in",
        Read => "read",
        EditCases => "edit_cases",
        Ledger => "ledger",
        Admin => "admin",
    }
}

/// Every schema object in `v`, depth first.
fn walk<'a>(v: &'a serde_json::Value, path: String, out: &mut Vec<(String, &'a serde_json::Value)>) {
    match v {
        serde_json::Value::Object(m) => {
            out.push((path.clone(), v));
            for (k, x) in m {
                walk(x, format!("{path}/{k}"), out);
            }
        }
        serde_json::Value::Array(a) => {
            for (i, x) in a.iter().enumerate() {
                walk(x, format!("{path}/{i}"), out);
            }
        }
        _ => {}
    }
}

#[test]
fn the_document_describes_exactly_the_api_routes_with_their_statuses() {
    let doc = document();
    let routes: Vec<_> = pilot_ledger::web::routes().into_iter().filter(|r| r.path.starts_with("/api/")).collect();
    assert!(routes.len() >= 18, "the API has at least 18 routes");
    for r in &routes {
        let method = r.method.as_str().to_ascii_lowercase();
        let what = format!("{} {}", r.method, r.path);
        let op = &doc["paths"][r.path][method.as_str()];
        assert!(op.is_object(), "{what} is missing from the document");
        assert_eq!(op["x-permission"], permission_name(r.permission), "{what}: permission");
        let statuses: Vec<&str> = op["responses"].as_object().unwrap().keys().map(String::as_str).collect();
        let mut needed = vec!["400", "422", "503"];
        if r.permission != pilot_ledger::auth::Permission::Public {
            needed.extend(["401", "403"]);
        } else {
            assert_eq!(op["security"], json!([]), "{what}: a public operation needs no token");
        }
        if r.path.contains('{') {
            needed.push("404");
        }
        if op.get("requestBody").is_some() {
            assert_eq!(op["requestBody"]["required"], true, "{what}: the body is required");
            needed.extend(["413", "415"]);
        }
        for s in needed {
            assert!(statuses.contains(&s), "{what} does not list {s}");
        }
        let has_success = statuses.iter().any(|s| s.starts_with('2'));
        assert!(has_success, "{what} lists no success status");
        for (status, answer) in op["responses"].as_object().unwrap() {
            assert!(
                answer["content"]["application/json"]["schema"].is_object(),
                "{what} {status}: every answer has a JSON schema"
            );
        }
        // Path parameters are exactly those of the route.
        let in_path: Vec<&str> = r.path.split('{').skip(1).filter_map(|s| s.split('}').next()).collect();
        let documented: Vec<&str> = op["parameters"]
            .as_array()
            .map(|ps| ps.iter().filter(|p| p["in"] == "path").map(|p| p["name"].as_str().unwrap()).collect())
            .unwrap_or_default();
        assert_eq!(documented, in_path, "{what}: path parameters");
    }
    // And nothing in the document that the route table does not have.
    for (path, ops) in doc["paths"].as_object().unwrap() {
        for method in ops.as_object().unwrap().keys() {
            let known = routes.iter().any(|r| r.path == path && r.method.as_str().eq_ignore_ascii_case(method));
            assert!(known, "{method} {path} is documented but not routed");
        }
    }
}

#[test]
fn the_document_is_well_formed_and_integers_are_integers() {
    let doc = document();
    let mut nodes = Vec::new();
    walk(&doc, String::new(), &mut nodes);
    for (path, node) in &nodes {
        if let Some(r) = node.get("$ref").and_then(|r| r.as_str()) {
            let target = r.strip_prefix("#/components/schemas/").unwrap_or_else(|| panic!("{path}: {r} is not local"));
            assert!(doc["components"]["schemas"][target].is_object(), "{path}: {r} resolves to nothing");
        }
        let ty = &node["type"];
        let integer = ty == "integer" || ty.as_array().is_some_and(|a| a.contains(&json!("integer")));
        let number_too = ty.as_array().is_some_and(|a| a.contains(&json!("number")));
        if integer && !number_too {
            assert_eq!(node["format"], "int64", "{path}: an integer states its format");
            for ex in node.get("examples").and_then(|e| e.as_array()).into_iter().flatten().chain(node.get("example")) {
                assert!(ex.is_i64(), "{path}: integer example {ex}");
            }
        }
        // Every object a request sends refuses unknown fields, as JsonBody does.
        if path.starts_with("/components/schemas/") && path.ends_with("Input") {
            assert_eq!(node["additionalProperties"], false, "{path}: request bodies are closed");
        }
    }
    // Responses stay open to new fields (the case and metrics answers grow).
    for name in ["CaseAnswer", "MetricsAnswer", "PortfolioAnswer", "LedgerEntry"] {
        assert!(doc["components"]["schemas"][name].get("additionalProperties").is_none(), "{name} is open");
    }
    assert_eq!(doc["components"]["schemas"]["MetricsInput"]["properties"]["flows"]["maxItems"], 2400);
}

#[tokio::test]
async fn a_body_must_be_an_object_of_named_fields() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    // serde would read an array as the struct's fields in order: `[null, null]` was a 200.
    let array = admin.patch_json("/api/v1/site", "[null, null]").await;
    assert_eq!(
        (array.status, array.json()),
        (
            StatusCode::UNPROCESSABLE_ENTITY,
            json!({"error": "the body must be a JSON object of named fields", "fields": []})
        )
    );
    let object = admin.patch_json("/api/v1/site", "{}").await;
    assert_eq!(object.status, StatusCode::OK, "{}", object.text);

    let flows = t.post_json("/api/v1/metrics", r#"["0.1", ["-1000", "1100"]]"#).await;
    assert_eq!(flows.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(flows.json()["error"], "the body must be a JSON object of named fields");
    let ok = t.post_json("/api/v1/metrics", r#"{"rate": "0.1", "flows": ["-1000", "1100"]}"#).await;
    assert_eq!((ok.status, ok.json()["npv"].clone()), (StatusCode::OK, json!("0")));
}

#[tokio::test]
async fn an_array_for_a_case_is_refused_too() {
    // CaseSpecInput flattens its header, so serde reads it as a map and refuses an array itself.
    let t = test_app(false).await;
    let zone = t.post_json("/api/v1/zones", r#"{"code": "ARR-1", "name": "Array test"}"#).await;
    let id = zone.json()["zone"]["id"].as_i64().unwrap();
    let array = t.post_json(&format!("/api/v1/zones/{id}/cases"), "[]").await;
    assert_eq!(array.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", array.text);
    assert_eq!(
        array.json()["error"],
        "Failed to deserialize the JSON body into the target type: invalid type: sequence, expected struct CaseSpecInput"
    );
    let ok = t.post_json(&format!("/api/v1/zones/{id}/cases"), &crate::api::simple_case().to_string()).await;
    assert_eq!(ok.status, StatusCode::CREATED, "{}", ok.text);
}

/// Resolve a local `$ref`.
fn resolve<'a>(doc: &'a serde_json::Value, schema: &'a serde_json::Value) -> &'a serde_json::Value {
    match schema.get("$ref").and_then(|r| r.as_str()) {
        Some(r) => &doc["components"]["schemas"][r.trim_start_matches("#/components/schemas/")],
        None => schema,
    }
}

/// Every key of `value` (recursively) that `schema` does not describe, by its path.
fn undescribed(
    doc: &serde_json::Value,
    schema: &serde_json::Value,
    value: &serde_json::Value,
    path: &str,
) -> Vec<String> {
    let schema = resolve(doc, schema);
    if let Some(branches) = schema.get("oneOf").and_then(|b| b.as_array()) {
        // The branch for this kind of value (an object, an array); null needs no description.
        let branch = branches.iter().map(|b| resolve(doc, b)).find(|b| match value {
            serde_json::Value::Object(_) => b.get("properties").is_some(),
            serde_json::Value::Array(_) => b.get("items").is_some(),
            _ => false,
        });
        return branch.map(|b| undescribed(doc, b, value, path)).unwrap_or_default();
    }
    let mut out = Vec::new();
    match value {
        serde_json::Value::Object(m) => {
            for (k, v) in m {
                match schema["properties"].get(k) {
                    Some(s) => out.extend(undescribed(doc, s, v, &format!("{path}.{k}"))),
                    None => out.push(format!("{path}.{k}")),
                }
            }
        }
        serde_json::Value::Array(items) => {
            for (i, v) in items.iter().enumerate().take(3) {
                out.extend(undescribed(doc, &schema["items"], v, &format!("{path}[{i}]")));
            }
        }
        _ => {}
    }
    out
}

#[tokio::test]
async fn every_field_the_api_answers_is_in_the_document() {
    let t = test_app(true).await;
    let admin = t.as_role(Some(Role::Admin));
    let doc = document();
    let metrics_body =
        r#"{"rate": "0.1", "flows": ["-1000", "600", "600"], "dates": ["2026-01-01", "2026-07-01", "2027-01-01"]}"#;
    // Decision packs of both kinds, so that their stored figures are checked too.
    assert_eq!(admin.post_json("/api/v1/cases/1/packs", "").await.status, StatusCode::CREATED);
    assert_eq!(admin.post_json("/api/v1/portfolio/packs", r#"{"budget": "150000"}"#).await.status, StatusCode::CREATED);
    let answers = [
        ("/api/v1/packs", "get", admin.get("/api/v1/packs").await),
        ("/api/v1/packs/{id}", "get", admin.get("/api/v1/packs/1").await),
        ("/api/v1/packs/{id}", "get", admin.get("/api/v1/packs/2").await),
        ("/api/v1/zones", "get", admin.get("/api/v1/zones").await),
        ("/api/v1/zones/{id}", "get", admin.get("/api/v1/zones/1").await),
        ("/api/v1/cases/{id}", "get", admin.get("/api/v1/cases/1").await),
        ("/api/v1/zones/{id}/ledger", "get", admin.get("/api/v1/zones/1/ledger").await),
        ("/api/v1/portfolio", "get", admin.get("/api/v1/portfolio?budget=150000&min_readiness=2").await),
        ("/api/v1/site", "get", admin.get("/api/v1/site").await),
        ("/api/v1/metrics", "post", admin.post_json("/api/v1/metrics", metrics_body).await),
        // The demo's named plan, its answer, and the list.
        ("/api/v1/roadmap/plans", "get", admin.get("/api/v1/roadmap/plans").await),
        ("/api/v1/roadmap/plans/{id}", "get", admin.get("/api/v1/roadmap/plans/1").await),
        ("/api/v1/roadmap", "get", admin.get("/api/v1/roadmap?plan=1").await),
    ];
    for (path, method, answer) in answers {
        assert_eq!(answer.status, StatusCode::OK, "{path}: {}", answer.text);
        let body = answer.json();
        let schema = &doc["paths"][path][method]["responses"]["200"]["content"]["application/json"]["schema"];
        assert_eq!(
            undescribed(&doc, schema, &body, ""),
            Vec::<String>::new(),
            "{method} {path}: fields not in the document"
        );
    }
    // The check itself sees a field the document lacks, nested too.
    let schema = json!({"$ref": "#/components/schemas/CaseAnswer"});
    let invented = json!({"currency": "EUR", "surprise": 1, "case": {"id": 1, "costs": [{"id": 1, "colour": "red"}]}});
    assert_eq!(
        undescribed(&doc, &schema, &invented, ""),
        vec![".case.costs[0].colour".to_string(), ".surprise".to_string()]
    );
    // The portfolio answer above carries a budget choice and readiness, so those are checked too.
    let p = admin.get("/api/v1/portfolio?budget=150000&min_readiness=2").await.json();
    assert!(p["choice"].is_object());
    assert!(p["zones"].as_array().unwrap().iter().any(|z| z["readiness"].is_object()));
}

#[tokio::test]
async fn a_rate_that_is_minus_one_in_doubles_blames_the_rate() {
    let t = test_app(false).await;
    // It blamed `flows`: the engine's -1 came from the rate's conversion to a double.
    let body = r#"{"rate": "-0.9999999999999999", "flows": ["-1000", "300", "420", "680"]}"#;
    let a = t.post_json("/api/v1/metrics", body).await;
    assert_eq!(
        (a.status, a.json()["fields"].clone()),
        (
            StatusCode::UNPROCESSABLE_ENTITY,
            json!([{"field": "rate", "message": "a rate greater than -1: -0.9999999999999999 is -1 in double precision, where the figures are computed"}])
        )
    );
    let ok = t.post_json("/api/v1/metrics", r#"{"rate": "-0.999999", "flows": ["-1000", "300", "420", "680"]}"#).await;
    assert_eq!(ok.status, StatusCode::OK, "{}", ok.text);
}
