//! `POST /api/v1/relations/{relation}/runs` and `GET /api/v1/runs/{id}`: bootstrap and
//! posterior runs of a relation's fit, in the background, as on the relation page.
//!
//! A run waits in one queue shared by everyone (one runs per account and per core at a time);
//! its status says where it stands, with `queue_position` while it waits. Asking again for a
//! run of the same settings answers the run already waiting, running or stored, so the start is
//! idempotent without an `Idempotency-Key`.

use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::http::{StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};
use utoipa::ToSchema;

use super::cache::ApiCache;
use super::fit::ParamSummaryAnswer;
use super::problem::Problem;
use super::relations::{current_fit, read_fit_choice, relation_named};
use super::{ApiJson, ApiResult, query_pairs};
use crate::auth::Principal;
use crate::error::{AppError, FieldError};
use crate::fit::Method;
use crate::fit::ensemble::ParamSummary;
use crate::relations::{RunKind, RunProgress, RunStatus, run_status, run_status_of};
use crate::state::AppState;

/// Largest body of a run's start: two short fields.
pub const RUN_LIMIT_BYTES: usize = 1024;

/// Which run (`kind`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
pub enum RunKindWord {
    /// Resampling the objects and refitting.
    Bootstrap,
    /// Sampling the likelihood with flat priors (structural and conditional estimators).
    Posterior,
}

/// What to run.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct RunRequest {
    /// Bootstrap or posterior.
    pub kind: RunKindWord,
    /// Replicates (bootstrap) or steps (posterior); omitted or 0: the default.
    #[serde(default)]
    pub size: usize,
}

/// Where a run stands (`status`).
#[derive(Debug, Clone, Copy, Serialize, ToSchema, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
pub enum RunStatusWord {
    /// Waiting for its turn; `queue_position` says where.
    Queued,
    /// Computing; `done` of `total` so far.
    Running,
    /// Finished and stored; `params` holds the result.
    Stored,
    /// Failed; `message` says why.
    Failed,
    /// Cancelled because the catalog changed; `message` names both versions.
    Cancelled,
}

/// A bootstrap or posterior run and where it stands.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct RunAnswer {
    /// The run's number, for `GET /api/v1/runs/{id}`; absent for a result stored before this
    /// server started.
    pub id: Option<u64>,
    /// Relation slug.
    pub relation: String,
    /// Bootstrap or posterior.
    pub kind: RunKindWord,
    /// Replicates (bootstrap) or steps, burn-in included (posterior).
    pub size: usize,
    /// The catalog version the run's fit was made at.
    pub catalog_version: i64,
    /// Where it stands.
    pub status: RunStatusWord,
    /// While queued: its place among the waiting runs of every account, from 1.
    pub queue_position: Option<usize>,
    /// While queued: how many runs wait in all.
    pub queue_length: Option<usize>,
    /// While running: replicates fitted or steps done.
    pub done: Option<usize>,
    /// When it was asked for, or started once running, or stored (RFC 3339 UTC).
    pub at: Option<String>,
    /// Why it failed or was cancelled, or a note on a stored result (a sampler warning, left-out
    /// resamples).
    pub message: Option<String>,
    /// The stored result: each parameter's percentiles (alpha in log10 M☉ at the pivot, beta
    /// in dex per dex, eps in dex).
    pub params: Vec<ParamSummaryAnswer>,
    /// Where to ask for its status again.
    pub status_url: Option<String>,
}

/// The stored name of a parameter symbol.
fn param_name(symbol: &str) -> &str {
    match symbol {
        "α" => "alpha",
        "β" => "beta",
        "β₂" => "beta2",
        "γ" => "gamma",
        "ε" => "eps",
        other => other,
    }
}

fn answers(params: &[ParamSummary]) -> Vec<ParamSummaryAnswer> {
    params
        .iter()
        .map(|s| ParamSummaryAnswer {
            name: param_name(s.name).to_owned(),
            median: s.median,
            p16: s.p16,
            p84: s.p84,
            p2_5: s.p2_5,
            p97_5: s.p97_5,
            mean: s.mean,
            sd: s.sd,
        })
        .collect()
}

impl RunAnswer {
    fn of(progress: Option<&RunProgress>, base: RunAnswer, status: RunStatus) -> Self {
        let mut a = base;
        if let Some(p) = progress {
            a.id = Some(p.id);
            a.status_url = Some(format!("/api/v1/runs/{}", p.id));
        }
        match status {
            RunStatus::None | RunStatus::Queued { .. } => {
                a.status = RunStatusWord::Queued;
                if let RunStatus::Queued {
                    position,
                    of,
                    asked_at,
                    ..
                } = status
                {
                    a.queue_position = Some(position);
                    a.queue_length = Some(of);
                    a.at = Some(asked_at);
                }
            }
            RunStatus::Running {
                done, started_at, ..
            } => {
                a.status = RunStatusWord::Running;
                a.done = Some(done);
                a.at = Some(started_at);
            }
            RunStatus::Failed(why) => {
                a.status = RunStatusWord::Failed;
                a.message = Some(why);
            }
            RunStatus::Cancelled(why) => {
                a.status = RunStatusWord::Cancelled;
                a.message = Some(why);
            }
            RunStatus::Stored {
                params,
                note,
                stored_at,
            } => {
                a.status = RunStatusWord::Stored;
                a.params = answers(&params);
                a.message = note;
                a.at = Some(stored_at);
            }
        }
        a
    }

