//! `GET /api/v1/place` (one object, the place page's query parameters) and `POST
//! /api/v1/place` (a batch of up to [`MAX_BATCH`] objects as a JSON array): where each object
//! falls against every relation it has values for, answered as on the place page.
//!
//! The numbers come from the same computation as the place page's (`relations::place`: the
//! value reader, `placement_numbers`, the sphere-of-influence check): predicted log M_BH with 68 %
//! and 95 % predictive intervals, residual, z, verdict, P(true mass below a limit), and the
//! sphere-of-influence check. The page's refit with the object and its charts are left out:
//! they are for people reviewing one object, and cost milliseconds each.
//!
//! ```text
//! ŷ = α + β (x − x0) [+ γ (x2 − x02)],  s_pred² = ε² + gᵀ C g + β² σ_x² [+ γ² σ_x2²]
//! r = y − ŷ,  z = r / √(s_pred² + σ_y²),  limit: P(true < y_lim) = Φ(r / s_pred)
//! ```
//! Fits: the structural fit of the whole catalog at its default pivots (as on the place
//! page), from the fit cache.

use axum::response::{IntoResponse, Response};
use std::sync::Arc;

use axum::Json;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Query, State};
use serde::{Deserialize, Serialize};
use utoipa::{IntoParams, ToSchema};

use super::cache::ApiCache;
use super::problem::Problem;
use super::relations::all_relations;
use super::{ApiJson, ApiResult, query_pairs};
use crate::astro::SphereOfInfluence;
use crate::error::{AppError, FieldError};
use crate::fit::{FitError, Method};
use crate::relations::bulge_ratio::{self, RatioMasses, RelationBasis};
use crate::relations::place::{
    OBJECT_FIELDS, ObjectTexts, ObjectValues, placement_numbers, read_object,
};
use crate::relations::{FitOutcome, REQUEST_WAIT, Relation};
use crate::state::AppState;

/// Most objects one batch may hold.
pub const MAX_BATCH: usize = 10_000;
/// Body limit of a batch: 10,000 objects of about 400 bytes.
pub const BATCH_LIMIT_BYTES: usize = 4 * 1024 * 1024;
/// Longest value text accepted per field.
const MAX_FIELD_CHARS: usize = 200;
/// Batches from this size are placed on the blocking pool.
const BLOCKING_FROM: usize = 64;

/// One object: the place page's fields, each a value as typed (the forms of README "Typing
/// values"), all optional. Keys other than these are refused.
#[derive(Debug, Clone, Default, Serialize, Deserialize, ToSchema, IntoParams)]
#[serde(deny_unknown_fields)]
#[into_params(parameter_in = Query)]
pub struct PlaceObject {
    /// Velocity dispersion σ_e in km/s, e.g. `210 ± 10`.
    #[schema(example = "210 ± 10")]
    pub sigma: Option<String>,
    /// Bulge mass in M☉, e.g. `2e11 ± 10%`.
    #[schema(example = "2e11 ± 10%")]
    pub bulge_mass: Option<String>,
    /// Bulge luminosity in L☉ of `band`, e.g. `5e10 ± 1e10`.
    pub luminosity: Option<String>,
    /// Photometric band of the luminosity (one the catalog has, e.g. `K`).
    pub band: Option<String>,
    /// Black-hole mass or upper limit in M☉, e.g. `3.2e8 +0.5e8/-0.3e8` or `<2e7`.
    #[schema(example = "3.2e8 +0.5e8/-0.3e8")]
    pub mass: Option<String>,
    /// Distance in Mpc, e.g. `16.5 ± 0.8` (for the sphere of influence).
    pub distance: Option<String>,
    /// Spatial resolution of the mass measurement in arcsec, e.g. `0.1`.
    pub resolution: Option<String>,
    /// log10 of λL_λ(5100 Å) in erg/s, 38 to 49, e.g. `44.2`: with a mass, the answer has the
    /// Eddington quantities.
    #[schema(example = "44.2")]
    pub log_l5100_erg_s: Option<String>,
    /// The nucleus' activity class: `quiescent`, `seyfert1`, `seyfert2`, `liner`, `quasar`,
    /// `radio_galaxy` or `unknown`.
    pub activity: Option<String>,
}

