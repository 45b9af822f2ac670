//! What the reliability tests share: the app in this process (with adjusted settings; started
//! as in the other test crates, tests/common) or as a child process, a browser with its own
//! cookies and anti-forgery token (tests/common), and checks of a database file (integrity,
//! foreign keys, a digest of every table).

use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::str::FromStr;
use std::time::{Duration, Instant};

use sha2::{Digest, Sha256};
use sqlx::sqlite::SqliteConnectOptions;
use sqlx::{Connection, SqliteConnection, SqlitePool};

pub(crate) use crate::common::{
    Browser, Reply, TestApp, create_account, external_required, hidden_value, plain_client,
    spawn_on, spawn_with,
};

/// Make an API token for an account directly in the database; returns the token.
pub(crate) async fn make_token(pool: &SqlitePool, account_id: i64, scopes: &str) -> String {
    crate::common::make_token(pool, account_id, scopes).await.0
}

/// The form fields of a new galaxy with one σ_e measurement (invented values).
pub(crate) fn new_galaxy_form(name: &str) -> Vec<(&'static str, String)> {
    vec![
        ("galaxy", String::new()),
        ("name", name.to_owned()),
        ("morphology", "elliptical".into()),
        ("bulge_kind", "classical".into()),
        ("centre_kind", "core".into()),
        ("distance_mpc", "20".into()),
        ("distance_err_mpc", "1.5".into()),
        ("distance_method", "sbf".into()),
        ("m0_quantity", "sigma".into()),
        ("m0_value", "210 ± 10".into()),
        ("m0_scale", "auto".into()),
        ("m0_sigma_definition", "sigma_e".into()),
        ("m0_aperture", "r_e".into()),
        ("note", "reliability test".into()),
    ]
}

/// Borrow owned form fields for [`Browser::post`].
pub(crate) fn borrowed<'a>(fields: &'a [(&'static str, String)]) -> Vec<(&'a str, &'a str)> {
    fields.iter().map(|(k, v)| (*k, v.as_str())).collect()
}

/// A free loopback port (bound, read and released; the child binds it a moment later).
pub(crate) fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0")
        .and_then(|l| l.local_addr())
        .expect("a free port")
        .port()
}

/// `massline serve` as a child process; dropping it kills the child.
pub(crate) struct ChildServer {
    child: Child,
    /// e.g. "http://127.0.0.1:41234"
    pub(crate) address: String,
}

impl ChildServer {
    /// Start `massline serve --db DB` on a free loopback port, without the page rate (the
    /// writers here send forms as fast as they can; the limit has its own tests) and with a
    /// request timeout of 300 s (a 50,000-row upload takes about 25 s in a debug build on a busy
    /// 2-core machine, close to the default 30 s; the timeout has its own tests), and wait
    /// until it answers (`/livez`; the database is open and migrated before the server listens).
    pub(crate) async fn start(db_path: &Path) -> Self {
        Self::start_with_file_size_limit(db_path, None).await
    }

    /// [`ChildServer::start`], with the largest file the server may write limited to
    /// `blocks` × 512 bytes when given (`ulimit -S -f`, through `sh`; a write past it is cut
    /// short, as on a full disk; SIGXFSZ is ignored so that the write fails instead of killing
    /// the server). The soft limit only, so `prlimit` can lift it while the server runs.
    pub(crate) async fn start_with_file_size_limit(db_path: &Path, blocks: Option<u64>) -> Self {
        let port = free_port();
        let mut command = match blocks {
            None => Command::new(env!("CARGO_BIN_EXE_massline")),
            Some(blocks) => {
                let mut sh = Command::new("sh");
                sh.arg("-c")
                    .arg(format!(
                        "trap '' XFSZ; ulimit -S -f {blocks}; exec \"$0\" \"$@\""
                    ))
                    .arg(env!("CARGO_BIN_EXE_massline"));
                sh
            }
        };
        let child = command
            .arg("serve")
            .arg("--db")
            .arg(db_path)
            .arg("--bind")
            .arg(format!("127.0.0.1:{port}"))
            .arg("--page-rate-per-minute")
            .arg("0")
            .arg("--request-timeout-s")
            .arg("300")
            .env("RUST_LOG", "warn")
            .env_remove("MASSLINE_DEMO")
            .env_remove("MASSLINE_PUBLIC_READ")
            .env_remove("MASSLINE_PAGE_RATE_PER_MINUTE")
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("the massline binary starts");
        let server = Self {
            child,
            address: format!("http://127.0.0.1:{port}"),
        };
        server.wait_until_ready().await;
        server
    }

