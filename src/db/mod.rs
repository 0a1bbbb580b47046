//! The only place with SQL: small named async functions per aggregate, returning domain types.
//!
//! Queries are runtime-checked (`sqlx::query` with static SQL and binds), each covered by the
//! integration tests; we do not commit `.sqlx/` offline data. Money and rates are stored as
//! canonical decimal TEXT and parsed back into `Decimal` here, so nothing sums money in SQL.
//! Every write opens `BEGIN IMMEDIATE`, taking SQLite's write lock up front so that two
//! writers never deadlock upgrading a read transaction.

pub mod audit;
mod cases;
mod chain;
pub mod ledger;
pub mod packs;
mod portfolio;
pub mod readiness;
pub mod roadmap;
mod scenario;
mod site;
mod users;
mod zones;

pub use cases::{CaseFull, CaseVersion};
pub use chain::{Problem, Verification, verify};

use rust_decimal::Decimal;
use sqlx::sqlite::{SqliteConnectOptions, SqliteJournalMode, SqlitePool, SqlitePoolOptions, SqliteSynchronous};
use sqlx::{Sqlite, Transaction};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::str::FromStr;
use std::sync::{Arc, LazyLock, Mutex, PoisonError};
use std::time::Duration;

/// A database failure, classified where the query was made.
#[derive(Debug, thiserror::Error)]
pub enum DbError {
    /// The row asked for does not exist.
    #[error("{0} not found")]
    NotFound(&'static str),
    /// A uniqueness or state rule refused the write; the message is for the user.
    #[error("{0}")]
    Conflict(String),
    /// Input that is valid on its own but not against the stored data (422, per field).
    #[error("{0}")]
    Invalid(crate::domain::FieldErrors),
    /// A stored value could not be read back (a bug or a hand-edited database).
    #[error("stored value in {column} is not valid: {value:?}")]
    Corrupt {
        /// Column name.
        column: &'static str,
        /// The stored text.
        value: String,
    },
    /// Anything else from SQLite or the pool.
    #[error(transparent)]
    Sqlx(#[from] sqlx::Error),
    /// A migration failed.
    #[error(transparent)]
    Migrate(#[from] sqlx::migrate::MigrateError),
}

/// Result alias for this layer.
pub type DbResult<T> = Result<T, DbError>;

/// Who wrote, for the `*_by` columns.
pub type Actor<'a> = &'a str;

/// Open (creating if missing) the SQLite database at `url` with WAL journal, foreign keys,
/// a busy timeout and `synchronous = FULL` (an acknowledged write is on disk).
///
/// The file is created readable by its owner only (0600) before SQLite opens it, and an
/// existing one is narrowed to that; SQLite gives its `-wal` and `-shm` files the database
/// file's permissions (its Unix VFS, `findCreateFileMode` and `unixOpenSharedMemory` in
/// os_unix.c: from memory, checked by `tests/it/chain.rs`).
pub async fn connect(url: &str) -> DbResult<SqlitePool> {
    let options = SqliteConnectOptions::from_str(url)?;
    let file = options.get_filename();
    if !url.contains(":memory:") && !url.contains("mode=memory") && !file.as_os_str().is_empty() {
        owner_only(file)?;
    }
    let options = options
        .create_if_missing(true)
        .journal_mode(SqliteJournalMode::Wal)
        .synchronous(SqliteSynchronous::Full)
        .foreign_keys(true)
        .busy_timeout(Duration::from_secs(5));
    let pool = SqlitePoolOptions::new().max_connections(8).connect_with(options).await?;
    Ok(pool)
}

/// Open an existing database read-only, without migrating or sealing (for `verify`: what is
/// checked is the file as it is; a removed hash must not be sealed again).
pub async fn connect_read_only(url: &str) -> DbResult<SqlitePool> {
    let options = SqliteConnectOptions::from_str(url)?.read_only(true).create_if_missing(false).foreign_keys(true);
    Ok(SqlitePoolOptions::new().max_connections(1).connect_with(options).await?)
}

/// Why the database's applied migrations are not exactly this build's (a missing or failed
/// migration, or one this build does not know), or `None` when they are current.
pub async fn migrations_not_current(pool: &SqlitePool) -> DbResult<Option<String>> {
    let known: bool = sqlx::query_scalar(
        "SELECT EXISTS (SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = '_sqlx_migrations')",
    )
    .fetch_one(pool)
    .await?;
    if !known {
        return Ok(Some("the database has no migrations applied: is it a pilot-ledger database?".into()));
    }
    let applied: Vec<(i64, bool)> =
        sqlx::query_as("SELECT version, success FROM _sqlx_migrations ORDER BY version").fetch_all(pool).await?;
    let migrator = sqlx::migrate!("./migrations");
    for m in migrator.iter() {
        match applied.iter().find(|(v, _)| *v == m.version) {
            Some((_, true)) => {}
            Some((_, false)) => {
                return Ok(Some(format!("migration {} ({}) failed part-way", m.version, m.description)));
            }
            None => {
                return Ok(Some(format!(
                    "migration {} ({}) is not applied: run `pilot-ledger migrate` first (on a copy)",
                    m.version, m.description
                )));
            }
        }
    }
    if let Some((v, _)) = applied.iter().find(|(v, _)| migrator.iter().all(|m| m.version != *v)) {
        return Ok(Some(format!(
            "migration {v} is newer than this pilot-ledger: verify with the release that wrote it"
        )));
    }
    Ok(None)
}

/// Apply the embedded migrations in `migrations/` (append-only), then seal rows written
/// before the hash chains (once) and rebuild missing ledger totals.
pub async fn migrate(pool: &SqlitePool) -> DbResult<()> {
    sqlx::migrate!("./migrations").run(pool).await?;
    chain::seal(pool).await?;
    ledger::rebuild_totals_if_missing(pool).await
}

/// The first (zone, item) whose kept ledger totals disagree with the sums of its entries, if
/// any: the server refuses to start on one (it would serve figures the ledger does not back).
pub async fn totals_problem(pool: &SqlitePool) -> DbResult<Option<Problem>> {
    Ok(ledger::check_totals(&mut *pool.acquire().await?).await?.1)
}

/// A write transaction holding this process's turn to write to its database file.
pub struct WriteTx {
    tx: Transaction<'static, Sqlite>,
    _turn: tokio::sync::OwnedMutexGuard<()>,
}

impl std::ops::Deref for WriteTx {
    type Target = sqlx::SqliteConnection;
    fn deref(&self) -> &Self::Target {
        &self.tx
    }
}

impl std::ops::DerefMut for WriteTx {
    fn deref_mut(&mut self) -> &mut Self::Target {
        &mut self.tx
    }
}

impl WriteTx {
    /// Commit; dropping without it rolls back.
    pub async fn commit(self) -> DbResult<()> {
        Ok(self.tx.commit().await?)
    }
}

/// The turn to write to the pool's database file. Writers of one process queue here in
/// order instead of in SQLite's busy handler, which sleeps up to 100 ms between retries;
/// other processes (the CLI) still meet the busy timeout.
fn write_turn(pool: &SqlitePool) -> Arc<tokio::sync::Mutex<()>> {
    static TURNS: LazyLock<Mutex<HashMap<PathBuf, Arc<tokio::sync::Mutex<()>>>>> = LazyLock::new(Default::default);
    let file = pool.connect_options().get_filename().to_path_buf();
    TURNS.lock().unwrap_or_else(PoisonError::into_inner).entry(file).or_default().clone()
}

/// Start a write transaction holding the write lock.
pub async fn begin_write(pool: &SqlitePool) -> DbResult<WriteTx> {
    let turn = write_turn(pool).lock_owned().await;
    Ok(WriteTx { tx: pool.begin_with("BEGIN IMMEDIATE").await?, _turn: turn })
}

/// Create `path` (or, when it exists, narrow its permissions and those of its `-wal` and
/// `-shm` files) so that only its owner can read it: mode 0600 on Unix.
fn owner_only(path: &Path) -> DbResult<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::{OpenOptionsExt, PermissionsExt};
        match std::fs::OpenOptions::new().write(true).create_new(true).mode(0o600).open(path) {
            Ok(_) => {}
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                for suffix in ["", "-wal", "-shm"] {
                    let mut name = path.as_os_str().to_owned();
                    name.push(suffix);
                    let Ok(meta) = std::fs::metadata(&name) else { continue };
                    let mode = meta.permissions().mode() & 0o777;
                    if mode & 0o077 != 0 {
                        // Someone else's file (a shared mount) stays as it is, with a warning.
                        let file = Path::new(&name).display();
                        match std::fs::set_permissions(&name, std::fs::Permissions::from_mode(0o600)) {
                            Ok(()) => tracing::warn!(%file, "narrowed permissions from {mode:o} to 600"),
                            Err(e) => tracing::warn!(%file, %e, "readable by others ({mode:o}) and cannot be narrowed"),
                        }
                    }
                }
            }
            Err(e) => return Err(file_error(path, e)),
        }
    }
    #[cfg(not(unix))]
    let _ = path;
    Ok(())
}