/// The Eddington quantities of a black hole from its mass and λL(5100 Å), as on the galaxy
/// page and the place page (`relations::agn::eddington`; docs/methods.md §4.4, §4.5).
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct EddingtonAnswer {
    /// The mass used, log10 M☉.
    pub log_mass_msun: f64,
    /// λL(5100 Å) used, log10 erg/s.
    pub log_l5100_erg_s: f64,
    /// Bolometric correction at 5100 Å (Richards et al. 2006, from memory).
    pub bolometric_correction: f64,
    /// Bolometric luminosity, erg/s.
    pub l_bol_erg_s: f64,
    /// Eddington luminosity of the mass, erg/s.
    pub l_edd_erg_s: f64,
    /// L_bol / L_Edd.
    pub eddington_ratio: f64,
    /// Radiative efficiency of a thin disk around a non-rotating hole (spin 0).
    pub efficiency_spin_0: f64,
    /// Radiative efficiency at spin 0.998.
    pub efficiency_spin_0998: f64,
    /// Accretion rate at the higher efficiency (spin 0.998), M☉ per Julian year.
    pub accretion_min_msun_yr: f64,
    /// Accretion rate at the lower efficiency (spin 0), M☉ per Julian year.
    pub accretion_max_msun_yr: f64,
}

impl From<&crate::relations::agn::Eddington> for EddingtonAnswer {
    fn from(e: &crate::relations::agn::Eddington) -> Self {
        Self {
            log_mass_msun: e.log_mass_msun,
            log_l5100_erg_s: e.log_l5100_erg_s,
            bolometric_correction: e.bolometric_correction,
            l_bol_erg_s: e.l_bol_erg_s,
            l_edd_erg_s: e.l_edd_erg_s,
            eddington_ratio: e.eddington_ratio,
            efficiency_spin_0: e.efficiency.0,
            efficiency_spin_0998: e.efficiency.1,
            accretion_min_msun_yr: e.accretion_msun_yr.0,
            accretion_max_msun_yr: e.accretion_msun_yr.1,
        }
    }
}

/// What the M_BH–M_bulge relation predicts for M_BH/M_bulge at the object's bulge mass
/// (`relations::bulge_ratio`).
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct RelationRatioAnswer {
    /// The relation's slug (`m_mbulge`).
    pub relation: String,
    /// The identifier of the default fit (`/api/v1/…` and `/fits/{id}`); for a catalog galaxy
    /// the fit was refitted without it (`without_this_galaxy`).
    pub fit_id: String,
    /// Catalog version of the fit.
    pub catalog_version: i64,
    /// Whether the fit left the galaxy out (the galaxy answer) or not (the place check).
    pub without_this_galaxy: bool,
    /// Predicted log10(M_BH/M_bulge): ŷ(log M_bulge) − log M_bulge.
    pub log_ratio: f64,
    /// Predicted ratio as a fraction.
    pub fraction: f64,
    /// Predicted ratio in per cent.
    pub percent: f64,
    /// Lower end of the 68 % predictive interval, per cent.
    pub interval68_low_percent: f64,
    /// Upper end of the 68 % predictive interval, per cent.
    pub interval68_high_percent: f64,
    /// The placement's z (the residual of log M_BH at this bulge mass is that of the ratio).
    pub z: Option<f64>,
    /// The placement's verdict: `consistent`, `in tension`, `outlier`, or for a limit `in
    /// tension (limit below)`, `outlier (limit far below)`.
    pub verdict: Option<String>,
}

/// M_BH/M_bulge against the rule of thumb of 0.1–0.5 % (common practice) and against the
/// M_BH–M_bulge relation (`relations::bulge_ratio`; docs/methods.md §3.4). Both masses are at the
/// adopted distance for a catalog galaxy (as the fits read them), as typed for the place check.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct BulgeRatioAnswer {
    /// The black-hole mass used, log10 M☉ (for a limit, the limit).
    pub log_mbh: f64,
    /// The bulge mass used, log10 M☉.
    pub log_mbulge: f64,
    /// log10(M_BH/M_bulge) (for a limit, the limit).
    pub log_ratio: f64,
    /// Its lower 1σ error, dex: both masses' errors in quadrature less twice the covariance of
    /// a shared distance (0 for a limit).
    pub log_ratio_err_minus_dex: f64,
    /// Its upper 1σ error, dex.
    pub log_ratio_err_plus_dex: f64,
    /// The ratio as a fraction.
    pub fraction: f64,
    /// The ratio in per cent.
    pub percent: f64,
    /// Lower end of the 1σ range, per cent.
    pub percent_low: f64,
    /// Upper end of the 1σ range, per cent.
    pub percent_high: f64,
    /// Whether the ratio is an upper limit (the black-hole mass is one).
    pub upper_limit: bool,
    /// Lower end of the usual range, per cent (0.1; common practice).
    pub usual_range_low_percent: f64,
    /// Upper end of the usual range, per cent (0.5; common practice).
    pub usual_range_high_percent: f64,
    /// Against the usual range: `within the usual range`, `above the usual range`, `below the
    /// usual range`; for a limit also `within or below the usual range` or `no test: the limit
    /// lies above the usual range`.
    pub range_verdict: String,
    /// Whether the ratio lies outside the usual range.
    pub outside_usual_range: bool,
    /// The relation's prediction, when the object could be placed against it.
    pub relation: Option<RelationRatioAnswer>,
    /// Why there is no prediction, when there is none.
    pub relation_note: Option<String>,
    /// The comparison in one sentence, as the pages say it.
    pub sentence: String,
}

