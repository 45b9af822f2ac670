//! Submissions: members put measurements forward, reviewers accept or reject them.
//!
//! Every change here is one `BEGIN IMMEDIATE` transaction ([`super::begin_write`]) that writes
//! its audit event beside it: a submission with its measurements (and a new galaxy, when it
//! describes one) is stored whole or not at all. Accepting adopts the measurements and bumps the
//! catalog version, so cached fits made before it are never served again.

use std::collections::HashSet;

use sqlx::SqlitePool;

use super::accounts::for_log;
use super::galaxies::{self, RequestKey, RowKey, SubmissionSource};
use super::history::{self, NewEvent};
use super::model::{Galaxy, Measurement, NewGalaxy, NewMeasurement, Quantity, SubmissionState};

/// Which galaxy a submission measures.
#[derive(Debug, Clone, PartialEq)]
pub enum GalaxyChoice {
    /// A galaxy already in the catalog, by key.
    Existing(i64),
    /// A galaxy the submission describes; created with the submission.
    New(NewGalaxy),
}

/// Why a submission change was refused.
#[derive(Debug, thiserror::Error)]
pub enum SubmissionError {
    /// No such submission (or galaxy).
    #[error("There is no such submission.")]
    NotFound,
    /// The galaxy chosen does not exist.
    #[error("The chosen galaxy is not in the catalog.")]
    NoSuchGalaxy,
    /// A galaxy of that name already exists.
    #[error("A galaxy with that name is already in the catalog; choose it instead.")]
    NameTaken,
    /// A new galaxy's name looks like the name of a galaxy in the catalog, and the submitter
    /// did not confirm that it is new.
    #[error("{}", super::intake::look_alike_message(.name, .existing))]
    LooksLike {
        /// The new galaxy's name.
        name: String,
        /// The galaxy of the catalog it looks like.
        existing: galaxies::NamedGalaxy,
    },
    /// A submission needs at least one measurement.
    #[error("A submission needs at least one measurement.")]
    Empty,
    /// Only pending submissions can be withdrawn or reviewed.
    #[error("The submission is no longer pending.")]
    NotPending,
    /// Only the submitter may withdraw.
    #[error("Only the member who submitted it may withdraw a submission.")]
    NotYours,
    /// An idempotency key sent again with other content.
    #[error(
        "This idempotency key was used before for a different submission; use a new key for new content."
    )]
    KeyReused,
    /// Nobody reviews their own submission.
    #[error("A reviewer cannot accept or reject their own submission.")]
    OwnSubmission,
    /// The database failed.
    #[error("The database failed.")]
    Db(#[from] sqlx::Error),
}

/// What [`create`] stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Created {
    /// The new submission (or, for a replay, the first one).
    pub submission_id: i64,
    /// The galaxy it measures (new or existing).
    pub galaxy_id: i64,
    /// True when the request key was seen before with the same content: nothing was written
    /// and the first submission is answered again.
    pub replayed: bool,
}

/// The idempotency key of a form or API request, scoped to the submitter, with the SHA-256 of
/// the request's canonical content.
///
/// The content is hashed from the parsed request: the galaxy choice, every measurement as it
/// would be stored (canonical values and the text as typed) and the note. A retry sends the
/// same bytes, hence the same content; any change of what would be stored is other content.
#[must_use]
pub fn request_key(
    account_id: Option<i64>,
    client_key: &str,
    galaxy: &GalaxyChoice,
    measurements: &[NewMeasurement],
    note: &str,
) -> RequestKey {
    let submitter = account_id.map_or_else(|| "cli".to_owned(), |id| id.to_string());
    // Debug output of the parsed values is deterministic (f64 prints its shortest round-trip
    // form), which is all a fingerprint needs.
    let content = format!("{galaxy:?}\u{1f}{measurements:?}\u{1f}{note}");
    RequestKey {
        scoped: format!("{submitter}:{client_key}"),
        sha256: crate::auth::secret::sha256_hex(&content),
    }
}

/// Check a client's idempotency key: 1 to 100 visible ASCII characters.
///
/// # Errors
/// One sentence saying what is wrong.
pub fn validate_client_key(key: &str) -> Result<(), String> {
    if key.is_empty() || key.len() > 100 {
        return Err("An idempotency key has 1 to 100 characters.".to_owned());
    }
    if !key.bytes().all(|b| b.is_ascii_graphic()) {
        return Err(
            "An idempotency key is made of visible ASCII characters (no spaces).".to_owned(),
        );
    }
    Ok(())
}

