//! The portfolio's read model: every zone with the case its figures come from, its ledger and
//! its readiness scores, read in one transaction so the page is one consistent snapshot.

use super::{DbResult, case_full_in, ledger, list_zones_in, readiness};
use crate::domain::{CaseState, ZoneData};
use sqlx::SqlitePool;

/// Every zone (by code) with its baseline, or else its newest version.
pub async fn zone_data(pool: &SqlitePool) -> DbResult<Vec<ZoneData>> {
    let mut tx = pool.begin().await?;
    let scores = readiness::all_scores_in(&mut tx).await?;
    let mut out = Vec::new();
    for zone in list_zones_in(&mut tx).await? {
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
        let entries = ledger::zone_entries_in(&mut tx, zone.id).await?;
        out.push(ZoneData { scores: scores.get(&zone.id).cloned().unwrap_or_default(), zone, case, entries });
    }
    tx.commit().await?;
    Ok(out)
}
