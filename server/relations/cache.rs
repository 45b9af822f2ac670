//! Fits kept per (catalog version, relation, estimator, sample filter, pivot).
//!
//! Every accepted change bumps the catalog version, so a key with an old version is never
//! asked for again; inserting a fit for a newer version drops the older ones. Fits run on the
//! blocking thread pool (`tokio::task::spawn_blocking`), never on the async runtime.

use std::collections::HashMap;
use std::sync::{Arc, Condvar, Mutex, PoisonError};
use std::time::Duration;

use sqlx::SqlitePool;

use super::{Relation, Sample, SampleFilter, build_sample};
use crate::catalog::history;
use crate::catalog::relation_rows::{self, RowsSnapshot};
use crate::fit::{self, Fit, FitError, FitSpec, Influence, Method, Shape};

/// Leave-one-out influence of every object of a fit, or why it could not be computed.
pub type InfluenceResult = Result<Vec<Influence>, FitError>;

/// Most fits kept at once. When full, the per-galaxy left-out fits go first (they are the many
/// and the cheap ones), and only if that is not enough does the cache start afresh.
const MAX_ENTRIES: usize = 512;

/// Make room in a full map: drop left-out entries first, everything only as a last resort.
fn make_room<V>(map: &mut HashMap<FitKey, V>) {
    if map.len() >= MAX_ENTRIES {
        map.retain(|k, _| k.left_out.is_none());
        if map.len() >= MAX_ENTRIES {
            map.clear();
        }
    }
}

/// Most objects held in the samples of the cached fits (and again in [`FitCache::latest`]):
/// a fit keeps its sample (about 0.5 kB an object with its galaxy's names and tags), so a
/// catalog of 100,000 objects fitted with many selections would otherwise fill the memory.
/// 600,000 objects is six survey-sized fits, about 300 MB.
const MAX_OBJECTS_HELD: usize = 600_000;

/// Makes room for a sample of `adding` objects: left-out fits go first, then every fit but
/// the default selections (structural, whole sample: what the pages show first), then all.
fn keep_objects_below(map: &mut HashMap<FitKey, Arc<FitOutcome>>, cap: usize, adding: usize) {
    let held = |map: &HashMap<FitKey, Arc<FitOutcome>>| -> usize {
        map.values().map(|o| o.sample.points.len()).sum::<usize>() + adding
    };
    if held(map) <= cap {
        return;
    }
    map.retain(|k, _| k.left_out.is_none());
    if held(map) <= cap {
        return;
    }
    let default_filter = SampleFilter::default()
        .for_method(Method::Structural)
        .canonical();
    map.retain(|k, _| k.method == Method::Structural.as_str() && k.filter == default_filter);
    if held(map) > cap {
        map.clear();
    }
}

/// What identifies a fit.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct FitKey {
    /// Catalog version the sample was read at.
    pub catalog_version: i64,
    /// Relation slug.
    pub relation: String,
    /// Estimator name ([`Method::as_str`]).
    pub method: &'static str,
    /// [`SampleFilter::canonical`].
    pub filter: String,
    /// Bits of the pivot and second pivot (log10 units), so equal floats give equal keys.
    pub pivots: (u64, u64),
    /// The galaxy left out of the sample (a galaxy's page shows where it falls against the
    /// others), or None for the whole sample.
    pub left_out: Option<i64>,
}

impl FitKey {
    /// The key of a fit.
    pub fn new(
        catalog_version: i64,
        relation: &Relation,
        method: Method,
        filter: &SampleFilter,
        pivot: f64,
        pivot2: f64,
    ) -> FitKey {
        FitKey {
            catalog_version,
            relation: relation.slug(),
            method: method.as_str(),
            filter: filter.canonical(),
            pivots: (pivot.to_bits(), pivot2.to_bits()),
            left_out: None,
        }
    }

    /// The same fit with one galaxy left out of its sample.
    #[must_use]
    pub fn leaving_out(&self, galaxy_id: i64) -> FitKey {
        FitKey {
            left_out: Some(galaxy_id),
            ..self.clone()
        }
    }
}

/// A finished fit with the sample it was made from.
#[derive(Debug, Clone)]
pub struct FitOutcome {
    /// Its key.
    pub key: FitKey,
    /// The sample (points and galaxies, same order); shared, so an outcome derived from
    /// another (a fit shifted by one object's influence) does not copy a survey-sized sample.
    pub sample: Arc<Sample>,
    /// The fit, or why there is none (too few points, limits with FITEXY, ...).
    pub fit: Result<Fit, FitError>,
    /// The specification used (method, shape, pivots).
    pub spec: Result<FitSpec, FitError>,
    /// When the fit was made, RFC 3339 UTC.
    pub fitted_at: String,
}

