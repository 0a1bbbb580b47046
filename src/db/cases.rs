//! Business-case versions with their cost items and benefit drivers.

use super::{DbError, DbResult, count, decimal, parsed};
use crate::domain::{
    ApprovalKind, ApprovalSettings, BaselineHistory, BenefitDriver, CaseHeader, CaseParts, CaseSpec, CaseState,
    CostCategory, CostItem, CostKind, DriverKind, ExpertHours, InForce, Month, NewBenefitDriver, NewCostItem, Review,
    SiteSettings, ZoneStatus,
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
    /// Edits, submission, approval and return: who, when, with which comment.
    #[serde(flatten)]
    pub review: Review,
    /// The settings of its approval, which its figures keep (approved and superseded versions).
    pub frozen_settings: Option<ApprovalSettings>,
    /// The month from which it is its zone's baseline (approved and superseded versions).
    #[serde(serialize_with = "opt_month")]
    pub in_force_from: Option<Month>,
}

fn opt_month<S: serde::Serializer>(m: &Option<Month>, s: S) -> Result<S::Ok, S::Error> {
    m.map(|m| m.to_string()).serialize(s)
}

impl CaseVersion {
    /// The settings this version's figures are computed with: those of its approval when it
    /// has them, today's otherwise.
    pub fn settings(&self, today: &SiteSettings) -> SiteSettings {
        self.frozen_settings.as_ref().map_or_else(|| today.clone(), |f| f.apply(today))
    }

    /// The notes every page showing this version as a baseline carries: frozen settings,
    /// self-approval, a start before the approval, the latest return.
    pub fn notes(&self, today: &SiteSettings) -> Vec<(&'static str, String)> {
        let mut notes = Vec::new();
        if let Some(f) = &self.frozen_settings {
            notes.push(("frozen-settings", format!("Figures at approval: {}.", f.describe(today))));
        }
        if let Some(n) = self.review.approval_note() {
            notes.push(("self-approved", n));
        }
        if let Some(n) = self.review.retroactive_note(self.header.start_month) {
            notes.push(("retroactive", n));
        }
        if let (Some(by), Some(at), CaseState::Draft) = (&self.review.returned_by, &self.review.returned_at, self.state)
        {
            notes.push(("returned", format!("Returned to draft by {by} on {at}: {}", self.review.return_comment)));
        }
        notes
    }

    /// The review record in words, oldest step first.
    pub fn history(&self) -> Vec<String> {
        let r = &self.review;
        let said = |c: &str| if c.is_empty() { String::new() } else { format!(": {c}") };
        let mut lines = Vec::new();
        if let (Some(by), Some(at)) = (&r.edited_by, &r.edited_at) {
            lines.push(format!("Last edited by {by} on {at}"));
        }
        if let (Some(by), Some(at)) = (&r.submitted_by, &r.submitted_at) {
            lines.push(format!("Submitted by {by} on {at}{}", said(&r.submit_comment)));
        }
        if let (Some(by), Some(at)) = (&r.returned_by, &r.returned_at) {
            lines.push(format!("Returned to draft by {by} on {at}{}", said(&r.return_comment)));
        }
        if let (Some(by), Some(at)) = (&r.approved_by, &r.approved_at) {
            lines.push(format!("Approved by {by} on {at}{}", said(&r.approve_comment)));
        }
        lines
    }
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
            frozen: self.case.frozen_settings.clone(),
            id: self.case.id,
            version: self.case.version,
            baseline: self.case.state == CaseState::Approved,
            header: self.case.header.clone(),
            costs: self.costs.iter().map(|c| (c.id, c.item.clone())).collect(),
            drivers: self.drivers.iter().map(|d| (d.id, d.driver.clone())).collect(),
            cost_uids: self.costs.iter().map(|c| c.item_uid).collect(),
            driver_uids: self.drivers.iter().map(|d| d.item_uid).collect(),
        }
    }
}

