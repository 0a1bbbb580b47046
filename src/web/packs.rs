//! Decision packs: the case pack (A4 portrait, for the capital committee) and the quarterly
//! portfolio pack (A4 landscape, for management), their list, and the stored snapshot served
//! byte for byte. Rendering lives here (the templates are the web layer's); storing is
//! `app::packs`, the one write path for the pages and the API.

use super::auth::{CurrentUser, Nav};
use super::cases::{MetricsView, figures_on_pool, uncertainty_of};
use super::chart::LineChart;
use super::metrics::{money_text, rate_text};
use super::portfolio::choice_core;
use super::uncertainty::UncertaintyView;
use super::{ApiError, ApiPath, ApiQuery, AppError, AppState, FormBody, JsonBody, NoQuery};
use crate::app::packs::{Making, Render, Rendered};
use crate::db::{self, CaseFull};
use crate::domain::LocalTime;
use crate::domain::pack::{Pack, PackKind, PackZone, Snapshot, changes_since};
use crate::domain::{
    CaseId, Money, NumberFormat, Percent, PortfolioParams, PortfolioQuery, PortfolioRow, Readiness, SiteSettings,
    Standing, Trials, Zone, build_portfolio, calibration_of, pct,
};
use askama::Template;
use axum::extract::{Path, Query, State};
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{Html, IntoResponse, Redirect, Response};
use base64::Engine as _;
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use serde_json::{Value, json};
use sha2::{Digest, Sha256};
use std::collections::HashMap;

/// The stylesheet inlined into every pack: the app's screen styles (charts, tables, cards)
/// and the pack's print rules. A4 comes first, portrait or landscape by kind.
const STYLE: &str = concat!(include_str!("../../static/style.css"), include_str!("../../templates/packs/pack.css"));
const A4_PORTRAIT: &str = "@page { size: A4 portrait; margin: 12mm; }\n";
const A4_LANDSCAPE: &str = "@page { size: A4 landscape; margin: 10mm; }\n";

/// One input of the case with where its value comes from.
pub struct Assumption {
    input: String,
    value: String,
    source: String,
}

/// One readiness criterion as the pack shows it.
pub struct ReadinessRow {
    label: String,
    weight: u8,
    score: String,
    rated: String,
}

/// One step of the approval record: who signed, when, with which words.
pub struct Step {
    step: &'static str,
    by: String,
    on: LocalTime,
    comment: String,
}

