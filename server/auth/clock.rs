//! The clock that session limits and login locks are measured with.
//!
//! The server uses [`SystemClock`]; tests give the app a [`ManualClock`] and move it forward to
//! check idle and absolute expiry without waiting.

use std::sync::atomic::{AtomicI64, Ordering};

/// Seconds since 1970-01-01 UTC.
pub trait Clock: Send + Sync + 'static {
    /// Now, in whole seconds since 1970-01-01 UTC.
    fn now_unix(&self) -> i64;
}

/// The operating system's clock.
#[derive(Debug, Clone, Copy, Default)]
pub struct SystemClock;

impl Clock for SystemClock {
    fn now_unix(&self) -> i64 {
        time::OffsetDateTime::now_utc().unix_timestamp()
    }
}

/// A clock that moves only when told to.
#[derive(Debug)]
pub struct ManualClock {
    now: AtomicI64,
}

impl ManualClock {
    /// A clock standing at the system's current time.
    pub fn starting_now() -> Self {
        Self {
            now: AtomicI64::new(SystemClock.now_unix()),
        }
    }

    /// Move the clock forward by `seconds`.
    pub fn advance(&self, seconds: i64) {
        self.now.fetch_add(seconds, Ordering::SeqCst);
    }
}

impl Clock for ManualClock {
    fn now_unix(&self) -> i64 {
        self.now.load(Ordering::SeqCst)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn manual_clock_moves_only_when_advanced() {
        let c = ManualClock::starting_now();
        let t0 = c.now_unix();
        assert_eq!(c.now_unix(), t0);
        c.advance(90);
        assert_eq!(c.now_unix(), t0 + 90);
        assert!(t0 > 1_700_000_000, "the system clock is after 2023");
    }
}
