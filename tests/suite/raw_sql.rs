//! A second, raw pool on the test's database, through sqlx's `Any` driver: the tests'
//! own SQL checks (counts, rows, deliberate damage) run on it whatever the engine, so
//! they are written once. The server itself runs on the native drivers (`app.pool`).

use std::sync::Once;
use std::time::Duration;

use liftledger::db;

/// Opens the raw pool on the database `location` names.
pub async fn raw_pool(location: &db::Location) -> sqlx::AnyPool {
    use sqlx::Executor;
    static DRIVERS: Once = Once::new();
    DRIVERS.call_once(sqlx::any::install_default_drivers);
    let engine = location.engine();
    let url = match engine {
        db::Engine::Sqlite => format!("{}?mode=rwc", location.url.split('?').next().unwrap()),
        // The Any driver types a NULL float as single precision; with cached statements
        // a later double in the same slot is refused, so statements are not cached.
        db::Engine::Postgres => {
            let sep = if location.url.contains('?') { '&' } else { '?' };
            format!("{}{sep}statement-cache-capacity=0", location.url)
        }
    };
    sqlx::any::AnyPoolOptions::new()
        .max_connections(4)
        .acquire_timeout(Duration::from_secs(30))
        .after_connect(move |conn, _meta| {
            Box::pin(async move {
                if engine == db::Engine::Sqlite {
                    conn.execute("PRAGMA foreign_keys = ON; PRAGMA busy_timeout = 10000;")
                        .await?;
                }
                Ok(())
            })
        })
        .connect(&url)
        .await
        .expect("open the raw test pool")
}

/// A raw pool on the database a server pool is open on (trust authentication on
/// PostgreSQL: the URL carries no password).
pub async fn raw_of(pool: &db::Pool) -> sqlx::AnyPool {
    let url = match pool {
        db::Pool::Sqlite(p) => format!("sqlite://{}", p.connect_options().get_filename().display()),
        db::Pool::Postgres(p) => {
            let o = p.connect_options();
            format!(
                "postgres://{}@{}:{}/{}",
                o.get_username(),
                o.get_host(),
                o.get_port(),
                o.get_database().unwrap_or("postgres")
            )
        }
    };
    raw_pool(&db::Location::parse(&url, 1)).await
}