/// Store a submission with its measurements, and the galaxy it describes if new, in one
/// transaction with a `submission_created` audit event. The state is `pending`.
///
/// With the same `request` key and content as an earlier submission, nothing is written and
/// the earlier submission is answered with `replayed = true`; the same key with other content is
/// [`SubmissionError::KeyReused`]. The n-th measurement's row key is `<scoped key>#<n>`.
///
/// A new galaxy whose name looks like one in the catalog is refused
/// ([`SubmissionError::LooksLike`]) unless `look_alike_confirmed`. The lookup runs in the write
/// transaction after the replay check, so a retried request that created its galaxy is still
/// answered with its first submission.
///
/// # Errors
/// [`SubmissionError::Empty`], [`SubmissionError::NoSuchGalaxy`],
/// [`SubmissionError::NameTaken`], [`SubmissionError::LooksLike`], [`SubmissionError::KeyReused`]
/// or a database failure; nothing is written then.
#[expect(
    clippy::too_many_arguments,
    reason = "what one submission is, its key, and the submitter's confirmation"
)]
pub async fn create(
    pool: &SqlitePool,
    account_id: Option<i64>,
    source: SubmissionSource,
    galaxy: &GalaxyChoice,
    measurements: &[NewMeasurement],
    note: &str,
    request: &RequestKey,
    look_alike_confirmed: bool,
) -> Result<Created, SubmissionError> {
    let mut tx = super::begin_write(pool).await?;
    // Inside the write transaction: two copies of one request arriving together are serialised,
    // and the second finds the first.
    let earlier: Option<(i64, Option<String>)> = sqlx::query_as(
        "select submission_id, request_sha256 from submission where idempotency_key = ?",
    )
    .bind(&request.scoped)
    .fetch_optional(&mut *tx)
    .await?;
    if let Some((submission_id, sha)) = earlier {
        tx.rollback().await?;
        if sha.as_deref() != Some(request.sha256.as_str()) {
            return Err(SubmissionError::KeyReused);
        }
        let galaxy_id: i64 = sqlx::query_scalar(
            "select galaxy_id from measurement where submission_id = ?
              order by measurement_id limit 1",
        )
        .bind(submission_id)
        .fetch_one(pool)
        .await?;
        return Ok(Created {
            submission_id,
            galaxy_id,
            replayed: true,
        });
    }
    let rows: Vec<RowKey> = (1..=measurements.len())
        .map(|n| RowKey {
            key: format!("{}#{n}", request.scoped),
            sha256: None,
        })
        .collect();
    let created = store(
        &mut tx,
        account_id,
        source,
        galaxy,
        measurements,
        &rows,
        note,
        Some(request),
        look_alike_confirmed,
    )
    .await?;
    tx.commit().await?;
    Ok(created)
}

/// A pending submission inside a caller's write transaction (CSV imports put many in one),
/// each measurement with its file row's key.
///
/// # Errors
/// As [`create`]; the caller's transaction is then to be rolled back.
pub async fn create_in(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    account_id: Option<i64>,
    source: SubmissionSource,
    galaxy: &GalaxyChoice,
    measurements: &[NewMeasurement],
    rows: &[RowKey],
    note: &str,
) -> Result<Created, SubmissionError> {
    // Catalog files check look-alikes themselves, per file (`csv_io::import_rows`).
    store(
        tx,
        account_id,
        source,
        galaxy,
        measurements,
        rows,
        note,
        None,
        true,
    )
    .await
}

#[expect(
    clippy::too_many_arguments,
    reason = "the one place both doors meet; each argument is a distinct part of a submission"
)]
async fn store(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    account_id: Option<i64>,
    source: SubmissionSource,
    galaxy: &GalaxyChoice,
    measurements: &[NewMeasurement],
    rows: &[RowKey],
    note: &str,
    request: Option<&RequestKey>,
    look_alike_confirmed: bool,
) -> Result<Created, SubmissionError> {
    if measurements.is_empty() {
        return Err(SubmissionError::Empty);
    }
    debug_assert_eq!(
        measurements.len(),
        rows.len(),
        "one row key per measurement"
    );
    let (galaxy_id, galaxy_name) = match galaxy {
        GalaxyChoice::Existing(id) => {
            let name: Option<String> =
                sqlx::query_scalar("select name from galaxy where galaxy_id = ?")
                    .bind(id)
                    .fetch_optional(&mut **tx)
                    .await?;
            (*id, name.ok_or(SubmissionError::NoSuchGalaxy)?)
        }
        GalaxyChoice::New(new) => {
            let taken: i64 = sqlx::query_scalar("select count(*) from galaxy where name = ?")
                .bind(&new.name)
                .fetch_one(&mut **tx)
                .await?;
            if taken > 0 {
                return Err(SubmissionError::NameTaken);
            }
            if !look_alike_confirmed
                && let Some(existing) = galaxies::look_alike(&mut **tx, &new.name).await?
            {
                return Err(SubmissionError::LooksLike {
                    name: new.name.clone(),
                    existing,
                });
            }
            let g = galaxies::insert_galaxy(tx, new).await?;
            (g.galaxy_id, g.name)
        }
    };
    let submission_id = galaxies::insert_submission(
        tx,
        account_id,
        source,
        SubmissionState::Pending,
        note,
        request,
    )
    .await?;
    for (m, row) in measurements.iter().zip(rows) {
        galaxies::insert_measurement(tx, galaxy_id, submission_id, m, row).await?;
    }
    history::record(
        tx,
        &NewEvent {
            account_id,
            action: "submission_created",
            entity: "submission",
            entity_id: Some(submission_id),
            summary: format!(
                "Submitted {} measurement(s) of '{}' for review.",
                measurements.len(),
                for_log(&galaxy_name)
            ),
        },
    )
    .await?;
    Ok(Created {
        submission_id,
        galaxy_id,
        replayed: false,
    })
}

