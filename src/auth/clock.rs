//! An injectable clock, so that tests can move time for session expiry and throttling.

use std::sync::Mutex;
use time::OffsetDateTime;

/// Where "now" comes from.
pub trait Clock: Send + Sync {
    /// The current UTC time.
    fn now(&self) -> OffsetDateTime;
}

/// The real clock.
#[derive(Debug, Default, Clone, Copy)]
pub struct SystemClock;

impl Clock for SystemClock {
    fn now(&self) -> OffsetDateTime {
        OffsetDateTime::now_utc()
    }
}

/// A clock that only moves when told (tests).
#[derive(Debug)]
pub struct ManualClock(Mutex<OffsetDateTime>);

impl ManualClock {
    /// Start at `at`.
    pub fn new(at: OffsetDateTime) -> Self {
        Self(Mutex::new(at))
    }

    /// Move forward by `by`.
    pub fn advance(&self, by: time::Duration) {
        if let Ok(mut t) = self.0.lock() {
            *t += by;
        }
    }
}

impl Clock for ManualClock {
    fn now(&self) -> OffsetDateTime {
        self.0.lock().map(|t| *t).unwrap_or_else(|p| *p.into_inner())
    }
}
