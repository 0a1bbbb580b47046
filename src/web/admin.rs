//! Admin pages: users and roles, API tokens, site settings and the audit trail.

use super::auth::{CurrentUser, Nav};
use super::{AppError, AppState, FormBody};
use crate::auth::{Role, hash_password, hash_secret, new_secret, parse_new_password};
use crate::db::{self, TokenRow, User, audit::AuditEntry};
use crate::domain::{Criterion, FieldErrors, NumberFormat, SiteSettings, SiteSettingsInput, parse_weights};
use askama::Template;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::response::{Html, IntoResponse, Redirect, Response};
use serde::Deserialize;
use sqlx::SqlitePool;
use std::collections::HashMap;

#[derive(Template)]
#[template(path = "admin/page.html")]
struct AdminPage {
    nav: Nav,
    users: Vec<User>,
    tokens: Vec<TokenRow>,
    site: SiteSettings,
    roles: [Role; 4],
    errors: FieldErrors,
    notice: Option<String>,
    new_token: Option<String>,
    criteria: Vec<Criterion>,
    formats: [NumberFormat; 2],
}

async fn admin_page(
    state: &AppState,
    nav: Nav,
    errors: FieldErrors,
    notice: Option<String>,
    new_token: Option<String>,
) -> Result<Response, AppError> {
    let page = AdminPage {
        nav,
        users: db::list_users(&state.pool).await?,
        tokens: db::list_tokens(&state.pool).await?,
        site: db::get_site(&state.pool).await?,
        roles: Role::ALL,
        errors,
        notice,
        new_token,
        criteria: db::readiness::criteria(&state.pool).await?,
        formats: NumberFormat::SITE,
    };
    let status = if page.errors.is_empty() { StatusCode::OK } else { StatusCode::UNPROCESSABLE_ENTITY };
    Ok((status, Html(page.render()?)).into_response())
}

/// GET /admin
pub async fn page(State(state): State<AppState>, CurrentUser(me): CurrentUser) -> Result<Response, AppError> {
    admin_page(&state, Nav::from(&me), FieldErrors::default(), None, None).await
}

/// The add-user form.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct AddUserForm {
    name: String,
    role: String,
    password: String,
}

fn parse_user_name(value: &str) -> Result<String, String> {
    let v = value.trim();
    let ok =
        (2..=40).contains(&v.len()) && v.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | '_'));
    if ok { Ok(v.to_string()) } else { Err("2 to 40 letters, digits, dots, dashes or underscores".into()) }
}

/// Create a user (shared by the admin page and the CLI); `password` was checked by
/// [`parse_new_password`]. Returns the id.
pub async fn create_user(
    pool: &SqlitePool,
    name: &str,
    role: Role,
    password: &str,
    actor: &str,
) -> Result<i64, AppError> {
    let hash = hash_password(password).map_err(|e| AppError::Internal(e.into()))?;
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    let id = db::insert_user(&mut tx, name, role, &hash, &at, actor).await?;
    db::audit::record(&mut tx, &at, actor, "user.create", &format!("user {id}"), &format!("{name} as {role}")).await?;
    tx.commit().await?;
    Ok(id)
}

