//! Business-case pages: figures with the chart, the monthly table, the editor, scenario copies
//! and the side-by-side comparison.

use super::auth::{CurrentUser, Nav, Principal};
use super::chart::LineChart;
use super::uncertainty::UncertaintyView;
use super::{AppError, AppState, FormBody};
use crate::app::{self, cases::ReviewStep};
use crate::db::{self, CaseFull};
use crate::domain::CaseId;
use crate::domain::{
    Calibration, CaseFigures, CaseHeader, CaseHeaderInput, CaseUncertainty, CostCategory, CostInput, DEFAULT_SEED,
    DriverInput, DriverKind, FieldErrors, Money, NewBenefitDriver, NewCostItem, NumberFormat, Percent, RateStyle,
    SiteSettings, Trials, Zone, calibration_of, case_figures, case_uncertainty, parse_seed,
};
use crate::finance::schedule::CaseMetrics;
use crate::finance::{FinanceError, Payback};
use askama::Template;
use axum::extract::{Path, Query, State};
use axum::http::StatusCode;
use axum::response::{Html, IntoResponse, Redirect, Response};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};

/// Metrics formatted as the pages show them.
pub struct MetricsView {
    /// NPV at the hurdle rate.
    pub npv: Money,
    /// Whether NPV is below zero (a text cue goes beside it).
    pub npv_negative: bool,
    /// Annualized IRR, or why there is none.
    pub irr: String,
    /// Annualized MIRR, or a dash.
    pub mirr: String,
    /// Simple payback in months, or "not reached".
    pub payback: String,
    /// Discounted payback in months, or "not reached".
    pub discounted_payback: String,
    /// Profitability index, or a dash.
    pub profitability_index: String,
    /// PV of benefits.
    pub pv_benefits: Money,
    /// PV of costs (negative).
    pub pv_costs: Money,
    /// Sum of one-off outlays.
    pub total_one_off: Money,
    /// Cautions about the figures (ambiguous IRR, payback reversing).
    pub warnings: Vec<String>,
}

fn payback_text(p: &Option<Payback>, what: &str, warnings: &mut Vec<String>) -> String {
    match p {
        Some(p) => {
            if p.turns_negative_again {
                warnings.push(format!("The {what} turns negative again after the payback month."));
            }
            format!("{} months", NumberFormat::current().write_quantity(p.periods.round_dp(1)))
        }
        None => "not reached".into(),
    }
}

/// The caution shown beside a rate of return whose flows change sign more than once: `rate`
/// names it (IRR, XIRR), `roots` are annual rates, `decide` what should decide instead. The
/// case page (IRR) and the ledger page (realized XIRR) share it.
pub(super) fn ambiguous_rate_warning(rate: &str, roots: &[f64], decide: &str) -> String {
    let roots: Vec<String> = roots.iter().map(|r| Percent(*r).to_string()).collect();
    format!(
        "The cash flow changes sign more than once: {rate} is ambiguous (roots {}); let {decide} decide.",
        roots.join(", ")
    )
}

impl From<&CaseMetrics> for MetricsView {
    fn from(m: &CaseMetrics) -> Self {
        let mut warnings = Vec::new();
        let irr = match (&m.irr, m.irr_annual) {
            (Ok(outcome), Some(annual)) => {
                if outcome.ambiguous {
                    let roots: Vec<f64> = outcome
                        .roots
                        .iter()
                        .filter_map(|r| crate::finance::annual_from_periodic(*r, 12).ok())
                        .collect();
                    warnings.push(ambiguous_rate_warning("IRR", &roots, "NPV and MIRR"));
                }
                Percent(annual).to_string()
            }
            (Ok(_), None) => "none".into(),
            (Err(FinanceError::NoSignChange), _) => "none: the flows never change sign".into(),
            (Err(e), _) => format!("none: {e}"),
        };
        let payback = payback_text(&m.payback_months, "cumulative cash flow", &mut warnings);
        let discounted_payback =
            payback_text(&m.discounted_payback_months, "cumulative discounted cash flow", &mut warnings);
        Self {
            npv: Money(m.npv),
            npv_negative: m.npv < Decimal::ZERO,
            irr,
            mirr: m.mirr_annual.map_or_else(|| "–".into(), |r| Percent(r).to_string()),
            payback,
            discounted_payback,
            profitability_index: m
                .profitability_index
                .map_or_else(|| "–".into(), |p| NumberFormat::current().write_quantity(p.round_dp(2))),
            pv_benefits: Money(m.pv_benefits),
            pv_costs: Money(m.pv_costs),
            total_one_off: Money(m.total_one_off),
            warnings,
        }
    }
}

