//! The command line: `liftledger serve`, `migrate`, `demo`, `generate`, `copy`, `import`,
//! `backup`, `restore`, `archive`, `rejudge` and `user`.

use std::net::SocketAddr;

use clap::{Parser, Subcommand};

/// liftledger: earthworks compaction QC record and calculator.
#[derive(Debug, Parser)]
#[command(version, about)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
    /// Log lines as text for people, or one JSON object per line for log shippers.
    #[arg(long, global = true, env = "LIFTLEDGER_LOG_FORMAT", value_enum, default_value_t = LogFormat::Text)]
    pub log_format: LogFormat,
}

/// How log lines are written (to standard output).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum LogFormat {
    /// One readable line per event, with the request's span fields in front.
    Text,
    /// One JSON object per line; the request's fields (`request_id`, …) under `span`.
    Json,
}

/// What to do.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run the web service.
    Serve(ServeArgs),
    /// Create or upgrade the database file and exit.
    Migrate(DbArgs),
    /// Load the invented demo project into a database file.
    Demo(DbArgs),
    /// Build an invented large project (for load and scale trials) with a progress line.
    Generate(GenerateArgs),
    /// Copy a whole database into a new, empty one on another engine, then verify it.
    Copy {
        /// Source: an SQLite file, `sqlite://FILE` or `postgres://…`.
        #[arg(long)]
        from: String,
        /// Target (must be empty): an SQLite file, `sqlite://FILE` or `postgres://…`.
        #[arg(long)]
        to: String,
    },
    /// Check (default) or commit a CSV file of field tests into a project, with a progress line.
    Import {
        #[command(flatten)]
        db: DbArgs,
        /// Project code, e.g. MLR.
        #[arg(long)]
        project: String,
        /// Column mapping (JSON) from file columns to liftledger fields.
        #[arg(long)]
        mapping: std::path::PathBuf,
        /// Density units of the file: si or us.
        #[arg(long, default_value = "si")]
        units: String,
        /// Chainage style of the file: km_metre or feet_station.
        #[arg(long, default_value = "km_metre")]
        chainage: String,
        /// Write every row (or none); without it, a dry run.
        #[arg(long)]
        commit: bool,
        /// The CSV file.
        file: std::path::PathBuf,
    },
    /// Write a checked backup of a live database to a new SQLite file (any engine).
    Backup {
        /// Database to back up: an SQLite file, `sqlite://FILE` or `postgres://…`.
        #[arg(long, env = "LIFTLEDGER_DB", default_value = "liftledger.sqlite")]
        db: String,
        /// The backup file to write (must not exist; its directory must).
        #[arg(long)]
        to: std::path::PathBuf,
    },
    /// Restore a backup file into a new, empty database, then verify it.
    Restore {
        /// The backup file (an SQLite file written by `liftledger backup`).
        #[arg(long)]
        from: std::path::PathBuf,
        /// Target (must be new or empty): an SQLite file, `sqlite://FILE` or `postgres://…`.
        #[arg(long)]
        db: String,
    },
    /// Write a project's handover archive (zip), or check one with `archive verify FILE.zip`.
    Archive(ArchiveArgs),
    /// Judge every lot again and store its summary (after a reduction-version change),
    /// with a progress line.
    Rejudge {
        #[command(flatten)]
        db: DbArgs,
        /// Only this project (its code, e.g. MLR); all projects without it.
        #[arg(long)]
        project: Option<String>,
    },
    /// Manage users: add one, or give one a role in a project.
    #[command(subcommand)]
    User(UserCommand),
}

/// Options of `generate`.
#[derive(Debug, clap::Args)]
pub struct GenerateArgs {
    #[command(flatten)]
    pub db: DbArgs,
    /// Field tests to make, retests included (the result lands within a few percent);
    /// from 100 to 5,000,000.
    #[arg(long, value_name = "N")]
    pub tests: u64,
    /// Code of the new project (the database must not hold it yet).
    #[arg(long, default_value = "BIG")]
    pub code: String,
    /// Seed of the invented readings: one seed gives the same project.
    #[arg(long, default_value_t = 20_261_201)]
    pub seed: u64,
}

/// `liftledger archive …`: write one (`--db --project --to`) or `verify` one.
#[derive(Debug, clap::Args)]
#[command(args_conflicts_with_subcommands = true)]
pub struct ArchiveArgs {
    #[command(subcommand)]
    pub check: Option<ArchiveCommand>,
    /// Database holding the project: an SQLite file, `sqlite://FILE` or `postgres://…`.
    #[arg(long, env = "LIFTLEDGER_DB", default_value = "liftledger.sqlite")]
    pub db: String,
    /// Project code, e.g. MLR.
    #[arg(long)]
    pub project: Option<String>,
    /// The archive to write, ending in .zip (must not exist; its directory must).
    #[arg(long)]
    pub to: Option<std::path::PathBuf>,
}