/// A computation under way: its result is sent once, to every request waiting for it.
type InFlight<T> = tokio::sync::watch::Receiver<Option<Arc<T>>>;

/// The fit cache shared by every handler; cheap to clone.
///
/// Every computation runs once per key, on a task of its own: requests asking for a fit or an
/// influence list that is being computed wait for that one computation (for at most the time
/// they choose, [`FitCache::fit_within`]), and a request that gives up does not cancel it, so
/// its result is there for the next visit. Nothing is computed twice because two people asked.
#[derive(Debug, Clone, Default)]
pub struct FitCache {
    inner: Arc<Mutex<HashMap<FitKey, Arc<FitOutcome>>>>,
    influence: Arc<Mutex<HashMap<FitKey, Arc<InfluenceResult>>>>,
    /// Fits and influence lists of versions older than the newest one computed, asked for by
    /// number (`?version=N`): kept apart, a few at a time, so that a past version's page does
    /// not compute them again at every visit and the current version's are never pushed out.
    past_fits: Arc<Mutex<HashMap<FitKey, Arc<FitOutcome>>>>,
    past_influence: Arc<Mutex<HashMap<FitKey, Arc<InfluenceResult>>>>,
    fits_under_way: Arc<Mutex<HashMap<FitKey, InFlight<FitOutcome>>>>,
    influence_under_way: Arc<Mutex<HashMap<FitKey, InFlight<InfluenceResult>>>>,
    /// The newest whole-sample fit of each (relation, estimator, sample, pivots), whatever its
    /// version: what a page shows while the fit of a newer version is being computed.
    latest: Arc<Mutex<HashMap<FitKey, Arc<FitOutcome>>>>,
    rows: Arc<tokio::sync::Mutex<Option<Arc<RowsSnapshot>>>>,
    /// Rows of past versions asked for by number (`?version=N`), a few at a time.
    past_rows: Arc<tokio::sync::Mutex<HashMap<i64, Arc<RowsSnapshot>>>>,
    drawn: Arc<Mutex<DrawnMap>>,
    /// Fit identifiers this server has recorded (`relations::citation::cite`), so that showing
    /// a fit again writes nothing.
    cited: Arc<Mutex<std::collections::HashSet<String>>>,
    hold: Hold,
}

/// Texts drawn from a fit (a page's charts as SVG, or why one could not be drawn): drawing a
/// survey-sized sample takes a tenth of a second, so a page keeps what it drew for the fit.
pub type Drawn = Vec<Result<String, String>>;

/// What was made from a fit, by fit and by name (a page's charts, a chart's points), of any
/// type: the cache knows fits, not what the doors make of them.
type DrawnMap = HashMap<(FitKey, String), Arc<dyn std::any::Any + Send + Sync>>;

/// Most drawn entries kept; beyond it the map starts afresh (they are redrawn on demand).
const MAX_DRAWN: usize = 64;

/// A key without its version: the slot of [`FitCache::latest`].
fn unversioned(key: &FitKey) -> FitKey {
    FitKey {
        catalog_version: 0,
        ..key.clone()
    }
}

/// Most fits (and, apart, influence lists) of past versions kept ([`FitCache::insert`]).
const MAX_PAST_ENTRIES: usize = 16;

/// Most objects held in the samples of past versions' fits: the five default fits of one
/// survey-sized version (what `/changes` and `/releases` read), about 250 MB.
const MAX_PAST_OBJECTS: usize = 500_000;

/// Most past versions whose rows are kept ([`FitCache::rows_at`]); beyond it the map starts
/// afresh (rows of a past version are read again from the history, identical).
const MAX_PAST_ROWS: usize = 2;

/// Most entries of [`FitCache::latest`]; beyond it the map starts afresh.
const MAX_LATEST: usize = 64;

impl FitCache {
    /// A cached fit, if any.
    pub fn get(&self, key: &FitKey) -> Option<Arc<FitOutcome>> {
        let hit = self
            .inner
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .get(key)
            .cloned();
        hit.or_else(|| {
            self.past_fits
                .lock()
                .unwrap_or_else(PoisonError::into_inner)
                .get(key)
                .cloned()
        })
    }

    /// The newest fit for `key` at any catalog version up to `key`'s (the fit itself when it
    /// is ready, else an older version's): what a page shows while the newer one is computed.
    pub fn latest(&self, key: &FitKey) -> Option<Arc<FitOutcome>> {
        self.latest
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .get(&unversioned(key))
            .filter(|o| o.key.catalog_version <= key.catalog_version)
            .cloned()
    }

