//! The portfolio page, its CSV export and `GET /api/v1/portfolio`: one computation, three
//! renderings, so the page, the file and the API always agree.

use super::auth::{CurrentUser, Nav};
use super::chart::{Axis, RangeBars, RangeCell, RangeInput, Scatter, ScatterPoint};
use super::figures::READY_WAIT;
use super::metrics::{money_text, rate_text};
use super::{ApiError, AppError, AppState};
use crate::db;
use crate::domain::{
    BudgetChoice, FieldErrors, Money, NumberFormat, Percent, Portfolio, PortfolioParams, PortfolioQuery, PortfolioRow,
    RankBy, SiteSettings, Standing, ValueBasis, ZoneBase, build_portfolio, calibration_of, csv_safe,
};
use askama::Template;
use axum::extract::{Query, State};
use axum::http::{StatusCode, header};
use axum::response::{Html, IntoResponse, Response};
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use serde::Serialize;
use serde_json::json;
use std::sync::Arc;
use std::time::Duration;

/// Rows the page's table and charts show: the head of the ranking. The budget choice above
/// them counts every zone, and the CSV has them all.
pub const PAGE_ROWS: usize = 250;

/// A computed portfolio, and how many zones' figures were not ready for it.
pub(super) struct Computed {
    pub(super) site: SiteSettings,
    pub(super) portfolio: Portfolio,
    /// Zones the figures' warm-up has not reached yet, left out of `portfolio`.
    pub(super) pending: usize,
}

impl Computed {
    /// Whether every zone is in: only then may the answer be stored.
    fn complete(&self) -> bool {
        self.pending == 0
    }
}

/// Compute the portfolio for a valid query, waiting for a running warm-up of the figures at
/// most `wait` (`None`: until it ends).
pub(super) async fn compute(
    state: &AppState,
    params: PortfolioParams,
    wait: Option<Duration>,
) -> Result<Computed, AppError> {
    let site = db::get_site(&state.pool).await?;
    let criteria = db::readiness::criteria(&state.pool).await?;
    let bases = state.figures.bases_within(&state.pool, &site, params.trials, wait).await?;
    let portfolio = crate::app::cpu::run(move || {
        let calibration = calibration_of(bases.zones.iter().map(|b| b.as_ref()));
        build_portfolio(bases.zones, &criteria, &calibration, params)
    })
    .await?;
    Ok(Computed { site, portfolio, pending: bases.pending })
}

fn standing_class(s: Standing) -> &'static str {
    match s {
        Standing::Committed => "committed",
        Standing::Recommended => "recommended",
        Standing::LeftOut | Standing::BelowReadiness => "left-out",
        Standing::NotInChoice => "not-in-choice",
    }
}

/// The CSS class of a zone's bar (`dot = false`) or point in the charts.
fn chart_class(s: Standing, dot: bool) -> &'static str {
    match (s, dot) {
        (Standing::Committed, false) => "bar-committed",
        (Standing::Recommended, false) => "bar-recommended",
        (_, false) => "bar-other",
        (Standing::Committed, true) => "dot-committed",
        (Standing::Recommended, true) => "dot-recommended",
        (_, true) => "dot-other",
    }
}

/// A row formatted for the page and the CSV.
pub struct RowView {
    rank: usize,
    zone_id: i64,
    code: String,
    name: String,
    status: &'static str,
    standing: &'static str,
    class: &'static str,
    case: Option<(i64, String)>,
    investment: String,
    npv: String,
    npv_negative: bool,
    chance_weighted: String,
    calibrated: String,
    irr: String,
    payback: String,
    profitability_index: String,
    chance_npv_below_zero: String,
    /// The 10th percentile, median and 90th percentile, exact (the range cell's title).
    percentiles: String,
    /// The same in compact units, written under the range bar.
    percentiles_short: String,
    /// The range bar.
    range: Option<RangeCell>,
    realization: String,
    readiness: String,
    taken_by_profitability_index: bool,
    problem: Option<String>,
    /// "at approval: 9 %" for a baseline whose figures keep the rate of its approval.
    frozen: Option<String>,
    /// Whether one of its money figures is longer than [`LONG_FIGURE`] characters.
    long_figures: bool,
    /// Its start in the newest stored roadmap plan version (set once the rows are made).
    planned_start: String,
}

/// Money texts longer than this (`-1,000,000.00` has 13 characters) may wrap between their
/// groups in the table, which would otherwise grow wider than the page.
const LONG_FIGURE: usize = 13;

