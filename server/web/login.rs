//! `/login` and `/logout`. The rule of a login (throttling, locks, the password check, the new
//! session) is `auth::login`; this module reads the form and sets the cookies.

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::{Extension, Query, State};
use axum::http::{HeaderMap, HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Redirect, Response};
use serde::Deserialize;

use super::Nav;
use crate::auth::Principal;
use crate::auth::login::{LoginOutcome, log_in as log_in_as};
use crate::auth::middleware::{
    AuthContext, client_ip, login_cookie_name, login_nonce, login_token, read_cookie,
    session_cookie_name, set_cookie,
};
use crate::auth::secret::random_hex_256;
use crate::catalog::accounts;
use crate::error::AppResult;
use crate::state::AppState;

/// The one message of every refused login: it does not say whether the name exists.
pub(crate) const LOGIN_FAILED: &str = "The user name or the password is wrong.";
/// The message while a name or address is locked.
pub(crate) const LOGIN_LOCKED: &str =
    "Too many failed logins. Logging in is paused for a while; try again later.";

/// `/login`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/login.html")]
pub(crate) struct LoginPage {
    nav: Nav,
    csrf: String,
    next: String,
    username: String,
    message: Option<&'static str>,
}

/// Query of `GET /login`.
#[derive(Debug, Deserialize)]
pub(crate) struct LoginQuery {
    next: Option<String>,
}

/// Where to go after logging in: only a path on this server (no "//host", no backslashes, no
/// control characters), else the overview.
pub(crate) fn safe_next(next: Option<&str>) -> String {
    match next {
        Some(n)
            if n.starts_with('/')
                && !n.starts_with("//")
                && !n.contains('\\')
                && n.len() <= 512
                && !n.chars().any(char::is_control) =>
        {
            n.to_string()
        }
        _ => "/".to_string(),
    }
}

/// The anti-forgery value of the login form, and the login cookie's nonce when a new one must
/// be set: the session's token when someone is logged in, otherwise the server's MAC of the
/// login cookie's nonce (a new nonce when the cookie is missing or malformed).
fn login_form_token(
    principal: &Principal,
    headers: &HeaderMap,
    extensions: &axum::http::Extensions,
    ctx: &AuthContext,
) -> (String, Option<String>) {
    if let Principal::Session(s) = principal {
        return (s.csrf_token.clone(), None);
    }
    match login_nonce(headers, ctx.secure_cookies) {
        Some(nonce) => (login_token(ctx, &nonce, extensions), None),
        None => {
            let nonce = random_hex_256();
            (login_token(ctx, &nonce, extensions), Some(nonce))
        }
    }
}

/// The anti-forgery value of a read page's form that a visitor without a session may post
/// (`/planning` and `/kinematics` on a `--public-read` server): the session's token, or the login
/// form's, with the login cookie to set when it is new.
pub(super) struct FormToken {
    /// The value for the form's hidden `csrf` field.
    pub(super) csrf: String,
    new_nonce: Option<String>,
    secure: bool,
}

impl FormToken {
    pub(super) fn of(
        principal: &Principal,
        headers: &HeaderMap,
        extensions: &axum::http::Extensions,
        ctx: &AuthContext,
    ) -> Self {
        let (csrf, new_nonce) = login_form_token(principal, headers, extensions, ctx);
        Self {
            csrf,
            new_nonce,
            secure: ctx.secure_cookies,
        }
    }

    /// `response` with the login cookie set when its nonce is new.
    pub(super) fn respond(&self, mut response: Response) -> Response {
        if let Some(nonce) = &self.new_nonce {
            response.headers_mut().append(
                header::SET_COOKIE,
                set_cookie(login_cookie_name(self.secure), nonce, self.secure, None),
            );
        }
        response
    }
}

impl<S: Send + Sync> axum::extract::FromRequestParts<S> for FormToken {
    type Rejection = crate::error::AppError;

    async fn from_request_parts(
        parts: &mut axum::http::request::Parts,
        _state: &S,
    ) -> Result<Self, Self::Rejection> {
        let principal = parts
            .extensions
            .get::<Principal>()
            .cloned()
            .unwrap_or(Principal::Anonymous);
        let ctx = parts
            .extensions
            .get::<AuthContext>()
            .cloned()
            .ok_or_else(|| {
                anyhow::anyhow!(
                    "a page with a form token is served without the authentication layer"
                )
            })?;
        Ok(Self::of(
            &principal,
            &parts.headers,
            &parts.extensions,
            &ctx,
        ))
    }
}

