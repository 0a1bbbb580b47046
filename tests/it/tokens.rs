//! Tokens with a life (issue 12, point 3): an expiry chosen at creation, the last use, the end
//! of a user's tokens and sessions at a password change or deactivation, and entries booked
//! with a token someone else made saying so, covered by the hash chain.

use crate::helpers::{Answer, TestApp, test_app};
use crate::ledger::{multipart, zone_with_baseline};
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use pilot_ledger::auth::Role;
use pilot_ledger::db;
use pilot_ledger::domain::chain::{EntryStamp, LEDGER_ENTRIES, Value as Cell, ledger_entry_row, row_hash};
use serde_json::{Value, json};
use time::Duration;

/// Send `req` with `Authorization: Bearer <token>` and no cookie.
async fn with_token(t: &TestApp, token: &str, mut req: Request<Body>) -> Answer {
    req.headers_mut().insert(header::AUTHORIZATION, format!("Bearer {token}").parse().unwrap());
    t.as_role(None).send(req).await
}

async fn get_with(t: &TestApp, token: &str, uri: &str) -> Answer {
    with_token(t, token, Request::get(uri).body(Body::empty()).unwrap()).await
}

async fn post_with(t: &TestApp, token: &str, uri: &str, body: &Value) -> Answer {
    let req =
        Request::post(uri).header(header::CONTENT_TYPE, "application/json").body(Body::from(body.to_string())).unwrap();
    with_token(t, token, req).await
}

/// Create a token on the admin page (as t-admin); the page shows it once.
async fn token_from_page(t: &TestApp, form: &str) -> String {
    let a = t.as_role(Some(Role::Admin)).post_form("/admin/tokens", form).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    let at = a.text.find("<code id=\"new-token\">").expect("the new token is shown") + 21;
    a.text[at..].chars().take_while(|c| *c != '<').collect()
}

