//! Galaxies, their measurements, submissions and adopted values.

use sqlx::{Sqlite, SqlitePool, Transaction};

use super::model::{
    Galaxy, Measurement, NewGalaxy, NewMeasurement, Quantity, SubmissionState, slugify,
};

/// Insert a galaxy and return it with its key and a unique slug.
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
                             distance_err_mpc, distance_method)
         values (?, ?, ?, ?, ?, ?, ?, ?)
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
    .fetch_one(&mut **tx)
    .await
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
) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into submission (account_id, source, state, note) values (?, ?, ?, ?)
         returning submission_id",
    )
    .bind(account_id)
    .bind(source.as_str())
    .bind(state.as_str())
    .bind(note)
    .fetch_one(&mut **tx)
    .await
}

/// Insert a measurement of a galaxy within a submission and return its key.
///
/// # Errors
/// A range or consistency check of the schema, or any database error.
pub async fn insert_measurement(
    tx: &mut Transaction<'_, Sqlite>,
    galaxy_id: i64,
    submission_id: i64,
    m: &NewMeasurement,
) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into measurement (galaxy_id, submission_id, quantity, log_value, err_minus_dex,
                                  err_plus_dex, err_dex, upper_limit, limit_confidence_sigma,
                                  method, sigma_definition, aperture, band, source_distance_mpc,
                                  resolution_arcsec, reference, note, value_text, value_scale)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
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

/// Every measurement of a galaxy, in any state, with whether it is adopted; grouped by quantity
/// in the order of [`Quantity::ALL`], newest first within a quantity.
///
/// # Errors
/// When the database cannot be read.
pub async fn measurements_of(pool: &SqlitePool, galaxy_id: i64) -> sqlx::Result<Vec<Measurement>> {
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
       order by case m.quantity when 'bh_mass' then 0 when 'sigma' then 1
                                when 'bulge_mass' then 2 else 3 end,
                adopted desc, m.measurement_id desc",
    )
    .bind(galaxy_id)
    .fetch_all(pool)
    .await
}

/// One row of the catalog table: a galaxy with its adopted values.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct CatalogRow {
    /// Galaxy.
    pub galaxy_id: i64,
    /// Name.
    pub name: String,
    /// Slug.
    pub slug: String,
    /// Stored morphology.
    pub morphology: String,
    /// Stored bulge kind.
    pub bulge_kind: String,
    /// Stored centre kind.
    pub centre_kind: String,
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its error, Mpc.
    pub distance_err_mpc: f64,
    /// Adopted black-hole mass, log10 M_sun, as published (at `mbh_source_distance_mpc`).
    pub log_mbh: Option<f64>,
    /// Its lower error, dex.
    pub mbh_err_minus_dex: Option<f64>,
    /// Its upper error, dex.
    pub mbh_err_plus_dex: Option<f64>,
    /// Upper limit?
    pub mbh_upper_limit: Option<bool>,
    /// Stored mass method.
    pub mbh_method: Option<String>,
    /// Distance the mass's source assumed, Mpc.
    pub mbh_source_distance_mpc: Option<f64>,
    /// Resolution of the mass measurement, arcsec.
    pub mbh_resolution_arcsec: Option<f64>,
    /// Adopted σ, log10 km/s.
    pub log_sigma: Option<f64>,
    /// Its error, dex.
    pub sigma_err_dex: Option<f64>,
    /// Adopted bulge mass, log10 M_sun, as published.
    pub log_mbulge: Option<f64>,
    /// Its error, dex.
    pub mbulge_err_dex: Option<f64>,
    /// Stored bulge-mass method.
    pub mbulge_method: Option<String>,
    /// Distance the bulge mass's source assumed, Mpc.
    pub mbulge_source_distance_mpc: Option<f64>,
}

/// The whole catalog table: every galaxy with its adopted black-hole mass, σ and bulge mass.
///
/// Filtering, sorting and paging happen on the caller's side, because some filters (sphere of
/// influence resolved or not, values rescaled to the adopted distance) are computed in Rust; a
/// group's catalog of a few thousand rows is read in a few milliseconds.
///
/// # Errors
/// When the database cannot be read.
pub async fn catalog_rows(pool: &SqlitePool) -> sqlx::Result<Vec<CatalogRow>> {
    sqlx::query_as(
        "select g.galaxy_id, g.name, g.slug, g.morphology, g.bulge_kind, g.centre_kind,
                g.distance_mpc, g.distance_err_mpc,
                bh.log_value as log_mbh, bh.err_minus_dex as mbh_err_minus_dex,
                bh.err_plus_dex as mbh_err_plus_dex, bh.upper_limit as mbh_upper_limit,
                bh.method as mbh_method, bh.source_distance_mpc as mbh_source_distance_mpc,
                bh.resolution_arcsec as mbh_resolution_arcsec,
                sg.log_value as log_sigma, sg.err_dex as sigma_err_dex,
                bm.log_value as log_mbulge, bm.err_dex as mbulge_err_dex,
                bm.method as mbulge_method, bm.source_distance_mpc as mbulge_source_distance_mpc
           from galaxy g
      left join adopted_value abh on abh.galaxy_id = g.galaxy_id and abh.quantity = 'bh_mass'
      left join measurement bh on bh.measurement_id = abh.measurement_id
      left join adopted_value asg on asg.galaxy_id = g.galaxy_id and asg.quantity = 'sigma'
      left join measurement sg on sg.measurement_id = asg.measurement_id
      left join adopted_value abm on abm.galaxy_id = g.galaxy_id and abm.quantity = 'bulge_mass'
      left join measurement bm on bm.measurement_id = abm.measurement_id
       order by g.name",
    )
    .fetch_all(pool)
    .await
}

/// Parse a stored quantity word (the schema guarantees it is one of [`Quantity::ALL`]).
pub fn quantity_of(m: &Measurement) -> Option<Quantity> {
    m.quantity.parse().ok()
}
