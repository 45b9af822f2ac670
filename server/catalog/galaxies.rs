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
                             distance_err_mpc, distance_method, name_key, activity)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
         returning galaxy_id, name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                   distance_err_mpc, distance_method, activity",
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
    .bind(new.activity.as_str())
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
pub fn is_public_row_key(key: &str) -> bool {
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
    let id: i64 = sqlx::query_scalar(
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
    .await?;
    if let Some(virial) = &m.virial {
        insert_virial(tx, id, virial).await?;
    }
    Ok(id)
}

/// Store what lies behind a virial mass (table `virial_measurement`, migration 9).
///
/// # Errors
/// A range check of the schema or any database error.
async fn insert_virial(
    tx: &mut Transaction<'_, Sqlite>,
    measurement_id: i64,
    v: &super::model::VirialEntry,
) -> sqlx::Result<()> {
    sqlx::query(
        "insert into virial_measurement (measurement_id, line, width_definition, width_spectrum,
                                         lag_days, lag_err_minus_days, lag_err_plus_days,
                                         width_km_s, width_err_km_s, log_l5100_erg_s,
                                         log_l5100_err_dex, assumed_log_f, calibration)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
    )
    .bind(measurement_id)
    .bind(&v.line)
    .bind(v.width_definition.as_str())
    .bind(v.width_spectrum.as_str())
    .bind(v.lag_days.map(|l| l.0))
    .bind(v.lag_days.map(|l| l.1))
    .bind(v.lag_days.map(|l| l.2))
    .bind(v.width_km_s.map(|w| w.0))
    .bind(v.width_km_s.map(|w| w.1))
    .bind(v.log_l5100_erg_s.map(|l| l.0))
    .bind(v.log_l5100_erg_s.map(|l| l.1))
    .bind(v.assumed_log_f)
    .bind(v.calibration.map_or("", |c| c.as_str()))
    .execute(&mut **tx)
    .await?;
    Ok(())
}

/// What lies behind a stored reverberation or single-epoch mass (table
/// `virial_measurement`, migration 9), as stored.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct StoredVirial {
    /// The black-hole mass it belongs to.
    pub measurement_id: i64,
    /// The broad line, e.g. "Hbeta".
    pub line: String,
    /// Width measure word (`sigma_line`, `fwhm`).
    pub width_definition: String,
    /// Spectrum word (`rms`, `mean`, `single`).
    pub width_spectrum: String,
    /// Rest-frame lag, days.
    pub lag_days: Option<f64>,
    /// Its lower error, days.
    pub lag_err_minus_days: Option<f64>,
    /// Its upper error, days.
    pub lag_err_plus_days: Option<f64>,
    /// Line width, km/s.
    pub width_km_s: Option<f64>,
    /// Its error, km/s.
    pub width_err_km_s: Option<f64>,
    /// log10 λL_λ(5100 Å), erg/s, at the measurement's source distance.
    pub log_l5100_erg_s: Option<f64>,
    /// log10 of the factor the stored mass assumed (None: not known).
    pub assumed_log_f: Option<f64>,
    /// Single-epoch calibration word, empty for reverberation.
    pub calibration: String,
}

/// The columns of [`StoredVirial`] with the join a query filters (by galaxy or submission).
macro_rules! virial_columns {
    () => {
        "select v.measurement_id, v.line, v.width_definition, v.width_spectrum, v.lag_days,
                v.lag_err_minus_days, v.lag_err_plus_days, v.width_km_s, v.width_err_km_s,
                v.log_l5100_erg_s, v.assumed_log_f, v.calibration
           from virial_measurement v join measurement m on m.measurement_id = v.measurement_id"
    };
}

/// The broad-line measurements behind a galaxy's virial masses, every one stored (the caller
/// matches them to the measurements it shows by `measurement_id`).
///
/// # Errors
/// Any database error.
pub async fn virial_measurements(
    pool: &SqlitePool,
    galaxy_id: i64,
) -> sqlx::Result<Vec<StoredVirial>> {
    sqlx::query_as(concat!(
        virial_columns!(),
        " where m.galaxy_id = ? order by v.measurement_id"
    ))
    .bind(galaxy_id)
    .fetch_all(pool)
    .await
}

