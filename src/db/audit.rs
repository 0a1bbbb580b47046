//! The audit trail: append-only rows of who did what, when (triggers refuse changes), each
//! hash-chained to the row before (`domain::chain`).

use super::DbResult;
use super::chain::{insert_chained, tip};
use crate::domain::chain::{AUDIT_LOG, audit_row};
use serde::Serialize;
use sqlx::{Row, SqliteConnection, SqlitePool};

/// One audit row.
#[derive(Debug, Clone, Serialize)]
pub struct AuditEntry {
    /// Row id.
    pub id: i64,
    /// RFC 3339 time.
    pub at: String,
    /// Who (user name, or `anonymous` / a CLI marker).
    pub actor: String,
    /// What, e.g. `sign_in`, `zone.create`.
    pub action: String,
    /// On what, e.g. `zone 3`.
    pub subject: String,
    /// Free detail (never a secret).
    pub detail: String,
}

/// Append one row, hash-chained to the last. Call it inside the caller's `db::begin_write`
/// transaction: the tip it links to must not move before the insert (were it to, the insert
/// would collide with the other row's id and fail rather than fork the chain).
pub async fn record(
    conn: &mut SqliteConnection,
    at: &str,
    actor: &str,
    action: &str,
    subject: &str,
    detail: &str,
) -> DbResult<()> {
    let mut tip = tip(conn, AUDIT_LOG).await?;
    insert_chained(conn, AUDIT_LOG, &mut tip, &[()], |(), id| audit_row(id, at, actor, action, subject, detail))
        .await?;
    Ok(())
}

/// The newest `limit` rows.
pub async fn recent(pool: &SqlitePool, limit: i64) -> DbResult<Vec<AuditEntry>> {
    let rows = sqlx::query("SELECT id, at, actor, action, subject, detail FROM audit_log ORDER BY id DESC LIMIT ?")
        .bind(limit)
        .fetch_all(pool)
        .await?;
    rows.iter()
        .map(|r| {
            Ok(AuditEntry {
                id: r.try_get("id")?,
                at: r.try_get("at")?,
                actor: r.try_get("actor")?,
                action: r.try_get("action")?,
                subject: r.try_get("subject")?,
                detail: r.try_get("detail")?,
            })
        })
        .collect()
}
