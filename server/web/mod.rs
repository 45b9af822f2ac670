//! The pages: HTML for people in browsers. Handlers are thin: read the request, call the
//! domain (`relations`, `catalog`, `auth`), and fill a page struct whose fields are already
//! formatted for display.
//!
//! [`door`] lists every page with the [`Access`] it asks for (`router::Routes::add`) and draws
//! every error answer on a page path ([`error_page`]: an HTML page with the visitor's session
//! links; a visitor who must log in is sent to the login page). Static files are compiled into
//! the binary, so a deployed server needs no files beside it.

mod account;
mod admin;
mod api_page;
mod changes;
mod display;
mod error_page;
mod escape;
mod exports;
mod fits;
mod galaxies;
mod kinematics;
mod login;
mod overview;
mod place;
mod planning;
mod relations;
mod releases;
mod review;
mod submissions;
mod virial;

use axum::extract::FromRequestParts;
use axum::http::request::Parts;
use axum::http::{Method, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};

use crate::auth::{Access, Principal, Role};
use crate::catalog::health::WriteHealth;
use crate::router::{Door, Routes, UPLOAD_LIMIT_BYTES, no_layers};
use crate::state::AppState;

/// How long a page waits for a fit or an influence list being computed (by the background
/// analysis or another request) before it answers with what it has, saying "computing".
pub(crate) const PAGE_WAIT: std::time::Duration = crate::relations::REQUEST_WAIT;

/// The pages' door: every path but the JSON API's.
pub fn door() -> Door {
    Door {
        routes: routes(),
        owns: |path| !path.starts_with("/api/"),
        render: error_page::render,
        layers: no_layers,
    }
}

