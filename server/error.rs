//! One error type for every door.
//!
//! Handlers, the domain functions they call and the request layers return [`AppError`]. Each
//! variant's doc names the HTTP status it becomes. An `AppError` turned into a response is only
//! a status and the error itself, kept in the response's extensions ([`ErrorResponse`]); the door
//! that owns the path draws it — `web` as an HTML page with the visitor's session links, `api` as
//! RFC 9457 problem details — and the router's error layer logs it, once
//! (`router::render_errors`). So a handler never decides the format, and no layer rewrites a
//! finished answer.
//!
//! Internal causes are kept for the log; only a generic sentence goes out.

use std::sync::Arc;

use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

pub use crate::catalog::intake::sentence;

/// Result alias for handlers and the domain functions they call.
pub type AppResult<T> = Result<T, AppError>;

/// One field at fault, named as the caller sent it (a form field, a query parameter, or a JSON
/// path such as `measurements[2].value`).
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize, utoipa::ToSchema)]
pub struct FieldError {
    /// The field, e.g. `measurements[0].value`.
    pub field: String,
    /// One sentence saying what is wrong.
    pub message: String,
}

impl FieldError {
    /// A field error.
    pub fn new(field: impl Into<String>, message: impl Into<String>) -> Self {
        Self {
            field: field.into(),
            message: message.into(),
        }
    }
}

/// At most this many problems go out in one error answer (fields of a problem body, sentences
/// of a message); the rest are counted in one closing entry, so a request with thousands of bad
/// parameters cannot make a large answer.
pub const MAX_PROBLEMS: usize = 100;

/// `items` without repeats, in their first order, cut at `max`; with the number left out.
pub fn distinct_capped<T: Eq + std::hash::Hash + Clone>(
    items: impl IntoIterator<Item = T>,
    max: usize,
) -> (Vec<T>, usize) {
    let mut seen = std::collections::HashSet::new();
    let mut kept = Vec::new();
    let mut more = 0;
    for item in items {
        if seen.insert(item.clone()) {
            if kept.len() < max {
                kept.push(item);
            } else {
                more += 1;
            }
        }
    }
    (kept, more)
}

/// The sentence closing a cut list of problems.
fn more_problems(more: usize) -> String {
    if more == 1 {
        "And 1 more problem; correct the ones listed and send again to see it.".to_owned()
    } else {
        format!("And {more} more problems; correct the ones listed and send again to see them.")
    }
}

/// Problems (sentences) as one message: each distinct sentence once, at most [`MAX_PROBLEMS`],
/// then a sentence counting the rest.
pub fn join_problems(problems: impl IntoIterator<Item = String>) -> String {
    let (mut kept, more) = distinct_capped(problems, MAX_PROBLEMS);
    if more > 0 {
        kept.push(more_problems(more));
    }
    kept.join(" ")
}

/// The fields of an answer: at most [`MAX_PROBLEMS`] (each distinct field error is kept once
/// when the error is made), then one entry counting the rest.
pub fn bounded_fields(fields: &[FieldError]) -> Vec<FieldError> {
    let mut out: Vec<FieldError> = fields.iter().take(MAX_PROBLEMS).cloned().collect();
    if fields.len() > MAX_PROBLEMS {
        out.push(FieldError::new(
            "(more)",
            more_problems(fields.len() - MAX_PROBLEMS),
        ));
    }
    out
}

