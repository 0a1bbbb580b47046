//! The ledger: append-only bookings against a zone's approved baseline.

use super::chain::{self, Problem, insert_chained};
use super::{DbError, DbResult, count, decimal, parsed};
use crate::domain::chain::{EntryStamp, LEDGER_ENTRIES, Tip, ledger_entry_row};
use crate::domain::{
    BaselineCost, BaselineDriver, Booking, BookingBaseline, EntryId, EntryKind, LedgerEntry, LedgerItem, Method, Month,
    NewEntry, ZoneStatus,
};
use rust_decimal::Decimal;
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

macro_rules! select_entry {
    ($rest:literal) => {
        concat!(
            "SELECT e.id, e.zone_id, e.case_id, e.kind, e.driver_id, e.cost_id, e.period, e.method, e.quantity, e.unit_value,
                    e.amount, e.baseline_intensity, e.reporting_volume, e.measured_consumption, e.evidence, e.reverses_id,
                    r.id AS reversed_by, e.booked_at, e.booked_by, e.paid_on, e.implausible_confirmed, e.on_behalf_by
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
        id: EntryId(r.try_get("id")?),
        zone_id: r.try_get("zone_id")?,
        case_id: r.try_get("case_id")?,
        item: item_from(r)?,
        period: parsed("period", r.try_get("period")?, Month::parse)?,
        // Stored as its code ('normalized' for volume_adjusted: the CHECK and the hash chain keep it).
        method: parsed("method", r.try_get("method")?, |c| Method::from_stored(c).ok_or_else(String::new))?,
        quantity: opt_decimal("quantity", r.try_get("quantity")?)?,
        unit_value: opt_decimal("unit_value", r.try_get("unit_value")?)?,
        amount: decimal("amount", r.try_get("amount")?)?,
        baseline_intensity: opt_decimal("baseline_intensity", r.try_get("baseline_intensity")?)?,
        reporting_volume: opt_decimal("reporting_volume", r.try_get("reporting_volume")?)?,
        measured_consumption: opt_decimal("measured_consumption", r.try_get("measured_consumption")?)?,
        evidence: r.try_get("evidence")?,
        reverses_id: r.try_get::<Option<i64>, _>("reverses_id")?.map(EntryId),
        reversed_by: r.try_get::<Option<i64>, _>("reversed_by")?.map(EntryId),
        booked_at: r.try_get("booked_at")?,
        booked_by: r.try_get("booked_by")?,
        paid_on: r.try_get::<Option<String>, _>("paid_on")?.map(|d| parsed("paid_on", d, parse_date)).transpose()?,
        implausible_confirmed: r.try_get::<Option<i64>, _>("implausible_confirmed")?.is_some_and(|v| v != 0),
        on_behalf_by: r.try_get("on_behalf_by")?,
    })
}

/// The item of a stored entry: its kind with exactly the matching id column set.
fn item_from(r: &SqliteRow) -> DbResult<LedgerItem> {
    let kind: String = r.try_get("kind")?;
    let (driver, cost): (Option<i64>, Option<i64>) = (r.try_get("driver_id")?, r.try_get("cost_id")?);
    LedgerItem::from_columns(driver, cost)
        .filter(|item| EntryKind::parse(&kind) == Ok(item.kind()))
        .ok_or(DbError::Corrupt { column: "driver_id, cost_id", value: format!("{kind}: {driver:?}, {cost:?}") })
}

