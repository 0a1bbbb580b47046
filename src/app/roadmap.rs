//! Named roadmap plans: the one write path for saving a plan's inputs as a new version, and
//! the readers of stored versions.

use super::{Actor, AppResult, Error};
use crate::db;
use crate::domain::{FieldErrors, NumberFormat, RoadmapParams, RoadmapQuery, parse_plan_name};
use sqlx::SqlitePool;
use time::OffsetDateTime;

pub use crate::domain::PlanVersion;

/// Save `inputs` (numbers in the plain API format) as the next version of the plan `name`;
/// see [`save_plan_in`].
pub async fn save_plan(
    pool: &SqlitePool,
    actor: Actor<'_>,
    name: &str,
    inputs: &RoadmapQuery,
    now: OffsetDateTime,
) -> AppResult<PlanVersion> {
    save_plan_in(pool, actor, name, inputs, NumberFormat::Plain, now).await
}

/// Save `inputs`, numbers typed in `f` (a page form uses the site's format), as the next
/// version of the plan `name` (trimmed) once they read as [`RoadmapParams`]. The budgets are
/// stored in the plain format, one per year, so a stored version reads the same whatever the
/// site's number format is later.
pub async fn save_plan_in(
    pool: &SqlitePool,
    actor: Actor<'_>,
    name: &str,
    inputs: &RoadmapQuery,
    f: NumberFormat,
    now: OffsetDateTime,
) -> AppResult<PlanVersion> {
    let site = db::get_site(pool).await?;
    let mut e = FieldErrors::default();
    let name = e.take("name", parse_plan_name(name));
    let params = match RoadmapParams::parse(inputs, f, RoadmapParams::next_month(now), &site) {
        Ok(p) => Some(p),
        Err(fields) => {
            e.0.extend(fields.0);
            None
        }
    };
    let (Some(name), Some(params)) = (name, params) else { return Err(Error::Invalid(e)) };
    let budgets: Vec<String> = params.budgets.iter().map(|b| b.normalize().to_string()).collect();
    let inputs = RoadmapQuery { budgets: budgets.join(";"), ..inputs.clone() };
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    let (id, version) = db::roadmap::insert(&mut tx, &name, &inputs, &at, actor).await?;
    db::audit::record(&mut tx, &at, actor, "roadmap.save", &format!("plan {id}"), &format!("v{version} of {name}"))
        .await?;
    tx.commit().await?;
    Ok(PlanVersion { id, name, version, inputs, created_at: at, created_by: actor.to_string() })
}

/// Every stored version, newest first.
pub async fn plans(pool: &SqlitePool) -> AppResult<Vec<PlanVersion>> {
    Ok(db::roadmap::list(pool).await?)
}

/// One stored version.
pub async fn plan(pool: &SqlitePool, id: i64) -> AppResult<PlanVersion> {
    Ok(db::roadmap::get(pool, id).await?)
}