async fn scalar<T>(t: &TestApp, sql: &'static str) -> T
where
    T: for<'r> sqlx::Decode<'r, sqlx::Sqlite> + sqlx::Type<sqlx::Sqlite> + Send + Unpin,
{
    sqlx::query_scalar(sql).fetch_one(&t.pool).await.unwrap()
}

fn rfc3339(at: time::OffsetDateTime) -> String {
    at.format(&time::format_description::well_known::Rfc3339).unwrap()
}

#[tokio::test]
async fn a_token_works_for_the_days_chosen_at_creation_then_says_it_expired() {
    let t = test_app(false).await;
    let made = t.now();
    let token = token_from_page(&t, "user=t-viewer&label=report&days=30").await;
    let expires: String = scalar(&t, "SELECT expires_at FROM api_tokens ORDER BY id DESC LIMIT 1").await;
    assert_eq!(expires, rfc3339(made + Duration::days(30)));
    assert_eq!(get_with(&t, &token, "/api/v1/zones").await.status, StatusCode::OK);

    // Positive control: the day before it expires, it still works.
    t.clock.advance(Duration::days(29));
    assert_eq!(get_with(&t, &token, "/api/v1/zones").await.status, StatusCode::OK);
    // From the moment of its expiry: 401 that says so and when.
    t.clock.advance(Duration::days(1));
    let a = get_with(&t, &token, "/api/v1/zones").await;
    assert_eq!(a.status, StatusCode::UNAUTHORIZED);
    let day = (made + Duration::days(30)).date();
    assert_eq!(
        a.json(),
        json!({"error": format!("this token expired on {day}; ask an admin for a new one"), "fields": []})
    );
    // RFC 6750 section 3: an expired token is an invalid_token.
    assert_eq!(a.headers[header::WWW_AUTHENTICATE], "Bearer error=\"invalid_token\"");
    // An unknown token keeps the plain answer.
    let unknown = get_with(&t, "plt_not-a-token", "/api/v1/zones").await;
    assert_eq!(unknown.status, StatusCode::UNAUTHORIZED);
    assert_eq!(unknown.json()["error"], "sign in first, or send a valid API token as Authorization: Bearer <token>");
}

#[tokio::test]
async fn a_token_lives_90_days_unless_chosen_and_at_most_a_year() {
    let t = test_app(false).await;
    let made = t.now();
    token_from_page(&t, "user=t-viewer&label=default").await;
    let expires: String = scalar(&t, "SELECT expires_at FROM api_tokens ORDER BY id DESC LIMIT 1").await;
    assert_eq!(expires, rfc3339(made + Duration::days(90)));

    let admin = t.as_role(Some(Role::Admin));
    let rule = "a whole number of days from 1 to 365 (empty: 90)";
    for days in ["366", "0", "-1", "30.5", "ninety"] {
        let a = admin.post_form("/admin/tokens", &format!("user=t-viewer&label=long&days={days}")).await;
        assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{days}");
        assert!(a.text.contains(&format!("Error: {rule}")), "{days}: {}", a.text);
    }
    assert_eq!(scalar::<i64>(&t, "SELECT COUNT(*) FROM api_tokens").await, 1, "refused forms made no token");
    // Positive control: a year is accepted.
    token_from_page(&t, "user=t-viewer&label=long&days=365").await;
    let expires: String = scalar(&t, "SELECT expires_at FROM api_tokens ORDER BY id DESC LIMIT 1").await;
    assert_eq!(expires, rfc3339(made + Duration::days(365)));
    // The app layer (the CLI's path) applies the same rule.
    let e = pilot_ledger::app::users::issue_token(&t.pool, "test", "t-viewer", "cli", 400, made).await.unwrap_err();
    assert_eq!(e.to_string(), format!("some fields are not valid: days: {rule}"));
}

#[tokio::test]
async fn the_admin_page_shows_expiry_and_last_use_to_the_minute() {
    let t = test_app(false).await;
    let made = t.now();
    let token = token_from_page(&t, "user=t-viewer&label=report&days=7").await;
    // The test site's time zone is UTC (the default): local time is the stored minute.
    let minute = time::macros::format_description!("[year]-[month]-[day] [hour]:[minute]");
    let stamp = |at: time::OffsetDateTime| {
        format!(
            "<time datetime=\"{}\" title=\"{}\">{}</time>",
            at.format(time::macros::format_description!("[year]-[month]-[day]T[hour]:[minute]:[second]Z")).unwrap(),
            rfc3339(at),
            at.format(&minute).unwrap()
        )
    };
    let admin = t.as_role(Some(Role::Admin));
    let row = |page: &str| {
        let at = page.find("<td>report</td>").expect("the token's row");
        page[at..page[at..].find("</tr>").unwrap() + at].to_string()
    };
    let expires = stamp(made + Duration::days(7));
    let page = admin.get("/admin").await.text;
    assert!(row(&page).contains(&format!("<td>{expires}</td><td>never</td>")), "{}", row(&page));

    assert_eq!(get_with(&t, &token, "/api/v1/zones").await.status, StatusCode::OK);
    let first: String = scalar(&t, "SELECT last_used_at FROM api_tokens").await;
    assert_eq!(first, rfc3339(t.now()));
    // Within a minute the row is not written again; after one it is.
    t.clock.advance(Duration::seconds(59));
    get_with(&t, &token, "/api/v1/zones").await;
    assert_eq!(scalar::<String>(&t, "SELECT last_used_at FROM api_tokens").await, first);
    t.clock.advance(Duration::seconds(2));
    get_with(&t, &token, "/api/v1/zones").await;
    let used = t.now();
    assert_eq!(scalar::<String>(&t, "SELECT last_used_at FROM api_tokens").await, rfc3339(used));
    let page = admin.get("/admin").await.text;
    let shown = stamp(used);
    assert!(row(&page).contains(&format!("<td>{expires}</td><td>{shown}</td>")), "{}", row(&page));
    assert!(!row(&page).contains("(expired)"));
    // Past its expiry the list says so.
    t.clock.advance(Duration::days(7));
    let page = t.as_new_user("admin-2", Role::Admin).await.get("/admin").await.text;
    assert!(row(&page).contains(&format!("<td>{expires} <span class=\"cue\">(expired)</span></td>")), "{}", row(&page));
}

#[tokio::test]
async fn a_password_reset_ends_the_users_sessions_and_tokens_at_once() {
    let t = test_app(false).await;
    let viewer_token = token_from_page(&t, "user=t-viewer&label=report").await;
    let other_token = token_from_page(&t, "user=t-controller&label=load").await;
    let viewer = t.as_role(Some(Role::Viewer));
    // Positive control: all three work before.
    assert_eq!(viewer.get("/api/v1/zones").await.status, StatusCode::OK);
    assert_eq!(get_with(&t, &viewer_token, "/api/v1/zones").await.status, StatusCode::OK);
    assert_eq!(get_with(&t, &other_token, "/api/v1/zones").await.status, StatusCode::OK);

    let id: i64 = scalar(&t, "SELECT id FROM users WHERE name = 't-viewer'").await;
    let a = t
        .as_role(Some(Role::Admin))
        .post_form(&format!("/admin/users/{id}/password"), "password=a+new+long+passphrase")
        .await;
    assert_eq!(a.status, StatusCode::SEE_OTHER, "{}", a.text);

    assert_eq!(get_with(&t, &viewer_token, "/api/v1/zones").await.status, StatusCode::UNAUTHORIZED);
    assert_eq!(viewer.get("/api/v1/zones").await.status, StatusCode::UNAUTHORIZED);
    let page = viewer.get("/zones").await;
    assert_eq!(page.status, StatusCode::SEE_OTHER, "signed out: sent to sign in");
    assert!(page.location.as_deref().unwrap().starts_with("/login"), "{:?}", page.location);
    // Another user's token still works.
    assert_eq!(get_with(&t, &other_token, "/api/v1/zones").await.status, StatusCode::OK);

    let trail: Vec<(String, String, String)> = sqlx::query_as(
        "SELECT action, subject, detail FROM audit_log WHERE action IN ('user.password', 'token.revoke') ORDER BY id",
    )
    .fetch_all(&t.pool)
    .await
    .unwrap();
    let token_id: i64 =
        scalar(&t, "SELECT t.id FROM api_tokens t JOIN users u ON u.id = t.user_id WHERE u.name = 't-viewer'").await;
    assert_eq!(
        trail,
        [
            ("token.revoke".into(), format!("token {token_id}"), "of t-viewer: password changed".into()),
            (
                "user.password".into(),
                format!("user {id}"),
                format!("t-viewer; sessions ended; revoked token {token_id}")
            ),
        ]
    );
    let revoked: (Option<String>, Option<String>) =
        sqlx::query_as("SELECT revoked_at, revoked_by FROM api_tokens WHERE id = ?")
            .bind(token_id)
            .fetch_one(&t.pool)
            .await
            .unwrap();
    assert!(revoked.0.is_some());
    assert_eq!(revoked.1.as_deref(), Some("t-admin"));
    // The new password signs in; the revoked token stays revoked.
    assert!(t.sign_in("t-viewer", "a new long passphrase").await.is_some());
    assert_eq!(get_with(&t, &viewer_token, "/api/v1/zones").await.status, StatusCode::UNAUTHORIZED);
}

/// Book, reverse and import with a token the admin made for the controller; the controller's
/// own token (positive control) books without the mark.
#[tokio::test]
async fn entries_booked_with_a_token_someone_else_made_say_so() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "OBO-1").await;
    let by_admin = token_from_page(&t, "user=t-controller&label=on+behalf").await;
    let (_, own) = pilot_ledger::app::users::issue_token(&t.pool, "t-controller", "t-controller", "own", 90, t.now())
        .await
        .unwrap();
    let page = t.as_role(Some(Role::Admin)).get("/admin").await.text;
    assert!(page.contains("by t-admin <span class=\"cue\">(entries it books say so)</span>"));
    assert_eq!(page.matches("(entries it books say so)").count(), 1, "not the controller's own token");

    let uri = format!("/api/v1/zones/{}/ledger", z.id);
    let saving = |q: &str| {
        json!({"kind": "saving", "method": "direct", "item": z.energy, "period": "2025-03", "quantity": q,
               "evidence": "sub-meter M3 reading"})
    };
    let a = post_with(&t, &by_admin, &uri, &saving("100")).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    let entry = &a.json()["entry"];
    assert_eq!((&entry["booked_by"], &entry["on_behalf_by"]), (&json!("t-controller"), &json!("t-admin")));
    let booked = entry["id"].as_i64().unwrap();
    let a = post_with(&t, &own, &uri, &saving("50")).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    assert_eq!(
        (&a.json()["entry"]["booked_by"], &a.json()["entry"]["on_behalf_by"]),
        (&json!("t-controller"), &Value::Null)
    );

    let r = post_with(&t, &by_admin, &format!("{uri}/{booked}/reverse"), &json!({"evidence": "meter misread"})).await;
    assert_eq!(r.status, StatusCode::CREATED, "{}", r.text);
    assert_eq!(r.json()["entry"]["on_behalf_by"], "t-admin");

    let csv = "period,kind,item,method,quantity,baseline_intensity,reporting_volume,measured_consumption,amount,evidence\n\
               2025-04,saving,Energy,direct,70,,,,,meter M1\n";
    let mut req = multipart("april.csv", csv);
    *req.uri_mut() = format!("/zones/{}/ledger/import?form={}", z.id, crate::helpers::form_token()).parse().unwrap();
    let i = with_token(&t, &by_admin, req).await;
    assert_eq!(i.status, StatusCode::SEE_OTHER, "{}", i.text);

    // The ledger API, the page and the CSV export.
    let entries = t.get(&uri).await.json()["entries"].clone();
    let marks: Vec<(String, Value)> = entries
        .as_array()
        .unwrap()
        .iter()
        .map(|e| (e["evidence"].as_str().unwrap().to_string(), e["on_behalf_by"].clone()))
        .collect();
    assert_eq!(
        marks,
        [
            ("sub-meter M3 reading".into(), json!("t-admin")),
            ("sub-meter M3 reading".into(), Value::Null),
            ("meter misread".into(), json!("t-admin")),
            ("meter M1".into(), json!("t-admin")),
        ]
    );
    let page = t.get(&format!("/zones/{}/ledger", z.id)).await.text;
    assert_eq!(page.matches("booked by t-admin on behalf of t-controller").count(), 3);
    assert_eq!(page.matches("booked by t-controller</td>").count(), 1);
    let export = t.get(&format!("/zones/{}/ledger.csv", z.id)).await.text;
    let lines: Vec<&str> = export.lines().collect();
    assert!(lines[0].ends_with(",booked_by,on_behalf_by"), "{}", lines[0]);
    let ends: Vec<&str> = lines[1..].iter().map(|l| l.rsplit(',').next().unwrap()).collect();
    assert_eq!(ends, ["t-admin", "", "t-admin", "t-admin"]);

    // The audit trail.
    let details: Vec<(String, String)> = sqlx::query_as(
        "SELECT action, detail FROM audit_log WHERE action LIKE 'ledger.%' AND actor = 't-controller' ORDER BY id",
    )
    .fetch_all(&t.pool)
    .await
    .unwrap();
    let note = "; booked by t-admin on behalf of t-controller (with a token t-admin issued)";
    assert_eq!(details.len(), 4);
    assert!(details[0].1.ends_with(note), "{:?}", details[0]);
    assert!(!details[1].1.contains("on behalf"), "{:?}", details[1]);
    assert_eq!(details[2], ("ledger.reverse".into(), format!("reverses entry {booked}{note}")));
    assert_eq!(details[3], ("ledger.import".into(), format!("april.csv: 1 rows{note}")));
    let issued: String =
        scalar(&t, "SELECT detail FROM audit_log WHERE action = 'token.create' ORDER BY id LIMIT 1").await;
    assert!(issued.ends_with("; issued by t-admin for someone else: entries it books say so"), "{issued}");

    // The mark is chained: the ledger verifies, and removing the mark behind the app's back is found.
    let v = db::verify(&t.pool).await.unwrap();
    assert!(v.problems.is_empty(), "{:?}", v.problems);
    let path = t.pool.connect_options().get_filename().display().to_string();
    let mut raw = <sqlx::SqliteConnection as sqlx::Connection>::connect(&format!("sqlite://{path}")).await.unwrap();
    sqlx::query("DROP TRIGGER ledger_entries_no_update").execute(&mut raw).await.unwrap();
    sqlx::query("UPDATE ledger_entries SET on_behalf_by = NULL WHERE id = ?")
        .bind(booked)
        .execute(&mut raw)
        .await
        .unwrap();
    let v = db::verify(&t.pool).await.unwrap();
    assert_eq!(
        v.problems[0].to_string(),
        format!(
            "ledger_entries id {booked}: its content does not match its hash: the row was changed, or a row before it \
             was changed, removed or inserted"
        )
    );
}

