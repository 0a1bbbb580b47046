//! The hash chains of `ledger_entries` and `audit_log` in SQL: each chain's tip, the chained
//! insert, the one-time seal of rows written before migration 0007, and [`verify`].
//!
//! The encoding and the hash are in `domain::chain`; this module only moves rows. Writers
//! call [`tip`] and [`insert_chained`] inside `begin_write` (`BEGIN IMMEDIATE`), so the tip
//! they link to cannot move under them; new rows get the ids `tip + 1, tip + 2, ...`
//! explicitly, so a stale tip could only collide with an existing id (refused by the
//! `*_no_replace` triggers), never fork the chain.

use super::{DbResult, WriteTx, audit, ledger};
use crate::domain::chain::{AUDIT_LOG, HASH_COLUMN, LEDGER_ENTRIES, Row, Tip, Value, row_hash};
use sqlx::sqlite::SqliteRow;
use sqlx::{Column, QueryBuilder, Row as _, Sqlite, SqliteConnection, SqlitePool, TypeInfo, ValueRef};

/// The `table` of a problem SQLite's integrity check found.
const DATABASE: &str = "database";

/// The tip of `table`'s chain (`LEDGER_ENTRIES` or `AUDIT_LOG`).
pub(super) async fn tip(conn: &mut SqliteConnection, table: &'static str) -> DbResult<Tip> {
    let sql = if table == LEDGER_ENTRIES {
        "SELECT id, hash FROM ledger_entries ORDER BY id DESC LIMIT 1"
    } else {
        "SELECT id, hash FROM audit_log ORDER BY id DESC LIMIT 1"
    };
    let row: Option<(i64, Option<String>)> = sqlx::query_as(sql).fetch_optional(conn).await?;
    Ok(row.map(|(id, hash)| Tip { id, hash }).unwrap_or_default())
}

/// Insert one row per item into `table` in one statement, each row built by `build` with the
/// next id of the chain and linked to the row before; the tip moves to the last row. The
/// column list is the rows' own names (static, from `domain::chain`), so what is hashed is
/// what is written.
pub(super) async fn insert_chained<T>(
    conn: &mut SqliteConnection,
    table: &'static str,
    tip: &mut Tip,
    items: &[T],
    build: impl Fn(&T, i64) -> Row,
) -> Result<(), sqlx::Error> {
    let rows: Vec<Row> = items
        .iter()
        .map(|item| {
            let mut row = build(item, tip.next_id());
            let hash = tip.link(table, &row);
            row.push((HASH_COLUMN, Value::Text(hash)));
            row
        })
        .collect();
    let Some(first) = rows.first() else { return Ok(()) };
    let mut q = QueryBuilder::<Sqlite>::new("INSERT INTO ");
    q.push(table).push(" (");
    let mut names = q.separated(", ");
    for (name, _) in first {
        names.push(*name);
    }
    q.push(") ");
    q.push_values(&rows, |mut b, row| {
        for (_, value) in row {
            match value {
                Value::Null => b.push_bind(None::<i64>),
                Value::Integer(i) => b.push_bind(*i),
                Value::Text(t) => b.push_bind(t.as_str()),
            };
        }
    });
    q.build().execute(conn).await?;
    Ok(())
}

/// One stored row read back whole: id, stored hash, and every other column by name.
struct StoredRow {
    id: i64,
    hash: Option<String>,
    columns: Vec<(String, Value)>,
}

/// Rows of `table` with ids above `after`, in id order, at most [`READ_PAGE`](super::READ_PAGE).
async fn page(conn: &mut SqliteConnection, table: &'static str, after: i64) -> DbResult<Vec<StoredRow>> {
    // Every column (`*`): a column the writers forgot to hash shows up as a broken row.
    let sql = if table == LEDGER_ENTRIES {
        "SELECT * FROM ledger_entries WHERE id > ? ORDER BY id LIMIT ?"
    } else {
        "SELECT * FROM audit_log WHERE id > ? ORDER BY id LIMIT ?"
    };
    let rows = sqlx::query(sql).bind(after).bind(super::READ_PAGE).fetch_all(conn).await?;
    rows.iter().map(|r| stored_row(table, r)).collect()
}