    fn base(relation: &str, kind: RunKind, size: usize, catalog_version: i64) -> Self {
        RunAnswer {
            id: None,
            relation: relation.to_owned(),
            kind: match kind {
                RunKind::Bootstrap => RunKindWord::Bootstrap,
                RunKind::Posterior => RunKindWord::Posterior,
            },
            size,
            catalog_version,
            status: RunStatusWord::Queued,
            queue_position: None,
            queue_length: None,
            done: None,
            at: None,
            message: None,
            params: Vec::new(),
            status_url: None,
        }
    }
}

fn account_of(principal: &Principal) -> Result<i64, AppError> {
    match principal {
        Principal::Token(t) => Ok(t.account_id),
        Principal::Session(s) => Ok(s.account_id),
        Principal::Anonymous | Principal::BadToken => Err(AppError::not_logged_in(
            "Starting a run needs an API token or a session; make a token on /account.",
        )),
    }
}

/// Queues a bootstrap or posterior run of the relation's current fit for the estimator, sample
/// and pivots asked (the query parameters of `GET /api/v1/relations/{relation}`). A run of the
/// same settings already waiting, running or stored is answered instead of a new one.
#[utoipa::path(
    post,
    path = "/api/v1/relations/{relation}/runs",
    tag = "relations",
    operation_id = "start_run",
    params(
        ("relation" = String, Path, description = "Relation slug: m_sigma, m_mbulge, m_l_<band>, m_sigma_mbulge", example = "m_sigma"),
        super::relations::FitQuery,
    ),
    request_body = RunRequest,
    responses(
        (status = 202, description = "The run, queued, running or already stored; `status_url` follows it", body = RunAnswer,
            headers(("Location" = String, description = "The run's status URL, when it has one"))),
        (status = 400, description = "The body or query could not be decoded", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such relation", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "The body is not JSON", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid, or there is no fit to start from", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "The account has as many runs waiting as it may (wait for one to finish), or too many requests from this account", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn start_run(
    State(state): State<AppState>,
    Extension(cache): Extension<ApiCache>,
    Extension(principal): Extension<Principal>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
    ApiJson(req): ApiJson<RunRequest>,
) -> ApiResult<Response> {
    let account_id = account_of(&principal)?;
    let settings = read_fit_choice(&query_pairs(query)?)?;
    let word = match req.kind {
        RunKindWord::Bootstrap => "bootstrap",
        RunKindWord::Posterior => "posterior",
    };
    let (kind, size) = RunKind::parse(word, req.size)
        .map_err(|e| AppError::invalid(vec![FieldError::new("size", e)]))?;
    if kind == RunKind::Posterior
        && !matches!(settings.method, Method::Structural | Method::Conditional)
    {
        return Err(AppError::invalid(vec![FieldError::new(
            "kind",
            format!(
                "The {} estimator has no likelihood, so it has no posterior; ask for method=structural or method=conditional.",
                settings.method.as_str()
            ),
        )]));
    }
    let relation = relation_named(&state, &slug).await?;
    let version = cache
        .catalog_version(&state.pool, &state.settings.db_path)
        .await?;
    let outcome = current_fit(&state, version, &relation, &settings).await?;
    if let Err(e) = &outcome.fit {
        return Err(AppError::invalid_saying(format!(
            "There is no fit to start a run from: {e}"
        )));
    }
    let base = RunAnswer::base(&relation.slug(), kind, size, outcome.key.catalog_version);
    let stored = run_status(&state.pool, &state.runs, &outcome, kind, size).await?;
    let answer = if matches!(stored, RunStatus::Stored { .. }) {
        RunAnswer::of(None, base, stored)
    } else {
        let progress =
            state
                .runs
                .start(state.pool.clone(), account_id, outcome.clone(), kind, size)?;
        let status = run_status_of(&state.pool, &state.runs, &progress).await?;
        RunAnswer::of(Some(&progress), base, status)
    };
    let mut response = (StatusCode::ACCEPTED, axum::Json(&answer)).into_response();
    if let Some(url) = &answer.status_url
        && let Ok(value) = url.parse()
    {
        response.headers_mut().insert(header::LOCATION, value);
    }
    Ok(response)
}

/// Where a run started on this server stands: its place in the queue, its progress, why it
/// failed or was cancelled, or its stored result.
#[utoipa::path(
    get,
    path = "/api/v1/runs/{id}",
    tag = "relations",
    operation_id = "run_status",
    params(("id" = u64, Path, description = "The run's number, from its start")),
    responses(
        (status = 200, description = "The run", body = RunAnswer),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such run on this server (a restart forgets runs that had not finished)", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn run_status_by_id(
    State(state): State<AppState>,
    Path(id): Path<String>,
) -> ApiResult<axum::Json<RunAnswer>> {
    let progress = id
        .parse::<u64>()
        .ok()
        .and_then(|n| state.runs.by_id(n))
        .ok_or_else(|| {
            AppError::not_found_saying(format!(
                "There is no run {} on this server; start it again with POST /api/v1/relations/{{relation}}/runs.",
                id.chars().take(20).collect::<String>()
            ))
        })?;
    let status = run_status_of(&state.pool, &state.runs, &progress).await?;
    let base = RunAnswer::base(
        &progress.outcome.key.relation,
        progress.key.kind,
        progress.key.size,
        progress.key.fit.catalog_version,
    );
    Ok(axum::Json(RunAnswer::of(Some(&progress), base, status)))
}
