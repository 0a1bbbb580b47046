//! Zone pages: the list with its create form, the detail page with its versions.

use super::auth::{CurrentUser, Nav};
use super::cases::{MetricsView, load_figures};
use super::{AppError, AppState, FormBody};
use crate::app;
use crate::db::{self, CaseVersion};
use crate::domain::{
    CaseHeader, CaseSpec, CaseState, Criterion, FieldErrors, Month, NewZone, Readiness, SiteSettings, Zone, ZoneId,
    ZoneInput, ZoneStatus, parse_scores,
};
use askama::Template;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::response::{Html, IntoResponse, Redirect, Response};
use rust_decimal::Decimal;
use std::collections::HashMap;

/// One row of the zone list: the zone and the figures of its newest version.
pub struct ZoneRow {
    zone: Zone,
    latest: Option<(CaseVersion, MetricsView)>,
}

#[derive(Template)]
#[template(path = "zones/list.html")]
struct ListPage {
    nav: Nav,
    site: SiteSettings,
    rows: Vec<ZoneRow>,
    form: ZoneInput,
    errors: FieldErrors,
    /// The refused form, beside it and in the summary at the top.
    problems: super::problems::Problems,
    /// The states a new zone may start in.
    statuses: [ZoneStatus; 2],
}

async fn list_page(state: &AppState, nav: Nav, form: ZoneInput, errors: FieldErrors) -> Result<ListPage, AppError> {
    let site = db::get_site(&state.pool).await?;
    let mut rows = Vec::new();
    for zone in db::list_zones(&state.pool).await? {
        let latest = match db::list_cases(&state.pool, zone.id).await?.pop() {
            Some(case) => {
                let (_, figures) = load_figures(state, case.id, &site).await?;
                Some((case, MetricsView::from(&figures.pre_tax.metrics)))
            }
            None => None,
        };
        rows.push(ZoneRow { zone, latest });
    }
    let problems = super::problems::Problems::of("new-zone-form", "Add a zone", errors.clone(), None);
    Ok(ListPage { nav, site, rows, form, errors, problems, statuses: [ZoneStatus::Candidate, ZoneStatus::Shelved] })
}

/// A taken zone code is the user's to fix beside the code field, a refused status move or
/// needs beside their fields; anything else is an error.
fn code_conflict(err: app::Error) -> Result<FieldErrors, AppError> {
    match err {
        app::Error::Conflict(msg) => Ok(FieldErrors::one("code", msg)),
        app::Error::Invalid(fields) => Ok(fields),
        other => Err(other.into()),
    }
}

/// The zone form as the browser sends it: the needs in one text field, comma-separated.
#[derive(Debug, Default, serde::Deserialize)]
#[serde(default)]
pub struct ZoneForm {
    code: String,
    name: String,
    description: String,
    owner: String,
    status: String,
    area: String,
    /// Zone codes separated by commas.
    needs: String,
}

impl From<ZoneForm> for ZoneInput {
    fn from(f: ZoneForm) -> Self {
        ZoneInput {
            code: f.code,
            name: f.name,
            description: f.description,
            owner: f.owner,
            status: f.status,
            area: f.area,
            needs: ZoneInput::split_needs(&f.needs),
        }
    }
}

/// GET /zones
pub async fn list(State(state): State<AppState>, CurrentUser(me): CurrentUser) -> Result<Html<String>, AppError> {
    Ok(Html(list_page(&state, Nav::from(&me), ZoneInput::default(), FieldErrors::default()).await?.render()?))
}

/// POST /zones: create a zone, or show the list again with the form's errors.
pub async fn create(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    FormBody(form): FormBody<ZoneForm>,
) -> Result<Response, AppError> {
    let input = ZoneInput::from(form);
    let result = match NewZone::parse_new(&input) {
        Ok(zone) => match app::zones::create(&state.pool, user.name(), &zone, state.clock.now()).await {
            Ok(zone) => return Ok(Redirect::to(&format!("/zones/{}", zone.id)).into_response()),
            Err(err) => code_conflict(err)?,
        },
        Err(errors) => errors,
    };
    let page = list_page(&state, Nav::from(&user), input, result).await?;
    Ok((StatusCode::UNPROCESSABLE_ENTITY, Html(page.render()?)).into_response())
}

