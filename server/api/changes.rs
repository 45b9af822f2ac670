//! `GET /api/v1/changes?from=N&to=M`: what changed between two catalog versions, the same
//! answer as the page `/changes` (`relations::changes`). An answer about past versions only
//! never changes ([`crate::router::Immutable`]).

use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};
use utoipa::{IntoParams, ToSchema};

use super::ApiResult;
use super::problem::Problem;
use crate::error::{AppError, FieldError};
use crate::relations::changes::{
    Changes, RangeAsk, RangeError, accepted_by, changes, resolve_range,
};
use crate::state::AppState;

/// The range compared.
#[derive(Debug, Deserialize, IntoParams)]
#[into_params(parameter_in = Query)]
pub struct ChangesQuery {
    /// The older catalog version (default: `to` − 1). Changes made after it are listed.
    #[param(minimum = 0)]
    pub from: Option<i64>,
    /// The newer catalog version, included (default: the current one). Must be after `from`.
    #[param(minimum = 0)]
    pub to: Option<i64>,
}

/// A galaxy whose first value was adopted in the range.
#[derive(Debug, Serialize, ToSchema)]
pub struct GalaxyAddedJson {
    /// Name at the version `to`.
    pub name: String,
    /// URL form (`/api/v1/galaxies/{slug}`).
    pub slug: String,
    /// The catalog version that added it.
    pub catalog_version: i64,
    /// Its adopted values at `to`.
    pub values: Vec<ValueJson>,
}

/// A value adopted at `to`.
#[derive(Debug, Serialize, ToSchema)]
pub struct ValueJson {
    /// Quantity (`bh_mass`, `sigma`, `bulge_mass`, `bulge_luminosity`).
    pub quantity: String,
    /// Photometric band of a luminosity, empty otherwise.
    pub band: String,
    /// The value as entered.
    pub value_text: String,
}

/// A value adopted or replaced in the range.
#[derive(Debug, Serialize, ToSchema)]
pub struct ValueChangeJson {
    /// Galaxy name.
    pub galaxy: String,
    /// Galaxy URL form.
    pub slug: String,
    /// Quantity (`bh_mass`, `sigma`, `bulge_mass`, `bulge_luminosity`).
    pub quantity: String,
    /// Photometric band of a luminosity, empty otherwise.
    pub band: String,
    /// The value replaced, as entered; null when there was none.
    pub old_value_text: Option<String>,
    /// The value adopted, as entered.
    pub new_value_text: String,
    /// The catalog version it happened at.
    pub catalog_version: i64,
    /// Who accepted it: a reviewer's name, `demo load` or `command-line import`.
    pub accepted_by: String,
    /// The reviewer's note (empty without one).
    pub review_note: String,
}

/// A distance changed in the range.
#[derive(Debug, Serialize, ToSchema)]
pub struct DistanceChangeJson {
    /// Galaxy name.
    pub galaxy: String,
    /// Galaxy URL form.
    pub slug: String,
    /// Old distance, Mpc.
    pub old_distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub old_distance_err_mpc: f64,
    /// Old distance method.
    pub old_distance_method: String,
    /// New distance, Mpc.
    pub new_distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub new_distance_err_mpc: f64,
    /// New distance method.
    pub new_distance_method: String,
    /// The catalog version it happened at.
    pub catalog_version: i64,
    /// Who changed it; null when no account did (the system).
    pub changed_by: Option<String>,
    /// The note given with the change.
    pub note: String,
}

/// One activity-class change.
#[derive(Debug, Serialize, ToSchema)]
pub struct ActivityChangeJson {
    /// Galaxy name.
    pub galaxy: String,
    /// Galaxy URL form.
    pub slug: String,
    /// Old class (`quiescent`, `seyfert1`, `seyfert2`, `liner`, `quasar`, `radio_galaxy`,
    /// `unknown`).
    pub old_activity: String,
    /// New class.
    pub new_activity: String,
    /// The catalog version it happened at.
    pub catalog_version: i64,
    /// Who changed it; null when no account did (the system).
    pub changed_by: Option<String>,
    /// The note given with the change.
    pub note: String,
}

