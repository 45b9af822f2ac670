//! Starting the real app for a test, and small request helpers.
//!
//! `spawn_app` and `spawn_demo_app` start the server with public read access, so tests of the
//! catalog pages need no login; `spawn_private_app` and `spawn_private_demo_app` start it as
//! deployed by default (nothing but the login page without a session). Every app runs on a
//! `ManualClock`, which tests move forward to reach session limits and lock ends.
//! [`Browser`] is a client with its own cookies that logs in and sends forms with the
//! anti-forgery token.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::Arc;

use massline::auth::Role;
use massline::auth::clock::ManualClock;
use massline::state::AppState;
use massline::{Application, Settings};
use sqlx::SqlitePool;
use tempfile::TempDir;

pub(crate) use crate::common::TEST_PASSWORD;
use crate::common::plain_client;

/// A running server with its own database; dropping it deletes the database.
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
    _dir: TempDir,
}

/// Start the app on an empty catalog, readable without login.
pub(crate) async fn spawn_app() -> TestApp {
    spawn_with(|s| s.public_read = true).await
}

/// Start the app with the invented demo catalog loaded, readable without login.
pub(crate) async fn spawn_demo_app() -> TestApp {
    spawn_with(|s| {
        s.demo = true;
        s.public_read = true;
    })
    .await
}

/// Start the app on an empty catalog as deployed by default: nothing without a session.
pub(crate) async fn spawn_private_app() -> TestApp {
    spawn_with(|_| {}).await
}

/// Start the app with adjusted settings.
pub(crate) async fn spawn_with(adjust: impl FnOnce(&mut Settings)) -> TestApp {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db_path = dir.path().join("catalog.sqlite");
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
        _dir: dir,
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

    /// Create an account with [`TEST_PASSWORD`]; returns its key.
    pub(crate) async fn create_account(&self, username: &str, role: Role) -> i64 {
        crate::common::create_account(&self.pool, username, role).await
    }

    /// A new browser with no cookies.
    pub(crate) fn browser(&self) -> Browser {
        Browser {
            base: self.address.clone(),
            client: plain_client(),
            cookies: BTreeMap::new(),
            csrf: String::new(),
        }
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
        crate::common::make_token(&self.pool, account_id, scopes).await
    }
}

pub(crate) use crate::common::Reply;

/// A client with its own cookie jar and the anti-forgery token of its last page.
pub(crate) struct Browser {
    base: String,
    client: reqwest::Client,
    /// Cookies by name.
    pub(crate) cookies: BTreeMap<String, String>,
    /// The anti-forgery token of the last page that had a form ("" before).
    pub(crate) csrf: String,
}

/// The value of the first hidden `csrf` field of a page.
pub(crate) fn csrf_in(body: &str) -> Option<String> {
    let marker = "name=\"csrf\" value=\"";
    let start = body.find(marker)? + marker.len();
    let end = body[start..].find('"')? + start;
    Some(body[start..end].to_string())
}

impl Browser {
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
        if let Some(token) = csrf_in(&reply.body) {
            self.csrf = token;
        }
        reply
    }

    /// GET with this browser's cookies and extra headers.
    pub(crate) async fn get_with(&mut self, path: &str, headers: &[(&str, &str)]) -> Reply {
        let mut request = self.client.get(format!("{}{path}", self.base));
        if !self.cookies.is_empty() {
            request = request.header("cookie", self.cookie_header());
        }
        for (k, v) in headers {
            request = request.header(*k, *v);
        }
        let response = request.send().await.expect("the request is answered");
        self.finish(response).await
    }

    /// GET with this browser's cookies.
    pub(crate) async fn get(&mut self, path: &str) -> Reply {
        self.get_with(path, &[]).await
    }

    /// POST a form exactly as given (no token added), with extra headers.
    pub(crate) async fn post_raw(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
        headers: &[(&str, &str)],
    ) -> Reply {
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
        let response = request.send().await.expect("the request is answered");
        self.finish(response).await
    }

    /// POST a `multipart/form-data` form (the anti-forgery token first, then `fields`, then the
    /// file `file_field` named `file_name` with `content`), as a browser sends a file input.
    pub(crate) async fn post_file(
        &mut self,
        path: &str,
        fields: &[(&str, &str)],
        file_field: &str,
        file_name: &str,
        content: &str,
    ) -> Reply {
        let boundary = "----massline-test-boundary-7d1f";
        let mut body = String::new();
        let csrf = self.csrf.clone();
        for (name, value) in std::iter::once(&("csrf", csrf.as_str())).chain(fields) {
            body.push_str(&format!(
                "--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"\r\n\r\n{value}\r\n"
            ));
        }
        body.push_str(&format!(
            "--{boundary}\r\nContent-Disposition: form-data; name=\"{file_field}\"; filename=\"{file_name}\"\r\nContent-Type: text/csv\r\n\r\n{content}\r\n--{boundary}--\r\n"
        ));
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
        let response = request.send().await.expect("the request is answered");
        self.finish(response).await
    }

    /// POST a form with this browser's anti-forgery token added.
    pub(crate) async fn post(&mut self, path: &str, fields: &[(&str, &str)]) -> Reply {
        let csrf = self.csrf.clone();
        let mut all = vec![("csrf", csrf.as_str())];
        all.extend_from_slice(fields);
        self.post_raw(path, &all, &[]).await
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

    /// The session cookie's value, if any.
    pub(crate) fn session_id(&self) -> Option<String> {
        self.cookies.get("ml_session").cloned()
    }
}

/// Count non-overlapping occurrences of `needle` in `haystack`.
pub(crate) fn count(haystack: &str, needle: &str) -> usize {
    haystack.matches(needle).count()
}