fn stored_row(table: &'static str, r: &SqliteRow) -> DbResult<StoredRow> {
    let id: i64 = r.try_get("id")?;
    let mut hash = None;
    let mut columns = Vec::with_capacity(r.len());
    for (i, column) in r.columns().iter().enumerate() {
        let raw = r.try_get_raw(i)?;
        let value = if raw.is_null() {
            Value::Null
        } else {
            match raw.type_info().name() {
                "INTEGER" => Value::Integer(r.try_get(i)?),
                "TEXT" => Value::Text(r.try_get(i)?),
                other => {
                    return Err(super::DbError::Corrupt { column: table, value: format!("id {id}: {other} value") });
                }
            }
        };
        match (column.name(), value) {
            (HASH_COLUMN, Value::Text(h)) => hash = Some(h),
            (HASH_COLUMN, _) => {}
            (name, value) => columns.push((name.to_string(), value)),
        }
    }
    Ok(StoredRow { id, hash, columns })
}

/// Give every row of a table written before migration 0007 its hash, in id order, once: only
/// when no row of the table has a hash yet. A table with some rows hashed and some not is
/// left alone for [`verify`] to report (a row inserted behind the app's back is never sealed).
/// Records one audit row when anything was sealed.
pub(super) async fn seal(pool: &SqlitePool) -> DbResult<()> {
    let mut tx = super::begin_write(pool).await?;
    let mut sealed = Vec::new();
    for table in [LEDGER_ENTRIES, AUDIT_LOG] {
        let n = seal_table(&mut tx, table).await?;
        if n > 0 {
            sealed.push(format!("{n} rows of {table}"));
        }
    }
    if !sealed.is_empty() {
        let detail = format!("sealed {} written before hash chains", sealed.join(" and "));
        tracing::info!("{detail}");
        // At start-up, not on a request: the system clock.
        let at = super::timestamp(crate::auth::Clock::now(&crate::auth::SystemClock));
        audit::record(&mut tx, &at, "migration", "chain.seal", "hash chains", &detail).await?;
    }
    tx.commit().await
}

async fn seal_table(tx: &mut WriteTx, table: &'static str) -> DbResult<u64> {
    // The first row tells at once (no scan) whether the table was sealed already.
    let (first, any_hashed) = if table == LEDGER_ENTRIES {
        (
            "SELECT hash IS NULL FROM ledger_entries ORDER BY id LIMIT 1",
            "SELECT EXISTS (SELECT 1 FROM ledger_entries WHERE hash IS NOT NULL)",
        )
    } else {
        (
            "SELECT hash IS NULL FROM audit_log ORDER BY id LIMIT 1",
            "SELECT EXISTS (SELECT 1 FROM audit_log WHERE hash IS NOT NULL)",
        )
    };
    let unsealed: Option<bool> = sqlx::query_scalar(first).fetch_optional(&mut **tx).await?;
    if unsealed != Some(true) || sqlx::query_scalar::<_, bool>(any_hashed).fetch_one(&mut **tx).await? {
        return Ok(0);
    }
    let update = if table == LEDGER_ENTRIES {
        "UPDATE ledger_entries SET hash = ? WHERE id = ?"
    } else {
        "UPDATE audit_log SET hash = ? WHERE id = ?"
    };
    let (mut after, mut prev, mut n) = (0, None::<String>, 0);
    loop {
        let rows = page(tx, table, after).await?;
        let Some(last) = rows.last() else { break };
        after = last.id;
        for row in rows {
            let hash = row_hash(table, prev.as_deref(), &row.columns);
            sqlx::query(update).bind(&hash).bind(row.id).execute(&mut **tx).await?;
            prev = Some(hash);
            n += 1;
        }
    }
    Ok(n)
}

/// One thing `verify` found wrong: the table, the row (id or key) and what is wrong.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// The table (or `database` for SQLite's integrity check).
    pub table: String,
    /// The row: `id 5`, `zone 2 (PRESS-2) item driver:7`, `rowid 3`.
    pub row: String,
    /// What is wrong.
    pub what: String,
}

impl std::fmt::Display for Problem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} {}: {}", self.table, self.row, self.what)
    }
}

/// What `verify` checked and found.
#[derive(Debug, Clone, Default)]
pub struct Verification {
    /// Ledger entries checked.
    pub entries: u64,
    /// Audit rows checked.
    pub audit_rows: u64,
    /// `ledger_totals` rows compared with the entries.
    pub totals: u64,
    /// The ledger chain's last id and hash.
    pub ledger_tip: Tip,
    /// The audit chain's last id and hash.
    pub audit_tip: Tip,
    /// The first problem of each check, in the order checked (empty when all is well).
    pub problems: Vec<Problem>,
}

