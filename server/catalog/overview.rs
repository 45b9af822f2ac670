//! Counts for the catalog-at-a-glance page.

use sqlx::SqlitePool;

/// A labelled count.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct Count {
    /// The stored word being counted (e.g. 'elliptical').
    pub key: String,
    /// How many.
    pub n: i64,
}

/// What the overview page shows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Overview {
    /// Galaxies in the catalog.
    pub galaxies: i64,
    /// Adopted black-hole masses that are detections.
    pub detections: i64,
    /// Adopted black-hole masses that are upper limits.
    pub upper_limits: i64,
    /// Submissions waiting for review.
    pub pending: i64,
    /// Adopted black-hole masses by method.
    pub by_method: Vec<Count>,
    /// Galaxies by morphology.
    pub by_morphology: Vec<Count>,
    /// Galaxies by bulge kind.
    pub by_bulge_kind: Vec<Count>,
}

/// Gather the overview counts.
///
/// # Errors
/// When the database cannot be read.
pub async fn overview(pool: &SqlitePool) -> sqlx::Result<Overview> {
    let galaxies = sqlx::query_scalar("select count(*) from galaxy")
        .fetch_one(pool)
        .await?;
    let (detections, upper_limits): (i64, i64) = sqlx::query_as(
        "select coalesce(sum(m.upper_limit = 0), 0), coalesce(sum(m.upper_limit = 1), 0)
           from adopted_value a join measurement m on m.measurement_id = a.measurement_id
          where a.quantity = 'bh_mass'",
    )
    .fetch_one(pool)
    .await?;
    let pending = sqlx::query_scalar("select count(*) from submission where state = 'pending'")
        .fetch_one(pool)
        .await?;
    let by_method = sqlx::query_as(
        "select m.method as key, count(*) as n
           from adopted_value a join measurement m on m.measurement_id = a.measurement_id
          where a.quantity = 'bh_mass'
       group by m.method order by n desc, key",
    )
    .fetch_all(pool)
    .await?;
    let by_morphology = sqlx::query_as(
        "select morphology as key, count(*) as n from galaxy group by morphology order by n desc, key",
    )
    .fetch_all(pool)
    .await?;
    let by_bulge_kind = sqlx::query_as(
        "select bulge_kind as key, count(*) as n from galaxy group by bulge_kind order by n desc, key",
    )
    .fetch_all(pool)
    .await?;
    Ok(Overview {
        galaxies,
        detections,
        upper_limits,
        pending,
        by_method,
        by_morphology,
        by_bulge_kind,
    })
}
