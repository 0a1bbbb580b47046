//! The portfolio's read model: the change counters of every zone (migration 0005) and, for the
//! zones whose counter moved, the case the figures come from, the ledger totals and the
//! readiness scores, all read in one transaction so the page is one consistent snapshot.

use super::cases::{baseline_history_in, history_of};
use super::{DbResult, case_full_in, get_zone_in, ledger, list_zones_in, readiness};
use crate::domain::{LedgerTotals, Month, Zone, ZoneData};
use rust_decimal::Decimal;
use sqlx::{SqliteConnection, SqlitePool};
use std::collections::HashMap;

/// What [`snapshot`] read.
pub struct Snapshot {
    /// The site-wide change counter.
    pub site: i64,
    /// Every zone's change counter.
    pub counters: Vec<(i64, i64)>,
    /// Full data of the zones `fresh` said were out of date, with their counters.
    pub stale: Vec<(i64, ZoneData)>,
}

/// A number that grows with every change any zone's or the site's counter records: the sum
/// of all counters (each only ever grows, and zones are never deleted). Equal numbers mean
/// the portfolio has not changed.
pub async fn generation(pool: &SqlitePool) -> DbResult<i64> {
    Ok(sqlx::query_scalar(
        "SELECT (SELECT n FROM site_changes WHERE id = 1) + (SELECT COALESCE(SUM(n), 0) FROM zone_changes)",
    )
    .fetch_one(pool)
    .await?)
}

/// Up to this many stale zones, or an eighth of all zones if more, are read one by one; more
/// (a cold cache, a site change) read whole tables once. A zone read alone costs about seven
/// indexed statements; a whole table costs tens of milliseconds at 10,000 zones, so a stream
/// of bookings over a plant group's zones must not tip every read into whole tables.
const FEW: usize = 32;

/// Read the counters, and the data of every zone for which `fresh(zone_id, zone_counter,
/// site_counter)` is false.
pub async fn snapshot(pool: &SqlitePool, fresh: impl Fn(i64, i64, i64) -> bool) -> DbResult<Snapshot> {
    let mut tx = pool.begin().await?;
    let site: i64 = sqlx::query_scalar("SELECT n FROM site_changes WHERE id = 1").fetch_one(&mut *tx).await?;
    let counters: Vec<(i64, i64)> =
        sqlx::query_as("SELECT zone_id, n FROM zone_changes ORDER BY zone_id").fetch_all(&mut *tx).await?;
    let stale_ids: HashMap<i64, i64> = counters.iter().copied().filter(|&(id, n)| !fresh(id, n, site)).collect();
    let mut stale = Vec::with_capacity(stale_ids.len());
    if stale_ids.len() > FEW.max(counters.len() / 8) {
        let mut scores = readiness::scores_in(&mut tx, None).await?;
        let mut totals = totals_by_zone(ledger::totals_in(&mut tx, None).await?);
        for zone in list_zones_in(&mut tx).await? {
            let Some(&n) = stale_ids.get(&zone.id) else { continue };
            let (scores, mut ledger) = (scores.remove(&zone.id), totals.remove(&zone.id));
            // Per zone even here: the index walk is 0.05 ms a zone, the grouped scan of the
            // whole ledger 1.4 s at 2.4 million entries.
            if let Some((_, month)) = ledger::latest_live_in(&mut tx, Some(zone.id)).await?.pop() {
                ledger.get_or_insert_default().latest = Some(month);
            }
            stale.push((n, zone_data(&mut tx, zone, scores, ledger).await?));
        }
    } else {
        for (&id, &n) in &stale_ids {
            let zone = get_zone_in(&mut tx, id).await?;
            let scores = readiness::scores_in(&mut tx, Some(id)).await?.remove(&id);
            let mut ledger = totals_by_zone(ledger::totals_in(&mut tx, Some(id)).await?).remove(&id);
            if let Some((_, month)) = ledger::latest_live_in(&mut tx, Some(id)).await?.pop() {
                ledger.get_or_insert_default().latest = Some(month);
            }
            stale.push((n, zone_data(&mut tx, zone, scores, ledger).await?));
        }
    }
    tx.commit().await?;
    Ok(Snapshot { site, counters, stale })
}

/// Group `ledger_totals` rows by zone: driver amounts. The latest month comes from
/// [`ledger::latest_live_in`]: `last_period` there counts reversed entries too.
fn totals_by_zone(rows: Vec<(i64, String, Decimal, Month)>) -> HashMap<i64, LedgerTotals> {
    let mut totals: HashMap<i64, LedgerTotals> = HashMap::new();
    for (zone, item, amount, _) in rows {
        let t = totals.entry(zone).or_default();
        if let Some(id) = item.strip_prefix("driver:").and_then(|d| d.parse::<i64>().ok()) {
            t.drivers.insert(id, amount);
        }
    }
    totals
}

/// A zone with the case its figures come from: the approved baseline, or else the newest version.
async fn zone_data(
    conn: &mut SqliteConnection,
    zone: Zone,
    scores: Option<HashMap<i64, u8>>,
    ledger: Option<LedgerTotals>,
) -> DbResult<ZoneData> {
    let versions: Vec<(i64, String)> =
        sqlx::query_as("SELECT id, state FROM case_versions WHERE zone_id = ? ORDER BY version")
            .bind(zone.id)
            .fetch_all(&mut *conn)
            .await?;
    let history = history_of(&baseline_history_in(conn, zone.id).await?);
    // The current baseline is the history's last version; no need to read it twice.
    let case = match (&history, versions.last()) {
        (Some(h), _) => Some(h.current().clone()),
        (None, Some((id, _))) => Some(case_full_in(conn, *id).await?.parts()),
        (None, None) => None,
    };
    Ok(ZoneData { scores: scores.unwrap_or_default(), ledger: ledger.unwrap_or_default(), history, zone, case })
}
