//! What a submission means for the catalog: where its galaxy falls against each relation
//! with the submitted values in place of the adopted ones, the sphere-of-influence check, the
//! mass at the adopted distance, and the adopted values it would replace. The submission page,
//! the check before submitting and the review queue all assess through here.

use std::sync::Arc;
use std::time::{Duration, Instant};

use super::place::{Placement, Subject, SubjectMass, input_text, place_against, place_within};
use super::{Catalog, Relation, at_adopted_distance, distance_scaling, sphere_of_influence};
use super::{FitOutcome, REQUEST_WAIT, SampleFilter};
use crate::astro::{SphereOfInfluence, distance_covariance_dex2, log_distance_error_dex};
use crate::catalog::model::NewMeasurement;
use crate::catalog::model::{Galaxy, Measurement, Quantity, SigmaDefinition};
use crate::catalog::submissions::{self, Clash, GalaxyChoice, Pending};
use crate::catalog::virial::Factors;
use crate::catalog::{galaxies, history, relation_rows, review_scores};
use crate::error::AppResult;
use crate::fit::Method;
use crate::units::format_log_with_errors;

/// A submitted black-hole mass moved to the galaxy's adopted distance.
#[derive(Debug, Clone, PartialEq)]
pub struct MassAtAdopted {
    /// The mass at the adopted distance, log10 M☉ with its errors, as shown.
    pub text: String,
    /// The adopted distance, Mpc.
    pub adopted_distance_mpc: f64,
    /// The mass as published, log10 M☉.
    pub published_log_mbh: f64,
    /// The distance the source assumed, Mpc.
    pub source_distance_mpc: Option<f64>,
}

/// See the module doc.
#[derive(Debug, Clone)]
pub struct Assessment {
    /// One placement per relation the galaxy has values for.
    pub placements: Vec<Placement>,
    /// The sphere-of-influence check of the (submitted or adopted) mass.
    pub sphere_of_influence: Option<SphereOfInfluence>,
    /// A submitted mass at the adopted distance.
    pub mass_at_adopted: Option<MassAtAdopted>,
    /// Adopted values the submission would replace.
    pub clashes: Vec<Clash>,
    /// The largest |z| over the relations (0 without a mass): the review queue's order.
    pub max_abs_z: f64,
}

/// The value of `quantity` (and band) to use: the submitted one if any, else the adopted one.
fn pick<'a>(
    submitted: &'a [Measurement],
    all: &'a [Measurement],
    quantity: Quantity,
    band: Option<&str>,
) -> Option<&'a Measurement> {
    let matches = |m: &&Measurement| {
        m.quantity == quantity && band.is_none_or(|b| m.band.eq_ignore_ascii_case(b))
    };
    submitted
        .iter()
        .find(matches)
        .or_else(|| all.iter().filter(|m| m.adopted).find(matches))
}

/// A galaxy's values moved to its adopted distance, with the distance error carried (the
/// rules of the fit samples, docs/methods.md §3.2).
struct AtAdopted<'a> {
    galaxy: &'a Galaxy,
    sigma_log_d: f64,
    /// The adopted virial factors a virial mass is moved to (docs/methods.md §4.7).
    factors: Factors,
}

impl<'a> AtAdopted<'a> {
    fn new(galaxy: &'a Galaxy, factors: Factors) -> Self {
        AtAdopted {
            galaxy,
            sigma_log_d: log_distance_error_dex(galaxy.distance_mpc, galaxy.distance_err_mpc)
                .unwrap_or(0.0),
            factors,
        }
    }

    fn log(&self, m: &Measurement) -> f64 {
        at_adopted_distance(
            m.log_at_factor(&self.factors),
            m.quantity,
            &m.method,
            m.source_distance_mpc,
            self.galaxy.distance_mpc,
        )
    }

    /// The value and its error with the distance error in quadrature; a limit is taken as
    /// exact, as in the fits.
    fn value(&self, m: &Measurement) -> (f64, f64) {
        let kind = distance_scaling(m.quantity, &m.method);
        let err = m
            .err_dex
            .hypot(f64::from(kind.exponent()) * self.sigma_log_d);
        (self.log(m), if m.upper_limit { 0.0 } else { err })
    }

    fn text(&self, m: &Measurement) -> String {
        format_log_with_errors(self.log(m), m.err_minus_dex, m.err_plus_dex, m.upper_limit)
    }
}

/// The values a submission puts on the relations: the submitted ones where given, else the
/// galaxy's adopted ones.
struct Chosen<'a> {
    mass: Option<&'a Measurement>,
    sigma_e: Option<&'a Measurement>,
    sigma_any: Option<&'a Measurement>,
    bulge: Option<&'a Measurement>,
}

