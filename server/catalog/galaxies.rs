//! Galaxies, their measurements, submissions and adopted values.

use sqlx::{Sqlite, SqlitePool, Transaction};

use crate::auth::secret::sha256_hex;

use super::model::{Galaxy, Measurement, NewGalaxy, NewMeasurement, SubmissionState, slugify};
use super::names::name_key;

/// Insert a galaxy and return it with its key and a unique slug; its name's look-alike key
/// ([`name_key`]) is stored beside it.
///
/// # Errors
/// A unique-name violation or any other database error.
pub async fn insert_galaxy(
    tx: &mut Transaction<'_, Sqlite>,
    new: &NewGalaxy,
) -> sqlx::Result<Galaxy> {
    let base = slugify(&new.name);
    let mut slug = base.clone();
    let mut n = 2;
    // Two names can fold to one slug ("Élan 4" and "Elan 4"); number the later ones.
    while sqlx::query_scalar::<_, i64>("select count(*) from galaxy where slug = ?")
        .bind(&slug)
        .fetch_one(&mut **tx)
        .await?
        > 0
    {
        slug = format!("{base}-{n}");
        n += 1;
    }
    sqlx::query_as(
        "insert into galaxy (name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                             distance_err_mpc, distance_method, name_key)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?)
         returning galaxy_id, name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                   distance_err_mpc, distance_method",
    )
    .bind(&new.name)
    .bind(&slug)
    .bind(new.morphology.as_str())
    .bind(new.bulge_kind.as_str())
    .bind(new.centre_kind.as_str())
    .bind(new.distance_mpc)
    .bind(new.distance_err_mpc)
    .bind(new.distance_method.as_str())
    .bind(name_key(&new.name))
    .fetch_one(&mut **tx)
    .await
}

/// A galaxy of the catalog as a name refers to it.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct NamedGalaxy {
    /// Key.
    pub galaxy_id: i64,
    /// Its name.
    pub name: String,
    /// Its slug.
    pub slug: String,
}

/// The galaxy whose name looks like `name` (the same [`name_key`]): the one of exactly that
/// name when there is one, else the oldest look-alike; None when no name looks like it. One
/// indexed lookup, however large the catalog.
///
/// # Errors
/// When the database cannot be read.
pub async fn look_alike<'c>(
    executor: impl sqlx::Executor<'c, Database = Sqlite>,
    name: &str,
) -> sqlx::Result<Option<NamedGalaxy>> {
    sqlx::query_as(
        "select galaxy_id, name, slug from galaxy where name_key = ?
          order by (name = ?) desc, galaxy_id limit 1",
    )
    .bind(name_key(name))
    .bind(name)
    .fetch_optional(executor)
    .await
}

/// Store the look-alike key of every galaxy that has none yet (those stored before
/// `migrations/5_galaxy_name_key.sql`; SQL cannot compute the key), in one write transaction;
/// returns how many were filled. Run when the catalog is opened.
///
/// # Errors
/// When the database cannot be read or written.
pub async fn fill_name_keys(pool: &SqlitePool) -> sqlx::Result<usize> {
    // Most openings find nothing to fill: no write transaction then.
    let any: Option<i64> =
        sqlx::query_scalar("select galaxy_id from galaxy where name_key is null limit 1")
            .fetch_optional(pool)
            .await?;
    if any.is_none() {
        return Ok(0);
    }
    let mut tx = super::begin_write(pool).await?;
    let missing: Vec<(i64, String)> =
        sqlx::query_as("select galaxy_id, name from galaxy where name_key is null")
            .fetch_all(&mut *tx)
            .await?;
    for (galaxy_id, name) in &missing {
        sqlx::query("update galaxy set name_key = ? where galaxy_id = ?")
            .bind(name_key(name))
            .bind(galaxy_id)
            .execute(&mut *tx)
            .await?;
    }
    tx.commit().await?;
    Ok(missing.len())
}

/// Where a submission came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SubmissionSource {
    /// The web form.
    Form,
    /// A CSV upload.
    Csv,
    /// The JSON API.
    Api,
    /// The demo catalog.
    Seed,
    /// `massline import` by an admin.
    Import,
}

impl SubmissionSource {
    fn as_str(self) -> &'static str {
        match self {
            Self::Form => "form",
            Self::Csv => "csv",
            Self::Api => "api",
            Self::Seed => "seed",
            Self::Import => "import",
        }
    }
}

/// The idempotency key of a form or API request, scoped to its submitter, with the SHA-256 of
/// the request's canonical content (`migrations/3_idempotency.sql`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RequestKey {
    /// `<submitter>:<client key>`, where the submitter is the account key (or `cli`).
    pub scoped: String,
    /// SHA-256 (hex) of the request's canonical content.
    pub sha256: String,
}