    /// Stores a fit and returns the stored one (the one already there if another request was
    /// faster, so every caller of one key shares one value). Fits of older catalog versions
    /// are dropped.
    pub fn insert(&self, outcome: FitOutcome) -> Arc<FitOutcome> {
        let stored = {
            let mut map = self.inner.lock().unwrap_or_else(PoisonError::into_inner);
            let version = outcome.key.catalog_version;
            if map.keys().any(|k| k.catalog_version > version) {
                // A past version's fit (`?version=N`): kept apart, never in `latest`.
                drop(map);
                let mut past = self
                    .past_fits
                    .lock()
                    .unwrap_or_else(PoisonError::into_inner);
                if past.len() >= MAX_PAST_ENTRIES {
                    past.clear();
                }
                keep_objects_below(&mut past, MAX_PAST_OBJECTS, outcome.sample.points.len());
                return past
                    .entry(outcome.key.clone())
                    .or_insert_with(|| Arc::new(outcome))
                    .clone();
            }
            map.retain(|k, _| k.catalog_version >= version);
            make_room(&mut map);
            keep_objects_below(&mut map, MAX_OBJECTS_HELD, outcome.sample.points.len());
            map.entry(outcome.key.clone())
                .or_insert_with(|| Arc::new(outcome))
                .clone()
        };
        if stored.key.left_out.is_none() {
            let mut latest = self.latest.lock().unwrap_or_else(PoisonError::into_inner);
            if latest.len() >= MAX_LATEST {
                latest.clear();
            }
            keep_objects_below(&mut latest, MAX_OBJECTS_HELD, stored.sample.points.len());
            let slot = latest
                .entry(unversioned(&stored.key))
                .or_insert_with(|| stored.clone());
            if slot.key.catalog_version <= stored.key.catalog_version {
                *slot = stored.clone();
            }
        }
        stored
    }

    /// Number of fits held.
    pub fn len(&self) -> usize {
        self.inner
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .len()
    }

    /// Whether the cache holds no fit.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The cached fit for `key`, or `compute` run on the blocking pool and stored; waits as
    /// long as the computation takes.
    ///
    /// # Errors
    /// When the computation panicked.
    pub async fn get_or_compute(
        &self,
        key: &FitKey,
        compute: impl FnOnce() -> FitOutcome + Send + 'static,
    ) -> anyhow::Result<Arc<FitOutcome>> {
        self.fit_within(key, compute, None)
            .await?
            .ok_or_else(|| anyhow::anyhow!("a fit computation stopped without a result"))
    }

    /// The cached fit for `key`; else the computation under way for it, or `compute` started on
    /// the blocking pool, waited for at most `wait` (`None`: until it is done). `Ok(None)`
    /// when the wait ran out: the computation goes on and stores its fit.
    ///
    /// # Errors
    /// When the computation panicked.
    pub async fn fit_within(
        &self,
        key: &FitKey,
        compute: impl FnOnce() -> FitOutcome + Send + 'static,
        wait: Option<Duration>,
    ) -> anyhow::Result<Option<Arc<FitOutcome>>> {
        if let Some(hit) = self.get(key) {
            return Ok(Some(hit));
        }
        let cache = self.clone();
        let rx = under_way(&self.fits_under_way, key, self.hold.clone(), compute, {
            move |outcome: FitOutcome| cache.insert(outcome)
        });
        wait_for(rx, wait).await
    }

    /// The leave-one-out influence of every object of a fit, cached under the fit's key and
    /// computed on the blocking pool; waits as long as it takes.
    ///
    /// # Errors
    /// When the computation panicked.
    pub async fn influence(
        &self,
        outcome: &Arc<FitOutcome>,
    ) -> anyhow::Result<Arc<InfluenceResult>> {
        self.influence_within(outcome, None)
            .await?
            .ok_or_else(|| anyhow::anyhow!("an influence computation stopped without a result"))
    }

