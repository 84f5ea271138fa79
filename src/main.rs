//! The `liftledger` binary: parse the command line and run it.

use anyhow::Context;
use clap::Parser;
use std::io::BufRead;

use liftledger::cli::{
    ArchiveArgs, ArchiveCommand, Cli, Command, LogFormat, MemberArgs, ServeArgs, UserCommand,
};
use liftledger::ledger::{Actor, accounts};
use liftledger::{AppState, Settings, db, demo};
use tracing_subscriber::EnvFilter;

mod generate;
mod scale;

#[tokio::main]
async fn main() -> anyhow::Result<()> {
    let cli = Cli::parse();
    init_logs(cli.log_format);
    match cli.command {
        Command::Migrate(a) => {
            db::connect(&a.location()).await?;
            println!("database {} is up to date", a.location().redacted());
        }
        Command::Demo(a) => {
            let pool = db::connect(&a.location()).await?;
            let summary = demo::load(&pool).await?;
            println!(
                "loaded demo project into {}: {summary}",
                a.location().redacted()
            );
        }
        Command::Generate(a) => generate::run(&a).await?,
        Command::User(UserCommand::Add {
            db,
            username,
            name,
            admin,
        }) => add_user(&db, username, name, admin).await?,
        Command::User(UserCommand::Grant {
            member:
                MemberArgs {
                    db,
                    username,
                    project,
                },
            role,
        }) => grant(&db, &username, &project, &role).await?,
        Command::User(other) => user_command(other).await?,
        Command::Import {
            db,
            project,
            mapping,
            units,
            chainage,
            commit,
            file,
        } => {
            let report = liftledger::transfer::run_cli_import(
                &db.location(),
                &project,
                &mapping,
                &units,
                &chainage,
                &file,
                commit,
            )
            .await?;
            if report.refused() {
                std::process::exit(1);
            }
        }
        Command::Copy { from, to } => copy(&from, &to).await?,
        Command::Backup { db, to } => backup(&db, &to).await?,
        Command::Restore { from, db } => restore(&from, &db).await?,
        Command::Archive(a) => archive(a).await?,
        Command::Rejudge { db, project } => rejudge(&db, project.as_deref()).await?,
        Command::Serve(a) => serve(a).await?,
    }
    Ok(())
}

/// A password read from the first line of standard input (never from the command line).
fn password_from_stdin() -> anyhow::Result<String> {
    let mut password = String::new();
    std::io::stdin().lock().read_line(&mut password)?;
    Ok(password.trim_end_matches(['\r', '\n']).to_string())
}

/// `liftledger user add`: the password is read from standard input.
async fn add_user(
    db: &liftledger::cli::DbArgs,
    username: String,
    name: String,
    admin: bool,
) -> anyhow::Result<()> {
    let pool = db::connect(&db.location()).await?;
    let input = accounts::UserInput {
        username,
        display_name: name,
        password: password_from_stdin()?,
        is_admin: admin,
    };
    let u = accounts::create_user(&pool, &input, false, &Actor::system("cli"))
        .await
        .map_err(|e| anyhow::anyhow!("{}: {}", e.field(), e.user_message()))?;
    println!(
        "user {} created{}",
        u.username,
        if u.admin() { " (administrator)" } else { "" }
    );
    Ok(())
}

/// `liftledger user grant`: a role in a project named by its code.
async fn grant(
    db: &liftledger::cli::DbArgs,
    username: &str,
    project: &str,
    role: &str,
) -> anyhow::Result<()> {
    let pool = db::connect(&db.location()).await?;
    let p = project_by_code(&pool, project).await?;
    accounts::grant(&pool, username, p.id, role, &Actor::system("cli"))
        .await
        .map_err(|e| anyhow::anyhow!("{}: {}", e.field(), e.user_message()))?;
    println!("{username} is now {role} in {}", p.code);
    Ok(())
}

/// The project with this code (codes are stored upper case).
async fn project_by_code(pool: &db::Pool, project: &str) -> anyhow::Result<db::projects::Project> {
    db::projects::get_by_code(pool, &project.to_ascii_uppercase())
        .await?
        .ok_or_else(|| anyhow::anyhow!("no project with code {project}"))
}

/// `liftledger copy --from URL --to URL`: a whole database into an empty one, verified.
async fn copy(from: &str, to: &str) -> anyhow::Result<()> {
    let source = db::connect(&db::Location::parse(from, 4)).await?;
    let target = db::connect(&db::Location::parse(to, 4)).await?;
    let report = db::copy::copy_all(&source, &target).await?;
    for (table, n) in &report.rows {
        println!("{table:<18} {n:>9} rows");
    }
    println!(
        "copied and verified: row counts equal, {} certificate hashes match",
        report.certificates_verified
    );
    Ok(())
}

