//! Shared state handed to every handler.

use std::ops::Deref;
use std::sync::Arc;

use crate::db::Pool;

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
    /// The database pool.
    pub db: Pool,
    /// Service settings.
    pub settings: Settings,
    /// Judged lots per project, reused while the project's revision holds.
    pub views: crate::ledger::overview::SummaryCache,
    /// Drift warnings per project, reused while the project's revision holds.
    pub drift: crate::ledger::watch::DriftCache,
    /// Clauses, sources and lab tests once read (rows that never change).
    pub rules: crate::ledger::field::RuleCache,
    /// Group commit of new field tests (SQLite only).
    pub writer: Option<crate::ledger::test_writer::TestWriter>,
    /// The outcome of scheduled backups, shown to admins on the projects page.
    pub backups: Arc<crate::backup::schedule::BackupStatus>,
}

impl AppState {
    /// Wraps a pool and settings.
    pub fn new(db: Pool, settings: Settings) -> Self {
        Self(Arc::new(Inner {
            settings,
            views: Default::default(),
            drift: Default::default(),
            rules: Default::default(),
            backups: Default::default(),
            writer: crate::ledger::test_writer::TestWriter::start(&db),
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
