//! Starting the real app for a test, and small request helpers.

use std::path::PathBuf;

use massline::{Application, Settings};
use sqlx::SqlitePool;
use tempfile::TempDir;

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
    _dir: TempDir,
}

/// Start the app on an empty catalog.
pub(crate) async fn spawn_app() -> TestApp {
    spawn_with(|_| {}).await
}

/// Start the app with the invented demo catalog loaded.
pub(crate) async fn spawn_demo_app() -> TestApp {
    spawn_with(|s| s.demo = true).await
}

/// Start the app with adjusted settings.
pub(crate) async fn spawn_with(adjust: impl FnOnce(&mut Settings)) -> TestApp {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db_path = dir.path().join("catalog.sqlite");
    let mut settings = Settings::for_tests(db_path.clone());
    adjust(&mut settings);
    let app = Application::build(settings).await.expect("the app builds");
    let address = format!("http://{}", app.address());
    let pool = app.pool();
    tokio::spawn(app.run_until_stopped());
    TestApp {
        address,
        pool,
        db_path,
        client: reqwest::Client::builder()
            .redirect(reqwest::redirect::Policy::none())
            .build()
            .expect("a client"),
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
}

/// Count non-overlapping occurrences of `needle` in `haystack`.
pub(crate) fn count(haystack: &str, needle: &str) -> usize {
    haystack.matches(needle).count()
}
