//! `GET /api/v1/relations` and `GET /api/v1/relations/{relation}`: the scaling relations of the
//! catalog and the current fit of one, for any estimator, sample filter and pivot the relation
//! page offers (the same query parameter names as `/relations/{relation}`).
//!
//! A fit's answer carries an ETag made from the catalog version and the canonical settings
//! (relation, estimator, filter, pivots): every accepted change bumps the version, so the tag
//! changes exactly when the fit can. `If-None-Match` with the tag answers 304 with no body,
//! before any fit is looked up.

use std::sync::Arc;

use axum::body::Bytes;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::http::HeaderMap;
use axum::response::Response;
use serde::{Deserialize, Serialize};
use utoipa::{IntoParams, ToSchema};

use super::cache::{ApiCache, FitAnswerBytes};
use super::problem::Problem;
use super::{ApiResult, entity_tag, matches_if_none_match, query_pairs, tagged_bytes};
use crate::catalog::relation_rows;
use crate::error::{AppError, FieldError};
use crate::fit::{Fit, Intervals};
use crate::relations::{
    FILTER_PARAMS, FIT_PARAMS, FitChoice, FitKey, FitOutcome, REQUEST_WAIT, Relation, SampleFilter,
    SigmaChoice, SoiChoice,
};
use crate::state::AppState;

/// Estimators a fit can use (`method`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "kebab-case")]
pub enum EstimatorName {
    /// Kelly (2007) measurement-error model (the default).
    Structural,
    /// Likelihood of y given the observed x.
    Conditional,
    /// Tremaine et al. (2002) modified FITEXY (no upper limits).
    Fitexy,
    /// BCES Y|X (Akritas & Bershady 1996; no upper limits).
    BcesYx,
    /// BCES X|Y.
    BcesXy,
    /// BCES bisector.
    BcesBisector,
    /// BCES orthogonal.
    BcesOrthogonal,
}

/// Host morphology (`morphology`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum MorphologyWord {
    /// Elliptical.
    Elliptical,
    /// Lenticular.
    Lenticular,
    /// Spiral.
    Spiral,
    /// Irregular.
    Irregular,
    /// Unknown.
    Unknown,
}

/// Bulge kind (`bulge_kind`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum BulgeKindWord {
    /// Classical bulge.
    Classical,
    /// Pseudobulge.
    Pseudo,
    /// Unknown.
    Unknown,
}

/// Centre kind (`centre_kind`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum CentreKindWord {
    /// Cored centre.
    Core,
    /// Power-law centre.
    PowerLaw,
    /// Unknown.
    Unknown,
}

/// How a black-hole mass was measured (`mass_method`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum MassMethodWord {
    /// Stellar dynamics.
    StellarDynamics,
    /// Gas dynamics.
    GasDynamics,
    /// Maser.
    Maser,
    /// Reverberation mapping.
    Reverberation,
    /// A single-epoch spectrum.
    SingleEpoch,
}

/// Which kinds of black-hole mass enter (`masses`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum MassesWord {
    /// Stellar dynamics, gas dynamics and masers only (default): a virial mass is calibrated
    /// on the relation it would be fitted to (docs/methods.md §4.7).
    Dynamical,
    /// Dynamical and reverberation masses.
    WithReverberation,
    /// Every mass, single-epoch masses included.
    All,
}

/// The nucleus' activity class (`activity`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum ActivityWord {
    /// No active nucleus.
    Quiescent,
    /// Seyfert 1.
    Seyfert1,
    /// Seyfert 2.
    Seyfert2,
    /// LINER.
    Liner,
    /// Quasar.
    Quasar,
    /// Radio galaxy.
    RadioGalaxy,
    /// Not known.
    Unknown,
}

/// Sphere-of-influence selection (`soi`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum SoiWord {
    /// Every mass (default).
    All,
    /// Only masses whose sphere of influence is resolved.
    Resolved,
}

/// σ definition (`sigma_definition`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum SigmaWord {
    /// σ within the effective radius (default).
    SigmaE,
    /// Central σ.
    SigmaC,
}

