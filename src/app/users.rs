//! Accounts and API tokens: the admin page and the command line share these.

use super::{Actor, AppResult, Error, invalid};
use crate::auth::{Role, hash_password, hash_secret, new_secret, parse_new_password};
use crate::db;
use crate::domain::{FieldErrors, UserId, parse_user_name};
use sqlx::SqlitePool;

fn hashed(password: &str) -> AppResult<String> {
    let password = parse_new_password(password).map_err(|msg| invalid("password", msg))?;
    hash_password(&password).map_err(|e| Error::Internal(e.into()))
}

/// Create a user. The name and password rules are the same whoever asks (page, CLI, first
/// run); a taken name is a field error on `name`.
pub async fn add_user(
    pool: &SqlitePool,
    actor: Actor<'_>,
    name: &str,
    role: Role,
    password: &str,
) -> AppResult<UserId> {
    let mut e = FieldErrors::default();
    let name = e.take("name", parse_user_name(name));
    let hash = e.take("password", parse_new_password(password).map(|_| ()));
    let (Some(name), Some(())) = (name, hash) else { return Err(Error::Invalid(e)) };
    let hash = hashed(password)?;
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    let id = match db::insert_user(&mut tx, &name, role, &hash, &at, actor).await {
        Err(db::DbError::Conflict(msg)) => return Err(invalid("name", msg)),
        other => other?,
    };
    db::audit::record(&mut tx, &at, actor, "user.create", &format!("user {id}"), &format!("{name} as {role}")).await?;
    tx.commit().await?;
    Ok(UserId(id))
}

/// Change a user's role or active flag; the user's sessions end. Nobody removes their own
/// admin role or deactivates themselves (`me`: the acting user's id).
pub async fn update_user(
    pool: &SqlitePool,
    actor: Actor<'_>,
    me: UserId,
    UserId(id): UserId,
    role: Role,
    active: bool,
) -> AppResult<()> {
    if id == me.0 && (role != Role::Admin || !active) {
        return Err(Error::Conflict("you cannot remove your own admin role or deactivate yourself".into()));
    }
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    let before = db::get_user(&mut tx, id).await?;
    db::update_user(&mut tx, id, role, active, &at, actor).await?;
    let detail = format!("{}: role {} -> {}, active {} -> {}", before.name, before.role, role, before.active, active);
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

/// Set a new password; the user's sessions end. Returns the user's name.
pub async fn set_password(
    pool: &SqlitePool,
    actor: Actor<'_>,
    account: Account<'_>,
    password: &str,
) -> AppResult<String> {
    let hash = hashed(password)?;
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    let name = match account {
        Account::Id(UserId(id)) => db::get_user(&mut tx, id).await?.name,
        Account::Name(name) => name.to_string(),
    };
    let id = db::set_password(&mut tx, &name, &hash, &at, actor).await?;
    db::audit::record(&mut tx, &at, actor, "user.password", &format!("user {id}"), &name).await?;
    tx.commit().await?;
    Ok(name)
}

/// Create an API token for `user_name`: the token is returned once, only its hash is kept.
pub async fn issue_token(
    pool: &SqlitePool,
    actor: Actor<'_>,
    user_name: &str,
    label: &str,
) -> AppResult<(i64, String)> {
    let label = crate::domain::CaseHeader::parse_label(label).map_err(|msg| invalid("label", msg))?;
    let token = new_secret("plt_");
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    let id = match db::insert_token(&mut tx, user_name, &label, &hash_secret(token.expose()), &at, actor).await {
        Err(db::DbError::NotFound(_)) => return Err(invalid("user", "no user with this name")),
        other => other?,
    };
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

/// Revoke a token.
pub async fn withdraw_token(pool: &SqlitePool, actor: Actor<'_>, id: i64) -> AppResult<()> {
    let mut tx = db::begin_write(pool).await?;
    let at = db::now();
    db::revoke_token(&mut tx, id, &at, actor).await?;
    db::audit::record(&mut tx, &at, actor, "token.revoke", &format!("token {id}"), "").await?;
    tx.commit().await?;
    Ok(())
}