fn routes() -> Routes {
    use Access::{Admin, Public, Read, Review, Session};
    Routes::new()
        .add(Method::GET, "/", Read, get(overview::show_overview))
        .add(Method::GET, "/galaxies", Read, get(galaxies::list_galaxies))
        .add(
            Method::GET,
            "/galaxies/{slug}",
            Read,
            get(galaxies::show_galaxy),
        )
        .add(
            Method::POST,
            "/galaxies/{slug}/distance",
            Review,
            post(galaxies::change_distance),
        )
        .add(
            Method::POST,
            "/galaxies/{slug}/activity",
            Review,
            post(galaxies::change_activity),
        )
        .add(Method::GET, "/changes", Read, get(changes::show_changes))
        .add(Method::GET, "/releases", Read, get(releases::list_releases))
        .add(
            Method::POST,
            "/releases",
            Admin,
            post(releases::create_release),
        )
        .add(
            Method::GET,
            "/relations",
            Read,
            get(relations::list_relations),
        )
        .add(
            Method::GET,
            "/relations/{relation}",
            Read,
            get(relations::show_relation),
        )
        .add(
            Method::GET,
            "/relations/{relation}/chart.svg",
            Read,
            get(relations::download_chart),
        )
        .add(
            Method::GET,
            "/relations/{relation}/chart.png",
            Read,
            get(relations::download_chart_png),
        )
        .add(
            Method::GET,
            "/relations/{relation}/fit.json",
            Read,
            get(relations::download_fit),
        )
        .add(
            Method::GET,
            "/relations/{relation}/sample.csv",
            Read,
            get(relations::download_sample),
        )
        .add(
            Method::GET,
            "/relations/{relation}/sample.vot",
            Read,
            get(exports::sample_vot),
        )
        .add(
            Method::GET,
            "/relations/{relation}/sample.tex",
            Read,
            get(exports::sample_tex),
        )
        .add(
            Method::GET,
            "/relations/{relation}/fit.tex",
            Read,
            get(exports::fit_tex),
        )
        .add(
            Method::GET,
            "/relations/{relation}/methods.txt",
            Read,
            get(exports::methods_txt),
        )
        .add(
            Method::POST,
            "/relations/{relation}/runs",
            Session,
            post(relations::start_run),
        )
        .add(
            Method::GET,
            "/virial-factor",
            Read,
            get(virial::show_virial_factor),
        )
        .add(
            Method::POST,
            "/virial-factor/adopt",
            Admin,
            post(virial::adopt),
        )
        .add(Method::GET, "/fits/{id}", Read, get(fits::show_fit))
        .add(Method::GET, "/place", Read, get(place::show_place))
        .add(
            Method::GET,
            "/kinematics",
            Read,
            get(kinematics::show_kinematics),
        )
        .add_limited(
            Method::POST,
            "/kinematics",
            Read,
            post(kinematics::fit_kinematics),
            kinematics::FORM_LIMIT_BYTES,
        )
        .add(Method::GET, "/planning", Read, get(planning::show_planning))
        .add(
            Method::POST,
            "/planning",
            Read,
            post(planning::run_planning),
        )
        .add(
            Method::POST,
            "/planning/download",
            Read,
            post(planning::download_plan),
        )
        .add(
            Method::GET,
            "/planning/candidates.csv",
            Read,
            get(planning::example_file),
        )
        .add(
            Method::POST,
            "/planning/resolutions",
            Session,
            post(planning::save_resolutions),
        )
        .add(
            Method::POST,
            "/planning/resolutions/{id}/delete",
            Session,
            post(planning::delete_resolution),
        )
        .add(
            Method::GET,
            "/static/planning.js",
            Public,
            get(planning::script),
        )
        .add(Method::GET, "/healthz", Public, get(healthz))
        .add(Method::GET, "/livez", Public, get(livez))
        .add(Method::GET, "/static/massline.css", Public, get(stylesheet))
        .add(
            Method::GET,
            "/static/submission.js",
            Public,
            get(submission_script),
        )
        .add(
            Method::GET,
            "/static/runs.js",
            Public,
            get(relations::runs_script),
        )
        .add(Method::GET, "/login", Public, get(login::show_login))
        .add(Method::POST, "/login", Public, post(login::log_in))
        .add(Method::POST, "/logout", Session, post(login::log_out))
        .add(Method::GET, "/account", Session, get(account::show_account))
        .add(
            Method::POST,
            "/account/tokens",
            Session,
            post(account::create_token),
        )
        .add(
            Method::POST,
            "/account/tokens/{id}/revoke",
            Session,
            post(account::revoke_token),
        )
        .add(
            Method::GET,
            "/admin/accounts",
            Admin,
            get(admin::list_accounts),
        )
        .add(
            Method::POST,
            "/admin/accounts",
            Admin,
            post(admin::create_account),
        )
        .add(
            Method::POST,
            "/admin/accounts/{id}/role",
            Admin,
            post(admin::change_role),
        )
        .add(
            Method::POST,
            "/admin/accounts/{id}/disable",
            Admin,
            post(admin::disable_account),
        )
        .add(Method::GET, "/admin/audit", Admin, get(admin::show_audit))
        .add(
            Method::GET,
            "/submissions",
            Session,
            get(submissions::list_submissions),
        )
        .add(
            Method::GET,
            "/submissions/new",
            Session,
            get(submissions::new_submission),
        )
        .add(
            Method::POST,
            "/submissions/new",
            Session,
            post(submissions::create_submission),
        )
        .add(
            Method::GET,
            "/submissions/upload",
            Session,
            get(submissions::show_upload),
        )
        .add_limited(
            Method::POST,
            "/submissions/upload",
            Session,
            post(submissions::upload),
            UPLOAD_LIMIT_BYTES,
        )
        .add(
            Method::GET,
            "/catalog.csv",
            Read,
            get(submissions::download_catalog),
        )
        .add(
            Method::GET,
            "/catalog.json",
            Read,
            get(submissions::download_catalog_json),
        )
        .add(Method::GET, "/catalog.vot", Read, get(exports::catalog_vot))
        .add(
            Method::GET,
            "/submissions/{id}",
            Session,
            get(submissions::show_submission),
        )
        .add(
            Method::POST,
            "/submissions/{id}/withdraw",
            Session,
            post(submissions::withdraw_submission),
        )
        .add(Method::GET, "/review", Review, get(review::show_queue))
        .add(
            Method::POST,
            "/review/{id}/accept",
            Review,
            post(review::accept),
        )
        .add(
            Method::POST,
            "/review/{id}/reject",
            Review,
            post(review::reject),
        )
        .add(Method::GET, "/api", Public, get(api_page::show_api_page))
}