impl Verification {
    /// The one-line summary `verify` prints.
    pub fn summary(&self) -> String {
        let tip = |t: &Tip| match &t.hash {
            Some(h) => format!("id {} {}", t.id, &h[..h.len().min(16)]),
            None => "empty".into(),
        };
        let verdict = if self.problems.is_empty() { "ok" } else { "FAILED" };
        let integrity = if self.problems.iter().any(|p| p.table == DATABASE) { "NOT ok" } else { "ok" };
        format!(
            "verify {verdict}: {} ledger entries, {} audit rows, {} ledger totals, integrity {integrity}; \
             ledger tip {}, audit tip {}",
            self.entries,
            self.audit_rows,
            self.totals,
            tip(&self.ledger_tip),
            tip(&self.audit_tip),
        )
    }
}

/// Recompute both chains, compare the kept ledger totals with the entries, and run SQLite's
/// `integrity_check` and `foreign_key_check` (a token or session whose user was deleted
/// behind the app's back). Reads one snapshot (a read transaction).
pub async fn verify(pool: &SqlitePool) -> DbResult<Verification> {
    let mut tx = pool.begin().await?;
    let mut v = Verification::default();
    let (entries, tip, problem) = verify_chain(&mut tx, LEDGER_ENTRIES).await?;
    (v.entries, v.ledger_tip) = (entries, tip);
    v.problems.extend(problem);
    let (rows, tip, problem) = verify_chain(&mut tx, AUDIT_LOG).await?;
    (v.audit_rows, v.audit_tip) = (rows, tip);
    v.problems.extend(problem);
    let (totals, problem) = ledger::check_totals(&mut tx).await?;
    v.totals = totals;
    v.problems.extend(problem);
    // Decision packs (migration 0015): each stored hash must follow from the pack's content.
    v.problems.extend(super::packs::check(&mut tx).await?.1);
    let integrity: Vec<String> = sqlx::query_scalar("PRAGMA integrity_check").fetch_all(&mut *tx).await?;
    if let Some(first) = integrity.into_iter().find(|line| line != "ok") {
        v.problems.push(Problem { table: DATABASE.into(), row: "integrity_check".into(), what: first });
    }
    // The first orphan of each table (a session and a token of a user deleted behind the app).
    let orphans: Vec<(String, Option<i64>, String)> = sqlx::query_as(
        "SELECT \"table\", MIN(rowid), parent FROM pragma_foreign_key_check GROUP BY \"table\", parent ORDER BY 1, 3",
    )
    .fetch_all(&mut *tx)
    .await?;
    for (table, rowid, parent) in orphans {
        let row = rowid.map_or_else(|| "a row".into(), |r| format!("rowid {r}"));
        v.problems.push(Problem { table, row, what: format!("refers to a row of {parent} that does not exist") });
    }
    tx.rollback().await?;
    Ok(v)
}

/// Recompute `table`'s chain: rows checked, the tip, and the first row whose stored hash is
/// missing or does not follow from its content and the previous row's stored hash (so a
/// changed row names itself; a removed or inserted row names the row after it).
async fn verify_chain(conn: &mut SqliteConnection, table: &'static str) -> DbResult<(u64, Tip, Option<Problem>)> {
    let (mut tip, mut n, mut first) = (Tip::default(), 0, None);
    loop {
        let rows = page(conn, table, tip.id).await?;
        if rows.is_empty() {
            break;
        }
        for row in rows {
            n += 1;
            let expected = row_hash(table, tip.hash.as_deref(), &row.columns);
            let what = match &row.hash {
                None => Some("has no hash: written behind the app's back, or its hash was removed".to_string()),
                Some(h) if *h != expected => Some(
                    "its content does not match its hash: the row was changed, or a row before it was changed, \
                     removed or inserted"
                        .to_string(),
                ),
                Some(_) => None,
            };
            if let (None, Some(what)) = (&first, what) {
                first = Some(Problem { table: table.into(), row: format!("id {}", row.id), what });
            }
            tip = Tip { id: row.id, hash: row.hash.or(Some(expected)) };
        }
    }
    Ok((n, tip, first))
}