#[derive(Template)]
#[template(path = "packs/case.html")]
struct CasePack {
    style: String,
    made_at: LocalTime,
    made_by: String,
    db_state: String,
    site: SiteSettings,
    zone: Zone,
    full: CaseFull,
    question: String,
    notes: Vec<(&'static str, String)>,
    m: MetricsView,
    after_tax: Option<MetricsView>,
    chart: LineChart,
    uncertainty: Result<UncertaintyView, String>,
    assumptions: Vec<Assumption>,
    readiness: Vec<ReadinessRow>,
    readiness_score: String,
    approvals: Vec<Step>,
}

fn readiness_text(r: Option<Readiness>) -> String {
    match r {
        Some(r) if r.complete() => format!("{} of 5", NumberFormat::current().export(&format!("{:.1}", r.score))),
        Some(r) => format!(
            "{} of 5 ({} of {} weighted criteria scored)",
            NumberFormat::current().export(&format!("{:.1}", r.score)),
            r.rated,
            r.of
        ),
        None => "not scored".into(),
    }
}

/// The approval record of a version, oldest step first.
fn approval_steps(full: &CaseFull) -> Vec<Step> {
    let r = &full.case.review;
    let mut steps = vec![Step {
        step: "written",
        by: full.case.created_by.clone(),
        on: LocalTime::of(&full.case.created_at),
        comment: String::new(),
    }];
    let mut push = |step, by: &Option<String>, at: &Option<String>, comment: &str| {
        if let (Some(by), Some(at)) = (by, at) {
            steps.push(Step { step, by: by.clone(), on: LocalTime::of(at), comment: comment.to_string() });
        }
    };
    push("last edited", &r.edited_by, &r.edited_at, "");
    push("submitted", &r.submitted_by, &r.submitted_at, &r.submit_comment);
    push("returned to draft", &r.returned_by, &r.returned_at, &r.return_comment);
    let how = r.approval_note().unwrap_or_else(|| "four eyes: approved by a second person".into());
    let approve = if r.approve_comment.is_empty() { how } else { format!("{}; {how}", r.approve_comment) };
    push("approved", &r.approved_by, &r.approved_at, &approve);
    steps
}

/// Every input of the case with its value and where it comes from.
fn assumptions(full: &CaseFull, site: &SiteSettings, made_at: &str) -> Vec<Assumption> {
    let c = &full.case;
    let h = &c.header;
    let r = &c.review;
    let (by, at) = match (&r.edited_by, &r.edited_at) {
        (Some(by), Some(at)) => (by.clone(), at.clone()),
        _ => (c.created_by.clone(), c.created_at.clone()),
    };
    let editors = if r.editors.is_empty() { by.clone() } else { r.editors.join(", ") };
    let entered = format!("case v{} by {editors}; last edit {} by {by}", c.version, LocalTime::of(&at).local);
    let settings = match (&c.frozen_settings, &r.approved_at) {
        (Some(_), Some(at)) => format!("site settings frozen at approval ({})", LocalTime::of(at).local),
        _ => format!("site settings when the pack was made ({})", LocalTime::of(made_at).local),
    };
    let row = |input: String, value: String, source: &str| Assumption { input, value, source: source.to_string() };
    // An input's own note first, then who entered it; a missing note is said, not hidden.
    let noted = |note: &str| {
        if note.is_empty() { format!("no source note; {entered}") } else { format!("{note}; {entered}") }
    };
    let mut out = vec![
        row("Hurdle rate".into(), format!("{} a year", pct(&site.hurdle_rate)), &settings),
        row("Currency".into(), site.currency.clone(), &settings),
        row("Tax rate".into(), site.tax_rate.as_ref().map_or_else(|| "none: pre-tax only".into(), pct), &settings),
        row("Horizon".into(), format!("{} months from {}", h.horizon_months, h.start_month), &entered),
        row("Go-live".into(), format!("month {}", h.go_live_offset), &entered),
        row("Ramp-up".into(), format!("{} months", h.ramp_up_months), &entered),
        row("Chance the pilot works".into(), pct(&h.success_probability), &entered),
    ];
    for cost in &full.costs {
        let i = &cost.item;
        let when = if i.kind.as_str() == "recurring" {
            format!(
                "{} a year from month {}, escalating {} a year",
                Money(i.amount),
                i.month_offset,
                pct(&i.escalation)
            )
        } else {
            format!("{} in month {}", Money(i.amount), i.month_offset)
        };
        let book = if i.capex { "capex" } else { "opex" };
        out.push(row(format!("Cost: {} ({}, {book})", i.label, i.category.as_str()), when, &noted(&i.source)));
    }
    for d in &full.drivers {
        let x = &d.driver;
        let f = NumberFormat::current();
        out.push(row(
            format!("Benefit: {} ({})", x.label, x.kind.label()),
            format!(
                "{} / {} / {} {} a year (low / likely / high) at {} {} per {}, escalating {} a year",
                f.write_quantity(x.qty_low),
                f.write_quantity(x.qty_likely),
                f.write_quantity(x.qty_high),
                x.unit,
                f.write_quantity(x.unit_value),
                site.currency,
                x.unit,
                pct(&x.escalation)
            ),
            &noted(&x.source),
        ));
    }
    out
}

/// The case pack's figures as JSON: decimals as strings at full precision, as the API gives them.
fn case_json(
    full: &CaseFull,
    zone: &Zone,
    site: &SiteSettings,
    m: &crate::finance::schedule::CaseMetrics,
    u: Option<&crate::domain::CaseUncertainty>,
) -> Value {
    let payback = |p: &Option<crate::finance::Payback>| p.as_ref().map(|p| money_text(p.periods));
    json!({
        "kind": "case",
        "case_id": full.case.id,
        "zone": zone.code,
        "version": full.case.version,
        "label": full.case.header.label,
        "state": full.case.state.as_str(),
        "currency": site.currency,
        "hurdle_rate": site.hurdle_rate.to_string(),
        "npv": money_text(m.npv),
        "irr": m.irr_annual.map(rate_text),
        "mirr": m.mirr_annual.map(rate_text),
        "payback_months": payback(&m.payback_months),
        "discounted_payback_months": payback(&m.discounted_payback_months),
        "profitability_index": m.profitability_index.map(money_text),
        "pv_benefits": money_text(m.pv_benefits),
        "pv_costs": money_text(m.pv_costs),
        "one_off": money_text(m.total_one_off),
        "uncertainty": u.map(|u| json!({
            "chance_weighted_npv": money_text(u.chance_weighted),
            "calibrated_npv": money_text(u.calibrated),
            "chance_npv_below_zero": rate_text(u.simulation.chance_npv_below_zero),
            "mean_npv": rate_text(u.simulation.mean),
            "npv_10th_percentile": rate_text(u.simulation.p10),
            "npv_median": rate_text(u.simulation.p50),
            "npv_90th_percentile": rate_text(u.simulation.p90),
            "trials": u.simulation.trials,
            "seed": u.simulation.seed.to_string(),
        })),
    })
}

fn render_error(e: impl std::fmt::Display) -> AppError {
    AppError::Internal(anyhow::anyhow!("the pack could not be rendered: {e}"))
}

/// Render the case pack of version `id` from the database as it is now.
async fn render_case(state: &AppState, id: i64, made: Making, made_by: &str) -> Result<Rendered, AppError> {
    let today = db::get_site(&state.pool).await?;
    let (full, figures) = figures_on_pool(db::case_full(&state.pool, id).await?, &today).await?;
    let site = full.case.settings(&today);
    let (computed, calibration) =
        uncertainty_of(state, &full, &site, &figures.pre_tax.metrics, &today, Trials::default()).await?;
    let zone = db::get_zone(&state.pool, full.case.zone_id).await?;
    let criteria = db::readiness::criteria(&state.pool).await?;
    let scores = db::readiness::zone_scores(&state.pool, zone.id).await?;
    let (made_at, made_by, db_state) = (made.made_at, made_by.to_string(), made.state.describe());
    // Formatting and rendering: on the bounded pool (a Monte Carlo histogram and every input).
    crate::app::cpu::run(move || {
        let pre = &figures.pre_tax;
        let figures_json = case_json(&full, &zone, &site, &pre.metrics, computed.as_ref().ok());
        let cumulative: Vec<Decimal> = pre.schedule.rows.iter().map(|r| r.cumulative_discounted).collect();
        let chart = LineChart::cumulative(
            &cumulative,
            pre.metrics.discounted_payback_months.as_ref().map(|p| p.periods),
            "The cumulative discounted cash flow",
        );
        let uncertainty = computed
            .as_ref()
            .map(|u| UncertaintyView::new(u, full.case.header.success_probability, &calibration, &site.currency))
            .map_err(|e| format!("the uncertainty cannot be computed: {e}"));
        let score_of: HashMap<i64, u8> = scores.iter().map(|(k, (s, _, _))| (*k, *s)).collect();
        let readiness_score = readiness_text(Readiness::weighted(&criteria, &score_of));
        let readiness = criteria
            .iter()
            .map(|c| {
                let given = scores.get(&c.id);
                ReadinessRow {
                    label: c.label.clone(),
                    weight: c.weight,
                    score: given.map_or_else(|| "not scored".into(), |(s, _, _)| format!("{s} of 5")),
                    rated: given.map_or_else(String::new, |(_, at, by)| format!("{} by {by}", LocalTime::of(at).local)),
                }
            })
            .collect();
        let h = &full.case.header;
        let question = format!(
            "Should {} ({}, owner {}, now {}) be instrumented on business case v{} \"{}\"? It asks for {} of \
             one-off outlays and runs {} months from {}, with go-live in month {} and {} months of ramp-up; \
             this version is {}.",
            zone.name,
            zone.code,
            if zone.owner.is_empty() { "not named" } else { zone.owner.as_str() },
            zone.status.as_str(),
            full.case.version,
            h.label,
            Money(pre.metrics.total_one_off),
            h.horizon_months,
            h.start_month,
            h.go_live_offset,
            h.ramp_up_months,
            full.case.state.as_str(),
        );
        let page = CasePack {
            style: format!("{A4_PORTRAIT}{STYLE}"),
            made_at: LocalTime::of(&made_at),
            made_by,
            db_state,
            notes: full.case.notes(&today),
            m: MetricsView::from(&pre.metrics),
            after_tax: figures.after_tax.as_ref().map(|v| MetricsView::from(&v.metrics)),
            assumptions: assumptions(&full, &site, &made_at),
            approvals: approval_steps(&full),
            question,
            chart,
            uncertainty,
            readiness,
            readiness_score,
            site,
            zone,
            full,
        };
        let title = format!("{} v{} {}", page.zone.code, page.full.case.version, page.full.case.header.label);
        Ok(Rendered {
            title,
            snapshot: Snapshot { body: page.render().map_err(render_error)?, figures: figures_json.to_string() },
        })
    })
    .await?
}

/// One zone of the portfolio pack's ranking, formatted.
pub struct RankLine {
    rank: usize,
    code: String,
    name: String,
    status: &'static str,
    standing: &'static str,
    investment: String,
    npv: String,
    chance_weighted: String,
    calibrated: String,
    p10: String,
    p50: String,
    p90: String,
    pi: String,
    readiness: String,
}

/// A measuring zone's realization: measured against expected to date.
pub struct RealizationLine {
    code: String,
    name: String,
    status: &'static str,
    expected: Money,
    measured: Money,
    realization: String,
}

/// The budget choice as the pack shows it.
pub struct ChoiceLines {
    budget: Money,
    committed: Money,
    available: Money,
    recommended: String,
    recommended_cost: Money,
    recommended_value: Money,
    taken_by_profitability_index: String,
    taken_by_profitability_index_cost: Money,
    taken_by_profitability_index_value: Money,
    next_in_line: Option<(String, Money)>,
}

#[derive(Template)]
#[template(path = "packs/portfolio.html")]
struct PortfolioPack {
    style: String,
    made_at: LocalTime,
    made_by: String,
    db_state: String,
    quarter: String,
    site: SiteSettings,
    basis: &'static str,
    rank_by: &'static str,
    trials: usize,
    seed: u64,
    rows: Vec<RankLine>,
    choice: Option<ChoiceLines>,
    realization: Vec<RealizationLine>,
    previous: Option<(i64, LocalTime)>,
    changes: Vec<String>,
}

const DASH: &str = "–";

fn cents(d: Option<Decimal>) -> Option<String> {
    d.map(|d| money_text(d.round_dp(2)))
}

/// The zone as the next pack compares it.
fn pack_zone(r: &PortfolioRow) -> PackZone {
    PackZone {
        code: r.zone().code.clone(),
        name: r.zone().name.clone(),
        status: r.zone().status.as_str().into(),
        standing: r.standing.label().into(),
        npv: cents(r.npv()),
    }
}

/// Measured and expected money to date of a zone with bookings against its baseline.
fn realization_of(r: &PortfolioRow) -> Option<RealizationLine> {
    let rate = r.base.realization?;
    let (e, m) = r.base.evidence.iter().fold((0.0, 0.0), |(e, m), (_, x)| (e + x.expected, m + x.measured));
    let money = |v: f64| Money(Decimal::from_f64_retain(v).unwrap_or_default().round_dp(2));
    Some(RealizationLine {
        code: r.zone().code.clone(),
        name: r.zone().name.clone(),
        status: r.zone().status.as_str(),
        expected: money(e),
        measured: money(m),
        realization: Percent(rate).to_string(),
    })
}

/// Render the quarterly portfolio pack for `params` from the database as it is now.
async fn render_portfolio(
    state: &AppState,
    params: PortfolioParams,
    quarter: String,
    made: Making,
    made_by: &str,
) -> Result<Rendered, AppError> {
    let site = db::get_site(&state.pool).await?;
    let criteria = db::readiness::criteria(&state.pool).await?;
    // A pack is complete or not made: it waits for a running warm-up of the figures.
    let bases = state.figures.bases(&state.pool, &site, params.trials).await?;
    let previous = db::packs::latest(&state.pool, PackKind::Portfolio).await?;
    let (made_at, made_by, db_state) = (made.made_at, made_by.to_string(), made.state.describe());
    crate::app::cpu::run(move || {
        let calibration = calibration_of(bases.iter().map(|b| b.as_ref()));
        let p = build_portfolio(bases, &criteria, &calibration, params);
        let zones: Vec<PackZone> = p.rows.iter().map(pack_zone).collect();
        let (previous, changes) = match &previous {
            Some((pack, figures)) => {
                #[derive(Deserialize)]
                struct Before {
                    zones: Vec<PackZone>,
                }
                let before: Before = serde_json::from_str(figures).map_err(render_error)?;
                (Some((pack.id, LocalTime::of(&pack.made_at))), changes_since(&before.zones, &zones))
            }
            None => (None, Vec::new()),
        };
        let listed = |v: Vec<String>| if v.is_empty() { "none".to_string() } else { v.join(", ") };
        let choice = p.choice.as_ref().map(|c| ChoiceLines {
            budget: Money(c.budget),
            committed: Money(c.committed),
            available: Money(c.available),
            recommended: listed(p.codes_where(|r| r.standing == Standing::Recommended)),
            recommended_cost: Money(c.recommended_cost),
            recommended_value: Money(c.recommended_value),
            taken_by_profitability_index: listed(p.codes_where(|r| r.taken_by_profitability_index)),
            taken_by_profitability_index_cost: Money(c.taken_by_profitability_index_cost),
            taken_by_profitability_index_value: Money(c.taken_by_profitability_index_value),
            next_in_line: c.next_in_line.as_ref().map(|(code, lack)| (code.clone(), Money(*lack))),
        });
        let money = |d: Option<Decimal>| d.map_or_else(|| DASH.to_string(), |d| Money(d).to_string());
        let sim = |d: Option<f64>| money(d.and_then(Decimal::from_f64_retain));
        let rows = p
            .rows
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let s = r.figures().map(|f| &f.simulation);
                RankLine {
                    rank: i + 1,
                    code: r.zone().code.clone(),
                    name: r.zone().name.clone(),
                    status: r.zone().status.as_str(),
                    standing: r.standing.label(),
                    investment: money(r.investment()),
                    npv: money(r.npv()),
                    chance_weighted: money(r.chance_weighted),
                    calibrated: money(r.calibrated),
                    p10: sim(s.map(|s| s.p10)),
                    p50: sim(s.map(|s| s.p50)),
                    p90: sim(s.map(|s| s.p90)),
                    pi: r
                        .figures()
                        .and_then(|f| f.metrics.profitability_index)
                        .map_or_else(|| DASH.into(), |v| NumberFormat::current().write_quantity(v.round_dp(2))),
                    readiness: readiness_text(r.readiness),
                }
            })
            .collect();
        let realization: Vec<RealizationLine> = p.rows.iter().filter_map(realization_of).collect();
        let zones_json: Vec<Value> = p
            .rows
            .iter()
            .zip(&zones)
            .enumerate()
            .map(|(i, (r, z))| {
                let mut v = json!(z);
                if let Some(o) = v.as_object_mut() {
                    o.insert("rank".into(), json!(i + 1));
                    o.insert("investment".into(), json!(cents(r.investment())));
                    o.insert("chance_weighted_npv".into(), json!(cents(r.chance_weighted)));
                    o.insert("calibrated_npv".into(), json!(cents(r.calibrated)));
                    o.insert("realization_to_date".into(), json!(r.base.realization.map(rate_text)));
                }
                v
            })
            .collect();
        let figures = json!({
            "kind": "portfolio",
            "quarter": quarter,
            "currency": site.currency,
            "hurdle_rate": site.hurdle_rate.to_string(),
            "rank": p.params.rank.as_str(),
            "basis": p.params.basis.as_str(),
            "seed": p.params.trials.seed.to_string(),
            "trials": p.params.trials.count,
            "choice": p.choice.as_ref().map(|c| choice_core(&p, c)),
            "changes_since_pack": previous.as_ref().map(|(id, _)| *id),
            "changes": changes,
            "zones": zones_json,
        });
        let page = PortfolioPack {
            style: format!("{A4_LANDSCAPE}{STYLE}"),
            made_at: LocalTime::of(&made_at),
            made_by,
            db_state,
            quarter: quarter.clone(),
            basis: p.params.basis.label(),
            rank_by: p.params.rank.label(),
            trials: p.params.trials.count,
            seed: p.params.trials.seed,
            site,
            rows,
            choice,
            realization,
            previous,
            changes,
        };
        let body = page.render().map_err(render_error)?;
        Ok(Rendered {
            title: format!("Portfolio review {quarter}"),
            snapshot: Snapshot { body, figures: figures.to_string() },
        })
    })
    .await?
}

