//! The roadmap page (`GET /roadmap`, `POST /roadmap/plans`): the plan's inputs for those who
//! may change cases, the stored plan versions for everyone, and the answer: the timeline, the
//! capital use per plan year, the monthly introductions, the table and the simple plan beside.

use super::super::auth::{CurrentUser, Nav};
use super::super::chart::{CountChart, Timeline, TimelineInput};
use super::super::problems::Problems;
use super::super::{AppError, AppState, FormBody};
use crate::db;
use crate::domain::{
    FieldErrors, Money, Month, NumberFormat, Percent, PlanVersion, RoadmapAnswer, RoadmapParams, RoadmapQuery,
    SiteSettings, ValueBasis,
};
use crate::finance::roadmap::{Placement, capital_use, introductions};
use askama::Template;
use axum::extract::{Query, State};
use axum::http::StatusCode;
use axum::response::{Html, IntoResponse, Redirect, Response};
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use std::collections::HashMap;

/// The form's anchor id and its name for people (web::problems).
const FORM: (&str, &str) = ("roadmap-form", "Plan inputs");

const DASH: &str = "–";

/// Cents as money.
fn cents(c: i64) -> Money {
    Money(Decimal::new(c, 2))
}

/// One row of the table.
pub struct RowView {
    code: String,
    name: String,
    area: String,
    status: &'static str,
    /// `committed`, `planned` or `not-planned` (the row's class).
    class: &'static str,
    start: String,
    live: String,
    /// One-off money per plan year.
    one_off: Vec<String>,
    value: String,
    delay: String,
    earlier: String,
    /// The reason when not in this plan.
    reason: Option<String>,
}

/// One plan year's capital.
pub struct YearView {
    name: String,
    months: String,
    budget: Money,
    used: Money,
    simple_used: Money,
    /// Budget left at the year's end (with carry-over: of the years so far).
    left: Money,
    over: bool,
}

/// The answer, formatted for the page.
pub struct AnswerView {
    basis: &'static str,
    start: Month,
    end: Month,
    capacity: u32,
    carry_over: bool,
    one_per_area: bool,
    proven: bool,
    /// The proven gap when not proven: money and share of the bound.
    gap: Option<(Money, String)>,
    value: Money,
    simple_value: Money,
    gain: Money,
    /// Zones the simple plan places differently, in words.
    differences: Vec<String>,
    timeline: Timeline,
    counts: CountChart,
    capital: Vec<YearView>,
    /// Plan year names for the table's one-off columns.
    year_names: Vec<String>,
    rows: Vec<RowView>,
    /// Codes and reasons of candidates not in this plan.
    not_planned: Vec<(String, String)>,
    /// Open zones left out of the plan, with why.
    left_out: Vec<(String, String)>,
    /// Rules the committed zones alone break.
    overruns: Vec<String>,
}

fn placement_start(p: Option<&Placement>) -> Option<i32> {
    p.and_then(Placement::start_month)
}