#[derive(Template)]
#[template(path = "zones/detail.html")]
struct DetailPage {
    nav: Nav,
    /// The baseline history, oldest first.
    baselines: Vec<super::cases::BaselineLine>,
    site: SiteSettings,
    zone: Zone,
    /// The zones it needs live first (id, code, name), by code.
    needed: Vec<(i64, String, String)>,
    /// The zones that need it (id, code, name), by code.
    needed_by: Vec<(i64, String, String)>,
    /// Each version with its figures and the hurdle rate they use ("9 % at approval").
    versions: Vec<(CaseVersion, MetricsView, String)>,
    /// The flags of the approved baseline (frozen settings, self-approval, early start).
    notes: Vec<(&'static str, String)>,
    form: ZoneInput,
    errors: FieldErrors,
    /// The current status and the allowed next ones.
    statuses: Vec<ZoneStatus>,
    readiness: Vec<ReadinessLine>,
    readiness_score: Option<Readiness>,
    readiness_errors: FieldErrors,
    /// The refused form, beside it and in the summary at the top.
    problems: super::problems::Problems,
}

/// One criterion on the zone page: its score and who gave it.
pub struct ReadinessLine {
    criterion: Criterion,
    score: Option<u8>,
    /// When and by whom it was scored (shown in the plant's time).
    rated: Option<(String, String)>,
}

async fn detail_page(
    state: &AppState,
    nav: Nav,
    id: i64,
    form: Option<ZoneInput>,
    errors: FieldErrors,
) -> Result<DetailPage, AppError> {
    detail_with(state, nav, id, form, errors, FieldErrors::default()).await
}

async fn detail_with(
    state: &AppState,
    nav: Nav,
    id: i64,
    form: Option<ZoneInput>,
    errors: FieldErrors,
    readiness_errors: FieldErrors,
) -> Result<DetailPage, AppError> {
    let site = db::get_site(&state.pool).await?;
    let zone = db::get_zone(&state.pool, id).await?;
    let (mut needed, mut needed_by) = (Vec::new(), Vec::new());
    for other in db::list_zones(&state.pool).await? {
        if zone.needs.contains(&other.code) {
            needed.push((other.id, other.code.clone(), other.name.clone()));
        }
        if other.needs.contains(&zone.code) {
            needed_by.push((other.id, other.code, other.name));
        }
    }
    let mut versions = Vec::new();
    let mut notes = Vec::new();
    for case in db::list_cases(&state.pool, id).await? {
        let (_, figures) = load_figures(state, case.id, &site).await?;
        let rate = match &case.frozen_settings {
            Some(f) => format!("{} at approval", crate::domain::pct(&f.hurdle_rate)),
            None => format!("{} today", crate::domain::pct(&site.hurdle_rate)),
        };
        if case.state == CaseState::Approved {
            notes = case.notes(&site);
        }
        versions.push((case, MetricsView::from(&figures.pre_tax.metrics), rate));
    }
    let form = form.unwrap_or_else(|| zone.input());
    let criteria = db::readiness::criteria(&state.pool).await?;
    let scores = db::readiness::zone_scores(&state.pool, id).await?;
    let readiness_score =
        Readiness::weighted(&criteria, &scores.iter().map(|(k, (s, _, _))| (*k, *s)).collect::<HashMap<_, _>>());
    let readiness = criteria
        .into_iter()
        .map(|c| {
            let given = scores.get(&c.id);
            ReadinessLine {
                score: given.map(|(s, _, _)| *s),
                rated: given.map(|(_, at, by)| (at.clone(), by.clone())),
                criterion: c,
            }
        })
        .collect();
    let statuses = std::iter::once(zone.status).chain(zone.status.next().iter().copied()).collect();
    let baselines = super::cases::baseline_lines(&db::baseline_history(&state.pool, id).await?);
    let problems = super::problems::Problems::of("zone-form", "Zone details", errors.clone(), None)
        .and(super::problems::Problems::of("readiness-form", "Readiness scores", readiness_errors.clone(), None));
    Ok(DetailPage {
        problems,
        nav,
        baselines,
        site,
        zone,
        needed,
        needed_by,
        versions,
        notes,
        form,
        errors,
        statuses,
        readiness,
        readiness_score,
        readiness_errors,
    })
}

/// POST /zones/{id}/readiness: the lead's scores, 1 to 5 per criterion (empty clears one).
pub async fn rate_readiness(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<HashMap<String, String>>,
) -> Result<Response, AppError> {
    db::get_zone(&state.pool, id).await?;
    let criteria = db::readiness::criteria(&state.pool).await?;
    match parse_scores(&criteria, &form) {
        Ok(scores) => {
            let at = db::timestamp(state.clock.now());
            let mut tx = db::begin_write(&state.pool).await?;
            db::readiness::set_scores(&mut tx, id, &scores, user.name(), &at).await?;
            let detail: Vec<String> = criteria
                .iter()
                .zip(&scores)
                .map(|(c, (_, s))| format!("{}={}", c.key, s.map_or_else(|| "-".into(), |s| s.to_string())))
                .collect();
            db::audit::record(&mut tx, &at, user.name(), "zone.readiness", &format!("zone {id}"), &detail.join(" "))
                .await?;
            tx.commit().await?;
            Ok(Redirect::to(&format!("/zones/{id}#readiness")).into_response())
        }
        Err(errors) => {
            let page = detail_with(&state, Nav::from(&user), id, None, FieldErrors::default(), errors).await?;
            Ok((StatusCode::UNPROCESSABLE_ENTITY, Html(page.render()?)).into_response())
        }
    }
}

/// GET /zones/{id}
pub async fn detail(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
) -> Result<Html<String>, AppError> {
    Ok(Html(detail_page(&state, Nav::from(&me), id, None, FieldErrors::default()).await?.render()?))
}

/// POST /zones/{id}: change the zone's fields.
pub async fn update(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<ZoneForm>,
) -> Result<Response, AppError> {
    let input = ZoneInput::from(form);
    let errors = match NewZone::parse(&input) {
        Ok(zone) => match app::zones::update(&state.pool, user.name(), ZoneId(id), &zone, state.clock.now()).await {
            Ok(_) => return Ok(Redirect::to(&format!("/zones/{id}")).into_response()),
            Err(err) => code_conflict(err)?,
        },
        Err(errors) => errors,
    };
    let page = detail_page(&state, Nav::from(&user), id, Some(input), errors).await?;
    Ok((StatusCode::UNPROCESSABLE_ENTITY, Html(page.render()?)).into_response())
}

/// POST /zones/{id}/cases: start a new, empty draft business case and open its editor.
pub async fn new_case(
    State(state): State<AppState>,
    CurrentUser(user): CurrentUser,
    Path(id): Path<i64>,
) -> Result<Redirect, AppError> {
    let site = db::get_site(&state.pool).await?;
    let now = state.clock.now();
    let start = Month::of(now.date()).plus(1);
    let horizon = site.default_horizon_months;
    let spec = CaseSpec {
        header: CaseHeader {
            label: "Base".into(),
            horizon_months: horizon,
            start_month: start,
            go_live_offset: 3.min(horizon - 1),
            ramp_up_months: 3,
            success_probability: Decimal::new(8, 1),
        },
        state: CaseState::Draft,
        costs: Vec::new(),
        drivers: Vec::new(),
    };
    let at = db::timestamp(now);
    let mut tx = db::begin_write(&state.pool).await?;
    let case_id = db::insert_case(&mut tx, id, &spec, user.name(), &at).await?;
    db::audit::record(&mut tx, &at, user.name(), "case.create", &format!("case {case_id}"), &format!("zone {id}"))
        .await?;
    tx.commit().await?;
    Ok(Redirect::to(&format!("/cases/{case_id}/edit")))
}