/// The pack as the API gives it (without the HTML: `html` is where to fetch it).
fn pack_json(p: &Pack) -> Value {
    json!({
        "id": p.id,
        "kind": p.kind.as_str(),
        "subject": p.subject,
        "title": p.title,
        "made_at": p.made_at,
        "made_by": p.made_by,
        "database_state": {
            "ledger_tip_id": p.state.ledger_tip_id,
            "ledger_tip_hash": p.state.ledger_tip_hash,
            "ledger_entries": p.state.ledger_entries,
            "generation": p.state.generation,
        },
        "sha256": p.sha256,
        "html": format!("/packs/{}", p.id),
    })
}

/// Renders the case pack of one version.
struct CaseRender<'a> {
    state: &'a AppState,
    id: i64,
    user: &'a str,
}

impl Render for CaseRender<'_> {
    type Error = AppError;
    fn render(&self, made: Making) -> impl Future<Output = Result<Rendered, AppError>> + Send {
        render_case(self.state, self.id, made, self.user)
    }
}

/// Renders the portfolio pack with one query.
struct PortfolioRender<'a> {
    state: &'a AppState,
    params: PortfolioParams,
    quarter: String,
    user: &'a str,
}

impl Render for PortfolioRender<'_> {
    type Error = AppError;
    fn render(&self, made: Making) -> impl Future<Output = Result<Rendered, AppError>> + Send {
        render_portfolio(self.state, self.params.clone(), self.quarter.clone(), made, self.user)
    }
}

