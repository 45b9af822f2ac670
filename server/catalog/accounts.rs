//! Accounts, sessions, API tokens, failed logins and login locks.
//!
//! Every change here writes its audit event in the same transaction (`history::record`), so an
//! account can never change without a trace, and a trace never describes a change that was rolled
//! back. Secrets never reach this module in clear: passwords arrive as argon2id PHC strings,
//! session ids and API tokens as hex SHA-256 digests.

use sqlx::SqlitePool;

use super::begin_write;
use super::history::{NewEvent, record};

/// A person's account.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct Account {
    /// Key.
    pub account_id: i64,
    /// Login name.
    pub username: String,
    /// Argon2id PHC string.
    pub password_hash: String,
    /// 'member', 'reviewer' or 'admin'.
    pub role: String,
    /// True when the account may no longer log in or use tokens.
    pub disabled: bool,
    /// When it was created (RFC 3339 UTC).
    pub created_at: String,
    /// Last change of role, password or the disabled flag (RFC 3339 UTC).
    pub updated_at: String,
}

/// Make a short, single-line, control-free rendering of text typed by someone, for audit
/// sentences (a name with a line break must not forge a second log line).
pub fn for_log(text: &str) -> String {
    let cut: String = text.chars().take(64).collect();
    cut.escape_debug().to_string()
}

