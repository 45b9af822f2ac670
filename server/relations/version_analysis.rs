//! The analysis of each catalog version, computed once in the background.
//!
//! When the catalog version changes, one job fits every relation with the defaults (the
//! structural estimator, the whole sample, the conventional pivots), places every pending
//! submission against the new fits (storing its |z| for the review queue,
//! `catalog::review_scores`), and computes the influence of every object of the samples above
//! `fit::influence::EXACT_MAX_N` objects. Everything goes into the shared
//! [`FitCache`](super::FitCache), so pages read the results; a page that asks for a result
//! still being computed joins the job's computation for a moment and otherwise answers at once
//! with what it has, saying "computing". A newer version supersedes the job: it stops between
//! steps and the next one starts.
//!
//! The job also scores submissions that arrive between versions, on its next round.

use std::sync::{Arc, Mutex, PoisonError};
use std::time::{Duration, Instant};

use super::{Catalog, Relation, SampleFilter, assess};
use crate::catalog::{history, relation_rows};
use crate::fit::{Method, influence};

/// How often the job looks for a new catalog version or new submissions: a one-row read.
const POLL_EVERY: Duration = Duration::from_millis(500);

/// What the background analysis has done and is doing.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct AnalysisStatus {
    /// The newest catalog version analysed completely, and how long that took.
    pub done: Option<(i64, Duration)>,
    /// The version being analysed now, if any.
    pub working_on: Option<i64>,
}

/// The status of the background analysis, shared by the job and the pages (cheap to clone).
#[derive(Debug, Clone, Default)]
pub struct Analyst {
    status: Arc<Mutex<AnalysisStatus>>,
}

impl Analyst {
    /// What the analysis has done and is doing.
    pub fn status(&self) -> AnalysisStatus {
        *self.status.lock().unwrap_or_else(PoisonError::into_inner)
    }

    fn set(&self, change: impl FnOnce(&mut AnalysisStatus)) {
        change(&mut self.status.lock().unwrap_or_else(PoisonError::into_inner));
    }

    /// Whether `version` has been analysed completely.
    pub fn is_done(&self, version: i64) -> bool {
        self.status().done.is_some_and(|(v, _)| v >= version)
    }
}

/// Why an analysis stopped before its end.
enum Stopped {
    /// A newer catalog version arrived; its own analysis follows.
    Superseded,
    /// The catalog could not be read or a computation failed.
    Failed(anyhow::Error),
}

impl<E: Into<anyhow::Error>> From<E> for Stopped {
    fn from(e: E) -> Self {
        Stopped::Failed(e.into())
    }
}

/// Runs the analysis job until the task is dropped: a new catalog version gets its full
/// analysis, new pending submissions between versions get scored.
pub async fn run(catalog: Catalog, analyst: Analyst) {
    let mut every = tokio::time::interval(POLL_EVERY);
    every.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    loop {
        every.tick().await;
        let version = match history::current_version(&catalog.pool).await {
            Ok(v) => v,
            Err(e) => {
                tracing::warn!(error = %e, "the analysis could not read the catalog version");
                continue;
            }
        };
        if analyst.is_done(version) {
            if let Err(e) = assess::score_pending(&catalog, None).await {
                tracing::warn!(error = %e, "could not score the new pending submissions");
            }
            continue;
        }
        analyst.set(|s| s.working_on = Some(version));
        let started = Instant::now();
        match analyse(&catalog, version).await {
            Ok(()) => {
                let took = started.elapsed();
                tracing::info!(
                    version,
                    took_ms = took.as_millis(),
                    "catalog version analysed"
                );
                analyst.set(|s| {
                    s.done = Some((version, took));
                    s.working_on = None;
                });
            }
            Err(Stopped::Superseded) => {
                tracing::debug!(version, "analysis superseded by a newer catalog version");
                analyst.set(|s| s.working_on = None);
            }
            Err(Stopped::Failed(e)) => {
                tracing::warn!(version, error = %e, "the analysis of a catalog version failed");
                analyst.set(|s| s.working_on = None);
                // Try again after a pause rather than at every tick.
                tokio::time::sleep(POLL_EVERY * 10).await;
            }
        }
    }
}

/// Whether the catalog has moved past `version`.
async fn superseded(catalog: &Catalog, version: i64) -> Result<bool, Stopped> {
    Ok(history::current_version(&catalog.pool).await? > version)
}

/// The default fits of every relation, then the pending submissions' scores (what pages and
/// the review queue need first), then the influence lists of the samples large enough for
/// them to cost (smaller ones take milliseconds on a page's first visit) and their sample's
/// side of adding one object (`fit::AddingBase`), at `version`; stops between steps when a
/// newer version arrives.
async fn analyse(catalog: &Catalog, version: i64) -> Result<(), Stopped> {
    let started = Instant::now();
    let bands: Vec<String> = relation_rows::luminosity_bands(&catalog.pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();
    let mut outcomes = Vec::new();
    for relation in Relation::all(&bands) {
        if superseded(catalog, version).await? {
            return Err(Stopped::Superseded);
        }
        let pivots = (relation.default_pivot(), relation.default_pivot2());
        let outcome = catalog
            .fitted(
                &relation,
                Method::Structural,
                &SampleFilter::default(),
                pivots,
            )
            .await?;
        if outcome.key.catalog_version != version {
            return Err(Stopped::Superseded);
        }
        outcomes.push(outcome);
    }
    if superseded(catalog, version).await? {
        return Err(Stopped::Superseded);
    }
    assess::score_pending(catalog, None).await?;
    tracing::info!(
        version,
        took_ms = started.elapsed().as_millis(),
        "default fits and review scores ready"
    );
    for outcome in outcomes {
        if superseded(catalog, version).await? {
            return Err(Stopped::Superseded);
        }
        if outcome.fit.is_ok() && outcome.sample.points.len() > influence::EXACT_MAX_N {
            catalog.fits.influence(&outcome).await?;
            // What the review queue's "with this object in the fit" needs from the sample.
            let fits = catalog.fits.clone();
            tokio::task::spawn_blocking(move || {
                if let Ok(fit) = &outcome.fit {
                    fits.made_from(&outcome.key, super::place::ADDING_BASE, || {
                        crate::fit::AddingBase::new(&outcome.sample.points, &fit.spec, fit)
                    });
                }
            })
            .await?;
        }
    }
    Ok(())
}