/// Load a case and compute its figures: at the settings of its approval when it has them,
/// at `today`'s otherwise.
pub async fn load_figures(
    state: &AppState,
    id: i64,
    today: &SiteSettings,
) -> Result<(CaseFull, CaseFigures), AppError> {
    figures_on_pool(db::case_full(&state.pool, id).await?, today).await
}

/// [`figures_of`] on the bounded pool (a schedule of up to 1,200 months and its root search).
pub(super) async fn figures_on_pool(full: CaseFull, today: &SiteSettings) -> Result<(CaseFull, CaseFigures), AppError> {
    let today = today.clone();
    crate::app::cpu::run(move || figures_of(&full, &today).map(|figures| (full, figures))).await?
}

/// A case's uncertainty figures (pre-tax: Monte Carlo, tornado, break-even) at `site`, with
/// the calibration they apply, computed on the bounded pool: the case page and the case API
/// show the same figures.
pub(super) async fn uncertainty_of(
    state: &AppState,
    full: &CaseFull,
    site: &SiteSettings,
    metrics: &CaseMetrics,
    today: &SiteSettings,
    trials: Trials,
) -> Result<(Result<CaseUncertainty, FinanceError>, Calibration), AppError> {
    let bases = state.figures.bases(&state.pool, today, Trials::default()).await?;
    let (header, costs, drivers) = (full.case.header.clone(), full.costs.clone(), full.drivers.clone());
    let (site, metrics) = (site.clone(), metrics.clone());
    let computed = crate::app::cpu::run(move || {
        let calibration = calibration_of(bases.iter().map(|b| b.as_ref()));
        let costs: Vec<&NewCostItem> = costs.iter().map(|c| &c.item).collect();
        let drivers: Vec<&NewBenefitDriver> = drivers.iter().map(|d| &d.driver).collect();
        (case_uncertainty(&header, &costs, &drivers, &site, &metrics, &calibration, trials), calibration)
    })
    .await?;
    Ok(computed)
}

/// A case's figures at its own settings ([`db::CaseVersion::settings`]): every page and the
/// API compute them here.
pub(super) fn figures_of(full: &CaseFull, today: &SiteSettings) -> Result<CaseFigures, AppError> {
    let site = full.case.settings(today);
    case_figures(&full.case.header, full.costs.iter().map(|c| &c.item), full.drivers.iter().map(|d| &d.driver), &site)
        .map_err(|e| AppError::Conflict(format!("the case cannot be computed: {e}")))
}

#[derive(Template)]
#[template(path = "cases/view.html")]
struct ViewPage {
    nav: Nav,
    /// The settings the figures use (those of the approval for a baseline).
    site: SiteSettings,
    notes: Vec<(&'static str, String)>,
    history: Vec<String>,
    zone: Zone,
    full: CaseFull,
    m: MetricsView,
    after_tax: Option<MetricsView>,
    chart: LineChart,
    editable: bool,
    uncertainty: Result<UncertaintyView, String>,
    seed_error: Option<String>,
}

/// The case page's query: the Monte Carlo seed.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct SeedQuery {
    seed: String,
}

