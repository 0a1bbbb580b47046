//! Users, sessions and API tokens.

use super::{DbError, DbResult, parsed, unique_as};
use crate::auth::Role;
use serde::Serialize;
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

/// A stored user (without the password hash).
#[derive(Debug, Clone, Serialize)]
pub struct User {
    /// Row id.
    pub id: i64,
    /// Sign-in name.
    pub name: String,
    /// Role.
    pub role: Role,
    /// Whether the account may sign in.
    pub active: bool,
    /// Last change time.
    pub updated_at: String,
    /// Last changed by.
    pub updated_by: String,
}

fn user_from(row: &SqliteRow) -> DbResult<User> {
    Ok(User {
        id: row.try_get("id")?,
        name: row.try_get("name")?,
        role: parsed("role", row.try_get("role")?, Role::parse)?,
        active: row.try_get::<i64, _>("active")? != 0,
        updated_at: row.try_get("updated_at")?,
        updated_by: row.try_get("updated_by")?,
    })
}

/// Every user, by name.
pub async fn list_users(pool: &SqlitePool) -> DbResult<Vec<User>> {
    let rows = sqlx::query("SELECT id, name, role, active, updated_at, updated_by FROM users ORDER BY name")
        .fetch_all(pool)
        .await?;
    rows.iter().map(user_from).collect()
}

/// A user and their password hash, by name (case-insensitive).
pub async fn user_for_login(pool: &SqlitePool, name: &str) -> DbResult<Option<(User, String)>> {
    let row =
        sqlx::query("SELECT id, name, role, active, updated_at, updated_by, password_hash FROM users WHERE name = ?")
            .bind(name)
            .fetch_optional(pool)
            .await?;
    row.map(|r| Ok((user_from(&r)?, r.try_get("password_hash")?))).transpose()
}

/// One user by id.
pub async fn get_user(conn: &mut SqliteConnection, id: i64) -> DbResult<User> {
    let row = sqlx::query("SELECT id, name, role, active, updated_at, updated_by FROM users WHERE id = ?")
        .bind(id)
        .fetch_optional(conn)
        .await?;
    row.as_ref().map(user_from).transpose()?.ok_or(DbError::NotFound("user"))
}

