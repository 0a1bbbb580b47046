//! Business-case versions with their cost items and benefit drivers.

use super::{DbError, DbResult, count, decimal, now, parsed};
use crate::domain::{
    BenefitDriver, CaseHeader, CaseParts, CaseSpec, CaseState, CostCategory, CostItem, CostKind, DriverKind, Month,
    NewBenefitDriver, NewCostItem,
};
use serde::Serialize;
use sqlx::sqlite::SqliteRow;
use sqlx::{Row, SqliteConnection, SqlitePool};

/// A stored case version's header and bookkeeping.
#[derive(Debug, Clone, Serialize)]
pub struct CaseVersion {
    /// Row id.
    pub id: i64,
    /// Owning zone.
    pub zone_id: i64,
    /// 1, 2, 3... within the zone.
    pub version: u32,
    /// Review state.
    pub state: CaseState,
    /// Header fields.
    #[serde(flatten)]
    pub header: CaseHeader,
    /// Creation time.
    pub created_at: String,
    /// Creator.
    pub created_by: String,
    /// Last change time.
    pub updated_at: String,
    /// Last changed by.
    pub updated_by: String,
}

/// A case version with its items.
#[derive(Debug, Clone, Serialize)]
pub struct CaseFull {
    /// Header and bookkeeping.
    #[serde(flatten)]
    pub case: CaseVersion,
    /// Cost items in entry order.
    pub costs: Vec<CostItem>,
    /// Benefit drivers in entry order.
    pub drivers: Vec<BenefitDriver>,
}

impl CaseFull {
    /// The domain's view of this case: header and items with their ids.
    pub fn parts(&self) -> CaseParts {
        CaseParts {
            id: self.case.id,
            version: self.case.version,
            baseline: self.case.state == CaseState::Approved,
            header: self.case.header.clone(),
            costs: self.costs.iter().map(|c| (c.id, c.item.clone())).collect(),
            drivers: self.drivers.iter().map(|d| (d.id, d.driver.clone())).collect(),
        }
    }
}

macro_rules! select_case {
    ($rest:literal) => {
        concat!(
            "SELECT id, zone_id, version, state, label, horizon_months, start_month, go_live_offset, ramp_up_months,
                    success_probability, created_at, created_by, updated_at, updated_by ",
            $rest
        )
    };
}

fn case_from(row: &SqliteRow) -> DbResult<CaseVersion> {
    Ok(CaseVersion {
        id: row.try_get("id")?,
        zone_id: row.try_get("zone_id")?,
        version: count("version", row.try_get("version")?)?,
        state: parsed("state", row.try_get("state")?, CaseState::parse)?,
        header: CaseHeader {
            label: row.try_get("label")?,
            horizon_months: count("horizon_months", row.try_get("horizon_months")?)?,
            start_month: parsed("start_month", row.try_get("start_month")?, Month::parse)?,
            go_live_offset: count("go_live_offset", row.try_get("go_live_offset")?)?,
            ramp_up_months: count("ramp_up_months", row.try_get("ramp_up_months")?)?,
            success_probability: decimal("success_probability", row.try_get("success_probability")?)?,
        },
        created_at: row.try_get("created_at")?,
        created_by: row.try_get("created_by")?,
        updated_at: row.try_get("updated_at")?,
        updated_by: row.try_get("updated_by")?,
    })
}

/// The versions of one zone's case, oldest first.
pub async fn list_cases(pool: &SqlitePool, zone_id: i64) -> DbResult<Vec<CaseVersion>> {
    let rows = sqlx::query(select_case!("FROM case_versions WHERE zone_id = ? ORDER BY version"))
        .bind(zone_id)
        .fetch_all(pool)
        .await?;
    rows.iter().map(case_from).collect()
}

/// One case version with its cost items and drivers.
pub async fn case_full(pool: &SqlitePool, id: i64) -> DbResult<CaseFull> {
    let mut conn = pool.acquire().await?;
    case_full_in(&mut conn, id).await
}