    async fn wait_until_ready(&self) {
        let client = plain_client();
        let started = Instant::now();
        loop {
            if let Ok(r) = client
                .get(format!("{}/livez", self.address))
                .timeout(Duration::from_secs(2))
                .send()
                .await
                && r.status().is_success()
            {
                return;
            }
            assert!(
                started.elapsed() < Duration::from_secs(60),
                "the server did not answer /livez within 60 s"
            );
            tokio::time::sleep(Duration::from_millis(50)).await;
        }
    }

    /// The server's process id (`sh` replaced itself with the server).
    pub(crate) fn pid(&self) -> u32 {
        self.child.id()
    }

    /// Kill the child with SIGKILL (no chance to clean up) and wait until it is gone.
    pub(crate) fn kill(&mut self) {
        // `Child::kill` sends SIGKILL on Unix. It fails only when the child has already exited.
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

impl Drop for ChildServer {
    fn drop(&mut self) {
        self.kill();
    }
}

/// Open one connection to a database file (no migration, no change of journal mode).
pub(crate) async fn open_file(path: &Path) -> SqliteConnection {
    let options = SqliteConnectOptions::from_str(&format!("sqlite://{}", path.display()))
        .unwrap()
        .busy_timeout(Duration::from_secs(10));
    SqliteConnection::connect_with(&options)
        .await
        .expect("the database file opens")
}

/// `PRAGMA integrity_check` must answer exactly "ok" and `PRAGMA foreign_key_check` nothing.
pub(crate) async fn assert_sound(conn: &mut SqliteConnection, context: &str) {
    let integrity: Vec<String> = sqlx::query_scalar("pragma integrity_check")
        .fetch_all(&mut *conn)
        .await
        .unwrap();
    assert_eq!(integrity, ["ok"], "integrity_check {context}");
    let dangling: Vec<(String, i64)> =
        sqlx::query_as("select \"table\", rowid from pragma_foreign_key_check")
            .fetch_all(&mut *conn)
            .await
            .unwrap();
    assert!(
        dangling.is_empty(),
        "foreign_key_check {context}: {dangling:?}"
    );
}

/// Row count and SHA-256 of one table: every row in rowid order, each column through SQLite's
/// `quote()` (text quoted, blobs in hex, numbers as literals), so equal digests mean equal
/// content.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct TableDigest {
    pub(crate) rows: i64,
    pub(crate) sha256: String,
}

/// [`TableDigest`] of every table of a database (SQLite's own tables excluded), by name.
pub(crate) async fn digest_tables(conn: &mut SqliteConnection) -> BTreeMap<String, TableDigest> {
    let names: Vec<String> = sqlx::query_scalar(
        "select name from sqlite_schema where type = 'table' and name not like 'sqlite_%' order by name",
    )
    .fetch_all(&mut *conn)
    .await
    .unwrap();
    let mut out = BTreeMap::new();
    for table in names {
        let columns: Vec<String> = sqlx::query_scalar("select name from pragma_table_info(?)")
            .bind(&table)
            .fetch_all(&mut *conn)
            .await
            .unwrap();
        let row_text = columns
            .iter()
            .map(|c| format!("quote(\"{c}\")"))
            .collect::<Vec<_>>()
            .join(" || '|' || ");
        let rows: Vec<String> = sqlx::query_scalar(sqlx::AssertSqlSafe(format!(
            "select {row_text} from \"{table}\" order by rowid"
        )))
        .fetch_all(&mut *conn)
        .await
        .unwrap();
        let mut hasher = Sha256::new();
        for r in &rows {
            hasher.update(r.as_bytes());
            hasher.update(b"\n");
        }
        out.insert(
            table,
            TableDigest {
                rows: i64::try_from(rows.len()).unwrap(),
                sha256: hex::encode(hasher.finalize()),
            },
        );
    }
    out
}

/// `select count(*)` of a table through a pool.
pub(crate) async fn count(pool: &SqlitePool, table: &str) -> i64 {
    sqlx::query_scalar(sqlx::AssertSqlSafe(format!("select count(*) from {table}")))
        .fetch_one(pool)
        .await
        .unwrap()
}