/// What can go wrong while answering a request.
#[derive(Debug, thiserror::Error)]
pub enum AppError {
    /// 400: the request cannot be read as sent; the message says what and how to send it.
    #[error("{message}")]
    BadRequest {
        /// A short title for problem details (`None`: "Bad request").
        title: Option<&'static str>,
        /// One sentence per problem, naming the parameter.
        message: String,
        /// The fields at fault, when they can be named.
        fields: Vec<FieldError>,
    },
    /// 401: nobody is logged in (pages send the visitor to the login page).
    #[error("{message}")]
    NotLoggedIn {
        /// What the endpoint needs.
        message: String,
    },
    /// 401: an `Authorization` header was sent, but its token is not valid.
    #[error("The API token is not valid: unknown, revoked, or its account is disabled.")]
    BadToken,
    /// 403: known, but this action is not theirs to take; the message says why.
    #[error("{message}")]
    Forbidden {
        /// One sentence.
        message: String,
    },
    /// 404: the thing named in the address does not exist (or is not theirs to see).
    #[error("{message}")]
    NotFound {
        /// One sentence, e.g. "There is no galaxy 'corvane-17'."
        message: String,
    },
    /// 410: the thing named existed once but can no longer be served (a catalog version from
    /// before the history began); the message says since when what is kept.
    #[error("{message}")]
    Gone {
        /// One sentence, with what can be asked for instead.
        message: String,
    },
    /// 404: no page or endpoint answers at this path.
    #[error("There is no page at {path}.")]
    NoRoute {
        /// The path asked for.
        path: String,
    },
    /// 405: the path exists but does not answer this method (the `Allow` header lists what it does).
    #[error("This address does not answer {method}.")]
    MethodNotAllowed {
        /// The method asked for.
        method: String,
    },
    /// 413: the body is larger than this route accepts.
    #[error("{message}")]
    TooLarge {
        /// A short title for problem details (`None`: "Too large").
        title: Option<&'static str>,
        /// One sentence with the limit.
        message: String,
    },
    /// 413: the request body is larger than the route's limit (each door words it).
    #[error("{}", body_too_large(*.limit_bytes))]
    BodyTooLarge {
        /// The route's limit, when known where the body was refused.
        limit_bytes: Option<usize>,
    },
    /// 415: the body is not in a format this route reads.
    #[error("{message}")]
    UnsupportedMediaType {
        /// One sentence naming the format to send.
        message: String,
    },
    /// 422: the request was read, but values in it are not valid; nothing was stored.
    #[error("{}", invalid_detail(.message.as_deref(), .fields.len()))]
    Invalid {
        /// A short title for problem details (`None`: "Invalid input").
        title: Option<&'static str>,
        /// The summary sentence (`None`: "N fields are invalid; nothing was stored.").
        message: Option<String>,
        /// Every field at fault.
        fields: Vec<FieldError>,
    },
    /// 409: the request was read, but it conflicts with what the catalog holds (a new galaxy
    /// whose name looks like one in the catalog); the message and fields say how to resolve
    /// it. Nothing was stored.
    #[error("{message}")]
    Conflict {
        /// One sentence saying how to resolve the conflict.
        message: String,
        /// The fields at fault.
        fields: Vec<FieldError>,
    },
    /// 429: too many requests from this account (or client address) for pages or for the API;
    /// retry after the given seconds.
    #[error(
        "Your account or address may make {per_minute} such requests a minute; wait {retry_after_s} s and try again."
    )]
    TooManyRequests {
        /// The rate of the budget that ran out, requests per minute.
        per_minute: u32,
        /// Seconds until a request is allowed again.
        retry_after_s: u64,
    },
    /// 429: the account has as many background runs waiting as it may; the sentence says how
    /// many and to wait for one to finish (no Retry-After: when a run ends is not known).
    #[error("{message}")]
    TooManyRuns {
        /// One sentence: how many runs wait and what to do.
        message: String,
    },
    /// 503: the database is busy (another writer held the lock for longer than the busy
    /// timeout). Nothing was written; the client may retry.
    #[error("The catalog is busy; nothing was changed. Please try again in a moment.")]
    Busy,
    /// 503: the request took longer than the server allows; the client may retry.
    #[error("The server could not answer in time; nothing was changed, please try again.")]
    Unavailable,
    /// 507: the disk (or the database's page limit) is full. Nothing was written, and the next
    /// write goes through once there is room again.
    #[error(
        "The server's storage is full, so nothing was changed; send it again once an administrator has freed disk space."
    )]
    StorageFull,
    /// 500: anything else. Logged with its cause; the answer says only that it failed.
    #[error("internal error: {0:#}")]
    Internal(#[from] anyhow::Error),
}

