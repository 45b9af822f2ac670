//! The catalog version and the append-only audit log.
//!
//! Any accepted change bumps the version in the same transaction as the change, and writes an
//! audit event carrying the new version; cached fits are keyed by the version, so they can never
//! outlive the data they were fitted to.

use sqlx::{Sqlite, SqliteExecutor, SqlitePool, Transaction};

/// The current catalog version.
///
/// # Errors
/// When the database cannot be read.
pub async fn current_version(db: impl SqliteExecutor<'_>) -> sqlx::Result<i64> {
    sqlx::query_scalar("select catalog_version from catalog_state where catalog_state_id = 1")
        .fetch_one(db)
        .await
}

/// Increment the catalog version inside a write transaction and return the new value.
///
/// # Errors
/// When the update fails.
pub async fn bump_version(tx: &mut Transaction<'_, Sqlite>) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "update catalog_state
            set catalog_version = catalog_version + 1,
                changed_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where catalog_state_id = 1
      returning catalog_version",
    )
    .fetch_one(&mut **tx)
    .await
}

/// What an audit event says happened.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NewEvent<'a> {
    /// Who did it; None for the system.
    pub account_id: Option<i64>,
    /// Short machine-readable action, e.g. "demo_loaded".
    pub action: &'a str,
    /// Kind of thing it concerns, e.g. "galaxy"; empty for the whole catalog.
    pub entity: &'a str,
    /// Its id, if any.
    pub entity_id: Option<i64>,
    /// One human-readable sentence.
    pub summary: String,
}

/// Append an audit event, stamped with the catalog version as it stands in this transaction.
///
/// # Errors
/// When the insert fails.
pub async fn record(tx: &mut Transaction<'_, Sqlite>, event: &NewEvent<'_>) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into audit_event (account_id, action, entity, entity_id, summary, catalog_version)
         values (?, ?, ?, ?, ?, (select catalog_version from catalog_state where catalog_state_id = 1))
         returning audit_event_id",
    )
    .bind(event.account_id)
    .bind(event.action)
    .bind(event.entity)
    .bind(event.entity_id)
    .bind(&event.summary)
    .fetch_one(&mut **tx)
    .await
}

/// An audit event as shown on pages.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct Event {
    /// Key.
    pub audit_event_id: i64,
    /// When (RFC 3339 UTC).
    pub at: String,
    /// Who, by username; None for the system.
    pub username: Option<String>,
    /// Action.
    pub action: String,
    /// Entity kind.
    pub entity: String,
    /// Entity id.
    pub entity_id: Option<i64>,
    /// Sentence.
    pub summary: String,
    /// Catalog version after the event.
    pub catalog_version: i64,
}

/// The most recent audit events, newest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn recent_events(pool: &SqlitePool, limit: i64) -> sqlx::Result<Vec<Event>> {
    sqlx::query_as(
        "select e.audit_event_id, e.at, a.username, e.action, e.entity, e.entity_id, e.summary,
                e.catalog_version
           from audit_event e left join account a on a.account_id = e.account_id
       order by e.audit_event_id desc
          limit ?",
    )
    .bind(limit)
    .fetch_all(pool)
    .await
}