/// Insert a submission and return its key.
///
/// # Errors
/// Any database error (a repeated idempotency key is a unique violation).
pub async fn insert_submission(
    tx: &mut Transaction<'_, Sqlite>,
    account_id: Option<i64>,
    source: SubmissionSource,
    state: SubmissionState,
    note: &str,
    request: Option<&RequestKey>,
) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into submission (account_id, source, state, note, idempotency_key, request_sha256)
         values (?, ?, ?, ?, ?, ?)
         returning submission_id",
    )
    .bind(account_id)
    .bind(source.as_str())
    .bind(state.as_str())
    .bind(note)
    .bind(request.map(|r| &r.scoped))
    .bind(request.map(|r| &r.sha256))
    .fetch_one(&mut **tx)
    .await
}

/// How a stored measurement is recognised when the same file row or request comes again
/// (`migrations/3_idempotency.sql`): its unique key, and for file rows the SHA-256 of the row's
/// cells, so a key reused for other values is caught.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowKey {
    /// Unique among all measurements (1–200 characters).
    pub key: String,
    /// SHA-256 (hex) of the row's canonical cells; `None` for form and API measurements, whose
    /// request carries the fingerprint.
    pub sha256: Option<String>,
}

/// The prefix of an exported row key.
const PUBLIC_ROW_KEY_PREFIX: &str = "rk-";

/// What is hashed before a stored row key, so the digest serves this purpose only.
const PUBLIC_ROW_KEY_DOMAIN: &str = "massline exported row key v1\u{0}";

/// The key an export writes for a stored row key (`migrations/4_row_key_digest.sql`):
/// `rk-` and the SHA-256 (hex) of a domain-separation prefix and the stored key, so it reveals
/// neither an account id nor a client's idempotency key nor a key chosen for a file row. A key
/// that already has that form (a row imported from an export) is returned as it is, so the
/// digest of a digest is itself.
pub fn public_row_key(stored: &str) -> String {
    if is_public_row_key(stored) {
        stored.to_owned()
    } else {
        format!(
            "{PUBLIC_ROW_KEY_PREFIX}{}",
            sha256_hex(&format!("{PUBLIC_ROW_KEY_DOMAIN}{stored}"))
        )
    }
}

/// Whether `key` has the form of an exported key (`rk-` and 64 lower-case hex digits).
fn is_public_row_key(key: &str) -> bool {
    key.strip_prefix(PUBLIC_ROW_KEY_PREFIX).is_some_and(|hex| {
        hex.len() == 64 && hex.bytes().all(|b| matches!(b, b'0'..=b'9' | b'a'..=b'f'))
    })
}

/// Give every measurement stored before `migrations/4_row_key_digest.sql` its exported key,
/// in one write transaction; nothing to do (one read) once all have theirs.
///
/// # Errors
/// Any database error.
pub async fn fill_row_key_digests(pool: &SqlitePool) -> sqlx::Result<()> {
    let missing: Vec<(i64, String)> = sqlx::query_as(
        "select measurement_id, row_key from measurement
          where row_key is not null and row_key_digest is null",
    )
    .fetch_all(pool)
    .await?;
    if missing.is_empty() {
        return Ok(());
    }
    let mut tx = super::begin_write(pool).await?;
    for (id, key) in missing {
        sqlx::query(
            "update measurement set row_key_digest = ?
              where measurement_id = ? and row_key_digest is null",
        )
        .bind(public_row_key(&key))
        .bind(id)
        .execute(&mut *tx)
        .await?;
    }
    tx.commit().await
}

/// A measurement found by a file row's key.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct StoredRow {
    /// The measurement.
    pub measurement_id: i64,
    /// The SHA-256 of the cells it was imported from (`None` for form, API and demo rows).
    pub row_sha256: Option<String>,
    /// Whether the key is the one exports write ([`public_row_key`]) rather than the stored
    /// key itself: the row then comes from an export, whose cells are the measurement's
    /// exported cells, not the cells it was first imported from.
    pub by_digest: bool,
}

/// The row stored under `key`, if any. `key` is matched against the stored keys and against
/// the keys exports write ([`public_row_key`]), so an exported file re-imports to nothing new.
///
/// # Errors
/// Any database error.
pub async fn stored_row_key(
    tx: &mut Transaction<'_, Sqlite>,
    key: &str,
) -> sqlx::Result<Option<StoredRow>> {
    // Only a key of the exported form can be another row's digest: other keys (most file
    // rows) take the one look-up by the stored key.
    if !is_public_row_key(key) {
        return sqlx::query_as(
            "select measurement_id, row_sha256, 0 as by_digest from measurement where row_key = ?",
        )
        .bind(key)
        .fetch_optional(&mut **tx)
        .await;
    }
    sqlx::query_as(
        "select measurement_id, row_sha256, 0 as by_digest from measurement where row_key = ?1
         union all
         select measurement_id, row_sha256, 1 as by_digest from measurement
          where row_key_digest = ?1 and row_key <> ?1
         order by by_digest limit 1",
    )
    .bind(key)
    .fetch_optional(&mut **tx)
    .await
}

