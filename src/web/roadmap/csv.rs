//! `GET /roadmap.csv`: the roadmap's table, one row per zone of the plan, for the same inputs
//! as the page (`?plan=<id>` for a stored version, else the inputs, else the newest version).

use super::super::{AppError, AppState};
use super::page::{PageQuery, chosen_inputs, format_of};
use crate::db;
use crate::domain::{NumberFormat, RoadmapAnswer, RoadmapParams, csv_safe};
use crate::finance::roadmap::Placement;
use crate::web::metrics::money_text;
use axum::extract::{Query, State};
use axum::response::Response;
use rust_decimal::Decimal;

/// GET /roadmap.csv
pub async fn csv(State(state): State<AppState>, Query(pq): Query<PageQuery>) -> Result<Response, AppError> {
    let numbers = NumberFormat::current();
    let site = db::get_site(&state.pool).await?;
    let plans = crate::app::roadmap::plans(&state.pool).await?;
    let (q, plan) = chosen_inputs(&state, &pq, &plans).await?.unwrap_or_default();
    let next = RoadmapParams::next_month(state.clock.now());
    let params = RoadmapParams::parse(&q, format_of(plan.as_ref()), next, &site)?;
    let answer = super::compute(&state, params).await?;
    let currency = site.currency.clone();
    let body = crate::app::cpu::run(move || csv_of(&answer, &currency, numbers)).await??;
    Ok(super::super::ledger::csv_response("roadmap.csv", body))
}

/// The CSV text: money as plain decimals with the site's decimal separator (as the other
/// exports), text cells through `csv_safe` (OWASP "CSV Injection").
pub(super) fn csv_of(a: &RoadmapAnswer, cur: &str, numbers: NumberFormat) -> Result<String, AppError> {
    let inst = &a.instance;
    let mut w = csv::WriterBuilder::new().delimiter(numbers.csv_delimiter()).from_writer(Vec::new());
    let mut header: Vec<String> =
        ["code", "name", "area", "status", "placement", "start", "live"].iter().map(|s| s.to_string()).collect();
    header.extend((1..=inst.years).map(|y| format!("one_off_{cur}_plan_year_{y}")));
    header.extend([
        format!("value_at_plan_start_{cur}"),
        format!("cost_of_a_quarters_delay_{cur}"),
        "what_would_start_it_a_quarter_earlier".into(),
        "reason_not_in_this_plan".into(),
        "simple_plan_start".into(),
    ]);
    let internal = |e: csv::Error| AppError::Internal(e.into());
    w.write_record(&header).map_err(internal)?;
    let money = |d: Decimal| numbers.export(&money_text(d));
    let simple = a.rows(&a.result.simple, None);
    for (r, s) in a.rows(&a.result.optimal, Some(&a.result.delays)).iter().zip(&simple) {
        let z = &a.zones[r.zone];
        let placement = match a.result.optimal.placements.get(r.zone) {
            Some(Placement::Committed { .. }) => "committed",
            Some(Placement::Planned { .. }) => "planned",
            _ => "not_in_this_plan",
        };
        let month = |m: Option<crate::domain::Month>| m.map(|m| m.to_string()).unwrap_or_default();
        let mut record = vec![
            csv_safe(&z.code),
            csv_safe(&z.name),
            csv_safe(&z.area),
            z.status.as_str().to_string(),
            placement.to_string(),
            month(r.start),
            month(r.live),
        ];
        // A zone that does not start spends nothing: empty cells rather than zeros.
        record.extend(r.one_off_by_year.iter().map(|d| if r.start.is_some() { money(*d) } else { String::new() }));
        record.extend([
            r.value_at_start.map(money).unwrap_or_default(),
            r.delay_cost.map(money).unwrap_or_default(),
            csv_safe(r.earlier.as_deref().unwrap_or_default()),
            csv_safe(r.reason.as_deref().unwrap_or_default()),
            month(s.start),
        ]);
        w.write_record(&record).map_err(internal)?;
    }
    let bytes = w.into_inner().map_err(|e| AppError::Internal(anyhow::anyhow!("csv: {e}")))?;
    String::from_utf8(bytes).map_err(|e| AppError::Internal(e.into()))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The hand-made answer of the page's tests, as a file; written out by hand.
    #[test]
    fn the_header_and_the_rows() -> Result<(), String> {
        let a = super::super::page::tests::answer();
        let text = csv_of(&a, "EUR", NumberFormat::DecimalPoint).map_err(|e| format!("{e:?}"))?;
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines[0],
            "code,name,area,status,placement,start,live,one_off_EUR_plan_year_1,one_off_EUR_plan_year_2,\
             value_at_plan_start_EUR,cost_of_a_quarters_delay_EUR,what_would_start_it_a_quarter_earlier,\
             reason_not_in_this_plan,simple_plan_start"
        );
        // PAINT-1: quarter 2 = 2027-07, live after 2 + 1 months = 2027-10; simple plan: quarter 3.
        assert!(
            lines[2].starts_with("PAINT-1,PAINT-1 line,paint shop,candidate,planned,2027-07,2027-10,"),
            "{}",
            lines[2]
        );
        assert!(lines[2].ends_with(",123.45,one more introduction at a time in 2027-04,,2027-10"));
        assert!(lines[3].ends_with(",not_in_this_plan,,,,,,,,budget,"), "{}", lines[3]);
        Ok(())
    }
}
