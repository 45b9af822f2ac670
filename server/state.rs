//! What every handler shares: [`AppState`].

use std::sync::Arc;

use sqlx::SqlitePool;

use crate::auth::clock::Clock;
use crate::auth::password::Passwords;
use crate::auth::secret::FormKey;
use crate::catalog::health::WriteCheck;
use crate::config::Settings;
use crate::relations::version_analysis::Analyst;
use crate::relations::{Catalog, FitCache, RunRegistry};

/// State shared by every handler: cheap to clone.
#[derive(Clone)]
pub struct AppState {
    /// The catalog database.
    pub pool: SqlitePool,
    /// Validated settings.
    pub settings: Arc<Settings>,
    /// The clock session limits and login locks are measured with.
    pub clock: Arc<dyn Clock>,
    /// Password hashing, two at a time, off the async runtime.
    pub passwords: Passwords,
    /// Fits of the scaling relations, keyed by catalog version (see `relations`).
    pub fits: FitCache,
    /// Bootstrap and posterior runs in the background (see `relations`).
    pub runs: RunRegistry,
    /// The background analysis of each catalog version (`relations::version_analysis`).
    pub analyst: Analyst,
    /// Whether the database can take a write, probed at most once a second (the health check).
    pub write_check: WriteCheck,
    /// The key the login form's anti-forgery token is made with, new at every start.
    pub form_key: FormKey,
}

impl AppState {
    /// The catalog and its fits, for the domain's computations.
    pub fn catalog(&self) -> Catalog {
        Catalog {
            pool: self.pool.clone(),
            fits: self.fits.clone(),
            soi_threshold: self.settings.soi_threshold,
            pinned: None,
        }
    }

    /// The catalog at the version a request asks for (`?version=N`, `?release=NAME`, or the
    /// current one), with the version resolved.
    ///
    /// # Errors
    /// A version not made yet or from before the history, an unknown release, or a database
    /// failure (`catalog::history::VersionError`).
    pub async fn catalog_at(
        &self,
        ask: &crate::catalog::history::VersionAsk,
    ) -> Result<(Catalog, crate::catalog::history::Pinned), crate::catalog::history::VersionError>
    {
        let pinned = crate::catalog::history::resolve(&self.pool, ask).await?;
        let catalog = self.catalog().at(pinned.asked.then_some(pinned.version));
        Ok((catalog, pinned))
    }
}
