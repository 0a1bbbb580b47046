//! Sign-in throttling that slows guessing down without locking anyone out.
//!
//! Two measures, after the OWASP Authentication Cheat Sheet ("Account Lockout": lock out by
//! account *and* source, or delay, rather than refuse the account outright, since a lockout lets
//! anyone deny a user) and the Credential Stuffing Prevention Cheat Sheet ("Defense in depth",
//! "IP-based" limits hurt shared addresses):
//! - **Back-off per (account, address) pair.** After [`PAIR_FREE_FAILURES`] failures for one name
//!   from one address, further attempts from that pair within a back-off window that doubles
//!   with each failure ([`pair_backoff`]) are answered 429 without checking the password. Other
//!   addresses, and other names from the same address (everyone behind a proxy), are not hit.
//! - **Delay per account.** Each recent failure of a name from any address makes the next answer
//!   for that name wait a little longer ([`account_delay`], capped at [`ACCOUNT_DELAY_CAP`]),
//!   whatever the password; a right password still signs in after the wait.
//!
//! Kept in memory: a restart forgets the counts, which is acceptable for a plant tool. Both maps
//! are bounded ([`MAX_RECORDS`]) so that a stream of invented names cannot grow them.

use super::Clock;
use std::collections::HashMap;
use std::sync::Mutex;
use std::sync::atomic::{AtomicU64, Ordering};
use time::{Duration, OffsetDateTime};

/// Failures of one (account, address) pair before it backs off.
pub const PAIR_FREE_FAILURES: u32 = 5;
/// The back-off after the [`PAIR_FREE_FAILURES`]th failure; it doubles with each further one.
pub const PAIR_BACKOFF_START: Duration = Duration::seconds(30);
/// The longest back-off of a pair.
pub const PAIR_BACKOFF_CAP: Duration = Duration::minutes(15);
/// A pair with no failure for this long starts again from zero.
pub const PAIR_MEMORY: Duration = Duration::hours(1);

/// Failures of one account (from any address) answered without delay.
pub const ACCOUNT_FREE_FAILURES: u32 = 2;
/// The delay after the first failure beyond the free ones; it doubles with each further one.
pub const ACCOUNT_DELAY_START: std::time::Duration = std::time::Duration::from_millis(250);
/// The longest delay: a user whose name is under attack waits at most this, then signs in.
pub const ACCOUNT_DELAY_CAP: std::time::Duration = std::time::Duration::from_secs(2);
/// An account with no failure for this long starts again from zero.
pub const ACCOUNT_MEMORY: Duration = Duration::minutes(15);

/// Records kept per map at most; beyond that the stalest is forgotten first.
pub const MAX_RECORDS: usize = 100_000;
/// Characters of a sign-in name used as its key (longer names cannot exist).
const KEY_CHARS: usize = 64;

/// How long a pair with `failures` recent failures must wait after its last failure, if at all:
/// 30 s after the 5th failure, then 1, 2, 4, 8 minutes, then 15 minutes at most.
pub fn pair_backoff(failures: u32) -> Option<Duration> {
    let beyond = failures.checked_sub(PAIR_FREE_FAILURES)?;
    // 2^5 x 30 s already exceeds the cap: no need to shift further.
    let wait = PAIR_BACKOFF_START * (1_i32 << beyond.min(5));
    Some(wait.min(PAIR_BACKOFF_CAP))
}

/// How long to wait before answering a sign-in for an account with `failures` recent failures:
/// none for the first two, then 250 ms, 500 ms, 1 s, then 2 s at most.
pub fn account_delay(failures: u32) -> std::time::Duration {
    match failures.checked_sub(ACCOUNT_FREE_FAILURES + 1) {
        None => std::time::Duration::ZERO,
        Some(beyond) => ACCOUNT_DELAY_START.saturating_mul(1 << beyond.min(4)).min(ACCOUNT_DELAY_CAP),
    }
}

/// Recent failures of one key and when the last one was.
#[derive(Debug, Clone, Copy)]
struct Record {
    failures: u32,
    last: OffsetDateTime,
}

#[derive(Debug, Default)]
struct Counts {
    /// Key: (account, address).
    pairs: HashMap<(String, String), Record>,
    /// Key: account.
    accounts: HashMap<String, Record>,
}

/// Failure counts per (account, address) pair and per account, and how many password checks
/// sign-in ran.
#[derive(Debug, Default)]
pub struct Throttle {
    counts: Mutex<Counts>,
    password_checks: AtomicU64,
}

/// The key of a sign-in name: trimmed, lower case, at most [`KEY_CHARS`] characters.
pub fn account_key(name: &str) -> String {
    name.trim().chars().take(KEY_CHARS).collect::<String>().to_lowercase()
}