fn parse_date(text: &str) -> Result<time::Date, String> {
    let format = time::macros::format_description!("[year]-[month]-[day]");
    time::Date::parse(text, &format).map_err(|e| e.to_string())
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

/// The zone's approved baseline with its items, to check bookings against (two queries).
pub async fn booking_baseline(conn: &mut SqliteConnection, zone_id: i64) -> DbResult<BookingBaseline> {
    let row = sqlx::query(
        "SELECT c.id AS case_id, c.start_month, c.horizon_months
         FROM zones z LEFT JOIN case_versions c ON c.zone_id = z.id AND c.state = 'approved' WHERE z.id = ?",
    )
    .bind(zone_id)
    .fetch_optional(&mut *conn)
    .await?
    .ok_or(DbError::NotFound("zone"))?;
    let mut baseline = baseline_from(&row)?;
    let case_id = baseline.case_id;
    let items = sqlx::query(
        "SELECT 'driver' AS item, id, label, unit, unit_value, qty_high AS base FROM benefit_drivers WHERE case_id = ?
         UNION ALL SELECT kind, id, label, NULL, NULL, amount FROM cost_items WHERE case_id = ? ORDER BY 1, 2",
    )
    .bind(case_id)
    .bind(case_id)
    .fetch_all(conn)
    .await?;
    for r in items {
        let (item, id, label): (String, i64, String) = (r.try_get("item")?, r.try_get("id")?, r.try_get("label")?);
        let base = decimal("base", r.try_get("base")?)?;
        match r.try_get::<Option<String>, _>("unit_value")? {
            Some(v) => baseline.drivers.push(BaselineDriver {
                id,
                label,
                unit: r.try_get("unit")?,
                unit_value: decimal("unit_value", v)?,
                qty_high: base,
            }),
            None => baseline.costs.push(BaselineCost { id, label, amount: base, recurring: item == "recurring" }),
        }
    }
    Ok(baseline)
}

/// The outcome of a booking request.
pub enum Booked {
    /// A new entry was written.
    New(LedgerEntry),
    /// The idempotency key was seen before with the same request: the entry first booked with it.
    Replayed(LedgerEntry),
}

/// Who wrote a set of entries, and how they relate to others.
pub struct Tag<'a> {
    /// The user booking.
    pub actor: &'a str,
    /// When (`booked_at`: RFC 3339 UTC, [`super::timestamp`]).
    pub at: &'a str,
    /// Who made the token the user books with, when someone else did (`on_behalf_by`).
    pub on_behalf: Option<&'a str>,
    /// The CSV import the entries came from.
    pub import_id: Option<i64>,
    /// The entry a reversal reverses.
    pub reverses_id: Option<i64>,
}

/// An `Idempotency-Key` with its owner and the fingerprint of the request that carries it.
pub struct Idempotency<'a> {
    /// The user sending it: keys are per user.
    pub user_id: i64,
    /// The key as sent (validated by the caller: printable ASCII, at most 100 characters).
    pub key: &'a str,
    /// SHA-256 of the request's method, path and canonical body.
    pub fingerprint: &'a str,
}

