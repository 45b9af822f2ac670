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
pub mod changes;
pub mod citations;
pub mod csv_io;
pub mod demo;
pub mod fit_runs;
pub mod galaxies;
pub mod health;
pub mod history;
pub mod intake;
pub mod model;
pub mod names;
pub mod overview;
pub mod relation_rows;
pub mod resolutions;
pub mod review_scores;
pub mod submissions;
pub mod virial;

use std::path::Path;
use std::str::FromStr;
use std::time::Duration;

use anyhow::Context;
use sqlx::sqlite::{SqliteConnectOptions, SqliteJournalMode, SqlitePoolOptions, SqliteSynchronous};
use sqlx::{Connection, Sqlite, SqlitePool, Transaction};

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
    connect_with_limits(db_path, Limits::default()).await
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
    connect_with_limits(
        db_path,
        Limits {
            busy_timeout,
            ..Limits::default()
        },
    )
    .await
}

/// What the server bounds when it opens the database.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// How long a writer waits for the lock before giving up with SQLITE_BUSY.
    pub busy_timeout: Duration,
    /// The largest size of the database file, in pages (SQLite's `max_page_count`, set on every
    /// connection because the pragma belongs to the connection); a write that would need more
    /// fails with SQLITE_FULL, answered 507 like a full disk. `None`: only the disk limits it.
    pub max_pages: Option<u32>,
}

impl Default for Limits {
    fn default() -> Self {
        Self {
            busy_timeout: BUSY_TIMEOUT,
            max_pages: None,
        }
    }
}

/// [`connect`] with the given [`Limits`].
///
/// # Errors
/// As [`connect`].
pub async fn connect_with_limits(db_path: &Path, limits: Limits) -> anyhow::Result<SqlitePool> {
    let url = format!("sqlite://{}", db_path.display());
    let mut options = SqliteConnectOptions::from_str(&url)
        .with_context(|| format!("the database path '{}' is not usable", db_path.display()))?
        .create_if_missing(true)
        .journal_mode(SqliteJournalMode::Wal)
        .synchronous(SqliteSynchronous::Full)
        .foreign_keys(true)
        .busy_timeout(limits.busy_timeout);
    if let Some(pages) = limits.max_pages {
        options = options.pragma("max_page_count", pages.to_string());
    }
    let pool = pool_options()
        .max_connections(4)
        .connect_with(options)
        .await
        .with_context(|| format!("could not open the database file '{}'", db_path.display()))?;
    check_sqlite_version(&pool).await?;
    MIGRATOR
        .run(&pool)
        .await
        .context("could not apply the database migrations")?;
    galaxies::fill_row_key_digests(&pool)
        .await
        .context("could not give the stored row keys their exported form")?;
    galaxies::fill_name_keys(&pool)
        .await
        .context("could not store the look-alike keys of the galaxy names")?;
    Ok(pool)
}

