//! The review queue's stored order: where each pending submission fell against the relations
//! at some catalog version (`submission_score`, migration 6), and the batch reads the scoring
//! needs (every pending submission with its measurements, galaxies and adopted values in three
//! queries, whatever the queue's length).

use std::collections::HashMap;

use sqlx::SqlitePool;

use super::begin_write;
use super::model::{Galaxy, Measurement};
use super::submissions::{Pending, SubmissionSummary};

/// Rows written per transaction, so a long queue never holds the write lock for long.
const WRITE_BATCH: usize = 2_000;

/// A pending submission's score.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Score {
    /// The submission.
    pub submission_id: i64,
    /// Largest |z| over the relations (0 without a mass).
    pub max_abs_z: f64,
    /// Whether it has a black-hole mass.
    pub has_mass: bool,
}

/// One line of a page of the queue: the submission and its stored score, if any.
#[derive(Debug, Clone, Copy, PartialEq, sqlx::FromRow)]
pub struct QueueLine {
    /// The submission.
    pub submission_id: i64,
    /// Its largest |z|, when scored.
    pub max_abs_z: Option<f64>,
    /// The catalog version it was scored at, when scored.
    pub catalog_version: Option<i64>,
}

/// Stores scores made at `version` for the submissions still pending (a submission decided
/// meanwhile is skipped), replacing older ones; in transactions of [`WRITE_BATCH`] rows.
///
/// # Errors
/// When the database cannot be written.
pub async fn store(pool: &SqlitePool, version: i64, scores: &[Score]) -> sqlx::Result<()> {
    for chunk in scores.chunks(WRITE_BATCH) {
        let mut tx = begin_write(pool).await?;
        for s in chunk {
            // A |z| beyond the column's range is a placement gone wrong, not a score.
            let z = if s.max_abs_z.is_finite() {
                s.max_abs_z.clamp(0.0, 999_999.0)
            } else {
                999_999.0
            };
            sqlx::query(
                "insert into submission_score (submission_id, catalog_version, max_abs_z, has_mass)
                 select submission_id, ?, ?, ? from submission
                  where submission_id = ? and state = 'pending'
                 on conflict (submission_id) do update set
                    catalog_version = excluded.catalog_version,
                    max_abs_z = excluded.max_abs_z,
                    has_mass = excluded.has_mass",
            )
            .bind(version)
            .bind(z)
            .bind(i64::from(s.has_mass))
            .bind(s.submission_id)
            .execute(&mut *tx)
            .await?;
        }
        tx.commit().await?;
    }
    Ok(())
}

/// The pending submissions with no score at `version`, oldest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn unscored(pool: &SqlitePool, version: i64) -> sqlx::Result<Vec<i64>> {
    sqlx::query_scalar(
        "select s.submission_id from submission s
           left join submission_score sc on sc.submission_id = s.submission_id
          where s.state = 'pending' and (sc.catalog_version is null or sc.catalog_version <> ?)
          order by s.submission_id",
    )
    .bind(version)
    .fetch_all(pool)
    .await
}

/// Number of pending submissions.
///
/// # Errors
/// When the database cannot be read.
pub async fn pending_count(pool: &SqlitePool) -> sqlx::Result<i64> {
    sqlx::query_scalar("select count(*) from submission where state = 'pending'")
        .fetch_one(pool)
        .await
}

/// `limit` pending submissions from `offset` in the queue's order: scored ones by largest
/// |z| first, then those not scored yet; oldest first among equals. O(limit) rows read
/// through the `submission_score_order` index.
///
/// # Errors
/// When the database cannot be read.
pub async fn page(pool: &SqlitePool, offset: i64, limit: i64) -> sqlx::Result<Vec<QueueLine>> {
    sqlx::query_as(
        "select s.submission_id, sc.max_abs_z, sc.catalog_version
           from submission s
           left join submission_score sc on sc.submission_id = s.submission_id
          where s.state = 'pending'
          order by sc.max_abs_z is null, sc.max_abs_z desc, s.submission_id
          limit ? offset ?",
    )
    .bind(limit)
    .bind(offset)
    .fetch_all(pool)
    .await
}

