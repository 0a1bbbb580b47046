//! JSON API under `/api/v1`: zones, cases with their figures, the stateless metrics endpoint
//! and the OpenAPI document.

use super::auth::CurrentUser;
use super::metrics;
use super::{ApiError, AppState, JsonBody};
use crate::db::{self, CaseFull};
use crate::domain::{CaseSpec, CaseSpecInput, CaseState, NewZone, NumberFormat, RateStyle, ZoneInput, case_figures};
use crate::finance::schedule::CaseMetrics;
use axum::Json;
use axum::extract::{Path, State};
use axum::http::{StatusCode, header};
use axum::response::IntoResponse;
use serde_json::{Value, json};

/// GET /api/v1/openapi.json
pub async fn openapi() -> impl IntoResponse {
    ([(header::CONTENT_TYPE, "application/json")], include_str!("openapi.json"))
}

/// GET /api/v1/zones
pub async fn list_zones(State(state): State<AppState>) -> Result<Json<Value>, ApiError> {
    let zones = db::list_zones(&state.pool).await?;
    Ok(Json(json!({ "zones": zones })))
}

/// POST /api/v1/zones
pub async fn create_zone(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    JsonBody(input): JsonBody<ZoneInput>,
) -> Result<impl IntoResponse, ApiError> {
    let zone = NewZone::parse(&input)?;
    let mut tx = db::begin_write(&state.pool).await?;
    let id = db::insert_zone(&mut tx, &zone, user.name()).await?;
    db::audit::record(&mut tx, &db::now(), user.name(), "zone.create", &format!("zone {id}"), &zone.code).await?;
    tx.commit().await?;
    let zone = db::get_zone(&state.pool, id).await?;
    Ok((StatusCode::CREATED, [(header::LOCATION, format!("/api/v1/zones/{id}"))], Json(json!({ "zone": zone }))))
}

/// GET /api/v1/zones/{id}
pub async fn get_zone(State(state): State<AppState>, Path(id): Path<i64>) -> Result<Json<Value>, ApiError> {
    let zone = db::get_zone(&state.pool, id).await?;
    let cases = db::list_cases(&state.pool, id).await?;
    Ok(Json(json!({ "zone": zone, "cases": cases })))
}

/// POST /zones/{id}/cases: a whole case (header, costs, drivers; rates as fractions) stored as
/// the zone's next draft version.
pub async fn create_case(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(zone_id): Path<i64>,
    JsonBody(input): JsonBody<CaseSpecInput>,
) -> Result<impl IntoResponse, ApiError> {
    let mut spec = CaseSpec::parse(&input, RateStyle::Fraction(NumberFormat::Plain))?;
    spec.state = CaseState::Draft;
    let mut tx = db::begin_write(&state.pool).await?;
    let id = db::insert_case(&mut tx, zone_id, &spec, user.name()).await?;
    db::audit::record(
        &mut tx,
        &db::now(),
        user.name(),
        "case.create",
        &format!("case {id}"),
        &format!("zone {zone_id}"),
    )
    .await?;
    tx.commit().await?;
    let body = case_body(&state, id).await?;
    Ok((StatusCode::CREATED, [(header::LOCATION, format!("/api/v1/cases/{id}"))], Json(body)))
}

/// GET /api/v1/cases/{id}
pub async fn get_case(State(state): State<AppState>, Path(id): Path<i64>) -> Result<Json<Value>, ApiError> {
    Ok(Json(case_body(&state, id).await?))
}

async fn case_body(state: &AppState, id: i64) -> Result<Value, ApiError> {
    let site = db::get_site(&state.pool).await?;
    let full: CaseFull = db::case_full(&state.pool, id).await?;
    let figures = case_figures(
        &full.case.header,
        full.costs.iter().map(|c| &c.item),
        full.drivers.iter().map(|d| &d.driver),
        &site,
    )
    .map_err(|e| super::AppError::Conflict(format!("the case cannot be computed: {e}")))?;
    Ok(json!({
        "case": full,
        "currency": site.currency,
        "hurdle_rate": site.hurdle_rate.to_string(),
        "metrics": metrics_json(&figures.pre_tax.metrics),
        "after_tax_metrics": figures.after_tax.as_ref().map(|v| metrics_json(&v.metrics)),
        "monthly_net_flows": figures.pre_tax.schedule.net_flows().iter().map(|f| metrics::money_text(*f)).collect::<Vec<_>>(),
    }))
}

/// A case's metrics as decimal strings (rates annualized).
fn metrics_json(m: &CaseMetrics) -> Value {
    json!({
        "npv": metrics::money_text(m.npv),
        "irr_annual": m.irr_annual.map(metrics::rate_text),
        "irr_monthly_roots": m.irr.as_ref().map(|o| o.roots.iter().map(|r| metrics::rate_text(*r)).collect::<Vec<_>>()).unwrap_or_default(),
        "irr_ambiguous": m.irr.as_ref().is_ok_and(|o| o.ambiguous),
        "mirr_annual": m.mirr_annual.map(metrics::rate_text),
        "payback_months": m.payback_months.as_ref().map(|p| metrics::money_text(p.periods)),
        "discounted_payback_months": m.discounted_payback_months.as_ref().map(|p| metrics::money_text(p.periods)),
        "profitability_index": m.profitability_index.map(metrics::money_text),
        "pv_benefits": metrics::money_text(m.pv_benefits),
        "pv_costs": metrics::money_text(m.pv_costs),
        "total_one_off": metrics::money_text(m.total_one_off),
    })
}
