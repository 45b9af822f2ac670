//! Request rates per principal: in-memory token buckets, one per account (whatever session or
//! token it comes through) or, without an account, per client address; a separate budget for
//! page views and for API calls.
//!
//! ```text
//! capacity  C = R                 (R = the budget's requests per minute; a minute's worth at once)
//! refill    C / 60 per second     (measured on the server's clock, whole seconds)
//! a request takes one; with none left: 429 and Retry-After = ⌈(1 − tokens) · 60 / R⌉ s
//! ```
//! Keying by account rather than by token means a new token (or a new session) does not bring
//! a fresh bucket. Addresses are keyed by IPv4 address or by IPv6 /64 prefix (one subscriber
//! usually holds a whole /64, so keying by single IPv6 addresses would give each of them
//! 2^64 buckets). R = 0 turns a budget off. The buckets live in memory: a restart forgets
//! them, and several server processes count separately.

use std::collections::HashMap;
use std::net::IpAddr;
use std::sync::{Arc, Mutex, PoisonError};

use crate::auth::Principal;
use crate::auth::clock::Clock;
use crate::error::AppError;

/// Buckets kept per budget before idle full ones are dropped (a bucket is a few bytes; this
/// bounds memory when many addresses each send a request or two).
const MAX_BUCKETS: usize = 10_000;

/// Which allowance a request draws on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Budget {
    /// Pages, forms and downloads a person's browser asks for.
    Pages,
    /// Calls of scripts: everything under `/api/`, and every request made with an API token.
    Api,
}

/// Whose bucket a request is counted in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum RateKey {
    /// A logged-in account, through any of its sessions or tokens.
    Account(i64),
    /// No account: the client's IPv4 address or IPv6 /64 prefix (`None` when the server was
    /// not told the peer's address; all such requests share one bucket).
    Address(Option<IpAddr>),
}

impl RateKey {
    /// The key of a request: its account, else its client address. A token that is not valid
    /// counts against the address, so guessing tokens is limited too.
    pub fn of(principal: &Principal, peer: Option<IpAddr>) -> Self {
        match principal {
            Principal::Session(s) => Self::Account(s.account_id),
            Principal::Token(t) => Self::Account(t.account_id),
            Principal::Anonymous | Principal::BadToken => Self::Address(peer.map(client_network)),
        }
    }
}

/// The network a client address stands for: an IPv4 address itself; an IPv6 address cut to its
/// /64 prefix (an IPv4-mapped IPv6 address is its IPv4 address).
pub fn client_network(ip: IpAddr) -> IpAddr {
    match ip {
        IpAddr::V4(_) => ip,
        IpAddr::V6(v6) => match v6.to_ipv4_mapped() {
            Some(v4) => IpAddr::V4(v4),
            None => IpAddr::V6((u128::from(v6) & !u128::from(u64::MAX)).into()),
        },
    }
}

#[derive(Debug, Clone, Copy)]
struct Bucket {
    tokens: f64,
    last_unix: i64,
}

/// Token buckets of one budget, keyed by [`RateKey`]; cheap to clone.
#[derive(Clone)]
pub struct RateLimiter {
    per_minute: u32,
    clock: Arc<dyn Clock>,
    buckets: Arc<Mutex<HashMap<RateKey, Bucket>>>,
}

impl std::fmt::Debug for RateLimiter {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RateLimiter")
            .field("per_minute", &self.per_minute)
            .finish_non_exhaustive()
    }
}

impl RateLimiter {
    /// A limiter allowing `per_minute` requests per key and minute (0: no limit), measured on
    /// `clock`.
    pub fn new(per_minute: u32, clock: Arc<dyn Clock>) -> Self {
        Self {
            per_minute,
            clock,
            buckets: Arc::new(Mutex::new(HashMap::new())),
        }
    }

    /// The requests per minute this limiter allows (0: no limit).
    pub fn per_minute(&self) -> u32 {
        self.per_minute
    }

