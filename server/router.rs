//! The router: how the doors' routes are guarded, limited and assembled, and the layers every
//! answer passes.
//!
//! A door (`web` for pages, `api` for JSON) lists its routes with [`Routes::add`], each with the
//! [`Access`] it asks for, and hands them over as a [`Door`] together with its error renderer.
//! [`build`] merges the doors behind the same layers (outermost first):
//!
//! 1. trace, then the security headers (a strict Content-Security-Policy with no outside
//!    sources and no inline script, nosniff, no framing, no referrer leaks, and
//!    `Cache-Control: no-store` unless a handler says otherwise), on every answer;
//! 2. [`render_errors`]: a [`REQUEST_TIMEOUT`] answering 503 (not 408: the client did nothing
//!    wrong and may retry); an answer carrying an [`AppError`] is drawn by the door that owns
//!    the path (an HTML page or problem+json) and logged, once;
//! 3. `auth::middleware::refuse_cross_site`, `auth::middleware::authenticate`, then
//!    `auth::middleware::limit_rate` (the page and API budgets of each account or client
//!    address, `auth::rate`), so every route a principal can call is counted, whichever door
//!    serves it (and paths no route serves);
//! 4. per route: its body limit, `auth::middleware::guard` with its access, and the
//!    anti-forgery check on unsafe methods; then the door's own layers and the handler.
//!
//! [`route_table`] lists every route with its access; the access-table test compares it with
//! `tests/access.toml`, so a route cannot be added without saying who may use it.

use std::convert::Infallible;
use std::sync::Arc;
use std::time::Duration;

use axum::Router;
use axum::extract::Request;
use axum::extract::rejection::QueryRejection;
use axum::http::{HeaderName, HeaderValue, Method, header};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use axum::routing::MethodRouter;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::trace::TraceLayer;

use crate::auth::middleware::{
    authenticate, guard, limit_rate, refuse_cross_site, require_form_token,
};
use crate::auth::rate::RateLimits;
use crate::auth::{Access, Principal};
use crate::error::{AppError, ErrorResponse};
use crate::state::AppState;

/// Largest request body accepted (forms and JSON) on a route that does not set its own limit;
/// larger ones get 413.
pub const BODY_LIMIT_BYTES: usize = 1024 * 1024;

/// The body limit of the catalog upload (`/submissions/upload`): 32 MB, room for a 50,000-row
/// file (about 150 bytes a row).
pub const UPLOAD_LIMIT_BYTES: usize = 32 * 1024 * 1024;

/// Longest time a request may take before the server gives up with 503 (a slow request is the
/// server's problem, not the client's, so not 408; clients may retry a 503).
pub const REQUEST_TIMEOUT: Duration = Duration::from_secs(30);

/// The Content-Security-Policy of every page: nothing from outside the server, no inline script.
/// Inline `style` attributes are allowed for plotters' SVG output.
pub const CONTENT_SECURITY_POLICY: &str = "default-src 'self'; img-src 'self' data:; style-src 'self' 'unsafe-inline'; script-src 'self'; object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'";

/// The query string as (key, value) pairs, or a 400 when it cannot be decoded (each door
/// then reads the pairs, naming every parameter at fault).
///
/// # Errors
/// [`AppError::BadRequest`].
pub fn query_pairs(
    query: Result<axum::extract::Query<Vec<(String, String)>>, QueryRejection>,
) -> Result<Vec<(String, String)>, AppError> {
    query.map(|axum::extract::Query(pairs)| pairs).map_err(|e| {
        AppError::bad_request(format!(
            "The address's parameters could not be read: {}.",
            e.body_text()
        ))
        .titled("Unreadable query")
    })
}

/// One route as listed in the route table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RouteEntry {
    /// HTTP method.
    pub method: Method,
    /// Path pattern as given to the router, e.g. "/galaxies/{slug}".
    pub path: &'static str,
    /// What it asks of the principal.
    pub access: Access,
    /// Its body limit, bytes.
    pub limit_bytes: usize,
}

/// The routes of one door, with the list of what was added.
pub struct Routes {
    router: Router<AppState>,
    table: Vec<RouteEntry>,
}

impl Default for Routes {
    fn default() -> Self {
        Self::new()
    }
}

impl Routes {
    /// No routes yet.
    pub fn new() -> Self {
        Self {
            router: Router::new(),
            table: Vec::new(),
        }
    }