macro_rules! select_case {
    ($rest:literal) => {
        concat!(
            "SELECT id, zone_id, version, state, label, horizon_months, start_month, go_live_offset, ramp_up_months,
                    success_probability, created_at, created_by, updated_at, updated_by,
                    edited_at, edited_by, submitted_at, submitted_by, submit_comment, approved_at, approved_by,
                    approve_comment, approval_kind, returned_at, returned_by, return_comment,
                    frozen_currency, frozen_hurdle_rate, frozen_tax_rate, frozen_depreciation_years, in_force_from,
                    editors ",
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
        review: Review {
            edited_at: row.try_get("edited_at")?,
            edited_by: row.try_get("edited_by")?,
            editors: row
                .try_get::<String, _>("editors")?
                .split('\n')
                .filter(|n| !n.is_empty())
                .map(String::from)
                .collect(),
            submitted_at: row.try_get("submitted_at")?,
            submitted_by: row.try_get("submitted_by")?,
            submit_comment: row.try_get("submit_comment")?,
            approved_at: row.try_get("approved_at")?,
            approved_by: row.try_get("approved_by")?,
            approve_comment: row.try_get("approve_comment")?,
            approval_kind: row
                .try_get::<Option<String>, _>("approval_kind")?
                .map(|k| parsed("approval_kind", k, ApprovalKind::parse))
                .transpose()?,
            returned_at: row.try_get("returned_at")?,
            returned_by: row.try_get("returned_by")?,
            return_comment: row.try_get("return_comment")?,
        },
        frozen_settings: frozen_from(row)?,
        in_force_from: row
            .try_get::<Option<String>, _>("in_force_from")?
            .map(|m| parsed("in_force_from", m, Month::parse))
            .transpose()?,
    })
}

/// The frozen settings columns, present together or not at all.
fn frozen_from(row: &SqliteRow) -> DbResult<Option<ApprovalSettings>> {
    let (Some(currency), Some(hurdle)) =
        (row.try_get::<Option<String>, _>("frozen_currency")?, row.try_get::<Option<String>, _>("frozen_hurdle_rate")?)
    else {
        return Ok(None);
    };
    Ok(Some(ApprovalSettings {
        currency,
        hurdle_rate: decimal("frozen_hurdle_rate", hurdle)?,
        tax_rate: row
            .try_get::<Option<String>, _>("frozen_tax_rate")?
            .map(|t| decimal("frozen_tax_rate", t))
            .transpose()?,
        depreciation_years: row
            .try_get::<Option<i64>, _>("frozen_depreciation_years")?
            .map(|y| count("frozen_depreciation_years", y))
            .transpose()?,
    }))
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
        "SELECT id, item_uid, label, category, kind, amount, month_offset, escalation, capex, source FROM cost_items
         WHERE case_id = ? ORDER BY id",
    )
    .bind(id)
    .fetch_all(&mut *conn)
    .await?
    .iter()
    .map(|r| {
        Ok(CostItem {
            id: r.try_get("id")?,
            item_uid: r.try_get("item_uid")?,
            item: NewCostItem {
                label: r.try_get("label")?,
                category: parsed("category", r.try_get("category")?, CostCategory::parse)?,
                kind: parsed("kind", r.try_get("kind")?, CostKind::parse)?,
                amount: decimal("amount", r.try_get("amount")?)?,
                month_offset: count("month_offset", r.try_get("month_offset")?)?,
                escalation: decimal("escalation", r.try_get("escalation")?)?,
                capex: r.try_get::<i64, _>("capex")? != 0,
                source: r.try_get("source")?,
            },
        })
    })
    .collect::<DbResult<Vec<_>>>()?;
    let drivers = sqlx::query(
        "SELECT id, item_uid, label, kind, unit, qty_low, qty_likely, qty_high, unit_value, escalation, hours_spent,
                hours_multiplier, source
         FROM benefit_drivers WHERE case_id = ? ORDER BY id",
    )
    .bind(id)
    .fetch_all(&mut *conn)
    .await?
    .iter()
    .map(|r| {
        Ok(BenefitDriver {
            id: r.try_get("id")?,
            item_uid: r.try_get("item_uid")?,
            driver: NewBenefitDriver {
                label: r.try_get("label")?,
                kind: parsed("kind", r.try_get("kind")?, DriverKind::parse)?,
                unit: r.try_get("unit")?,
                qty_low: decimal("qty_low", r.try_get("qty_low")?)?,
                qty_likely: decimal("qty_likely", r.try_get("qty_likely")?)?,
                qty_high: decimal("qty_high", r.try_get("qty_high")?)?,
                unit_value: decimal("unit_value", r.try_get("unit_value")?)?,
                escalation: decimal("escalation", r.try_get("escalation")?)?,
                expert_hours: match (r.try_get("hours_spent")?, r.try_get("hours_multiplier")?) {
                    (Some(h), Some(m)) => Some(ExpertHours {
                        hours_spent: decimal("hours_spent", h)?,
                        hours_multiplier: decimal("hours_multiplier", m)?,
                    }),
                    _ => None,
                },
                source: r.try_get("source")?,
            },
        })
    })
    .collect::<DbResult<Vec<_>>>()?;
    Ok(CaseFull { case, costs, drivers })
}