impl From<&crate::relations::bulge_ratio::BulgeRatio> for BulgeRatioAnswer {
    fn from(r: &crate::relations::bulge_ratio::BulgeRatio) -> Self {
        Self {
            log_mbh: r.masses.log_mbh,
            log_mbulge: r.masses.log_mbulge,
            log_ratio: r.log_ratio,
            log_ratio_err_minus_dex: r.log_ratio_err_dex.0,
            log_ratio_err_plus_dex: r.log_ratio_err_dex.1,
            fraction: r.fraction,
            percent: r.percent,
            percent_low: r.percent_1sigma.0,
            percent_high: r.percent_1sigma.1,
            upper_limit: r.upper_limit,
            usual_range_low_percent: r.usual_range_percent.0,
            usual_range_high_percent: r.usual_range_percent.1,
            range_verdict: r.range_verdict.to_owned(),
            outside_usual_range: r.outside_usual_range,
            relation: r.relation.as_ref().map(|rel| RelationRatioAnswer {
                relation: rel.relation.clone(),
                fit_id: rel.fit_id.clone(),
                catalog_version: rel.catalog_version,
                without_this_galaxy: rel.without_this_galaxy,
                log_ratio: rel.log_ratio,
                fraction: rel.fraction,
                percent: rel.percent,
                interval68_low_percent: rel.interval68_percent.0,
                interval68_high_percent: rel.interval68_percent.1,
                z: rel.z,
                verdict: rel.verdict.map(str::to_owned),
            }),
            relation_note: r.relation_note.clone(),
            sentence: r.sentence.clone(),
        }
    }
}

/// Where the object falls against one relation.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct RelationPlacement {
    /// Relation slug.
    pub relation: String,
    /// Short name.
    pub label: String,
    /// The host property used, log10 in the relation's x unit.
    pub x_log: f64,
    /// Its 1σ error, dex.
    pub x_err_dex: f64,
    /// The second host property (the plane's bulge mass), log10 M☉.
    pub x2_log: Option<f64>,
    /// Its 1σ error, dex.
    pub x2_err_dex: Option<f64>,
    /// Predicted log10 M_BH/M☉.
    pub predicted_log_mbh: Option<f64>,
    /// Predictive standard deviation, dex (scatter, parameter and x errors).
    pub prediction_sd_dex: Option<f64>,
    /// Lower end of the 68 % predictive interval, log10 M☉.
    pub interval68_low_log_mbh: Option<f64>,
    /// Upper end of the 68 % predictive interval, log10 M☉.
    pub interval68_high_log_mbh: Option<f64>,
    /// Lower end of the 95 % predictive interval, log10 M☉.
    pub interval95_low_log_mbh: Option<f64>,
    /// Upper end of the 95 % predictive interval, log10 M☉.
    pub interval95_high_log_mbh: Option<f64>,
    /// Observed (or limit) minus predicted log10 M_BH, dex; null without a mass.
    pub residual_dex: Option<f64>,
    /// Residual over its standard deviation; null without a mass.
    pub z: Option<f64>,
    /// `consistent` (|z| < 2), `in tension` (2–3), `outlier` (≥ 3); for a limit `in tension
    /// (limit below)` or `outlier (limit far below)` when it lies that far under the relation.
    pub verdict: Option<String>,
    /// For an upper limit: probability that the true log10 M_BH lies below it.
    pub prob_below_limit: Option<f64>,
    /// Why this relation could not place the object (no fit, …).
    pub problem: Option<String>,
}

