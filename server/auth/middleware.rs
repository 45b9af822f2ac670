//! The layers every request passes.
//!
//! 1. [`refuse_cross_site`] (all routes): an unsafe method (anything but GET, HEAD, OPTIONS) is
//!    refused with 403 when `Sec-Fetch-Site` says the request came from another site, or when an
//!    `Origin` header names a different host than the request's own `Host`.
//! 2. [`authenticate`] (all routes): turns the session cookie or the `Authorization: Bearer`
//!    header into a [`Principal`] stored in the request's extensions. Expired sessions are
//!    deleted here, with their idle and absolute limits measured on the app's clock.
//! 3. [`limit_rate`] (all routes but the stylesheet and the health check): counts the request
//!    against the page or API budget of its account (any session or token of it) or, without
//!    one, of its client address; beyond it 429 with Retry-After.
//! 4. [`guard`] (per route, with the route's [`Access`]): refuses principals the route does not
//!    admit (401 or 403; the door draws it: pages redirect to the login page, `/api/` answers
//!    problem+json).
//! 5. [`require_form_token`] (per route, unsafe methods only): a browser's form must carry the
//!    session's anti-forgery token in the field `csrf` (compared in constant time). The login
//!    form, sent before any session exists, carries instead the HMAC-SHA256 under the server's
//!    key of the random nonce in a separate login cookie and of the client's network.
//!    Requests authenticated by an API token need no form token: browsers never add that header
//!    by themselves. A JSON endpoint also takes the session's token in the `X-CSRF-Token`
//!    header (a JSON body has no form field).
//!
//! Refusals are [`AppError`]s; the door that owns the path draws them (`router`).

use std::net::{IpAddr, SocketAddr};

use axum::body::{Body, Bytes};
use axum::extract::{ConnectInfo, Request, State};
use axum::http::{HeaderMap, HeaderName, HeaderValue, Method, header};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};

use super::rate::{Budget, RateKey, RateLimits, client_network};
use super::secret::{FormKey, is_hex_256, looks_like_api_token, same_secret, sha256_hex};
use super::{Access, Denied, Principal, Role, Scope, SessionUser, TokenUser, check_access};
use crate::catalog::accounts;
use crate::error::AppError;
use crate::state::AppState;

/// Name of the form field that carries the anti-forgery token.
pub const CSRF_FIELD: &str = "csrf";

/// The header a browser session sends its anti-forgery token in with a JSON request.
pub const CSRF_HEADER: &str = "x-csrf-token";

/// Why a form was refused (no token, a wrong one, or one from another session).
const FORM_REFUSED: &str = "This form has expired or did not come from this site, so nothing was changed. Reload the page and try again.";

/// Facts about the server the per-route layers need, stored in each request's extensions.
#[derive(Debug, Clone, Copy)]
pub struct AuthContext {
    /// Whether anonymous visitors may read.
    pub public_read: bool,
    /// Whether cookies are marked Secure and `__Host-` prefixed.
    pub secure_cookies: bool,
    /// The key the login form's token is made with.
    pub form_key: FormKey,
}

/// The session cookie's name: `__Host-` prefixed when served over HTTPS (the browser then
/// refuses it from any other host and without Secure and Path=/).
pub fn session_cookie_name(secure: bool) -> &'static str {
    if secure {
        "__Host-ml_session"
    } else {
        "ml_session"
    }
}

/// The login form's anti-forgery cookie's name.
pub fn login_cookie_name(secure: bool) -> &'static str {
    if secure {
        "__Host-ml_login"
    } else {
        "ml_login"
    }
}

/// A `Set-Cookie` value: HttpOnly, SameSite=Lax, Path=/, Secure when asked; `max_age_s` of
/// `Some(0)` deletes the cookie, `None` makes it last until the browser closes (the server
/// enforces the real limits).
pub fn set_cookie(name: &str, value: &str, secure: bool, max_age_s: Option<i64>) -> HeaderValue {
    let mut text = format!("{name}={value}; Path=/; HttpOnly; SameSite=Lax");
    if secure {
        text.push_str("; Secure");
    }
    if let Some(age) = max_age_s {
        text.push_str(&format!("; Max-Age={age}"));
    }
    HeaderValue::from_str(&text).unwrap_or_else(|_| HeaderValue::from_static(""))
}

