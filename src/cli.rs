//! The subcommands' work. `main` only parses the configuration and calls [`run`].

use crate::config::{Command, Config, ServeArgs};
use crate::db;
use crate::domain::Scenario;
use crate::web::{AppState, app};
use anyhow::{Context, bail};
use sqlx::SqlitePool;
use tokio::net::TcpListener;

/// The demo plant, embedded so that the binary works from any folder.
pub const DEMO_SCENARIO: &str = include_str!("../seed/demo-plant.json");

/// Run the chosen subcommand.
pub async fn run(config: Config) -> anyhow::Result<()> {
    match config.command.unwrap_or(Command::Serve(ServeArgs::default())) {
        Command::Serve(args) => {
            let pool = prepare(&config.database_url, !args.no_demo).await?;
            let listener =
                TcpListener::bind(args.addr).await.with_context(|| format!("cannot listen on {}", args.addr))?;
            serve(listener, pool).await
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
                load_text(&pool, &text).await.with_context(|| format!("{} was not loaded", file.display()))?;
            println!("loaded {}: {} zones, {} case versions", file.display(), summary.zones, summary.cases);
            Ok(())
        }
    }
}

/// Open the database (creating its folder and file) and apply migrations.
pub async fn open(url: &str) -> anyhow::Result<SqlitePool> {
    if let Some(path) = url.strip_prefix("sqlite://").or_else(|| url.strip_prefix("sqlite:"))
        && let Some(dir) = std::path::Path::new(path.split('?').next().unwrap_or(path)).parent()
        && !dir.as_os_str().is_empty()
    {
        std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    }
    let pool = db::connect(url).await.with_context(|| format!("cannot open {url}"))?;
    db::migrate(&pool).await.context("migrations failed")?;
    Ok(pool)
}

/// Open and migrate; on a database that was never loaded, load the demo plant (once: later
/// runs find the site settings and leave the data alone).
pub async fn prepare(url: &str, demo: bool) -> anyhow::Result<SqlitePool> {
    let pool = open(url).await?;
    if demo && db::database_is_empty(&pool).await? {
        let summary = load_text(&pool, DEMO_SCENARIO).await.context("loading the demo plant failed")?;
        tracing::info!(zones = summary.zones, cases = summary.cases, "empty database: demo plant loaded");
    }
    Ok(pool)
}

/// Parse, validate and store a scenario document.
pub async fn load_text(pool: &SqlitePool, text: &str) -> anyhow::Result<db::LoadSummary> {
    let scenario = match Scenario::parse(text) {
        Ok(s) => s,
        Err(errors) => {
            let lines: Vec<String> = errors.0.iter().map(|e| format!("  {}: {}", e.field, e.message)).collect();
            bail!("the scenario is not valid; nothing was stored:\n{}", lines.join("\n"));
        }
    };
    Ok(db::load_scenario(pool, &scenario, "scenario-load", |_| {}).await?)
}

/// Serve on `listener` until Ctrl-C; logs the bound address (port 0 picks a free one).
pub async fn serve(listener: TcpListener, pool: SqlitePool) -> anyhow::Result<()> {
    let addr = listener.local_addr()?;
    tracing::info!(%addr, "listening on http://{addr}");
    axum::serve(listener, app(AppState { pool }))
        .with_graceful_shutdown(async {
            let _ = tokio::signal::ctrl_c().await;
        })
        .await?;
    Ok(())
}
