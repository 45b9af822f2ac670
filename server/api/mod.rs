//! The JSON API under `/api/v1`, for scripts. Handlers are thin: they read JSON or query
//! parameters, call the same layers as the pages (`catalog`, `relations`, `fit`, and the place
//! page's computation in `web::place`) and answer JSON whose keys carry their units
//! (`log_mbh`, `sigma_km_s`, `scatter_dex`, `distance_mpc`). Every error is RFC 9457 problem
//! details ([`problem`]).
//!
//! One file per area: [`relations`] (the relations and their fits, with ETags), [`place`] (one
//! object or a batch), [`galaxies`], [`fit`] (a caller's own sample), [`catalog`] (the accepted
//! catalog as CSV), [`me`], [`openapi`] (the OpenAPI 3.1 document, generated from the
//! handlers' `#[utoipa::path]` attributes and the answers' `ToSchema` derives, so it cannot
//! drift from the code), and [`rate`] (the per-token request rate).
//!
//! Layers that concern only `/api/` paths live here too: [`problem_errors`] turns every error
//! answer that is not yet problem+json (404 fallback, 405, 413 from the body limit, 503) into
//! one, and [`require_json_form_token`] lets a browser session send its anti-forgery token in
//! the `X-CSRF-Token` header of a JSON request.

pub mod cache;
pub mod catalog;
pub mod fit;
pub mod galaxies;
pub mod me;
pub mod openapi;
pub(crate) mod page;
pub mod place;
pub mod problem;
pub mod rate;
pub mod relations;
pub mod submissions;

use axum::extract::rejection::{JsonRejection, QueryRejection};
use axum::extract::{FromRequest, Query, Request};
use axum::http::{HeaderMap, HeaderName, HeaderValue, StatusCode, header};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use serde::de::DeserializeOwned;

use crate::auth::Principal;
use crate::auth::secret::{same_secret, sha256_hex};
use problem::{FieldError, Problem};

/// Result of an API handler: the answer, or a problem.
pub type ApiResult<T> = Result<T, Problem>;

/// The message for a query parameter given with an empty value.
pub const EMPTY_VALUE: &str =
    "The value is empty; leave the parameter out to mean any (or the default).";

/// The header a browser session sends its anti-forgery token in with a JSON request.
pub const CSRF_HEADER: &str = "x-csrf-token";

/// A JSON body whose rejections are problems: 400 for JSON that cannot be read, 415 without
/// `Content-Type: application/json`, 413 beyond the body limit, and 422 (naming the field) for
/// JSON of the wrong shape.
#[derive(Debug, Clone)]
pub struct ApiJson<T>(pub T);

impl<S, T> FromRequest<S> for ApiJson<T>
where
    T: DeserializeOwned,
    S: Send + Sync,
{
    type Rejection = Problem;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        match axum::Json::<T>::from_request(req, state).await {
            Ok(axum::Json(value)) => Ok(Self(value)),
            Err(rejection) => Err(json_problem(&rejection)),
        }
    }
}

/// The problem for a rejected JSON body.
fn json_problem(rejection: &JsonRejection) -> Problem {
    let status = rejection.status();
    let text = rejection.body_text();
    match rejection {
        JsonRejection::JsonDataError(_) => {
            // "Failed to deserialize …: [0].sigma: invalid type: …": the path, then the reason.
            let inner = text
                .split_once("target type: ")
                .map_or(text.as_str(), |(_, rest)| rest);
            let (field, message) = match inner.split_once(": ") {
                Some((path, message)) if !path.contains(' ') => (path, message),
                _ => ("", inner),
            };
            Problem::invalid(vec![FieldError::new(field, sentence(message))])
        }
        JsonRejection::JsonSyntaxError(_) => {
            Problem::new(StatusCode::BAD_REQUEST, "Unreadable JSON", sentence(&text))
        }
        JsonRejection::MissingJsonContentType(_) => Problem::new(
            StatusCode::UNSUPPORTED_MEDIA_TYPE,
            "Unsupported media type",
            "The body must be JSON, sent with Content-Type: application/json.",
        ),
        _ if status == StatusCode::PAYLOAD_TOO_LARGE => too_large(),
        _ => Problem::new(StatusCode::BAD_REQUEST, "Unreadable body", sentence(&text)),
    }
}

/// The problem for a body beyond the endpoint's limit.
fn too_large() -> Problem {
    Problem::new(
        StatusCode::PAYLOAD_TOO_LARGE,
        "Too large",
        "The request body is larger than this endpoint accepts; see /api/v1/openapi.json for its limit.",
    )
}

/// A message as one sentence: capital first letter, full stop at the end.
fn sentence(text: &str) -> String {
    let text = text.trim();
    let mut chars = text.chars();
    let mut out: String = match chars.next() {
        Some(first) => first.to_uppercase().chain(chars).collect(),
        None => return "The request could not be read.".to_owned(),
    };
    if !out.ends_with('.') {
        out.push('.');
    }
    out
}

