//! The suite's date-dependent rules at two dates years apart, on the injected clock: the month
//! that can be booked, elapsed months, approval and booking stamps, a new draft's start month,
//! token expiry and the baseline history. Every expected month and string below is worked
//! out by hand from the row's date (not by the code under test).

use crate::helpers::test_app_at;
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use pilot_ledger::auth::Role;
use serde_json::{Value, json};
use time::macros::datetime;

/// One date and what follows from it by hand.
struct Row {
    now: time::OffsetDateTime,
    /// `now` as stored (RFC 3339 UTC).
    stamp: &'static str,
    /// The case: start month and horizon (covering `now`).
    start: &'static str,
    horizon: u32,
    /// `now`'s month, and the month after it.
    month: &'static str,
    next: &'static str,
    /// Months from `start` to `month`, both counted.
    elapsed: u64,
    /// 30 days after `now`, as stored, and its date.
    expires: &'static str,
    expiry_day: &'static str,
}

const ROWS: [Row; 2] = [
    Row {
        now: datetime!(2026-11-15 10:00:00 UTC),
        stamp: "2026-11-15T10:00:00Z",
        start: "2026-01",
        horizon: 24,
        month: "2026-11",
        next: "2026-12",
        // 2026-01 to 2026-11: 11 months.
        elapsed: 11,
        // November has 30 days: 15 + 30 = 45 = 30 + 15, so 2026-12-15.
        expires: "2026-12-15T10:00:00Z",
        expiry_day: "2026-12-15",
    },
    Row {
        now: datetime!(2031-02-10 08:30:00 UTC),
        stamp: "2031-02-10T08:30:00Z",
        start: "2030-06",
        horizon: 24,
        month: "2031-02",
        next: "2031-03",
        // 2030-06 to 2030-12 is 7 months, then 2031-01 and 2031-02: 9.
        elapsed: 9,
        // 2031 is not a leap year, February has 28 days: 10 + 30 = 40 = 28 + 12, so 2031-03-12.
        expires: "2031-03-12T08:30:00Z",
        expiry_day: "2031-03-12",
    },
];

#[tokio::test]
async fn date_rules_hold_at_two_dates_years_apart() {
    for row in &ROWS {
        check(row).await;
    }
}

