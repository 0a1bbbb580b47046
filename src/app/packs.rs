//! Decision packs: the one write path for making a case pack and a quarterly portfolio pack
//! (pages and the API call these). The caller renders the snapshot (the web layer owns the
//! templates); the action reads the database state first, has the snapshot rendered from it,
//! and stores it only if nothing changed meanwhile, so a pack's recorded state is the state
//! its figures come from.

use super::{Actor, AppResult, Error};
use crate::db;
use crate::domain::CaseId;
use crate::domain::pack::{DbState, PackKind, Snapshot, check_size, quarter_of};
use sqlx::SqlitePool;
use time::OffsetDateTime;

/// Times a pack is rendered again when a write lands while it renders.
const ATTEMPTS: usize = 3;

/// What the renderer is given: when the pack is made and the state it is made from.
#[derive(Debug, Clone)]
pub struct Making {
    /// RFC 3339 UTC, from the app's clock.
    pub made_at: String,
    /// The database state to render.
    pub state: DbState,
}

/// Renders a pack's snapshot from the database as it is (the web layer owns the templates).
pub trait Render {
    /// The caller's error type.
    type Error: From<Error>;
    /// The pack, made at `made.made_at` from `made.state`.
    fn render(&self, made: Making) -> impl Future<Output = Result<Rendered, Self::Error>> + Send;
}

/// A rendered pack: its title and snapshot.
pub struct Rendered {
    /// One-line title for the list.
    pub title: String,
    /// The HTML document and the figures JSON.
    pub snapshot: Snapshot,
}

/// Make a case pack of version `case` at `now`: `render` builds it from the state given (its
/// error type is the caller's). Returns the pack's id.
pub async fn make_case_pack<R: Render>(
    pool: &SqlitePool,
    actor: Actor<'_>,
    now: OffsetDateTime,
    CaseId(case): CaseId,
    render: &R,
) -> Result<i64, R::Error> {
    // A case that does not exist is a 404 before anything is rendered.
    db::case_full(pool, case).await.map_err(Error::from)?;
    make(pool, actor, now, PackKind::Case, &case.to_string(), render).await
}

/// Make the quarterly portfolio pack of `now`'s quarter (`2026-Q4`); returns its id.
pub async fn make_portfolio_pack<R: Render>(
    pool: &SqlitePool,
    actor: Actor<'_>,
    now: OffsetDateTime,
    render: &R,
) -> Result<i64, R::Error> {
    make(pool, actor, now, PackKind::Portfolio, &quarter_of(now), render).await
}

async fn make<R: Render>(
    pool: &SqlitePool,
    actor: Actor<'_>,
    now: OffsetDateTime,
    kind: PackKind,
    subject: &str,
    render: &R,
) -> Result<i64, R::Error> {
    let made_at = db::timestamp(now);
    for _ in 0..ATTEMPTS {
        let state = db::packs::state(pool).await.map_err(Error::from)?;
        let rendered = render.render(Making { made_at: made_at.clone(), state: state.clone() }).await?;
        if let Some(id) = store(pool, actor, kind, subject, &made_at, &state, rendered).await? {
            return Ok(id);
        }
    }
    Err(Error::Conflict("the figures kept changing while the pack was made: make it again".into()).into())
}

/// Store a rendered pack with its audit row, unless the database moved on from `state`
/// while it rendered (`None`: render again).
async fn store(
    pool: &SqlitePool,
    actor: Actor<'_>,
    kind: PackKind,
    subject: &str,
    made_at: &str,
    state: &DbState,
    Rendered { title, snapshot }: Rendered,
) -> AppResult<Option<i64>> {
    check_size(&snapshot).map_err(Error::Conflict)?;
    let mut tx = db::begin_write(pool).await?;
    if db::packs::state_in(&mut tx).await? != *state {
        // A booking, approval or setting landed while it rendered.
        return Ok(None);
    }
    let new = db::packs::NewPack { kind, subject, title: &title, made_at, made_by: actor, state };
    let id = db::packs::insert(&mut tx, &new, &snapshot).await?;
    let detail = format!("{} of {subject}: {title} ({})", kind.label(), state.describe());
    db::audit::record(&mut tx, made_at, actor, "pack.make", &format!("pack {id}"), &detail).await?;
    tx.commit().await?;
    Ok(Some(id))
}
