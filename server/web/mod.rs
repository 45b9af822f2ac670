//! HTML pages. Handlers are thin: read the request, call `catalog` (and later `fit`, `charts`),
//! and fill a page struct whose fields are already formatted for display.
//!
//! Every response carries the same security headers (a strict Content-Security-Policy with no
//! outside sources, nosniff, no framing, no referrer leaks). Static files are compiled into the
//! binary, so a deployed server needs no files beside it.

mod display;
mod galaxies;
mod overview;

use axum::Router;
use axum::extract::Request;
use axum::http::{HeaderName, HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::trace::TraceLayer;

use crate::error::render_error_page;
use crate::startup::AppState;

/// Largest request body accepted (forms and JSON); larger ones get 413.
pub const BODY_LIMIT_BYTES: usize = 1024 * 1024;

/// The Content-Security-Policy of every page: nothing from outside the server, no inline script.
/// Inline `style` attributes are allowed for plotters' SVG output.
pub const CONTENT_SECURITY_POLICY: &str = "default-src 'self'; img-src 'self' data:; style-src 'self' 'unsafe-inline'; script-src 'self'; object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'";

/// Build the router with all pages and layers.
pub fn router(state: AppState) -> Router {
    Router::new()
        .route("/", get(overview::show_overview))
        .route("/galaxies", get(galaxies::list_galaxies))
        .route("/galaxies/{slug}", get(galaxies::show_galaxy))
        .route("/healthz", get(healthz))
        .route("/static/massline.css", get(stylesheet))
        .fallback(not_found)
        .with_state(state)
        .layer(RequestBodyLimitLayer::new(BODY_LIMIT_BYTES))
        .layer(SetResponseHeaderLayer::overriding(
            header::CONTENT_SECURITY_POLICY,
            HeaderValue::from_static(CONTENT_SECURITY_POLICY),
        ))
        .layer(SetResponseHeaderLayer::overriding(
            header::X_CONTENT_TYPE_OPTIONS,
            HeaderValue::from_static("nosniff"),
        ))
        .layer(SetResponseHeaderLayer::overriding(
            header::REFERRER_POLICY,
            HeaderValue::from_static("same-origin"),
        ))
        .layer(SetResponseHeaderLayer::overriding(
            header::X_FRAME_OPTIONS,
            HeaderValue::from_static("DENY"),
        ))
        .layer(SetResponseHeaderLayer::overriding(
            HeaderName::from_static("cross-origin-opener-policy"),
            HeaderValue::from_static("same-origin"),
        ))
        .layer(TraceLayer::new_for_http())
}

/// Liveness and readiness: 200 "ok" when the database answers, 503 otherwise.
async fn healthz(axum::extract::State(state): axum::extract::State<AppState>) -> Response {
    match crate::catalog::ping(&state.pool).await {
        Ok(()) => (StatusCode::OK, "ok\n").into_response(),
        Err(e) => {
            tracing::warn!(error = %e, "health check failed");
            (StatusCode::SERVICE_UNAVAILABLE, "database unavailable\n").into_response()
        }
    }
}

const STYLESHEET: &str = include_str!("../../static/massline.css");

async fn stylesheet() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/css; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=3600"),
        ],
        STYLESHEET,
    )
        .into_response()
}

async fn not_found(request: Request) -> Response {
    render_error_page(
        StatusCode::NOT_FOUND,
        "Not found",
        format!("There is no page at {}.", request.uri().path()),
        false,
    )
}