async fn make_case(state: &AppState, user: &str, id: i64) -> Result<i64, AppError> {
    let now = state.clock.now();
    let render = CaseRender { state, id, user };
    in_site_settings(state, crate::app::packs::make_case_pack(&state.pool, user, now, CaseId(id), &render)).await
}

/// A pack reads as the plant's pages do, whoever asked for it (a page or the API, whose
/// requests run without the site's number format and time zone): run `work` inside them.
async fn in_site_settings<T>(
    state: &AppState,
    work: impl std::future::Future<Output = Result<T, AppError>>,
) -> Result<T, AppError> {
    let (numbers, zone) = db::page_settings(&state.pool).await?;
    numbers.scope(zone.scope(work)).await
}

async fn make_portfolio(state: &AppState, user: &str, q: &PortfolioQuery, f: NumberFormat) -> Result<i64, AppError> {
    let params = PortfolioParams::parse(q, f)?;
    let now = state.clock.now();
    let quarter = crate::domain::pack::quarter_of(now);
    let render = PortfolioRender { state, params, quarter, user };
    in_site_settings(state, crate::app::packs::make_portfolio_pack(&state.pool, user, now, &render)).await
}

/// POST /cases/{id}/packs: make a case pack, then show it.
pub async fn page_make_case(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
) -> Result<Response, AppError> {
    let pack = make_case(&state, user.name(), id).await?;
    Ok(Redirect::to(&format!("/packs/{pack}")).into_response())
}

