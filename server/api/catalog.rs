//! `GET /api/v1/catalog.csv` and `GET /api/v1/catalog.json`: the accepted (adopted) catalog in
//! the catalog CSV format (README "Catalog CSV") or as JSON, stamped with its version in the
//! `Catalog-Version` header and the file name. The same text as `/catalog.csv`,
//! `/catalog.json` and `massline export` (`catalog::csv_io::export_csv`, `export_json`).

use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};
use axum::http::header;
use axum::response::{IntoResponse, Response};

use serde::Serialize;
use utoipa::ToSchema;

use super::ApiResult;
use super::problem::Problem;
use crate::error::{AppError, FieldError};
use crate::state::AppState;

/// The header naming the catalog version of an export.
pub const VERSION_HEADER: &str = "catalog-version";

/// An export as a download named with its version.
fn download(text: String, version: i64, content_type: &'static str, ext: &str) -> Response {
    (
        [
            (header::CONTENT_TYPE, content_type.to_owned()),
            (
                header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"massline-catalog-v{version}.{ext}\""),
            ),
            (
                header::HeaderName::from_static(VERSION_HEADER),
                version.to_string(),
            ),
        ],
        text,
    )
        .into_response()
}

/// The accepted catalog as CSV, one row per adopted measurement.
#[utoipa::path(
    get,
    path = "/api/v1/catalog.csv",
    tag = "catalog",
    operation_id = "catalog_csv",
    params(super::VersionQuery),
    responses(
        (status = 404, description = "No such catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid", body = Problem, content_type = "application/problem+json"),
        (status = 200, description = "The adopted catalog in the catalog CSV format", content_type = "text/csv", body = String,
            headers(("Catalog-Version" = i64, description = "The catalog version exported"))),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn catalog_csv(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Response> {
    let pinned = file_version(&state, query).await?;
    let (text, version) =
        crate::catalog::csv_io::export_csv(&state.pool, pinned.as_ref().map(|p| p.version)).await?;
    Ok(finish(
        pinned.as_ref(),
        download(text, version, "text/csv; charset=utf-8", "csv"),
    ))
}

/// The version an export is asked for (`None`: the current one); it takes no other parameter.
async fn file_version(
    state: &AppState,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Option<crate::catalog::history::Pinned>> {
    let (pinned, rest) = super::asked_version(state, super::query_pairs(query)?).await?;
    if let Some((key, _)) = rest.first() {
        let name = key.chars().take(40).collect::<String>();
        return Err(AppError::invalid(vec![FieldError::new(
            name.as_str(),
            format!("'{name}' is not a parameter of this endpoint (it accepts version, release)."),
        )]));
    }
    Ok(pinned.map(|(_, p)| p))
}

/// A past version's export never changes ([`crate::router::Immutable`]).
fn finish(pinned: Option<&crate::catalog::history::Pinned>, response: Response) -> Response {
    match pinned {
        Some(p) => super::immutable_if_past(p, response),
        None => response,
    }
}

/// The JSON export (described here for the OpenAPI document; written by
/// `catalog::csv_io::export_json`).
#[derive(Debug, Serialize, ToSchema)]
pub struct CatalogJson {
    /// Always `massline-catalog`.
    pub format: String,
    /// Version of this format (1).
    pub format_version: i64,
    /// The catalog version exported.
    pub catalog_version: i64,
    /// When the catalog version exported was made, RFC 3339 UTC (so an export of a version is
    /// the same whenever it is made).
    #[schema(format = DateTime)]
    pub catalog_version_made_at: String,
    /// The catalog CSV's column names, in order.
    pub columns: Vec<String>,
    /// One object per adopted measurement: each column's text as in the CSV, and `derived`
    /// (`log_value` in log10 of the quantity's unit, `err_minus_dex`, `err_plus_dex`,
    /// `upper_limit`).
    #[schema(value_type = Vec<Object>)]
    pub rows: Vec<serde_json::Value>,
}

/// The accepted catalog as JSON, one row per adopted measurement, with the stored canonical
/// numbers beside the values as entered.
#[utoipa::path(
    get,
    path = "/api/v1/catalog.json",
    tag = "catalog",
    operation_id = "catalog_json",
    params(super::VersionQuery),
    responses(
        (status = 404, description = "No such catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid", body = Problem, content_type = "application/problem+json"),
        (status = 200, description = "The adopted catalog as JSON", body = CatalogJson,
            headers(("Catalog-Version" = i64, description = "The catalog version exported"))),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn catalog_json(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Response> {
    let pinned = file_version(&state, query).await?;
    let (text, version) =
        crate::catalog::csv_io::export_json(&state.pool, pinned.as_ref().map(|p| p.version))
            .await?;
    Ok(finish(
        pinned.as_ref(),
        download(text, version, "application/json", "json"),
    ))
}
