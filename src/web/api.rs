//! JSON API under `/api/v1`: zones, cases with their figures, the stateless metrics endpoint
//! and the OpenAPI document.

use super::auth::CurrentUser;
use super::cases::{CommentForm, CopyForm, figures_on_pool};
use super::metrics;
use super::{ApiError, ApiPath, ApiQuery, AppError, AppState, JsonBody, NoQuery};
use crate::app::{self, cases::ReviewStep};
use crate::db::{self, CaseFull};
use crate::domain::{CaseId, ZoneId};
use crate::domain::{
    CaseSpec, CaseSpecInput, CaseState, NewZone, NumberFormat, RateStyle, SiteSettings, SiteSettingsInput, ZoneInput,
};
use crate::finance::schedule::CaseMetrics;
use axum::Json;
use axum::extract::State;
use axum::http::{StatusCode, header};
use axum::response::IntoResponse;
use serde::{Deserialize, Serialize};
use serde_json::{Value, json};

/// GET /api/v1/openapi.json
pub async fn openapi(_: ApiQuery<NoQuery>) -> impl IntoResponse {
    ([(header::CONTENT_TYPE, "application/json")], include_str!("openapi.json"))
}

/// GET /api/v1/zones
pub async fn list_zones(State(state): State<AppState>, _: ApiQuery<NoQuery>) -> Result<Json<Value>, ApiError> {
    let zones = db::list_zones(&state.pool).await?;
    Ok(Json(json!({ "zones": zones })))
}

/// POST /api/v1/zones
pub async fn create_zone(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    JsonBody(input): JsonBody<ZoneInput>,
) -> Result<impl IntoResponse, ApiError> {
    let zone = NewZone::parse_new(&input)?;
    let zone = app::zones::create(&state.pool, user.name(), &zone, state.clock.now()).await?;
    let id = zone.id;
    Ok((StatusCode::CREATED, [(header::LOCATION, format!("/api/v1/zones/{id}"))], Json(json!({ "zone": zone }))))
}

/// GET /api/v1/zones/{id}
pub async fn get_zone(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>, ApiError> {
    let zone = db::get_zone(&state.pool, id).await?;
    let cases = db::list_cases(&state.pool, id).await?;
    Ok(Json(json!({ "zone": zone, "cases": cases })))
}

/// A partial change of a zone: absent fields keep their value. The status moves through
/// `POST /api/v1/zones/{id}/status` (its lifecycle), not here.
#[derive(Deserialize, Serialize, Default)]
#[serde(default, deny_unknown_fields)]
pub struct ZonePatch {
    code: Option<String>,
    name: Option<String>,
    description: Option<String>,
    owner: Option<String>,
    area: Option<String>,
    needs: Option<Vec<String>>,
}

/// PATCH /api/v1/zones/{id}: change a zone's fields, area or needs (422 naming `needs` for a
/// code that names no zone, the zone itself, or a cycle).
pub async fn patch_zone(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    JsonBody(patch): JsonBody<ZonePatch>,
) -> Result<Json<Value>, ApiError> {
    let mut input = db::get_zone(&state.pool, id).await?.input();
    set(&mut input.code, patch.code);
    set(&mut input.name, patch.name);
    set(&mut input.description, patch.description);
    set(&mut input.owner, patch.owner);
    set(&mut input.area, patch.area);
    set(&mut input.needs, patch.needs);
    let zone = NewZone::parse(&input)?;
    let zone = app::zones::update(&state.pool, user.name(), ZoneId(id), &zone, state.clock.now()).await?;
    Ok(Json(json!({ "zone": zone })))
}

/// POST /zones/{id}/cases: a whole case (header, costs, drivers; rates as fractions) stored as
/// the zone's next draft version.
pub async fn create_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(zone_id): ApiPath<i64>,
    JsonBody(input): JsonBody<CaseSpecInput>,
) -> Result<impl IntoResponse, ApiError> {
    let multiplier = db::get_site(&state.pool).await?.expert_multiplier;
    let mut spec = CaseSpec::parse(&input, RateStyle::Fraction(NumberFormat::Plain), multiplier)?;
    spec.state = CaseState::Draft;
    let at = db::timestamp(state.clock.now());
    let mut tx = db::begin_write(&state.pool).await?;
    let id = db::insert_case(&mut tx, zone_id, &spec, user.name(), &at).await?;
    db::audit::record(&mut tx, &at, user.name(), "case.create", &format!("case {id}"), &format!("zone {zone_id}"))
        .await?;
    tx.commit().await?;
    let body = case_body(&state, id).await?;
    Ok((StatusCode::CREATED, [(header::LOCATION, format!("/api/v1/cases/{id}"))], Json(body)))
}