impl AnswerView {
    /// Format `a` for the page in the current number format.
    pub fn new(a: &RoadmapAnswer) -> Self {
        let inst = &a.instance;
        let start = a.params.start;
        let years = inst.years;
        let opt = &a.result.optimal;
        let simple = &a.result.simple;
        let month_name = |m: i32| a.params.month(m).to_string();
        let live_of = |i: usize, s: i32| s + inst.zones[i].window() as i32;
        let place = |i: usize| opt.placements.get(i);
        let plan_rows = a.rows(opt, Some(&a.result.delays));
        // The table: by start month, then code; candidates not in this plan last.
        let mut order: Vec<usize> = (0..plan_rows.len().min(a.zones.len())).collect();
        order.sort_by_key(|&i| (placement_start(place(i)).unwrap_or(i32::MAX), a.zones[i].code.clone()));
        let mut rows = Vec::with_capacity(order.len());
        let mut not_planned = Vec::new();
        for &i in &order {
            let (z, r) = (&a.zones[i], &plan_rows[i]);
            let committed = matches!(place(i), Some(Placement::Committed { .. }));
            let reason = r.reason.as_ref().map(|why| format!("not in this plan: {why}"));
            let class = match (committed, &reason) {
                (true, _) => "committed",
                (false, None) => "planned",
                (false, Some(_)) => "not-planned",
            };
            if let Some(why) = &reason {
                not_planned.push((z.code.clone(), why.clone()));
            }
            let money_or_dash = |d: Option<Decimal>| d.map_or_else(|| DASH.to_string(), |d| Money(d).to_string());
            let started = r.start.is_some();
            rows.push(RowView {
                code: z.code.clone(),
                name: z.name.clone(),
                area: if z.area.is_empty() { DASH.to_string() } else { z.area.clone() },
                status: z.status.as_str(),
                class,
                start: r.start.map_or_else(|| "not in this plan".to_string(), |m| m.to_string()),
                live: r.live.map_or_else(|| DASH.to_string(), |m| m.to_string()),
                one_off: r
                    .one_off_by_year
                    .iter()
                    .map(|d| if started { Money(*d).to_string() } else { DASH.to_string() })
                    .collect(),
                value: if committed { "committed".to_string() } else { money_or_dash(r.value_at_start) },
                delay: money_or_dash(r.delay_cost),
                earlier: match (&r.earlier, committed, r.quarter) {
                    (_, true, _) => "fixed by its baseline".to_string(),
                    (Some(words), _, _) => words.clone(),
                    (None, _, Some(0)) => "starts in the first quarter".to_string(),
                    (None, _, _) => DASH.to_string(),
                },
                reason,
            });
        }
        // The timeline: zones that start, grouped by area (no area last), then by start.
        let mut bars: Vec<(usize, i32)> =
            order.iter().filter_map(|&i| placement_start(place(i)).map(|s| (i, s))).collect();
        bars.sort_by_key(|&(i, s)| (a.zones[i].area.is_empty(), a.zones[i].area.clone(), s, a.zones[i].code.clone()));
        let horizon = 12 * years as i32;
        let timeline_input: Vec<TimelineInput> = bars
            .iter()
            .filter(|&&(i, s)| s < horizon && live_of(i, s) > 0)
            .map(|&(i, s)| {
                let z = &a.zones[i];
                let committed = matches!(place(i), Some(Placement::Committed { .. }));
                let live = month_name(live_of(i, s));
                TimelineInput {
                    code: z.code.clone(),
                    area: if z.area.is_empty() { "no area".into() } else { z.area.clone() },
                    start: s,
                    live: live_of(i, s),
                    committed,
                    note: if committed { format!("committed, live {live}") } else { format!("live {live}") },
                    title: format!(
                        "{} {}: {} from {} to live {live}",
                        z.code,
                        z.name,
                        if committed { "committed" } else { "planned" },
                        month_name(s)
                    ),
                }
            })
            .collect();
        let planned = opt.placements.iter().filter(|p| matches!(p, Placement::Planned { .. })).count();
        let committed = opt.placements.iter().filter(|p| matches!(p, Placement::Committed { .. })).count();
        let timeline = Timeline::new(
            timeline_input,
            years,
            |q| month_name(3 * q as i32),
            format!(
                "{planned} candidate(s) planned and {committed} committed zone(s) from {} to {}; dark bars are committed zones, light bars planned ones, each from its start to the month it goes live.",
                a.params.month(0),
                a.params.month(horizon - 1)
            ),
        );
        let counts_by_month = introductions(inst, &opt.placements);
        let busiest = counts_by_month.iter().copied().max().unwrap_or(0);
        let over_months = counts_by_month.iter().filter(|c| **c > inst.capacity).count();
        let counts = CountChart::new(
            &counts_by_month,
            inst.capacity,
            |m| month_name(m as i32),
            format!(
                "Zones inside their introduction window per month: at most {busiest} against {} introductions at a time{}.",
                inst.capacity,
                if over_months > 0 {
                    format!("; {over_months} month(s) over, by committed zones")
                } else {
                    String::new()
                }
            ),
        );
        let used = capital_use(inst, &opt.placements);
        let simple_used = capital_use(inst, &simple.placements);
        let mut running = 0_i64;
        let capital = (0..years as usize)
            .map(|y| {
                let budget = inst.budgets.get(y).copied().unwrap_or(0);
                let u = used.get(y).copied().unwrap_or(0);
                let left = if inst.carry_over {
                    running += budget - u;
                    running
                } else {
                    budget - u
                };
                YearView {
                    name: format!("plan year {}", y + 1),
                    months: format!("{} to {}", a.params.month(12 * y as i32), a.params.month(12 * y as i32 + 11)),
                    budget: cents(budget),
                    used: cents(u),
                    simple_used: cents(simple_used.get(y).copied().unwrap_or(0)),
                    left: cents(left),
                    over: left < 0,
                }
            })
            .collect();
        let differences = order
            .iter()
            .filter(|&&i| !matches!(place(i), Some(Placement::Committed { .. })))
            // By start: two "not in it" differ only in their reasons, which is no difference here.
            .filter(|&&i| placement_start(place(i)) != placement_start(simple.placements.get(i)))
            .map(|&i| {
                let at = |p: Option<&Placement>| match placement_start(p) {
                    Some(s) => format!("starts {}", month_name(s)),
                    None => "is not in it".to_string(),
                };
                format!(
                    "{}: here it {}; in the simple plan it {}",
                    a.zones[i].code,
                    at(place(i)),
                    at(simple.placements.get(i))
                )
            })
            .collect();
        let gap = (!opt.proven).then(|| {
            let g = (opt.bound - opt.value).max(Decimal::ZERO);
            let share = if opt.bound > Decimal::ZERO { (g / opt.bound).to_f64().unwrap_or(0.0) } else { 0.0 };
            (Money(g), Percent(share).to_string())
        });
        Self {
            basis: a.params.basis.label(),
            start,
            end: a.params.month(horizon - 1),
            capacity: inst.capacity,
            carry_over: inst.carry_over,
            one_per_area: inst.one_per_area,
            proven: opt.proven,
            gap,
            value: Money(opt.value),
            simple_value: Money(simple.value),
            gain: Money(opt.value - simple.value),
            differences,
            timeline,
            counts,
            capital,
            year_names: (1..=years).map(|y| format!("plan year {y}")).collect(),
            rows,
            not_planned,
            left_out: a.left_out.clone(),
            overruns: a.result.overruns.iter().map(|r| a.rule_words(r)).collect(),
        }
    }
}