/// Store a whole case as the zone's next version; returns its id.
pub async fn insert_case(
    conn: &mut SqliteConnection,
    zone_id: i64,
    spec: &CaseSpec,
    actor: &str,
    at: &str,
) -> DbResult<i64> {
    insert_version(conn, zone_id, spec, (&[], &[]), actor, at).await
}

/// [`insert_case`] with the identities of the first cost items and drivers given.
async fn insert_version(
    conn: &mut SqliteConnection,
    zone_id: i64,
    spec: &CaseSpec,
    (cost_uids, driver_uids): (&[i64], &[i64]),
    actor: &str,
    ts: &str,
) -> DbResult<i64> {
    let exists: Option<i64> =
        sqlx::query_scalar("SELECT id FROM zones WHERE id = ?").bind(zone_id).fetch_optional(&mut *conn).await?;
    if exists.is_none() {
        return Err(DbError::NotFound("zone"));
    }
    let h = &spec.header;
    let id: i64 = sqlx::query_scalar(
        "INSERT INTO case_versions (zone_id, version, label, horizon_months, start_month, go_live_offset, ramp_up_months,
                                    success_probability, state, created_at, created_by, updated_at, updated_by,
                                    edited_at, edited_by, editors)
         VALUES (?, (SELECT COALESCE(MAX(version), 0) + 1 FROM case_versions WHERE zone_id = ?), ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?,
                 ?, ?, char(10) || ? || char(10))
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
    .bind(ts)
    .bind(actor)
    .bind(ts)
    .bind(actor)
    .bind(ts)
    .bind(actor)
    .bind(actor)
    .fetch_one(&mut *conn)
    .await?;
    insert_items(conn, id, spec, cost_uids, driver_uids, actor, ts).await?;
    // Items go in while the row is a draft: the database freezes approved versions. A
    // scenario file's approved version is recorded as loaded, not as a four-eyes approval.
    match spec.state {
        CaseState::Draft => {}
        CaseState::Submitted => mark_submitted(conn, id, actor, ts, "").await?,
        state @ (CaseState::Approved | CaseState::Superseded) => {
            let how = (ApprovalKind::Scenario, "loaded from a scenario file");
            mark_approved(conn, id, state, (actor, ts), how).await?;
        }
    }
    Ok(id)
}

async fn mark_submitted(
    conn: &mut SqliteConnection,
    case_id: i64,
    actor: &str,
    at: &str,
    comment: &str,
) -> DbResult<()> {
    stamp(
        conn,
        "UPDATE case_versions SET state = 'submitted', updated_at = ?, updated_by = ?,
                submitted_at = ?, submitted_by = ?, submit_comment = ?
         WHERE id = ?",
        case_id,
        (actor, at),
        comment,
    )
    .await
}

/// Run a review step's `sql`, binding the time and actor twice (the change and the step),
/// the comment and the version id.
async fn stamp(
    conn: &mut SqliteConnection,
    sql: &'static str,
    case_id: i64,
    (actor, ts): (&str, &str),
    comment: &str,
) -> DbResult<()> {
    sqlx::query(sql).bind(ts).bind(actor).bind(ts).bind(actor).bind(comment).bind(case_id).execute(conn).await?;
    Ok(())
}

