//! `POST /api/v1/planning` (candidates as a JSON batch or a CSV text, resolutions and a
//! threshold → the ranked plan), `GET /api/v1/planning/reliability` (the check of those
//! probabilities on the catalog's own galaxies) and the caller's saved resolutions,
//! `GET/POST /api/v1/me/resolutions` and `DELETE /api/v1/me/resolutions/{id}`. The domain is
//! `relations::planning` (docs/methods.md §4.9); the plan's table is `export::plan`, the same
//! as the page's downloads and `massline plan`. Nothing but saved resolutions is stored.

use axum::Json;
use axum::body::Bytes;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::http::{HeaderMap, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};
use utoipa::ToSchema;

use super::problem::Problem;
use super::{ApiJson, ApiResult, query_pairs};
use crate::auth::{Principal, Scope, require_scope};
use crate::catalog::resolutions::{self, Saved};
use crate::error::{AppError, FieldError};
use crate::export::plan::PlanTable;
use crate::relations::planning::{
    CandidateRecord, MAX_CANDIDATES, MAX_RESOLUTIONS, Reliability, Resolution, RowError,
    check_threshold, plan, read_candidate_records, read_candidates, reliability,
};
use crate::state::AppState;

/// Body limit of `POST /api/v1/planning`: 2,000 candidates of a few hundred bytes each.
pub const PLAN_LIMIT_BYTES: usize = 2 * 1024 * 1024;
/// Body limit of `POST /api/v1/me/resolutions`.
pub const RESOLUTION_LIMIT_BYTES: usize = 4 * 1024;

/// A resolution as sent.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct ResolutionRequest {
    /// 1–40 characters, e.g. "AO K band".
    #[schema(example = "AO K band", min_length = 1, max_length = 40)]
    pub label: String,
    /// θ_res, arcsec (0 < θ_res ≤ 100).
    #[schema(example = 0.1, exclusive_minimum = 0.0, maximum = 100.0)]
    pub arcsec: f64,
}

/// What to plan: the candidates (a JSON batch in `candidates`, or a candidate file's text in
/// `csv`), the resolutions and the threshold.
#[derive(Debug, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct PlanRequest {
    /// Candidates, each an object with the candidate file's columns as keys (`name`,
    /// `sigma_km_s`, `sigma_err_km_s`, `log_bulge_mass`, `log_bulge_mass_err_dex`,
    /// `bulge_mass`, `bulge_mass_method`, `log_luminosity`, `log_luminosity_err_dex`,
    /// `luminosity`, `band`, `distance_mpc`, `distance_err_mpc`, `note`), each a number or
    /// text. Give this or `csv`.
    #[schema(value_type = Option<Vec<Object>>)]
    pub candidates: Option<Vec<CandidateRecord>>,
    /// A candidate file's text: CSV with a header row. Give this or `candidates`.
    pub csv: Option<String>,
    /// 1 to 8 resolutions; P at the first ranks the candidates.
    #[schema(min_items = 1, max_items = 8)]
    pub resolutions: Vec<ResolutionRequest>,
    /// θ_infl/θ_res at or above which a sphere counts as resolved (0 < t ≤ 100; default the
    /// server's, 1 unless set otherwise).
    #[schema(exclusive_minimum = 0.0, maximum = 100.0)]
    pub threshold: Option<f64>,
}

/// The field errors of faulty candidate rows: `candidates[i].column` for a JSON batch (i from
/// 0), `csv.line<N>.column` for a file.
fn row_fields(rows: &[RowError], csv: bool) -> Vec<FieldError> {
    rows.iter()
        .map(|r| {
            let field = match (csv, r.line) {
                (true, line) => format!("csv.line{line}.{}", r.column),
                (false, 0) => "candidates".to_owned(),
                (false, n) => format!("candidates[{}].{}", n - 1, r.column),
            };
            let field = field.trim_end_matches('.').to_owned();
            FieldError::new(field, r.to_string())
        })
        .collect()
}

