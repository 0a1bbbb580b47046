//! The subcommands' work. `main` only parses the configuration and calls [`run`].

use crate::app::{self, users::Account};
use crate::auth::{Clock, SystemClock};
use crate::auth::{Role, new_secret, parse_new_password};
use crate::config::{Command, Config, ServeArgs, TokenCommand, UserCommand};
use crate::db;
use crate::domain::Scenario;
use crate::web::{AppState, app};
use anyhow::{Context, bail};
use sqlx::SqlitePool;
use std::net::SocketAddr;
use std::sync::Arc;
use tokio::net::TcpListener;

/// The demo plant, embedded so that the binary works from any folder.
pub const DEMO_SCENARIO: &str = include_str!("../seed/demo-plant.json");

/// The demo's named plan: three plan years from the month after the load, a yearly capital
/// budget of 80,000 with unspent budget carried forward, and one introduction at a time. The
/// three candidates' one-off outlays are 55,500, 31,000 and 66,000, so two of them do not fit in
/// the first plan year (the budget holds EOL-1 back), and they cannot be introduced at once (the
/// capacity holds PAINT-1 back); the simple plan, by profitability index, starts EOL-1 first and
/// is worth less.
const DEMO_PLAN: (&str, &str, &str, &str) = ("Three-year roll-out", "80000", "1", "true");

/// Site settings for a database started without the demo plant.
const EMPTY_SITE: &str = r#"{"format": "pilot-ledger-scenario", "version": 1,
    "site": {"plant_name": "Our plant", "currency": "EUR", "hurdle_rate": "0.08"}, "zones": []}"#;

/// Run the chosen subcommand.
pub async fn run(config: Config) -> anyhow::Result<()> {
    match config.command.unwrap_or(Command::Serve(ServeArgs::default())) {
        Command::Serve(args) => {
            let pool = prepare(&config.database_url, !args.no_demo, now()).await?;
            let listener =
                TcpListener::bind(args.addr).await.with_context(|| format!("cannot listen on {}", args.addr))?;
            serve(listener, pool, &args).await
        }
        Command::Migrate => {
            open(&config.database_url).await?;
            println!("migrations applied to {}", config.database_url);
            Ok(())
        }
        Command::Load { file } => {
            let pool = open(&config.database_url).await?;
            let text = std::fs::read_to_string(&file).with_context(|| format!("cannot read {}", file.display()))?;
            let summary =
                load_text(&pool, &text, now()).await.with_context(|| format!("{} was not loaded", file.display()))?;
            println!(
                "loaded {}: {} zones, {} case versions, {} ledger entries",
                file.display(),
                summary.zones,
                summary.cases,
                summary.entries
            );
            Ok(())
        }
        Command::Backup { path } => {
            let pool = open(&config.database_url).await?;
            let started = std::time::Instant::now();
            let bytes =
                db::backup(&pool, &path).await.with_context(|| format!("backup to {} failed", path.display()))?;
            println!("backup written to {} ({bytes} bytes, {:.1} s)", path.display(), started.elapsed().as_secs_f64());
            Ok(())
        }
        Command::Verify => {
            // As the file is: no migration, no seal (which would hash rows whose hash was removed).
            let pool = db::connect_read_only(&config.database_url)
                .await
                .with_context(|| format!("cannot open {} read-only", config.database_url))?;
            if let Some(why) = db::migrations_not_current(&pool).await? {
                bail!("verify refused: {why}");
            }
            let v = db::verify(&pool).await?;
            for p in &v.problems {
                eprintln!("bad row: {p}");
            }
            println!("{}", v.summary());
            match v.problems.first() {
                None => Ok(()),
                Some(first) => bail!("verify failed at {first}"),
            }
        }
        Command::User(cmd) => {
            let pool = open(&config.database_url).await?;
            match cmd {
                UserCommand::Add { name, role } => {
                    let role = Role::parse(&role).map_err(|e| anyhow::anyhow!("--role: {e}"))?;
                    let password = read_password()?;
                    let id =
                        app::users::add_user(&pool, CLI_ACTOR, &name, role, &password, now()).await.map_err(refused)?;
                    println!("user {name} created (id {id}, role {role})");
                }
                UserCommand::Passwd { name } => {
                    let password = read_password()?;
                    app::users::set_password(&pool, CLI_ACTOR, Account::Name(&name), &password, now())
                        .await
                        .map_err(refused)?;
                    println!("password of {name} changed; their sessions were ended and their tokens revoked");
                }
            }
            Ok(())
        }
        Command::Token(cmd) => {
            let pool = open(&config.database_url).await?;
            match cmd {
                TokenCommand::Create { name, label, days } => {
                    let now = now();
                    let (id, token) =
                        app::users::issue_token(&pool, CLI_ACTOR, &name, &label, days, now).await.map_err(refused)?;
                    let until = (now + time::Duration::days(i64::from(days))).date();
                    eprintln!("token {id} for {name}, works until {until} (UTC; shown once, only its hash is stored):");
                    println!("{token}");
                }
                TokenCommand::Revoke { id } => {
                    app::users::withdraw_token(&pool, CLI_ACTOR, id, now()).await.map_err(refused)?;
                    println!("token {id} revoked");
                }
            }
            Ok(())
        }
    }
}