/// GET /api/v1/cases/{id}
pub async fn get_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>, ApiError> {
    Ok(Json(case_body(&state, id).await?))
}

/// A case with its figures; `settings` says whether they use the settings of its approval
/// (`at_approval`) or today's (`today`), and `notes` carries the flags its pages show.
async fn case_body(state: &AppState, id: i64) -> Result<Value, ApiError> {
    let today = db::get_site(&state.pool).await?;
    let (full, figures): (CaseFull, _) = figures_on_pool(db::case_full(&state.pool, id).await?, &today).await?;
    let site = full.case.settings(&today);
    let notes: Vec<Value> =
        full.case.notes(&today).into_iter().map(|(kind, text)| json!({ "kind": kind, "text": text })).collect();
    Ok(json!({
        "case": full,
        "currency": site.currency,
        "hurdle_rate": site.hurdle_rate.to_string(),
        "settings": if full.case.frozen_settings.is_some() { "at_approval" } else { "today" },
        "notes": notes,
        "metrics": metrics_json(&figures.pre_tax.metrics),
        "after_tax_metrics": figures.after_tax.as_ref().map(|v| metrics_json(&v.metrics)),
        "monthly_net_flows": figures.pre_tax.schedule.net_flows().iter().map(|f| metrics::money_text(*f)).collect::<Vec<_>>(),
        "uncertainty": uncertainty_json(state, &full, &site, &figures.pre_tax.metrics, &today).await?,
    }))
}

