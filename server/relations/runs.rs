//! Bootstrap and posterior runs of a cached fit, in the background.
//!
//! A run takes seconds to minutes, so it never runs inside a request: [`RunRegistry::start`]
//! spawns it on the blocking pool and returns at once; the relation page shows its progress
//! and, once it has finished, the stored result (a `fit_run` row, found again by
//! [`stored_run`] on later visits for the same catalog version, relation, estimator, sample,
//! pivots, kind and size).
//!
//! The bootstrap runs in chunks of [`BOOTSTRAP_CHUNK`] replicates so its progress can be
//! counted; replicate i is drawn with `fit::bootstrap::resample(points, seed, i)`, exactly as
//! `fit::bootstrap::bootstrap` draws it, so both give the same replicates for one seed. The
//! posterior sampler counts its steps (burn-in included), so the page shows both kinds advancing.

use std::collections::{BTreeMap, HashMap};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, PoisonError};

use rayon::prelude::*;
use sqlx::SqlitePool;

use super::defaults::{
    DEFAULT_REPLICATES, DEFAULT_STEPS, POSTERIOR_WALKERS, REPLICATES_RANGE, RUN_SEED, STEPS_RANGE,
};
use super::{FitKey, FitOutcome};
use crate::catalog::fit_runs::{self, FitRun, NewFitRun, RunLookup};
use crate::fit::ensemble::{EnsembleConfig, ParamSummary};
use crate::fit::{self, FitError, Params};

/// Replicates per progress step of a bootstrap run.
pub const BOOTSTRAP_CHUNK: usize = 25;

/// What kind of run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum RunKind {
    /// Resampling the objects and refitting (Efron & Tibshirani 1993, from memory).
    Bootstrap,
    /// Sampling the likelihood with flat priors (Goodman & Weare 2010 ensemble sampler).
    Posterior,
}

impl RunKind {
    /// Stable name: "bootstrap" or "posterior".
    pub fn as_str(self) -> &'static str {
        match self {
            RunKind::Bootstrap => "bootstrap",
            RunKind::Posterior => "posterior",
        }
    }

    /// Reads a stable name and a size (replicates or steps; 0 means the default).
    ///
    /// # Errors
    /// One sentence naming the accepted values.
    pub fn parse(kind: &str, size: usize) -> Result<(RunKind, usize), String> {
        let (run, default, (lo, hi), what) = match kind {
            "bootstrap" => (
                RunKind::Bootstrap,
                DEFAULT_REPLICATES,
                REPLICATES_RANGE,
                "replicates",
            ),
            "posterior" => (RunKind::Posterior, DEFAULT_STEPS, STEPS_RANGE, "steps"),
            other => {
                return Err(format!(
                    "'{}' is not a kind of run; choose bootstrap or posterior.",
                    other.chars().take(40).collect::<String>()
                ));
            }
        };
        let size = if size == 0 { default } else { size };
        if (lo..=hi).contains(&size) {
            Ok((run, size))
        } else {
            Err(format!(
                "A {kind} run takes {lo} to {hi} {what}, not {size}."
            ))
        }
    }
}

/// A run in progress (or finished or failed in this server's lifetime).
#[derive(Debug)]
pub struct RunProgress {
    /// Units done (bootstrap replicates; posterior steps, burn-in included).
    pub done: AtomicUsize,
    /// Units in all.
    pub total: usize,
    /// When it started, RFC 3339 UTC.
    pub started_at: String,
    state: Mutex<RunState>,
}

/// Where a run stands.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RunState {
    /// Still computing.
    Running,
    /// Finished and stored.
    Stored,
    /// Failed; the sentence says why.
    Failed(String),
}

impl RunProgress {
    /// Where the run stands.
    pub fn state(&self) -> RunState {
        self.state
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .clone()
    }

    fn set(&self, state: RunState) {
        *self.state.lock().unwrap_or_else(PoisonError::into_inner) = state;
    }
}

/// What identifies a run in the registry.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct RunKey {
    /// The fit it starts from.
    pub fit: FitKey,
    /// Bootstrap or posterior.
    pub kind: RunKind,
    /// Replicates or steps.
    pub size: usize,
}

/// The runs of this server's lifetime; cheap to clone.
#[derive(Debug, Clone, Default)]
pub struct RunRegistry {
    inner: Arc<Mutex<HashMap<RunKey, Arc<RunProgress>>>>,
}