/// The sentence of [`AppError::BodyTooLarge`]: the limit in MB (KB below one MB) and what to
/// do instead.
fn body_too_large(limit_bytes: Option<usize>) -> String {
    const MB: usize = 1024 * 1024;
    match limit_bytes {
        Some(n) => {
            let limit = if n >= MB && n % MB == 0 {
                format!("{} MB", n / MB)
            } else if n >= MB {
                format!("{:.1} MB", n as f64 / MB as f64)
            } else if n >= 1024 {
                format!("{} KB", n / 1024)
            } else {
                format!("{n} bytes")
            };
            format!(
                "The request is larger than the {limit} this address accepts; send less at a time, for instance a catalog file split into files of at most {limit} each."
            )
        }
        None => "The request is larger than this address accepts; send less at a time, for instance a catalog file split into smaller files.".to_owned(),
    }
}

/// The summary sentence of [`AppError::Invalid`] for a request that could have stored
/// something.
fn invalid_detail(message: Option<&str>, n_fields: usize) -> String {
    match (message, n_fields) {
        (Some(m), _) => m.to_owned(),
        (None, 1) => "1 field is invalid; nothing was stored.".to_owned(),
        (None, n) => format!("{n} fields are invalid; nothing was stored."),
    }
}

/// The summary sentence of [`AppError::Invalid`] for a request that stores nothing anyway (GET,
/// HEAD, OPTIONS): no word of storing.
fn invalid_read_detail(message: Option<&str>, n_fields: usize) -> String {
    match (message, n_fields) {
        (Some(m), _) => m.to_owned(),
        (None, 1) => "1 parameter is invalid; it is listed with what to type instead.".to_owned(),
        (None, n) => {
            format!("{n} parameters are invalid; each is listed with what to type instead.")
        }
    }
}

/// The sentence every answer to an internal error carries.
pub const INTERNAL_MESSAGE: &str =
    "The server could not answer this request. The problem has been logged; nothing was changed.";

impl AppError {
    /// [`AppError::NotFound`] with "{what} was not found."
    pub fn not_found(what: impl std::fmt::Display) -> Self {
        Self::NotFound {
            message: format!("{what} was not found."),
        }
    }

    /// [`AppError::NotFound`] with a sentence of its own.
    pub fn not_found_saying(message: impl Into<String>) -> Self {
        Self::NotFound {
            message: message.into(),
        }
    }

    /// [`AppError::BadRequest`] with a message and no fields.
    pub fn bad_request(message: impl Into<String>) -> Self {
        Self::BadRequest {
            title: None,
            message: message.into(),
            fields: Vec::new(),
        }
    }

    /// [`AppError::Forbidden`].
    pub fn forbidden(message: impl Into<String>) -> Self {
        Self::Forbidden {
            message: message.into(),
        }
    }

    /// [`AppError::NotLoggedIn`].
    pub fn not_logged_in(message: impl Into<String>) -> Self {
        Self::NotLoggedIn {
            message: message.into(),
        }
    }

    /// [`AppError::Invalid`] listing every field at fault (a repeated field error once).
    pub fn invalid(fields: Vec<FieldError>) -> Self {
        Self::Invalid {
            title: None,
            message: None,
            fields: distinct_capped(fields, usize::MAX).0,
        }
    }

    /// [`AppError::Invalid`] with one summary sentence and no fields.
    pub fn invalid_saying(message: impl Into<String>) -> Self {
        Self::Invalid {
            title: None,
            message: Some(message.into()),
            fields: Vec::new(),
        }
    }

    /// [`AppError::Conflict`].
    pub fn conflict(message: impl Into<String>, fields: Vec<FieldError>) -> Self {
        Self::Conflict {
            message: message.into(),
            fields,
        }
    }

    /// [`AppError::TooLarge`].
    pub fn too_large(message: impl Into<String>) -> Self {
        Self::TooLarge {
            title: None,
            message: message.into(),
        }
    }

    /// [`AppError::UnsupportedMediaType`].
    pub fn unsupported_media_type(message: impl Into<String>) -> Self {
        Self::UnsupportedMediaType {
            message: message.into(),
        }
    }