/// The sphere-of-influence check (needs the mass, σ and the distance); the galaxy endpoint
/// answers the same for the adopted mass.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct SoiAnswer {
    /// r_infl = G M_BH / σ², pc.
    pub radius_pc: f64,
    /// θ_infl = r_infl / D, arcsec.
    pub theta_arcsec: f64,
    /// The resolution given, arcsec.
    pub resolution_arcsec: Option<f64>,
    /// θ_infl / resolution.
    pub ratio: Option<f64>,
    /// Whether the ratio reaches the server's threshold; null without a resolution.
    pub resolved: Option<bool>,
    /// The threshold.
    pub threshold: f64,
}

impl From<&SphereOfInfluence> for SoiAnswer {
    fn from(s: &SphereOfInfluence) -> Self {
        Self {
            radius_pc: s.radius_pc,
            theta_arcsec: s.theta_arcsec,
            resolution_arcsec: s.resolution_arcsec,
            ratio: s.ratio,
            resolved: s.resolved,
            threshold: s.threshold,
        }
    }
}

/// One object's answer.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct PlaceAnswer {
    /// Every relation the object has values for, in the relations' order.
    pub relations: Vec<RelationPlacement>,
    /// The sphere-of-influence check, when the mass, σ and distance were given.
    pub sphere_of_influence: Option<SoiAnswer>,
    /// Why there is no sphere-of-influence check or no relation, when that is so.
    pub note: Option<String>,
    /// The Eddington quantities, when a mass and `log_l5100_erg_s` were given.
    pub eddington: Option<EddingtonAnswer>,
    /// Why there are none although `log_l5100_erg_s` was given.
    pub eddington_note: Option<String>,
    /// M_BH/M_bulge against the usual range and the M_BH–M_bulge relation, when `mass` and
    /// `bulge_mass` were given; null otherwise.
    pub bulge_ratio: Option<BulgeRatioAnswer>,
}

/// The answer for one object.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct PlaceResult {
    /// Catalog version of the fits.
    pub catalog_version: i64,
    /// Estimator of the fits (`structural`).
    pub estimator: String,
    /// The object's placement.
    pub object: PlaceAnswer,
}

/// The answer for a batch.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct PlaceBatchResult {
    /// Catalog version of the fits.
    pub catalog_version: i64,
    /// Estimator of the fits (`structural`).
    pub estimator: String,
    /// One answer per object, in the order sent.
    pub objects: Vec<PlaceAnswer>,
}

impl From<PlaceObject> for ObjectTexts {
    fn from(o: PlaceObject) -> Self {
        let text = |v: Option<String>| {
            let v = v.unwrap_or_default();
            if v.trim().len() == v.len() {
                v
            } else {
                v.trim().to_owned()
            }
        };
        ObjectTexts {
            sigma: text(o.sigma),
            bulge_mass: text(o.bulge_mass),
            luminosity: text(o.luminosity),
            band: text(o.band),
            mass: text(o.mass),
            distance: text(o.distance),
            resolution: text(o.resolution),
            log_l5100_erg_s: text(o.log_l5100_erg_s),
            activity: text(o.activity),
        }
    }
}

/// Reads an object's fields as the place page does; `prefix` names the object in field errors
/// (`[3].` in a batch). A field longer than [`MAX_FIELD_CHARS`] is refused unread.
fn read(
    mut texts: ObjectTexts,
    bands: &[String],
    prefix: &str,
    errors: &mut Vec<FieldError>,
) -> ObjectValues {
    for (name, slot) in texts.fields_mut() {
        if slot.len() > MAX_FIELD_CHARS && slot.chars().count() > MAX_FIELD_CHARS {
            errors.push(FieldError::new(
                format!("{prefix}{name}"),
                format!("The value is longer than {MAX_FIELD_CHARS} characters."),
            ));
            slot.clear();
        }
    }
    let (values, faults) = read_object(&texts, bands);
    errors.extend(
        faults
            .into_iter()
            .map(|f| FieldError::new(format!("{prefix}{}", f.field), f.message)),
    );
    values
}

/// The relations an object can use (those it has host values for).
fn used_by(values: &ObjectValues, relations: &[Relation]) -> Vec<bool> {
    relations
        .iter()
        .map(|r| values.host_values(r).is_some())
        .collect()
}

