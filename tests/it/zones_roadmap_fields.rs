//! The roadmap's data on zones and on the site (migration 0017): a zone's area and needs
//! through the API, the forms and scenario files, and the site's introductions at a time.
//! Expected values are written by hand; every refusal sits beside a positive control.

use crate::helpers::{TEST_NOW, test_app};
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use pilot_ledger::{cli, db};
use serde_json::{Value, json};

/// The `fields` of a JSON refusal, as (field, message) pairs.
fn fields(answer: &Value) -> Vec<(String, String)> {
    answer["fields"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| (f["field"].as_str().unwrap().to_string(), f["message"].as_str().unwrap().to_string()))
        .collect()
}

fn one(field: &str, message: &str) -> Vec<(String, String)> {
    vec![(field.to_string(), message.to_string())]
}

async fn needs_rows(pool: &sqlx::SqlitePool) -> Vec<(String, String)> {
    sqlx::query_as(
        "SELECT z.code, n.code FROM zone_needs d JOIN zones z ON z.id = d.zone_id JOIN zones n ON n.id = d.needs_id
         ORDER BY z.code, n.code",
    )
    .fetch_all(pool)
    .await
    .unwrap()
}

#[tokio::test]
async fn the_api_stores_and_answers_area_and_needs() {
    let t = test_app(false).await;
    let press = t.post_json("/api/v1/zones", r#"{"code":"PRESS-1","name":"Press line 1","area":"press shop"}"#).await;
    assert_eq!(press.status, StatusCode::CREATED, "{}", press.text);
    assert_eq!(press.json()["zone"]["area"], "press shop");
    assert_eq!(press.json()["zone"]["needs"], json!([]));

    // Area trimmed, codes upper-cased, each once, sorted by code.
    let body = r#"{"code":"PAINT-1","name":"Paint booth","area":"  paint shop ","needs":["press-1","PRESS-1"]}"#;
    let paint = t.post_json("/api/v1/zones", body).await;
    assert_eq!(paint.status, StatusCode::CREATED, "{}", paint.text);
    let id = paint.json()["zone"]["id"].as_i64().unwrap();
    let read = t.get(&format!("/api/v1/zones/{id}")).await.json();
    assert_eq!((&read["zone"]["area"], &read["zone"]["needs"]), (&json!("paint shop"), &json!(["PRESS-1"])));
    let body = r#"{"code":"ASSY-1","name":"Assembly","needs":["PRESS-1","PAINT-1"]}"#;
    assert_eq!(t.post_json("/api/v1/zones", body).await.json()["zone"]["needs"], json!(["PAINT-1", "PRESS-1"]));
    let list = t.get("/api/v1/zones").await.json();
    let needs: Vec<(&str, &Value)> =
        list["zones"].as_array().unwrap().iter().map(|z| (z["code"].as_str().unwrap(), &z["needs"])).collect();
    assert_eq!(
        needs,
        [("ASSY-1", &json!(["PAINT-1", "PRESS-1"])), ("PAINT-1", &json!(["PRESS-1"])), ("PRESS-1", &json!([]))]
    );
    // The audit row names what was recorded.
    let detail: String =
        sqlx::query_scalar("SELECT detail FROM audit_log WHERE action = 'zone.create' ORDER BY id DESC LIMIT 1")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!(detail, "ASSY-1; needs PAINT-1, PRESS-1");

    // Refusals: 422 naming `needs` or `area`, nothing written.
    let before = t.counts().await;
    let unknown = t.post_json("/api/v1/zones", r#"{"code":"WELD-1","name":"Weld","needs":["PRESS-9"]}"#).await;
    assert_eq!(unknown.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(fields(&unknown.json()), one("needs", "no zone PRESS-9"));
    let two = t.post_json("/api/v1/zones", r#"{"code":"WELD-1","name":"Weld","needs":["PRESS-9","EOL-9"]}"#).await;
    assert_eq!(fields(&two.json()), one("needs", "no zones EOL-9, PRESS-9"));
    let own = t.post_json("/api/v1/zones", r#"{"code":"WELD-1","name":"Weld","needs":["weld-1"]}"#).await;
    assert_eq!(own.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(fields(&own.json()), one("needs", "WELD-1 cannot need itself"));
    let long = json!({"code": "WELD-1", "name": "Weld", "area": "a".repeat(61)}).to_string();
    let long = t.post_json("/api/v1/zones", &long).await;
    assert_eq!(long.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(fields(&long.json()), one("area", "at most 60 characters"));
    assert_eq!(t.counts().await, before);
    // Positive control: 60 characters and a need that exists.
    let fits = json!({"code": "WELD-1", "name": "Weld", "area": "a".repeat(60), "needs": ["PRESS-1"]}).to_string();
    let weld = t.post_json("/api/v1/zones", &fits).await;
    assert_eq!(weld.status, StatusCode::CREATED);
    let weld_id = weld.json()["zone"]["id"].as_i64().unwrap();

    // PATCH changes area and needs; absent fields keep their value.
    let press_id = press.json()["zone"]["id"].as_i64().unwrap();
    let cycle = t.patch_json(&format!("/api/v1/zones/{press_id}"), r#"{"needs": ["ASSY-1"]}"#).await;
    assert_eq!(cycle.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(fields(&cycle.json()), one("needs", "PRESS-1 and ASSY-1 would need each other"));
    let moved = t.patch_json(&format!("/api/v1/zones/{weld_id}"), r#"{"area": "body shop", "needs": []}"#).await;
    assert_eq!(moved.status, StatusCode::OK, "{}", moved.text);
    let z = &moved.json()["zone"];
    assert_eq!((&z["area"], &z["needs"], &z["name"]), (&json!("body shop"), &json!([]), &json!("Weld")));
    let named = t.patch_json(&format!("/api/v1/zones/{weld_id}"), r#"{"name": "Weld cell"}"#).await;
    assert_eq!(
        (&named.json()["zone"]["area"], &named.json()["zone"]["name"]),
        (&json!("body shop"), &json!("Weld cell"))
    );
    let status = t.patch_json(&format!("/api/v1/zones/{weld_id}"), r#"{"status": "shelved"}"#).await;
    assert_eq!(status.status, StatusCode::UNPROCESSABLE_ENTITY, "{}", status.text);
}

#[tokio::test]
async fn the_forms_take_needs_comma_separated_and_refuse_cycles() {
    let t = test_app(false).await;
    let press = t.post_form("/zones", "code=PRESS-1&name=Press+line+1&area=press+shop").await;
    assert_eq!(press.status, StatusCode::SEE_OTHER, "{}", press.text);
    let press_url = press.location.unwrap();
    let paint = t.post_form("/zones", "code=PAINT-1&name=Paint+booth&area=paint+shop&needs=press-1").await;
    let paint_url = paint.location.unwrap();
    let assy = t.post_form("/zones", "code=ASSY-1&name=Assembly&area=assembly&needs=+paint-1+,+PRESS-1,").await;
    assert_eq!(assy.status, StatusCode::SEE_OTHER, "{}", assy.text);
    let assy_url = assy.location.unwrap();
    let paint_id = paint_url.trim_start_matches("/zones/");
    let press_id = press_url.trim_start_matches("/zones/");

    // The zone page shows the area and links the needed zones; its form shows them back.
    let page = t.get(&assy_url).await.text;
    assert!(page.contains("<dt>Area</dt><dd>assembly</dd>"), "{page}");
    assert!(
        page.contains(&format!(
            "<dt>Needs</dt><dd><a href=\"/zones/{paint_id}\" title=\"Paint booth\">PAINT-1</a>, <a href=\"/zones/{press_id}\" title=\"Press line 1\">PRESS-1</a> live first</dd>"
        )),
        "{page}"
    );
    assert!(page.contains("name=\"needs\" value=\"PAINT-1, PRESS-1\""), "{page}");
    assert!(page.contains("name=\"area\" value=\"assembly\""), "{page}");
    let press_page = t.get(&press_url).await.text;
    assert!(press_page.contains("<dt>Needs</dt><dd>no other zone</dd>"), "{press_page}");
    assert!(press_page.contains("<dt>Needed by</dt>"), "{press_page}");
    assert!(t.get("/zones").await.text.contains("<td>paint shop</td>"));

    let stored = needs_rows(&t.pool).await;
    let pair = |a: &str, b: &str| (a.to_string(), b.to_string());
    assert_eq!(stored, [pair("ASSY-1", "PAINT-1"), pair("ASSY-1", "PRESS-1"), pair("PAINT-1", "PRESS-1")]);

    // A two-zone cycle: PAINT-1 needing ASSY-1, which needs PAINT-1.
    let back = t.post_form(&paint_url, "code=PAINT-1&name=Paint+booth&status=candidate&needs=ASSY-1").await;
    assert_eq!(back.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(back.text.contains("Error: PAINT-1 and ASSY-1 would need each other</p>"), "{}", back.text);
    // PRESS-1 needing ASSY-1 closes two cycles; the shorter (ASSY-1 needs PRESS-1) is named.
    let round = t.post_form(&press_url, "code=PRESS-1&name=Press+line+1&status=candidate&needs=ASSY-1").await;
    assert_eq!(round.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(round.text.contains("Error: PRESS-1 and ASSY-1 would need each other</p>"), "{}", round.text);
    // The refused form keeps what was typed.
    assert!(round.text.contains("name=\"needs\" value=\"ASSY-1\""), "{}", round.text);
    let unknown = t.post_form(&press_url, "code=PRESS-1&name=Press+line+1&status=candidate&needs=PRESS-9").await;
    assert_eq!(unknown.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(unknown.text.contains("Error: no zone PRESS-9</p>"), "{}", unknown.text);
    let long = format!("code=PRESS-1&name=Press+line+1&status=candidate&area={}", "a".repeat(61));
    let long = t.post_form(&press_url, &long).await;
    assert_eq!(long.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(long.text.contains("Error: at most 60 characters</p>"), "{}", long.text);
    assert_eq!(needs_rows(&t.pool).await, stored, "nothing was written");

    // Positive control: ASSY-1 drops PAINT-1, then PAINT-1 may need ASSY-1.
    let drop = t.post_form(&assy_url, "code=ASSY-1&name=Assembly&status=candidate&area=assembly&needs=PRESS-1").await;
    assert_eq!(drop.status, StatusCode::SEE_OTHER, "{}", drop.text);
    let now = t.post_form(&paint_url, "code=PAINT-1&name=Paint+booth&status=candidate&needs=ASSY-1").await;
    assert_eq!(now.status, StatusCode::SEE_OTHER, "{}", now.text);
    assert_eq!(
        needs_rows(&t.pool).await,
        [pair("ASSY-1", "PRESS-1"), pair("PAINT-1", "ASSY-1")],
        "PAINT-1 no longer needs PRESS-1 directly and has no area"
    );
    // A three-zone cycle: PRESS-1 -> PAINT-1 -> ASSY-1 -> PRESS-1.
    let before = needs_rows(&t.pool).await;
    let round = t.post_form(&press_url, "code=PRESS-1&name=Press+line+1&status=candidate&needs=PAINT-1").await;
    assert_eq!(round.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        round.text.contains(
            "Error: PRESS-1, PAINT-1 and ASSY-1 would need each other in a circle: PRESS-1 needs PAINT-1, \
             PAINT-1 needs ASSY-1, ASSY-1 needs PRESS-1</p>"
        ),
        "{}",
        round.text
    );
    assert_eq!(needs_rows(&t.pool).await, before);
    let detail: String =
        sqlx::query_scalar("SELECT detail FROM audit_log WHERE action = 'zone.update' ORDER BY id DESC LIMIT 1")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert_eq!(detail, "PAINT-1 Paint booth candidate; needs ASSY-1; no area");
    let audit = t.as_role(Some(Role::Admin)).get("/admin/audit").await.text;
    assert!(
        audit.contains("t-lead changed the details of PAINT-1: PAINT-1 Paint booth candidate; needs ASSY-1; no area"),
        "{audit}"
    );
}

/// A scenario whose first zone needs one defined later in the file.
const FORWARD: &str = r#"{"format": "pilot-ledger-scenario", "version": 1,
    "site": {"plant_name": "Test works", "currency": "EUR", "hurdle_rate": "0.1", "introduction_capacity": 3},
    "zones": [
        {"code": "EOL-1", "name": "Test bay", "area": "assembly", "needs": ["ASSY-1", "PRESS-1"]},
        {"code": "ASSY-1", "name": "Assembly loop", "area": "assembly", "needs": ["PRESS-1"]},
        {"code": "PRESS-1", "name": "Press line", "area": "press shop", "status": "piloting"}
    ]}"#;

async fn empty_pool(dir: &tempfile::TempDir, name: &str) -> sqlx::SqlitePool {
    let url = format!("sqlite://{}", dir.path().join(name).display());
    cli::prepare(&url, false, TEST_NOW).await.unwrap()
}

#[tokio::test]
async fn scenario_files_carry_area_and_needs_and_export_loads_back_the_same() {
    let dir = tempfile::tempdir().unwrap();
    let first = empty_pool(&dir, "first.db").await;
    let loaded = cli::load_text(&first, FORWARD, TEST_NOW).await.unwrap();
    assert_eq!(loaded.zones, 3);
    let zones = db::list_zones(&first).await.unwrap();
    let seen: Vec<(&str, &str, Vec<&str>)> = zones
        .iter()
        .map(|z| (z.code.as_str(), z.area.as_str(), z.needs.iter().map(String::as_str).collect()))
        .collect();
    assert_eq!(
        seen,
        [
            ("ASSY-1", "assembly", vec!["PRESS-1"]),
            ("EOL-1", "assembly", vec!["ASSY-1", "PRESS-1"]),
            ("PRESS-1", "press shop", vec![])
        ]
    );
    assert_eq!(db::get_site(&first).await.unwrap().introduction_capacity, 3);

    // Export, load into an empty database, export again: the same document.
    let exported = db::export_layout(&first).await.unwrap();
    assert_eq!(exported["site"]["introduction_capacity"], "3");
    assert_eq!(exported["zones"][1]["needs"], json!(["ASSY-1", "PRESS-1"]));
    assert_eq!(exported["zones"][2]["status"], "piloting");
    let second = empty_pool(&dir, "second.db").await;
    cli::load_text(&second, &exported.to_string(), TEST_NOW).await.unwrap();
    assert_eq!(db::export_layout(&second).await.unwrap(), exported);
    assert_eq!(db::get_site(&second).await.unwrap(), db::get_site(&first).await.unwrap());
}

#[tokio::test]
async fn scenario_needs_are_refused_by_path() {
    let dir = tempfile::tempdir().unwrap();
    let refused = |name: &'static str, text: String| {
        let dir = &dir;
        async move {
            let pool = empty_pool(dir, name).await;
            let scenario = pilot_ledger::domain::Scenario::parse(&text, Default::default()).unwrap();
            let err = db::load_scenario(&pool, &scenario, ("test", TEST_NOW), |_| {}).await.unwrap_err();
            let zones: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM zones").fetch_one(&pool).await.unwrap();
            assert_eq!(zones, 0, "all or nothing");
            match err {
                db::DbError::Invalid(f) => f.0.into_iter().map(|e| (e.field, e.message)).collect::<Vec<_>>(),
                other => panic!("{other}"),
            }
        }
    };
    // Needs are set in file order once all zones are stored: PRESS-1 (third) closes the cycle,
    // the shortest being EOL-1's direct need of PRESS-1.
    let cycle = FORWARD.replace(r#""status": "piloting""#, r#""status": "piloting", "needs": ["EOL-1"]"#);
    assert_eq!(refused("cycle.db", cycle).await, one("zones[2].needs", "PRESS-1 and EOL-1 would need each other"));
    let longer = FORWARD
        .replace(r#"["ASSY-1", "PRESS-1"]"#, r#"["ASSY-1"]"#)
        .replace(r#""status": "piloting""#, r#""status": "piloting", "needs": ["EOL-1"]"#);
    assert_eq!(
        refused("longer.db", longer).await,
        one(
            "zones[2].needs",
            "PRESS-1, EOL-1 and ASSY-1 would need each other in a circle: PRESS-1 needs EOL-1, EOL-1 needs ASSY-1, \
             ASSY-1 needs PRESS-1"
        )
    );
    let unknown = FORWARD.replace(r#"["ASSY-1", "PRESS-1"]"#, r#"["ASSY-1", "PRESS-9"]"#);
    assert_eq!(refused("unknown.db", unknown).await, one("zones[0].needs", "no zone PRESS-9"));
    let own = FORWARD.replace(r#""needs": ["PRESS-1"]"#, r#""needs": ["ASSY-1"]"#);
    let err = pilot_ledger::domain::Scenario::parse(&own, Default::default()).unwrap_err();
    assert_eq!(err.get("zones[1].needs"), Some("ASSY-1 cannot need itself"));
    // Positive control: the file as written loads.
    let pool = empty_pool(&dir, "fine.db").await;
    assert_eq!(cli::load_text(&pool, FORWARD, TEST_NOW).await.unwrap().zones, 3);
}

#[tokio::test]
async fn introductions_at_a_time_round_trip_and_refusals() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    assert_eq!(admin.get("/api/v1/site").await.json()["site"]["introduction_capacity"], 2, "the default");
    let set = admin.patch_json("/api/v1/site", r#"{"introduction_capacity": 3}"#).await;
    assert_eq!(set.status, StatusCode::OK, "{}", set.text);
    assert_eq!(set.json()["site"]["introduction_capacity"], 3);
    assert_eq!(admin.get("/api/v1/site").await.json()["site"]["introduction_capacity"], 3);
    for (sent, shown) in [("0", "0"), ("21", "21"), ("\"21\"", "21")] {
        let a = admin.patch_json("/api/v1/site", &format!(r#"{{"introduction_capacity": {sent}}}"#)).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{sent}");
        let msg = format!("\"{shown}\" is outside 1 to 20: enter a whole number from 1 to 20");
        assert_eq!(fields(&a.json()), one("introduction_capacity", &msg));
    }
    assert_eq!(admin.get("/api/v1/site").await.json()["site"]["introduction_capacity"], 3, "unchanged");
    let twenty = admin.patch_json("/api/v1/site", r#"{"introduction_capacity": "20"}"#).await;
    assert_eq!(twenty.json()["site"]["introduction_capacity"], 20);

    // The settings form: the field shows the stored value; 0 is refused beside it, 5 is stored.
    assert!(admin.get("/admin").await.text.contains("name=\"introduction_capacity\" value=\"20\""));
    let form = |k: &str| {
        format!(
            "plant_name=Test+works&currency=EUR&hurdle_rate=10&default_horizon_months=60&expert_multiplier=3&introduction_capacity={k}"
        )
    };
    let zero = admin.post_form("/admin/settings", &form("0")).await;
    assert_eq!(zero.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        zero.text.contains("Error: &quot;0&quot; is outside 1 to 20: enter a whole number from 1 to 20</p>")
            || zero.text.contains("Error: &#34;0&#34; is outside 1 to 20: enter a whole number from 1 to 20</p>"),
        "{}",
        zero.text
    );
    let five = admin.post_form("/admin/settings", &form("5")).await;
    assert_eq!(five.status, StatusCode::SEE_OTHER, "{}", five.text);
    assert_eq!(db::get_site(&t.pool).await.unwrap().introduction_capacity, 5);
    let audit = admin.get("/admin/audit").await.text;
    assert!(audit.contains("time zone UTC, introductions at a time 5"), "{audit}");
}

#[tokio::test]
async fn the_demo_plant_has_areas_and_a_dependency() {
    let t = test_app(true).await;
    let zones = db::list_zones(&t.pool).await.unwrap();
    let areas: std::collections::BTreeSet<&str> = zones.iter().map(|z| z.area.as_str()).collect();
    assert_eq!(areas.into_iter().collect::<Vec<_>>(), ["assembly", "paint shop", "press shop"]);
    let needing: Vec<(&str, &[String])> =
        zones.iter().filter(|z| !z.needs.is_empty()).map(|z| (z.code.as_str(), z.needs.as_slice())).collect();
    assert_eq!(needing, [("EOL-1", &["ASSY-3".to_string()][..])]);
    assert_eq!(db::get_site(&t.pool).await.unwrap().introduction_capacity, 2);
}