/// The live failure count of `record` (zero once `memory` has passed since its last failure).
fn live(record: Option<&Record>, memory: Duration, now: OffsetDateTime) -> u32 {
    record.filter(|r| now - r.last < memory).map_or(0, |r| r.failures)
}

/// Count one failure for `key`, keeping `map` within [`MAX_RECORDS`].
fn bump<K: std::hash::Hash + Eq + Clone>(map: &mut HashMap<K, Record>, key: K, memory: Duration, now: OffsetDateTime) {
    if !map.contains_key(&key) && map.len() >= MAX_RECORDS {
        map.retain(|_, r| now - r.last < memory);
        if map.len() >= MAX_RECORDS
            && let Some(stalest) = map.iter().min_by_key(|(_, r)| r.last).map(|(k, _)| k.clone())
        {
            map.remove(&stalest);
        }
    }
    let failures = live(map.get(&key), memory, now).saturating_add(1);
    map.insert(key, Record { failures, last: now });
}

impl Throttle {
    fn counts(&self) -> std::sync::MutexGuard<'_, Counts> {
        self.counts.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// If the pair (`account`, `address`) is backing off now, how long until it may try again.
    pub fn pair_wait(&self, account: &str, address: &str, clock: &dyn Clock) -> Option<Duration> {
        Self::wait_of(&self.counts(), &(account_key(account), address.to_string()), clock.now())
    }

    fn wait_of(counts: &Counts, pair: &(String, String), now: OffsetDateTime) -> Option<Duration> {
        let record = counts.pairs.get(pair)?;
        let until = record.last + pair_backoff(live(Some(record), PAIR_MEMORY, now))?;
        (until > now).then(|| until - now)
    }

    /// How long a sign-in for `account` would wait now.
    pub fn account_delay(&self, account: &str, clock: &dyn Clock) -> std::time::Duration {
        let now = clock.now();
        account_delay(live(self.counts().accounts.get(&account_key(account)), ACCOUNT_MEMORY, now))
    }

    /// Start a sign-in of `account` from `address`: `Err(wait)` while the pair backs off (the
    /// password is then not checked); otherwise the delay to wait before checking it. The
    /// attempt counts as a failure at once, in the same lock as the check, so that a burst of
    /// concurrent guesses cannot all pass before the first is counted; [`Self::succeed`] takes
    /// it back.
    pub fn begin(&self, account: &str, address: &str, clock: &dyn Clock) -> Result<std::time::Duration, Duration> {
        let now = clock.now();
        let pair = (account_key(account), address.to_string());
        let mut counts = self.counts();
        if let Some(wait) = Self::wait_of(&counts, &pair, now) {
            return Err(wait);
        }
        let delay = account_delay(live(counts.accounts.get(&pair.0), ACCOUNT_MEMORY, now));
        Self::count(&mut counts, pair, now);
        Ok(delay)
    }

    fn count(counts: &mut Counts, (account, address): (String, String), now: OffsetDateTime) {
        bump(&mut counts.pairs, (account.clone(), address), PAIR_MEMORY, now);
        bump(&mut counts.accounts, account, ACCOUNT_MEMORY, now);
    }

    /// A failed sign-in of `account` from `address`, outside [`Self::begin`] (tests).
    #[cfg(test)]
    fn fail(&self, account: &str, address: &str, clock: &dyn Clock) {
        Self::count(&mut self.counts(), (account_key(account), address.to_string()), clock.now());
    }

    /// The attempt begun by [`Self::begin`] succeeded: forget the pair's failures and take back
    /// the attempt's count on the account. The account's other failures stay until they age
    /// out: someone else may be guessing it from elsewhere.
    pub fn succeed(&self, account: &str, address: &str) {
        let key = account_key(account);
        let mut counts = self.counts();
        counts.pairs.remove(&(key.clone(), address.to_string()));
        if let Some(r) = counts.accounts.get_mut(&key) {
            r.failures = r.failures.saturating_sub(1);
        }
    }

    /// Note one password verification by sign-in.
    pub fn count_password_check(&self) {
        self.password_checks.fetch_add(1, Ordering::Relaxed);
    }

