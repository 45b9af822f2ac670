//! `GET /api/v1/catalog.csv` and `GET /api/v1/catalog.json`: the accepted (adopted) catalog in
//! the catalog CSV format (README "Catalog CSV") or as JSON, stamped with its version in the
//! `Catalog-Version` header and the file name. The same text as `/catalog.csv`,
//! `/catalog.json` and `massline export` (`catalog::csv_io::export_csv`, `export_json`).

use axum::extract::State;
use axum::http::header;
use axum::response::{IntoResponse, Response};

use serde::Serialize;
use utoipa::ToSchema;

use super::ApiResult;
use super::problem::Problem;
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
    responses(
        (status = 200, description = "The adopted catalog in the catalog CSV format", content_type = "text/csv", body = String,
            headers(("Catalog-Version" = i64, description = "The catalog version exported"))),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn catalog_csv(State(state): State<AppState>) -> ApiResult<Response> {
    let (text, version) = crate::catalog::csv_io::export_csv(&state.pool).await?;
    Ok(download(text, version, "text/csv; charset=utf-8", "csv"))
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
    /// When it was exported, RFC 3339 UTC.
    #[schema(format = DateTime)]
    pub exported_at: String,
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
    responses(
        (status = 200, description = "The adopted catalog as JSON", body = CatalogJson,
            headers(("Catalog-Version" = i64, description = "The catalog version exported"))),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn catalog_json(State(state): State<AppState>) -> ApiResult<Response> {
    let (text, version) = crate::catalog::csv_io::export_json(&state.pool).await?;
    Ok(download(text, version, "application/json", "json"))
}
