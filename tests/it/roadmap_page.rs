//! The roadmap page, its CSV and the portfolio's planned start: read by a viewer, set and
//! saved by the lead, refused beside the form; the browser journey and the layout at 1440 px.
//!
//! The fixture is small enough to check by hand: plan start 2027-01, two plan years, budget
//! 100,000 a year, introductions at a time 2 (the site's default).
//! - PRESS-9, measuring, baseline from 2026-09 (plan month -4), go-live 2 + ramp-up 1: inside
//!   its window 2026-09 .. 2026-11, live 2026-12; one-off 10,000 at its month 0 (before the
//!   plan: no budget) and 5,000 at month 4 = 2027-01 (plan year 1).
//! - PAINT-9, candidate, one-off 20,000 at its month 0, a clearly positive NPV: nothing binds,
//!   so it starts in the first quarter, 2027-01, window 3 + 2 months, live 2027-06.
//! - WELD-9, candidate, one-off 50,000 against a benefit of 1 a year: its value is not positive.
//!
//! Capital use in plan year 1: 5,000 + 20,000 = 25,000, so 75,000 is left; with carry-over,
//! 75,000 + 100,000 = 175,000 is left after plan year 2.

use crate::browser::{browser, click_button, fill, sign_in};
use crate::helpers::{TestApp, test_app};
use axum::http::StatusCode;
use fantoccini::Locator;
use pilot_ledger::auth::Role;

const FIXTURE: &str = r#"{"format":"pilot-ledger-scenario","version":1,"zones":[
 {"code":"PRESS-9","name":"Press 9","owner":"Test owner","status":"measuring","description":"Committed.",
  "cases":[{"label":"Base","horizon_months":36,"start_month":"2026-09","go_live_offset":2,"ramp_up_months":1,
   "success_probability":"0.9","state":"approved",
   "costs":[{"label":"Sensors","category":"hardware","kind":"one_off","amount":"10000","month_offset":0,"escalation":"0","capex":true},
            {"label":"Training","category":"training","kind":"one_off","amount":"5000","month_offset":4,"escalation":"0","capex":false}],
   "drivers":[{"label":"Scrap","kind":"scrap","unit":"pcs","qty_low":"900","qty_likely":"1000","qty_high":"1100","unit_value":"20","escalation":"0"}]}]},
 {"code":"PAINT-9","name":"Paint booth 9","owner":"Test owner","status":"candidate","description":"Good.",
  "cases":[{"label":"Base","horizon_months":36,"start_month":"2027-01","go_live_offset":3,"ramp_up_months":2,
   "success_probability":"0.9","state":"draft",
   "costs":[{"label":"Sensors","category":"hardware","kind":"one_off","amount":"20000","month_offset":0,"escalation":"0","capex":true}],
   "drivers":[{"label":"Scrap","kind":"scrap","unit":"pcs","qty_low":"4000","qty_likely":"5000","qty_high":"6000","unit_value":"10","escalation":"0"}]}]},
 {"code":"WELD-9","name":"Weld cell 9","owner":"Test owner","status":"candidate","description":"Poor.",
  "cases":[{"label":"Base","horizon_months":36,"start_month":"2027-01","go_live_offset":3,"ramp_up_months":2,
   "success_probability":"0.9","state":"draft",
   "costs":[{"label":"Sensors","category":"hardware","kind":"one_off","amount":"50000","month_offset":0,"escalation":"0","capex":true}],
   "drivers":[{"label":"Scrap","kind":"scrap","unit":"pcs","qty_low":"1","qty_likely":"1","qty_high":"1","unit_value":"1","escalation":"0"}]}]}]}"#;

/// The fixture's inputs as the form sends them.
const INPUTS: &str = "start=2027-01&years=2&budgets=100000&capacity=&basis=npv&time_limit=&carry_over=true";

async fn fixture() -> TestApp {
    let t = test_app(false).await;
    pilot_ledger::cli::load_text(&t.pool, FIXTURE, crate::helpers::TEST_NOW).await.unwrap();
    t
}

async fn stored_plans(t: &TestApp) -> i64 {
    sqlx::query_scalar("SELECT COUNT(*) FROM roadmap_plans").fetch_one(&t.pool).await.unwrap()
}