/// Rank candidates by the probability that each resolution resolves their sphere of
/// influence.
#[utoipa::path(
    post,
    path = "/api/v1/planning",
    tag = "planning",
    request_body = PlanRequest,
    responses(
        (status = 200, description = "The candidates ranked by P(resolved) at the first resolution", body = PlanTable),
        (status = 400, description = "Unreadable JSON", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 413, description = "A body over 2 MB", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "The body is not sent as application/json", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "JSON of the wrong shape, faulty candidate rows (every one listed in `errors`, e.g. `candidates[2].distance_mpc` or `csv.line4.sigma_km_s`), a faulty resolution or threshold, or neither or both of `candidates` and `csv`; nothing is planned", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
        (status = 503, description = "The database is busy; retry after the given seconds", body = Problem, content_type = "application/problem+json"),
    ),
    security((), ("bearer" = []))
)]
pub async fn plan_candidates(
    State(state): State<AppState>,
    ApiJson(request): ApiJson<PlanRequest>,
) -> ApiResult<Json<PlanTable>> {
    let mut fields = Vec::new();
    let candidates = match (&request.candidates, &request.csv) {
        (Some(records), None) => read_candidate_records(records)
            .map_err(|rows| fields.extend(row_fields(&rows, false)))
            .ok(),
        (None, Some(text)) => read_candidates(text)
            .map_err(|rows| fields.extend(row_fields(&rows, true)))
            .ok(),
        _ => {
            fields.push(FieldError::new(
                "candidates",
                format!(
                    "Give the candidates either as a JSON batch in “candidates” or as a candidate file's text in “csv” (at most {MAX_CANDIDATES}), not both."
                ),
            ));
            None
        }
    };
    let resolutions: Vec<Resolution> = request
        .resolutions
        .iter()
        .enumerate()
        .filter_map(|(i, r)| {
            Resolution::new(&r.label, r.arcsec)
                .map_err(|e| fields.push(FieldError::new(format!("resolutions[{i}]"), e)))
                .ok()
        })
        .collect();
    let threshold = request
        .threshold
        .map_or(Ok(state.settings.soi_threshold), check_threshold)
        .map_err(|e| fields.push(FieldError::new("threshold", e)))
        .ok();
    for (i, r) in request.resolutions.iter().enumerate() {
        let label = r.label.trim();
        if request.resolutions[..i]
            .iter()
            .any(|other| other.label.trim() == label)
        {
            fields.push(FieldError::new(
                format!("resolutions[{i}]"),
                "Another resolution has this label; give each its own (the labels name the plan's columns).",
            ));
        }
    }
    if request.resolutions.is_empty() || request.resolutions.len() > MAX_RESOLUTIONS {
        fields.push(FieldError::new(
            "resolutions",
            format!("Give 1 to {MAX_RESOLUTIONS} resolutions to plan for."),
        ));
    }
    let (Some(candidates), Some(threshold), true) = (candidates, threshold, fields.is_empty())
    else {
        return Err(AppError::invalid(fields).titled("Faulty candidates or settings"));
    };
    let planned = plan(&state.catalog(), &candidates, &resolutions, threshold).await?;
    Ok(Json(PlanTable::of(&planned)))
}

/// The query of the reliability check.
#[derive(Debug, Deserialize, utoipa::IntoParams)]
#[into_params(parameter_in = Query)]
pub struct ReliabilityQuery {
    /// θ_infl/θ_res at or above which a sphere counts as resolved (0 < t ≤ 100; default the
    /// server's, 1 unless set otherwise).
    #[param(exclusive_minimum = 0.0, maximum = 100.0)]
    pub threshold: Option<f64>,
}

/// One bin of the reliability table.
#[derive(Debug, Serialize, ToSchema)]
pub struct ReliabilityBinAnswer {
    /// Lower edge of predicted P (included).
    pub lo: f64,
    /// Upper edge (excluded, except 1 for the last bin).
    pub hi: f64,
    /// Galaxies in the bin.
    pub count: usize,
    /// How many of them the measurement resolved.
    pub resolved: usize,
    /// Mean predicted P of the bin.
    pub mean_predicted: Option<f64>,
    /// Fraction resolved.
    pub observed_fraction: Option<f64>,
    /// Wilson 68.27 % interval of the fraction resolved: [lower, upper].
    pub interval68: Option<[f64; 2]>,
    /// `within error` or `outside`; null for an empty bin.
    pub verdict: Option<String>,
}