    /// Add one method of one path, guarded by `access` and (for unsafe methods) the form token,
    /// with the ordinary body limit.
    #[must_use]
    pub fn add(
        self,
        method: Method,
        path: &'static str,
        access: Access,
        handler: MethodRouter<AppState>,
    ) -> Self {
        self.add_limited(method, path, access, handler, BODY_LIMIT_BYTES)
    }

    /// [`Routes::add`] with its own body limit (uploads). The limit is checked before the
    /// guard, so an oversized request is a 413 whoever sends it; the form-token check and the
    /// extractors read up to the same limit.
    #[must_use]
    pub fn add_limited(
        self,
        method: Method,
        path: &'static str,
        access: Access,
        handler: MethodRouter<AppState>,
        limit_bytes: usize,
    ) -> Self {
        self.add_with(method, path, access, handler, limit_bytes, false)
    }

    /// [`Routes::add_limited`] for a JSON endpoint: a browser session may send its
    /// anti-forgery token in the `X-CSRF-Token` header instead of a form field.
    #[must_use]
    pub fn add_json(
        self,
        method: Method,
        path: &'static str,
        access: Access,
        handler: MethodRouter<AppState>,
        limit_bytes: usize,
    ) -> Self {
        self.add_with(method, path, access, handler, limit_bytes, true)
    }

    fn add_with(
        mut self,
        method: Method,
        path: &'static str,
        access: Access,
        handler: MethodRouter<AppState>,
        limit_bytes: usize,
        json: bool,
    ) -> Self {
        let form_token = axum::middleware::from_fn(move |req, next| {
            require_form_token(req, next, limit_bytes, json)
        });
        let guarded = axum::middleware::from_fn(move |req, next| guard(access, req, next));
        // API paths answer a method they do not serve with 405 before any credential check
        // (route_layer skips the method router's fallback), as their OpenAPI document says.
        let handler: MethodRouter<AppState> = if path.starts_with("/api/") {
            handler.route_layer(form_token).route_layer(guarded)
        } else {
            handler
                .layer::<_, Infallible>(form_token)
                .layer::<_, Infallible>(guarded)
        };
        let limited: MethodRouter<AppState> = handler
            .layer::<_, Infallible>(RequestBodyLimitLayer::new(limit_bytes))
            .layer::<_, Infallible>(axum::extract::DefaultBodyLimit::max(limit_bytes))
            .layer::<_, Infallible>(axum::middleware::from_fn(move |req, next| {
                refuse_declared_body_over(limit_bytes, req, next)
            }));
        self.router = self.router.route(path, limited);
        self.table.push(RouteEntry {
            method,
            path,
            access,
            limit_bytes,
        });
        self
    }

    /// The routes added, in order.
    pub fn table(&self) -> &[RouteEntry] {
        &self.table
    }
}

/// What an error renderer knows of the request it answers.
#[derive(Debug, Clone)]
pub struct Asked {
    /// The request's method.
    pub method: Method,
    /// The path.
    pub path: String,
    /// The path with its query, as asked.
    pub target: String,
    /// Who asked, when authentication got that far.
    pub principal: Option<Principal>,
}

/// Draws an error answer for one door.
pub type Renderer = fn(&AppError, &Asked) -> Response;

/// Each door's test of whether it owns a path, with its renderer.
type Renderers = Arc<[(fn(&str) -> bool, Renderer)]>;

/// One door of the service: its routes, which paths it owns (its error answers, and the 404 of
/// paths no route serves), how it draws errors, and layers of its own around its routes.
pub struct Door {
    /// The door's routes.
    pub routes: Routes,
    /// Whether a path belongs to this door.
    pub owns: fn(&str) -> bool,
    /// Draws an [`AppError`] for this door.
    pub render: Renderer,
    /// Layers around this door's routes only (inside authentication).
    pub layers: fn(Router<AppState>, &AppState) -> Router<AppState>,
}

/// No layers of a door's own.
pub fn no_layers(router: Router<AppState>, _state: &AppState) -> Router<AppState> {
    router
}

/// Every route of the doors with the access it asks for, in the order they were added.
pub fn route_table(doors: &[Door]) -> Vec<RouteEntry> {
    doors
        .iter()
        .flat_map(|d| d.routes.table.iter().cloned())
        .collect()
}