const DASH: &str = "–";

/// A money text for the table's HTML: one longer than [`LONG_FIGURE`] characters gets a
/// line-break opportunity after each group separator, so that it wraps between its groups
/// instead of widening the table (a shorter one never wraps). Money texts hold digits,
/// separators and a sign only; anything else is returned escaped, whole.
fn breakable(text: &str) -> String {
    let money = text.chars().all(|c| c.is_ascii_digit() || matches!(c, '.' | ',' | '-' | '–'));
    if !money || text.chars().count() <= LONG_FIGURE {
        return text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;");
    }
    let group = match NumberFormat::current().decimal() {
        ',' => '.',
        _ => ',',
    };
    text.chars().fold(String::with_capacity(text.len() + 16), |mut out, c| {
        out.push(c);
        if c == group {
            out.push_str("<wbr>");
        }
        out
    })
}

/// The range column's scale: every row's 10th to 90th percentile, with zero.
fn range_scale(rows: &[PortfolioRow]) -> (f64, f64) {
    RangeCell::scale(rows.iter().filter_map(|r| r.figures()).map(|f| (f.simulation.p10, f.simulation.p90)))
}

fn row_view(rank: usize, r: &PortfolioRow, scale: (f64, f64)) -> RowView {
    let f = r.figures();
    let m = f.map(|f| &f.metrics);
    let u = f.map(|f| &f.simulation);
    let money = |d: Option<Decimal>| breakable(&d.map_or_else(|| DASH.to_string(), |d| Money(d).to_string()));
    let exact = |v: f64| Money(Decimal::from_f64_retain(v).unwrap_or_default().round_dp(2)).to_string();
    let compact = |v: f64| NumberFormat::current().write_compact(Decimal::from_f64_retain(v).unwrap_or_default());
    let long_figures = [r.investment(), r.npv(), r.chance_weighted, r.calibrated]
        .into_iter()
        .flatten()
        .any(|d| Money(d).to_string().chars().count() > LONG_FIGURE);
    RowView {
        long_figures,
        rank,
        zone_id: r.zone().id,
        code: r.zone().code.clone(),
        name: r.zone().name.clone(),
        status: r.zone().status.as_str(),
        standing: r.standing.label(),
        class: standing_class(r.standing),
        case: r.base.case.as_ref().map(|(id, v, label, _)| (*id, format!("v{v} {label}"))),
        investment: money(r.investment()),
        npv: money(r.npv()),
        npv_negative: r.npv().is_some_and(|v| v < Decimal::ZERO),
        frozen: r.base.hurdle.1.then(|| format!("at approval: {}", crate::domain::pct(&r.base.hurdle.0))),
        chance_weighted: money(r.chance_weighted),
        calibrated: money(r.calibrated),
        irr: m.and_then(|m| m.irr_annual).map_or_else(|| DASH.into(), |i| Percent(i).to_string()),
        payback: m.and_then(|m| m.payback_months.as_ref()).map_or_else(
            || "not reached".into(),
            |p| format!("{} mo", NumberFormat::current().write_quantity(p.periods.round_dp(1))),
        ),
        profitability_index: m
            .and_then(|m| m.profitability_index)
            .map_or_else(|| DASH.into(), |p| NumberFormat::current().write_quantity(p.round_dp(2))),
        chance_npv_below_zero: u.map_or_else(|| DASH.into(), |u| Percent(u.chance_npv_below_zero).to_string()),
        percentiles: u.map_or_else(
            || DASH.into(),
            |u| {
                format!(
                    "10th percentile {}; 50th percentile (median) {}; 90th percentile {}",
                    exact(u.p10),
                    exact(u.p50),
                    exact(u.p90)
                )
            },
        ),
        percentiles_short: u
            .map_or_else(|| DASH.into(), |u| format!("{} / {} / {}", compact(u.p10), compact(u.p50), compact(u.p90))),
        range: u.map(|u| RangeCell::new(u.p10, u.p50, u.p90, scale)),
        realization: r.base.realization.map_or_else(|| DASH.into(), |v| Percent(v).to_string()),
        readiness: r.readiness.map_or_else(
            || "not scored".into(),
            |x| {
                let score = NumberFormat::current().export(&format!("{:.1}", x.score));
                if x.complete() { score } else { format!("{score} ({} of {} scored)", x.rated, x.of) }
            },
        ),
        taken_by_profitability_index: r.taken_by_profitability_index,
        problem: r.problem().map(str::to_string),
        planned_start: DASH.into(),
    }
}

