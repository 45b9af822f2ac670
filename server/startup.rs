//! Building and running the server.
//!
//! [`Application::build`] opens (and migrates) the database, loads the demo catalog when asked,
//! binds the listener *first* (so port 0 works and the real port is known), and returns a value
//! whose [`Application::run_until_stopped`] serves requests. Tests start the real app this way.
//!
//! While it runs, a background task deletes expired sessions and old failed-login rows every
//! [`CLEANUP_EVERY`]; expiry itself is checked on every request, so the task only keeps the
//! tables small.

use std::net::SocketAddr;
use std::sync::Arc;
use std::time::Duration;

use anyhow::Context;
use axum::Router;
use sqlx::SqlitePool;
use tokio::net::TcpListener;

use crate::auth::clock::{Clock, SystemClock};
use crate::auth::password::Passwords;
use crate::auth::{self, Role};
use crate::catalog;
use crate::config::Settings;
use crate::state::AppState;
use crate::{api, router, web};

/// How often expired sessions and old failed-login rows are deleted.
pub const CLEANUP_EVERY: Duration = Duration::from_secs(300);

/// An account that `--demo` created, with its password (shown once).
#[derive(Debug, Clone)]
pub struct DemoAccount {
    /// Login name.
    pub username: String,
    /// Role.
    pub role: Role,
    /// The generated password.
    pub password: String,
}

/// The accounts `--demo` creates when missing.
pub const DEMO_ACCOUNTS: [(&str, Role); 3] = [
    ("demo-member", Role::Member),
    ("demo-reviewer", Role::Reviewer),
    ("demo-admin", Role::Admin),
];

/// A built, bound, not-yet-running server.
pub struct Application {
    listener: TcpListener,
    address: SocketAddr,
    state: AppState,
    demo_accounts: Vec<DemoAccount>,
}

impl Application {
    /// Open the database, apply migrations, load the demo when asked, and bind the address.
    ///
    /// # Errors
    /// When the database cannot be opened or migrated, the demo cannot be loaded, or the
    /// address cannot be bound; each with a sentence saying which.
    pub async fn build(settings: Settings) -> anyhow::Result<Self> {
        Self::build_with_clock(settings, Arc::new(SystemClock)).await
    }

    /// [`Application::build`] with a given clock (tests pass a `ManualClock`).
    ///
    /// # Errors
    /// As [`Application::build`].
    pub async fn build_with_clock(
        settings: Settings,
        clock: Arc<dyn Clock>,
    ) -> anyhow::Result<Self> {
        let limits = catalog::Limits {
            busy_timeout: settings.busy_timeout(),
            max_pages: settings.max_db_pages,
        };
        let pool = catalog::connect_with_limits(&settings.db_path, limits).await?;
        let passwords = Passwords::new().await?;
        let mut demo_accounts = Vec::new();
        if settings.demo {
            match catalog::demo::load_demo(&pool)
                .await
                .context("could not load the demo catalog")?
            {
                catalog::demo::DemoLoad::Loaded {
                    galaxies,
                    measurements,
                } => tracing::info!(galaxies, measurements, "loaded the invented demo catalog"),
                catalog::demo::DemoLoad::Skipped { existing } => tracing::info!(
                    existing,
                    "the catalog already has galaxies; the demo catalog was not loaded"
                ),
            }
            for (username, role) in DEMO_ACCOUNTS {
                if catalog::accounts::find_by_username(&pool, username)
                    .await?
                    .is_some()
                {
                    continue;
                }
                let password = auth::accounts::add_user(&pool, username, role, None)
                    .await
                    .context("could not create the demo accounts")?
                    .context("a generated password was expected")?;
                demo_accounts.push(DemoAccount {
                    username: username.to_string(),
                    role,
                    password,
                });
            }
        }
        let listener = TcpListener::bind(settings.bind).await.with_context(|| {
            format!(
                "could not listen on {} (--bind, MASSLINE_BIND)",
                settings.bind
            )
        })?;
        let address = listener.local_addr()?;
        Ok(Self {
            listener,
            address,
            state: AppState {
                write_check: catalog::health::WriteCheck::new(pool.clone(), &settings.db_path),
                pool,
                settings: Arc::new(settings),
                clock,
                passwords,
                fits: crate::relations::FitCache::default(),
                runs: crate::relations::RunRegistry::default(),
                analyst: crate::relations::version_analysis::Analyst::default(),
                form_key: crate::auth::secret::FormKey::random(),
            },
            demo_accounts,
        })
    }