impl<'a> Chosen<'a> {
    fn of(submitted: &'a [Measurement], all: &'a [Measurement]) -> Self {
        Chosen {
            mass: pick(submitted, all, Quantity::BlackHoleMass, None),
            sigma_e: pick(submitted, all, Quantity::VelocityDispersion, None)
                .filter(|m| m.sigma_definition == SigmaDefinition::Effective.as_str()),
            sigma_any: pick(submitted, all, Quantity::VelocityDispersion, None),
            bulge: pick(submitted, all, Quantity::BulgeMass, None),
        }
    }
}

/// The object a submission places on each relation it has values for (pure: no catalog read).
/// `all` holds the galaxy's measurements (only the adopted ones are used).
fn subjects(
    galaxy: &Galaxy,
    submitted: &[Measurement],
    all: &[Measurement],
    bands: &[String],
    factors: Factors,
) -> Vec<(Relation, Subject)> {
    let at = AtAdopted::new(galaxy, factors);
    let chosen = Chosen::of(submitted, all);
    let kind = |m: &Measurement| distance_scaling(m.quantity, &m.method);
    let mass = chosen.mass.map(|m| SubjectMass {
        log_mbh: at.log(m),
        err_minus_dex: m.err_minus_dex,
        err_plus_dex: m.err_plus_dex,
        err_dex: at.value(m).1,
        xy_cov: 0.0,
        x2_y_cov: 0.0,
        upper_limit: m.upper_limit,
    });
    let mut out = Vec::new();
    for relation in Relation::all(bands) {
        let (x, x2) = match &relation {
            Relation::MSigma => (chosen.sigma_e, None),
            Relation::MBulge => (chosen.bulge, None),
            Relation::Luminosity(b) => (
                pick(submitted, all, Quantity::BulgeLuminosity, Some(b)),
                None,
            ),
            Relation::SigmaBulgePlane => (
                chosen.sigma_e.filter(|_| chosen.bulge.is_some()),
                chosen.bulge,
            ),
        };
        let Some(x) = x else { continue };
        let x2_text = x2.map(|m| at.text(m));
        let mass = mass.zip(chosen.mass).map(|(mut subject_mass, m)| {
            if !m.upper_limit && !x.upper_limit {
                subject_mass.xy_cov = distance_covariance_dex2(
                    kind(m),
                    kind(x),
                    galaxy.distance_mpc,
                    galaxy.distance_err_mpc,
                )
                .unwrap_or(0.0);
            }
            subject_mass
        });
        let subject = Subject {
            name: galaxy.name.clone(),
            href: (galaxy.galaxy_id > 0).then(|| format!("/galaxies/{}", galaxy.slug)),
            x: at.value(x),
            x2: x2.map(|m| at.value(m)),
            mass,
            input: input_text(&relation, &at.text(x), x2_text.as_deref()),
        };
        out.push((relation, subject));
    }
    out
}

/// The largest |z| over the placements that have one (0 without a mass).
fn max_abs_z(placements: &[Placement]) -> f64 {
    placements
        .iter()
        .filter_map(|p| p.numbers.as_ref().ok()?.z)
        .fold(0.0_f64, |acc, z| acc.max(z.abs()))
}

/// Assess `submitted` (measurements of `galaxy`, stored or not); `refit` refits each relation
/// with the submission in (the costly part).
///
/// The adopted distance's error enters as in the fit samples (docs/methods.md §3.2): in
/// quadrature on each distance-dependent value, and as the x–y covariance of the two.
///
/// # Errors
/// When the catalog cannot be read or a fitting task fails.
pub async fn assess(
    catalog: &Catalog,
    galaxy: &Galaxy,
    submitted: &[Measurement],
    refit: bool,
) -> AppResult<Assessment> {
    let deadline = Instant::now() + REQUEST_WAIT;
    assess_until(catalog, galaxy, submitted, refit, deadline).await
}

