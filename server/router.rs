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
//! 2. [`render_errors`]: the request timeout (`--request-timeout-s`, 30 s by default) answering
//!    503 (not 408: a slow request is the server's problem, and the client did nothing
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
use tokio::io::{AsyncRead, AsyncWrite};
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
    let timeout = state.settings.request_timeout();
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
        .layer(axum::middleware::from_fn(immutable))
        .layer(axum::middleware::from_fn_with_state(limits, limit_rate))
        .layer(axum::middleware::from_fn_with_state(
            state.clone(),
            authenticate,
        ))
        .layer(axum::middleware::from_fn(refuse_cross_site))
        .with_state(state);
    with_baseline(app, timeout, secure, renderers.into())
}

/// Marks an answer that never changes (a past catalog version's page or file): [`immutable`]
/// gives it a strong `ETag` from its bytes and a year-long cache lifetime, and answers a
/// matching `If-None-Match` with 304. A handler inserts it into the response's extensions.
#[derive(Debug, Clone, Copy)]
pub struct Immutable;

/// The `Cache-Control` of an [`Immutable`] answer: private, because what a principal may read
/// depends on who asks; a year, because the answer cannot change.
pub const IMMUTABLE_CACHE_CONTROL: &str = "private, max-age=31536000, immutable";

/// Largest answer [`immutable`] reads into memory to digest; a larger one keeps its body and
/// goes without an `ETag` (no catalog answer comes near it).
const IMMUTABLE_MAX_BYTES: usize = 256 * 1024 * 1024;

/// The layer of [`Immutable`] answers (see there).
pub async fn immutable(request: Request, next: Next) -> Response {
    let if_none_match = request.headers().get(header::IF_NONE_MATCH).cloned();
    let response = next.run(request).await;
    if response.extensions().get::<Immutable>().is_none()
        || response.status() != axum::http::StatusCode::OK
    {
        return response;
    }
    let (mut parts, body) = response.into_parts();
    let Ok(bytes) = axum::body::to_bytes(body, IMMUTABLE_MAX_BYTES).await else {
        return (
            axum::http::StatusCode::INTERNAL_SERVER_ERROR,
            "the answer could not be read",
        )
            .into_response();
    };
    use sha2::Digest as _;
    let digest = hex::encode(sha2::Sha256::digest(&bytes));
    let etag = format!("\"sha256-{digest}\"");
    let matches = if_none_match.is_some_and(|v| {
        v.to_str()
            .is_ok_and(|v| v.split(',').any(|t| t.trim() == etag || t.trim() == "*"))
    });
    if let Ok(value) = HeaderValue::from_str(&etag) {
        parts.headers.insert(header::ETAG, value);
    }
    parts.headers.insert(
        header::CACHE_CONTROL,
        HeaderValue::from_static(IMMUTABLE_CACHE_CONTROL),
    );
    if matches {
        parts.status = axum::http::StatusCode::NOT_MODIFIED;
        parts.headers.remove(header::CONTENT_LENGTH);
        return Response::from_parts(parts, axum::body::Body::empty());
    }
    Response::from_parts(parts, axum::body::Body::from(bytes))
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
/// Any 413 from inside (an extractor's own plain-text rejection, or an error that did not know
/// the limit) becomes [`AppError::BodyTooLarge`] with this route's limit, so its door draws it
/// with the limit and what to do.
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
    let response = next.run(request).await;
    // An extractor's own rejection carries no error; an error that did not know the limit
    // says so. Other 413s (a batch over its size) keep their own sentence.
    let without_limit = matches!(
        response.extensions().get::<ErrorResponse>().map(|e| &*e.0),
        None | Some(AppError::BodyTooLarge { limit_bytes: None })
    );
    if response.status() == axum::http::StatusCode::PAYLOAD_TOO_LARGE && without_limit {
        return AppError::BodyTooLarge {
            limit_bytes: Some(limit_bytes),
        }
        .into_response();
    }
    response
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
        ));
    for (name, value) in security_headers(secure) {
        app = app.layer(SetResponseHeaderLayer::overriding(
            HeaderName::from_static(name),
            HeaderValue::from_static(value),
        ));
    }
    app.layer(TraceLayer::new_for_http())
}