fn f64_of(d: Decimal) -> f64 {
    d.to_f64().unwrap_or(0.0)
}

/// The three charts above the table.
struct Charts {
    npv: RangeBars,
    investment: Scatter,
    readiness: Scatter,
}

/// The charts of `rows` (the head of the ranking the page shows).
fn charts(rows: &[PortfolioRow], currency: &str) -> Charts {
    let ok: Vec<&PortfolioRow> = rows.iter().filter(|r| r.figures().is_some()).collect();
    let npv = |r: &PortfolioRow| r.npv().map_or(0.0, f64_of);
    let bars = ok
        .iter()
        .map(|r| {
            let s = r.figures().map(|f| &f.simulation);
            RangeInput {
                label: r.zone().code.clone(),
                from: 0.0,
                to: npv(r),
                whisker: s.map(|s| (s.p10, s.p90)),
                split: None,
                class: chart_class(r.standing, false),
                note: format!(
                    "{} · {}",
                    Money(Decimal::from_f64_retain(npv(r)).unwrap_or_default().round()),
                    r.standing.label()
                ),
            }
        })
        .collect();
    let best = ok.first().map(|r| r.zone().code.as_str()).unwrap_or("none");
    let npv_chart = RangeBars::new(
        bars,
        0.0,
        "0",
        format!(
            "NPV of each zone in {currency}, in ranking order (first: {best}); the thin line spans the 10th to the 90th percentile of the Monte Carlo."
        ),
    );
    let investment = Scatter::new(
        ok.iter()
            .map(|r| ScatterPoint {
                x: r.investment().map_or(0.0, f64_of),
                y: npv(r),
                label: r.zone().code.clone(),
                class: chart_class(r.standing, true),
            })
            .collect(),
        Axis::Money,
        &format!("one-off investment ({currency})"),
        &format!("NPV ({currency})"),
        "Investment against NPV: zones up and to the left give the most value per unit of capital.".into(),
    );
    let scored: Vec<&&PortfolioRow> = ok.iter().filter(|r| r.readiness.is_some()).collect();
    let unscored = ok.len() - scored.len();
    let readiness = Scatter::new(
        scored
            .iter()
            .map(|r| ScatterPoint {
                x: r.readiness.map_or(0.0, |x| x.score),
                y: npv(r),
                label: r.zone().code.clone(),
                class: chart_class(r.standing, true),
            })
            .collect(),
        Axis::Score(1.0, 5.0),
        "weighted readiness (1 = not ready, 5 = ready)",
        &format!("NPV ({currency})"),
        format!(
            "Readiness against NPV: a zone high and to the left is valuable but not ready to instrument yet.{}",
            if unscored > 0 { format!(" {unscored} zone(s) not scored are not shown.") } else { String::new() }
        ),
    );
    Charts { npv: npv_chart, investment, readiness }
}

/// The budget choice, formatted.
struct ChoiceView {
    budget: Money,
    committed: Money,
    available: Money,
    recommended: Vec<String>,
    recommended_cost: Money,
    recommended_value: Money,
    taken_by_profitability_index: Vec<String>,
    taken_by_profitability_index_cost: Money,
    taken_by_profitability_index_value: Money,
    only_recommended: Vec<String>,
    only_taken_by_profitability_index: Vec<String>,
    gain: Money,
    next_in_line: Option<(String, Money)>,
    proven: bool,
    over_committed: bool,
}

fn choice_view(c: &BudgetChoice, rows: &[PortfolioRow]) -> ChoiceView {
    let codes =
        |f: &dyn Fn(&PortfolioRow) -> bool| rows.iter().filter(|r| f(r)).map(|r| r.zone().code.clone()).collect();
    ChoiceView {
        budget: Money(c.budget),
        committed: Money(c.committed),
        available: Money(c.available),
        recommended: codes(&|r| r.standing == Standing::Recommended),
        recommended_cost: Money(c.recommended_cost),
        recommended_value: Money(c.recommended_value),
        taken_by_profitability_index: codes(&|r| r.taken_by_profitability_index),
        taken_by_profitability_index_cost: Money(c.taken_by_profitability_index_cost),
        taken_by_profitability_index_value: Money(c.taken_by_profitability_index_value),
        only_recommended: c.only_recommended.clone(),
        only_taken_by_profitability_index: c.only_taken_by_profitability_index.clone(),
        gain: Money(c.recommended_value - c.taken_by_profitability_index_value),
        next_in_line: c.next_in_line.as_ref().map(|(code, lack)| (code.clone(), Money(*lack))),
        proven: c.proven,
        over_committed: c.committed > c.budget,
    }
}

