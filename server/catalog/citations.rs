//! Fits shown with an identifier to cite (`cited_fit`, migration 8) and named releases
//! (`catalog_release`).

use sqlx::SqlitePool;

/// A fit as recorded when its identifier was first shown.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct CitedFit {
    /// The identifier.
    pub fit_id: String,
    /// Relation slug.
    pub relation: String,
    /// Estimator name.
    pub method: String,
    /// Sample filter, canonical text.
    pub sample_filter: String,
    /// Pivot, log10 units of the host property.
    pub pivot_log: f64,
    /// Second pivot (the plane), log10 M☉.
    pub pivot2_log: f64,
    /// Catalog version fitted.
    pub catalog_version: i64,
    /// The fitting code's version.
    pub code_version: String,
    /// The fitted parameters as first computed (JSON).
    pub result_json: String,
    /// When it was first shown (RFC 3339 UTC).
    pub created_at: String,
}

/// Records a fit under its identifier unless it is there already (the first result stays).
///
/// # Errors
/// Any database error.
pub async fn record(pool: &SqlitePool, fit: &CitedFit) -> sqlx::Result<()> {
    sqlx::query(
        "insert into cited_fit (fit_id, relation, method, sample_filter, pivot_log, pivot2_log,
                                catalog_version, code_version, result_json)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?)
         on conflict (fit_id) do nothing",
    )
    .bind(&fit.fit_id)
    .bind(&fit.relation)
    .bind(&fit.method)
    .bind(&fit.sample_filter)
    .bind(fit.pivot_log)
    .bind(fit.pivot2_log)
    .bind(fit.catalog_version)
    .bind(&fit.code_version)
    .bind(&fit.result_json)
    .execute(pool)
    .await?;
    Ok(())
}

/// The fit recorded under `fit_id`, if any.
///
/// # Errors
/// Any database error.
pub async fn find(pool: &SqlitePool, fit_id: &str) -> sqlx::Result<Option<CitedFit>> {
    sqlx::query_as(
        "select fit_id, relation, method, sample_filter, pivot_log, pivot2_log, catalog_version,
                code_version, result_json, created_at
           from cited_fit where fit_id = ?",
    )
    .bind(fit_id)
    .fetch_optional(pool)
    .await
}

/// A named release.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct Release {
    /// The name, e.g. "2027A".
    pub name: String,
    /// The catalog version released.
    pub catalog_version: i64,
    /// What it is for.
    pub note: String,
    /// Who named it, by username; None when the account is gone or it came from the command
    /// line.
    pub username: Option<String>,
    /// When it was named (RFC 3339 UTC).
    pub created_at: String,
}

/// Every release, newest version first.
///
/// # Errors
/// Any database error.
pub async fn releases(pool: &SqlitePool) -> sqlx::Result<Vec<Release>> {
    sqlx::query_as(
        "select r.name, r.catalog_version, r.note, a.username, r.created_at
           from catalog_release r left join account a on a.account_id = r.account_id
       order by r.catalog_version desc, r.name",
    )
    .fetch_all(pool)
    .await
}

/// The names of the releases of catalog version `version`, sorted.
///
/// # Errors
/// Any database error.
pub async fn releases_of(pool: &SqlitePool, version: i64) -> sqlx::Result<Vec<String>> {
    sqlx::query_scalar("select name from catalog_release where catalog_version = ? order by name")
        .bind(version)
        .fetch_all(pool)
        .await
}