/// The value of a cookie in the request, if present.
pub fn read_cookie(headers: &HeaderMap, name: &str) -> Option<String> {
    headers
        .get_all(header::COOKIE)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(';'))
        .filter_map(|pair| pair.trim().split_once('='))
        .find(|(k, _)| *k == name)
        .map(|(_, v)| v.trim().to_string())
}

/// The nonce of the login cookie, when it has the shape the server gives it (64 lowercase hex).
/// The login form carries not this value but its MAC under the server's key
/// ([`FormKey::login_token`]), so a cookie planted by someone else matches no form they can
/// make.
pub fn login_nonce(headers: &HeaderMap, secure: bool) -> Option<String> {
    read_cookie(headers, login_cookie_name(secure)).filter(|v| is_hex_256(v))
}

/// The login form's token for a login cookie's nonce, bound to the server's key and to the
/// client's network ([`FormKey::login_token`]).
pub fn login_token(ctx: &AuthContext, nonce: &str, extensions: &axum::http::Extensions) -> String {
    ctx.form_key
        .login_token(nonce, peer_ip(extensions).map(client_network))
}

/// The connection's peer address (`None` when not served with connect info).
pub fn peer_ip(extensions: &axum::http::Extensions) -> Option<IpAddr> {
    extensions
        .get::<ConnectInfo<SocketAddr>>()
        .map(|c| c.0.ip())
}

/// The connection's peer address as text ("unknown" when not served with connect info).
/// Forwarded headers are not trusted: any client can write them.
pub fn client_ip(request_extensions: &axum::http::Extensions) -> String {
    peer_ip(request_extensions).map_or_else(|| "unknown".to_string(), |ip| ip.to_string())
}

fn is_unsafe(method: &Method) -> bool {
    !matches!(*method, Method::GET | Method::HEAD | Method::OPTIONS)
}

/// Layer 1: refuse unsafe requests that another site made the browser send.
pub async fn refuse_cross_site(request: Request, next: Next) -> Response {
    if is_unsafe(request.method()) {
        let headers = request.headers();
        let fetch_site = headers
            .get("sec-fetch-site")
            .and_then(|v| v.to_str().ok())
            .map(str::to_ascii_lowercase);
        let cross_site =
            matches!(fetch_site.as_deref(), Some(site) if site != "same-origin" && site != "none");
        let origin_mismatch = headers.get(header::ORIGIN).is_some_and(|origin| {
            let host = headers.get(header::HOST).and_then(|h| h.to_str().ok());
            !origin_matches_host(origin.to_str().unwrap_or("null"), host)
        });
        if cross_site || origin_mismatch {
            return AppError::forbidden(
                "This request came from another site, so it was refused and nothing was changed.",
            )
            .into_response();
        }
    }
    next.run(request).await
}

/// Whether an `Origin` header ("scheme://host[:port]") names the request's own host.
pub fn origin_matches_host(origin: &str, host: Option<&str>) -> bool {
    let Some(host) = host else {
        return false;
    };
    let Some(rest) = origin
        .strip_prefix("http://")
        .or_else(|| origin.strip_prefix("https://"))
    else {
        return false;
    };
    rest.eq_ignore_ascii_case(host)
}

/// Layer 2: find out who is asking.
pub async fn authenticate(
    State(state): State<AppState>,
    mut request: Request,
    next: Next,
) -> Response {
    let secure = state.settings.secure_cookies;
    let context = AuthContext {
        public_read: state.settings.public_read,
        secure_cookies: secure,
        form_key: state.form_key,
    };
    let mut clear_cookie = false;
    let principal = if let Some(auth) = request.headers().get(header::AUTHORIZATION) {
        match token_principal(&state, auth).await {
            Ok(p) => p,
            Err(e) => return AppError::from(e).into_response(),
        }
    } else if let Some(id) = read_cookie(request.headers(), session_cookie_name(secure)) {
        match session_principal(&state, &id).await {
            Ok(Some(user)) => Principal::Session(user),
            Ok(None) => {
                clear_cookie = true;
                Principal::Anonymous
            }
            Err(e) => return AppError::from(e).into_response(),
        }
    } else {
        Principal::Anonymous
    };
    request.extensions_mut().insert(principal.clone());
    request.extensions_mut().insert(context);
    let mut response = next.run(request).await;
    // Error answers are drawn outside this layer; they show who asked (the page header's links).
    response.extensions_mut().insert(principal);
    let session_prefix = format!("{}=", session_cookie_name(secure));
    let sets_session = response
        .headers()
        .get_all(header::SET_COOKIE)
        .iter()
        .any(|v| v.as_bytes().starts_with(session_prefix.as_bytes()));
    if clear_cookie && !sets_session {
        response.headers_mut().append(
            header::SET_COOKIE,
            set_cookie(session_cookie_name(secure), "", secure, Some(0)),
        );
    }
    response
}

