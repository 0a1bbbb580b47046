//! The ledger: booking, reversing and importing, each in one transaction with its audit row.
//! The form, the API and the CSV import call these; a form's one-time token and an API
//! request's Idempotency-Key make a repeat book nothing.

use super::{AppResult, Error};
use crate::db::{self, ledger::Booked};
use crate::domain::{Booking, EntryId, FieldErrors, LedgerEntry, UserId, ZoneId, ledger_csv};
use sqlx::SqlitePool;
use std::sync::Arc;
use time::OffsetDateTime;

/// Who books: the account (one-time tokens and idempotency keys are per user) and its name.
#[derive(Debug, Clone, Copy)]
pub struct Who<'a> {
    /// The user's id.
    pub id: UserId,
    /// The name written into `booked_by` and the audit trail.
    pub name: &'a str,
    /// Who made the API token the user acts with, when someone else did (an admin): written
    /// into `on_behalf_by` and the audit trail ("booked by <issuer> on behalf of <name>").
    pub on_behalf: Option<&'a str>,
}

impl Who<'_> {
    /// What the audit trail adds to a ledger action's detail: nothing, or how it was booked.
    fn audit_note(&self) -> String {
        match self.on_behalf {
            Some(issuer) => {
                format!("; booked by {issuer} on behalf of {} (with a token {issuer} issued)", self.name)
            }
            None => String::new(),
        }
    }
}

/// The outcome of a form or API write: done, or (a form) already done by an earlier submit of
/// the same one-time token, with what that did (`entry 12`, `import 3`).
pub enum Once<T> {
    /// Written now.
    Done(T),
    /// The token was used before: nothing was written.
    Already(String),
}

/// Book one entry with its audit row in one transaction; a form's one-time token is used in
/// the same transaction (a second submit of it books nothing). `today` is the latest date a
/// booking may name; `now` stamps the rows.
pub async fn book(
    pool: &SqlitePool,
    who: Who<'_>,
    ZoneId(zone_id): ZoneId,
    booking: &Booking,
    (today, now): (time::Date, OffsetDateTime),
    key: Option<&db::ledger::Idempotency<'_>>,
    form: Option<&str>,
) -> AppResult<Once<Booked>> {
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    if let Some(token) = form
        && let Some(outcome) = db::ledger::form_outcome(&mut tx, token, who.id.0, zone_id).await?
    {
        return Ok(Once::Already(outcome));
    }
    let booked = db::ledger::book(&mut tx, zone_id, booking, today, (who.name, who.on_behalf, &at), key).await?;
    if let Booked::New(e) = &booked {
        let mut detail = format!("{} {} {} {}", e.kind().as_str(), e.period, e.method.as_str(), e.amount);
        if let Some(paid) = e.paid_on {
            detail.push_str(&format!(" paid on {paid}"));
        }
        if e.implausible_confirmed {
            detail.push_str(" (beyond the plausibility threshold, confirmed by the author)");
        }
        detail.push_str(&who.audit_note());
        db::audit::record(&mut tx, &at, who.name, "ledger.book", &format!("entry {}", e.id), &detail).await?;
        if let Some(token) = form {
            db::ledger::use_form_token(&mut tx, token, who.id.0, zone_id, &format!("entry {}", e.id), &at).await?;
        }
    }
    tx.commit().await?;
    Ok(Once::Done(booked))
}

/// Book the reversal of `entry` with its evidence note and audit row; a form's one-time token
/// is used in the same transaction.
pub async fn reverse(
    pool: &SqlitePool,
    who: Who<'_>,
    ZoneId(zone_id): ZoneId,
    EntryId(entry): EntryId,
    evidence: &str,
    form: Option<&str>,
    now: OffsetDateTime,
) -> AppResult<Once<LedgerEntry>> {
    let at = db::timestamp(now);
    let evidence = crate::domain::required_text(evidence, 80).map_err(|_| {
        Error::Invalid(FieldErrors::one("evidence", "required: why the entry is reversed, at most 80 characters"))
    })?;
    let mut tx = db::begin_write(pool).await?;
    if let Some(token) = form
        && let Some(outcome) = db::ledger::form_outcome(&mut tx, token, who.id.0, zone_id).await?
    {
        return Ok(Once::Already(outcome));
    }
    let r = db::ledger::reverse(&mut tx, zone_id, entry, &evidence, (who.name, who.on_behalf, &at)).await?;
    if let Some(token) = form {
        db::ledger::use_form_token(&mut tx, token, who.id.0, zone_id, &format!("entry {}", r.id), &at).await?;
    }
    db::audit::record(
        &mut tx,
        &at,
        who.name,
        "ledger.reverse",
        &format!("entry {}", r.id),
        &format!("reverses entry {entry}{}", who.audit_note()),
    )
    .await?;
    tx.commit().await?;
    Ok(Once::Done(r))
}

