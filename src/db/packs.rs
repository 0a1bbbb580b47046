//! Decision packs (migration 0015): append-only rows, each a stored snapshot with the database
//! state it was made from and its content hash (`domain::pack::pack_hash`, checked by `verify`).

use super::chain::{Problem, tip};
use super::{DbError, DbResult, parsed};
use crate::domain::chain::LEDGER_ENTRIES;
use crate::domain::pack::{DbState, PACK_LIST_MAX, Pack, PackKind, Snapshot, pack_hash};
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

/// The database state a pack is made from, read on `conn`.
pub async fn state_in(conn: &mut SqliteConnection) -> DbResult<DbState> {
    let t = tip(conn, LEDGER_ENTRIES).await?;
    let (entries, generation): (i64, i64) = sqlx::query_as(
        "SELECT (SELECT COUNT(*) FROM ledger_entries),
                (SELECT n FROM site_changes WHERE id = 1) + (SELECT COALESCE(SUM(n), 0) FROM zone_changes)",
    )
    .fetch_one(&mut *conn)
    .await?;
    Ok(DbState { ledger_tip_id: t.id, ledger_tip_hash: t.hash, ledger_entries: entries, generation })
}

/// [`state_in`] on a connection of the pool.
pub async fn state(pool: &SqlitePool) -> DbResult<DbState> {
    state_in(&mut *pool.acquire().await?).await
}

/// What a new pack holds, besides its snapshot.
pub struct NewPack<'a> {
    /// Case or portfolio.
    pub kind: PackKind,
    /// The case version id, or the quarter.
    pub subject: &'a str,
    /// One-line title.
    pub title: &'a str,
    /// RFC 3339 UTC, from the app's clock.
    pub made_at: &'a str,
    /// User name.
    pub made_by: &'a str,
    /// The state the snapshot was made from.
    pub state: &'a DbState,
}

/// Insert a pack with its content hash; returns its id. Call inside `begin_write`.
pub async fn insert(conn: &mut SqliteConnection, p: &NewPack<'_>, snapshot: &Snapshot) -> DbResult<i64> {
    let sha = pack_hash(p.kind, p.subject, p.title, p.made_at, p.made_by, p.state, snapshot);
    let id: i64 = sqlx::query_scalar(
        "INSERT INTO decision_packs (kind, subject, title, made_at, made_by, ledger_tip_id, ledger_tip_hash,
             ledger_entries, generation, body, figures, sha256)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(p.kind.as_str())
    .bind(p.subject)
    .bind(p.title)
    .bind(p.made_at)
    .bind(p.made_by)
    .bind(p.state.ledger_tip_id)
    .bind(p.state.ledger_tip_hash.as_deref())
    .bind(p.state.ledger_entries)
    .bind(p.state.generation)
    .bind(&snapshot.body)
    .bind(&snapshot.figures)
    .bind(&sha)
    .fetch_one(conn)
    .await?;
    Ok(id)
}

/// The columns of a [`Pack`] (static SQL: `concat!` keeps every statement a literal).
macro_rules! columns {
    () => {
        "id, kind, subject, title, made_at, made_by, ledger_tip_id, ledger_tip_hash, ledger_entries, generation, sha256"
    };
}

fn pack_of(r: &SqliteRow) -> DbResult<Pack> {
    Ok(Pack {
        id: r.try_get("id")?,
        kind: parsed("decision_packs.kind", r.try_get("kind")?, PackKind::parse)?,
        subject: r.try_get("subject")?,
        title: r.try_get("title")?,
        made_at: r.try_get("made_at")?,
        made_by: r.try_get("made_by")?,
        state: DbState {
            ledger_tip_id: r.try_get("ledger_tip_id")?,
            ledger_tip_hash: r.try_get("ledger_tip_hash")?,
            ledger_entries: r.try_get("ledger_entries")?,
            generation: r.try_get("generation")?,
        },
        sha256: r.try_get("sha256")?,
    })
}

/// Packs, newest first (at most [`PACK_LIST_MAX`]), of one kind and subject when given.
pub async fn list(pool: &SqlitePool, kind: Option<PackKind>, subject: Option<&str>) -> DbResult<Vec<Pack>> {
    let sql = concat!(
        "SELECT ",
        columns!(),
        " FROM decision_packs WHERE (?1 IS NULL OR kind = ?1) AND (?2 IS NULL OR subject = ?2) ORDER BY id DESC LIMIT ?3"
    );
    let rows =
        sqlx::query(sql).bind(kind.map(PackKind::as_str)).bind(subject).bind(PACK_LIST_MAX).fetch_all(pool).await?;
    rows.iter().map(pack_of).collect()
}

/// One pack with its snapshot.
pub async fn get(pool: &SqlitePool, id: i64) -> DbResult<(Pack, Snapshot)> {
    let sql = concat!("SELECT ", columns!(), ", body, figures FROM decision_packs WHERE id = ?");
    let row = sqlx::query(sql).bind(id).fetch_optional(pool).await?.ok_or(DbError::NotFound("decision pack"))?;
    Ok((pack_of(&row)?, Snapshot { body: row.try_get("body")?, figures: row.try_get("figures")? }))
}

/// The newest pack of `kind` with its figures JSON (the previous portfolio pack, for the
/// changes since it).
pub async fn latest(pool: &SqlitePool, kind: PackKind) -> DbResult<Option<(Pack, String)>> {
    let sql = concat!("SELECT ", columns!(), ", figures FROM decision_packs WHERE kind = ? ORDER BY id DESC LIMIT 1");
    let Some(row) = sqlx::query(sql).bind(kind.as_str()).fetch_optional(pool).await? else { return Ok(None) };
    Ok(Some((pack_of(&row)?, row.try_get("figures")?)))
}

/// Recompute every pack's hash (for `verify`): packs checked and the first whose stored hash
/// does not follow from its content.
pub(super) async fn check(conn: &mut SqliteConnection) -> DbResult<(u64, Option<Problem>)> {
    let (mut after, mut n, mut first) = (0_i64, 0_u64, None);
    loop {
        let sql =
            concat!("SELECT ", columns!(), ", body, figures FROM decision_packs WHERE id > ? ORDER BY id LIMIT 50");
        let rows = sqlx::query(sql).bind(after).fetch_all(&mut *conn).await?;
        let Some(last) = rows.last() else { break };
        after = last.try_get("id")?;
        for r in &rows {
            n += 1;
            let p = pack_of(r)?;
            let s = Snapshot { body: r.try_get("body")?, figures: r.try_get("figures")? };
            let expected = pack_hash(p.kind, &p.subject, &p.title, &p.made_at, &p.made_by, &p.state, &s);
            if first.is_none() && expected != p.sha256 {
                first = Some(Problem {
                    table: "decision_packs".into(),
                    row: format!("id {}", p.id),
                    what: "its content does not match its hash: the pack was changed".into(),
                });
            }
        }
    }
    Ok((n, first))
}