/// GET /cases/{id}: the figures, the cumulative discounted cash-flow chart and the uncertainty
/// section (`?seed=N` reruns the Monte Carlo with another seed).
pub async fn view(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    Query(q): Query<SeedQuery>,
) -> Result<Response, AppError> {
    let today = db::get_site(&state.pool).await?;
    let (full, figures) = load_figures(&state, id, &today).await?;
    let (seed, seed_error) = match parse_seed(&q.seed) {
        Ok(v) => (v, None),
        Err(why) => (DEFAULT_SEED, Some(format!("{:?} is not a seed: use {why}", q.seed.trim()))),
    };
    let site = full.case.settings(&today);
    let trials = Trials { seed, ..Trials::default() };
    let (computed, calibration) =
        uncertainty_of(&state, &full, &site, &figures.pre_tax.metrics, &today, trials).await?;
    let uncertainty = computed
        .map(|u| UncertaintyView::new(&u, full.case.header.success_probability, &calibration, &site.currency))
        .map_err(|e| format!("the uncertainty cannot be computed: {e}"));
    let zone = db::get_zone(&state.pool, full.case.zone_id).await?;
    let pre = &figures.pre_tax;
    let cumulative: Vec<Decimal> = pre.schedule.rows.iter().map(|r| r.cumulative_discounted).collect();
    let chart = LineChart::cumulative(
        &cumulative,
        pre.metrics.discounted_payback_months.as_ref().map(|p| p.periods),
        "The cumulative discounted cash flow",
    );
    let page = ViewPage {
        nav: Nav::from(&me),
        notes: full.case.notes(&today),
        history: full.case.history(),
        m: MetricsView::from(&pre.metrics),
        after_tax: figures.after_tax.as_ref().map(|v| MetricsView::from(&v.metrics)),
        site,
        zone,
        full,
        chart,
        editable: false,
        uncertainty,
        seed_error,
    };
    let status = if page.seed_error.is_some() { StatusCode::UNPROCESSABLE_ENTITY } else { StatusCode::OK };
    Ok((status, Html(page.render()?)).into_response())
}

/// One row of the monthly table, formatted.
pub struct FlowRow {
    month: u32,
    calendar: String,
    one_off: Money,
    recurring: Money,
    benefits: Money,
    tax: Money,
    net: Money,
    discounted: Money,
    cumulative: Money,
    cumulative_discounted: Money,
}