    /// The same error with a short title of its own for problem details (400, 413 and 422;
    /// other variants keep theirs).
    #[must_use]
    pub fn titled(mut self, new_title: &'static str) -> Self {
        match &mut self {
            Self::BadRequest { title, .. }
            | Self::TooLarge { title, .. }
            | Self::Invalid { title, .. } => *title = Some(new_title),
            _ => {}
        }
        self
    }

    /// The same error listing the fields at fault (400 and 422; other variants have none).
    #[must_use]
    pub fn with_fields(mut self, new_fields: Vec<FieldError>) -> Self {
        match &mut self {
            Self::BadRequest { fields, .. } | Self::Invalid { fields, .. } => {
                *fields = distinct_capped(new_fields, usize::MAX).0;
            }
            _ => {}
        }
        self
    }

    /// The fields at fault (empty for most variants).
    pub fn fields(&self) -> &[FieldError] {
        match self {
            Self::BadRequest { fields, .. }
            | Self::Invalid { fields, .. }
            | Self::Conflict { fields, .. } => fields,
            _ => &[],
        }
    }

    /// The sentence to show a person: the error's own text, or the generic sentence for an
    /// internal error (whose cause is for the log only).
    pub fn public_message(&self) -> String {
        match self {
            Self::Internal(_) => INTERNAL_MESSAGE.to_owned(),
            other => other.to_string(),
        }
    }

    /// [`AppError::public_message`] worded for the request's method: an invalid GET is not told
    /// that "nothing was stored", since it could not have stored anything.
    pub fn public_message_for(&self, method: &axum::http::Method) -> String {
        match self {
            Self::Invalid {
                message, fields, ..
            } if method.is_safe() => invalid_read_detail(message.as_deref(), fields.len()),
            other => other.public_message(),
        }
    }