/// What the page header needs to know about the visitor: who is logged in, whether they may
/// see the admin pages, and the anti-forgery token for the logout form.
#[derive(Debug, Clone, Default)]
pub(crate) struct Nav {
    /// Login name of the session, if any.
    pub(crate) username: Option<String>,
    /// Whether to link the admin pages.
    pub(crate) is_admin: bool,
    /// Whether to link the review queue.
    pub(crate) is_reviewer: bool,
    /// The session's anti-forgery token ("" without a session).
    pub(crate) csrf: String,
    /// The path asked for, which marks the navigation link of the current section
    /// (`aria-current="page"`); "" when unknown.
    pub(crate) path: String,
}

impl Nav {
    pub(crate) fn from_principal(principal: &Principal) -> Self {
        match principal {
            Principal::Session(s) => Self {
                username: Some(s.username.clone()),
                is_admin: s.role.includes(Role::Admin),
                is_reviewer: s.role.includes(Role::Reviewer),
                csrf: s.csrf_token.clone(),
                path: String::new(),
            },
            _ => Self::default(),
        }
    }

    /// The same visitor on `path` (its query, if any, ignored).
    pub(crate) fn on(mut self, path: &str) -> Self {
        path.split(['?', '#'])
            .next()
            .unwrap_or_default()
            .clone_into(&mut self.path);
        self
    }

    /// Whether `section` is the section of the page shown: the overview only on `/`, any
    /// other section on its own path and every path below it.
    pub(crate) fn is_current(&self, section: &str) -> bool {
        if section == "/" {
            return self.path == "/";
        }
        self.path
            .strip_prefix(section)
            .is_some_and(|rest| rest.is_empty() || rest.starts_with('/'))
    }
}

impl<S: Send + Sync> FromRequestParts<S> for Nav {
    type Rejection = std::convert::Infallible;

    async fn from_request_parts(parts: &mut Parts, _state: &S) -> Result<Self, Self::Rejection> {
        Ok(parts
            .extensions
            .get::<Principal>()
            .map(Self::from_principal)
            .unwrap_or_default()
            .on(parts.uri.path()))
    }
}

/// Readiness: 200 "ok" when the database can take a write, else 503 with the reason in one
/// sentence (`catalog::health`: free disk, the write lock, room below the page limit; probed at
/// most once a second).
async fn healthz(axum::extract::State(state): axum::extract::State<AppState>) -> Response {
    match state.write_check.check().await {
        WriteHealth::Ready => plain_text(StatusCode::OK, "ok\n".to_owned()),
        WriteHealth::Refused(reason) => {
            plain_text(StatusCode::SERVICE_UNAVAILABLE, format!("{reason}\n"))
        }
    }
}

/// Liveness: 200 "ok" whenever the server answers at all; it never touches the database, so a
/// full disk or a held lock does not make a supervisor restart a server that would recover.
async fn livez() -> Response {
    plain_text(StatusCode::OK, "ok\n".to_owned())
}

/// A plain-text answer that no cache keeps (health answers change from one second to the next).
fn plain_text(status: StatusCode, body: String) -> Response {
    (
        status,
        [
            (header::CONTENT_TYPE, "text/plain; charset=utf-8"),
            (header::CACHE_CONTROL, "no-store"),
        ],
        body,
    )
        .into_response()
}

const STYLESHEET: &str = include_str!("../../static/massline.css");

/// The submission form's script (progressive: the form works without it).
const SUBMISSION_SCRIPT: &str = include_str!("../../static/submission.js");

async fn submission_script() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=3600"),
        ],
        SUBMISSION_SCRIPT,
    )
        .into_response()
}

async fn stylesheet() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/css; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=3600"),
        ],
        STYLESHEET,
    )
        .into_response()
}

#[cfg(test)]
mod tests {
    use super::Nav;

    #[test]
    fn the_current_section_is_the_path_or_a_path_below_it_and_the_overview_only_itself() {
        let on = |path: &str| Nav::default().on(path);
        assert!(on("/").is_current("/"));
        assert!(!on("/galaxies").is_current("/"));
        assert!(on("/galaxies").is_current("/galaxies"));
        assert!(on("/galaxies/some-galaxy?x=1").is_current("/galaxies"));
        assert!(on("/galaxies?sort=sigma").is_current("/galaxies"));
        assert!(!on("/galaxies-other").is_current("/galaxies"));
        assert!(!on("/api/v1/fit").is_current("/place"));
        assert!(
            !Nav::default().is_current("/"),
            "an unknown path marks nothing"
        );
    }
}