/// The update trigger names the new column: it cannot be set on an existing row.
#[tokio::test]
async fn the_mark_cannot_be_added_to_an_entry_afterwards() {
    let t = test_app(false).await;
    let z = zone_with_baseline(&t, "OBO-2").await;
    let body = json!({"kind": "saving", "method": "direct", "item": z.energy, "period": "2025-03", "quantity": "10",
                      "evidence": "meter"});
    let a =
        t.as_role(Some(Role::Controller)).post_json(&format!("/api/v1/zones/{}/ledger", z.id), &body.to_string()).await;
    assert_eq!(a.status, StatusCode::CREATED, "{}", a.text);
    let e = sqlx::query("UPDATE ledger_entries SET on_behalf_by = 'someone'").execute(&t.pool).await.unwrap_err();
    assert!(e.to_string().contains("ledger entries are append-only"), "{e}");
}

/// Rows chained before migration 0013 were hashed without `on_behalf_by`; after it they read
/// NULL, which the encoding leaves out, so their stored hashes still verify.
#[tokio::test]
async fn entries_chained_before_the_column_still_verify() {
    let dir = tempfile::tempdir().unwrap();
    let pool = crate::helpers::pool_before(dir.path(), "0013").await;
    for sql in crate::chain::OLD_ZONE {
        sqlx::query(sql).execute(&pool).await.unwrap();
    }
    // Written as the code before 0013 wrote them: the row without the column, chained.
    let mut prev: Option<String> = None;
    for id in 1..=2 {
        let entry = pilot_ledger::domain::NewEntry {
            case_id: 1,
            item: pilot_ledger::domain::LedgerItem::Driver(pilot_ledger::domain::DriverId(1)),
            period: pilot_ledger::domain::Month::parse("2025-02").unwrap(),
            method: pilot_ledger::domain::Method::Direct,
            quantity: Some(rust_decimal::Decimal::from(100 * id)),
            unit_value: Some(rust_decimal::Decimal::new(2, 1)),
            amount: rust_decimal::Decimal::from(20 * id),
            inputs: [None; 3],
            evidence: "meter".into(),
            paid_on: None,
            implausible_confirmed: false,
        };
        let stamp = EntryStamp {
            id,
            zone_id: 1,
            reverses_id: None,
            idempotency_key: None,
            import_id: None,
            booked_at: "2026-01-01T00:00:00Z",
            booked_by: "u",
            on_behalf_by: None,
        };
        let row: Vec<_> = ledger_entry_row(&entry, &stamp)
            .into_iter()
            .filter(|(n, v)| *n != "on_behalf_by" && *v != Cell::Null)
            .collect();
        let hash = row_hash(LEDGER_ENTRIES, prev.as_deref(), &row);
        let names: Vec<&str> = row.iter().map(|(n, _)| *n).collect();
        let values: Vec<String> = row
            .iter()
            .map(|(_, v)| match v {
                Cell::Integer(i) => i.to_string(),
                Cell::Text(s) => format!("'{}'", s.replace('\'', "''")),
                Cell::Null => "NULL".into(),
            })
            .collect();
        let sql =
            format!("INSERT INTO ledger_entries ({}, hash) VALUES ({}, '{hash}')", names.join(", "), values.join(", "));
        sqlx::query(sqlx::AssertSqlSafe(sql)).execute(&pool).await.unwrap();
        prev = Some(hash);
    }
    db::migrate(&pool).await.unwrap();
    let v = db::verify(&pool).await.unwrap();
    assert!(v.problems.is_empty(), "{:?}", v.problems);
    assert_eq!(v.entries, 2);
    assert_eq!(v.ledger_tip.hash, prev);
    let marks: Vec<Option<String>> =
        sqlx::query_scalar("SELECT on_behalf_by FROM ledger_entries").fetch_all(&pool).await.unwrap();
    assert_eq!(marks, [None, None]);
}

