//! Zones: creating and changing them (with their area and needs), lifecycle moves.

use super::{Actor, AppResult, invalid};
use crate::db;
use crate::domain::{NewZone, Zone, ZoneId, ZoneStatus};
use sqlx::SqlitePool;

/// Store a new zone with its area and needs and its audit row: the zone list's form and
/// `POST /api/v1/zones`. A taken code is a conflict; needs that name no zone are refused on
/// `needs` (`db::insert_zone`).
pub async fn create(pool: &SqlitePool, actor: Actor<'_>, zone: &NewZone, now: time::OffsetDateTime) -> AppResult<Zone> {
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    let id = db::insert_zone(&mut tx, zone, actor, &at).await?;
    let mut detail = zone.code.clone();
    if !zone.needs.is_empty() {
        detail.push_str(&format!("; needs {}", zone.needs.join(", ")));
    }
    if !zone.area.is_empty() {
        detail.push_str(&format!("; area {}", zone.area));
    }
    db::audit::record(&mut tx, &at, actor, "zone.create", &format!("zone {id}"), &detail).await?;
    tx.commit().await?;
    Ok(db::get_zone(pool, id).await?)
}

/// Replace zone `id`'s fields, area and needs, with its audit row: the zone page's form. A
/// status change follows the lifecycle; needs that name no zone, the zone itself, or close a
/// cycle are refused on `needs` (`db::update_zone`).
pub async fn update(
    pool: &SqlitePool,
    actor: Actor<'_>,
    ZoneId(id): ZoneId,
    zone: &NewZone,
    now: time::OffsetDateTime,
) -> AppResult<Zone> {
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    db::update_zone(&mut tx, id, zone, actor, &at).await?;
    let needs = if zone.needs.is_empty() { "no other zone".to_string() } else { zone.needs.join(", ") };
    let area = if zone.area.is_empty() { "no area".to_string() } else { format!("area {}", zone.area) };
    let detail = format!("{} {} {}; needs {needs}; {area}", zone.code, zone.name, zone.status);
    db::audit::record(&mut tx, &at, actor, "zone.update", &format!("zone {id}"), &detail).await?;
    tx.commit().await?;
    Ok(db::get_zone(pool, id).await?)
}

/// Move zone `id` to the status named `status` along its lifecycle, with its audit row. A
/// refused move is a conflict naming the allowed next states (`db::set_zone_status`).
pub async fn change_status(
    pool: &SqlitePool,
    actor: Actor<'_>,
    ZoneId(id): ZoneId,
    status: &str,
    now: time::OffsetDateTime,
) -> AppResult<Zone> {
    let to = ZoneStatus::parse(status).map_err(|msg| invalid("status", msg))?;
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    let from = db::set_zone_status(&mut tx, id, to, actor, &at).await?;
    db::audit::record(&mut tx, &at, actor, "zone.status", &format!("zone {id}"), &format!("{from} -> {to}")).await?;
    tx.commit().await?;
    Ok(db::get_zone(pool, id).await?)
}