async fn check(row: &Row) {
    let t = test_app_at(false, row.now).await;
    let (admin, controller) = (t.as_role(Some(Role::Admin)), t.as_role(Some(Role::Controller)));
    let at = row.stamp;

    // A new draft from the zone page starts the month after today.
    let z = t.post_json("/api/v1/zones", &json!({"code": "DATE-1", "name": "Dated zone"}).to_string()).await;
    assert_eq!(z.status, StatusCode::CREATED, "{at}: {}", z.text);
    let zone = z.json()["zone"]["id"].as_i64().unwrap();
    assert_eq!(z.json()["zone"]["created_at"], at, "{at}");
    let draft = t.post_form(&format!("/zones/{zone}/cases"), "").await;
    assert_eq!(draft.status, StatusCode::SEE_OTHER, "{at}: {}", draft.text);
    let draft_id: i64 =
        draft.location.unwrap().trim_start_matches("/cases/").trim_end_matches("/edit").parse().unwrap();
    let d = t.get(&format!("/api/v1/cases/{draft_id}")).await.json();
    assert_eq!(d["case"]["start_month"], row.next, "{at}");

    // A case covering today, approved by a second person: stamped with the clock's time and
    // in force from today's month (nothing booked yet).
    let case = json!({
        "label": "Base", "horizon_months": row.horizon, "start_month": row.start, "go_live_offset": 0,
        "ramp_up_months": 0, "success_probability": "0.8", "costs": [],
        "drivers": [{"label": "Energy", "kind": "energy", "qty_low": "100000", "qty_likely": "120000",
                     "qty_high": "140000", "unit_value": "0.20"}]
    });
    let c = t.post_json(&format!("/api/v1/zones/{zone}/cases"), &case.to_string()).await;
    assert_eq!(c.status, StatusCode::CREATED, "{at}: {}", c.text);
    let c = c.json();
    let (v1, energy) = (c["case"]["id"].as_i64().unwrap(), c["case"]["drivers"][0]["id"].as_i64().unwrap());
    assert_eq!(t.post_json(&format!("/api/v1/cases/{v1}/submit"), "{}").await.status, StatusCode::OK);
    let ok = admin.post_json(&format!("/api/v1/cases/{v1}/approve"), "{}").await;
    assert_eq!(ok.status, StatusCode::OK, "{at}: {}", ok.text);
    assert_eq!(ok.json()["case"]["approved_at"], at);
    assert_eq!(ok.json()["case"]["submitted_at"], at);
    assert_eq!(ok.json()["case"]["in_force_from"], row.month, "{at}");
    for status in ["piloting", "measuring"] {
        let s = t.post_json(&format!("/api/v1/zones/{zone}/status"), &json!({ "status": status }).to_string()).await;
        assert_eq!(s.status, StatusCode::OK, "{at}: {}", s.text);
    }

    // The month after today is refused as in the future; today's month is booked (the
    // positive control), stamped with the clock's time.
    let book = |period: &str| {
        json!({"kind": "saving", "method": "direct", "item": energy, "period": period, "quantity": "9000",
               "evidence": "meter"})
        .to_string()
    };
    let ledger = format!("/api/v1/zones/{zone}/ledger");
    let a = controller.post_json(&ledger, &book(row.next)).await;
    assert_eq!(a.status, StatusCode::UNPROCESSABLE_ENTITY, "{at}: {}", a.text);
    let message = format!("{} is in the future; the latest month that can be booked is {}", row.next, row.month);
    assert_eq!(a.json()["fields"], json!([{"field": "period", "message": message}]), "{at}");
    let a = controller.post_json(&ledger, &book(row.month)).await;
    assert_eq!(a.status, StatusCode::CREATED, "{at}: {}", a.text);
    assert_eq!(a.json()["entry"]["booked_at"], at);
    // 9,000 kWh x 0.20 EUR = 1,800 EUR.
    assert_eq!(a.json()["entry"]["amount"], "1800");
    let l = t.get(&ledger).await.json();
    assert_eq!(l["realized"]["elapsed_months"], json!(row.elapsed), "{at}: {}", l["realized"]);

    // A second baseline approved after today's booking is in force from the next month; the
    // first keeps today's month.
    let copy = t.post_json(&format!("/api/v1/cases/{v1}/copy"), r#"{"label":"Second"}"#).await.json();
    let v2 = copy["case"]["id"].as_i64().unwrap();
    assert_eq!(t.post_json(&format!("/api/v1/cases/{v2}/submit"), "{}").await.status, StatusCode::OK);
    let ok = admin.post_json(&format!("/api/v1/cases/{v2}/approve"), "{}").await;
    assert_eq!(ok.status, StatusCode::OK, "{at}: {}", ok.text);
    assert_eq!(ok.json()["case"]["in_force_from"], row.next, "{at}");
    let l: Value = t.get(&ledger).await.json();
    assert_eq!(l["baselines"][0]["in_force_from"], row.start, "{at}");
    assert_eq!(l["baselines"][0]["in_force_until"], row.month, "{at}");
    assert_eq!(l["baselines"][1]["in_force_from"], row.next, "{at}");

    // A token for 30 days expires 30 days after the clock's time, to the second.
    let (_, token) =
        pilot_ledger::app::users::issue_token(&t.pool, "test", "t-viewer", "report", 30, t.now()).await.unwrap();
    let expires: String = sqlx::query_scalar("SELECT expires_at FROM api_tokens ORDER BY id DESC LIMIT 1")
        .fetch_one(&t.pool)
        .await
        .unwrap();
    assert_eq!(expires, row.expires);
    let anon = t.as_role(None);
    let get = |token: &str| {
        Request::get("/api/v1/zones")
            .header(header::AUTHORIZATION, format!("Bearer {token}"))
            .body(Body::empty())
            .unwrap()
    };
    // Positive control: one second before, it works; at its expiry it says so and when.
    t.clock.advance(time::Duration::days(30) - time::Duration::seconds(1));
    assert_eq!(anon.send(get(&token)).await.status, StatusCode::OK, "{at}");
    t.clock.advance(time::Duration::seconds(1));
    let a = anon.send(get(&token)).await;
    assert_eq!(a.status, StatusCode::UNAUTHORIZED, "{at}");
    let message = format!("this token expired on {}; ask an admin for a new one", row.expiry_day);
    assert_eq!(a.json(), json!({"error": message, "fields": []}), "{at}");
}