    /// Takes one request from the key's bucket: `Ok` when allowed, else `Err(seconds)` to wait
    /// before the next one is.
    ///
    /// # Errors
    /// The whole seconds until a request is allowed again (at least 1).
    pub fn take(&self, key: RateKey) -> Result<(), u64> {
        if self.per_minute == 0 {
            return Ok(());
        }
        let capacity = f64::from(self.per_minute);
        let per_second = capacity / 60.0;
        let now = self.clock.now_unix();
        let mut buckets = self.buckets.lock().unwrap_or_else(PoisonError::into_inner);
        if buckets.len() >= MAX_BUCKETS && !buckets.contains_key(&key) {
            // Buckets idle for a minute are full again: forgetting them changes nothing.
            buckets.retain(|_, b| now - b.last_unix < 60);
        }
        let bucket = buckets.entry(key).or_insert(Bucket {
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

/// The two budgets of a server; cheap to clone.
#[derive(Debug, Clone)]
pub struct RateLimits {
    pages: RateLimiter,
    api: RateLimiter,
}

impl RateLimits {
    /// Page views at `pages_per_minute` and API calls at `api_per_minute` per key (0: that
    /// budget is unlimited), measured on `clock`.
    pub fn new(pages_per_minute: u32, api_per_minute: u32, clock: Arc<dyn Clock>) -> Self {
        Self {
            pages: RateLimiter::new(pages_per_minute, clock.clone()),
            api: RateLimiter::new(api_per_minute, clock),
        }
    }

    /// Counts one request of `key` against `budget`.
    ///
    /// # Errors
    /// [`AppError::TooManyRequests`] with the budget's rate and the seconds to wait.
    pub fn take(&self, budget: Budget, key: RateKey) -> Result<(), AppError> {
        let limiter = match budget {
            Budget::Pages => &self.pages,
            Budget::Api => &self.api,
        };
        limiter
            .take(key)
            .map_err(|retry_after_s| AppError::TooManyRequests {
                per_minute: limiter.per_minute,
                retry_after_s,
            })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::auth::clock::ManualClock;
    use crate::auth::{Role, SessionUser, TokenUser};

    #[test]
    fn a_bucket_allows_the_rate_then_refuses_until_it_refills() {
        let clock = Arc::new(ManualClock::starting_now());
        let limiter = RateLimiter::new(120, clock.clone());
        let (one, two) = (RateKey::Account(1), RateKey::Account(2));
        for _ in 0..120 {
            assert_eq!(limiter.take(one), Ok(()));
        }
        // 120 a minute refills 2 a second, so the next one is 1 s away.
        assert_eq!(limiter.take(one), Err(1));
        // Another account has its own bucket.
        assert_eq!(limiter.take(two), Ok(()));
        clock.advance(1);
        assert_eq!(limiter.take(one), Ok(()));
        assert_eq!(limiter.take(one), Ok(()));
        assert!(limiter.take(one).is_err());
        // A minute later the bucket is full again, never fuller.
        clock.advance(600);
        for _ in 0..120 {
            assert_eq!(limiter.take(one), Ok(()));
        }
        assert!(limiter.take(one).is_err());
    }

    #[test]
    fn a_slow_rate_says_how_long_to_wait_and_zero_is_off() {
        let clock = Arc::new(ManualClock::starting_now());
        let key = RateKey::Account(9);
        let slow = RateLimiter::new(2, clock.clone());
        assert!(slow.take(key).is_ok() && slow.take(key).is_ok());
        // 2 a minute: one every 30 s.
        assert_eq!(slow.take(key), Err(30));
        let off = RateLimiter::new(0, clock);
        for _ in 0..10_000 {
            assert!(off.take(key).is_ok());
        }
    }

    #[test]
    fn sessions_and_tokens_of_one_account_share_a_key_and_anonymous_ones_go_by_network() {
        let session = Principal::Session(SessionUser {
            account_id: 7,
            username: "member1".into(),
            role: Role::Member,
            session_id: 1,
            csrf_token: String::new(),
        });
        let token = |api_token_id| {
            Principal::Token(TokenUser {
                account_id: 7,
                username: "member1".into(),
                role: Role::Member,
                api_token_id,
                scopes: Vec::new(),
            })
        };
        let peer: IpAddr = "192.0.2.10".parse().unwrap();
        assert_eq!(RateKey::of(&session, Some(peer)), RateKey::Account(7));
        assert_eq!(RateKey::of(&token(1), None), RateKey::of(&token(2), None));
        assert_eq!(
            RateKey::of(&Principal::Anonymous, Some(peer)),
            RateKey::Address(Some(peer))
        );
        assert_eq!(
            RateKey::of(&Principal::BadToken, Some(peer)),
            RateKey::of(&Principal::Anonymous, Some(peer))
        );
        // Two addresses of one IPv6 /64 share a bucket; another /64 does not.
        let a: IpAddr = "2001:db8:1:2::1".parse().unwrap();
        let b: IpAddr = "2001:db8:1:2:ffff::9".parse().unwrap();
        let c: IpAddr = "2001:db8:1:3::1".parse().unwrap();
        let key = |ip| RateKey::of(&Principal::Anonymous, Some(ip));
        assert_eq!(key(a), key(b));
        assert_ne!(key(a), key(c));
        // An IPv4-mapped address is its IPv4 address.
        let mapped: IpAddr = "::ffff:192.0.2.10".parse().unwrap();
        assert_eq!(key(mapped), key(peer));
    }

    #[test]
    fn the_two_budgets_count_separately_and_say_their_own_rate() {
        let clock = Arc::new(ManualClock::starting_now());
        let limits = RateLimits::new(3, 1, clock);
        let key = RateKey::Account(1);
        assert!(limits.take(Budget::Api, key).is_ok());
        let refused = limits.take(Budget::Api, key).unwrap_err();
        assert!(
            matches!(
                refused,
                AppError::TooManyRequests {
                    per_minute: 1,
                    retry_after_s: 60
                }
            ),
            "{refused:?}"
        );
        for _ in 0..3 {
            assert!(limits.take(Budget::Pages, key).is_ok());
        }
        assert!(limits.take(Budget::Pages, key).is_err());
    }
}
