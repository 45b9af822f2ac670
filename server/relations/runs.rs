//! Bootstrap and posterior runs of a cached fit, in the background.
//!
//! A run takes seconds to minutes, so it never runs inside a request: [`RunRegistry::start`]
//! queues it and returns at once; the relation page shows its place in the queue, then its
//! progress and, once it has finished, the stored result (a `fit_run` row, found again by
//! [`stored_run`] on later visits for the same catalog version, relation, estimator, sample,
//! pivots, kind and size).
//!
//! Runs share the machine with the pages, so they are bounded: at most one runs per core
//! overall and one per account, each on a single thread; the others wait in one
//! first-come-first-served queue (an account's later runs are passed over while its earlier one
//! runs), and an account may keep at most [`MAX_QUEUED_PER_ACCOUNT`] waiting. A run of a
//! catalog version that has been superseded is cancelled: when it would start, between
//! bootstrap chunks, after any posterior sampler step, and whenever a newer version is seen by
//! the registry.
//!
//! The bootstrap runs in chunks of [`BOOTSTRAP_CHUNK`] replicates so its progress can be
//! counted; replicate i is drawn with `fit::bootstrap::resample(points, seed, i)`, exactly as
//! `fit::bootstrap::bootstrap` draws it, so both give the same replicates for one seed. The
//! posterior sampler counts its steps (burn-in included), so the page shows both kinds advancing.

use std::collections::{BTreeMap, HashMap, VecDeque};
use std::sync::atomic::{AtomicI64, AtomicUsize, Ordering};
use std::sync::{Arc, Condvar, Mutex, PoisonError};

use sqlx::SqlitePool;

use super::defaults::{
    DEFAULT_REPLICATES, DEFAULT_STEPS, POSTERIOR_WALKERS, REPLICATES_RANGE, RUN_SEED, STEPS_RANGE,
};
use super::{FitKey, FitOutcome};
use crate::catalog::fit_runs::{self, FitRun, NewFitRun, RunLookup};
use crate::catalog::history;
use crate::error::AppError;
use crate::fit::ensemble::{EnsembleConfig, ParamSummary};
use crate::fit::{self, FitError, Params};

/// How often a computing run's catalog version is read.
const VERSION_CHECK: std::time::Duration = std::time::Duration::from_secs(1);

/// Finished runs whose status the registry keeps (each holds its fit's sample).
const KEPT_FINISHED: usize = 200;

/// Replicates per progress step of a bootstrap run.
pub const BOOTSTRAP_CHUNK: usize = 25;

/// Runs one account may have waiting at once. A waiting run holds its fit's sample in memory
/// and a place in everyone's queue; three cover the usual wish (a bootstrap and a posterior of
/// one fit, and one more) while one account cannot fill the queue for the others.
pub const MAX_QUEUED_PER_ACCOUNT: usize = 3;

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

/// A run asked for in this server's lifetime: waiting, running, finished, failed or cancelled.
#[derive(Debug)]
pub struct RunProgress {
    /// The registry's number of the run (the API's `/api/v1/runs/{id}`).
    pub id: u64,
    /// What it computes.
    pub key: RunKey,
    /// The fit it starts from.
    pub outcome: Arc<FitOutcome>,
    /// The account that asked for it.
    pub account_id: i64,
    /// Units done (bootstrap replicates; posterior steps, burn-in included).
    pub done: AtomicUsize,
    /// Units in all.
    pub total: usize,
    /// When it was asked for, RFC 3339 UTC.
    pub asked_at: String,
    started_at: Mutex<Option<String>>,
    /// A newer catalog version seen while the run waits or runs (0: none); the run stops at its
    /// next check.
    superseded_by: AtomicI64,
    state: Mutex<RunState>,
}

/// Where a run stands.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RunState {
    /// Waiting in the queue.
    Queued,
    /// Computing.
    Running,
    /// Finished and stored.
    Stored,
    /// Failed; the sentence says why.
    Failed(String),
    /// Dropped because the catalog changed from version `from` to `to` before it finished.
    Cancelled {
        /// The catalog version the run was asked for.
        from: i64,
        /// The newer version seen.
        to: i64,
    },
}

impl RunState {
    /// Whether the run will not change any more.
    pub fn is_over(&self) -> bool {
        matches!(
            self,
            RunState::Stored | RunState::Failed(_) | RunState::Cancelled { .. }
        )
    }
}

