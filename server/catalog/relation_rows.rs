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
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1-σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Adopted black-hole mass, log10 M☉, at `mbh_source_distance_mpc`.
    pub log_mbh: Option<f64>,
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

/// Every galaxy with its adopted black-hole mass, σ and bulge mass, ordered by name.
///
/// The catalog table filters, sorts and pages these rows in Rust, because some of its filters
/// (sphere of influence resolved or not, values at the adopted distance) are computed there; a
/// group's catalog of a few thousand rows is read in a few milliseconds.
///
/// # Errors
/// When the database cannot be read.
pub async fn relation_rows(db: impl SqliteExecutor<'_>) -> sqlx::Result<Vec<RelationRow>> {
    sqlx::query_as(
        "select g.galaxy_id, g.name, g.slug, g.morphology, g.bulge_kind, g.centre_kind,
                g.distance_mpc, g.distance_err_mpc,
                bh.log_value as log_mbh, bh.err_dex as mbh_err_dex,
                bh.err_minus_dex as mbh_err_minus_dex, bh.err_plus_dex as mbh_err_plus_dex,
                bh.upper_limit as mbh_upper_limit, bh.method as mbh_method,
                bh.source_distance_mpc as mbh_source_distance_mpc,
                bh.resolution_arcsec as mbh_resolution_arcsec, bh.reference as mbh_reference,
                sg.log_value as log_sigma, sg.err_dex as sigma_err_dex,
                sg.sigma_definition as sigma_definition,
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
    .fetch_all(db)
    .await
}

/// Every adopted bulge luminosity, by galaxy and band.
///
/// # Errors
/// When the database cannot be read.
pub async fn luminosity_rows(db: impl SqliteExecutor<'_>) -> sqlx::Result<Vec<LuminosityRow>> {
    sqlx::query_as(
        "select m.galaxy_id, m.band, m.log_value, m.err_dex, m.source_distance_mpc
           from adopted_value a join measurement m on m.measurement_id = a.measurement_id
          where a.quantity = 'bulge_luminosity'
       order by m.galaxy_id, m.band",
    )
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
    let rows = relation_rows(&mut *tx).await?;
    let luminosities = luminosity_rows(&mut *tx).await?;
    tx.commit().await?;
    Ok(RowsSnapshot {
        version,
        rows,
        luminosities,
    })
}
