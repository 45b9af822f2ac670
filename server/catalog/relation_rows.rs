//! Every galaxy with its adopted black-hole mass, velocity dispersion, bulge mass and bulge
//! luminosities, as published: the rows the catalog table and the scaling-relation fits are
//! built from (the rescaling to the adopted distance happens in `relations`).

use sqlx::{SqliteExecutor, SqlitePool};

/// One galaxy with its adopted values, as stored.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct RelationRow {
    /// Galaxy key.
    pub galaxy_id: i64,
    /// Name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// Stored morphology word.
    pub morphology: String,
    /// Stored bulge kind word.
    pub bulge_kind: String,
    /// Stored centre kind word.
    pub centre_kind: String,
    /// Stored activity class word.
    pub activity: String,
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1-σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Adopted black-hole mass, log10 M☉, at `mbh_source_distance_mpc`; a virial mass with a
    /// known assumed factor is already moved to the ⟨f⟩ adopted at the version read
    /// (`log_value + log ⟨f⟩ − assumed log f`, docs/methods.md §4.1).
    pub log_mbh: Option<f64>,
    /// For a virial mass moved to the adopted factor: log10 ⟨f⟩ applied (None otherwise).
    pub mbh_log_f: Option<f64>,
    /// For a virial mass: the width measure word ('sigma_line' or 'fwhm').
    pub mbh_width_definition: Option<String>,
    /// Its symmetric error, dex (0 for a limit).
    pub mbh_err_dex: Option<f64>,
    /// Its lower error, dex.
    pub mbh_err_minus_dex: Option<f64>,
    /// Its upper error, dex.
    pub mbh_err_plus_dex: Option<f64>,
    /// Whether the mass is an upper limit.
    pub mbh_upper_limit: Option<bool>,
    /// Stored mass method word.
    pub mbh_method: Option<String>,
    /// Distance the mass's source assumed, Mpc.
    pub mbh_source_distance_mpc: Option<f64>,
    /// Spatial resolution of the mass measurement, arcsec.
    pub mbh_resolution_arcsec: Option<f64>,
    /// Where the mass was published (the measurement's reference, as stored).
    pub mbh_reference: Option<String>,
    /// Adopted velocity dispersion, log10 km/s.
    pub log_sigma: Option<f64>,
    /// Its symmetric error, dex.
    pub sigma_err_dex: Option<f64>,
    /// Stored σ definition word ('sigma_e' or 'sigma_c').
    pub sigma_definition: Option<String>,
    /// Adopted bulge mass, log10 M☉, at `mbulge_source_distance_mpc`.
    pub log_mbulge: Option<f64>,
    /// Its symmetric error, dex.
    pub mbulge_err_dex: Option<f64>,
    /// Stored bulge-mass method word ('dynamical' or 'photometric').
    pub mbulge_method: Option<String>,
    /// Distance the bulge mass's source assumed, Mpc.
    pub mbulge_source_distance_mpc: Option<f64>,
}

/// An adopted bulge luminosity in one band, as stored.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct LuminosityRow {
    /// Galaxy key.
    pub galaxy_id: i64,
    /// Photometric band, e.g. 'V' or 'K'.
    pub band: String,
    /// log10 L☉ of the band, at `source_distance_mpc`.
    pub log_value: f64,
    /// Symmetric error, dex.
    pub err_dex: f64,
    /// Distance the source assumed, Mpc.
    pub source_distance_mpc: Option<f64>,
}

/// `alias` is in force at version `?1`: the span condition of migration 8.
macro_rules! held_at {
    ($alias:literal) => {
        concat!(
            $alias,
            ".valid_from_version <= ?1 and (",
            $alias,
            ".valid_until_version is null or ",
            $alias,
            ".valid_until_version > ?1)"
        )
    };
}

