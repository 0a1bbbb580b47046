//! Site settings (one row).

use super::{DbError, DbResult, count, decimal, parsed};
use crate::domain::{FieldErrors, NumberFormat, PlantZone, SiteSettings};
use sqlx::{Row, SqliteConnection, SqlitePool};

/// The site settings; `NotFound` before the first load.
pub async fn get_site(pool: &SqlitePool) -> DbResult<SiteSettings> {
    get_site_in(&mut *pool.acquire().await?).await
}

/// [`get_site`] inside the caller's transaction.
pub(super) async fn get_site_in(conn: &mut SqliteConnection) -> DbResult<SiteSettings> {
    let row = sqlx::query(
        "SELECT plant_name, currency, hurdle_rate, tax_rate, depreciation_years, default_horizon_months, expert_multiplier,
                number_format, one_person_approval, time_zone, introduction_capacity
         FROM site_settings WHERE id = 1",
    )
    .fetch_optional(conn)
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
        one_person_approval: row.try_get::<i64, _>("one_person_approval")? != 0,
        time_zone: parsed("time_zone", row.try_get("time_zone")?, PlantZone::parse)?,
        introduction_capacity: count("introduction_capacity", row.try_get("introduction_capacity")?)?,
    })
}

/// The site's number format; the default before the first load.
pub async fn number_format(pool: &SqlitePool) -> DbResult<NumberFormat> {
    Ok(page_settings(pool).await?.0)
}

/// What every page needs to write figures and timestamps: the site's number format and time
/// zone, in one read; the defaults (decimal point, UTC) before the first load.
pub async fn page_settings(pool: &SqlitePool) -> DbResult<(NumberFormat, PlantZone)> {
    let row: Option<(String, String)> =
        sqlx::query_as("SELECT number_format, time_zone FROM site_settings WHERE id = 1").fetch_optional(pool).await?;
    match row {
        None => Ok((NumberFormat::default(), PlantZone::default())),
        Some((numbers, zone)) => {
            Ok((parsed("number_format", numbers, NumberFormat::parse)?, parsed("time_zone", zone, PlantZone::parse)?))
        }
    }
}

/// Insert or replace the site settings. The currency is refused (a field error) once any case
/// holds money or anything is booked: stored amounts would be relabelled, not converted.
pub async fn put_site(conn: &mut SqliteConnection, site: &SiteSettings, actor: &str, at: &str) -> DbResult<()> {
    let current: Option<String> =
        sqlx::query_scalar("SELECT currency FROM site_settings WHERE id = 1").fetch_optional(&mut *conn).await?;
    if let Some(current) = current.filter(|c| *c != site.currency) {
        let held: i64 = sqlx::query_scalar(
            "SELECT (SELECT COUNT(*) FROM cost_items) + (SELECT COUNT(*) FROM benefit_drivers)
                  + (SELECT COUNT(*) FROM ledger_entries)",
        )
        .fetch_one(&mut *conn)
        .await?;
        if held > 0 {
            return Err(DbError::Invalid(FieldErrors::one(
                "currency",
                format!(
                    "cannot change from {current}: business cases already hold amounts in {current}, and a new \
                     code would relabel them without converting them"
                ),
            )));
        }
    }
    sqlx::query(
        "INSERT INTO site_settings (id, plant_name, currency, hurdle_rate, tax_rate, depreciation_years,
                                    default_horizon_months, expert_multiplier, number_format, one_person_approval,
                                    time_zone, introduction_capacity, updated_at, updated_by)
         VALUES (1, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
         ON CONFLICT (id) DO UPDATE SET plant_name = excluded.plant_name, currency = excluded.currency,
             hurdle_rate = excluded.hurdle_rate, tax_rate = excluded.tax_rate,
             depreciation_years = excluded.depreciation_years,
             default_horizon_months = excluded.default_horizon_months,
             expert_multiplier = excluded.expert_multiplier, number_format = excluded.number_format,
             one_person_approval = excluded.one_person_approval, time_zone = excluded.time_zone,
             introduction_capacity = excluded.introduction_capacity,
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
    .bind(i64::from(site.one_person_approval))
    .bind(site.time_zone.as_str())
    .bind(i64::from(site.introduction_capacity))
    .bind(at)
    .bind(actor)
    .execute(conn)
    .await?;
    Ok(())
}
