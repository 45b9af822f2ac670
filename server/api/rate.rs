//! The per-token request rate of the API: an in-memory token bucket per API token.
//!
//! ```text
//! capacity  C = R                 (R = --api-rate-per-minute; a full minute's requests at once)
//! refill    C / 60 per second     (measured on the server's clock, whole seconds)
//! a request takes one; with none left: 429 and Retry-After = ⌈(1 − tokens) · 60 / R⌉ s
//! ```
//! Only requests to `/api/` that carry a valid API token are counted (keyed by the token's id);
//! browser sessions and anonymous readers are not. R = 0 turns the limit off. The buckets live
//! in memory: a restart forgets them, and several server processes count separately.

use std::collections::HashMap;
use std::sync::{Arc, Mutex, PoisonError};

use axum::extract::{Request, State};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};

use crate::auth::Principal;
use crate::auth::clock::Clock;
use crate::error::AppError;

/// Buckets kept before idle full ones are dropped (a bucket is a few bytes; this bounds memory
/// when many tokens are used once).
const MAX_BUCKETS: usize = 10_000;

#[derive(Debug, Clone, Copy)]
struct Bucket {
    tokens: f64,
    last_unix: i64,
}

/// Token buckets keyed by API token id; cheap to clone.
#[derive(Clone)]
pub struct RateLimiter {
    per_minute: u32,
    clock: Arc<dyn Clock>,
    buckets: Arc<Mutex<HashMap<i64, Bucket>>>,
}

impl std::fmt::Debug for RateLimiter {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RateLimiter")
            .field("per_minute", &self.per_minute)
            .finish_non_exhaustive()
    }
}

impl RateLimiter {
    /// A limiter allowing `per_minute` requests per token and minute (0: no limit), measured
    /// on `clock`.
    pub fn new(per_minute: u32, clock: Arc<dyn Clock>) -> Self {
        Self {
            per_minute,
            clock,
            buckets: Arc::new(Mutex::new(HashMap::new())),
        }
    }

    /// Takes one request from the token's bucket: `Ok` when allowed, else `Err(seconds)` to
    /// wait before the next one is.
    ///
    /// # Errors
    /// The whole seconds until a request is allowed again (at least 1).
    pub fn take(&self, token_id: i64) -> Result<(), u64> {
        if self.per_minute == 0 {
            return Ok(());
        }
        let capacity = f64::from(self.per_minute);
        let per_second = capacity / 60.0;
        let now = self.clock.now_unix();
        let mut buckets = self.buckets.lock().unwrap_or_else(PoisonError::into_inner);
        if buckets.len() >= MAX_BUCKETS && !buckets.contains_key(&token_id) {
            // Buckets idle for a minute are full again: forgetting them changes nothing.
            buckets.retain(|_, b| now - b.last_unix < 60);
        }
        let bucket = buckets.entry(token_id).or_insert(Bucket {
            tokens: capacity,
            last_unix: now,
        });
        let elapsed = (now - bucket.last_unix).max(0);
        let refill = elapsed as f64 * per_second;
        bucket.tokens = (bucket.tokens + refill).min(capacity);
        bucket.last_unix = now;
        if bucket.tokens >= 1.0 {
            bucket.tokens -= 1.0;
            Ok(())
        } else {
            let wait = ((1.0 - bucket.tokens) / per_second).ceil().max(1.0);
            // Between 1 and 60 seconds.
            Err(wait as u64)
        }
    }
}

/// Layer: count API-token requests to `/api/` and answer 429 (problem+json with Retry-After)
/// beyond the rate. Runs after authentication, before the route's guard.
pub async fn limit_rate(
    State(limiter): State<RateLimiter>,
    request: Request,
    next: Next,
) -> Response {
    if request.uri().path().starts_with("/api/")
        && let Some(Principal::Token(t)) = request.extensions().get::<Principal>()
        && let Err(wait_s) = limiter.take(t.api_token_id)
    {
        return AppError::TooManyRequests {
            per_minute: limiter.per_minute,
            retry_after_s: wait_s,
        }
        .into_response();
    }
    next.run(request).await
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::auth::clock::ManualClock;

    #[test]
    fn a_bucket_allows_the_rate_then_refuses_until_it_refills() {
        let clock = Arc::new(ManualClock::starting_now());
        let limiter = RateLimiter::new(120, clock.clone());
        for _ in 0..120 {
            assert_eq!(limiter.take(1), Ok(()));
        }
        // 120 a minute refills 2 a second, so the next one is 1 s away.
        assert_eq!(limiter.take(1), Err(1));
        // Another token has its own bucket.
        assert_eq!(limiter.take(2), Ok(()));
        clock.advance(1);
        assert_eq!(limiter.take(1), Ok(()));
        assert_eq!(limiter.take(1), Ok(()));
        assert!(limiter.take(1).is_err());
        // A minute later the bucket is full again, never fuller.
        clock.advance(600);
        for _ in 0..120 {
            assert_eq!(limiter.take(1), Ok(()));
        }
        assert!(limiter.take(1).is_err());
    }

    #[test]
    fn a_slow_rate_says_how_long_to_wait_and_zero_is_off() {
        let clock = Arc::new(ManualClock::starting_now());
        let slow = RateLimiter::new(2, clock.clone());
        assert!(slow.take(9).is_ok() && slow.take(9).is_ok());
        // 2 a minute: one every 30 s.
        assert_eq!(slow.take(9), Err(30));
        let off = RateLimiter::new(0, clock);
        for _ in 0..10_000 {
            assert!(off.take(9).is_ok());
        }
    }
}