/// Book one entry in the caller's transaction. Checks against the baseline are reported as
/// field errors: unknown driver or cost item, a month outside the horizon or in the future, an
/// implausible figure not confirmed. `key` makes a retried request book once; the same key with
/// another request (body or URL) is a conflict and books nothing. `(actor, on_behalf, at)`: who
/// books, who made their token when someone else did (`on_behalf_by`), and when.
///
/// The hot path of the API: one query reads the key's earlier use, the baseline, the item,
/// its running totals and the ledger chain's tip; then the insert, the totals, the key and
/// (the caller's) audit row.
pub async fn book(
    conn: &mut SqliteConnection,
    zone_id: i64,
    b: &Booking,
    today: time::Date,
    (actor, on_behalf, at): (&str, Option<&str>, &str),
    key: Option<&Idempotency<'_>>,
) -> DbResult<Booked> {
    let saving = b.item.kind() == EntryKind::Saving;
    let item = b.item.key();
    let row = sqlx::query(
        "SELECT i.entry_id AS replay, i.fingerprint,
                c.id AS case_id, c.start_month, c.horizon_months,
                d.id AS driver_id, d.label AS driver_label, d.unit, d.unit_value, d.qty_high,
                k.id AS cost_id, k.label AS cost_label, k.kind AS cost_kind, k.amount AS cost_amount,
                t.amount, t.quantity, t.entries, t.last_period,
                l.id AS tip_id, l.hash AS tip_hash, z.status AS zone_status
         FROM zones z
         LEFT JOIN idempotency_keys i ON i.user_id = ? AND i.key = ?
         LEFT JOIN case_versions c ON c.zone_id = z.id AND c.state = 'approved'
         LEFT JOIN benefit_drivers d ON d.case_id = c.id AND d.id = ? AND ?
         LEFT JOIN cost_items k ON k.case_id = c.id AND k.id = ? AND NOT ?
         LEFT JOIN ledger_totals t ON t.zone_id = z.id AND t.item = ?
         LEFT JOIN (SELECT id, hash FROM ledger_entries ORDER BY id DESC LIMIT 1) l
         WHERE z.id = ?",
    )
    .bind(key.map(|k| k.user_id))
    .bind(key.map(|k| k.key))
    .bind(b.item.id())
    .bind(saving)
    .bind(b.item.id())
    .bind(saving)
    .bind(&item)
    .bind(zone_id)
    .fetch_optional(&mut *conn)
    .await?
    .ok_or(DbError::NotFound("zone"))?;
    if let Some(id) = row.try_get::<Option<i64>, _>("replay")? {
        let first: Option<String> = row.try_get("fingerprint")?;
        // A key carried over from before migration 0009 has no fingerprint: it replays as before.
        if let (Some(first), Some(k)) = (first, key)
            && first != k.fingerprint
        {
            return Err(DbError::Conflict(format!(
                "the Idempotency-Key {:?} was already used by you for a different request (another body or URL), \
                 which booked entry {id}; nothing was booked: use a new key for a new booking",
                k.key
            )));
        }
        return entry_in(conn, id).await?.map(Booked::Replayed).ok_or(DbError::NotFound("ledger entry"));
    }
    bookable(row.try_get("zone_status")?)?;
    let mut baseline = baseline_from(&row)?;
    if let Some(id) = row.try_get::<Option<i64>, _>("driver_id")? {
        baseline.drivers.push(BaselineDriver {
            id,
            label: row.try_get("driver_label")?,
            unit: row.try_get("unit")?,
            unit_value: decimal("unit_value", row.try_get("unit_value")?)?,
            qty_high: decimal("qty_high", row.try_get("qty_high")?)?,
        });
    }
    if let Some(id) = row.try_get::<Option<i64>, _>("cost_id")? {
        baseline.costs.push(BaselineCost {
            id,
            label: row.try_get("cost_label")?,
            amount: decimal("cost_amount", row.try_get("cost_amount")?)?,
            recurring: row.try_get::<String, _>("cost_kind")? == "recurring",
        });
    }
    let e = baseline.check(b, today).map_err(DbError::Invalid)?;
    let tag = Tag { actor, at, on_behalf, import_id: None, reverses_id: None };
    let mut tip = Tip { id: row.try_get::<Option<i64>, _>("tip_id")?.unwrap_or(0), hash: row.try_get("tip_hash")? };
    let id = insert_rows(conn, zone_id, std::slice::from_ref(&e), &tag, &mut tip).await?;
    write_totals(conn, zone_id, &item, Totals::from_row(&row)?, &Totals::of(&e)).await?;
    if let Some(k) = key {
        sqlx::query(
            "INSERT INTO idempotency_keys (user_id, key, fingerprint, entry_id, used_at) VALUES (?, ?, ?, ?, ?)",
        )
        .bind(k.user_id)
        .bind(k.key)
        .bind(k.fingerprint)
        .bind(id)
        .bind(at)
        .execute(&mut *conn)
        .await?;
    }
    Ok(Booked::New(stored(id, zone_id, e, &tag)))
}

/// What a one-time form token already did (`entry 12`, `import 3`), if it was used by this
/// user on this zone's form. A token used by another user, or on another zone's form, is a
/// conflict: the first outcome is not theirs to see, and nothing is booked.
pub async fn form_outcome(
    conn: &mut SqliteConnection,
    token: &str,
    user_id: i64,
    zone_id: i64,
) -> DbResult<Option<String>> {
    let used: Option<(String, i64, Option<i64>)> =
        sqlx::query_as("SELECT outcome, user_id, zone_id FROM form_submissions WHERE token = ?")
            .bind(token)
            .fetch_optional(conn)
            .await?;
    match used {
        // Tokens recorded before migration 0012 have no zone: the user alone is compared.
        Some((_, by, zone)) if by != user_id || zone.is_some_and(|z| z != zone_id) => Err(DbError::Conflict(
            "this form was already submitted by another user or on another zone's page; nothing was booked: reload \
             the ledger page and use its form"
                .into(),
        )),
        other => Ok(other.map(|(outcome, _, _)| outcome)),
    }
}

