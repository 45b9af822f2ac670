//! `massline backup`: a consistent copy of a live catalog database.
//!
//! The copy is made with `VACUUM INTO`, which reads the source inside one read transaction, so
//! the copy is a snapshot of one moment even while the server keeps committing (WAL readers do
//! not block writers). SQLite does not sync the file `VACUUM INTO` writes, and an interrupted
//! run can leave a damaged file (https://www.sqlite.org/lang_vacuum.html), so the copy is
//! written under a temporary name beside the target, synced (file, then directory), opened
//! again and checked (`PRAGMA integrity_check` must answer "ok", `PRAGMA foreign_key_check`
//! nothing), and only then renamed onto the target. A failed backup leaves no file behind and
//! never touches an existing target.
//!
//! The copy comes out in rollback-journal mode (`journal_mode=delete`) with no `-wal` file: it
//! is one self-contained file. `catalog::connect` puts a restored copy back into WAL mode when
//! the server starts on it.

use std::path::{Path, PathBuf};
use std::str::FromStr;
use std::time::{Duration, Instant};

use anyhow::Context;
use sqlx::sqlite::{SqliteConnectOptions, SqlitePoolOptions};
use sqlx::{Connection, SqliteConnection, SqlitePool};

/// One table of the copy and its number of rows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TableCount {
    /// Table name.
    pub table: String,
    /// Rows in the copy.
    pub rows: i64,
}

/// What a backup wrote.
#[derive(Debug, Clone)]
pub struct BackupReport {
    /// The finished copy.
    pub path: PathBuf,
    /// Size of the copy in bytes.
    pub bytes: u64,
    /// Size of the source database in bytes (page count × page size, the `-wal` file's pages
    /// included) when the copy started.
    pub source_bytes: u64,
    /// Every table of the copy (SQLite's own tables excluded) with its row count, by name.
    pub tables: Vec<TableCount>,
    /// Wall-clock time of the whole backup.
    pub elapsed: Duration,
}

impl BackupReport {
    /// The rows of one table in the copy, if it has that table.
    pub fn rows_of(&self, table: &str) -> Option<i64> {
        self.tables
            .iter()
            .find(|t| t.table == table)
            .map(|t| t.rows)
    }
}

/// Whether an existing file at the target may be replaced.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Overwrite {
    /// Refuse when the target exists (the default of `massline backup`).
    Refuse,
    /// Replace the target (`--force`); it stays untouched until the new copy has passed its
    /// checks.
    Replace,
}

/// Copy the database behind `pool` to `path`, refusing an existing `path`.
///
/// # Errors
/// When `path` exists or its directory does not, the copy cannot be written or synced, or the
/// copy fails its integrity or foreign-key check; nothing is left at `path` then.
pub async fn backup(pool: &SqlitePool, path: &Path) -> anyhow::Result<BackupReport> {
    backup_with(pool, path, Overwrite::Refuse).await
}

/// [`backup`], saying whether an existing target may be replaced.
///
/// # Errors
/// As [`backup`] (an existing target is an error only with [`Overwrite::Refuse`]).
pub async fn backup_with(
    pool: &SqlitePool,
    path: &Path,
    overwrite: Overwrite,
) -> anyhow::Result<BackupReport> {
    let started = Instant::now();
    let (dir, file_name) = target_parts(path)?;
    if path.is_dir() {
        anyhow::bail!(
            "the backup target '{}' is a directory; give a file name such as {}",
            path.display(),
            dir.join("massline-backup.db").display()
        );
    }
    if overwrite == Overwrite::Refuse && path.exists() {
        anyhow::bail!(
            "the backup target '{}' already exists; choose another name or pass --force to replace it",
            path.display()
        );
    }
    let temp = dir.join(format!(
        ".{file_name}.partial-{}-{:016x}",
        std::process::id(),
        rand::random::<u64>()
    ));
    let result = write_checked_copy(pool, &temp, &dir).await;
    let (source_bytes, tables) = match result {
        Ok(v) => v,
        Err(e) => {
            // The partial copy is worthless; a failure to remove it changes nothing for the
            // caller, who already gets the cause.
            let _ = std::fs::remove_file(&temp);
            return Err(e);
        }
    };
    if let Err(e) = put_in_place(&temp, path, overwrite) {
        let _ = std::fs::remove_file(&temp);
        return Err(e);
    }
    sync_dir(&dir)?;
    let bytes = std::fs::metadata(path)
        .with_context(|| format!("could not read the size of the backup '{}'", path.display()))?
        .len();
    Ok(BackupReport {
        path: path.to_path_buf(),
        bytes,
        source_bytes,
        tables,
        elapsed: started.elapsed(),
    })
}

