//! `GET /api/v1/releases`: the named catalog versions, newest first (the list of `/releases`).

use axum::extract::State;
use serde::Serialize;
use utoipa::ToSchema;

use super::ApiResult;
use super::problem::Problem;
use crate::catalog::{citations, history};
use crate::state::AppState;

/// A named release.
#[derive(Debug, Serialize, ToSchema)]
pub struct ReleaseJson {
    /// The name; `?release=NAME` reads it on the relation and catalog endpoints.
    pub name: String,
    /// The catalog version it names.
    pub catalog_version: i64,
    /// When that version was made, RFC 3339 UTC (null if not recorded).
    pub catalog_version_made_at: Option<String>,
    /// What the release is for.
    pub note: String,
    /// Who named it; null from the command line.
    pub named_by: Option<String>,
    /// When it was named, RFC 3339 UTC.
    pub named_at: String,
    /// The catalog at that version.
    pub catalog_url: String,
    /// What changed up to it from the previous release's version (or the start of the
    /// history); null for a release of the first version the history holds.
    pub changes_url: Option<String>,
}

/// The releases.
#[derive(Debug, Serialize, ToSchema)]
pub struct ReleaseList {
    /// The current catalog version.
    pub current_catalog_version: i64,
    /// Every release, newest version first.
    pub releases: Vec<ReleaseJson>,
}

/// Every named release, newest first.
#[utoipa::path(
    get,
    path = "/api/v1/releases",
    tag = "catalog",
    operation_id = "list_releases",
    responses(
        (status = 200, description = "The releases", body = ReleaseList),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn list_releases(State(state): State<AppState>) -> ApiResult<axum::Json<ReleaseList>> {
    let current = history::current_version(&state.pool).await?;
    let from = history::history_from(&state.pool).await?;
    let list = citations::releases(&state.pool).await?;
    let mut releases = Vec::with_capacity(list.len());
    for (i, r) in list.iter().enumerate() {
        let previous = citations::previous_version(&list, i, from);
        releases.push(ReleaseJson {
            name: r.name.clone(),
            catalog_version: r.catalog_version,
            catalog_version_made_at: history::made_at(&state.pool, r.catalog_version).await?,
            note: r.note.clone(),
            named_by: r.username.clone(),
            named_at: r.created_at.clone(),
            catalog_url: format!("/api/v1/catalog.json?release={}", r.name),
            changes_url: previous
                .map(|p| format!("/api/v1/changes?from={p}&to={}", r.catalog_version)),
        });
    }
    Ok(axum::Json(ReleaseList {
        current_catalog_version: current,
        releases,
    }))
}