/// Record a one-time form token as used by `user_id` on `zone_id`'s page, with what it did,
/// in the booking's transaction.
pub async fn use_form_token(
    conn: &mut SqliteConnection,
    token: &str,
    user_id: i64,
    zone_id: i64,
    outcome: &str,
    at: &str,
) -> DbResult<()> {
    sqlx::query("INSERT INTO form_submissions (token, user_id, zone_id, outcome, used_at) VALUES (?, ?, ?, ?, ?)")
        .bind(token)
        .bind(user_id)
        .bind(zone_id)
        .bind(outcome)
        .bind(at)
        .execute(conn)
        .await
        .map_err(|e| super::unique_as(e, "this form was already submitted"))?;
    Ok(())
}

/// The baseline's case (`case_id`, NULL when the zone has no approved case), start and horizon
/// from a row; its items are added by the caller.
/// Refuse a booking on a zone that is not under way ([`ZoneStatus::check_booking`]: 409).
fn bookable(status: String) -> DbResult<()> {
    let status = parsed("status", status, ZoneStatus::parse)?;
    status.check_booking().map_err(DbError::Conflict)
}

/// Refuse an import into a zone that is not under way (as [`book`] does for one entry).
pub async fn check_bookable(conn: &mut SqliteConnection, zone_id: i64) -> DbResult<()> {
    let status: String = sqlx::query_scalar("SELECT status FROM zones WHERE id = ?")
        .bind(zone_id)
        .fetch_optional(conn)
        .await?
        .ok_or(DbError::NotFound("zone"))?;
    bookable(status)
}

fn baseline_from(row: &SqliteRow) -> DbResult<BookingBaseline> {
    let Some(case_id) = row.try_get::<Option<i64>, _>("case_id")? else {
        return Err(no_baseline());
    };
    Ok(BookingBaseline {
        case_id,
        start: parsed("start_month", row.try_get("start_month")?, Month::parse)?,
        horizon: count("horizon_months", row.try_get("horizon_months")?)?,
        drivers: Vec::new(),
        costs: Vec::new(),
    })
}

fn no_baseline() -> DbError {
    DbError::Conflict("the zone has no approved business case to measure against: approve one first".into())
}

/// Insert one checked entry with its totals; the stored entry is built from what was written.
async fn insert_one(conn: &mut SqliteConnection, zone_id: i64, e: NewEntry, tag: &Tag<'_>) -> DbResult<LedgerEntry> {
    let mut tip = chain::tip(conn, LEDGER_ENTRIES).await?;
    let id = insert_rows(conn, zone_id, std::slice::from_ref(&e), tag, &mut tip).await?;
    add_to_totals(conn, zone_id, std::slice::from_ref(&e)).await?;
    Ok(stored(id, zone_id, e, tag))
}

/// The entry as stored: what was written, normalized as it reads back.
fn stored(id: i64, zone_id: i64, e: NewEntry, tag: &Tag<'_>) -> LedgerEntry {
    let [baseline_intensity, reporting_volume, measured_consumption] = e.inputs.map(|d| d.map(|d| d.normalize()));
    LedgerEntry {
        id: EntryId(id),
        zone_id,
        case_id: e.case_id,
        item: e.item,
        period: e.period,
        method: e.method,
        quantity: e.quantity.map(|d| d.normalize()),
        unit_value: e.unit_value.map(|d| d.normalize()),
        amount: e.amount.normalize(),
        baseline_intensity,
        reporting_volume,
        measured_consumption,
        evidence: e.evidence,
        reverses_id: tag.reverses_id.map(EntryId),
        reversed_by: None,
        booked_at: tag.at.to_string(),
        booked_by: tag.actor.to_string(),
        paid_on: e.paid_on,
        implausible_confirmed: e.implausible_confirmed,
        on_behalf_by: tag.on_behalf.map(str::to_string),
    }
}

