//! Starting the real app for a test, and small request helpers.
//!
//! `spawn_app` and `spawn_demo_app` start the server with public read access, so tests of the
//! catalog pages need no login; `spawn_private_app` starts it as deployed by default (nothing
//! but the login page without a session). Every app runs on a
//! `ManualClock`, which tests move forward to reach session limits and lock ends.
//! [`Browser`] is a client with its own cookies that logs in and sends forms with the
//! anti-forgery token. The app, the browser and the reply are shared with the other test
//! crates (tests/common).

pub(crate) use crate::common::{Browser, Reply, TEST_PASSWORD, TestApp, spawn_with};

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

/// Count non-overlapping occurrences of `needle` in `haystack`.
pub(crate) fn count(haystack: &str, needle: &str) -> usize {
    haystack.matches(needle).count()
}
