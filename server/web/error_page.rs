//! How the pages draw an [`AppError`]: `templates/errors/error.html`, with the visitor's
//! session links when authentication got that far (`error_session.html`); a visitor who must
//! log in is sent to the login page instead (303, back to the page afterwards).

use askama::Template;
use axum::http::{HeaderValue, Method, header};
use axum::response::{Html, IntoResponse, Redirect, Response};

use super::Nav;
use crate::auth::middleware::encode_query_value;
use crate::error::AppError;
use crate::router::Asked;

/// The error page without session links (the request was refused before anyone was known).
#[derive(Template)]
#[template(path = "errors/error.html")]
struct ErrorPage<'a> {
    status_code: u16,
    title: &'a str,
    message: &'a str,
    /// No session links, but the navigation still marks the section asked for.
    nav: Nav,
}

/// The error page with the visitor's session links.
#[derive(Template)]
#[template(path = "errors/error_session.html")]
struct SessionErrorPage<'a> {
    status_code: u16,
    title: &'a str,
    message: &'a str,
    nav: Nav,
}

/// The page's title for each kind of error.
fn title(error: &AppError) -> &'static str {
    match error {
        AppError::BadRequest { .. } => "The request could not be read",
        AppError::NotLoggedIn { .. } | AppError::BadToken => "Not logged in",
        AppError::Forbidden { .. } => "Not allowed",
        AppError::NotFound { .. } | AppError::NoRoute { .. } => "Not found",
        AppError::Gone { .. } => "No longer kept",
        AppError::MethodNotAllowed { .. } => "Method not allowed",
        AppError::TooLarge { .. } | AppError::BodyTooLarge { .. } => "Too large",
        AppError::UnsupportedMediaType { .. } => "Unsupported format",
        AppError::Invalid { .. } => "Invalid input",
        AppError::Conflict { .. } => "Conflict",
        AppError::TooManyRequests { .. } | AppError::TooManyRuns { .. } => "Too many requests",
        AppError::Busy => "Busy",
        AppError::Unavailable => "Unavailable",
        AppError::StorageFull => "Storage full",
        AppError::Internal(_) => "Something went wrong",
    }
}

/// What the page says: the error's sentence, then each field at fault (at most
/// [`crate::error::MAX_PROBLEMS`], then a count of the rest).
fn message(error: &AppError, method: &Method) -> String {
    let mut text = error.public_message_for(method);
    for f in crate::error::bounded_fields(error.fields()) {
        text.push_str(&format!(" {}: {}", f.field, f.message));
    }
    text
}

/// Draw `error` as a page (see the module doc).
pub(crate) fn render(error: &AppError, asked: &Asked) -> Response {
    if let AppError::NotLoggedIn { .. } = error {
        let target = if asked.method == Method::GET {
            format!("/login?next={}", encode_query_value(&asked.target))
        } else {
            "/login".to_owned()
        };
        return Redirect::to(&target).into_response();
    }
    let status = error.status();
    let (title, message) = (title(error), message(error, &asked.method));
    let body = match &asked.principal {
        Some(principal) => SessionErrorPage {
            status_code: status.as_u16(),
            title,
            message: &message,
            nav: Nav::from_principal(principal).on(&asked.target),
        }
        .render(),
        None => ErrorPage {
            status_code: status.as_u16(),
            title,
            message: &message,
            nav: Nav::default().on(&asked.target),
        }
        .render(),
    }
    .unwrap_or_else(|_| format!("{} {title}", status.as_u16()));
    let mut response = (status, Html(body)).into_response();
    if matches!(error, AppError::BadToken) {
        response
            .headers_mut()
            .insert(header::WWW_AUTHENTICATE, HeaderValue::from_static("Bearer"));
    }
    response
}