/// Insert many checked entries of one zone in the caller's transaction (a CSV import, a
/// scenario's ledger): several rows per statement, and each item's totals updated once.
pub async fn insert_checked(
    conn: &mut SqliteConnection,
    zone_id: i64,
    entries: &[NewEntry],
    tag: &Tag<'_>,
) -> DbResult<()> {
    let mut tip = chain::tip(conn, LEDGER_ENTRIES).await?;
    // About 22 values per row: 500 rows stay far below SQLite's limit of 32,766 bound values.
    for chunk in entries.chunks(500) {
        insert_rows(conn, zone_id, chunk, tag, &mut tip).await?;
    }
    add_to_totals(conn, zone_id, entries).await
}

/// Add entries to their items' running totals (same transaction as the entries): one read and
/// one write per item.
async fn add_to_totals(conn: &mut SqliteConnection, zone_id: i64, entries: &[NewEntry]) -> DbResult<()> {
    let mut sums: std::collections::BTreeMap<String, Totals> = Default::default();
    for e in entries {
        sums.entry(e.item.key()).or_insert(Totals::empty(e.period)).add(&Totals::of(e));
    }
    for (item, added) in sums {
        let row = sqlx::query(
            "SELECT amount, quantity, entries, last_period FROM ledger_totals WHERE zone_id = ? AND item = ?",
        )
        .bind(zone_id)
        .bind(&item)
        .fetch_optional(&mut *conn)
        .await?;
        let before = row.as_ref().map(Totals::from_row).transpose()?.flatten();
        write_totals(conn, zone_id, &item, before, &added).await?;
    }
    Ok(())
}

/// One item's running totals.
struct Totals {
    amount: Decimal,
    quantity: Decimal,
    entries: i64,
    last: Month,
}

impl Totals {
    fn empty(period: Month) -> Self {
        Self { amount: Decimal::ZERO, quantity: Decimal::ZERO, entries: 0, last: period }
    }

    /// One entry's contribution.
    fn of(e: &NewEntry) -> Self {
        Self { amount: e.amount, quantity: e.quantity.unwrap_or_default(), entries: 1, last: e.period }
    }

    /// What differs between kept totals (`self`) and the entries' sums, if anything.
    fn differs_from(&self, sums: &Totals) -> Option<String> {
        let what = if self.amount != sums.amount {
            format!("amount is {} but the entries sum to {}", self.amount.normalize(), sums.amount.normalize())
        } else if self.quantity != sums.quantity {
            format!("quantity is {} but the entries sum to {}", self.quantity.normalize(), sums.quantity.normalize())
        } else if self.entries != sums.entries {
            format!("counts {} entries but there are {}", self.entries, sums.entries)
        } else if self.last != sums.last {
            format!("last period is {} but the entries end in {}", self.last, sums.last)
        } else {
            return None;
        };
        Some(what)
    }

    fn add(&mut self, other: &Totals) {
        self.amount += other.amount;
        self.quantity += other.quantity;
        self.entries += other.entries;
        self.last = self.last.max(other.last);
    }

    /// The `amount, quantity, entries, last_period` columns of a row; `None` when they are
    /// NULL (a LEFT JOIN that found no totals yet).
    fn from_row(r: &SqliteRow) -> DbResult<Option<Self>> {
        let Some(amount) = r.try_get::<Option<String>, _>("amount")? else { return Ok(None) };
        Ok(Some(Self {
            amount: decimal("amount", amount)?,
            quantity: decimal("quantity", r.try_get("quantity")?)?,
            entries: r.try_get("entries")?,
            last: parsed("last_period", r.try_get("last_period")?, Month::parse)?,
        }))
    }
}

