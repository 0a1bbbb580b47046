//! The portfolio's read model: the change counters of every zone (migration 0005) and, for the
//! zones whose counter moved, the case the figures come from, the ledger totals and the
//! readiness scores, all read in one transaction so the page is one consistent snapshot.

use super::{DbResult, case_full_in, ledger, list_zones_in, readiness};
use crate::domain::{CaseState, LedgerTotals, ZoneData};
use sqlx::SqlitePool;
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

/// Read the counters, and the data of every zone for which `fresh(zone_id, zone_counter,
/// site_counter)` is false.
pub async fn snapshot(pool: &SqlitePool, fresh: impl Fn(i64, i64, i64) -> bool) -> DbResult<Snapshot> {
    let mut tx = pool.begin().await?;
    let site: i64 = sqlx::query_scalar("SELECT n FROM site_changes WHERE id = 1").fetch_one(&mut *tx).await?;
    let counters: Vec<(i64, i64)> =
        sqlx::query_as("SELECT zone_id, n FROM zone_changes ORDER BY zone_id").fetch_all(&mut *tx).await?;
    let stale_ids: HashMap<i64, i64> = counters.iter().copied().filter(|&(id, n)| !fresh(id, n, site)).collect();
    let mut stale = Vec::with_capacity(stale_ids.len());
    if !stale_ids.is_empty() {
        let scores = readiness::all_scores_in(&mut tx).await?;
        let mut totals: HashMap<i64, LedgerTotals> = HashMap::new();
        for (zone, item, amount, last) in ledger::all_totals_in(&mut tx).await? {
            if !stale_ids.contains_key(&zone) {
                continue;
            }
            let t = totals.entry(zone).or_default();
            t.latest = Some(t.latest.map_or(last, |l| l.max(last)));
            if let Some(id) = item.strip_prefix("driver:").and_then(|d| d.parse::<i64>().ok()) {
                t.drivers.insert(id, amount);
            }
        }
        for zone in list_zones_in(&mut tx).await? {
            let Some(&n) = stale_ids.get(&zone.id) else { continue };
            let versions: Vec<(i64, String)> =
                sqlx::query_as("SELECT id, state FROM case_versions WHERE zone_id = ? ORDER BY version")
                    .bind(zone.id)
                    .fetch_all(&mut *tx)
                    .await?;
            let pick =
                versions.iter().find(|(_, s)| s == CaseState::Approved.as_str()).or(versions.last()).map(|(id, _)| *id);
            let case = match pick {
                Some(id) => Some(case_full_in(&mut tx, id).await?.parts()),
                None => None,
            };
            let data = ZoneData {
                scores: scores.get(&zone.id).cloned().unwrap_or_default(),
                ledger: totals.remove(&zone.id).unwrap_or_default(),
                zone,
                case,
            };
            stale.push((n, data));
        }
    }
    tx.commit().await?;
    Ok(Snapshot { site, counters, stale })
}