/// Upper limits in or out (`limits`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum LimitsWord {
    /// As the estimator allows (default): included for `structural` and `conditional`, left
    /// out (and counted in `limits_left_out`) for FITEXY and BCES, which cannot use them.
    Auto,
    /// Upper limits enter the fit; FITEXY and BCES then refuse the sample (`problem`).
    Include,
    /// Detections only.
    Exclude,
}

/// The query parameters of a relation's fit: those of the relation page.
#[derive(Debug, Deserialize, IntoParams)]
#[into_params(parameter_in = Query)]
pub struct FitQuery {
    /// Estimator (default `structural`).
    pub method: Option<EstimatorName>,
    /// Only galaxies of this morphology.
    pub morphology: Option<MorphologyWord>,
    /// Only galaxies with this bulge kind.
    pub bulge_kind: Option<BulgeKindWord>,
    /// Only galaxies with this centre kind.
    pub centre_kind: Option<CentreKindWord>,
    /// Only black-hole masses measured this way (overrides `masses`).
    pub mass_method: Option<MassMethodWord>,
    /// Which kinds of black-hole mass enter (default `dynamical`).
    pub masses: Option<MassesWord>,
    /// Only galaxies whose nucleus has this activity class.
    pub activity: Option<ActivityWord>,
    /// `resolved`: only masses whose sphere of influence is resolved.
    pub soi: Option<SoiWord>,
    /// Which σ the relations using σ take (default `sigma_e`; never mixed).
    pub sigma_definition: Option<SigmaWord>,
    /// Whether upper limits enter (default `auto`: as the estimator allows).
    pub limits: Option<LimitsWord>,
    /// Pivot x0, log10 in the relation's x unit (default: log10 200 km/s for σ, 11 for masses
    /// and luminosities).
    #[param(minimum = 0.0, maximum = 20.0)]
    pub pivot: Option<f64>,
    /// Second pivot (the plane's bulge mass), log10 M☉ (default 11).
    #[param(minimum = 0.0, maximum = 20.0)]
    pub pivot2: Option<f64>,
}

