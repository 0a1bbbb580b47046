//! Random secrets (session ids, API tokens) and their stored hashes.

use base64::Engine;
use base64::engine::general_purpose::URL_SAFE_NO_PAD;
use rand_core::{OsRng, RngCore};
use sha2::{Digest, Sha256};

/// A secret shown once; its `Debug` never prints it, so it cannot leak into logs.
#[derive(Clone, PartialEq, Eq)]
pub struct Secret(String);

impl Secret {
    /// The secret text, for the one place that hands it out (cookie, console).
    pub fn expose(&self) -> &str {
        &self.0
    }
}

impl std::fmt::Debug for Secret {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Secret(***)")
    }
}

/// 256 random bits from the OS, URL-safe base64, with a prefix naming its use (`plt_`).
pub fn new_secret(prefix: &str) -> Secret {
    let mut bytes = [0u8; 32];
    OsRng.fill_bytes(&mut bytes);
    Secret(format!("{prefix}{}", URL_SAFE_NO_PAD.encode(bytes)))
}

/// The SHA-256 hex digest stored in place of a secret. A fast hash is right here: the secret
/// has 256 random bits, so there is nothing to brute-force.
pub fn hash_secret(secret: &str) -> String {
    sha256_hex(secret.as_bytes())
}

/// The SHA-256 hex digest of `bytes` (secrets, and the content hash of imported files).
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes).iter().map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn secrets_are_random_and_hidden_from_debug() {
        let (a, b) = (new_secret("plt_"), new_secret("plt_"));
        assert_ne!(a, b);
        assert_eq!(a.expose().len(), 4 + 43);
        assert_eq!(format!("{a:?}"), "Secret(***)");
        // SHA-256 of "abc": FIPS 180-2 appendix B.1 test vector.
        assert_eq!(hash_secret("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    }
}
