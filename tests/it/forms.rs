//! Forms as a browser sends them (issue 13, screens): one booking form per kind, errors beside
//! the form that caused them with a summary on top, the expert-time driver, the plant's time
//! zone and the audit trail in sentences.

use crate::helpers::{TestApp, test_app};
use crate::ledger::zone_with_baseline;
use axum::http::StatusCode;
use pilot_ledger::auth::Role;
use serde_json::json;

/// The action and body a browser sends for the form `id` of `page` unchanged but for
/// `values`: hidden and text inputs with their values, each select's selected (else first)
/// option, checked checkboxes only.
fn submit(page: &str, id: &str, values: &[(&str, &str)]) -> (String, String) {
    let start = page.find(&format!("<form id=\"{id}\"")).unwrap_or_else(|| panic!("no form {id}"));
    let form = &page[start..start + page[start..].find("</form>").unwrap()];
    let attr = |tag: &str, name: &str| -> Option<String> {
        let at = tag.find(&format!(" {name}=\""))? + name.len() + 3;
        Some(tag[at..at + tag[at..].find('"')?].replace("&amp;", "&"))
    };
    let action = attr(form, "action").unwrap();
    let mut fields: Vec<(String, String)> = Vec::new();
    for tag in form.split('<').skip(1) {
        let tag = &tag[..tag.find('>').unwrap_or(tag.len())];
        if let Some(rest) = tag.strip_prefix("input ") {
            let rest = format!(" {rest}");
            let checkbox = attr(&rest, "type").as_deref() == Some("checkbox");
            if checkbox && !rest.contains(" checked") {
                continue;
            }
            if let Some(name) = attr(&rest, "name") {
                fields.push((name, attr(&rest, "value").unwrap_or_default()));
            }
        } else if let Some(rest) = tag.strip_prefix("select ") {
            let name = attr(&format!(" {rest}"), "name").unwrap();
            let after = &form[form.find(tag).unwrap()..];
            let options = &after[..after.find("</select>").unwrap()];
            let chosen = options
                .split("<option ")
                .skip(1)
                .find(|o| o.contains(" selected"))
                .or_else(|| options.split("<option ").nth(1))
                .map(|o| attr(&format!(" {o}"), "value").unwrap_or_default())
                .unwrap_or_default();
            fields.push((name, chosen));
        }
    }
    for (name, value) in values {
        match fields.iter_mut().find(|(n, _)| n == name) {
            Some(f) => f.1 = value.to_string(),
            None => panic!("form {id} has no field {name}"),
        }
    }
    (action, serde_urlencoded::to_string(&fields).unwrap())
}

/// A direct saving of `quantity` kWh on the zone's energy driver for 2025-03, by the API.
async fn book_energy(t: &TestApp, z: &crate::ledger::Zone, quantity: &str) -> crate::helpers::Answer {
    let body = json!({"kind": "saving", "method": "direct", "item": z.energy, "period": "2025-03",
                      "quantity": quantity, "evidence": "meter"});
    t.post_json(&format!("/api/v1/zones/{}/ledger", z.id), &body.to_string()).await
}

/// A new zone `code` with an empty draft case (36 months from 2025-01): (zone id, case id).
async fn draft_case(t: &TestApp, code: &str) -> (i64, i64) {
    let z = t.post_json("/api/v1/zones", &json!({"code": code, "name": "Form zone"}).to_string()).await;
    let zone = z.json()["zone"]["id"].as_i64().unwrap();
    let case = json!({"label": "Base", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1,
                      "ramp_up_months": 0, "success_probability": "0.8"});
    let c = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await;
    assert_eq!(c.status, StatusCode::CREATED, "{}", c.text);
    (zone, c.json()["case"]["id"].as_i64().unwrap())
}

/// A form's values to fill in, and what the booked entry stores (kind, method, amount).
type Fields<'a> = &'a [(&'a str, &'a str)];
type Stored<'a> = (&'a str, &'a str, &'a str);

