//! The scaling relations the catalog supports, between the catalog and the fits.
//!
//! * [`Relation`]: which relation (M–σ, M_BH–M_bulge, M_BH–L per band, the plane in σ and
//!   M_bulge), with its URL slug, labels, axis labels with units and default pivot.
//! * [`SampleFilter`]: which galaxies enter a fit (morphology, bulge kind, centre kind, mass
//!   method, sphere of influence, σ definition), read from query parameters.
//! * [`build_sample`]: the catalog's adopted values turned into [`crate::fit::Point`]s, rescaled
//!   to the adopted distance, with the distance error added in quadrature and the x–y error
//!   covariance a shared distance induces (docs/methods.md §3.2).
//! * [`FitCache`] and [`fitted`]: fits keyed by (catalog version, relation, estimator, filter,
//!   pivot), computed off the async runtime; a new catalog version makes every old key unused.
//! * [`RunRegistry`]: bootstrap and posterior runs in the background, with progress; the
//!   finished run is stored as a `fit_run` row that later visits reuse ([`stored_run`]).
//! * [`fit_own_sample`]: a sample the caller brings (`massline fit`, `POST /api/v1/fit`)
//!   fitted with the pivot rule ([`default_pivot`], [`PivotRule`]), an optional bootstrap and
//!   an optional posterior.
//! * `defaults.rs`: the pivots ([`SIGMA_PIVOT_LOG`], [`default_pivot`]) and the sampler and
//!   bootstrap settings every door shares, each defined once.
//!
//! Depends on `catalog` (rows), `astro` (distance bookkeeping) and `fit`; used by `web`, `api`
//! and `cli`.

pub mod agn;
pub mod analysis;
pub mod assess;
pub mod bulge_ratio;
mod cache;
pub mod changes;
pub mod citation;
mod defaults;
mod filter;
pub mod galaxy;
mod own_sample;
pub mod place;
pub mod planning;
mod runs;
mod sample;
pub mod table;
pub mod version_analysis;
pub mod virial;

use std::fmt;

pub use cache::{
    Drawn, FitCache, FitChoiceRef, FitKey, FitOutcome, HoldGuard, InfluenceResult, fitted,
    fitted_leaving_out, fitted_within, load_sample, spec_for,
};
pub use defaults::{
    DEFAULT_REPLICATES, DEFAULT_STEPS, LUMINOSITY_PIVOT_LOG, MBULGE_PIVOT_LOG, POSTERIOR_BURN_IN,
    POSTERIOR_INIT_SCATTER, POSTERIOR_STEPS, POSTERIOR_WALKERS, PivotRule, PivotSettingNames,
    REPLICATES_RANGE, RUN_SEED, SIGMA_LIKE_MEDIAN, SIGMA_PIVOT_LOG, SMALL_SAMPLE, STEPS_RANGE,
    UnknownXQuantity, XQuantity, default_pivot,
};
#[cfg(test)]
pub(crate) use filter::pairs as test_pairs;
pub use filter::{
    FILTER_PARAMS, FIT_PARAMS, FitChoice, LimitsChoice, LimitsLeftOut, MassesChoice, SampleFilter,
    SigmaChoice, SoiChoice, TypedPivot, read_pivot, read_pivot_typed, takes_limits,
};
pub use own_sample::{OwnSampleError, OwnSampleFit, OwnSampleSettings, fit_own_sample};
pub use runs::{
    BOOTSTRAP_CHUNK, MAX_QUEUED_PER_ACCOUNT, RunKey, RunKind, RunProgress, RunRegistry, RunState,
    RunStatus, cancelled_sentence, filter_json, run_status, run_status_of, stored_run,
};
pub use sample::{
    Member, Sample, at_adopted_distance, build_sample, distance_scaling, sphere_of_influence,
};

use std::sync::Arc;

use sqlx::SqlitePool;

use crate::fit::{Method, Shape};

/// How long a request waits for a fit or an influence list being computed (by the background
/// analysis or another request) before it answers with what it has, saying "computing".
pub const REQUEST_WAIT: std::time::Duration = std::time::Duration::from_millis(1_000);

