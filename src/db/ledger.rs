//! The ledger: append-only bookings against a zone's approved baseline.

use super::{DbError, DbResult, count, decimal, now, parsed};
use crate::domain::{Booking, EntryKind, FieldErrors, LedgerEntry, Measurement, Month};
use rust_decimal::Decimal;
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

macro_rules! select_entry {
    ($rest:literal) => {
        concat!(
            "SELECT e.id, e.zone_id, e.case_id, e.kind, e.driver_id, e.cost_id, e.period, e.method, e.quantity, e.unit_value,
                    e.amount, e.baseline_intensity, e.reporting_volume, e.measured_consumption, e.evidence, e.reverses_id,
                    r.id AS reversed_by, e.booked_at, e.booked_by
             FROM ledger_entries e LEFT JOIN ledger_entries r ON r.reverses_id = e.id ",
            $rest
        )
    };
}

fn opt_decimal(column: &'static str, v: Option<String>) -> DbResult<Option<Decimal>> {
    v.map(|t| decimal(column, t)).transpose()
}

fn entry_from(r: &SqliteRow) -> DbResult<LedgerEntry> {
    Ok(LedgerEntry {
        id: r.try_get("id")?,
        zone_id: r.try_get("zone_id")?,
        case_id: r.try_get("case_id")?,
        kind: parsed("kind", r.try_get("kind")?, EntryKind::parse)?,
        driver_id: r.try_get("driver_id")?,
        cost_id: r.try_get("cost_id")?,
        period: parsed("period", r.try_get("period")?, Month::parse)?,
        method: r.try_get("method")?,
        quantity: opt_decimal("quantity", r.try_get("quantity")?)?,
        unit_value: opt_decimal("unit_value", r.try_get("unit_value")?)?,
        amount: decimal("amount", r.try_get("amount")?)?,
        baseline_intensity: opt_decimal("baseline_intensity", r.try_get("baseline_intensity")?)?,
        reporting_volume: opt_decimal("reporting_volume", r.try_get("reporting_volume")?)?,
        measured_consumption: opt_decimal("measured_consumption", r.try_get("measured_consumption")?)?,
        evidence: r.try_get("evidence")?,
        reverses_id: r.try_get("reverses_id")?,
        reversed_by: r.try_get("reversed_by")?,
        booked_at: r.try_get("booked_at")?,
        booked_by: r.try_get("booked_by")?,
    })
}

/// A zone's entries, oldest first.
pub async fn zone_entries(pool: &SqlitePool, zone_id: i64) -> DbResult<Vec<LedgerEntry>> {
    zone_entries_in(&mut *pool.acquire().await?, zone_id).await
}

/// [`zone_entries`] inside the caller's transaction.
pub(super) async fn zone_entries_in(conn: &mut SqliteConnection, zone_id: i64) -> DbResult<Vec<LedgerEntry>> {
    let rows = sqlx::query(select_entry!("WHERE e.zone_id = ? ORDER BY e.id")).bind(zone_id).fetch_all(conn).await?;
    rows.iter().map(entry_from).collect()
}

/// Every entry of every zone, oldest first (CSV export).
pub async fn all_entries(pool: &SqlitePool) -> DbResult<Vec<LedgerEntry>> {
    let rows = sqlx::query(select_entry!("ORDER BY e.id")).fetch_all(pool).await?;
    rows.iter().map(entry_from).collect()
}

async fn entry_in(conn: &mut SqliteConnection, id: i64) -> DbResult<Option<LedgerEntry>> {
    let row = sqlx::query(select_entry!("WHERE e.id = ?")).bind(id).fetch_optional(conn).await?;
    row.as_ref().map(entry_from).transpose()
}

/// The baseline a booking is measured against: case id, start month and horizon.
struct Baseline {
    case_id: i64,
    start: Month,
    horizon: u32,
}

async fn baseline(conn: &mut SqliteConnection, zone_id: i64) -> DbResult<Baseline> {
    let zone: Option<i64> =
        sqlx::query_scalar("SELECT id FROM zones WHERE id = ?").bind(zone_id).fetch_optional(&mut *conn).await?;
    zone.ok_or(DbError::NotFound("zone"))?;
    let row = sqlx::query(
        "SELECT id, start_month, horizon_months FROM case_versions WHERE zone_id = ? AND state = 'approved'",
    )
    .bind(zone_id)
    .fetch_optional(conn)
    .await?
    .ok_or_else(|| {
        DbError::Conflict("the zone has no approved business case to measure against: approve one first".into())
    })?;
    Ok(Baseline {
        case_id: row.try_get("id")?,
        start: parsed("start_month", row.try_get("start_month")?, Month::parse)?,
        horizon: count("horizon_months", row.try_get("horizon_months")?)?,
    })
}