/// One object against the fits (no database, no await: cheap enough for batches).
fn place_object(
    values: &ObjectValues,
    fits: &[(Relation, Option<Arc<FitOutcome>>)],
    soi_threshold: f64,
) -> PlaceAnswer {
    let mut relations = Vec::new();
    // The placement on M_BH–M_bulge and its fit's key, for the ratio of the masses.
    let mut on_mbulge = None;
    for (relation, outcome) in fits {
        let (Some(subject), Some(outcome)) = (values.bare_subject(relation), outcome) else {
            continue;
        };
        let placed = match &outcome.fit {
            Ok(fit) => placement_numbers(fit, &subject).map_err(|e| e.to_string()),
            Err(e) => Err(format!("No fit of this relation: {e}")),
        };
        if *relation == Relation::MBulge {
            on_mbulge = Some((placed.clone(), &outcome.key));
        }
        let numbers = placed.as_ref().ok();
        let prediction = numbers.map(|n| &n.prediction);
        relations.push(RelationPlacement {
            relation: relation.slug(),
            label: relation.label(),
            x_log: subject.x.0,
            x_err_dex: subject.x.1,
            x2_log: subject.x2.map(|b| b.0),
            x2_err_dex: subject.x2.map(|b| b.1),
            predicted_log_mbh: prediction.map(|p| p.log_mbh),
            prediction_sd_dex: prediction.map(|p| p.sd_dex),
            interval68_low_log_mbh: prediction.map(|p| p.interval68.0),
            interval68_high_log_mbh: prediction.map(|p| p.interval68.1),
            interval95_low_log_mbh: prediction.map(|p| p.interval95.0),
            interval95_high_log_mbh: prediction.map(|p| p.interval95.1),
            residual_dex: numbers.and_then(|n| n.residual_dex),
            z: numbers.and_then(|n| n.z),
            verdict: numbers.and_then(|n| n.verdict).map(str::to_owned),
            prob_below_limit: numbers.and_then(|n| n.prob_below_limit),
            problem: placed.err(),
        });
    }
    let (soi, mut note) = match values.sphere_of_influence(soi_threshold) {
        Some(Ok(sp)) => (Some(SoiAnswer::from(&sp)), None),
        Some(Err(why)) => (None, Some(why)),
        None => (None, None),
    };
    if relations.is_empty() {
        note = Some(
            "No relation can use the values given: the relations need a velocity dispersion, a bulge mass, or a bulge luminosity with its band."
                .to_owned(),
        );
    }
    let (eddington, eddington_note) = match values.eddington() {
        None => (None, None),
        Some(Ok(e)) => (Some(EddingtonAnswer::from(&e)), None),
        Some(Err(why)) => (None, Some(why)),
    };
    let bulge_ratio = RatioMasses::of_object(values).map(|masses| {
        let basis = match &on_mbulge {
            Some((Ok(numbers), key)) => Ok(RelationBasis { numbers, key }),
            Some((Err(why), _)) => Err(why.clone()),
            None => Err("the object could not be placed against it.".to_owned()),
        };
        BulgeRatioAnswer::from(&bulge_ratio::bulge_ratio(&masses, basis))
    });
    PlaceAnswer {
        relations,
        sphere_of_influence: soi,
        note,
        eddington,
        eddington_note,
        bulge_ratio,
    }
}

/// The fits the objects need (structural, whole catalog, default pivots), one per relation
/// any object uses; the others are None.
async fn fits_for(
    state: &AppState,
    cache: &ApiCache,
    version: i64,
    relations: Vec<Relation>,
    needed: &[bool],
    pinned: Option<&crate::relations::Catalog>,
) -> ApiResult<Vec<(Relation, Option<Arc<FitOutcome>>)>> {
    let settings = crate::relations::FitChoice::default();
    let mut fits = Vec::with_capacity(relations.len());
    for (relation, need) in relations.into_iter().zip(needed) {
        // A named version: its own fits, waited for (never an older version's).
        if let Some(catalog) = pinned {
            let outcome = if *need {
                Some(
                    catalog
                        .fitted(
                            &relation,
                            settings.method,
                            &settings.filter,
                            settings.pivots(&relation),
                        )
                        .await?,
                )
            } else {
                None
            };
            fits.push((relation, outcome));
            continue;
        }
        let outcome = if *need {
            let slug = relation.slug();
            match cache.place_fit(version, &slug) {
                Some(hit) => Some(hit),
                None => {
                    let pivots = settings.pivots(&relation);
                    let choice = (&relation, settings.method, &settings.filter, pivots);
                    let waited = state
                        .catalog()
                        .fitted_within(choice, Some(REQUEST_WAIT))
                        .await?;
                    // While the fit is being computed: the newest earlier one (the answer's
                    // catalog version says which), or a relation that says "computing".
                    Some(match waited {
                        Ok(made) => {
                            cache.keep_place_fit(&slug, &made);
                            made
                        }
                        Err(key) => match state.fits.latest(&key) {
                            Some(older) => older,
                            None => Arc::new(computing_outcome(key)),
                        },
                    })
                }
            }
        } else {
            None
        };
        fits.push((relation, outcome));
    }
    Ok(fits)
}

