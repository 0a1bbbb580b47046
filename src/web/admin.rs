//! Admin pages: users and roles, API tokens, site settings and the audit trail.

use super::auth::{CurrentUser, Nav, Principal};
use super::problems::Problems;
use super::{AppError, AppState, FormBody};
use crate::app::{self, users::Account};
use crate::auth::Role;
use crate::db::{self, TokenRow, User, audit::AuditEntry};
use crate::domain::{
    Criterion, FieldErrors, NumberFormat, SiteSettings, SiteSettingsInput, UserId, parse_token_days, parse_weights,
};
use askama::Template;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::response::{Html, IntoResponse, Redirect, Response};
use serde::Deserialize;
use std::collections::HashMap;

#[derive(Template)]
#[template(path = "admin/page.html")]
struct AdminPage {
    nav: Nav,
    users: Vec<User>,
    tokens: Vec<TokenLine>,
    token_days: u32,
    site: SiteSettings,
    roles: [Role; 4],
    /// What a refused form said, beside it and in the summary at the top.
    problems: Problems,
    new_token: Option<String>,
    criteria: Vec<Criterion>,
    formats: [NumberFormat; 2],
}

/// A token as the list shows it: expiry and last use (in the plant's local time, through the
/// `stamp` macro), and whether it has expired by the clock.
struct TokenLine {
    t: TokenRow,
    expired: bool,
    /// Made by someone other than its owner: entries it books say so.
    on_behalf: bool,
}

impl TokenLine {
    fn new(t: TokenRow, now: time::OffsetDateTime) -> Self {
        use time::format_description::well_known::Rfc3339;
        let expires_at = t.expires_at.as_deref().and_then(|s| time::OffsetDateTime::parse(s, &Rfc3339).ok());
        Self {
            expired: expires_at.is_none_or(|at| now >= at),
            on_behalf: crate::domain::issued_on_behalf(&t.created_by, &t.user_name).is_some(),
            t,
        }
    }
}

/// The admin page's forms: anchor id and title, for [`Problems`].
const ADD_USER: (&str, &str) = ("add-user-form", "Add a user");
const ADD_TOKEN: (&str, &str) = ("add-token-form", "Create a token");
const SETTINGS: (&str, &str) = ("settings-form", "Site settings");
const WEIGHTS: (&str, &str) = ("weights-form", "Readiness weights");

/// The problems of the form `(anchor, title)`.
fn at(form: (&str, &str), errors: FieldErrors, notice: Option<String>) -> Problems {
    Problems::of(form.0, form.1, errors, notice)
}

/// The form of one user's row: role and access, or a new password.
fn user_form(id: i64, password: bool) -> (String, String) {
    match password {
        false => (format!("user-{id}-form"), format!("Role and access of user {id}")),
        true => (format!("password-{id}-form"), format!("New password of user {id}")),
    }
}

async fn admin_page(
    state: &AppState,
    nav: Nav,
    problems: Problems,
    new_token: Option<String>,
) -> Result<Response, AppError> {
    let page = AdminPage {
        nav,
        users: db::list_users(&state.pool).await?,
        tokens: {
            let now = state.clock.now();
            db::list_tokens(&state.pool).await?.into_iter().map(|t| TokenLine::new(t, now)).collect()
        },
        token_days: crate::domain::TOKEN_DAYS_DEFAULT,
        site: db::get_site(&state.pool).await?,
        roles: Role::ALL,
        problems,
        new_token,
        criteria: db::readiness::criteria(&state.pool).await?,
        formats: NumberFormat::SITE,
    };
    let status = if !page.problems.all_errors().is_empty() {
        StatusCode::UNPROCESSABLE_ENTITY
    } else if page.problems.has_notice() {
        StatusCode::CONFLICT
    } else {
        StatusCode::OK
    };
    Ok((status, Html(page.render()?)).into_response())
}

/// GET /admin
pub async fn page(State(state): State<AppState>, CurrentUser(me): CurrentUser) -> Result<Response, AppError> {
    admin_page(&state, Nav::from(&me), Problems::default(), None).await
}