/// The target's directory (which must exist) and file name.
fn target_parts(path: &Path) -> anyhow::Result<(PathBuf, String)> {
    let file_name = path
        .file_name()
        .and_then(|n| n.to_str())
        .filter(|n| !n.is_empty())
        .with_context(|| {
            format!(
                "the backup target '{}' has no usable file name; give one such as massline-backup.db",
                path.display()
            )
        })?
        .to_owned();
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if !dir.is_dir() {
        anyhow::bail!(
            "the directory '{}' of the backup target does not exist; create it first",
            dir.display()
        );
    }
    Ok((dir, file_name))
}

/// `VACUUM INTO` the temporary file, sync it and its directory, and check the copy.
async fn write_checked_copy(
    pool: &SqlitePool,
    temp: &Path,
    dir: &Path,
) -> anyhow::Result<(u64, Vec<TableCount>)> {
    let temp_text = temp.to_str().with_context(|| {
        format!(
            "the backup path '{}' is not valid UTF-8; choose a plain file name",
            temp.display()
        )
    })?;
    let page_count: i64 = sqlx::query_scalar("pragma page_count")
        .fetch_one(pool)
        .await
        .context("could not read the size of the database")?;
    let page_size: i64 = sqlx::query_scalar("pragma page_size")
        .fetch_one(pool)
        .await
        .context("could not read the page size of the database")?;
    let source_bytes = u64::try_from(page_count.saturating_mul(page_size)).unwrap_or(0);
    sqlx::query("vacuum into ?")
        .bind(temp_text)
        .execute(pool)
        .await
        .with_context(|| format!("could not write the copy '{}'", temp.display()))?;
    restrict_permissions(temp)?;
    std::fs::File::open(temp)
        .and_then(|f| f.sync_all())
        .with_context(|| format!("could not sync the copy '{}' to disk", temp.display()))?;
    sync_dir(dir)?;
    let tables = check_copy(temp).await?;
    Ok((source_bytes, tables))
}

/// The copy holds the catalog's password hashes and session digests: readable by its owner only.
#[cfg(unix)]
fn restrict_permissions(path: &Path) -> anyhow::Result<()> {
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(path, std::fs::Permissions::from_mode(0o600))
        .with_context(|| format!("could not make the copy '{}' private", path.display()))
}

#[cfg(not(unix))]
fn restrict_permissions(_path: &Path) -> anyhow::Result<()> {
    Ok(())
}

/// Open a finished copy on its own and run the integrity and foreign-key checks; returns the
/// row count of every table.
///
/// # Errors
/// When the copy cannot be opened, `integrity_check` answers anything but "ok", or
/// `foreign_key_check` finds a row.
pub async fn check_copy(path: &Path) -> anyhow::Result<Vec<TableCount>> {
    let options = SqliteConnectOptions::from_str(&format!("sqlite://{}", path.display()))
        .with_context(|| format!("the copy '{}' is not a usable path", path.display()))?
        .read_only(true);
    let mut conn = SqliteConnection::connect_with(&options)
        .await
        .with_context(|| format!("could not open the copy '{}'", path.display()))?;
    let result = check_open_copy(&mut conn).await;
    // Closing a read-only connection cannot lose anything.
    let _ = conn.close().await;
    result.with_context(|| format!("the copy '{}' failed its checks", path.display()))
}

