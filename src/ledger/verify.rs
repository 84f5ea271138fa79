//! Telling whether a certificate copy is genuine and current.

use serde_json::{Value, json};
use sha2::{Digest, Sha256};

use crate::db::{self, Pool};
use crate::error::{AppError, Result};

/// The three ways a reader can name a certificate.
pub enum Query {
    /// The verification code printed on every page.
    Code(String),
    /// The SHA-256 of the PDF bytes, hex.
    Hash(String),
    /// The PDF itself.
    Pdf(Vec<u8>),
}

/// Loads a certificate or fails with 404 naming `certificate_id`.
pub async fn require_certificate(pool: &Pool, id: i64) -> Result<db::certificates::Certificate> {
    db::certificates::get(pool, id).await?.ok_or_else(|| {
        AppError::not_found("certificate_id", format!("certificate {id} does not exist"))
    })
}

/// Finds the certificate a query names and says whether it is current.
pub async fn verify(pool: &Pool, q: Query) -> Result<Value> {
    let (field, key, by) = match q {
        Query::Code(c) => ("code", c.trim().to_string(), "verification code"),
        Query::Hash(h) => ("sha256", h.trim().to_string(), "SHA-256"),
        Query::Pdf(bytes) => ("pdf", hex::encode(Sha256::digest(&bytes)), "uploaded PDF"),
    };
    if key.is_empty() {
        return Err(AppError::invalid(field, "is empty"));
    }
    let Some(c) = db::certificates::find(pool, &key).await? else {
        return Ok(json!({
            "found": false,
            "matched_by": by,
            "message": format!("no certificate matches this {by}; the copy is not one liftledger issued, or it was altered"),
        }));
    };
    let lot = db::lots::get(pool, c.lot_id).await?;
    let current = c.is_current();
    let message = match (&c.withdrawn_at, current) {
        (Some(at), _) => format!(
            "{} revision {} is genuine but WITHDRAWN on {} by {}: {}",
            c.number,
            c.revision,
            crate::clock::display(at),
            c.withdrawn_by.as_deref().unwrap_or(""),
            c.withdrawn_reason.as_deref().unwrap_or("")
        ),
        (None, true) => format!(
            "{} revision {} is genuine and current",
            c.number, c.revision
        ),
        (None, false) => format!(
            "{} revision {} is genuine but SUPERSEDED by a later revision",
            c.number, c.revision
        ),
    };
    Ok(json!({
        "found": true,
        "matched_by": by,
        "withdrawn": c.withdrawn_at.is_some(),
        "withdrawn_reason": c.withdrawn_reason,
        "certificate": c,
        "lot_code": lot.map(|l| l.code),
        "current": current,
        "message": message,
    }))
}

/// Decodes standard base64 (whitespace ignored); `None` when it is not base64.
pub fn decode_base64(s: &str) -> Option<Vec<u8>> {
    use base64::Engine;
    let clean: String = s.chars().filter(|c| !c.is_ascii_whitespace()).collect();
    base64::engine::general_purpose::STANDARD.decode(clean).ok()
}
