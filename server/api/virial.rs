//! `GET /api/v1/virial-factor`: the calibration of the mean virial factor ⟨f⟩ on the catalog,
//! the same answer as the page `/virial-factor` (`relations::virial::calibration`), and
//! `GET /api/v1/virial-factor/adopted`: every factor adopted. Adopting is left to the page and
//! the command line (the API has no admin writes).

use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};
use utoipa::{IntoParams, ToSchema};

use super::problem::Problem;
use super::{ApiResult, query_pairs};
use crate::catalog::virial as stored;
use crate::error::{AppError, FieldError};
use crate::relations::virial::{CalibrationAsk, CalibrationView, PUBLISHED, calibration};
use crate::state::AppState;

/// Broad-line width measure.
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum WidthWord {
    /// Line dispersion σ_line (the default).
    SigmaLine,
    /// Full width at half maximum.
    Fwhm,
}

/// Bulge-kind subsample of the calibration.
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum CalibrationBulgeWord {
    /// Every galaxy (the default).
    Any,
    /// Classical bulges and ellipticals.
    Classical,
    /// Pseudobulges.
    Pseudo,
}

/// How the slope is set.
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum SlopeWord {
    /// Held at the quiescent structural fit (the default).
    Held,
    /// α and β fitted with both samples in one likelihood.
    Joint,
}

/// The calibration's choices.
#[derive(Debug, Deserialize, IntoParams)]
#[into_params(parameter_in = Query)]
pub struct CalibrationQuery {
    /// The width measure (each has its own ⟨f⟩); default `sigma_line`.
    pub width_definition: Option<WidthWord>,
    /// The bulge-kind subsample of both samples; default `any`.
    pub bulge_kind: Option<CalibrationBulgeWord>,
    /// How the slope is set; default `held`.
    pub slope: Option<SlopeWord>,
}

/// The M–σ relation the AGN are compared with: the quiescent structural fit (`held`) or the
/// joint fit of both samples (`joint`).
#[derive(Debug, Serialize, ToSchema)]
pub struct QuiescentFitJson {
    /// α: log10 M_BH at the pivot, M☉.
    pub alpha_log_msun: f64,
    /// Its 1σ error, dex.
    pub alpha_err_dex: f64,
    /// β, dex per dex.
    pub beta: f64,
    /// Its 1σ error.
    pub beta_err: f64,
    /// Intrinsic scatter ε, dex.
    pub eps_dex: f64,
    /// Its 1σ error, dex.
    pub eps_err_dex: f64,
}

/// A calibration that could be made.
#[derive(Debug, Serialize, ToSchema)]
pub struct CalibratedJson {
    /// log10 ⟨f⟩ (f dimensionless).
    pub log_f: f64,
    /// Its 1σ error, AGN and relation parts combined in quadrature, dex.
    pub log_f_err_dex: f64,
    /// The part of the error from the AGN alone, dex.
    pub log_f_err_agn_dex: f64,
    /// The part from the quiescent relation's α and β, dex.
    pub log_f_err_relation_dex: f64,
    /// ⟨f⟩ = 10^log_f.
    pub f: f64,
    /// Lower end of the 68 % interval, 10^(log_f − error).
    pub f_low: f64,
    /// Upper end, 10^(log_f + error).
    pub f_high: f64,
    /// The AGN's scatter about the shifted relation ε_A (restricted likelihood), dex.
    pub eps_agn_dex: f64,
    /// The relation: the quiescent fit (held) or the joint fit (joint).
    pub quiescent_fit: QuiescentFitJson,
}

/// One AGN of the calibration.
#[derive(Debug, Serialize, ToSchema)]
pub struct AgnJson {
    /// Galaxy name.
    pub name: String,
    /// URL form (`/api/v1/galaxies/{slug}`).
    pub slug: String,
    /// log10 σ_e, km/s.
    pub log_sigma_km_s: f64,
    /// Its error, dex.
    pub log_sigma_err_dex: f64,
    /// log10 of the virial product c τ Δv² / G, M☉ (the stored mass less its source's log f).
    pub log_vp_msun: f64,
    /// Its error, dex.
    pub log_vp_err_dex: f64,
}