#[tokio::test]
async fn the_viewer_reads_the_plan_the_lead_saved() {
    let t = fixture().await;
    let viewer = t.as_role(Some(Role::Viewer));
    // Nothing stored: the viewer gets the note and no form.
    let empty = viewer.get("/roadmap").await;
    assert_eq!(empty.status, StatusCode::OK);
    assert!(
        empty
            .text
            .contains("<p id=\"no-plans\">No named plan is stored yet. The programme lead has not saved one.</p>"),
        "{}",
        empty.text
    );
    assert!(!empty.text.contains("id=\"roadmap-form\"") && !empty.text.contains("id=\"statement\""));

    // The lead sees the form and saves the inputs under a name.
    let lead = t.get("/roadmap").await;
    assert!(lead.text.contains("<label for=\"start\">Plan start <span class=\"unit\">(YYYY-MM)</span></label>"));
    assert!(lead.text.contains("<label for=\"carry_over\">Carry unspent budget forward</label>"));
    assert!(lead.text.contains("Enter the inputs above and press Show to compute\na plan"), "{}", lead.text);
    let saved = t.post_form("/roadmap/plans", &format!("name=Two+years&{INPUTS}")).await;
    assert_eq!((saved.status, saved.location.as_deref()), (StatusCode::SEE_OTHER, Some("/roadmap?plan=1")));

    // The viewer now reads it without asking for it: the newest version is shown.
    let page = viewer.get("/roadmap").await;
    assert_eq!(page.status, StatusCode::OK);
    let p = &page.text;
    let stamp = "<time datetime=\"2026-11-15T10:00:00Z\" title=\"2026-11-15T10:00:00Z\">2026-11-15 10:00</time>";
    assert!(
        p.contains(&format!(
            "<tr class=\"shown\"><td><a href=\"/roadmap?plan=1\">Two years</a></td><td class=\"num\">1</td><td>t-lead</td><td>{stamp}</td></tr>"
        )),
        "{p}"
    );
    assert!(p.contains(&format!(
        "<p id=\"shown-plan\">Showing the named plan “Two years” version 1, saved by t-lead on {stamp}.</p>"
    )));
    assert!(p.contains("<h2 id=\"statement-title\">The plan from 2027-01 to 2028-12</h2>"));
    assert!(p.contains(
        "<p id=\"proof\"><strong>Proven optimal</strong>: no plan within these rules has a higher total NPV at plan start.</p>"
    ));
    assert!(p.contains(
        "<p id=\"differences\">The simple plan (by profitability index) places every candidate the same way.</p>"
    ));
    assert!(p.contains("<dd id=\"gain\">0.00</dd>"));
    // The table, by hand (see the module docs).
    assert!(p.contains("<td>–</td><td>measuring</td><td class=\"when\">2026-09</td><td class=\"when\">2026-12</td>\n    <td class=\"num\">5,000.00</td><td class=\"num\">0.00</td>\n    <td class=\"num\">committed</td>"), "{p}");
    assert!(p.contains("<td>–</td><td>candidate</td><td class=\"when\">2027-01</td><td class=\"when\">2027-06</td>\n    <td class=\"num\">20,000.00</td><td class=\"num\">0.00</td>"));
    assert!(p.contains("<td>starts in the first quarter</td>"));
    assert!(p.contains("<li><strong>WELD-9</strong>: not in this plan: value: not positive</li>"));
    // Capital per plan year, carried forward.
    assert!(p.contains("<tr><td>plan year 1</td><td>2027-01 to 2027-12</td><td class=\"num\">100,000.00</td><td class=\"num\">25,000.00</td><td class=\"num\">25,000.00</td>\n  <td class=\"num\">75,000.00</td></tr>"), "{p}");
    assert!(p.contains("<td class=\"num\">175,000.00</td></tr>"));
    // The timeline draws PAINT-9 (PRESS-9 went live before the plan), no form for the viewer.
    assert!(p.contains(">live 2027-06</text>") && !p.contains(">committed, live"));
    assert!(!p.contains("id=\"roadmap-form\"") && !p.contains("Save as a named plan"));
    assert!(p.contains("href=\"/roadmap.csv?plan=1\"") && p.contains("href=\"/roadmap?plan=1&amp;view=print\""));

    // The portfolio links to the roadmap and shows the planned starts.
    let portfolio = viewer.get("/portfolio").await.text;
    assert!(portfolio.contains("the\n<a href=\"/roadmap\">roadmap</a>."), "{portfolio}");
    // In the status cell, so that the table still fits 1440 px.
    assert!(portfolio.contains("<small class=\"planned-start\">planned start: 2027-01</small>"));
    assert!(portfolio.contains("<small class=\"planned-start\">planned start: 2026-09 (committed)</small>"));
    assert!(portfolio.contains("<small class=\"planned-start\">planned start: not in this plan</small>"));
    assert!(portfolio.contains("named plan\n“Two years” version 1, saved by t-lead on"), "{portfolio}");
}