#[derive(Template)]
#[template(path = "portfolio/page.html")]
struct PortfolioPage {
    nav: Nav,
    site: SiteSettings,
    form: PortfolioQuery,
    errors: FieldErrors,
    ranks: [RankBy; 6],
    bases: [ValueBasis; 3],
    rank: RankBy,
    basis: ValueBasis,
    seed: u64,
    trials: usize,
    /// The rendered [`PortfolioFigures`], shared by every reader of this query.
    figures: Option<super::answers::Answer>,
    print_view: bool,
}

/// The computed part of the page: the choice, the charts and the table.
#[derive(Template)]
#[template(path = "portfolio/_figures.html")]
struct PortfolioFigures {
    basis: ValueBasis,
    /// The head of the ranking ([`PAGE_ROWS`]).
    rows: Vec<RowView>,
    /// Whether a money figure of the table is so long that figures may wrap between groups.
    long_figures: bool,
    /// How many zones the ranking has.
    ranked: usize,
    /// Zones whose figures are still being computed (left out of everything below).
    pending: usize,
    charts: Charts,
    choice: Option<ChoiceView>,
    query: String,
    /// The newest stored roadmap plan version, whose starts the table shows; `None`: no column.
    planned: Option<super::roadmap::page::PlannedStarts>,
}

/// The query string of the current settings, for the CSV and print links.
fn query_string(q: &PortfolioQuery) -> String {
    // Strings only: serialization cannot fail.
    serde_urlencoded::to_string(q).unwrap_or_default()
}

/// Query parameters of the page: the portfolio query plus the print view switch.
#[derive(serde::Deserialize, Default)]
#[serde(default)]
pub struct PageQuery {
    #[serde(flatten)]
    q: PortfolioQuery,
    view: String,
}

/// GET /portfolio
pub async fn page(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Query(pq): Query<PageQuery>,
) -> Result<Response, AppError> {
    let q = pq.q;
    let numbers = NumberFormat::current();
    let (params, errors) = match PortfolioParams::parse(&q, numbers) {
        Ok(p) => (Some(p), FieldErrors::default()),
        Err(e) => (None, e),
    };
    let query = query_string(&q);
    let mut page = PortfolioPage {
        nav: Nav::from(&me),
        site: db::get_site(&state.pool).await?,
        form: q,
        errors,
        ranks: RankBy::ALL,
        bases: ValueBasis::ALL,
        rank: RankBy::Npv,
        basis: ValueBasis::Npv,
        seed: crate::domain::DEFAULT_SEED,
        trials: 0,
        figures: None,
        print_view: pq.view == "print",
    };
    let Some(params) = params else {
        return Ok((StatusCode::UNPROCESSABLE_ENTITY, Html(page.render()?)).into_response());
    };
    page.rank = params.rank;
    page.basis = params.basis;
    page.seed = params.trials.seed;
    page.trials = params.trials.count;
    // Saving a plan version changes no zone: the newest version and the default plan start
    // (next month) are part of the key instead.
    let latest = crate::app::roadmap::plans(&state.pool).await?.first().map(|p| p.id);
    let next = crate::domain::RoadmapParams::next_month(state.clock.now());
    let key = format!("page:{}?{query}&roadmap={latest:?}@{next}", numbers.as_str());
    let figures = state
        .answers
        .get(&state.pool, key, || async {
            let basis = params.basis;
            let planned = super::roadmap::page::planned_starts(&state).await?;
            let computed = compute(&state, params, Some(READY_WAIT)).await?;
            let complete = computed.complete();
            let Computed { site, portfolio, pending } = computed;
            // Formatting the rows and charts: on the bounded pool.
            let html = crate::app::cpu::run(move || {
                let mut head: Vec<RowView> = {
                    let head = &portfolio.rows[..portfolio.rows.len().min(PAGE_ROWS)];
                    let scale = range_scale(head);
                    head.iter().enumerate().map(|(i, r)| row_view(i + 1, r, scale)).collect()
                };
                if let Some(p) = &planned {
                    for r in &mut head {
                        if let Some(s) = p.starts.get(&r.code) {
                            r.planned_start.clone_from(s);
                        }
                    }
                }
                let figures = PortfolioFigures {
                    basis,
                    charts: charts(&portfolio.rows[..portfolio.rows.len().min(PAGE_ROWS)], &site.currency),
                    choice: portfolio.choice.as_ref().map(|c| choice_view(c, &portfolio.rows)),
                    long_figures: head.iter().any(|r| r.long_figures),
                    rows: head,
                    ranked: portfolio.rows.len(),
                    pending,
                    query,
                    planned,
                };
                figures.render()
            })
            .await??;
            Ok((html, complete))
        })
        .await?;
    page.figures = Some(figures);
    Ok(Html(page.render()?).into_response())
}