/// A stored plan version in the list.
pub struct PlanLine {
    id: i64,
    name: String,
    version: u32,
    created_at: String,
    created_by: String,
}

impl From<&PlanVersion> for PlanLine {
    fn from(p: &PlanVersion) -> Self {
        Self {
            id: p.id,
            name: p.name.clone(),
            version: p.version,
            created_at: p.created_at.clone(),
            created_by: p.created_by.clone(),
        }
    }
}

#[derive(Template)]
#[template(path = "roadmap/page.html")]
struct RoadmapPage {
    nav: Nav,
    site: SiteSettings,
    /// The inputs in the form.
    form: RoadmapQuery,
    /// The plan name in the save form.
    name: String,
    problems: Problems,
    bases: [ValueBasis; 3],
    plans: Vec<PlanLine>,
    /// The stored version the answer comes from, if any.
    shown: Option<PlanLine>,
    answer: Option<AnswerView>,
    print_view: bool,
    /// The query string of the CSV and print links.
    query: String,
}

impl RoadmapPage {
    fn error(&self, field: &str) -> Option<&str> {
        self.problems.errors(FORM.0).get(field)
    }
}

/// Query parameters of the page: the plan inputs, a stored version, the print view switch.
#[derive(serde::Deserialize, Default)]
#[serde(default)]
pub struct PageQuery {
    #[serde(flatten)]
    q: RoadmapQuery,
    /// A stored plan version's id.
    plan: String,
    view: String,
    /// The save form's plan name, kept when the lead presses Show.
    name: String,
}

impl PageQuery {
    /// Whether any plan input was given.
    fn has_inputs(&self) -> bool {
        self.q != RoadmapQuery::default()
    }
}