/// The sentence of a run cancelled because the catalog changed.
pub fn cancelled_sentence(from: i64, to: i64) -> String {
    format!(
        "Cancelled: the catalog changed (version {from} → {to}); start the run again on the current catalog."
    )
}

impl RunProgress {
    fn new(id: u64, key: RunKey, account_id: i64, outcome: Arc<FitOutcome>) -> Self {
        RunProgress {
            id,
            total: key.size,
            key,
            outcome,
            account_id,
            done: AtomicUsize::new(0),
            asked_at: super::cache::now_rfc3339(),
            started_at: Mutex::new(None),
            superseded_by: AtomicI64::new(0),
            state: Mutex::new(RunState::Queued),
        }
    }

    /// Where the run stands.
    pub fn state(&self) -> RunState {
        self.state
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .clone()
    }

    /// When it started running (RFC 3339 UTC), once it has.
    pub fn started_at(&self) -> Option<String> {
        self.started_at
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .clone()
    }

    fn set(&self, state: RunState) {
        *self.state.lock().unwrap_or_else(PoisonError::into_inner) = state;
    }

    fn version(&self) -> i64 {
        self.key.fit.catalog_version
    }

    /// The newer catalog version seen, if the run's own has been superseded.
    fn newer_version(&self) -> Option<i64> {
        let v = self.superseded_by.load(Ordering::Relaxed);
        (v > self.version()).then_some(v)
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

/// A run waiting for a slot, with what it needs to compute and store.
#[derive(Clone)]
struct Waiting {
    progress: Arc<RunProgress>,
    outcome: Arc<FitOutcome>,
    pool: SqlitePool,
}

/// The registry's books, behind one lock.
#[derive(Default)]
struct Books {
    by_key: HashMap<RunKey, Arc<RunProgress>>,
    by_id: HashMap<u64, Arc<RunProgress>>,
    queue: VecDeque<Waiting>,
    /// Accounts with a run computing now.
    running: Vec<i64>,
    /// The newest catalog version seen.
    newest_version: i64,
    next_id: u64,
}

impl Books {
    /// Marks every run of a version older than `version` superseded: waiting ones are dropped
    /// now, running ones stop at their next check; entries of versions before the one just
    /// left are forgotten, so the books stay as small as one version's runs.
    fn supersede(&mut self, version: i64) {
        if version <= self.newest_version {
            return;
        }
        let previous = self.newest_version;
        self.newest_version = version;
        self.by_key.retain(|k, _| k.fit.catalog_version >= previous);
        self.by_id.retain(|_, p| p.version() >= previous);
        for p in self.by_id.values() {
            if p.version() < version {
                p.superseded_by.store(version, Ordering::Relaxed);
            }
        }
        let (old, current): (Vec<Waiting>, Vec<Waiting>) = self
            .queue
            .drain(..)
            .partition(|w| w.progress.version() < version);
        self.queue = current.into();
        for w in old {
            w.progress.set(RunState::Cancelled {
                from: w.progress.version(),
                to: version,
            });
        }
    }

    /// Takes the waiting runs that may start now: first come, first served, passing over an
    /// account that has a run computing, while fewer than `max_running` run.
    fn take_startable(&mut self, max_running: usize) -> Vec<Waiting> {
        let mut started = Vec::new();
        let mut i = 0;
        while self.running.len() < max_running && i < self.queue.len() {
            let account = self.queue[i].progress.account_id;
            if self.running.contains(&account) {
                i += 1;
                continue;
            }
            if let Some(w) = self.queue.remove(i) {
                self.running.push(account);
                w.progress.set(RunState::Running);
                *w.progress
                    .started_at
                    .lock()
                    .unwrap_or_else(PoisonError::into_inner) = Some(super::cache::now_rfc3339());
                started.push(w);
            }
        }
        started
    }

    fn finished(&mut self, account_id: i64) {
        if let Some(i) = self.running.iter().position(|a| *a == account_id) {
            self.running.swap_remove(i);
        }
        // Finished runs are kept for their status (a stored one is found in the database
        // anyway); beyond KEPT_FINISHED the oldest are forgotten, so one catalog version with
        // many runs cannot hold their samples in memory for ever.
        let mut over: Vec<u64> = self
            .by_id
            .values()
            .filter(|p| p.state().is_over())
            .map(|p| p.id)
            .collect();
        if over.len() > KEPT_FINISHED {
            over.sort_unstable();
            for id in &over[..over.len() - KEPT_FINISHED] {
                if let Some(p) = self.by_id.remove(id)
                    && self.by_key.get(&p.key).is_some_and(|q| q.id == p.id)
                {
                    self.by_key.remove(&p.key);
                }
            }
        }
    }
}

/// Holds started runs before their first unit of work while set (a hook for tests, which need
/// a run that stays running while they look at the queue).
#[derive(Debug, Default)]
struct Hold {
    held: Mutex<bool>,
    released: Condvar,
}

/// The runs of this server's lifetime and their queue; cheap to clone.
#[derive(Clone)]
pub struct RunRegistry {
    books: Arc<Mutex<Books>>,
    max_running: Arc<AtomicUsize>,
    hold: Arc<Hold>,
}

impl std::fmt::Debug for RunRegistry {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RunRegistry")
            .field("max_running", &self.max_running())
            .finish_non_exhaustive()
    }
}

impl Default for RunRegistry {
    /// One running run per core (`std::thread::available_parallelism`, at least 1).
    fn default() -> Self {
        let cores = std::thread::available_parallelism().map_or(1, std::num::NonZeroUsize::get);
        RunRegistry {
            books: Arc::default(),
            max_running: Arc::new(AtomicUsize::new(cores.max(1))),
            hold: Arc::default(),
        }
    }
}

impl RunRegistry {
    fn books(&self) -> std::sync::MutexGuard<'_, Books> {
        self.books.lock().unwrap_or_else(PoisonError::into_inner)
    }