/// Insert a measurement of a galaxy within a submission and return its key.
///
/// # Errors
/// A range or consistency check of the schema, a repeated row key (unique violation), or any
/// database error.
pub async fn insert_measurement(
    tx: &mut Transaction<'_, Sqlite>,
    galaxy_id: i64,
    submission_id: i64,
    m: &NewMeasurement,
    row: &RowKey,
) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into measurement (galaxy_id, submission_id, quantity, log_value, err_minus_dex,
                                  err_plus_dex, err_dex, upper_limit, limit_confidence_sigma,
                                  method, sigma_definition, aperture, band, source_distance_mpc,
                                  resolution_arcsec, reference, note, value_text, value_scale,
                                  row_key, row_sha256, row_key_digest)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
         returning measurement_id",
    )
    .bind(galaxy_id)
    .bind(submission_id)
    .bind(m.quantity.as_str())
    .bind(m.log_value)
    .bind(m.err_minus_dex)
    .bind(m.err_plus_dex)
    .bind(m.err_dex)
    .bind(m.upper_limit)
    .bind(m.limit_confidence_sigma)
    .bind(&m.method)
    .bind(&m.sigma_definition)
    .bind(&m.aperture)
    .bind(&m.band)
    .bind(m.source_distance_mpc)
    .bind(m.resolution_arcsec)
    .bind(&m.reference)
    .bind(&m.note)
    .bind(&m.value_text)
    .bind(&m.value_scale)
    .bind(&row.key)
    .bind(&row.sha256)
    .bind(public_row_key(&row.key))
    .fetch_one(&mut **tx)
    .await
}

/// Make a measurement the adopted value for its galaxy, quantity and band (replacing any other).
///
/// # Errors
/// Any database error.
pub async fn adopt(tx: &mut Transaction<'_, Sqlite>, measurement_id: i64) -> sqlx::Result<()> {
    sqlx::query(
        "insert into adopted_value (galaxy_id, quantity, band, measurement_id)
         select galaxy_id, quantity, band, measurement_id from measurement where measurement_id = ?
         on conflict (galaxy_id, quantity, band) do update
            set measurement_id = excluded.measurement_id,
                adopted_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')",
    )
    .bind(measurement_id)
    .execute(&mut **tx)
    .await?;
    Ok(())
}

/// Number of galaxies in the catalog.
///
/// # Errors
/// When the database cannot be read.
pub async fn count(pool: &SqlitePool) -> sqlx::Result<i64> {
    sqlx::query_scalar("select count(*) from galaxy")
        .fetch_one(pool)
        .await
}

/// One galaxy by its slug.
///
/// # Errors
/// When the database cannot be read.
pub async fn find_by_slug(pool: &SqlitePool, slug: &str) -> sqlx::Result<Option<Galaxy>> {
    sqlx::query_as(
        "select galaxy_id, name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                distance_err_mpc, distance_method
           from galaxy where slug = ?",
    )
    .bind(slug)
    .fetch_optional(pool)
    .await
}

/// Whose unreviewed measurements (pending, or withdrawn before review) a reader may see.
/// Accepted and rejected measurements are part of the catalog's record and shown to every
/// reader.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Unreviewed {
    /// Everyone's: reviewers and admins, and the domain's own computations.
    All,
    /// Only those this account submitted.
    OwnOf(i64),
    /// None: a reader without an account.
    None,
}

/// Every measurement of a galaxy, in any state, with whether it is adopted; grouped by quantity
/// in the order of [`Quantity::MEASURED`](super::model::Quantity::MEASURED), newest first
/// within a quantity.
///
/// # Errors
/// When the database cannot be read.
pub async fn measurements_of(pool: &SqlitePool, galaxy_id: i64) -> sqlx::Result<Vec<Measurement>> {
    measurements_seen(pool, galaxy_id, Unreviewed::All).await
}

/// The measurements of a galaxy as [`measurements_of`], leaving out the unreviewed ones that
/// `shown` does not admit (the filter is in the query, so what is left out never leaves the
/// database).
///
/// # Errors
/// When the database cannot be read.
pub async fn measurements_seen(
    pool: &SqlitePool,
    galaxy_id: i64,
    shown: Unreviewed,
) -> sqlx::Result<Vec<Measurement>> {
    let (all, own) = match shown {
        Unreviewed::All => (true, None),
        Unreviewed::OwnOf(account_id) => (false, Some(account_id)),
        Unreviewed::None => (false, None),
    };
    sqlx::query_as(
        "select m.measurement_id, m.galaxy_id, m.submission_id, m.quantity, m.log_value,
                m.err_minus_dex, m.err_plus_dex, m.err_dex, m.upper_limit,
                m.limit_confidence_sigma, m.method, m.sigma_definition, m.aperture, m.band,
                m.source_distance_mpc, m.resolution_arcsec, m.reference, m.note, m.value_text,
                m.value_scale, s.state, (a.measurement_id is not null) as adopted, m.created_at
           from measurement m
           join submission s on s.submission_id = m.submission_id
      left join adopted_value a on a.measurement_id = m.measurement_id
          where m.galaxy_id = ?
            and (s.state in ('accepted', 'rejected') or ? or s.account_id = ?)
       order by case m.quantity when 'bh_mass' then 0 when 'sigma' then 1
                                when 'bulge_mass' then 2 else 3 end,
                adopted desc, m.measurement_id desc",
    )
    .bind(galaxy_id)
    .bind(all)
    .bind(own)
    .fetch_all(pool)
    .await
}
