//! The one record path of a new field test: single entry, the group-commit writer, a
//! keyed POST and a file import all land a checked test through [`land`] — the lot still
//! taking tests, a number, the row, its audit row — inside the caller's write transaction.
//!
//! What differs is only what the caller already holds ([`Landing`]): a single test reads
//! its lot's state under the write lock and is inserted at once; an import, which holds the
//! write lock from before it read its lots and numbers its rows itself, passes the lot's
//! state it read and queues the row for a multi-row insert.

use serde_json::json;

use crate::db::{self, audit, bulk, field_tests::FieldTest, lots};
use crate::domain::LotState;
use crate::error::{AppError, Result};
use crate::ledger::Actor;

/// How a checked test reaches the table.
pub(crate) enum Landing<'b, 'a> {
    /// On its own: the lot's state read under the write lock, a missing number drawn, the
    /// id given by the engine, the audit row written at once. A number taken meanwhile
    /// refuses this test alone.
    Alone,
    /// Queued in an import's batch, with the id and number the import gave it.
    Batch {
        batch: &'b mut bulk::Batch<'a>,
        /// The lot's state as the import read it, under the write lock it holds to its end.
        lot_state: LotState,
        /// False when the import's one audit row stands for its tests (per-import audit).
        audited: bool,
    },
}

/// Writes one checked test and its audit row in its own transaction (where there is no
/// group-commit writer: PostgreSQL, or outside a runtime).
pub(crate) async fn store(
    pool: &db::Pool,
    record: FieldTest,
    actor: &Actor,
    action: &str,
) -> Result<FieldTest> {
    let mut tx = db::begin_write(pool).await?;
    let record = store_in(&mut tx, record, actor, action).await?;
    tx.commit().await?;
    crate::metrics::field_tests_recorded(test_source(action), 1);
    Ok(record)
}

/// The metrics label of a store action ("retest", else an entry).
pub(crate) fn test_source(action: &str) -> crate::metrics::TestSource {
    if action == "retest" {
        crate::metrics::TestSource::Retest
    } else {
        crate::metrics::TestSource::Entry
    }
}

/// Writes one checked test and its audit row inside a write transaction (the caller's
/// own, or a group commit's savepoint, see `ledger::test_writer`).
pub(crate) async fn store_in(
    tx: &mut db::Tx<'_>,
    record: FieldTest,
    actor: &Actor,
    action: &str,
) -> Result<FieldTest> {
    land(tx, record, actor, action, Landing::Alone).await
}

/// Lands one checked test and its audit row in the caller's write transaction: the one
/// write of a new test, whoever records it.
pub(crate) async fn land<'a>(
    tx: &mut db::Tx<'_>,
    mut record: FieldTest,
    actor: &'a Actor,
    action: &'a str,
    how: Landing<'_, 'a>,
) -> Result<FieldTest> {
    // The lot was open when the test was checked; it must still be when the test lands.
    let state = match &how {
        Landing::Alone => lots::state_for_write(tx, record.lot_id).await?,
        Landing::Batch { lot_state, .. } => Some(*lot_state),
    };
    still_takes_tests(state, record.lot_id)?;
    if record.number.is_empty() {
        if matches!(how, Landing::Batch { .. }) {
            // The count behind automatic numbers moves only as the batch is inserted.
            return Err(anyhow::anyhow!("a queued test has no number").into());
        }
        record.number = db::numbering::take_test_number(tx, record.project_id).await?;
    } else if let Some(n) = db::numbering::automatic_number(&record.number)
        && matches!(how, Landing::Alone)
    {
        // A number of the automatic form given by hand is not drawn again.
        db::numbering::follow_number(tx, record.project_id, n).await?;
    }
    match how {
        Landing::Alone => {
            record.id = insert_alone(tx, &record).await?;
            audit::record(tx, &audit_of(&record, actor, action), &record.created_at).await?;
        }
        Landing::Batch { batch, audited, .. } => {
            if audited {
                let change = audit_of(&record, actor, action);
                batch.push_audit(tx, change, &record.created_at).await?;
            }
            batch.push_test(tx, record.clone()).await?;
        }
    }
    Ok(record)
}

/// Refuses a test whose lot no longer takes tests (or is gone).
fn still_takes_tests(state: Option<LotState>, lot_id: i64) -> Result<()> {
    match state {
        Some(state) if state.takes_tests() => Ok(()),
        Some(state) => Err(AppError::conflict(
            "lot_id",
            format!(
                "the lot became {state} meanwhile; tests can be added only while it is open or rejected"
            ),
            vec![],
        )),
        None => Err(AppError::not_found(
            "lot_id",
            format!("lot {lot_id} does not exist"),
        )),
    }
}

/// Inserts one test, its id given by the engine; a number taken is the test's conflict.
async fn insert_alone(tx: &mut db::Tx<'_>, record: &FieldTest) -> Result<i64> {
    match db::field_tests::insert(tx, record).await {
        Ok(id) => Ok(id),
        Err(e) if db::is_unique_violation(&e) => Err(AppError::conflict(
            "number",
            format!(
                "test number {} is already used in this project",
                record.number
            ),
            vec![],
        )),
        Err(e) => Err(e.into()),
    }
}

/// The audit row of a new test: the stored record as it landed.
fn audit_of<'a>(record: &FieldTest, actor: &'a Actor, action: &'a str) -> audit::Change<'a> {
    audit::Change {
        actor: &actor.name,
        action,
        entity: "field_test",
        entity_id: Some(record.id),
        project_id: Some(record.project_id),
        before: None,
        after: Some(json!(record)),
        origin: &actor.origin,
    }
}