/// One parameter of a relation's default fit at both versions.
#[derive(Debug, Serialize, ToSchema)]
pub struct ParamChangeJson {
    /// `alpha`, `beta`, `gamma` (the plane) or `eps` (intrinsic scatter, dex).
    pub name: String,
    /// Reported value at `from`; null without a fit.
    pub value_from: Option<f64>,
    /// Its error.
    pub error_from: Option<f64>,
    /// Reported value at `to`.
    pub value_to: Option<f64>,
    /// Its error.
    pub error_to: Option<f64>,
    /// value_to − value_from.
    pub delta: Option<f64>,
    /// delta / √(error_from² + error_to²), treating the fits as independent: conservative
    /// when the samples overlap (docs/methods.md §10).
    pub significance_sigma: Option<f64>,
}

/// A relation's default fit (structural estimator, default sample and pivots) at both
/// versions.
#[derive(Debug, Serialize, ToSchema)]
pub struct RelationChangeJson {
    /// Relation slug.
    pub relation: String,
    /// Objects fitted at `from` (null without a fit).
    pub n_from: Option<usize>,
    /// Objects fitted at `to`.
    pub n_to: Option<usize>,
    /// The parameters.
    pub params: Vec<ParamChangeJson>,
    /// Why a fit is missing.
    pub problems: Vec<String>,
}

/// A mean virial factor adopted in the range.
#[derive(Debug, Serialize, ToSchema)]
pub struct FactorChangeJson {
    /// The width measure word (`sigma_line`, `fwhm`).
    pub width_definition: String,
    /// log10 ⟨f⟩ in force just before; null if none.
    pub old_log_f: Option<f64>,
    /// log10 ⟨f⟩ adopted.
    pub new_log_f: f64,
    /// Its error, dex.
    pub new_log_f_err_dex: f64,
    /// The catalog version it made.
    pub catalog_version: i64,
    /// Who adopted it; null from the command line.
    pub adopted_by: Option<String>,
    /// What was calibrated, as recorded.
    pub source: String,
}

/// What changed between two catalog versions.
#[derive(Debug, Serialize, ToSchema)]
pub struct ChangesJson {
    /// The older catalog version.
    pub from_catalog_version: i64,
    /// The newer catalog version (changes in (from, to] are listed).
    pub to_catalog_version: i64,
    /// The current catalog version.
    pub current_catalog_version: i64,
    /// When `from` was made, RFC 3339 UTC.
    pub from_made_at: Option<String>,
    /// When `to` was made, RFC 3339 UTC.
    pub to_made_at: Option<String>,
    /// Galaxies added.
    pub galaxies_added: Vec<GalaxyAddedJson>,
    /// Values adopted or replaced.
    pub values: Vec<ValueChangeJson>,
    /// Distances changed.
    pub distances: Vec<DistanceChangeJson>,
    /// Activity classes changed.
    pub activities: Vec<ActivityChangeJson>,
    /// Each relation's default fit at both versions.
    pub relations: Vec<RelationChangeJson>,
    /// Mean virial factors adopted, oldest first.
    pub virial_factors: Vec<FactorChangeJson>,
}

