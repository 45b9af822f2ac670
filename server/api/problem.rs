//! RFC 9457 problem details (`application/problem+json`), the shape of every API error.
//!
//! ```json
//! {"type": "about:blank", "title": "Invalid input", "status": 422,
//!  "detail": "2 fields are invalid; nothing was stored.",
//!  "errors": [{"field": "measurements[0].value", "message": "…"}]}
//! ```
//! `errors` appears only for invalid input, one entry per field at fault.

use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

use crate::error::AppError;

/// One field at fault, named by its JSON path (`measurements[2].value`).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, utoipa::ToSchema)]
pub struct FieldError {
    /// JSON path of the field, e.g. `measurements[0].value`.
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
    /// The fields at fault (invalid input only).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub errors: Vec<FieldError>,
}

impl Problem {
    /// A problem with no field errors.
    pub fn new(status: StatusCode, title: &str, detail: impl Into<String>) -> Self {
        Self {
            kind: "about:blank".to_owned(),
            title: title.to_owned(),
            status: status.as_u16(),
            detail: detail.into(),
            errors: Vec::new(),
        }
    }

    /// The same problem listing the fields at fault.
    #[must_use]
    pub fn with_errors(mut self, errors: Vec<FieldError>) -> Self {
        self.errors = errors;
        self
    }

    /// 422 for input that was read but is not valid, listing every field at fault.
    pub fn invalid(errors: Vec<FieldError>) -> Self {
        let n = errors.len();
        let detail = if n == 1 {
            "1 field is invalid; nothing was stored.".to_owned()
        } else {
            format!("{n} fields are invalid; nothing was stored.")
        };
        Self::new(StatusCode::UNPROCESSABLE_ENTITY, "Invalid input", detail).with_errors(errors)
    }

    fn status_code(&self) -> StatusCode {
        StatusCode::from_u16(self.status).unwrap_or(StatusCode::INTERNAL_SERVER_ERROR)
    }
}

impl From<AppError> for Problem {
    /// The page layer's error as a problem: the same status and sentence; an internal cause is
    /// logged and only a generic sentence goes back.
    fn from(err: AppError) -> Self {
        let status = err.status();
        match &err {
            AppError::NotFound { .. } => Self::new(status, "Not found", format!("{err}.")),
            AppError::BadRequest { .. } => Self::new(status, "Bad request", err.to_string()),
            AppError::Forbidden { .. } => Self::new(status, "Forbidden", err.to_string()),
            AppError::Busy => Self::new(status, "Busy", format!("The {err}.")),
            AppError::StorageFull => Self::new(status, "Storage full", format!("The {err}.")),
            AppError::Internal(cause) => {
                tracing::error!(error = format!("{cause:#}"), "API request failed");
                Self::new(
                    status,
                    "Internal error",
                    "The server could not answer this request. The problem has been logged; nothing was changed.",
                )
            }
        }
    }
}

impl From<sqlx::Error> for Problem {
    fn from(err: sqlx::Error) -> Self {
        AppError::from(err).into()
    }
}

impl From<anyhow::Error> for Problem {
    fn from(err: anyhow::Error) -> Self {
        AppError::Internal(err).into()
    }
}

impl IntoResponse for Problem {
    fn into_response(self) -> Response {
        let status = self.status_code();
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
        if status == StatusCode::SERVICE_UNAVAILABLE {
            headers.insert(header::RETRY_AFTER, HeaderValue::from_static("2"));
        }
        response
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_errors_are_listed_and_the_type_is_problem_json() {
        let p = Problem::invalid(vec![FieldError::new("measurements[0].value", "Bad.")]);
        let response = p.clone().into_response();
        assert_eq!(response.status(), StatusCode::UNPROCESSABLE_ENTITY);
        assert_eq!(
            response.headers()[header::CONTENT_TYPE],
            "application/problem+json"
        );
        let json = serde_json::to_value(&p).unwrap();
        assert_eq!(json["type"], "about:blank");
        assert_eq!(json["status"], 422);
        assert_eq!(json["errors"][0]["field"], "measurements[0].value");
        // No `errors` key when there are none.
        let plain =
            serde_json::to_value(Problem::new(StatusCode::NOT_FOUND, "Not found", "x")).unwrap();
        assert!(plain.get("errors").is_none());
    }
}