/// The security headers of every answer (names in lower case): a strict
/// Content-Security-Policy, nosniff, no referrer leaks, no framing, no opener, no powerful
/// features; with `secure` (HTTPS) also HSTS for a year (ASVS 3.4.1).
fn security_headers(secure: bool) -> Vec<(&'static str, &'static str)> {
    let mut headers = vec![
        ("content-security-policy", CONTENT_SECURITY_POLICY),
        ("x-content-type-options", "nosniff"),
        ("referrer-policy", "same-origin"),
        ("x-frame-options", "DENY"),
        ("cross-origin-opener-policy", "same-origin"),
        (
            "permissions-policy",
            "camera=(), microphone=(), geolocation=()",
        ),
    ];
    if secure {
        headers.push(("strict-transport-security", "max-age=31536000"));
    }
    headers
}

/// Serve `app` on `listener` until `shutdown`, with each request's peer address as
/// `ConnectInfo<SocketAddr>` (the login throttle counts by address).
///
/// Answers that the HTTP library writes itself, without calling the service (a request line
/// longer than 64 KiB: 414; headers too large: 431; an unreadable request: 400), would miss the
/// security headers of [`with_baseline`]; each connection's writes pass through
/// [`HeaderedIo`], which adds them to such an answer.
///
/// # Errors
/// When the server fails while running.
pub async fn serve(
    listener: tokio::net::TcpListener,
    app: Router,
    secure: bool,
    shutdown: impl std::future::Future<Output = ()> + Send + 'static,
) -> std::io::Result<()> {
    axum::serve(
        HeaderedListener {
            inner: listener,
            secure,
        },
        WithPeer::make(app),
    )
    .with_graceful_shutdown(shutdown)
    .await
}

/// A TCP listener whose connections are [`HeaderedIo`]s.
struct HeaderedListener {
    inner: tokio::net::TcpListener,
    secure: bool,
}

impl axum::serve::Listener for HeaderedListener {
    type Io = HeaderedIo<tokio::net::TcpStream>;
    type Addr = std::net::SocketAddr;

    async fn accept(&mut self) -> (Self::Io, Self::Addr) {
        let (io, addr) = axum::serve::Listener::accept(&mut self.inner).await;
        (HeaderedIo::new(io, self.secure), addr)
    }

    fn local_addr(&self) -> std::io::Result<Self::Addr> {
        self.inner.local_addr()
    }
}

/// The router for one connection, putting the peer's address into each request.
#[derive(Clone)]
struct WithPeer {
    app: Router,
    peer: std::net::SocketAddr,
}

impl WithPeer {
    /// The make-service: one [`WithPeer`] per accepted connection.
    fn make(
        app: Router,
    ) -> impl for<'a> tower::Service<
        axum::serve::IncomingStream<'a, HeaderedListener>,
        Response = Self,
        Error = Infallible,
        Future = std::future::Ready<Result<Self, Infallible>>,
    > + Clone {
        tower::service_fn(
            move |incoming: axum::serve::IncomingStream<'_, HeaderedListener>| {
                std::future::ready(Ok(Self {
                    app: app.clone(),
                    peer: *incoming.remote_addr(),
                }))
            },
        )
    }
}

impl tower::Service<Request> for WithPeer {
    type Response = Response;
    type Error = Infallible;
    type Future = <Router as tower::Service<Request>>::Future;

    fn poll_ready(
        &mut self,
        cx: &mut std::task::Context<'_>,
    ) -> std::task::Poll<Result<(), Self::Error>> {
        tower::Service::<Request>::poll_ready(&mut self.app, cx)
    }

    fn call(&mut self, mut request: Request) -> Self::Future {
        request
            .extensions_mut()
            .insert(axum::extract::ConnectInfo(self.peer));
        tower::Service::<Request>::call(&mut self.app, request)
    }
}

/// A connection whose writes are passed on unchanged, except an answer the HTTP library made
/// by itself: a status line of 400, 414 or 431 with no body, written whole in one write, and
/// without a Content-Security-Policy (every answer of the service has one) gets the security
/// headers after its status line.
pub struct HeaderedIo<T> {
    inner: T,
    secure: bool,
    /// Bytes accepted from the caller but not yet written (the answer with its headers).
    pending: Vec<u8>,
    /// How much of `pending` is written.
    written: usize,
}