/// GET /portfolio.csv: the table as the page shows it, one row per zone.
pub async fn csv(State(state): State<AppState>, Query(q): Query<PortfolioQuery>) -> Result<Response, AppError> {
    let numbers = NumberFormat::current();
    let params = PortfolioParams::parse(&q, numbers)?;
    // The format is part of the key: the answer's text depends on it (and on the query read in it).
    let key = format!("csv:{}?{}", numbers.as_str(), query_string(&q));
    let body = state.answers.get(&state.pool, key, || csv_text(&state, params, numbers)).await?;
    Ok(super::ledger::csv_response("portfolio.csv", body.body()))
}

/// The CSV: the API's decimal strings with the site's decimal separator, ungrouped, so that a
/// spreadsheet of that locale reads them. A file is complete or not sent: it waits for a
/// running warm-up of the figures to end.
async fn csv_text(
    state: &AppState,
    params: PortfolioParams,
    numbers: NumberFormat,
) -> Result<(String, bool), AppError> {
    let Computed { site, portfolio, .. } = compute(state, params, None).await?;
    // Writing every zone's row: on the bounded pool.
    Ok((crate::app::cpu::run(move || csv_of(&site, &portfolio, numbers)).await??, true))
}

fn csv_of(site: &SiteSettings, portfolio: &Portfolio, numbers: NumberFormat) -> Result<String, AppError> {
    let mut w = csv::WriterBuilder::new().delimiter(numbers.csv_delimiter()).from_writer(Vec::new());
    let cur = &site.currency;
    let header = [
        "rank".to_string(),
        "code".into(),
        "name".into(),
        "status".into(),
        "standing".into(),
        "taken_by_profitability_index".into(),
        "case".into(),
        format!("investment_{cur}"),
        format!("npv_{cur}"),
        format!("chance_weighted_npv_{cur}"),
        format!("calibrated_npv_{cur}"),
        "irr".into(),
        "payback_months".into(),
        "profitability_index".into(),
        "chance_npv_below_zero".into(),
        format!("p10_npv_{cur}"),
        format!("p50_npv_{cur}"),
        format!("p90_npv_{cur}"),
        "realization_to_date".into(),
        "readiness".into(),
        "problem".into(),
        "hurdle_rate".into(),
        "hurdle_rate_basis".into(),
    ];
    let internal = |e: csv::Error| AppError::Internal(e.into());
    w.write_record(&header).map_err(internal)?;
    for (i, r) in portfolio.rows.iter().enumerate() {
        let j = row_json(i + 1, r);
        let text = |v: Option<String>| v.map(|v| numbers.export(&v)).unwrap_or_default();
        let record = [
            j.rank.to_string(),
            // Text cells go through `csv_safe` (OWASP "CSV Injection"); numbers stay numbers.
            csv_safe(j.code),
            csv_safe(j.name),
            j.status.to_string(),
            j.standing.to_string(),
            j.taken_by_profitability_index.to_string(),
            j.case.map(|c| csv_safe(&c.label)).unwrap_or_default(),
            text(j.investment),
            text(j.npv),
            text(j.chance_weighted_npv),
            text(j.calibrated_npv),
            text(j.irr),
            text(j.payback_months),
            text(j.profitability_index),
            text(j.chance_npv_below_zero),
            text(j.p10_npv),
            text(j.p50_npv),
            text(j.p90_npv),
            text(j.realization_to_date),
            j.readiness.map(|x| numbers.export(&format!("{:.2}", x.score))).unwrap_or_default(),
            csv_safe(j.problem.unwrap_or_default()),
            j.hurdle_rate,
            j.hurdle_rate_basis.to_string(),
        ];
        w.write_record(&record).map_err(internal)?;
    }
    let bytes = w.into_inner().map_err(|e| AppError::Internal(anyhow::anyhow!("csv: {e}")))?;
    String::from_utf8(bytes).map_err(|e| AppError::Internal(e.into()))
}

