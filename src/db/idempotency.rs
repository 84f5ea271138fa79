//! Idempotency keys of field tests (the `Idempotency-Key` header of a test POST).

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// The key as stored, through a pool or a connection of one engine.
macro_rules! read {
    ($on:expr, $key:expr) => {
        sqlx::query_as::<_, StoredKey>(
            "SELECT lot_id, field_test_id, request_sha256 FROM idempotency_keys WHERE idempotency_key = $1",
        )
        .bind($key)
        .fetch_optional($on)
        .await
    };
}

/// A stored key: what it was sent with and the test it made.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct StoredKey {
    pub lot_id: i64,
    pub field_test_id: Option<i64>,
    pub request_sha256: String,
}

/// The key as stored, read through the pool (after a lost race, outside the writer).
pub async fn get(pool: &Pool, key: &str) -> sqlx::Result<Option<StoredKey>> {
    on_pool!(pool, |pool| read!(pool, key))
}

/// The key as stored, read inside the write transaction.
pub async fn get_in(tx: &mut Tx<'_>, key: &str) -> sqlx::Result<Option<StoredKey>> {
    on_tx!(tx, |tx| read!(&mut **tx, key))
}

/// Claims a key before its test is written: a second writer of the same key fails here
/// with a unique violation (on PostgreSQL it waits for the first to commit or roll back).
pub async fn claim(
    tx: &mut Tx<'_>,
    key: &str,
    lot_id: i64,
    request_sha256: &str,
    created_by: &str,
    created_at: &str,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| {
        sqlx::query(
        "INSERT INTO idempotency_keys (idempotency_key, lot_id, request_sha256, created_by, created_at)
         VALUES ($1, $2, $3, $4, $5)",
    )
    .bind(key)
    .bind(lot_id)
    .bind(request_sha256)
    .bind(created_by)
    .bind(created_at)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(())
}

/// Points a claimed key at the test it made (same transaction).
pub async fn settle(tx: &mut Tx<'_>, key: &str, field_test_id: i64) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "UPDATE idempotency_keys SET field_test_id = $1 WHERE idempotency_key = $2"
    )
    .bind(field_test_id)
    .bind(key)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}
