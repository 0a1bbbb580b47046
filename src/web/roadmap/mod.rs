//! The roll-out roadmap: the page, its CSV and the API.
//!
//! The API answers `GET /api/v1/roadmap` (the inputs as query parameters, or `plan=<id>` for a
//! stored plan version's) and keeps named plans at `/api/v1/roadmap/plans`. Numbers in the
//! query are plain decimals, as everywhere in the API.

pub(super) mod csv;
pub(super) mod page;

use super::auth::CurrentUser;
use super::metrics::money_text;
use super::portfolio::compute as compute_portfolio;
use super::{ApiError, ApiPath, ApiQuery, AppError, AppState, JsonBody, NoQuery};
use crate::db;
use crate::domain::{
    NumberFormat, PlanRow, PlanVersion, PortfolioParams, RankBy, RoadmapAnswer, RoadmapParams, RoadmapQuery, Trials,
    roadmap_answer,
};
use crate::finance::roadmap::{Plan, Rule, capital_use, introductions};
use axum::Json;
use axum::extract::State;
use axum::http::{StatusCode, header};
use axum::response::{IntoResponse, Response};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use serde_json::{Value, json};

/// Compute the roadmap for valid inputs: the portfolio's figures (every zone: a plan that left
/// out zones still warming up would be wrong), then the solver on the CPU pool.
pub(super) async fn compute(state: &AppState, params: RoadmapParams) -> Result<RoadmapAnswer, AppError> {
    let portfolio_params = PortfolioParams {
        budget: None,
        rank: RankBy::Npv,
        basis: params.basis,
        min_readiness: None,
        trials: Trials::default(),
    };
    let computed = compute_portfolio(state, portfolio_params, None).await?;
    let answer = crate::app::cpu::run(move || roadmap_answer(&computed.portfolio, params, &computed.site)).await?;
    answer.map_err(|e| AppError::Internal(anyhow::anyhow!("the roadmap cannot be computed: {e}")))
}

/// The query of `GET /api/v1/roadmap`: the plan inputs, or `plan` (a stored version's id).
/// The fields of [`RoadmapQuery`] written out rather than `#[serde(flatten)]` (as the page's
/// query does): [`super::ApiQuery`] refuses unknown parameters by the struct's field names, and
/// a flattened struct lists none.
#[derive(Debug, Default, Deserialize)]
#[serde(default)]
pub struct ApiRoadmapQuery {
    start: String,
    years: String,
    budgets: String,
    capacity: String,
    carry_over: String,
    one_per_area: String,
    basis: String,
    time_limit: String,
    plan: String,
}

impl ApiRoadmapQuery {
    fn inputs(self) -> (RoadmapQuery, String) {
        let Self { start, years, budgets, capacity, carry_over, one_per_area, basis, time_limit, plan } = self;
        (RoadmapQuery { start, years, budgets, capacity, carry_over, one_per_area, basis, time_limit }, plan)
    }
}

/// The inputs of a request: as given, or a stored version's (then no other input may be given).
async fn inputs_of(state: &AppState, q: ApiRoadmapQuery) -> Result<(RoadmapQuery, Option<PlanVersion>), AppError> {
    let (inputs, plan) = q.inputs();
    if plan.trim().is_empty() {
        return Ok((inputs, None));
    }
    let id: i64 = plan.trim().parse().map_err(|_| {
        AppError::Invalid(crate::domain::FieldErrors::one("plan", "the id of a stored plan version, such as 1"))
    })?;
    if inputs != RoadmapQuery::default() {
        return Err(AppError::Invalid(crate::domain::FieldErrors::one(
            "plan",
            "give either a stored plan version or the plan inputs, not both",
        )));
    }
    let version = crate::app::roadmap::plan(&state.pool, id).await?;
    Ok((version.inputs.clone(), Some(version)))
}

/// GET /api/v1/roadmap?start=&years=&budgets=&capacity=&carry_over=&one_per_area=&basis=&time_limit=
/// (or `plan=<id>`): the optimal and the simple plan.
pub async fn api(State(state): State<AppState>, ApiQuery(q): ApiQuery<ApiRoadmapQuery>) -> Result<Response, ApiError> {
    let (inputs, version) = inputs_of(&state, q).await?;
    let site = db::get_site(&state.pool).await?;
    let next = RoadmapParams::next_month(state.clock.now());
    let params = RoadmapParams::parse(&inputs, NumberFormat::Plain, next, &site).map_err(AppError::from)?;
    let answer = compute(&state, params).await?;
    let body = crate::app::cpu::run(move || answer_json(&answer, version.as_ref(), &site.currency)).await?;
    Ok(Json(body).into_response())
}

fn rule_json(a: &RoadmapAnswer, r: &Rule) -> Value {
    let (kind, year, month, over, zone) = match r {
        Rule::Needs(code) => ("needs", None, None, None, Some(code.clone())),
        Rule::Budget { year, over } => ("budget", Some(year + 1), None, Some(money_text(Decimal::new(*over, 2))), None),
        Rule::Capacity { month } => ("capacity", None, Some(a.params.month(*month).to_string()), None, None),
        Rule::Area { month } => ("area", None, Some(a.params.month(*month).to_string()), None, None),
    };
    json!({ "kind": kind, "plan_year": year, "month": month, "over": over, "zone": zone, "words": a.rule_words(r) })
}