/// The query string as (key, value) pairs, or a 400 problem when it cannot be decoded.
///
/// # Errors
/// A 400 problem.
pub fn query_pairs(
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<Vec<(String, String)>> {
    query.map(|Query(pairs)| pairs).map_err(|e| {
        Problem::new(
            StatusCode::BAD_REQUEST,
            "Unreadable query",
            format!(
                "The address's parameters could not be read: {}.",
                e.body_text()
            ),
        )
    })
}

/// A strong entity tag from the catalog version and a canonical text of the settings:
/// `"v<version>-<16 hex digits of SHA-256(settings)>"`.
pub fn entity_tag(catalog_version: i64, canonical_settings: &str) -> String {
    let digest = sha256_hex(canonical_settings);
    format!("\"v{catalog_version}-{}\"", &digest[..16])
}

/// Whether an `If-None-Match` header names `etag` (or is `*`); weak tags compare by their
/// opaque part (RFC 9110 §13.1.2 uses the weak comparison for If-None-Match).
pub fn matches_if_none_match(headers: &HeaderMap, etag: &str) -> bool {
    headers
        .get_all(header::IF_NONE_MATCH)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(','))
        .map(str::trim)
        .any(|tag| tag == "*" || tag.trim_start_matches("W/") == etag)
}

/// A JSON body already serialized, with its entity tag, or 304 with no body when the caller
/// has it already.
pub fn tagged_bytes(headers: &HeaderMap, etag: &str, body: axum::body::Bytes) -> Response {
    let etag_value =
        HeaderValue::from_str(etag).unwrap_or_else(|_| HeaderValue::from_static("\"\""));
    let cache = HeaderValue::from_static("private, no-cache");
    if matches_if_none_match(headers, etag) {
        return (
            StatusCode::NOT_MODIFIED,
            [(header::ETAG, etag_value), (header::CACHE_CONTROL, cache)],
        )
            .into_response();
    }
    (
        [
            (header::ETAG, etag_value),
            (header::CACHE_CONTROL, cache),
            (
                header::CONTENT_TYPE,
                HeaderValue::from_static("application/json"),
            ),
        ],
        body,
    )
        .into_response()
}

/// Layer for `/api/` paths: every error answer becomes problem+json (the router's 404 and 405,
/// the body limit's 413, a timed-out 503), keeping Retry-After, Allow and WWW-Authenticate.
pub async fn problem_errors(request: Request, next: Next) -> Response {
    let path = request.uri().path().to_owned();
    if !path.starts_with("/api/") {
        return next.run(request).await;
    }
    let method = request.method().clone();
    let response = next.run(request).await;
    let status = response.status();
    let is_problem = response
        .headers()
        .get(header::CONTENT_TYPE)
        .is_some_and(|v| v.as_bytes().starts_with(b"application/problem+json"));
    if status.as_u16() < 400 || is_problem {
        return response;
    }
    let problem = match status {
        StatusCode::NOT_FOUND => Problem::new(
            status,
            "Not found",
            "There is no such endpoint; /api/v1/openapi.json lists them.",
        ),
        StatusCode::METHOD_NOT_ALLOWED => Problem::new(
            status,
            "Method not allowed",
            format!("This endpoint does not answer {method}; the Allow header lists what it does."),
        ),
        StatusCode::PAYLOAD_TOO_LARGE => too_large(),
        StatusCode::SERVICE_UNAVAILABLE => Problem::new(
            status,
            "Unavailable",
            "The server could not answer in time; nothing was changed, please try again.",
        ),
        _ => Problem::new(
            status,
            status.canonical_reason().unwrap_or("Error"),
            "The request could not be answered.",
        ),
    };
    let mut answer = problem.into_response();
    for name in [header::RETRY_AFTER, header::ALLOW, header::WWW_AUTHENTICATE] {
        if let Some(v) = response.headers().get(&name) {
            answer.headers_mut().insert(name, v.clone());
        }
    }
    answer
}

/// The anti-forgery check of JSON endpoints: a browser session may send its token in the
/// `X-CSRF-Token` header (a JSON body has no form field); everything else goes through the
/// form check as on every other route (tokens pass, a session needs its token).
pub async fn require_json_form_token(request: Request, next: Next, limit_bytes: usize) -> Response {
    let header_token_ok = match request.extensions().get::<Principal>() {
        Some(Principal::Session(s)) => request
            .headers()
            .get(HeaderName::from_static(CSRF_HEADER))
            .and_then(|v| v.to_str().ok())
            .is_some_and(|sent| same_secret(&s.csrf_token, sent)),
        _ => false,
    };
    if header_token_ok {
        return next.run(request).await;
    }
    crate::auth::middleware::require_form_token_limited(request, next, limit_bytes).await
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn if_none_match_compares_weakly_and_accepts_lists_and_star() {
        let etag = entity_tag(7, "relation=m_sigma");
        assert!(etag.starts_with("\"v7-") && etag.len() == 21, "{etag}");
        let mut h = HeaderMap::new();
        assert!(!matches_if_none_match(&h, &etag));
        h.insert(
            header::IF_NONE_MATCH,
            HeaderValue::from_str(&format!("\"other\", W/{etag}")).unwrap(),
        );
        assert!(matches_if_none_match(&h, &etag));
        h.insert(header::IF_NONE_MATCH, HeaderValue::from_static("*"));
        assert!(matches_if_none_match(&h, &etag));
        // Another version or other settings give another tag.
        assert_ne!(entity_tag(8, "relation=m_sigma"), etag);
        assert_ne!(entity_tag(7, "relation=m_mbulge"), etag);
    }

    #[test]
    fn messages_become_sentences() {
        assert_eq!(
            sentence("expected value at line 1"),
            "Expected value at line 1."
        );
        assert_eq!(sentence("Done."), "Done.");
        assert_eq!(sentence(""), "The request could not be read.");
    }
}