/// Record the approval and freeze today's figure settings on the version, in one statement
/// (`state` is approved, or superseded for an older version of a scenario file).
async fn mark_approved(
    conn: &mut SqliteConnection,
    case_id: i64,
    state: CaseState,
    (actor, ts): (&str, &str),
    (kind, comment): (ApprovalKind, &str),
) -> DbResult<()> {
    let from = in_force_from(conn, case_id, kind, ts).await?;
    sqlx::query(
        "UPDATE case_versions SET state = ?, updated_at = ?, updated_by = ?,
                approved_at = ?, approved_by = ?, approval_kind = ?, approve_comment = ?, in_force_from = ?,
                frozen_currency = (SELECT currency FROM site_settings WHERE id = 1),
                frozen_hurdle_rate = (SELECT hurdle_rate FROM site_settings WHERE id = 1),
                frozen_tax_rate = (SELECT tax_rate FROM site_settings WHERE id = 1),
                frozen_depreciation_years = (SELECT depreciation_years FROM site_settings WHERE id = 1)
         WHERE id = ?",
    )
    .bind(state.as_str())
    .bind(ts)
    .bind(actor)
    .bind(ts)
    .bind(actor)
    .bind(kind.as_str())
    .bind(comment)
    .bind(from.to_string())
    .bind(case_id)
    .execute(conn)
    .await
    .map_err(|e| super::unique_as(e, "the zone already has an approved baseline"))?;
    Ok(())
}

/// The month from which a version approved at `ts` is its zone's baseline: the month of its
/// approval, or the month after the zone's latest booked month when that is later (so an
/// approval never changes the expectation of a month already booked); a version loaded from a
/// scenario file is the baseline of record from its own start month.
async fn in_force_from(conn: &mut SqliteConnection, case_id: i64, kind: ApprovalKind, ts: &str) -> DbResult<Month> {
    let (start, latest): (String, Option<String>) = sqlx::query_as(
        "SELECT c.start_month, (SELECT MAX(e.period) FROM ledger_entries e WHERE e.zone_id = c.zone_id)
         FROM case_versions c WHERE c.id = ?",
    )
    .bind(case_id)
    .fetch_one(&mut *conn)
    .await?;
    if kind == ApprovalKind::Scenario {
        return parsed("start_month", start, Month::parse);
    }
    let approved = parsed("approved_at", ts.get(..7).unwrap_or_default().to_string(), Month::parse)?;
    let after_booked = latest.map(|m| parsed("period", m, Month::parse)).transpose()?.map(|m| m.plus(1));
    Ok(after_booked.map_or(approved, |m| m.max(approved)))
}

/// The zone's baseline history: its approved and superseded versions in approval order (the
/// last is the current baseline), each with its items.
pub(super) async fn baseline_history_in(conn: &mut SqliteConnection, zone_id: i64) -> DbResult<Vec<CaseFull>> {
    let ids: Vec<i64> = sqlx::query_scalar(
        "SELECT id FROM case_versions WHERE zone_id = ? AND state IN ('approved', 'superseded')
         ORDER BY state = 'approved', approved_at, id",
    )
    .bind(zone_id)
    .fetch_all(&mut *conn)
    .await?;
    let mut out = Vec::with_capacity(ids.len());
    for id in ids {
        out.push(case_full_in(conn, id).await?);
    }
    Ok(out)
}

/// The domain's baseline history of stored versions in approval order (as
/// [`baseline_history`] reads them); `None` without a current baseline.
pub fn history_of(history: &[CaseFull]) -> Option<BaselineHistory> {
    history.last().filter(|b| b.case.state == CaseState::Approved)?;
    BaselineHistory::new(
        history
            .iter()
            .map(|b| InForce { from: b.case.in_force_from.unwrap_or(b.case.header.start_month), case: b.parts() })
            .collect(),
    )
}