async fn count(t: &TestApp, sql: &'static str) -> i64 {
    sqlx::query_scalar(sql).fetch_one(&t.pool).await.unwrap()
}

#[tokio::test]
async fn each_kind_of_booking_books_on_the_first_submit_of_its_own_form() {
    let lead = test_app(false).await;
    let z = zone_with_baseline(&lead, "FRM-1").await;
    let t = lead.as_role(Some(Role::Controller));
    let path = format!("/zones/{}/ledger", z.id);
    let forms: [(&str, Fields, Stored); 3] = [
        (
            "book-direct",
            &[("period", "2025-03"), ("quantity", "1240"), ("evidence", "sub-meter M3")],
            ("saving", "direct", "248"),
        ),
        (
            "book-adjusted",
            &[
                ("period", "2025-04"),
                ("baseline_intensity", "41.5"),
                ("reporting_volume", "3100"),
                ("measured_consumption", "124000"),
                ("evidence", "main meter and press counter"),
            ],
            // 41.5 x 3100 - 124000 = 4650 kWh x 0.20 EUR = 930 EUR (by hand).
            ("saving", "normalized", "930"),
        ),
        // The spending form's cost item defaults to the first (Sensors); nothing else to choose.
        (
            "book-spending",
            &[("period", "2025-03"), ("amount", "13250"), ("evidence", "invoice 4711")],
            ("spending", "spend", "-13250"),
        ),
    ];
    for (n, (form, values, (kind, method, expected))) in forms.into_iter().enumerate() {
        let page = t.get(&path).await;
        assert_eq!(page.status, StatusCode::OK);
        let (action, body) = submit(&page.text, form, values);
        let a = t.post_form(&action, &body).await;
        assert_eq!(a.status, StatusCode::SEE_OTHER, "{form}: {}", a.text);
        let last: (String, String, String) =
            sqlx::query_as("SELECT kind, method, amount FROM ledger_entries ORDER BY id DESC LIMIT 1")
                .fetch_one(&t.pool)
                .await
                .unwrap();
        let amount = pilot_ledger::domain::NumberFormat::Plain.read(&last.2).unwrap().normalize().to_string();
        assert_eq!((last.0.as_str(), last.1.as_str(), amount.as_str()), (kind, method, expected), "{form}");
        assert_eq!(count(&t, "SELECT COUNT(*) FROM ledger_entries").await, n as i64 + 1);
    }
    // Each form asks for its own fields only.
    let page = t.get(&path).await.text;
    let spending = &page[page.find("<form id=\"book-spending\"").unwrap()..];
    let spending = &spending[..spending.find("</form>").unwrap()];
    for absent in ["name=\"method\"", "name=\"quantity\"", "name=\"baseline_intensity\"", "Benefit driver"] {
        assert!(!spending.contains(absent), "spending form shows {absent}");
    }
    let direct = &page[page.find("<form id=\"book-direct\"").unwrap()..];
    let direct = &direct[..direct.find("</form>").unwrap()];
    for absent in ["name=\"amount\"", "name=\"paid_on\"", "name=\"reporting_volume\"", "Cost item"] {
        assert!(!direct.contains(absent), "direct form shows {absent}");
    }
}

