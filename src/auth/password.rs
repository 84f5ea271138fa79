//! Password hashing with argon2id at the crate's recommended parameters.

use argon2::Argon2;
use argon2::password_hash::phc::PasswordHash;
use argon2::password_hash::{PasswordHasher, PasswordVerifier};

/// Hashes a password to a PHC string (`$argon2id$v=19$…`) with a random salt.
pub fn hash(password: &str) -> anyhow::Result<String> {
    Argon2::default()
        .hash_password(password.as_bytes())
        .map(|h| h.to_string())
        .map_err(|e| anyhow::anyhow!("hashing password: {e}"))
}

/// True when `password` matches the stored PHC string.
pub fn verify(password: &str, stored: &str) -> bool {
    PasswordHash::new(stored)
        .map(|h| {
            Argon2::default()
                .verify_password(password.as_bytes(), &h)
                .is_ok()
        })
        .unwrap_or(false)
}

/// A password rule a person can read: 10 to 200 characters.
pub fn check_strength(password: &str) -> Result<(), String> {
    let n = password.chars().count();
    if n < 10 {
        return Err("must be at least 10 characters".into());
    }
    if n > 200 {
        return Err("must be at most 200 characters".into());
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hash_verifies_and_is_argon2id_with_salt() {
        let h = hash("correct horse battery").unwrap();
        assert!(h.starts_with("$argon2id$v=19$"), "{h}");
        assert!(verify("correct horse battery", &h));
        assert!(!verify("correct horse battery!", &h));
        assert_ne!(h, hash("correct horse battery").unwrap(), "random salt");
        assert!(!verify("x", "not a hash"));
    }
}