/// The case a row's figures come from.
#[derive(Serialize)]
struct CaseJson {
    id: i64,
    version: u32,
    label: String,
    baseline: bool,
}

/// A zone's weighted readiness.
#[derive(Serialize)]
struct ReadinessJson {
    score: f64,
    scored: usize,
    of: usize,
}

/// One row of the API and the CSV: money and rates as decimal strings, probabilities too.
#[derive(Serialize)]
struct RowJson<'a> {
    rank: usize,
    zone_id: i64,
    code: &'a str,
    name: &'a str,
    status: &'static str,
    standing: &'static str,
    taken_by_profitability_index: bool,
    /// Deprecated in 0.2.0 (`taken_by_profitability_index`), removed in 0.3.0.
    in_pi_order_set: bool,
    case: Option<CaseJson>,
    investment: Option<String>,
    npv: Option<String>,
    chance_weighted_npv: Option<String>,
    /// Deprecated in 0.2.0 (`chance_weighted_npv`), removed in 0.3.0.
    risk_adjusted_npv: Option<String>,
    calibrated_npv: Option<String>,
    irr: Option<String>,
    payback_months: Option<String>,
    profitability_index: Option<String>,
    chance_npv_below_zero: Option<String>,
    /// Deprecated in 0.2.0 (`chance_npv_below_zero`), removed in 0.3.0.
    probability_npv_below_zero: Option<String>,
    mean_npv: Option<String>,
    p10_npv: Option<String>,
    p50_npv: Option<String>,
    p90_npv: Option<String>,
    realization_to_date: Option<String>,
    readiness: Option<ReadinessJson>,
    problem: Option<&'a str>,
    /// The hurdle rate of this row's figures.
    hurdle_rate: String,
    /// `at_approval` (a baseline keeps its approval's rate) or `today` (the site's setting).
    hurdle_rate_basis: &'static str,
}

fn row_json(rank: usize, r: &PortfolioRow) -> RowJson<'_> {
    let f = r.figures();
    let m = f.map(|f| &f.metrics);
    let u = f.map(|f| &f.simulation);
    let sim = |g: fn(&crate::finance::montecarlo::Simulation) -> f64| {
        u.and_then(|u| Decimal::from_f64_retain(g(u))).map(|d| money_text(d.round_dp(2)))
    };
    RowJson {
        rank,
        zone_id: r.zone().id,
        code: &r.zone().code,
        name: &r.zone().name,
        status: r.zone().status.as_str(),
        standing: r.standing.label(),
        taken_by_profitability_index: r.taken_by_profitability_index,
        in_pi_order_set: r.taken_by_profitability_index,
        case: r.base.case.as_ref().map(|(id, v, label, baseline)| CaseJson {
            id: *id,
            version: *v,
            label: format!("v{v} {label}"),
            baseline: *baseline,
        }),
        investment: r.investment().map(money_text),
        npv: r.npv().map(money_text),
        chance_weighted_npv: r.chance_weighted.map(money_text),
        risk_adjusted_npv: r.chance_weighted.map(money_text),
        calibrated_npv: r.calibrated.map(money_text),
        irr: m.and_then(|m| m.irr_annual).map(rate_text),
        payback_months: m.and_then(|m| m.payback_months.as_ref()).map(|p| money_text(p.periods)),
        profitability_index: m.and_then(|m| m.profitability_index).map(money_text),
        chance_npv_below_zero: u.map(|u| rate_text(u.chance_npv_below_zero)),
        probability_npv_below_zero: u.map(|u| rate_text(u.chance_npv_below_zero)),
        mean_npv: sim(|s| s.mean),
        p10_npv: sim(|s| s.p10),
        p50_npv: sim(|s| s.p50),
        p90_npv: sim(|s| s.p90),
        realization_to_date: r.base.realization.map(rate_text),
        readiness: r.readiness.map(|x| ReadinessJson { score: x.score, scored: x.rated, of: x.of }),
        problem: r.problem(),
        hurdle_rate: r.base.hurdle.0.to_string(),
        hurdle_rate_basis: if r.base.hurdle.1 { "at_approval" } else { "today" },
    }
}