#[derive(Template)]
#[template(path = "cases/flows.html")]
struct FlowsPage {
    nav: Nav,
    site: SiteSettings,
    notes: Vec<(&'static str, String)>,
    zone: Zone,
    full: CaseFull,
    rows: Vec<FlowRow>,
    after_tax: bool,
    monthly_rate: Percent,
}

#[derive(Deserialize)]
pub struct FlowsQuery {
    #[serde(default)]
    view: String,
}

/// GET /cases/{id}/flows: the monthly cash-flow table behind the NPV (`?view=after_tax`).
pub async fn flows(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    Query(q): Query<FlowsQuery>,
) -> Result<Html<String>, AppError> {
    let today = db::get_site(&state.pool).await?;
    let (full, figures) = load_figures(&state, id, &today).await?;
    let (site, notes) = (full.case.settings(&today), full.case.notes(&today));
    let zone = db::get_zone(&state.pool, full.case.zone_id).await?;
    let (view, after_tax) = match (&figures.after_tax, q.view.as_str()) {
        (Some(v), "after_tax") => (v, true),
        _ => (&figures.pre_tax, false),
    };
    let start = full.case.header.start_month;
    let rows = view
        .schedule
        .rows
        .iter()
        .map(|r| FlowRow {
            month: r.month,
            calendar: start.plus(r.month).to_string(),
            one_off: Money(r.one_off),
            recurring: Money(r.recurring),
            benefits: Money(r.benefits),
            tax: Money(r.tax),
            net: Money(r.net),
            discounted: Money(r.discounted),
            cumulative: Money(r.cumulative),
            cumulative_discounted: Money(r.cumulative_discounted),
        })
        .collect();
    let monthly_rate = Percent(view.schedule.monthly_rate);
    Ok(Html(FlowsPage { nav: Nav::from(&me), site, notes, zone, full, rows, after_tax, monthly_rate }.render()?))
}

#[derive(Template)]
#[template(path = "cases/edit.html")]
struct EditPage {
    nav: Nav,
    site: SiteSettings,
    notes: Vec<(&'static str, String)>,
    zone: Zone,
    full: CaseFull,
    header: CaseHeaderInput,
    header_errors: FieldErrors,
    cost: CostInput,
    cost_errors: FieldErrors,
    driver: DriverInput,
    driver_errors: FieldErrors,
    /// The expert-time form (hours spent x multiplier): its values and errors.
    expert: DriverInput,
    expert_errors: FieldErrors,
    /// Every refused form of the page, for the summary at the top and the box beside it.
    problems: super::problems::Problems,
    categories: [CostCategory; 6],
    kinds: [DriverKind; 5],
    editable: bool,
    /// Past draft: no one can change this version any more (a reader of a draft merely may not).
    frozen: bool,
    notice: Option<String>,
    value_unit: String,
}

/// Which form of the editor failed, with its raw input and errors.
enum Failed {
    Nothing,
    Header(CaseHeaderInput, FieldErrors),
    Cost(CostInput, FieldErrors),
    Driver(DriverInput, FieldErrors),
    Notice(String),
}

fn header_input(h: &CaseHeader) -> CaseHeaderInput {
    CaseHeaderInput {
        label: h.label.clone(),
        horizon_months: h.horizon_months.to_string(),
        start_month: h.start_month.to_string(),
        go_live_offset: h.go_live_offset.to_string(),
        ramp_up_months: h.ramp_up_months.to_string(),
        success_probability: NumberFormat::current().write_quantity(h.success_probability * Decimal::ONE_HUNDRED),
    }
}

async fn edit_page(state: &AppState, nav: Nav, id: i64, failed: Failed) -> Result<Response, AppError> {
    let site = db::get_site(&state.pool).await?;
    let full = db::case_full(&state.pool, id).await?;
    let zone = db::get_zone(&state.pool, full.case.zone_id).await?;
    let frozen = full.case.state != crate::domain::CaseState::Draft;
    let editable = nav.can_edit && !frozen;
    let mut page = EditPage {
        nav,
        notes: full.case.notes(&site),
        header: header_input(&full.case.header),
        header_errors: FieldErrors::default(),
        cost: CostInput { kind: "one_off".into(), category: "hardware".into(), capex: true, ..Default::default() },
        cost_errors: FieldErrors::default(),
        driver: DriverInput { kind: "scrap".into(), ..Default::default() },
        driver_errors: FieldErrors::default(),
        expert: DriverInput {
            kind: "expert_time".into(),
            hours_multiplier: NumberFormat::current().write_quantity(site.expert_multiplier),
            ..Default::default()
        },
        expert_errors: FieldErrors::default(),
        problems: super::problems::Problems::default(),
        categories: CostCategory::ALL,
        kinds: DriverKind::ALL,
        editable,
        frozen,
        notice: None,
        value_unit: format!("{} / unit", site.currency),
        site,
        zone,
        full,
    };
    let status = match failed {
        Failed::Nothing => StatusCode::OK,
        Failed::Header(input, e) => {
            page.problems = super::problems::Problems::of("case-form", "Case", e.clone(), None);
            (page.header, page.header_errors) = (input, e);
            StatusCode::UNPROCESSABLE_ENTITY
        }
        Failed::Cost(input, e) => {
            page.problems = super::problems::Problems::of("add-cost-form", "Add a cost item", e.clone(), None);
            (page.cost, page.cost_errors) = (input, e);
            StatusCode::UNPROCESSABLE_ENTITY
        }
        // The expert-time form always sends its hours or multiplier; the general form neither.
        Failed::Driver(input, e)
            if !(input.hours_spent.trim().is_empty() && input.hours_multiplier.trim().is_empty()) =>
        {
            page.problems = super::problems::Problems::of("add-expert-form", "Add expert time", e.clone(), None);
            (page.expert, page.expert_errors) = (input, e);
            StatusCode::UNPROCESSABLE_ENTITY
        }
        Failed::Driver(input, e) => {
            page.problems = super::problems::Problems::of("add-driver-form", "Add a benefit driver", e.clone(), None);
            (page.driver, page.driver_errors) = (input, e);
            StatusCode::UNPROCESSABLE_ENTITY
        }
        Failed::Notice(msg) => {
            page.notice = Some(msg);
            StatusCode::CONFLICT
        }
    };
    Ok((status, Html(page.render()?)).into_response())
}

/// GET /cases/{id}/edit
pub async fn edit(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
) -> Result<Response, AppError> {
    edit_page(&state, Nav::from(&me), id, Failed::Nothing).await
}

/// Commit a write (with its audit row) and go back to the editor, or show the editor with
/// the refusal. The write gets the time to stamp (from the app's clock).
async fn write_then_edit<F>(
    state: &AppState,
    user: &Principal,
    id: i64,
    action: &str,
    write: F,
) -> Result<Response, AppError>
where
    F: AsyncFnOnce(&mut sqlx::SqliteConnection, &str) -> Result<String, db::DbError>,
{
    let at = db::timestamp(state.clock.now());
    let mut tx = db::begin_write(&state.pool).await?;
    match write(&mut tx, &at).await {
        Ok(detail) => {
            db::audit::record(&mut tx, &at, user.name(), action, &format!("case {id}"), &detail).await?;
            tx.commit().await?;
            Ok(Redirect::to(&format!("/cases/{id}/edit")).into_response())
        }
        Err(db::DbError::Conflict(msg)) => edit_page(state, Nav::from(user), id, Failed::Notice(msg)).await,
        Err(other) => Err(other.into()),
    }
}

/// POST /cases/{id}/edit: change the header of a draft.
pub async fn update_header(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(input): FormBody<CaseHeaderInput>,
) -> Result<Response, AppError> {
    match CaseHeader::parse(&input, RateStyle::Percent(NumberFormat::current())) {
        Ok(header) => {
            let detail = format!("{} months from {}", header.horizon_months, header.start_month);
            write_then_edit(&state, &user, id, "case.update", async |conn, at| {
                db::update_header(conn, id, &header, user.name(), at).await.map(|()| detail)
            })
            .await
        }
        Err(e) => edit_page(&state, Nav::from(&user), id, Failed::Header(input, e)).await,
    }
}

/// POST /cases/{id}/costs: add a cost item to a draft.
pub async fn add_cost(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(input): FormBody<CostInput>,
) -> Result<Response, AppError> {
    let full = db::case_full(&state.pool, id).await?;
    match NewCostItem::parse(&input, full.case.header.horizon_months, RateStyle::Percent(NumberFormat::current())) {
        Ok(item) => {
            write_then_edit(&state, &user, id, "cost.add", async |conn, at| {
                db::add_cost(conn, id, &item, user.name(), at)
                    .await
                    .map(|c| format!("cost {c}: {} {}", item.label, item.amount))
            })
            .await
        }
        Err(e) => edit_page(&state, Nav::from(&user), id, Failed::Cost(input, e)).await,
    }
}

/// POST /cases/{id}/drivers: add a benefit driver to a draft.
pub async fn add_driver(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(input): FormBody<DriverInput>,
) -> Result<Response, AppError> {
    let site = db::get_site(&state.pool).await?;
    match NewBenefitDriver::parse(&input, RateStyle::Percent(NumberFormat::current()), site.expert_multiplier) {
        Ok(d) => {
            write_then_edit(&state, &user, id, "driver.add", async |conn, at| {
                db::add_driver(conn, id, &d, user.name(), at).await.map(|n| format!("driver {n}: {}", d.label))
            })
            .await
        }
        Err(e) => edit_page(&state, Nav::from(&user), id, Failed::Driver(input, e)).await,
    }
}

/// POST /cases/{id}/costs/{item}/delete
pub async fn delete_cost(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path((id, item)): Path<(i64, i64)>,
) -> Result<Response, AppError> {
    write_then_edit(&state, &user, id, "cost.remove", async |conn, at| {
        db::delete_cost(conn, id, item, user.name(), at).await.map(|()| format!("cost {item}"))
    })
    .await
}

/// POST /cases/{id}/drivers/{item}/delete
pub async fn delete_driver(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path((id, item)): Path<(i64, i64)>,
) -> Result<Response, AppError> {
    write_then_edit(&state, &user, id, "driver.remove", async |conn, at| {
        db::delete_driver(conn, id, item, user.name(), at).await.map(|()| format!("driver {item}"))
    })
    .await
}

/// The copy form and body: the new version's name.
#[derive(Deserialize, Serialize, Default)]
#[serde(default, deny_unknown_fields)]
pub struct CopyForm {
    /// Name of the new version.
    pub label: String,
}

/// POST /cases/{id}/copy: save this version as the zone's next scenario version.
pub async fn copy(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<CopyForm>,
) -> Result<Response, AppError> {
    let new_id = app::cases::copy(&state.pool, user.name(), CaseId(id), &form.label, state.clock.now()).await?.0;
    Ok(Redirect::to(&format!("/cases/{new_id}/edit")).into_response())
}

/// One compared metric: name, both values, and which is better in words.
pub struct CompareRow {
    name: &'static str,
    a: String,
    b: String,
}

#[derive(Template)]
#[template(path = "cases/compare.html")]
struct ComparePage {
    nav: Nav,
    site: SiteSettings,
    zone: Zone,
    versions: Vec<db::CaseVersion>,
    a: Option<CaseFull>,
    b: Option<CaseFull>,
    rows: Vec<CompareRow>,
    npv_difference: Option<Money>,
}

#[derive(Deserialize)]
pub struct CompareQuery {
    a: Option<i64>,
    b: Option<i64>,
}

/// GET /zones/{id}/compare?a=&b=: two scenario versions side by side.
pub async fn compare(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(zone_id): Path<i64>,
    Query(q): Query<CompareQuery>,
) -> Result<Html<String>, AppError> {
    let site = db::get_site(&state.pool).await?;
    let zone = db::get_zone(&state.pool, zone_id).await?;
    let versions = db::list_cases(&state.pool, zone_id).await?;
    let pick =
        |id: Option<i64>, fallback: Option<i64>| id.or(fallback).filter(|id| versions.iter().any(|v| v.id == *id));
    let n = versions.len();
    let a_id = pick(q.a, versions.get(n.saturating_sub(2)).map(|v| v.id));
    let b_id = pick(q.b, versions.last().map(|v| v.id));
    let (mut a, mut b, mut rows, mut npv_difference) = (None, None, Vec::new(), None);
    if let (Some(a_id), Some(b_id)) = (a_id, b_id) {
        let (fa, xa) = load_figures(&state, a_id, &site).await?;
        let (fb, xb) = load_figures(&state, b_id, &site).await?;
        let (ma, mb) = (MetricsView::from(&xa.pre_tax.metrics), MetricsView::from(&xb.pre_tax.metrics));
        npv_difference = Some(Money(xb.pre_tax.metrics.npv - xa.pre_tax.metrics.npv));
        rows = vec![
            CompareRow { name: "NPV", a: ma.npv.to_string(), b: mb.npv.to_string() },
            CompareRow { name: "IRR (annual)", a: ma.irr, b: mb.irr },
            CompareRow { name: "MIRR (annual)", a: ma.mirr, b: mb.mirr },
            CompareRow { name: "Payback", a: ma.payback, b: mb.payback },
            CompareRow { name: "Discounted payback", a: ma.discounted_payback, b: mb.discounted_payback },
            CompareRow { name: "Profitability index", a: ma.profitability_index, b: mb.profitability_index },
            CompareRow { name: "One-off outlays", a: ma.total_one_off.to_string(), b: mb.total_one_off.to_string() },
            CompareRow {
                name: "Present value of benefits",
                a: ma.pv_benefits.to_string(),
                b: mb.pv_benefits.to_string(),
            },
            CompareRow { name: "Present value of costs", a: ma.pv_costs.to_string(), b: mb.pv_costs.to_string() },
            CompareRow {
                name: "Horizon (months)",
                a: fa.case.header.horizon_months.to_string(),
                b: fb.case.header.horizon_months.to_string(),
            },
            CompareRow {
                name: "Go-live month",
                a: fa.case.header.go_live_offset.to_string(),
                b: fb.case.header.go_live_offset.to_string(),
            },
            CompareRow { name: "Cost items", a: fa.costs.len().to_string(), b: fb.costs.len().to_string() },
            CompareRow { name: "Benefit drivers", a: fa.drivers.len().to_string(), b: fb.drivers.len().to_string() },
        ];
        a = Some(fa);
        b = Some(fb);
    }
    Ok(Html(ComparePage { nav: Nav::from(&me), site, zone, versions, a, b, rows, npv_difference }.render()?))
}

/// The review form and body: a comment, required to return a version.
#[derive(Deserialize, Serialize, Default)]
#[serde(default, deny_unknown_fields)]
pub struct CommentForm {
    /// Free text kept on the version and in the audit trail.
    pub comment: String,
}

/// POST /cases/{id}/submit: a draft goes up for approval.
pub async fn submit(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<CommentForm>,
) -> Result<Response, AppError> {
    app::cases::review(&state.pool, user.name(), CaseId(id), ReviewStep::Submit, &form.comment, state.clock.now())
        .await?;
    Ok(Redirect::to(&format!("/cases/{id}")).into_response())
}

/// POST /cases/{id}/approve: a submitted version becomes the zone's frozen baseline.
pub async fn approve(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<CommentForm>,
) -> Result<Response, AppError> {
    app::cases::review(&state.pool, user.name(), CaseId(id), ReviewStep::Approve, &form.comment, state.clock.now())
        .await?;
    Ok(Redirect::to(&format!("/cases/{id}")).into_response())
}

/// POST /cases/{id}/reject: a submitted version goes back to draft with the reason.
pub async fn reject(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<CommentForm>,
) -> Result<Response, AppError> {
    app::cases::review(&state.pool, user.name(), CaseId(id), ReviewStep::Reject, &form.comment, state.clock.now())
        .await?;
    Ok(Redirect::to(&format!("/cases/{id}")).into_response())
}

/// One baseline of a zone's history as the zone and ledger pages list it.
pub struct BaselineLine {
    /// Case version id.
    pub case_id: i64,
    /// Version number.
    pub version: u32,
    /// Scenario label.
    pub label: String,
    /// First month it is in force (the first baseline: the history's start month).
    pub from: String,
    /// Last month it was in force, for a superseded baseline (`None`: the current one).
    pub until: Option<String>,
    /// Whether a later approval replaced it before its first month.
    pub never_in_force: bool,
    /// Who approved it and when (date).
    pub approved_by: String,
    /// Approval date (UTC), as the ledger API gives it.
    pub approved_on: String,
    /// The approval's stored timestamp, for the page (shown in the plant's local time).
    pub approved_at: String,
    /// How: "second person", or the self-approval or scenario note.
    pub how: String,
    /// The approver's comment: why.
    pub comment: String,
}

impl BaselineLine {
    /// The line as the ledger API gives it.
    pub fn json(&self) -> serde_json::Value {
        serde_json::json!({
            "case_id": self.case_id, "version": self.version, "label": self.label,
            "in_force_from": self.from, "in_force_until": self.until, "never_in_force": self.never_in_force,
            "approved_by": self.approved_by, "approved_on": self.approved_on, "approval": self.how,
            "comment": self.comment,
        })
    }
}

/// A zone's baseline history (approved and superseded versions in approval order) in words:
/// which version, in force from which month to which, approved by whom, how and why.
pub fn baseline_lines(history: &[CaseFull]) -> Vec<BaselineLine> {
    let Some(start) = history.iter().map(|b| b.case.header.start_month).min() else { return Vec::new() };
    let froms: Vec<crate::domain::Month> = history
        .iter()
        .enumerate()
        .map(|(i, b)| if i == 0 { start } else { b.case.in_force_from.unwrap_or(b.case.header.start_month) })
        .collect();
    history
        .iter()
        .enumerate()
        .map(|(i, b)| {
            let r = &b.case.review;
            let next = froms.get(i + 1).copied();
            BaselineLine {
                case_id: b.case.id,
                version: b.case.version,
                label: b.case.header.label.clone(),
                from: froms[i].to_string(),
                until: next.filter(|n| *n > froms[i]).map(|n| month_before(n).to_string()),
                never_in_force: next.is_some_and(|n| n <= froms[i]),
                approved_by: r.approved_by.clone().unwrap_or_default(),
                approved_on: r.approved_at.as_deref().map_or("", |a| a.get(..10).unwrap_or(a)).to_string(),
                approved_at: r.approved_at.clone().unwrap_or_default(),
                how: r.approval_note().unwrap_or_else(|| "four eyes: approved by a second person".into()),
                comment: r.approve_comment.clone(),
            }
        })
        .collect()
}

fn month_before(m: crate::domain::Month) -> crate::domain::Month {
    match m.month {
        1 => crate::domain::Month { year: m.year - 1, month: 12 },
        n => crate::domain::Month { year: m.year, month: n - 1 },
    }
}
