//! One error type for the web layer, rendered as a readable HTML page.
//!
//! Handlers return `Result<Page, AppError>`. Each variant's doc names the status it becomes.
//! Causes of internal errors are logged with their whole chain, but only a generic sentence goes
//! back to the browser (no SQL or file paths leak into pages).

use askama::Template;
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{Html, IntoResponse, Response};

/// Result alias for handlers.
pub type AppResult<T> = Result<T, AppError>;

/// What can go wrong while answering a request.
#[derive(Debug, thiserror::Error)]
pub enum AppError {
    /// 404: the thing named in the URL does not exist.
    #[error("{what} was not found.")]
    NotFound {
        /// Plain description of what was looked for, e.g. "galaxy 'corvane-17'".
        what: String,
    },
    /// 400: the request's parameters cannot be understood; the message says which and why.
    #[error("{message}")]
    BadRequest {
        /// One sentence per problem, naming the parameter.
        message: String,
    },
    /// 403: logged in, but this action is not theirs to take; the message says why.
    #[error("{message}")]
    Forbidden {
        /// One sentence.
        message: String,
    },
    /// 503: the database is busy (another writer held the lock for longer than the busy timeout).
    /// Nothing was written; the client may retry.
    #[error("the catalog is busy; nothing was changed, please try again in a moment")]
    Busy,
    /// 507: the disk (or the database's page limit) is full. Nothing was written.
    #[error("the server's storage is full; nothing was changed")]
    StorageFull,
    /// 500: anything else. Logged with its cause; the page says only that it failed.
    #[error("internal error: {0:#}")]
    Internal(#[from] anyhow::Error),
}

impl AppError {
    /// Shorthand for [`AppError::NotFound`].
    pub fn not_found(what: impl Into<String>) -> Self {
        Self::NotFound { what: what.into() }
    }

    /// Shorthand for [`AppError::BadRequest`].
    pub fn bad_request(message: impl Into<String>) -> Self {
        Self::BadRequest {
            message: message.into(),
        }
    }

    /// Shorthand for [`AppError::Forbidden`].
    pub fn forbidden(message: impl Into<String>) -> Self {
        Self::Forbidden {
            message: message.into(),
        }
    }

    /// The HTTP status this error becomes.
    pub fn status(&self) -> StatusCode {
        match self {
            Self::NotFound { .. } => StatusCode::NOT_FOUND,
            Self::BadRequest { .. } => StatusCode::BAD_REQUEST,
            Self::Forbidden { .. } => StatusCode::FORBIDDEN,
            Self::Busy => StatusCode::SERVICE_UNAVAILABLE,
            Self::StorageFull => StatusCode::INSUFFICIENT_STORAGE,
            Self::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
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

/// What an error page says, kept on its response so `web` can draw it again with the
/// visitor's session links.
#[derive(Debug, Clone)]
pub struct ErrorPageParts {
    /// HTTP status.
    pub status_code: u16,
    /// Short title.
    pub title: &'static str,
    /// One or two sentences.
    pub message: String,
}

/// The error page (templates/errors/error.html).
#[derive(Template)]
#[template(path = "errors/error.html")]
struct ErrorPage {
    status_code: u16,
    title: &'static str,
    message: String,
}

impl IntoResponse for AppError {
    fn into_response(self) -> Response {
        let status = self.status();
        let (title, message) = match &self {
            Self::NotFound { .. } => ("Not found", self.to_string()),
            Self::BadRequest { .. } => ("The request could not be read", self.to_string()),
            Self::Forbidden { .. } => ("Not allowed", self.to_string()),
            Self::Busy => ("Busy", self.to_string()),
            Self::StorageFull => ("Storage full", self.to_string()),
            Self::Internal(cause) => {
                tracing::error!(error = format!("{cause:#}"), "request failed");
                (
                    "Something went wrong",
                    "The server could not answer this request. The problem has been logged; nothing was changed."
                        .to_string(),
                )
            }
        };
        render_error_page(status, title, message, matches!(self, Self::Busy))
    }
}

/// Render the shared error page with a given status; used for router fallbacks too.
pub fn render_error_page(
    status: StatusCode,
    title: &'static str,
    message: String,
    retry: bool,
) -> Response {
    let page = ErrorPage {
        status_code: status.as_u16(),
        title,
        message: message.clone(),
    };
    let body = page
        .render()
        .unwrap_or_else(|_| format!("{} {title}", status.as_u16()));
    let mut response = (status, Html(body)).into_response();
    // The web layer redraws the page with the visitor's session links (it knows who asks;
    // this function does not).
    response.extensions_mut().insert(ErrorPageParts {
        status_code: status.as_u16(),
        title,
        message,
    });
    if retry {
        response
            .headers_mut()
            .insert(header::RETRY_AFTER, HeaderValue::from_static("2"));
    }
    response
}
