//! Automatic test numbers: a counter per project (`test_counters`, migration 0012).
//!
//! The counter is one row every numbered write of a project updates, so it must not be
//! held while a test's transaction commits: on PostgreSQL a number is drawn in a short
//! transaction of its own ([`draw_test_number`]) before the test's write begins, and
//! that transaction commits without waiting for the disk (`synchronous_commit = off`).
//! That is safe: the WAL is written in order, so the test's own durable commit, which
//! comes later, makes the counter durable with it. A test whose write then fails leaves
//! its number unused (a gap; test numbers are labels, unique per project). On SQLite,
//! with its one writer, the number is taken inside the write ([`take_test_number`]).
//! Certificate numbers, which must have no gaps, are not drawn here.

use super::{Engine, Pool, Tx, engine_of};

/// The label of automatic test number `n` of a project.
pub fn test_label(n: i64) -> String {
    format!("T-{n:04}")
}

/// Takes the next automatic number inside the caller's write transaction.
pub async fn take_test_number(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<String> {
    let n: i64 = sqlx::query_scalar(
        "UPDATE test_counters SET last_number = last_number + 1 WHERE project_id = $1
         RETURNING last_number",
    )
    .bind(project_id)
    .fetch_one(&mut **tx)
    .await?;
    Ok(test_label(n))
}

/// Draws the next automatic number in a transaction of its own, on PostgreSQL; `None`
/// on SQLite, where [`take_test_number`] inside the write costs no waiting.
pub async fn draw_test_number(pool: &Pool, project_id: i64) -> sqlx::Result<Option<String>> {
    if engine_of(pool) != Engine::Postgres {
        return Ok(None);
    }
    let mut tx = pool.begin().await?;
    sqlx::query("SET LOCAL synchronous_commit = off")
        .execute(&mut *tx)
        .await?;
    let number = take_test_number(&mut tx, project_id).await?;
    tx.commit().await?;
    Ok(Some(number))
}

/// Moves the counter past the project's tests after an import that gave its own numbers,
/// so the next automatic number follows the count, as before the counter.
pub async fn follow_count(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<()> {
    sqlx::query(
        "UPDATE test_counters SET last_number = c.n
         FROM (SELECT COUNT(*) AS n FROM field_tests WHERE project_id = $1) c
         WHERE project_id = $2 AND last_number < c.n",
    )
    .bind(project_id)
    .bind(project_id)
    .execute(&mut **tx)
    .await?;
    Ok(())
}