/// The service: the doors' routes behind every layer (see the module doc).
pub fn build(state: AppState, doors: Vec<Door>) -> Router {
    let secure = state.settings.secure_cookies;
    let mut renderers = Vec::with_capacity(doors.len());
    let mut app = Router::new();
    for door in doors {
        renderers.push((door.owns, door.render));
        // A method a path does not serve: 405 with `Allow`, before the route's guard.
        let routes = door
            .routes
            .router
            .method_not_allowed_fallback(method_not_allowed);
        app = app.merge((door.layers)(routes, &state));
    }
    let limits = RateLimits::new(
        state.settings.page_rate_per_minute,
        state.settings.api_rate_per_minute,
        state.clock.clone(),
    );
    let app = app
        .fallback(no_route)
        .layer(axum::middleware::from_fn_with_state(limits, limit_rate))
        .layer(axum::middleware::from_fn_with_state(
            state.clone(),
            authenticate,
        ))
        .layer(axum::middleware::from_fn(refuse_cross_site))
        .with_state(state);
    with_baseline(app, REQUEST_TIMEOUT, secure, renderers.into())
}

async fn no_route(request: Request) -> AppError {
    AppError::NoRoute {
        path: request.uri().path().to_owned(),
    }
}

async fn method_not_allowed(request: Request) -> AppError {
    AppError::MethodNotAllowed {
        method: request.method().to_string(),
    }
}

/// 413 for a request whose declared length is beyond `limit_bytes` (a body without a declared
/// length is cut at the limit by the body-limit layer and refused by the extractor reading it).
async fn refuse_declared_body_over(limit_bytes: usize, request: Request, next: Next) -> Response {
    let declared = request
        .headers()
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok())
        .and_then(|v| v.parse::<u64>().ok());
    if declared.is_some_and(|n| n > limit_bytes as u64) {
        return AppError::BodyTooLarge {
            limit_bytes: Some(limit_bytes),
        }
        .into_response();
    }
    next.run(request).await
}

/// Answer within `timeout` (else 503), and draw an error answer with the renderer of the door
/// that owns the path (the last door draws paths no door claims), keeping the headers the error
/// carried (`Allow`, `Retry-After`, cookies); log the error once.
async fn render_errors(
    timeout: Duration,
    renderers: Renderers,
    request: Request,
    next: Next,
) -> Response {
    let path = request.uri().path().to_owned();
    let target = request
        .uri()
        .path_and_query()
        .map_or_else(|| path.clone(), |pq| pq.as_str().to_owned());
    let method = request.method().clone();
    let mut response = match tokio::time::timeout(timeout, next.run(request)).await {
        Ok(response) => response,
        Err(_) => AppError::Unavailable.into_response(),
    };
    let Some(ErrorResponse(error)) = response.extensions_mut().remove::<ErrorResponse>() else {
        return response;
    };
    log_once(&error, &method, &path);
    let asked = Asked {
        method,
        path,
        target,
        principal: response.extensions().get::<Principal>().cloned(),
    };
    let render = renderers
        .iter()
        .find(|(owns, _)| owns(&asked.path))
        .or(renderers.last())
        .map(|(_, render)| *render);
    let Some(render) = render else {
        return response;
    };
    let mut drawn = render(&error, &asked);
    for (name, value) in response.headers() {
        if *name == header::CONTENT_TYPE || *name == header::CONTENT_LENGTH {
            continue;
        }
        if *name == header::SET_COOKIE || !drawn.headers().contains_key(name) {
            drawn.headers_mut().append(name.clone(), value.clone());
        }
    }
    drawn
}

/// The one log line of an error answer: internal errors with their cause chain, failures of
/// the storage and refusals that may be attacks as warnings, the rest for debugging.
fn log_once(error: &AppError, method: &Method, path: &str) {
    match error {
        AppError::Internal(cause) => {
            tracing::error!(%method, path, error = format!("{cause:#}"), "request failed");
        }
        AppError::Busy | AppError::StorageFull | AppError::Unavailable => {
            tracing::warn!(%method, path, status = error.status().as_u16(), "{error}");
        }
        AppError::Forbidden { message } => {
            tracing::warn!(%method, path, "refused: {message}");
        }
        other => {
            tracing::debug!(%method, path, status = other.status().as_u16(), "{other}");
        }
    }
}

/// The layers every answer passes, whatever route answered (or none): the timeout (503), error
/// drawing and the security headers. `Cache-Control: no-store` is
/// added unless the handler set its own, so pages of a logged-in person are never stored
/// (ASVS 14.3.2).
fn with_baseline(app: Router, timeout: Duration, secure: bool, renderers: Renderers) -> Router {
    let mut app = app
        .layer(axum::middleware::from_fn(move |req, next| {
            render_errors(timeout, renderers.clone(), req, next)
        }))
        .layer(SetResponseHeaderLayer::if_not_present(
            header::CACHE_CONTROL,
            HeaderValue::from_static("no-store"),
        ))
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
        .layer(SetResponseHeaderLayer::overriding(
            HeaderName::from_static("permissions-policy"),
            HeaderValue::from_static("camera=(), microphone=(), geolocation=()"),
        ));
    if secure {
        // Only over HTTPS: tells browsers to use HTTPS for a year (ASVS 3.4.1).
        app = app.layer(SetResponseHeaderLayer::overriding(
            header::STRICT_TRANSPORT_SECURITY,
            HeaderValue::from_static("max-age=31536000"),
        ));
    }
    app.layer(TraceLayer::new_for_http())
}