/// The catalog and its fits, as the computations on them read them (cheap to clone).
#[derive(Clone)]
pub struct Catalog {
    /// The catalog database.
    pub pool: SqlitePool,
    /// Fits kept per catalog version.
    pub fits: FitCache,
    /// θ_infl / resolution from which a sphere of influence counts as resolved.
    pub soi_threshold: f64,
    /// The catalog version everything is read at: `None` for the current one, `Some(N)` for a
    /// version a request named (`?version=N`, resolved by `catalog::history::resolve`).
    pub pinned: Option<i64>,
}

impl Catalog {
    /// The fit of `relation` by `method` on the galaxies `filter` admits, at `pivots`, from the
    /// cache when the catalog version has not changed ([`fitted`]).
    ///
    /// # Errors
    /// When the catalog cannot be read or the fitting task fails; a fit that cannot be made is
    /// an `Ok` outcome whose `fit` says why.
    pub async fn fitted(
        &self,
        relation: &Relation,
        method: Method,
        filter: &SampleFilter,
        pivots: (f64, f64),
    ) -> anyhow::Result<Arc<FitOutcome>> {
        fitted(
            &self.pool,
            &self.fits,
            self.soi_threshold,
            (relation, method, filter, pivots),
            self.pinned,
        )
        .await
    }

    /// The same catalog read at a resolved version (`catalog::history::resolve`): `None` for
    /// the current one.
    #[must_use]
    pub fn at(&self, version: Option<i64>) -> Catalog {
        Catalog {
            pinned: version,
            ..self.clone()
        }
    }

    /// The adopted rows at this catalog's version ([`FitCache::rows_at`]).
    ///
    /// # Errors
    /// When the database cannot be read.
    pub async fn rows(&self) -> sqlx::Result<Arc<crate::catalog::relation_rows::RowsSnapshot>> {
        self.fits.rows_at(&self.pool, self.pinned).await
    }

    /// The photometric bands with an adopted bulge luminosity at this catalog's version,
    /// sorted: which luminosity relations exist.
    ///
    /// # Errors
    /// When the database cannot be read.
    pub async fn bands(&self) -> sqlx::Result<Vec<String>> {
        match self.pinned {
            None => crate::catalog::relation_rows::luminosity_bands(&self.pool).await,
            // A named version's rows are read (and kept) for its fits anyway.
            Some(_) => {
                let mut bands: Vec<String> = self
                    .rows()
                    .await?
                    .luminosities
                    .iter()
                    .map(|l| l.band.clone())
                    .collect();
                bands.sort();
                bands.dedup();
                Ok(bands)
            }
        }
    }

    /// Every relation this catalog's version supports (the luminosity relations of the bands
    /// it has values in).
    ///
    /// # Errors
    /// When the database cannot be read.
    pub async fn relations(&self) -> sqlx::Result<Vec<Relation>> {
        let bands: Vec<String> = self
            .bands()
            .await?
            .into_iter()
            .filter(|b| Relation::valid_band(b))
            .collect();
        Ok(Relation::all(&bands))
    }

    /// As [`Catalog::fitted`], waiting at most `wait`; `Ok(Err(key))` names the fit still being
    /// computed in the background ([`fitted_within`]).
    ///
    /// # Errors
    /// As [`Catalog::fitted`].
    pub async fn fitted_within(
        &self,
        choice: FitChoiceRef<'_>,
        wait: Option<std::time::Duration>,
    ) -> anyhow::Result<Result<Arc<FitOutcome>, FitKey>> {
        // A named version is answered with its own fit only: never an older one shown while
        // it is computed.
        let wait = if self.pinned.is_some() { None } else { wait };
        fitted_within(
            &self.pool,
            &self.fits,
            self.soi_threshold,
            choice,
            wait,
            self.pinned,
        )
        .await
    }
}

/// Longest photometric band name the schema stores.
const MAX_BAND_CHARS: usize = 10;

