//! `/changes?from=N&to=M`: what changed between two catalog versions (galaxies added, values
//! adopted or replaced, distances changed, and how each relation's default fit moved), from
//! `relations::changes`.

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};

use super::display::{Uncertain, code_label, fixed, readable_utc, signed, with_errors};
use crate::catalog::changes::{AdoptedChange, DistanceChange};
use crate::error::{AppError, AppResult, join_problems};
use crate::relations::changes::{
    Changes, GalaxyAdded, RangeAsk, RangeError, RelationChange, accepted_by, changes, resolve_range,
};
use crate::state::AppState;
use crate::units::Quantity;

/// A galaxy added, for the page.
pub(crate) struct AddedView {
    name: String,
    slug: String,
    version: i64,
    values: Vec<String>,
}

/// A value adopted or replaced.
pub(crate) struct ValueView {
    galaxy: String,
    slug: String,
    quantity: String,
    old: String,
    new: String,
    version: i64,
    by: String,
    note: String,
}

/// A galaxy property (its distance, its activity class) changed.
pub(crate) struct PropertyChangeView {
    galaxy: String,
    slug: String,
    old: String,
    new: String,
    version: i64,
    by: String,
    note: String,
}

impl PropertyChangeView {
    /// An activity class changed in the range, in the same table shape as a distance.
    fn of_activity(c: &crate::catalog::changes::ActivityChange) -> Self {
        let label = |w: &str| {
            w.parse::<crate::catalog::model::Activity>()
                .map_or("unknown", crate::catalog::model::Activity::label)
                .to_owned()
        };
        Self {
            galaxy: c.galaxy_name.clone(),
            slug: c.slug.clone(),
            old: label(&c.old_activity),
            new: label(&c.new_activity),
            version: c.catalog_version,
            by: changed_by(c.changed_by.as_ref()),
            note: c.note(),
        }
    }
}

/// Who made a change, in words.
fn changed_by(name: Option<&String>) -> String {
    name.cloned()
        .unwrap_or_else(|| "no account (the system)".to_owned())
}

/// One parameter of one relation.
pub(crate) struct ParamView {
    symbol: &'static str,
    from: String,
    to: String,
    delta: String,
    significance: String,
}

/// One relation.
pub(crate) struct RelationView {
    label: String,
    slug: String,
    n_from: String,
    n_to: String,
    params: Vec<ParamView>,
    problems: Vec<String>,
}

/// `/changes`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/changes.html")]
pub(crate) struct ChangesPage {
    nav: super::Nav,
    from: i64,
    to: i64,
    current: i64,
    from_made: String,
    to_made: String,
    added: Vec<AddedView>,
    values: Vec<ValueView>,
    distances: Vec<PropertyChangeView>,
    activities: Vec<PropertyChangeView>,
    relations: Vec<RelationView>,
    factors: Vec<FactorView>,
}

/// A virial factor adopted in the range.
pub(crate) struct FactorView {
    width: &'static str,
    old: String,
    new: String,
    version: i64,
    by: String,
    source: String,
}

impl FactorView {
    fn of(c: &crate::relations::changes::FactorChange) -> Self {
        Self {
            width: c
                .width_definition
                .parse::<crate::catalog::model::WidthDefinition>()
                .map_or("unknown width", |w| w.label()),
            old: c.old_log_f.map_or_else(|| "—".to_owned(), |v| fixed(v, 3)),
            new: with_errors(Uncertain::symmetric(c.new_log_f.0, c.new_log_f.1), 3),
            version: c.catalog_version,
            by: c
                .adopted_by
                .clone()
                .unwrap_or_else(|| "command line".to_owned()),
            source: c.source.clone(),
        }
    }
}

/// A quantity and band in words ("black-hole mass", "bulge luminosity (K)").
pub(crate) fn quantity_words(quantity: &str, band: &str) -> String {
    let label = Quantity::parse_measured(quantity)
        .map_or_else(|_| code_label(quantity), |q| q.label().to_owned());
    if band.is_empty() {
        label
    } else {
        format!("{label} ({band})")
    }
}

/// The parameter's symbol on the page.
fn symbol(name: &str) -> &'static str {
    match name {
        "alpha" => "α",
        "beta" => "β",
        "gamma" => "γ",
        _ => "ε",
    }
}

/// A value ± error as the relation pages show a parameter.
fn param_text(value: Option<(f64, f64)>) -> String {
    value.map_or_else(
        || "—".to_owned(),
        |(v, e)| with_errors(Uncertain::symmetric(v, e), 3),
    )
}