/// The outcome of a booking request.
pub enum Booked {
    /// A new entry was written.
    New(LedgerEntry),
    /// The idempotency key was seen before: the entry first booked with it.
    Replayed(LedgerEntry),
}

/// Book one entry in the caller's transaction. Checks against the baseline are reported as
/// field errors: unknown driver or cost item, a month outside the horizon or in the future.
/// `key` makes a retried request book once.
pub async fn book(
    conn: &mut SqliteConnection,
    zone_id: i64,
    b: &Booking,
    current_month: Month,
    actor: &str,
    key: Option<&str>,
    import_id: Option<i64>,
) -> DbResult<Booked> {
    if let Some(key) = key {
        let existing: Option<i64> = sqlx::query_scalar("SELECT id FROM ledger_entries WHERE idempotency_key = ?")
            .bind(key)
            .fetch_optional(&mut *conn)
            .await?;
        if let Some(id) = existing {
            return entry_in(conn, id).await?.map(Booked::Replayed).ok_or(DbError::NotFound("ledger entry"));
        }
    }
    let base = baseline(conn, zone_id).await?;
    let mut e = FieldErrors::default();
    let last = base.start.plus(base.horizon - 1);
    if b.period < base.start || b.period > last {
        e.push("period", format!("a month of the baseline's horizon: {} to {last}", base.start));
    } else if b.period > current_month {
        e.push(
            "period",
            format!("{} is in the future; the latest month that can be booked is {current_month}", b.period),
        );
    }
    let (driver_id, cost_id, unit_value) = match b.kind {
        EntryKind::Saving => {
            let v: Option<String> =
                sqlx::query_scalar("SELECT unit_value FROM benefit_drivers WHERE id = ? AND case_id = ?")
                    .bind(b.item_id)
                    .bind(base.case_id)
                    .fetch_optional(&mut *conn)
                    .await?;
            if v.is_none() {
                e.push("item", format!("driver {} is not a benefit driver of the zone's baseline", b.item_id));
            }
            (Some(b.item_id), None, v.map(|v| decimal("unit_value", v)).transpose()?)
        }
        EntryKind::Spending => {
            let c: Option<i64> = sqlx::query_scalar("SELECT id FROM cost_items WHERE id = ? AND case_id = ?")
                .bind(b.item_id)
                .bind(base.case_id)
                .fetch_optional(&mut *conn)
                .await?;
            if c.is_none() {
                e.push("item", format!("cost item {} is not a cost item of the zone's baseline", b.item_id));
            }
            (None, Some(b.item_id), None)
        }
    };
    if !e.is_empty() {
        return Err(DbError::Invalid(e));
    }
    let (quantity, amount, inputs) = match &b.measurement {
        Measurement::Direct { quantity } => {
            (Some(*quantity), *quantity * unit_value.unwrap_or_default(), [None, None, None])
        }
        Measurement::Normalized { baseline_intensity, reporting_volume, measured_consumption } => {
            let q = crate::finance::normalized_avoided(*baseline_intensity, *reporting_volume, *measured_consumption)
                .map_err(|err| DbError::Invalid(FieldErrors::one("baseline_intensity", err.to_string())))?;
            (
                Some(q),
                q * unit_value.unwrap_or_default(),
                [Some(*baseline_intensity), Some(*reporting_volume), Some(*measured_consumption)],
            )
        }
        Measurement::Spend { amount } => (None, -*amount, [None, None, None]),
    };
    let id = insert_row(
        conn,
        &Row_ {
            zone_id,
            case_id: base.case_id,
            kind: b.kind,
            driver_id,
            cost_id,
            period: b.period,
            method: b.measurement.method(),
            quantity,
            unit_value,
            amount,
            inputs,
            evidence: &b.evidence,
            reverses_id: None,
            key,
            import_id,
            actor,
        },
    )
    .await?;
    entry_in(conn, id).await?.map(Booked::New).ok_or(DbError::NotFound("ledger entry"))
}

/// Fields of a row to insert.
struct Row_<'a> {
    zone_id: i64,
    case_id: i64,
    kind: EntryKind,
    driver_id: Option<i64>,
    cost_id: Option<i64>,
    period: Month,
    method: &'a str,
    quantity: Option<Decimal>,
    unit_value: Option<Decimal>,
    amount: Decimal,
    inputs: [Option<Decimal>; 3],
    evidence: &'a str,
    reverses_id: Option<i64>,
    key: Option<&'a str>,
    import_id: Option<i64>,
    actor: &'a str,
}