/// [`baseline_history_in`] on a pooled connection.
pub async fn baseline_history(pool: &SqlitePool, zone_id: i64) -> DbResult<Vec<CaseFull>> {
    baseline_history_in(&mut *pool.acquire().await?, zone_id).await
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

async fn version_in(conn: &mut SqliteConnection, case_id: i64) -> DbResult<CaseVersion> {
    let row =
        sqlx::query(select_case!("FROM case_versions WHERE id = ?")).bind(case_id).fetch_optional(&mut *conn).await?;
    row.as_ref().map(case_from).transpose()?.ok_or(DbError::NotFound("business case"))
}

/// Submit a draft for approval, with an optional comment.
pub async fn submit_case(
    conn: &mut SqliteConnection,
    case_id: i64,
    actor: &str,
    at: &str,
    comment: &str,
) -> DbResult<()> {
    ensure_editable(conn, case_id).await?;
    mark_submitted(conn, case_id, actor, at, comment).await
}

/// A submitted version, or the conflict naming what to do first.
async fn submitted(conn: &mut SqliteConnection, case_id: i64, doing: &str) -> DbResult<CaseVersion> {
    let case = version_in(conn, case_id).await?;
    if case.state != CaseState::Submitted {
        return Err(DbError::Conflict(format!(
            "version {} is {}: only a submitted version can be {doing}",
            case.version, case.state
        )));
    }
    Ok(case)
}

/// Approve a submitted version: four eyes unless the site allows one person (the
/// submitter or last editor is refused with a conflict: 403 stays the answer of roles). The zone's previous
/// baseline becomes superseded, this one is frozen with today's figure settings, and a
/// candidate zone becomes approved. Returns how it was approved.
pub async fn approve_case(
    conn: &mut SqliteConnection,
    case_id: i64,
    actor: &str,
    at: &str,
    comment: &str,
) -> DbResult<ApprovalKind> {
    let case = submitted(conn, case_id, "approved").await?;
    let site = super::site::get_site_in(conn).await?;
    let kind = case.review.approval_by(actor, site.one_person_approval).map_err(DbError::Conflict)?;
    sqlx::query("UPDATE case_versions SET state = 'superseded', updated_at = ?, updated_by = ? WHERE zone_id = ? AND state = 'approved'")
        .bind(at)
        .bind(actor)
        .bind(case.zone_id)
        .execute(&mut *conn)
        .await?;
    mark_approved(conn, case_id, CaseState::Approved, (actor, at), (kind, comment)).await?;
    sqlx::query("UPDATE zones SET status = ?, updated_at = ?, updated_by = ? WHERE id = ? AND status = ?")
        .bind(ZoneStatus::Approved.as_str())
        .bind(at)
        .bind(actor)
        .bind(case.zone_id)
        .bind(ZoneStatus::Candidate.as_str())
        .execute(conn)
        .await?;
    Ok(kind)
}

/// Return a submitted version to its author as an editable draft, with the reason. Anyone
/// who may approve may return (the submitter too: withdrawing is a return).
pub async fn reject_case(
    conn: &mut SqliteConnection,
    case_id: i64,
    actor: &str,
    at: &str,
    comment: &str,
) -> DbResult<()> {
    submitted(conn, case_id, "returned").await?;
    stamp(
        conn,
        "UPDATE case_versions SET state = 'draft', updated_at = ?, updated_by = ?,
                returned_at = ?, returned_by = ?, return_comment = ?
         WHERE id = ?",
        case_id,
        (actor, at),
        comment,
    )
    .await
}

/// Refuse changes to a version that is no longer a draft: approved versions are frozen.
async fn ensure_editable(conn: &mut SqliteConnection, case_id: i64) -> DbResult<CaseHeader> {
    let case = version_in(conn, case_id).await?;
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
    at: &str,
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
                                  success_probability = ?, updated_at = ?, updated_by = ?, edited_at = ?, edited_by = ?
         WHERE id = ?",
    )
    .bind(&header.label)
    .bind(i64::from(header.horizon_months))
    .bind(header.start_month.to_string())
    .bind(i64::from(header.go_live_offset))
    .bind(i64::from(header.ramp_up_months))
    .bind(header.success_probability.to_string())
    .bind(at)
    .bind(actor)
    .bind(at)
    .bind(actor)
    .bind(case_id)
    .execute(&mut *conn)
    .await?;
    add_editor(conn, case_id, actor).await
}