/// Store `before + added` as the item's totals: an update of the existing row or a new one
/// (never an upsert: the `ledger_totals_no_replace` trigger refuses inserts over a row).
async fn write_totals(
    conn: &mut SqliteConnection,
    zone_id: i64,
    item: &str,
    before: Option<Totals>,
    added: &Totals,
) -> DbResult<()> {
    let sql = if before.is_some() {
        "UPDATE ledger_totals SET amount = ?3, quantity = ?4, entries = ?5, last_period = ?6
         WHERE zone_id = ?1 AND item = ?2"
    } else {
        "INSERT INTO ledger_totals (zone_id, item, amount, quantity, entries, last_period) VALUES (?1, ?2, ?3, ?4, ?5, ?6)"
    };
    let mut t = before.unwrap_or(Totals::empty(added.last));
    t.add(added);
    sqlx::query(sql)
        .bind(zone_id)
        .bind(item)
        .bind(t.amount.normalize().to_string())
        .bind(t.quantity.normalize().to_string())
        .bind(t.entries)
        .bind(t.last.to_string())
        .execute(conn)
        .await?;
    Ok(())
}

/// Each (zone, item)'s totals summed from the entries themselves, in Rust. Read in pages of
/// [`READ_PAGE`](super::READ_PAGE) rows by id, so the start-up check holds a page, not the whole ledger (all of
/// 240,000 rows at once took the server's peak memory from 56 to 240 MB).
async fn sums_from_entries(conn: &mut SqliteConnection) -> DbResult<std::collections::BTreeMap<(i64, String), Totals>> {
    let mut sums: std::collections::BTreeMap<(i64, String), Totals> = Default::default();
    let mut after = 0_i64;
    loop {
        let rows = sqlx::query(
            "SELECT id, zone_id, driver_id, cost_id, amount, quantity, period FROM ledger_entries
             WHERE id > ? ORDER BY id LIMIT ?",
        )
        .bind(after)
        .bind(super::READ_PAGE)
        .fetch_all(&mut *conn)
        .await?;
        let Some(last) = rows.last() else { return Ok(sums) };
        after = last.try_get("id")?;
        for r in rows {
            let Some(item) = LedgerItem::from_columns(r.try_get("driver_id")?, r.try_get("cost_id")?) else {
                continue;
            };
            let quantity = r.try_get::<Option<String>, _>("quantity")?.map(|q| decimal("quantity", q)).transpose()?;
            let entry = Totals {
                amount: decimal("amount", r.try_get("amount")?)?,
                quantity: quantity.unwrap_or_default(),
                entries: 1,
                last: parsed("period", r.try_get("period")?, Month::parse)?,
            };
            sums.entry((r.try_get("zone_id")?, item.key())).or_insert(Totals::empty(entry.last)).add(&entry);
        }
    }
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
    for ((zone, item), added) in sums_from_entries(&mut tx).await? {
        write_totals(&mut tx, zone, &item, None, &added).await?;
    }
    tx.commit().await?;
    Ok(())
}