/// A distance with its error (Mpc, the column names the unit) and method.
fn distance_text(d: f64, err: f64, method: &str) -> String {
    format!(
        "{} ({})",
        with_errors(Uncertain::symmetric(d, err), 1),
        code_label(method)
    )
}

impl ValueView {
    fn of(c: &AdoptedChange) -> Self {
        Self {
            galaxy: c.galaxy_name.clone(),
            slug: c.slug.clone(),
            quantity: quantity_words(&c.quantity, &c.band),
            old: c
                .old_value_text
                .clone()
                .unwrap_or_else(|| "none".to_owned()),
            new: c.new_value_text.clone(),
            version: c.catalog_version,
            by: accepted_by(c),
            note: c.review_note.clone(),
        }
    }
}

impl PropertyChangeView {
    fn of(c: &DistanceChange) -> Self {
        Self {
            galaxy: c.galaxy_name.clone(),
            slug: c.slug.clone(),
            old: distance_text(c.old_distance_mpc, c.old_distance_err_mpc, &c.old_method),
            new: distance_text(c.new_distance_mpc, c.new_distance_err_mpc, &c.new_method),
            version: c.catalog_version,
            by: changed_by(c.changed_by.as_ref()),
            note: c.note(),
        }
    }
}

impl AddedView {
    fn of(g: &GalaxyAdded) -> Self {
        Self {
            name: g.galaxy.name.clone(),
            slug: g.galaxy.slug.clone(),
            version: g.galaxy.catalog_version,
            values: g
                .values
                .iter()
                .map(|v| format!("{}: {}", quantity_words(&v.quantity, &v.band), v.value_text))
                .collect(),
        }
    }
}

impl RelationView {
    fn of(r: &RelationChange) -> Self {
        let n = |n: Option<usize>| n.map_or_else(|| "—".to_owned(), |n| n.to_string());
        Self {
            label: r.relation.label(),
            slug: r.relation.slug(),
            n_from: n(r.n_from),
            n_to: n(r.n_to),
            params: r
                .params
                .iter()
                .map(|p| ParamView {
                    symbol: symbol(p.name),
                    from: param_text(p.from),
                    to: param_text(p.to),
                    delta: p.delta().map_or_else(|| "—".to_owned(), |d| signed(d, 3)),
                    significance: p
                        .significance()
                        .map_or_else(|| "—".to_owned(), |s| fixed(s, 1)),
                })
                .collect(),
            problems: r.problems.clone(),
        }
    }
}

impl ChangesPage {
    fn of(nav: super::Nav, c: &Changes) -> Self {
        let made = |at: &Option<String>| at.as_deref().map(readable_utc).unwrap_or_default();
        Self {
            nav,
            from: c.from.version,
            to: c.to.version,
            current: c.to.current,
            from_made: made(&c.from_made_at),
            to_made: made(&c.to_made_at),
            added: c.galaxies_added.iter().map(AddedView::of).collect(),
            values: c.values.iter().map(ValueView::of).collect(),
            distances: c.distances.iter().map(PropertyChangeView::of).collect(),
            activities: c
                .activities
                .iter()
                .map(PropertyChangeView::of_activity)
                .collect(),
            relations: c.relations.iter().map(RelationView::of).collect(),
            factors: c.virial_factors.iter().map(FactorView::of).collect(),
        }
    }
}

/// The range a page asks for, resolved; a bad parameter or a range that does not run forward
/// is a 400 with its sentence.
///
/// # Errors
/// 400, or 404/410 for versions outside the history.
pub(crate) async fn range(
    state: &AppState,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Changes> {
    let pairs = crate::router::query_pairs(query)?;
    let ask = RangeAsk::read(&pairs)
        .map_err(|e| AppError::bad_request(join_problems(e.into_iter().map(|f| f.message))))?;
    let (from, to) = resolve_range(&state.pool, ask).await.map_err(|e| match e {
        RangeError::NotForward | RangeError::NothingBefore(_) => {
            AppError::bad_request(e.to_string())
        }
        RangeError::Version(v) => v.into(),
    })?;
    Ok(changes(&state.catalog(), from, to).await?)
}

/// Show what changed between two versions.
pub(crate) async fn show_changes(
    State(state): State<AppState>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<ChangesPage> {
    let c = range(&state, query).await?;
    Ok(ChangesPage::of(nav, &c))
}