#[tokio::test]
async fn the_portfolio_has_no_planned_start_without_a_stored_plan() {
    let t = fixture().await;
    let portfolio = t.get("/portfolio").await;
    assert_eq!(portfolio.status, StatusCode::OK);
    assert!(!portfolio.text.contains("Planned start") && !portfolio.text.contains("planned start: "));
    // Positive control: with a stored version the column is there.
    assert_eq!(t.post_form("/roadmap/plans", &format!("name=P&{INPUTS}")).await.status, StatusCode::SEE_OTHER);
    assert!(t.get("/portfolio").await.text.contains("<small class=\"planned-start\">planned start: "));
}

#[tokio::test]
async fn the_csv_has_the_page_s_rows() {
    let t = fixture().await;
    let a = t.as_role(Some(Role::Viewer)).get(&format!("/roadmap.csv?{INPUTS}")).await;
    assert_eq!(a.status, StatusCode::OK, "{}", a.text);
    assert_eq!(a.headers["content-type"], "text/csv; charset=utf-8");
    let lines: Vec<&str> = a.text.lines().collect();
    assert_eq!(
        lines[0],
        "code,name,area,status,placement,start,live,one_off_EUR_plan_year_1,one_off_EUR_plan_year_2,\
         value_at_plan_start_EUR,cost_of_a_quarters_delay_EUR,what_would_start_it_a_quarter_earlier,\
         reason_not_in_this_plan,simple_plan_start"
    );
    let row = |code: &str| *lines.iter().find(|l| l.starts_with(&format!("{code},"))).unwrap();
    assert_eq!(row("PRESS-9"), "PRESS-9,Press 9,,measuring,committed,2026-09,2026-12,5000,0,,,,,2026-09");
    assert_eq!(row("WELD-9"), "WELD-9,Weld cell 9,,candidate,not_in_this_plan,,,,,,,,value: not positive,");
    let paint = row("PAINT-9");
    assert!(paint.starts_with("PAINT-9,Paint booth 9,,candidate,planned,2027-01,2027-06,20000,0,"), "{paint}");
    assert!(paint.ends_with(",,,2027-01"), "{paint}");
    assert_eq!(lines.len(), 4);
    // A bad input is refused by field, as on the page.
    let bad = t.get("/roadmap.csv?budgets=").await;
    assert_eq!(bad.status, StatusCode::UNPROCESSABLE_ENTITY);
}