pub(super) async fn case_full_in(conn: &mut SqliteConnection, id: i64) -> DbResult<CaseFull> {
    let row = sqlx::query(select_case!("FROM case_versions WHERE id = ?")).bind(id).fetch_optional(&mut *conn).await?;
    let case = row.as_ref().map(case_from).transpose()?.ok_or(DbError::NotFound("business case"))?;
    let costs = sqlx::query(
        "SELECT id, label, category, kind, amount, month_offset, escalation, capex FROM cost_items WHERE case_id = ? ORDER BY id",
    )
    .bind(id)
    .fetch_all(&mut *conn)
    .await?
    .iter()
    .map(|r| {
        Ok(CostItem {
            id: r.try_get("id")?,
            item: NewCostItem {
                label: r.try_get("label")?,
                category: parsed("category", r.try_get("category")?, CostCategory::parse)?,
                kind: parsed("kind", r.try_get("kind")?, CostKind::parse)?,
                amount: decimal("amount", r.try_get("amount")?)?,
                month_offset: count("month_offset", r.try_get("month_offset")?)?,
                escalation: decimal("escalation", r.try_get("escalation")?)?,
                capex: r.try_get::<i64, _>("capex")? != 0,
            },
        })
    })
    .collect::<DbResult<Vec<_>>>()?;
    let drivers = sqlx::query(
        "SELECT id, label, kind, unit, qty_low, qty_likely, qty_high, unit_value, escalation
         FROM benefit_drivers WHERE case_id = ? ORDER BY id",
    )
    .bind(id)
    .fetch_all(&mut *conn)
    .await?
    .iter()
    .map(|r| {
        Ok(BenefitDriver {
            id: r.try_get("id")?,
            driver: NewBenefitDriver {
                label: r.try_get("label")?,
                kind: parsed("kind", r.try_get("kind")?, DriverKind::parse)?,
                unit: r.try_get("unit")?,
                qty_low: decimal("qty_low", r.try_get("qty_low")?)?,
                qty_likely: decimal("qty_likely", r.try_get("qty_likely")?)?,
                qty_high: decimal("qty_high", r.try_get("qty_high")?)?,
                unit_value: decimal("unit_value", r.try_get("unit_value")?)?,
                escalation: decimal("escalation", r.try_get("escalation")?)?,
            },
        })
    })
    .collect::<DbResult<Vec<_>>>()?;
    Ok(CaseFull { case, costs, drivers })
}

/// Store a whole case as the zone's next version; returns its id.
pub async fn insert_case(conn: &mut SqliteConnection, zone_id: i64, spec: &CaseSpec, actor: &str) -> DbResult<i64> {
    let exists: Option<i64> =
        sqlx::query_scalar("SELECT id FROM zones WHERE id = ?").bind(zone_id).fetch_optional(&mut *conn).await?;
    if exists.is_none() {
        return Err(DbError::NotFound("zone"));
    }
    let ts = now();
    let h = &spec.header;
    let id: i64 = sqlx::query_scalar(
        "INSERT INTO case_versions (zone_id, version, label, horizon_months, start_month, go_live_offset, ramp_up_months,
                                    success_probability, state, created_at, created_by, updated_at, updated_by)
         VALUES (?, (SELECT COALESCE(MAX(version), 0) + 1 FROM case_versions WHERE zone_id = ?), ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
         RETURNING id",
    )
    .bind(zone_id)
    .bind(zone_id)
    .bind(&h.label)
    .bind(i64::from(h.horizon_months))
    .bind(h.start_month.to_string())
    .bind(i64::from(h.go_live_offset))
    .bind(i64::from(h.ramp_up_months))
    .bind(h.success_probability.to_string())
    .bind(CaseState::Draft.as_str())
    .bind(&ts)
    .bind(actor)
    .bind(&ts)
    .bind(actor)
    .fetch_one(&mut *conn)
    .await?;
    for c in &spec.costs {
        insert_cost_row(conn, id, c, actor).await?;
    }
    for d in &spec.drivers {
        insert_driver_row(conn, id, d, actor).await?;
    }
    // Items go in while the row is a draft: the database freezes approved versions.
    if spec.state != CaseState::Draft {
        set_state(conn, id, spec.state, actor).await?;
    }
    Ok(id)
}

/// Move a version to `state`; approving stamps who and when (the caller checks the move is
/// allowed and supersedes the old baseline first).
pub async fn set_state(conn: &mut SqliteConnection, case_id: i64, state: CaseState, actor: &str) -> DbResult<()> {
    let ts = now();
    let approved = state == CaseState::Approved;
    sqlx::query(
        "UPDATE case_versions SET state = ?, updated_at = ?, updated_by = ?,
                approved_at = CASE WHEN ? THEN ? ELSE approved_at END,
                approved_by = CASE WHEN ? THEN ? ELSE approved_by END
         WHERE id = ?",
    )
    .bind(state.as_str())
    .bind(&ts)
    .bind(actor)
    .bind(approved)
    .bind(&ts)
    .bind(approved)
    .bind(actor)
    .bind(case_id)
    .execute(conn)
    .await
    .map_err(|e| super::unique_as(e, "the zone already has an approved baseline"))?;
    Ok(())
}

