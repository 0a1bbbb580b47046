//! Accounts and API tokens: the admin page and the command line share these.

use super::{Actor, AppResult, Error, invalid};
use crate::auth::{Role, hash_password, hash_secret, new_secret, parse_new_password};
use crate::db;
use crate::domain::{FieldErrors, UserId, check_token_days, parse_user_name};
use sqlx::SqlitePool;
use time::OffsetDateTime;
use time::format_description::well_known::Rfc3339;

async fn hashed(password: &str) -> AppResult<String> {
    let password = parse_new_password(password).map_err(|msg| invalid("password", msg))?;
    super::cpu::password(move || hash_password(&password)).await?.map_err(|e| Error::Internal(e.into()))
}

/// Create a user. The name and password rules are the same whoever asks (page, CLI, first
/// run); a taken name is a field error on `name`.
pub async fn add_user(
    pool: &SqlitePool,
    actor: Actor<'_>,
    name: &str,
    role: Role,
    password: &str,
    now: OffsetDateTime,
) -> AppResult<UserId> {
    let mut e = FieldErrors::default();
    let name = e.take("name", parse_user_name(name));
    let hash = e.take("password", parse_new_password(password).map(|_| ()));
    let (Some(name), Some(())) = (name, hash) else { return Err(Error::Invalid(e)) };
    let hash = hashed(password).await?;
    let mut tx = db::begin_write(pool).await?;
    let at = db::timestamp(now);
    let id = match db::insert_user(&mut tx, &name, role, &hash, &at, actor).await {
        Err(db::DbError::Conflict(msg)) => return Err(invalid("name", msg)),
        other => other?,
    };
    db::audit::record(&mut tx, &at, actor, "user.create", &format!("user {id}"), &format!("{name} as {role}")).await?;
    tx.commit().await?;
    Ok(UserId(id))
}

/// Revoke every live token of user `id` (`name`) in the caller's transaction, with an audit row
/// each; returns what the user's own audit row adds (`""` when there were none).
async fn end_tokens(
    tx: &mut sqlx::SqliteConnection,
    id: i64,
    name: &str,
    at: &str,
    actor: Actor<'_>,
    why: &str,
) -> AppResult<String> {
    let ended = db::revoke_user_tokens(tx, id, at, actor).await?;
    for token in &ended {
        db::audit::record(&mut *tx, at, actor, "token.revoke", &format!("token {token}"), &format!("of {name}: {why}"))
            .await?;
    }
    Ok(match ended.as_slice() {
        [] => String::new(),
        ids => {
            let ids: Vec<String> = ids.iter().map(|t| format!("token {t}")).collect();
            format!("; revoked {}", ids.join(", "))
        }
    })
}

/// Change a user's role or active flag; the user's sessions end, and a deactivation revokes
/// their tokens too (in the same transaction: a later reactivation does not bring them back).
/// Nobody removes their own admin role or deactivates themselves (`me`: the acting user's id).
pub async fn update_user(
    pool: &SqlitePool,
    actor: Actor<'_>,
    me: UserId,
    UserId(id): UserId,
    role: Role,
    active: bool,
    now: OffsetDateTime,
) -> AppResult<()> {
    if id == me.0 && (role != Role::Admin || !active) {
        return Err(Error::Conflict("you cannot remove your own admin role or deactivate yourself".into()));
    }
    let mut tx = db::begin_write(pool).await?;
    let at = db::timestamp(now);
    let before = db::get_user(&mut tx, id).await?;
    db::update_user(&mut tx, id, role, active, &at, actor).await?;
    let mut detail = format!(
        "{}: role {} -> {}, active {} -> {}; sessions ended",
        before.name, before.role, role, before.active, active
    );
    if before.active && !active {
        detail.push_str(&end_tokens(&mut tx, id, &before.name, &at, actor, "user deactivated").await?);
    }
    db::audit::record(&mut tx, &at, actor, "user.update", &format!("user {id}"), &detail).await?;
    tx.commit().await?;
    Ok(())
}

/// Which account a password change is for: by id (the admin page) or name (the CLI).
pub enum Account<'a> {
    /// By row id.
    Id(UserId),
    /// By user name.
    Name(&'a str),
}

/// Set a new password; the user's sessions end and their tokens are revoked, in the same
/// transaction (whoever knew the old password may have made a token with it). Returns the
/// user's name.
pub async fn set_password(
    pool: &SqlitePool,
    actor: Actor<'_>,
    account: Account<'_>,
    password: &str,
    now: OffsetDateTime,
) -> AppResult<String> {
    let hash = hashed(password).await?;
    let mut tx = db::begin_write(pool).await?;
    let at = db::timestamp(now);
    let name = match account {
        Account::Id(UserId(id)) => db::get_user(&mut tx, id).await?.name,
        Account::Name(name) => name.to_string(),
    };
    let id = db::set_password(&mut tx, &name, &hash, &at, actor).await?;
    let tokens = end_tokens(&mut tx, id, &name, &at, actor, "password changed").await?;
    let detail = format!("{name}; sessions ended{tokens}");
    db::audit::record(&mut tx, &at, actor, "user.password", &format!("user {id}"), &detail).await?;
    tx.commit().await?;
    Ok(name)
}

/// Create an API token for `user_name` that works for `days` (1 to 365) from `now`: the token
/// is returned once, only its hash is kept. `actor` is recorded as its issuer; when that is
/// not the owner, every entry the token books says so.
pub async fn issue_token(
    pool: &SqlitePool,
    actor: Actor<'_>,
    user_name: &str,
    label: &str,
    days: u32,
    now: OffsetDateTime,
) -> AppResult<(i64, String)> {
    let mut e = FieldErrors::default();
    let label = e.take("label", crate::domain::CaseHeader::parse_label(label));
    let days = e.take("days", check_token_days(days));
    let (Some(label), Some(days)) = (label, days) else { return Err(Error::Invalid(e)) };
    let expires = now + time::Duration::days(i64::from(days));
    let rfc3339 = |t: time::OffsetDateTime| t.format(&Rfc3339).map_err(|e| Error::Internal(e.into()));
    let (at, expires_at) = (rfc3339(now)?, rfc3339(expires)?);
    let token = new_secret("plt_");
    let hash = hash_secret(token.expose());
    let mut tx = db::begin_write(pool).await?;
    let new = db::NewToken { hash: &hash, label: &label, at: &at, expires_at: &expires_at };
    let behalf = match crate::domain::issued_on_behalf(actor, user_name) {
        Some(issuer) => format!("; issued by {issuer} for someone else: entries it books say so"),
        None => String::new(),
    };
    let id = match db::insert_token(&mut tx, user_name, &new, actor).await {
        Err(db::DbError::NotFound(_)) => return Err(invalid("user", "no user with this name")),
        other => other?,
    };
    db::audit::record(
        &mut tx,
        &at,
        actor,
        "token.create",
        &format!("token {id}"),
        &format!("for {user_name}: {label}; expires {expires_at}{behalf}"),
    )
    .await?;
    tx.commit().await?;
    Ok((id, token.expose().to_string()))
}

/// Revoke a token.
pub async fn withdraw_token(pool: &SqlitePool, actor: Actor<'_>, id: i64, now: OffsetDateTime) -> AppResult<()> {
    let mut tx = db::begin_write(pool).await?;
    let at = db::timestamp(now);
    db::revoke_token(&mut tx, id, &at, actor).await?;
    db::audit::record(&mut tx, &at, actor, "token.revoke", &format!("token {id}"), "").await?;
    tx.commit().await?;
    Ok(())
}