#[tokio::test]
async fn a_missing_field_is_named_beside_its_form_and_in_the_summary() {
    let lead = test_app(false).await;
    let z = zone_with_baseline(&lead, "FRM-2").await;
    let t = lead.as_role(Some(Role::Controller));
    let path = format!("/zones/{}/ledger", z.id);
    let page = t.get(&path).await;
    assert!(!page.text.contains("error-summary"), "no summary before a refusal");
    let (action, body) = submit(&page.text, "book-spending", &[("period", "2025-03"), ("evidence", "invoice 4712")]);
    let a = t.post_form(&action, &body).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    let message = "required: enter a number such as 1,250.75";
    // Beside the field, in the box beside the spending form, and in the summary linking to it.
    assert!(a.text.contains(&format!("id=\"spending-amount-error\">Error: {message}</p>")), "{}", a.text);
    assert!(a.text.contains(&format!("id=\"book-spending-problems\">\n  <p><strong>Book spending: nothing was saved.</strong></p>\n  <ul><li>amount: {message}</li></ul>")), "{}", a.text);
    assert!(
        a.text.contains(&format!("<li><a href=\"#book-spending-problems\">Book spending: amount: {message}</a></li>"))
    );
    // Not beside the other forms, and the summary comes first.
    assert!(!a.text.contains("book-direct-problems") && !a.text.contains("import-problems"));
    assert!(a.text.find("error-summary").unwrap() < a.text.find("<form id=\"book-direct\"").unwrap());
    assert_eq!(count(&t, "SELECT COUNT(*) FROM ledger_entries").await, 0);
    // Positive control: the same form with the amount books.
    let page = t.get(&path).await;
    let (action, body) =
        submit(&page.text, "book-spending", &[("period", "2025-03"), ("amount", "500"), ("evidence", "invoice 4712")]);
    assert_eq!(t.post_form(&action, &body).await.status, StatusCode::SEE_OTHER);
    assert_eq!(count(&t, "SELECT COUNT(*) FROM ledger_entries").await, 1);
}

#[tokio::test]
async fn a_refused_reversal_names_its_entry_beside_its_row() {
    let lead = test_app(false).await;
    let z = zone_with_baseline(&lead, "FRM-3").await;
    let t = lead.as_role(Some(Role::Controller));
    let path = format!("/zones/{}/ledger", z.id);
    let booked = book_energy(&t, &z, "100").await;
    assert_eq!(booked.status, StatusCode::CREATED, "{}", booked.text);
    let entry = booked.json()["entry"]["id"].as_i64().unwrap();
    let form = format!("reverse-{entry}");
    // No reason: 422, the message names the entry, beside its row and in the summary.
    let page = t.get(&path).await;
    let (action, body) = submit(&page.text, &form, &[]);
    let a = t.post_form(&action, &body).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    let message = format!("evidence: entry {entry}: required: why the entry is reversed, at most 80 characters");
    assert!(a.text.contains(&format!("id=\"{form}-problems\">\n  <p><strong>Reversal: nothing was saved.</strong></p>\n  <ul><li>{message}</li></ul>")), "{}", a.text);
    assert!(a.text.contains(&format!("<li><a href=\"#{form}-problems\">Reversal: {message}</a></li>")));
    assert!(!a.text.contains("book-direct-problems"), "not in the booking panel");
    // Positive control: with a reason it reverses.
    let page = t.get(&path).await;
    let (action, body) = submit(&page.text, &form, &[("evidence", "wrong meter")]);
    assert_eq!(t.post_form(&action, &body).await.status, StatusCode::SEE_OTHER);
    // Reversing it again (an old page's form): 409, the entry named.
    let again = t.post_form(&action.replace("form=", "form=x"), "evidence=twice").await;
    assert_eq!(again.status, StatusCode::CONFLICT);
    let said = format!("entry {entry} has already been reversed by entry {}", entry + 1);
    assert!(
        again.text.contains(&format!("<li><a href=\"#{form}-problems\">Reversal: {said}</a></li>")),
        "{}",
        again.text
    );
}

#[tokio::test]
async fn an_import_refusal_sits_beside_the_import_form() {
    let lead = test_app(false).await;
    let z = zone_with_baseline(&lead, "FRM-4").await;
    let t = lead.as_role(Some(Role::Controller));
    let a = t
        .send(
            axum::http::Request::post(format!("/zones/{}/ledger/import?form=t-1", z.id))
                .header("content-type", "multipart/form-data; boundary=X")
                .body(axum::body::Body::from("--X--\r\n"))
                .unwrap(),
        )
        .await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains("<li><a href=\"#import-problems\">Import a month from CSV: file: choose a CSV file</a></li>")
    );
    assert!(a.text.contains("id=\"import-problems\""));
    assert!(!a.text.contains("book-direct-problems"));
}

