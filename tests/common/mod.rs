//! Support shared by the test crates (tests/app, tests/browser, tests/reliability), included in
//! each with `#[path = "../common/mod.rs"] mod common;`: the app started in this process
//! ([`spawn_with`], [`spawn_on`]), a [`Browser`] with its own cookies and anti-forgery token,
//! the [`Reply`] both read, accounts and tokens made directly in a catalog, the switch that
//! makes missing outside tools a failure, a client that does not follow redirects.
#![allow(dead_code, reason = "each test crate uses a part of this module")]

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::Arc;

use massline::auth::Role;
use massline::auth::clock::ManualClock;
use massline::state::AppState;
use massline::{Application, Settings};
use serde_json::Value;
use sqlx::SqlitePool;
use tempfile::TempDir;

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
    pub(crate) fn header(&self, name: impl reqwest::header::AsHeaderName) -> String {
        self.headers
            .get(name)
            .and_then(|v| v.to_str().ok())
            .unwrap_or("")
            .to_string()
    }

    /// The body as JSON; panics (showing the body) when it is not JSON.
    pub(crate) fn json(&self) -> Value {
        serde_json::from_str(&self.body).unwrap_or_else(|e| panic!("not JSON ({e}): {}", self.body))
    }

    /// Asserts an RFC 9457 problem with this status, and returns it.
    pub(crate) fn problem(&self, status: u16) -> Value {
        assert_eq!(self.status, status, "{}", self.body);
        assert_eq!(
            self.header(reqwest::header::CONTENT_TYPE),
            "application/problem+json",
            "{}",
            self.body
        );
        let p = self.json();
        assert_eq!(p["type"], "about:blank", "{p}");
        assert_eq!(p["status"], status, "{p}");
        assert!(p["title"].as_str().is_some_and(|t| !t.is_empty()), "{p}");
        assert!(p["detail"].as_str().is_some_and(|t| !t.is_empty()), "{p}");
        p
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
pub(crate) fn problem_fields(problem: &Value) -> Vec<String> {
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

/// A running server in this process with its own database; dropping it deletes the database.
pub(crate) struct TestApp {
    /// e.g. "http://127.0.0.1:41234"
    pub(crate) address: String,
    /// The app's pool, for arranging and inspecting data through `massline::catalog`.
    pub(crate) pool: SqlitePool,
    /// The database file.
    pub(crate) db_path: PathBuf,
    /// A client that does not follow redirects (tests look at them).
    pub(crate) client: reqwest::Client,
    /// The clock the app measures sessions and locks with.
    pub(crate) clock: Arc<ManualClock>,
    /// The app's shared state.
    pub(crate) state: AppState,
    /// The temporary directory holding the database (other files may go beside it).
    pub(crate) dir: TempDir,
}

/// Start the app in this process on 127.0.0.1:0, on an empty catalog in a new temporary
/// directory, with a `ManualClock` and adjusted settings.
pub(crate) async fn spawn_with(adjust: impl FnOnce(&mut Settings)) -> TestApp {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db_path = dir.path().join("catalog.sqlite");
    spawn_on(dir, db_path, adjust).await
}

/// Start the app in this process on 127.0.0.1:0 with a `ManualClock`, on a given database
/// file inside `dir`, with adjusted settings.
pub(crate) async fn spawn_on(
    dir: TempDir,
    db_path: PathBuf,
    adjust: impl FnOnce(&mut Settings),
) -> TestApp {
    let mut settings = Settings::for_tests(db_path.clone());
    adjust(&mut settings);
    let clock = Arc::new(ManualClock::starting_now());
    let app = Application::build_with_clock(settings, clock.clone())
        .await
        .expect("the app builds");
    let address = format!("http://{}", app.address());
    let pool = app.pool();
    let state = app.state();
    tokio::spawn(app.run_until_stopped());
    TestApp {
        address,
        pool,
        db_path,
        client: plain_client(),
        clock,
        state,
        dir,
    }
}

impl TestApp {
    /// GET a path and return (status, body).
    pub(crate) async fn get(&self, path: &str) -> (u16, String) {
        let response = self
            .client
            .get(format!("{}{path}", self.address))
            .send()
            .await
            .expect("the request is answered");
        let status = response.status().as_u16();
        (status, response.text().await.expect("a text body"))
    }

    /// GET a path, assert 200, return the body.
    pub(crate) async fn ok(&self, path: &str) -> String {
        let (status, body) = self.get(path).await;
        assert_eq!(status, 200, "GET {path} answered {status}:\n{body}");
        body
    }

    /// GET a path with `Authorization: Bearer <token>` (none without a token), read completely.
    pub(crate) async fn get_with_token(&self, path: &str, token: Option<&str>) -> Reply {
        let mut request = self.client.get(format!("{}{path}", self.address));
        if let Some(t) = token {
            request = request.bearer_auth(t);
        }
        let response = request.send().await.expect("the request is answered");
        Reply {
            status: response.status().as_u16(),
            headers: response.headers().clone(),
            body: response.text().await.expect("a text body"),
        }
    }

    /// Create an account with [`TEST_PASSWORD`]; returns its key.
    pub(crate) async fn create_account(&self, username: &str, role: Role) -> i64 {
        create_account(&self.pool, username, role).await
    }

    /// A new browser with no cookies.
    pub(crate) fn browser(&self) -> Browser {
        Browser::new(&self.address)
    }

    /// Create an account of a role (named after it, e.g. "test-admin") and log a browser in.
    pub(crate) async fn login_as(&self, role: Role) -> Browser {
        let name = format!("test-{role}");
        if massline::catalog::accounts::find_by_username(&self.pool, &name)
            .await
            .unwrap()
            .is_none()
        {
            self.create_account(&name, role).await;
        }
        let mut b = self.browser();
        let r = b.login(&name, TEST_PASSWORD).await;
        assert_eq!(r.status, 303, "login of {name} failed: {}", r.body);
        b
    }

    /// Make an API token for an account directly in the database; returns (token, key).
    pub(crate) async fn make_token(&self, account_id: i64, scopes: &str) -> (String, i64) {
        make_token(&self.pool, account_id, scopes).await
    }
}

/// A client with its own cookie jar and the anti-forgery token of its last page.
pub(crate) struct Browser {
    base: String,
    client: reqwest::Client,
    /// Cookies by name.
    pub(crate) cookies: BTreeMap<String, String>,
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
    /// A new browser with no cookies, for the server at `base` (e.g. "http://127.0.0.1:41234").
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

    /// Reads the answer completely, keeps its cookies (a `Max-Age=0` or empty one removes the
    /// cookie) and the anti-forgery token of its page.
    async fn finish(&mut self, response: reqwest::Response) -> Reply {
        let status = response.status().as_u16();
        let headers = response.headers().clone();
        let body = response.text().await.expect("a text body");
        let reply = Reply {
            status,
            headers,
            body,
        };
        for c in reply.set_cookies() {
            let first = c.split(';').next().unwrap_or("");
            if let Some((name, value)) = first.split_once('=') {
                if c.contains("Max-Age=0") || value.is_empty() {
                    self.cookies.remove(name);
                } else {
                    self.cookies.insert(name.to_string(), value.to_string());
                }
            }
        }
        if let Some(token) = hidden_value(&reply.body, "csrf") {
            self.csrf = token;
        }
        reply
    }

    /// GET with this browser's cookies and extra headers; `Err` when the connection fails.
    pub(crate) async fn try_get_with(
        &mut self,
        path: &str,
        headers: &[(&str, &str)],
    ) -> reqwest::Result<Reply> {
        let mut request = self.client.get(format!("{}{path}", self.base));
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        for (k, v) in headers {
            request = request.header(*k, *v);
        }
        let response = request.send().await?;
        Ok(self.finish(response).await)
    }

    /// GET with this browser's cookies and extra headers.
    pub(crate) async fn get_with(&mut self, path: &str, headers: &[(&str, &str)]) -> Reply {
        self.try_get_with(path, headers)
            .await
            .expect("the request is answered")
    }

    /// GET with this browser's cookies; `Err` when the connection fails.
    pub(crate) async fn try_get(&mut self, path: &str) -> reqwest::Result<Reply> {
        self.try_get_with(path, &[]).await
    }

    /// GET with this browser's cookies.
    pub(crate) async fn get(&mut self, path: &str) -> Reply {
        self.get_with(path, &[]).await
    }

    /// POST a form exactly as given (no token added), with extra headers; `Err` when the
    /// connection fails.
    pub(crate) async fn try_post_raw(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
        headers: &[(&str, &str)],
    ) -> reqwest::Result<Reply> {
        let mut request = self
            .client
            .post(format!("{}{path}", self.base))
            .form(fields);
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        for (k, v) in headers {
            request = request.header(*k, *v);
        }
        let response = request.send().await?;
        Ok(self.finish(response).await)
    }

    /// POST a form exactly as given (no token added), with extra headers.
    pub(crate) async fn post_raw(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
        headers: &[(&str, &str)],
    ) -> Reply {
        self.try_post_raw(path, fields, headers)
            .await
            .expect("the request is answered")
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
        self.try_post_raw(path, &all, &[]).await
    }

    /// DELETE with this browser's cookies and its anti-forgery token in the `X-CSRF-Token`
    /// header (as a page's script would send it to a JSON endpoint).
    pub(crate) async fn delete(&mut self, path: &str) -> Reply {
        let mut request = self
            .client
            .delete(format!("{}{path}", self.base))
            .header("x-csrf-token", self.csrf.clone());
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        let response = request.send().await.expect("the request is answered");
        self.finish(response).await
    }

    /// POST a form with this browser's anti-forgery token added.
    pub(crate) async fn post(&mut self, path: &str, fields: &[(&str, &str)]) -> Reply {
        self.try_post(path, fields)
            .await
            .expect("the request is answered")
    }

    /// POST a `multipart/form-data` form (the anti-forgery token first, then `fields`, then the
    /// file `file_field` named `file_name` with `content`), as a browser sends a file input;
    /// `Err` when the connection fails.
    pub(crate) async fn try_post_file(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
        file_field: &str,
        file_name: &str,
        content: &str,
    ) -> reqwest::Result<Reply> {
        // A random boundary cannot occur in the content by accident.
        let boundary = format!("----massline-test-{:016x}", rand::random::<u64>());
        let mut body = String::with_capacity(content.len() + 512);
        let csrf = self.csrf.clone();
        for (name, value) in std::iter::once(&("csrf", csrf.as_str())).chain(fields) {
            body.push_str(&format!(
                "--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"\r\n\r\n{value}\r\n"
            ));
        }
        body.push_str(&format!(
            "--{boundary}\r\nContent-Disposition: form-data; name=\"{file_field}\"; filename=\"{file_name}\"\r\nContent-Type: text/csv\r\n\r\n"
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

    /// [`Browser::try_post_file`], panicking when the connection fails.
    pub(crate) async fn post_file(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
        file_field: &str,
        file_name: &str,
        content: &str,
    ) -> Reply {
        self.try_post_file(path, fields, file_field, file_name, content)
            .await
            .expect("the request is answered")
    }

    /// Open the login page and send the form; returns the answer to the POST.
    pub(crate) async fn login(&mut self, username: &str, password: &str) -> Reply {
        self.login_with(username, password, &[]).await
    }

    /// [`Browser::login`] with extra headers on the POST.
    pub(crate) async fn login_with(
        &mut self,
        username: &str,
        password: &str,
        headers: &[(&str, &str)],
    ) -> Reply {
        let page = self.get("/login").await;
        assert_eq!(page.status, 200, "{}", page.body);
        let csrf = self.csrf.clone();
        let reply = self
            .post_raw(
                "/login",
                &[
                    ("csrf", csrf.as_str()),
                    ("username", username),
                    ("password", password),
                    ("next", "/"),
                ],
                headers,
            )
            .await;
        if reply.status == 303 {
            // Pick up the new session's token from a page with a form.
            let account = self.get("/account").await;
            assert_eq!(account.status, 200, "{}", account.body);
        }
        reply
    }

    /// Log in with [`TEST_PASSWORD`] through the login page; panics unless it succeeds.
    pub(crate) async fn log_in(&mut self, username: &str) {
        let reply = self.login(username, TEST_PASSWORD).await;
        assert_eq!(
            reply.status, 303,
            "login of {username} failed: {}",
            reply.body
        );
    }

    /// The session cookie's value, if any.
    pub(crate) fn session_id(&self) -> Option<String> {
        self.cookies.get("ml_session").cloned()
    }
}
