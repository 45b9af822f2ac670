//! `/releases`: the named catalog versions, newest first, each with its relations' default
//! fits at a glance and links to its pages and files; admins name a version here (POST
//! `/releases`, `catalog::citations::name_release`).

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Query, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};
use serde::Deserialize;

use super::display::readable_utc;
use super::relations::{RelationSummary, summaries};
use crate::auth::Principal;
use crate::catalog::citations::{self, Release, ReleaseError};
use crate::catalog::history;
use crate::error::{AppError, AppResult};
use crate::state::AppState;

/// One release on the page.
pub(crate) struct ReleaseView {
    name: String,
    version: i64,
    made_iso: String,
    made: String,
    note: String,
    named_by: String,
    named: String,
    fits: Vec<RelationSummary>,
    /// `/changes?from=…&to=…` from the previous release (or the start of the history).
    changes_href: Option<String>,
}

/// The form as typed, with what is wrong.
#[derive(Default)]
pub(crate) struct FormView {
    name: String,
    version: String,
    note: String,
    name_error: Option<String>,
    version_error: Option<String>,
    note_error: Option<String>,
}

/// `/releases`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/releases.html")]
pub(crate) struct ReleasesPage {
    nav: super::Nav,
    releases: Vec<ReleaseView>,
    current: i64,
    history_from: i64,
    form: FormView,
    flash: Option<String>,
}

/// The page with `form` (what an admin typed, and its errors) and `flash`.
async fn page(
    state: &AppState,
    nav: super::Nav,
    form: FormView,
    flash: Option<String>,
) -> AppResult<ReleasesPage> {
    let current = history::current_version(&state.pool).await?;
    let history_from = history::history_from(&state.pool).await?;
    let list = citations::releases(&state.pool).await?;
    let mut releases = Vec::with_capacity(list.len());
    for (i, r) in list.iter().enumerate() {
        let previous = citations::previous_version(&list, i, history_from);
        let (fits, _, _) = summaries(&state.catalog().at(Some(r.catalog_version))).await?;
        let made_iso = history::made_at(&state.pool, r.catalog_version)
            .await?
            .unwrap_or_default();
        releases.push(ReleaseView {
            name: r.name.clone(),
            version: r.catalog_version,
            made: readable_utc(&made_iso),
            made_iso,
            note: r.note.clone(),
            named_by: r
                .username
                .clone()
                .unwrap_or_else(|| "command line".to_owned()),
            named: readable_utc(&r.created_at),
            fits,
            changes_href: previous
                .map(|from| format!("/changes?from={from}&to={}", r.catalog_version)),
        });
    }
    Ok(ReleasesPage {
        nav,
        releases,
        current,
        history_from,
        form: FormView {
            version: if form.version.is_empty() {
                current.to_string()
            } else {
                form.version
            },
            ..form
        },
        flash,
    })
}

/// Show the releases (and, to admins, the form that names one).
pub(crate) async fn list_releases(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<ReleasesPage> {
    let pairs = crate::router::query_pairs(query)?;
    // The confirmation is worded from what the catalog holds, and only for the admin who named
    // the release, so an address cannot make the page claim something.
    let named = pairs
        .iter()
        .find(|(k, _)| k == "named")
        .map(|(_, v)| v.as_str());
    let me = match &principal {
        Principal::Session(s) => Some(s.username.as_str()),
        _ => None,
    };
    let flash = match named {
        Some(name) => citations::releases(&state.pool)
            .await?
            .into_iter()
            .find(|r| r.name == name && r.username.is_some() && r.username.as_deref() == me)
            .map(|r: Release| {
                format!(
                    "Release {} now names catalog version {}.",
                    r.name, r.catalog_version
                )
            }),
        None => None,
    };
    page(&state, nav, FormView::default(), flash).await
}

/// The naming form's fields.
#[derive(Debug, Deserialize)]
pub(crate) struct ReleaseForm {
    #[serde(default)]
    name: String,
    #[serde(default)]
    version: String,
    #[serde(default)]
    note: String,
}

/// Name a version (admins).
pub(crate) async fn create_release(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: super::Nav,
    Form(form): Form<ReleaseForm>,
) -> AppResult<Response> {
    let me = super::account::session_of(&principal)?;
    let mut view = FormView {
        name: form.name.clone(),
        version: form.version.clone(),
        note: form.note.clone(),
        ..FormView::default()
    };
    let version = match form.version.trim() {
        "" => Some(history::current_version(&state.pool).await?),
        text => text.parse::<i64>().ok(),
    };
    let Some(version) = version else {
        view.version_error = Some(format!(
            "'{}' is not a catalog version; give a whole number such as 12.",
            form.version.trim().chars().take(40).collect::<String>()
        ));
        let page = page(&state, nav, view, None).await?;
        return Ok((StatusCode::BAD_REQUEST, page).into_response());
    };
    match citations::name_release(
        &state.pool,
        Some(me.account_id),
        &form.name,
        version,
        &form.note,
    )
    .await
    {
        // A release name needs no escaping in a query (letters, digits, '.', '-', '_').
        Ok(release) => {
            Ok(Redirect::to(&format!("/releases?named={}", release.name)).into_response())
        }
        Err(ReleaseError::Db(e)) => Err(AppError::from(e)),
        Err(e) => {
            let status = match e {
                ReleaseError::Taken { .. } => StatusCode::CONFLICT,
                _ => StatusCode::BAD_REQUEST,
            };
            let message = Some(e.to_string());
            match e {
                ReleaseError::BadName(_) | ReleaseError::Taken { .. } => view.name_error = message,
                ReleaseError::NoSuchVersion { .. } => view.version_error = message,
                _ => view.note_error = message,
            }
            let page = page(&state, nav, view, None).await?;
            Ok((status, page).into_response())
        }
    }
}
