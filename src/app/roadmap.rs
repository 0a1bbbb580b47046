//! Named roadmap plans: the one write path for saving a plan's inputs as a new version, and
//! the readers of stored versions.

use super::{Actor, AppResult, Error};
use crate::domain::RoadmapQuery;
use sqlx::SqlitePool;
use time::OffsetDateTime;

/// One stored version of a named plan: its inputs, who saved it and when.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PlanVersion {
    /// Row id.
    pub id: i64,
    /// The plan's name.
    pub name: String,
    /// 1 for the first save under this name, then 2, 3 ...
    pub version: u32,
    /// The inputs as entered.
    pub inputs: RoadmapQuery,
    /// RFC 3339 time of the save.
    pub created_at: String,
    /// Who saved it.
    pub created_by: String,
}

/// Save `inputs` as the next version of the plan `name`.
pub async fn save_plan(
    pool: &SqlitePool,
    actor: Actor<'_>,
    name: &str,
    inputs: &RoadmapQuery,
    now: OffsetDateTime,
) -> AppResult<PlanVersion> {
    let _ = (pool, actor, name, inputs, now);
    Err(Error::Conflict("not built yet".into()))
}

/// Every stored version, newest first.
pub async fn plans(pool: &SqlitePool) -> AppResult<Vec<PlanVersion>> {
    let _ = pool;
    Ok(Vec::new())
}

/// One stored version.
pub async fn plan(pool: &SqlitePool, id: i64) -> AppResult<PlanVersion> {
    let _ = (pool, id);
    Err(Error::NotFound("plan"))
}