    /// The HTTP status this error becomes.
    pub fn status(&self) -> StatusCode {
        match self {
            Self::BadRequest { .. } => StatusCode::BAD_REQUEST,
            Self::NotLoggedIn { .. } | Self::BadToken => StatusCode::UNAUTHORIZED,
            Self::Forbidden { .. } => StatusCode::FORBIDDEN,
            Self::NotFound { .. } | Self::NoRoute { .. } => StatusCode::NOT_FOUND,
            Self::Gone { .. } => StatusCode::GONE,
            Self::MethodNotAllowed { .. } => StatusCode::METHOD_NOT_ALLOWED,
            Self::TooLarge { .. } | Self::BodyTooLarge { .. } => StatusCode::PAYLOAD_TOO_LARGE,
            Self::UnsupportedMediaType { .. } => StatusCode::UNSUPPORTED_MEDIA_TYPE,
            Self::Invalid { .. } => StatusCode::UNPROCESSABLE_ENTITY,
            Self::Conflict { .. } => StatusCode::CONFLICT,
            Self::TooManyRequests { .. } | Self::TooManyRuns { .. } => {
                StatusCode::TOO_MANY_REQUESTS
            }
            Self::Busy | Self::Unavailable => StatusCode::SERVICE_UNAVAILABLE,
            Self::StorageFull => StatusCode::INSUFFICIENT_STORAGE,
            Self::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }

    /// Seconds a client should wait before retrying, for the `Retry-After` header.
    pub fn retry_after_s(&self) -> Option<u64> {
        match self {
            Self::Busy | Self::Unavailable => Some(2),
            Self::TooManyRequests { retry_after_s, .. } => Some(*retry_after_s),
            _ => None,
        }
    }
}

impl From<crate::catalog::history::VersionError> for AppError {
    fn from(err: crate::catalog::history::VersionError) -> Self {
        use crate::catalog::history::VersionError;
        match err {
            VersionError::Db(e) => e.into(),
            VersionError::BeforeHistory { .. } => Self::Gone {
                message: err.to_string(),
            },
            VersionError::NotYet { .. } | VersionError::NoRelease { .. } => {
                Self::not_found_saying(err.to_string())
            }
        }
    }
}

impl From<sqlx::Error> for AppError {
    fn from(err: sqlx::Error) -> Self {
        match crate::catalog::classify(&err) {
            crate::catalog::DbFailure::Busy => Self::Busy,
            crate::catalog::DbFailure::Full => Self::StorageFull,
            crate::catalog::DbFailure::Other => Self::Internal(anyhow::Error::new(err)),
        }
    }
}

/// An error answer not yet drawn: the door that owns the path draws it
/// (`router::render_errors`). Kept in the response's extensions.
#[derive(Debug, Clone)]
pub struct ErrorResponse(pub Arc<AppError>);

impl IntoResponse for AppError {
    fn into_response(self) -> Response {
        let mut response = self.status().into_response();
        if let Some(seconds) = self.retry_after_s()
            && let Ok(value) = HeaderValue::from_str(&seconds.to_string())
        {
            response.headers_mut().insert(header::RETRY_AFTER, value);
        }
        response
            .extensions_mut()
            .insert(ErrorResponse(Arc::new(self)));
        response
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_variant_names_its_status_and_only_internal_errors_hide_their_text() {
        assert_eq!(AppError::not_found("Galaxy 'x'").status(), 404);
        assert_eq!(
            AppError::not_found("Galaxy 'x'").public_message(),
            "Galaxy 'x' was not found."
        );
        assert_eq!(
            AppError::invalid(vec![FieldError::new("a", "b")]).to_string(),
            "1 field is invalid; nothing was stored."
        );
        assert_eq!(AppError::Busy.status(), 503);
        assert_eq!(AppError::Busy.retry_after_s(), Some(2));
        let internal = AppError::Internal(anyhow::anyhow!("secret path /x/y"));
        assert_eq!(internal.status(), 500);
        assert!(!internal.public_message().contains("secret"));
    }

    #[test]
    fn an_invalid_read_is_not_told_that_nothing_was_stored() {
        let error = AppError::invalid(vec![FieldError::new("sort", "Bad.")]);
        let get = error.public_message_for(&axum::http::Method::GET);
        assert!(!get.contains("stored"), "{get}");
        assert!(get.starts_with("1 parameter is invalid"), "{get}");
        let post = error.public_message_for(&axum::http::Method::POST);
        assert_eq!(post, "1 field is invalid; nothing was stored.");
    }

    #[test]
    fn repeated_problems_are_kept_once_and_long_lists_are_cut_with_a_count() {
        let same = vec![FieldError::new("a", "Leave it out."); 10_000];
        assert_eq!(AppError::invalid(same).fields().len(), 1);
        let many: Vec<FieldError> = (0..250)
            .map(|i| FieldError::new(format!("p{i}"), "Leave it out."))
            .collect();
        let error = AppError::invalid(many);
        assert_eq!(error.fields().len(), 250);
        let shown = bounded_fields(error.fields());
        assert_eq!(shown.len(), MAX_PROBLEMS + 1);
        assert_eq!(shown[MAX_PROBLEMS].field, "(more)");
        assert!(shown[MAX_PROBLEMS].message.contains("150 more"));
        let joined = join_problems((0..250).map(|i| format!("'p{}' is not a parameter.", i % 120)));
        assert_eq!(joined.matches("is not a parameter").count(), MAX_PROBLEMS);
        assert!(joined.ends_with(
            "And 20 more problems; correct the ones listed and send again to see them."
        ));
    }

    #[test]
    fn an_error_response_carries_the_error_for_its_door() {
        let response = AppError::TooManyRequests {
            per_minute: 60,
            retry_after_s: 7,
        }
        .into_response();
        assert_eq!(response.status(), StatusCode::TOO_MANY_REQUESTS);
        assert_eq!(response.headers()[header::RETRY_AFTER], "7");
        let carried = response.extensions().get::<ErrorResponse>().unwrap();
        assert!(matches!(
            *carried.0,
            AppError::TooManyRequests {
                retry_after_s: 7,
                ..
            }
        ));
    }
}