    /// How many runs may compute at once.
    pub fn max_running(&self) -> usize {
        self.max_running.load(Ordering::Relaxed)
    }

    /// Sets how many runs may compute at once (at least 1); runs already computing go on.
    pub fn set_max_running(&self, n: usize) {
        self.max_running.store(n.max(1), Ordering::Relaxed);
    }

    /// While `held`, started runs wait before their first unit of work (tests use it to keep a
    /// run running while they look at the queue); releasing lets them go on.
    pub fn hold_runs(&self, held: bool) {
        *self
            .hold
            .held
            .lock()
            .unwrap_or_else(PoisonError::into_inner) = held;
        self.hold.released.notify_all();
    }

    fn wait_while_held(&self) {
        let mut held = self
            .hold
            .held
            .lock()
            .unwrap_or_else(PoisonError::into_inner);
        while *held {
            held = self
                .hold
                .released
                .wait(held)
                .unwrap_or_else(PoisonError::into_inner);
        }
    }

    /// The run of `key`, if one was asked for.
    pub fn get(&self, key: &RunKey) -> Option<Arc<RunProgress>> {
        self.books().by_key.get(key).cloned()
    }

    /// The run numbered `id`, if this server still knows it.
    pub fn by_id(&self, id: u64) -> Option<Arc<RunProgress>> {
        self.books().by_id.get(&id).cloned()
    }

    /// A waiting run's place in the queue: (position from 1, runs waiting in all).
    pub fn queue_position(&self, id: u64) -> Option<(usize, usize)> {
        let books = self.books();
        books
            .queue
            .iter()
            .position(|w| w.progress.id == id)
            .map(|i| (i + 1, books.queue.len()))
    }

    /// Tells the registry the catalog's current version: runs of older versions are cancelled
    /// (waiting ones at once, running ones at their next check).
    pub fn catalog_version_seen(&self, version: i64) {
        self.books().supersede(version);
    }

    /// Queues a run of `outcome`'s fit for `account_id` and starts what may start; returns its
    /// progress. A run of the same key that is waiting, running or finished is returned
    /// instead of a new one (whoever asked for it).
    ///
    /// # Errors
    /// [`AppError::TooManyRuns`] when the account already has [`MAX_QUEUED_PER_ACCOUNT`] runs
    /// waiting.
    pub fn start(
        &self,
        pool: SqlitePool,
        account_id: i64,
        outcome: Arc<FitOutcome>,
        kind: RunKind,
        size: usize,
    ) -> Result<Arc<RunProgress>, AppError> {
        let key = RunKey {
            fit: outcome.key.clone(),
            kind,
            size,
        };
        let (progress, startable) = {
            let mut books = self.books();
            books.supersede(key.fit.catalog_version);
            if let Some(existing) = books.by_key.get(&key)
                && !matches!(
                    existing.state(),
                    RunState::Failed(_) | RunState::Cancelled { .. }
                )
            {
                return Ok(existing.clone());
            }
            let waiting = books
                .queue
                .iter()
                .filter(|w| w.progress.account_id == account_id)
                .count();
            if waiting >= MAX_QUEUED_PER_ACCOUNT {
                return Err(AppError::TooManyRuns {
                    message: format!(
                        "You have {waiting} runs waiting, as many as an account may; wait for one of them to finish before starting another."
                    ),
                });
            }
            books.next_id += 1;
            let progress = Arc::new(RunProgress::new(
                books.next_id,
                key.clone(),
                account_id,
                outcome.clone(),
            ));
            books.by_key.insert(key, progress.clone());
            books.by_id.insert(progress.id, progress.clone());
            books.queue.push_back(Waiting {
                progress: progress.clone(),
                outcome,
                pool,
            });
            let startable = books.take_startable(self.max_running());
            (progress, startable)
        };
        for w in startable {
            self.spawn(w);
        }
        Ok(progress)
    }