/// GET /api/v1/portfolio?budget=&rank=&basis=&min_readiness=&seed=
pub async fn api(
    State(state): State<AppState>,
    super::ApiQuery(q): super::ApiQuery<PortfolioQuery>,
) -> Result<Response, ApiError> {
    let params = PortfolioParams::parse(&q, NumberFormat::Plain).map_err(AppError::from)?;
    let key = format!("api?{}", query_string(&q));
    let body = state.answers.get(&state.pool, key, || api_json(&state, params)).await?;
    Ok(([(header::CONTENT_TYPE, "application/json")], body.body()).into_response())
}

/// The API's answer around its rows (`zones` last, so the rows are stitched in after it).
#[derive(Serialize)]
struct ApiAnswer<'a> {
    currency: &'a str,
    rank: &'static str,
    basis: &'static str,
    min_readiness: Option<String>,
    seed: String,
    trials: usize,
    /// Zones whose figures are still being computed after a start, left out of `zones` and
    /// `choice` (0 once every zone is in).
    zones_pending: usize,
    choice: Option<serde_json::Value>,
    zones: Vec<RowJson<'a>>,
}

async fn api_json(state: &AppState, params: PortfolioParams) -> Result<(String, bool), AppError> {
    let computed = compute(state, params, Some(READY_WAIT)).await?;
    let complete = computed.complete();
    let answers = state.answers.clone();
    let text = crate::app::cpu::run(move || api_text(&computed, &answers.api_rows)).await??;
    Ok((text, complete))
}

/// The API's JSON: the head serialized, then each row stitched from its kept pieces (see
/// [`super::answers`]); the same text as serializing [`ApiAnswer`] with every row.
fn api_text(computed: &Computed, pieces: &super::answers::RowPieces) -> Result<String, AppError> {
    let internal = |e: serde_json::Error| AppError::Internal(e.into());
    let mut head = serde_json::to_string(&api_head(computed)).map_err(internal)?;
    let p = &computed.portfolio;
    let rows: Vec<(&Arc<ZoneBase>, &PortfolioRow)> = p.rows.iter().map(|r| (&r.base, r)).collect();
    let pieces = pieces.get(&rows, |r| row_pieces(r));
    // The head ends with `"zones":[]}`: the rows go between the brackets.
    head.truncate(head.len() - "]}".len());
    let mut out = head;
    out.reserve(pieces.iter().map(|p| p.iter().map(|s| s.len()).sum::<usize>() + 160).sum());
    for (i, (r, pieces)) in p.rows.iter().zip(&pieces).enumerate() {
        if i > 0 {
            out.push(',');
        }
        stitch_row(&mut out, i + 1, r, pieces)?;
    }
    out.push_str("]}");
    Ok(out)
}

/// The budget choice's fields that the API answers and a portfolio pack stores alike: the
/// budget, what is committed, and the two sets with the recommended one's cost and value.
pub(super) fn choice_core(p: &Portfolio, c: &BudgetChoice) -> serde_json::Map<String, serde_json::Value> {
    object(json!({
        "budget": money_text(c.budget),
        "committed": money_text(c.committed),
        "recommended": p.codes_where(|r| r.standing == Standing::Recommended),
        "recommended_investment": money_text(c.recommended_cost),
        "recommended_value": money_text(c.recommended_value),
        "taken_by_profitability_index": p.codes_where(|r| r.taken_by_profitability_index),
    }))
}

/// The fields of a `json!({...})` object literal.
fn object(v: serde_json::Value) -> serde_json::Map<String, serde_json::Value> {
    match v {
        serde_json::Value::Object(m) => m,
        _ => serde_json::Map::new(),
    }
}

fn api_head(computed: &Computed) -> ApiAnswer<'_> {
    let p = &computed.portfolio;
    let choice = p.choice.as_ref().map(|c| {
        let mut answer = choice_core(p, c);
        answer.extend(object(json!({
            "available": money_text(c.available),
            "taken_by_profitability_index_investment": money_text(c.taken_by_profitability_index_cost),
            "taken_by_profitability_index_value": money_text(c.taken_by_profitability_index_value),
            "only_recommended": c.only_recommended,
            "only_taken_by_profitability_index": c.only_taken_by_profitability_index,
            // Deprecated in 0.2.0 (the four fields above under their old names), removed in 0.3.0.
            "pi_order": p.codes_where(|r| r.taken_by_profitability_index),
            "pi_order_investment": money_text(c.taken_by_profitability_index_cost),
            "pi_order_value": money_text(c.taken_by_profitability_index_value),
            "only_pi_order": c.only_taken_by_profitability_index,
            "next_in_line": c.next_in_line.as_ref().map(|(code, lack)| json!({ "code": code, "budget_lacking": money_text(*lack) })),
            "proven_optimal": c.proven,
        })));
        serde_json::Value::Object(answer)
    });
    ApiAnswer {
        currency: &computed.site.currency,
        rank: p.params.rank.as_str(),
        basis: p.params.basis.as_str(),
        min_readiness: p.params.min_readiness.map(money_text),
        seed: p.params.trials.seed.to_string(),
        trials: p.params.trials.count,
        zones_pending: computed.pending,
        choice,
        zones: Vec::new(),
    }
}