async fn check_open_copy(conn: &mut SqliteConnection) -> anyhow::Result<Vec<TableCount>> {
    let integrity: Vec<String> = sqlx::query_scalar("pragma integrity_check")
        .fetch_all(&mut *conn)
        .await?;
    anyhow::ensure!(
        integrity == ["ok"],
        "integrity_check answered: {}",
        integrity.join("; ")
    );
    let dangling: Vec<(String, Option<i64>, String)> =
        sqlx::query_as("select \"table\", rowid, parent from pragma_foreign_key_check")
            .fetch_all(&mut *conn)
            .await?;
    if let Some((table, rowid, parent)) = dangling.first() {
        anyhow::bail!(
            "foreign_key_check found {} row(s) pointing nowhere, the first in '{table}' (row {}) to '{parent}'",
            dangling.len(),
            rowid.map_or_else(|| "?".to_owned(), |r| r.to_string())
        );
    }
    let names: Vec<String> = sqlx::query_scalar(
        "select name from sqlite_schema where type = 'table' and name not like 'sqlite_%' order by name",
    )
    .fetch_all(&mut *conn)
    .await?;
    let mut tables = Vec::with_capacity(names.len());
    for table in names {
        let rows: i64 = sqlx::query_scalar(sqlx::AssertSqlSafe(format!(
            "select count(*) from {}",
            quoted(&table)
        )))
        .fetch_one(&mut *conn)
        .await?;
        tables.push(TableCount { table, rows });
    }
    Ok(tables)
}