/// Show the login form.
pub(crate) async fn show_login(
    Extension(principal): Extension<Principal>,
    Extension(ctx): Extension<AuthContext>,
    request_extensions: axum::http::Extensions,
    headers: HeaderMap,
    nav: Nav,
    Query(query): Query<LoginQuery>,
) -> Response {
    let next = safe_next(query.next.as_deref());
    let (csrf, new_nonce) = login_form_token(&principal, &headers, &request_extensions, &ctx);
    let page = LoginPage {
        nav,
        csrf,
        next,
        username: String::new(),
        message: None,
    };
    let mut response = page.into_response();
    if let Some(nonce) = new_nonce {
        response.headers_mut().append(
            header::SET_COOKIE,
            set_cookie(
                login_cookie_name(ctx.secure_cookies),
                &nonce,
                ctx.secure_cookies,
                None,
            ),
        );
    }
    response
}

/// The login form's fields.
#[derive(Debug, Deserialize)]
pub(crate) struct LoginForm {
    #[serde(default)]
    username: String,
    #[serde(default)]
    password: String,
    #[serde(default)]
    next: String,
}

/// Check a login.
pub(crate) async fn log_in(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Extension(ctx): Extension<AuthContext>,
    request_extensions: axum::http::Extensions,
    headers: HeaderMap,
    nav: Nav,
    Form(form): Form<LoginForm>,
) -> AppResult<Response> {
    let ip = client_ip(&request_extensions);
    let now = state.clock.now_unix();
    let (csrf, _) = login_form_token(&principal, &headers, &request_extensions, &ctx);
    let username: String = form.username.trim().chars().take(64).collect();
    let again = |status: StatusCode, message: &'static str| {
        let page = LoginPage {
            nav: nav.clone(),
            csrf: csrf.clone(),
            next: safe_next(Some(&form.next)),
            username: username.clone(),
            message: Some(message),
        };
        let mut r = (status, page).into_response();
        if status == StatusCode::TOO_MANY_REQUESTS {
            r.headers_mut()
                .insert(header::RETRY_AFTER, HeaderValue::from_static("900"));
        }
        r
    };

    let previous = read_cookie(&headers, session_cookie_name(ctx.secure_cookies));
    let outcome = log_in_as(
        &state.pool,
        &state.passwords,
        now,
        &username,
        &form.password,
        &ip,
        previous.as_deref(),
    )
    .await?;
    let session_id = match outcome {
        LoginOutcome::Locked => return Ok(again(StatusCode::TOO_MANY_REQUESTS, LOGIN_LOCKED)),
        LoginOutcome::Refused => return Ok(again(StatusCode::UNAUTHORIZED, LOGIN_FAILED)),
        LoginOutcome::LoggedIn { session_id } => session_id,
    };
    let mut response = Redirect::to(&safe_next(Some(&form.next))).into_response();
    let secure = ctx.secure_cookies;
    response.headers_mut().append(
        header::SET_COOKIE,
        set_cookie(session_cookie_name(secure), &session_id, secure, None),
    );
    response.headers_mut().append(
        header::SET_COOKIE,
        set_cookie(login_cookie_name(secure), "", secure, Some(0)),
    );
    Ok(response)
}

/// End the session.
pub(crate) async fn log_out(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Extension(ctx): Extension<AuthContext>,
) -> AppResult<Response> {
    if let Principal::Session(s) = &principal {
        accounts::logout(&state.pool, s.session_id, s.account_id).await?;
    }
    let mut response = Redirect::to("/login").into_response();
    let secure = ctx.secure_cookies;
    response.headers_mut().append(
        header::SET_COOKIE,
        set_cookie(session_cookie_name(secure), "", secure, Some(0)),
    );
    Ok(response)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn next_accepts_only_local_paths() {
        assert_eq!(
            safe_next(Some("/galaxies?sort=name")),
            "/galaxies?sort=name"
        );
        for bad in [
            "https://evil.example/",
            "//evil.example",
            "/\\evil.example",
            "javascript:alert(1)",
            "/a\nb",
            "",
        ] {
            assert_eq!(safe_next(Some(bad)), "/", "{bad:?}");
        }
        assert_eq!(safe_next(None), "/");
    }
}