#[tokio::test]
async fn the_admin_and_case_forms_show_errors_beside_the_form_with_a_summary() {
    let t = test_app(false).await;
    let admin = t.as_role(Some(Role::Admin));
    let a = admin.post_form("/admin/tokens", "user=t-viewer&label=x&days=400").await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("<li><a href=\"#add-token-form-problems\">Create a token: days: a whole number of days from 1 to 365 (empty: 90)</a></li>"), "{}", a.text);
    assert!(!a.text.contains("settings-form-problems"));
    // Positive control.
    assert_eq!(admin.post_form("/admin/tokens", "user=t-viewer&label=x&days=30").await.status, StatusCode::OK);

    let (_, id) = draft_case(&t, "FRM-5").await;
    let a = t
        .post_form(&format!("/cases/{id}/costs"), "label=&category=hardware&kind=one_off&amount=100&month_offset=0")
        .await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains(
            "<li><a href=\"#add-cost-form-problems\">Add a cost item: label: required: enter some text</a></li>"
        ),
        "{}",
        a.text
    );
    assert!(a.text.contains("id=\"add-cost-form-problems\""));
    // The source field: too long is named beside the form; a note that fits is stored.
    let long = "n".repeat(301);
    let form = |source: &str| {
        format!("label=Gateway&category=hardware&kind=one_off&amount=100&month_offset=0&source={source}")
    };
    let a = t.post_form(&format!("/cases/{id}/costs"), &form(&long)).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains("<p class=\"error\" id=\"cost-source-error\">Error: at most 300 characters</p>"),
        "{}",
        a.text
    );
    let a = t.post_form(&format!("/cases/{id}/costs"), &form("quote+Q-7")).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER);
    let read = t.get(&format!("/api/v1/cases/{id}")).await.json();
    let costs = read["case"]["costs"].as_array().unwrap();
    assert_eq!(costs.last().unwrap()["source"], "quote Q-7");
}

/// Common practice (a rule of thumb of the trade, an upper bound, no published source): expert
/// hours freed = hours spent with the analytics x multiplier. Values worked by hand.
#[tokio::test]
async fn an_expert_time_driver_keeps_hours_and_multiplier_and_books_their_product() {
    let t = test_app(false).await;
    let (zone, id) = draft_case(&t, "EXP-1").await;
    // The form offers the site's multiplier (3 by default) and books 40 h x 3 = 120 h.
    let page = t.get(&format!("/cases/{id}/edit")).await;
    assert!(page.text.contains("Add expert time: hours spent with the analytics × multiplier"));
    let (action, body) = submit(
        &page.text,
        "add-expert-form",
        &[("label", "Analysis hours"), ("hours_spent", "40"), ("unit_value", "68")],
    );
    assert!(body.contains("hours_multiplier=3&"), "{body}");
    let a = t.post_form(&action, &body).await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    let d = &t.get(&format!("/api/v1/cases/{id}")).await.json()["case"]["drivers"][0];
    assert_eq!(
        (&d["kind"], &d["hours_spent"], &d["hours_multiplier"], &d["qty_low"], &d["qty_likely"], &d["qty_high"]),
        (&json!("expert_time"), &json!("40"), &json!("3"), &json!("120"), &json!("120"), &json!("120"))
    );
    // The site setting is the default: at 2.5, 12.5 h is 31.25 h; the first driver keeps 120.
    let a = t.as_role(Some(Role::Admin)).patch_json("/api/v1/site", r#"{"expert_multiplier": "2.5"}"#).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    let a = t
        .post_form(
            &format!("/cases/{id}/drivers"),
            "kind=expert_time&label=Review+hours&hours_spent=12.5&hours_multiplier=&qty_low=20&unit_value=68",
        )
        .await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);
    let c = t.get(&format!("/api/v1/cases/{id}")).await.json();
    let ds = c["case"]["drivers"].as_array().unwrap();
    assert_eq!((&ds[0]["qty_likely"], &ds[0]["hours_multiplier"]), (&json!("120"), &json!("3")));
    assert_eq!(
        (&ds[1]["hours_spent"], &ds[1]["hours_multiplier"], &ds[1]["qty_low"], &ds[1]["qty_likely"]),
        (&json!("12.5"), &json!("2.5"), &json!("20"), &json!("31.25"))
    );
    // The edit page shows both inputs.
    let page = t.get(&format!("/cases/{id}/edit")).await;
    assert!(page.text.contains("40 h spent with the analytics × 3 (rule of thumb, an upper bound)"), "{}", page.text);
    // A missing hours figure is named beside the expert form; the multiplier on another kind too.
    let a = t
        .post_form(
            &format!("/cases/{id}/drivers"),
            "kind=expert_time&label=X&hours_spent=&hours_multiplier=3&unit_value=68",
        )
        .await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("<li><a href=\"#add-expert-form-problems\">Add expert time: hours_spent: required with a multiplier: the hours a year spent with the analytics</a></li>"), "{}", a.text);
    // The API: a whole case with an expert driver, its multiplier given.
    let case = json!({"label": "API", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1,
                      "ramp_up_months": 0, "success_probability": "0.8",
                      "drivers": [{"label": "Hours", "kind": "expert_time", "hours_spent": 10, "hours_multiplier": "4",
                                   "unit_value": "50"}]});
    let a = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    let d = &a.json()["case"]["drivers"][0];
    assert_eq!(
        (&d["qty_likely"], &d["hours_spent"], &d["hours_multiplier"]),
        (&json!("40"), &json!("10"), &json!("4"))
    );
    let bad = json!({"label": "API", "horizon_months": 36, "start_month": "2025-01", "go_live_offset": 1,
                     "ramp_up_months": 0, "success_probability": "0.8",
                     "drivers": [{"label": "Hours", "kind": "scrap", "hours_spent": 10, "unit_value": "50"}]});
    let a = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &bad.to_string()).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "drivers[0].hours_spent", "message": "only for an expert time driver (kind expert_time)"}])
    );
}