/// POST /portfolio/packs: make this quarter's portfolio pack with the page's settings.
pub async fn page_make_portfolio(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    FormBody(q): FormBody<PortfolioQuery>,
) -> Result<Response, AppError> {
    let pack = make_portfolio(&state, user.name(), &q, NumberFormat::current()).await?;
    Ok(Redirect::to(&format!("/packs/{pack}")).into_response())
}

/// The list's filter: kind and subject, both optional.
#[derive(Deserialize, Serialize, Default)]
#[serde(default, deny_unknown_fields)]
pub struct ListQuery {
    /// `case` or `portfolio`.
    kind: String,
    /// A case version id or a quarter.
    subject: String,
}

impl ListQuery {
    fn parse(&self) -> Result<(Option<PackKind>, Option<&str>), AppError> {
        let kind = match self.kind.trim() {
            "" => None,
            k => Some(PackKind::parse(k).map_err(|m| AppError::Invalid(crate::domain::FieldErrors::one("kind", m)))?),
        };
        let subject = Some(self.subject.trim()).filter(|s| !s.is_empty());
        Ok((kind, subject))
    }
}

/// One pack of the list, formatted.
pub struct ListLine {
    pack: Pack,
    made_at: LocalTime,
    state: String,
}

#[derive(Template)]
#[template(path = "packs/list.html")]
struct ListPage {
    nav: Nav,
    kind: String,
    subject: String,
    packs: Vec<ListLine>,
}

