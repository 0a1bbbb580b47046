//! Loading a whole scenario file in one transaction.

use super::zones::{insert_zone_row, set_needs};
use super::{DbError, DbResult, begin_write, insert_case, ledger, put_site};
use crate::domain::{EntryKind, FieldErrors, Scenario};
use sqlx::{SqliteConnection, SqlitePool};

/// What a load stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LoadSummary {
    /// Zones inserted.
    pub zones: usize,
    /// Case versions inserted.
    pub cases: usize,
    /// Ledger entries booked.
    pub entries: usize,
}

/// Store one zone's readiness scores and ledger; errors name the scenario's JSON path.
async fn load_zone_extras(
    conn: &mut SqliteConnection,
    i: usize,
    zone_id: i64,
    z: &crate::domain::ZoneScenario,
    (actor, now): (&str, time::OffsetDateTime),
) -> DbResult<usize> {
    let at = super::timestamp(now);
    let mut scores = Vec::with_capacity(z.readiness.len());
    for (key, score) in &z.readiness {
        let id: Option<i64> = sqlx::query_scalar("SELECT id FROM readiness_criteria WHERE key = ?")
            .bind(key)
            .fetch_optional(&mut *conn)
            .await?;
        let id = id.ok_or_else(|| {
            DbError::Invalid(FieldErrors::one(
                format!("zones[{i}].readiness.{key}"),
                "no readiness criterion has this key",
            ))
        })?;
        scores.push((id, Some(*score)));
    }
    super::readiness::set_scores(conn, zone_id, &scores, actor, &at).await?;
    if z.ledger.is_empty() {
        return Ok(0);
    }
    let baseline = ledger::booking_baseline(conn, zone_id).await.map_err(|err| match err {
        DbError::Conflict(msg) => DbError::Invalid(FieldErrors::one(format!("zones[{i}].ledger"), msg)),
        other => other,
    })?;
    // A scenario may not book later months (or payment dates) either.
    let today = now.date();
    let mut errors = FieldErrors::default();
    let mut entries = Vec::with_capacity(z.ledger.len());
    for (j, entry) in z.ledger.iter().enumerate() {
        let prefix = format!("zones[{i}].ledger[{j}].");
        let saving = entry.booking.item.kind() == EntryKind::Saving;
        let Some(&id) = baseline.items_labelled(saving, &entry.item_label).first() else {
            let field = if saving { "driver" } else { "cost" };
            errors.push(format!("{prefix}{field}"), "no item of the approved case has this label");
            continue;
        };
        let mut booking = entry.booking.clone();
        booking.item = crate::domain::LedgerItem::new(booking.item.kind(), id);
        match baseline.check(&booking, today) {
            Ok(e) => entries.push(e),
            Err(fe) => errors.extend_prefixed(&prefix, fe),
        }
    }
    if !errors.is_empty() {
        return Err(DbError::Invalid(errors));
    }
    let tag = ledger::Tag { actor, at: &at, on_behalf: None, import_id: None, reverses_id: None };
    ledger::insert_checked(conn, zone_id, &entries, &tag).await?;
    Ok(z.ledger.len())
}

/// The site settings and every zone with its area and needs as a scenario document
/// ([`crate::domain::layout_document`]): loading it into an empty database gives the same
/// settings and zones.
pub async fn export_layout(pool: &SqlitePool) -> DbResult<serde_json::Value> {
    let site = super::get_site(pool).await?;
    let zones = super::list_zones(pool).await?;
    Ok(crate::domain::layout_document(&site, &zones))
}

/// Whether the database has never been loaded (no site settings yet).
pub async fn database_is_empty(pool: &SqlitePool) -> DbResult<bool> {
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM site_settings").fetch_one(pool).await?;
    Ok(n == 0)
}

/// Store a validated scenario all-or-nothing. Zones whose code already exists are refused.
/// `progress` is called after each zone (the CLI draws a bar with it). `now` stamps the rows
/// and is the date no booking may be later than.
pub async fn load_scenario(
    pool: &SqlitePool,
    scenario: &Scenario,
    (actor, now): (&str, time::OffsetDateTime),
    mut progress: impl FnMut(usize),
) -> DbResult<LoadSummary> {
    let at = super::timestamp(now);
    let mut tx = begin_write(pool).await?;
    if let Some(site) = &scenario.site {
        put_site(&mut tx, site, actor, &at).await.map_err(|e| match e {
            DbError::Invalid(fields) => {
                let mut named = FieldErrors::default();
                named.extend_prefixed("site.", fields);
                DbError::Invalid(named)
            }
            other => other,
        })?;
    } else if database_is_empty(pool).await? {
        return Err(DbError::Conflict(
            "the database has no site settings yet: the scenario must carry a \"site\" object".into(),
        ));
    }
    let (mut cases, mut entries) = (0, 0);
    let mut ids = Vec::with_capacity(scenario.zones.len());
    for (i, z) in scenario.zones.iter().enumerate() {
        let zone_id = insert_zone_row(&mut tx, &z.zone, actor, &at).await?;
        ids.push(zone_id);
        for c in &z.cases {
            insert_case(&mut tx, zone_id, c, actor, &at).await?;
            cases += 1;
        }
        entries += load_zone_extras(&mut tx, i, zone_id, z, (actor, now)).await?;
        progress(i + 1);
    }
    // Needs once every zone of the file is stored: a zone may need one defined after it.
    for (i, (z, id)) in scenario.zones.iter().zip(&ids).enumerate() {
        set_needs(&mut tx, *id, &z.zone.needs, actor, &at).await.map_err(|e| match e {
            DbError::Invalid(fields) => {
                let mut named = FieldErrors::default();
                named.extend_prefixed(&format!("zones[{i}]."), fields);
                DbError::Invalid(named)
            }
            other => other,
        })?;
    }
    tx.commit().await?;
    Ok(LoadSummary { zones: scenario.zones.len(), cases, entries })
}