    /// The leave-one-out influence of every object of a fit (`fit::leave_one_out`), as
    /// [`FitCache::fit_within`]: cached, computed once, waited for at most `wait`.
    ///
    /// # Errors
    /// When the computation panicked.
    pub async fn influence_within(
        &self,
        outcome: &Arc<FitOutcome>,
        wait: Option<Duration>,
    ) -> anyhow::Result<Option<Arc<InfluenceResult>>> {
        let key = outcome.key.clone();
        for map in [&self.influence, &self.past_influence] {
            if let Some(hit) = map.lock().unwrap_or_else(PoisonError::into_inner).get(&key) {
                return Ok(Some(hit.clone()));
            }
        }
        let source = outcome.clone();
        let compute = move || match &source.spec {
            Ok(spec) => fit::leave_one_out(&source.sample.points, spec),
            Err(e) => Err(e.clone()),
        };
        let map = self.influence.clone();
        let past = self.past_influence.clone();
        let store_key = key.clone();
        let store = move |result: InfluenceResult| {
            let mut map = map.lock().unwrap_or_else(PoisonError::into_inner);
            // An older version's list never pushes out a newer one: it is kept apart.
            if map
                .keys()
                .any(|k| k.catalog_version > store_key.catalog_version)
            {
                let mut past = past.lock().unwrap_or_else(PoisonError::into_inner);
                if past.len() >= MAX_PAST_ENTRIES {
                    past.clear();
                }
                return past
                    .entry(store_key)
                    .or_insert_with(|| Arc::new(result))
                    .clone();
            }
            map.retain(|k, _| k.catalog_version >= store_key.catalog_version);
            make_room(&mut map);
            map.entry(store_key)
                .or_insert_with(|| Arc::new(result))
                .clone()
        };
        let rx = under_way(
            &self.influence_under_way,
            &key,
            self.hold.clone(),
            compute,
            store,
        );
        wait_for(rx, wait).await
    }

    /// The adopted rows of the current catalog version: read once per version, then shared by
    /// every fit and table of that version.
    ///
    /// # Errors
    /// When the database cannot be read.
    pub async fn rows(&self, pool: &SqlitePool) -> sqlx::Result<Arc<RowsSnapshot>> {
        let version = history::current_version(pool).await?;
        let mut slot = self.rows.lock().await;
        if let Some(snapshot) = slot.as_ref().filter(|s| s.version >= version) {
            return Ok(snapshot.clone());
        }
        let snapshot = Arc::new(relation_rows::snapshot(pool).await?);
        *slot = Some(snapshot.clone());
        Ok(snapshot)
    }

    /// The rows of catalog version `version` (`None`: the current one), from the history for a
    /// past version; the caller has resolved the version (`catalog::history::resolve`).
    ///
    /// # Errors
    /// When the database cannot be read.
    pub async fn rows_at(
        &self,
        pool: &SqlitePool,
        version: Option<i64>,
    ) -> sqlx::Result<Arc<RowsSnapshot>> {
        let Some(version) = version else {
            return self.rows(pool).await;
        };
        if let Some(current) = self.rows.lock().await.as_ref()
            && current.version == version
        {
            return Ok(current.clone());
        }
        let mut past = self.past_rows.lock().await;
        if let Some(hit) = past.get(&version) {
            return Ok(hit.clone());
        }
        let snapshot = Arc::new(relation_rows::snapshot_at(pool, version).await?);
        if past.len() >= MAX_PAST_ROWS {
            past.clear();
        }
        past.insert(version, snapshot.clone());
        Ok(snapshot)
    }

    /// Whether `id` is cited for the first time by this server (and notes it).
    pub fn first_citation(&self, id: &str) -> bool {
        self.cited
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .insert(id.to_owned())
    }

    /// Forgets that `id` was cited (its record could not be written).
    pub fn forget_citation(&self, id: &str) {
        self.cited
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .remove(id);
    }

    /// What `draw` draws from the fit `key` under the name `what` (e.g. the chart settings),
    /// drawn once per fit and kept while the fit's catalog version is current.
    pub fn drawn(&self, key: &FitKey, what: &str, draw: impl FnOnce() -> Drawn) -> Arc<Drawn> {
        self.made_from(key, what, draw)
    }

    /// What `make` makes from the fit `key` under the name `what` (e.g. a chart's points, so
    /// that every galaxy page of a survey-sized sample does not rebuild them), made once per
    /// fit and kept while the fit's catalog version is current. A name keeps one type.
    pub fn made_from<T: std::any::Any + Send + Sync>(
        &self,
        key: &FitKey,
        what: &str,
        make: impl FnOnce() -> T,
    ) -> Arc<T> {
        let slot = (key.clone(), what.to_owned());
        let hit = self
            .drawn
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .get(&slot)
            .cloned();
        if let Some(hit) = hit.and_then(|h| h.downcast::<T>().ok()) {
            return hit;
        }
        let made = Arc::new(make());
        let mut map = self.drawn.lock().unwrap_or_else(PoisonError::into_inner);
        map.retain(|(k, _), _| k.catalog_version >= key.catalog_version);
        if map.len() >= MAX_DRAWN {
            map.clear();
        }
        let stored = map.entry(slot).or_insert_with(|| made.clone()).clone();
        stored.downcast::<T>().unwrap_or(made)
    }