/// AGN of the width measure and bulge kind left out, by why.
#[derive(Debug, Serialize, ToSchema)]
pub struct AgnLeftOutJson {
    /// The factor their source assumed is not known.
    pub unknown_factor: usize,
    /// No adopted σ with its error.
    pub no_sigma: usize,
    /// σ_c instead of σ_e.
    pub other_sigma: usize,
    /// An upper limit on the mass.
    pub upper_limits: usize,
}

/// A published calibration (docs/methods.md §4.3).
#[derive(Debug, Serialize, ToSchema)]
pub struct PublishedJson {
    /// The paper.
    pub paper: String,
    /// Its sample.
    pub sample: String,
    /// The width measure word.
    pub width_definition: String,
    /// log10 ⟨f⟩.
    pub log_f: f64,
    /// The value as the paper quotes it.
    pub quoted: String,
    /// Where the number comes from ("abstract", "from memory").
    pub provenance: String,
}

/// The calibration of ⟨f⟩ on one catalog version.
#[derive(Debug, Serialize, ToSchema)]
pub struct CalibrationJson {
    /// The catalog version read.
    pub catalog_version: i64,
    /// The width measure.
    pub width_definition: String,
    /// The bulge-kind subsample (`any`, `classical`, `pseudo`).
    pub bulge_kind: String,
    /// How the slope is set.
    pub slope: String,
    /// The σ pivot of the quiescent fit, log10 km/s.
    pub pivot_log_sigma_km_s: f64,
    /// AGN used.
    pub n_agn: usize,
    /// Quiescent galaxies in the M–σ fit.
    pub n_quiescent: usize,
    /// AGN left out.
    pub agn_left_out: AgnLeftOutJson,
    /// log10 ⟨f⟩ adopted for the width measure at this version.
    pub adopted_log_f: f64,
    /// Its error, dex.
    pub adopted_log_f_err_dex: f64,
    /// The calibration; null when it cannot be made (see `problem`).
    pub calibration: Option<CalibratedJson>,
    /// Why there is no calibration (too few AGN, say what is missing), or null.
    pub problem: Option<String>,
    /// The AGN used.
    pub agn: Vec<AgnJson>,
    /// Published calibrations for comparison.
    pub published: Vec<PublishedJson>,
}

impl CalibrationJson {
    /// The answer for `view`.
    pub fn of(view: &CalibrationView) -> Self {
        Self {
            catalog_version: view.version,
            width_definition: view.ask.width.as_str().to_owned(),
            bulge_kind: view.ask.bulge_word().to_owned(),
            slope: view.ask.slope.as_str().to_owned(),
            pivot_log_sigma_km_s: view.pivot_log_sigma,
            n_agn: view.agn.len(),
            n_quiescent: view.quiescent.len(),
            agn_left_out: AgnLeftOutJson {
                unknown_factor: view.left_out.unknown_factor,
                no_sigma: view.left_out.no_sigma,
                other_sigma: view.left_out.other_sigma,
                upper_limits: view.left_out.limits,
            },
            adopted_log_f: view.adopted.0,
            adopted_log_f_err_dex: view.adopted.1,
            calibration: view.outcome.as_ref().ok().map(|c| CalibratedJson {
                log_f: c.log_f.0,
                log_f_err_dex: c.log_f.1,
                log_f_err_agn_dex: c.log_f_err_agn,
                log_f_err_relation_dex: c.log_f_err_relation,
                f: c.f,
                f_low: c.f_interval.0,
                f_high: c.f_interval.1,
                eps_agn_dex: c.eps_agn,
                quiescent_fit: QuiescentFitJson {
                    alpha_log_msun: c.alpha.0,
                    alpha_err_dex: c.alpha.1,
                    beta: c.beta.0,
                    beta_err: c.beta.1,
                    eps_dex: c.eps.0,
                    eps_err_dex: c.eps.1,
                },
            }),
            problem: view.outcome.as_ref().err().cloned(),
            agn: view
                .agn
                .iter()
                .map(|a| AgnJson {
                    name: a.name.clone(),
                    slug: a.slug.clone(),
                    log_sigma_km_s: a.log_sigma,
                    log_sigma_err_dex: a.log_sigma_err,
                    log_vp_msun: a.log_vp,
                    log_vp_err_dex: a.log_vp_err,
                })
                .collect(),
            published: PUBLISHED
                .iter()
                .map(|p| PublishedJson {
                    paper: p.paper.to_owned(),
                    sample: p.sample.to_owned(),
                    width_definition: p.width.as_str().to_owned(),
                    log_f: p.log_f,
                    quoted: p.quoted.to_owned(),
                    provenance: p.provenance.to_owned(),
                })
                .collect(),
        }
    }
}

