//! One galaxy as the pages and the API show it: every measurement with its value at the
//! adopted distance, the sphere-of-influence check of each black-hole mass, and the galaxy
//! placed against each relation fitted without it.

use std::sync::Arc;
use std::time::Duration;

use sqlx::SqlitePool;

use super::place::{Placement, Subject, SubjectMass, input_text, place_against};
use super::{
    Catalog, FitKey, FitOutcome, Relation, Sample, SampleFilter, at_adopted_distance, build_sample,
    fitted_leaving_out, sphere_of_influence,
};
use crate::astro::SphereOfInfluence;
use crate::catalog::galaxies;
use crate::catalog::galaxies::Unreviewed;
use crate::catalog::model::{Galaxy, Measurement};
use crate::error::AppResult;
use crate::fit::Method;
use crate::units::{Quantity, format_log_with_errors};

/// A measurement with what follows from the galaxy's adopted values.
#[derive(Debug, Clone)]
pub struct MeasurementAt {
    /// The measurement as stored.
    pub measurement: Measurement,
    /// Its log value moved to the galaxy's adopted distance (docs/methods.md §3.2).
    pub log_value_at_adopted_distance: f64,
    /// For a black-hole mass: the sphere-of-influence check with the adopted σ, when it can be
    /// made (docs/methods.md §3.1).
    pub sphere_of_influence: Option<SphereOfInfluence>,
}

/// A galaxy with every measurement its reader may see, adopted first within a quantity.
#[derive(Debug, Clone)]
pub struct GalaxyRecord {
    /// The galaxy as stored.
    pub galaxy: Galaxy,
    /// Its measurements.
    pub measurements: Vec<MeasurementAt>,
    /// The virial factors adopted at the version read (a virial mass is shown at these:
    /// docs/methods.md §4.7).
    pub virial_factors: crate::catalog::virial::Factors,
}

impl GalaxyRecord {
    /// The adopted measurements.
    pub fn adopted(&self) -> impl Iterator<Item = &MeasurementAt> {
        self.measurements.iter().filter(|m| m.measurement.adopted)
    }

    /// The sphere-of-influence check of the adopted black-hole mass.
    pub fn adopted_sphere_of_influence(&self) -> Option<&SphereOfInfluence> {
        self.adopted()
            .find(|m| m.measurement.quantity == Quantity::BlackHoleMass)
            .and_then(|m| m.sphere_of_influence.as_ref())
    }
}

/// The galaxy whose slug is `slug`, with the measurements its reader may see: accepted and
/// rejected ones, and the unreviewed ones `shown` admits (the doors pass
/// `Principal::unreviewed_shown` of who asks); None when there is no such galaxy. Pages and
/// the API both read a galaxy through here, so the rule is applied once.
///
/// # Errors
/// When the database fails.
pub async fn galaxy_record(
    pool: &SqlitePool,
    soi_threshold: f64,
    slug: &str,
    shown: Unreviewed,
) -> sqlx::Result<Option<GalaxyRecord>> {
    galaxy_record_at(pool, soi_threshold, slug, shown, None).await
}

/// [`galaxy_record`] at catalog version `version` (`None`: now). At a past version the galaxy
/// has the properties it had then, and its measurements are the ones adopted then: the
/// catalog's record of that version, whoever reads it.
///
/// # Errors
/// When the database fails.
pub async fn galaxy_record_at(
    pool: &SqlitePool,
    soi_threshold: f64,
    slug: &str,
    shown: Unreviewed,
    version: Option<i64>,
) -> sqlx::Result<Option<GalaxyRecord>> {
    let galaxy = match version {
        None => galaxies::find_by_slug(pool, slug).await?,
        Some(v) => galaxies::find_by_slug_at(pool, slug, v).await?,
    };
    let Some(galaxy) = galaxy else {
        return Ok(None);
    };
    let at_version = match version {
        Some(v) => v,
        None => crate::catalog::history::current_version(pool).await?,
    };
    let virial_factors = crate::catalog::virial::factors_at(pool, at_version).await?;
    let measurements = match version {
        None => galaxies::measurements_seen(pool, galaxy.galaxy_id, shown).await?,
        Some(v) => galaxies::measurements_adopted_at(pool, galaxy.galaxy_id, v).await?,
    };
    // The adopted σ is what the sphere-of-influence check uses.
    let adopted_log_sigma = measurements
        .iter()
        .find(|m| m.quantity == Quantity::VelocityDispersion && m.adopted)
        .map(|m| m.log_value);
    let measurements = measurements
        .into_iter()
        .map(|m| {
            let at_d = at_adopted_distance(
                m.log_at_factor(&virial_factors),
                m.quantity,
                &m.method,
                m.source_distance_mpc,
                galaxy.distance_mpc,
            );
            let soi = (m.quantity == Quantity::BlackHoleMass)
                .then(|| {
                    sphere_of_influence(
                        at_d,
                        &m.method,
                        adopted_log_sigma,
                        galaxy.distance_mpc,
                        m.resolution_arcsec,
                        soi_threshold,
                    )
                })
                .flatten();
            MeasurementAt {
                measurement: m,
                log_value_at_adopted_distance: at_d,
                sphere_of_influence: soi,
            }
        })
        .collect();
    Ok(Some(GalaxyRecord {
        galaxy,
        measurements,
        virial_factors,
    }))
}

