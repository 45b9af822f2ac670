//! `/`: the catalog at a glance.

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::State;

use crate::catalog::model::{BulgeKind, MassMethod, Morphology};
use crate::catalog::{accounts, history, overview, review_scores};
use crate::error::AppResult;
use crate::state::AppState;

/// How many recent changes the overview lists.
const RECENT_EVENTS: i64 = 10;

/// A labelled count with the link that lists those galaxies.
pub(crate) struct CountView {
    label: &'static str,
    n: i64,
    href: String,
}

/// A recent change.
pub(crate) struct EventView {
    /// Readable UTC, "2026-03-04 05:06".
    at: String,
    /// The stored RFC 3339 time, for `<time datetime>`.
    datetime: String,
    who: String,
    summary: String,
    catalog_version: i64,
}

/// `/`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/overview.html")]
pub(crate) struct OverviewPage {
    nav: super::Nav,
    catalog_version: i64,
    galaxies: i64,
    detections: i64,
    upper_limits: i64,
    pending: i64,
    by_method: Vec<CountView>,
    by_morphology: Vec<CountView>,
    by_bulge_kind: Vec<CountView>,
    events: Vec<EventView>,
}

/// Show the overview.
pub(crate) async fn show_overview(
    State(state): State<AppState>,
    nav: super::Nav,
) -> AppResult<OverviewPage> {
    let snapshot = state.fits.rows(&state.pool).await?;
    let pending = review_scores::pending_count(&state.pool).await?;
    let o = overview::of_rows(&snapshot.rows, pending);
    let version = history::current_version(&state.pool).await?;
    // Account events (logins, failures, tokens) are for the admin audit page only.
    let events = accounts::recent_catalog_events(&state.pool, RECENT_EVENTS).await?;
    let counts =
        |items: &[overview::Count], param: &str, label: &dyn Fn(&str) -> Option<&'static str>| {
            items
                .iter()
                .filter_map(|c| {
                    Some(CountView {
                        label: label(&c.key)?,
                        n: c.n,
                        href: format!("/galaxies?{param}={}", c.key),
                    })
                })
                .collect::<Vec<_>>()
        };
    Ok(OverviewPage {
        nav,
        catalog_version: version,
        galaxies: o.galaxies,
        detections: o.detections,
        upper_limits: o.upper_limits,
        pending: o.pending,
        by_method: counts(&o.by_method, "method", &|k| {
            k.parse::<MassMethod>().ok().map(MassMethod::label)
        }),
        by_morphology: counts(&o.by_morphology, "morphology", &|k| {
            k.parse::<Morphology>().ok().map(Morphology::label)
        }),
        by_bulge_kind: counts(&o.by_bulge_kind, "bulge_kind", &|k| {
            k.parse::<BulgeKind>().ok().map(BulgeKind::label)
        }),
        events: events
            .into_iter()
            .map(|e| EventView {
                at: e.at.get(..16).unwrap_or(&e.at).replace('T', " "),
                datetime: e.at,
                who: e.username.unwrap_or_else(|| "system".into()),
                summary: e.summary,
                catalog_version: e.catalog_version,
            })
            .collect(),
    })
}