/// The calibration of log ⟨f⟩: reverberation AGN (log VP, σ_e) against the quiescent M–σ
/// relation (dynamical masses, σ_e), the slope held at the quiescent structural fit or fitted
/// jointly (docs/methods.md §4.3).
#[utoipa::path(
    get,
    path = "/api/v1/virial-factor",
    tag = "relations",
    operation_id = "virial_factor_calibration",
    params(CalibrationQuery, super::VersionQuery),
    responses(
        (status = 200, description = "The calibration, or why there is none (problem)", body = CalibrationJson),
        (status = 400, description = "The query could not be decoded", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn virial_factor(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Response> {
    let (pinned, pairs) = super::asked_version(&state, query_pairs(query)?).await?;
    let ask = CalibrationAsk::read(&pairs, false).map_err(|faults| {
        AppError::invalid(
            faults
                .into_iter()
                .map(|(k, e)| FieldError::new(k.as_str(), e))
                .collect(),
        )
    })?;
    let catalog = match &pinned {
        Some((catalog, _)) => catalog.clone(),
        None => state.catalog(),
    };
    let view = calibration(&catalog, ask).await?;
    let response = axum::Json(CalibrationJson::of(&view)).into_response();
    Ok(match &pinned {
        Some((_, p)) => super::immutable_if_past(p, response),
        None => response,
    })
}

/// One adopted factor.
#[derive(Debug, Serialize, ToSchema)]
pub struct AdoptedJson {
    /// The width measure word.
    pub width_definition: String,
    /// log10 ⟨f⟩.
    pub log_f: f64,
    /// Its error, dex.
    pub log_f_err_dex: f64,
    /// The first catalog version it is in force at.
    pub from_catalog_version: i64,
    /// Where it comes from.
    pub source: String,
    /// Who adopted it; null for the catalog's starting values.
    pub adopted_by: Option<String>,
    /// When, RFC 3339 UTC.
    pub adopted_at: String,
}

/// Every adoption, newest first.
#[derive(Debug, Serialize, ToSchema)]
pub struct AdoptedList {
    /// The adoptions; a version uses, per width measure, the latest one at or before it.
    pub adopted: Vec<AdoptedJson>,
}

/// Every virial factor adopted, newest first.
#[utoipa::path(
    get,
    path = "/api/v1/virial-factor/adopted",
    tag = "relations",
    operation_id = "virial_factor_adopted",
    responses(
        (status = 200, description = "The adoptions", body = AdoptedList),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn adopted(State(state): State<AppState>) -> ApiResult<axum::Json<AdoptedList>> {
    let adopted = stored::adoptions(&state.pool)
        .await?
        .into_iter()
        .map(|a| AdoptedJson {
            width_definition: a.width_definition,
            log_f: a.log_f,
            log_f_err_dex: a.log_f_err_dex,
            from_catalog_version: a.from_version,
            source: a.source,
            adopted_by: a.username,
            adopted_at: a.created_at,
        })
        .collect();
    Ok(axum::Json(AdoptedList { adopted }))
}
