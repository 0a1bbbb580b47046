//! Zones.

use super::{DbError, DbResult, parsed, unique_as};
use crate::domain::{FieldErrors, NewZone, Zone, ZoneStatus, cycle_message, cycle_through};
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};
use std::collections::{BTreeSet, HashMap};

/// `SELECT <zone columns> <rest>` as one static string.
macro_rules! select_zone {
    ($rest:literal) => {
        concat!(
            "SELECT id, code, name, description, owner, status, created_at, created_by, updated_at, updated_by, area,
                    (SELECT group_concat(n.code, ' ') FROM zone_needs d JOIN zones n ON n.id = d.needs_id
                     WHERE d.zone_id = zones.id) AS needs ",
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
        area: row.try_get("area")?,
        needs: needs_from(row.try_get("needs")?),
    })
}

/// The needs' codes from their space-separated list, sorted (SQLite's group_concat keeps no
/// order).
fn needs_from(list: Option<String>) -> Vec<String> {
    let mut codes: Vec<String> = list.unwrap_or_default().split_whitespace().map(str::to_string).collect();
    codes.sort();
    codes
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

/// Insert a zone with its needs ([`set_needs`]'s rules); a taken code is a conflict the user
/// can fix.
pub async fn insert_zone(conn: &mut SqliteConnection, zone: &NewZone, actor: &str, ts: &str) -> DbResult<i64> {
    let id = insert_zone_row(conn, zone, actor, ts).await?;
    set_needs(conn, id, &zone.needs, actor, ts).await?;
    Ok(id)
}

/// Insert a zone's row without its needs (a scenario file sets them once every zone of the
/// file is stored, so a zone may need one defined later).
pub(super) async fn insert_zone_row(
    conn: &mut SqliteConnection,
    zone: &NewZone,
    actor: &str,
    ts: &str,
) -> DbResult<i64> {
    let id = sqlx::query_scalar(
        "INSERT INTO zones (code, name, description, owner, status, area, created_at, created_by, updated_at,
                            updated_by)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(&zone.code)
    .bind(&zone.name)
    .bind(&zone.description)
    .bind(&zone.owner)
    .bind(zone.status.as_str())
    .bind(&zone.area)
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
        "UPDATE zones SET code = ?, name = ?, description = ?, owner = ?, status = ?, area = ?, updated_at = ?,
                          updated_by = ?
         WHERE id = ?",
    )
    .bind(&zone.code)
    .bind(&zone.name)
    .bind(&zone.description)
    .bind(&zone.owner)
    .bind(zone.status.as_str())
    .bind(&zone.area)
    .bind(at)
    .bind(actor)
    .bind(id)
    .execute(&mut *conn)
    .await
    .map_err(|e| unique_as(e, format!("a zone with code {} already exists", zone.code)))?;
    if done.rows_affected() == 0 {
        return Err(DbError::NotFound("zone"));
    }
    set_needs(conn, id, &zone.needs, actor, at).await
}

/// Make zone `id` need exactly the zones coded `needs`. Refused (422 on `needs`) when a code
/// names no zone, names the zone itself, or would close a cycle of needs. Rows of needs that
/// stay keep who wrote them and when.
pub(super) async fn set_needs(
    conn: &mut SqliteConnection,
    id: i64,
    needs: &[String],
    actor: &str,
    at: &str,
) -> DbResult<()> {
    // Most zones need nothing: then skip reading every zone (a scenario stores thousands).
    if needs.is_empty() {
        let had: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM zone_needs WHERE zone_id = ?")
            .bind(id)
            .fetch_one(&mut *conn)
            .await?;
        if had == 0 {
            return Ok(());
        }
    }
    let codes: HashMap<i64, String> =
        sqlx::query_as("SELECT id, code FROM zones").fetch_all(&mut *conn).await?.into_iter().collect();
    let ids: HashMap<&str, i64> = codes.iter().map(|(id, code)| (code.as_str(), *id)).collect();
    let unknown: Vec<&str> = needs.iter().map(String::as_str).filter(|c| !ids.contains_key(c)).collect();
    let refuse = |msg: String| DbError::Invalid(FieldErrors::one("needs", msg));
    match unknown.as_slice() {
        [] => {}
        [one] => return Err(refuse(format!("no zone {one}"))),
        many => return Err(refuse(format!("no zones {}", many.join(", ")))),
    }
    let wanted: BTreeSet<i64> = needs.iter().filter_map(|c| ids.get(c.as_str()).copied()).collect();
    let edges: Vec<(i64, i64)> =
        sqlx::query_as("SELECT zone_id, needs_id FROM zone_needs").fetch_all(&mut *conn).await?;
    let mut needs_of: HashMap<i64, Vec<i64>> = HashMap::new();
    let mut had = BTreeSet::new();
    for (zone, needed) in edges {
        if zone == id {
            had.insert(needed);
        } else {
            needs_of.entry(zone).or_default().push(needed);
        }
    }
    if had == wanted {
        return Ok(());
    }
    let wanted_list: Vec<i64> = wanted.iter().copied().collect();
    if let Some(chain) = cycle_through(id, &wanted_list, &needs_of) {
        let named: Vec<&str> = chain.iter().map(|z| codes.get(z).map_or("?", String::as_str)).collect();
        return Err(refuse(cycle_message(&named)));
    }
    for gone in had.difference(&wanted) {
        sqlx::query("DELETE FROM zone_needs WHERE zone_id = ? AND needs_id = ?")
            .bind(id)
            .bind(gone)
            .execute(&mut *conn)
            .await?;
    }
    for new in wanted.difference(&had) {
        sqlx::query("INSERT INTO zone_needs (zone_id, needs_id, created_at, created_by) VALUES (?, ?, ?, ?)")
            .bind(id)
            .bind(new)
            .bind(at)
            .bind(actor)
            .execute(&mut *conn)
            .await?;
    }
    Ok(())
}
