//! The ledger handle: the pool, the SQLite test writer and the caches, owned together,
//! and the one way a field test is recorded.
//!
//! Every entry path (the API, the entry form, the demo loader, retests from either)
//! records a test through [`Ledger::record_test`] or [`Ledger::record_retest`] (a keyed
//! API entry through [`Ledger::record_once`]), so each
//! gets the same checks, the same rule cache and, on SQLite, the same group commit. A
//! lot's clause, source and lab test are read through [`Ledger::lot_context`] (the cache
//! in front of [`LotContext::load`], the one loader of a lot's rules).

use std::sync::Arc;

use super::Actor;
use super::field::{
    self, FieldTestInput, LotContext, RetestTarget, RuleCache, Spot, require_lot,
    require_lot_takes_tests, require_test, retest_refusal, sampled_lot_refusal,
};
use super::instruments::check::{Arrival, check_with_instruments};
use super::lot_report::{self, TestLine};
use super::overview::SummaryCache;
use super::test_writer::TestWriter;
use super::watch::DriftCache;
use crate::clock;
use crate::db::{self, Pool};
use crate::error::Result;

/// Cheap-to-clone handle on the ledger's shared parts.
#[derive(Clone)]
pub struct Ledger(Arc<Parts>);

/// What the handle owns.
struct Parts {
    /// The database pool.
    pool: Pool,
    /// Group commit of new field tests (SQLite only; `None` on PostgreSQL).
    writer: Option<TestWriter>,
    /// Clauses, sources and lab tests once read (rows that never change).
    rules: RuleCache,
    /// Judged lots per project, reused while the project's revision holds.
    views: SummaryCache,
    /// Drift warnings per project, reused while the project's revision holds.
    drift: DriftCache,
    /// The instrument register per project, reused while the register's revision holds.
    books: super::instruments::check::BookCache,
}

impl Ledger {
    /// A handle on `pool`; on SQLite inside a tokio runtime it starts the test writer.
    pub fn new(pool: Pool) -> Self {
        Self(Arc::new(Parts {
            writer: TestWriter::start(&pool),
            pool,
            rules: RuleCache::default(),
            views: SummaryCache::default(),
            drift: DriftCache::default(),
            books: Default::default(),
        }))
    }

    /// The database pool, for reads.
    pub fn pool(&self) -> &Pool {
        &self.0.pool
    }

    /// The SQLite group-commit writer, when there is one.
    pub fn writer(&self) -> Option<&TestWriter> {
        self.0.writer.as_ref()
    }

    /// The cache of clauses, sources and lab tests.
    pub fn rules(&self) -> &RuleCache {
        &self.0.rules
    }

    /// Judged-lot summaries per project revision (lift map, home).
    pub fn views(&self) -> &SummaryCache {
        &self.0.views
    }

    /// Drift warnings per project revision.
    pub fn drift(&self) -> &DriftCache {
        &self.0.drift
    }

    /// Everything a test on `lot` is checked against, its rows read once per handle.
    pub async fn lot_context(&self, lot: &db::lots::Lot) -> Result<LotContext> {
        LotContext::load_with(self.pool(), self.rules(), lot).await
    }

    /// Records a new field test on a lot and returns it with its own verdict: the one
    /// entry of a single test, checked against the lot's rules and the instrument
    /// register in force, committed with the tests arriving at the same moment.
    pub async fn record_test(
        &self,
        lot_id: i64,
        input: &FieldTestInput,
        actor: &Actor,
    ) -> Result<(db::field_tests::FieldTest, TestLine)> {
        let lot = require_lot(self.pool(), lot_id).await?;
        require_lot_takes_tests(&lot)?;
        let ctx = self.lot_context(&lot).await?;
        let record = self.checked(&ctx, input, None, actor).await?;
        let test = self.store(record, actor, "create").await?;
        let line =
            lot_report::judge_alone(&test, &ctx.lot, &ctx.clause, &ctx.source, &ctx.lab, None)?;
        Ok((test, line))
    }