/// A catalog galaxy against the relations fitted without it.
#[derive(Debug, Clone)]
pub struct LeftOutPlacements {
    /// One placement per relation the galaxy has values for.
    pub placements: Vec<Placement>,
    /// Why no relation applies, when none does.
    pub none_because: Option<String>,
    /// Relations whose fit (or influence list) is still being computed in the background.
    pub computing: Vec<String>,
    /// Relations placed against the one-step approximation of the fit without the galaxy.
    pub approximate: Vec<String>,
    /// Relations whose default sample does not hold the galaxy's mass (a reverberation or
    /// single-epoch mass: docs/methods.md §4.7): it is placed against their default fit.
    pub outside_default: Vec<String>,
    /// The black-hole and bulge masses as the M_BH–M_bulge fit reads them (at the adopted
    /// distance), when the galaxy has both (`relations::bulge_ratio`).
    pub bulge_masses: Option<super::bulge_ratio::RatioMasses>,
}

/// Largest sample whose fit without one galaxy is refitted exactly on a galaxy page. Above it
/// the page takes the fit without the galaxy from the whole sample's fit and the galaxy's
/// one-step leave-one-out change (`fit::leave_one_out`, computed once per version by the
/// background analysis): a refit of a survey-sized sample per page view, per relation, would
/// cost seconds, and one object moves such a fit by far less than its errors.
pub const LEFT_OUT_REFIT_MAX: usize = 2_000;

/// The galaxy against every relation it has values for, each fitted (structural, default
/// sample and pivots, as on the relations' pages) without the galaxy, so its own point cannot
/// pull the relation towards itself. The left-out fits are cached per catalog version; above
/// [`LEFT_OUT_REFIT_MAX`] objects they come from the one-step approximation. A fit not ready
/// within `wait` is named in `computing` instead of placed.
///
/// # Errors
/// When the catalog cannot be read or a fitting task fails.
pub async fn place_left_out(
    catalog: &Catalog,
    galaxy_id: i64,
    wait: Option<Duration>,
) -> AppResult<LeftOutPlacements> {
    place_left_out_among(catalog, galaxy_id, wait, |_| true).await
}