#[tokio::test]
async fn a_bad_input_is_refused_beside_the_form() {
    let t = fixture().await;
    let message = "required: the capital budget of each plan year separated by &#39;;&#39;, or one for every year, such as 250,000.00";
    let refused = t.post_form("/roadmap/plans", "name=Two+years&start=2027-01&years=2&budgets=").await;
    assert_eq!(refused.status, StatusCode::UNPROCESSABLE_ENTITY);
    let p = &refused.text;
    assert!(
        p.contains(&format!("<li><a href=\"#roadmap-form-problems\">Plan inputs: budgets: {message}</a></li>")),
        "{p}"
    );
    assert!(p.contains("<div class=\"alert form-problems\" role=\"note\" id=\"roadmap-form-problems\">"));
    assert!(p.contains(&format!("<p class=\"error\" id=\"budgets-error\">Error: {message}</p>")));
    // What was typed stays in the form.
    assert!(p.contains("<input id=\"plan-name\" name=\"name\" value=\"Two years\">"), "{p}");
    assert_eq!(stored_plans(&t).await, 0);
    // The Show button's refusal is the same, beside the same form.
    let shown = t.get("/roadmap?years=11&budgets=1").await;
    assert_eq!(shown.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(shown.text.contains(
        "<p class=\"error\" id=\"years-error\">Error: &#34;11&#34; is outside 1 to 10: enter a whole number from 1 to 10</p>"
    ));
    // A nameless plan is refused by its name.
    let unnamed = t.post_form("/roadmap/plans", INPUTS).await;
    assert_eq!(unnamed.status, StatusCode::UNPROCESSABLE_ENTITY);
    assert!(unnamed.text.contains("Error: required: a name for the plan, such as Three-year roll-out</p>"));
    // Positive control: the same form with a budget is saved.
    let ok = t.post_form("/roadmap/plans", "name=Two+years&start=2027-01&years=2&budgets=100000").await;
    assert_eq!(ok.status, StatusCode::SEE_OTHER);
    assert_eq!(stored_plans(&t).await, 1);
    // A viewer may not save.
    let viewer = t.as_role(Some(Role::Viewer)).post_form("/roadmap/plans", &format!("name=V&{INPUTS}")).await;
    assert_eq!(viewer.status, StatusCode::FORBIDDEN);
    assert_eq!(stored_plans(&t).await, 1);
}

/// The journey: the lead sets the inputs and saves a named plan; the viewer opens the roadmap
/// and reads it.
#[tokio::test]
async fn the_lead_saves_a_plan_and_the_viewer_reads_it_in_a_browser() {
    let t = test_app(true).await;
    let Some(b) = browser().await else { return };
    let c = &b.client;
    let base = format!("http://{}", t.listen().await);
    sign_in(c, &base, "t-lead").await;
    c.find(Locator::LinkText("Roadmap")).await.unwrap().click().await.unwrap();
    fill(c, "start", "2027-01").await;
    fill(c, "years", "3").await;
    fill(c, "budgets", "90000;80000;80000").await;
    fill(c, "plan-name", "Review plan").await;
    click_button(c, "Save as a named plan").await;
    assert_eq!(c.current_url().await.unwrap().path(), "/roadmap");
    let shown = c.find(Locator::Id("shown-plan")).await.unwrap().text().await.unwrap();
    assert!(shown.starts_with("Showing the named plan “Review plan” version 1, saved by t-lead on"), "{shown}");
    click_button(c, "Sign out").await;

    sign_in(c, &base, "t-viewer").await;
    c.find(Locator::LinkText("Roadmap")).await.unwrap().click().await.unwrap();
    assert!(c.find(Locator::Id("roadmap-form")).await.is_err(), "the viewer has no inputs form");
    c.find(Locator::LinkText("Review plan")).await.unwrap().click().await.unwrap();
    let title = c.find(Locator::Id("statement-title")).await.unwrap().text().await.unwrap();
    assert_eq!(title, "The plan from 2027-01 to 2029-12");
    let proof = c.find(Locator::Id("proof")).await.unwrap().text().await.unwrap();
    assert!(proof.starts_with("Proven optimal") || proof.starts_with("Best found within the time limit"), "{proof}");
    assert!(c.find(Locator::Css("#timeline svg rect.bar-planned")).await.is_ok(), "the timeline draws planned zones");
    assert!(c.find(Locator::Css("#roadmap tbody tr")).await.is_ok());
}

/// The roadmap and its print view fit 1440 px, and no two chart texts meet.
#[tokio::test]
async fn the_roadmap_fits_1440_px_without_overlapping_labels() {
    let t = test_app(true).await;
    let Some(b) = browser().await else { return };
    let c = &b.client;
    c.set_window_size(1440, 900).await.unwrap();
    let base = format!("http://{}", t.listen().await);
    sign_in(c, &base, "t-lead").await;
    for query in ["", "?view=print", "?plan=1&view=print"] {
        let (width, window, overlaps, _, texts) = crate::layout::check(c, &format!("{base}/roadmap{query}")).await;
        assert!(window >= 1400, "the window is {window} px wide, not about 1440");
        assert!(width <= window, "/roadmap{query}: {width} px in a {window} px window");
        assert!(overlaps.is_empty(), "/roadmap{query}: chart labels overlap: {overlaps:?}");
        assert!(texts > 20, "/roadmap{query} draws its charts ({texts} texts)");
    }
    // The portfolio keeps fitting with its planned start column.
    let (width, window, _, _, _) = crate::layout::check(c, &format!("{base}/portfolio")).await;
    assert!(width <= window, "/portfolio: {width} px in a {window} px window");
}

#[tokio::test]
async fn a_zone_in_neither_plan_is_no_difference_between_them() {
    let t = crate::helpers::test_app(true).await;
    let page = t.get("/roadmap?start=2026-12&years=3&budgets=60000&capacity=1").await;
    assert_eq!(page.status, StatusCode::OK);
    // PAINT-1's one-off outlays (66,000) never fit 60,000 a plan year without carry-over: it
    // is in neither plan, which is not listed as a difference.
    assert!(page.text.contains("<li><strong>PAINT-1</strong>: not in this plan: budget</li>"), "{}", page.text);
    assert!(!page.text.contains("PAINT-1: here it is not in it"));
    // Positive control: a zone the two plans start apart is listed.
    assert!(page.text.contains("<li>CNC-5: here it starts "), "{}", page.text);
}
