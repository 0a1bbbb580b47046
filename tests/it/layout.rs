//! Layout guards in the browser at 1440 px: the portfolio fits the screen without scrolling,
//! chart labels never overlap, and figure cards are never narrower than their numbers, with
//! the demo plant and with figures of trillions.

use crate::browser::{browser, sign_in};
use crate::helpers::test_app;
use fantoccini::Client;

/// Two zones with the largest amounts a case accepts (1e12 per cost item, 1e9 units at
/// 1,000,000 each), a name longer than a table cell and long item labels.
const HUGE: &str = r#"{"format":"pilot-ledger-scenario","version":1,"zones":[
 {"code":"HUGE-1","name":"Continuous hot-dip galvanising line with the long name","owner":"Test owner",
  "status":"candidate","description":"Long figures.",
  "readiness":{"data_reach":4,"fit_with_systems":3,"expert_time":3,"safe_while_running":4},
  "cases":[{"label":"Huge amounts","horizon_months":60,"start_month":"2025-03","go_live_offset":4,
   "ramp_up_months":3,"success_probability":"0.85","state":"draft",
   "costs":[{"label":"Line-wide sensor retrofit across every galvanising bath and furnace","category":"hardware",
     "kind":"one_off","amount":"999999999999","month_offset":0,"escalation":"0","capex":true}],
   "drivers":[{"label":"Zinc overconsumption avoided on the second and third shifts","kind":"scrap","unit":"t",
     "qty_low":"300000000","qty_likely":"600000000","qty_high":"1000000000","unit_value":"950000","escalation":"0"}]}]},
 {"code":"HUGE-2","name":"Loss-making giant","owner":"Test owner","status":"candidate","description":"Negative.",
  "cases":[{"label":"Loss","horizon_months":36,"start_month":"2025-03","go_live_offset":4,"ramp_up_months":3,
   "success_probability":"0.5","state":"draft",
   "costs":[{"label":"Everything","category":"hardware","kind":"one_off","amount":"999999999999","month_offset":0,
     "escalation":"0","capex":true}],
   "drivers":[{"label":"Small win","kind":"scrap","unit":"pcs","qty_low":"1","qty_likely":"2","qty_high":"3",
     "unit_value":"1","escalation":"0"}]}]}]}"#;

/// What the page breaks: its width against the window's, pairs of chart texts whose boxes
/// meet (on screen, so rotated titles count as drawn), and figure cards narrower than their
/// number.
const CHECK: &str = r#"
const overlaps = [];
for (const svg of document.querySelectorAll('figure svg')) {
  const boxes = [...svg.querySelectorAll('text')].map(t => [t.textContent, t.getBoundingClientRect()]);
  for (let i = 0; i < boxes.length; i++) for (let j = i + 1; j < boxes.length; j++) {
    const [a, b] = [boxes[i][1], boxes[j][1]];
    if (a.left < b.right - 0.5 && b.left < a.right - 0.5 && a.top < b.bottom - 0.5 && b.top < a.bottom - 0.5)
      overlaps.push(boxes[i][0] + ' / ' + boxes[j][0]);
  }
}
const cut = [...document.querySelectorAll('.metrics dd')].filter(d => d.scrollWidth > d.clientWidth + 1).map(d => d.textContent);
return [document.documentElement.scrollWidth, window.innerWidth, overlaps, cut, document.querySelectorAll('figure svg text').length];
"#;

/// Width of the document and of the window, overlapping chart texts, cut cards, and how many
/// chart texts there are (so that a page without charts cannot pass the overlap check).
pub(super) async fn check(c: &Client, url: &str) -> (u64, u64, Vec<String>, Vec<String>, u64) {
    c.goto(url).await.unwrap();
    let v = c.execute(CHECK, vec![]).await.unwrap();
    let strings = |v: &serde_json::Value| -> Vec<String> {
        v.as_array().unwrap().iter().map(|s| s.as_str().unwrap().to_string()).collect()
    };
    (v[0].as_u64().unwrap(), v[1].as_u64().unwrap(), strings(&v[2]), strings(&v[3]), v[4].as_u64().unwrap())
}

#[tokio::test]
async fn pages_fit_1440_px_without_overlapping_labels() {
    let t = test_app(true).await;
    pilot_ledger::cli::load_text(&t.pool, HUGE, crate::helpers::TEST_NOW).await.unwrap();
    let Some(b) = browser().await else { return };
    let c = &b.client;
    c.set_window_size(1440, 900).await.unwrap();
    let base = format!("http://{}", t.listen().await);
    sign_in(c, &base, "t-viewer").await;
    let (width, window, _, _, _) = check(c, &format!("{base}/zones")).await;
    assert!(window >= 1400, "the window is {window} px wide, not about 1440");
    assert!(width <= window, "the zone list: {width} px in a {window} px window");

    for query in ["", "?budget=150000", "?budget=150000&view=print"] {
        let (width, window, overlaps, _, texts) = check(c, &format!("{base}/portfolio{query}")).await;
        assert!(width <= window, "/portfolio{query}: {width} px in a {window} px window");
        assert!(overlaps.is_empty(), "/portfolio{query}: chart labels overlap: {overlaps:?}");
        assert!(texts > 30, "/portfolio{query} draws its charts ({texts} texts)");
    }
    // The demo plant's measuring zone and the zone of trillions: cards hold their figures and
    // chart labels keep apart.
    let huge: i64 =
        sqlx::query_scalar("SELECT c.id FROM case_versions c JOIN zones z ON z.id = c.zone_id WHERE z.code = 'HUGE-1'")
            .fetch_one(&t.pool)
            .await
            .unwrap();
    for case in [1, huge] {
        let (_, _, overlaps, cut, texts) = check(c, &format!("{base}/cases/{case}")).await;
        assert!(overlaps.is_empty(), "case {case}: chart labels overlap: {overlaps:?}");
        assert!(cut.is_empty(), "case {case}: cards cut their figures: {cut:?}");
        assert!(texts > 10, "case {case} draws its charts ({texts} texts)");
    }
}
