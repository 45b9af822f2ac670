//! Random secrets: session ids, anti-forgery tokens, API tokens, generated passwords.
//!
//! All come from the thread-local CSPRNG of `rand` (ChaCha, seeded from the operating system).
//! Session ids and API tokens carry 256 random bits (ASVS 7.2.3 and 11.5.1 ask for at least 128)
//! and are stored only as SHA-256 digests (enough for secrets of that entropy, ASVS 6.5.2).

use rand::RngExt;
use sha2::{Digest, Sha256};
use subtle::ConstantTimeEq;

/// 32 random bytes as 64 lowercase hex characters.
pub fn random_hex_256() -> String {
    hex::encode(rand::random::<[u8; 32]>())
}

/// Lowercase hex SHA-256 of a text.
pub fn sha256_hex(text: &str) -> String {
    hex::encode(Sha256::digest(text.as_bytes()))
}

/// Compare two secrets in time that does not depend on where they differ.
pub fn same_secret(a: &str, b: &str) -> bool {
    a.len() == b.len() && bool::from(a.as_bytes().ct_eq(b.as_bytes()))
}

/// Characters of token prefixes: lowercase letters and digits.
const PREFIX_ALPHABET: &[u8] = b"abcdefghijklmnopqrstuvwxyz0123456789";

/// A new API token: `ml_<8-character public prefix>_<64 hex characters>`. Returns the token
/// (shown once) and its prefix.
pub fn new_api_token() -> (String, String) {
    let mut rng = rand::rng();
    let prefix: String = (0..8)
        .map(|_| char::from(PREFIX_ALPHABET[rng.random_range(0..PREFIX_ALPHABET.len())]))
        .collect();
    let token = format!("ml_{prefix}_{}", random_hex_256());
    (token, prefix)
}

/// Whether a text has the shape of an API token (checked before any database look-up).
pub fn looks_like_api_token(text: &str) -> bool {
    let Some(rest) = text.strip_prefix("ml_") else {
        return false;
    };
    let Some((prefix, secret)) = rest.split_once('_') else {
        return false;
    };
    prefix.len() == 8
        && prefix.bytes().all(|b| PREFIX_ALPHABET.contains(&b))
        && secret.len() == 64
        && secret
            .bytes()
            .all(|b| b.is_ascii_hexdigit() && !b.is_ascii_uppercase())
}

/// Characters of generated passwords: letters and digits without the look-alikes 0/O, 1/l/I.
const PASSWORD_ALPHABET: &[u8] = b"abcdefghijkmnopqrstuvwxyzABCDEFGHJKLMNPQRSTUVWXYZ23456789";

/// A generated password of 20 characters (about 116 bits).
pub fn generate_password() -> String {
    let mut rng = rand::rng();
    (0..20)
        .map(|_| char::from(PASSWORD_ALPHABET[rng.random_range(0..PASSWORD_ALPHABET.len())]))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tokens_have_the_documented_shape_and_differ() {
        let (a, prefix) = new_api_token();
        let (b, _) = new_api_token();
        assert_ne!(a, b);
        assert!(a.starts_with(&format!("ml_{prefix}_")), "{a}");
        assert_eq!(a.len(), 3 + 8 + 1 + 64);
        assert!(looks_like_api_token(&a));
        assert!(!looks_like_api_token("ml_short_abc"));
        assert!(!looks_like_api_token(&a.to_uppercase()));
        assert!(!looks_like_api_token(""));
    }

    #[test]
    fn sha256_matches_the_standard_test_vector() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        assert_eq!(
            sha256_hex("abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn secrets_compare_equal_only_when_identical() {
        let s = random_hex_256();
        assert_eq!(s.len(), 64);
        assert!(same_secret(&s, &s.clone()));
        assert!(!same_secret(&s, &random_hex_256()));
        assert!(!same_secret(&s, &s[..63]));
        assert!(!same_secret("", "a"));
    }

    #[test]
    fn generated_passwords_use_the_unambiguous_alphabet() {
        let p = generate_password();
        assert_eq!(p.chars().count(), 20);
        assert!(p.bytes().all(|b| PASSWORD_ALPHABET.contains(&b)));
        assert_ne!(p, generate_password());
    }
}