/// The inputs to show: a stored version (`?plan=`), the query's inputs, or else the newest
/// stored version; `None` when there is nothing to compute. A stored version's numbers are
/// plain decimals ([`crate::app::roadmap::save_plan_in`]), a query's are in the site's format.
pub(super) async fn chosen_inputs(
    state: &AppState,
    pq: &PageQuery,
    plans: &[PlanVersion],
) -> Result<Option<(RoadmapQuery, Option<PlanVersion>)>, AppError> {
    if !pq.plan.is_empty() {
        let id: i64 = pq.plan.trim().parse().map_err(|_| AppError::NotFound("plan"))?;
        let p = crate::app::roadmap::plan(&state.pool, id).await?;
        return Ok(Some((p.inputs.clone(), Some(p))));
    }
    if pq.has_inputs() {
        return Ok(Some((pq.q.clone(), None)));
    }
    Ok(plans.first().map(|p| (p.inputs.clone(), Some(p.clone()))))
}

/// The format to read `plan`'s inputs in: plain for a stored version, else the site's.
pub(super) fn format_of(plan: Option<&PlanVersion>) -> NumberFormat {
    if plan.is_some() { NumberFormat::Plain } else { NumberFormat::current() }
}

/// A stored version's inputs as the form shows them: its budgets (plain decimals) in the
/// site's number format, so that the form reads them back as stored.
fn in_site_format(q: &RoadmapQuery) -> RoadmapQuery {
    let site = NumberFormat::current();
    let budgets: Vec<String> = q
        .budgets
        .split(';')
        .map(|b| NumberFormat::Plain.read(b).map_or_else(|_| b.to_string(), |d| site.write(d, 2)))
        .collect();
    RoadmapQuery { budgets: budgets.join(";"), ..q.clone() }
}

/// The query string of the inputs (strings only: serialization cannot fail).
fn query_of(q: &RoadmapQuery, plan: Option<&PlanVersion>) -> String {
    match plan {
        Some(p) => format!("plan={}", p.id),
        None => serde_urlencoded::to_string(q).unwrap_or_default(),
    }
}

/// Build the page for `inputs` (none: the form alone), with `problems` beside the form.
async fn render(
    state: &AppState,
    nav: Nav,
    inputs: Option<(RoadmapQuery, Option<PlanVersion>)>,
    mut form: Option<RoadmapQuery>,
    name: String,
    mut problems: Problems,
    print_view: bool,
) -> Result<Response, AppError> {
    let site = db::get_site(&state.pool).await?;
    let plans = crate::app::roadmap::plans(&state.pool).await?;
    let mut answer = None;
    let mut query = String::new();
    let mut shown = None;
    if let Some((q, plan)) = inputs {
        query = query_of(&q, plan.as_ref());
        shown = plan.as_ref().map(PlanLine::from);
        form.get_or_insert_with(|| match &plan {
            Some(_) => in_site_format(&q),
            None => q.clone(),
        });
        let next = RoadmapParams::next_month(state.clock.now());
        match RoadmapParams::parse(&q, format_of(plan.as_ref()), next, &site) {
            Ok(params) => match super::compute(state, params).await {
                Ok(a) => answer = Some(AnswerView::new(&a)),
                Err(AppError::Invalid(f)) => problems = problems.and(Problems::of(FORM.0, FORM.1, f, None)),
                Err(e) => return Err(e),
            },
            Err(f) => problems = problems.and(Problems::of(FORM.0, FORM.1, f, None)),
        }
    }
    let page = RoadmapPage {
        nav,
        form: form.unwrap_or_default(),
        name,
        bases: ValueBasis::ALL,
        plans: plans.iter().map(PlanLine::from).collect(),
        shown,
        answer,
        print_view,
        query,
        site,
        problems,
    };
    let status = if page.problems.is_empty() {
        StatusCode::OK
    } else if page.problems.has_notice() {
        StatusCode::CONFLICT
    } else {
        StatusCode::UNPROCESSABLE_ENTITY
    };
    Ok((status, Html(page.render()?)).into_response())
}

/// GET /roadmap
pub async fn page(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Query(pq): Query<PageQuery>,
) -> Result<Response, AppError> {
    let plans = crate::app::roadmap::plans(&state.pool).await?;
    let inputs = chosen_inputs(&state, &pq, &plans).await?;
    let name = pq.name.clone();
    render(&state, Nav::from(&me), inputs, None, name, Problems::default(), pq.view == "print").await
}

/// The save form: the plan's name and its inputs.
#[derive(serde::Deserialize, Default)]
#[serde(default)]
pub struct SaveForm {
    name: String,
    #[serde(flatten)]
    q: RoadmapQuery,
}

