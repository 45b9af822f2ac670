//! The JSON API under `/api/v1`, for scripts. Handlers are thin: they read JSON or query
//! parameters, call the domain (`relations`, `catalog`, `auth`) and answer JSON whose keys carry
//! their units (`log_mbh`, `sigma_km_s`, `scatter_dex`, `distance_mpc`). Every error on an
//! `/api/` path is drawn as RFC 9457 problem details ([`problem`]).
//!
//! One file per area: [`relations`] (the relations and their fits, with ETags), [`place`] (one
//! object or a batch), [`galaxies`], [`fit`] (a caller's own sample), [`kinematics`] (a black-hole mass from a disk's velocities), [`catalog`] (the accepted
//! catalog as CSV or JSON), [`changes`] (what changed between two versions), [`releases`],
//! [`virial`] (the virial factor's calibration and adoptions), [`planning`] (ranking
//! candidates for observing, the reliability check, the caller's saved resolutions),
//! [`submissions`], [`me`], [`openapi`] (the OpenAPI 3.1 document,
//! generated from the handlers' `#[utoipa::path]` attributes and the answers' `ToSchema`
//! derives, so it cannot drift from the code) and [`cache`] (what the API keeps per catalog
//! version). The request rate is counted for every door by the router (`auth::rate`).

pub mod cache;
pub mod catalog;
pub mod changes;
pub mod fit;
pub mod galaxies;
pub mod kinematics;
pub mod me;
pub mod openapi;
pub mod place;
pub mod planning;
pub mod problem;
pub mod relations;
pub mod releases;
pub mod runs;
pub mod submissions;
pub mod virial;

pub use crate::router::query_pairs;