/// Add `actor` to the version's editors (once; names without case, as the users table): four
/// eyes compare the approver with every one of them.
async fn add_editor(conn: &mut SqliteConnection, case_id: i64, actor: &str) -> DbResult<()> {
    sqlx::query(
        "UPDATE case_versions SET editors = CASE WHEN editors = '' THEN char(10) ELSE editors END || ? || char(10)
         WHERE id = ? AND instr(lower(editors), lower(char(10) || ? || char(10))) = 0",
    )
    .bind(actor)
    .bind(case_id)
    .bind(actor)
    .execute(conn)
    .await?;
    Ok(())
}

/// Stamp a content change (an item added or removed) as the version's latest edit.
async fn touch(conn: &mut SqliteConnection, case_id: i64, actor: &str, ts: &str) -> DbResult<()> {
    add_editor(conn, case_id, actor).await?;
    sqlx::query("UPDATE case_versions SET updated_at = ?, updated_by = ?, edited_at = ?, edited_by = ? WHERE id = ?")
        .bind(ts)
        .bind(actor)
        .bind(ts)
        .bind(actor)
        .bind(case_id)
        .execute(conn)
        .await?;
    Ok(())
}

/// Insert a draft's items: `cost_uids` / `driver_uids` give the identities of the first items
/// (a copy carries them); the rest take one by label ([`insert_cost_row`]).
async fn insert_items(
    conn: &mut SqliteConnection,
    case_id: i64,
    spec: &CaseSpec,
    cost_uids: &[i64],
    driver_uids: &[i64],
    actor: &str,
    at: &str,
) -> DbResult<()> {
    for (i, c) in spec.costs.iter().enumerate() {
        insert_cost_row(conn, case_id, c, cost_uids.get(i).copied(), (actor, at)).await?;
    }
    for (i, d) in spec.drivers.iter().enumerate() {
        insert_driver_row(conn, case_id, d, driver_uids.get(i).copied(), (actor, at)).await?;
    }
    Ok(())
}

/// Insert a cost item into a draft with identity `uid`; without one it takes the identity of
/// the zone's latest earlier item with the same label that this draft does not carry yet (a
/// deleted and re-added item stays the same item), or else its own id (trigger of 0011).
async fn insert_cost_row(
    conn: &mut SqliteConnection,
    case_id: i64,
    c: &NewCostItem,
    uid: Option<i64>,
    (actor, at): (&str, &str),
) -> DbResult<i64> {
    Ok(sqlx::query_scalar(
        "INSERT INTO cost_items (case_id, label, category, kind, amount, month_offset, escalation, capex, created_at,
                                 created_by, source, item_uid)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?12, COALESCE(?11, (
             SELECT x.item_uid FROM cost_items x JOIN case_versions xv ON xv.id = x.case_id
             WHERE xv.zone_id = (SELECT zone_id FROM case_versions WHERE id = ?1) AND x.label = ?2 AND x.case_id <> ?1
               AND x.item_uid NOT IN (SELECT item_uid FROM cost_items WHERE case_id = ?1 AND item_uid IS NOT NULL)
             ORDER BY xv.version DESC, x.id DESC LIMIT 1)))
         RETURNING id",
    )
    .bind(case_id)
    .bind(&c.label)
    .bind(c.category.as_str())
    .bind(c.kind.as_str())
    .bind(c.amount.to_string())
    .bind(i64::from(c.month_offset))
    .bind(c.escalation.to_string())
    .bind(i64::from(c.capex))
    .bind(at)
    .bind(actor)
    .bind(uid)
    .bind(&c.source)
    .fetch_one(conn)
    .await?)
}