/// Create a user with an already hashed password. The id is one above the highest ever
/// given (`user_ids`, migration 0007), so it is never one a removed user had.
pub async fn insert_user(
    conn: &mut SqliteConnection,
    name: &str,
    role: Role,
    hash: &str,
    at: &str,
    actor: &str,
) -> DbResult<i64> {
    sqlx::query_scalar(
        "INSERT INTO users (id, name, role, password_hash, created_at, created_by, updated_at, updated_by)
         VALUES ((SELECT last + 1 FROM user_ids), ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(name)
    .bind(role.as_str())
    .bind(hash)
    .bind(at)
    .bind(actor)
    .bind(at)
    .bind(actor)
    .fetch_one(conn)
    .await
    .map_err(|e| match &e {
        // The `users_no_replace` trigger answers before the UNIQUE index does.
        sqlx::Error::Database(db) if db.message().contains("already exists") => {
            DbError::Conflict(format!("a user named {name} already exists"))
        }
        _ => unique_as(e, format!("a user named {name} already exists")),
    })
}

/// Change role and active flag; ends the user's sessions when deactivated or re-roled so the
/// change takes effect at once.
pub async fn update_user(
    conn: &mut SqliteConnection,
    id: i64,
    role: Role,
    active: bool,
    at: &str,
    actor: &str,
) -> DbResult<()> {
    let done = sqlx::query("UPDATE users SET role = ?, active = ?, updated_at = ?, updated_by = ? WHERE id = ?")
        .bind(role.as_str())
        .bind(i64::from(active))
        .bind(at)
        .bind(actor)
        .bind(id)
        .execute(&mut *conn)
        .await?;
    if done.rows_affected() == 0 {
        return Err(DbError::NotFound("user"));
    }
    sqlx::query("DELETE FROM sessions WHERE user_id = ?").bind(id).execute(conn).await?;
    Ok(())
}

/// Replace a user's password hash and end their sessions.
pub async fn set_password(conn: &mut SqliteConnection, name: &str, hash: &str, at: &str, actor: &str) -> DbResult<i64> {
    let id: Option<i64> = sqlx::query_scalar(
        "UPDATE users SET password_hash = ?, updated_at = ?, updated_by = ? WHERE name = ? RETURNING id",
    )
    .bind(hash)
    .bind(at)
    .bind(actor)
    .bind(name)
    .fetch_optional(&mut *conn)
    .await?;
    let id = id.ok_or(DbError::NotFound("user"))?;
    sqlx::query("DELETE FROM sessions WHERE user_id = ?").bind(id).execute(conn).await?;
    Ok(id)
}

/// How many users exist (the first-run check).
pub async fn count_users(pool: &SqlitePool) -> DbResult<i64> {
    Ok(sqlx::query_scalar("SELECT COUNT(*) FROM users").fetch_one(pool).await?)
}

/// A session as stored: who, created and last seen (RFC 3339).
pub struct SessionRow {
    /// The signed-in user.
    pub user: User,
    /// When the session began.
    pub created_at: String,
    /// Last request seen.
    pub last_seen_at: String,
}

/// Store a new session under the hash of its id.
pub async fn insert_session(pool: &SqlitePool, id_hash: &str, user_id: i64, at: &str) -> DbResult<()> {
    sqlx::query("INSERT INTO sessions (id_hash, user_id, created_at, last_seen_at) VALUES (?, ?, ?, ?)")
        .bind(id_hash)
        .bind(user_id)
        .bind(at)
        .bind(at)
        .execute(pool)
        .await?;
    Ok(())
}

/// The session with this id hash, if any, with its active user.
pub async fn get_session(pool: &SqlitePool, id_hash: &str) -> DbResult<Option<SessionRow>> {
    let row = sqlx::query(
        "SELECT u.id, u.name, u.role, u.active, u.updated_at, u.updated_by, s.created_at AS s_created, s.last_seen_at
         FROM sessions s JOIN users u ON u.id = s.user_id WHERE s.id_hash = ? AND u.active = 1",
    )
    .bind(id_hash)
    .fetch_optional(pool)
    .await?;
    row.map(|r| {
        Ok(SessionRow {
            user: user_from(&r)?,
            created_at: r.try_get("s_created")?,
            last_seen_at: r.try_get("last_seen_at")?,
        })
    })
    .transpose()
}

/// Note activity on a session (idle expiry counts from here).
pub async fn touch_session(pool: &SqlitePool, id_hash: &str, at: &str) -> DbResult<()> {
    sqlx::query("UPDATE sessions SET last_seen_at = ? WHERE id_hash = ?").bind(at).bind(id_hash).execute(pool).await?;
    Ok(())
}

/// End one session.
pub async fn delete_session(pool: &SqlitePool, id_hash: &str) -> DbResult<()> {
    sqlx::query("DELETE FROM sessions WHERE id_hash = ?").bind(id_hash).execute(pool).await?;
    Ok(())
}

/// A stored API token (never the token itself).
#[derive(Debug, Clone, Serialize)]
pub struct TokenRow {
    /// Row id, used to revoke.
    pub id: i64,
    /// Owner's name.
    pub user_name: String,
    /// Owner's role (the token carries it).
    pub role: Role,
    /// What the token is for.
    pub label: String,
    /// Created.
    pub created_at: String,
    /// Created by.
    pub created_by: String,
    /// Revoked, if so.
    pub revoked_at: Option<String>,
    /// When it stops working (RFC 3339); `None` only for a row written behind the app's back,
    /// and such a token is refused.
    pub expires_at: Option<String>,
    /// The last request it authenticated (to the minute), if any.
    pub last_used_at: Option<String>,
}

/// A token to store: its hash, label and expiry, made `at` by `actor`.
pub struct NewToken<'a> {
    /// SHA-256 of the token.
    pub hash: &'a str,
    /// What it is for.
    pub label: &'a str,
    /// When it was made (RFC 3339).
    pub at: &'a str,
    /// When it stops working (RFC 3339).
    pub expires_at: &'a str,
}

/// Store a token hash for a user (by name); returns the token id. `actor`, kept as
/// `created_by`, is the token's issuer.
pub async fn insert_token(
    conn: &mut SqliteConnection,
    user_name: &str,
    t: &NewToken<'_>,
    actor: &str,
) -> DbResult<i64> {
    let user_id: Option<i64> =
        sqlx::query_scalar("SELECT id FROM users WHERE name = ?").bind(user_name).fetch_optional(&mut *conn).await?;
    let user_id = user_id.ok_or(DbError::NotFound("user"))?;
    Ok(sqlx::query_scalar(
        "INSERT INTO api_tokens (user_id, label, token_hash, created_at, created_by, expires_at)
         VALUES (?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(user_id)
    .bind(t.label)
    .bind(t.hash)
    .bind(t.at)
    .bind(actor)
    .bind(t.expires_at)
    .fetch_one(conn)
    .await?)
}

/// Revoke a token; revoking twice is a conflict.
pub async fn revoke_token(conn: &mut SqliteConnection, id: i64, at: &str, actor: &str) -> DbResult<()> {
    let done = sqlx::query("UPDATE api_tokens SET revoked_at = ?, revoked_by = ? WHERE id = ? AND revoked_at IS NULL")
        .bind(at)
        .bind(actor)
        .bind(id)
        .execute(conn)
        .await?;
    if done.rows_affected() == 0 {
        return Err(DbError::Conflict(format!("token {id} does not exist or is already revoked")));
    }
    Ok(())
}

/// Revoke every live token of a user (a password change, a deactivation); returns their ids.
pub async fn revoke_user_tokens(
    conn: &mut SqliteConnection,
    user_id: i64,
    at: &str,
    actor: &str,
) -> DbResult<Vec<i64>> {
    Ok(sqlx::query_scalar(
        "UPDATE api_tokens SET revoked_at = ?, revoked_by = ? WHERE user_id = ? AND revoked_at IS NULL RETURNING id",
    )
    .bind(at)
    .bind(actor)
    .bind(user_id)
    .fetch_all(conn)
    .await?)
}

/// Every token, newest first.
pub async fn list_tokens(pool: &SqlitePool) -> DbResult<Vec<TokenRow>> {
    let rows = sqlx::query(
        "SELECT t.id, u.name, u.role, t.label, t.created_at, t.created_by, t.revoked_at, t.expires_at, t.last_used_at
         FROM api_tokens t JOIN users u ON u.id = t.user_id ORDER BY t.id DESC",
    )
    .fetch_all(pool)
    .await?;
    rows.iter()
        .map(|r| {
            Ok(TokenRow {
                id: r.try_get("id")?,
                user_name: r.try_get("name")?,
                role: parsed("role", r.try_get("role")?, Role::parse)?,
                label: r.try_get("label")?,
                created_at: r.try_get("created_at")?,
                created_by: r.try_get("created_by")?,
                revoked_at: r.try_get("revoked_at")?,
                expires_at: r.try_get("expires_at")?,
                last_used_at: r.try_get("last_used_at")?,
            })
        })
        .collect()
}

/// An unrevoked token of an active user, as a request presents it.
#[derive(Debug, Clone)]
pub struct TokenUse {
    /// The token's id.
    pub id: i64,
    /// Its owner.
    pub user: User,
    /// Who made it (`created_by`).
    pub issued_by: String,
    /// When it stops working (RFC 3339); `None` is refused.
    pub expires_at: Option<String>,
    /// Its last use, if any.
    pub last_used_at: Option<String>,
}

/// The unrevoked token with this hash and its active owner; expiry is the caller's to check
/// (against the injectable clock, and so that an expired token can be told from an unknown one).
pub async fn token_use(pool: &SqlitePool, hash: &str) -> DbResult<Option<TokenUse>> {
    let row = sqlx::query(
        "SELECT u.id, u.name, u.role, u.active, u.updated_at, u.updated_by,
                t.id AS token_id, t.created_by AS issued_by, t.expires_at, t.last_used_at
         FROM api_tokens t JOIN users u ON u.id = t.user_id
         WHERE t.token_hash = ? AND t.revoked_at IS NULL AND u.active = 1",
    )
    .bind(hash)
    .fetch_optional(pool)
    .await?;
    row.map(|r| {
        Ok(TokenUse {
            id: r.try_get("token_id")?,
            user: user_from(&r)?,
            issued_by: r.try_get("issued_by")?,
            expires_at: r.try_get("expires_at")?,
            last_used_at: r.try_get("last_used_at")?,
        })
    })
    .transpose()
}

/// Note a token's use (the admin page shows it).
pub async fn touch_token(pool: &SqlitePool, id: i64, at: &str) -> DbResult<()> {
    sqlx::query("UPDATE api_tokens SET last_used_at = ? WHERE id = ?").bind(at).bind(id).execute(pool).await?;
    Ok(())
}
