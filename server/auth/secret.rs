//! Random secrets: session ids, anti-forgery tokens, API tokens, generated passwords; the
//! server's key for the login form's token (HMAC-SHA256).
//!
//! All come from the thread-local CSPRNG of `rand` (ChaCha, seeded from the operating system).
//! Session ids and API tokens carry 256 random bits (ASVS 7.2.3 and 11.5.1 ask for at least 128)
//! and are stored only as SHA-256 digests (enough for secrets of that entropy, ASVS 6.5.2).

use std::net::IpAddr;

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

/// HMAC-SHA256 of `message` under `key` (RFC 2104 with SHA-256, as specified for HMAC-SHA256
/// by RFC 4231):
///
/// ```text
/// K' = key            when it has at most 64 bytes (SHA-256's block), else SHA-256(key);
///      padded with zeros to 64 bytes
/// HMAC(K, m) = SHA-256((K' ⊕ opad) ‖ SHA-256((K' ⊕ ipad) ‖ m)),  ipad = 0x36…, opad = 0x5c…
/// ```
pub fn hmac_sha256(key: &[u8], message: &[u8]) -> [u8; 32] {
    const BLOCK: usize = 64;
    let mut padded = [0u8; BLOCK];
    if key.len() > BLOCK {
        padded[..32].copy_from_slice(&Sha256::digest(key));
    } else {
        padded[..key.len()].copy_from_slice(key);
    }
    let inner_pad: Vec<u8> = padded.iter().map(|b| b ^ 0x36).collect();
    let outer_pad: Vec<u8> = padded.iter().map(|b| b ^ 0x5c).collect();
    let inner = Sha256::new()
        .chain_update(&inner_pad)
        .chain_update(message)
        .finalize();
    Sha256::new()
        .chain_update(&outer_pad)
        .chain_update(inner)
        .finalize()
        .into()
}

/// The server's key for values it hands out and must recognise later without storing them (the
/// login form's token): 32 random bytes made at start-up and never written anywhere, so a
/// restart makes login forms opened before it expire (reloading the page gives a new one).
#[derive(Clone, Copy)]
pub struct FormKey([u8; 32]);

impl std::fmt::Debug for FormKey {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("FormKey(…)")
    }
}

impl FormKey {
    /// A new random key.
    pub fn random() -> Self {
        Self(rand::random::<[u8; 32]>())
    }

    /// The login form's anti-forgery token for the nonce in the browser's login cookie and the
    /// client's network (its IPv4 address or IPv6 /64 prefix, `None` when unknown):
    /// hex(HMAC-SHA256(key, "ml_login:" ‖ nonce ‖ ":" ‖ network)). Whoever can set that cookie
    /// (another port of the same host, a sibling domain) cannot make a token for a nonce of
    /// their choosing without the key, and a pair they fetch from the server themselves is
    /// refused from the victim's network.
    pub fn login_token(&self, nonce: &str, network: Option<IpAddr>) -> String {
        let network = network.map_or_else(|| "unknown".to_owned(), |ip| ip.to_string());
        let message = format!("ml_login:{nonce}:{network}");
        hex::encode(hmac_sha256(&self.0, message.as_bytes()))
    }
}

/// Whether a text is 64 lowercase hex characters, the shape of [`random_hex_256`].
pub fn is_hex_256(text: &str) -> bool {
    text.len() == 64
        && text
            .bytes()
            .all(|b| b.is_ascii_hexdigit() && !b.is_ascii_uppercase())
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
    fn hmac_sha256_matches_the_rfc_4231_test_vectors() {
        // RFC 4231 §4.2 (test case 1): key 0x0b × 20, "Hi There".
        assert_eq!(
            hex::encode(hmac_sha256(&[0x0b; 20], b"Hi There")),
            "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7"
        );
        // §4.3 (test case 2): a key shorter than the block.
        assert_eq!(
            hex::encode(hmac_sha256(b"Jefe", b"what do ya want for nothing?")),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
        // §4.7 (test case 6): a 131-byte key, hashed first.
        assert_eq!(
            hex::encode(hmac_sha256(
                &[0xaa; 131],
                b"Test Using Larger Than Block-Size Key - Hash Key First"
            )),
            "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54"
        );
    }

    #[test]
    fn login_tokens_depend_on_the_nonce_the_network_and_the_key() {
        let key = FormKey::random();
        let nonce = random_hex_256();
        let here: Option<IpAddr> = Some("192.0.2.10".parse().unwrap());
        let there: Option<IpAddr> = Some("198.51.100.7".parse().unwrap());
        let token = key.login_token(&nonce, here);
        assert!(is_hex_256(&token), "{token}");
        assert_eq!(token, key.login_token(&nonce, here));
        assert_ne!(token, nonce, "the token is not the cookie's value");
        assert_ne!(token, key.login_token(&random_hex_256(), here));
        assert_ne!(token, key.login_token(&nonce, there));
        assert_ne!(token, key.login_token(&nonce, None));
        assert_ne!(token, FormKey::random().login_token(&nonce, here));
        assert_eq!(format!("{key:?}"), "FormKey(…)", "the key is never printed");
        assert!(is_hex_256(&nonce));
        assert!(!is_hex_256(&nonce.to_uppercase()));
        assert!(!is_hex_256(&"g".repeat(64)));
    }

    #[test]
    fn generated_passwords_use_the_unambiguous_alphabet() {
        let p = generate_password();
        assert_eq!(p.chars().count(), 20);
        assert!(p.bytes().all(|b| PASSWORD_ALPHABET.contains(&b)));
        assert_ne!(p, generate_password());
    }
}