    /// Holds every computation of this cache before it starts until the returned guard is
    /// dropped: how the tests make a computation slow at will.
    pub fn hold(&self) -> HoldGuard {
        self.hold.take()
    }
}

/// The computation under way for `key` in `map`, or `compute` started on a task of its own
/// (its result goes through `store`, then to every waiter, then the entry goes).
fn under_way<T, C, S>(
    map: &Arc<Mutex<HashMap<FitKey, InFlight<T>>>>,
    key: &FitKey,
    hold: Hold,
    compute: C,
    store: S,
) -> InFlight<T>
where
    T: Send + Sync + 'static,
    C: FnOnce() -> T + Send + 'static,
    S: FnOnce(T) -> Arc<T> + Send + 'static,
{
    let mut running = map.lock().unwrap_or_else(PoisonError::into_inner);
    if let Some(rx) = running.get(key) {
        return rx.clone();
    }
    let (tx, rx) = tokio::sync::watch::channel(None);
    running.insert(key.clone(), rx.clone());
    let (map, key) = (map.clone(), key.clone());
    tokio::spawn(async move {
        let done = tokio::task::spawn_blocking(move || {
            hold.wait();
            compute()
        })
        .await;
        if let Ok(value) = done {
            // Receivers may all have gone; the stored value stays for the next visit.
            let _ = tx.send(Some(store(value)));
        }
        map.lock()
            .unwrap_or_else(PoisonError::into_inner)
            .remove(&key);
    });
    rx
}

/// Waits for a computation's result for at most `wait` (`None`: until it is done).
async fn wait_for<T>(
    mut rx: InFlight<T>,
    wait: Option<Duration>,
) -> anyhow::Result<Option<Arc<T>>> {
    let done = async {
        rx.wait_for(Option::is_some)
            .await
            .map(|v| v.clone())
            .map_err(|_| anyhow::anyhow!("a background computation panicked"))
    };
    match wait {
        None => done.await,
        Some(limit) => match tokio::time::timeout(limit, done).await {
            Ok(result) => result,
            Err(_) => Ok(None),
        },
    }
}

/// See [`FitCache::hold`].
#[derive(Debug, Clone, Default)]
struct Hold(Arc<(Mutex<usize>, Condvar)>);

impl Hold {
    fn take(&self) -> HoldGuard {
        *self.0.0.lock().unwrap_or_else(PoisonError::into_inner) += 1;
        HoldGuard(self.clone())
    }

    /// Blocks the calling (blocking-pool) thread while a guard is held.
    fn wait(&self) {
        let (count, released) = &*self.0;
        let mut held = count.lock().unwrap_or_else(PoisonError::into_inner);
        while *held > 0 {
            held = released.wait(held).unwrap_or_else(PoisonError::into_inner);
        }
    }
}

/// While alive, the cache's computations wait before they start ([`FitCache::hold`]).
#[derive(Debug)]
pub struct HoldGuard(Hold);

impl Drop for HoldGuard {
    fn drop(&mut self) {
        let (count, released) = &*(self.0).0;
        let mut held = count.lock().unwrap_or_else(PoisonError::into_inner);
        *held = held.saturating_sub(1);
        released.notify_all();
    }
}

/// The sample of a relation from the catalog as it is now, and the version it was read at.
///
/// # Errors
/// When the database cannot be read.
pub async fn load_sample(
    pool: &SqlitePool,
    cache: &FitCache,
    relation: &Relation,
    filter: &SampleFilter,
    soi_threshold: f64,
) -> sqlx::Result<(i64, Sample)> {
    let snapshot = cache.rows(pool).await?;
    Ok((
        snapshot.version,
        build_sample(
            &snapshot.rows,
            &snapshot.luminosities,
            relation,
            filter,
            soi_threshold,
        ),
    ))
}

/// The specification of a fit of `relation` (its shape, the pivots).
///
/// # Errors
/// [`FitError::InvalidSetting`] for a pivot that is not finite.
pub fn spec_for(
    relation: &Relation,
    method: Method,
    pivot: f64,
    pivot2: f64,
) -> Result<FitSpec, FitError> {
    let spec = FitSpec::new(method, relation.default_pivot()).with_pivot(pivot)?;
    if relation.shape() == Shape::Plane {
        spec.with_shape(Shape::Plane)?.with_pivot2(pivot2)
    } else {
        Ok(spec)
    }
}