/// Compare the kept `ledger_totals` with the sums of the entries: how many totals rows there
/// are, and the first (zone, item) whose row is missing, extra or differs in a column.
pub(super) async fn check_totals(conn: &mut SqliteConnection) -> DbResult<(u64, Option<Problem>)> {
    let mut sums = sums_from_entries(conn).await?;
    let codes: std::collections::HashMap<i64, String> =
        sqlx::query_as("SELECT id, code FROM zones").fetch_all(&mut *conn).await?.into_iter().collect();
    let rows = sqlx::query(
        "SELECT zone_id, item, amount, quantity, entries, last_period FROM ledger_totals ORDER BY zone_id, item",
    )
    .fetch_all(conn)
    .await?;
    let problem = |zone: i64, item: &str, what: String| {
        let code = codes.get(&zone).map(|c| format!(" ({c})")).unwrap_or_default();
        Some(Problem { table: "ledger_totals".into(), row: format!("zone {zone}{code} item {item}"), what })
    };
    let mut first = None;
    for r in &rows {
        let (zone, item): (i64, String) = (r.try_get("zone_id")?, r.try_get("item")?);
        let kept = Totals::from_row(r)?;
        let what = match (kept, sums.remove(&(zone, item.clone()))) {
            (_, None) => Some("a totals row without any entry".to_string()),
            (Some(k), Some(s)) => k.differs_from(&s),
            (None, Some(_)) => None,
        };
        if let (None, Some(what)) = (&first, what) {
            first = problem(zone, &item, what);
        }
    }
    if let (None, Some(((zone, item), s))) = (&first, sums.into_iter().next()) {
        first = problem(zone, &item, format!("missing: its {} entries have no totals row", s.entries));
    }
    Ok((rows.len() as u64, first))
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

/// The latest month with a live entry (neither reversed nor a reversal), per zone (all zones,
/// or one): what makes a month "elapsed" (as `domain::realized_view` counts it from the
/// entries). Entries of every baseline of the history count, not only the current one's.
pub(super) async fn latest_live_in(conn: &mut SqliteConnection, zone: Option<i64>) -> DbResult<Vec<(i64, Month)>> {
    // The unary `+` keeps SQLite off the reverses_id index for `IS NULL` (nearly every row
    // matches it): with it the planner walks (zone_id, period) instead, 0.05 ms instead of
    // 23 ms per zone on the scale data (EXPLAIN QUERY PLAN).
    macro_rules! live {
        () => {
            "+e.reverses_id IS NULL AND NOT EXISTS (SELECT 1 FROM ledger_entries r WHERE r.reverses_id = e.id)"
        };
    }
    let rows: Vec<(i64, String)> = match zone {
        None => {
            sqlx::query_as(concat!(
                "SELECT e.zone_id, MAX(e.period) FROM ledger_entries e WHERE ",
                live!(),
                " GROUP BY e.zone_id"
            ))
            .fetch_all(conn)
            .await?
        }
        // Walks the (zone_id, period) index from the latest month down to the first live entry.
        Some(id) => {
            sqlx::query_as(concat!(
                "SELECT e.zone_id, e.period FROM ledger_entries e WHERE e.zone_id = ? AND ",
                live!(),
                " ORDER BY e.period DESC LIMIT 1"
            ))
            .bind(id)
            .fetch_all(conn)
            .await?
        }
    };
    rows.into_iter().map(|(zone, p)| Ok((zone, parsed("period", p, Month::parse)?))).collect()
}

/// Insert rows in one statement, hash-chained after `tip` (read in this write transaction);
/// returns the last row's id.
async fn insert_rows(
    conn: &mut SqliteConnection,
    zone_id: i64,
    rows: &[NewEntry],
    tag: &Tag<'_>,
    tip: &mut Tip,
) -> DbResult<i64> {
    let stamp = |id| EntryStamp {
        id,
        zone_id,
        reverses_id: tag.reverses_id,
        // Keys live in idempotency_keys since migration 0009.
        idempotency_key: None,
        import_id: tag.import_id,
        booked_at: tag.at,
        booked_by: tag.actor,
        on_behalf_by: tag.on_behalf,
    };
    insert_chained(conn, LEDGER_ENTRIES, tip, rows, |e, id| ledger_entry_row(e, &stamp(id))).await.map_err(
        |e| match &e {
            sqlx::Error::Database(db)
                if tag.reverses_id.is_some()
                    && (db.is_unique_violation() || db.message().contains("already been reversed")) =>
            {
                DbError::Conflict(format!("entry {} has already been reversed", tag.reverses_id.unwrap_or_default()))
            }
            sqlx::Error::Database(db) if db.message().contains("cannot be reversed") => {
                DbError::Conflict("a reversing entry cannot be reversed: book a new entry instead".into())
            }
            _ => DbError::Sqlx(e),
        },
    )?;
    if rows.is_empty() { Err(DbError::NotFound("ledger entry")) } else { Ok(tip.id) }
}

/// Book the reversal of entry `id` (negated quantity and amount, same month and item), with
/// its own evidence note. An entry can be reversed once; a reversal cannot be reversed.
/// `(actor, on_behalf, at)` as for [`book`].
pub async fn reverse(
    conn: &mut SqliteConnection,
    zone_id: i64,
    id: i64,
    evidence: &str,
    (actor, on_behalf, at): (&str, Option<&str>, &str),
) -> DbResult<LedgerEntry> {
    let original =
        entry_in(conn, id).await?.filter(|e| e.zone_id == zone_id).ok_or(DbError::NotFound("ledger entry"))?;
    if let Some(by) = original.reversed_by {
        return Err(DbError::Conflict(format!("entry {id} has already been reversed by entry {by}")));
    }
    if original.reverses_id.is_some() {
        return Err(DbError::Conflict("a reversing entry cannot be reversed: book a new entry instead".into()));
    }
    let entry = NewEntry {
        case_id: original.case_id,
        item: original.item,
        period: original.period,
        method: original.method,
        quantity: original.quantity.map(|q| -q),
        unit_value: original.unit_value,
        amount: -original.amount,
        inputs: [original.baseline_intensity, original.reporting_volume, original.measured_consumption],
        evidence: evidence.to_string(),
        // Dated like the original, so that the pair nets to zero in XNPV too.
        paid_on: original.paid_on,
        implausible_confirmed: false,
    };
    insert_one(conn, zone_id, entry, &Tag { actor, at, on_behalf, import_id: None, reverses_id: Some(id) }).await
}

/// A CSV file to record as an import.
pub struct ImportFile<'a> {
    /// SHA-256 of the normalised rows: the file's identity.
    pub rows_hash: &'a str,
    /// SHA-256 of the bytes as uploaded (imports before migration 0009 were identified by it).
    pub bytes_hash: &'a str,
    /// The uploaded file's name.
    pub file_name: &'a str,
    /// Rows booked.
    pub rows: usize,
    /// Book it even if the same rows were imported before (an explicit override).
    pub again: bool,
}