/// A relation whose fit is still being computed, with no older one to show.
fn computing_outcome(key: crate::relations::FitKey) -> FitOutcome {
    let version = key.catalog_version;
    FitOutcome {
        key,
        sample: std::sync::Arc::default(),
        fit: Err(FitError::Unsupported {
            what: format!(
                "Computing: the fit of catalog version {version} is under way; ask again in a few seconds."
            ),
        }),
        spec: Err(FitError::Unsupported {
            what: "No fit yet.".to_owned(),
        }),
        fitted_at: String::new(),
    }
}

fn bands_of(relations: &[Relation]) -> Vec<String> {
    relations
        .iter()
        .filter_map(|r| match r {
            Relation::Luminosity(b) => Some(b.clone()),
            _ => None,
        })
        .collect()
}

/// Where one object falls against every relation it has values for.
#[utoipa::path(
    get,
    path = "/api/v1/place",
    tag = "place",
    operation_id = "place_object",
    params(PlaceObject, super::VersionQuery),
    responses(
        (status = 404, description = "No such catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 200, description = "The object's placement", body = PlaceResult),
        (status = 400, description = "The query could not be decoded", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A value could not be read (each field at fault is listed)", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn place_one(
    State(state): State<AppState>,
    Extension(cache): Extension<ApiCache>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Response> {
    let (pinned, pairs) = super::asked_version(&state, query_pairs(query)?).await?;
    let (texts, unknown) = ObjectTexts::from_pairs(&pairs);
    let mut errors: Vec<FieldError> = unknown
        .into_iter()
        .map(|name| {
            FieldError::new(
                name,
                format!(
                    "This is not a parameter of this endpoint (it accepts {}, version, release).",
                    OBJECT_FIELDS.join(", ")
                ),
            )
        })
        .collect();
    let (version, relations) = version_and_relations(&state, &cache, pinned.as_ref()).await?;
    let values = read(texts, &bands_of(&relations), "", &mut errors);
    if !errors.is_empty() {
        return Err(AppError::invalid(errors));
    }
    let needed = used_by(&values, &relations);
    let catalog = pinned.as_ref().map(|(c, _)| c);
    let fits = fits_for(&state, &cache, version, relations, &needed, catalog).await?;
    let version = fits
        .iter()
        .filter_map(|(_, o)| o.as_ref().map(|o| o.key.catalog_version))
        .min()
        .unwrap_or(version);
    let object = place_object(&values, &fits, state.settings.soi_threshold);
    record_ratio_fit(
        &state,
        catalog,
        mbulge_fit(&fits).as_ref(),
        std::slice::from_ref(&object),
    )
    .await;
    let answer = Json(PlaceResult {
        catalog_version: version,
        estimator: Method::Structural.as_str().to_owned(),
        object,
    })
    .into_response();
    Ok(match &pinned {
        Some((_, p)) => super::immutable_if_past(p, answer),
        None => answer,
    })
}

/// The M_BH–M_bulge fit among `fits`, if placing needed it.
fn mbulge_fit(fits: &[(Relation, Option<Arc<FitOutcome>>)]) -> Option<Arc<FitOutcome>> {
    fits.iter()
        .find(|(r, _)| *r == Relation::MBulge)
        .and_then(|(_, o)| o.clone())
}

/// Records the M_BH–M_bulge fit a ratio of the answer names (`relations::citation::cite`), so
/// its identifier can be looked up.
async fn record_ratio_fit(
    state: &AppState,
    pinned: Option<&crate::relations::Catalog>,
    outcome: Option<&Arc<FitOutcome>>,
    objects: &[PlaceAnswer],
) {
    let named = objects
        .iter()
        .any(|o| o.bulge_ratio.as_ref().is_some_and(|r| r.relation.is_some()));
    if let (true, Some(outcome)) = (named, outcome) {
        let catalog = pinned.cloned().unwrap_or_else(|| state.catalog());
        crate::relations::citation::cite(&catalog, outcome).await;
    }
}

/// The catalog version placed against and its relations: a named version's (`pinned`), or the
/// current one's from the API's per-version cache.
async fn version_and_relations(
    state: &AppState,
    cache: &ApiCache,
    pinned: Option<&(crate::relations::Catalog, crate::catalog::history::Pinned)>,
) -> ApiResult<(i64, Vec<Relation>)> {
    match pinned {
        Some((catalog, p)) => Ok((p.version, catalog.relations().await?)),
        None => {
            let version = cache
                .catalog_version(&state.pool, &state.settings.db_path)
                .await?;
            Ok((version, all_relations(state, cache, version).await?))
        }
    }
}

/// Where each object of a batch (a JSON array of up to 10,000 objects) falls.
#[utoipa::path(
    post,
    path = "/api/v1/place",
    tag = "place",
    operation_id = "place_batch",
    params(super::VersionQuery),
    request_body(content = Vec<PlaceObject>, description = "Up to 10,000 objects (body up to 4 MB)", content_type = "application/json"),
    responses(
        (status = 200, description = "One placement per object, in order", body = PlaceBatchResult),
        (status = 400, description = "The body is not JSON", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope, or a session sent no anti-forgery token", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 413, description = "More than 10,000 objects, or a body over 4 MB", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "The body is not sent as application/json", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A value could not be read (each field at fault is listed, e.g. `[3].sigma`); nothing is placed", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn place_batch(
    State(state): State<AppState>,
    Extension(cache): Extension<ApiCache>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
    ApiJson(objects): ApiJson<Vec<PlaceObject>>,
) -> ApiResult<Response> {
    let (pinned, rest) = super::asked_version(&state, query_pairs(query)?).await?;
    if let Some((key, _)) = rest.first() {
        let name = key.chars().take(40).collect::<String>();
        return Err(AppError::invalid(vec![FieldError::new(
            name.as_str(),
            format!(
                "'{name}' is not a query parameter of this endpoint (it accepts version, release); the objects go in the body."
            ),
        )]));
    }
    if objects.len() > MAX_BATCH {
        return Err(AppError::too_large(format!(
            "The batch has {} objects; at most {MAX_BATCH} are placed per request, so send it in parts.",
            objects.len()
        ))
        .titled("Too many objects"));
    }
    let (version, relations) = version_and_relations(&state, &cache, pinned.as_ref()).await?;
    let bands = bands_of(&relations);
    let mut errors = Vec::new();
    let n_objects = objects.len();
    let inputs: Vec<ObjectValues> = objects
        .into_iter()
        .enumerate()
        .map(|(i, o)| read(o.into(), &bands, &format!("[{i}]."), &mut errors))
        .collect();
    if !errors.is_empty() {
        return Err(AppError::invalid(errors));
    }
    let mut needed = vec![false; relations.len()];
    for i in &inputs {
        for (n, used) in needed.iter_mut().zip(used_by(i, &relations)) {
            *n |= used;
        }
    }
    let catalog = pinned.as_ref().map(|(c, _)| c);
    let fits = fits_for(&state, &cache, version, relations, &needed, catalog).await?;
    let version = fits
        .iter()
        .filter_map(|(_, o)| o.as_ref().map(|o| o.key.catalog_version))
        .min()
        .unwrap_or(version);
    let threshold = state.settings.soi_threshold;
    let on_mbulge = mbulge_fit(&fits);
    let place_all = move || {
        inputs
            .iter()
            .map(|i| place_object(i, &fits, threshold))
            .collect::<Vec<_>>()
    };
    let objects = if n_objects >= BLOCKING_FROM {
        tokio::task::spawn_blocking(place_all)
            .await
            .map_err(anyhow::Error::from)?
    } else {
        place_all()
    };
    record_ratio_fit(&state, catalog, on_mbulge.as_ref(), &objects).await;
    let answer = Json(PlaceBatchResult {
        catalog_version: version,
        estimator: Method::Structural.as_str().to_owned(),
        objects,
    })
    .into_response();
    // An answer to a POST is not cached, whatever the version.
    Ok(answer)
}