/// GET /packs: every pack, newest first, by kind and subject.
pub async fn list(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Query(q): Query<ListQuery>,
) -> Result<Html<String>, AppError> {
    let (kind, subject) = q.parse()?;
    let packs = db::packs::list(&state.pool, kind, subject)
        .await?
        .into_iter()
        .map(|pack| ListLine { made_at: LocalTime::of(&pack.made_at), state: pack.state.describe(), pack })
        .collect();
    let page =
        ListPage { nav: Nav::from(&me), kind: q.kind.trim().to_string(), subject: q.subject.trim().to_string(), packs };
    Ok(Html(page.render()?))
}

/// The Content-Security-Policy of a stored pack: nothing but its own inline stylesheet (by
/// hash) and inline SVG; no script, no request out.
fn pack_policy(body: &str) -> String {
    let style = body
        .find("<style>")
        .and_then(|from| body[from + 7..].find("</style>").map(|len| &body[from + 7..from + 7 + len]))
        .unwrap_or_default();
    let hash = base64::engine::general_purpose::STANDARD.encode(Sha256::digest(style.as_bytes()));
    format!(
        "default-src 'none'; style-src 'sha256-{hash}'; img-src data:; frame-ancestors 'none'; form-action 'none'; base-uri 'none'"
    )
}

