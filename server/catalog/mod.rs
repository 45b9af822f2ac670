//! The catalog: the only module that speaks SQL.
//!
//! Everything else calls the typed functions here. The database is SQLite in WAL mode with
//! `synchronous=FULL` (a commit survives a power cut once it has returned), foreign keys on and a
//! busy timeout; every write transaction starts with `BEGIN IMMEDIATE` ([`begin_write`]), so two
//! writers queue on the lock instead of failing half-way (a deferred transaction that reads and
//! then writes gets SQLITE_BUSY at once, without the busy handler ever running).
//!
//! Queries are runtime-checked (`sqlx::query_as` with `FromRow`); each runs in some test against
//! a freshly migrated temporary database, which is what catches a typo.

pub mod accounts;
pub mod backup;
pub mod csv_io;
pub mod demo;
pub mod fit_runs;
pub mod galaxies;
pub mod history;
pub mod intake;
pub mod model;
pub mod names;
pub mod overview;
pub mod relation_rows;
pub mod submissions;

use std::path::Path;
use std::str::FromStr;
use std::time::Duration;

use anyhow::Context;
use sqlx::sqlite::{SqliteConnectOptions, SqliteJournalMode, SqlitePoolOptions, SqliteSynchronous};
use sqlx::{Sqlite, SqlitePool, Transaction};

/// How long a writer waits for the lock before giving up with SQLITE_BUSY (the default of the
/// server's `--busy-timeout-ms`).
pub const BUSY_TIMEOUT: Duration = Duration::from_secs(5);

/// The oldest SQLite the catalog accepts: 3.51.3 fixed a WAL-reset bug that could corrupt a
/// database when two connections checkpoint and write at the same moment (present from 3.7.0).
pub const MIN_SQLITE_VERSION: (u32, u32, u32) = (3, 51, 3);

static MIGRATOR: sqlx::migrate::Migrator = sqlx::migrate!();

/// Open (creating if needed) the database file, apply the embedded migrations and return a pool.
///
/// # Errors
/// When the file cannot be opened or created, the SQLite library is too old, or a migration fails.
pub async fn connect(db_path: &Path) -> anyhow::Result<SqlitePool> {
    connect_with_busy_timeout(db_path, BUSY_TIMEOUT).await
}

/// [`connect`] with a given busy timeout: how long a writer waits for the lock before its
/// request fails with SQLITE_BUSY (503 on the web).
///
/// # Errors
/// As [`connect`].
pub async fn connect_with_busy_timeout(
    db_path: &Path,
    busy_timeout: Duration,
) -> anyhow::Result<SqlitePool> {
    let url = format!("sqlite://{}", db_path.display());
    let options = SqliteConnectOptions::from_str(&url)
        .with_context(|| format!("the database path '{}' is not usable", db_path.display()))?
        .create_if_missing(true)
        .journal_mode(SqliteJournalMode::Wal)
        .synchronous(SqliteSynchronous::Full)
        .foreign_keys(true)
        .busy_timeout(busy_timeout);
    let pool = SqlitePoolOptions::new()
        .max_connections(4)
        .connect_with(options)
        .await
        .with_context(|| format!("could not open the database file '{}'", db_path.display()))?;
    check_sqlite_version(&pool).await?;
    MIGRATOR
        .run(&pool)
        .await
        .context("could not apply the database migrations")?;
    galaxies::fill_name_keys(&pool)
        .await
        .context("could not store the look-alike keys of the galaxy names")?;
    Ok(pool)
}

async fn check_sqlite_version(pool: &SqlitePool) -> anyhow::Result<()> {
    let version = sqlite_version(pool).await?;
    let parsed = parse_version(&version)
        .with_context(|| format!("unexpected SQLite version string '{version}'"))?;
    anyhow::ensure!(
        parsed >= MIN_SQLITE_VERSION,
        "SQLite {version} is too old; massline needs {}.{}.{} or later (WAL-reset corruption fix)",
        MIN_SQLITE_VERSION.0,
        MIN_SQLITE_VERSION.1,
        MIN_SQLITE_VERSION.2
    );
    Ok(())
}

/// The SQLite library version the pool runs on, e.g. "3.51.3".
///
/// # Errors
/// When the database cannot be queried.
pub async fn sqlite_version(pool: &SqlitePool) -> sqlx::Result<String> {
    sqlx::query_scalar("select sqlite_version()")
        .fetch_one(pool)
        .await
}

/// Parse "3.51.3" into (3, 51, 3).
pub fn parse_version(text: &str) -> Option<(u32, u32, u32)> {
    let mut parts = text.trim().split('.').map(|p| p.parse::<u32>().ok());
    Some((
        parts.next()??,
        parts.next()??,
        parts.next().flatten().unwrap_or(0),
    ))
}

/// Check that the database answers a trivial query.
///
/// # Errors
/// When it does not.
pub async fn ping(pool: &SqlitePool) -> sqlx::Result<()> {
    sqlx::query_scalar::<_, i64>("select 1")
        .fetch_one(pool)
        .await
        .map(|_| ())
}

/// Start a write transaction with `BEGIN IMMEDIATE`: it takes the write lock at once (waiting up
/// to the busy timeout, [`BUSY_TIMEOUT`] by default), so the transaction cannot fail later on a lock upgrade.
///
/// # Errors
/// SQLITE_BUSY when another writer holds the lock for longer than the busy timeout.
pub async fn begin_write(pool: &SqlitePool) -> sqlx::Result<Transaction<'static, Sqlite>> {
    pool.begin_with("BEGIN IMMEDIATE").await
}

/// Database failures that the web layer answers differently.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DbFailure {
    /// The lock could not be had in time (SQLITE_BUSY / SQLITE_LOCKED): retry later.
    Busy,
    /// The disk or the page limit is full (SQLITE_FULL).
    Full,
    /// Anything else.
    Other,
}

/// Sort a database error into the classes the web layer answers differently.
pub fn classify(err: &sqlx::Error) -> DbFailure {
    if let sqlx::Error::Database(db) = err {
        // SQLite primary result codes live in the low byte of the extended code.
        let primary = db
            .code()
            .and_then(|c| c.parse::<i64>().ok())
            .map(|c| c & 0xff);
        match primary {
            Some(5 | 6) => return DbFailure::Busy,
            Some(13) => return DbFailure::Full,
            _ => {}
        }
    }
    if matches!(err, sqlx::Error::PoolTimedOut) {
        return DbFailure::Busy;
    }
    DbFailure::Other
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn versions_compare_numerically() {
        assert_eq!(parse_version("3.51.3"), Some((3, 51, 3)));
        assert_eq!(parse_version("3.9"), Some((3, 9, 0)));
        assert!(parse_version("3.51.3").unwrap() > parse_version("3.9.10").unwrap());
        assert_eq!(parse_version("x"), None);
    }
}
