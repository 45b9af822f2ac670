//! Admin pages: `/admin/accounts` (list, create, change role, disable) and `/admin/audit` (the
//! audit log with filters).
//!
//! An admin cannot change their own role or disable themselves here, so the last admin cannot
//! lock everyone out by accident (the command line can still do both).

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};
use serde::Deserialize;

use super::Nav;
use super::account::session_of;
use crate::auth::password::check_new_password;
use crate::auth::secret::generate_password;
use crate::auth::{Principal, Role, validate_username};
use crate::catalog::accounts::{self, AuditFilter};
use crate::error::{AppError, AppResult};
use crate::state::AppState;

/// Most audit events one page shows.
pub(crate) const AUDIT_PAGE_LIMIT: i64 = 200;

/// One account in the list.
pub(crate) struct AccountView {
    id: i64,
    username: String,
    role: &'static str,
    disabled: bool,
    created_at: String,
    is_self: bool,
}

/// A role as an option of a select.
pub(crate) struct RoleOption {
    value: &'static str,
    selected: bool,
}

/// `/admin/accounts`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/admin_accounts.html")]
pub(crate) struct AccountsPage {
    nav: Nav,
    csrf: String,
    accounts: Vec<(AccountView, Vec<RoleOption>)>,
    /// After a creation: (name, generated password) when the password was generated.
    created: Option<(String, Option<String>)>,
    error: Option<String>,
    username_value: String,
}

fn role_options(current: Role) -> Vec<RoleOption> {
    Role::ALL
        .iter()
        .map(|r| RoleOption {
            value: r.as_str(),
            selected: *r == current,
        })
        .collect()
}

async fn accounts_page(
    state: &AppState,
    principal: &Principal,
    nav: Nav,
    created: Option<(String, Option<String>)>,
    error: Option<String>,
    username_value: String,
) -> AppResult<AccountsPage> {
    let me = session_of(principal)?;
    let accounts = accounts::list_accounts(&state.pool)
        .await?
        .into_iter()
        .map(|a| {
            let role = a.role.parse::<Role>().unwrap_or(Role::Member);
            (
                AccountView {
                    id: a.account_id,
                    is_self: a.account_id == me.account_id,
                    username: a.username,
                    role: role.as_str(),
                    disabled: a.disabled,
                    created_at: a.created_at.get(..10).unwrap_or(&a.created_at).to_string(),
                },
                role_options(role),
            )
        })
        .collect();
    Ok(AccountsPage {
        nav,
        csrf: me.csrf_token.clone(),
        accounts,
        created,
        error,
        username_value,
    })
}

/// List the accounts.
pub(crate) async fn list_accounts(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
) -> AppResult<AccountsPage> {
    accounts_page(&state, &principal, nav, None, None, String::new()).await
}

/// The create form's fields.
#[derive(Debug, Deserialize)]
pub(crate) struct CreateForm {
    #[serde(default)]
    username: String,
    #[serde(default)]
    role: String,
    /// Empty: generate one.
    #[serde(default)]
    password: String,
}

/// Create an account (with a typed or a generated password, the latter shown once).
pub(crate) async fn create_account(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Form(form): Form<CreateForm>,
) -> AppResult<Response> {
    let me = session_of(&principal)?;
    let username = form.username.trim().to_string();
    let refuse = |message: String| async {
        let page = accounts_page(
            &state,
            &principal,
            nav.clone(),
            None,
            Some(message),
            form.username.clone(),
        )
        .await?;
        Ok::<Response, AppError>((StatusCode::BAD_REQUEST, page).into_response())
    };
    if let Err(message) = validate_username(&username) {
        return refuse(message).await;
    }
    let Ok(role) = form.role.parse::<Role>() else {
        return refuse("The role must be member, reviewer or admin.".into()).await;
    };
    let generated = form.password.is_empty();
    let password = if generated {
        generate_password()
    } else {
        form.password.clone()
    };
    if let Err(message) = check_new_password(&password, &username) {
        return refuse(message).await;
    }
    let phc = state.passwords.hash(&password).await?;
    let created = accounts::create_account(
        &state.pool,
        &username,
        &phc,
        role.as_str(),
        Some(me.account_id),
    )
    .await?;
    if created.is_none() {
        return refuse(format!("The name '{username}' is already taken.")).await;
    }
    let shown = generated.then_some(password);
    Ok(accounts_page(
        &state,
        &principal,
        nav,
        Some((username, shown)),
        None,
        String::new(),
    )
    .await?
    .into_response())
}

fn account_id(text: &str) -> AppResult<i64> {
    text.parse()
        .map_err(|_| AppError::bad_request("The account number in the address is not a number."))
}

/// The role form's fields.
#[derive(Debug, Deserialize)]
pub(crate) struct RoleForm {
    #[serde(default)]
    role: String,
}