/// Reads the relation page's fit parameters (`relations::FitChoice`); every parameter at
/// fault is one field error. An empty value, which a page's form sends for "any", is refused
/// here: leave the parameter out.
///
/// # Errors
/// [`AppError::Invalid`] listing each parameter at fault.
pub fn read_fit_choice(pairs: &[(String, String)]) -> Result<FitChoice, AppError> {
    let mut choice = FitChoice::default();
    let mut errors = Vec::new();
    for (key, value) in pairs {
        let name = key.chars().take(40).collect::<String>();
        if value.trim().is_empty() {
            errors.push(FieldError::new(name, super::EMPTY_VALUE));
            continue;
        }
        match choice.set(key, value) {
            Ok(true) => {}
            Ok(false) => errors.push(FieldError::new(
                name.as_str(),
                format!(
                    "'{name}' is not a parameter of this endpoint (it accepts {}, {}).",
                    FIT_PARAMS[0],
                    FILTER_PARAMS
                        .iter()
                        .chain(&FIT_PARAMS[1..])
                        .copied()
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )),
            Err(e) => errors.push(FieldError::new(name, e)),
        }
    }
    if errors.is_empty() {
        Ok(choice)
    } else {
        Err(AppError::invalid(errors))
    }
}

/// The relation named by a slug: the fixed ones without asking the database, a luminosity
/// relation against the bands the catalog has.
///
/// # Errors
/// 404 problem for an unknown slug; a database failure.
pub async fn relation_named(state: &AppState, slug: &str) -> ApiResult<Relation> {
    if let Ok(r) = Relation::from_slug(slug, &[]) {
        return Ok(r);
    }
    let bands = relation_rows::luminosity_bands(&state.pool).await?;
    Relation::from_slug(slug, &bands).map_err(|e| AppError::not_found_saying(e.to_string()))
}

/// Every relation of catalog version `version` (kept in `cache` for that version).
///
/// # Errors
/// A database failure.
pub async fn all_relations(
    state: &AppState,
    cache: &ApiCache,
    version: i64,
) -> ApiResult<Vec<Relation>> {
    if let Some(known) = cache.relations(version) {
        return Ok(known);
    }
    let bands: Vec<String> = relation_rows::luminosity_bands(&state.pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();
    let relations = Relation::all(&bands);
    cache.keep_relations(version, &relations);
    Ok(relations)
}

/// The fit of `relation` at catalog version `version`: from the cache without another query,
/// or fitted now (off the async runtime) and cached. A fit still being computed (by the
/// background analysis or another request) is waited for [`REQUEST_WAIT`]; after that the
/// newest earlier fit is answered (its catalog version says so, and the answer is not kept as
/// the current version's), and only when none exists does the request wait for the fit.
///
/// # Errors
/// A database failure or a failed fitting task.
pub async fn current_fit(
    state: &AppState,
    version: i64,
    relation: &Relation,
    settings: &FitChoice,
) -> ApiResult<Arc<FitOutcome>> {
    let pivots = settings.pivots(relation);
    let key = FitKey::new(
        version,
        relation,
        settings.method,
        &settings.filter.for_method(settings.method),
        pivots.0,
        pivots.1,
    );
    if let Some(hit) = state.fits.get(&key) {
        return Ok(hit);
    }
    let choice = (relation, settings.method, &settings.filter, pivots);
    let catalog = state.catalog();
    Ok(
        match catalog.fitted_within(choice, Some(REQUEST_WAIT)).await? {
            Ok(outcome) => outcome,
            Err(key) => match state.fits.latest(&key) {
                Some(older) => older,
                None => catalog
                    .fitted_within(choice, None)
                    .await?
                    .map_err(|_| anyhow::anyhow!("a fit computation stopped without a result"))?,
            },
        },
    )
}

/// A covariance matrix with the names of its rows and columns.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct Covariance {
    /// Row and column names: `alpha`, `beta`, then `beta2` or `gamma` if present, `eps` (the
    /// intrinsic scatter).
    pub names: Vec<String>,
    /// The matrix, in the units of the products of the parameters (dex²; β dimensionless).
    pub matrix: Vec<Vec<f64>>,
}

/// One parameter's reported value with its 68 % and 95 % intervals.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct IntervalAnswer {
    /// `alpha`, `beta`, `gamma`, `beta2` or `eps`.
    pub name: String,
    /// The reported value (for `eps` of the restricted kind: the restricted-likelihood ε).
    pub estimate: f64,
    /// Half the width of the 68 % interval.
    pub error: f64,
    /// 68.27 % interval, lower end.
    pub p16: f64,
    /// 68.27 % interval, upper end.
    pub p84: f64,
    /// 95 % interval, lower end.
    pub p2_5: f64,
    /// 95 % interval, upper end.
    pub p97_5: f64,
}

/// The intervals a fit reports and how they were computed.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct IntervalsAnswer {
    /// `restricted` (the default where it can be computed: ε from the restricted likelihood,
    /// which corrects the maximum-likelihood ε's small-sample bias, α and β with Student's t),
    /// `curvature` (the maximum-likelihood values ± the inverse-Hessian errors) or `estimator`
    /// (FITEXY's and BCES's own errors).
    pub kind: String,
    /// The kind in words.
    pub label: String,
    /// One entry per parameter.
    pub params: Vec<IntervalAnswer>,
}

impl IntervalsAnswer {
    /// The answer's view of a fit's intervals.
    pub fn of(iv: &Intervals) -> Self {
        Self {
            kind: iv.kind.as_str().to_owned(),
            label: iv.kind.label().to_owned(),
            params: iv
                .params
                .iter()
                .map(|p| IntervalAnswer {
                    name: p.name.to_owned(),
                    estimate: finite(p.estimate),
                    error: finite(p.error),
                    p16: finite(p.p16),
                    p84: finite(p.p84),
                    p2_5: finite(p.p2_5),
                    p97_5: finite(p.p97_5),
                })
                .collect(),
        }
    }
}

