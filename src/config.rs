//! Command line and environment: one struct, read once. Every flag has an environment
//! fallback, named in `--help`.

use clap::{Parser, Subcommand};
use std::net::SocketAddr;
use std::path::PathBuf;

/// The default database: a file under ./data/ (created on first run).
pub const DEFAULT_DATABASE_URL: &str = "sqlite://data/pilot-ledger.db";

/// pilot-ledger: business cases, an append-only benefit ledger and a ranked portfolio for
/// instrumenting production zones.
#[derive(Debug, Parser)]
#[command(name = "pilot-ledger", version, about)]
pub struct Config {
    /// SQLite database URL.
    #[arg(long, env = "DATABASE_URL", default_value = DEFAULT_DATABASE_URL, global = true)]
    pub database_url: String,

    /// What to do; `serve` when omitted.
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run the web server (the default). On an empty database it migrates and loads the demo plant.
    Serve(ServeArgs),
    /// Apply pending migrations and exit.
    Migrate,
    /// Load a scenario file (zones, cases) in one transaction; nothing is stored if any part is invalid.
    Load {
        /// The scenario JSON file (format in DEVELOPERS.md).
        file: PathBuf,
    },
    /// Write a consistent copy of the database to PATH while the server may be running
    /// (SQLite's VACUUM INTO); restore by stopping the server and putting the copy in place.
    Backup {
        /// Where to write the copy; must not exist yet.
        path: PathBuf,
    },
    /// Check the database: recompute the hash chains of the ledger and the audit trail, compare
    /// the kept ledger totals with the entries and run SQLite's integrity check. Prints one
    /// line; exits non-zero naming the first bad row.
    Verify,
    /// Manage user accounts. Passwords are read from the terminal or standard input, never from arguments.
    #[command(subcommand)]
    User(UserCommand),
    /// Manage API tokens for scripts.
    #[command(subcommand)]
    Token(TokenCommand),
}

/// `user` subcommands.
#[derive(Debug, Subcommand)]
pub enum UserCommand {
    /// Create a user; the password is prompted for (or read as one line from standard input).
    Add {
        /// Sign-in name.
        name: String,
        /// One of lead, controller, viewer, admin.
        #[arg(long)]
        role: String,
    },
    /// Set a new password (prompted, or one line of standard input); ends the user's sessions.
    Passwd {
        /// Sign-in name.
        name: String,
    },
}

/// `token` subcommands.
#[derive(Debug, Subcommand)]
pub enum TokenCommand {
    /// Create a token acting with the user's role; it is printed once, only its hash is kept.
    Create {
        /// The owner's sign-in name.
        name: String,
        /// What the token is for.
        #[arg(long, default_value = "script")]
        label: String,
        /// Days the token works, 1 to 365.
        #[arg(long, default_value_t = crate::domain::TOKEN_DAYS_DEFAULT)]
        days: u32,
    },
    /// Revoke a token by its id (as listed on the admin page).
    Revoke {
        /// Token id.
        id: i64,
    },
}

/// Flags of `serve`.
#[derive(Debug, Clone, clap::Args)]
pub struct ServeArgs {
    /// Address to listen on; port 0 picks a free port (the chosen address is logged).
    #[arg(long, env = "PILOT_LEDGER_ADDR", default_value = "127.0.0.1:8080")]
    pub addr: SocketAddr,
    /// Do not load the demo plant and demo accounts into an empty database.
    #[arg(long, env = "PILOT_LEDGER_NO_DEMO")]
    pub no_demo: bool,
    /// Mark cookies Secure: set this when the server is reached over TLS (behind a proxy).
    #[arg(long, env = "PILOT_LEDGER_SECURE_COOKIES")]
    pub secure_cookies: bool,
    /// A Host header this server answers to, as clients send it (`ledger.plant.example`, or
    /// `ledger.plant.example:8443` when they reach a port other than 80 / 443); repeat the flag
    /// or separate with commas. Requests naming another host are refused with 400 (against DNS
    /// rebinding and forged Host headers). Unset: any host is accepted.
    #[arg(long = "allowed-host", env = "PILOT_LEDGER_ALLOWED_HOSTS", value_delimiter = ',', value_parser = parse_allowed_host)]
    pub allowed_hosts: Vec<String>,
}

impl Default for ServeArgs {
    fn default() -> Self {
        Self {
            addr: SocketAddr::from(([127, 0, 0, 1], 8080)),
            no_demo: false,
            secure_cookies: false,
            allowed_hosts: Vec::new(),
        }
    }
}

/// One `--allowed-host` value: a host with an optional port, lower case; not a URL.
pub fn parse_allowed_host(value: &str) -> Result<String, String> {
    let host = value.trim().to_ascii_lowercase();
    let valid = !host.is_empty()
        && host.bytes().all(|b| b.is_ascii_alphanumeric() || b"-.:[]".contains(&b))
        && !host.starts_with(':')
        && !host.ends_with(':');
    if valid {
        Ok(host)
    } else {
        Err(format!(
            "{value:?} is not a host name with an optional port as sent in the Host header \
             (ledger.plant.example or ledger.plant.example:8443); give no scheme or path"
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn allowed_hosts_repeat_or_split_on_commas() -> Result<(), clap::Error> {
        let c = Config::try_parse_from([
            "pilot-ledger",
            "serve",
            "--allowed-host",
            "Ledger.Plant.Example",
            "--allowed-host",
            "ledger.plant.example:8443,127.0.0.1:8080",
        ])?;
        let Some(Command::Serve(args)) = c.command else {
            return Err(clap::Error::new(clap::error::ErrorKind::InvalidSubcommand));
        };
        assert_eq!(args.allowed_hosts, ["ledger.plant.example", "ledger.plant.example:8443", "127.0.0.1:8080"]);
        let none = Config::try_parse_from(["pilot-ledger", "serve"])?;
        assert!(matches!(none.command, Some(Command::Serve(a)) if a.allowed_hosts.is_empty()));
        Ok(())
    }

    #[test]
    fn an_allowed_host_is_not_a_url() {
        for bad in ["https://ledger.plant.example", "ledger.plant.example/", "", "ledger plant", "host:"] {
            assert!(parse_allowed_host(bad).is_err(), "{bad:?}");
        }
        assert_eq!(parse_allowed_host(" [::1]:8080 "), Ok("[::1]:8080".to_string()));
    }
}