/// [`place_left_out`] against the relations `among` admits only (the API's galaxy answer
/// places against M_BH–M_bulge alone, for the ratio of the masses).
///
/// # Errors
/// As [`place_left_out`].
pub async fn place_left_out_among(
    catalog: &Catalog,
    galaxy_id: i64,
    wait: Option<Duration>,
    among: impl Fn(&Relation) -> bool,
) -> AppResult<LeftOutPlacements> {
    let snapshot = catalog.rows().await?;
    let (rows, lums) = (&snapshot.rows, &snapshot.luminosities);
    let method = Method::Structural;
    let filter = SampleFilter::default().for_method(method);
    let mut placements = Vec::new();
    let (mut computing, mut approximate, mut outside_default) =
        (Vec::new(), Vec::new(), Vec::new());
    let mut bulge_masses = None;
    // The galaxy with every kind of mass admitted: a virial mass, which no default sample
    // holds, is placed against the default fit it is not part of.
    let own_row = rows.iter().find(|r| r.galaxy_id == galaxy_id);
    let every_mass = SampleFilter {
        masses: super::MassesChoice::All,
        ..filter
    };
    for relation in catalog.relations().await? {
        if !among(&relation) {
            continue;
        }
        let pivots = (relation.default_pivot(), relation.default_pivot2());
        let full_key = FitKey::new(
            snapshot.version,
            &relation,
            method,
            &filter,
            pivots.0,
            pivots.1,
        );
        // A survey-sized sample is read from the whole sample's cached fit (the background
        // analysis made it) rather than rebuilt from every catalog row on each page view.
        let cached = catalog
            .fits
            .get(&full_key)
            .filter(|full| full.sample.points.len() > LEFT_OUT_REFIT_MAX);
        let sample = match &cached {
            Some(full) => full.sample.clone(),
            None => Arc::new(build_sample(
                rows,
                lums,
                &relation,
                &filter,
                catalog.soi_threshold,
            )),
        };
        let Some(index) = sample.members.iter().position(|m| m.galaxy_id == galaxy_id) else {
            let own = own_row.map(|row| {
                build_sample(
                    std::slice::from_ref(row),
                    lums,
                    &relation,
                    &every_mass,
                    catalog.soi_threshold,
                )
            });
            if let Some(own) = own.filter(|s| s.points.len() == 1) {
                if relation == Relation::MBulge {
                    bulge_masses = super::bulge_ratio::RatioMasses::of_sample(&own, 0);
                }
                let choice = (&relation, method, &filter, pivots);
                match catalog.fitted_within(choice, wait).await? {
                    Ok(full) => {
                        outside_default.push(relation.label());
                        placements.push(place_against(
                            &relation,
                            full,
                            &subject_of(&relation, &own, 0),
                        ));
                    }
                    Err(_) => computing.push(relation.label()),
                }
            }
            continue;
        };
        if relation == Relation::MBulge {
            bulge_masses = super::bulge_ratio::RatioMasses::of_sample(&sample, index);
        }
        let outcome = if sample.points.len() <= LEFT_OUT_REFIT_MAX {
            match fitted_leaving_out(
                &catalog.fits,
                &full_key,
                &relation,
                method,
                &sample,
                galaxy_id,
                wait,
            )
            .await?
            {
                Some((Some(outcome), _)) => outcome,
                Some((None, _)) => {
                    computing.push(relation.label());
                    continue;
                }
                None => continue,
            }
        } else {
            let full = match cached {
                Some(full) => full,
                None => {
                    let choice = (&relation, method, &filter, pivots);
                    let Ok(full) = catalog.fitted_within(choice, wait).await? else {
                        computing.push(relation.label());
                        continue;
                    };
                    full
                }
            };
            let Some(influence) = catalog.fits.influence_within(&full, wait).await? else {
                computing.push(relation.label());
                continue;
            };
            let shift = influence.as_ref().as_ref().ok().and_then(|list| {
                full.sample
                    .members
                    .iter()
                    .position(|m| m.galaxy_id == galaxy_id)
                    .and_then(|i| list.iter().find(|inf| inf.index == i))
            });
            let (Ok(fit), Some(shift)) = (&full.fit, shift) else {
                // No fit, or no change known for this galaxy: placed against the whole sample.
                placements_push_full(&mut placements, &relation, &full, &sample, index);
                continue;
            };
            approximate.push(relation.label());
            Arc::new(FitOutcome {
                key: full.key.leaving_out(galaxy_id),
                sample: full.sample.clone(),
                fit: Ok(fit.shifted(
                    shift.d_alpha,
                    shift.d_beta,
                    shift.d_beta2.or(shift.d_gamma),
                    shift.d_eps,
                )),
                spec: full.spec.clone(),
                fitted_at: full.fitted_at.clone(),
            })
        };
        placements.push(place_against(
            &relation,
            outcome,
            &subject_of(&relation, &sample, index),
        ));
    }
    let none_because = (placements.is_empty() && computing.is_empty()).then(|| {
        let why = match rows.iter().find(|r| r.galaxy_id == galaxy_id) {
            Some(r) if r.log_mbh.is_none() => {
                "it has no adopted black-hole mass or upper limit".to_owned()
            }
            Some(r) if r.sigma_definition.as_deref() == Some("sigma_c") => {
                "its adopted σ is a central σ_c, which the default fits (σ_e) leave out, and it has no bulge mass or luminosity".to_owned()
            }
            _ => "it has no adopted σ_e, bulge mass or bulge luminosity".to_owned(),
        };
        format!(
            "No relation applies to this galaxy: {why}. The relations need a black-hole mass (or upper limit) with a velocity dispersion σ_e, a bulge mass, or a bulge luminosity."
        )
    });
    Ok(LeftOutPlacements {
        placements,
        none_because,
        computing,
        approximate,
        outside_default,
        bulge_masses,
    })
}

/// The galaxy `index` of `sample` as the object placed.
fn subject_of(relation: &Relation, sample: &Sample, index: usize) -> Subject {
    let (p, m) = (&sample.points[index], &sample.members[index]);
    let shown = |v: f64, e: f64| format_log_with_errors(v, e, e, false);
    let x2_text = p.x2.map(|b| shown(b, p.x2_err));
    Subject {
        name: m.name.clone(),
        href: Some(format!("/galaxies/{}", m.slug)),
        x: (p.x, p.x_err),
        x2: p.x2.map(|b| (b, p.x2_err)),
        mass: Some(SubjectMass {
            log_mbh: p.y,
            err_minus_dex: p.y_err,
            err_plus_dex: p.y_err,
            err_dex: p.y_err,
            xy_cov: p.xy_cov,
            x2_y_cov: p.x2_y_cov,
            upper_limit: p.upper_limit,
        }),
        input: input_text(relation, &shown(p.x, p.x_err), x2_text.as_deref()),
    }
}

/// Places the galaxy against the whole sample's fit (when no left-out change is known).
fn placements_push_full(
    placements: &mut Vec<Placement>,
    relation: &Relation,
    full: &Arc<FitOutcome>,
    sample: &Sample,
    index: usize,
) {
    placements.push(place_against(
        relation,
        full.clone(),
        &subject_of(relation, sample, index),
    ));
}