/// Create an account and write `account_created`. Returns None when the name is taken.
///
/// # Errors
/// When the database fails.
pub async fn create_account(
    pool: &SqlitePool,
    username: &str,
    password_hash: &str,
    role: &str,
    actor: Option<i64>,
) -> sqlx::Result<Option<i64>> {
    let mut tx = begin_write(pool).await?;
    let taken: Option<i64> =
        sqlx::query_scalar("select account_id from account where username = ?")
            .bind(username)
            .fetch_optional(&mut *tx)
            .await?;
    if taken.is_some() {
        return Ok(None);
    }
    let id: i64 = sqlx::query_scalar(
        "insert into account (username, password_hash, role) values (?, ?, ?) returning account_id",
    )
    .bind(username)
    .bind(password_hash)
    .bind(role)
    .fetch_one(&mut *tx)
    .await?;
    record(
        &mut tx,
        &NewEvent {
            account_id: actor,
            action: "account_created",
            entity: "account",
            entity_id: Some(id),
            summary: format!(
                "Created the account '{}' with role {role}.",
                for_log(username)
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(Some(id))
}

/// The account with this login name.
///
/// # Errors
/// When the database fails.
pub async fn find_by_username(pool: &SqlitePool, username: &str) -> sqlx::Result<Option<Account>> {
    sqlx::query_as(
        "select account_id, username, password_hash, role, disabled, created_at, updated_at
           from account where username = ?",
    )
    .bind(username)
    .fetch_optional(pool)
    .await
}

/// The account with this key.
///
/// # Errors
/// When the database fails.
pub async fn find_by_id(pool: &SqlitePool, account_id: i64) -> sqlx::Result<Option<Account>> {
    sqlx::query_as(
        "select account_id, username, password_hash, role, disabled, created_at, updated_at
           from account where account_id = ?",
    )
    .bind(account_id)
    .fetch_optional(pool)
    .await
}

/// Every account, by name.
///
/// # Errors
/// When the database fails.
pub async fn list_accounts(pool: &SqlitePool) -> sqlx::Result<Vec<Account>> {
    sqlx::query_as(
        "select account_id, username, password_hash, role, disabled, created_at, updated_at
           from account order by username",
    )
    .fetch_all(pool)
    .await
}

/// Change an account's role and write `role_changed`. Returns false when the account does not
/// exist; nothing is written when the role is already the asked one.
///
/// # Errors
/// When the database fails.
pub async fn set_role(
    pool: &SqlitePool,
    account_id: i64,
    role: &str,
    actor: Option<i64>,
) -> sqlx::Result<bool> {
    let mut tx = begin_write(pool).await?;
    let current: Option<(String, String)> =
        sqlx::query_as("select username, role from account where account_id = ?")
            .bind(account_id)
            .fetch_optional(&mut *tx)
            .await?;
    let Some((username, old_role)) = current else {
        return Ok(false);
    };
    if old_role == role {
        return Ok(true);
    }
    sqlx::query(
        "update account set role = ?, updated_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where account_id = ?",
    )
    .bind(role)
    .bind(account_id)
    .execute(&mut *tx)
    .await?;
    record(
        &mut tx,
        &NewEvent {
            account_id: actor,
            action: "role_changed",
            entity: "account",
            entity_id: Some(account_id),
            summary: format!(
                "Changed the role of '{}' from {old_role} to {role}.",
                for_log(&username)
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(true)
}

/// Disable an account, end all its sessions and write `account_disabled`. Returns false when the
/// account does not exist; an already disabled account is left as it is.
///
/// # Errors
/// When the database fails.
pub async fn disable(pool: &SqlitePool, account_id: i64, actor: Option<i64>) -> sqlx::Result<bool> {
    let mut tx = begin_write(pool).await?;
    let current: Option<(String, bool)> =
        sqlx::query_as("select username, disabled from account where account_id = ?")
            .bind(account_id)
            .fetch_optional(&mut *tx)
            .await?;
    let Some((username, already)) = current else {
        return Ok(false);
    };
    sqlx::query("delete from session where account_id = ?")
        .bind(account_id)
        .execute(&mut *tx)
        .await?;
    if !already {
        sqlx::query(
            "update account set disabled = 1, updated_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
              where account_id = ?",
        )
        .bind(account_id)
        .execute(&mut *tx)
        .await?;
        record(
            &mut tx,
            &NewEvent {
                account_id: actor,
                action: "account_disabled",
                entity: "account",
                entity_id: Some(account_id),
                summary: format!(
                    "Disabled the account '{}' and ended its sessions.",
                    for_log(&username)
                ),
            },
        )
        .await?;
    }
    tx.commit().await?;
    Ok(true)
}

// ----------------------------------------------------------------------------------- sessions

/// What a session cookie stands for, joined with its account.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct SessionRow {
    /// Key of the session row.
    pub session_id: i64,
    /// The account.
    pub account_id: i64,
    /// Its login name.
    pub username: String,
    /// Its role.
    pub role: String,
    /// Whether the account is disabled.
    pub disabled: bool,
    /// The session's anti-forgery token.
    pub csrf_token: String,
    /// When the session began (seconds since 1970 UTC).
    pub created_unix: i64,
    /// Last request seen (seconds since 1970 UTC).
    pub last_seen_unix: i64,
}

/// A session to store at login.
#[derive(Debug, Clone)]
pub struct NewSession<'a> {
    /// The account logging in.
    pub account_id: i64,
    /// Its name (for the audit sentence).
    pub username: &'a str,
    /// Hex SHA-256 of the new session id.
    pub id_sha256: &'a str,
    /// The new anti-forgery token.
    pub csrf_token: &'a str,
    /// Now (seconds since 1970 UTC).
    pub now_unix: i64,
    /// Peer address.
    pub client_ip: &'a str,
    /// Hex SHA-256 of the session this browser had before, ended at the same time.
    pub previous_sha256: Option<&'a str>,
}

/// Store a new session after a successful login, end the browser's previous one, clear the
/// name's lock, and write `login`.
///
/// # Errors
/// When the database fails.
pub async fn start_session(pool: &SqlitePool, s: &NewSession<'_>) -> sqlx::Result<()> {
    let mut tx = begin_write(pool).await?;
    if let Some(old) = s.previous_sha256 {
        sqlx::query("delete from session where id_sha256 = ?")
            .bind(old)
            .execute(&mut *tx)
            .await?;
    }
    sqlx::query(
        "insert into session (id_sha256, account_id, csrf_token, created_unix, last_seen_unix, client_ip)
         values (?, ?, ?, ?, ?, ?)",
    )
    .bind(s.id_sha256)
    .bind(s.account_id)
    .bind(s.csrf_token)
    .bind(s.now_unix)
    .bind(s.now_unix)
    .bind(s.client_ip)
    .execute(&mut *tx)
    .await?;
    sqlx::query("delete from login_lock where username = ?")
        .bind(s.username)
        .execute(&mut *tx)
        .await?;
    record(
        &mut tx,
        &NewEvent {
            account_id: Some(s.account_id),
            action: "login",
            entity: "account",
            entity_id: Some(s.account_id),
            summary: format!(
                "'{}' logged in from {}.",
                for_log(s.username),
                for_log(s.client_ip)
            ),
        },
    )
    .await?;
    tx.commit().await
}

/// The session whose id hashes to `id_sha256`, with its account.
///
/// # Errors
/// When the database fails.
pub async fn find_session(pool: &SqlitePool, id_sha256: &str) -> sqlx::Result<Option<SessionRow>> {
    sqlx::query_as(
        "select s.session_id, s.account_id, a.username, a.role, a.disabled, s.csrf_token,
                s.created_unix, s.last_seen_unix
           from session s join account a on a.account_id = s.account_id
          where s.id_sha256 = ?",
    )
    .bind(id_sha256)
    .fetch_optional(pool)
    .await
}

/// Record that the session was used now.
///
/// # Errors
/// When the database fails.
pub async fn touch_session(pool: &SqlitePool, session_id: i64, now_unix: i64) -> sqlx::Result<()> {
    sqlx::query("update session set last_seen_unix = max(last_seen_unix, ?) where session_id = ?")
        .bind(now_unix)
        .bind(session_id)
        .execute(pool)
        .await
        .map(|_| ())
}

/// End one session (expired or unknown ones need no audit event).
///
/// # Errors
/// When the database fails.
pub async fn delete_session(pool: &SqlitePool, session_id: i64) -> sqlx::Result<()> {
    sqlx::query("delete from session where session_id = ?")
        .bind(session_id)
        .execute(pool)
        .await
        .map(|_| ())
}

/// End a session at the user's request and write `logout`.
///
/// # Errors
/// When the database fails.
pub async fn logout(pool: &SqlitePool, session_id: i64, account_id: i64) -> sqlx::Result<()> {
    let mut tx = begin_write(pool).await?;
    let gone = sqlx::query("delete from session where session_id = ?")
        .bind(session_id)
        .execute(&mut *tx)
        .await?
        .rows_affected();
    if gone > 0 {
        record(
            &mut tx,
            &NewEvent {
                account_id: Some(account_id),
                action: "logout",
                entity: "account",
                entity_id: Some(account_id),
                summary: "Logged out.".into(),
            },
        )
        .await?;
    }
    tx.commit().await
}

/// Delete every session past its idle or absolute limit (seconds), and failed-login rows older
/// than `failure_window_s`. Returns the number of sessions deleted.
///
/// # Errors
/// When the database fails.
pub async fn delete_expired(
    pool: &SqlitePool,
    now_unix: i64,
    idle_s: i64,
    admin_idle_s: i64,
    absolute_s: i64,
    failure_window_s: i64,
) -> sqlx::Result<u64> {
    let mut tx = begin_write(pool).await?;
    let n = sqlx::query(
        "delete from session where session_id in (
            select s.session_id from session s join account a on a.account_id = s.account_id
             where s.created_unix + ? <= ?
                or s.last_seen_unix + (case when a.role = 'admin' then ? else ? end) <= ?
                or a.disabled = 1)",
    )
    .bind(absolute_s)
    .bind(now_unix)
    .bind(admin_idle_s)
    .bind(idle_s)
    .bind(now_unix)
    .execute(&mut *tx)
    .await?
    .rows_affected();
    sqlx::query("delete from login_failure where at_unix + ? <= ?")
        .bind(failure_window_s)
        .bind(now_unix)
        .execute(&mut *tx)
        .await?;
    tx.commit().await?;
    Ok(n)
}

/// How many sessions an account has (tests and the account page use it).
///
/// # Errors
/// When the database fails.
pub async fn session_count(pool: &SqlitePool, account_id: i64) -> sqlx::Result<i64> {
    sqlx::query_scalar("select count(*) from session where account_id = ?")
        .bind(account_id)
        .fetch_one(pool)
        .await
}

// ------------------------------------------------------------------------------ failed logins

/// Limits on failed logins, in seconds and counts.
#[derive(Debug, Clone, Copy)]
pub struct FailurePolicy {
    /// Observation window.
    pub window_s: i64,
    /// Failures per name within the window that trigger a lock.
    pub max_per_name: i64,
    /// Failures per client address within the window after which that address is refused.
    pub max_per_ip: i64,
    /// Length of the first lock; each later lock in a row doubles it.
    pub base_lock_s: i64,
    /// Longest lock.
    pub max_lock_s: i64,
}

/// What a failed login led to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FailureOutcome {
    /// Set when this failure locked the name: until when (seconds since 1970 UTC).
    pub locked_until_unix: Option<i64>,
}

/// Until when a name is locked, if it is locked now.
///
/// # Errors
/// When the database fails.
pub async fn locked_until(
    pool: &SqlitePool,
    username: &str,
    now_unix: i64,
) -> sqlx::Result<Option<i64>> {
    sqlx::query_scalar(
        "select locked_until_unix from login_lock where username = ? and locked_until_unix > ?",
    )
    .bind(username)
    .bind(now_unix)
    .fetch_optional(pool)
    .await
}

/// Failed logins from one client address since a time.
///
/// # Errors
/// When the database fails.
pub async fn failures_from(
    pool: &SqlitePool,
    client_ip: &str,
    since_unix: i64,
) -> sqlx::Result<i64> {
    sqlx::query_scalar("select count(*) from login_failure where client_ip = ? and at_unix > ?")
        .bind(client_ip)
        .bind(since_unix)
        .fetch_one(pool)
        .await
}

/// Record a failed login for a name (known or not) and write `login_failed`; when the name
/// reaches the limit within the window, lock it (twice as long as its previous lock) and write
/// `login_locked`.
///
/// # Errors
/// When the database fails.
pub async fn record_failure(
    pool: &SqlitePool,
    username: &str,
    client_ip: &str,
    now_unix: i64,
    policy: FailurePolicy,
) -> sqlx::Result<FailureOutcome> {
    let name: String = username.chars().take(64).collect();
    let mut tx = begin_write(pool).await?;
    let account_id: Option<i64> =
        sqlx::query_scalar("select account_id from account where username = ?")
            .bind(&name)
            .fetch_optional(&mut *tx)
            .await?;
    sqlx::query("insert into login_failure (username, client_ip, at_unix) values (?, ?, ?)")
        .bind(&name)
        .bind(client_ip)
        .bind(now_unix)
        .execute(&mut *tx)
        .await?;
    record(
        &mut tx,
        &NewEvent {
            account_id,
            action: "login_failed",
            entity: "account",
            entity_id: account_id,
            summary: format!(
                "Failed login for '{}' from {}.",
                for_log(&name),
                for_log(client_ip)
            ),
        },
    )
    .await?;
    let recent: i64 =
        sqlx::query_scalar("select count(*) from login_failure where username = ? and at_unix > ?")
            .bind(&name)
            .bind(now_unix - policy.window_s)
            .fetch_one(&mut *tx)
            .await?;
    let mut outcome = FailureOutcome {
        locked_until_unix: None,
    };
    let from_ip: i64 = sqlx::query_scalar(
        "select count(*) from login_failure where client_ip = ? and at_unix > ?",
    )
    .bind(client_ip)
    .bind(now_unix - policy.window_s)
    .fetch_one(&mut *tx)
    .await?;
    if from_ip == policy.max_per_ip {
        record(
            &mut tx,
            &NewEvent {
                account_id: None,
                action: "login_address_locked",
                entity: "account",
                entity_id: None,
                summary: format!(
                    "Refusing logins from {} for up to {} minutes after {from_ip} failures.",
                    for_log(client_ip),
                    policy.window_s / 60
                ),
            },
        )
        .await?;
    }
    if recent >= policy.max_per_name {
        let previous: Option<i64> =
            sqlx::query_scalar("select lock_count from login_lock where username = ?")
                .bind(&name)
                .fetch_optional(&mut *tx)
                .await?;
        let count = previous.unwrap_or(0) + 1;
        let factor = 1_i64 << (count - 1).clamp(0, 20);
        let lock_s = policy
            .base_lock_s
            .saturating_mul(factor)
            .min(policy.max_lock_s);
        let until = now_unix + lock_s;
        sqlx::query(
            "insert into login_lock (username, locked_until_unix, lock_count) values (?, ?, ?)
             on conflict (username) do update
                set locked_until_unix = excluded.locked_until_unix, lock_count = excluded.lock_count",
        )
        .bind(&name)
        .bind(until)
        .bind(count)
        .execute(&mut *tx)
        .await?;
        // The failures that led to the lock are used up: after the lock, the name starts again
        // with a full allowance, and the next lock lasts twice as long.
        sqlx::query("delete from login_failure where username = ?")
            .bind(&name)
            .execute(&mut *tx)
            .await?;
        record(
            &mut tx,
            &NewEvent {
                account_id,
                action: "login_locked",
                entity: "account",
                entity_id: account_id,
                summary: format!(
                    "Locked logins for '{}' for {} minutes after {recent} failures (lock {count} in a row).",
                    for_log(&name),
                    lock_s / 60
                ),
            },
        )
        .await?;
        outcome.locked_until_unix = Some(until);
    }
    tx.commit().await?;
    Ok(outcome)
}

// --------------------------------------------------------------------------------- API tokens

/// An API token as listed on the account page (never the secret).
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct TokenInfo {
    /// Key.
    pub api_token_id: i64,
    /// The owner's name for it.
    pub label: String,
    /// Public prefix.
    pub prefix: String,
    /// Space-separated scopes.
    pub scopes: String,
    /// When it was made (RFC 3339 UTC).
    pub created_at: String,
    /// Last use (RFC 3339 UTC).
    pub last_used_at: Option<String>,
    /// When it was revoked (RFC 3339 UTC).
    pub revoked_at: Option<String>,
}

/// A presented token, joined with its account.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct TokenOwner {
    /// Key of the token.
    pub api_token_id: i64,
    /// The owner.
    pub account_id: i64,
    /// Owner's login name.
    pub username: String,
    /// Owner's role.
    pub role: String,
    /// Whether the owner is disabled.
    pub disabled: bool,
    /// Space-separated scopes.
    pub scopes: String,
    /// Set when revoked.
    pub revoked_at: Option<String>,
    /// Whether its last use was recorded less than 30 s ago (then a use need not be written:
    /// the "last used" time is kept to the half minute, and a busy API makes no write per read).
    pub used_recently: bool,
}

/// A token to store.
#[derive(Debug, Clone)]
pub struct NewToken<'a> {
    /// Owner.
    pub account_id: i64,
    /// Owner's name for it.
    pub label: &'a str,
    /// Public prefix (8 characters).
    pub prefix: &'a str,
    /// Hex SHA-256 of the whole token.
    pub token_sha256: &'a str,
    /// Space-separated scopes.
    pub scopes: &'a str,
}

