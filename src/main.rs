//! The `liftledger` binary: parse the command line and run it.

use anyhow::Context;
use clap::Parser;
use liftledger::cli::{Cli, Command};
use liftledger::{AppState, Settings, db, demo};
use tracing_subscriber::EnvFilter;

#[tokio::main]
async fn main() -> anyhow::Result<()> {
    tracing_subscriber::fmt()
        .with_env_filter(
            EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new("info")),
        )
        .init();
    match Cli::parse().command {
        Command::Migrate(a) => {
            db::open(&a.db).await?;
            println!("database {} is up to date", a.db.display());
        }
        Command::Demo(a) => {
            let pool = db::open(&a.db).await?;
            let summary = demo::load(&pool).await?;
            println!("loaded demo project into {}: {summary}", a.db.display());
        }
        Command::Serve(a) => {
            let path = a.db.clone().unwrap_or_else(|| {
                if a.demo {
                    "liftledger-demo.sqlite"
                } else {
                    "liftledger.sqlite"
                }
                .into()
            });
            let fresh = !path.exists();
            let pool = db::open(&path).await?;
            if a.demo && fresh {
                let summary = demo::load(&pool)
                    .await
                    .context("loading the demo project")?;
                println!("demo project loaded into {} ({summary})", path.display());
            }
            let listener = tokio::net::TcpListener::bind(a.addr)
                .await
                .with_context(|| format!("binding {}", a.addr))?;
            let addr = listener.local_addr()?;
            println!("liftledger is serving {} at http://{addr}/", path.display());
            let state = AppState::new(pool.clone(), Settings { demo: a.demo });
            liftledger::serve(listener, state, shutdown_signal()).await?;
            pool.close().await;
            println!("liftledger stopped");
        }
    }
    Ok(())
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