/// Every galaxy of catalog version `version`, with its properties and its adopted black-hole
/// mass, σ and bulge mass as they stood at that version, ordered by name (read from the
/// history spans, migration 8; the current version reads the same way, so a version's rows
/// are the same whenever they are read). A galaxy is in from the version current when it was
/// stored, with or without adopted values (a galaxy named by a pending submission has none).
///
/// The catalog table filters, sorts and pages these rows in Rust, because some of its filters
/// (sphere of influence resolved or not, values at the adopted distance) are computed there.
///
/// # Errors
/// When the database cannot be read.
pub async fn relation_rows_at(
    db: impl SqliteExecutor<'_>,
    version: i64,
) -> sqlx::Result<Vec<RelationRow>> {
    sqlx::query_as(concat!(
        "with f as (",
        crate::catalog::virial::factors_at_sql!(),
        ")
         select g.galaxy_id, g.name, g.slug, g.morphology, g.bulge_kind, g.centre_kind,
                g.activity, g.distance_mpc, g.distance_err_mpc,
                bh.log_value + coalesce(f.log_f - vm.assumed_log_f, 0) as log_mbh,
                case when vm.assumed_log_f is not null then f.log_f end as mbh_log_f,
                vm.width_definition as mbh_width_definition,
                bh.err_dex as mbh_err_dex,
                bh.err_minus_dex as mbh_err_minus_dex, bh.err_plus_dex as mbh_err_plus_dex,
                bh.upper_limit as mbh_upper_limit, bh.method as mbh_method,
                bh.source_distance_mpc as mbh_source_distance_mpc,
                bh.resolution_arcsec as mbh_resolution_arcsec, bh.reference as mbh_reference,
                sg.log_value as log_sigma, sg.err_dex as sigma_err_dex,
                sg.sigma_definition as sigma_definition,
                bm.log_value as log_mbulge, bm.err_dex as mbulge_err_dex,
                bm.method as mbulge_method, bm.source_distance_mpc as mbulge_source_distance_mpc
           from galaxy_span g
      left join adopted_value_span abh on abh.galaxy_id = g.galaxy_id and abh.quantity = 'bh_mass'
                and ",
        held_at!("abh"),
        "
      left join measurement bh on bh.measurement_id = abh.measurement_id
      left join virial_measurement vm on vm.measurement_id = bh.measurement_id
      left join f on f.width_definition = vm.width_definition
      left join adopted_value_span asg on asg.galaxy_id = g.galaxy_id and asg.quantity = 'sigma'
                and ",
        held_at!("asg"),
        "
      left join measurement sg on sg.measurement_id = asg.measurement_id
      left join adopted_value_span abm on abm.galaxy_id = g.galaxy_id
                and abm.quantity = 'bulge_mass' and ",
        held_at!("abm"),
        "
      left join measurement bm on bm.measurement_id = abm.measurement_id
          where ",
        held_at!("g"),
        "
       order by g.name, g.galaxy_id"
    ))
    .bind(version)
    .fetch_all(db)
    .await
}

/// Every bulge luminosity adopted at catalog version `version`, by galaxy and band.
///
/// # Errors
/// When the database cannot be read.
pub async fn luminosity_rows_at(
    db: impl SqliteExecutor<'_>,
    version: i64,
) -> sqlx::Result<Vec<LuminosityRow>> {
    sqlx::query_as(concat!(
        "select m.galaxy_id, m.band, m.log_value, m.err_dex, m.source_distance_mpc
           from adopted_value_span a join measurement m on m.measurement_id = a.measurement_id
          where a.quantity = 'bulge_luminosity' and ",
        held_at!("a"),
        "
       order by m.galaxy_id, m.band"
    ))
    .bind(version)
    .fetch_all(db)
    .await
}

/// The photometric bands that have at least one adopted bulge luminosity, sorted.
///
/// # Errors
/// When the database cannot be read.
pub async fn luminosity_bands(pool: &SqlitePool) -> sqlx::Result<Vec<String>> {
    sqlx::query_scalar(
        "select distinct band from adopted_value where quantity = 'bulge_luminosity' order by band",
    )
    .fetch_all(pool)
    .await
}

/// The catalog version and every galaxy's adopted values as of that version, read in one read
/// transaction (so the rows are exactly those of the version). The fits and the catalog table
/// of one version share one snapshot instead of reading the catalog at every request.
#[derive(Debug, Clone, Default)]
pub struct RowsSnapshot {
    /// The catalog version read.
    pub version: i64,
    /// [`relation_rows`] at that version.
    pub rows: Vec<RelationRow>,
    /// [`luminosity_rows`] at that version.
    pub luminosities: Vec<LuminosityRow>,
}

/// Reads a [`RowsSnapshot`].
///
/// # Errors
/// When the database cannot be read.
pub async fn snapshot(pool: &SqlitePool) -> sqlx::Result<RowsSnapshot> {
    let mut tx = pool.begin().await?;
    let version = super::history::current_version(&mut *tx).await?;
    let rows = relation_rows_at(&mut *tx, version).await?;
    let luminosities = luminosity_rows_at(&mut *tx, version).await?;
    tx.commit().await?;
    Ok(RowsSnapshot {
        version,
        rows,
        luminosities,
    })
}

/// The [`RowsSnapshot`] of a past (or the current) catalog version, from the history; the
/// caller has checked that the version is one the history holds
/// ([`super::history::resolve`]).
///
/// # Errors
/// When the database cannot be read.
pub async fn snapshot_at(pool: &SqlitePool, version: i64) -> sqlx::Result<RowsSnapshot> {
    let mut tx = pool.begin().await?;
    let rows = relation_rows_at(&mut *tx, version).await?;
    let luminosities = luminosity_rows_at(&mut *tx, version).await?;
    tx.commit().await?;
    Ok(RowsSnapshot {
        version,
        rows,
        luminosities,
    })
}