/// How reliable the planning probabilities are on the catalog's own galaxies.
#[derive(Debug, Serialize, ToSchema)]
pub struct ReliabilityAnswer {
    /// The catalog version of the M–σ fit used.
    pub catalog_version: i64,
    /// Its fit identifier.
    pub fit_id: Option<String>,
    /// The threshold used.
    pub threshold: f64,
    /// The bins of predicted P.
    pub bins: Vec<ReliabilityBinAnswer>,
    /// Galaxies compared (the bins' counts add up to it).
    pub compared: usize,
    /// Galaxies of the M–σ sample left out (an upper limit, or no recorded resolution).
    pub left_out: usize,
    /// Galaxies left out of the fit by an exact refit.
    pub refitted: usize,
    /// Galaxies left out of the fit by the one-step change.
    pub one_step: usize,
    /// Why there is no table, one sentence.
    pub problem: Option<String>,
    /// A catalog version whose fit is still being computed.
    pub computing: Option<i64>,
    /// How to read the table: whether the bins agree with their predictions and, when the
    /// catalog's galaxies were resolved more often than predicted, why (docs/methods.md §4.9).
    pub reading: Option<String>,
}

impl ReliabilityAnswer {
    fn of(r: Reliability) -> Self {
        Self {
            catalog_version: r.catalog_version,
            fit_id: r.fit_id,
            threshold: r.threshold,
            bins: r
                .bins
                .into_iter()
                .map(|b| ReliabilityBinAnswer {
                    lo: b.lo,
                    hi: b.hi,
                    count: b.count,
                    resolved: b.resolved,
                    mean_predicted: b.mean_predicted,
                    observed_fraction: b.observed_fraction,
                    interval68: b.interval68.map(|(a, b)| [a, b]),
                    verdict: b.verdict.map(str::to_owned),
                })
                .collect(),
            compared: r.compared,
            left_out: r.left_out,
            refitted: r.refitted,
            one_step: r.one_step,
            problem: r.problem,
            computing: r.computing,
            reading: r.reading,
        }
    }
}