/// Fitted parameters of log10 M_BH = α + β (x − x0) [+ γ (x2 − x02)] with intrinsic scatter ε:
/// the maximum-likelihood (or moment) values with their curvature errors, and in `intervals`
/// the values and intervals to quote.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct FitParameters {
    /// The values and 68 % / 95 % intervals to quote, and how they were computed.
    pub intervals: IntervalsAnswer,
    /// α: log10 M_BH/M☉ at the pivot.
    pub alpha_log_mbh: f64,
    /// 1σ error of α, dex.
    pub alpha_err_dex: f64,
    /// β: slope, dex per dex.
    pub beta: f64,
    /// 1σ error of β.
    pub beta_err: f64,
    /// γ: slope of the second host property (the plane), dex per dex.
    pub gamma: Option<f64>,
    /// 1σ error of γ.
    pub gamma_err: Option<f64>,
    /// ε: intrinsic scatter in log10 M_BH at fixed host property, dex (maximum likelihood,
    /// biased low at small N; `intervals` has the corrected value).
    pub scatter_dex: f64,
    /// 1σ error of ε, dex (0 at the ε = 0 boundary; see `termination`).
    pub scatter_err_dex: f64,
    /// Parameter covariance.
    pub covariance: Covariance,
    /// Objects fitted (detections and upper limits).
    pub n: usize,
    /// Upper limits among them.
    pub n_limits: usize,
    /// −2 ln L at the optimum (likelihood estimators).
    pub neg2_log_likelihood: Option<f64>,
    /// Akaike information criterion (likelihood estimators).
    pub aic: Option<f64>,
    /// Bayesian information criterion (likelihood estimators).
    pub bic: Option<f64>,
    /// χ² at the optimum (FITEXY).
    pub chi2: Option<f64>,
    /// How the optimiser ended, in plain sentences.
    pub termination: String,
    /// Optimiser iterations.
    pub iterations: u64,
}

/// A finite value, or 0 (a covariance entry can only be non-finite if the fit failed, which
/// is reported separately; JSON has no NaN).
fn finite(v: f64) -> f64 {
    if v.is_finite() { v } else { 0.0 }
}

fn finite_opt(v: Option<f64>) -> Option<f64> {
    v.filter(|x| x.is_finite())
}

impl FitParameters {
    /// The answer's view of a fit.
    pub fn of(fit: &Fit) -> Self {
        Self {
            intervals: IntervalsAnswer::of(&fit.intervals),
            alpha_log_mbh: finite(fit.params.alpha),
            alpha_err_dex: finite(fit.errors.alpha),
            beta: finite(fit.params.beta),
            beta_err: finite(fit.errors.beta),
            gamma: finite_opt(fit.params.gamma),
            gamma_err: finite_opt(fit.errors.gamma),
            scatter_dex: finite(fit.params.eps),
            scatter_err_dex: finite(fit.errors.eps),
            covariance: Covariance {
                names: fit.cov_names.iter().map(|n| (*n).to_owned()).collect(),
                matrix: fit
                    .cov
                    .iter()
                    .map(|row| row.iter().copied().map(finite).collect())
                    .collect(),
            },
            n: fit.n,
            n_limits: fit.n_upper,
            neg2_log_likelihood: finite_opt(fit.neg2_log_l),
            aic: finite_opt(fit.aic),
            bic: finite_opt(fit.bic),
            chi2: finite_opt(fit.chi2),
            termination: fit.termination.reason.clone(),
            iterations: fit.termination.iterations,
        }
    }
}

/// The sample filter as applied.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct FilterAnswer {
    /// Morphology, or null for any.
    pub morphology: Option<String>,
    /// Bulge kind, or null for any.
    pub bulge_kind: Option<String>,
    /// Centre kind, or null for any.
    pub centre_kind: Option<String>,
    /// Mass method, or null for any.
    pub mass_method: Option<String>,
    /// `dynamical`, `with_reverberation` or `all` (overridden by `mass_method` when set).
    pub masses: String,
    /// Activity class, or null for any.
    pub activity: Option<String>,
    /// `all` or `resolved`.
    pub soi: String,
    /// `sigma_e` or `sigma_c`.
    pub sigma_definition: String,
    /// `include` or `exclude`: as used by the estimator. Without `limits` in the query, limits
    /// are included for the likelihood estimators and left out for FITEXY and BCES, which
    /// cannot use them (`limits_left_out` says how many); `limits=include` with those
    /// estimators is answered with the estimator's refusal in `problem`.
    pub limits: String,
}

