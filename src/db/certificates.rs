//! Issued end-of-lift certificates: immutable PDF bytes with their hash and revision chain.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};

/// Every revision for a lot, newest first, through a pool or a connection of one engine.
macro_rules! revisions_of {
    ($on:expr, $lot_id:expr) => {
        sqlx::query_as::<_, Certificate>(sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM certificates WHERE lot_id = $1 ORDER BY revision DESC"
        )))
        .bind($lot_id)
        .fetch_all($on)
        .await
    };
}

/// A certificate revision without its PDF bytes.
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct Certificate {
    pub id: i64,
    pub project_id: i64,
    pub lot_id: i64,
    pub sequence: i64,
    pub revision: i64,
    pub number: String,
    pub verification_code: String,
    pub sha256: String,
    pub record_fingerprint: String,
    pub issued_at: String,
    pub issued_by: String,
    pub superseded_at: Option<String>,
    /// Set when the lot was reopened: this revision no longer certifies anything.
    pub withdrawn_at: Option<String>,
    pub withdrawn_by: Option<String>,
    pub withdrawn_reason: Option<String>,
}

impl Certificate {
    /// True while this revision is the lot's certificate: neither superseded nor withdrawn.
    pub fn is_current(&self) -> bool {
        self.superseded_at.is_none() && self.withdrawn_at.is_none()
    }
}

const COLUMNS: &str = "id, project_id, lot_id, sequence, revision, number, verification_code, sha256, \
    record_fingerprint, issued_at, issued_by, superseded_at, withdrawn_at, withdrawn_by, withdrawn_reason";

/// A certificate to store; the PDF is written once and never updated.
#[derive(Debug, Clone)]
pub struct NewCertificate<'a> {
    pub project_id: i64,
    pub lot_id: i64,
    pub sequence: i64,
    pub revision: i64,
    pub number: &'a str,
    pub verification_code: &'a str,
    pub sha256: &'a str,
    pub record_fingerprint: &'a str,
    pub pdf: &'a [u8],
    pub issued_at: &'a str,
    pub issued_by: &'a str,
}

/// The next free certificate sequence number of a project (inside the issuing transaction).
pub async fn next_sequence(tx: &mut Tx<'_>, project_id: i64) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "SELECT COALESCE(MAX(sequence), 0) + 1 FROM certificates WHERE project_id = $1",
    )
    .bind(project_id)
    .fetch_one(&mut **tx)
    .await)
}

/// The current (not superseded) certificate of a lot, read inside a transaction.
pub async fn current_for_lot_tx(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<Option<Certificate>> {
    on_tx!(tx, |tx| sqlx::query_as::<_, Certificate>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM certificates WHERE lot_id = $1 AND superseded_at IS NULL"
        ))
    )
    .bind(lot_id)
    .fetch_optional(&mut **tx)
    .await)
}

/// Withdraws a lot's live certificate (its lot was reopened); returns the id withdrawn.
pub async fn withdraw_for_lot(
    tx: &mut Tx<'_>,
    lot_id: i64,
    by: &str,
    reason: &str,
    now: &str,
) -> sqlx::Result<Option<i64>> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "UPDATE certificates SET withdrawn_at = $1, withdrawn_by = $2, withdrawn_reason = $3
         WHERE lot_id = $4 AND superseded_at IS NULL AND withdrawn_at IS NULL RETURNING id",
    )
    .bind(now)
    .bind(by)
    .bind(reason)
    .bind(lot_id)
    .fetch_optional(&mut **tx)
    .await)
}

/// Marks a certificate superseded.
pub async fn supersede(tx: &mut Tx<'_>, id: i64, now: &str) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "UPDATE certificates SET superseded_at = $1 WHERE id = $2 AND superseded_at IS NULL",
    )
    .bind(now)
    .bind(id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Stores a new certificate revision.
pub async fn insert(tx: &mut Tx<'_>, c: &NewCertificate<'_>) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| {
        sqlx::query_scalar(
        "INSERT INTO certificates (project_id, lot_id, sequence, revision, number, verification_code, sha256,
             record_fingerprint, pdf, issued_at, issued_by)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11) RETURNING id",
    )
    .bind(c.project_id)
    .bind(c.lot_id)
    .bind(c.sequence)
    .bind(c.revision)
    .bind(c.number)
    .bind(c.verification_code)
    .bind(c.sha256)
    .bind(c.record_fingerprint)
    .bind(c.pdf)
    .bind(c.issued_at)
    .bind(c.issued_by)
    .fetch_one(&mut **tx)
    .await
    })
}

/// Every revision for a lot, newest first.
pub async fn for_lot(pool: &Pool, lot_id: i64) -> sqlx::Result<Vec<Certificate>> {
    on_pool!(pool, |pool| revisions_of!(pool, lot_id))
}

/// Every certificate revision of a project, by number then revision.
pub async fn for_project(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<Certificate>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, Certificate>(sqlx::AssertSqlSafe(format!(
        "SELECT {COLUMNS} FROM certificates WHERE project_id = $1 ORDER BY sequence DESC, revision DESC"
    )))
    .bind(project_id)
    .fetch_all(pool)
    .await
    })
}

/// One revision by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<Certificate>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Certificate>(
        sqlx::AssertSqlSafe(format!("SELECT {COLUMNS} FROM certificates WHERE id = $1"))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// The stored PDF bytes of a revision.
pub async fn pdf(pool: &Pool, id: i64) -> sqlx::Result<Option<Vec<u8>>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT pdf FROM certificates WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// Finds a revision by verification code or SHA-256 (both stored lower/upper-case normalised).
pub async fn find(pool: &Pool, code_or_hash: &str) -> sqlx::Result<Option<Certificate>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, Certificate>(
        sqlx::AssertSqlSafe(format!(
            "SELECT {COLUMNS} FROM certificates WHERE verification_code = $1 OR sha256 = $2"
        ))
    )
    .bind(code_or_hash.to_ascii_uppercase())
    .bind(code_or_hash.to_ascii_lowercase())
    .fetch_optional(pool)
    .await)
}

/// Every revision for a lot, newest first, read inside the issuing transaction.
pub async fn for_lot_tx(tx: &mut Tx<'_>, lot_id: i64) -> sqlx::Result<Vec<Certificate>> {
    on_tx!(tx, |tx| revisions_of!(&mut **tx, lot_id))
}