/// The reliability table: P(resolved) predicted for the catalog's own galaxies from σ and
/// distance alone (each left out of the M–σ fit), against their measured verdicts, in bins.
#[utoipa::path(
    get,
    path = "/api/v1/planning/reliability",
    tag = "planning",
    params(ReliabilityQuery),
    responses(
        (status = 200, description = "The reliability table", body = ReliabilityAnswer),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "An unknown or unreadable query parameter, or a threshold out of range (named)", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security((), ("bearer" = []))
)]
pub async fn planning_reliability(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Json<ReliabilityAnswer>> {
    let mut threshold = state.settings.soi_threshold;
    for (key, value) in query_pairs(query)? {
        if key != "threshold" {
            let name = key.chars().take(40).collect::<String>();
            return Err(AppError::invalid(vec![FieldError::new(
                name.as_str(),
                format!(
                    "'{name}' is not a query parameter of this endpoint (it accepts threshold)."
                ),
            )]));
        }
        threshold = value
            .trim()
            .parse::<f64>()
            .map_err(|_| check_threshold(f64::NAN).unwrap_err())
            .and_then(check_threshold)
            .map_err(|e| AppError::invalid(vec![FieldError::new("threshold", e)]))?;
    }
    let table = reliability(&state.catalog(), threshold).await?;
    Ok(Json(ReliabilityAnswer::of(table)))
}

/// A saved resolution.
#[derive(Debug, Serialize, ToSchema)]
pub struct SavedResolutionAnswer {
    /// Its key (for `DELETE /api/v1/me/resolutions/{id}`).
    pub id: i64,
    /// Its label.
    pub label: String,
    /// θ_res, arcsec.
    pub arcsec: f64,
    /// When it was saved (RFC 3339 UTC).
    pub created_at: String,
}

/// The caller's account: a session's or a token's owner.
fn account_of(principal: &Principal) -> ApiResult<(i64, &[Scope])> {
    match principal {
        Principal::Token(t) => Ok((t.account_id, &t.scopes)),
        Principal::Session(s) => Ok((s.account_id, &Scope::ALL)),
        Principal::Anonymous | Principal::BadToken => Err(AppError::not_logged_in(
            "This endpoint needs an API token (Authorization: Bearer ml_…).",
        )),
    }
}

/// The account's list.
async fn listed(state: &AppState, account_id: i64) -> ApiResult<Vec<SavedResolutionAnswer>> {
    Ok(resolutions::list(&state.pool, account_id)
        .await?
        .into_iter()
        .map(|s| SavedResolutionAnswer {
            id: s.account_resolution_id,
            label: s.label,
            arcsec: s.arcsec,
            created_at: s.created_at,
        })
        .collect())
}

/// The caller's saved resolutions, in the order saved.
#[utoipa::path(
    get,
    path = "/api/v1/me/resolutions",
    tag = "account",
    responses(
        (status = 200, description = "The caller's saved resolutions", body = Vec<SavedResolutionAnswer>),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn my_resolutions(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
) -> ApiResult<Json<Vec<SavedResolutionAnswer>>> {
    let (account_id, _) = account_of(&principal)?;
    Ok(Json(listed(&state, account_id).await?))
}

/// Save a resolution on the caller's account; a label saved before takes the new value, so
/// sending the same request twice stores it once.
#[utoipa::path(
    post,
    path = "/api/v1/me/resolutions",
    tag = "account",
    request_body = ResolutionRequest,
    responses(
        (status = 201, description = "Saved as a new resolution; the answer is the whole list", body = Vec<SavedResolutionAnswer>),
        (status = 200, description = "The label was saved before and now has this value; the answer is the whole list", body = Vec<SavedResolutionAnswer>),
        (status = 400, description = "Unreadable JSON", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the submit scope", body = Problem, content_type = "application/problem+json"),
        (status = 409, description = "The account keeps the most resolutions allowed (50); delete one first", body = Problem, content_type = "application/problem+json"),
        (status = 413, description = "A body over 4 KB", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "The body is not sent as application/json", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "JSON of the wrong shape, or a label or arcsec out of range (the field is named)", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
        (status = 503, description = "The database is busy; retry after the given seconds", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn save_resolution(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    headers: HeaderMap,
    body: Bytes,
) -> ApiResult<Response> {
    let (account_id, scopes) = account_of(&principal)?;
    require_scope(scopes, Scope::Submit).map_err(|_| {
        AppError::forbidden(
            "This token lacks the submit scope; create one with it on your account page.",
        )
    })?;
    let is_json = headers
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| {
            v.split(';')
                .next()
                .is_some_and(|t| t.trim().eq_ignore_ascii_case("application/json"))
        });
    if !is_json {
        return Err(AppError::unsupported_media_type(
            "The body must be JSON, sent with Content-Type: application/json.",
        ));
    }
    let request: ResolutionRequest = serde_json::from_slice(&body).map_err(|e| {
        if e.is_data() {
            AppError::invalid(vec![FieldError::new("", format!("{e}."))])
        } else {
            AppError::bad_request(format!("The body is not a resolution: {e}."))
                .titled("Unreadable JSON")
        }
    })?;
    let checked = Resolution::new(&request.label, request.arcsec).map_err(|e| {
        let field = if e.contains("label") {
            "label"
        } else {
            "arcsec"
        };
        AppError::invalid(vec![FieldError::new(field, e)])
    })?;
    let status =
        match resolutions::save(&state.pool, account_id, &checked.label, checked.arcsec).await? {
            Saved::Added(_) => StatusCode::CREATED,
            Saved::Replaced(_) => StatusCode::OK,
            Saved::Full => {
                return Err(AppError::conflict(
                    format!(
                        "You keep {} resolutions, the most an account may; delete one first.",
                        resolutions::MAX_PER_ACCOUNT
                    ),
                    Vec::new(),
                ));
            }
        };
    Ok((status, Json(listed(&state, account_id).await?)).into_response())
}

/// Delete one of the caller's saved resolutions.
#[utoipa::path(
    delete,
    path = "/api/v1/me/resolutions/{id}",
    tag = "account",
    params(("id" = String, Path, description = "The saved resolution's key")),
    responses(
        (status = 204, description = "Deleted"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the submit scope", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "The caller keeps no resolution with this key", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
        (status = 503, description = "The database is busy; retry after the given seconds", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn delete_resolution(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
) -> ApiResult<StatusCode> {
    let (account_id, scopes) = account_of(&principal)?;
    require_scope(scopes, Scope::Submit).map_err(|_| {
        AppError::forbidden(
            "This token lacks the submit scope; create one with it on your account page.",
        )
    })?;
    let not_found = || {
        AppError::not_found_saying(format!(
            "You keep no saved resolution {}.",
            id.chars().take(20).collect::<String>()
        ))
    };
    let key = id.parse::<i64>().map_err(|_| not_found())?;
    if resolutions::delete_own(&state.pool, account_id, key).await? {
        Ok(StatusCode::NO_CONTENT)
    } else {
        Err(not_found())
    }
}