/// The add-user form.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct AddUserForm {
    name: String,
    role: String,
    password: String,
}

/// A refused action on the admin page: field errors (422) and conflicts (409) show beside the
/// form `(anchor, title)` and in the summary; anything else is the error page.
async fn refused(state: &AppState, me: &Principal, form: (&str, &str), e: app::Error) -> Result<Response, AppError> {
    match e {
        app::Error::Invalid(fields) => admin_page(state, Nav::from(me), at(form, fields, None), None).await,
        app::Error::Conflict(msg) => {
            admin_page(state, Nav::from(me), at(form, FieldErrors::default(), Some(msg)), None).await
        }
        other => Err(other.into()),
    }
}

/// POST /admin/users
pub async fn add_user(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(form): FormBody<AddUserForm>,
) -> Result<Response, AppError> {
    let role = match Role::parse(&form.role) {
        Ok(role) => role,
        Err(msg) => {
            return admin_page(&state, Nav::from(&me), at(ADD_USER, FieldErrors::one("role", msg), None), None).await;
        }
    };
    match app::users::add_user(&state.pool, me.name(), &form.name, role, &form.password, state.clock.now()).await {
        Ok(_) => Ok(Redirect::to("/admin").into_response()),
        Err(e) => refused(&state, &me, ADD_USER, e).await,
    }
}

/// The role-and-active form of one user.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct UpdateUserForm {
    role: String,
    #[serde(deserialize_with = "crate::domain::de::flexible_bool")]
    active: bool,
}

/// POST /admin/users/{id}: change role or deactivate; the user's sessions end.
pub async fn update_user(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<UpdateUserForm>,
) -> Result<Response, AppError> {
    let (anchor, title) = user_form(id, false);
    let role = match Role::parse(&form.role) {
        Ok(role) => role,
        Err(msg) => {
            let problems = at((&anchor, &title), FieldErrors::one("role", msg), None);
            return admin_page(&state, Nav::from(&me), problems, None).await;
        }
    };
    match app::users::update_user(
        &state.pool,
        me.name(),
        UserId(me.user.id),
        UserId(id),
        role,
        form.active,
        state.clock.now(),
    )
    .await
    {
        Ok(()) => Ok(Redirect::to("/admin").into_response()),
        Err(e) => refused(&state, &me, (&anchor, &title), e).await,
    }
}

/// A new password.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct PasswordForm {
    password: String,
}

/// POST /admin/users/{id}/password: set a new password; the user's sessions end.
pub async fn reset_password(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    FormBody(form): FormBody<PasswordForm>,
) -> Result<Response, AppError> {
    let (anchor, title) = user_form(id, true);
    match app::users::set_password(&state.pool, me.name(), Account::Id(UserId(id)), &form.password, state.clock.now())
        .await
    {
        Ok(_) => Ok(Redirect::to("/admin").into_response()),
        Err(e) => refused(&state, &me, (&anchor, &title), e).await,
    }
}

/// The new-token form.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct TokenForm {
    user: String,
    label: String,
    /// Days the token works; empty: the default (90).
    days: String,
}

/// POST /admin/tokens: the page shows the new token once.
pub async fn create_token(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(form): FormBody<TokenForm>,
) -> Result<Response, AppError> {
    let days = match parse_token_days(&form.days) {
        Ok(days) => days,
        Err(msg) => {
            return admin_page(&state, Nav::from(&me), at(ADD_TOKEN, FieldErrors::one("days", msg), None), None).await;
        }
    };
    let now = state.clock.now();
    match app::users::issue_token(&state.pool, me.name(), form.user.trim(), &form.label, days, now).await {
        Ok((_, token)) => admin_page(&state, Nav::from(&me), Problems::default(), Some(token)).await,
        Err(e) => refused(&state, &me, ADD_TOKEN, e).await,
    }
}

/// POST /admin/tokens/{id}/revoke
pub async fn revoke_token(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
) -> Result<Response, AppError> {
    app::users::withdraw_token(&state.pool, me.name(), id, state.clock.now()).await?;
    Ok(Redirect::to("/admin").into_response())
}