/// The fit of `relation` with `method` over the galaxies `filter` selects, at catalog version
/// `version` (`None`: the current one; a past version is rebuilt from the history): from the
/// cache, or fitted now off the async runtime and cached.
///
/// # Errors
/// When the database cannot be read or the fitting task fails; a fit that cannot be made
/// (too few points, ...) is an `Ok` outcome whose `fit` says why.
pub async fn fitted(
    pool: &SqlitePool,
    cache: &FitCache,
    soi_threshold: f64,
    choice: FitChoiceRef<'_>,
    version: Option<i64>,
) -> anyhow::Result<Arc<FitOutcome>> {
    fitted_within(pool, cache, soi_threshold, choice, None, version)
        .await?
        .map_err(|_| anyhow::anyhow!("a fit computation stopped without a result"))
}

/// What selects a fit: the relation, the estimator, the sample and the pivots.
pub type FitChoiceRef<'a> = (&'a Relation, Method, &'a SampleFilter, (f64, f64));

/// As [`fitted`], waiting for the fit at most `wait` (`None`: as long as it takes). When the
/// wait runs out the fit goes on in the background and `Ok(Err(key))` names the fit being
/// computed (pages then show [`FitCache::latest`] and say so).
///
/// # Errors
/// As [`fitted`].
pub async fn fitted_within(
    pool: &SqlitePool,
    cache: &FitCache,
    soi_threshold: f64,
    (relation, method, filter, pivots): FitChoiceRef<'_>,
    wait: Option<Duration>,
    version: Option<i64>,
) -> anyhow::Result<Result<Arc<FitOutcome>, FitKey>> {
    let snapshot = cache.rows_at(pool, version).await?;
    // Limits left out for an estimator that cannot use them: the same fit as asking for it.
    let filter = &filter.for_method(method);
    let key = FitKey::new(
        snapshot.version,
        relation,
        method,
        filter,
        pivots.0,
        pivots.1,
    );
    if let Some(hit) = cache.get(&key) {
        return Ok(Ok(hit));
    }
    let spec = spec_for(relation, method, pivots.0, pivots.1);
    let compute_key = key.clone();
    let (relation, filter) = (relation.clone(), *filter);
    let done = cache
        .fit_within(
            &key,
            move || {
                let sample = build_sample(
                    &snapshot.rows,
                    &snapshot.luminosities,
                    &relation,
                    &filter,
                    soi_threshold,
                );
                let fit = spec.clone().and_then(|s| fit::fit(&sample.points, &s));
                FitOutcome {
                    key: compute_key,
                    sample: Arc::new(sample),
                    fit,
                    spec,
                    fitted_at: now_rfc3339(),
                }
            },
            wait,
        )
        .await?;
    Ok(done.ok_or(key))
}

/// The fit of `sample` with the galaxy `galaxy_id` left out, and that galaxy's index in
/// `sample`; None when the galaxy is not in the sample (it lacks a value the relation needs,
/// or the filter excludes it).
///
/// `full_key` is the key of the whole sample's fit (the sample must have been built at its
/// catalog version, relation, filter and pivots); the left-out fit is cached under
/// [`FitKey::leaving_out`], so a galaxy page visited again does not refit. The outcome's
/// sample holds the other galaxies only.
///
/// # Errors
/// When the fitting task fails; a fit that cannot be made (too few points, ...) is an `Ok`
/// outcome whose `fit` says why. The fit is `None` when it was not ready within `wait`.
pub async fn fitted_leaving_out(
    cache: &FitCache,
    full_key: &FitKey,
    relation: &Relation,
    method: Method,
    sample: &Sample,
    galaxy_id: i64,
    wait: Option<Duration>,
) -> anyhow::Result<Option<(Option<Arc<FitOutcome>>, usize)>> {
    let Some(index) = sample.members.iter().position(|m| m.galaxy_id == galaxy_id) else {
        return Ok(None);
    };
    let key = full_key.leaving_out(galaxy_id);
    if let Some(hit) = cache.get(&key) {
        return Ok(Some((Some(hit), index)));
    }
    let mut others = sample.clone();
    others.points.remove(index);
    others.members.remove(index);
    let pivots = (
        f64::from_bits(full_key.pivots.0),
        f64::from_bits(full_key.pivots.1),
    );
    let spec = spec_for(relation, method, pivots.0, pivots.1);
    let compute_key = key.clone();
    let outcome = cache
        .fit_within(
            &key,
            move || {
                let fit = spec.clone().and_then(|s| fit::fit(&others.points, &s));
                FitOutcome {
                    key: compute_key,
                    sample: Arc::new(others),
                    fit,
                    spec,
                    fitted_at: now_rfc3339(),
                }
            },
            wait,
        )
        .await?;
    Ok(Some((outcome, index)))
}