/// The first earlier import of the same rows: id, time, author.
pub type EarlierImport = (i64, String, String);

/// Record an imported file. The same rows imported before are refused, naming the first
/// import's time and author, unless `again`; then the earlier import is returned for the
/// audit trail.
pub async fn insert_import(
    conn: &mut SqliteConnection,
    zone_id: i64,
    file: &ImportFile<'_>,
    (actor, at): (&str, &str),
) -> DbResult<(i64, Option<EarlierImport>)> {
    let earlier: Option<EarlierImport> = sqlx::query_as(
        "SELECT id, imported_at, imported_by FROM ledger_imports
         WHERE zone_id = ? AND (rows_hash = ? OR content_hash = ?) ORDER BY id LIMIT 1",
    )
    .bind(zone_id)
    .bind(file.rows_hash)
    .bind(file.bytes_hash)
    .fetch_optional(&mut *conn)
    .await?;
    if let Some((id, at, by)) = &earlier
        && !file.again
    {
        return Err(DbError::Conflict(format!(
            "this file has the same rows as import {id}, imported at {at} by {by} (line ends, spaces around \
             cells, the final newline and the column order do not count); nothing was booked. To book it \
             again anyway, tick \"import again although the same rows were imported\""
        )));
    }
    // content_hash is UNIQUE across zones: the same bytes again (a deliberate repeat, or the same
    // file in another zone) get a numbered suffix; every earlier copy counts, so it is new.
    let copies: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM ledger_imports WHERE rows_hash = ? OR content_hash = ?")
        .bind(file.rows_hash)
        .bind(file.bytes_hash)
        .fetch_one(&mut *conn)
        .await?;
    let taken: bool = sqlx::query_scalar("SELECT EXISTS (SELECT 1 FROM ledger_imports WHERE content_hash = ?)")
        .bind(file.bytes_hash)
        .fetch_one(&mut *conn)
        .await?;
    let content_hash = if taken || earlier.is_some() {
        format!("{}+repeat-{copies}", file.bytes_hash)
    } else {
        file.bytes_hash.into()
    };
    let id = sqlx::query_scalar(
        "INSERT INTO ledger_imports (zone_id, content_hash, file_name, row_count, imported_at, imported_by, rows_hash,
                                     repeats_import_id)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(zone_id)
    .bind(content_hash)
    .bind(file.file_name)
    .bind(file.rows as i64)
    .bind(at)
    .bind(actor)
    .bind(file.rows_hash)
    .bind(earlier.as_ref().map(|e| e.0))
    .fetch_one(conn)
    .await?;
    Ok((id, earlier))
}
