//! The audit trail: append-only rows of who did what, when (triggers refuse changes), each
//! hash-chained to the row before (`domain::chain`).

use super::chain::{insert_chained, tip};
use super::{DbResult, decimal};
use crate::domain::chain::{AUDIT_LOG, audit_row};
use crate::domain::{AuditFacts, EntryFacts};
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
    /// What the subject names today (zone code, case version, entry), for the sentence.
    #[serde(skip)]
    pub facts: AuditFacts,
}

impl AuditEntry {
    /// The row as a plain sentence (`domain::audit_sentence`).
    pub fn sentence(&self) -> String {
        crate::domain::audit_sentence(&self.actor, &self.action, &self.subject, &self.detail, &self.facts)
    }
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

/// The newest `limit` rows, each with the facts its sentence names: the zone of a zone, case,
/// entry or import subject, a case's version, an entry's month, quantity, unit and item. The
/// subject's id is read from its text (`entry 12`) and looked up by primary key.
pub async fn recent(pool: &SqlitePool, limit: i64) -> DbResult<Vec<AuditEntry>> {
    let rows = sqlx::query(
        "WITH a AS (
             SELECT id, at, actor, action, subject, detail,
                    CASE WHEN subject GLOB '* [0-9]*' THEN substr(subject, 1, instr(subject, ' ') - 1) END AS what,
                    CAST(substr(subject, instr(subject, ' ') + 1) AS INTEGER) AS n
             FROM audit_log ORDER BY id DESC LIMIT ?)
         SELECT a.id, a.at, a.actor, a.action, a.subject, a.detail,
                COALESCE(zz.code, zc.code, ze.code, zi.code) AS zone_code, cv.version,
                e.kind, e.period, e.quantity, e.amount, d.unit, COALESCE(d.label, c.label) AS item
         FROM a
         LEFT JOIN zones zz ON a.what = 'zone' AND zz.id = a.n
         LEFT JOIN case_versions cv ON a.what = 'case' AND cv.id = a.n
         LEFT JOIN zones zc ON zc.id = cv.zone_id
         LEFT JOIN ledger_entries e ON a.what = 'entry' AND e.id = a.n
         LEFT JOIN zones ze ON ze.id = e.zone_id
         LEFT JOIN benefit_drivers d ON d.id = e.driver_id
         LEFT JOIN cost_items c ON c.id = e.cost_id
         LEFT JOIN ledger_imports li ON a.what = 'import' AND li.id = a.n
         LEFT JOIN zones zi ON zi.id = li.zone_id
         ORDER BY a.id DESC",
    )
    .bind(limit)
    .fetch_all(pool)
    .await?;
    rows.iter()
        .map(|r| {
            let entry = match r.try_get::<Option<String>, _>("kind")? {
                Some(kind) => Some(EntryFacts {
                    saving: kind == "saving",
                    period: r.try_get("period")?,
                    quantity: r
                        .try_get::<Option<String>, _>("quantity")?
                        .map(|q| decimal("quantity", q))
                        .transpose()?,
                    unit: r.try_get("unit")?,
                    amount: decimal("amount", r.try_get("amount")?)?,
                    item: r.try_get("item")?,
                }),
                None => None,
            };
            Ok(AuditEntry {
                id: r.try_get("id")?,
                at: r.try_get("at")?,
                actor: r.try_get("actor")?,
                action: r.try_get("action")?,
                subject: r.try_get("subject")?,
                detail: r.try_get("detail")?,
                facts: AuditFacts {
                    zone: r.try_get("zone_code")?,
                    version: r.try_get::<Option<i64>, _>("version")?.and_then(|v| u32::try_from(v).ok()),
                    entry,
                },
            })
        })
        .collect()
}