/// A scaling relation between the black-hole mass and one or two host properties.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub enum Relation {
    /// log M_BH against log σ.
    MSigma,
    /// log M_BH against log M_bulge.
    MBulge,
    /// log M_BH against log L_bulge in one photometric band (as stored, e.g. "V", "K").
    Luminosity(String),
    /// log M_BH against log σ and log M_bulge together (a plane).
    SigmaBulgePlane,
}

/// Why a relation or a sample could not be had; each message is one sentence.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RelationError {
    /// The slug names no relation of this catalog.
    #[error("There is no relation '{slug}'; the catalog has {known}.")]
    UnknownRelation {
        /// The slug as given.
        slug: String,
        /// The slugs that exist, comma-separated.
        known: String,
    },
    /// A query parameter could not be read.
    #[error("{0}")]
    BadParameter(String),
}

impl Relation {
    /// Every relation the catalog can fit, given the bands that have luminosities.
    pub fn all(bands: &[String]) -> Vec<Relation> {
        let mut out = vec![Relation::MSigma, Relation::MBulge];
        out.extend(bands.iter().map(|b| Relation::Luminosity(b.clone())));
        out.push(Relation::SigmaBulgePlane);
        out
    }

    /// The URL form: `m_sigma`, `m_mbulge`, `m_l_v`, `m_l_k`, `m_sigma_mbulge`.
    pub fn slug(&self) -> String {
        match self {
            Relation::MSigma => "m_sigma".to_owned(),
            Relation::MBulge => "m_mbulge".to_owned(),
            Relation::Luminosity(band) => format!("m_l_{}", band.to_lowercase()),
            Relation::SigmaBulgePlane => "m_sigma_mbulge".to_owned(),
        }
    }

    /// Reads a slug against the bands present in the catalog (band match ignores case).
    ///
    /// # Errors
    /// [`RelationError::UnknownRelation`] naming the slugs that exist.
    pub fn from_slug(slug: &str, bands: &[String]) -> Result<Relation, RelationError> {
        Relation::all(bands)
            .into_iter()
            .find(|r| r.slug() == slug)
            .ok_or_else(|| RelationError::UnknownRelation {
                slug: slug.chars().take(80).collect(),
                known: Relation::all(bands)
                    .iter()
                    .map(Relation::slug)
                    .collect::<Vec<_>>()
                    .join(", "),
            })
    }

    /// Short name for headings, e.g. "M_BH–σ".
    pub fn label(&self) -> String {
        match self {
            Relation::MSigma => "M_BH–σ".to_owned(),
            Relation::MBulge => "M_BH–M_bulge".to_owned(),
            Relation::Luminosity(band) => format!("M_BH–L_{band}"),
            Relation::SigmaBulgePlane => "M_BH–(σ, M_bulge) plane".to_owned(),
        }
    }

    /// [`Relation::label`] in LaTeX, e.g. `$M_\mathrm{BH}$--$\sigma$` (BibTeX titles, tables).
    pub fn label_tex(&self) -> String {
        match self {
            Relation::MSigma => "$M_\\mathrm{BH}$--$\\sigma$".to_owned(),
            Relation::MBulge => "$M_\\mathrm{BH}$--$M_\\mathrm{bulge}$".to_owned(),
            Relation::Luminosity(band) => format!("$M_\\mathrm{{BH}}$--$L_{{{band}}}$"),
            Relation::SigmaBulgePlane => {
                "$M_\\mathrm{BH}$--($\\sigma$, $M_\\mathrm{bulge}$) plane".to_owned()
            }
        }
    }

    /// x-axis label with its unit (the first host property for the plane).
    pub fn x_label(&self) -> String {
        match self {
            Relation::MSigma | Relation::SigmaBulgePlane => crate::charts::sigma_axis_label(),
            Relation::MBulge => crate::charts::bulge_mass_axis_label(),
            Relation::Luminosity(band) => crate::charts::luminosity_axis_label(band),
        }
    }

