//! Random secrets (session cookies, API tokens) and their stored hashes.

use base64::Engine;
use sha2::{Digest, Sha256};

/// A new random secret with a readable prefix, e.g. `lls_…` for sessions, `llt_…` for tokens.
pub fn new(prefix: &str) -> anyhow::Result<String> {
    let mut bytes = [0u8; 32];
    getrandom::fill(&mut bytes).map_err(|e| anyhow::anyhow!("no randomness available: {e}"))?;
    Ok(format!(
        "{prefix}{}",
        base64::engine::general_purpose::URL_SAFE_NO_PAD.encode(bytes)
    ))
}

/// What is stored instead of a secret: its SHA-256, hex.
pub fn digest(secret: &str) -> String {
    hex::encode(Sha256::digest(secret.as_bytes()))
}

/// A random password for the first admin, printed once.
pub fn new_password() -> anyhow::Result<String> {
    new("").map(|s| s.chars().take(20).collect())
}