/// As [`assess`], waiting for fits being computed until `deadline` at the latest (then the
/// placements say "computing"), so a page that assesses many submissions waits once.
///
/// # Errors
/// As [`assess`].
pub async fn assess_until(
    catalog: &Catalog,
    galaxy: &Galaxy,
    submitted: &[Measurement],
    refit: bool,
    deadline: Instant,
) -> AppResult<Assessment> {
    let all = galaxies::measurements_of(&catalog.pool, galaxy.galaxy_id).await?;
    let bands = valid_bands(&catalog.pool).await?;
    let factors = current_factors(&catalog.pool).await?;
    let mut placements = Vec::new();
    for (relation, subject) in subjects(galaxy, submitted, &all, &bands, factors) {
        let wait = deadline.saturating_duration_since(Instant::now());
        placements.push(place_within(catalog, &relation, &subject, refit, wait).await?);
    }
    let at = AtAdopted::new(galaxy, factors);
    let chosen = Chosen::of(submitted, &all);
    let sphere_of_influence = chosen.mass.and_then(|m| {
        sphere_of_influence(
            at.log(m),
            &m.method,
            chosen.sigma_any.map(|s| s.log_value),
            galaxy.distance_mpc,
            m.resolution_arcsec,
            catalog.soi_threshold,
        )
    });
    let mass_at_adopted = submitted
        .iter()
        .find(|m| m.quantity == Quantity::BlackHoleMass)
        .map(|m| MassAtAdopted {
            text: at.text(m),
            adopted_distance_mpc: galaxy.distance_mpc,
            published_log_mbh: m.log_value,
            source_distance_mpc: m.source_distance_mpc,
        });
    let submission_id = submitted.first().map_or(0, |m| m.submission_id);
    let clashes = submissions::clashes(&catalog.pool, submission_id).await?;
    Ok(Assessment {
        max_abs_z: max_abs_z(&placements),
        placements,
        sphere_of_influence,
        mass_at_adopted,
        clashes,
    })
}

/// The virial factors adopted at the current catalog version.
async fn current_factors(pool: &sqlx::SqlitePool) -> sqlx::Result<Factors> {
    let version = history::current_version(pool).await?;
    crate::catalog::virial::factors_at(pool, version).await
}