impl RunRegistry {
    /// The run of `key`, if one was started.
    pub fn get(&self, key: &RunKey) -> Option<Arc<RunProgress>> {
        self.inner
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .get(key)
            .cloned()
    }

    /// Starts a run of `outcome`'s fit unless one for the same key is running or stored;
    /// returns its progress. The work runs on the blocking pool; the finished run is stored.
    pub fn start(
        &self,
        pool: SqlitePool,
        outcome: Arc<FitOutcome>,
        kind: RunKind,
        size: usize,
    ) -> Arc<RunProgress> {
        let key = RunKey {
            fit: outcome.key.clone(),
            kind,
            size,
        };
        let progress = {
            let mut map = self.inner.lock().unwrap_or_else(PoisonError::into_inner);
            if let Some(existing) = map.get(&key)
                && !matches!(existing.state(), RunState::Failed(_))
            {
                return existing.clone();
            }
            // Runs of older catalog versions are of no more use.
            map.retain(|k, _| k.fit.catalog_version >= key.fit.catalog_version);
            let progress = Arc::new(RunProgress {
                done: AtomicUsize::new(0),
                total: size,
                started_at: super::cache::now_rfc3339(),
                state: Mutex::new(RunState::Running),
            });
            map.insert(key.clone(), progress.clone());
            progress
        };
        let task_progress = progress.clone();
        tokio::spawn(async move {
            let work = {
                let outcome = outcome.clone();
                let progress = task_progress.clone();
                tokio::task::spawn_blocking(move || compute(&outcome, kind, size, &progress))
            };
            let state = match work.await {
                Ok(Ok(result)) => match store(&pool, &outcome, &result).await {
                    Ok(()) => RunState::Stored,
                    Err(e) => {
                        tracing::error!(error = %e, "a finished fit run could not be stored");
                        RunState::Failed("The finished run could not be stored.".to_owned())
                    }
                },
                Ok(Err(e)) => RunState::Failed(e.to_string()),
                Err(e) => {
                    tracing::error!(error = %e, "a fit run stopped");
                    RunState::Failed("The run stopped unexpectedly.".to_owned())
                }
            };
            task_progress.set(state);
        });
        progress
    }
}

/// A finished run before it is stored.
#[derive(Debug, Clone)]
struct RunResult {
    params: Vec<ParamSummary>,
    settings: serde_json::Value,
}

fn compute(
    outcome: &FitOutcome,
    kind: RunKind,
    size: usize,
    progress: &RunProgress,
) -> Result<RunResult, FitError> {
    let spec = outcome.spec.clone()?;
    let full = outcome.fit.clone()?;
    let points = &outcome.sample.points;
    match kind {
        RunKind::Bootstrap => {
            let names = full.params.names();
            let mut columns: Vec<Vec<f64>> = vec![Vec::with_capacity(size); names.len()];
            let mut failed = 0usize;
            let all: Vec<u64> = (0..size as u64).collect();
            for chunk in all.chunks(BOOTSTRAP_CHUNK) {
                let results: Vec<Result<Params, FitError>> = chunk
                    .par_iter()
                    .map(|i| {
                        fit::fit_params_only(&fit::bootstrap::resample(points, RUN_SEED, *i), &spec)
                            .map(|f| f.params)
                    })
                    .collect();
                for r in results {
                    match r {
                        Ok(p) => {
                            for (col, v) in columns.iter_mut().zip(p.values()) {
                                col.push(v);
                            }
                        }
                        Err(_) => failed += 1,
                    }
                }
                progress.done.fetch_add(chunk.len(), Ordering::Relaxed);
            }
            if size - failed < 2 {
                return Err(FitError::Unsupported {
                    what: format!(
                        "Only {} of {size} bootstrap replicates could be fitted, too few for intervals.",
                        size - failed
                    ),
                });
            }
            let params = names
                .iter()
                .zip(columns.iter_mut())
                .filter_map(|(name, col)| ParamSummary::from_values(name, col))
                .collect();
            Ok(RunResult {
                params,
                settings: serde_json::json!({
                    "kind": "bootstrap",
                    "size": size,
                    "replicates": size,
                    "failed": failed,
                    "pivot2_log": spec.pivot2,
                }),
            })
        }
        RunKind::Posterior => {
            let cfg = EnsembleConfig::new(POSTERIOR_WALKERS, size, size / 5, RUN_SEED)?;
            // The sampler counts its steps into the run's progress (`size` = steps).
            let (post, _) = fit::posterior::posterior_with_progress(
                points,
                &spec,
                &full,
                &cfg,
                Some(&progress.done),
            )?;
            progress.done.store(size, Ordering::Relaxed);
            let wanted = full.params.names();
            let params = post
                .params
                .iter()
                .filter(|p| wanted.contains(&p.name))
                .cloned()
                .collect();
            Ok(RunResult {
                params,
                settings: serde_json::json!({
                    "kind": "posterior",
                    "size": size,
                    "walkers": POSTERIOR_WALKERS,
                    "steps": size,
                    "burn_in": size / 5,
                    "acceptance_fraction": post.acceptance_fraction,
                    "autocorr_time": post.autocorr_time,
                    "warning": post.warning,
                    "pivot2_log": spec.pivot2,
                }),
            })
        }
    }
}