impl FilterAnswer {
    fn of(f: &SampleFilter) -> Self {
        Self {
            morphology: f.morphology.map(|m| m.as_str().to_owned()),
            bulge_kind: f.bulge_kind.map(|m| m.as_str().to_owned()),
            centre_kind: f.centre_kind.map(|m| m.as_str().to_owned()),
            mass_method: f.mass_method.map(|m| m.as_str().to_owned()),
            masses: f.masses.as_str().to_owned(),
            activity: f.activity.map(|a| a.as_str().to_owned()),
            soi: match f.soi {
                SoiChoice::All => "all",
                SoiChoice::Resolved => "resolved",
            }
            .to_owned(),
            sigma_definition: match f.sigma {
                SigmaChoice::Effective => "sigma_e",
                SigmaChoice::Central => "sigma_c",
            }
            .to_owned(),
            limits: if f.limits == crate::relations::LimitsChoice::Exclude {
                "exclude"
            } else {
                "include"
            }
            .to_owned(),
        }
    }
}

/// The current fit of one relation.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct RelationFit {
    /// Relation slug, e.g. `m_sigma`.
    pub relation: String,
    /// Short name, e.g. `M_BH–σ`.
    pub label: String,
    /// x axis with its unit.
    pub x_label: String,
    /// Second host property (the plane) with its unit.
    pub x2_label: Option<String>,
    /// y axis with its unit.
    pub y_label: String,
    /// Estimator.
    pub estimator: String,
    /// Which galaxies entered.
    pub sample_filter: FilterAnswer,
    /// Pivot x0, log10 in the x unit.
    pub pivot_log: f64,
    /// Second pivot (the plane), log10 M☉.
    pub pivot2_log: Option<f64>,
    /// Catalog version the sample was read at.
    pub catalog_version: i64,
    /// When the fit was made, RFC 3339 UTC; for an answer at a named version (`version`,
    /// `release`), when that version was made, so the answer never changes.
    #[schema(format = DateTime)]
    pub fitted_at: String,
    /// The fit's identifier to cite (`/fits/{id}` shows it); derived from the relation,
    /// estimator, sample, pivots, catalog version and fitting code.
    pub fit_id: String,
    /// Detections in the sample.
    pub n_detections: usize,
    /// Upper limits in the sample.
    pub n_limits: usize,
    /// Galaxies left out because their adopted σ has the other definition.
    pub left_out_sigma_definition: usize,
    /// Galaxies left out because they lack a value the relation needs.
    pub left_out_missing: usize,
    /// Reverberation and single-epoch masses left out by `masses` (dynamical only by default).
    pub left_out_virial: usize,
    /// Upper limits of the selection left out of the fit (asked with `limits=exclude`, or
    /// because the estimator cannot use them).
    pub limits_left_out: usize,
    /// How many upper limits were left out and why, in one sentence; null when none were.
    pub limits_notice: Option<String>,
    /// The fit, or null when none could be made (`problem` says why).
    pub fit: Option<FitParameters>,
    /// Why there is no fit (too few objects, limits with an estimator that cannot use them…).
    pub problem: Option<String>,
}

