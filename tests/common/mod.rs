//! Support shared by the test crates (tests/app, tests/browser, tests/reliability), included in
//! each with `#[path = "../common/mod.rs"] mod common;`: accounts and tokens made directly in a
//! catalog, the switch that makes missing outside tools a failure, a client that does not follow
//! redirects.
#![allow(dead_code, reason = "each test crate uses a part of this module")]

use massline::auth::Role;
use sqlx::SqlitePool;

/// A password that passes the strength rules; every test account gets it.
pub(crate) const TEST_PASSWORD: &str = "velvet orbit lantern quietly";

/// Whether tests that need an outside tool (or more time) must run in full: CI sets
/// `MASSLINE_REQUIRE_EXTERNAL=1`, and a missing tool is then a failure, not a skip.
pub(crate) fn external_required() -> bool {
    std::env::var("MASSLINE_REQUIRE_EXTERNAL").is_ok_and(|v| v == "1")
}

/// Write a message framed by lines straight to stderr, past the test harness's capture, so it
/// shows in every run (skips must be loud).
pub(crate) fn loud(message: &str) {
    use std::io::Write as _;
    let line = "=".repeat(100);
    let _ = writeln!(std::io::stderr(), "\n{line}\n{message}\n{line}");
}

/// A response, read completely.
#[derive(Debug)]
pub(crate) struct Reply {
    pub(crate) status: u16,
    pub(crate) headers: reqwest::header::HeaderMap,
    pub(crate) body: String,
}

impl Reply {
    /// A header's value as text ("" when missing).
    pub(crate) fn header(&self, name: &str) -> String {
        self.headers
            .get(name)
            .and_then(|v| v.to_str().ok())
            .unwrap_or("")
            .to_string()
    }

    /// Every Set-Cookie value.
    pub(crate) fn set_cookies(&self) -> Vec<String> {
        self.headers
            .get_all("set-cookie")
            .iter()
            .filter_map(|v| v.to_str().ok())
            .map(str::to_string)
            .collect()
    }
}

/// The `field` of every entry of a problem's `errors`, in order.
pub(crate) fn problem_fields(problem: &serde_json::Value) -> Vec<String> {
    problem["errors"]
        .as_array()
        .map(|errors| {
            errors
                .iter()
                .map(|e| e["field"].as_str().unwrap_or("").to_owned())
                .collect()
        })
        .unwrap_or_default()
}

/// A client that does not follow redirects (tests look at them).
pub(crate) fn plain_client() -> reqwest::Client {
    reqwest::Client::builder()
        .redirect(reqwest::redirect::Policy::none())
        .build()
        .expect("a client")
}

/// Create an account with [`TEST_PASSWORD`] in a catalog, as `massline user add` would;
/// returns its key.
pub(crate) async fn create_account(pool: &SqlitePool, username: &str, role: Role) -> i64 {
    massline::auth::accounts::add_user(pool, username, role, Some(TEST_PASSWORD.into()))
        .await
        .expect("the account is created");
    massline::catalog::accounts::find_by_username(pool, username)
        .await
        .expect("the account can be read")
        .expect("the account exists")
        .account_id
}

/// Make an API token for an account directly in a catalog; returns (token, key).
pub(crate) async fn make_token(pool: &SqlitePool, account_id: i64, scopes: &str) -> (String, i64) {
    let (token, prefix) = massline::auth::secret::new_api_token();
    let id = massline::catalog::accounts::create_token(
        pool,
        &massline::catalog::accounts::NewToken {
            account_id,
            label: "test token",
            prefix: &prefix,
            token_sha256: &massline::auth::secret::sha256_hex(&token),
            scopes,
        },
    )
    .await
    .expect("the token is stored");
    (token, id)
}