/// The measurement columns every read below selects (the `Measurement` row).
macro_rules! measurement_columns {
    () => {
        "select m.measurement_id, m.galaxy_id, m.submission_id, m.quantity, m.log_value,
                m.err_minus_dex, m.err_plus_dex, m.err_dex, m.upper_limit,
                m.limit_confidence_sigma, m.method, m.sigma_definition, m.aperture, m.band,
                m.source_distance_mpc, m.resolution_arcsec, m.reference, m.note, m.value_text,
                m.value_scale, s.state, (select vm.assumed_log_f from virial_measurement vm
                                   where vm.measurement_id = m.measurement_id) as assumed_log_f,
                (select vm.width_definition from virial_measurement vm
                  where vm.measurement_id = m.measurement_id) as virial_width, (a.measurement_id is not null) as adopted, m.created_at
           from measurement m
           join submission s on s.submission_id = m.submission_id
      left join adopted_value a on a.measurement_id = m.measurement_id"
    };
}

/// Everything scoring the pending submissions needs, read in three queries.
#[derive(Debug, Default)]
pub struct PendingBatch {
    /// Every pending submission's measurements, by submission, oldest submission first.
    pub submissions: Vec<(i64, Vec<Measurement>)>,
    /// The galaxies they concern, by key.
    pub galaxies: HashMap<i64, Galaxy>,
    /// The adopted measurements of those galaxies, by galaxy.
    pub adopted: HashMap<i64, Vec<Measurement>>,
}

/// Reads every pending submission with its measurements, their galaxies and those galaxies'
/// adopted values, inside one read transaction (one consistent state).
///
/// # Errors
/// When the database cannot be read.
pub async fn pending_batch(pool: &SqlitePool) -> sqlx::Result<PendingBatch> {
    let mut tx = pool.begin().await?;
    let measurements: Vec<Measurement> = sqlx::query_as(concat!(
        measurement_columns!(),
        " where s.state = 'pending' order by m.submission_id, m.measurement_id"
    ))
    .fetch_all(&mut *tx)
    .await?;
    let galaxies: Vec<Galaxy> = sqlx::query_as(
        "select galaxy_id, name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                distance_err_mpc, distance_method, activity
           from galaxy
          where galaxy_id in (select m.galaxy_id from measurement m
                                join submission s on s.submission_id = m.submission_id
                               where s.state = 'pending')",
    )
    .fetch_all(&mut *tx)
    .await?;
    let adopted: Vec<Measurement> = sqlx::query_as(concat!(
        measurement_columns!(),
        " where a.measurement_id is not null
            and m.galaxy_id in (select m2.galaxy_id from measurement m2
                                  join submission s2 on s2.submission_id = m2.submission_id
                                 where s2.state = 'pending')
          order by m.measurement_id"
    ))
    .fetch_all(&mut *tx)
    .await?;
    tx.commit().await?;
    let mut batch = PendingBatch::default();
    for m in measurements {
        match batch.submissions.last_mut() {
            Some((id, list)) if *id == m.submission_id => list.push(m),
            _ => batch.submissions.push((m.submission_id, vec![m])),
        }
    }
    batch.galaxies = galaxies.into_iter().map(|g| (g.galaxy_id, g)).collect();
    for m in adopted {
        batch.adopted.entry(m.galaxy_id).or_default().push(m);
    }
    Ok(batch)
}

/// The pending submissions `ids` with their measurements, in the order of `ids` (a page of
/// the queue); a submission decided meanwhile is left out.
///
/// # Errors
/// When the database cannot be read.
pub async fn pending_by_ids(pool: &SqlitePool, ids: &[i64]) -> sqlx::Result<Vec<Pending>> {
    let mut out = Vec::with_capacity(ids.len());
    for &id in ids {
        let Some(summary): Option<SubmissionSummary> = super::submissions::find(pool, id).await?
        else {
            continue;
        };
        if summary.state != "pending" {
            continue;
        }
        let measurements = super::submissions::measurements_of_submission(pool, id).await?;
        out.push(Pending {
            summary,
            measurements,
        });
    }
    Ok(out)
}