impl ChangesJson {
    /// The answer for `c`.
    pub fn of(c: &Changes) -> Self {
        Self {
            from_catalog_version: c.from.version,
            to_catalog_version: c.to.version,
            current_catalog_version: c.to.current,
            from_made_at: c.from_made_at.clone(),
            to_made_at: c.to_made_at.clone(),
            galaxies_added: c
                .galaxies_added
                .iter()
                .map(|g| GalaxyAddedJson {
                    name: g.galaxy.name.clone(),
                    slug: g.galaxy.slug.clone(),
                    catalog_version: g.galaxy.catalog_version,
                    values: g
                        .values
                        .iter()
                        .map(|v| ValueJson {
                            quantity: v.quantity.clone(),
                            band: v.band.clone(),
                            value_text: v.value_text.clone(),
                        })
                        .collect(),
                })
                .collect(),
            values: c
                .values
                .iter()
                .map(|v| ValueChangeJson {
                    galaxy: v.galaxy_name.clone(),
                    slug: v.slug.clone(),
                    quantity: v.quantity.clone(),
                    band: v.band.clone(),
                    old_value_text: v.old_value_text.clone(),
                    new_value_text: v.new_value_text.clone(),
                    catalog_version: v.catalog_version,
                    accepted_by: accepted_by(v),
                    review_note: v.review_note.clone(),
                })
                .collect(),
            distances: c
                .distances
                .iter()
                .map(|d| DistanceChangeJson {
                    galaxy: d.galaxy_name.clone(),
                    slug: d.slug.clone(),
                    old_distance_mpc: d.old_distance_mpc,
                    old_distance_err_mpc: d.old_distance_err_mpc,
                    old_distance_method: d.old_method.clone(),
                    new_distance_mpc: d.new_distance_mpc,
                    new_distance_err_mpc: d.new_distance_err_mpc,
                    new_distance_method: d.new_method.clone(),
                    catalog_version: d.catalog_version,
                    changed_by: d.changed_by.clone(),
                    note: d.note(),
                })
                .collect(),
            activities: c
                .activities
                .iter()
                .map(|d| ActivityChangeJson {
                    galaxy: d.galaxy_name.clone(),
                    slug: d.slug.clone(),
                    old_activity: d.old_activity.clone(),
                    new_activity: d.new_activity.clone(),
                    catalog_version: d.catalog_version,
                    changed_by: d.changed_by.clone(),
                    note: d.note(),
                })
                .collect(),
            relations: c
                .relations
                .iter()
                .map(|r| RelationChangeJson {
                    relation: r.relation.slug(),
                    n_from: r.n_from,
                    n_to: r.n_to,
                    params: r
                        .params
                        .iter()
                        .map(|p| ParamChangeJson {
                            name: p.name.to_owned(),
                            value_from: p.from.map(|(v, _)| v),
                            error_from: p.from.map(|(_, e)| e),
                            value_to: p.to.map(|(v, _)| v),
                            error_to: p.to.map(|(_, e)| e),
                            delta: p.delta(),
                            significance_sigma: p.significance(),
                        })
                        .collect(),
                    problems: r.problems.clone(),
                })
                .collect(),
            virial_factors: c
                .virial_factors
                .iter()
                .map(|f| FactorChangeJson {
                    width_definition: f.width_definition.clone(),
                    old_log_f: f.old_log_f,
                    new_log_f: f.new_log_f.0,
                    new_log_f_err_dex: f.new_log_f.1,
                    catalog_version: f.catalog_version,
                    adopted_by: f.adopted_by.clone(),
                    source: f.source.clone(),
                })
                .collect(),
        }
    }
}

/// What changed between two catalog versions: galaxies added, values adopted or replaced
/// (with who accepted them), distances changed, and each relation's default fit at both.
#[utoipa::path(
    get,
    path = "/api/v1/changes",
    tag = "catalog",
    operation_id = "catalog_changes",
    params(ChangesQuery),
    responses(
        (status = 200, description = "The changes in (from, to]", body = ChangesJson),
        (status = 404, description = "A catalog version not made yet", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid, or from is not before to", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn catalog_changes(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Response> {
    let pairs = super::query_pairs(query)?;
    let ask = RangeAsk::read(&pairs).map_err(AppError::invalid)?;
    let (from, to) = resolve_range(&state.pool, ask).await.map_err(|e| match e {
        RangeError::NotForward => AppError::invalid(vec![FieldError::new("from", e.to_string())]),
        RangeError::NothingBefore(_) => {
            AppError::invalid(vec![FieldError::new("to", e.to_string())])
        }
        RangeError::Version(v) => v.into(),
    })?;
    let c = changes(&state.catalog(), from, to).await?;
    let past = c.to.is_past();
    let mut response = axum::Json(ChangesJson::of(&c)).into_response();
    if past {
        response.extensions_mut().insert(crate::router::Immutable);
    }
    Ok(response)
}