fn row_json(a: &RoadmapAnswer, r: &PlanRow) -> Value {
    let z = &a.zones[r.zone];
    json!({
        "code": z.code,
        "name": z.name,
        "area": z.area,
        "status": z.status.as_str(),
        "committed": z.committed(),
        "start": r.start.map(|m| m.to_string()),
        "live": r.live.map(|m| m.to_string()),
        "quarter": r.quarter.map(|q| q + 1),
        "one_off_by_plan_year": r.one_off_by_year.iter().map(|d| money_text(*d)).collect::<Vec<_>>(),
        "value_at_plan_start": r.value_at_start.map(money_text),
        "cost_of_a_quarters_delay": r.delay_cost.map(money_text),
        "what_would_start_it_a_quarter_earlier": r.earlier,
        "reason": r.reason,
    })
}

fn plan_json(a: &RoadmapAnswer, plan: &Plan, optimal: bool) -> Value {
    let inst = &a.instance;
    let delays = optimal.then_some(a.result.delays.as_slice());
    let rows = a.rows(plan, delays);
    let used = capital_use(inst, &plan.placements);
    let mut carried = 0_i64;
    let capital: Vec<Value> = (0..inst.years as usize)
        .map(|y| {
            let budget = inst.budgets.get(y).copied().unwrap_or(0);
            let spent = used.get(y).copied().unwrap_or(0);
            // With carry-over, a year may spend its budget and what earlier years left.
            let available = if inst.carry_over { budget + carried } else { budget };
            carried = if inst.carry_over { available - spent } else { 0 };
            json!({
                "plan_year": y + 1,
                "from": a.params.month(12 * y as i32).to_string(),
                "budget": money_text(Decimal::new(budget, 2)),
                "available": money_text(Decimal::new(available, 2)),
                "used": money_text(Decimal::new(spent, 2)),
            })
        })
        .collect();
    let intro: Vec<Value> = introductions(inst, &plan.placements)
        .iter()
        .enumerate()
        .map(|(m, n)| json!({ "month": a.params.month(m as i32).to_string(), "introductions": n }))
        .collect();
    json!({
        "value": money_text(plan.value),
        "bound": money_text(plan.bound),
        "proven": plan.proven,
        "gap": money_text((plan.bound - plan.value).max(Decimal::ZERO)),
        "capital_use": capital,
        "introductions": intro,
        "zones": rows.iter().map(|r| row_json(a, r)).collect::<Vec<_>>(),
    })
}

fn inputs_json(p: &RoadmapParams) -> Value {
    json!({
        "start": p.start.to_string(),
        "years": p.years,
        "budgets": p.budgets.iter().map(|b| money_text(*b)).collect::<Vec<_>>(),
        "capacity": p.capacity,
        "carry_over": p.carry_over,
        "one_per_area": p.one_per_area,
        "basis": p.basis.as_str(),
        "time_limit": p.time_limit_seconds,
    })
}

/// The API's answer for one set of inputs.
fn answer_json(a: &RoadmapAnswer, version: Option<&PlanVersion>, currency: &str) -> Value {
    let r = &a.result;
    json!({
        "currency": currency,
        "inputs": inputs_json(&a.params),
        "plan": version.map(plan_version_json),
        "optimal": plan_json(a, &r.optimal, true),
        "simple": plan_json(a, &r.simple, false),
        "gain_over_simple": money_text(r.optimal.value - r.simple.value),
        "overruns": r.overruns.iter().map(|o| rule_json(a, o)).collect::<Vec<_>>(),
        "left_out": a.left_out.iter().map(|(code, why)| json!({ "code": code, "reason": why })).collect::<Vec<_>>(),
    })
}

fn plan_version_json(v: &PlanVersion) -> Value {
    json!({
        "id": v.id,
        "name": v.name,
        "version": v.version,
        "inputs": v.inputs,
        "created_at": v.created_at,
        "created_by": v.created_by,
    })
}

/// GET /api/v1/roadmap/plans: every stored plan version, newest first.
pub async fn api_plans(State(state): State<AppState>, _: ApiQuery<NoQuery>) -> Result<Json<Value>, ApiError> {
    let plans = crate::app::roadmap::plans(&state.pool).await.map_err(AppError::from)?;
    Ok(Json(json!({ "plans": plans.iter().map(plan_version_json).collect::<Vec<_>>() })))
}

/// GET /api/v1/roadmap/plans/{id}: one stored plan version.
pub async fn api_plan(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>, ApiError> {
    let plan = crate::app::roadmap::plan(&state.pool, id).await.map_err(AppError::from)?;
    Ok(Json(json!({ "plan": plan_version_json(&plan) })))
}

/// The body of `POST /api/v1/roadmap/plans`: a name and the plan inputs (strings, as the query).
#[derive(Debug, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct PlanInput {
    name: String,
    inputs: RoadmapQuery,
}

/// POST /api/v1/roadmap/plans `{"name", "inputs": {...}}`: save the next version of a named plan.
pub async fn api_save_plan(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    JsonBody(input): JsonBody<PlanInput>,
) -> Result<Response, ApiError> {
    let now = state.clock.now();
    let plan = crate::app::roadmap::save_plan(&state.pool, user.name(), &input.name, &input.inputs, now)
        .await
        .map_err(AppError::from)?;
    let location = format!("/api/v1/roadmap/plans/{}", plan.id);
    Ok((StatusCode::CREATED, [(header::LOCATION, location)], Json(json!({ "plan": plan_version_json(&plan) })))
        .into_response())
}

#[cfg(test)]
mod tests {
    #[test]
    fn the_search_fits_inside_a_request() {
        let longest = std::time::Duration::from_secs(u64::from(crate::domain::MAX_TIME_LIMIT));
        assert!(longest < super::super::REQUEST_TIMEOUT);
    }
}