    /// Password verifications sign-in has run (tests prove that every answer did the same work).
    pub fn password_checks(&self) -> u64 {
        self.password_checks.load(Ordering::Relaxed)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::auth::ManualClock;

    fn clock() -> Result<ManualClock, time::error::ComponentRange> {
        Ok(ManualClock::new(OffsetDateTime::from_unix_timestamp(1_800_000_000)?))
    }

    #[test]
    fn pair_backoff_doubles_from_30_seconds_to_15_minutes() {
        // OWASP Authentication Cheat Sheet, "Account Lockout": an exponential back-off per
        // account and source instead of a lockout.
        let waits: Vec<Option<i64>> = (0..=11).map(|n| pair_backoff(n).map(|d| d.whole_seconds())).collect();
        let none = [None; 5];
        assert_eq!(waits[..5], none);
        assert_eq!(waits[5..], [Some(30), Some(60), Some(120), Some(240), Some(480), Some(900), Some(900)]);
        assert_eq!(pair_backoff(u32::MAX), Some(PAIR_BACKOFF_CAP));
    }

    #[test]
    fn account_delay_grows_to_two_seconds() {
        let ms: Vec<u128> = (0..=8).map(|n| account_delay(n).as_millis()).collect();
        assert_eq!(ms, [0, 0, 0, 250, 500, 1000, 2000, 2000, 2000]);
        assert_eq!(account_delay(u32::MAX), ACCOUNT_DELAY_CAP);
    }

    #[test]
    fn a_pair_backs_off_and_others_do_not() -> Result<(), time::error::ComponentRange> {
        let (t, c) = (Throttle::default(), clock()?);
        for _ in 0..5 {
            assert_eq!(t.pair_wait("Admin", "10.0.0.1", &c), None);
            t.fail("Admin", "10.0.0.1", &c);
        }
        // Fifth failure: 30 s; the name's case and spaces do not matter.
        assert_eq!(t.pair_wait(" admin ", "10.0.0.1", &c), Some(Duration::seconds(30)));
        assert_eq!(t.pair_wait("admin", "10.0.0.2", &c), None, "another address");
        assert_eq!(t.pair_wait("viewer", "10.0.0.1", &c), None, "another name from the same address");
        assert_eq!(t.account_delay("admin", &c), std::time::Duration::from_secs(1), "five failures of the name");
        assert_eq!(t.account_delay("viewer", &c), std::time::Duration::ZERO);
        c.advance(Duration::seconds(20));
        assert_eq!(t.pair_wait("admin", "10.0.0.1", &c), Some(Duration::seconds(10)));
        c.advance(Duration::seconds(10));
        assert_eq!(t.pair_wait("admin", "10.0.0.1", &c), None);
        t.fail("admin", "10.0.0.1", &c);
        assert_eq!(t.pair_wait("admin", "10.0.0.1", &c), Some(Duration::seconds(60)));
        // The account's failures age out after 15 minutes, the pair's after an hour.
        c.advance(ACCOUNT_MEMORY);
        assert_eq!(t.account_delay("admin", &c), std::time::Duration::ZERO);
        c.advance(PAIR_MEMORY);
        t.fail("admin", "10.0.0.1", &c);
        assert_eq!(t.pair_wait("admin", "10.0.0.1", &c), None, "counting starts again");
        Ok(())
    }

    #[test]
    fn an_attempt_counts_before_it_is_checked() -> Result<(), time::error::ComponentRange> {
        let (t, c) = (Throttle::default(), clock()?);
        // Five attempts begun at once (none finished yet): the sixth is already refused.
        let delays: Vec<_> = (0..5).map(|_| t.begin("lead", "10.0.0.1", &c)).collect();
        let ms = |d: u64| Ok(std::time::Duration::from_millis(d));
        assert_eq!(delays, [ms(0), ms(0), ms(0), ms(250), ms(500)]);
        assert_eq!(t.begin("lead", "10.0.0.1", &c), Err(Duration::seconds(30)));
        assert_eq!(t.begin("lead", "10.0.0.2", &c), ms(1000), "another address waits, then is checked");
        Ok(())
    }

    #[test]
    fn success_clears_the_pair_only() -> Result<(), time::error::ComponentRange> {
        let (t, c) = (Throttle::default(), clock()?);
        for _ in 0..3 {
            t.fail("lead", "10.0.0.1", &c);
        }
        // The successful attempt itself is taken back; the three failures stay.
        assert_eq!(t.begin("lead", "10.0.0.1", &c), Ok(std::time::Duration::from_millis(250)));
        t.succeed("lead", "10.0.0.1");
        assert_eq!(t.account_delay("lead", &c), std::time::Duration::from_millis(250));
        for _ in 0..5 {
            t.fail("lead", "10.0.0.1", &c);
        }
        assert_eq!(t.pair_wait("lead", "10.0.0.1", &c), Some(Duration::seconds(30)), "counted from zero again");
        Ok(())
    }

    #[test]
    fn the_maps_stay_bounded() -> Result<(), time::error::ComponentRange> {
        let (t, c) = (Throttle::default(), clock()?);
        for i in 0..MAX_RECORDS + 10 {
            t.fail(&format!("name-{i}"), "10.0.0.1", &c);
        }
        let counts = t.counts();
        assert_eq!((counts.pairs.len(), counts.accounts.len()), (MAX_RECORDS, MAX_RECORDS));
        Ok(())
    }
}