#[tokio::test]
async fn a_scenario_file_carries_the_time_zone_and_the_expert_inputs() {
    let t = test_app(false).await;
    let file = r#"{"format":"pilot-ledger-scenario","version":1,
        "site":{"plant_name":"Test works","currency":"EUR","hurdle_rate":"0.1","expert_multiplier":"2","time_zone":"Asia/Tokyo"},
        "zones":[{"code":"SCN-1","name":"Scenario zone","cases":[{"label":"Base","horizon_months":24,"start_month":"2025-01",
          "go_live_offset":1,"ramp_up_months":0,"success_probability":"0.9",
          "drivers":[{"label":"Hours","kind":"expert_time","hours_spent":"30","unit_value":"60"}]}]}]}"#;
    pilot_ledger::cli::load_text(&t.pool, file, crate::helpers::TEST_NOW).await.unwrap();
    let site = t.as_role(Some(Role::Admin)).get("/api/v1/site").await.json();
    assert_eq!((&site["site"]["time_zone"], &site["site"]["expert_multiplier"]), (&json!("Asia/Tokyo"), &json!("2")));
    let (spent, multiplier, likely): (String, String, String) =
        sqlx::query_as("SELECT hours_spent, hours_multiplier, qty_likely FROM benefit_drivers WHERE label = 'Hours'")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    // 30 h x the file's multiplier 2 = 60 h.
    assert_eq!((spent.as_str(), multiplier.as_str(), likely.as_str()), ("30", "2", "60"));
    let bad = file.replace("Asia/Tokyo", "Asia/Atlantis").replace("SCN-1", "SCN-2");
    let e = pilot_ledger::cli::load_text(&t.pool, &bad, crate::helpers::TEST_NOW).await.unwrap_err().to_string();
    assert!(
        e.contains(
            "site.time_zone: \"Asia/Atlantis\" is not a time zone name of the IANA database, e.g. Europe/Berlin or UTC"
        ),
        "{e}"
    );
}