    /// The demo accounts this start created, with their passwords (empty when none was made:
    /// no `--demo`, or they existed already). `massline serve` prints them once.
    pub fn demo_accounts(&self) -> &[DemoAccount] {
        &self.demo_accounts
    }

    /// The address actually bound (with the real port when 0 was asked for).
    pub fn address(&self) -> SocketAddr {
        self.address
    }

    /// The database pool (tests use it to arrange data through `catalog`).
    pub fn pool(&self) -> SqlitePool {
        self.state.pool.clone()
    }

    /// The shared state (tests use it to run the clean-up at a chosen moment).
    pub fn state(&self) -> AppState {
        self.state.clone()
    }

    /// Serve until the future `shutdown` completes (e.g. Ctrl-C), then finish open requests.
    ///
    /// # Errors
    /// When the server fails while running.
    pub async fn run_until(
        self,
        shutdown: impl Future<Output = ()> + Send + 'static,
    ) -> anyhow::Result<()> {
        let cleanup = tokio::spawn(clean_up_periodically(self.state.clone()));
        let analysis = tokio::spawn(crate::relations::version_analysis::run(
            self.state.catalog(),
            self.state.analyst.clone(),
        ));
        let secure = self.state.settings.secure_cookies;
        let router = app(self.state);
        let served = crate::router::serve(self.listener, router, secure, shutdown)
            .await
            .context("the server stopped with an error");
        cleanup.abort();
        analysis.abort();
        served
    }

    /// Serve forever (until the task is dropped).
    ///
    /// # Errors
    /// When the server fails while running.
    pub async fn run_until_stopped(self) -> anyhow::Result<()> {
        self.run_until(std::future::pending()).await
    }
}

/// The whole service: the pages and the JSON API behind the router's layers.
pub fn app(state: AppState) -> Router {
    let doors = vec![web::door(), api::door()];
    router::build(state, doors)
}

/// Every route of the service with the access it asks for, in the order the doors add them.
pub fn route_table() -> Vec<router::RouteEntry> {
    router::route_table(&[web::door(), api::door()])
}

/// Delete expired sessions and old failed-login rows once.
///
/// # Errors
/// When the database fails.
pub async fn clean_up_once(state: &AppState) -> sqlx::Result<u64> {
    catalog::accounts::delete_expired(
        &state.pool,
        state.clock.now_unix(),
        auth::IDLE_LIMIT_S,
        auth::ADMIN_IDLE_LIMIT_S,
        auth::ABSOLUTE_LIMIT_S,
        auth::FAILURE_POLICY.window_s,
    )
    .await
}

async fn clean_up_periodically(state: AppState) {
    let mut every = tokio::time::interval(CLEANUP_EVERY);
    loop {
        every.tick().await;
        match clean_up_once(&state).await {
            Ok(n) if n > 0 => tracing::info!(sessions = n, "deleted expired sessions"),
            Ok(_) => {}
            Err(e) => tracing::warn!(error = %e, "could not delete expired sessions"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::auth::Access;
    use axum::http::Method;

    #[test]
    fn every_route_is_listed_once_with_its_access() {
        let table = route_table();
        let mut seen = std::collections::BTreeSet::new();
        for r in &table {
            assert!(seen.insert((r.method.to_string(), r.path)), "{r:?} twice");
        }
        let access = |m: Method, p: &str| {
            table
                .iter()
                .find(|r| r.method == m && r.path == p)
                .map(|r| r.access)
        };
        assert_eq!(access(Method::GET, "/login"), Some(Access::Public));
        assert_eq!(access(Method::GET, "/admin/audit"), Some(Access::Admin));
        assert_eq!(access(Method::GET, "/galaxies"), Some(Access::Read));
        assert_eq!(access(Method::GET, "/api/v1/relations"), Some(Access::Read));
    }
}
