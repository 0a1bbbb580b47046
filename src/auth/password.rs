//! Password hashing with argon2id.
//!
//! Parameters: m = 19 MiB, t = 2, p = 1, the minimum the OWASP Password Storage Cheat Sheet
//! recommends for argon2id; stored as PHC strings (`$argon2id$v=19$m=19456,t=2,p=1$...`).
//! Passwords are 12 to 128 characters (OWASP ASVS 4.0.3 V2.1.1 and V2.1.2), any characters.

use argon2::password_hash::{PasswordHash, PasswordHasher, PasswordVerifier, SaltString};
use argon2::{Algorithm, Argon2, Params, Version};
use rand_core::OsRng;

/// argon2id memory cost in KiB (OWASP: 19 MiB).
pub const ARGON2_MEMORY_KIB: u32 = 19_456;
/// argon2id passes (OWASP: 2).
pub const ARGON2_ITERATIONS: u32 = 2;
/// argon2id lanes (OWASP: 1).
pub const ARGON2_LANES: u32 = 1;

/// Hashing failed (only on a broken parameter set or RNG).
#[derive(Debug, thiserror::Error)]
#[error("password hashing failed: {0}")]
pub struct PasswordError(String);

fn hasher() -> Result<Argon2<'static>, PasswordError> {
    let params = Params::new(ARGON2_MEMORY_KIB, ARGON2_ITERATIONS, ARGON2_LANES, None)
        .map_err(|e| PasswordError(e.to_string()))?;
    Ok(Argon2::new(Algorithm::Argon2id, Version::V0x13, params))
}

/// Check a new password's length (12 to 128 characters).
pub fn parse_new_password(value: &str) -> Result<String, String> {
    let n = value.chars().count();
    if !(12..=128).contains(&n) {
        return Err("12 to 128 characters; a passphrase of several words is easiest".into());
    }
    Ok(value.to_string())
}

/// Hash a password into an argon2id PHC string with a fresh random salt.
pub fn hash_password(password: &str) -> Result<String, PasswordError> {
    let salt = SaltString::generate(&mut OsRng);
    Ok(hasher()?.hash_password(password.as_bytes(), &salt).map_err(|e| PasswordError(e.to_string()))?.to_string())
}

/// Whether `password` matches the PHC string. Unknown users are checked against a fixed hash
/// by the caller so that both answers take the same time.
pub fn verify_password(password: &str, phc: &str) -> bool {
    let Ok(parsed) = PasswordHash::new(phc) else { return false };
    hasher().is_ok_and(|h| h.verify_password(password.as_bytes(), &parsed).is_ok())
}

/// Whether `phc` is a hash [`verify_password`] can check (a row without one would otherwise
/// answer at once, telling it apart by its timing).
pub fn usable_hash(phc: &str) -> bool {
    PasswordHash::new(phc).is_ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hashes_are_argon2id_phc_and_verify() {
        // OWASP Password Storage Cheat Sheet, argon2id: m=19456 (19 MiB), t=2, p=1.
        let phc = hash_password("correct horse battery").unwrap_or_default();
        assert!(phc.starts_with("$argon2id$v=19$m=19456,t=2,p=1$"), "{phc}");
        assert!(verify_password("correct horse battery", &phc));
        assert!(!verify_password("wrong horse battery", &phc));
        assert!(!verify_password("x", "not a hash"));
        assert!(usable_hash(&phc) && !usable_hash("not a hash") && !usable_hash(""));
    }

    #[test]
    fn length_rules() {
        // OWASP ASVS 4.0.3 V2.1.1 (at least 12 characters) and V2.1.2 (128 allowed).
        assert!(parse_new_password("short").is_err());
        assert!(parse_new_password(&"a".repeat(128)).is_ok());
        assert!(parse_new_password(&"a".repeat(129)).is_err());
    }
}
