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

use super::{Engine, Pool, Tx, on_tx};

/// The label of automatic test number `n` of a project.
pub fn test_label(n: i64) -> String {
    format!("T-{n:04}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn automatic_numbers_read_back_and_others_are_not_theirs() {
        assert_eq!(automatic_number(&test_label(42)), Some(42));
        assert_eq!(automatic_number("T-12345"), Some(12345));
        for other in ["T-", "T-12a", "S0000001", "t-0001", "T--1", ""] {
            assert_eq!(automatic_number(other), None, "{other}");
        }
    }
}

/// The counter value of a number written in the automatic form (`T-0042` is 42).
pub fn automatic_number(label: &str) -> Option<i64> {
    let digits = label.strip_prefix("T-")?;
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}

/// Moves the counter to at least `n`, inside the caller's write transaction: a test given
/// a number of the automatic form by hand (or by a file) is not given it again. The row
/// is only locked when the counter moves.
pub async fn follow_number(tx: &mut Tx<'_>, project_id: i64, n: i64) -> sqlx::Result<()> {
    on_tx!(tx, |t| sqlx::query(
        "UPDATE test_counters SET last_number = $1 WHERE project_id = $2 AND last_number < $3",
    )
    .bind(n)
    .bind(project_id)
    .bind(n)
    .execute(&mut **t)
    .await
    .map(|_| ()))
}

/// True when the counter is taken inside the write (SQLite); false when it is drawn
/// apart, before the write (PostgreSQL).
pub fn counter_in_write(tx: &Tx<'_>) -> bool {
    matches!(tx, Tx::Sqlite(_))
}

/// [`follow_number`] in a short transaction of its own, on PostgreSQL (as
/// [`draw_test_number`]); nothing on SQLite, where the write follows it.
pub async fn follow_apart(pool: &Pool, project_id: i64, n: i64) -> sqlx::Result<()> {
    if pool.engine() != Engine::Postgres {
        return Ok(());
    }
    let mut tx = pool.begin().await?;
    follow_number(&mut tx, project_id, n).await?;
    tx.commit().await
}

/// Takes the next automatic number inside the caller's write transaction.
pub async fn take_test_number(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<String> {
    let n: i64 = on_tx!(tx, |t| sqlx::query_scalar(
        "UPDATE test_counters SET last_number = last_number + 1 WHERE project_id = $1
         RETURNING last_number",
    )
    .bind(project_id)
    .fetch_one(&mut **t)
    .await)?;
    Ok(test_label(n))
}

/// Draws the next automatic number in a transaction of its own, on PostgreSQL; `None`
/// on SQLite, where [`take_test_number`] inside the write costs no waiting.
pub async fn draw_test_number(pool: &Pool, project_id: i64) -> sqlx::Result<Option<String>> {
    if pool.engine() != Engine::Postgres {
        return Ok(None);
    }
    let mut tx = pool.begin().await?;
    on_tx!(&mut tx, |t| sqlx::query(
        "SET LOCAL synchronous_commit = off"
    )
    .execute(&mut **t)
    .await
    .map(|_| ()))?;
    let number = take_test_number(&mut tx, project_id).await?;
    tx.commit().await?;
    Ok(Some(number))
}
