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

/// The longest password accepted anywhere (sign-in included), so a huge one never reaches argon2.
pub const MAX_CHARS: usize = 1024;

/// A password rule a person can read: 10 to 1,024 characters.
pub fn check_strength(password: &str) -> Result<(), String> {
    let n = password.chars().count();
    if n < 10 {
        return Err("must be at least 10 characters".into());
    }
    if n > MAX_CHARS {
        return Err(format!("must be at most {MAX_CHARS} characters"));
    }
    Ok(())
}

/// Argon2 runs at most this many at once: one per core. More would only queue on the
/// cores and take them from the request workers.
fn slots() -> &'static tokio::sync::Semaphore {
    static SLOTS: std::sync::OnceLock<tokio::sync::Semaphore> = std::sync::OnceLock::new();
    SLOTS.get_or_init(|| {
        let cores = std::thread::available_parallelism().map_or(2, std::num::NonZeroUsize::get);
        tokio::sync::Semaphore::new(cores)
    })
}

/// [`verify`] on tokio's blocking pool behind the per-core semaphore: a burst of
/// sign-ins waits its turn without stalling the async workers that serve every other request.
pub async fn verify_off_workers(password: &str, stored: &str) -> bool {
    let Ok(_slot) = slots().acquire().await else {
        return false;
    };
    let (p, s) = (password.to_owned(), stored.to_owned());
    tokio::task::spawn_blocking(move || verify(&p, &s))
        .await
        .unwrap_or(false)
}

/// [`hash`] on the blocking pool behind the same semaphore.
pub async fn hash_off_workers(password: &str) -> anyhow::Result<String> {
    let _slot = slots()
        .acquire()
        .await
        .map_err(|e| anyhow::anyhow!("password slots closed: {e}"))?;
    let p = password.to_owned();
    tokio::task::spawn_blocking(move || hash(&p))
        .await
        .map_err(|e| anyhow::anyhow!("hashing task failed: {e}"))?
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