/// `liftledger backup --db URL --to DIR`.
async fn backup(db: &str, to: &std::path::Path) -> anyhow::Result<()> {
    let location = db::Location::parse(db, 2);
    let r = liftledger::backup::take(&location, to, &mut |line| println!("{line}")).await?;
    println!(
        "backup {} written and checked: {:.1} MB in {:.1} s, {} tables, {} certificates",
        r.path.display(),
        r.bytes as f64 / 1e6,
        r.seconds,
        r.rows.len(),
        r.certificates_verified
    );
    Ok(())
}

/// `liftledger restore --from FILE --db URL` into an empty database, verified.
async fn restore(from: &std::path::Path, db: &str) -> anyhow::Result<()> {
    let target = db::Location::parse(db, 4);
    let r =
        liftledger::backup::restore::restore(from, &target, &mut |line| println!("{line}")).await?;
    println!(
        "restored into {} and verified: row counts equal, {} certificate hashes match",
        target.redacted(),
        r.certificates_verified
    );
    Ok(())
}

/// `liftledger serve`: open (and with --demo fill) the database, then serve until stopped.
async fn serve(a: ServeArgs) -> anyhow::Result<()> {
    // Checked before anything is opened, so a bad argument writes nothing.
    let schedule = a
        .backup_dir
        .clone()
        .map(|dir| liftledger::backup::schedule::Schedule::new(dir, &a.backup_every, a.backup_keep))
        .transpose()?;
    let typed = a.db.clone().unwrap_or_else(|| {
        if a.demo {
            "liftledger-demo.sqlite"
        } else {
            "liftledger.sqlite"
        }
        .into()
    });
    let location = db::Location::parse(&typed, a.db_pool);
    let pool = db::connect(&location).await?;
    first_sign_ins(&pool, &location, a.demo).await?;
    if let Some(metrics_addr) = a.metrics_addr {
        liftledger::metrics::install()?;
        let listener = liftledger::metrics::bind(metrics_addr).await?;
        println!("metrics at http://{}/metrics", listener.local_addr()?);
        tokio::spawn(liftledger::metrics::serve(listener, pool.clone()));
    }
    let listener = tokio::net::TcpListener::bind(a.addr)
        .await
        .with_context(|| format!("binding {}", a.addr))?;
    let addr = listener.local_addr()?;
    println!(
        "liftledger is serving {} at http://{addr}/",
        location.redacted()
    );
    let state = AppState::new(
        pool.clone(),
        Settings {
            demo: a.demo,
            secure_cookies: a.secure_cookies,
            trust_proxy: a.trust_proxy,
        },
    );
    if let Some(schedule) = schedule {
        println!(
            "backups into {} every {}, keeping {}",
            schedule.dir.display(),
            a.backup_every,
            schedule.keep
        );
        liftledger::backup::schedule::spawn(location.clone(), schedule, state.backups.clone());
    }
    liftledger::serve(listener, state, shutdown_signal()).await?;
    pool.close().await;
    println!("liftledger stopped");
    Ok(())
}

/// With --demo: the demo loaded into a database that holds no project yet, and its
/// sign-ins printed. Otherwise the first admin of a new database, its password printed once.
async fn first_sign_ins(
    pool: &db::Pool,
    location: &db::Location,
    demo: bool,
) -> anyhow::Result<()> {
    if demo {
        if db::projects::list(pool).await?.is_empty() {
            let summary = demo::load(pool).await.context("loading the demo project")?;
            println!(
                "demo project loaded into {} ({summary})",
                location.redacted()
            );
        }
        println!("demo sign-ins (invented people; demo use only):");
        for (user, _, role, password) in accounts::DEMO_USERS {
            println!("  {user:<12} {role:<16} password {password}");
        }
    } else if let Some(password) = accounts::ensure_first_admin(pool)
        .await
        .map_err(|e| anyhow::anyhow!("creating the first admin: {}", e.user_message()))?
    {
        println!(
            "new database: sign in as 'admin' with password {password} (shown once; change it)"
        );
    }
    Ok(())
}

