//! Site settings (one row).

use super::{DbError, DbResult, count, decimal, now, parsed};
use crate::domain::{NumberFormat, SiteSettings};
use sqlx::{Row, SqliteConnection, SqlitePool};

/// The site settings; `NotFound` before the first load.
pub async fn get_site(pool: &SqlitePool) -> DbResult<SiteSettings> {
    let row = sqlx::query(
        "SELECT plant_name, currency, hurdle_rate, tax_rate, depreciation_years, default_horizon_months, expert_multiplier,
                number_format
         FROM site_settings WHERE id = 1",
    )
    .fetch_optional(pool)
    .await?
    .ok_or(DbError::NotFound("site settings"))?;
    Ok(SiteSettings {
        plant_name: row.try_get("plant_name")?,
        currency: row.try_get("currency")?,
        hurdle_rate: decimal("hurdle_rate", row.try_get("hurdle_rate")?)?,
        tax_rate: row.try_get::<Option<String>, _>("tax_rate")?.map(|t| decimal("tax_rate", t)).transpose()?,
        depreciation_years: row
            .try_get::<Option<i64>, _>("depreciation_years")?
            .map(|y| count("depreciation_years", y))
            .transpose()?,
        default_horizon_months: count("default_horizon_months", row.try_get("default_horizon_months")?)?,
        expert_multiplier: decimal("expert_multiplier", row.try_get("expert_multiplier")?)?,
        number_format: parsed("number_format", row.try_get("number_format")?, NumberFormat::parse)?,
    })
}

/// The site's number format; the default before the first load.
pub async fn number_format(pool: &SqlitePool) -> DbResult<NumberFormat> {
    let text: Option<String> =
        sqlx::query_scalar("SELECT number_format FROM site_settings WHERE id = 1").fetch_optional(pool).await?;
    text.map_or(Ok(NumberFormat::default()), |t| parsed("number_format", t, NumberFormat::parse))
}

/// Insert or replace the site settings.
pub async fn put_site(conn: &mut SqliteConnection, site: &SiteSettings, actor: &str) -> DbResult<()> {
    sqlx::query(
        "INSERT INTO site_settings (id, plant_name, currency, hurdle_rate, tax_rate, depreciation_years,
                                    default_horizon_months, expert_multiplier, number_format, updated_at, updated_by)
         VALUES (1, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
         ON CONFLICT (id) DO UPDATE SET plant_name = excluded.plant_name, currency = excluded.currency,
             hurdle_rate = excluded.hurdle_rate, tax_rate = excluded.tax_rate,
             depreciation_years = excluded.depreciation_years,
             default_horizon_months = excluded.default_horizon_months,
             expert_multiplier = excluded.expert_multiplier, number_format = excluded.number_format,
             updated_at = excluded.updated_at, updated_by = excluded.updated_by",
    )
    .bind(&site.plant_name)
    .bind(&site.currency)
    .bind(site.hurdle_rate.to_string())
    .bind(site.tax_rate.map(|t| t.to_string()))
    .bind(site.depreciation_years.map(i64::from))
    .bind(i64::from(site.default_horizon_months))
    .bind(site.expert_multiplier.to_string())
    .bind(site.number_format.as_str())
    .bind(now())
    .bind(actor)
    .execute(conn)
    .await?;
    Ok(())
}
