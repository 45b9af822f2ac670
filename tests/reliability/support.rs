//! What the reliability tests share: the app in this process (with adjusted settings) or as a
//! child process, a browser with its own cookies and anti-forgery token, and checks of a
//! database file (integrity, foreign keys, a digest of every table).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::str::FromStr;
use std::sync::Arc;
use std::time::{Duration, Instant};

use massline::auth::clock::ManualClock;
use massline::{Application, Settings};
use sha2::{Digest, Sha256};
use sqlx::sqlite::SqliteConnectOptions;
use sqlx::{Connection, SqliteConnection, SqlitePool};
use tempfile::TempDir;

pub(crate) use crate::common::{TEST_PASSWORD, create_account, external_required, plain_client};

/// A running server in this process with its own database; dropping it deletes the database.
pub(crate) struct TestApp {
    /// e.g. "http://127.0.0.1:41234"
    pub(crate) address: String,
    /// The app's pool.
    pub(crate) pool: SqlitePool,
    /// The database file.
    pub(crate) db_path: PathBuf,
    /// The temporary directory holding the database (other files may go beside it).
    pub(crate) dir: TempDir,
}

/// Start the app in this process on an empty catalog with adjusted settings.
pub(crate) async fn spawn_with(adjust: impl FnOnce(&mut Settings)) -> TestApp {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db_path = dir.path().join("catalog.sqlite");
    spawn_on(dir, db_path, adjust).await
}

/// Start the app in this process on a given database file inside `dir`.
pub(crate) async fn spawn_on(
    dir: TempDir,
    db_path: PathBuf,
    adjust: impl FnOnce(&mut Settings),
) -> TestApp {
    let mut settings = Settings::for_tests(db_path.clone());
    adjust(&mut settings);
    let clock = Arc::new(ManualClock::starting_now());
    let app = Application::build_with_clock(settings, clock)
        .await
        .expect("the app builds");
    let address = format!("http://{}", app.address());
    let pool = app.pool();
    tokio::spawn(app.run_until_stopped());
    TestApp {
        address,
        pool,
        db_path,
        dir,
    }
}

/// Make an API token for an account directly in the database; returns the token.
pub(crate) async fn make_token(pool: &SqlitePool, account_id: i64, scopes: &str) -> String {
    crate::common::make_token(pool, account_id, scopes).await.0
}

pub(crate) use crate::common::Reply;

/// A client with its own cookie jar and the anti-forgery token of its last page.
pub(crate) struct Browser {
    base: String,
    client: reqwest::Client,
    cookies: BTreeMap<String, String>,
    /// The anti-forgery token of the last page that had a form ("" before).
    pub(crate) csrf: String,
}

/// The value of the first hidden input called `name` on a page.
pub(crate) fn hidden_value(body: &str, name: &str) -> Option<String> {
    let marker = format!("name=\"{name}\" value=\"");
    let start = body.find(&marker)? + marker.len();
    let end = body[start..].find('"')? + start;
    Some(body[start..end].to_string())
}

impl Browser {
    /// A new browser with no cookies.
    pub(crate) fn new(base: &str) -> Self {
        Self {
            base: base.to_owned(),
            client: plain_client(),
            cookies: BTreeMap::new(),
            csrf: String::new(),
        }
    }

    fn cookie_header(&self) -> String {
        self.cookies
            .iter()
            .map(|(k, v)| format!("{k}={v}"))
            .collect::<Vec<_>>()
            .join("; ")
    }

    async fn finish(&mut self, response: reqwest::Response) -> Reply {
        let status = response.status().as_u16();
        let headers = response.headers().clone();
        let body = response.text().await.expect("a text body");
        for c in headers
            .get_all("set-cookie")
            .iter()
            .filter_map(|v| v.to_str().ok())
        {
            let first = c.split(';').next().unwrap_or("");
            if let Some((name, value)) = first.split_once('=') {
                if c.contains("Max-Age=0") || value.is_empty() {
                    self.cookies.remove(name);
                } else {
                    self.cookies.insert(name.to_string(), value.to_string());
                }
            }
        }
        if let Some(token) = hidden_value(&body, "csrf") {
            self.csrf = token;
        }
        Reply {
            status,
            headers,
            body,
        }
    }