/// The zone's approved baseline version, if any.
pub async fn baseline_of(pool: &SqlitePool, zone_id: i64) -> DbResult<Option<CaseFull>> {
    let id: Option<i64> = sqlx::query_scalar("SELECT id FROM case_versions WHERE zone_id = ? AND state = 'approved'")
        .bind(zone_id)
        .fetch_optional(pool)
        .await?;
    match id {
        Some(id) => Ok(Some(case_full(pool, id).await?)),
        None => Ok(None),
    }
}

/// Submit a draft for approval.
pub async fn submit_case(conn: &mut SqliteConnection, case_id: i64, actor: &str) -> DbResult<()> {
    ensure_editable(conn, case_id).await?;
    set_state(conn, case_id, CaseState::Submitted, actor).await
}

/// Approve a submitted version: the zone's previous baseline becomes superseded and this one
/// is frozen as the baseline the ledger is measured against.
pub async fn approve_case(conn: &mut SqliteConnection, case_id: i64, actor: &str) -> DbResult<()> {
    let row =
        sqlx::query(select_case!("FROM case_versions WHERE id = ?")).bind(case_id).fetch_optional(&mut *conn).await?;
    let case = row.as_ref().map(case_from).transpose()?.ok_or(DbError::NotFound("business case"))?;
    if case.state != CaseState::Submitted {
        return Err(DbError::Conflict(format!(
            "version {} is {}: submit it for approval first",
            case.version, case.state
        )));
    }
    sqlx::query("UPDATE case_versions SET state = 'superseded', updated_at = ?, updated_by = ? WHERE zone_id = ? AND state = 'approved'")
        .bind(now())
        .bind(actor)
        .bind(case.zone_id)
        .execute(&mut *conn)
        .await?;
    set_state(conn, case_id, CaseState::Approved, actor).await?;
    sqlx::query(
        "UPDATE zones SET status = 'approved', updated_at = ?, updated_by = ? WHERE id = ? AND status = 'candidate'",
    )
    .bind(now())
    .bind(actor)
    .bind(case.zone_id)
    .execute(conn)
    .await?;
    Ok(())
}

/// Refuse changes to a version that is no longer a draft: approved versions are frozen.
async fn ensure_editable(conn: &mut SqliteConnection, case_id: i64) -> DbResult<CaseHeader> {
    let row =
        sqlx::query(select_case!("FROM case_versions WHERE id = ?")).bind(case_id).fetch_optional(&mut *conn).await?;
    let case = row.as_ref().map(case_from).transpose()?.ok_or(DbError::NotFound("business case"))?;
    if case.state != CaseState::Draft {
        return Err(DbError::Conflict(format!(
            "version {} is {} and cannot be changed; save a new scenario version instead",
            case.version, case.state
        )));
    }
    Ok(case.header)
}

/// Replace a draft's header. Items outside a shortened horizon are refused.
pub async fn update_header(
    conn: &mut SqliteConnection,
    case_id: i64,
    header: &CaseHeader,
    actor: &str,
) -> DbResult<()> {
    ensure_editable(conn, case_id).await?;
    let beyond: i64 = sqlx::query_scalar("SELECT COUNT(*) FROM cost_items WHERE case_id = ? AND month_offset >= ?")
        .bind(case_id)
        .bind(i64::from(header.horizon_months))
        .fetch_one(&mut *conn)
        .await?;
    if beyond > 0 {
        return Err(DbError::Conflict(format!(
            "{beyond} cost item(s) fall after month {}; move or remove them before shortening the horizon",
            header.horizon_months - 1
        )));
    }
    sqlx::query(
        "UPDATE case_versions SET label = ?, horizon_months = ?, start_month = ?, go_live_offset = ?, ramp_up_months = ?,
                                  success_probability = ?, updated_at = ?, updated_by = ?
         WHERE id = ?",
    )
    .bind(&header.label)
    .bind(i64::from(header.horizon_months))
    .bind(header.start_month.to_string())
    .bind(i64::from(header.go_live_offset))
    .bind(i64::from(header.ramp_up_months))
    .bind(header.success_probability.to_string())
    .bind(now())
    .bind(actor)
    .bind(case_id)
    .execute(conn)
    .await?;
    Ok(())
}

