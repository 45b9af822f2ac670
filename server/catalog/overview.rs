//! Counts for the catalog-at-a-glance page.

use std::collections::HashMap;

use sqlx::SqlitePool;

use super::relation_rows::RelationRow;

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

/// The overview counts of one catalog version's rows (`relation_rows::RowsSnapshot::rows`,
/// one row per galaxy, read once per version), with `pending` submissions: what [`overview`]
/// asks the database for, counted in memory, so the page costs O(galaxies) in memory rather
/// than four aggregate queries over the measurement tables at every view.
pub fn of_rows(rows: &[RelationRow], pending: i64) -> Overview {
    fn counted<'a>(keys: impl Iterator<Item = &'a str>) -> Vec<Count> {
        let mut map: HashMap<&str, i64> = HashMap::new();
        for k in keys {
            *map.entry(k).or_default() += 1;
        }
        let mut out: Vec<Count> = map
            .into_iter()
            .map(|(key, n)| Count {
                key: key.to_owned(),
                n,
            })
            .collect();
        out.sort_by(|a, b| b.n.cmp(&a.n).then_with(|| a.key.cmp(&b.key)));
        out
    }
    let with_mass = || rows.iter().filter(|r| r.log_mbh.is_some());
    let limits = with_mass()
        .filter(|r| r.mbh_upper_limit == Some(true))
        .count();
    Overview {
        galaxies: i64::try_from(rows.len()).unwrap_or(i64::MAX),
        detections: i64::try_from(with_mass().count() - limits).unwrap_or(i64::MAX),
        upper_limits: i64::try_from(limits).unwrap_or(i64::MAX),
        pending,
        by_method: counted(with_mass().filter_map(|r| r.mbh_method.as_deref())),
        by_morphology: counted(rows.iter().map(|r| r.morphology.as_str())),
        by_bulge_kind: counted(rows.iter().map(|r| r.bulge_kind.as_str())),
    }
}

/// Gather the overview counts from the database (the reference for [`of_rows`]).
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
