//! RFC 9457 problem details (`application/problem+json`), the shape of every API error, and
//! how the API draws an [`AppError`] as one.
//!
//! ```json
//! {"type": "about:blank", "title": "Invalid input", "status": 422,
//!  "detail": "2 fields are invalid; nothing was stored.",
//!  "errors": [{"field": "measurements[0].value", "message": "…"}]}
//! ```
//! `errors` appears only when fields are at fault.

use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

use axum::http::Method;

use crate::error::{AppError, FieldError, INTERNAL_MESSAGE, bounded_fields};
use crate::router::Asked;

/// An RFC 9457 problem details object.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, utoipa::ToSchema)]
pub struct Problem {
    /// Always `about:blank`: the status and title say what happened.
    #[serde(rename = "type")]
    pub kind: String,
    /// Short, fixed per kind of problem.
    pub title: String,
    /// The HTTP status code.
    pub status: u16,
    /// One or two sentences for a person.
    pub detail: String,
    /// The fields at fault.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub errors: Vec<FieldError>,
}

impl Problem {
    /// The problem details of `error` on an API path, for a request that could store
    /// something (see [`Problem::answering`]).
    pub fn of(error: &AppError) -> Self {
        Self::answering(error, &Method::POST)
    }

    /// The problem details of `error` answering a request with `method`: at most
    /// [`crate::error::MAX_PROBLEMS`] fields, then one counting the rest; an invalid read
    /// (GET) is not told that nothing was stored.
    pub fn answering(error: &AppError, method: &Method) -> Self {
        let (title, detail) = match error {
            AppError::BadRequest { title, message, .. } => {
                (title.unwrap_or("Bad request"), message.clone())
            }
            AppError::NotLoggedIn { message } => ("Unauthorized", message.clone()),
            AppError::BadToken => ("Unauthorized", error.to_string()),
            AppError::Forbidden { message } => ("Forbidden", message.clone()),
            AppError::NotFound { message } => ("Not found", message.clone()),
            AppError::Gone { message } => ("No longer kept", message.clone()),
            AppError::NoRoute { .. } => (
                "Not found",
                "There is no such endpoint; /api/v1/openapi.json lists them.".to_owned(),
            ),
            AppError::MethodNotAllowed { method } => (
                "Method not allowed",
                format!(
                    "This endpoint does not answer {method}; the Allow header lists what it does."
                ),
            ),
            AppError::TooLarge { title, message } => {
                (title.unwrap_or("Too large"), message.clone())
            }
            AppError::BodyTooLarge { limit_bytes: None } => (
                "Too large",
                "The request body is larger than this endpoint accepts; see /api/v1/openapi.json for its limit."
                    .to_owned(),
            ),
            AppError::BodyTooLarge { .. } => ("Too large", error.to_string()),
            AppError::UnsupportedMediaType { message } => {
                ("Unsupported media type", message.clone())
            }
            AppError::Invalid { title, .. } => (
                title.unwrap_or("Invalid input"),
                error.public_message_for(method),
            ),
            AppError::Conflict { message, .. } => ("Conflict", message.clone()),
            AppError::TooManyRequests { .. } => ("Too many requests", error.to_string()),
            AppError::TooManyRuns { message } => ("Too many runs waiting", message.clone()),
            AppError::Busy => ("Busy", error.to_string()),
            AppError::Unavailable => ("Unavailable", error.to_string()),
            AppError::StorageFull => ("Storage full", error.to_string()),
            AppError::Internal(_) => ("Internal error", INTERNAL_MESSAGE.to_owned()),
        };
        Self {
            kind: "about:blank".to_owned(),
            title: title.to_owned(),
            status: error.status().as_u16(),
            detail,
            errors: bounded_fields(error.fields()),
        }
    }
}

/// Draw `error` as problem+json (the API's door renderer).
pub(crate) fn render(error: &AppError, asked: &Asked) -> Response {
    Problem::answering(error, &asked.method).into_response()
}

impl IntoResponse for Problem {
    fn into_response(self) -> Response {
        let status = StatusCode::from_u16(self.status).unwrap_or(StatusCode::INTERNAL_SERVER_ERROR);
        let body = serde_json::to_string(&self).unwrap_or_else(|_| {
            r#"{"type":"about:blank","title":"Internal error","status":500}"#.to_owned()
        });
        let mut response = (status, body).into_response();
        let headers = response.headers_mut();
        headers.insert(
            header::CONTENT_TYPE,
            HeaderValue::from_static("application/problem+json"),
        );
        if status == StatusCode::UNAUTHORIZED {
            headers.insert(header::WWW_AUTHENTICATE, HeaderValue::from_static("Bearer"));
        }
        response
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_errors_are_listed_and_the_type_is_problem_json() {
        let p = Problem::of(&AppError::invalid(vec![FieldError::new(
            "measurements[0].value",
            "Bad.",
        )]));
        let response = p.clone().into_response();
        assert_eq!(response.status(), StatusCode::UNPROCESSABLE_ENTITY);
        assert_eq!(
            response.headers()[header::CONTENT_TYPE],
            "application/problem+json"
        );
        let json = serde_json::to_value(&p).unwrap();
        assert_eq!(json["type"], "about:blank");
        assert_eq!(json["status"], 422);
        assert_eq!(json["detail"], "1 field is invalid; nothing was stored.");
        assert_eq!(json["errors"][0]["field"], "measurements[0].value");
        // No `errors` key when there are none.
        let plain = serde_json::to_value(Problem::of(&AppError::not_found_saying("x"))).unwrap();
        assert!(plain.get("errors").is_none());
    }

    #[test]
    fn an_internal_error_says_only_that_it_failed() {
        let p = Problem::of(&AppError::Internal(anyhow::anyhow!("disk at /x/y")));
        assert_eq!(p.status, 500);
        assert!(!p.detail.contains("/x/y"));
    }
}
