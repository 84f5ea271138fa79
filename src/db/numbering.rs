//! Automatic test numbers, per project, without a row every writer waits on.
//!
//! On SQLite, with its one writer, the number is a counter row (`test_counters`, migration
//! 0012) taken with one `UPDATE … RETURNING` inside the write. On PostgreSQL each project
//! has a sequence (`test_numbers_<project id>`): `nextval` inside the write takes no lock
//! another writer waits for, where a counter row would be held by one writer until its
//! commit (measured with pgbench at 32 clients: a shared counter row, even drawn in a
//! transaction of its own that commits without waiting for the disk, took an insert
//! transaction from about 2,500/s to 950/s; a sequence to 2,055/s). A sequence is not
//! rolled back: a test whose write fails leaves its number unused (a gap; test numbers
//! are labels, unique per project). Certificate numbers, which must have no gaps, are not
//! drawn here.

use super::{Tx, on_tx};

/// The label of automatic test number `n` of a project.
pub fn test_label(n: i64) -> String {
    format!("T-{n:04}")
}

/// The name of a project's number sequence on PostgreSQL (created with the project).
fn sequence_of(project_id: i64) -> String {
    format!("test_numbers_{project_id}")
}

/// The counter value of a number written in the automatic form (`T-0042` is 42).
pub fn automatic_number(label: &str) -> Option<i64> {
    let digits = label.strip_prefix("T-")?;
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}

/// Takes the next automatic number inside the caller's write transaction.
pub async fn take_test_number(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<String> {
    let n: i64 = match tx {
        Tx::Sqlite(t) => {
            sqlx::query_scalar(
                "UPDATE test_counters SET last_number = last_number + 1 WHERE project_id = $1
                 RETURNING last_number",
            )
            .bind(project_id)
            .fetch_one(&mut **t)
            .await?
        }
        Tx::Postgres(t) => {
            sqlx::query_scalar("SELECT nextval(CAST($1 AS regclass))")
                .bind(sequence_of(project_id))
                .fetch_one(&mut **t)
                .await?
        }
    };
    Ok(test_label(n))
}

/// Moves the counter to at least `n`, inside the caller's write transaction: a test given
/// a number of the automatic form by hand (or by a file) is not given it again.
pub async fn follow_number(tx: &mut Tx<'_>, project_id: i64, n: i64) -> sqlx::Result<()> {
    match tx {
        Tx::Sqlite(t) => {
            sqlx::query(
                "UPDATE test_counters SET last_number = $1 WHERE project_id = $2 AND last_number < $3",
            )
            .bind(n)
            .bind(project_id)
            .bind(n)
            .execute(&mut **t)
            .await?;
        }
        Tx::Postgres(t) => {
            sqlx::query(
                "SELECT setval(CAST($1 AS regclass), $2)
                 WHERE COALESCE(pg_sequence_last_value(CAST($3 AS regclass)), 0) < $4",
            )
            .bind(sequence_of(project_id))
            .bind(n)
            .bind(sequence_of(project_id))
            .bind(n)
            .execute(&mut **t)
            .await?;
        }
    }
    Ok(())
}

/// Every project's last automatic number, for a copy.
pub async fn counters(tx: &mut Tx<'_>) -> sqlx::Result<Vec<(i64, i64)>> {
    let projects: Vec<i64> = on_tx!(&mut *tx, |t| sqlx::query_scalar(
        "SELECT id FROM projects ORDER BY id"
    )
    .fetch_all(&mut **t)
    .await)?;
    let mut out = Vec::with_capacity(projects.len());
    for project_id in projects {
        let last: Option<i64> = match &mut *tx {
            Tx::Sqlite(t) => {
                sqlx::query_scalar("SELECT last_number FROM test_counters WHERE project_id = $1")
                    .bind(project_id)
                    .fetch_optional(&mut **t)
                    .await?
            }
            Tx::Postgres(t) => {
                sqlx::query_scalar("SELECT pg_sequence_last_value(CAST($1 AS regclass))")
                    .bind(sequence_of(project_id))
                    .fetch_one(&mut **t)
                    .await?
            }
        };
        out.push((project_id, last.unwrap_or(0)));
    }
    Ok(out)
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
