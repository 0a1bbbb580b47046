//! Site settings.

use super::{Actor, AppResult};
use crate::db;
use crate::domain::SiteSettings;
use sqlx::SqlitePool;

/// Store new site settings with their audit row: the settings form and `PATCH /api/v1/site`.
/// The currency is refused once cases hold money (`db::put_site`).
pub async fn change_settings(
    pool: &SqlitePool,
    actor: Actor<'_>,
    site: &SiteSettings,
    now: time::OffsetDateTime,
) -> AppResult<()> {
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    db::put_site(&mut tx, site, actor, &at).await?;
    let detail = format!(
        "currency {}, hurdle {}, tax {}, depreciation {}, one-person approval {}, numbers {}, time zone {}, introductions at a time {}",
        site.currency,
        site.hurdle_rate,
        site.tax_rate.map_or_else(|| "none".into(), |t| t.to_string()),
        site.depreciation_years.map_or_else(|| "none".into(), |y| y.to_string()),
        site.one_person_approval,
        site.number_format.as_str(),
        site.time_zone.as_str(),
        site.introduction_capacity
    );
    db::audit::record(&mut tx, &at, actor, "settings.update", "site", &detail).await?;
    tx.commit().await?;
    Ok(())
}