    fn spawn(&self, w: Waiting) {
        let registry = self.clone();
        tokio::spawn(async move {
            let account_id = w.progress.account_id;
            // Its own task, so that even a panic ends as a failed run and frees the slot.
            let job = {
                let registry = registry.clone();
                let w = w.clone();
                tokio::spawn(async move { registry.run(&w).await })
            };
            let state = job.await.unwrap_or_else(|e| {
                tracing::error!(error = %e, "a fit run stopped");
                RunState::Failed("The run stopped unexpectedly.".to_owned())
            });
            w.progress.set(state);
            let startable = {
                let mut books = registry.books();
                books.finished(account_id);
                books.take_startable(registry.max_running())
            };
            for next in startable {
                registry.spawn(next);
            }
        });
    }

    /// Computes and stores one run; its final state.
    async fn run(&self, w: &Waiting) -> RunState {
        let progress = w.progress.clone();
        if let Some(to) = newer_version(&w.pool, &progress).await {
            return RunState::Cancelled {
                from: progress.version(),
                to,
            };
        }
        let work = {
            let registry = self.clone();
            let outcome = w.outcome.clone();
            let progress = progress.clone();
            tokio::task::spawn_blocking(move || {
                registry.wait_while_held();
                let superseded = || progress.newer_version();
                // One thread per run, so the cap on running runs bounds the cores used.
                let threads = rayon::ThreadPoolBuilder::new()
                    .num_threads(1)
                    .thread_name(|_| "massline-run".to_owned())
                    .build()
                    .map_err(|e| FitError::Unsupported {
                        what: format!("The run could not get a thread: {e}."),
                    })?;
                threads.install(|| compute(&outcome, kind_of(&progress), &progress, &superseded))
            })
        };
        // While it computes, the catalog version is read every VERSION_CHECK (a cheap query,
        // and the only way a run learns of a change no request has seen yet); the computation
        // looks at the flag this raises between chunks.
        let watch = async {
            loop {
                tokio::time::sleep(VERSION_CHECK).await;
                if let Some(to) = newer_version(&w.pool, &progress).await {
                    progress.superseded_by.store(to, Ordering::Relaxed);
                }
            }
        };
        let work = tokio::select! {
            done = work => done,
            never = watch => never,
        };
        match work {
            Ok(Ok(Computed::Done(result))) => {
                if let Some(to) = newer_version(&w.pool, &w.progress).await {
                    return RunState::Cancelled {
                        from: w.progress.version(),
                        to,
                    };
                }
                match store(&w.pool, &w.outcome, &result).await {
                    Ok(()) => RunState::Stored,
                    Err(e) => {
                        tracing::error!(error = %e, "a finished fit run could not be stored");
                        RunState::Failed("The finished run could not be stored.".to_owned())
                    }
                }
            }
            Ok(Ok(Computed::Superseded(to))) => RunState::Cancelled {
                from: w.progress.version(),
                to,
            },
            Ok(Err(e)) => RunState::Failed(e.to_string()),
            Err(e) => {
                tracing::error!(error = %e, "a fit run stopped");
                RunState::Failed("The run stopped unexpectedly.".to_owned())
            }
        }
    }
}

fn kind_of(progress: &RunProgress) -> RunKind {
    progress.key.kind
}

/// The catalog version now, if it is newer than the run's (a failed read lets the run go on:
/// the version is checked again later).
async fn newer_version(pool: &SqlitePool, progress: &RunProgress) -> Option<i64> {
    if let Some(v) = progress.newer_version() {
        return Some(v);
    }
    match history::current_version(pool).await {
        Ok(v) if v > progress.version() => Some(v),
        _ => None,
    }
}