/// A submission as listed.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct SubmissionSummary {
    /// Key.
    pub submission_id: i64,
    /// Submitter; None for command-line imports.
    pub account_id: Option<i64>,
    /// Submitter's name.
    pub username: Option<String>,
    /// Stored state word.
    pub state: String,
    /// Stored source word.
    pub source: String,
    /// Submitter's note.
    pub note: String,
    /// When submitted (RFC 3339 UTC).
    pub created_at: String,
    /// The galaxy measured (the first measurement's).
    pub galaxy_id: i64,
    /// Its name.
    pub galaxy_name: String,
    /// Its slug.
    pub galaxy_slug: String,
    /// Number of measurements.
    pub n_measurements: i64,
}

/// The select list of [`SubmissionSummary`], as a literal so queries can `concat!` to it.
macro_rules! summary_select {
    () => {
        "select s.submission_id, s.account_id, a.username, s.state, s.source,
            s.note, s.created_at, g.galaxy_id, g.name as galaxy_name, g.slug as galaxy_slug,
            (select count(*) from measurement m2 where m2.submission_id = s.submission_id)
                as n_measurements
       from submission s
       left join account a on a.account_id = s.account_id
       join galaxy g on g.galaxy_id = (select m.galaxy_id from measurement m
                                        where m.submission_id = s.submission_id
                                     order by m.measurement_id limit 1)"
    };
}

/// One submission by key.
///
/// # Errors
/// When the database cannot be read.
pub async fn find(
    pool: &SqlitePool,
    submission_id: i64,
) -> sqlx::Result<Option<SubmissionSummary>> {
    sqlx::query_as(concat!(summary_select!(), " where s.submission_id = ?"))
        .bind(submission_id)
        .fetch_optional(pool)
        .await
}

/// A member's submissions, newest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn list_for_account(
    pool: &SqlitePool,
    account_id: i64,
) -> sqlx::Result<Vec<SubmissionSummary>> {
    sqlx::query_as(concat!(
        summary_select!(),
        " where s.account_id = ? order by s.submission_id desc"
    ))
    .bind(account_id)
    .fetch_all(pool)
    .await
}

/// The measurements of one submission, in the order they were given.
///
/// # Errors
/// When the database cannot be read.
pub async fn measurements_of_submission(
    pool: &SqlitePool,
    submission_id: i64,
) -> sqlx::Result<Vec<Measurement>> {
    sqlx::query_as(
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
      left join adopted_value a on a.measurement_id = m.measurement_id
          where m.submission_id = ?
       order by m.measurement_id",
    )
    .bind(submission_id)
    .fetch_all(pool)
    .await
}

/// A pending submission with its measurements, for the review queue.
#[derive(Debug, Clone, PartialEq)]
pub struct Pending {
    /// The submission.
    pub summary: SubmissionSummary,
    /// Its measurements.
    pub measurements: Vec<Measurement>,
}

/// Every pending submission with its measurements, oldest first (the web layer re-orders).
///
/// # Errors
/// When the database cannot be read.
pub async fn review_queue(pool: &SqlitePool) -> sqlx::Result<Vec<Pending>> {
    let summaries: Vec<SubmissionSummary> = sqlx::query_as(concat!(
        summary_select!(),
        " where s.state = 'pending' order by s.submission_id"
    ))
    .fetch_all(pool)
    .await?;
    let mut out = Vec::with_capacity(summaries.len());
    for summary in summaries {
        let measurements = measurements_of_submission(pool, summary.submission_id).await?;
        out.push(Pending {
            summary,
            measurements,
        });
    }
    Ok(out)
}

/// The submitter and state of a submission, read inside a write transaction.
async fn owner_and_state(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    submission_id: i64,
) -> Result<(Option<i64>, String), SubmissionError> {
    let row: Option<(Option<i64>, String)> =
        sqlx::query_as("select account_id, state from submission where submission_id = ?")
            .bind(submission_id)
            .fetch_optional(&mut **tx)
            .await?;
    row.ok_or(SubmissionError::NotFound)
}