#[tokio::test]
async fn pages_show_the_plant_time_and_exports_keep_the_stored_value() {
    let lead = test_app(false).await;
    let admin = lead.as_role(Some(Role::Admin));
    // Refused: an unknown zone names the field; nothing changes (positive control below).
    let a = admin.patch_json("/api/v1/site", r#"{"time_zone": "Mars/Olympus"}"#).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert_eq!(
        a.json()["fields"],
        json!([{"field": "time_zone", "message": "\"Mars/Olympus\" is not a time zone name of the IANA database, e.g. Europe/Berlin or UTC"}])
    );
    // Japan keeps UTC+9 all year (tz database, Asia/Tokyo: no daylight saving time since 1951).
    let a = admin.patch_json("/api/v1/site", r#"{"time_zone": "Asia/Tokyo"}"#).await;
    assert_eq!((a.status, &a.json()["site"]["time_zone"]), (StatusCode::OK, &json!("Asia/Tokyo")));
    let z = zone_with_baseline(&lead, "TZ-1").await;
    let t = lead.as_role(Some(Role::Controller));
    let booked = book_energy(&t, &z, "120").await;
    assert_eq!(booked.status, StatusCode::CREATED);
    let stored: String = sqlx::query_scalar("SELECT booked_at FROM ledger_entries").fetch_one(&t.pool).await.unwrap();
    let at = time::OffsetDateTime::parse(&stored, &time::format_description::well_known::Rfc3339).unwrap();
    let tokyo = (at + time::Duration::hours(9))
        .format(time::macros::format_description!("[year]-[month]-[day] [hour]:[minute]"))
        .unwrap();
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await.text;
    assert!(page.contains(&format!("title=\"{stored}\">{tokyo}</time>")), "{tokyo} for {stored} not in the page");
    assert!(!page.contains(&format!(">{stored}<")), "the raw value is not shown as text");
    // The API and the CSV keep the exact stored value.
    assert_eq!(booked.json()["entry"]["booked_at"], json!(stored));
    let csv = t.get(&format!("/zones/{}/ledger.csv", z.id)).await.text;
    assert!(csv.contains(&format!(",{stored},t-controller")), "{csv}");
    // The audit trail: the same local time, and the booking as a sentence.
    let audit = admin.get("/admin/audit").await.text;
    assert!(audit.contains("t-controller booked 120 kWh on TZ-1 for 2025-03: Energy"), "{audit}");
    assert!(audit.contains("<th scope=\"col\">When (plant time)</th>"));
    // The settings form shows and validates the zone.
    let form = admin.get("/admin").await.text;
    assert!(form.contains("name=\"time_zone\" value=\"Asia/Tokyo\""));
    let a = admin
        .post_form(
            "/admin/settings",
            "plant_name=Test+works&currency=EUR&hurdle_rate=10&default_horizon_months=60&time_zone=Nowhere",
        )
        .await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(
        a.text.contains("id=\"time_zone-error\">Error: &#34;Nowhere&#34; is not a time zone name of the IANA database")
    );
}

#[tokio::test]
async fn the_zone_forms_show_errors_beside_the_form_with_a_summary() {
    let t = test_app(false).await;
    let a = t.post_form("/zones", "code=&name=New+zone").await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("<li><a href=\"#new-zone-form-problems\">Add a zone: code: 1 to 16 letters, digits or dashes, e.g. PRESS-2</a></li>"), "{}", a.text);
    assert!(a.text.contains("id=\"new-zone-form-problems\""));
    // Positive control.
    assert_eq!(t.post_form("/zones", "code=FRM-6&name=New+zone").await.status, StatusCode::SEE_OTHER);
    let id: i64 = sqlx::query_scalar("SELECT id FROM zones WHERE code = 'FRM-6'").fetch_one(&t.pool).await.unwrap();
    let a = t.post_form(&format!("/zones/{id}/readiness"), "score_data_reach=9").await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(a.text.contains("<li><a href=\"#readiness-form-problems\">Readiness scores: score_data_reach: &#34;9&#34; is outside 1 to 5: enter a whole number from 1 to 5; or leave it empty</a></li>"), "{}", a.text);
    assert!(!a.text.contains("zone-form-problems\""), "only the readiness form");
}