async fn insert_row(conn: &mut SqliteConnection, r: &Row_<'_>) -> DbResult<i64> {
    let id = insert_entry(conn, r).await?;
    let item = match (r.driver_id, r.cost_id) {
        (Some(d), _) => format!("driver:{d}"),
        (None, Some(c)) => format!("cost:{c}"),
        (None, None) => return Ok(id),
    };
    add_to_totals(conn, r.zone_id, &item, r.amount, r.quantity.unwrap_or_default(), r.period).await?;
    Ok(id)
}

/// Add one entry to its item's running totals (same transaction as the entry).
async fn add_to_totals(
    conn: &mut SqliteConnection,
    zone_id: i64,
    item: &str,
    amount: Decimal,
    quantity: Decimal,
    period: Month,
) -> DbResult<()> {
    let row =
        sqlx::query("SELECT amount, quantity, entries, last_period FROM ledger_totals WHERE zone_id = ? AND item = ?")
            .bind(zone_id)
            .bind(item)
            .fetch_optional(&mut *conn)
            .await?;
    let (sum, qty, entries, last) = match row {
        Some(r) => (
            decimal("amount", r.try_get("amount")?)?,
            decimal("quantity", r.try_get("quantity")?)?,
            r.try_get::<i64, _>("entries")?,
            parsed("last_period", r.try_get("last_period")?, Month::parse)?,
        ),
        None => (Decimal::ZERO, Decimal::ZERO, 0, period),
    };
    sqlx::query(
        "INSERT INTO ledger_totals (zone_id, item, amount, quantity, entries, last_period) VALUES (?, ?, ?, ?, ?, ?)
         ON CONFLICT (zone_id, item) DO UPDATE SET amount = excluded.amount, quantity = excluded.quantity,
             entries = excluded.entries, last_period = excluded.last_period",
    )
    .bind(zone_id)
    .bind(item)
    .bind((sum + amount).normalize().to_string())
    .bind((qty + quantity).normalize().to_string())
    .bind(entries + 1)
    .bind(last.max(period).to_string())
    .execute(conn)
    .await?;
    Ok(())
}

/// Rebuild `ledger_totals` from the entries when it is empty but the ledger is not (a database
/// from before migration 0005). Sums in Rust, in one transaction.
pub async fn rebuild_totals_if_missing(pool: &SqlitePool) -> DbResult<()> {
    let (totals, entries): (i64, i64) =
        sqlx::query_as("SELECT (SELECT COUNT(*) FROM ledger_totals), (SELECT COUNT(*) FROM ledger_entries)")
            .fetch_one(pool)
            .await?;
    if totals > 0 || entries == 0 {
        return Ok(());
    }
    let mut tx = super::begin_write(pool).await?;
    let rows =
        sqlx::query("SELECT zone_id, driver_id, cost_id, amount, quantity, period FROM ledger_entries ORDER BY id")
            .fetch_all(&mut *tx)
            .await?;
    let mut sums: std::collections::BTreeMap<(i64, String), (Decimal, Decimal, i64, Month)> = Default::default();
    for r in rows {
        let item = match (r.try_get::<Option<i64>, _>("driver_id")?, r.try_get::<Option<i64>, _>("cost_id")?) {
            (Some(d), _) => format!("driver:{d}"),
            (None, Some(c)) => format!("cost:{c}"),
            (None, None) => continue,
        };
        let amount = decimal("amount", r.try_get("amount")?)?;
        let quantity = r.try_get::<Option<String>, _>("quantity")?.map(|q| decimal("quantity", q)).transpose()?;
        let period = parsed("period", r.try_get("period")?, Month::parse)?;
        let e = sums.entry((r.try_get("zone_id")?, item)).or_insert((Decimal::ZERO, Decimal::ZERO, 0, period));
        e.0 += amount;
        e.1 += quantity.unwrap_or_default();
        e.2 += 1;
        e.3 = e.3.max(period);
    }
    for ((zone, item), (amount, quantity, n, last)) in sums {
        sqlx::query("INSERT INTO ledger_totals (zone_id, item, amount, quantity, entries, last_period) VALUES (?, ?, ?, ?, ?, ?)")
            .bind(zone)
            .bind(item)
            .bind(amount.normalize().to_string())
            .bind(quantity.normalize().to_string())
            .bind(n)
            .bind(last.to_string())
            .execute(&mut *tx)
            .await?;
    }
    tx.commit().await?;
    Ok(())
}

