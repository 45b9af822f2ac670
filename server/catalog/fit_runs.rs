//! Stored fit runs (bootstrap and posterior runs of a relation), so later visits reuse them.

use sqlx::SqlitePool;

/// A run to store.
#[derive(Debug, Clone, PartialEq)]
pub struct NewFitRun<'a> {
    /// Relation slug, e.g. 'm_sigma'.
    pub relation: &'a str,
    /// Estimator name, e.g. 'structural'.
    pub method: &'a str,
    /// The sample filter as canonical JSON.
    pub sample_filter: &'a str,
    /// Pivot x0, log10 units.
    pub pivot_log: f64,
    /// Parameter summaries as JSON.
    pub params_json: &'a str,
    /// Covariance with its parameter names as JSON.
    pub cov_json: &'a str,
    /// Detections used.
    pub n_detections: i64,
    /// Upper limits used.
    pub n_upper: i64,
    /// Catalog version the sample was read at.
    pub catalog_version: i64,
    /// Random seed.
    pub seed: Option<i64>,
    /// Every other setting as JSON; carries `kind` ('bootstrap' or 'posterior'), `size` and
    /// `pivot2_log`.
    pub settings_json: &'a str,
}

/// A stored run.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct FitRun {
    /// Key.
    pub fit_run_id: i64,
    /// Parameter summaries as JSON.
    pub params_json: String,
    /// Settings as JSON.
    pub settings_json: String,
    /// Seed.
    pub seed: Option<i64>,
    /// When it was stored (RFC 3339 UTC).
    pub created_at: String,
}

/// Store a finished run and return its key.
///
/// # Errors
/// A check of the schema, or any database error.
pub async fn insert_fit_run(pool: &SqlitePool, run: &NewFitRun<'_>) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into fit_run (relation, method, sample_filter, pivot_log, params_json, cov_json,
                              n_detections, n_upper, catalog_version, seed, settings_json)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
         returning fit_run_id",
    )
    .bind(run.relation)
    .bind(run.method)
    .bind(run.sample_filter)
    .bind(run.pivot_log)
    .bind(run.params_json)
    .bind(run.cov_json)
    .bind(run.n_detections)
    .bind(run.n_upper)
    .bind(run.catalog_version)
    .bind(run.seed)
    .bind(run.settings_json)
    .fetch_one(pool)
    .await
}

/// What identifies a stored run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunLookup<'a> {
    /// Relation slug.
    pub relation: &'a str,
    /// Estimator name.
    pub method: &'a str,
    /// Sample filter as canonical JSON.
    pub sample_filter: &'a str,
    /// Pivot x0, log10 units.
    pub pivot_log: f64,
    /// Second pivot (planes), log10 units.
    pub pivot2_log: f64,
    /// Catalog version.
    pub catalog_version: i64,
    /// 'bootstrap' or 'posterior'.
    pub kind: &'a str,
    /// Replicates or steps.
    pub size: i64,
}

/// The latest stored run matching `lookup`, if any.
///
/// # Errors
/// When the database cannot be read.
pub async fn find_fit_run(
    pool: &SqlitePool,
    lookup: &RunLookup<'_>,
) -> sqlx::Result<Option<FitRun>> {
    sqlx::query_as(
        "select fit_run_id, params_json, settings_json, seed, created_at
           from fit_run
          where relation = ? and method = ? and sample_filter = ? and pivot_log = ?
            and catalog_version = ?
            and json_extract(settings_json, '$.kind') = ?
            and json_extract(settings_json, '$.size') = ?
            and json_extract(settings_json, '$.pivot2_log') = ?
       order by fit_run_id desc
          limit 1",
    )
    .bind(lookup.relation)
    .bind(lookup.method)
    .bind(lookup.sample_filter)
    .bind(lookup.pivot_log)
    .bind(lookup.catalog_version)
    .bind(lookup.kind)
    .bind(lookup.size)
    .bind(lookup.pivot2_log)
    .fetch_optional(pool)
    .await
}
