//! What a submission means for the catalog: where its galaxy falls against each relation
//! with the submitted values in place of the adopted ones, the sphere-of-influence check, the
//! mass at the adopted distance, and the adopted values it would replace. The submission page,
//! the check before submitting and the review queue all assess through here.

use super::place::{Placement, Subject, SubjectMass, input_text, place};
use super::{Catalog, Relation, at_adopted_distance, distance_scaling, sphere_of_influence};
use crate::astro::{SphereOfInfluence, distance_covariance_dex2, log_distance_error_dex};
use crate::catalog::model::NewMeasurement;
use crate::catalog::model::{Galaxy, Measurement, Quantity, SigmaDefinition};
use crate::catalog::submissions::{self, Clash, GalaxyChoice, Pending};
use crate::catalog::{galaxies, relation_rows};
use crate::error::AppResult;
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
    let all = galaxies::measurements_of(&catalog.pool, galaxy.galaxy_id).await?;
    let at_adopted = |m: &Measurement| {
        at_adopted_distance(
            m.log_value,
            m.quantity,
            &m.method,
            m.source_distance_mpc,
            galaxy.distance_mpc,
        )
    };
    let sigma_log_d =
        log_distance_error_dex(galaxy.distance_mpc, galaxy.distance_err_mpc).unwrap_or(0.0);
    let kind = |m: &Measurement| distance_scaling(m.quantity, &m.method);
    let err_of = |m: &Measurement| m.err_dex.hypot(f64::from(kind(m).exponent()) * sigma_log_d);
    // A limit is taken as exact, as in the fits.
    let value = |m: &Measurement| (at_adopted(m), if m.upper_limit { 0.0 } else { err_of(m) });
    let text = |m: &Measurement| {
        format_log_with_errors(
            at_adopted(m),
            m.err_minus_dex,
            m.err_plus_dex,
            m.upper_limit,
        )
    };
    let mass_m = pick(submitted, &all, Quantity::BlackHoleMass, None);
    let sigma_m = pick(submitted, &all, Quantity::VelocityDispersion, None)
        .filter(|m| m.sigma_definition == SigmaDefinition::Effective.as_str());
    let bulge_m = pick(submitted, &all, Quantity::BulgeMass, None);
    let mass = mass_m.map(|m| SubjectMass {
        log_mbh: at_adopted(m),
        err_minus_dex: m.err_minus_dex,
        err_plus_dex: m.err_plus_dex,
        err_dex: value(m).1,
        xy_cov: 0.0,
        x2_y_cov: 0.0,
        upper_limit: m.upper_limit,
    });
    let bands: Vec<String> = relation_rows::luminosity_bands(&catalog.pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();
    let mut placements = Vec::new();
    for relation in Relation::all(&bands) {
        let (x, x2) = match &relation {
            Relation::MSigma => (sigma_m, None),
            Relation::MBulge => (bulge_m, None),
            Relation::Luminosity(b) => (
                pick(submitted, &all, Quantity::BulgeLuminosity, Some(b)),
                None,
            ),
            Relation::SigmaBulgePlane => (sigma_m.filter(|_| bulge_m.is_some()), bulge_m),
        };
        let Some(x) = x else { continue };
        let x2_text = x2.map(text);
        let mass = mass.zip(mass_m).map(|(mut subject_mass, m)| {
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
            x: value(x),
            x2: x2.map(value),
            mass,
            input: input_text(&relation, &text(x), x2_text.as_deref()),
        };
        placements.push(place(catalog, &relation, &subject, refit).await?);
    }
    let max_abs_z = placements
        .iter()
        .filter_map(|p| p.numbers.as_ref().ok()?.z)
        .fold(0.0_f64, |acc, z| acc.max(z.abs()));
    let sphere_of_influence = mass_m.and_then(|m| {
        sphere_of_influence(
            at_adopted(m),
            &m.method,
            pick(submitted, &all, Quantity::VelocityDispersion, None).map(|s| s.log_value),
            galaxy.distance_mpc,
            m.resolution_arcsec,
            catalog.soi_threshold,
        )
    });
    let mass_at_adopted = submitted
        .iter()
        .find(|m| m.quantity == Quantity::BlackHoleMass)
        .map(|m| MassAtAdopted {
            text: text(m),
            adopted_distance_mpc: galaxy.distance_mpc,
            published_log_mbh: m.log_value,
            source_distance_mpc: m.source_distance_mpc,
        });
    let submission_id = submitted.first().map_or(0, |m| m.submission_id);
    let clashes = submissions::clashes(&catalog.pool, submission_id).await?;
    Ok(Assessment {
        placements,
        sphere_of_influence,
        mass_at_adopted,
        clashes,
        max_abs_z,
    })
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

/// Page `page` (from 1) of the review queue, `per_page` a page, largest |z| first
/// (submissions without a mass last, oldest first among equals), and the number of pending
/// submissions. Every pending submission is placed against the cached fits to order them
/// (cheap); only the page asked for gets the refits with each submission in.
///
/// # Errors
/// As [`assess`].
pub async fn review_queue_page(
    catalog: &Catalog,
    page: usize,
    per_page: usize,
) -> AppResult<(Vec<QueueEntry>, usize)> {
    let mut ordered = Vec::new();
    for p in submissions::review_queue(&catalog.pool).await? {
        let Some(galaxy) = submissions::galaxy_by_id(&catalog.pool, p.summary.galaxy_id).await?
        else {
            continue;
        };
        let a = assess(catalog, &galaxy, &p.measurements, false).await?;
        ordered.push((a.max_abs_z, p, galaxy));
    }
    // Stable sort: equal |z| keep the queue's oldest-first order.
    ordered.sort_by(|a, b| b.0.total_cmp(&a.0));
    let total = ordered.len();
    let mut entries = Vec::new();
    for (_, pending, galaxy) in ordered
        .into_iter()
        .skip(page.saturating_sub(1).saturating_mul(per_page))
        .take(per_page)
    {
        let assessment = assess(catalog, &galaxy, &pending.measurements, true).await?;
        entries.push(QueueEntry {
            pending,
            galaxy,
            assessment,
        });
    }
    Ok((entries, total))
}