/// The site settings form (rates as percentages).
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct SettingsForm {
    plant_name: String,
    currency: String,
    hurdle_rate: String,
    tax_rate: String,
    depreciation_years: String,
    default_horizon_months: String,
    expert_multiplier: String,
    number_format: String,
    #[serde(deserialize_with = "crate::domain::de::flexible_bool")]
    one_person_approval: bool,
    time_zone: String,
    introduction_capacity: String,
}

/// POST /admin/settings: numbers are read in the format the form was shown in (the current one).
pub async fn update_settings(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(f): FormBody<SettingsForm>,
) -> Result<Response, AppError> {
    let mut e = FieldErrors::default();
    let shown = NumberFormat::current();
    let fraction = |e: &mut FieldErrors, field: &str, v: &str| -> String {
        if v.trim().is_empty() {
            return String::new();
        }
        e.take(field, shown.read_percent(v)).map(|d| shown.export(&d.to_string())).unwrap_or_else(|| "invalid".into())
    };
    let input = SiteSettingsInput {
        plant_name: f.plant_name,
        currency: f.currency,
        hurdle_rate: fraction(&mut e, "hurdle_rate", &f.hurdle_rate),
        tax_rate: fraction(&mut e, "tax_rate", &f.tax_rate),
        depreciation_years: f.depreciation_years,
        default_horizon_months: f.default_horizon_months,
        expert_multiplier: f.expert_multiplier,
        number_format: f.number_format,
        one_person_approval: f.one_person_approval,
        time_zone: f.time_zone,
        introduction_capacity: f.introduction_capacity,
    };
    let site = match SiteSettings::parse(&input, shown) {
        Ok(site) if e.is_empty() => site,
        Ok(_) => return admin_page(&state, Nav::from(&me), at(SETTINGS, e, None), None).await,
        Err(more) => {
            for x in more.0 {
                if e.get(&x.field).is_none() {
                    e.push(x.field, x.message);
                }
            }
            return admin_page(&state, Nav::from(&me), at(SETTINGS, e, None), None).await;
        }
    };
    match crate::app::site::change_settings(&state.pool, me.name(), &site, state.clock.now()).await {
        Ok(()) => Ok(Redirect::to("/admin").into_response()),
        Err(e @ (crate::app::Error::Invalid(_) | crate::app::Error::Conflict(_))) => {
            refused(&state, &me, SETTINGS, e).await
        }
        Err(other) => Err(other.into()),
    }
}

/// POST /admin/readiness: the weights of the readiness criteria, 0 to 10 each.
pub async fn update_weights(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(form): FormBody<HashMap<String, String>>,
) -> Result<Response, AppError> {
    let criteria = db::readiness::criteria(&state.pool).await?;
    let weights = match parse_weights(&criteria, &form) {
        Ok(w) => w,
        Err(e) => return admin_page(&state, Nav::from(&me), at(WEIGHTS, e, None), None).await,
    };
    let stamp = db::timestamp(state.clock.now());
    let mut tx = db::begin_write(&state.pool).await?;
    db::readiness::set_weights(&mut tx, &weights, me.name(), &stamp).await?;
    let detail: Vec<String> = criteria.iter().zip(&weights).map(|(c, (_, w))| format!("{}={w}", c.key)).collect();
    db::audit::record(&mut tx, &stamp, me.name(), "readiness.weights", "readiness", &detail.join(" ")).await?;
    tx.commit().await?;
    Ok(Redirect::to("/admin#readiness-weights").into_response())
}

#[derive(Template)]
#[template(path = "admin/audit.html")]
struct AuditPage {
    nav: Nav,
    entries: Vec<AuditEntry>,
}

/// GET /admin/audit: the newest 500 rows of the audit trail.
pub async fn audit(State(state): State<AppState>, CurrentUser(me): CurrentUser) -> Result<Html<String>, AppError> {
    let entries = db::audit::recent(&state.pool, 500).await?;
    Ok(Html(AuditPage { nav: Nav::from(&me), entries }.render()?))
}