/// The pool's options: every connection handed out is outside any transaction.
///
/// Why a connection could be handed out inside one: sqlx counts open transactions per
/// connection itself (its "transaction depth"), raising the count when `BEGIN` succeeds and
/// lowering it only when its own `COMMIT` or `ROLLBACK` succeeds. On SQLITE_FULL (a full disk or
/// the page limit), SQLITE_IOERR or SQLITE_NOMEM SQLite rolls the whole transaction back by
/// itself: always when `COMMIT` fails (the write-ahead log could not be written), and when a
/// statement without a statement journal fails (a single-row insert without `RETURNING` or
/// triggers; a statement that writes several rows, or has `RETURNING` or triggers, is undone
/// alone). The `ROLLBACK` that sqlx then sends when the transaction is dropped fails ("no
/// transaction is active"), the count stays at 1, and the connection goes back to the pool
/// looking healthy (the pool's check on release is a ping). Every later [`begin_write`] on it
/// fails with "attempted to call begin_with at non-zero transaction depth" (a custom `BEGIN` is
/// refused inside a transaction) until the process restarts: with four connections, some writes
/// or all of them answer 500.
///
/// The count cannot be reset from outside, so such a connection is closed when it is next
/// taken from the pool (`before_acquire`, which runs after the pool's ping: by then any
/// rollback queued by a dropped transaction has been carried out, so a non-zero count is the
/// stuck one and not a rollback still on its way), and the pool opens a fresh connection in its
/// place. SQLite's own view (`sqlite3_get_autocommit`) would need an unsafe call; the count is
/// what refuses the next `BEGIN`, so it is the one checked.
fn pool_options() -> SqlitePoolOptions {
    SqlitePoolOptions::new().before_acquire(|conn, _meta| {
        Box::pin(async move {
            let clean = !conn.is_in_transaction();
            if !clean {
                tracing::warn!(
                    "closing a database connection left inside a failed transaction (SQLite had \
                     already rolled it back); a fresh connection takes its place"
                );
            }
            Ok(clean)
        })
    })
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

    /// A pool of one connection on a file holding one empty table, every connection limited
    /// to two pages beyond the file's size, so a large insert fails with SQLITE_FULL.
    async fn nearly_full_pool(dir: &tempfile::TempDir) -> SqlitePool {
        let url = format!("sqlite://{}", dir.path().join("full.sqlite").display());
        let options = SqliteConnectOptions::from_str(&url)
            .unwrap()
            .create_if_missing(true)
            .journal_mode(SqliteJournalMode::Wal);
        let mut setup = sqlx::SqliteConnection::connect_with(&options)
            .await
            .unwrap();
        sqlx::query("create table ballast (b blob not null)")
            .execute(&mut setup)
            .await
            .unwrap();
        let pages: i64 = sqlx::query_scalar("pragma page_count")
            .fetch_one(&mut setup)
            .await
            .unwrap();
        setup.close().await.unwrap();
        pool_options()
            .max_connections(1)
            .connect_with(options.pragma("max_page_count", (pages + 2).to_string()))
            .await
            .unwrap()
    }

    #[tokio::test]
    async fn a_write_that_found_the_database_full_leaves_no_transaction_behind_for_the_next() {
        let dir = tempfile::tempdir().unwrap();
        let pool = nearly_full_pool(&dir).await;

        let mut tx = begin_write(&pool).await.unwrap();
        // About 25 pages of 4096 bytes: more than the two the limit leaves.
        let err = sqlx::query("insert into ballast values (zeroblob(100000))")
            .execute(&mut *tx)
            .await
            .unwrap_err();
        assert_eq!(classify(&err), DbFailure::Full, "{err}");
        drop(tx);

        // The pool has one connection: the next write gets the one that failed, or its
        // replacement. It must start, write and commit.
        let mut tx = begin_write(&pool)
            .await
            .expect("a write after a failed one starts");
        sqlx::query("insert into ballast values (x'00')")
            .execute(&mut *tx)
            .await
            .unwrap();
        tx.commit().await.unwrap();
        let rows: i64 = sqlx::query_scalar("select count(*) from ballast")
            .fetch_one(&pool)
            .await
            .unwrap();
        assert_eq!(rows, 1);
    }

    #[tokio::test]
    async fn a_write_rolled_back_by_hand_after_the_database_was_full_leaves_the_next_working() {
        let dir = tempfile::tempdir().unwrap();
        let pool = nearly_full_pool(&dir).await;
        for _ in 0..3 {
            let mut tx = begin_write(&pool).await.expect("each write starts");
            let err = sqlx::query("insert into ballast values (zeroblob(100000))")
                .execute(&mut *tx)
                .await
                .unwrap_err();
            assert_eq!(classify(&err), DbFailure::Full, "{err}");
            // SQLite may already have ended the transaction; the rollback's own failure is the
            // case under test, not a fault of the test.
            let _ = tx.rollback().await;
        }
    }
}