/// Each baseline item's booked totals and latest booked month, for every zone or for one.
pub(super) async fn totals_in(
    conn: &mut SqliteConnection,
    zone: Option<i64>,
) -> DbResult<Vec<(i64, String, Decimal, Month)>> {
    let rows = match zone {
        None => sqlx::query("SELECT zone_id, item, amount, last_period FROM ledger_totals").fetch_all(conn).await?,
        Some(id) => {
            sqlx::query("SELECT zone_id, item, amount, last_period FROM ledger_totals WHERE zone_id = ?")
                .bind(id)
                .fetch_all(conn)
                .await?
        }
    };
    rows.iter()
        .map(|r| {
            Ok((
                r.try_get("zone_id")?,
                r.try_get("item")?,
                decimal("amount", r.try_get("amount")?)?,
                parsed("last_period", r.try_get("last_period")?, Month::parse)?,
            ))
        })
        .collect()
}

async fn insert_entry(conn: &mut SqliteConnection, r: &Row_<'_>) -> DbResult<i64> {
    let text = |d: Option<Decimal>| d.map(|d| d.normalize().to_string());
    sqlx::query_scalar(
        "INSERT INTO ledger_entries (zone_id, case_id, kind, driver_id, cost_id, period, method, quantity, unit_value, amount,
                                     baseline_intensity, reporting_volume, measured_consumption, evidence, reverses_id,
                                     idempotency_key, import_id, booked_at, booked_by)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(r.zone_id)
    .bind(r.case_id)
    .bind(r.kind.as_str())
    .bind(r.driver_id)
    .bind(r.cost_id)
    .bind(r.period.to_string())
    .bind(r.method)
    .bind(text(r.quantity))
    .bind(text(r.unit_value))
    .bind(r.amount.normalize().to_string())
    .bind(text(r.inputs[0]))
    .bind(text(r.inputs[1]))
    .bind(text(r.inputs[2]))
    .bind(r.evidence)
    .bind(r.reverses_id)
    .bind(r.key)
    .bind(r.import_id)
    .bind(now())
    .bind(r.actor)
    .fetch_one(conn)
    .await
    .map_err(|e| match &e {
        sqlx::Error::Database(db) if db.is_unique_violation() && r.reverses_id.is_some() => {
            DbError::Conflict(format!("entry {} has already been reversed", r.reverses_id.unwrap_or_default()))
        }
        sqlx::Error::Database(db) if db.message().contains("cannot be reversed") => {
            DbError::Conflict("a reversing entry cannot be reversed: book a new entry instead".into())
        }
        _ => DbError::Sqlx(e),
    })
}

/// Book the reversal of entry `id` (negated quantity and amount, same month and item), with
/// its own evidence note. An entry can be reversed once; a reversal cannot be reversed.
pub async fn reverse(
    conn: &mut SqliteConnection,
    zone_id: i64,
    id: i64,
    evidence: &str,
    actor: &str,
) -> DbResult<LedgerEntry> {
    let original =
        entry_in(conn, id).await?.filter(|e| e.zone_id == zone_id).ok_or(DbError::NotFound("ledger entry"))?;
    if let Some(by) = original.reversed_by {
        return Err(DbError::Conflict(format!("entry {id} has already been reversed by entry {by}")));
    }
    if original.reverses_id.is_some() {
        return Err(DbError::Conflict("a reversing entry cannot be reversed: book a new entry instead".into()));
    }
    let new_id = insert_row(
        conn,
        &Row_ {
            zone_id: original.zone_id,
            case_id: original.case_id,
            kind: original.kind,
            driver_id: original.driver_id,
            cost_id: original.cost_id,
            period: original.period,
            method: &original.method,
            quantity: original.quantity.map(|q| -q),
            unit_value: original.unit_value,
            amount: -original.amount,
            inputs: [original.baseline_intensity, original.reporting_volume, original.measured_consumption],
            evidence,
            reverses_id: Some(id),
            key: None,
            import_id: None,
            actor,
        },
    )
    .await?;
    entry_in(conn, new_id).await?.ok_or(DbError::NotFound("ledger entry"))
}

/// Record an imported file; the same content twice is refused.
pub async fn insert_import(
    conn: &mut SqliteConnection,
    zone_id: i64,
    hash: &str,
    file_name: &str,
    rows: usize,
    actor: &str,
) -> DbResult<i64> {
    let earlier = sqlx::query("SELECT imported_at, imported_by FROM ledger_imports WHERE content_hash = ?")
        .bind(hash)
        .fetch_optional(&mut *conn)
        .await?;
    if let Some(r) = earlier {
        let (at, by): (String, String) = (r.try_get("imported_at")?, r.try_get("imported_by")?);
        return Err(DbError::Conflict(format!("this file was already imported at {at} by {by}; nothing was booked")));
    }
    Ok(sqlx::query_scalar(
        "INSERT INTO ledger_imports (zone_id, content_hash, file_name, row_count, imported_at, imported_by)
         VALUES (?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(zone_id)
    .bind(hash)
    .bind(file_name)
    .bind(rows as i64)
    .bind(now())
    .bind(actor)
    .fetch_one(conn)
    .await?)
}