async fn token_principal(state: &AppState, auth: &HeaderValue) -> sqlx::Result<Principal> {
    let Some(token) = auth
        .to_str()
        .ok()
        .and_then(|v| v.strip_prefix("Bearer "))
        .map(str::trim)
    else {
        return Ok(Principal::BadToken);
    };
    if !looks_like_api_token(token) {
        return Ok(Principal::BadToken);
    }
    let Some(row) = accounts::find_token(&state.pool, &sha256_hex(token)).await? else {
        return Ok(Principal::BadToken);
    };
    let (Ok(role), Ok(scopes)) = (row.role.parse::<Role>(), Scope::parse_list(&row.scopes)) else {
        return Ok(Principal::BadToken);
    };
    if row.disabled || row.revoked_at.is_some() {
        return Ok(Principal::BadToken);
    }
    // Bookkeeping, not the request's purpose: written at most every 30 s, and a failure (the
    // catalog locked by a long write) is logged, never turned into a refusal of a read.
    if !row.used_recently
        && let Err(e) = accounts::touch_token(&state.pool, row.api_token_id).await
    {
        tracing::warn!(error = %e, "could not record a token's last use");
    }
    Ok(Principal::Token(TokenUser {
        account_id: row.account_id,
        username: row.username,
        role,
        api_token_id: row.api_token_id,
        scopes,
    }))
}

/// Look up a session cookie; None when unknown, expired (then deleted) or the account is
/// disabled.
async fn session_principal(state: &AppState, id: &str) -> sqlx::Result<Option<SessionUser>> {
    if id.len() != 64 || !id.bytes().all(|b| b.is_ascii_hexdigit()) {
        return Ok(None);
    }
    let Some(row) = accounts::find_session(&state.pool, &sha256_hex(id)).await? else {
        return Ok(None);
    };
    let Ok(role) = row.role.parse::<Role>() else {
        return Ok(None);
    };
    let now = state.clock.now_unix();
    let expired = row.disabled
        || now - row.created_unix >= super::ABSOLUTE_LIMIT_S
        || now - row.last_seen_unix >= role.idle_limit_s();
    if expired {
        accounts::delete_session(&state.pool, row.session_id).await?;
        return Ok(None);
    }
    if now - row.last_seen_unix >= super::TOUCH_EVERY_S
        && let Err(e) = accounts::touch_session(&state.pool, row.session_id, now).await
    {
        // The idle clock then runs from the previous touch: at worst a session ends 30 s early.
        tracing::warn!(error = %e, "could not record a session's last activity");
    }
    Ok(Some(SessionUser {
        account_id: row.account_id,
        username: row.username,
        role,
        session_id: row.session_id,
        csrf_token: row.csrf_token,
    }))
}

/// Paths no budget counts: the stylesheet every page loads and the health and liveness checks
/// monitors poll.
fn rate_exempt(path: &str) -> bool {
    matches!(path, "/healthz" | "/livez") || path.starts_with("/static/")
}

/// The budget a request draws on: an API token's requests and everything under `/api/` are API
/// calls (so a script at its limit cannot go on through the pages' downloads); the rest are
/// page views. `None` for the paths no budget counts.
pub fn budget_of(path: &str, principal: &Principal) -> Option<Budget> {
    if rate_exempt(path) {
        None
    } else if path.starts_with("/api/") || matches!(principal, Principal::Token(_)) {
        Some(Budget::Api)
    } else {
        Some(Budget::Pages)
    }
}

/// Layer 3: count the request against its principal's budget ([`crate::auth::rate`]): the
/// account behind a session or token, else the client address; beyond the budget 429 with
/// Retry-After, drawn by the door that owns the path.
pub async fn limit_rate(
    State(limits): State<RateLimits>,
    request: Request,
    next: Next,
) -> Response {
    let anonymous = Principal::Anonymous;
    let principal = request
        .extensions()
        .get::<Principal>()
        .unwrap_or(&anonymous);
    if let Some(budget) = budget_of(request.uri().path(), principal) {
        let key = RateKey::of(principal, peer_ip(request.extensions()));
        if let Err(refused) = limits.take(budget, key) {
            return refused.into_response();
        }
    }
    next.run(request).await
}