/// What the case page shows about uncertainty, at full precision: per driver the break-even
/// quantity, the tornado's NPV at the low and high quantity and the calibration factor with its
/// evidence; the Monte Carlo figures with their seed and trial count; the chance-weighted and
/// calibrated NPV. Only `error` (the reason) when it cannot be computed.
async fn uncertainty_json(
    state: &AppState,
    full: &CaseFull,
    site: &SiteSettings,
    metrics: &CaseMetrics,
    today: &SiteSettings,
) -> Result<Value, ApiError> {
    use crate::domain::Trials;
    use crate::finance::linear::BreakEven;
    let (computed, calibration) =
        super::cases::uncertainty_of(state, full, site, metrics, today, Trials::default()).await?;
    let evidence = calibration.zones;
    let u = match computed {
        Ok(u) => u,
        Err(e) => return Ok(json!({ "error": format!("the uncertainty cannot be computed: {e}") })),
    };
    let float = |x: f64| x.is_finite().then(|| metrics::rate_text(x));
    let drivers: Vec<Value> = u
        .drivers
        .iter()
        .map(|d| {
            let (break_even, quantity) = match d.break_even {
                BreakEven::At(q) => ("at", float(q)),
                BreakEven::NotNeeded => ("not_needed", None),
                BreakEven::Never => ("never", None),
            };
            json!({
                "label": d.label,
                "kind": d.kind,
                "unit": d.unit,
                "quantity_low": metrics::money_text(d.low),
                "quantity_likely": metrics::money_text(d.likely),
                "quantity_high": metrics::money_text(d.high),
                "npv_at_low": metrics::money_text(d.npv_low),
                "npv_at_high": metrics::money_text(d.npv_high),
                "break_even": break_even,
                "break_even_quantity": quantity,
                "calibration": {
                    "factor": float(d.factor.factor),
                    "measured_over_expected": d.factor.raw.and_then(float),
                    "credibility": float(d.factor.credibility),
                    "evidence_drivers": d.factor.drivers,
                    "evidence_driver_months": d.factor.months,
                },
            })
        })
        .collect();
    let sim = &u.simulation;
    Ok(json!({
        "npv": metrics::money_text(u.npv),
        "chance_weighted_npv": metrics::money_text(u.chance_weighted),
        // Deprecated in 0.2.0 (the same figure's old name), removed in 0.3.0.
        "risk_adjusted_npv": metrics::money_text(u.chance_weighted),
        "calibrated_npv": metrics::money_text(u.calibrated),
        "drivers": drivers,
        "tornado_order": u.tornado.iter().filter_map(|&i| u.drivers.get(i).map(|d| d.label.clone())).collect::<Vec<_>>(),
        "calibration_zones": evidence,
        "monte_carlo": {
            "seed": sim.seed.to_string(),
            "trials": sim.trials,
            "mean": float(sim.mean),
            "std_dev": float(sim.std_dev),
            "p10": float(sim.p10),
            "p50": float(sim.p50),
            "p90": float(sim.p90),
            "chance_npv_below_zero": float(sim.chance_npv_below_zero),
            // Deprecated in 0.2.0 (the same figure's old name), removed in 0.3.0.
            "probability_npv_below_zero": float(sim.chance_npv_below_zero),
        },
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

/// POST /api/v1/cases/{id}/copy `{"label"}`: the version saved as the zone's next draft.
pub async fn copy_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    JsonBody(body): JsonBody<CopyForm>,
) -> Result<impl IntoResponse, ApiError> {
    let new_id = app::cases::copy(&state.pool, user.name(), CaseId(id), &body.label, state.clock.now()).await?.0;
    let body = case_body(&state, new_id).await?;
    Ok((StatusCode::CREATED, [(header::LOCATION, format!("/api/v1/cases/{new_id}"))], Json(body)))
}

async fn review(
    state: &AppState,
    user: &super::auth::Principal,
    id: i64,
    step: ReviewStep,
    comment: &str,
) -> Result<Json<Value>, ApiError> {
    app::cases::review(&state.pool, user.name(), CaseId(id), step, comment, state.clock.now()).await?;
    Ok(Json(case_body(state, id).await?))
}

/// POST /api/v1/cases/{id}/submit `{"comment"?}`
pub async fn submit_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    JsonBody(body): JsonBody<CommentForm>,
) -> Result<Json<Value>, ApiError> {
    review(&state, &user, id, ReviewStep::Submit, &body.comment).await
}

/// POST /api/v1/cases/{id}/approve `{"comment"?}`: four eyes unless the site allows one person.
pub async fn approve_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    JsonBody(body): JsonBody<CommentForm>,
) -> Result<Json<Value>, ApiError> {
    review(&state, &user, id, ReviewStep::Approve, &body.comment).await
}

/// POST /api/v1/cases/{id}/reject `{"comment"}`: back to draft with the reason.
pub async fn reject_case(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    JsonBody(body): JsonBody<CommentForm>,
) -> Result<Json<Value>, ApiError> {
    review(&state, &user, id, ReviewStep::Reject, &body.comment).await
}

/// The zone status body.
#[derive(Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct StatusBody {
    /// The next lifecycle status.
    status: String,
}

/// POST /api/v1/zones/{id}/status `{"status"}`: 409 naming the allowed next states when the
/// lifecycle does not allow the move.
pub async fn zone_status(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    JsonBody(body): JsonBody<StatusBody>,
) -> Result<Json<Value>, ApiError> {
    let zone = app::zones::change_status(&state.pool, user.name(), ZoneId(id), &body.status, state.clock.now()).await?;
    Ok(Json(json!({ "zone": zone })))
}

