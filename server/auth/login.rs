//! Logging in, as a rule: the client address has not failed too often, the name is not
//! locked, then the password (against the account's hash, or a dummy hash when there is no such
//! account, so the answer and its timing are the same either way). Every failure is counted for
//! the name as typed and for the address; the fifth within 15 minutes locks the name
//! ([`super::FAILURE_POLICY`]). A success starts a new session with a new id and a new
//! anti-forgery token, and ends the browser's old session if it had one.

use sqlx::SqlitePool;

use super::FAILURE_POLICY;
use super::password::Passwords;
use super::secret::{random_hex_256, sha256_hex};
use crate::catalog::accounts::{self, NewSession};

/// What a login attempt gives.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum LoginOutcome {
    /// Too many failures from this address, or the name is locked: nothing was checked.
    Locked,
    /// The name or the password is wrong, or the account is disabled (the same answer for all).
    Refused,
    /// A new session; its id goes into the session cookie.
    LoggedIn {
        /// The session's id (only its SHA-256 is stored).
        session_id: String,
    },
}

/// One login attempt of `username` with `password` from `client_ip` at `now_unix`, replacing the
/// session whose id is `previous_session` when the browser had one.
///
/// # Errors
/// When the database fails.
pub async fn log_in(
    pool: &SqlitePool,
    passwords: &Passwords,
    now_unix: i64,
    username: &str,
    password: &str,
    client_ip: &str,
    previous_session: Option<&str>,
) -> sqlx::Result<LoginOutcome> {
    let from_ip =
        accounts::failures_from(pool, client_ip, now_unix - FAILURE_POLICY.window_s).await?;
    if from_ip >= FAILURE_POLICY.max_per_ip
        || accounts::locked_until(pool, username, now_unix)
            .await?
            .is_some()
    {
        return Ok(LoginOutcome::Locked);
    }
    let account = accounts::find_by_username(pool, username).await?;
    let password_ok = passwords
        .verify(password, account.as_ref().map(|a| a.password_hash.as_str()))
        .await;
    let account = match account {
        Some(a) if password_ok && !a.disabled => a,
        _ => {
            let outcome =
                accounts::record_failure(pool, username, client_ip, now_unix, FAILURE_POLICY)
                    .await?;
            if outcome.locked_until_unix.is_some() {
                tracing::warn!(client = %client_ip, "locked a login name after repeated failures");
            }
            return Ok(LoginOutcome::Refused);
        }
    };
    let session_id = random_hex_256();
    let previous = previous_session.map(sha256_hex);
    accounts::start_session(
        pool,
        &NewSession {
            account_id: account.account_id,
            username: &account.username,
            id_sha256: &sha256_hex(&session_id),
            csrf_token: &random_hex_256(),
            now_unix,
            client_ip,
            previous_sha256: previous.as_deref(),
        },
    )
    .await?;
    Ok(LoginOutcome::LoggedIn { session_id })
}