/// POST /roadmap/plans: save the inputs as the next version of a named plan, then show it.
pub async fn save(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(form): FormBody<SaveForm>,
) -> Result<Response, AppError> {
    let numbers = NumberFormat::current();
    let saved =
        crate::app::roadmap::save_plan_in(&state.pool, me.name(), &form.name, &form.q, numbers, state.clock.now())
            .await;
    let refusal = match saved {
        Ok(saved) => return Ok(Redirect::to(&format!("/roadmap?plan={}", saved.id)).into_response()),
        Err(crate::app::Error::Invalid(f)) => Problems::of(FORM.0, FORM.1, f, None),
        Err(crate::app::Error::Conflict(msg)) => Problems::of(FORM.0, FORM.1, FieldErrors::default(), Some(msg)),
        Err(e) => return Err(e.into()),
    };
    render(&state, Nav::from(&me), None, Some(form.q), form.name, refusal, false).await
}

/// Each zone's planned start month in the newest stored plan version, by code, for the
/// portfolio's column; `None` when no plan is stored.
pub struct PlannedStarts {
    /// The version the starts come from.
    pub plan: PlanLine,
    /// Code -> start text (`2027-04`, `2025-03 (committed)`, `not in this plan`).
    pub starts: HashMap<String, String>,
    /// Why the version could not be computed (the column then says so once).
    pub problem: Option<String>,
}

impl PlanLine {
    /// The row id.
    pub fn id(&self) -> i64 {
        self.id
    }
    /// "name, version N, saved by X".
    pub fn describe(&self) -> String {
        format!("\u{201c}{}\u{201d} version {}, saved by {}", self.name, self.version, self.created_by)
    }
    /// When it was saved (stored RFC 3339 text).
    pub fn created_at(&self) -> &str {
        &self.created_at
    }
}

/// The planned starts of the newest stored plan version (see [`PlannedStarts`]).
pub(crate) async fn planned_starts(state: &AppState) -> Result<Option<PlannedStarts>, AppError> {
    let plans = crate::app::roadmap::plans(&state.pool).await?;
    let Some(latest) = plans.first() else { return Ok(None) };
    let site = db::get_site(&state.pool).await?;
    let plan = PlanLine::from(latest);
    // The roadmap needs every zone's figures: while they are still being computed after a
    // start the portfolio answers with what is ready and does not wait for them.
    if state.figures.warming() {
        let problem = Some("the zones' figures are still being computed".to_string());
        return Ok(Some(PlannedStarts { plan, starts: HashMap::new(), problem }));
    }
    let params = match RoadmapParams::parse(
        &latest.inputs,
        NumberFormat::Plain,
        RoadmapParams::next_month(state.clock.now()),
        &site,
    ) {
        Ok(p) => p,
        Err(f) => {
            return Ok(Some(PlannedStarts { plan, starts: HashMap::new(), problem: Some(format!("its inputs: {f}")) }));
        }
    };
    // The portfolio must not fail because the roadmap cannot be computed: it says so instead.
    let answer = match super::compute(state, params).await {
        Ok(a) => a,
        Err(AppError::Invalid(f)) => {
            return Ok(Some(PlannedStarts { plan, starts: HashMap::new(), problem: Some(f.to_string()) }));
        }
        Err(AppError::Conflict(msg)) => {
            return Ok(Some(PlannedStarts { plan, starts: HashMap::new(), problem: Some(msg) }));
        }
        Err(e) => {
            tracing::warn!(error = ?e, "the newest plan version could not be computed for the portfolio");
            let problem = Some("the roadmap could not be computed".to_string());
            return Ok(Some(PlannedStarts { plan, starts: HashMap::new(), problem }));
        }
    };
    Ok(Some(PlannedStarts { plan, starts: start_texts(&answer), problem: None }))
}