/// Insert a benefit driver into a draft; its identity as for [`insert_cost_row`].
async fn insert_driver_row(
    conn: &mut SqliteConnection,
    case_id: i64,
    d: &NewBenefitDriver,
    uid: Option<i64>,
    (actor, at): (&str, &str),
) -> DbResult<i64> {
    Ok(sqlx::query_scalar(
        "INSERT INTO benefit_drivers (case_id, label, kind, unit, qty_low, qty_likely, qty_high, unit_value, escalation,
                                      created_at, created_by, item_uid, hours_spent, hours_multiplier, source)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, COALESCE(?12, (
             SELECT x.item_uid FROM benefit_drivers x JOIN case_versions xv ON xv.id = x.case_id
             WHERE xv.zone_id = (SELECT zone_id FROM case_versions WHERE id = ?1) AND x.label = ?2 AND x.case_id <> ?1
               AND x.item_uid NOT IN (SELECT item_uid FROM benefit_drivers WHERE case_id = ?1 AND item_uid IS NOT NULL)
             ORDER BY xv.version DESC, x.id DESC LIMIT 1)), ?13, ?14, ?15)
         RETURNING id",
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
    .bind(at)
    .bind(actor)
    .bind(uid)
    .bind(d.expert_hours.map(|x| x.hours_spent.to_string()))
    .bind(d.expert_hours.map(|x| x.hours_multiplier.to_string()))
    .bind(&d.source)
    .fetch_one(conn)
    .await?)
}

/// Add a cost item to a draft; the caller validated it against the draft's horizon.
pub async fn add_cost(
    conn: &mut SqliteConnection,
    case_id: i64,
    c: &NewCostItem,
    actor: &str,
    at: &str,
) -> DbResult<i64> {
    ensure_editable(conn, case_id).await?;
    let id = insert_cost_row(conn, case_id, c, None, (actor, at)).await?;
    touch(conn, case_id, actor, at).await?;
    Ok(id)
}

/// Add a benefit driver to a draft.
pub async fn add_driver(
    conn: &mut SqliteConnection,
    case_id: i64,
    d: &NewBenefitDriver,
    actor: &str,
    at: &str,
) -> DbResult<i64> {
    ensure_editable(conn, case_id).await?;
    let id = insert_driver_row(conn, case_id, d, None, (actor, at)).await?;
    touch(conn, case_id, actor, at).await?;
    Ok(id)
}

/// Remove a cost item from a draft.
pub async fn delete_cost(
    conn: &mut SqliteConnection,
    case_id: i64,
    cost_id: i64,
    actor: &str,
    at: &str,
) -> DbResult<()> {
    let sql = "DELETE FROM cost_items WHERE id = ? AND case_id = ?";
    delete_item(conn, sql, "cost item", (case_id, cost_id), (actor, at)).await
}

/// Remove a benefit driver from a draft.
pub async fn delete_driver(
    conn: &mut SqliteConnection,
    case_id: i64,
    driver_id: i64,
    actor: &str,
    at: &str,
) -> DbResult<()> {
    let sql = "DELETE FROM benefit_drivers WHERE id = ? AND case_id = ?";
    delete_item(conn, sql, "benefit driver", (case_id, driver_id), (actor, at)).await
}

/// Delete one item of a draft with `sql` (`id`, `case_id` binds); `what` names it when missing.
async fn delete_item(
    conn: &mut SqliteConnection,
    sql: &'static str,
    what: &'static str,
    (case_id, item_id): (i64, i64),
    (actor, at): (&str, &str),
) -> DbResult<()> {
    ensure_editable(conn, case_id).await?;
    let done = sqlx::query(sql).bind(item_id).bind(case_id).execute(&mut *conn).await?;
    if done.rows_affected() == 0 {
        return Err(DbError::NotFound(what));
    }
    touch(conn, case_id, actor, at).await
}

/// Save a copy of any version as the zone's next draft version, named `label`.
pub async fn copy_case(conn: &mut SqliteConnection, case_id: i64, label: &str, actor: &str, at: &str) -> DbResult<i64> {
    let full = case_full_in(conn, case_id).await?;
    // The copy's items are the same items: they keep their identities.
    let cost_uids: Vec<i64> = full.costs.iter().map(|c| c.item_uid).collect();
    let driver_uids: Vec<i64> = full.drivers.iter().map(|d| d.item_uid).collect();
    let spec = CaseSpec {
        header: CaseHeader { label: label.to_string(), ..full.case.header },
        state: CaseState::Draft,
        costs: full.costs.into_iter().map(|c| c.item).collect(),
        drivers: full.drivers.into_iter().map(|d| d.driver).collect(),
    };
    insert_version(conn, full.case.zone_id, &spec, (&cost_uids, &driver_uids), actor, at).await
}