/// How a computation ended.
enum Computed {
    Done(RunResult),
    /// The catalog changed to this version while it ran.
    Superseded(i64),
}

/// A finished run before it is stored.
#[derive(Debug, Clone)]
struct RunResult {
    params: Vec<ParamSummary>,
    settings: serde_json::Value,
}

/// Computes a run, one replicate or step at a time on the calling thread's rayon pool,
/// asking `superseded` before each bootstrap chunk (the sampler is asked only before and after).
fn compute(
    outcome: &FitOutcome,
    kind: RunKind,
    progress: &RunProgress,
    superseded: &(dyn Fn() -> Option<i64> + Sync),
) -> Result<Computed, FitError> {
    let size = progress.total;
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
                if let Some(to) = superseded() {
                    return Ok(Computed::Superseded(to));
                }
                let results: Vec<Result<Params, FitError>> = chunk
                    .iter()
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
            Ok(Computed::Done(RunResult {
                params,
                settings: serde_json::json!({
                    "kind": "bootstrap",
                    "size": size,
                    "replicates": size,
                    "failed": failed,
                    "pivot2_log": spec.pivot2,
                }),
            }))
        }
        RunKind::Posterior => {
            let cfg = EnsembleConfig::new(POSTERIOR_WALKERS, size, size / 5, RUN_SEED)?;
            // The sampler counts its steps into the run's progress (`size` = steps) and stops
            // after the step in which the catalog is seen to have changed.
            let stop = || superseded().is_some();
            let watch = fit::ensemble::Progress {
                done: &progress.done,
                stop: &stop,
            };
            let post =
                fit::posterior::posterior_with_progress(points, &spec, &full, &cfg, Some(&watch));
            let (post, _) = match post {
                Ok(post) => post,
                Err(e) => {
                    return match superseded() {
                        Some(to) => Ok(Computed::Superseded(to)),
                        None => Err(e),
                    };
                }
            };
            progress.done.store(size, Ordering::Relaxed);
            let wanted = full.params.names();
            let params = post
                .params
                .iter()
                .filter(|p| wanted.contains(&p.name))
                .cloned()
                .collect();
            Ok(Computed::Done(RunResult {
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
            }))
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
    /// Waiting for a slot: `position` of `of` in the queue (from 1), asked for at `asked_at`.
    Queued {
        /// The registry's number of the run.
        id: u64,
        /// Place in the queue, from 1.
        position: usize,
        /// Runs waiting in all.
        of: usize,
        /// When it was asked for (RFC 3339).
        asked_at: String,
    },
    /// Running: `done` of `total` replicates or steps, started at `started_at` (RFC 3339).
    Running {
        /// The registry's number of the run.
        id: u64,
        /// Replicates fitted or steps done.
        done: usize,
        /// All of them.
        total: usize,
        /// When it started.
        started_at: String,
    },
    /// It failed; why.
    Failed(String),
    /// Cancelled because the catalog changed; the sentence names both versions.
    Cancelled(String),
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
    registry.catalog_version_seen(outcome.key.catalog_version);
    let key = RunKey {
        fit: outcome.key.clone(),
        kind,
        size,
    };
    Ok(match registry.get(&key) {
        None => RunStatus::None,
        Some(progress) => live_status(registry, &progress),
    })
}

/// The status of a run this server knows, by its number: as [`run_status`], with the stored
/// result once it is stored.
///
/// # Errors
/// When the database cannot be read.
pub async fn run_status_of(
    pool: &SqlitePool,
    registry: &RunRegistry,
    progress: &RunProgress,
) -> sqlx::Result<RunStatus> {
    if let Ok(version) = history::current_version(pool).await {
        registry.catalog_version_seen(version);
    }
    if progress.state() == RunState::Stored {
        return run_status(
            pool,
            registry,
            &progress.outcome,
            progress.key.kind,
            progress.key.size,
        )
        .await;
    }
    Ok(live_status(registry, progress))
}

/// Where a run of the registry stands (a stored one still shows as running: its result is
/// read from the database by [`run_status`]).
fn live_status(registry: &RunRegistry, progress: &RunProgress) -> RunStatus {
    match progress.state() {
        RunState::Queued => match registry.queue_position(progress.id) {
            Some((position, of)) => RunStatus::Queued {
                id: progress.id,
                position,
                of,
                asked_at: progress.asked_at.clone(),
            },
            // Taken from the queue between the two looks: it is starting.
            None => running(progress),
        },
        RunState::Running | RunState::Stored => running(progress),
        RunState::Failed(why) => RunStatus::Failed(why),
        RunState::Cancelled { from, to } => RunStatus::Cancelled(cancelled_sentence(from, to)),
    }
}

