//! Shared state handed to every handler.

use std::ops::Deref;
use std::sync::Arc;

use crate::db::Pool;
use crate::ledger::Ledger;

/// Settings the running service needs beyond the database.
#[derive(Debug, Clone)]
pub struct Settings {
    /// True when the database holds the invented demo project (pages say so).
    pub demo: bool,
    /// Mark the session cookie `Secure` (set when served over TLS, directly or behind a proxy).
    pub secure_cookies: bool,
    /// Take the client address from `X-Forwarded-For` (set only behind a proxy that writes it).
    pub trust_proxy: bool,
}

/// Cheap-to-clone handle on the service's shared parts.
#[derive(Clone)]
pub struct AppState(Arc<Inner>);

/// What the state holds.
pub struct Inner {
    /// The database pool (the ledger's own, for the handlers' reads).
    pub db: Pool,
    /// The ledger: pool, test writer and caches, and the one way tests are recorded.
    pub ledger: Ledger,
    /// Service settings.
    pub settings: Settings,
    /// The outcome of scheduled backups, shown to admins on the projects page.
    pub backups: Arc<crate::backup::schedule::BackupStatus>,
}

impl AppState {
    /// Wraps a pool and settings; inside a tokio runtime it starts the task that settles
    /// marked lot summaries between views (`ledger::lot_summaries::spawn_settler`).
    pub fn new(db: Pool, settings: Settings) -> Self {
        crate::ledger::lot_summaries::spawn_settler(&db);
        Self(Arc::new(Inner {
            settings,
            backups: Default::default(),
            ledger: Ledger::new(db.clone()),
            db,
        }))
    }
}

impl Deref for AppState {
    type Target = Inner;
    fn deref(&self) -> &Inner {
        &self.0
    }
}