/// Tokens made before migration 0013 never expired: they get 90 days from the migration.
#[tokio::test]
async fn tokens_from_before_the_expiry_get_ninety_days() {
    let dir = tempfile::tempdir().unwrap();
    let pool = crate::helpers::pool_before(dir.path(), "0013").await;
    let hash = pilot_ledger::auth::hash_password(crate::helpers::PASSWORD).unwrap();
    let mut tx = db::begin_write(&pool).await.unwrap();
    db::insert_user(&mut tx, "old-viewer", Role::Viewer, &hash, "t", "test").await.unwrap();
    tx.commit().await.unwrap();
    sqlx::query(
        "INSERT INTO api_tokens (user_id, label, token_hash, created_at, created_by)
         SELECT id, 'old', 'h', '2025-01-01T00:00:00Z', 'test' FROM users WHERE name = 'old-viewer'",
    )
    .execute(&pool)
    .await
    .unwrap();
    let before = time::OffsetDateTime::now_utc().replace_nanosecond(0).unwrap();
    db::migrate(&pool).await.unwrap();
    let after = time::OffsetDateTime::now_utc();
    let expires: String = sqlx::query_scalar("SELECT expires_at FROM api_tokens").fetch_one(&pool).await.unwrap();
    let expires = time::OffsetDateTime::parse(&expires, &time::format_description::well_known::Rfc3339).unwrap();
    assert!(expires >= before + Duration::days(90) && expires <= after + Duration::days(90), "{expires}");
    // A token cannot be stored without an expiry any more.
    let e = sqlx::query(
        "INSERT INTO api_tokens (user_id, label, token_hash, created_at, created_by)
         SELECT id, 'new', 'h2', 't', 'test' FROM users WHERE name = 'old-viewer'",
    )
    .execute(&pool)
    .await
    .unwrap_err();
    assert!(e.to_string().contains("an API token needs an expiry"), "{e}");
}
