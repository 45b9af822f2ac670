//! The JSON API (`/api/v1/…`). Callers authenticate with `Authorization: Bearer ml_…`; errors
//! are RFC 9457 problem+json. Write endpoints (submissions) will check the `submit` scope with
//! `auth::require_scope`.

use axum::Json;
use axum::extract::Extension;
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use serde::Serialize;

use crate::auth::middleware::problem;
use crate::auth::{Principal, Scope};

/// Answer of `GET /api/v1/me`.
#[derive(Debug, Serialize)]
pub(crate) struct Me {
    username: String,
    role: &'static str,
    /// The token's scopes; a browser session has every scope its role allows.
    scopes: Vec<&'static str>,
}

/// `GET /api/v1/me`: who the caller is.
pub(crate) async fn me(Extension(principal): Extension<Principal>) -> Response {
    let me = match &principal {
        Principal::Token(t) => Me {
            username: t.username.clone(),
            role: t.role.as_str(),
            scopes: t.scopes.iter().map(|s| s.as_str()).collect(),
        },
        Principal::Session(s) => Me {
            username: s.username.clone(),
            role: s.role.as_str(),
            scopes: Scope::ALL.iter().map(|s| s.as_str()).collect(),
        },
        // The route guard admits neither; answer as it would.
        Principal::Anonymous | Principal::BadToken => {
            return problem(
                StatusCode::UNAUTHORIZED,
                "Unauthorized",
                "This endpoint needs an API token.",
            );
        }
    };
    Json(me).into_response()
}
