//! Accounts and their secrets, free of HTTP and SQL: roles and permissions, password hashing,
//! random session ids and API tokens, the clock, and sign-in throttling.

mod clock;
mod password;
mod role;
mod secret;
mod throttle;

pub use clock::{Clock, ManualClock, SystemClock};
pub use password::{PasswordError, hash_password, parse_new_password, usable_hash, verify_password};
pub use role::{Permission, Role};
pub use secret::{Secret, hash_secret, new_secret, sha256_hex};
pub use throttle::{Throttle, account_key};
