//! `GET /roadmap.csv`: the roadmap's table, one row per zone of the plan, for the same inputs
//! as the page (`?plan=<id>` for a stored version, else the inputs, else the newest version).

use super::super::{AppError, AppState};
use super::page::{PageQuery, chosen_inputs, next_month};
use crate::db;
use crate::domain::{NumberFormat, RoadmapAnswer, RoadmapParams, csv_safe};
use crate::finance::roadmap::{Placement, one_off_by_year, value_at};
use crate::web::metrics::money_text;
use axum::extract::{Query, State};
use axum::response::Response;
use rust_decimal::Decimal;

/// GET /roadmap.csv
pub async fn csv(State(state): State<AppState>, Query(pq): Query<PageQuery>) -> Result<Response, AppError> {
    let numbers = NumberFormat::current();
    let site = db::get_site(&state.pool).await?;
    let plans = crate::app::roadmap::plans(&state.pool).await?;
    let q = chosen_inputs(&state, &pq, &plans).await?.map(|(q, _)| q).unwrap_or_default();
    let params = RoadmapParams::parse(&q, numbers, next_month(state.clock.now()), &site)?;
    let answer = super::compute(&state, params).await?;
    let currency = site.currency.clone();
    let body = crate::app::cpu::run(move || csv_of(&answer, &currency, numbers)).await??;
    Ok(super::super::ledger::csv_response("roadmap.csv", body))
}

/// The months of a start as `YYYY-MM`, counted from the plan's start.
fn month_text(a: &RoadmapAnswer, m: i32) -> String {
    let s = a.params.start;
    let index = s.year * 12 + i32::from(s.month) - 1 + m;
    format!("{:04}-{:02}", index.div_euclid(12), index.rem_euclid(12) + 1)
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
    let opt = &a.result.optimal.placements;
    let simple = &a.result.simple.placements;
    for (i, z) in a.zones.iter().enumerate().take(inst.zones.len()) {
        let p = opt.get(i);
        let start = p.and_then(Placement::start_month);
        let (placement, value, delay, earlier, reason) = match p {
            Some(Placement::Committed { .. }) => {
                ("committed", String::new(), String::new(), String::new(), String::new())
            }
            Some(Placement::Planned { quarter }) => {
                let d = a.result.delays.get(i).and_then(Option::as_ref);
                (
                    "planned",
                    money(value_at(inst, i, *quarter)),
                    d.map(|d| money(d.cost)).unwrap_or_default(),
                    d.and_then(|d| d.earlier.as_ref())
                        .map(|r| super::page::rule_text(a.params.start, r))
                        .unwrap_or_default(),
                    String::new(),
                )
            }
            Some(Placement::NotPlanned(n)) => {
                ("not_in_this_plan", String::new(), String::new(), String::new(), super::page::reason_text(n))
            }
            None => ("not_in_this_plan", String::new(), String::new(), String::new(), String::new()),
        };
        let mut record = vec![
            csv_safe(&z.code),
            csv_safe(&z.name),
            csv_safe(&z.area),
            z.status.as_str().to_string(),
            placement.to_string(),
            start.map(|s| month_text(a, s)).unwrap_or_default(),
            start.map(|s| month_text(a, s + inst.zones[i].window() as i32)).unwrap_or_default(),
        ];
        match start {
            Some(s) => record.extend(one_off_by_year(inst, i, s).into_iter().map(|c| money(Decimal::new(c, 2)))),
            None => record.extend((0..inst.years).map(|_| String::new())),
        }
        record.extend([
            value,
            delay,
            csv_safe(&earlier),
            csv_safe(&reason),
            simple.get(i).and_then(Placement::start_month).map(|s| month_text(a, s)).unwrap_or_default(),
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
        assert!(
            lines[2].ends_with(",123.45,a free introduction in 2027-04 (introductions at a time are taken),,2027-10")
        );
        assert!(lines[3].contains(",not_in_this_plan,,,,,,,"), "{}", lines[3]);
        Ok(())
    }
}
