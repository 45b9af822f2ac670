//! Password hashing and the password rules.
//!
//! Hashes are Argon2id with the `argon2` crate's defaults, m = 19456 KiB, t = 2, p = 1: the
//! minimum of the OWASP Password Storage Cheat Sheet (ASVS 11.4.2). One hash costs about 25 ms of
//! CPU in an optimised build, so hashing runs on the blocking thread pool, never on the async
//! runtime, and at most [`MAX_CONCURRENT_HASHES`] run at once: a burst of logins queues instead of
//! starving the two cores that also serve pages.
//!
//! Rules for new passwords (ASVS 6.2): 12 to 128 characters, no composition rules, no truncation,
//! and a strength estimate (zxcvbn, score at least 3 of 4, with the user name as a hint) that
//! refuses common and guessable passwords.

use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};

use anyhow::Context;
use argon2::Argon2;
use argon2::password_hash::{PasswordHasher, PasswordVerifier};
use tokio::sync::Semaphore;

/// Hashes computed at the same time, at most.
pub const MAX_CONCURRENT_HASHES: usize = 2;
/// Shortest password accepted, in characters.
pub const MIN_PASSWORD_CHARS: usize = 12;
/// Longest password accepted, in characters.
pub const MAX_PASSWORD_CHARS: usize = 128;

/// Hashes and checks passwords, two at a time, off the async runtime.
#[derive(Clone)]
pub struct Passwords {
    permits: Arc<Semaphore>,
    /// A hash of a random password nobody knows: an unknown user name is checked against it, so
    /// that answering takes as long as for a known name.
    dummy_hash: Arc<String>,
    /// Argon2 verifications run so far, known and unknown names alike (tests use it to see
    /// that an unknown name is checked against the dummy hash rather than answered at once).
    verifications: Arc<AtomicU64>,
}

impl std::fmt::Debug for Passwords {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Passwords").finish_non_exhaustive()
    }
}

impl Passwords {
    /// Prepare the hasher (computes the dummy hash once).
    ///
    /// # Errors
    /// When hashing fails (it does not in practice).
    pub async fn new() -> anyhow::Result<Self> {
        let permits = Arc::new(Semaphore::new(MAX_CONCURRENT_HASHES));
        let dummy = hash_blocking(super::secret::generate_password()).await?;
        Ok(Self {
            permits,
            dummy_hash: Arc::new(dummy),
            verifications: Arc::new(AtomicU64::new(0)),
        })
    }

    /// Hash a password into an Argon2id PHC string.
    ///
    /// # Errors
    /// When hashing fails.
    pub async fn hash(&self, password: &str) -> anyhow::Result<String> {
        let _permit = self.permits.acquire().await.context("hasher closed")?;
        hash_blocking(password.to_owned()).await
    }

    /// Check a password against a stored PHC string, or against the dummy hash when there is
    /// no account (the answer is then always false, after the same work).
    pub async fn verify(&self, password: &str, stored: Option<&str>) -> bool {
        let Ok(_permit) = self.permits.acquire().await else {
            return false;
        };
        let known = stored.is_some();
        let phc = stored.map_or_else(|| self.dummy_hash.as_str().to_owned(), str::to_owned);
        let password = password.to_owned();
        let ok = tokio::task::spawn_blocking(move || verify_now(&password, &phc))
            .await
            .unwrap_or(false);
        self.verifications.fetch_add(1, Ordering::Relaxed);
        ok && known
    }

    /// Number of password verifications run since start-up.
    pub fn verifications(&self) -> u64 {
        self.verifications.load(Ordering::Relaxed)
    }
}

async fn hash_blocking(password: String) -> anyhow::Result<String> {
    tokio::task::spawn_blocking(move || hash_now(&password))
        .await
        .context("the hashing task failed")?
}

/// Hash synchronously (the command line uses this).
///
/// # Errors
/// When hashing fails.
pub fn hash_now(password: &str) -> anyhow::Result<String> {
    let hash: argon2::PasswordHash = Argon2::default()
        .hash_password(password.as_bytes())
        .map_err(|e| anyhow::anyhow!("could not hash the password: {e}"))?;
    Ok(hash.to_string())
}

/// Check synchronously; a malformed stored hash never matches.
pub fn verify_now(password: &str, phc: &str) -> bool {
    // The parameters come from the stored string, so older hashes keep verifying if the
    // defaults ever change.
    Argon2::default()
        .verify_password(password.as_bytes(), phc)
        .is_ok()
}

/// Check a new password against the rules; the error is one sentence for the form.
///
/// # Errors
/// When the password is too short, too long, or guessable.
pub fn check_new_password(password: &str, username: &str) -> Result<(), String> {
    let n = password.chars().count();
    if n < MIN_PASSWORD_CHARS {
        return Err(format!(
            "The password must have at least {MIN_PASSWORD_CHARS} characters; it has {n}."
        ));
    }
    if n > MAX_PASSWORD_CHARS {
        return Err(format!(
            "The password may have at most {MAX_PASSWORD_CHARS} characters; it has {n}."
        ));
    }
    let estimate = zxcvbn::zxcvbn(password, &[username, "massline"]);
    if (estimate.score() as u8) < 3 {
        return Err(
            "This password is too easy to guess (a common word, name, pattern or a variant of the user name); a few unrelated words make a good one."
                .into(),
        );
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hashes_are_argon2id_with_the_owasp_minimum_parameters() {
        let phc = hash_now("correct horse battery staple").unwrap();
        // OWASP Password Storage Cheat Sheet: Argon2id, m=19456 KiB, t=2, p=1 at least.
        assert!(phc.starts_with("$argon2id$v=19$m=19456,t=2,p=1$"), "{phc}");
        assert!(verify_now("correct horse battery staple", &phc));
        assert!(!verify_now("correct horse battery stapl", &phc));
        assert!(!verify_now("anything", "not a hash"));
        // A fresh salt every time.
        assert_ne!(phc, hash_now("correct horse battery staple").unwrap());
    }

    #[test]
    fn password_rules_bound_the_length_and_refuse_guessable_ones() {
        assert!(
            check_new_password("short", "quillfern")
                .unwrap_err()
                .contains("at least 12")
        );
        assert!(
            check_new_password(&"q".repeat(129), "quillfern")
                .unwrap_err()
                .contains("at most 128")
        );
        for weak in [
            "password1234",
            "123456789012",
            "qwertyuiopas",
            "quillfern123",
        ] {
            assert!(check_new_password(weak, "quillfern").is_err(), "{weak}");
        }
        // No composition rules: a long lowercase passphrase is fine.
        assert!(check_new_password("velvet orbit lantern quietly", "quillfern").is_ok());
        assert!(
            check_new_password(&super::super::secret::generate_password(), "quillfern").is_ok()
        );
    }

    #[tokio::test]
    async fn unknown_users_are_checked_against_the_dummy_and_always_fail() {
        let p = Passwords::new().await.unwrap();
        let phc = p.hash("velvet orbit lantern quietly").await.unwrap();
        assert!(p.verify("velvet orbit lantern quietly", Some(&phc)).await);
        assert!(!p.verify("velvet orbit lantern quietly", None).await);
        assert!(!p.verify("wrong", Some(&phc)).await);
    }
}
