//! Named roadmap plans (migration 0018): append-only versions of a plan's inputs under a name.

use super::{DbError, DbResult};
use crate::domain::{PlanVersion, RoadmapQuery};
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

/// Most versions the list returns: far more than a programme saves, and a bounded answer.
pub const PLAN_LIST_MAX: i64 = 500;

fn plan_of(r: &SqliteRow) -> DbResult<PlanVersion> {
    let text: String = r.try_get("inputs")?;
    let inputs: RoadmapQuery =
        serde_json::from_str(&text).map_err(|_| DbError::Corrupt { column: "roadmap_plans.inputs", value: text })?;
    let version: i64 = r.try_get("version")?;
    Ok(PlanVersion {
        id: r.try_get("id")?,
        name: r.try_get("name")?,
        version: u32::try_from(version)
            .map_err(|_| DbError::Corrupt { column: "roadmap_plans.version", value: version.to_string() })?,
        inputs,
        created_at: r.try_get("created_at")?,
        created_by: r.try_get("created_by")?,
    })
}

/// Insert the next version of the plan `name` (1 for a new name); returns its id and version.
/// Call inside `begin_write`, so that no other save takes the same version meanwhile.
pub async fn insert(
    conn: &mut SqliteConnection,
    name: &str,
    inputs: &RoadmapQuery,
    at: &str,
    by: &str,
) -> DbResult<(i64, u32)> {
    let json =
        serde_json::to_string(inputs).map_err(|e| DbError::Conflict(format!("the inputs cannot be kept: {e}")))?;
    let (id, version): (i64, i64) = sqlx::query_as(
        "INSERT INTO roadmap_plans (name, version, inputs, created_at, created_by)
         VALUES (?1, (SELECT COALESCE(MAX(version), 0) + 1 FROM roadmap_plans WHERE name = ?1), ?2, ?3, ?4)
         RETURNING id, version",
    )
    .bind(name)
    .bind(&json)
    .bind(at)
    .bind(by)
    .fetch_one(conn)
    .await?;
    Ok((id, u32::try_from(version).unwrap_or(u32::MAX)))
}

/// Every stored version, newest first (at most [`PLAN_LIST_MAX`]).
pub async fn list(pool: &SqlitePool) -> DbResult<Vec<PlanVersion>> {
    let rows = sqlx::query(
        "SELECT id, name, version, inputs, created_at, created_by FROM roadmap_plans ORDER BY id DESC LIMIT ?",
    )
    .bind(PLAN_LIST_MAX)
    .fetch_all(pool)
    .await?;
    rows.iter().map(plan_of).collect()
}

/// One stored version.
pub async fn get(pool: &SqlitePool, id: i64) -> DbResult<PlanVersion> {
    let row = sqlx::query("SELECT id, name, version, inputs, created_at, created_by FROM roadmap_plans WHERE id = ?")
        .bind(id)
        .fetch_optional(pool)
        .await?
        .ok_or(DbError::NotFound("plan version"))?;
    plan_of(&row)
}