/// `liftledger user remove | disable | enable | reset-password`.
async fn user_command(cmd: UserCommand) -> anyhow::Result<()> {
    let cli = Actor::system("cli");
    let fail =
        |e: liftledger::error::AppError| anyhow::anyhow!("{}: {}", e.field(), e.user_message());
    match cmd {
        UserCommand::Remove {
            member:
                MemberArgs {
                    db,
                    username,
                    project,
                },
        } => {
            let pool = db::connect(&db.location()).await?;
            let p = project_by_code(&pool, &project).await?;
            accounts::remove_member(&pool, &username, p.id, &cli)
                .await
                .map_err(fail)?;
            println!("{username} is no longer a member of {}", p.code);
        }
        UserCommand::Disable { db, username } => {
            let pool = db::connect(&db.location()).await?;
            accounts::set_enabled(&pool, &username, false, &cli)
                .await
                .map_err(fail)?;
            println!("{username} is disabled; every session and token of theirs has ended");
        }
        UserCommand::Enable { db, username } => {
            let pool = db::connect(&db.location()).await?;
            accounts::set_enabled(&pool, &username, true, &cli)
                .await
                .map_err(fail)?;
            println!("{username} is enabled again");
        }
        UserCommand::ResetPassword { db, username } => {
            let pool = db::connect(&db.location()).await?;
            let password = password_from_stdin()?;
            let ended = accounts::reset_password(&pool, &username, &password, &cli)
                .await
                .map_err(fail)?;
            println!(
                "password of {username} set; {ended} sessions ended; it must be changed at next sign-in"
            );
        }
        UserCommand::Add { .. } | UserCommand::Grant { .. } => {}
    }
    Ok(())
}

/// `liftledger archive --db --project --to FILE.zip`, or `liftledger archive verify FILE.zip`.
async fn archive(a: ArchiveArgs) -> anyhow::Result<()> {
    if let Some(ArchiveCommand::Verify { file }) = a.check {
        let v = liftledger::archive::verify::verify_file(&file)
            .with_context(|| format!("{} fails verification", file.display()))?;
        println!(
            "{}: every file matches the manifest ({} files, {:.1} MB)",
            file.display(),
            v.files,
            v.bytes as f64 / 1e6
        );
        return Ok(());
    }
    let (Some(project), Some(to)) = (a.project, a.to) else {
        anyhow::bail!(
            "archive needs --project CODE and --to FILE.zip (or: archive verify FILE.zip)"
        );
    };
    let location = db::Location::parse(&a.db, 4);
    let s = liftledger::archive::write_file(&location, &project, &to).await?;
    println!(
        "archive {} written and verified: {} files ({} certificate revisions, {} lots, {} field tests, {} audit rows), {:.1} MB",
        to.display(),
        s.files,
        s.certificates,
        s.lots,
        s.field_tests,
        s.audit_rows,
        std::fs::metadata(&to).map(|m| m.len()).unwrap_or(0) as f64 / 1e6
    );
    Ok(())
}

/// Log lines on standard output, filtered by `RUST_LOG` (default `info`); every line
/// written while serving a request carries that request's span (its `request_id`).
fn init_logs(format: LogFormat) {
    let filter = EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new("info"));
    let logs = tracing_subscriber::fmt().with_env_filter(filter);
    match format {
        LogFormat::Text => logs.init(),
        LogFormat::Json => logs
            .json()
            .flatten_event(true)
            .with_current_span(true)
            .with_span_list(false)
            .init(),
    }
}

/// Resolves on Ctrl-C or SIGTERM so in-flight requests finish before exit.
async fn shutdown_signal() {
    let ctrl_c = async {
        let _ = tokio::signal::ctrl_c().await;
    };
    #[cfg(unix)]
    let term = async {
        if let Ok(mut s) = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate())
        {
            s.recv().await;
        }
    };
    #[cfg(not(unix))]
    let term = std::future::pending::<()>();
    tokio::select! {
        () = ctrl_c => {},
        () = term => {},
    }
}

/// `liftledger rejudge`: every lot (of one project) judged again, one progress line.
async fn rejudge(a: &liftledger::cli::DbArgs, project: Option<&str>) -> anyhow::Result<()> {
    use std::io::Write;
    let pool = db::connect(&a.location()).await?;
    let project_id = match project {
        Some(code) => Some(
            db::projects::get_by_code(&pool, code)
                .await?
                .with_context(|| format!("no project has the code {code}"))?
                .id,
        ),
        None => None,
    };
    let started = std::time::Instant::now();
    let mut last = std::time::Instant::now();
    let judged =
        liftledger::ledger::lot_summaries::rejudge(&pool, project_id, &mut |p, done, total| {
            if last.elapsed().as_millis() >= 500 || done == total {
                last = std::time::Instant::now();
                eprint!("\rproject {p}: judged {done} of {total} lots");
                let _ = std::io::stderr().flush();
            }
        })
        .await?;
    eprintln!();
    println!(
        "judged {judged} lots again in {:.1} s; their summaries are stored",
        started.elapsed().as_secs_f64()
    );
    Ok(())
}