#[cfg(test)]
mod tests {
    use super::*;
    use axum::body::Body;
    use axum::http::StatusCode;
    use axum::routing::get;
    use tower::ServiceExt;

    /// A door drawing every error as its status and message in plain text, owning `/t/`.
    fn test_renderers() -> Renderers {
        fn owns(path: &str) -> bool {
            path.starts_with("/t/")
        }
        fn render(error: &AppError, asked: &Asked) -> Response {
            (
                error.status(),
                format!(
                    "{} {}: {}",
                    asked.method,
                    asked.path,
                    error.public_message()
                ),
            )
                .into_response()
        }
        Arc::new([(owns as fn(&str) -> bool, render as Renderer)])
    }

    fn slow_app(timeout: Duration, secure: bool) -> Router {
        let slow = Router::new().route(
            "/t/slow",
            get(|| async {
                tokio::time::sleep(Duration::from_secs(5)).await;
                "late"
            }),
        );
        with_baseline(slow, timeout, secure, test_renderers())
    }

    async fn body_text(response: Response) -> String {
        let bytes = axum::body::to_bytes(response.into_body(), 1 << 20)
            .await
            .unwrap();
        String::from_utf8(bytes.to_vec()).unwrap()
    }

    #[tokio::test]
    async fn a_slow_request_answers_503_drawn_by_its_door_with_the_security_headers() {
        let response = slow_app(Duration::from_millis(50), false)
            .oneshot(
                Request::builder()
                    .uri("/t/slow")
                    .body(Body::empty())
                    .unwrap(),
            )
            .await
            .unwrap();
        assert_eq!(response.status(), StatusCode::SERVICE_UNAVAILABLE);
        let h = response.headers();
        assert!(h.contains_key(header::CONTENT_SECURITY_POLICY));
        assert_eq!(h[header::X_CONTENT_TYPE_OPTIONS], "nosniff");
        assert_eq!(h[header::CACHE_CONTROL], "no-store");
        assert_eq!(h[header::RETRY_AFTER], "2");
        assert!(!h.contains_key(header::STRICT_TRANSPORT_SECURITY));
        assert_eq!(
            body_text(response).await,
            "GET /t/slow: The server could not answer in time; nothing was changed, please try again."
        );
    }

    #[tokio::test]
    async fn a_declared_body_beyond_the_limit_is_refused_before_the_handler() {
        let echo = Router::new().route(
            "/t/echo",
            axum::routing::post(|body: String| async move { body }).layer(
                axum::middleware::from_fn(|req, next| refuse_declared_body_over(10, req, next)),
            ),
        );
        let app = with_baseline(echo, REQUEST_TIMEOUT, false, test_renderers());
        let response = app
            .oneshot(
                Request::builder()
                    .method(Method::POST)
                    .uri("/t/echo")
                    .header(header::CONTENT_LENGTH, "11")
                    .body(Body::from("12345678901"))
                    .unwrap(),
            )
            .await
            .unwrap();
        assert_eq!(response.status(), StatusCode::PAYLOAD_TOO_LARGE);
        assert_eq!(
            body_text(response).await,
            "POST /t/echo: The request is larger than 10 bytes."
        );
    }

    #[tokio::test]
    async fn hsts_is_sent_only_with_secure_cookies() {
        let app = |secure| {
            with_baseline(
                Router::new().route("/", get(|| async { "ok" })),
                REQUEST_TIMEOUT,
                secure,
                test_renderers(),
            )
        };
        let plain = app(false)
            .oneshot(Request::builder().uri("/").body(Body::empty()).unwrap())
            .await
            .unwrap();
        assert!(
            !plain
                .headers()
                .contains_key(header::STRICT_TRANSPORT_SECURITY)
        );
        let secure = app(true)
            .oneshot(Request::builder().uri("/").body(Body::empty()).unwrap())
            .await
            .unwrap();
        assert_eq!(
            secure.headers()[header::STRICT_TRANSPORT_SECURITY],
            "max-age=31536000"
        );
    }
}