async fn set_state(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    submission_id: i64,
    state: SubmissionState,
) -> sqlx::Result<()> {
    sqlx::query(
        "update submission set state = ?, updated_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where submission_id = ?",
    )
    .bind(state.as_str())
    .bind(submission_id)
    .execute(&mut **tx)
    .await?;
    Ok(())
}

/// Withdraw one's own pending submission (`submission_withdrawn` audit event).
///
/// # Errors
/// [`SubmissionError::NotFound`], [`SubmissionError::NotYours`],
/// [`SubmissionError::NotPending`] or a database failure.
pub async fn withdraw(
    pool: &SqlitePool,
    account_id: i64,
    submission_id: i64,
) -> Result<(), SubmissionError> {
    let mut tx = super::begin_write(pool).await?;
    let (owner, state) = owner_and_state(&mut tx, submission_id).await?;
    if owner != Some(account_id) {
        return Err(SubmissionError::NotYours);
    }
    if state != SubmissionState::Pending.as_str() {
        return Err(SubmissionError::NotPending);
    }
    set_state(&mut tx, submission_id, SubmissionState::Withdrawn).await?;
    history::record(
        &mut tx,
        &NewEvent {
            account_id: Some(account_id),
            action: "submission_withdrawn",
            entity: "submission",
            entity_id: Some(submission_id),
            summary: format!("Withdrew submission {submission_id}."),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(())
}

/// An adopted measurement that a submitted one would replace.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct Clash {
    /// The submitted measurement.
    pub new_measurement_id: i64,
    /// The measurement adopted now for the same galaxy, quantity and band.
    pub adopted_measurement_id: i64,
    /// What the two measure (stored as [`Quantity::as_str`]).
    #[sqlx(try_from = "String")]
    pub quantity: Quantity,
    /// Band ('' unless luminosity).
    pub band: String,
    /// The adopted value as it was entered.
    pub adopted_value_text: String,
    /// The adopted canonical log10 value.
    pub adopted_log_value: f64,
}

/// The adopted measurements each measurement of a submission would replace.
///
/// # Errors
/// When the database cannot be read.
pub async fn clashes(pool: &SqlitePool, submission_id: i64) -> sqlx::Result<Vec<Clash>> {
    sqlx::query_as(
        "select m.measurement_id as new_measurement_id, a.measurement_id as adopted_measurement_id,
                m.quantity, m.band, old.value_text as adopted_value_text,
                old.log_value as adopted_log_value
           from measurement m
           join adopted_value a on a.galaxy_id = m.galaxy_id and a.quantity = m.quantity
                               and a.band = m.band
           join measurement old on old.measurement_id = a.measurement_id
          where m.submission_id = ?
       order by m.measurement_id",
    )
    .bind(submission_id)
    .fetch_all(pool)
    .await
}

/// Accept a pending submission: its state becomes `accepted`, each measurement becomes the
/// adopted value for its galaxy, quantity and band, except those in `keep_old` (measurement ids
/// whose galaxy already has an adopted value the reviewer keeps). Writes the review row, bumps
/// the catalog version and writes `submission_accepted`, all in one transaction. Returns the
/// new catalog version.
///
/// # Errors
/// [`SubmissionError::NotFound`], [`SubmissionError::NotPending`],
/// [`SubmissionError::OwnSubmission`] or a database failure; nothing is written then.
pub async fn accept(
    pool: &SqlitePool,
    reviewer_id: i64,
    submission_id: i64,
    keep_old: &HashSet<i64>,
    note: &str,
) -> Result<i64, SubmissionError> {
    let mut tx = super::begin_write(pool).await?;
    let (owner, state) = owner_and_state(&mut tx, submission_id).await?;
    // The web layer asks `auth::may_review` first (role included); this is the last line.
    if owner == Some(reviewer_id) {
        return Err(SubmissionError::OwnSubmission);
    }
    if state != SubmissionState::Pending.as_str() {
        return Err(SubmissionError::NotPending);
    }
    let rows: Vec<(i64, i64)> = sqlx::query_as(
        "select m.measurement_id,
                exists (select 1 from adopted_value a where a.galaxy_id = m.galaxy_id
                           and a.quantity = m.quantity and a.band = m.band)
           from measurement m where m.submission_id = ? order by m.measurement_id",
    )
    .bind(submission_id)
    .fetch_all(&mut *tx)
    .await?;
    // First the version, so the history spans of what is adopted start at it (migration 8).
    let version = history::bump_version(&mut tx).await?;
    let mut adopted = 0;
    for (id, has_adopted) in rows {
        if has_adopted == 1 && keep_old.contains(&id) {
            continue;
        }
        galaxies::adopt(&mut tx, id).await?;
        adopted += 1;
    }
    set_state(&mut tx, submission_id, SubmissionState::Accepted).await?;
    insert_review(&mut tx, submission_id, reviewer_id, "accepted", note).await?;
    history::record(
        &mut tx,
        &NewEvent {
            account_id: Some(reviewer_id),
            action: "submission_accepted",
            entity: "submission",
            entity_id: Some(submission_id),
            summary: format!(
                "Accepted submission {submission_id}; {adopted} measurement(s) adopted."
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(version)
}

/// Reject a pending submission with a note (review row and `submission_rejected`, one
/// transaction). The catalog version does not change: nothing adopted changed.
///
/// # Errors
/// [`SubmissionError::NotFound`], [`SubmissionError::NotPending`],
/// [`SubmissionError::OwnSubmission`] or a database failure.
pub async fn reject(
    pool: &SqlitePool,
    reviewer_id: i64,
    submission_id: i64,
    note: &str,
) -> Result<(), SubmissionError> {
    let mut tx = super::begin_write(pool).await?;
    let (owner, state) = owner_and_state(&mut tx, submission_id).await?;
    // The web layer asks `auth::may_review` first (role included); this is the last line.
    if owner == Some(reviewer_id) {
        return Err(SubmissionError::OwnSubmission);
    }
    if state != SubmissionState::Pending.as_str() {
        return Err(SubmissionError::NotPending);
    }
    set_state(&mut tx, submission_id, SubmissionState::Rejected).await?;
    insert_review(&mut tx, submission_id, reviewer_id, "rejected", note).await?;
    history::record(
        &mut tx,
        &NewEvent {
            account_id: Some(reviewer_id),
            action: "submission_rejected",
            entity: "submission",
            entity_id: Some(submission_id),
            summary: format!("Rejected submission {submission_id}."),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(())
}

async fn insert_review(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    submission_id: i64,
    account_id: i64,
    decision: &str,
    note: &str,
) -> sqlx::Result<()> {
    sqlx::query(
        "insert into review (submission_id, account_id, decision, note) values (?, ?, ?, ?)",
    )
    .bind(submission_id)
    .bind(account_id)
    .bind(decision)
    .bind(note)
    .execute(&mut **tx)
    .await?;
    Ok(())
}

/// Every galaxy as (key, name, slug), by name, for the submission form's chooser.
///
/// # Errors
/// When the database cannot be read.
pub async fn galaxy_names(pool: &SqlitePool) -> sqlx::Result<Vec<(i64, String, String)>> {
    sqlx::query_as("select galaxy_id, name, slug from galaxy order by name")
        .fetch_all(pool)
        .await
}

/// One galaxy by key.
///
/// # Errors
/// When the database cannot be read.
pub async fn galaxy_by_id(pool: &SqlitePool, galaxy_id: i64) -> sqlx::Result<Option<Galaxy>> {
    sqlx::query_as(
        "select galaxy_id, name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                distance_err_mpc, distance_method, activity
           from galaxy where galaxy_id = ?",
    )
    .bind(galaxy_id)
    .fetch_optional(pool)
    .await
}

/// A reviewer's decision as shown on the galaxy page.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct ReviewNote {
    /// The submission decided on.
    pub submission_id: i64,
    /// 'accepted' or 'rejected'.
    pub decision: String,
    /// The reviewer's name.
    pub reviewer: String,
    /// The reviewer's note.
    pub note: String,
    /// When (RFC 3339 UTC).
    pub created_at: String,
}

/// Every review of a submission that measured this galaxy, newest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn reviews_of_galaxy(pool: &SqlitePool, galaxy_id: i64) -> sqlx::Result<Vec<ReviewNote>> {
    sqlx::query_as(
        "select r.submission_id, r.decision, a.username as reviewer, r.note, r.created_at
           from review r join account a on a.account_id = r.account_id
          where r.submission_id in (select submission_id from measurement where galaxy_id = ?)
       order by r.review_id desc",
    )
    .bind(galaxy_id)
    .fetch_all(pool)
    .await
}

/// Every review of the submissions of one account, newest first (the submitter's own pages).
///
/// # Errors
/// When the database cannot be read.
pub async fn reviews_for_account(
    pool: &SqlitePool,
    account_id: i64,
) -> sqlx::Result<Vec<ReviewNote>> {
    sqlx::query_as(
        "select r.submission_id, r.decision, a.username as reviewer, r.note, r.created_at
           from review r join account a on a.account_id = r.account_id
           join submission s on s.submission_id = r.submission_id
          where s.account_id = ?
       order by r.review_id desc",
    )
    .bind(account_id)
    .fetch_all(pool)
    .await
}

/// Every review of one submission, newest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn reviews_of_submission(
    pool: &SqlitePool,
    submission_id: i64,
) -> sqlx::Result<Vec<ReviewNote>> {
    sqlx::query_as(
        "select r.submission_id, r.decision, a.username as reviewer, r.note, r.created_at
           from review r join account a on a.account_id = r.account_id
          where r.submission_id = ?
       order by r.review_id desc",
    )
    .bind(submission_id)
    .fetch_all(pool)
    .await
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalog::model::{
        Activity, BulgeKind, CentreKind, DistanceMethod, Morphology, Quantity,
    };
    use crate::units::{self, Scale};

    async fn temp_pool() -> (tempfile::TempDir, SqlitePool) {
        let dir = tempfile::tempdir().unwrap();
        let pool = crate::catalog::connect(&dir.path().join("t.sqlite"))
            .await
            .unwrap();
        (dir, pool)
    }

    async fn account(pool: &SqlitePool, name: &str, role: &str) -> i64 {
        crate::catalog::accounts::create_account(pool, name, "x", role, None)
            .await
            .unwrap()
            .unwrap()
    }

    fn galaxy(name: &str) -> NewGalaxy {
        NewGalaxy {
            name: name.into(),
            morphology: Morphology::Elliptical,
            bulge_kind: BulgeKind::Classical,
            centre_kind: CentreKind::Core,
            distance_mpc: 20.0,
            distance_err_mpc: 1.0,
            distance_method: DistanceMethod::Sbf,
            activity: Activity::Unknown,
        }
    }

    fn mass(text: &str) -> NewMeasurement {
        let e = units::parse_entry(text, units::Quantity::BlackHoleMass, Scale::Linear).unwrap();
        NewMeasurement {
            quantity: Quantity::BlackHoleMass,
            log_value: e.log_value,
            err_minus_dex: e.err_minus_dex,
            err_plus_dex: e.err_plus_dex,
            err_dex: e.err_dex,
            upper_limit: e.upper_limit,
            limit_confidence_sigma: None,
            method: "stellar_dynamics".into(),
            sigma_definition: String::new(),
            aperture: String::new(),
            band: String::new(),
            source_distance_mpc: Some(20.0),
            resolution_arcsec: Some(0.1),
            reference: "Test et al. 2020".into(),
            note: String::new(),
            value_text: e.text,
            value_scale: "linear".into(),
            virial: None,
        }
    }

    /// [`create`] with a fresh idempotency key (look-alike names confirmed).
    async fn create_fresh(
        pool: &SqlitePool,
        account_id: Option<i64>,
        source: SubmissionSource,
        galaxy: &GalaxyChoice,
        measurements: &[NewMeasurement],
        note: &str,
    ) -> Result<Created, SubmissionError> {
        static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
        let n = NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        let key = request_key(account_id, &format!("k{n}"), galaxy, measurements, note);
        create(
            pool,
            account_id,
            source,
            galaxy,
            measurements,
            note,
            &key,
            true,
        )
        .await
    }

    /// [`create`] through the API door with the note "n" (look-alike names confirmed).
    async fn api_submit(
        pool: &SqlitePool,
        account_id: i64,
        galaxy: &GalaxyChoice,
        measurements: &[NewMeasurement],
        key: &RequestKey,
    ) -> Result<Created, SubmissionError> {
        create(
            pool,
            Some(account_id),
            SubmissionSource::Api,
            galaxy,
            measurements,
            "n",
            key,
            true,
        )
        .await
    }

    #[tokio::test]
    async fn the_same_request_twice_adds_nothing_and_other_content_under_its_key_is_refused() {
        let (_d, pool) = temp_pool().await;
        let member = account(&pool, "member1", "member").await;
        let other = account(&pool, "member2", "member").await;
        let g = GalaxyChoice::New(galaxy("Tesk 30"));
        let ms = [mass("2.4e8 ± 0.3e8")];
        let key = request_key(Some(member), "abc", &g, &ms, "n");
        let first = api_submit(&pool, member, &g, &ms, &key).await.unwrap();
        assert!(!first.replayed);
        // A retry (even after the galaxy now exists) answers the first submission.
        let again = api_submit(&pool, member, &g, &ms, &key).await.unwrap();
        assert_eq!(again.submission_id, first.submission_id);
        assert_eq!(again.galaxy_id, first.galaxy_id);
        assert!(again.replayed);
        assert_eq!(count(&pool, "submission").await, 1);
        assert_eq!(count(&pool, "measurement").await, 1);
        let created: i64 = sqlx::query_scalar(
            "select count(*) from audit_event where action = 'submission_created'",
        )
        .fetch_one(&pool)
        .await
        .unwrap();
        assert_eq!(created, 1);
        // Everything stored is content, the value's text as typed included.
        assert_ne!(
            key.sha256,
            request_key(Some(member), "abc", &g, &[mass("2.40e8 ± 0.30e8")], "n").sha256
        );
        assert_ne!(
            key.sha256,
            request_key(Some(member), "abc", &g, &ms, "m").sha256
        );
        // The same key with another value is refused, nothing written.
        let changed = [mass("2.5e8 ± 0.3e8")];
        let key2 = request_key(Some(member), "abc", &g, &changed, "n");
        let err = api_submit(&pool, member, &g, &changed, &key2)
            .await
            .unwrap_err();
        assert!(matches!(err, SubmissionError::KeyReused), "{err}");
        assert_eq!(count(&pool, "measurement").await, 1);
        // Another member may use the same client key for their own request.
        let g2 = GalaxyChoice::Existing(first.galaxy_id);
        let key3 = request_key(Some(other), "abc", &g2, &changed, "n");
        let theirs = api_submit(&pool, other, &g2, &changed, &key3)
            .await
            .unwrap();
        assert!(!theirs.replayed);
        assert_eq!(count(&pool, "measurement").await, 2);
    }

    #[test]
    fn client_keys_are_visible_ascii_up_to_100_characters() {
        assert!(validate_client_key("a1-B_2.x:y").is_ok());
        assert!(validate_client_key(&"k".repeat(100)).is_ok());
        for bad in ["", "has space", "tab\tkey", "é", &"k".repeat(101)] {
            assert!(validate_client_key(bad).is_err(), "{bad:?}");
        }
    }

    async fn count(pool: &SqlitePool, table: &str) -> i64 {
        sqlx::query_scalar(sqlx::AssertSqlSafe(format!("select count(*) from {table}")))
            .fetch_one(pool)
            .await
            .unwrap()
    }

    #[tokio::test]
    async fn a_submission_is_stored_whole_pending_and_audited() {
        let (_d, pool) = temp_pool().await;
        let member = account(&pool, "member1", "member").await;
        let created = create_fresh(
            &pool,
            Some(member),
            SubmissionSource::Form,
            &GalaxyChoice::New(galaxy("Tesk 9")),
            &[mass("2.4e8 ± 0.3e8"), mass("<3e7")],
            "first",
        )
        .await
        .unwrap();
        let list = list_for_account(&pool, member).await.unwrap();
        assert_eq!(list.len(), 1);
        assert_eq!(list[0].state, "pending");
        assert_eq!(list[0].n_measurements, 2);
        assert_eq!(list[0].galaxy_id, created.galaxy_id);
        let events: i64 = sqlx::query_scalar(
            "select count(*) from audit_event where action = 'submission_created'",
        )
        .fetch_one(&pool)
        .await
        .unwrap();
        assert_eq!(events, 1);
        // The queue shows it with both measurements; nothing is adopted yet.
        let queue = review_queue(&pool).await.unwrap();
        assert_eq!(queue.len(), 1);
        assert_eq!(queue[0].measurements.len(), 2);
        assert_eq!(count(&pool, "adopted_value").await, 0);
    }

    #[tokio::test]
    async fn a_failing_measurement_writes_nothing_not_even_the_new_galaxy() {
        let (_d, pool) = temp_pool().await;
        let mut bad = mass("2e8");
        bad.log_value = 20.0; // outside the schema's range check for black-hole masses
        let err = create_fresh(
            &pool,
            None,
            SubmissionSource::Form,
            &GalaxyChoice::New(galaxy("Tesk 10")),
            &[mass("2e8"), bad],
            "",
        )
        .await
        .unwrap_err();
        assert!(matches!(err, SubmissionError::Db(_)), "{err}");
        assert_eq!(count(&pool, "galaxy").await, 0);
        assert_eq!(count(&pool, "submission").await, 0);
        assert_eq!(count(&pool, "measurement").await, 0);
        assert_eq!(count(&pool, "audit_event").await, 0);
    }

    #[tokio::test]
    async fn only_the_submitter_withdraws_and_only_while_pending() {
        let (_d, pool) = temp_pool().await;
        let member = account(&pool, "member1", "member").await;
        let other = account(&pool, "member2", "member").await;
        let c = create_fresh(
            &pool,
            Some(member),
            SubmissionSource::Form,
            &GalaxyChoice::New(galaxy("Tesk 11")),
            &[mass("1e8")],
            "",
        )
        .await
        .unwrap();
        assert!(matches!(
            withdraw(&pool, other, c.submission_id).await,
            Err(SubmissionError::NotYours)
        ));
        withdraw(&pool, member, c.submission_id).await.unwrap();
        assert!(matches!(
            withdraw(&pool, member, c.submission_id).await,
            Err(SubmissionError::NotPending)
        ));
        assert!(review_queue(&pool).await.unwrap().is_empty());
    }

    #[tokio::test]
    async fn accept_adopts_bumps_the_version_and_respects_keep_old() {
        let (_d, pool) = temp_pool().await;
        let member = account(&pool, "member1", "member").await;
        let rid = account(&pool, "rev1", "reviewer").await;
        let reviewer = rid;
        let first = create_fresh(
            &pool,
            Some(member),
            SubmissionSource::Form,
            &GalaxyChoice::New(galaxy("Tesk 12")),
            &[mass("1e8")],
            "",
        )
        .await
        .unwrap();
        let v0 = history::current_version(&pool).await.unwrap();
        let v1 = accept(&pool, reviewer, first.submission_id, &HashSet::new(), "ok")
            .await
            .unwrap();
        assert_eq!(v1, v0 + 1);
        let adopted_first: i64 = sqlx::query_scalar("select measurement_id from adopted_value")
            .fetch_one(&pool)
            .await
            .unwrap();
        // A second mass of the same galaxy clashes with the adopted one.
        let second = create_fresh(
            &pool,
            Some(member),
            SubmissionSource::Form,
            &GalaxyChoice::Existing(first.galaxy_id),
            &[mass("3e8")],
            "",
        )
        .await
        .unwrap();
        let cl = clashes(&pool, second.submission_id).await.unwrap();
        assert_eq!(cl.len(), 1);
        assert_eq!(cl[0].adopted_measurement_id, adopted_first);
        let keep: HashSet<i64> = [cl[0].new_measurement_id].into();
        let v2 = accept(&pool, reviewer, second.submission_id, &keep, "keep old")
            .await
            .unwrap();
        assert_eq!(v2, v1 + 1);
        let still: i64 = sqlx::query_scalar("select measurement_id from adopted_value")
            .fetch_one(&pool)
            .await
            .unwrap();
        assert_eq!(
            still, adopted_first,
            "keep-old leaves the old value adopted"
        );
        // A third, accepted with use-new, replaces it.
        let third = create_fresh(
            &pool,
            Some(member),
            SubmissionSource::Form,
            &GalaxyChoice::Existing(first.galaxy_id),
            &[mass("5e8")],
            "",
        )
        .await
        .unwrap();
        accept(&pool, reviewer, third.submission_id, &HashSet::new(), "")
            .await
            .unwrap();
        let now: i64 = sqlx::query_scalar("select measurement_id from adopted_value")
            .fetch_one(&pool)
            .await
            .unwrap();
        let third_m = measurements_of_submission(&pool, third.submission_id)
            .await
            .unwrap();
        assert_eq!(now, third_m[0].measurement_id);
        assert!(third_m[0].adopted);
        assert_eq!(count(&pool, "review").await, 3);
    }

    #[tokio::test]
    async fn nobody_reviews_their_own_submission() {
        let (_d, pool) = temp_pool().await;
        let rid = account(&pool, "rev1", "reviewer").await;
        let member = account(&pool, "member1", "member").await;
        let own = create_fresh(
            &pool,
            Some(rid),
            SubmissionSource::Form,
            &GalaxyChoice::New(galaxy("Tesk 13")),
            &[mass("1e8")],
            "",
        )
        .await
        .unwrap();
        let me = rid;
        assert!(matches!(
            accept(&pool, me, own.submission_id, &HashSet::new(), "").await,
            Err(SubmissionError::OwnSubmission)
        ));
        assert!(matches!(
            reject(&pool, me, own.submission_id, "no").await,
            Err(SubmissionError::OwnSubmission)
        ));
        // Another account may decide (the role check is the web layer's, auth::may_review).
        reject(&pool, member, own.submission_id, "not resolved")
            .await
            .unwrap();
        assert_eq!(count(&pool, "review").await, 1);
        assert_eq!(history::current_version(&pool).await.unwrap(), 0);
    }

    #[tokio::test]
    async fn reject_keeps_the_version_and_the_note_is_listed_for_the_galaxy() {
        let (_d, pool) = temp_pool().await;
        let member = account(&pool, "member1", "member").await;
        let rid = account(&pool, "rev1", "reviewer").await;
        let c = create_fresh(
            &pool,
            Some(member),
            SubmissionSource::Form,
            &GalaxyChoice::New(galaxy("Tesk 14")),
            &[mass("1e8")],
            "",
        )
        .await
        .unwrap();
        let reviewer = rid;
        reject(&pool, reviewer, c.submission_id, "resolution too coarse")
            .await
            .unwrap();
        assert_eq!(history::current_version(&pool).await.unwrap(), 0);
        let notes = reviews_of_galaxy(&pool, c.galaxy_id).await.unwrap();
        assert_eq!(notes.len(), 1);
        assert_eq!(notes[0].decision, "rejected");
        assert_eq!(notes[0].note, "resolution too coarse");
        assert_eq!(notes[0].reviewer, "rev1");
        assert!(matches!(
            accept(&pool, reviewer, c.submission_id, &HashSet::new(), "").await,
            Err(SubmissionError::NotPending)
        ));
    }
}
