//! Group commit of new field tests on SQLite.
//!
//! SQLite has one writer and, with `synchronous = FULL`, one fsync per commit: a busy
//! site would queue on the disk, not the CPU. Tests that arrive together are written
//! in one transaction and made durable by one commit. Each runs in its own savepoint,
//! so a refused test (a number already taken, a lot closed meanwhile) is refused alone
//! and the others land; a failed commit fails every test of the group, and none is
//! answered as stored before its commit returned.

use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};

use tokio::sync::{mpsc, oneshot};

use super::Actor;
use super::field::store_in;
use crate::db::{self, Pool};
use crate::error::{AppError, Result};

/// Tests written by one commit at most.
const MAX_GROUP: usize = 64;

/// One test waiting for its group's commit.
struct Pending {
    record: db::field_tests::FieldTest,
    actor: Actor,
    action: &'static str,
    reply: oneshot::Sender<Result<db::field_tests::FieldTest>>,
}

/// Hands new tests to the writing task; cheap to share between requests.
#[derive(Clone)]
pub struct TestWriter {
    queue: mpsc::Sender<Pending>,
    /// Tests this writer committed, for the operator and for tests that check a path
    /// goes through the writer (the Prometheus counter is off without `--metrics-addr`).
    stored: Arc<AtomicU64>,
}

impl TestWriter {
    /// Starts the writing task on the current tokio runtime; `None` outside one, or for
    /// PostgreSQL, whose writers commit side by side.
    pub fn start(pool: &Pool) -> Option<Self> {
        if db::engine_of(pool) != db::Engine::Sqlite {
            return None;
        }
        let runtime = tokio::runtime::Handle::try_current().ok()?;
        let (queue, rx) = mpsc::channel(4 * MAX_GROUP);
        let stored = Arc::new(AtomicU64::new(0));
        runtime.spawn(run(pool.clone(), rx, stored.clone()));
        Some(Self { queue, stored })
    }

    /// How many tests this writer has committed since it started.
    pub fn tests_stored(&self) -> u64 {
        self.stored.load(Ordering::Relaxed)
    }

    /// Stores a checked test with the next group; answers once that group committed.
    pub async fn store(
        &self,
        record: db::field_tests::FieldTest,
        actor: &Actor,
        action: &'static str,
    ) -> Result<db::field_tests::FieldTest> {
        let (reply, answer) = oneshot::channel();
        let pending = Pending {
            record,
            actor: actor.clone(),
            action,
            reply,
        };
        self.queue
            .send(pending)
            .await
            .map_err(|_| anyhow::anyhow!("the test writer has stopped"))?;
        answer
            .await
            .map_err(|_| anyhow::anyhow!("the test writer stopped before answering"))?
    }
}

async fn run(pool: Pool, mut queue: mpsc::Receiver<Pending>, stored: Arc<AtomicU64>) {
    while let Some(first) = queue.recv().await {
        let mut group = vec![first];
        while group.len() < MAX_GROUP {
            match queue.try_recv() {
                Ok(p) => group.push(p),
                Err(_) => break,
            }
        }
        write_group(&pool, group, &stored).await;
    }
}

async fn write_group(pool: &Pool, group: Vec<Pending>, stored: &AtomicU64) {
    let mut results = Vec::with_capacity(group.len());
    let written: std::result::Result<(), AppError> = async {
        let mut tx = db::begin_write(pool).await?;
        for p in &group {
            let mut savepoint = tx.begin().await?;
            match store_in(&mut savepoint, p.record.clone(), &p.actor, p.action).await {
                Ok(stored) => {
                    savepoint.commit().await?;
                    results.push(Ok(stored));
                }
                Err(refused) => {
                    savepoint.rollback().await?;
                    results.push(Err(refused));
                }
            }
        }
        tx.commit().await?;
        Ok(())
    }
    .await;
    match written {
        Ok(()) => {
            crate::metrics::test_group_written(group.len());
            for (p, r) in group.iter().zip(&results) {
                if r.is_ok() {
                    stored.fetch_add(1, Ordering::Relaxed);
                    crate::metrics::field_tests_recorded(super::field::test_source(p.action), 1);
                }
            }
            for (p, r) in group.into_iter().zip(results) {
                let _ = p.reply.send(r);
            }
        }
        Err(e) => {
            tracing::error!(error = %e, tests = group.len(), "a group of field tests was not written");
            for p in group {
                let _ = p.reply.send(Err(AppError::Internal(anyhow::anyhow!(
                    "writing the test failed: {e}"
                ))));
            }
        }
    }
}
