//! Whether the database can take a write now: the answer of the health check.
//!
//! A query that answers says nothing about writes: a full disk, a page limit reached, a
//! read-only file or a lock held elsewhere all leave reads working. The probe therefore checks
//! what a write needs, without writing anything:
//!
//! 1. room on the disk: the filesystem holding the database has at least [`RESERVE_BYTES`]
//!    free for the server's user (`statvfs`, the blocks available to unprivileged users), and
//!    the largest file the process may write (`RLIMIT_FSIZE`, e.g. `ulimit -f` or systemd's
//!    `LimitFSIZE=`) leaves that much room beyond the database's `-wal` file, where commits go;
//! 2. the write lock: `BEGIN IMMEDIATE` succeeds (it waits up to the busy timeout, like a
//!    write);
//! 3. a writable file: inside that transaction, `user_version` is set to the value it has, a
//!    change of the file's first page that SQLite refuses on a file it could open only for
//!    reading (`BEGIN IMMEDIATE` alone succeeds there); the change stays in memory and is
//!    rolled back;
//! 4. room in the file: the pages SQLite may still allocate (free pages in the file plus what
//!    `max_page_count` allows beyond its end) hold at least [`RESERVE_BYTES`];
//!
//! then `ROLLBACK`. A write needs room in the write-ahead log when it commits, so a disk that
//! fills between two probes is seen by the next one; what the probe cannot see is a write larger
//! than the reserve. Probes run at most once per [`PROBE_INTERVAL`]; callers in between get the
//! last answer, so a health check polled by many monitors costs one transaction a second.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::{Duration, Instant};

use sqlx::SqlitePool;
use tokio::sync::Mutex;

use super::{DbFailure, begin_write, classify};

/// Room a write is assumed to need, in bytes (1 MiB): far more than a form's submission, less
/// than a large upload.
pub const RESERVE_BYTES: u64 = 1 << 20;

/// The shortest time between two probes; answers in between are the last probe's.
pub const PROBE_INTERVAL: Duration = Duration::from_secs(1);

/// Whether the database can take a write.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WriteHealth {
    /// It can.
    Ready,
    /// It cannot, with one sentence saying why and what to do.
    Refused(String),
}

/// The probe with its last answer, shared by every request (cheap to clone).
#[derive(Clone)]
pub struct WriteCheck {
    pool: SqlitePool,
    db_path: PathBuf,
    last: Arc<Mutex<Option<(Instant, WriteHealth)>>>,
}

impl WriteCheck {
    /// The probe of the database behind `pool`, stored in the file `db_path`.
    pub fn new(pool: SqlitePool, db_path: &Path) -> Self {
        Self {
            pool,
            db_path: db_path.to_path_buf(),
            last: Arc::new(Mutex::new(None)),
        }
    }

    /// Whether the database can take a write: the last answer when it is younger than
    /// [`PROBE_INTERVAL`], else a new probe. Concurrent callers wait for one probe and share it.
    pub async fn check(&self) -> WriteHealth {
        let mut last = self.last.lock().await;
        if let Some((at, answer)) = last.as_ref()
            && at.elapsed() < PROBE_INTERVAL
        {
            return answer.clone();
        }
        let answer = probe(&self.pool, &self.db_path).await;
        // Logged when the answer changes, not at every poll of a monitor.
        let before = last.as_ref().map(|(_, a)| a);
        if before != Some(&answer) {
            match &answer {
                WriteHealth::Refused(reason) => {
                    tracing::warn!(%reason, "the database cannot take a write");
                }
                WriteHealth::Ready if before.is_some() => {
                    tracing::info!("the database can take writes again");
                }
                WriteHealth::Ready => {}
            }
        }
        *last = Some((Instant::now(), answer.clone()));
        answer
    }
}

/// One probe, as described in the module's documentation.
pub async fn probe(pool: &SqlitePool, db_path: &Path) -> WriteHealth {
    if let Some(free) = free_disk_bytes(db_path)
        && free < RESERVE_BYTES
    {
        return WriteHealth::Refused(format!(
            "The disk holding the database has {} KiB free, less than the {} KiB a write may \
             need; free disk space there.",
            free / 1024,
            RESERVE_BYTES / 1024
        ));
    }
    if let Some(refusal) = file_size_limit_refusal(db_path) {
        return WriteHealth::Refused(refusal);
    }
    let mut tx = match begin_write(pool).await {
        Ok(tx) => tx,
        Err(e) => return WriteHealth::Refused(write_refused(&e)),
    };
    let inside = probe_inside(&mut tx).await;
    // Nothing was written; a failed rollback leaves a connection the pool closes on its next use.
    let _ = tx.rollback().await;
    inside
}