/// A refused action as the command line reports it: each field with its message.
fn refused(e: app::Error) -> anyhow::Error {
    match e {
        app::Error::Invalid(fields) => anyhow::anyhow!(
            "{}; nothing was changed",
            fields.0.iter().map(|f| format!("{}: {}", f.field, f.message)).collect::<Vec<_>>().join("; ")
        ),
        other => anyhow::Error::new(other).context("nothing was changed"),
    }
}

/// "Now" on the command line: the system clock (the server's requests read `AppState.clock`).
fn now() -> time::OffsetDateTime {
    SystemClock.now()
}

/// Who the audit trail names for command-line changes.
const CLI_ACTOR: &str = "command-line";

/// A new password from the terminal (asked twice, not echoed) or one line of standard input.
fn read_password() -> anyhow::Result<String> {
    use std::io::IsTerminal;
    let password = if std::io::stdin().is_terminal() {
        let first = rpassword::prompt_password("New password (12 to 128 characters): ")?;
        let second = rpassword::prompt_password("Again: ")?;
        if first != second {
            bail!("the two passwords differ; nothing was changed");
        }
        first
    } else {
        let mut line = String::new();
        std::io::stdin().read_line(&mut line)?;
        line.trim_end_matches(['\r', '\n']).to_string()
    };
    parse_new_password(&password).map_err(|e| anyhow::anyhow!("password: {e}"))
}

/// The demo accounts made on the first run: one per role, random passwords printed once.
async fn create_demo_accounts(pool: &SqlitePool, now: time::OffsetDateTime) -> anyhow::Result<()> {
    let mut lines = Vec::new();
    for role in Role::ALL {
        let password = new_secret("");
        let password = &password.expose()[..20];
        app::users::add_user(pool, "first-run", role.as_str(), role, password, now).await.map_err(refused)?;
        lines.push(format!("  {:<11} {password}", role.as_str()));
    }
    // Printed, not logged: the passwords appear here once and are stored only as hashes.
    println!(
        "\nDemo accounts (user name and password; shown once, change them on the Admin page):\n{}\n",
        lines.join("\n")
    );
    Ok(())
}