pub(super) fn now_rfc3339() -> String {
    time::OffsetDateTime::now_utc()
        .replace_nanosecond(0)
        .ok()
        .and_then(|t| {
            t.format(&time::format_description::well_known::Rfc3339)
                .ok()
        })
        .unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::atomic::{AtomicUsize, Ordering};

    fn outcome(key: &FitKey) -> FitOutcome {
        FitOutcome {
            key: key.clone(),
            sample: Arc::default(),
            fit: Err(FitError::AllUpperLimits),
            spec: Ok(FitSpec::new(Method::Structural, 2.3)),
            fitted_at: now_rfc3339(),
        }
    }

    #[tokio::test]
    async fn the_same_key_gives_the_same_fit_and_a_new_version_refits() {
        let cache = FitCache::default();
        let runs = Arc::new(AtomicUsize::new(0));
        let filter = SampleFilter::default();
        let key1 = FitKey::new(1, &Relation::MSigma, Method::Structural, &filter, 2.3, 11.0);
        let compute = |key: FitKey, runs: Arc<AtomicUsize>| {
            move || {
                runs.fetch_add(1, Ordering::SeqCst);
                outcome(&key)
            }
        };
        let a = cache
            .get_or_compute(&key1, compute(key1.clone(), runs.clone()))
            .await
            .unwrap();
        let b = cache
            .get_or_compute(&key1, compute(key1.clone(), runs.clone()))
            .await
            .unwrap();
        assert!(Arc::ptr_eq(&a, &b));
        assert_eq!(runs.load(Ordering::SeqCst), 1);
        // Another estimator or pivot is another fit.
        let other = FitKey::new(
            1,
            &Relation::MSigma,
            Method::Conditional,
            &filter,
            2.3,
            11.0,
        );
        assert_ne!(other, key1);
        // A version bump: a new key, fitted again, and the old fits are dropped.
        let key2 = FitKey::new(2, &Relation::MSigma, Method::Structural, &filter, 2.3, 11.0);
        let c = cache
            .get_or_compute(&key2, compute(key2.clone(), runs.clone()))
            .await
            .unwrap();
        assert!(!Arc::ptr_eq(&a, &c));
        assert_eq!(runs.load(Ordering::SeqCst), 2);
        assert!(cache.get(&key1).is_none());
        assert_eq!(cache.len(), 1);
    }

    #[tokio::test]
    async fn a_past_versions_fit_and_influence_are_kept_apart_and_push_nothing_out() {
        let cache = FitCache::default();
        let filter = SampleFilter::default();
        let key = |v| FitKey::new(v, &Relation::MSigma, Method::Structural, &filter, 2.3, 11.0);
        let current = cache.insert(outcome(&key(5)));
        let past = cache.insert(outcome(&key(2)));
        assert!(Arc::ptr_eq(&cache.get(&key(5)).unwrap(), &current));
        assert!(
            Arc::ptr_eq(&cache.get(&key(2)).unwrap(), &past),
            "asked again: no refit"
        );
        assert_eq!(
            cache.len(),
            1,
            "the current version's map holds only its own fits"
        );
        assert_eq!(cache.latest(&key(5)).unwrap().key.catalog_version, 5);
        // Influence lists: the past one is kept apart (asked again, the same list), and the
        // current one stays where it was.
        let now = cache
            .influence_within(&current, None)
            .await
            .unwrap()
            .unwrap();
        let then = cache.influence_within(&past, None).await.unwrap().unwrap();
        let again = cache.influence_within(&past, None).await.unwrap().unwrap();
        assert!(Arc::ptr_eq(&then, &again));
        let now_again = cache
            .influence_within(&current, None)
            .await
            .unwrap()
            .unwrap();
        assert!(Arc::ptr_eq(&now, &now_again));
        assert!(cache.past_influence.lock().unwrap().contains_key(&key(2)));
    }

    #[test]
    fn a_full_cache_drops_left_out_fits_before_whole_sample_fits() {
        let cache = FitCache::default();
        let filter = SampleFilter::default();
        let whole = FitKey::new(1, &Relation::MSigma, Method::Structural, &filter, 2.3, 11.0);
        cache.insert(outcome(&whole));
        for id in 0..(MAX_ENTRIES as i64 + 10) {
            cache.insert(outcome(&whole.leaving_out(id)));
        }
        assert!(
            cache.get(&whole).is_some(),
            "the whole-sample fit was evicted"
        );
        assert!(cache.len() <= MAX_ENTRIES);
    }

    #[test]
    fn held_samples_stay_under_the_object_cap_keeping_the_default_fits() {
        let filter = SampleFilter::default().for_method(Method::Structural);
        let other = SampleFilter {
            limits: super::super::LimitsChoice::Exclude,
            ..SampleFilter::default()
        };
        let sized = |key: FitKey, n: usize| {
            let mut o = outcome(&key);
            Arc::make_mut(&mut o.sample).points =
                vec![crate::fit::Point::new(2.0, 0.02, 8.0, 0.1); n];
            Arc::new(o)
        };
        let default_key = FitKey::new(1, &Relation::MSigma, Method::Structural, &filter, 2.3, 11.0);
        let other_key = FitKey::new(1, &Relation::MSigma, Method::Structural, &other, 2.3, 11.0);
        let mut map = HashMap::new();
        map.insert(default_key.clone(), sized(default_key.clone(), 40));
        map.insert(other_key.clone(), sized(other_key.clone(), 40));
        map.insert(
            default_key.leaving_out(3),
            sized(default_key.leaving_out(3), 39),
        );
        keep_objects_below(&mut map, 200, 10);
        assert_eq!(map.len(), 3, "under the cap nothing goes");
        keep_objects_below(&mut map, 100, 10);
        assert_eq!(map.len(), 2, "the left-out fit goes first");
        keep_objects_below(&mut map, 60, 10);
        assert!(
            map.contains_key(&default_key) && map.len() == 1,
            "the default stays"
        );
        keep_objects_below(&mut map, 30, 10);
        assert!(map.is_empty());
    }

    fn member(galaxy_id: i64) -> super::super::Member {
        super::super::Member {
            galaxy_id,
            name: format!("Galaxy {galaxy_id}"),
            slug: format!("galaxy-{galaxy_id}"),
            morphology: "elliptical".to_owned(),
            bulge_kind: "classical".to_owned(),
            centre_kind: "core".to_owned(),
            mass_method: "stellar_dynamics".to_owned(),
            resolved: None,
            log_distance: 1.2,
            log_sigma: None,
            log_mbulge: None,
            mbh_err_dex: (0.1, 0.1),
            mbh_reference: String::new(),
            activity: "quiescent".to_owned(),
            mbh_width_definition: String::new(),
            mbh_log_f: None,
        }
    }

    #[tokio::test]
    async fn a_galaxy_is_left_out_of_its_own_fit_and_the_fit_is_kept() {
        let sample = Sample {
            points: (0..4)
                .map(|i| crate::fit::Point::new(2.0 + 0.1 * f64::from(i), 0.02, 8.0, 0.1))
                .collect(),
            members: (10..14).map(member).collect(),
            ..Sample::default()
        };
        let cache = FitCache::default();
        let filter = SampleFilter::default();
        let full = FitKey::new(3, &Relation::MSigma, Method::Structural, &filter, 2.3, 11.0);
        let leave = |id| {
            fitted_leaving_out(
                &cache,
                &full,
                &Relation::MSigma,
                Method::Structural,
                &sample,
                id,
                None,
            )
        };
        assert!(leave(99).await.unwrap().is_none(), "not in the sample");
        let (outcome, index) = leave(12).await.unwrap().unwrap();
        let outcome = outcome.unwrap();
        assert_eq!(index, 2);
        assert_eq!(outcome.key.left_out, Some(12));
        assert_ne!(outcome.key, full);
        let ids: Vec<i64> = outcome.sample.members.iter().map(|m| m.galaxy_id).collect();
        assert_eq!(ids, [10, 11, 13]);
        assert_eq!(outcome.sample.points.len(), 3);
        assert!((outcome.sample.points[2].x - 2.3).abs() < 1e-12);
        // A second visit takes the cached fit.
        let again = leave(12).await.unwrap().unwrap().0.unwrap();
        assert!(Arc::ptr_eq(&outcome, &again));
        assert_eq!(cache.len(), 1);
    }

    #[test]
    fn the_plane_gets_both_pivots() {
        let spec = spec_for(&Relation::SigmaBulgePlane, Method::Structural, 2.3, 10.5).unwrap();
        assert_eq!(spec.shape, Shape::Plane);
        assert!((spec.pivot2 - 10.5).abs() < 1e-12);
        assert!(spec_for(&Relation::MSigma, Method::Structural, f64::NAN, 11.0).is_err());
    }
}
