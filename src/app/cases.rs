//! Case versions: copy, submit, approve, return.

use super::{Actor, AppResult, invalid};
use crate::db;
use crate::domain::{CaseHeader, CaseId, parse_comment, parse_return_comment};
use sqlx::SqlitePool;
use time::OffsetDateTime;

/// Save version `id` as the zone's next draft named `label`. Returns the new version's id.
pub async fn copy(
    pool: &SqlitePool,
    actor: Actor<'_>,
    CaseId(id): CaseId,
    label: &str,
    now: OffsetDateTime,
) -> AppResult<CaseId> {
    let label = CaseHeader::parse_label(label).map_err(|msg| invalid("label", msg))?;
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    let new_id = db::copy_case(&mut tx, id, &label, actor, &at).await?;
    db::audit::record(&mut tx, &at, actor, "case.copy", &format!("case {new_id}"), &format!("from case {id}")).await?;
    tx.commit().await?;
    Ok(CaseId(new_id))
}

/// A review step on a case version.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReviewStep {
    /// A draft goes up for approval.
    Submit,
    /// A submitted version becomes the zone's baseline (four eyes).
    Approve,
    /// A submitted version goes back to draft with the reason.
    Reject,
}

impl ReviewStep {
    fn action(self) -> &'static str {
        match self {
            Self::Submit => "case.submit",
            Self::Approve => "case.approve",
            Self::Reject => "case.reject",
        }
    }
}

/// Apply a review step with its audit row (who, when, the comment; a comment is required to
/// return a version). The rules are `db::submit_case`, `db::approve_case` and `db::reject_case`.
pub async fn review(
    pool: &SqlitePool,
    actor: Actor<'_>,
    CaseId(id): CaseId,
    step: ReviewStep,
    comment: &str,
    now: OffsetDateTime,
) -> AppResult<()> {
    let comment = match step {
        ReviewStep::Reject => parse_return_comment(comment),
        ReviewStep::Submit | ReviewStep::Approve => parse_comment(comment),
    }
    .map_err(|msg| invalid("comment", msg))?;
    let at = db::timestamp(now);
    let mut tx = db::begin_write(pool).await?;
    let mut detail = match step {
        ReviewStep::Submit => db::submit_case(&mut tx, id, actor, &at, &comment).await.map(|()| String::new()),
        ReviewStep::Approve => {
            db::approve_case(&mut tx, id, actor, &at, &comment).await.map(|k| k.as_str().to_string())
        }
        ReviewStep::Reject => db::reject_case(&mut tx, id, actor, &at, &comment).await.map(|()| String::new()),
    }?;
    if !comment.is_empty() {
        detail = if detail.is_empty() { comment } else { format!("{detail}: {comment}") };
    }
    db::audit::record(&mut tx, &at, actor, step.action(), &format!("case {id}"), &detail).await?;
    tx.commit().await?;
    Ok(())
}