/// The site settings as the API shows them (rates as fraction strings).
fn site_json(site: &SiteSettings) -> Value {
    json!({ "site": {
        "plant_name": site.plant_name,
        "currency": site.currency,
        "hurdle_rate": site.hurdle_rate.to_string(),
        "tax_rate": site.tax_rate.map(|t| t.to_string()),
        "depreciation_years": site.depreciation_years,
        "default_horizon_months": site.default_horizon_months,
        "expert_multiplier": site.expert_multiplier.to_string(),
        "one_person_approval": site.one_person_approval,
        "number_format": site.number_format.as_str(),
        "time_zone": site.time_zone.as_str(),
        "introduction_capacity": site.introduction_capacity,
    }})
}

/// GET /api/v1/site
pub async fn get_site(State(state): State<AppState>, _: ApiQuery<NoQuery>) -> Result<Json<Value>, ApiError> {
    Ok(Json(site_json(&db::get_site(&state.pool).await?)))
}

/// A partial change of the site settings: absent fields keep their value, `null` clears an
/// optional one (tax rate, depreciation years). Rates are fractions.
#[derive(Deserialize, Serialize, Default)]
#[serde(default, deny_unknown_fields)]
pub struct SitePatch {
    plant_name: Option<String>,
    currency: Option<String>,
    #[serde(deserialize_with = "present")]
    hurdle_rate: Option<String>,
    #[serde(deserialize_with = "present")]
    tax_rate: Option<String>,
    #[serde(deserialize_with = "present")]
    depreciation_years: Option<String>,
    #[serde(deserialize_with = "present")]
    default_horizon_months: Option<String>,
    #[serde(deserialize_with = "present")]
    expert_multiplier: Option<String>,
    one_person_approval: Option<bool>,
    number_format: Option<String>,
    time_zone: Option<String>,
    #[serde(deserialize_with = "present")]
    introduction_capacity: Option<String>,
}

/// A field that is present: its text (a number as written, `null` as empty).
fn present<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Option<String>, D::Error> {
    crate::domain::de::string_or_number(d).map(Some)
}

impl SitePatch {
    /// Lay the given fields over `input`.
    fn apply(self, mut input: SiteSettingsInput) -> SiteSettingsInput {
        set(&mut input.plant_name, self.plant_name);
        set(&mut input.currency, self.currency);
        set(&mut input.hurdle_rate, self.hurdle_rate);
        set(&mut input.tax_rate, self.tax_rate);
        set(&mut input.depreciation_years, self.depreciation_years);
        set(&mut input.default_horizon_months, self.default_horizon_months);
        set(&mut input.expert_multiplier, self.expert_multiplier);
        set(&mut input.number_format, self.number_format);
        set(&mut input.time_zone, self.time_zone);
        set(&mut input.introduction_capacity, self.introduction_capacity);
        set(&mut input.one_person_approval, self.one_person_approval);
        input
    }
}

/// A partial change's field: the value sent replaces the current one; absent keeps it.
fn set<T>(slot: &mut T, sent: Option<T>) {
    if let Some(v) = sent {
        *slot = v;
    }
}

/// PATCH /api/v1/site: change some settings (admin); errors name each field.
pub async fn patch_site(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(user): CurrentUser,
    JsonBody(patch): JsonBody<SitePatch>,
) -> Result<Json<Value>, ApiError> {
    let current = db::get_site(&state.pool).await?;
    let site = SiteSettings::parse(&patch.apply(current.input()), NumberFormat::Plain).map_err(AppError::Invalid)?;
    app::site::change_settings(&state.pool, user.name(), &site, state.clock.now()).await?;
    Ok(Json(site_json(&db::get_site(&state.pool).await?)))
}
