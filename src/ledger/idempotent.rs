//! A field test sent with an `Idempotency-Key` (the site app's offline queue): the key is
//! stored once, in the transaction that writes the test and its audit row, so a repeat —
//! a retry after a lost answer, a server restarted mid-sync — gets the stored test back
//! instead of a second one. A refused test stores no key, so a fixed retry is judged anew.

use sha2::{Digest, Sha256};

use super::Actor;
use super::field::{FieldTestInput, LotContext, RuleCache, require_lot};
use super::field::{require_lot_takes_tests, require_test, store_in};
use super::instruments::check::{Arrival, BookCache, check_with_instruments};
use crate::clock;
use crate::db::{self, Pool};
use crate::error::{AppError, Result};

/// The header's field name in error bodies.
pub const HEADER: &str = "Idempotency-Key";

/// What a keyed POST did.
#[derive(Debug, Clone)]
pub enum Keyed {
    /// The test was written now.
    Created(db::field_tests::FieldTest),
    /// The key was seen before: the test it made then.
    Replayed(db::field_tests::FieldTest),
}

/// A key as the draft describes it: a client-made unique string (1–255 visible ASCII
/// characters; the site app sends a UUID).
pub fn check_key(raw: &str) -> Result<String> {
    let k = raw.trim().trim_matches('"');
    if k.is_empty() || k.len() > 255 || !k.bytes().all(|b| b.is_ascii_graphic()) {
        return Err(AppError::invalid(
            HEADER,
            "must be 1 to 255 visible ASCII characters",
        ));
    }
    Ok(k.to_string())
}

/// What a keyed request asks for: a new test on a lot, or a retest of a failed test.
#[derive(Debug, Clone, Copy)]
pub enum KeyedTarget {
    NewTest { lot_id: i64 },
    Retest { lot_id: i64, failed_id: i64 },
}

impl KeyedTarget {
    fn lot_id(self) -> i64 {
        match self {
            Self::NewTest { lot_id } | Self::Retest { lot_id, .. } => lot_id,
        }
    }
}

/// SHA-256 of the target and the body: the same key with another request is refused.
fn fingerprint(target: KeyedTarget, input: &FieldTestInput) -> Result<String> {
    let body = serde_json::to_string(input).map_err(anyhow::Error::from)?;
    let text = match target {
        KeyedTarget::NewTest { lot_id } => format!("{lot_id}\n{body}"),
        KeyedTarget::Retest { lot_id, failed_id } => {
            format!("{lot_id}\nretest of {failed_id}\n{body}")
        }
    };
    Ok(hex::encode(Sha256::digest(text.as_bytes())))
}

/// The test a key made before, when the key was seen (refused if for another request).
pub async fn replayed(
    pool: &Pool,
    target: KeyedTarget,
    input: &FieldTestInput,
    key: &str,
) -> Result<Option<Keyed>> {
    let sha = fingerprint(target, input)?;
    match db::idempotency::get(pool, key).await? {
        Some(found) => Ok(Some(replay(pool, found, target.lot_id(), &sha).await?)),
        None => Ok(None),
    }
}

/// The stored test of a key seen before, if the request is the same one.
async fn replay(
    pool: &Pool,
    found: db::idempotency::StoredKey,
    lot_id: i64,
    sha: &str,
) -> Result<Keyed> {
    if found.lot_id != lot_id || found.request_sha256 != sha {
        return Err(AppError::invalid(
            HEADER,
            "this key was already used for a different test; send a new key for a new test",
        ));
    }
    let id = found
        .field_test_id
        .ok_or_else(|| anyhow::anyhow!("idempotency key stored without its test"))?;
    Ok(Keyed::Replayed(require_test(pool, id).await?))
}

/// Records a new field test once per key; a repeat of the key answers the stored test.
pub async fn record_once(
    pool: &Pool,
    (rules, books): (&RuleCache, &BookCache),
    lot_id: i64,
    input: &FieldTestInput,
    actor: &Actor,
    key: &str,
) -> Result<Keyed> {
    let target = KeyedTarget::NewTest { lot_id };
    if let Some(done) = replayed(pool, target, input, key).await? {
        return Ok(done);
    }
    let lot = require_lot(pool, lot_id).await?;
    require_lot_takes_tests(&lot)?;
    let ctx = LotContext::load_with(pool, rules, &lot).await?;
    let now = clock::now();
    // The same checks as an unkeyed entry, the instrument register's included.
    let book = books.book(pool, lot.project_id).await?;
    let checked = check_with_instruments(&book, &ctx, input, None, actor, &now, Arrival::Single)?;
    store_once(pool, target, input, checked.record, actor, key).await
}

/// Stores a checked test and its key in one transaction, once per key: a key committed
/// meanwhile by another request answers with that request's test.
pub async fn store_once(
    pool: &Pool,
    target: KeyedTarget,
    input: &FieldTestInput,
    record: db::field_tests::FieldTest,
    actor: &Actor,
    key: &str,
) -> Result<Keyed> {
    let sha = fingerprint(target, input)?;
    let lot_id = target.lot_id();
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if let Some(found) = db::idempotency::get_in(&mut tx, key).await? {
        drop(tx);
        return replay(pool, found, lot_id, &sha).await;
    }
    match db::idempotency::claim(&mut tx, key, lot_id, &sha, &actor.name, &now).await {
        Ok(()) => {}
        Err(e) if db::is_unique_violation(&e) => {
            // Another request with this key committed first (PostgreSQL waits for it).
            drop(tx);
            let found = db::idempotency::get(pool, key)
                .await?
                .ok_or_else(|| anyhow::anyhow!("idempotency key vanished after a conflict"))?;
            return replay(pool, found, lot_id, &sha).await;
        }
        Err(e) => return Err(e.into()),
    }
    let action = match target {
        KeyedTarget::NewTest { .. } => "create",
        KeyedTarget::Retest { .. } => "retest",
    };
    let record = store_in(&mut tx, record, actor, action).await?;
    db::idempotency::settle(&mut tx, key, record.id).await?;
    tx.commit().await?;
    crate::metrics::field_tests_recorded(crate::metrics::TestSource::Entry, 1);
    Ok(Keyed::Created(record))
}