fn file_error(path: &Path, e: std::io::Error) -> DbError {
    DbError::Sqlx(sqlx::Error::Io(std::io::Error::new(e.kind(), format!("{}: {e}", path.display()))))
}

/// Write a consistent copy of the live database to `path` (SQLite's `VACUUM INTO`, which
/// reads one snapshot while writers carry on); returns its size. An existing file is refused.
/// The copy is created readable by its owner only (0600 on Unix): `VACUUM INTO` fills the
/// empty file made here and keeps its permissions.
pub async fn backup(pool: &SqlitePool, path: &Path) -> DbResult<u64> {
    let target = path.to_str().ok_or_else(|| DbError::Conflict("the backup path must be valid UTF-8".into()))?;
    let mut create = std::fs::OpenOptions::new();
    create.write(true).create_new(true);
    #[cfg(unix)]
    std::os::unix::fs::OpenOptionsExt::mode(&mut create, 0o600);
    match create.open(path) {
        Ok(_) => {}
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            return Err(DbError::Conflict(format!("{} exists already; choose a new file", path.display())));
        }
        Err(e) => return Err(file_error(path, e)),
    }
    if let Err(e) = sqlx::query("VACUUM INTO ?").bind(target).execute(pool).await {
        // Only the empty file made above, never someone else's.
        let _ = std::fs::remove_file(path);
        return Err(e.into());
    }
    Ok(std::fs::metadata(path).map(|m| m.len()).unwrap_or(0))
}