/// An uploaded CSV file.
pub struct Upload<'a> {
    /// The file's name as sent (kept on the import row).
    pub file_name: &'a str,
    /// Its bytes.
    pub bytes: Vec<u8>,
    /// Book the same rows as an earlier import again, on purpose.
    pub again: bool,
}

/// Parse and book a whole CSV file in one transaction: all rows or none. Every bad row is
/// reported with its line number and column. Cells are read in the site's number format, and a
/// decimal-comma site's files are separated by `;`. A file with the same rows as an earlier
/// import is refused unless `again`; a form's one-time token is used in the same transaction.
pub async fn import(
    pool: &SqlitePool,
    who: Who<'_>,
    ZoneId(zone_id): ZoneId,
    Upload { file_name, bytes, again }: Upload<'_>,
    form: Option<&str>,
    (today, now): (time::Date, OffsetDateTime),
) -> AppResult<Once<usize>> {
    let at = db::timestamp(now);
    if bytes.len() > ledger_csv::IMPORT_MAX_BYTES {
        return Err(Error::Invalid(FieldErrors::one(
            "file",
            format!("larger than {} MiB; split it by month", ledger_csv::IMPORT_MAX_BYTES / 1024 / 1024),
        )));
    }
    let day = today;
    let numbers = db::number_format(pool).await?;
    // Parse and check off the async threads and outside the write lock (a large file takes a
    // noticeable fraction of a second); under the lock, the baseline is read again and the rows
    // checked again only if it changed meanwhile, so they are stored against what they were
    // checked with.
    let baseline = db::ledger::booking_baseline(&mut *pool.acquire().await?, zone_id).await?;
    let bytes = Arc::new(bytes);
    let (mut rows, checked_with) = {
        let (bytes, baseline) = (bytes.clone(), baseline.clone());
        super::cpu::run(move || (ledger_csv::checked_rows(&bytes, &baseline, day, numbers), baseline)).await?
    };
    let mut tx = db::begin_write(pool).await?;
    if let Some(token) = form
        && let Some(outcome) = db::ledger::form_outcome(&mut tx, token, who.id.0, zone_id).await?
    {
        return Ok(Once::Already(outcome));
    }
    db::ledger::check_bookable(&mut tx, zone_id).await?;
    let current = db::ledger::booking_baseline(&mut tx, zone_id).await?;
    if current != checked_with {
        rows = ledger_csv::checked_rows(&bytes, &current, day, numbers);
    }
    let (rows, rows_hash) = rows?;
    let file = db::ledger::ImportFile {
        rows_hash: &rows_hash,
        bytes_hash: &crate::auth::sha256_hex(&bytes),
        file_name,
        rows: rows.len(),
        again,
    };
    let (import_id, earlier) = db::ledger::insert_import(&mut tx, zone_id, &file, (who.name, &at)).await?;
    let tag = db::ledger::Tag {
        actor: who.name,
        at: &at,
        on_behalf: who.on_behalf,
        import_id: Some(import_id),
        reverses_id: None,
    };
    db::ledger::insert_checked(&mut tx, zone_id, &rows, &tag).await?;
    let mut detail = format!("{file_name}: {} rows", rows.len());
    if let Some((id, at, by)) = earlier {
        detail.push_str(&format!("; the same rows as import {id} of {at} by {by}, booked again on purpose"));
    }
    detail.push_str(&who.audit_note());
    db::audit::record(&mut tx, &at, who.name, "ledger.import", &format!("import {import_id}"), &detail).await?;
    if let Some(token) = form {
        db::ledger::use_form_token(&mut tx, token, who.id.0, zone_id, &format!("import {import_id}"), &at).await?;
    }
    tx.commit().await?;
    Ok(Once::Done(rows.len()))
}
