//! Loading a whole scenario file in one transaction.

use super::{DbError, DbResult, begin_write, insert_case, insert_zone, put_site};
use crate::domain::Scenario;
use sqlx::SqlitePool;

/// What a load stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LoadSummary {
    /// Zones inserted.
    pub zones: usize,
    /// Case versions inserted.
    pub cases: usize,
}

/// Whether the database has never been loaded (no site settings yet).
pub async fn database_is_empty(pool: &SqlitePool) -> DbResult<bool> {
    let n: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM site_settings").fetch_one(pool).await?;
    Ok(n == 0)
}

/// Store a validated scenario all-or-nothing. Zones whose code already exists are refused.
/// `progress` is called after each zone (the CLI draws a bar with it).
pub async fn load_scenario(
    pool: &SqlitePool,
    scenario: &Scenario,
    actor: &str,
    mut progress: impl FnMut(usize),
) -> DbResult<LoadSummary> {
    let mut tx = begin_write(pool).await?;
    if let Some(site) = &scenario.site {
        put_site(&mut tx, site, actor).await?;
    } else if database_is_empty(pool).await? {
        return Err(DbError::Conflict(
            "the database has no site settings yet: the scenario must carry a \"site\" object".into(),
        ));
    }
    let mut cases = 0;
    for (i, z) in scenario.zones.iter().enumerate() {
        let zone_id = insert_zone(&mut tx, &z.zone, actor).await?;
        for c in &z.cases {
            insert_case(&mut tx, zone_id, c, actor).await?;
            cases += 1;
        }
        progress(i + 1);
    }
    tx.commit().await?;
    Ok(LoadSummary { zones: scenario.zones.len(), cases })
}
