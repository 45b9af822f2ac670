//! HTML pages and the small JSON API. Handlers are thin: read the request, call `catalog` (and
//! later `fit`, `charts`), and fill a page struct whose fields are already formatted for display.
//!
//! Every route is added through [`Routes::add`] with the [`Access`] it asks for; the same list is
//! exposed as [`route_table`], which the access-table test compares with `tests/access.toml`, so
//! a route cannot be added without saying who may use it.
//!
//! Every response carries the same security headers (a strict Content-Security-Policy with no
//! outside sources and no inline script, nosniff, no framing, no referrer leaks, and
//! `Cache-Control: no-store` unless a handler says otherwise), including error pages, 404s,
//! refused requests, 413 and the 503 of a timed-out request. Static files are compiled into the
//! binary, so a deployed server needs no files beside it.

mod account;
mod admin;
mod display;
pub(crate) mod galaxies;
mod login;
mod overview;
pub(crate) mod place;
mod relations;
mod review;
mod submissions;

use std::time::Duration;

use axum::Router;
use axum::extract::{FromRequestParts, Request};
use axum::http::request::Parts;
use axum::http::{HeaderName, HeaderValue, Method, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::{MethodRouter, get, post};
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::timeout::TimeoutLayer;
use tower_http::trace::TraceLayer;

use crate::auth::middleware::{authenticate, guard, refuse_cross_site, require_form_token_limited};
use crate::auth::{Access, Principal, Role};
use crate::error::render_error_page;
use crate::startup::AppState;

/// Largest request body accepted (forms and JSON) on every route but the upload; larger ones get 413.
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

/// One route as listed in the route table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RouteEntry {
    /// HTTP method.
    pub method: Method,
    /// Path pattern as given to the router, e.g. "/galaxies/{slug}".
    pub path: &'static str,
    /// What it asks of the principal.
    pub access: Access,
}

/// A router being built, with the list of what was added.
struct Routes {
    router: Router<AppState>,
    table: Vec<RouteEntry>,
}

impl Routes {
    fn new() -> Self {
        Self {
            router: Router::new(),
            table: Vec::new(),
        }
    }