/// Layer 4: admit only the principals a route's [`Access`] allows.
pub async fn guard(access: Access, request: Request, next: Next) -> Response {
    let principal = request
        .extensions()
        .get::<Principal>()
        .cloned()
        .unwrap_or(Principal::Anonymous);
    let public_read = request
        .extensions()
        .get::<AuthContext>()
        .is_some_and(|c| c.public_read);
    match check_access(access, &principal, public_read) {
        Ok(()) => next.run(request).await,
        Err(denied) => deny(denied),
    }
}

fn deny(denied: Denied) -> Response {
    match denied {
        Denied::NotLoggedIn => AppError::not_logged_in(
            "This endpoint needs an API token (Authorization: Bearer ml_…).",
        ),
        Denied::BadToken => AppError::BadToken,
        Denied::Forbidden => AppError::forbidden(
            "Your account or token is not allowed to use this page or endpoint.",
        ),
    }
    .into_response()
}

/// Percent-encode a text for a query value (everything but unreserved characters).
pub fn encode_query_value(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for b in text.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.' | b'~' | b'/') {
            out.push(char::from(b));
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

/// Layer 5: forms of a browser must carry the anti-forgery token (the body is buffered up to
/// the route's `limit_bytes`). With `json_header` (a JSON endpoint), a session may send it in the
/// [`CSRF_HEADER`] header instead.
pub async fn require_form_token(
    request: Request,
    next: Next,
    limit_bytes: usize,
    json_header: bool,
) -> Response {
    if !is_unsafe(request.method()) {
        return next.run(request).await;
    }
    let principal = request
        .extensions()
        .get::<Principal>()
        .cloned()
        .unwrap_or(Principal::Anonymous);
    let context = request.extensions().get::<AuthContext>().copied();
    let expected = match (&principal, context) {
        (Principal::Token(_), _) => return next.run(request).await,
        (Principal::Session(s), _) => Some(s.csrf_token.clone()),
        (Principal::Anonymous | Principal::BadToken, Some(ctx)) => {
            login_nonce(request.headers(), ctx.secure_cookies)
                .map(|nonce| login_token(&ctx, &nonce, request.extensions()))
        }
        (Principal::Anonymous | Principal::BadToken, None) => None,
    };
    if json_header
        && let (Principal::Session(s), Some(sent)) = (
            &principal,
            request
                .headers()
                .get(HeaderName::from_static(CSRF_HEADER))
                .and_then(|v| v.to_str().ok()),
        )
        && same_secret(&s.csrf_token, sent)
    {
        return next.run(request).await;
    }
    let (parts, body) = request.into_parts();
    let bytes: Bytes = match axum::body::to_bytes(body, limit_bytes).await {
        Ok(b) => b,
        Err(_) => {
            return AppError::BodyTooLarge {
                limit_bytes: Some(limit_bytes),
            }
            .into_response();
        }
    };
    let content_type = parts
        .headers
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("");
    let sent = if content_type
        .trim_start()
        .to_ascii_lowercase()
        .starts_with("multipart/form-data")
    {
        multipart_field(&bytes, content_type, CSRF_FIELD)
    } else {
        form_field(&bytes, CSRF_FIELD)
    };
    let valid = match (expected, sent) {
        (Some(expected), Some(sent)) => same_secret(&expected, &sent),
        _ => false,
    };
    if !valid {
        return AppError::forbidden(FORM_REFUSED).into_response();
    }
    next.run(Request::from_parts(parts, Body::from(bytes)))
        .await
}

/// The first value of a field in an `application/x-www-form-urlencoded` body.
pub fn form_field(body: &[u8], name: &str) -> Option<String> {
    serde_urlencoded::from_bytes::<Vec<(String, String)>>(body)
        .ok()?
        .into_iter()
        .find(|(k, _)| k == name)
        .map(|(_, v)| v)
}

/// The value of a small text field in a `multipart/form-data` body (RFC 7578), e.g. the
/// anti-forgery token of a file upload. Only a part with exactly `name="<name>"` and no file
/// name counts; `None` when the body or the boundary cannot be read.
pub fn multipart_field(body: &[u8], content_type: &str, name: &str) -> Option<String> {
    let boundary = content_type.split(';').find_map(|p| {
        let (k, v) = p.split_once('=')?;
        k.trim()
            .eq_ignore_ascii_case("boundary")
            .then(|| v.trim().trim_matches('"').to_owned())
    })?;
    if boundary.is_empty() {
        return None;
    }
    let delimiter = format!("--{boundary}");
    let text = String::from_utf8_lossy(body);
    for part in text.split(delimiter.as_str()).skip(1) {
        let Some((head, value)) = part
            .strip_prefix("\r\n")
            .and_then(|p| p.split_once("\r\n\r\n"))
        else {
            continue;
        };
        let Some(disposition) = head.lines().find(|l| {
            l.to_ascii_lowercase()
                .starts_with("content-disposition: form-data")
        }) else {
            continue;
        };
        let named = disposition
            .split(';')
            .any(|p| p.trim() == format!("name=\"{name}\""));
        let file = disposition
            .split(';')
            .any(|p| p.trim().starts_with("filename"));
        if named && !file {
            return Some(value.strip_suffix("\r\n").unwrap_or(value).to_owned());
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_multipart_text_field_is_found_and_a_file_of_that_name_is_not() {
        let ct = "multipart/form-data; boundary=XyZ";
        let body = "--XyZ\r\nContent-Disposition: form-data; name=\"csrf\"\r\n\r\nabc123\r\n\
                    --XyZ\r\nContent-Disposition: form-data; name=\"file\"; filename=\"a.csv\"\r\n\
                    Content-Type: text/csv\r\n\r\ngalaxy\r\n--XyZ--\r\n";
        assert_eq!(
            multipart_field(body.as_bytes(), ct, "csrf").as_deref(),
            Some("abc123")
        );
        assert_eq!(multipart_field(body.as_bytes(), ct, "file"), None);
        assert_eq!(multipart_field(body.as_bytes(), ct, "csr"), None);
        assert_eq!(
            multipart_field(body.as_bytes(), "multipart/form-data", "csrf"),
            None
        );
        let forged = "--XyZ\r\nContent-Disposition: form-data; name=\"file\"; filename=\"csrf\"\r\n\r\nx\r\n--XyZ--";
        assert_eq!(multipart_field(forged.as_bytes(), ct, "csrf"), None);
    }

    #[test]
    fn origin_must_name_the_same_host_and_port() {
        assert!(origin_matches_host(
            "http://127.0.0.1:8080",
            Some("127.0.0.1:8080")
        ));
        assert!(origin_matches_host(
            "https://Catalog.example",
            Some("catalog.example")
        ));
        assert!(!origin_matches_host(
            "http://127.0.0.1:9090",
            Some("127.0.0.1:8080")
        ));
        assert!(!origin_matches_host(
            "http://evil.example",
            Some("catalog.example")
        ));
        assert!(!origin_matches_host("null", Some("catalog.example")));
        assert!(!origin_matches_host("http://catalog.example", None));
    }

    #[test]
    fn cookies_are_read_by_exact_name() {
        let mut h = HeaderMap::new();
        h.insert(
            header::COOKIE,
            HeaderValue::from_static("xml_session=a; ml_session=b ; other=c"),
        );
        assert_eq!(read_cookie(&h, "ml_session").as_deref(), Some("b"));
        assert_eq!(read_cookie(&h, "missing"), None);
    }

    #[test]
    fn session_cookies_carry_the_protective_attributes() {
        let plain = set_cookie("ml_session", "v", false, None);
        assert_eq!(plain, "ml_session=v; Path=/; HttpOnly; SameSite=Lax");
        let secure = set_cookie(session_cookie_name(true), "v", true, Some(0));
        assert_eq!(
            secure,
            "__Host-ml_session=v; Path=/; HttpOnly; SameSite=Lax; Secure; Max-Age=0"
        );
    }

    #[test]
    fn form_fields_are_decoded() {
        assert_eq!(
            form_field(b"a=1&csrf=ab%20c", "csrf").as_deref(),
            Some("ab c")
        );
        assert_eq!(form_field(b"a=1", "csrf"), None);
        assert_eq!(
            encode_query_value("/galaxies?x=1&y"),
            "/galaxies%3Fx%3D1%26y"
        );
    }
}
