//! Sign-in throttling: too many failures for one account or from one address within a window
//! lock further attempts out until the window has passed (OWASP ASVS 4.0.3 V2.2.1).
//! Kept in memory: a restart forgets the counts, which is acceptable for a plant tool.

use super::Clock;
use std::collections::HashMap;
use std::sync::Mutex;
use time::{Duration, OffsetDateTime};

/// How many failures within which window.
#[derive(Debug, Clone, Copy)]
pub struct ThrottleRule {
    /// Failures allowed in the window before locking.
    pub max_failures: usize,
    /// The sliding window.
    pub window: Duration,
}

/// Failure counts per key (`account:NAME`, `address:IP`).
#[derive(Debug, Default)]
pub struct Throttle {
    failures: Mutex<HashMap<String, Vec<OffsetDateTime>>>,
}

impl Throttle {
    /// Per account: 5 failures in 15 minutes.
    pub const PER_ACCOUNT: ThrottleRule = ThrottleRule { max_failures: 5, window: Duration::minutes(15) };
    /// Per address: 20 failures in 15 minutes (several people may share a plant's gateway).
    pub const PER_ADDRESS: ThrottleRule = ThrottleRule { max_failures: 20, window: Duration::minutes(15) };

    /// If `key` is locked now, how long until it is free again.
    pub fn locked_for(&self, key: &str, rule: ThrottleRule, clock: &dyn Clock) -> Option<Duration> {
        let now = clock.now();
        let mut map = self.failures.lock().unwrap_or_else(|p| p.into_inner());
        let list = map.get_mut(key)?;
        list.retain(|t| now - *t < rule.window);
        if list.len() >= rule.max_failures { list.first().map(|first| rule.window - (now - *first)) } else { None }
    }

    /// Record a failure for `key`.
    pub fn fail(&self, key: &str, clock: &dyn Clock) {
        let mut map = self.failures.lock().unwrap_or_else(|p| p.into_inner());
        map.entry(key.to_string()).or_default().push(clock.now());
    }

    /// Forget failures of `key` after a success.
    pub fn clear(&self, key: &str) {
        let mut map = self.failures.lock().unwrap_or_else(|p| p.into_inner());
        map.remove(key);
    }
}