async fn touch(conn: &mut SqliteConnection, case_id: i64, actor: &str) -> DbResult<()> {
    sqlx::query("UPDATE case_versions SET updated_at = ?, updated_by = ? WHERE id = ?")
        .bind(now())
        .bind(actor)
        .bind(case_id)
        .execute(conn)
        .await?;
    Ok(())
}

async fn insert_cost_row(conn: &mut SqliteConnection, case_id: i64, c: &NewCostItem, actor: &str) -> DbResult<i64> {
    Ok(sqlx::query_scalar(
        "INSERT INTO cost_items (case_id, label, category, kind, amount, month_offset, escalation, capex, created_at, created_by)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(case_id)
    .bind(&c.label)
    .bind(c.category.as_str())
    .bind(c.kind.as_str())
    .bind(c.amount.to_string())
    .bind(i64::from(c.month_offset))
    .bind(c.escalation.to_string())
    .bind(i64::from(c.capex))
    .bind(now())
    .bind(actor)
    .fetch_one(conn)
    .await?)
}

async fn insert_driver_row(
    conn: &mut SqliteConnection,
    case_id: i64,
    d: &NewBenefitDriver,
    actor: &str,
) -> DbResult<i64> {
    Ok(sqlx::query_scalar(
        "INSERT INTO benefit_drivers (case_id, label, kind, unit, qty_low, qty_likely, qty_high, unit_value, escalation,
                                      created_at, created_by)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
    )
    .bind(case_id)
    .bind(&d.label)
    .bind(d.kind.as_str())
    .bind(&d.unit)
    .bind(d.qty_low.to_string())
    .bind(d.qty_likely.to_string())
    .bind(d.qty_high.to_string())
    .bind(d.unit_value.to_string())
    .bind(d.escalation.to_string())
    .bind(now())
    .bind(actor)
    .fetch_one(conn)
    .await?)
}

/// Add a cost item to a draft; the caller validated it against the draft's horizon.
pub async fn add_cost(conn: &mut SqliteConnection, case_id: i64, c: &NewCostItem, actor: &str) -> DbResult<i64> {
    ensure_editable(conn, case_id).await?;
    let id = insert_cost_row(conn, case_id, c, actor).await?;
    touch(conn, case_id, actor).await?;
    Ok(id)
}

/// Add a benefit driver to a draft.
pub async fn add_driver(conn: &mut SqliteConnection, case_id: i64, d: &NewBenefitDriver, actor: &str) -> DbResult<i64> {
    ensure_editable(conn, case_id).await?;
    let id = insert_driver_row(conn, case_id, d, actor).await?;
    touch(conn, case_id, actor).await?;
    Ok(id)
}

/// Remove a cost item from a draft.
pub async fn delete_cost(conn: &mut SqliteConnection, case_id: i64, cost_id: i64, actor: &str) -> DbResult<()> {
    delete_item(conn, "DELETE FROM cost_items WHERE id = ? AND case_id = ?", "cost item", case_id, cost_id, actor).await
}

/// Remove a benefit driver from a draft.
pub async fn delete_driver(conn: &mut SqliteConnection, case_id: i64, driver_id: i64, actor: &str) -> DbResult<()> {
    delete_item(
        conn,
        "DELETE FROM benefit_drivers WHERE id = ? AND case_id = ?",
        "benefit driver",
        case_id,
        driver_id,
        actor,
    )
    .await
}

/// Delete one item of a draft with `sql` (`id`, `case_id` binds); `what` names it when missing.
async fn delete_item(
    conn: &mut SqliteConnection,
    sql: &'static str,
    what: &'static str,
    case_id: i64,
    item_id: i64,
    actor: &str,
) -> DbResult<()> {
    ensure_editable(conn, case_id).await?;
    let done = sqlx::query(sql).bind(item_id).bind(case_id).execute(&mut *conn).await?;
    if done.rows_affected() == 0 {
        return Err(DbError::NotFound(what));
    }
    touch(conn, case_id, actor).await
}

/// Save a copy of any version as the zone's next draft version, named `label`.
pub async fn copy_case(conn: &mut SqliteConnection, case_id: i64, label: &str, actor: &str) -> DbResult<i64> {
    let full = case_full_in(conn, case_id).await?;
    let spec = CaseSpec {
        header: CaseHeader { label: label.to_string(), ..full.case.header },
        state: CaseState::Draft,
        costs: full.costs.into_iter().map(|c| c.item).collect(),
        drivers: full.drivers.into_iter().map(|d| d.driver).collect(),
    };
    insert_case(conn, full.case.zone_id, &spec, actor).await
}