/// What lies behind the virial masses of one submission, as stored.
///
/// # Errors
/// When the database cannot be read.
pub async fn virial_measurements_of_submission(
    pool: &SqlitePool,
    submission_id: i64,
) -> sqlx::Result<Vec<StoredVirial>> {
    sqlx::query_as(concat!(
        virial_columns!(),
        " where m.submission_id = ? order by v.measurement_id"
    ))
    .bind(submission_id)
    .fetch_all(pool)
    .await
}

/// Change a galaxy's activity class: a new catalog version (bumped first, so the history span
/// of the new class starts at it), the galaxy's row updated (the old class stays in the
/// history, migration 9) and an audit event `activity_changed` naming old and new, with the
/// note. Returns the new catalog version, or None when the galaxy does not exist.
///
/// # Errors
/// Any database error.
pub async fn change_activity(
    pool: &SqlitePool,
    account_id: Option<i64>,
    galaxy_id: i64,
    activity: super::model::Activity,
    note: &str,
) -> sqlx::Result<Option<i64>> {
    let mut tx = super::begin_write(pool).await?;
    let old: Option<(String, String)> =
        sqlx::query_as("select name, activity from galaxy where galaxy_id = ?")
            .bind(galaxy_id)
            .fetch_optional(&mut *tx)
            .await?;
    let Some((name, old_activity)) = old else {
        return Ok(None);
    };
    let version = super::history::bump_version(&mut tx).await?;
    sqlx::query(
        "update galaxy set activity = ?, updated_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where galaxy_id = ?",
    )
    .bind(activity.as_str())
    .bind(galaxy_id)
    .execute(&mut *tx)
    .await?;
    let note = note.trim();
    super::history::record(
        &mut tx,
        &super::history::NewEvent {
            account_id,
            action: "activity_changed",
            entity: "galaxy",
            entity_id: Some(galaxy_id),
            summary: format!(
                "Activity class of {name}: {old_activity} → {}.{}",
                activity.as_str(),
                if note.is_empty() {
                    String::new()
                } else {
                    format!(" {}", note.chars().take(500).collect::<String>())
                }
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(Some(version))
}

/// Whether account `account_id` changed the activity class of galaxy `galaxy_id` at catalog
/// version `version` (the galaxy page confirms it to that person only).
///
/// # Errors
/// Any database error.
pub async fn activity_changed_by(
    pool: &SqlitePool,
    galaxy_id: i64,
    version: i64,
    account_id: i64,
) -> sqlx::Result<bool> {
    sqlx::query_scalar(
        "select exists (select 1 from audit_event
                         where action = 'activity_changed' and entity = 'galaxy'
                           and entity_id = ? and catalog_version = ? and account_id = ?)",
    )
    .bind(galaxy_id)
    .bind(version)
    .bind(account_id)
    .fetch_one(pool)
    .await
}

/// A galaxy's new adopted distance.
#[derive(Debug, Clone, PartialEq)]
pub struct NewDistance {
    /// Distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1-σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Stored distance-method word.
    pub distance_method: String,
}

/// Adopt a new distance for a galaxy: a new catalog version (bumped first, so the history span
/// of the new distance starts at it), the galaxy's row updated (the old distance stays in the
/// history, migration 8) and an audit event `distance_changed` naming old and new, with the
/// note. Returns the new catalog version, or None when the galaxy does not exist.
///
/// # Errors
/// Any database error (a distance outside the schema's range fails its CHECK).
pub async fn change_distance(
    pool: &SqlitePool,
    account_id: Option<i64>,
    galaxy_id: i64,
    new: &NewDistance,
    note: &str,
) -> sqlx::Result<Option<i64>> {
    let mut tx = super::begin_write(pool).await?;
    let old: Option<(String, f64, f64, String)> = sqlx::query_as(
        "select name, distance_mpc, distance_err_mpc, distance_method from galaxy where galaxy_id = ?",
    )
    .bind(galaxy_id)
    .fetch_optional(&mut *tx)
    .await?;
    let Some((name, old_d, old_err, old_method)) = old else {
        return Ok(None);
    };
    let version = super::history::bump_version(&mut tx).await?;
    sqlx::query(
        "update galaxy set distance_mpc = ?, distance_err_mpc = ?, distance_method = ?,
                updated_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where galaxy_id = ?",
    )
    .bind(new.distance_mpc)
    .bind(new.distance_err_mpc)
    .bind(&new.distance_method)
    .bind(galaxy_id)
    .execute(&mut *tx)
    .await?;
    let note = note.trim();
    super::history::record(
        &mut tx,
        &super::history::NewEvent {
            account_id,
            action: "distance_changed",
            entity: "galaxy",
            entity_id: Some(galaxy_id),
            summary: format!(
                "{}{}",
                distance_summary(
                    &name,
                    &NewDistance {
                        distance_mpc: old_d,
                        distance_err_mpc: old_err,
                        distance_method: old_method,
                    },
                    new
                ),
                if note.is_empty() {
                    String::new()
                } else {
                    format!(" {}", note.chars().take(500).collect::<String>())
                }
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(Some(version))
}

/// The sentence of a `distance_changed` audit event before its note; the note is what
/// follows it (`catalog::changes::distance_note`).
pub fn distance_summary(name: &str, old: &NewDistance, new: &NewDistance) -> String {
    format!(
        "Distance of {name}: {} ± {} Mpc ({}) → {} ± {} Mpc ({}).",
        old.distance_mpc,
        old.distance_err_mpc,
        old.distance_method,
        new.distance_mpc,
        new.distance_err_mpc,
        new.distance_method
    )
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

/// Rows per multi-row statement of the bulk functions below: 22 parameters a measurement row
/// stay far below SQLite's 32,766 bound parameters, and a fixed size means at most two
/// statement texts per function, each prepared once per connection and reused.
const BATCH_ROWS: usize = 500;

/// `(?, ?, …)` with `columns` parameters, `rows` times, separated by commas.
fn placeholders(rows: usize, columns: usize) -> String {
    let one = format!("({})", vec!["?"; columns].join(", "));
    vec![one; rows].join(", ")
}

/// [`stored_row_key`] for many keys at once, by the stored key only (the key of a row never
/// exported; [`stored_row_key`] also matches exported keys, which callers look up one by one):
/// the rows found, by key. One indexed statement per [`BATCH_ROWS`] keys.
///
/// # Errors
/// Any database error.
pub async fn stored_row_keys(
    tx: &mut Transaction<'_, Sqlite>,
    keys: &[&str],
) -> sqlx::Result<std::collections::HashMap<String, StoredRow>> {
    let mut found = std::collections::HashMap::new();
    for chunk in keys.chunks(BATCH_ROWS) {
        let sql = format!(
            "select row_key, measurement_id, row_sha256 from measurement where row_key in ({})",
            vec!["?"; chunk.len()].join(", ")
        );
        let mut query =
            sqlx::query_as::<_, (String, i64, Option<String>)>(sqlx::AssertSqlSafe(sql));
        for key in chunk {
            query = query.bind(*key);
        }
        for (key, measurement_id, row_sha256) in query.fetch_all(&mut **tx).await? {
            found.insert(
                key,
                StoredRow {
                    measurement_id,
                    row_sha256,
                    by_digest: false,
                },
            );
        }
    }
    Ok(found)
}

/// The keys of the galaxies named exactly `names` (those in the catalog), by name.
///
/// # Errors
/// Any database error.
pub async fn ids_by_name(
    tx: &mut Transaction<'_, Sqlite>,
    names: &[&str],
) -> sqlx::Result<std::collections::HashMap<String, i64>> {
    let mut found = std::collections::HashMap::new();
    for chunk in names.chunks(BATCH_ROWS) {
        let sql = format!(
            "select name, galaxy_id from galaxy where name in ({})",
            vec!["?"; chunk.len()].join(", ")
        );
        let mut query = sqlx::query_as::<_, (String, i64)>(sqlx::AssertSqlSafe(sql));
        for name in chunk {
            query = query.bind(*name);
        }
        found.extend(query.fetch_all(&mut **tx).await?);
    }
    Ok(found)
}

/// For names not in the catalog: the oldest galaxy sharing each look-alike key ([`name_key`]),
/// by key; what [`look_alike`] answers for such a name, for many keys at once.
///
/// # Errors
/// Any database error.
pub async fn look_alikes(
    tx: &mut Transaction<'_, Sqlite>,
    keys: &[&str],
) -> sqlx::Result<std::collections::HashMap<String, NamedGalaxy>> {
    let mut found = std::collections::HashMap::new();
    for chunk in keys.chunks(BATCH_ROWS) {
        let sql = format!(
            "select name_key, galaxy_id, name, slug from galaxy where name_key in ({})
              order by galaxy_id",
            vec!["?"; chunk.len()].join(", ")
        );
        let mut query =
            sqlx::query_as::<_, (String, i64, String, String)>(sqlx::AssertSqlSafe(sql));
        for key in chunk {
            query = query.bind(*key);
        }
        for (key, galaxy_id, name, slug) in query.fetch_all(&mut **tx).await? {
            found.entry(key).or_insert(NamedGalaxy {
                galaxy_id,
                name,
                slug,
            });
        }
    }
    Ok(found)
}

/// [`insert_galaxy`] for many galaxies at once; returns their keys in the order given. Slugs
/// are numbered as [`insert_galaxy`] numbers them: the slugs already taken are read once per
/// [`BATCH_ROWS`] names, and only a taken slug is looked up again, candidate by candidate.
///
/// # Errors
/// A unique-name violation or any other database error.
pub async fn insert_galaxies(
    tx: &mut Transaction<'_, Sqlite>,
    news: &[&NewGalaxy],
) -> sqlx::Result<Vec<i64>> {
    let bases: Vec<String> = news.iter().map(|g| slugify(&g.name)).collect();
    let mut taken = std::collections::HashSet::new();
    for chunk in bases.chunks(BATCH_ROWS) {
        let sql = format!(
            "select slug from galaxy where slug in ({})",
            vec!["?"; chunk.len()].join(", ")
        );
        let mut query = sqlx::query_scalar::<_, String>(sqlx::AssertSqlSafe(sql));
        for base in chunk {
            query = query.bind(base);
        }
        taken.extend(query.fetch_all(&mut **tx).await?);
    }
    let mut slugs = Vec::with_capacity(news.len());
    for base in bases {
        let mut slug = base.clone();
        let mut n = 2;
        // `taken` knows whether a base is in the catalog; a numbered slug is looked up.
        while taken.contains(&slug)
            || (slug != base
                && sqlx::query_scalar::<_, i64>("select count(*) from galaxy where slug = ?")
                    .bind(&slug)
                    .fetch_one(&mut **tx)
                    .await?
                    > 0)
        {
            slug = format!("{base}-{n}");
            n += 1;
        }
        taken.insert(slug.clone());
        slugs.push(slug);
    }
    let mut ids = Vec::with_capacity(news.len());
    for (chunk, chunk_slugs) in news.chunks(BATCH_ROWS).zip(slugs.chunks(BATCH_ROWS)) {
        let sql = format!(
            "insert into galaxy (name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                                 distance_err_mpc, distance_method, name_key, activity)
             values {} returning slug, galaxy_id",
            placeholders(chunk.len(), 10)
        );
        let mut query = sqlx::query_as::<_, (String, i64)>(sqlx::AssertSqlSafe(sql));
        for (new, slug) in chunk.iter().zip(chunk_slugs) {
            query = query
                .bind(&new.name)
                .bind(slug)
                .bind(new.morphology.as_str())
                .bind(new.bulge_kind.as_str())
                .bind(new.centre_kind.as_str())
                .bind(new.distance_mpc)
                .bind(new.distance_err_mpc)
                .bind(new.distance_method.as_str())
                .bind(name_key(&new.name))
                .bind(new.activity.as_str());
        }
        // RETURNING does not promise the order of its rows: match them by the unique slug.
        let by_slug: std::collections::HashMap<String, i64> =
            query.fetch_all(&mut **tx).await?.into_iter().collect();
        for slug in chunk_slugs {
            ids.push(by_slug[slug]);
        }
    }
    Ok(ids)
}

/// A measurement to store with [`insert_measurements`]: its galaxy, its values and its row key.
pub type MeasurementRow<'a> = (i64, &'a NewMeasurement, &'a RowKey);

/// [`insert_measurement`] for many rows of one submission, in the order given (their keys
/// increase in that order), [`BATCH_ROWS`] rows a statement.
///
/// # Errors
/// The index of the row at fault with its error: a multi-row statement that fails is undone
/// alone, and its rows are then stored one by one to find the row a check refuses.
pub async fn insert_measurements(
    tx: &mut Transaction<'_, Sqlite>,
    submission_id: i64,
    rows: &[MeasurementRow<'_>],
) -> Result<(), (usize, sqlx::Error)> {
    for (c, chunk) in rows.chunks(BATCH_ROWS).enumerate() {
        let sql = format!(
            "insert into measurement (galaxy_id, submission_id, quantity, log_value, err_minus_dex,
                                      err_plus_dex, err_dex, upper_limit, limit_confidence_sigma,
                                      method, sigma_definition, aperture, band, source_distance_mpc,
                                      resolution_arcsec, reference, note, value_text, value_scale,
                                      row_key, row_sha256, row_key_digest)
             values {}",
            placeholders(chunk.len(), 22)
        );
        let mut query = sqlx::query(sqlx::AssertSqlSafe(sql));
        for (galaxy_id, m, row) in chunk {
            query = query
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
                .bind(public_row_key(&row.key));
        }
        if let Err(batch_error) = query.execute(&mut **tx).await {
            for (i, (galaxy_id, m, row)) in chunk.iter().enumerate() {
                if let Err(e) = insert_measurement(tx, *galaxy_id, submission_id, m, row).await {
                    return Err((c * BATCH_ROWS + i, e));
                }
            }
            // Every row stored alone: the batch failed for a reason of its own.
            return Err((c * BATCH_ROWS, batch_error));
        }
        // Virial masses are few: their rows are found by their unique row keys.
        for (i, (_, m, row)) in chunk.iter().enumerate() {
            if let Some(virial) = &m.virial {
                let stored = async {
                    let id: i64 = sqlx::query_scalar(
                        "select measurement_id from measurement where row_key = ?",
                    )
                    .bind(&row.key)
                    .fetch_one(&mut **tx)
                    .await?;
                    insert_virial(tx, id, virial).await
                };
                if let Err(e) = stored.await {
                    return Err((c * BATCH_ROWS + i, e));
                }
            }
        }
    }
    Ok(())
}

/// [`adopt`] every measurement of a submission, in the order of their keys (a later one of the
/// same galaxy, quantity and band replaces an earlier one), in one statement.
///
/// # Errors
/// Any database error.
pub async fn adopt_submission(
    tx: &mut Transaction<'_, Sqlite>,
    submission_id: i64,
) -> sqlx::Result<()> {
    // SQLite needs the WHERE of an INSERT … SELECT with an upsert (it reads ON CONFLICT as a
    // join's ON otherwise); ORDER BY fixes the order the rows are inserted in.
    sqlx::query(
        "insert into adopted_value (galaxy_id, quantity, band, measurement_id)
         select galaxy_id, quantity, band, measurement_id from measurement
          where submission_id = ? order by measurement_id
         on conflict (galaxy_id, quantity, band) do update
            set measurement_id = excluded.measurement_id,
                adopted_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')",
    )
    .bind(submission_id)
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
                distance_err_mpc, distance_method, activity
           from galaxy where slug = ?",
    )
    .bind(slug)
    .fetch_optional(pool)
    .await
}

/// The columns of a [`Measurement`] over `measurement m` and `submission s`, up to `adopted`,
/// which each query says in its own way, and `created_at`.
macro_rules! measurement_columns {
    () => {
        "select m.measurement_id, m.galaxy_id, m.submission_id, m.quantity, m.log_value,
                m.err_minus_dex, m.err_plus_dex, m.err_dex, m.upper_limit,
                m.limit_confidence_sigma, m.method, m.sigma_definition, m.aperture, m.band,
                m.source_distance_mpc, m.resolution_arcsec, m.reference, m.note, m.value_text,
                m.value_scale, s.state, (select vm.assumed_log_f from virial_measurement vm
                                   where vm.measurement_id = m.measurement_id) as assumed_log_f,
                (select vm.width_definition from virial_measurement vm
                  where vm.measurement_id = m.measurement_id) as virial_width, "
    };
}

/// A galaxy as it stood at catalog version `version` (its properties from the history,
/// migration 8), or None when it was not in the catalog then.
///
/// # Errors
/// When the database cannot be read.
pub async fn find_by_slug_at(
    pool: &SqlitePool,
    slug: &str,
    version: i64,
) -> sqlx::Result<Option<Galaxy>> {
    sqlx::query_as(
        "select s.galaxy_id, s.name, s.slug, s.morphology, s.bulge_kind, s.centre_kind,
                s.distance_mpc, s.distance_err_mpc, s.distance_method, s.activity
           from galaxy g join galaxy_span s on s.galaxy_id = g.galaxy_id
          where g.slug = ? and s.valid_from_version <= ?2
            and (s.valid_until_version is null or s.valid_until_version > ?2)",
    )
    .bind(slug)
    .bind(version)
    .fetch_optional(pool)
    .await
}

/// The measurements of a galaxy adopted at catalog version `version` (each marked adopted),
/// in the order of [`measurements_of`]: what the catalog of that version held for it.
///
/// # Errors
/// When the database cannot be read.
pub async fn measurements_adopted_at(
    pool: &SqlitePool,
    galaxy_id: i64,
    version: i64,
) -> sqlx::Result<Vec<Measurement>> {
    sqlx::query_as(concat!(
        measurement_columns!(),
        "1 as adopted, m.created_at
           from adopted_value_span a
           join measurement m on m.measurement_id = a.measurement_id
           join submission s on s.submission_id = m.submission_id
          where a.galaxy_id = ?1 and a.valid_from_version <= ?2
            and (a.valid_until_version is null or a.valid_until_version > ?2)
       order by case m.quantity when 'bh_mass' then 0 when 'sigma' then 1
                                when 'bulge_mass' then 2 else 3 end,
                m.band, m.measurement_id desc"
    ))
    .bind(galaxy_id)
    .bind(version)
    .fetch_all(pool)
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
    sqlx::query_as(concat!(
        measurement_columns!(),
        "(a.measurement_id is not null) as adopted, m.created_at
           from measurement m
           join submission s on s.submission_id = m.submission_id
      left join adopted_value a on a.measurement_id = m.measurement_id
          where m.galaxy_id = ?
            and (s.state in ('accepted', 'rejected') or ? or s.account_id = ?)
       order by case m.quantity when 'bh_mass' then 0 when 'sigma' then 1
                                when 'bulge_mass' then 2 else 3 end,
                adopted desc, m.measurement_id desc"
    ))
    .bind(galaxy_id)
    .bind(all)
    .bind(own)
    .fetch_all(pool)
    .await
}