/// Store a new token and write `token_created`.
///
/// # Errors
/// When the database fails.
pub async fn create_token(pool: &SqlitePool, t: &NewToken<'_>) -> sqlx::Result<i64> {
    let mut tx = begin_write(pool).await?;
    let id: i64 = sqlx::query_scalar(
        "insert into api_token (account_id, label, prefix, token_sha256, scopes)
         values (?, ?, ?, ?, ?) returning api_token_id",
    )
    .bind(t.account_id)
    .bind(t.label)
    .bind(t.prefix)
    .bind(t.token_sha256)
    .bind(t.scopes)
    .fetch_one(&mut *tx)
    .await?;
    record(
        &mut tx,
        &NewEvent {
            account_id: Some(t.account_id),
            action: "token_created",
            entity: "api_token",
            entity_id: Some(id),
            summary: format!(
                "Created the API token ml_{}_… with scopes '{}'.",
                t.prefix, t.scopes
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(id)
}

/// The tokens of one account, newest first.
///
/// # Errors
/// When the database fails.
pub async fn tokens_of(pool: &SqlitePool, account_id: i64) -> sqlx::Result<Vec<TokenInfo>> {
    sqlx::query_as(
        "select api_token_id, label, prefix, scopes, created_at, last_used_at, revoked_at
           from api_token where account_id = ? order by api_token_id desc",
    )
    .bind(account_id)
    .fetch_all(pool)
    .await
}

/// Revoke one of an account's own tokens and write `token_revoked`. Returns false when the
/// account has no such token (someone else's token is "no such token").
///
/// # Errors
/// When the database fails.
pub async fn revoke_token(
    pool: &SqlitePool,
    account_id: i64,
    api_token_id: i64,
) -> sqlx::Result<bool> {
    let mut tx = begin_write(pool).await?;
    let found: Option<(String, Option<String>)> = sqlx::query_as(
        "select prefix, revoked_at from api_token where api_token_id = ? and account_id = ?",
    )
    .bind(api_token_id)
    .bind(account_id)
    .fetch_optional(&mut *tx)
    .await?;
    let Some((prefix, revoked_at)) = found else {
        return Ok(false);
    };
    if revoked_at.is_none() {
        sqlx::query(
            "update api_token set revoked_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
              where api_token_id = ?",
        )
        .bind(api_token_id)
        .execute(&mut *tx)
        .await?;
        record(
            &mut tx,
            &NewEvent {
                account_id: Some(account_id),
                action: "token_revoked",
                entity: "api_token",
                entity_id: Some(api_token_id),
                summary: format!("Revoked the API token ml_{prefix}_…."),
            },
        )
        .await?;
    }
    tx.commit().await?;
    Ok(true)
}

/// The token whose SHA-256 is `token_sha256`, with its owner.
///
/// # Errors
/// When the database fails.
pub async fn find_token(pool: &SqlitePool, token_sha256: &str) -> sqlx::Result<Option<TokenOwner>> {
    sqlx::query_as(
        "select t.api_token_id, t.account_id, a.username, a.role, a.disabled, t.scopes, t.revoked_at,
                ifnull(t.last_used_at > strftime('%Y-%m-%dT%H:%M:%fZ', 'now', '-30 seconds'), 0)
                    as used_recently
           from api_token t join account a on a.account_id = t.account_id
          where t.token_sha256 = ?",
    )
    .bind(token_sha256)
    .fetch_optional(pool)
    .await
}

/// Record that a token was used now.
///
/// # Errors
/// When the database fails.
pub async fn touch_token(pool: &SqlitePool, api_token_id: i64) -> sqlx::Result<()> {
    sqlx::query(
        "update api_token set last_used_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where api_token_id = ?",
    )
    .bind(api_token_id)
    .execute(pool)
    .await
    .map(|_| ())
}

// ------------------------------------------------------------------------------------- audit

/// Filters of the audit page; all optional.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct AuditFilter {
    /// Exact action, e.g. "login_failed".
    pub action: Option<String>,
    /// Exact login name of the actor.
    pub username: Option<String>,
    /// First day included, "YYYY-MM-DD" (UTC).
    pub from_date: Option<String>,
    /// Last day included, "YYYY-MM-DD" (UTC).
    pub to_date: Option<String>,
}

/// Audit events matching a filter, newest first, at most `limit`.
///
/// # Errors
/// When the database fails.
pub async fn audit_events(
    pool: &SqlitePool,
    filter: &AuditFilter,
    limit: i64,
) -> sqlx::Result<Vec<super::history::Event>> {
    // Dates compare as text: 'at' is RFC 3339 UTC, so a day's events all start with the day.
    sqlx::query_as(
        "select e.audit_event_id, e.at, a.username, e.action, e.entity, e.entity_id, e.summary,
                e.catalog_version
           from audit_event e left join account a on a.account_id = e.account_id
          where (?1 is null or e.action = ?1)
            and (?2 is null or a.username = ?2)
            and (?3 is null or e.at >= ?3)
            and (?4 is null or e.at < ?4 || 'T99')
       order by e.audit_event_id desc
          limit ?5",
    )
    .bind(&filter.action)
    .bind(&filter.username)
    .bind(&filter.from_date)
    .bind(&filter.to_date)
    .bind(limit)
    .fetch_all(pool)
    .await
}

/// The most recent audit events about the catalog itself, newest first: events about accounts,
/// logins and tokens (entity 'account' or 'api_token') are left out, because pages that
/// anonymous readers may see list these, and who failed to log in from where is for admins only.
///
/// # Errors
/// When the database cannot be read.
pub async fn recent_catalog_events(
    pool: &SqlitePool,
    limit: i64,
) -> sqlx::Result<Vec<super::history::Event>> {
    sqlx::query_as(
        "select e.audit_event_id, e.at, a.username, e.action, e.entity, e.entity_id, e.summary,
                e.catalog_version
           from audit_event e left join account a on a.account_id = e.account_id
          where e.entity not in ('account', 'api_token')
       order by e.audit_event_id desc
          limit ?",
    )
    .bind(limit)
    .fetch_all(pool)
    .await
}

/// How many audit events carry an action (tests use it to check that nothing was written).
///
/// # Errors
/// When the database fails.
pub async fn count_events(pool: &SqlitePool, action: &str) -> sqlx::Result<i64> {
    sqlx::query_scalar("select count(*) from audit_event where action = ?")
        .bind(action)
        .fetch_one(pool)
        .await
}