/// GET /packs/{id}: the stored snapshot, byte for byte (print it to PDF from the browser).
pub async fn show(State(state): State<AppState>, Path(id): Path<i64>) -> Result<Response, AppError> {
    let (_, snapshot) = db::packs::get(&state.pool, id).await?;
    let policy = HeaderValue::from_str(&pack_policy(&snapshot.body)).map_err(|e| AppError::Internal(e.into()))?;
    Ok((
        [
            (header::CONTENT_TYPE, HeaderValue::from_static("text/html; charset=utf-8")),
            (header::CONTENT_SECURITY_POLICY, policy),
        ],
        snapshot.body,
    )
        .into_response())
}

/// POST /api/v1/cases/{id}/packs: make a case pack.
pub async fn api_make_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
) -> Result<Response, ApiError> {
    let pack = make_case(&state, user.name(), id).await?;
    created(&state, pack).await
}

/// POST /api/v1/portfolio/packs `{"budget", "rank", "basis", "min_readiness", "seed"}`: make
/// this quarter's portfolio pack.
pub async fn api_make_portfolio(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    JsonBody(q): JsonBody<PortfolioQuery>,
) -> Result<Response, ApiError> {
    let pack = make_portfolio(&state, user.name(), &q, NumberFormat::Plain).await?;
    created(&state, pack).await
}

async fn created(state: &AppState, id: i64) -> Result<Response, ApiError> {
    let (pack, snapshot) = db::packs::get(&state.pool, id).await?;
    let body = with_figures(&pack, &snapshot)?;
    Ok((StatusCode::CREATED, [(header::LOCATION, format!("/api/v1/packs/{id}"))], axum::Json(body)).into_response())
}

fn with_figures(pack: &Pack, snapshot: &Snapshot) -> Result<Value, AppError> {
    let figures: Value = serde_json::from_str(&snapshot.figures).map_err(|e| AppError::Internal(e.into()))?;
    let mut v = pack_json(pack);
    if let Some(o) = v.as_object_mut() {
        o.insert("figures".into(), figures);
    }
    Ok(json!({ "pack": v }))
}

/// GET /api/v1/packs?kind=&subject=: packs, newest first.
pub async fn api_list(
    State(state): State<AppState>,
    ApiQuery(q): ApiQuery<ListQuery>,
) -> Result<axum::Json<Value>, ApiError> {
    let (kind, subject) = q.parse()?;
    let packs: Vec<Value> = db::packs::list(&state.pool, kind, subject).await?.iter().map(pack_json).collect();
    Ok(axum::Json(json!({ "packs": packs })))
}

/// GET /api/v1/packs/{id}: one pack with its stored figures.
pub async fn api_get(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    ApiPath(id): ApiPath<i64>,
) -> Result<axum::Json<Value>, ApiError> {
    let (pack, snapshot) = db::packs::get(&state.pool, id).await?;
    Ok(axum::Json(with_figures(&pack, &snapshot)?))
}