    /// Label of the second host property with its unit (plane only).
    pub fn x2_label(&self) -> Option<String> {
        matches!(self, Relation::SigmaBulgePlane).then(crate::charts::bulge_mass_axis_label)
    }

    /// y-axis label with its unit.
    pub fn y_label(&self) -> String {
        crate::charts::black_hole_mass_axis_label()
    }

    /// Unit of the x value's log, for table headers (e.g. "log10 km/s").
    pub fn x_unit(&self) -> String {
        match self {
            Relation::MSigma | Relation::SigmaBulgePlane => "log10 km/s".to_owned(),
            Relation::MBulge => "log10 M☉".to_owned(),
            Relation::Luminosity(band) => format!("log10 L☉,{band}"),
        }
    }

    /// What the first host property measures (its unit and plausible range: the pivot's).
    pub fn x_quantity(&self) -> crate::units::Quantity {
        match self {
            Relation::MSigma | Relation::SigmaBulgePlane => {
                crate::units::Quantity::VelocityDispersion
            }
            Relation::MBulge => crate::units::Quantity::BulgeMass,
            Relation::Luminosity(_) => crate::units::Quantity::BulgeLuminosity,
        }
    }

    /// Default pivot x0 of the first host property, log10 units.
    pub fn default_pivot(&self) -> f64 {
        match self {
            Relation::MSigma | Relation::SigmaBulgePlane => SIGMA_PIVOT_LOG,
            Relation::MBulge => MBULGE_PIVOT_LOG,
            Relation::Luminosity(_) => LUMINOSITY_PIVOT_LOG,
        }
    }

    /// Default pivot of the second host property (bulge mass for the plane; unused otherwise).
    pub fn default_pivot2(&self) -> f64 {
        MBULGE_PIVOT_LOG
    }

    /// The functional form fitted.
    pub fn shape(&self) -> Shape {
        match self {
            Relation::SigmaBulgePlane => Shape::Plane,
            _ => Shape::Line,
        }
    }

    /// Whether the relation uses the velocity dispersion (and so the σ definition matters).
    pub fn uses_sigma(&self) -> bool {
        matches!(self, Relation::MSigma | Relation::SigmaBulgePlane)
    }

    /// Whether a band name is one the schema could have stored (1–10 letters or digits).
    pub fn valid_band(band: &str) -> bool {
        (1..=MAX_BAND_CHARS).contains(&band.chars().count())
            && band.chars().all(|c| c.is_ascii_alphanumeric())
    }
}

impl fmt::Display for Relation {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.label())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slugs_round_trip_with_the_bands_present() {
        let bands = vec!["K".to_owned(), "V".to_owned()];
        let all = Relation::all(&bands);
        let slugs: Vec<String> = all.iter().map(Relation::slug).collect();
        assert_eq!(
            slugs,
            ["m_sigma", "m_mbulge", "m_l_k", "m_l_v", "m_sigma_mbulge"]
        );
        for r in &all {
            assert_eq!(&Relation::from_slug(&r.slug(), &bands).unwrap(), r);
        }
        let err = Relation::from_slug("m_l_r", &bands).unwrap_err();
        assert!(err.to_string().contains("m_l_k, m_l_v"), "{err}");
        assert!(err.to_string().ends_with('.'));
    }

    #[test]
    fn pivots_and_labels_carry_units() {
        // Tremaine et al. 2002: σ0 = 200 km/s; bulge pivot 10¹¹ M☉ (common practice,
        // docs/methods.md §1).
        assert!((10f64.powf(Relation::MSigma.default_pivot()) - 200.0).abs() < 1e-9);
        assert!((Relation::MBulge.default_pivot() - 11.0).abs() < 1e-12);
        assert!(Relation::MSigma.x_label().contains("km/s"));
        assert!(Relation::Luminosity("K".into()).x_label().contains("L☉,K"));
        assert_eq!(Relation::SigmaBulgePlane.shape(), Shape::Plane);
        assert!(Relation::SigmaBulgePlane.x2_label().is_some());
        assert!(Relation::valid_band("K") && !Relation::valid_band("K<script>"));
    }
}