use axum::Router;
use axum::extract::rejection::JsonRejection;
use axum::extract::{FromRequest, Request};
use axum::http::{HeaderMap, HeaderValue, Method, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use serde::de::DeserializeOwned;

use crate::auth::Access;
use crate::auth::secret::sha256_hex;
use crate::error::{AppError, FieldError, sentence};
use crate::router::{Door, Routes};
use crate::state::AppState;

/// Result of an API handler: the answer, or an error drawn as problem details.
pub type ApiResult<T> = Result<T, AppError>;

/// The message for a query parameter given with an empty value.
pub const EMPTY_VALUE: &str =
    "The value is empty; leave the parameter out to mean any (or the default).";

/// The query parameters that choose a catalog version, on every endpoint that reads the
/// catalog (`catalog::history::VersionAsk`).
#[derive(Debug, serde::Deserialize, utoipa::IntoParams)]
#[into_params(parameter_in = Query)]
pub struct VersionQuery {
    /// A past catalog version (any since the history began); the current one when left out.
    /// Answers for a past version never change: they carry a strong ETag and a year's cache
    /// lifetime.
    #[param(minimum = 0)]
    pub version: Option<i64>,
    /// A named release (see `/releases`), instead of `version`.
    #[param(pattern = "^[A-Za-z0-9._-]{1,40}$")]
    pub release: Option<String>,
}

/// The catalog version a request asks for and its other query pairs; `None` when it names
/// none (the current catalog).
///
/// # Errors
/// 422 for an unreadable version; 404 for a version not made yet or an unknown release; 410
/// for a version older than the history.
pub async fn asked_version(
    state: &AppState,
    pairs: Vec<(String, String)>,
) -> ApiResult<(
    Option<(crate::relations::Catalog, crate::catalog::history::Pinned)>,
    Vec<(String, String)>,
)> {
    // As everywhere in the API, an empty value is refused rather than read as "any".
    if let Some((key, _)) = pairs.iter().find(|(k, v)| {
        crate::catalog::history::VERSION_PARAMS.contains(&k.as_str()) && v.trim().is_empty()
    }) {
        return Err(AppError::invalid(vec![crate::error::FieldError::new(
            key.as_str(),
            EMPTY_VALUE,
        )]));
    }
    let (ask, rest) = crate::catalog::history::VersionAsk::split(pairs).map_err(|e| {
        let field = if e.contains("'release'") {
            "release"
        } else {
            "version"
        };
        AppError::invalid(vec![crate::error::FieldError::new(field, e)])
    })?;
    if ask == crate::catalog::history::VersionAsk::Current {
        return Ok((None, rest));
    }
    Ok((Some(state.catalog_at(&ask).await?), rest))
}

/// Marks an answer for a past version as never changing ([`crate::router::Immutable`]).
pub fn immutable_if_past(
    pinned: &crate::catalog::history::Pinned,
    mut response: Response,
) -> Response {
    if pinned.is_past() {
        response.extensions_mut().insert(crate::router::Immutable);
    }
    response
}

/// The JSON API's door: every path under `/api/`.
pub fn door() -> Door {
    Door {
        routes: routes(),
        owns: |path| path.starts_with("/api/"),
        render: problem::render,
        layers,
    }
}

/// The API's own layer: what it keeps per catalog version.
fn layers(router: Router<AppState>, _state: &AppState) -> Router<AppState> {
    router.layer(axum::Extension(cache::ApiCache::default()))
}

fn routes() -> Routes {
    use Access::{Api, Public, Read};
    Routes::new()
        .add(Method::GET, "/api/v1/me", Api, get(me::me))
        .add(
            Method::GET,
            "/api/v1/me/resolutions",
            Api,
            get(planning::my_resolutions),
        )
        .add_json(
            Method::POST,
            "/api/v1/me/resolutions",
            Api,
            post(planning::save_resolution),
            planning::RESOLUTION_LIMIT_BYTES,
        )
        .add_json(
            Method::DELETE,
            "/api/v1/me/resolutions/{id}",
            Api,
            axum::routing::delete(planning::delete_resolution),
            planning::RESOLUTION_LIMIT_BYTES,
        )
        .add_json(
            Method::POST,
            "/api/v1/planning",
            Read,
            post(planning::plan_candidates),
            planning::PLAN_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/api/v1/planning/reliability",
            Read,
            get(planning::planning_reliability),
        )
        .add(
            Method::GET,
            "/api/v1/openapi.json",
            Public,
            get(openapi::openapi_json),
        )
        .add(
            Method::GET,
            "/api/v1/relations",
            Read,
            get(relations::list_relations),
        )
        .add(
            Method::GET,
            "/api/v1/relations/{relation}",
            Read,
            get(relations::relation_fit),
        )
        .add_json(
            Method::POST,
            "/api/v1/relations/{relation}/runs",
            Read,
            post(runs::start_run),
            runs::RUN_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/api/v1/runs/{id}",
            Read,
            get(runs::run_status_by_id),
        )
        .add(Method::GET, "/api/v1/place", Read, get(place::place_one))
        .add_json(
            Method::POST,
            "/api/v1/place",
            Read,
            post(place::place_batch),
            place::BATCH_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/api/v1/galaxies",
            Read,
            get(galaxies::list_galaxies),
        )
        .add(
            Method::GET,
            "/api/v1/galaxies/{slug}",
            Read,
            get(galaxies::show_galaxy),
        )
        .add_json(
            Method::POST,
            "/api/v1/fit",
            Read,
            post(fit::fit_sample),
            fit::FIT_LIMIT_BYTES,
        )
        .add_json(
            Method::POST,
            "/api/v1/kinematics",
            Read,
            post(kinematics::fit_disk),
            kinematics::KINEMATICS_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/api/v1/catalog.csv",
            Read,
            get(catalog::catalog_csv),
        )
        .add(
            Method::GET,
            "/api/v1/catalog.json",
            Read,
            get(catalog::catalog_json),
        )
        .add(
            Method::GET,
            "/api/v1/changes",
            Read,
            get(changes::catalog_changes),
        )
        .add(
            Method::GET,
            "/api/v1/releases",
            Read,
            get(releases::list_releases),
        )
        .add(
            Method::GET,
            "/api/v1/virial-factor",
            Read,
            get(virial::virial_factor),
        )
        .add(
            Method::GET,
            "/api/v1/virial-factor/adopted",
            Read,
            get(virial::adopted),
        )
        .add(
            Method::POST,
            "/api/v1/submissions",
            Api,
            post(submissions::submit),
        )
        .add(
            Method::GET,
            "/api/v1/submissions/{id}",
            Api,
            get(submissions::status),
        )
}

/// A JSON body whose rejections are API errors: 400 for JSON that cannot be read, 415 without
/// `Content-Type: application/json`, 413 beyond the body limit, and 422 (naming the field) for
/// JSON of the wrong shape.
#[derive(Debug, Clone)]
pub struct ApiJson<T>(pub T);

impl<S, T> FromRequest<S> for ApiJson<T>
where
    T: DeserializeOwned,
    S: Send + Sync,
{
    type Rejection = AppError;

    async fn from_request(req: Request, state: &S) -> Result<Self, Self::Rejection> {
        match axum::Json::<T>::from_request(req, state).await {
            Ok(axum::Json(value)) => Ok(Self(value)),
            Err(rejection) => Err(json_error(&rejection)),
        }
    }
}

/// The error for a rejected JSON body.
fn json_error(rejection: &JsonRejection) -> AppError {
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
            AppError::invalid(vec![FieldError::new(field, sentence(message))])
        }
        JsonRejection::JsonSyntaxError(_) => {
            AppError::bad_request(sentence(&text)).titled("Unreadable JSON")
        }
        JsonRejection::MissingJsonContentType(_) => AppError::unsupported_media_type(
            "The body must be JSON, sent with Content-Type: application/json.",
        ),
        _ if status == StatusCode::PAYLOAD_TOO_LARGE => {
            AppError::BodyTooLarge { limit_bytes: None }
        }
        _ => AppError::bad_request(sentence(&text)).titled("Unreadable body"),
    }
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
}
