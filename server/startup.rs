//! Building and running the server.
//!
//! [`Application::build`] opens (and migrates) the database, loads the demo catalog when asked,
//! binds the listener *first* (so port 0 works and the real port is known), and returns a value
//! whose [`Application::run_until_stopped`] serves requests. Tests start the real app this way.

use std::net::SocketAddr;
use std::sync::Arc;

use anyhow::Context;
use sqlx::SqlitePool;
use tokio::net::TcpListener;

use crate::catalog;
use crate::config::Settings;
use crate::web;

/// State shared by every handler: cheap to clone.
#[derive(Clone)]
pub struct AppState {
    /// The catalog database.
    pub pool: SqlitePool,
    /// Validated settings.
    pub settings: Arc<Settings>,
}

/// A built, bound, not-yet-running server.
pub struct Application {
    listener: TcpListener,
    address: SocketAddr,
    state: AppState,
}

impl Application {
    /// Open the database, apply migrations, load the demo when asked, and bind the address.
    ///
    /// # Errors
    /// When the database cannot be opened or migrated, the demo cannot be loaded, or the
    /// address cannot be bound; each with a sentence saying which.
    pub async fn build(settings: Settings) -> anyhow::Result<Self> {
        let pool = catalog::connect(&settings.db_path).await?;
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
                pool,
                settings: Arc::new(settings),
            },
        })
    }

    /// The address actually bound (with the real port when 0 was asked for).
    pub fn address(&self) -> SocketAddr {
        self.address
    }

    /// The database pool (tests use it to arrange data through `catalog`).
    pub fn pool(&self) -> SqlitePool {
        self.state.pool.clone()
    }

    /// Serve until the future `shutdown` completes (e.g. Ctrl-C), then finish open requests.
    ///
    /// # Errors
    /// When the server fails while running.
    pub async fn run_until(
        self,
        shutdown: impl Future<Output = ()> + Send + 'static,
    ) -> anyhow::Result<()> {
        let router = web::router(self.state);
        axum::serve(self.listener, router)
            .with_graceful_shutdown(shutdown)
            .await
            .context("the server stopped with an error")
    }

    /// Serve forever (until the task is dropped).
    ///
    /// # Errors
    /// When the server fails while running.
    pub async fn run_until_stopped(self) -> anyhow::Result<()> {
        self.run_until(std::future::pending()).await
    }
}