impl<T> HeaderedIo<T> {
    /// Wrap a connection; `secure` adds HSTS as on every other answer.
    pub fn new(inner: T, secure: bool) -> Self {
        Self {
            inner,
            secure,
            pending: Vec::new(),
            written: 0,
        }
    }
}

/// `head` with the security headers after its status line, when it is an answer the HTTP
/// library made by itself (see [`HeaderedIo`]); `None` for anything else.
fn with_security_headers(head: &[u8], secure: bool) -> Option<Vec<u8>> {
    // Cheap tests first: every write of every answer passes here. An answer the library
    // makes is a few hundred bytes.
    let made_by_library = head.len() <= 1024
        && head.starts_with(b"HTTP/1.")
        && [b"400", b"414", b"431"].contains(&head.get(9..12)?.try_into().ok()?);
    if !made_by_library {
        return None;
    }
    let status_line_end = head.windows(2).position(|w| w == b"\r\n")?;
    let end_of_head = head.windows(4).position(|w| w == b"\r\n\r\n")?;
    let whole_head_alone = end_of_head + 4 == head.len();
    let has_policy = head
        .to_ascii_lowercase()
        .windows(24)
        .any(|w| w == b"content-security-policy:");
    if !whole_head_alone || has_policy {
        return None;
    }
    let mut out = Vec::with_capacity(head.len() + 600);
    out.extend_from_slice(&head[..status_line_end + 2]);
    for (name, value) in security_headers(secure) {
        out.extend_from_slice(format!("{name}: {value}\r\n").as_bytes());
    }
    out.extend_from_slice(b"cache-control: no-store\r\n");
    out.extend_from_slice(&head[status_line_end + 2..]);
    Some(out)
}

impl<T: AsyncWrite + Unpin> HeaderedIo<T> {
    /// Write what is pending; ready when nothing is.
    fn poll_drain(
        &mut self,
        cx: &mut std::task::Context<'_>,
    ) -> std::task::Poll<std::io::Result<()>> {
        while self.written < self.pending.len() {
            let n = std::task::ready!(
                std::pin::Pin::new(&mut self.inner).poll_write(cx, &self.pending[self.written..])
            )?;
            if n == 0 {
                return std::task::Poll::Ready(Err(std::io::ErrorKind::WriteZero.into()));
            }
            self.written += n;
        }
        self.pending.clear();
        self.written = 0;
        std::task::Poll::Ready(Ok(()))
    }
}

impl<T: AsyncRead + Unpin> AsyncRead for HeaderedIo<T> {
    fn poll_read(
        self: std::pin::Pin<&mut Self>,
        cx: &mut std::task::Context<'_>,
        buf: &mut tokio::io::ReadBuf<'_>,
    ) -> std::task::Poll<std::io::Result<()>> {
        std::pin::Pin::new(&mut self.get_mut().inner).poll_read(cx, buf)
    }
}

impl<T: AsyncWrite + Unpin> AsyncWrite for HeaderedIo<T> {
    fn poll_write(
        self: std::pin::Pin<&mut Self>,
        cx: &mut std::task::Context<'_>,
        buf: &[u8],
    ) -> std::task::Poll<std::io::Result<usize>> {
        let this = self.get_mut();
        std::task::ready!(this.poll_drain(cx))?;
        if let Some(answer) = with_security_headers(buf, this.secure) {
            this.pending = answer;
            // The whole answer is taken; what the connection does not take now is written
            // by the next write, flush or shutdown.
            if let std::task::Poll::Ready(Err(e)) = this.poll_drain(cx) {
                return std::task::Poll::Ready(Err(e));
            }
            return std::task::Poll::Ready(Ok(buf.len()));
        }
        std::pin::Pin::new(&mut this.inner).poll_write(cx, buf)
    }

    fn poll_flush(
        self: std::pin::Pin<&mut Self>,
        cx: &mut std::task::Context<'_>,
    ) -> std::task::Poll<std::io::Result<()>> {
        let this = self.get_mut();
        std::task::ready!(this.poll_drain(cx))?;
        std::pin::Pin::new(&mut this.inner).poll_flush(cx)
    }