/// POST /admin/users
pub async fn add_user(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(form): FormBody<AddUserForm>,
) -> Result<Response, AppError> {
    let mut e = FieldErrors::default();
    let name = e.take("name", parse_user_name(&form.name));
    let role = e.take("role", Role::parse(&form.role));
    let password = e.take("password", parse_new_password(&form.password));
    let (Some(name), Some(role), Some(password)) = (name, role, password) else {
        return admin_page(&state, Nav::from(&me), e, None, None).await;
    };
    match create_user(&state.pool, &name, role, &password, me.name()).await {
        Ok(_) => Ok(Redirect::to("/admin").into_response()),
        Err(AppError::Conflict(msg)) => {
            e.push("name", msg);
            admin_page(&state, Nav::from(&me), e, None, None).await
        }
        Err(other) => Err(other),
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
    let mut e = FieldErrors::default();
    let Some(role) = e.take("role", Role::parse(&form.role)) else {
        return admin_page(&state, Nav::from(&me), e, None, None).await;
    };
    if id == me.user.id && (role != Role::Admin || !form.active) {
        let msg = "you cannot remove your own admin role or deactivate yourself".to_string();
        return admin_page(&state, Nav::from(&me), e, Some(msg), None).await;
    }
    let mut tx = db::begin_write(&state.pool).await?;
    let at = db::now();
    let before = db::get_user(&mut tx, id).await?;
    db::update_user(&mut tx, id, role, form.active, &at, me.name()).await?;
    let detail =
        format!("{}: role {} -> {}, active {} -> {}", before.name, before.role, role, before.active, form.active);
    db::audit::record(&mut tx, &at, me.name(), "user.update", &format!("user {id}"), &detail).await?;
    tx.commit().await?;
    Ok(Redirect::to("/admin").into_response())
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
    let mut e = FieldErrors::default();
    let Some(password) = e.take("password", parse_new_password(&form.password)) else {
        return admin_page(&state, Nav::from(&me), e, None, None).await;
    };
    let hash = hash_password(&password).map_err(|e| AppError::Internal(e.into()))?;
    let mut tx = db::begin_write(&state.pool).await?;
    let at = db::now();
    let user = db::get_user(&mut tx, id).await?;
    db::set_password(&mut tx, &user.name, &hash, &at, me.name()).await?;
    db::audit::record(&mut tx, &at, me.name(), "user.password", &format!("user {id}"), &user.name).await?;
    tx.commit().await?;
    Ok(Redirect::to("/admin").into_response())
}

/// Create an API token (shared by the admin page and the CLI): the token is returned once.
pub async fn issue_token(
    pool: &SqlitePool,
    user_name: &str,
    label: &str,
    actor: &str,
) -> Result<(i64, String), AppError> {
    let token = new_secret("plt_");
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    let id = db::insert_token(&mut tx, user_name, label, &hash_secret(token.expose()), &at, actor).await?;
    db::audit::record(
        &mut tx,
        &at,
        actor,
        "token.create",
        &format!("token {id}"),
        &format!("for {user_name}: {label}"),
    )
    .await?;
    tx.commit().await?;
    Ok((id, token.expose().to_string()))
}

/// Revoke a token (shared by the admin page and the CLI).
pub async fn withdraw_token(pool: &SqlitePool, id: i64, actor: &str) -> Result<(), AppError> {
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    db::revoke_token(&mut tx, id, &at, actor).await?;
    db::audit::record(&mut tx, &at, actor, "token.revoke", &format!("token {id}"), "").await?;
    tx.commit().await?;
    Ok(())
}

/// The new-token form.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct TokenForm {
    user: String,
    label: String,
}

/// POST /admin/tokens: the page shows the new token once.
pub async fn create_token(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    FormBody(form): FormBody<TokenForm>,
) -> Result<Response, AppError> {
    let mut e = FieldErrors::default();
    let label = e.take("label", crate::domain::CaseHeader::parse_label(&form.label));
    let Some(label) = label else { return admin_page(&state, Nav::from(&me), e, None, None).await };
    match issue_token(&state.pool, form.user.trim(), &label, me.name()).await {
        Ok((_, token)) => admin_page(&state, Nav::from(&me), e, None, Some(token)).await,
        Err(AppError::NotFound(_)) => {
            e.push("user", "no user with this name");
            admin_page(&state, Nav::from(&me), e, None, None).await
        }
        Err(other) => Err(other),
    }
}

/// POST /admin/tokens/{id}/revoke
pub async fn revoke_token(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
) -> Result<Response, AppError> {
    withdraw_token(&state.pool, id, me.name()).await?;
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
    };
    let site = match SiteSettings::parse(&input, shown) {
        Ok(site) if e.is_empty() => site,
        Ok(_) => return admin_page(&state, Nav::from(&me), e, None, None).await,
        Err(more) => {
            for x in more.0 {
                if e.get(&x.field).is_none() {
                    e.push(x.field, x.message);
                }
            }
            return admin_page(&state, Nav::from(&me), e, None, None).await;
        }
    };
    match crate::app::site::change_settings(&state.pool, me.name(), &site).await {
        Ok(()) => Ok(Redirect::to("/admin").into_response()),
        Err(crate::app::Error::Invalid(fields)) => admin_page(&state, Nav::from(&me), fields, None, None).await,
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
        Err(e) => return admin_page(&state, Nav::from(&me), e, None, None).await,
    };
    let mut tx = db::begin_write(&state.pool).await?;
    db::readiness::set_weights(&mut tx, &weights, me.name()).await?;
    let detail: Vec<String> = criteria.iter().zip(&weights).map(|(c, (_, w))| format!("{}={w}", c.key)).collect();
    db::audit::record(&mut tx, &db::now(), me.name(), "readiness.weights", "readiness", &detail.join(" ")).await?;
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