impl RelationFit {
    /// The answer for a fit outcome.
    pub fn of(relation: &Relation, settings: &FitChoice, outcome: &FitOutcome) -> Self {
        let (pivot, pivot2) = settings.pivots(relation);
        let plane = relation.shape() == crate::fit::Shape::Plane;
        Self {
            relation: relation.slug(),
            label: relation.label(),
            x_label: relation.x_label(),
            x2_label: relation.x2_label(),
            y_label: relation.y_label(),
            estimator: settings.method.as_str().to_owned(),
            sample_filter: FilterAnswer::of(&settings.filter.for_method(settings.method)),
            pivot_log: pivot,
            pivot2_log: plane.then_some(pivot2),
            catalog_version: outcome.key.catalog_version,
            fitted_at: outcome.fitted_at.clone(),
            fit_id: crate::relations::citation::fit_id(&outcome.key),
            n_detections: outcome.sample.n_detections(),
            n_limits: outcome.sample.n_limits(),
            left_out_sigma_definition: outcome.sample.left_out_sigma_definition,
            left_out_missing: outcome.sample.left_out_missing,
            left_out_virial: outcome.sample.left_out_virial,
            limits_left_out: outcome.sample.left_out_limits,
            limits_notice: settings
                .limits_left_out(&outcome.sample)
                .map(|l| l.sentence),
            fit: outcome.fit.as_ref().ok().map(FitParameters::of),
            problem: outcome.fit.as_ref().err().map(ToString::to_string),
        }
    }
}

/// One relation of the catalog.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct RelationInfo {
    /// Slug, e.g. `m_sigma`, `m_l_k`.
    pub relation: String,
    /// Short name.
    pub label: String,
    /// x axis with its unit.
    pub x_label: String,
    /// Second host property (the plane).
    pub x2_label: Option<String>,
    /// y axis with its unit.
    pub y_label: String,
    /// `line` or `plane`.
    pub shape: String,
    /// Default pivot, log10 in the x unit.
    pub default_pivot_log: f64,
    /// Default second pivot (the plane), log10 M☉.
    pub default_pivot2_log: Option<f64>,
    /// Where its current fit is.
    pub fit_url: String,
}

/// The relations of the catalog.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct RelationList {
    /// Catalog version now.
    pub catalog_version: i64,
    /// Every relation the catalog supports.
    pub relations: Vec<RelationInfo>,
}