/// The sample filter as canonical JSON (sorted keys) for the `fit_run` table.
pub fn filter_json(outcome: &FitOutcome) -> String {
    let map: BTreeMap<&str, &str> = outcome
        .key
        .filter
        .split(';')
        .filter_map(|kv| kv.split_once('='))
        .collect();
    serde_json::to_string(&map).unwrap_or_else(|_| "{}".to_owned())
}

async fn store(pool: &SqlitePool, outcome: &FitOutcome, result: &RunResult) -> anyhow::Result<()> {
    let fit = outcome.fit.as_ref().map_err(|e| anyhow::anyhow!("{e}"))?;
    let params_json = serde_json::to_string(&result.params)?;
    let cov_json = serde_json::to_string(&serde_json::json!({
        "source": "maximum-likelihood fit the run started from",
        "names": fit.cov_names,
        "cov": fit.cov,
    }))?;
    let settings_json = serde_json::to_string(&result.settings)?;
    let filter = filter_json(outcome);
    fit_runs::insert_fit_run(
        pool,
        &NewFitRun {
            relation: &outcome.key.relation,
            method: outcome.key.method,
            sample_filter: &filter,
            pivot_log: fit.spec.pivot,
            params_json: &params_json,
            cov_json: &cov_json,
            n_detections: i64::try_from(outcome.sample.n_detections())?,
            n_upper: i64::try_from(outcome.sample.n_limits())?,
            catalog_version: outcome.key.catalog_version,
            seed: Some(i64::try_from(RUN_SEED)?),
            settings_json: &settings_json,
        },
    )
    .await?;
    Ok(())
}

/// The stored run of `outcome`'s fit of this kind and size, if one was finished.
///
/// # Errors
/// When the database cannot be read.
pub async fn stored_run(
    pool: &SqlitePool,
    outcome: &FitOutcome,
    kind: RunKind,
    size: usize,
) -> sqlx::Result<Option<FitRun>> {
    let Ok(spec) = &outcome.spec else {
        return Ok(None);
    };
    let filter = filter_json(outcome);
    fit_runs::find_fit_run(
        pool,
        &RunLookup {
            relation: &outcome.key.relation,
            method: outcome.key.method,
            sample_filter: &filter,
            pivot_log: spec.pivot,
            pivot2_log: spec.pivot2,
            catalog_version: outcome.key.catalog_version,
            kind: kind.as_str(),
            size: i64::try_from(size).unwrap_or(i64::MAX),
        },
    )
    .await
}

/// Where a bootstrap or posterior run of a fit stands.
#[derive(Debug, Clone, PartialEq)]
pub enum RunStatus {
    /// Not started (or forgotten by a restart before it finished).
    None,
    /// Running: `done` of `total` replicates or steps, started at `started_at` (RFC 3339).
    Running {
        /// Replicates fitted or steps done.
        done: usize,
        /// All of them.
        total: usize,
        /// When it started.
        started_at: String,
    },
    /// It failed; why.
    Failed(String),
    /// Finished and stored.
    Stored {
        /// Each parameter's percentiles.
        params: Vec<ParamSummary>,
        /// A warning of the sampler, or how many resamples failed.
        note: Option<String>,
        /// When it was stored (RFC 3339).
        stored_at: String,
    },
}

/// The parameter symbol of a stored parameter name.
fn param_symbol(name: &str) -> &'static str {
    match name {
        "alpha" => "α",
        "beta" => "β",
        "beta2" => "β₂",
        "gamma" => "γ",
        "eps" => "ε",
        _ => "?",
    }
}

