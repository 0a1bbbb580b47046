//! An injectable clock: every "now" of a request (write stamps, the month that can be booked,
//! a new draft's start, session and token expiry, throttling) comes from `AppState.clock`, so
//! that tests run on a fixed, movable time. The command line uses [`SystemClock`].

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