    /// Records a new field test sent with an `Idempotency-Key` once per key (the site
    /// app's queue): its key and the test share one transaction, so it is written alone,
    /// not with the writer's group; the lot's rules come from the same cache.
    pub async fn record_once(
        &self,
        lot_id: i64,
        input: &FieldTestInput,
        actor: &Actor,
        key: &str,
    ) -> Result<super::idempotent::Keyed> {
        super::idempotent::record_once(
            self.pool(),
            (self.rules(), &self.0.books),
            lot_id,
            input,
            actor,
            key,
        )
        .await
    }

    /// Records a retest of a failed test at the same spot; the failure stays on record.
    pub async fn record_retest(
        &self,
        failed_id: i64,
        input: &FieldTestInput,
        actor: &Actor,
    ) -> Result<db::field_tests::FieldTest> {
        let record = self.checked_retest(failed_id, input, actor).await?;
        self.store(record, actor, "retest").await
    }

    /// Records a retest sent with an `Idempotency-Key` once per key (a retest kept on the
    /// phone): judged against its failed test's chain when it arrives, stored with its key.
    pub async fn record_retest_once(
        &self,
        failed_id: i64,
        input: &FieldTestInput,
        actor: &Actor,
        key: &str,
    ) -> Result<super::idempotent::Keyed> {
        use super::idempotent::{KeyedTarget, replayed, store_once};
        let failed = require_test(self.pool(), failed_id).await?;
        let target = KeyedTarget::Retest {
            lot_id: failed.lot_id,
            failed_id,
        };
        if let Some(done) = replayed(self.pool(), target, input, key).await? {
            return Ok(done);
        }
        let record = self.checked_retest(failed_id, input, actor).await?;
        store_once(self.pool(), target, input, record, actor, key).await
    }

    /// A retest checked: its lot takes tests, its failed test may be retested (failed, not
    /// voided, not retested already, not of a re-sampled lot), then the test's own checks.
    async fn checked_retest(
        &self,
        failed_id: i64,
        input: &FieldTestInput,
        actor: &Actor,
    ) -> Result<db::field_tests::FieldTest> {
        let pool = self.pool();
        let failed = require_test(pool, failed_id).await?;
        let lot = require_lot(pool, failed.lot_id).await?;
        require_lot_takes_tests(&lot)?;
        let report = lot_report::build(pool, lot.id).await?;
        if let Some(refusal) = sampled_lot_refusal(&lot, &report.clause) {
            return Err(refusal);
        }
        let line = report
            .tests
            .iter()
            .find(|l| l.test.id == failed.id)
            .ok_or_else(|| anyhow::anyhow!("test {} missing from its lot report", failed.id))?;
        let existing = report
            .tests
            .iter()
            .find(|l| l.test.retest_of == Some(failed.id) && l.test.void_reason.is_none());
        if let Some(refusal) = retest_refusal(RetestTarget {
            number: &failed.number,
            voided: failed.void_reason.is_some(),
            passed: line.passed,
            existing_retest: existing.map(|l| l.test.number.as_str()),
        }) {
            return Err(refusal);
        }
        let ctx = self.lot_context(&lot).await?;
        let mut record = self.checked(&ctx, input, Some(&failed), actor).await?;
        record.retest_of = Some(failed.id);
        Ok(record)
    }

    /// A test checked against its lot and the project's instrument register in force.
    async fn checked(
        &self,
        ctx: &LotContext,
        input: &FieldTestInput,
        retest_of: Option<&db::field_tests::FieldTest>,
        actor: &Actor,
    ) -> Result<db::field_tests::FieldTest> {
        let book = self.0.books.book(self.pool(), ctx.lot.project_id).await?;
        let fallback = retest_of.map(Spot::of);
        let checked = check_with_instruments(
            &book,
            ctx,
            input,
            fallback,
            actor,
            &clock::now(),
            Arrival::Single,
        )?;
        Ok(checked.record)
    }

    /// Stores a checked test: with the writer's next group on SQLite, alone otherwise.
    async fn store(
        &self,
        record: db::field_tests::FieldTest,
        actor: &Actor,
        action: &'static str,
    ) -> Result<db::field_tests::FieldTest> {
        match self.writer() {
            Some(w) => w.store(record, actor, action).await,
            None => field::store(self.pool(), record, actor, action).await,
        }
    }
}