fn running(progress: &RunProgress) -> RunStatus {
    RunStatus::Running {
        id: progress.id,
        done: progress.done.load(Ordering::Relaxed),
        total: progress.total,
        started_at: progress
            .started_at()
            .unwrap_or_else(|| progress.asked_at.clone()),
    }
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
        let outcome = Arc::new(FitOutcome {
            key: FitKey::new(
                1,
                &Relation::MSigma,
                Method::Conditional,
                &SampleFilter::default(),
                0.5,
                11.0,
            ),
            sample: Arc::new(Sample {
                points: points.clone(),
                ..Sample::default()
            }),
            fit: Ok(fit),
            spec: Ok(spec.clone()),
            fitted_at: String::new(),
        });
        let key = RunKey {
            fit: outcome.key.clone(),
            kind: RunKind::Bootstrap,
            size: 60,
        };
        let progress = RunProgress::new(1, key, 1, outcome.clone());
        let Ok(Computed::Done(ours)) = compute(&outcome, RunKind::Bootstrap, &progress, &|| None)
        else {
            panic!("the run did not finish");
        };
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

    /// A waiting run of `account` (a bootstrap of `size` at catalog `version`), put in `books`.
    fn waiting(books: &mut Books, pool: &SqlitePool, account: i64, size: usize, version: i64) {
        let outcome = Arc::new(FitOutcome {
            key: FitKey::new(
                version,
                &Relation::MSigma,
                Method::Conditional,
                &SampleFilter::default(),
                2.3,
                11.0,
            ),
            sample: Arc::default(),
            fit: Err(FitError::Unsupported {
                what: String::new(),
            }),
            spec: Err(FitError::Unsupported {
                what: String::new(),
            }),
            fitted_at: String::new(),
        });
        let key = RunKey {
            fit: outcome.key.clone(),
            kind: RunKind::Bootstrap,
            size,
        };
        books.next_id += 1;
        let progress = Arc::new(RunProgress::new(
            books.next_id,
            key,
            account,
            outcome.clone(),
        ));
        books.by_id.insert(progress.id, progress.clone());
        books.queue.push_back(Waiting {
            progress,
            outcome,
            pool: pool.clone(),
        });
    }

    #[tokio::test]
    async fn the_queue_is_first_come_first_served_one_run_per_account_and_per_slot() {
        let pool = SqlitePool::connect_lazy("sqlite::memory:").unwrap();
        let mut books = Books::default();
        for (account, size) in [(1, 20), (1, 21), (2, 22), (3, 23), (2, 24)] {
            waiting(&mut books, &pool, account, size, 1);
        }
        let sizes = |ws: &[Waiting]| ws.iter().map(|w| w.progress.total).collect::<Vec<_>>();
        // Two slots: account 1's first run, then account 2's (account 1's second is passed over).
        assert_eq!(sizes(&books.take_startable(2)), [20, 22]);
        let queued: Vec<usize> = books.queue.iter().map(|w| w.progress.total).collect();
        assert_eq!(queued, [21, 23, 24]);
        // Account 1 finishes: its second run goes first, being the oldest waiting.
        books.finished(1);
        assert_eq!(sizes(&books.take_startable(2)), [21]);
        books.finished(2);
        assert_eq!(sizes(&books.take_startable(2)), [23]);
        assert!(books.take_startable(2).is_empty());
    }

    #[tokio::test]
    async fn a_newer_version_drops_the_waiting_runs_of_older_ones_and_flags_running_ones() {
        let pool = SqlitePool::connect_lazy("sqlite::memory:").unwrap();
        let mut books = Books::default();
        books.supersede(4);
        waiting(&mut books, &pool, 1, 20, 4);
        waiting(&mut books, &pool, 2, 21, 4);
        let running = books.take_startable(1);
        books.supersede(5);
        assert!(books.queue.is_empty());
        let dropped = books.by_id[&2].state();
        assert_eq!(dropped, RunState::Cancelled { from: 4, to: 5 });
        assert_eq!(running[0].progress.newer_version(), Some(5));
        assert!(
            cancelled_sentence(4, 5).contains("the catalog changed (version 4 → 5)"),
            "{}",
            cancelled_sentence(4, 5)
        );
    }
}
