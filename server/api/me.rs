//! `GET /api/v1/me`: who the caller is.

use axum::Json;
use axum::extract::Extension;
use serde::Serialize;
use utoipa::ToSchema;

use super::ApiResult;
use super::problem::Problem;
use crate::auth::{Principal, Scope};
use crate::error::AppError;

/// The caller: an API token's owner with the token's scopes, or a browser session.
#[derive(Debug, Serialize, ToSchema)]
pub struct Me {
    /// Login name.
    pub username: String,
    /// Role: `member`, `reviewer` or `admin`.
    #[schema(example = "member")]
    pub role: String,
    /// The token's scopes (`read`, `submit`); a browser session has every scope its role
    /// allows.
    pub scopes: Vec<String>,
}

/// Who the caller is.
#[utoipa::path(
    get,
    path = "/api/v1/me",
    tag = "account",
    operation_id = "me",
    responses(
        (status = 200, description = "The caller", body = Me),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security((), ("bearer" = []))
)]
pub async fn me(Extension(principal): Extension<Principal>) -> ApiResult<Json<Me>> {
    let strings = |scopes: &[Scope]| scopes.iter().map(|s| s.as_str().to_owned()).collect();
    match &principal {
        Principal::Token(t) => Ok(Json(Me {
            username: t.username.clone(),
            role: t.role.as_str().to_owned(),
            scopes: strings(&t.scopes),
        })),
        Principal::Session(s) => Ok(Json(Me {
            username: s.username.clone(),
            role: s.role.as_str().to_owned(),
            scopes: strings(&Scope::ALL),
        })),
        // The route guard admits neither; answer as it would.
        Principal::Anonymous | Principal::BadToken => Err(AppError::not_logged_in(
            "This endpoint needs an API token (Authorization: Bearer ml_…).",
        )),
    }
}