/// Steps 3 and 4 of the probe, inside its transaction.
async fn probe_inside(tx: &mut sqlx::SqliteConnection) -> WriteHealth {
    let room: (i64, i64, i64, i64, i64) = match sqlx::query_as(
        "select p.page_count, m.max_page_count, f.freelist_count, s.page_size, u.user_version \
         from pragma_page_count() p, pragma_max_page_count() m, \
              pragma_freelist_count() f, pragma_page_size() s, pragma_user_version() u",
    )
    .fetch_one(&mut *tx)
    .await
    {
        Ok(room) => room,
        Err(e) => {
            return WriteHealth::Refused(format!(
                "The database does not answer inside a write transaction ({e}); see the \
                 server's log and check the database file."
            ));
        }
    };
    let (pages, max_pages, free_pages, page_size, user_version) = room;
    // The value it already has: rolled back anyway, and unchanged had the rollback failed.
    let rewrite = sqlx::query(sqlx::AssertSqlSafe(format!(
        "pragma user_version = {user_version}"
    )))
    .execute(&mut *tx)
    .await;
    if let Err(e) = rewrite {
        return WriteHealth::Refused(write_refused(&e));
    }
    let spare_pages = free_pages + (max_pages - pages).max(0);
    let spare_bytes = u64::try_from(spare_pages.saturating_mul(page_size)).unwrap_or(0);
    if spare_bytes < RESERVE_BYTES {
        return WriteHealth::Refused(format!(
            "The database has {} KiB left below its page limit of {max_pages} pages, less than \
             the {} KiB a write may need; raise --max-db-pages or delete rows.",
            spare_bytes / 1024,
            RESERVE_BYTES / 1024
        ));
    }
    WriteHealth::Ready
}

/// The sentence for the probe's `BEGIN IMMEDIATE` or its write, failed.
fn write_refused(err: &sqlx::Error) -> String {
    match classify(err) {
        DbFailure::Busy => "The database is locked by another writer for longer than the busy \
                            timeout; writes wait and then answer 503 until it lets go."
            .to_owned(),
        DbFailure::Full => "The database's storage is full; free disk space or raise \
                            --max-db-pages."
            .to_owned(),
        DbFailure::Other => format!(
            "The database cannot be written ({err}); check that the database file, its \
             directory and its -wal and -shm files are writable by the server."
        ),
    }
}

/// Bytes free for unprivileged users on the filesystem holding `db_path`, when it can be read.
#[cfg(unix)]
fn free_disk_bytes(db_path: &Path) -> Option<u64> {
    let dir = match db_path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let stat = rustix::fs::statvfs(dir).ok()?;
    Some(stat.f_bavail.saturating_mul(stat.f_frsize))
}

#[cfg(not(unix))]
fn free_disk_bytes(_db_path: &Path) -> Option<u64> {
    None
}

/// The sentence when the process's file size limit leaves less than [`RESERVE_BYTES`] beyond the
/// `-wal` file (commits append to it; past the limit a write is cut short and SQLite reports
/// SQLITE_FULL, as on a full disk).
#[cfg(unix)]
fn file_size_limit_refusal(db_path: &Path) -> Option<String> {
    let limit = rustix::process::getrlimit(rustix::process::Resource::Fsize).current?;
    let mut wal = db_path.as_os_str().to_owned();
    wal.push("-wal");
    let wal_bytes = std::fs::metadata(&wal).map_or(0, |m| m.len());
    let room = limit.saturating_sub(wal_bytes);
    (room < RESERVE_BYTES).then(|| {
        format!(
            "The server may write files of at most {} KiB (its file size limit) and the \
             database's -wal file holds {} KiB, leaving less than the {} KiB a write may need; \
             raise the limit (ulimit -f, LimitFSIZE=).",
            limit / 1024,
            wal_bytes / 1024,
            RESERVE_BYTES / 1024
        )
    })
}

#[cfg(not(unix))]
fn file_size_limit_refusal(_db_path: &Path) -> Option<String> {
    None
}

#[cfg(test)]
mod tests {
    use std::str::FromStr;

    use sqlx::sqlite::{SqliteConnectOptions, SqlitePoolOptions};

    use super::*;

    #[tokio::test]
    async fn a_fresh_database_is_ready_and_a_read_only_one_is_refused_with_a_reason() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("probe.sqlite");
        let pool = crate::catalog::connect(&path).await.unwrap();
        assert_eq!(probe(&pool, &path).await, WriteHealth::Ready);
        pool.close().await;

        // The same file opened for reading only, as when the file or its directory is not
        // writable by the server.
        let options = SqliteConnectOptions::from_str(&format!("sqlite://{}", path.display()))
            .unwrap()
            .read_only(true);
        let read_only = SqlitePoolOptions::new()
            .max_connections(1)
            .connect_with(options)
            .await
            .unwrap();
        match probe(&read_only, &path).await {
            WriteHealth::Refused(reason) => assert!(
                reason.starts_with("The database cannot be written") && reason.contains("writable"),
                "{reason}"
            ),
            WriteHealth::Ready => panic!("a read-only database was reported ready"),
        }
    }

    #[tokio::test]
    async fn a_page_limit_without_a_reserve_of_room_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("probe.sqlite");
        let pool = crate::catalog::connect(&path).await.unwrap();
        let pages: i64 = sqlx::query_scalar("pragma page_count")
            .fetch_one(&pool)
            .await
            .unwrap();
        pool.close().await;
        // Room for half the reserve beyond the file's size.
        let max_pages =
            u32::try_from(pages + i64::try_from(RESERVE_BYTES / 4096 / 2).unwrap()).unwrap();
        let limits = crate::catalog::Limits {
            max_pages: Some(max_pages),
            ..crate::catalog::Limits::default()
        };
        let pool = crate::catalog::connect_with_limits(&path, limits)
            .await
            .unwrap();
        match probe(&pool, &path).await {
            WriteHealth::Refused(reason) => {
                assert!(
                    reason.contains(&format!("page limit of {max_pages} pages")),
                    "{reason}"
                );
            }
            WriteHealth::Ready => panic!("half the reserve was reported enough"),
        }
    }
}