/// Checkpoint the WAL into the database file and truncate it, then close the pool; the last
/// connection to close removes the `-wal` and `-shm` files. Called on a graceful stop.
pub async fn close(pool: &SqlitePool) -> DbResult<()> {
    sqlx::query("PRAGMA wal_checkpoint(TRUNCATE)").execute(pool).await?;
    pool.close().await;
    Ok(())
}

/// `at` as RFC 3339 UTC text, the one timestamp format of the database. Writes take "now" from
/// their caller: the app's clock (`AppState.clock`) on requests, the system clock on the
/// command line.
pub fn timestamp(at: time::OffsetDateTime) -> String {
    at.to_offset(time::UtcOffset::UTC).format(&time::format_description::well_known::Rfc3339).unwrap_or_default()
}

/// Parse a stored decimal column.
fn decimal(column: &'static str, text: String) -> DbResult<Decimal> {
    Decimal::from_str(&text).map_err(|_| DbError::Corrupt { column, value: text })
}

/// Parse a stored non-negative count column.
fn count(column: &'static str, value: i64) -> DbResult<u32> {
    u32::try_from(value).map_err(|_| DbError::Corrupt { column, value: value.to_string() })
}

/// Parse a stored enum column with its domain parser.
fn parsed<T>(column: &'static str, text: String, parse: impl Fn(&str) -> Result<T, String>) -> DbResult<T> {
    parse(&text).map_err(|_| DbError::Corrupt { column, value: text })
}

/// Map a UNIQUE violation to a user-facing conflict.
fn unique_as(err: sqlx::Error, message: impl Into<String>) -> DbError {
    match &err {
        sqlx::Error::Database(db) if db.is_unique_violation() => DbError::Conflict(message.into()),
        _ => DbError::Sqlx(err),
    }
}

use cases::case_full_in;
pub use cases::{
    add_cost, add_driver, approve_case, baseline_history, baseline_of, case_full, copy_case, delete_cost,
    delete_driver, history_of, insert_case, list_cases, reject_case, submit_case, update_header,
};
pub use portfolio::{Snapshot, generation, snapshot};
pub use scenario::{LoadSummary, database_is_empty, load_scenario};
pub use site::{get_site, number_format, page_settings, put_site};
pub use users::{
    NewToken, SessionRow, TokenRow, TokenUse, User, count_users, delete_session, get_session, get_user, insert_session,
    insert_token, insert_user, list_tokens, list_users, revoke_token, revoke_user_tokens, set_password, token_use,
    touch_session, touch_token, update_user, user_for_login,
};
pub use zones::{get_zone, insert_zone, list_zones, set_zone_status, update_zone};

/// Rows read per statement when a whole table is walked in id order (`verify`, the seal and
/// the start-up totals check): memory stays at one page, not the whole ledger.
const READ_PAGE: i64 = 5_000;
use zones::{get_zone_in, list_zones_in};
