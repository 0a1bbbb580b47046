//! Zones.

use super::{DbError, DbResult, parsed, unique_as};
use crate::domain::{FieldErrors, NewZone, Zone, ZoneStatus};
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

/// `SELECT <zone columns> <rest>` as one static string.
macro_rules! select_zone {
    ($rest:literal) => {
        concat!(
            "SELECT id, code, name, description, owner, status, created_at, created_by, updated_at, updated_by ",
            $rest
        )
    };
}

fn zone_from(row: &SqliteRow) -> DbResult<Zone> {
    Ok(Zone {
        id: row.try_get("id")?,
        code: row.try_get("code")?,
        name: row.try_get("name")?,
        description: row.try_get("description")?,
        owner: row.try_get("owner")?,
        status: parsed("status", row.try_get("status")?, ZoneStatus::parse)?,
        created_at: row.try_get("created_at")?,
        created_by: row.try_get("created_by")?,
        updated_at: row.try_get("updated_at")?,
        updated_by: row.try_get("updated_by")?,
        // Filled from the zone's columns by the migration that adds them.
        area: String::new(),
        needs: Vec::new(),
    })
}

/// Every zone, by code.
pub async fn list_zones(pool: &SqlitePool) -> DbResult<Vec<Zone>> {
    list_zones_in(&mut *pool.acquire().await?).await
}

/// [`list_zones`] inside the caller's transaction.
pub(super) async fn list_zones_in(conn: &mut SqliteConnection) -> DbResult<Vec<Zone>> {
    let rows = sqlx::query(select_zone!("FROM zones ORDER BY code")).fetch_all(conn).await?;
    rows.iter().map(zone_from).collect()
}

/// One zone.
pub async fn get_zone(pool: &SqlitePool, id: i64) -> DbResult<Zone> {
    get_zone_in(&mut *pool.acquire().await?, id).await
}

/// [`get_zone`] inside the caller's transaction.
pub(super) async fn get_zone_in(conn: &mut SqliteConnection, id: i64) -> DbResult<Zone> {
    let row = sqlx::query(select_zone!("FROM zones WHERE id = ?")).bind(id).fetch_optional(conn).await?;
    row.as_ref().map(zone_from).transpose()?.ok_or(DbError::NotFound("zone"))
}

/// Insert a zone; a taken code is a conflict the user can fix.
pub async fn insert_zone(conn: &mut SqliteConnection, zone: &NewZone, actor: &str, ts: &str) -> DbResult<i64> {
    let id = sqlx::query_scalar(
        "INSERT INTO zones (code, name, description, owner, status, created_at, created_by, updated_at, updated_by)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(&zone.code)
    .bind(&zone.name)
    .bind(&zone.description)
    .bind(&zone.owner)
    .bind(zone.status.as_str())
    .bind(ts)
    .bind(actor)
    .bind(ts)
    .bind(actor)
    .fetch_one(conn)
    .await
    .map_err(|e| unique_as(e, format!("a zone with code {} already exists", zone.code)))?;
    Ok(id)
}

/// Check that the zone may move to `to` ([`ZoneStatus::check_move`]); returns its current
/// status. A refused move is a conflict naming the allowed next states.
async fn check_status_move(conn: &mut SqliteConnection, id: i64, to: ZoneStatus) -> DbResult<ZoneStatus> {
    let from = get_zone_in(conn, id).await?.status;
    if from == to {
        return Ok(from);
    }
    let (booked, baseline): (bool, bool) = sqlx::query_as(
        "SELECT EXISTS (SELECT 1 FROM ledger_entries WHERE zone_id = ?),
                EXISTS (SELECT 1 FROM case_versions WHERE zone_id = ? AND state = 'approved')",
    )
    .bind(id)
    .bind(id)
    .fetch_one(&mut *conn)
    .await?;
    from.check_move(to, booked, baseline).map_err(DbError::Conflict)?;
    Ok(from)
}

/// Move a zone along its lifecycle; returns the status it left.
pub async fn set_zone_status(
    conn: &mut SqliteConnection,
    id: i64,
    to: ZoneStatus,
    actor: &str,
    at: &str,
) -> DbResult<ZoneStatus> {
    let from = check_status_move(conn, id, to).await?;
    sqlx::query("UPDATE zones SET status = ?, updated_at = ?, updated_by = ? WHERE id = ?")
        .bind(to.as_str())
        .bind(at)
        .bind(actor)
        .bind(id)
        .execute(conn)
        .await?;
    Ok(from)
}

/// Replace a zone's fields; a status change follows the lifecycle ([`set_zone_status`]'s rule).
pub async fn update_zone(conn: &mut SqliteConnection, id: i64, zone: &NewZone, actor: &str, at: &str) -> DbResult<()> {
    // On the zone form the refusal belongs beside the status field.
    check_status_move(conn, id, zone.status).await.map_err(|e| match e {
        DbError::Conflict(msg) => DbError::Invalid(FieldErrors::one("status", msg)),
        other => other,
    })?;
    let done = sqlx::query(
        "UPDATE zones SET code = ?, name = ?, description = ?, owner = ?, status = ?, updated_at = ?, updated_by = ?
         WHERE id = ?",
    )
    .bind(&zone.code)
    .bind(&zone.name)
    .bind(&zone.description)
    .bind(&zone.owner)
    .bind(zone.status.as_str())
    .bind(at)
    .bind(actor)
    .bind(id)
    .execute(conn)
    .await
    .map_err(|e| unique_as(e, format!("a zone with code {} already exists", zone.code)))?;
    if done.rows_affected() == 0 {
        return Err(DbError::NotFound("zone"));
    }
    Ok(())
}