/// Open the database (creating its folder and file) and apply migrations.
pub async fn open(url: &str) -> anyhow::Result<SqlitePool> {
    if let Some(path) = url.strip_prefix("sqlite://").or_else(|| url.strip_prefix("sqlite:"))
        && let Some(dir) = std::path::Path::new(path.split('?').next().unwrap_or(path)).parent()
        && !dir.as_os_str().is_empty()
    {
        let mut folder = std::fs::DirBuilder::new();
        folder.recursive(true);
        // The database's folder is the owner's too (files in it are 0600 anyway).
        #[cfg(unix)]
        std::os::unix::fs::DirBuilderExt::mode(&mut folder, 0o700);
        folder.create(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    }
    let pool = db::connect(url).await.with_context(|| format!("cannot open {url}"))?;
    db::migrate(&pool).await.context("migrations failed")?;
    Ok(pool)
}

/// Open and migrate; on a database that was never loaded, load the demo plant (once: later
/// runs find the site settings and leave the data alone), stamped `now` (no booking of it may
/// be later than `now`'s month).
pub async fn prepare(url: &str, demo: bool, now: time::OffsetDateTime) -> anyhow::Result<SqlitePool> {
    let pool = open(url).await?;
    if demo && db::database_is_empty(&pool).await? {
        let summary = load_text(&pool, DEMO_SCENARIO, now).await.context("loading the demo plant failed")?;
        tracing::info!(
            zones = summary.zones,
            cases = summary.cases,
            entries = summary.entries,
            "empty database: demo plant loaded"
        );
        if db::count_users(&pool).await? == 0 {
            create_demo_accounts(&pool, now).await?;
        }
        let (name, budgets, capacity, carry_over) = DEMO_PLAN;
        let inputs = crate::domain::RoadmapQuery {
            start: crate::domain::RoadmapParams::next_month(now).to_string(),
            years: "3".into(),
            budgets: budgets.into(),
            capacity: capacity.into(),
            carry_over: carry_over.into(),
            ..Default::default()
        };
        app::roadmap::save_plan(&pool, "scenario-load", name, &inputs, now)
            .await
            .context("saving the demo's named plan failed")?;
    } else if db::database_is_empty(&pool).await? {
        load_text(&pool, EMPTY_SITE, now).await.context("writing default site settings failed")?;
        tracing::warn!("empty database without the demo: default site settings written; change them on the Admin page");
    }
    if !demo && db::count_users(&pool).await? == 0 {
        tracing::warn!("no user accounts yet: create one with `pilot-ledger user add NAME --role admin`");
    }
    // Figures are read from the kept totals: refuse to serve any that the entries do not back.
    // Not rebuilt silently, which would hide an edit; `verify` shows the rest.
    if let Some(p) = db::totals_problem(&pool).await? {
        tracing::error!(%p, "ledger totals disagree with the entries; not serving");
        bail!(
            "{p}: the kept ledger totals disagree with the ledger entries, so the server will not serve its \
             figures; run `pilot-ledger verify` and restore the last backup that verifies"
        );
    }
    Ok(pool)
}

/// Parse, validate and store a scenario document, stamped `now` (and no booking after it).
pub async fn load_text(pool: &SqlitePool, text: &str, now: time::OffsetDateTime) -> anyhow::Result<db::LoadSummary> {
    let multiplier = match db::get_site(pool).await {
        Ok(site) => site.expert_multiplier,
        Err(db::DbError::NotFound(_)) => crate::domain::SiteSettings::DEFAULT_EXPERT_MULTIPLIER,
        Err(e) => return Err(e.into()),
    };
    let scenario = match Scenario::parse_with(text, db::number_format(pool).await?, multiplier) {
        Ok(s) => s,
        Err(errors) => {
            let lines: Vec<String> = errors.0.iter().map(|e| format!("  {}: {}", e.field, e.message)).collect();
            bail!("the scenario is not valid; nothing was stored:\n{}", lines.join("\n"));
        }
    };
    Ok(db::load_scenario(pool, &scenario, ("scenario-load", now), |_| {}).await?)
}

/// Serve on `listener` until Ctrl-C or SIGTERM; logs the bound address (port 0 picks a free
/// one). A graceful stop lets requests finish, then checkpoints the WAL into the database
/// file and closes it, so that the `.db` file alone is complete.
pub async fn serve(listener: TcpListener, pool: SqlitePool, args: &ServeArgs) -> anyhow::Result<()> {
    let addr = listener.local_addr()?;
    let stop = stop_signal();
    tracing::info!(%addr, "listening on http://{addr}");
    let state = AppState::new(pool.clone(), Arc::new(SystemClock), args.secure_cookies)
        .with_allowed_hosts(args.allowed_hosts.clone());
    // Bound already: requests are answered meanwhile, with what is ready (web::figures).
    tokio::spawn(warm_up(state.clone()));
    axum::serve(listener, app(state).into_make_service_with_connect_info::<SocketAddr>())
        .with_graceful_shutdown(stop)
        .await?;
    db::close(&pool).await.context("checkpointing the database at shutdown failed")?;
    tracing::info!("stopped; the database file is checkpointed");
    Ok(())
}

/// Compute every zone's figures in the background, logging how long it took.
pub async fn warm_up(state: AppState) {
    let started = std::time::Instant::now();
    match state.figures.warm_up(&state.pool).await {
        Ok(zones) => tracing::info!(zones, seconds = started.elapsed().as_secs_f64(), "figures warmed up"),
        Err(e) => tracing::warn!(%e, "warming up the figures failed; they are computed on demand"),
    }
}

/// Ctrl-C (SIGINT) or, on Unix, SIGTERM (what service managers and `kill` send). On Unix the
/// handlers are installed when this is called, before the address is logged, so that a stop
/// sent as soon as the server is up is not lost.
fn stop_signal() -> impl std::future::Future<Output = ()> {
    #[cfg(unix)]
    let signals = {
        use tokio::signal::unix::{SignalKind, signal};
        signal(SignalKind::interrupt())
            .and_then(|int| Ok((int, signal(SignalKind::terminate())?)))
            .map_err(|e| tracing::warn!(%e, "cannot listen for SIGTERM; stop with Ctrl-C"))
            .ok()
    };
    async move {
        #[cfg(unix)]
        if let Some((mut int, mut term)) = signals {
            tokio::select! {
                _ = int.recv() => {}
                _ = term.recv() => {}
            }
            return;
        }
        let _ = tokio::signal::ctrl_c().await;
    }
}