/// An SQL identifier in double quotes (names come from `sqlite_schema`, never from a user).
fn quoted(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// Move the checked copy onto the target. Without `--force` a hard link makes the step refuse a
/// target that appeared meanwhile (a rename would replace it silently).
fn put_in_place(temp: &Path, path: &Path, overwrite: Overwrite) -> anyhow::Result<()> {
    match overwrite {
        Overwrite::Replace => std::fs::rename(temp, path).with_context(|| {
            format!(
                "could not rename the checked copy onto '{}'",
                path.display()
            )
        }),
        Overwrite::Refuse => match std::fs::hard_link(temp, path) {
            Ok(()) => std::fs::remove_file(temp).with_context(|| {
                format!(
                    "the backup '{}' is complete, but its temporary name '{}' could not be removed",
                    path.display(),
                    temp.display()
                )
            }),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => anyhow::bail!(
                "the backup target '{}' already exists; choose another name or pass --force to replace it",
                path.display()
            ),
            // A file system without hard links: the existence check made before the copy is
            // the guard left.
            Err(_) => std::fs::rename(temp, path).with_context(|| {
                format!(
                    "could not rename the checked copy onto '{}'",
                    path.display()
                )
            }),
        },
    }
}

/// Sync a directory so a new or renamed entry in it survives a power cut.
fn sync_dir(dir: &Path) -> anyhow::Result<()> {
    #[cfg(unix)]
    {
        std::fs::File::open(dir)
            .and_then(|d| d.sync_all())
            .with_context(|| format!("could not sync the directory '{}'", dir.display()))?;
    }
    #[cfg(not(unix))]
    let _ = dir;
    Ok(())
}

/// Open an existing database file for a backup: no migration, no change of journal mode (the
/// file is copied as it is), the default busy timeout.
///
/// # Errors
/// When the file does not exist or cannot be opened.
pub async fn open_source(db_path: &Path) -> anyhow::Result<SqlitePool> {
    if !db_path.is_file() {
        anyhow::bail!(
            "the database file '{}' does not exist; give the server's --db path",
            db_path.display()
        );
    }
    let options = SqliteConnectOptions::from_str(&format!("sqlite://{}", db_path.display()))
        .with_context(|| format!("the database path '{}' is not usable", db_path.display()))?
        .create_if_missing(false)
        .foreign_keys(true)
        .busy_timeout(super::BUSY_TIMEOUT);
    SqlitePoolOptions::new()
        .max_connections(1)
        .connect_with(options)
        .await
        .with_context(|| format!("could not open the database file '{}'", db_path.display()))
}

#[cfg(test)]
mod tests {
    use super::*;

    async fn catalog_in(dir: &Path) -> SqlitePool {
        let pool = crate::catalog::connect(&dir.join("live.sqlite"))
            .await
            .expect("a fresh catalog");
        crate::catalog::demo::load_demo(&pool)
            .await
            .expect("the demo loads");
        pool
    }

    #[tokio::test]
    async fn a_backup_is_a_checked_self_contained_copy_with_the_same_rows() {
        let dir = tempfile::tempdir().unwrap();
        let pool = catalog_in(dir.path()).await;
        let target = dir.path().join("copy.db");
        let report = backup(&pool, &target).await.expect("the backup succeeds");
        assert_eq!(report.path, target);
        assert!(report.bytes > 0 && report.bytes == std::fs::metadata(&target).unwrap().len());
        for t in &report.tables {
            let live: i64 = sqlx::query_scalar(sqlx::AssertSqlSafe(format!(
                "select count(*) from {}",
                quoted(&t.table)
            )))
            .fetch_one(&pool)
            .await
            .unwrap();
            assert_eq!(live, t.rows, "table {}", t.table);
        }
        assert!(report.rows_of("measurement").unwrap() > 0);
        // Nothing but the copy (and the live database's own files) is left in the directory.
        let mut names: Vec<String> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        names.sort();
        assert_eq!(
            names,
            [
                "copy.db",
                "live.sqlite",
                "live.sqlite-shm",
                "live.sqlite-wal"
            ]
        );
        // One file, rollback-journal mode: no -wal belongs to it.
        let copy = SqlitePool::connect(&format!("sqlite://{}", target.display()))
            .await
            .unwrap();
        let mode: String = sqlx::query_scalar("pragma journal_mode")
            .fetch_one(&copy)
            .await
            .unwrap();
        assert_eq!(mode, "delete");
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = std::fs::metadata(&target).unwrap().permissions().mode();
            assert_eq!(mode & 0o777, 0o600, "the copy is private");
        }
    }

    #[tokio::test]
    async fn an_existing_target_is_refused_unless_replacing_is_asked() {
        let dir = tempfile::tempdir().unwrap();
        let pool = catalog_in(dir.path()).await;
        let target = dir.path().join("copy.db");
        std::fs::write(&target, b"an older file").unwrap();
        let err = backup(&pool, &target).await.unwrap_err().to_string();
        assert!(
            err.contains("already exists") && err.contains("--force"),
            "{err}"
        );
        assert_eq!(std::fs::read(&target).unwrap(), b"an older file");
        let report = backup_with(&pool, &target, Overwrite::Replace)
            .await
            .expect("--force replaces it");
        assert!(report.bytes > 1000);
        check_copy(&target)
            .await
            .expect("the replaced copy is sound");
    }

    #[tokio::test]
    async fn a_missing_directory_or_database_gets_one_sentence() {
        let dir = tempfile::tempdir().unwrap();
        let pool = catalog_in(dir.path()).await;
        let err = backup(&pool, &dir.path().join("nowhere/copy.db"))
            .await
            .unwrap_err()
            .to_string();
        assert!(err.contains("does not exist"), "{err}");
        let err = backup(&pool, dir.path()).await.unwrap_err().to_string();
        assert!(err.contains("is a directory"), "{err}");
        let err = open_source(&dir.path().join("absent.sqlite"))
            .await
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("does not exist") && err.contains("--db"),
            "{err}"
        );
    }

    #[tokio::test]
    async fn a_damaged_copy_fails_its_check() {
        let dir = tempfile::tempdir().unwrap();
        let pool = catalog_in(dir.path()).await;
        let target = dir.path().join("copy.db");
        backup(&pool, &target).await.unwrap();
        // Overwrite a stretch of pages in the middle of the file with garbage.
        let mut bytes = std::fs::read(&target).unwrap();
        let middle = bytes.len() / 2;
        for b in &mut bytes[middle..middle + 8192] {
            *b = 0x5a;
        }
        std::fs::write(&target, &bytes).unwrap();
        let err = format!("{:#}", check_copy(&target).await.unwrap_err());
        assert!(err.contains("failed its checks"), "{err}");
    }
}