/// Where a row's JSON (as [`RowJson`] serializes it) is cut: each pair is the key that starts
/// a piece of the zone's own figures and the key that ends it, where a field that depends on
/// the whole portfolio begins. A key with its quotes and the comma before it cannot occur
/// inside a JSON string, where every quote is escaped.
const CUTS: [(&str, &str); 4] = [
    (",\"zone_id\":", ",\"standing\":"),
    (",\"case\":", ",\"calibrated_npv\":"),
    (",\"irr\":", ",\"readiness\":"),
    (",\"problem\":", "}"),
];

/// The pieces of a row that depend on the zone's figures only: [`RowJson`] cut at [`CUTS`].
fn row_pieces(r: &PortfolioRow) -> Vec<Box<str>> {
    // Strings, numbers and options only: serialization cannot fail.
    let text = serde_json::to_string(&row_json(0, r)).unwrap_or_default();
    let mut at = 0;
    CUTS.iter()
        .map(|(from, to)| {
            let start = text[at..].find(from).map_or(text.len(), |i| at + i);
            let end =
                if *to == "}" { text.len() - 1 } else { text[start..].find(to).map_or(text.len(), |i| start + i) };
            at = end;
            text[start..end].into()
        })
        .collect()
}

/// One row of the API: the portfolio's parts of `r` around its kept `pieces`.
fn stitch_row(out: &mut String, rank: usize, r: &PortfolioRow, pieces: &[Box<str>]) -> Result<(), AppError> {
    let [figures, money, metrics, rest] = pieces else {
        return Err(AppError::Internal(anyhow::anyhow!("a portfolio row has {} pieces, not 4", pieces.len())));
    };
    fn json<T: Serialize + ?Sized>(v: &T) -> Result<String, AppError> {
        serde_json::to_string(v).map_err(|e| AppError::Internal(e.into()))
    }
    let readiness = r.readiness.map(|x| ReadinessJson { score: x.score, scored: x.rated, of: x.of });
    out.push_str("{\"rank\":");
    out.push_str(&rank.to_string());
    out.push_str(figures);
    out.push_str(",\"standing\":");
    out.push_str(&json(&r.standing.label())?);
    let taken = if r.taken_by_profitability_index { "true" } else { "false" };
    out.push_str(",\"taken_by_profitability_index\":");
    out.push_str(taken);
    out.push_str(",\"in_pi_order_set\":");
    out.push_str(taken);
    out.push_str(money);
    out.push_str(",\"calibrated_npv\":");
    out.push_str(&json(&r.calibrated.map(money_text))?);
    out.push_str(metrics);
    out.push_str(",\"readiness\":");
    out.push_str(&json(&readiness)?);
    out.push_str(rest);
    out.push('}');
    Ok(())
}

#[cfg(test)]
mod layout_tests {
    use super::*;

    /// Expected texts written by hand from the rule in `breakable`'s docs.
    #[test]
    fn only_long_figures_may_wrap_between_groups() {
        assert_eq!(breakable("-118,670.10"), "-118,670.10");
        assert_eq!(breakable("-1,000,000.00"), "-1,000,000.00");
        assert_eq!(breakable("2,064,477,567,804,773.71"), "2,<wbr>064,<wbr>477,<wbr>567,<wbr>804,<wbr>773.71");
        assert_eq!(breakable("<b>not a figure</b>"), "&lt;b&gt;not a figure&lt;/b&gt;");
    }

    #[tokio::test]
    async fn a_decimal_comma_site_breaks_after_its_points() {
        let text = NumberFormat::DecimalComma.scope(async { breakable("2.064.477.567.804.773,71") }).await;
        assert_eq!(text, "2.<wbr>064.<wbr>477.<wbr>567.<wbr>804.<wbr>773,71");
    }
}
