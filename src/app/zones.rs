//! Zones: lifecycle moves.

use super::{Actor, AppResult, invalid};
use crate::db;
use crate::domain::{Zone, ZoneId, ZoneStatus};
use sqlx::SqlitePool;

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