/// `liftledger archive verify FILE.zip`
#[derive(Debug, Subcommand)]
pub enum ArchiveCommand {
    /// Check every file of an archive against its manifest's SHA-256.
    Verify {
        /// The archive file.
        file: std::path::PathBuf,
    },
}

/// `liftledger user …`
#[derive(Debug, Subcommand)]
pub enum UserCommand {
    /// Add a user; the password is read from standard input (one line).
    Add {
        #[command(flatten)]
        db: DbArgs,
        /// Sign-in name.
        #[arg(long)]
        username: String,
        /// Name shown in the record, e.g. "D. Achterberg".
        #[arg(long)]
        name: String,
        /// Make the user an administrator (projects, users, memberships).
        #[arg(long)]
        admin: bool,
    },
    /// Give a user a role in a project (technician, qc_manager, client_engineer, viewer).
    Grant {
        #[command(flatten)]
        member: MemberArgs,
        #[arg(long)]
        role: String,
    },
    /// End a user's role in a project; their sessions end and the tokens they made there die.
    Remove {
        #[command(flatten)]
        member: MemberArgs,
    },
    /// Disable a user: every session ends and every token they made dies.
    Disable {
        #[command(flatten)]
        db: DbArgs,
        #[arg(long)]
        username: String,
    },
    /// Re-enable a disabled user.
    Enable {
        #[command(flatten)]
        db: DbArgs,
        #[arg(long)]
        username: String,
    },
    /// Set a user's password (read from standard input); they must change it at next sign-in.
    ResetPassword {
        #[command(flatten)]
        db: DbArgs,
        #[arg(long)]
        username: String,
    },
}

/// A user and a project of a database: whose membership a command changes.
#[derive(Debug, clap::Args)]
pub struct MemberArgs {
    #[command(flatten)]
    pub db: DbArgs,
    #[arg(long)]
    pub username: String,
    /// Project code, e.g. MLR.
    #[arg(long)]
    pub project: String,
}

/// Where the database lives.
#[derive(Debug, clap::Args)]
pub struct DbArgs {
    /// Database: an SQLite file (created when missing), `sqlite://FILE` or `postgres://user@host/db`.
    #[arg(long, env = "LIFTLEDGER_DB", default_value = "liftledger.sqlite")]
    pub db: String,
    /// Connections to keep open to the database.
    #[arg(long, env = "LIFTLEDGER_DB_POOL", default_value_t = 8)]
    pub db_pool: u32,
}

impl DbArgs {
    /// The database location these arguments name.
    pub fn location(&self) -> crate::db::Location {
        crate::db::Location::parse(&self.db, self.db_pool)
    }
}

/// Options of `serve`.
#[derive(Debug, clap::Args)]
pub struct ServeArgs {
    /// Database: an SQLite file, `sqlite://FILE` or `postgres://…`; with --demo defaults to liftledger-demo.sqlite.
    #[arg(long, env = "LIFTLEDGER_DB")]
    pub db: Option<String>,
    /// Connections to keep open to the database (size it for several app servers on PostgreSQL).
    #[arg(long, env = "LIFTLEDGER_DB_POOL", default_value_t = 8)]
    pub db_pool: u32,
    /// Address to listen on; port 0 picks a free port.
    #[arg(long, env = "LIFTLEDGER_ADDR", default_value = "127.0.0.1:8480")]
    pub addr: SocketAddr,
    /// Load the invented demo project when the database file does not exist yet.
    #[arg(long)]
    pub demo: bool,
    /// Mark the session cookie Secure (set this when users reach the service over HTTPS).
    #[arg(long, env = "LIFTLEDGER_SECURE_COOKIES")]
    pub secure_cookies: bool,
    /// Behind a reverse proxy: take the client address (for the sign-in throttle and the
    /// audit trail) from the last X-Forwarded-For entry. Never set it without a proxy that
    /// writes that header, or any client can claim any address.
    #[arg(long, env = "LIFTLEDGER_TRUST_PROXY")]
    pub trust_proxy: bool,
    /// Serve Prometheus metrics at http://ADDR/metrics on this separate (private) address;
    /// off when not given.
    #[arg(long, env = "LIFTLEDGER_METRICS_ADDR")]
    pub metrics_addr: Option<SocketAddr>,
    /// Take a checked backup into this (existing) directory at start and every --backup-every.
    #[arg(long, env = "LIFTLEDGER_BACKUP_DIR")]
    pub backup_dir: Option<std::path::PathBuf>,
    /// Interval between scheduled backups: a number and s, m, h or d.
    #[arg(long, env = "LIFTLEDGER_BACKUP_EVERY", default_value = "6h")]
    pub backup_every: String,
    /// Scheduled backups kept in --backup-dir; older ones are removed.
    #[arg(long, env = "LIFTLEDGER_BACKUP_KEEP", default_value_t = 14)]
    pub backup_keep: usize,
}