/// The photometric bands a luminosity relation can be fitted in.
async fn valid_bands(pool: &sqlx::SqlitePool) -> sqlx::Result<Vec<String>> {
    Ok(relation_rows::luminosity_bands(pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect())
}

/// Assess a submission before it is stored ("check against the relations"): the typed
/// measurements stand in for the galaxy's adopted ones (a new galaxy has none).
///
/// # Errors
/// [`crate::error::AppError::NotFound`] when the chosen galaxy has gone; as [`assess`].
pub async fn assess_unstored(
    catalog: &Catalog,
    choice: &GalaxyChoice,
    measurements: &[NewMeasurement],
) -> AppResult<Assessment> {
    let galaxy = match choice {
        GalaxyChoice::Existing(id) => submissions::galaxy_by_id(&catalog.pool, *id)
            .await?
            .ok_or_else(|| crate::error::AppError::not_found("The chosen galaxy"))?,
        GalaxyChoice::New(g) => Galaxy {
            galaxy_id: 0,
            name: g.name.clone(),
            slug: String::new(),
            morphology: g.morphology.as_str().to_owned(),
            bulge_kind: g.bulge_kind.as_str().to_owned(),
            centre_kind: g.centre_kind.as_str().to_owned(),
            distance_mpc: g.distance_mpc,
            distance_err_mpc: g.distance_err_mpc,
            distance_method: g.distance_method.as_str().to_owned(),
            activity: g.activity.as_str().to_owned(),
        },
    };
    let typed: Vec<Measurement> = measurements
        .iter()
        .map(|m| m.unstored(galaxy.galaxy_id))
        .collect();
    assess(catalog, &galaxy, &typed, true).await
}

/// One pending submission of the review queue with its galaxy and assessment.
#[derive(Debug, Clone)]
pub struct QueueEntry {
    /// The submission with its measurements.
    pub pending: Pending,
    /// Its galaxy.
    pub galaxy: Galaxy,
    /// What accepting it would mean, with the refits.
    pub assessment: Assessment,
}

/// Pending submissions scored on the request that shows the queue when they have no score
/// yet; more are left to the background analysis (`version_analysis`) so the page stays fast.
pub const SCORE_ON_REQUEST: usize = 200;

/// A page of the review queue.
#[derive(Debug, Clone)]
pub struct QueuePage {
    /// The submissions of the page, in the queue's order, each with its assessment.
    pub entries: Vec<QueueEntry>,
    /// Pending submissions in all.
    pub total: usize,
    /// Pending submissions not yet placed against the current catalog version's fits (they
    /// come last until the background analysis has placed them).
    pub unscored: usize,
}

/// A submission's score: its largest |z| against the relations' fits `outcome_of` gives.
fn score(
    galaxy: &Galaxy,
    submitted: &[Measurement],
    adopted: &[Measurement],
    bands: &[String],
    factors: Factors,
    outcome_of: &dyn Fn(&Relation) -> Option<Arc<FitOutcome>>,
) -> review_scores::Score {
    let placements: Vec<Placement> = subjects(galaxy, submitted, adopted, bands, factors)
        .into_iter()
        .filter_map(|(relation, subject)| {
            let outcome = outcome_of(&relation)?;
            Some(place_against(&relation, outcome, &subject))
        })
        .collect();
    review_scores::Score {
        submission_id: submitted.first().map_or(0, |m| m.submission_id),
        max_abs_z: max_abs_z(&placements),
        has_mass: Chosen::of(submitted, adopted).mass.is_some(),
    }
}

/// Scores the pending submissions that have no score at the current catalog version, against
/// that version's default fits (waited for at most `wait`; when one is not ready nothing is
/// scored and 0 is returned), and stores the scores. Reads the queue in three queries and
/// places in memory, off the async runtime. Returns how many were scored.
///
/// # Errors
/// When the catalog cannot be read or written.
pub async fn score_pending(catalog: &Catalog, wait: Option<Duration>) -> AppResult<usize> {
    let version = history::current_version(&catalog.pool).await?;
    let missing = review_scores::unscored(&catalog.pool, version).await?;
    if missing.is_empty() {
        return Ok(0);
    }
    let factors = crate::catalog::virial::factors_at(&catalog.pool, version).await?;
    let bands = valid_bands(&catalog.pool).await?;
    let mut outcomes = Vec::new();
    let deadline = wait.map(|w| Instant::now() + w);
    for relation in Relation::all(&bands) {
        let wait = deadline.map(|d| d.saturating_duration_since(Instant::now()));
        let pivots = (relation.default_pivot(), relation.default_pivot2());
        let choice = (
            &relation,
            Method::Structural,
            &SampleFilter::default(),
            pivots,
        );
        match catalog.fitted_within(choice, wait).await? {
            Ok(outcome) if outcome.key.catalog_version == version => {
                outcomes.push((relation, outcome));
            }
            // Not ready, or the catalog moved on: the next round scores against the new fits.
            _ => return Ok(0),
        }
    }
    let batch = review_scores::pending_batch(&catalog.pool).await?;
    let scores = tokio::task::spawn_blocking(move || {
        let wanted: std::collections::HashSet<i64> = missing.into_iter().collect();
        let outcome_of = |r: &Relation| {
            outcomes
                .iter()
                .find(|(o, _)| o == r)
                .map(|(_, f)| f.clone())
        };
        let none = Vec::new();
        batch
            .submissions
            .iter()
            .filter(|(id, _)| wanted.contains(id))
            .filter_map(|(_, measurements)| {
                // A submission's galaxy is that of its first measurement, as in the queue.
                let galaxy = batch.galaxies.get(&measurements.first()?.galaxy_id)?;
                let adopted = batch.adopted.get(&galaxy.galaxy_id).unwrap_or(&none);
                Some(score(
                    galaxy,
                    measurements,
                    adopted,
                    &bands,
                    factors,
                    &outcome_of,
                ))
            })
            .collect::<Vec<_>>()
    })
    .await
    .map_err(anyhow::Error::from)?;
    review_scores::store(&catalog.pool, version, &scores).await?;
    Ok(scores.len())
}

/// Page `page` (from 1) of the review queue, `per_page` a page, largest |z| first
/// (submissions without a mass last, oldest first among equals). The order is read from the
/// stored scores (`catalog::review_scores`) and paged in SQL, so a page costs the same with 25
/// or 10,000 pending submissions; only the page shown gets assessed with the refits. A short
/// list of submissions not scored yet is scored here first, so a small queue is always in
/// order; a long one is left to the background analysis and listed last meanwhile.
///
/// # Errors
/// As [`assess`].
pub async fn review_queue_page(
    catalog: &Catalog,
    page: usize,
    per_page: usize,
) -> AppResult<QueuePage> {
    let version = history::current_version(&catalog.pool).await?;
    let missing = review_scores::unscored(&catalog.pool, version).await?.len();
    if (1..=SCORE_ON_REQUEST).contains(&missing) {
        score_pending(catalog, Some(REQUEST_WAIT)).await?;
    }
    let total = usize::try_from(review_scores::pending_count(&catalog.pool).await?).unwrap_or(0);
    let unscored = review_scores::unscored(&catalog.pool, version).await?.len();
    let offset = page.saturating_sub(1).saturating_mul(per_page);
    let lines = review_scores::page(
        &catalog.pool,
        i64::try_from(offset).unwrap_or(i64::MAX),
        i64::try_from(per_page).unwrap_or(i64::MAX),
    )
    .await?;
    let ids: Vec<i64> = lines.iter().map(|l| l.submission_id).collect();
    let deadline = Instant::now() + REQUEST_WAIT;
    let mut entries = Vec::new();
    for pending in review_scores::pending_by_ids(&catalog.pool, &ids).await? {
        let Some(galaxy) =
            submissions::galaxy_by_id(&catalog.pool, pending.summary.galaxy_id).await?
        else {
            continue;
        };
        let assessment =
            assess_until(catalog, &galaxy, &pending.measurements, true, deadline).await?;
        entries.push(QueueEntry {
            pending,
            galaxy,
            assessment,
        });
    }
    Ok(QueuePage {
        entries,
        total,
        unscored,
    })
}