    /// GET with this browser's cookies; `Err` when the connection fails.
    pub(crate) async fn try_get(&mut self, path: &str) -> reqwest::Result<Reply> {
        let mut request = self.client.get(format!("{}{path}", self.base));
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        let response = request.send().await?;
        Ok(self.finish(response).await)
    }

    /// GET with this browser's cookies.
    pub(crate) async fn get(&mut self, path: &str) -> Reply {
        self.try_get(path).await.expect("the request is answered")
    }

    /// POST a form with this browser's anti-forgery token added; `Err` when the connection
    /// fails (the server was killed).
    pub(crate) async fn try_post(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
    ) -> reqwest::Result<Reply> {
        let csrf = self.csrf.clone();
        let mut all = vec![("csrf", csrf.as_str())];
        all.extend_from_slice(fields);
        let mut request = self.client.post(format!("{}{path}", self.base)).form(&all);
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        let response = request.send().await?;
        Ok(self.finish(response).await)
    }

    /// POST a multipart form: this browser's anti-forgery token as the part `csrf`, then one
    /// file part; `Err` when the connection fails.
    pub(crate) async fn try_post_file(
        &mut self,
        path: &str,
        field: &str,
        file_name: &str,
        content: &str,
    ) -> reqwest::Result<Reply> {
        let boundary = format!("----massline-test-{:016x}", rand::random::<u64>());
        let mut body = String::with_capacity(content.len() + 512);
        body.push_str(&format!(
            "--{boundary}\r\nContent-Disposition: form-data; name=\"csrf\"\r\n\r\n{}\r\n",
            self.csrf
        ));
        body.push_str(&format!(
            "--{boundary}\r\nContent-Disposition: form-data; name=\"{field}\"; filename=\"{file_name}\"\r\nContent-Type: text/csv\r\n\r\n"
        ));
        body.push_str(content);
        body.push_str(&format!("\r\n--{boundary}--\r\n"));
        let mut request = self
            .client
            .post(format!("{}{path}", self.base))
            .header(
                "content-type",
                format!("multipart/form-data; boundary={boundary}"),
            )
            .body(body);
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        let response = request.send().await?;
        Ok(self.finish(response).await)
    }

    /// POST a form with this browser's anti-forgery token added.
    pub(crate) async fn post(&mut self, path: &str, fields: &[(&str, &str)]) -> Reply {
        self.try_post(path, fields)
            .await
            .expect("the request is answered")
    }

    /// Log in through the login page; panics unless it succeeds.
    pub(crate) async fn log_in(&mut self, username: &str) {
        let page = self.get("/login").await;
        assert_eq!(page.status, 200, "{}", page.body);
        let reply = self
            .post(
                "/login",
                &[
                    ("username", username),
                    ("password", TEST_PASSWORD),
                    ("next", "/"),
                ],
            )
            .await;
        assert_eq!(
            reply.status, 303,
            "login of {username} failed: {}",
            reply.body
        );
        // Pick up the new session's token from a page with a form.
        let account = self.get("/account").await;
        assert_eq!(account.status, 200, "{}", account.body);
    }
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
    /// Start `massline serve --db DB` on a free loopback port and wait until `/healthz`
    /// answers.
    pub(crate) async fn start(db_path: &Path) -> Self {
        let port = free_port();
        let child = Command::new(env!("CARGO_BIN_EXE_massline"))
            .arg("serve")
            .arg("--db")
            .arg(db_path)
            .arg("--bind")
            .arg(format!("127.0.0.1:{port}"))
            .env("RUST_LOG", "warn")
            .env_remove("MASSLINE_DEMO")
            .env_remove("MASSLINE_PUBLIC_READ")
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
                .get(format!("{}/healthz", self.address))
                .timeout(Duration::from_secs(2))
                .send()
                .await
                && r.status().is_success()
            {
                return;
            }
            assert!(
                started.elapsed() < Duration::from_secs(60),
                "the server did not answer /healthz within 60 s"
            );
            tokio::time::sleep(Duration::from_millis(50)).await;
        }
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