/// Change another account's role.
pub(crate) async fn change_role(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
    Form(form): Form<RoleForm>,
) -> AppResult<Redirect> {
    let me = session_of(&principal)?;
    let id = account_id(&id)?;
    let role = form
        .role
        .parse::<Role>()
        .map_err(|_| AppError::bad_request("The role must be member, reviewer or admin."))?;
    if id == me.account_id {
        return Err(AppError::bad_request(
            "You cannot change your own role here; ask another admin.",
        ));
    }
    if !accounts::set_role(&state.pool, id, role.as_str(), Some(me.account_id)).await? {
        return Err(AppError::not_found(format!("The account number {id}")));
    }
    Ok(Redirect::to("/admin/accounts"))
}

/// Disable another account and end its sessions.
pub(crate) async fn disable_account(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
) -> AppResult<Redirect> {
    let me = session_of(&principal)?;
    let id = account_id(&id)?;
    if id == me.account_id {
        return Err(AppError::bad_request(
            "You cannot disable your own account here; ask another admin.",
        ));
    }
    if !accounts::disable(&state.pool, id, Some(me.account_id)).await? {
        return Err(AppError::not_found(format!("The account number {id}")));
    }
    Ok(Redirect::to("/admin/accounts"))
}

/// One audit event.
pub(crate) struct AuditView {
    at: String,
    who: String,
    action: String,
    summary: String,
}

/// `/admin/audit`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/admin_audit.html")]
pub(crate) struct AuditPage {
    nav: Nav,
    events: Vec<AuditView>,
    action: String,
    user: String,
    from: String,
    to: String,
    limit: i64,
}

/// Read the audit filters; each bad value is a sentence naming the parameter.
pub(crate) fn parse_audit_filter(pairs: &[(String, String)]) -> Result<AuditFilter, String> {
    let mut filter = AuditFilter::default();
    for (key, value) in pairs {
        let value = value.trim();
        if value.is_empty() {
            continue;
        }
        match key.as_str() {
            "action" => {
                if value.len() > 64 || !value.bytes().all(|b| b.is_ascii_lowercase() || b == b'_') {
                    return Err("Parameter 'action': use an action name such as login_failed (lowercase letters and '_').".into());
                }
                filter.action = Some(value.to_string());
            }
            "user" => {
                validate_username(value).map_err(|e| format!("Parameter 'user': {e}"))?;
                filter.username = Some(value.to_string());
            }
            "from" | "to" => {
                let format = time::macros::format_description!("[year]-[month]-[day]");
                time::Date::parse(value, &format).map_err(|_| {
                    format!("Parameter '{key}': give a date as YYYY-MM-DD, e.g. 2026-01-31.")
                })?;
                if key == "from" {
                    filter.from_date = Some(value.to_string());
                } else {
                    filter.to_date = Some(value.to_string());
                }
            }
            other => {
                return Err(format!(
                    "Parameter '{other}' is not known here; use action, user, from or to."
                ));
            }
        }
    }
    if let (Some(from), Some(to)) = (&filter.from_date, &filter.to_date)
        && from > to
    {
        return Err("Parameters 'from' and 'to': the first day comes after the last.".into());
    }
    Ok(filter)
}

/// Show the audit log.
pub(crate) async fn show_audit(
    State(state): State<AppState>,
    nav: Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<AuditPage> {
    let pairs = crate::router::query_pairs(query)?;
    let filter = parse_audit_filter(&pairs).map_err(AppError::bad_request)?;
    let events = accounts::audit_events(&state.pool, &filter, AUDIT_PAGE_LIMIT)
        .await?
        .into_iter()
        .map(|e| AuditView {
            at: e.at.get(..19).unwrap_or(&e.at).replace('T', " "),
            who: e.username.unwrap_or_else(|| "system".into()),
            action: e.action,
            summary: e.summary,
        })
        .collect();
    Ok(AuditPage {
        nav,
        events,
        action: filter.action.unwrap_or_default(),
        user: filter.username.unwrap_or_default(),
        from: filter.from_date.unwrap_or_default(),
        to: filter.to_date.unwrap_or_default(),
        limit: AUDIT_PAGE_LIMIT,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::relations::test_pairs as pairs;

    #[test]
    fn audit_filters_read_every_parameter() {
        let f = parse_audit_filter(&pairs(&[
            ("action", "login_failed"),
            ("user", "demo-admin"),
            ("from", "2026-01-01"),
            ("to", "2026-01-31"),
        ]))
        .unwrap();
        assert_eq!(f.action.as_deref(), Some("login_failed"));
        assert_eq!(f.username.as_deref(), Some("demo-admin"));
        assert_eq!(f.from_date.as_deref(), Some("2026-01-01"));
        assert_eq!(f.to_date.as_deref(), Some("2026-01-31"));
        assert_eq!(
            parse_audit_filter(&pairs(&[("action", "")])).unwrap(),
            AuditFilter::default()
        );
    }

    #[test]
    fn audit_filters_name_each_bad_parameter() {
        for (key, value) in [
            ("action", "<script>"),
            ("user", "a b"),
            ("from", "2026-13-01"),
            ("to", "yesterday"),
            ("sort", "x"),
        ] {
            let err = parse_audit_filter(&pairs(&[(key, value)])).unwrap_err();
            assert!(err.contains(&format!("'{key}'")), "{key}: {err}");
        }
        assert!(
            parse_audit_filter(&pairs(&[("from", "2026-02-01"), ("to", "2026-01-01")])).is_err()
        );
    }
}