/// Every relation the catalog supports, with where its fit is.
#[utoipa::path(
    get,
    path = "/api/v1/relations",
    tag = "relations",
    operation_id = "list_relations",
    responses(
        (status = 200, description = "The relations", body = RelationList),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn list_relations(
    State(state): State<AppState>,
    Extension(cache): Extension<ApiCache>,
) -> ApiResult<axum::Json<RelationList>> {
    let version = cache
        .catalog_version(&state.pool, &state.settings.db_path)
        .await?;
    let relations = all_relations(&state, &cache, version)
        .await?
        .iter()
        .map(|r| {
            let plane = r.shape() == crate::fit::Shape::Plane;
            RelationInfo {
                relation: r.slug(),
                label: r.label(),
                x_label: r.x_label(),
                x2_label: r.x2_label(),
                y_label: r.y_label(),
                shape: r.shape().as_str().to_owned(),
                default_pivot_log: r.default_pivot(),
                default_pivot2_log: plane.then(|| r.default_pivot2()),
                fit_url: format!("/api/v1/relations/{}", r.slug()),
            }
        })
        .collect();
    Ok(axum::Json(RelationList {
        catalog_version: version,
        relations,
    }))
}

/// The current fit of one relation for the estimator, sample and pivots asked.
#[utoipa::path(
    get,
    path = "/api/v1/relations/{relation}",
    tag = "relations",
    operation_id = "relation_fit",
    params(
        ("relation" = String, Path, description = "Relation slug: m_sigma, m_mbulge, m_l_<band>, m_sigma_mbulge", example = "m_sigma"),
        FitQuery,
        super::VersionQuery,
        ("If-None-Match" = Option<String>, Header, description = "An ETag of an earlier answer: 304 when the fit is unchanged"),
    ),
    responses(
        (status = 200, description = "The fit (or why there is none)", body = RelationFit,
            headers(("ETag" = String, description = "Catalog version and settings"))),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 304, description = "Unchanged since the ETag given in If-None-Match"),
        (status = 400, description = "The query could not be decoded", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such relation, catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn relation_fit(
    State(state): State<AppState>,
    Extension(cache): Extension<ApiCache>,
    Path(slug): Path<String>,
    headers: HeaderMap,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Response> {
    let (pinned, pairs) = super::asked_version(&state, query_pairs(query)?).await?;
    let settings = read_fit_choice(&pairs)?;
    if let Some((catalog, pinned)) = pinned {
        let bands = catalog.bands().await?;
        let relation = Relation::from_slug(&slug, &bands)
            .map_err(|e| AppError::not_found_saying(e.to_string()))?;
        let canonical = settings.canonical(&relation);
        let etag = entity_tag(pinned.version, &canonical);
        if matches_if_none_match(&headers, &etag) {
            return Ok(super::immutable_if_past(
                &pinned,
                tagged_bytes(&headers, &etag, Bytes::new()),
            ));
        }
        let outcome = catalog
            .fitted(
                &relation,
                settings.method,
                &settings.filter,
                settings.pivots(&relation),
            )
            .await?;
        let mut answer = RelationFit::of(&relation, &settings, &outcome);
        // A named version's answer is the same whenever it is asked for: its time is the
        // version's, not this computation's.
        answer.fitted_at = crate::catalog::history::made_at(&state.pool, pinned.version)
            .await?
            .unwrap_or_default();
        answer.fit_id = crate::relations::citation::cite(&catalog, &outcome).await;
        let body = Bytes::from(serde_json::to_vec(&answer).map_err(anyhow::Error::from)?);
        return Ok(super::immutable_if_past(
            &pinned,
            tagged_bytes(&headers, &etag, body),
        ));
    }
    let relation = relation_named(&state, &slug).await?;
    let version = cache
        .catalog_version(&state.pool, &state.settings.db_path)
        .await?;
    let canonical = settings.canonical(&relation);
    if let Some(hit) = cache.answer(version, &canonical) {
        return Ok(tagged_bytes(&headers, &hit.etag, hit.body));
    }
    let etag = entity_tag(version, &canonical);
    if matches_if_none_match(&headers, &etag) {
        return Ok(tagged_bytes(&headers, &etag, Bytes::new()));
    }
    let outcome = current_fit(&state, version, &relation, &settings).await?;
    // The fit may have been made at a newer version than read above; tag what is answered.
    let made_at = outcome.key.catalog_version;
    let etag = if made_at == version {
        etag
    } else {
        entity_tag(made_at, &canonical)
    };
    let mut answer = RelationFit::of(&relation, &settings, &outcome);
    answer.fit_id = crate::relations::citation::cite(&state.catalog(), &outcome).await;
    let body = Bytes::from(serde_json::to_vec(&answer).map_err(anyhow::Error::from)?);
    cache.keep_answer(
        made_at,
        &canonical,
        FitAnswerBytes {
            etag: etag.clone(),
            body: body.clone(),
        },
    );
    Ok(tagged_bytes(&headers, &etag, body))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::relations::test_pairs as pairs;

    #[test]
    fn settings_read_the_relation_page_parameters_and_name_each_bad_one() {
        let s = read_fit_choice(&pairs(&[
            ("method", "bces-bisector"),
            ("morphology", "spiral"),
            ("limits", "exclude"),
            ("pivot", "2.2"),
        ]))
        .unwrap();
        assert_eq!(s.method.as_str(), "bces-bisector");
        assert_eq!(s.filter.limits, crate::relations::LimitsChoice::Exclude);
        assert_eq!(s.pivots(&Relation::MSigma).0.to_bits(), 2.2f64.to_bits());
        let err = read_fit_choice(&pairs(&[
            ("method", "ols"),
            ("pivot", "99"),
            ("colour", "red"),
            ("soi", "maybe"),
        ]))
        .unwrap_err();
        assert_eq!(err.status(), 422);
        let fields: Vec<&str> = err.fields().iter().map(|e| e.field.as_str()).collect();
        assert_eq!(fields, ["method", "pivot", "colour", "soi"]);
        // Different settings, different canonical texts (and so ETags).
        let a = read_fit_choice(&[]).unwrap();
        assert_ne!(
            a.canonical(&Relation::MSigma),
            s.canonical(&Relation::MSigma)
        );
        assert_ne!(
            a.canonical(&Relation::MSigma),
            a.canonical(&Relation::MBulge)
        );
    }
}