    fn poll_shutdown(
        self: std::pin::Pin<&mut Self>,
        cx: &mut std::task::Context<'_>,
    ) -> std::task::Poll<std::io::Result<()>> {
        let this = self.get_mut();
        std::task::ready!(this.poll_drain(cx))?;
        std::pin::Pin::new(&mut this.inner).poll_shutdown(cx)
    }
}

#[cfg(test)]
mod tests {
    const TEST_TIMEOUT: Duration = Duration::from_secs(30);
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
        let app = with_baseline(echo, TEST_TIMEOUT, false, test_renderers());
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
            "POST /t/echo: The request is larger than the 10 bytes this address accepts; send less at a time, for instance a catalog file split into files of at most 10 bytes each."
        );
    }

    #[tokio::test]
    async fn an_extractor_refusing_an_undeclared_body_over_the_limit_is_drawn_with_the_limit() {
        // No Content-Length header: the extractor's own 413 ("length limit exceeded",
        // plain text) goes through the door with the route's limit in MB.
        let limit = 2 * 1024 * 1024;
        let echo = Router::new().route(
            "/t/echo",
            axum::routing::post(|body: axum::body::Bytes| async move { body.len().to_string() })
                .layer(axum::extract::DefaultBodyLimit::max(limit))
                .layer(axum::middleware::from_fn(move |req, next| {
                    refuse_declared_body_over(limit, req, next)
                })),
        );
        let app = with_baseline(echo, TEST_TIMEOUT, false, test_renderers());
        let response = app
            .oneshot(
                Request::builder()
                    .method(Method::POST)
                    .uri("/t/echo")
                    .body(Body::from(vec![b'x'; 3 * 1024 * 1024]))
                    .unwrap(),
            )
            .await
            .unwrap();
        assert_eq!(response.status(), StatusCode::PAYLOAD_TOO_LARGE);
        assert!(
            response
                .headers()
                .contains_key(header::CONTENT_SECURITY_POLICY)
        );
        let text = body_text(response).await;
        assert!(text.contains("the 2 MB this address accepts"), "{text}");
        assert!(!text.contains("length limit exceeded"), "{text}");
    }

    #[test]
    fn an_answer_the_http_library_made_gets_the_security_headers_and_others_are_untouched() {
        let bare = b"HTTP/1.1 414 URI Too Long\r\ncontent-length: 0\r\ndate: x\r\n\r\n";
        let out = String::from_utf8(with_security_headers(bare, false).unwrap()).unwrap();
        assert!(out.starts_with("HTTP/1.1 414 URI Too Long\r\ncontent-security-policy: "));
        assert!(
            out.contains("\r\nx-content-type-options: nosniff\r\n"),
            "{out}"
        );
        assert!(
            out.ends_with("content-length: 0\r\ndate: x\r\n\r\n"),
            "{out}"
        );
        assert!(!out.contains("strict-transport-security"));
        let secure = String::from_utf8(with_security_headers(bare, true).unwrap()).unwrap();
        assert!(secure.contains("strict-transport-security: max-age=31536000"));
        // The service's own answers (they carry the policy), answers with a body, other
        // statuses and body bytes pass unchanged.
        let own = b"HTTP/1.1 414 URI Too Long\r\nContent-Security-Policy: x\r\n\r\n";
        assert!(with_security_headers(own, false).is_none());
        let with_body = b"HTTP/1.1 400 Bad Request\r\ncontent-length: 2\r\n\r\nno";
        assert!(with_security_headers(with_body, false).is_none());
        let ok = b"HTTP/1.1 200 OK\r\ncontent-length: 0\r\n\r\n";
        assert!(with_security_headers(ok, false).is_none());
        assert!(with_security_headers(b"galaxy,morphology\r\n", false).is_none());
    }

    #[tokio::test]
    async fn hsts_is_sent_only_with_secure_cookies() {
        let app = |secure| {
            with_baseline(
                Router::new().route("/", get(|| async { "ok" })),
                TEST_TIMEOUT,
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
