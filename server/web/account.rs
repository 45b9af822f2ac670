//! `/account`: the logged-in person's own page: role, API tokens (created, listed, revoked).
//!
//! A new token is shown once, in the answer to the form that made it; only its SHA-256 and its
//! public prefix are stored, so it can never be shown again.

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::{Extension, Path, State};
use axum::response::{IntoResponse, Redirect, Response};
use serde::Deserialize;

use super::Nav;
use crate::auth::secret::{new_api_token, sha256_hex};
use crate::auth::{Principal, Scope, SessionUser, validate_label};
use crate::catalog::accounts::{self, NewToken};
use crate::error::{AppError, AppResult};
use crate::state::AppState;

/// One token in the list.
pub(crate) struct TokenView {
    id: i64,
    label: String,
    prefix: String,
    scopes: String,
    created_at: String,
    last_used_at: String,
    revoked: bool,
}

/// `/account`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/account.html")]
pub(crate) struct AccountPage {
    nav: Nav,
    csrf: String,
    username: String,
    role: &'static str,
    tokens: Vec<TokenView>,
    /// A token just made: (label, the whole token), shown once.
    new_token: Option<(String, String)>,
    /// A refused form: the message and the label as typed.
    error: Option<String>,
    label_value: String,
}

pub(crate) fn session_of(principal: &Principal) -> AppResult<&SessionUser> {
    match principal {
        Principal::Session(s) => Ok(s),
        // The route guard admits sessions only; this is a programming error if reached.
        _ => Err(AppError::Internal(anyhow::anyhow!(
            "an account page was reached without a session"
        ))),
    }
}

fn short_time(t: &str) -> String {
    t.get(..16).unwrap_or(t).replace('T', " ")
}

async fn page(
    state: &AppState,
    user: &SessionUser,
    nav: Nav,
    new_token: Option<(String, String)>,
    error: Option<String>,
    label_value: String,
) -> AppResult<AccountPage> {
    let tokens = accounts::tokens_of(&state.pool, user.account_id)
        .await?
        .into_iter()
        .map(|t| TokenView {
            id: t.api_token_id,
            label: t.label,
            prefix: t.prefix,
            scopes: t.scopes,
            created_at: short_time(&t.created_at),
            last_used_at: t
                .last_used_at
                .as_deref()
                .map_or_else(|| "never".into(), short_time),
            revoked: t.revoked_at.is_some(),
        })
        .collect();
    Ok(AccountPage {
        nav,
        csrf: user.csrf_token.clone(),
        username: user.username.clone(),
        role: user.role.as_str(),
        tokens,
        new_token,
        error,
        label_value,
    })
}

/// Show the account page.
pub(crate) async fn show_account(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
) -> AppResult<AccountPage> {
    let user = session_of(&principal)?;
    page(&state, user, nav, None, None, String::new()).await
}

/// The token form's fields.
#[derive(Debug, Deserialize)]
pub(crate) struct TokenForm {
    #[serde(default)]
    label: String,
    #[serde(default)]
    read: Option<String>,
    #[serde(default)]
    submit: Option<String>,
}

/// Make a token and show it once.
pub(crate) async fn create_token(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Form(form): Form<TokenForm>,
) -> AppResult<Response> {
    let user = session_of(&principal)?;
    let mut scopes = Vec::new();
    if form.read.is_some() {
        scopes.push(Scope::Read);
    }
    if form.submit.is_some() {
        scopes.push(Scope::Submit);
    }
    let label = match validate_label(&form.label) {
        Ok(l) if !scopes.is_empty() => l,
        Ok(_) => {
            let p = page(
                &state,
                user,
                nav,
                None,
                Some("Choose at least one scope (read or submit).".into()),
                form.label.clone(),
            )
            .await?;
            return Ok((axum::http::StatusCode::BAD_REQUEST, p).into_response());
        }
        Err(message) => {
            let p = page(&state, user, nav, None, Some(message), form.label.clone()).await?;
            return Ok((axum::http::StatusCode::BAD_REQUEST, p).into_response());
        }
    };
    let (token, prefix) = new_api_token();
    accounts::create_token(
        &state.pool,
        &NewToken {
            account_id: user.account_id,
            label: &label,
            prefix: &prefix,
            token_sha256: &sha256_hex(&token),
            scopes: &Scope::join(&scopes),
        },
    )
    .await?;
    Ok(
        page(&state, user, nav, Some((label, token)), None, String::new())
            .await?
            .into_response(),
    )
}

/// Revoke one of the person's own tokens.
pub(crate) async fn revoke_token(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
) -> AppResult<Redirect> {
    let user = session_of(&principal)?;
    let id: i64 = id
        .parse()
        .map_err(|_| AppError::bad_request("The token number in the address is not a number."))?;
    if !accounts::revoke_token(&state.pool, user.account_id, id).await? {
        return Err(AppError::not_found(format!("Your API token number {id}")));
    }
    Ok(Redirect::to("/account"))
}