/// The status of the run of `kind` and `size` of `outcome`'s fit: the stored result, the
/// progress of a run in `registry`, or none.
///
/// # Errors
/// When the database cannot be read.
pub async fn run_status(
    pool: &SqlitePool,
    registry: &RunRegistry,
    outcome: &FitOutcome,
    kind: RunKind,
    size: usize,
) -> sqlx::Result<RunStatus> {
    if let Some(run) = stored_run(pool, outcome, kind, size).await? {
        let params = serde_json::from_str::<Vec<serde_json::Value>>(&run.params_json)
            .unwrap_or_default()
            .into_iter()
            .filter_map(|v| {
                let get = |k: &str| v[k].as_f64();
                Some(ParamSummary {
                    name: param_symbol(v["name"].as_str()?),
                    median: get("median")?,
                    p16: get("p16")?,
                    p84: get("p84")?,
                    p2_5: get("p2_5")?,
                    p97_5: get("p97_5")?,
                    mean: get("mean")?,
                    sd: get("sd")?,
                })
            })
            .collect();
        let settings = serde_json::from_str::<serde_json::Value>(&run.settings_json)
            .unwrap_or(serde_json::Value::Null);
        let note = match (settings["warning"].as_str(), settings["failed"].as_u64()) {
            (Some(w), _) => Some(w.to_owned()),
            (None, Some(n)) if n > 0 => Some(format!(
                "{n} resamples could not be fitted and were left out."
            )),
            _ => None,
        };
        return Ok(RunStatus::Stored {
            params,
            note,
            stored_at: run.created_at,
        });
    }
    let key = RunKey {
        fit: outcome.key.clone(),
        kind,
        size,
    };
    Ok(match registry.get(&key) {
        None => RunStatus::None,
        Some(progress) => match progress.state() {
            RunState::Running | RunState::Stored => RunStatus::Running {
                done: progress.done.load(Ordering::Relaxed),
                total: progress.total,
                started_at: progress.started_at.clone(),
            },
            RunState::Failed(why) => RunStatus::Failed(why),
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{FitSpec, Method, Point};
    use crate::relations::{Relation, Sample, SampleFilter};

    #[test]
    fn kinds_and_sizes_are_checked() {
        assert_eq!(
            RunKind::parse("bootstrap", 0),
            Ok((RunKind::Bootstrap, DEFAULT_REPLICATES))
        );
        assert_eq!(
            RunKind::parse("posterior", 300),
            Ok((RunKind::Posterior, 300))
        );
        assert!(RunKind::parse("bootstrap", 5).unwrap_err().ends_with('.'));
        assert!(RunKind::parse("jackknife", 0).is_err());
    }

    #[test]
    fn the_chunked_bootstrap_gives_the_replicates_of_the_library_bootstrap() {
        // y = 1 + 2 (x − 0.5) with a little scatter: an invented sample.
        let points: Vec<Point> = (0..12)
            .map(|i| {
                let x = f64::from(i) / 11.0;
                let wiggle = if i % 2 == 0 { 0.05 } else { -0.05 };
                Point::new(x, 0.02, 1.0 + 2.0 * (x - 0.5) + wiggle, 0.03)
            })
            .collect();
        let spec = FitSpec::new(Method::Conditional, 0.5);
        let fit = fit::fit(&points, &spec).unwrap();
        let outcome = FitOutcome {
            key: FitKey::new(
                1,
                &Relation::MSigma,
                Method::Conditional,
                &SampleFilter::default(),
                0.5,
                11.0,
            ),
            sample: Sample {
                points: points.clone(),
                ..Sample::default()
            },
            fit: Ok(fit),
            spec: Ok(spec.clone()),
            fitted_at: String::new(),
        };
        let progress = RunProgress {
            done: AtomicUsize::new(0),
            total: 60,
            started_at: String::new(),
            state: Mutex::new(RunState::Running),
        };
        let ours = compute(&outcome, RunKind::Bootstrap, 60, &progress).unwrap();
        assert_eq!(progress.done.load(Ordering::Relaxed), 60);
        let library = fit::bootstrap::bootstrap(&points, &spec, 60, RUN_SEED).unwrap();
        for name in ["alpha", "beta", "eps"] {
            let a = ours.params.iter().find(|p| p.name == name).unwrap();
            let b = library.get(name).unwrap();
            assert!((a.median - b.median).abs() < 1e-12, "{name}");
            assert!((a.p16 - b.p16).abs() < 1e-12, "{name}");
        }
        assert_eq!(ours.settings["kind"], "bootstrap");
    }
}