    /// Add one method of one path, guarded by `access` and (for unsafe methods) the form token,
    /// with the ordinary body limit.
    fn add(
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
    fn add_limited(
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
    fn add_json(
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
        use std::convert::Infallible;
        let form_token = axum::middleware::from_fn(move |req, next| async move {
            if json {
                crate::api::require_json_form_token(req, next, limit_bytes).await
            } else {
                require_form_token_limited(req, next, limit_bytes).await
            }
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
        let guarded: MethodRouter<AppState> = handler
            .layer::<_, Infallible>(RequestBodyLimitLayer::new(limit_bytes))
            .layer::<_, Infallible>(axum::extract::DefaultBodyLimit::max(limit_bytes));
        self.router = self.router.route(path, guarded);
        self.table.push(RouteEntry {
            method,
            path,
            access,
        });
        self
    }
}

fn routes() -> Routes {
    use Access::{Admin, Api, Public, Read, Review, Session};
    Routes::new()
        .add(Method::GET, "/", Read, get(overview::show_overview))
        .add(Method::GET, "/galaxies", Read, get(galaxies::list_galaxies))
        .add(
            Method::GET,
            "/galaxies/{slug}",
            Read,
            get(galaxies::show_galaxy),
        )
        .add(
            Method::GET,
            "/relations",
            Read,
            get(relations::list_relations),
        )
        .add(
            Method::GET,
            "/relations/{relation}",
            Read,
            get(relations::show_relation),
        )
        .add(
            Method::GET,
            "/relations/{relation}/chart.svg",
            Read,
            get(relations::download_chart),
        )
        .add(
            Method::GET,
            "/relations/{relation}/fit.json",
            Read,
            get(relations::download_fit),
        )
        .add(
            Method::GET,
            "/relations/{relation}/sample.csv",
            Read,
            get(relations::download_sample),
        )
        .add(
            Method::POST,
            "/relations/{relation}/runs",
            Session,
            post(relations::start_run),
        )
        .add(Method::GET, "/place", Read, get(place::show_place))
        .add(Method::GET, "/healthz", Public, get(healthz))
        .add(Method::GET, "/static/massline.css", Public, get(stylesheet))
        .add(Method::GET, "/login", Public, get(login::show_login))
        .add(Method::POST, "/login", Public, post(login::log_in))
        .add(Method::POST, "/logout", Session, post(login::log_out))
        .add(Method::GET, "/account", Session, get(account::show_account))
        .add(
            Method::POST,
            "/account/tokens",
            Session,
            post(account::create_token),
        )
        .add(
            Method::POST,
            "/account/tokens/{id}/revoke",
            Session,
            post(account::revoke_token),
        )
        .add(
            Method::GET,
            "/admin/accounts",
            Admin,
            get(admin::list_accounts),
        )
        .add(
            Method::POST,
            "/admin/accounts",
            Admin,
            post(admin::create_account),
        )
        .add(
            Method::POST,
            "/admin/accounts/{id}/role",
            Admin,
            post(admin::change_role),
        )
        .add(
            Method::POST,
            "/admin/accounts/{id}/disable",
            Admin,
            post(admin::disable_account),
        )
        .add(Method::GET, "/admin/audit", Admin, get(admin::show_audit))
        .add(
            Method::GET,
            "/submissions",
            Session,
            get(submissions::list_submissions),
        )
        .add(
            Method::GET,
            "/submissions/new",
            Session,
            get(submissions::new_submission),
        )
        .add(
            Method::POST,
            "/submissions/new",
            Session,
            post(submissions::create_submission),
        )
        .add(
            Method::GET,
            "/submissions/upload",
            Session,
            get(submissions::show_upload),
        )
        .add_limited(
            Method::POST,
            "/submissions/upload",
            Session,
            post(submissions::upload),
            UPLOAD_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/catalog.csv",
            Read,
            get(submissions::download_catalog),
        )
        .add(
            Method::GET,
            "/catalog.json",
            Read,
            get(submissions::download_catalog_json),
        )
        .add(
            Method::GET,
            "/submissions/{id}",
            Session,
            get(submissions::show_submission),
        )
        .add(
            Method::POST,
            "/submissions/{id}/withdraw",
            Session,
            post(submissions::withdraw_submission),
        )
        .add(Method::GET, "/review", Review, get(review::show_queue))
        .add(
            Method::POST,
            "/review/{id}/accept",
            Review,
            post(review::accept),
        )
        .add(
            Method::POST,
            "/review/{id}/reject",
            Review,
            post(review::reject),
        )
        // The JSON API (server/api/); reads need the read scope, like the pages.
        .add(
            Method::GET,
            "/api",
            Public,
            get(crate::api::page::show_api_page),
        )
        .add(Method::GET, "/api/v1/me", Api, get(crate::api::me::me))
        .add(
            Method::GET,
            "/api/v1/openapi.json",
            Public,
            get(crate::api::openapi::openapi_json),
        )
        .add(
            Method::GET,
            "/api/v1/relations",
            Read,
            get(crate::api::relations::list_relations),
        )
        .add(
            Method::GET,
            "/api/v1/relations/{relation}",
            Read,
            get(crate::api::relations::relation_fit),
        )
        .add(
            Method::GET,
            "/api/v1/place",
            Read,
            get(crate::api::place::place_one),
        )
        .add_json(
            Method::POST,
            "/api/v1/place",
            Read,
            post(crate::api::place::place_batch),
            crate::api::place::BATCH_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/api/v1/galaxies",
            Read,
            get(crate::api::galaxies::list_galaxies),
        )
        .add(
            Method::GET,
            "/api/v1/galaxies/{slug}",
            Read,
            get(crate::api::galaxies::show_galaxy),
        )
        .add_json(
            Method::POST,
            "/api/v1/fit",
            Read,
            post(crate::api::fit::fit_sample),
            crate::api::fit::FIT_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/api/v1/catalog.csv",
            Read,
            get(crate::api::catalog::catalog_csv),
        )
        .add(
            Method::GET,
            "/api/v1/catalog.json",
            Read,
            get(crate::api::catalog::catalog_json),
        )
        .add(
            Method::POST,
            "/api/v1/submissions",
            Api,
            post(crate::api::submissions::submit),
        )
        .add(
            Method::GET,
            "/api/v1/submissions/{id}",
            Api,
            get(crate::api::submissions::status),
        )
}

/// Every route of the server with the access it asks for, in the order they were added.
pub fn route_table() -> Vec<RouteEntry> {
    routes().table
}

/// Build the router with all pages and layers.
pub fn router(state: AppState) -> Router {
    let secure = state.settings.secure_cookies;
    let app = routes()
        .router
        .fallback(not_found)
        // What the API keeps per catalog version (fits' answers, the relations).
        .layer(axum::Extension(crate::api::cache::ApiCache::default()))
        // Inside authentication: the API's per-token rate needs the principal.
        .layer(axum::middleware::from_fn_with_state(
            crate::api::rate::RateLimiter::new(
                state.settings.api_rate_per_minute,
                state.clock.clone(),
            ),
            crate::api::rate::limit_rate,
        ))
        // Inside authentication: error pages get the visitor's session links.
        .layer(axum::middleware::from_fn(error_pages_with_session_links))
        .layer(axum::middleware::from_fn_with_state(
            state.clone(),
            authenticate,
        ))
        .layer(axum::middleware::from_fn(refuse_cross_site))
        .with_state(state);
    with_baseline(app, REQUEST_TIMEOUT, secure)
}

/// An error page with the visitor's session links (templates/errors/error_session.html).
#[derive(askama::Template)]
#[template(path = "errors/error_session.html")]
struct SessionErrorPage {
    status_code: u16,
    title: &'static str,
    message: String,
    nav: Nav,
}

/// Error pages are drawn below the web layer, which does not know who asks: draw them again
/// with the visitor's session links (account, submissions, log out; or "Log in"), keeping the
/// status and headers.
async fn error_pages_with_session_links(
    request: Request,
    next: axum::middleware::Next,
) -> Response {
    use askama::Template as _;
    let nav = request
        .extensions()
        .get::<Principal>()
        .map(Nav::from_principal);
    let mut response = next.run(request).await;
    let Some(parts) = response
        .extensions_mut()
        .remove::<crate::error::ErrorPageParts>()
    else {
        return response;
    };
    let Some(nav) = nav else {
        return response;
    };
    let page = SessionErrorPage {
        status_code: parts.status_code,
        title: parts.title,
        message: parts.message,
        nav,
    };
    let Ok(body) = page.render() else {
        return response;
    };
    let (mut head, _) = response.into_parts();
    head.headers.remove(header::CONTENT_LENGTH);
    Response::from_parts(head, axum::body::Body::from(body))
}

/// The layers every response passes, whatever route answered (or none): body limit, timeout
/// (503), and the security headers. `Cache-Control: no-store` is added unless the handler set
/// its own, so pages of a logged-in person are never stored (ASVS 14.3.2).
fn with_baseline(app: Router, timeout: Duration, secure: bool) -> Router {
    let mut app = app
        // The largest limit any route has; each route narrows it to its own (`Routes::add`).
        .layer(RequestBodyLimitLayer::new(
            UPLOAD_LIMIT_BYTES.max(crate::api::fit::FIT_LIMIT_BYTES),
        ))
        .layer(TimeoutLayer::with_status_code(
            StatusCode::SERVICE_UNAVAILABLE,
            timeout,
        ))
        // Every error under /api/ as problem+json (404, 405, 413, the timeout's 503 …).
        .layer(axum::middleware::from_fn(crate::api::problem_errors))
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

/// What the page header needs to know about the visitor: who is logged in, whether they may
/// see the admin pages, and the anti-forgery token for the logout form.
#[derive(Debug, Clone, Default)]
pub(crate) struct Nav {
    /// Login name of the session, if any.
    pub(crate) username: Option<String>,
    /// Whether to link the admin pages.
    pub(crate) is_admin: bool,
    /// Whether to link the review queue.
    pub(crate) is_reviewer: bool,
    /// The session's anti-forgery token ("" without a session).
    pub(crate) csrf: String,
}

impl Nav {
    pub(crate) fn from_principal(principal: &Principal) -> Self {
        match principal {
            Principal::Session(s) => Self {
                username: Some(s.username.clone()),
                is_admin: s.role.includes(Role::Admin),
                is_reviewer: s.role.includes(Role::Reviewer),
                csrf: s.csrf_token.clone(),
            },
            _ => Self::default(),
        }
    }
}

impl<S: Send + Sync> FromRequestParts<S> for Nav {
    type Rejection = std::convert::Infallible;

    async fn from_request_parts(parts: &mut Parts, _state: &S) -> Result<Self, Self::Rejection> {
        Ok(parts
            .extensions
            .get::<Principal>()
            .map(Self::from_principal)
            .unwrap_or_default())
    }
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

#[cfg(test)]
mod tests {
    use super::*;
    use axum::body::Body;
    use tower::ServiceExt;

    #[tokio::test]
    async fn a_slow_request_answers_503_with_the_security_headers() {
        let slow = Router::new().route(
            "/slow",
            get(|| async {
                tokio::time::sleep(Duration::from_secs(5)).await;
                "late"
            }),
        );
        let app = with_baseline(slow, Duration::from_millis(50), false);
        let response = app
            .oneshot(Request::builder().uri("/slow").body(Body::empty()).unwrap())
            .await
            .unwrap();
        assert_eq!(response.status(), StatusCode::SERVICE_UNAVAILABLE);
        let h = response.headers();
        assert!(h.contains_key(header::CONTENT_SECURITY_POLICY));
        assert_eq!(h[header::X_CONTENT_TYPE_OPTIONS], "nosniff");
        assert_eq!(h[header::CACHE_CONTROL], "no-store");
        assert!(!h.contains_key(header::STRICT_TRANSPORT_SECURITY));
    }

    #[tokio::test]
    async fn a_slow_api_request_answers_503_as_problem_json() {
        let slow = Router::new().route(
            "/api/v1/slow",
            get(|| async {
                tokio::time::sleep(Duration::from_secs(5)).await;
                "late"
            }),
        );
        let app = with_baseline(slow, Duration::from_millis(50), false);
        let response = app
            .oneshot(
                Request::builder()
                    .uri("/api/v1/slow")
                    .body(Body::empty())
                    .unwrap(),
            )
            .await
            .unwrap();
        assert_eq!(response.status(), StatusCode::SERVICE_UNAVAILABLE);
        assert_eq!(
            response.headers()[header::CONTENT_TYPE],
            "application/problem+json"
        );
        assert!(response.headers().contains_key(header::RETRY_AFTER));
        assert!(
            response
                .headers()
                .contains_key(header::CONTENT_SECURITY_POLICY)
        );
    }

    #[tokio::test]
    async fn hsts_is_sent_only_with_secure_cookies() {
        let app = || Router::new().route("/", get(|| async { "ok" }));
        let plain = with_baseline(app(), REQUEST_TIMEOUT, false)
            .oneshot(Request::builder().uri("/").body(Body::empty()).unwrap())
            .await
            .unwrap();
        assert!(
            !plain
                .headers()
                .contains_key(header::STRICT_TRANSPORT_SECURITY)
        );
        let secure = with_baseline(app(), REQUEST_TIMEOUT, true)
            .oneshot(Request::builder().uri("/").body(Body::empty()).unwrap())
            .await
            .unwrap();
        assert_eq!(
            secure.headers()[header::STRICT_TRANSPORT_SECURITY],
            "max-age=31536000"
        );
    }

    #[test]
    fn every_route_is_listed_once_with_its_access() {
        let table = route_table();
        let mut seen = std::collections::BTreeSet::new();
        for r in &table {
            assert!(seen.insert((r.method.to_string(), r.path)), "{r:?} twice");
        }
        let access = |m: Method, p: &str| {
            table
                .iter()
                .find(|r| r.method == m && r.path == p)
                .map(|r| r.access)
        };
        assert_eq!(access(Method::GET, "/login"), Some(Access::Public));
        assert_eq!(access(Method::GET, "/admin/audit"), Some(Access::Admin));
        assert_eq!(access(Method::GET, "/galaxies"), Some(Access::Read));
    }
}