/// Code -> the start as the portfolio's column writes it.
fn start_texts(a: &RoadmapAnswer) -> HashMap<String, String> {
    a.zones
        .iter()
        .zip(&a.result.optimal.placements)
        .map(|(z, p)| {
            let text = match p {
                Placement::Committed { start: s } => format!("{} (committed)", a.params.month(*s)),
                Placement::Planned { quarter } => a.params.month(3 * *quarter as i32).to_string(),
                Placement::NotPlanned(_) => "not in this plan".to_string(),
            };
            (z.code.clone(), text)
        })
        .collect()
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::domain::{RoadmapZone, ZoneStatus};
    use crate::finance::roadmap::{Delay, Instance, NotPlanned, Plan, PlanZone, Roadmap, Rule};

    /// A hand-made answer: plan start 2027-01, 2 years, capacity 1, budgets 100,000.00 a year;
    /// PRESS-1 committed from 2026-11 (window 4 months), PAINT-1 planned in quarter 2
    /// (2027-07, window 3 months), WELD-1 not in this plan (budget in 8 quarters).
    pub(crate) fn answer() -> RoadmapAnswer {
        let zone =
            |code: &str, area: &str, committed: Option<i32>, value: i64, one_off: i64, g: u32, r: u32| PlanZone {
                code: code.into(),
                area: area.into(),
                needs: Vec::new(),
                needs_outside: Vec::new(),
                committed_start: committed,
                value: Decimal::new(value, 2),
                one_off: vec![(0, one_off)],
                go_live: g,
                ramp_up: r,
            };
        let instance = Instance {
            years: 2,
            budgets: vec![10_000_000, 10_000_000],
            carry_over: false,
            capacity: 1,
            one_per_area: false,
            monthly_rate: 0.0,
            zones: vec![
                zone("PRESS-1", "press shop", Some(-2), 5_000_000, 4_000_000, 3, 1),
                zone("PAINT-1", "paint shop", None, 9_000_000, 6_000_000, 2, 1),
                zone("WELD-1", "", None, 3_000_000, 50_000_000, 2, 1),
            ],
        };
        let rz = |code: &str, area: &str, status: ZoneStatus, total: i64| RoadmapZone {
            code: code.into(),
            name: format!("{code} line"),
            area: area.into(),
            status,
            one_off_total: Decimal::new(total, 2),
        };
        let blocked = NotPlanned::Blocked(vec![Rule::Budget { year: 0, over: 40_000_000 }; 8]);
        let optimal = Plan {
            placements: vec![
                Placement::Committed { start: -2 },
                Placement::Planned { quarter: 2 },
                Placement::NotPlanned(blocked.clone()),
            ],
            value: Decimal::new(9_000_000, 2),
            bound: Decimal::new(9_000_000, 2),
            proven: true,
        };
        let simple = Plan {
            placements: vec![
                Placement::Committed { start: -2 },
                Placement::Planned { quarter: 3 },
                Placement::NotPlanned(blocked),
            ],
            value: Decimal::new(8_500_000, 2),
            bound: Decimal::new(8_500_000, 2),
            proven: false,
        };
        let delays =
            vec![None, Some(Delay { cost: Decimal::new(12_345, 2), earlier: Some(Rule::Capacity { month: 3 }) }), None];
        RoadmapAnswer {
            params: RoadmapParams {
                start: Month { year: 2027, month: 1 },
                years: 2,
                budgets: vec![Decimal::new(100_000, 0); 2],
                capacity: 1,
                carry_over: false,
                one_per_area: false,
                basis: ValueBasis::Npv,
                time_limit_seconds: 10,
            },
            instance,
            zones: vec![
                rz("PRESS-1", "press shop", ZoneStatus::Piloting, 4_000_000),
                rz("PAINT-1", "paint shop", ZoneStatus::Candidate, 6_000_000),
                rz("WELD-1", "", ZoneStatus::Candidate, 50_000_000),
            ],
            result: Roadmap { optimal, simple, delays, overruns: Vec::new() },
            left_out: vec![("OLD-1".into(), "no business case".into())],
        }
    }

    #[test]
    fn the_view_of_a_hand_made_answer() {
        let v = AnswerView::new(&answer());
        // Gain over the simple plan: 90,000.00 - 85,000.00 (written by hand).
        assert_eq!(v.gain.to_string(), "5,000.00");
        assert!(v.proven && v.gap.is_none());
        assert_eq!(v.end.to_string(), "2028-12");
        // Table order: PRESS-1 (starts month -2), PAINT-1 (month 6), WELD-1 (not in this plan).
        let codes: Vec<&str> = v.rows.iter().map(|r| r.code.as_str()).collect();
        assert_eq!(codes, ["PRESS-1", "PAINT-1", "WELD-1"]);
        assert_eq!((v.rows[0].start.as_str(), v.rows[0].live.as_str()), ("2026-11", "2027-03"));
        assert_eq!((v.rows[1].start.as_str(), v.rows[1].live.as_str()), ("2027-07", "2027-10"));
        assert_eq!(v.rows[1].delay, "123.45");
        assert_eq!(v.rows[1].earlier, "one more introduction at a time in 2027-04");
        assert_eq!(v.rows[2].start, "not in this plan");
        assert_eq!(v.not_planned, vec![("WELD-1".to_string(), "not in this plan: budget".to_string())]);
        assert_eq!(
            v.differences,
            vec!["PAINT-1: here it starts 2027-07; in the simple plan it starts 2027-10".to_string()]
        );
        // Two bars, one per area heading.
        assert_eq!(v.timeline.rows.len(), 2);
        assert_eq!(v.timeline.groups.iter().map(|g| g.text.as_str()).collect::<Vec<_>>(), ["paint shop", "press shop"]);
    }

    #[test]
    fn an_unproven_plan_states_its_gap() {
        let mut a = answer();
        a.result.optimal.proven = false;
        a.result.optimal.bound = Decimal::new(10_000_000, 2);
        let v = AnswerView::new(&a);
        // Gap 100,000.00 - 90,000.00 = 10,000.00, a tenth of the bound.
        assert_eq!(
            v.gap.as_ref().map(|(m, s)| (m.to_string(), s.clone())),
            Some(("10,000.00".into(), "10.00 %".into()))
        );
    }

    /// The answer's part of the page, alone.
    #[derive(Template)]
    #[template(path = "roadmap/_answer.html")]
    struct AnswerPart {
        a: AnswerView,
        query: String,
    }

    #[test]
    fn the_answer_renders_its_statement_chart_and_table() -> Result<(), askama::Error> {
        let html = AnswerPart { a: AnswerView::new(&answer()), query: "plan=7".into() }.render()?;
        assert!(html.contains("<h2 id=\"statement-title\">The plan from 2027-01 to 2028-12</h2>"), "{html}");
        assert!(html.contains("<p id=\"proof\"><strong>Proven optimal</strong>: no plan within these rules has a higher total NPV at plan start.</p>"));
        assert!(html.contains("<dd id=\"gain\">5,000.00</dd>"));
        assert!(html.contains("<li>PAINT-1: here it starts 2027-07; in the simple plan it starts 2027-10</li>"));
        assert!(html.contains("<li><strong>WELD-1</strong>: not in this plan: budget</li>"));
        assert!(html.contains("<li><strong>OLD-1</strong>: no business case</li>"));
        assert!(html.contains(">committed, live 2027-03</text>") && html.contains(">live 2027-10</text>"));
        assert!(html.contains("<th scope=\"col\" class=\"num\">One-off in plan year 2</th>"));
        assert!(html.contains("href=\"/roadmap.csv?plan=7\""));
        Ok(())
    }

    /// A stored version's plain budgets are shown in the site's format (written by hand).
    #[tokio::test]
    async fn stored_budgets_are_shown_in_the_site_format() {
        let q = RoadmapQuery { budgets: "75000;110000.5".into(), ..RoadmapQuery::default() };
        let comma = NumberFormat::DecimalComma.scope(async { in_site_format(&q) }).await;
        assert_eq!(comma.budgets, "75.000,00;110.000,50");
        let point = NumberFormat::DecimalPoint.scope(async { in_site_format(&q) }).await;
        assert_eq!(point.budgets, "75,000.00;110,000.50");
    }

    #[test]
    fn the_portfolio_column_reads_the_starts() {
        let s = start_texts(&answer());
        assert_eq!(s.get("PRESS-1").map(String::as_str), Some("2026-11 (committed)"));
        assert_eq!(s.get("PAINT-1").map(String::as_str), Some("2027-07"));
        assert_eq!(s.get("WELD-1").map(String::as_str), Some("not in this plan"));
    }
}
