//! The relation pages: `/relations` (every relation with its current fit) and
//! `/relations/{relation}` (one relation with its controls, chart, residuals, outliers,
//! influence and zero-point offset), with its downloads (chart SVG, fit JSON, sample CSV).

use std::sync::Arc;

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::http::header;
use axum::response::{IntoResponse, Redirect, Response};

use super::display::{Uncertain, VersionNote, fixed, significant, with_errors};
use crate::auth::Principal;
use crate::catalog::history::{Pinned, VersionAsk};
use crate::catalog::model::{BulgeKind, CentreKind, MassMethod, Morphology};
use crate::charts::{
    BandPoint, ChartPoint, Group, LineSpec, RelationChart, ResidualChart, relation_svg,
    residual_svg,
};
use crate::error::{AppError, AppResult};
use crate::fit::{Fit, Method, Point, Shape};
use crate::relations::analysis::{Subset, flagged, most_influential, offset_between};
use crate::relations::{
    Catalog, DEFAULT_REPLICATES, DEFAULT_STEPS, FitChoice, FitOutcome, LimitsChoice, Member,
    Relation, RunKind, RunStatus, read_pivot_typed, run_status, stored_run,
};
use crate::state::AppState;

/// How many of the most influential objects are listed.
const TOP_INFLUENCE: usize = 5;

/// Objects the two residual charts of a relation page draw one by one above the density
/// threshold (the relation chart draws up to `charts::MAX_EMPHASISED`): the page carries three
/// charts and stays under 500 kB.
const RESIDUAL_EMPHASISED: usize = 100;

/// Rows of the page's list of objects in tension or outliers; the rest are counted (the sample
/// download and the API list them all).
const FLAGGED_ROWS: usize = 100;
/// Samples of the mean-relation band across the x range.
const BAND_SAMPLES: usize = 41;

/// How markers are grouped on the charts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Grouping {
    Morphology,
    BulgeKind,
    Method,
    Activity,
}

impl Grouping {
    const ALL: [(Grouping, &'static str, &'static str); 4] = [
        (Grouping::Morphology, "morphology", "morphology"),
        (Grouping::BulgeKind, "bulge_kind", "bulge kind"),
        (Grouping::Method, "method", "mass method"),
        (
            Grouping::Activity,
            "activity",
            "nucleus (quiescent or active)",
        ),
    ];

    fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(g, _, _)| *g == self)
            .map_or("morphology", |(_, s, _)| s)
    }

    /// The member's stored word for this grouping.
    fn word(self, m: &Member) -> &str {
        match self {
            Grouping::Morphology => &m.morphology,
            Grouping::BulgeKind => &m.bulge_kind,
            Grouping::Method => &m.mass_method,
            Grouping::Activity => &m.activity,
        }
    }

    /// Every (stored word, label) of this grouping, in display order.
    fn values(self) -> Vec<(&'static str, &'static str)> {
        match self {
            Grouping::Morphology => Morphology::pairs(),
            Grouping::BulgeKind => BulgeKind::pairs(),
            Grouping::Method => MassMethod::pairs(),
            Grouping::Activity => crate::catalog::model::Activity::pairs(),
        }
    }
}

/// The second property of the residual chart.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Versus {
    Distance,
    Sigma,
    BulgeMass,
}

impl Versus {
    const ALL: [(Versus, &'static str, &'static str); 3] = [
        (Versus::Distance, "distance", "distance"),
        (Versus::Sigma, "sigma", "velocity dispersion"),
        (Versus::BulgeMass, "bulge_mass", "bulge mass"),
    ];

    fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(v, _, _)| *v == self)
            .map_or("distance", |(_, s, _)| s)
    }

    fn axis_label(self) -> String {
        match self {
            Versus::Distance => "log₁₀ D [Mpc]".to_owned(),
            Versus::Sigma => crate::charts::sigma_axis_label(),
            Versus::BulgeMass => crate::charts::bulge_mass_axis_label(),
        }
    }

    fn value(self, m: &Member) -> Option<f64> {
        match self {
            Versus::Distance => Some(m.log_distance),
            Versus::Sigma => m.log_sigma,
            Versus::BulgeMass => m.log_mbulge,
        }
    }
}

/// The relation page's query, validated.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct RelationQuery {
    /// The estimator, galaxies and pivots.
    pub(crate) fit: FitChoice,
    pub(crate) group: Grouping,
    pub(crate) versus: Versus,
    pub(crate) offset_a: Option<Subset>,
    pub(crate) offset_b: Option<Subset>,
    /// Bootstrap replicates of the run shown (and started).
    pub(crate) replicates: usize,
    /// Posterior steps of the run shown (and started).
    pub(crate) steps: usize,
}

impl Default for RelationQuery {
    fn default() -> Self {
        Self {
            fit: FitChoice::default(),
            group: Grouping::Morphology,
            versus: Versus::Distance,
            offset_a: None,
            offset_b: None,
            replicates: DEFAULT_REPLICATES,
            steps: DEFAULT_STEPS,
        }
    }
}

const RELATION_PARAMS: &str = "method, morphology, bulge_kind, centre_kind, mass_method, masses, activity, soi, sigma_definition, limits, pivot, pivot2, group, versus, offset_a, offset_b, replicates, steps";

/// A run size as typed (replicates or steps), checked against the kind's range.
fn run_size(kind: RunKind, value: &str) -> Result<usize, String> {
    let n = value.parse::<usize>().map_err(|_| {
        format!(
            "'{}' is not a whole number",
            value.chars().take(40).collect::<String>()
        )
    })?;
    RunKind::parse(kind.as_str(), n.max(1))
        .map(|(_, n)| n)
        .map_err(|e| e.trim_end_matches('.').to_owned())
}

/// A query value the page could not use: the parameter and one sentence.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct QueryProblem {
    /// The parameter as given (cut to 40 characters).
    pub(crate) field: String,
    /// What is wrong and what to type.
    pub(crate) message: String,
}

/// What the reader typed into the pivot fields and how it was read.
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct PivotEcho {
    /// The text of `pivot` as typed, when it was not a bare log10 value or was refused.
    pub(crate) pivot_text: Option<String>,
    /// "read as …" of `pivot`.
    pub(crate) pivot_read_as: Option<String>,
    /// As `pivot_text`, for `pivot2`.
    pub(crate) pivot2_text: Option<String>,
    /// As `pivot_read_as`, for `pivot2`.
    pub(crate) pivot2_read_as: Option<String>,
}

/// A query as read: the values the page uses (the default for each parameter at fault), the
/// problems, and what the pivot fields echo.
#[derive(Debug, Clone, Default)]
pub(crate) struct QueryRead {
    pub(crate) query: RelationQuery,
    pub(crate) problems: Vec<QueryProblem>,
    pub(crate) echo: PivotEcho,
}

impl RelationQuery {
    /// Reads the query parameters for `relation`, keeping the default of each parameter at
    /// fault and saying why in one sentence naming it. Pivots are read as typed
    /// (`relations::read_pivot_typed`: `200`, `200 km/s` or a log10 value).
    pub(crate) fn read(pairs: &[(String, String)], relation: &Relation) -> QueryRead {
        let mut q = Self::default();
        let mut problems = Vec::new();
        let mut echo = PivotEcho::default();
        for (key, value) in pairs {
            let field = key.chars().take(40).collect::<String>();
            let mut problem = |message: String| {
                problems.push(QueryProblem {
                    field: field.clone(),
                    message,
                });
            };
            if (key == "pivot" || key == "pivot2") && !value.trim().is_empty() {
                let quantity = if key == "pivot" {
                    relation.x_quantity()
                } else {
                    crate::units::Quantity::BulgeMass
                };
                let (text, read_as) = if key == "pivot" {
                    (&mut echo.pivot_text, &mut echo.pivot_read_as)
                } else {
                    (&mut echo.pivot2_text, &mut echo.pivot2_read_as)
                };
                match read_pivot_typed(value, quantity) {
                    Ok(typed) => {
                        if key == "pivot" {
                            q.fit.pivot = Some(typed.log_value);
                        } else {
                            q.fit.pivot2 = Some(typed.log_value);
                        }
                        if typed.read_as.is_some() {
                            *text = Some(value.trim().chars().take(40).collect());
                        }
                        *read_as = typed.read_as;
                    }
                    Err(e) => {
                        *text = Some(value.trim().chars().take(40).collect());
                        problem(format!("Parameter '{key}': {e}."));
                    }
                }
                continue;
            }
            match q.fit.set(key, value) {
                Ok(true) => continue,
                Ok(false) => {}
                Err(e) => {
                    problem(e);
                    continue;
                }
            }
            let value = value.trim();
            if value.is_empty() {
                continue;
            }
            let result: Result<(), String> = match key.as_str() {
                "group" => Grouping::ALL
                    .iter()
                    .find(|(_, s, _)| *s == value)
                    .map(|(g, _, _)| q.group = *g)
                    .ok_or_else(|| "it is not one of: morphology, bulge_kind, method".to_owned()),
                "versus" => Versus::ALL
                    .iter()
                    .find(|(_, s, _)| *s == value)
                    .map(|(v, _, _)| q.versus = *v)
                    .ok_or_else(|| "it is not one of: distance, sigma, bulge_mass".to_owned()),
                "offset_a" => Subset::parse(value).map(|s| q.offset_a = Some(s)),
                "offset_b" => Subset::parse(value).map(|s| q.offset_b = Some(s)),
                "replicates" => run_size(RunKind::Bootstrap, value).map(|n| q.replicates = n),
                "steps" => run_size(RunKind::Posterior, value).map(|n| q.steps = n),
                _ => {
                    problem(format!(
                        "'{field}' is not a parameter of this page (it accepts {RELATION_PARAMS})."
                    ));
                    continue;
                }
            };
            if let Err(e) = result {
                problem(format!("Parameter '{key}': {e}."));
            }
        }
        QueryRead {
            query: q,
            problems,
            echo,
        }
    }

    /// Reads the query parameters strictly (downloads and the run form): every problem becomes
    /// one sentence naming the parameter.
    pub(crate) fn parse(pairs: &[(String, String)], relation: &Relation) -> Result<Self, String> {
        let read = Self::read(pairs, relation);
        if read.problems.is_empty() {
            Ok(read.query)
        } else {
            Err(crate::error::join_problems(
                read.problems
                    .into_iter()
                    .map(|p| p.message)
                    .collect::<Vec<_>>(),
            ))
        }
    }

    /// The query string (without '?') that reproduces this query; empty for the defaults.
    pub(crate) fn to_query_string(&self) -> String {
        let mut pairs = self.fit.query_pairs();
        if self.group != Grouping::Morphology {
            pairs.push(("group", self.group.as_str().to_owned()));
        }
        if self.versus != Versus::Distance {
            pairs.push(("versus", self.versus.as_str().to_owned()));
        }
        if let Some(s) = self.offset_a {
            pairs.push(("offset_a", s.code()));
        }
        if let Some(s) = self.offset_b {
            pairs.push(("offset_b", s.code()));
        }
        if self.replicates != DEFAULT_REPLICATES {
            pairs.push(("replicates", self.replicates.to_string()));
        }
        if self.steps != DEFAULT_STEPS {
            pairs.push(("steps", self.steps.to_string()));
        }
        serde_urlencoded::to_string(&pairs).unwrap_or_default()
    }
}

/// What a relation page or download is asked for: the catalog at the version asked for, the
/// relation, and the page's own query parameters.
pub(crate) struct Target {
    /// The catalog at the version asked for.
    pub(crate) catalog: Catalog,
    /// That version, resolved.
    pub(crate) pinned: Pinned,
    /// How it was asked for (repeated in the page's links).
    pub(crate) ask: VersionAsk,
    /// The relation named in the URL.
    pub(crate) relation: Relation,
    /// The query parameters without `version` and `release`.
    pub(crate) pairs: Vec<(String, String)>,
}

impl Target {
    /// The query text (without '?') that asks for `q` at this version again.
    pub(crate) fn query_plain(&self, q: &RelationQuery) -> String {
        with_version(q.to_query_string(), &self.ask)
    }
}

/// `plain` (a query without '?') with the version asked for appended.
pub(crate) fn with_version(plain: String, ask: &VersionAsk) -> String {
    let version = ask.query();
    match (plain.is_empty(), version.is_empty()) {
        (_, true) => plain,
        (true, false) => version,
        (false, false) => format!("{plain}&{version}"),
    }
}

/// The catalog version a request names (`version`, `release`) and its other parameters.
///
/// # Errors
/// 400 for a query that cannot be read or a version that is not a number; 404 for a version
/// not made yet or an unknown release; 410 for a version older than the history.
pub(crate) async fn versioned(
    state: &AppState,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<(Catalog, Pinned, VersionAsk, Vec<(String, String)>)> {
    versioned_pairs(state, crate::router::query_pairs(query)?).await
}

/// [`versioned`] for query pairs already read.
///
/// # Errors
/// As [`versioned`].
pub(crate) async fn versioned_pairs(
    state: &AppState,
    pairs: Vec<(String, String)>,
) -> AppResult<(Catalog, Pinned, VersionAsk, Vec<(String, String)>)> {
    let (ask, pairs) = VersionAsk::split(pairs).map_err(AppError::bad_request)?;
    let (catalog, pinned) = state.catalog_at(&ask).await?;
    Ok((catalog, pinned, ask, pairs))
}

/// The [`Target`] of a relation page or download, or 404 for a relation the version lacks.
pub(crate) async fn target(
    state: &AppState,
    slug: &str,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Target> {
    target_of(state, slug, crate::router::query_pairs(query)?).await
}

/// [`target`] for query pairs already read.
async fn target_of(
    state: &AppState,
    slug: &str,
    pairs: Vec<(String, String)>,
) -> AppResult<Target> {
    let (catalog, pinned, ask, pairs) = versioned_pairs(state, pairs).await?;
    let bands = catalog.bands().await?;
    let relation =
        Relation::from_slug(slug, &bands).map_err(|e| AppError::not_found(e.to_string()))?;
    Ok(Target {
        catalog,
        pinned,
        ask,
        relation,
        pairs,
    })
}

pub(crate) fn read_query(t: &Target) -> AppResult<RelationQuery> {
    RelationQuery::parse(&t.pairs, &t.relation).map_err(AppError::bad_request)
}

pub(crate) async fn fit_for(t: &Target, q: &RelationQuery) -> AppResult<Arc<FitOutcome>> {
    Ok(t.catalog
        .fitted(
            &t.relation,
            q.fit.method,
            &q.fit.filter,
            q.fit.pivots(&t.relation),
        )
        .await?)
}

/// A fit as a page shows it: the current version's, or while that is being computed the
/// newest older one, with the version being computed.
struct Shown {
    outcome: Arc<FitOutcome>,
    /// The catalog version whose fit is still being computed, when `outcome` is older.
    computing: Option<i64>,
}

/// The fit a page shows ([`Shown`]), waiting at most [`super::PAGE_WAIT`]; `Err(version)` when no
/// version's fit is ready yet.
async fn fit_shown(
    catalog: &Catalog,
    relation: &Relation,
    q: &RelationQuery,
) -> AppResult<Result<Shown, i64>> {
    let choice = (
        relation,
        q.fit.method,
        &q.fit.filter,
        q.fit.pivots(relation),
    );
    Ok(
        match catalog
            .fitted_within(choice, Some(super::PAGE_WAIT))
            .await?
        {
            Ok(outcome) => Ok(Shown {
                outcome,
                computing: None,
            }),
            Err(key) => catalog
                .fits
                .latest(&key)
                .map(|outcome| Shown {
                    outcome,
                    computing: Some(key.catalog_version),
                })
                .ok_or(key.catalog_version),
        },
    )
}

/// The sentence a page shows while a newer version's fit is being computed.
fn computing_note(shown_version: i64, computing: i64) -> String {
    format!(
        "Computing: the fit of catalog version {computing} is under way; shown meanwhile is the fit of version {shown_version}. This page reloads itself."
    )
}

/// A parameter with its error, rounded to the error; without an error (FITEXY's and BCES's
/// ε have none), to three decimals, a thousandth of a dex.
fn with_error(value: f64, err: f64) -> String {
    with_errors(Uncertain::symmetric(value, err), 3)
}

/// "1 galaxy", "2 galaxies".
fn count(n: usize, one: &str, many: &str) -> String {
    if n == 1 {
        format!("1 {one}")
    } else {
        format!("{n} {many}")
    }
}

/// A time for a page: readable UTC text, with the RFC 3339 form for `<time datetime>`.
pub(crate) struct TimeView {
    iso: String,
    text: String,
}

/// "2 December 2026, 23:33 UTC" from an RFC 3339 time; the text as given if it cannot be read.
fn utc_time(iso: &str) -> TimeView {
    use time::format_description::well_known::Rfc3339;
    let text = time::OffsetDateTime::parse(iso, &Rfc3339)
        .ok()
        .map(|t| t.to_offset(time::UtcOffset::UTC))
        .and_then(|t| {
            let format = time::macros::format_description!(
                "[day padding:none] [month repr:long] [year], [hour]:[minute] UTC"
            );
            t.format(&format).ok()
        })
        .unwrap_or_else(|| iso.to_owned());
    TimeView {
        iso: iso.to_owned(),
        text,
    }
}

/// A parameter's reported value ± its error (`fit.intervals`), if the fit has it.
fn reported(fit: &Fit, name: &str) -> Option<String> {
    fit.intervals
        .get(name)
        .map(|iv| with_error(iv.estimate, iv.error))
}

/// One relation on `/relations`.
pub(crate) struct RelationSummary {
    pub(crate) label: String,
    pub(crate) slug: String,
    pub(crate) x_label: String,
    pub(crate) alpha: String,
    pub(crate) beta: String,
    pub(crate) gamma: Option<String>,
    pub(crate) eps: String,
    pub(crate) n: String,
    pub(crate) problem: Option<String>,
}

/// `/relations`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/relations_list.html")]
pub(crate) struct RelationsListPage {
    nav: super::Nav,
    relations: Vec<RelationSummary>,
    catalog_version: i64,
    /// Said while a fit of the current version is still being computed.
    computing: Option<String>,
    /// The catalog version named in the address, if any.
    version_note: Option<VersionNote>,
    /// `?version=N` for links of a named version, else empty.
    gq: String,
}

/// Show every relation with its structural fit, at the current version or the one named.
pub(crate) async fn list_relations(
    State(state): State<AppState>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<RelationsListPage> {
    let (catalog, pinned, ask, rest) = versioned(&state, query).await?;
    if let Some((key, _)) = rest.first() {
        return Err(AppError::bad_request(format!(
            "'{}' is not a parameter of this page (it accepts version, release).",
            key.chars().take(40).collect::<String>()
        )));
    }
    let made_at = crate::catalog::history::made_at(&state.pool, pinned.version).await?;
    let version_note = VersionNote::of(&pinned, &ask, made_at.as_deref(), "/relations".into());
    let (relations, catalog_version, computing) = summaries(&catalog).await?;
    Ok(RelationsListPage {
        nav,
        relations,
        catalog_version,
        computing: computing.map(|v| {
            format!(
                "Computing: the fits of catalog version {v} are under way; where they are not ready the newest earlier fit is shown. This page reloads itself."
            )
        }),
        gq: VersionNote::suffix(version_note.as_ref(), '?'),
        version_note,
    })
}

/// Every relation of `catalog`'s version with its default structural fit, the newest version
/// fitted, and the version still being computed, if any (a pinned catalog waits for its own
/// fits: `Catalog::fitted_within`).
///
/// # Errors
/// When the catalog cannot be read or a fitting task fails.
pub(crate) async fn summaries(
    catalog: &Catalog,
) -> AppResult<(Vec<RelationSummary>, i64, Option<i64>)> {
    let q = RelationQuery::default();
    let mut relations = Vec::new();
    let mut catalog_version = 0;
    let mut computing = None;
    for relation in catalog.relations().await? {
        let outcome = match fit_shown(catalog, &relation, &q).await? {
            Ok(shown) => {
                computing = computing.or(shown.computing);
                shown.outcome
            }
            Err(version) => {
                computing = Some(version);
                relations.push(RelationSummary {
                    label: relation.label(),
                    slug: relation.slug(),
                    x_label: relation.x_label(),
                    alpha: "—".into(),
                    beta: "—".into(),
                    gamma: None,
                    eps: "—".into(),
                    n: "—".into(),
                    problem: Some(format!(
                        "Computing: the fit of catalog version {version} is under way; this page reloads itself."
                    )),
                });
                continue;
            }
        };
        catalog_version = catalog_version.max(outcome.key.catalog_version);
        let n = sample_size(outcome.sample.n_detections(), outcome.sample.n_limits());
        let summary = match &outcome.fit {
            Ok(fit) => RelationSummary {
                label: relation.label(),
                slug: relation.slug(),
                x_label: relation.x_label(),
                alpha: reported(fit, "alpha").unwrap_or_default(),
                beta: reported(fit, "beta").unwrap_or_default(),
                gamma: reported(fit, "gamma"),
                eps: reported(fit, "eps").unwrap_or_default(),
                n,
                problem: None,
            },
            Err(e) => RelationSummary {
                label: relation.label(),
                slug: relation.slug(),
                x_label: relation.x_label(),
                alpha: "—".into(),
                beta: "—".into(),
                gamma: None,
                eps: "—".into(),
                n,
                problem: Some(e.to_string()),
            },
        };
        relations.push(summary);
    }
    Ok((relations, catalog_version, computing))
}

/// "17 measurements and 1 upper limit".
fn sample_size(detections: usize, limits: usize) -> String {
    format!(
        "{} and {}",
        count(detections, "measurement", "measurements"),
        count(limits, "upper limit", "upper limits")
    )
}

/// A select's option.
pub(crate) struct OptionView {
    value: String,
    label: String,
    selected: bool,
}

fn option(value: &str, label: &str, selected: bool) -> OptionView {
    OptionView {
        value: value.to_owned(),
        label: label.to_owned(),
        selected,
    }
}

/// A fitted parameter.
pub(crate) struct ParamView {
    pub(crate) symbol: &'static str,
    pub(crate) value: String,
    /// The 68 % interval, "lo – hi".
    pub(crate) interval68: String,
    /// The 95 % interval, "lo – hi".
    pub(crate) interval95: String,
    /// Said instead of the intervals when the estimator gives the parameter without one (FITEXY
    /// and BCES give ε so).
    pub(crate) no_interval: Option<&'static str>,
    pub(crate) unit: String,
}

/// "lo – hi" with as many decimals as the error's two significant digits need.
fn interval_text(lo: f64, hi: f64, err: f64) -> String {
    if !(lo.is_finite() && hi.is_finite()) {
        return "—".to_owned();
    }
    let decimals = if err.is_finite() && err > 0.0 {
        (1 - err.log10().floor() as i32).clamp(0, 8) as usize
    } else {
        3
    };
    format!("{lo:.decimals$} – {hi:.decimals$}").replace('-', "−")
}

/// One entry of the parameters' covariance (each pair once): narrow enough for a phone.
pub(crate) struct CovRow {
    /// "Var(α)" or "Cov(α, β)".
    pub(crate) pair: String,
    pub(crate) value: String,
    /// Its unit: the product of the two parameters' units ("dex²", "dex", "none").
    pub(crate) unit: &'static str,
}

/// A parameter's symbol and the power of dex of its unit (α, ε: dex; β, γ: dex per dex; the
/// curvature β₂: per dex).
fn param_symbol(name: &str) -> (&'static str, i32) {
    match name {
        "alpha" => ("α", 1),
        "beta" => ("β", 0),
        "beta2" => ("β₂", -1),
        "gamma" => ("γ", 0),
        "eps" => ("ε", 1),
        _ => ("?", 0),
    }
}

fn dex_power(power: i32) -> &'static str {
    match power {
        2 => "dex²",
        1 => "dex",
        0 => "none",
        -1 => "dex⁻¹",
        _ => "dex⁻²",
    }
}

/// An object named in a list, with a link.
pub(crate) struct ObjectView {
    name: String,
    slug: String,
    first: String,
    second: String,
    third: String,
}

/// The zero-point offset between two subsamples.
pub(crate) struct OffsetView {
    a: String,
    b: String,
    n_a: usize,
    n_b: usize,
    offset: String,
    significance: String,
}

/// The relation page's form: the relation and every control, filled in from the query.
pub(crate) struct Controls {
    label: String,
    slug: String,
    x_label: String,
    x2_label: Option<String>,
    method_options: Vec<OptionView>,
    morphology_options: Vec<OptionView>,
    bulge_options: Vec<OptionView>,
    centre_options: Vec<OptionView>,
    mass_method_options: Vec<OptionView>,
    masses_options: Vec<OptionView>,
    activity_options: Vec<OptionView>,
    soi_resolved: bool,
    limits_options: Vec<OptionView>,
    uses_sigma: bool,
    sigma_central: bool,
    /// The pivot field's text: as typed, or the log10 value in use.
    pivot: String,
    pivot2: String,
    /// The log10 pivots in use, for the equation.
    pivot_log: String,
    pivot2_log: String,
    pivot_unit: String,
    /// The pivot's linear unit ("km/s", "M☉", "L☉").
    pivot_linear_unit: &'static str,
    pivot_error: Option<String>,
    pivot2_error: Option<String>,
    pivot_read_as: Option<String>,
    pivot2_read_as: Option<String>,
    group_options: Vec<OptionView>,
    versus_options: Vec<OptionView>,
    offset_a_options: Vec<OptionView>,
    offset_b_options: Vec<OptionView>,
}

/// What the relation page says was fitted.
pub(crate) struct SampleSummary {
    catalog_version: i64,
    fitted_at: TimeView,
    /// "17 measurements and 1 upper limit".
    size: String,
    /// How many upper limits were left out and why.
    limits_note: Option<String>,
    method: &'static str,
    filter_text: String,
    n_detections: usize,
    n_limits: usize,
    sigma_note: Option<String>,
    virial_note: Option<String>,
    missing_note: Option<String>,
    fit_note: String,
}

/// `/relations/{relation}`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/relation_show.html")]
pub(crate) struct RelationPage {
    nav: super::Nav,
    controls: Controls,
    summary: SampleSummary,
    fit_error: Option<String>,
    /// Query values the page could not use (each replaced by its default), one sentence each.
    problems: Vec<String>,
    params: Vec<ParamView>,
    /// How the values and intervals were computed, in words.
    interval_label: String,
    cov_rows: Vec<CovRow>,
    chart_svg: String,
    residual_svg: String,
    residual2_svg: String,
    residual2_label: String,
    chart_error: Option<String>,
    outliers: Vec<ObjectView>,
    /// Objects in tension or outliers beyond the rows shown.
    outliers_more: usize,
    influential: Vec<ObjectView>,
    influence_note: Option<String>,
    offset: Option<OffsetView>,
    offset_note: Option<String>,
    query: String,
    /// The query string without '?', for the run form.
    query_plain: String,
    runs: Vec<RunView>,
    /// Reload by itself (a fit or the influence list being computed).
    refresh: bool,
    /// A run waits or runs: `static/runs.js` follows it (without script, the page reloads).
    runs_pending: bool,
    may_start: bool,
    /// Said while the current version's fit is computed and an older one is shown.
    computing: Option<String>,
    /// The catalog version named in the address, if any.
    version_note: Option<VersionNote>,
    /// `?version=N` for links to galaxy pages of a named version, else empty.
    gq: String,
    /// How to cite the fit shown.
    cite: Option<CiteView>,
}

/// The "how to cite" box of a fit.
pub(crate) struct CiteView {
    /// The fit's identifier.
    pub(crate) fit_id: String,
    /// One sentence for a paper's text.
    pub(crate) sentence: String,
    /// A BibTeX entry.
    pub(crate) bibtex: String,
}

impl CiteView {
    /// The box for a whole-sample fit (recording its identifier, `relations::citation::cite`).
    pub(crate) async fn of(
        catalog: &Catalog,
        relation: &Relation,
        outcome: &Arc<FitOutcome>,
    ) -> AppResult<Option<CiteView>> {
        use crate::relations::citation;
        if outcome.fit.is_err() {
            return Ok(None);
        }
        let fit_id = citation::cite(catalog, outcome).await;
        let version = outcome.key.catalog_version;
        let releases = crate::catalog::citations::releases_of(&catalog.pool, version).await?;
        let made = crate::catalog::history::made_at(&catalog.pool, version)
            .await?
            .unwrap_or_default();
        let method = outcome
            .key
            .method
            .parse::<Method>()
            .unwrap_or(Method::Structural);
        let label = method_label(method);
        Ok(Some(CiteView {
            sentence: citation::cite_sentence(
                &relation.label(),
                label,
                (outcome.sample.n_detections(), outcome.sample.n_limits()),
                version,
                &releases,
                &fit_id,
            ),
            bibtex: citation::bibtex(
                &relation.label_tex(),
                label,
                version,
                &releases,
                &fit_id,
                made.get(..4).unwrap_or("0000"),
            ),
            fit_id,
        }))
    }
}

/// A bootstrap or posterior run on the relation page.
pub(crate) struct RunView {
    kind: &'static str,
    title: String,
    size: usize,
    /// "stored", "queued", "running", "failed", "cancelled" or "none".
    status: &'static str,
    progress: String,
    /// When it was asked for (queued) or started (running).
    since: Option<TimeView>,
    /// The run's number on this server, which `static/runs.js` polls
    /// (`GET /api/v1/runs/{id}`) while it waits or runs.
    run_id: Option<u64>,
    /// Replicates fitted or steps done, while running (the number the script updates).
    done: usize,
    note: Option<String>,
    params: Vec<RunParamView>,
    stored_at: Option<TimeView>,
}

/// One parameter of a finished run.
pub(crate) struct RunParamView {
    /// The parameter's symbol ("α", "τ₁"), never its code.
    name: String,
    median: String,
    interval68: String,
    interval95: String,
}

/// The runs shown on a relation page: the stored result, the progress, or nothing yet.
async fn run_views(
    state: &AppState,
    outcome: &FitOutcome,
    q: &RelationQuery,
) -> AppResult<Vec<RunView>> {
    let mut views = Vec::new();
    for (kind, size) in [
        (RunKind::Bootstrap, q.replicates),
        (RunKind::Posterior, q.steps),
    ] {
        let status = if kind == RunKind::Posterior
            && !matches!(q.fit.method, Method::Structural | Method::Conditional)
        {
            RunStatus::Failed(format!(
                "The {} estimator has no likelihood, so it has no posterior.",
                q.fit.method.as_str()
            ))
        } else {
            run_status(&state.pool, &state.runs, outcome, kind, size).await?
        };
        views.push(RunView::of(kind, size, status));
    }
    Ok(views)
}

impl RunView {
    fn of(kind: RunKind, size: usize, status: RunStatus) -> Self {
        let title = match kind {
            RunKind::Bootstrap => format!(
                "Bootstrap, {size} resamples of the objects (seed {})",
                crate::relations::RUN_SEED
            ),
            RunKind::Posterior => format!(
                "Posterior, {} walkers × {size} steps, burn-in {} (seed {})",
                crate::relations::POSTERIOR_WALKERS,
                size / 5,
                crate::relations::RUN_SEED
            ),
        };
        let mut view = RunView {
            kind: kind.as_str(),
            title,
            size,
            status: "none",
            progress: String::new(),
            since: None,
            run_id: None,
            done: 0,
            note: None,
            params: Vec::new(),
            stored_at: None,
        };
        match status {
            RunStatus::None => {}
            RunStatus::Failed(why) => {
                view.status = "failed";
                view.note = Some(why);
            }
            RunStatus::Queued {
                id,
                position,
                of,
                asked_at,
            } => {
                view.status = "queued";
                view.run_id = Some(id);
                view.since = Some(utc_time(&asked_at));
                view.progress =
                    format!("position {position} of {of}; it starts when a run before it finishes");
            }
            RunStatus::Cancelled(why) => {
                view.status = "cancelled";
                view.note = Some(why);
            }
            RunStatus::Running {
                id,
                done,
                total,
                started_at,
            } => {
                view.status = "running";
                view.run_id = Some(id);
                view.since = Some(utc_time(&started_at));
                view.done = done;
                view.progress = run_progress(kind, total);
            }
            RunStatus::Stored {
                params,
                note,
                stored_at,
            } => {
                view.status = "stored";
                view.stored_at = Some(utc_time(&stored_at));
                view.note = note;
                view.params = params.iter().map(RunParamView::of).collect();
            }
        }
        view
    }
}

/// What follows the count done: "of 1000 resamples fitted" (`static/runs.js` updates the
/// count before it).
fn run_progress(kind: RunKind, total: usize) -> String {
    match kind {
        RunKind::Bootstrap => format!("of {total} resamples fitted"),
        RunKind::Posterior => format!("of {total} sampler steps done, burn-in included"),
    }
}

impl RunParamView {
    /// A parameter's median and intervals, to one digit beyond the interval's first.
    fn of(p: &crate::fit::ensemble::ParamSummary) -> Self {
        let half = (p.p84 - p.p16) / 2.0;
        let decimals = if half > 0.0 {
            (1.0 - half.log10().floor()).clamp(1.0, 6.0) as usize
        } else {
            3
        };
        RunParamView {
            name: super::display::code_label(p.name),
            median: fixed(p.median, decimals),
            interval68: format!("{} to {}", fixed(p.p16, decimals), fixed(p.p84, decimals)),
            interval95: format!(
                "{} to {}",
                fixed(p.p2_5, decimals),
                fixed(p.p97_5, decimals)
            ),
        }
    }
}

/// The run form's fields.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct RunForm {
    kind: String,
    #[serde(default)]
    size: String,
    #[serde(default)]
    query: String,
}

/// `POST /relations/{relation}/runs`: queue a bootstrap or posterior run in the background
/// and go back to the relation page, which shows its place in the queue, then its progress
/// (a run of the same settings already waiting, running or stored is shown instead; 429 when
/// the account has as many runs waiting as it may).
pub(crate) async fn start_run(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(slug): Path<String>,
    axum::Form(form): axum::Form<RunForm>,
) -> AppResult<Redirect> {
    let user = super::account::session_of(&principal)?;
    let pairs: Vec<(String, String)> = serde_urlencoded::from_str(&form.query)
        .map_err(|_| AppError::bad_request("The relation's settings could not be read."))?;
    let t = target_of(&state, &slug, pairs).await?;
    let q = read_query(&t)?;
    let size = if form.size.trim().is_empty() {
        0
    } else {
        form.size.trim().parse::<usize>().map_err(|_| {
            AppError::bad_request("Parameter 'size': give a whole number of resamples or steps.")
        })?
    };
    let (kind, size) = RunKind::parse(form.kind.trim(), size).map_err(AppError::bad_request)?;
    let outcome = fit_for(&t, &q).await?;
    if let Err(e) = &outcome.fit {
        return Err(AppError::bad_request(format!(
            "There is no fit to start a run from: {e}"
        )));
    }
    if stored_run(&state.pool, &outcome, kind, size)
        .await?
        .is_none()
    {
        state
            .runs
            .start(state.pool.clone(), user.account_id, outcome, kind, size)?;
    }
    let mut back = q.clone();
    match kind {
        RunKind::Bootstrap => back.replicates = size,
        RunKind::Posterior => back.steps = size,
    }
    let query = t.query_plain(&back);
    Ok(Redirect::to(&format!(
        "/relations/{}{}#runs",
        t.relation.slug(),
        if query.is_empty() {
            String::new()
        } else {
            format!("?{query}")
        }
    )))
}

/// The relation's y at a point of the sample (for the plane: projected to x2 = x02, i.e.
/// y − γ (x2 − x02), so the points and the line share one chart).
pub(super) fn chart_y(fit: Option<&Fit>, p: &Point) -> f64 {
    match fit {
        Some(f) if f.spec.shape == Shape::Plane => {
            p.y - f.params.gamma.unwrap_or(0.0) * (p.x2.unwrap_or(f.spec.pivot2) - f.spec.pivot2)
        }
        _ => p.y,
    }
}

fn groups_of(grouping: Grouping, members: &[Member]) -> (Vec<Group>, Vec<usize>) {
    let present: Vec<(&'static str, &'static str)> = grouping
        .values()
        .into_iter()
        .filter(|(word, _)| members.iter().any(|m| grouping.word(m) == *word))
        .collect();
    let index = members
        .iter()
        .map(|m| {
            present
                .iter()
                .position(|(w, _)| *w == grouping.word(m))
                .unwrap_or(0)
        })
        .collect();
    let groups = present
        .iter()
        .map(|(_, label)| Group {
            label: (*label).to_owned(),
        })
        .collect();
    (groups, index)
}

/// The mean-relation band: ± one standard deviation of the line's mean at each x.
///
/// ```text
/// Var ŷ(x) = Var(α) + d² Var(β) + 2 d Cov(α, β),   d = x − x0
/// ```
/// (docs/methods.md §6, the parameter part of the prediction variance; dex²).
pub(crate) fn mean_band(fit: &Fit, x_min: f64, x_max: f64) -> Vec<BandPoint> {
    if !(x_min.is_finite() && x_max.is_finite() && x_max > x_min) {
        return Vec::new();
    }
    let var_a = fit.covariance("alpha", "alpha").unwrap_or(0.0);
    let var_b = fit.covariance("beta", "beta").unwrap_or(0.0);
    let cov_ab = fit.covariance("alpha", "beta").unwrap_or(0.0);
    (0..BAND_SAMPLES)
        .map(|i| {
            let x = x_min + (x_max - x_min) * i as f64 / (BAND_SAMPLES - 1) as f64;
            let d = x - fit.spec.pivot;
            let sd = (var_a + d * d * var_b + 2.0 * d * cov_ab).max(0.0).sqrt();
            let y = fit.params.alpha + fit.params.beta * d;
            BandPoint {
                x,
                lower: y - sd,
                upper: y + sd,
            }
        })
        .collect()
}

fn chart_point(m: &Member, p: &Point, x: f64, y: f64, group: usize) -> ChartPoint {
    ChartPoint {
        name: m.name.clone(),
        href: Some(format!("/galaxies/{}", m.slug)),
        x,
        x_err: p.x_err,
        y,
        y_err_minus: p.y_err,
        y_err_plus: p.y_err,
        upper_limit: p.upper_limit,
        group,
        emphasis: false,
        outlier: false,
        // Marked on the chart as on the galaxy's page: known to be unresolved, not merely unknown.
        unresolved: m.resolved == Some(false),
    }
}

/// For each object of the sample: whether the charts draw it one by one even when they draw the
/// sample as a density. These are the objects at least in tension with the fit
/// (`relations::place::is_flagged`: |z| ≥ 2, limits only when that far below), the largest |z|
/// first, at most `cap` of them (`charts::MAX_EMPHASISED` for the relation chart,
/// [`RESIDUAL_EMPHASISED`] for the residual charts): beyond that a chart would grow past its
/// weight budget, and the list of flagged objects below the chart names them.
fn emphasised(residuals: &[crate::fit::Residual], len: usize, cap: usize) -> Vec<bool> {
    let mut flagged: Vec<&crate::fit::Residual> = residuals
        .iter()
        .filter(|r| crate::relations::place::is_flagged(r.z, r.upper_limit))
        .collect();
    flagged.sort_by(|a, b| b.z.abs().total_cmp(&a.z.abs()));
    let mut marks = vec![false; len];
    for r in flagged.into_iter().take(cap) {
        if let Some(mark) = marks.get_mut(r.index) {
            *mark = true;
        }
    }
    marks
}

/// The objects of a fit outcome as chart points, with their marker groups and the x range
/// they span: the part of a relation chart that grows with the sample (a galaxy page of a
/// survey-sized relation reads it from the fit's cache, [`shared_points`]).
pub(super) struct ChartPoints {
    pub(super) points: Vec<ChartPoint>,
    pub(super) groups: Vec<crate::charts::Group>,
    pub(super) x_range: (f64, f64),
}

/// The chart points of `outcome`: emphasised (above the density threshold) and ringed by their
/// residuals from the outcome's fit.
pub(super) fn chart_points(outcome: &FitOutcome, grouping: Grouping) -> ChartPoints {
    let fit = outcome.fit.as_ref().ok();
    let (groups, index) = groups_of(grouping, &outcome.sample.members);
    let sample = &outcome.sample.points;
    let residuals = fit
        .map(|f| crate::fit::residuals(f, sample))
        .unwrap_or_default();
    // Only a chart above the density threshold reads the marks.
    let marks = if fit.is_some() && sample.len() > crate::charts::DENSITY_THRESHOLD {
        emphasised(&residuals, sample.len(), crate::charts::MAX_EMPHASISED)
    } else {
        vec![false; sample.len()]
    };
    // The outliers the page lists are ringed on the chart.
    let mut outliers = vec![false; sample.len()];
    for r in &residuals {
        if let Some(o) = outliers.get_mut(r.index) {
            *o = crate::relations::place::verdict(r.z, r.upper_limit).starts_with("outlier");
        }
    }
    let points: Vec<ChartPoint> = sample
        .iter()
        .zip(&outcome.sample.members)
        .zip(&index)
        .zip(marks.iter().zip(&outliers))
        .map(|(((p, m), g), (&emphasis, &outlier))| ChartPoint {
            emphasis,
            outlier,
            ..chart_point(m, p, p.x, chart_y(fit, p), *g)
        })
        .collect();
    let x_range = points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |acc, p| {
            (acc.0.min(p.x), acc.1.max(p.x))
        });
    ChartPoints {
        points,
        groups,
        x_range,
    }
}

/// The chart points of the whole-sample fit `key` (no galaxy left out) for charts that place
/// one object (galaxy, place and submission pages), made once per fit and kept in the fit
/// cache; `None` when that fit is not in the cache.
///
/// A galaxy page places the galaxy against the fit without it, which above the left-out refit
/// size is the whole fit shifted by the galaxy's one-step influence (far less than the line's
/// width on a chart): its chart draws the shared points of the whole fit under the shifted
/// line. These charts are about the placed object, so no sample point is emphasised: above the
/// density threshold the sample is the density and the placed object is the only point drawn
/// on its own (outliers still ringed where a point is drawn). A page with one such chart per
/// relation then stays far below its weight budget; the relation page draws the outliers.
pub(super) fn shared_points(
    fits: &crate::relations::FitCache,
    key: &crate::relations::FitKey,
    grouping: Grouping,
) -> Option<Arc<ChartPoints>> {
    let base = crate::relations::FitKey {
        left_out: None,
        ..key.clone()
    };
    let full = fits.get(&base)?;
    Some(
        fits.made_from(&base, &format!("placing chart points;{grouping:?}"), || {
            let mut made = chart_points(&full, grouping);
            // Nor marked as unresolved: above the density threshold such points would be drawn
            // one by one; the relation page marks them.
            for p in &mut made.points {
                p.emphasis = false;
                p.unresolved = false;
            }
            made
        }),
    )
}

/// The relation chart of a fit outcome.
pub(super) fn relation_chart(
    relation: &Relation,
    outcome: &FitOutcome,
    grouping: Grouping,
) -> RelationChart {
    let ChartPoints {
        points,
        groups,
        x_range,
    } = chart_points(outcome, grouping);
    RelationChart {
        points,
        groups,
        ..relation_chart_frame(relation, outcome, x_range)
    }
}

/// Everything of the relation chart of `outcome` but its points and groups: titles, labels,
/// the fitted line and its mean band over `x_range`.
pub(super) fn relation_chart_frame(
    relation: &Relation,
    outcome: &FitOutcome,
    (x_min, x_max): (f64, f64),
) -> RelationChart {
    let fit = outcome.fit.as_ref().ok();
    let y_label = match fit {
        Some(f) if f.spec.shape == Shape::Plane => format!(
            "log₁₀ M_BH − γ (log₁₀ M_bulge − {}) [M☉]",
            significant(f.spec.pivot2, 3)
        ),
        _ => relation.y_label(),
    };
    RelationChart {
        title: relation.label(),
        x_label: relation.x_label(),
        y_label,
        line: fit.map(|f| LineSpec {
            alpha: f.params.alpha,
            beta: f.params.beta,
            beta2: f.params.beta2,
            pivot: f.spec.pivot,
            scatter_dex: f.quoted_eps().max(0.0),
        }),
        mean_band: fit.map_or_else(Vec::new, |f| mean_band(f, x_min, x_max)),
        ..RelationChart::default()
    }
}

/// Draw the relation chart, or say why not.
pub(crate) fn relation_chart_svg(
    relation: &Relation,
    outcome: &FitOutcome,
    grouping: Grouping,
) -> Result<String, String> {
    relation_svg(&relation_chart(relation, outcome, grouping)).map_err(|e| e.to_string())
}

/// Show one relation: its fit, chart, residuals, the objects off the relation, the most
/// influential objects, a zero-point offset between subsamples, and the bootstrap and posterior
/// runs.
pub(crate) async fn show_relation(
    State(state): State<AppState>,
    nav: super::Nav,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let t = target(&state, &slug, query).await?;
    let relation = t.relation.clone();
    let read = RelationQuery::read(&t.pairs, &relation);
    let q = read.query.clone();
    let shown = match fit_shown(&t.catalog, &relation, &q).await? {
        Ok(shown) => shown,
        Err(version) => {
            return Ok(ComputingPage {
                nav,
                label: relation.label(),
                version,
            }
            .into_response());
        }
    };
    let outcome = shown.outcome;
    let computing = shown
        .computing
        .map(|v| computing_note(outcome.key.catalog_version, v));
    let fit = outcome.fit.as_ref().ok();
    // The charts are drawn once per fit and chart settings, and kept with the fit.
    let charts = state.fits.drawn(
        &outcome.key,
        &format!("page;group={:?};versus={:?}", q.group, q.versus),
        || {
            let (residual_svg, residual2_svg) = fit
                .map(|f| residual_charts(&relation, &outcome, f, &q))
                .unwrap_or_default();
            vec![
                relation_chart_svg(&relation, &outcome, q.group),
                Ok(residual_svg),
                Ok(residual2_svg),
            ]
        },
    );
    let (chart_svg, chart_error) = match &charts[0] {
        Ok(svg) => (svg.clone(), None),
        Err(e) => (String::new(), Some(e.clone())),
    };
    let drawn_text = |i: usize| charts[i].clone().unwrap_or_default();
    let (residual_svg, residual2_svg) = (drawn_text(1), drawn_text(2));
    let (params, cov_rows) = fit.map(|f| fit_views(&relation, f)).unwrap_or_default();
    let (influential, influence_note, influence_pending) = match (fit, computing.is_some()) {
        (Some(_), false) => influence_views(&state, &outcome).await?,
        _ => (Vec::new(), None, false),
    };
    let (offset, offset_note) = offset_view(&outcome, &q).await?;
    let runs = run_views(&state, &outcome, &q).await?;
    let runs_pending = runs
        .iter()
        .any(|r| r.status == "running" || r.status == "queued");
    let refresh = computing.is_some() || influence_pending;
    let may_start = nav.username.is_some();
    let query_plain = t.query_plain(&q);
    let made_at = crate::catalog::history::made_at(&state.pool, t.pinned.version).await?;
    let version_note = VersionNote::of(
        &t.pinned,
        &t.ask,
        made_at.as_deref(),
        format!("/relations/{}{}", relation.slug(), {
            let plain = q.to_query_string();
            if plain.is_empty() {
                plain
            } else {
                format!("?{plain}")
            }
        }),
    );
    let cite = if computing.is_none() {
        CiteView::of(&t.catalog, &relation, &outcome).await?
    } else {
        None
    };
    Ok(RelationPage {
        nav,
        controls: Controls::of(&relation, &read),
        problems: read.problems.iter().map(|p| p.message.clone()).collect(),
        summary: SampleSummary::of(&relation, &outcome, &q),
        fit_error: outcome.fit.as_ref().err().map(ToString::to_string),
        params,
        interval_label: fit.map_or("", |f| f.intervals.kind.label()).to_owned(),
        cov_rows,
        chart_svg,
        residual_svg,
        residual2_svg,
        residual2_label: q.versus.axis_label(),
        chart_error,
        outliers_more: flagged_count(&outcome).saturating_sub(FLAGGED_ROWS),
        outliers: flagged_views(&outcome),
        influential,
        influence_note,
        offset,
        offset_note,
        query: if query_plain.is_empty() {
            String::new()
        } else {
            format!("?{query_plain}")
        },
        query_plain,
        runs,
        refresh,
        runs_pending,
        may_start,
        computing,
        gq: VersionNote::suffix(version_note.as_ref(), '?'),
        version_note,
        cite,
    }
    .into_response())
}

/// A relation page asked for before any version's fit of that selection is ready.
#[derive(Template, WebTemplate)]
#[template(path = "pages/computing.html")]
pub(crate) struct ComputingPage {
    nav: super::Nav,
    label: String,
    version: i64,
}

/// The fitted parameters with their errors, intervals and units, and the covariance matrix.
/// Values and intervals are the ones the fit reports (`fit.intervals`; restricted likelihood
/// by default); the covariance is the maximum-likelihood curvature's.
pub(crate) fn fit_views(relation: &Relation, f: &Fit) -> (Vec<ParamView>, Vec<CovRow>) {
    let unit = relation.x_unit();
    let view = |name: &str, symbol: &'static str, unit: String| {
        f.intervals.get(name).map(|iv| ParamView {
            symbol,
            value: with_error(iv.estimate, iv.error),
            interval68: interval_text(iv.p16, iv.p84, iv.error),
            interval95: interval_text(iv.p2_5, iv.p97_5, iv.error),
            no_interval: crate::export::no_interval_note(f.spec.method, iv.error),
            unit,
        })
    };
    let params: Vec<ParamView> = [
        view("alpha", "α", "log10 M☉ at the pivot".into()),
        view("beta", "β", format!("dex of M_BH per dex of x ({unit})")),
        view("gamma", "γ", "dex of M_BH per dex of M_bulge".into()),
        view("eps", "ε", "dex (intrinsic scatter)".into()),
    ]
    .into_iter()
    .flatten()
    .collect();
    let mut cov_rows = Vec::new();
    for (i, (a, row)) in f.cov_names.iter().zip(&f.cov).enumerate() {
        for (b, v) in f.cov_names.iter().zip(row).skip(i) {
            let ((sa, pa), (sb, pb)) = (param_symbol(a), param_symbol(b));
            cov_rows.push(CovRow {
                pair: if a == b {
                    format!("Var({sa})")
                } else {
                    format!("Cov({sa}, {sb})")
                },
                value: significant(*v, 3),
                unit: dex_power(pa + pb),
            });
        }
    }
    (params, cov_rows)
}

/// The residual charts: against x, and against the property the reader picked.
fn residual_charts(
    relation: &Relation,
    outcome: &FitOutcome,
    f: &Fit,
    q: &RelationQuery,
) -> (String, String) {
    let sample = &outcome.sample;
    let residuals = crate::fit::residuals(f, &sample.points);
    let marks = emphasised(&residuals, sample.points.len(), RESIDUAL_EMPHASISED);
    let (groups, index) = groups_of(q.group, &sample.members);
    let residual_points = |x_of: &dyn Fn(&Member, &Point) -> Option<f64>| -> Vec<ChartPoint> {
        sample
            .points
            .iter()
            .zip(&sample.members)
            .zip(&residuals)
            .zip(&index)
            .zip(&marks)
            .filter_map(|((((p, m), r), g), &emphasis)| {
                let x = x_of(m, p)?;
                // The second property's error is not carried in the sample: no x bar.
                let mut c = chart_point(m, p, x, r.residual_dex, *g);
                c.x_err = 0.0;
                c.emphasis = emphasis;
                // Above the density threshold the residual charts draw only their emphasised
                // objects one by one (the page's weight); the relation chart marks the others.
                c.unresolved &= emphasis || sample.points.len() <= crate::charts::DENSITY_THRESHOLD;
                c.outlier =
                    crate::relations::place::verdict(r.z, r.upper_limit).starts_with("outlier");
                Some(c)
            })
            .collect()
    };
    let mut vs_x = residual_points(&|_, p| Some(p.x));
    for (c, p) in vs_x.iter_mut().zip(&sample.points) {
        c.x_err = p.x_err;
    }
    let against_x = ResidualChart {
        title: format!("Residuals of {} against x", relation.label()),
        x_label: relation.x_label(),
        points: vs_x,
        groups: groups.clone(),
        scatter_dex: f.quoted_eps().max(0.0),
        ..ResidualChart::default()
    };
    let against_other = ResidualChart {
        title: format!(
            "Residuals of {} against {}",
            relation.label(),
            q.versus.axis_label()
        ),
        x_label: q.versus.axis_label(),
        points: residual_points(&|m, _| q.versus.value(m)),
        groups,
        scatter_dex: f.quoted_eps().max(0.0),
        ..ResidualChart::default()
    };
    (
        residual_svg(&against_x).unwrap_or_default(),
        residual_svg(&against_other).unwrap_or_default(),
    )
}

/// How many objects are in tension with the relation or outliers.
fn flagged_count(outcome: &FitOutcome) -> usize {
    flagged(outcome).len()
}

/// The objects in tension with the relation or outliers, largest |z| first, the first
/// [`FLAGGED_ROWS`].
fn flagged_views(outcome: &FitOutcome) -> Vec<ObjectView> {
    flagged(outcome)
        .into_iter()
        .take(FLAGGED_ROWS)
        .map(|r| {
            let m = &outcome.sample.members[r.index];
            ObjectView {
                name: m.name.clone(),
                slug: m.slug.clone(),
                first: if r.upper_limit {
                    format!("< {}", fixed(r.residual_dex, 2))
                } else {
                    fixed(r.residual_dex, 2)
                },
                second: fixed(r.z, 1),
                third: r.verdict.to_owned(),
            }
        })
        .collect()
}

/// The most influential objects (leave-one-out), or why there are none; the flag is set while
/// they are still being computed.
async fn influence_views(
    state: &AppState,
    outcome: &Arc<FitOutcome>,
) -> AppResult<(Vec<ObjectView>, Option<String>, bool)> {
    Ok(
        match most_influential(&state.fits, outcome, TOP_INFLUENCE, Some(super::PAGE_WAIT)).await? {
            Some(Ok(list)) => (
                list.iter()
                    .map(|i| {
                        let m = &outcome.sample.members[i.index];
                        ObjectView {
                            name: m.name.clone(),
                            slug: m.slug.clone(),
                            first: fixed(i.d_beta, 3),
                            second: fixed(i.d_alpha, 3),
                            third: fixed(i.shift_sigma, 2),
                        }
                    })
                    .collect(),
                None,
                false,
            ),
            Some(Err(why)) => (Vec::new(), Some(why), false),
            None => (
                Vec::new(),
                Some(
                    "Computing: the influence of each object is under way; this page reloads itself."
                        .to_owned(),
                ),
                true,
            ),
        },
    )
}

/// The zero-point offset between the two subsamples the reader picked, or a note.
async fn offset_view(
    outcome: &FitOutcome,
    q: &RelationQuery,
) -> AppResult<(Option<OffsetView>, Option<String>)> {
    let (Some(a), Some(b)) = (q.offset_a, q.offset_b) else {
        return Ok((None, None));
    };
    if a == b {
        return Ok((
            None,
            Some("Pick two different subsamples to compare.".to_owned()),
        ));
    }
    Ok(match offset_between(outcome, a, b).await? {
        None => (None, None),
        Some(Ok(o)) => (
            Some(OffsetView {
                a: a.describe(),
                b: b.describe(),
                n_a: o.n_a,
                n_b: o.n_b,
                offset: with_error(o.offset_dex, o.err_dex),
                significance: fixed(o.significance_sigma, 1),
            }),
            None,
        ),
        Some(Err(e)) => (
            None,
            Some(format!(
                "The offset of {} against {} could not be fitted: {e}",
                b.describe(),
                a.describe()
            )),
        ),
    })
}

impl Controls {
    /// The page's form, filled in from the query as read (what was typed, how it was read,
    /// and the error of each pivot at fault).
    fn of(relation: &Relation, read: &QueryRead) -> Self {
        let q = &read.query;
        let pivots = q.fit.pivots(relation);
        let field_error = |field: &str| {
            read.problems
                .iter()
                .find(|p| p.field == field)
                .map(|p| p.message.clone())
        };
        let log_text = |v: f64| format!("{}", (v * 1e4).round() / 1e4);
        let filter = &q.fit.filter;
        let enum_options = |items: Vec<(&'static str, &'static str)>, selected: Option<&str>| {
            items
                .into_iter()
                .map(|(v, l)| option(v, l, selected == Some(v)))
                .collect::<Vec<_>>()
        };
        let subset_options = |selected: Option<Subset>| {
            Subset::all()
                .into_iter()
                .map(|s| option(&s.code(), &s.describe(), selected == Some(s)))
                .collect::<Vec<_>>()
        };
        Controls {
            label: relation.label(),
            slug: relation.slug(),
            x_label: relation.x_label(),
            x2_label: relation.x2_label(),
            method_options: Method::ALL
                .iter()
                .map(|m| option(m.as_str(), method_label(*m), *m == q.fit.method))
                .collect(),
            morphology_options: enum_options(
                Morphology::pairs(),
                filter.morphology.map(Morphology::as_str),
            ),
            bulge_options: enum_options(
                BulgeKind::pairs(),
                filter.bulge_kind.map(BulgeKind::as_str),
            ),
            centre_options: enum_options(
                CentreKind::pairs(),
                filter.centre_kind.map(CentreKind::as_str),
            ),
            mass_method_options: enum_options(
                MassMethod::pairs(),
                filter.mass_method.map(MassMethod::as_str),
            ),
            masses_options: crate::relations::MassesChoice::ALL
                .into_iter()
                .map(|c| option(c.as_str(), c.label(), filter.masses == c))
                .collect(),
            activity_options: enum_options(
                crate::catalog::model::Activity::pairs(),
                filter.activity.map(crate::catalog::model::Activity::as_str),
            ),
            soi_resolved: filter.soi == crate::relations::SoiChoice::Resolved,
            limits_options: [
                (LimitsChoice::Auto, "as the estimator allows"),
                (LimitsChoice::Include, "included"),
                (LimitsChoice::Exclude, "left out"),
            ]
            .into_iter()
            .map(|(c, l)| option(c.as_str(), l, filter.limits == c))
            .collect(),
            uses_sigma: relation.uses_sigma(),
            sigma_central: filter.sigma == crate::relations::SigmaChoice::Central,
            pivot: read
                .echo
                .pivot_text
                .clone()
                .unwrap_or_else(|| log_text(pivots.0)),
            pivot2: read
                .echo
                .pivot2_text
                .clone()
                .unwrap_or_else(|| log_text(pivots.1)),
            pivot_log: log_text(pivots.0),
            pivot2_log: log_text(pivots.1),
            pivot_unit: relation.x_unit(),
            pivot_linear_unit: relation.x_quantity().unit_label(),
            pivot_error: field_error("pivot"),
            pivot2_error: field_error("pivot2"),
            pivot_read_as: read.echo.pivot_read_as.clone(),
            pivot2_read_as: read.echo.pivot2_read_as.clone(),
            group_options: Grouping::ALL
                .iter()
                .map(|(g, v, l)| option(v, l, *g == q.group))
                .collect(),
            versus_options: Versus::ALL
                .iter()
                .map(|(v, s, l)| option(s, l, *v == q.versus))
                .collect(),
            offset_a_options: subset_options(q.offset_a),
            offset_b_options: subset_options(q.offset_b),
        }
    }
}

impl SampleSummary {
    /// What was fitted: version, estimator, selection, counts and what was left out.
    fn of(relation: &Relation, outcome: &FitOutcome, q: &RelationQuery) -> Self {
        let sample = &outcome.sample;
        SampleSummary {
            catalog_version: outcome.key.catalog_version,
            fitted_at: utc_time(&outcome.fitted_at),
            size: sample_size(sample.n_detections(), sample.n_limits()),
            limits_note: q.fit.limits_left_out(sample).map(|l| l.sentence),
            method: method_label(q.fit.method),
            filter_text: crate::export::filter_words(&outcome.key.filter),
            n_detections: sample.n_detections(),
            n_limits: sample.n_limits(),
            sigma_note: (relation.uses_sigma() && sample.left_out_sigma_definition > 0).then(
                || {
                    format!(
                        "{} with a {} left out: σ definitions are never mixed in one fit.",
                        count(sample.left_out_sigma_definition, "galaxy", "galaxies"),
                        match q.fit.filter.sigma {
                            crate::relations::SigmaChoice::Effective => "central σ_c",
                            crate::relations::SigmaChoice::Central => "σ_e",
                        }
                    )
                },
            ),
            virial_note: (sample.left_out_virial > 0).then(|| {
                format!(
                    "{} left out: {}; a virial mass is calibrated on this relation, so fitting it is circular (choose Masses to include them).",
                    count(
                        sample.left_out_virial,
                        "reverberation or single-epoch mass",
                        "reverberation or single-epoch masses"
                    ),
                    q.fit.filter.masses.label()
                )
            }),
            missing_note: (sample.left_out_missing > 0).then(|| {
                if sample.left_out_missing == 1 {
                    "1 galaxy matching the selection lacks a value this relation needs.".to_owned()
                } else {
                    format!(
                        "{} galaxies matching the selection lack a value this relation needs.",
                        sample.left_out_missing
                    )
                }
            }),
            fit_note: method_note(q.fit.method).to_owned(),
        }
    }
}

pub(crate) fn method_label(m: Method) -> &'static str {
    match m {
        Method::Structural => "structural maximum likelihood (default)",
        Method::Conditional => "conditional maximum likelihood",
        Method::Fitexy => "modified FITEXY",
        Method::Bces(crate::fit::BcesLine::YOnX) => "BCES Y|X",
        Method::Bces(crate::fit::BcesLine::XOnY) => "BCES X|Y",
        Method::Bces(crate::fit::BcesLine::Bisector) => "BCES bisector",
        Method::Bces(crate::fit::BcesLine::Orthogonal) => "BCES orthogonal",
    }
}

fn method_note(m: Method) -> &'static str {
    match m {
        Method::Structural => {
            "Structural maximum likelihood (Kelly 2007, ApJ 665, 1489): errors on both axes, intrinsic scatter and upper limits."
        }
        Method::Conditional => {
            "Maximum likelihood of log M_BH given the observed x: flattens the slope when x errors matter."
        }
        Method::Fitexy => {
            "Modified FITEXY (Press et al. 1992; Tremaine et al. 2002, ApJ 574, 740): takes no upper limits."
        }
        Method::Bces(_) => {
            "BCES (Akritas & Bershady 1996, ApJ 470, 706): moment estimators, take no upper limits."
        }
    }
}

/// The script that follows a relation page's runs (`static/runs.js`; the page works without).
const RUNS_SCRIPT: &str = include_str!("../../static/runs.js");

/// `/static/runs.js`.
pub(crate) async fn runs_script() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=3600"),
        ],
        RUNS_SCRIPT,
    )
        .into_response()
}

/// `/relations/{relation}/chart.svg`: the relation chart as a file.
pub(crate) async fn download_chart(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let t = target(&state, &slug, query).await?;
    let q = read_query(&t)?;
    let outcome = fit_for(&t, &q).await?;
    let relation = &t.relation;
    let drawn = state
        .fits
        .drawn(&outcome.key, &format!("svg;group={:?}", q.group), || {
            // A file opened on its own draws its title; the page's heading names the page chart.
            let chart = RelationChart {
                show_title: true,
                ..relation_chart(relation, &outcome, q.group)
            };
            vec![relation_svg(&chart).map_err(|e| e.to_string())]
        });
    let svg = drawn[0].clone().map_err(AppError::bad_request)?;
    Ok(download(
        &t.pinned,
        "image/svg+xml; charset=utf-8",
        &file_name(relation, &outcome, ".svg"),
        svg,
    ))
}

/// `/relations/{relation}/chart.png`: the relation chart for print (`charts::relation_png`),
/// titled, for the same query as `chart.svg`.
pub(crate) async fn download_chart_png(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let t = target(&state, &slug, query).await?;
    let q = read_query(&t)?;
    let outcome = fit_for(&t, &q).await?;
    let relation = &t.relation;
    let chart = RelationChart {
        show_title: true,
        ..relation_chart(relation, &outcome, q.group)
    };
    let png =
        crate::charts::relation_png(&chart).map_err(|e| AppError::bad_request(e.to_string()))?;
    let filename = file_name(relation, &outcome, ".png");
    Ok(download(&t.pinned, "image/png", &filename, png))
}

/// `/relations/{relation}/fit.json`: the fit and its settings.
pub(crate) async fn download_fit(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let t = target(&state, &slug, query).await?;
    let q = read_query(&t)?;
    let outcome = fit_for(&t, &q).await?;
    let relation = &t.relation;
    let (pivot, pivot2) = q.fit.pivots(relation);
    let made_at =
        crate::catalog::history::made_at(&state.pool, outcome.key.catalog_version).await?;
    let fit_id = crate::relations::citation::cite(&t.catalog, &outcome).await;
    let body = serde_json::json!({
        "relation": relation.slug(),
        "label": relation.label(),
        "x": relation.x_label(),
        "x2": relation.x2_label(),
        "y": relation.y_label(),
        "method": q.fit.method.as_str(),
        "sample_filter": outcome.key.filter,
        "pivot_log": pivot,
        "pivot2_log": (relation.shape() == Shape::Plane).then_some(pivot2),
        "catalog_version": outcome.key.catalog_version,
        // When the version was made, not when this copy was computed: a past version's file
        // is the same whenever it is asked for.
        "catalog_version_made_at": made_at,
        "fit_id": fit_id,
        "n_detections": outcome.sample.n_detections(),
        "n_upper": outcome.sample.n_limits(),
        "left_out_sigma_definition": outcome.sample.left_out_sigma_definition,
        "limits_left_out": outcome.sample.left_out_limits,
        "limits_notice": q.fit.limits_left_out(&outcome.sample).map(|l| l.sentence),
        "galaxies": outcome.sample.members.iter().map(|m| m.slug.as_str()).collect::<Vec<_>>(),
        "fit": outcome.fit.as_ref().ok(),
        "error": outcome.fit.as_ref().err().map(ToString::to_string),
    });
    let text = serde_json::to_string_pretty(&body).map_err(anyhow::Error::from)?;
    Ok(download(
        &t.pinned,
        "application/json",
        &file_name(relation, &outcome, ".json"),
        text,
    ))
}

/// `/relations/{relation}/sample.csv`: the fitted sample, one galaxy a row.
pub(crate) async fn download_sample(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let t = target(&state, &slug, query).await?;
    let q = read_query(&t)?;
    let outcome = fit_for(&t, &q).await?;
    let relation = &t.relation;
    // The columns are `export::sample`'s, shared with the VOTable and LaTeX files.
    let text = crate::export::sample_csv(&outcome, relation)?;
    Ok(download(
        &t.pinned,
        "text/csv; charset=utf-8",
        &file_name(relation, &outcome, "-sample.csv"),
        text,
    ))
}

/// A relation download's name: relation, estimator, catalog version, then `tail` (".svg",
/// "-sample.csv"), e.g. "m_sigma-structural-v12-sample.csv".
pub(crate) fn file_name(relation: &Relation, outcome: &FitOutcome, tail: &str) -> String {
    format!(
        "{}-{}-v{}{tail}",
        relation.slug(),
        outcome.key.method,
        outcome.key.catalog_version
    )
}

/// A file for `pinned`'s catalog version: it names its version in `Catalog-Version`, and a
/// past version's file never changes ([`crate::router::Immutable`]).
pub(crate) fn download(
    pinned: &Pinned,
    content_type: &'static str,
    filename: &str,
    body: impl axum::response::IntoResponse,
) -> Response {
    let mut response = (
        [
            (header::CONTENT_TYPE, content_type.to_owned()),
            (
                header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"{filename}\""),
            ),
            (
                header::HeaderName::from_static("catalog-version"),
                pinned.version.to_string(),
            ),
        ],
        body,
    )
        .into_response();
    if pinned.is_past() {
        response.extensions_mut().insert(crate::router::Immutable);
    }
    response
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::relations::test_pairs as pairs;

    #[test]
    fn the_query_round_trips_and_names_bad_parameters() {
        let q = RelationQuery::parse(
            &pairs(&[
                ("method", "bces-bisector"),
                ("morphology", "elliptical"),
                ("pivot", "2.2"),
                ("group", "bulge_kind"),
                ("versus", "sigma"),
                ("offset_a", "morphology:elliptical"),
                ("offset_b", "bulge_kind:pseudo"),
            ]),
            &Relation::MSigma,
        )
        .unwrap();
        assert_eq!(q.fit.method.as_str(), "bces-bisector");
        assert_eq!(q.fit.pivot, Some(2.2));
        let text = q.to_query_string();
        let back: Vec<(String, String)> = serde_urlencoded::from_str(&text).unwrap();
        assert_eq!(RelationQuery::parse(&back, &Relation::MSigma).unwrap(), q);
        assert_eq!(RelationQuery::default().to_query_string(), "");

        let err = RelationQuery::parse(
            &pairs(&[
                ("method", "eyeball"),
                ("pivot", "NaN"),
                ("offset_a", "colour:red"),
                ("fish", "1"),
            ]),
            &Relation::MSigma,
        )
        .unwrap_err();
        assert!(
            err.contains("Parameter 'method': 'eyeball' is not one of"),
            "{err}"
        );
        assert!(err.contains("Parameter 'pivot'"), "{err}");
        assert!(err.contains("Parameter 'offset_a'"), "{err}");
        assert!(err.contains("'fish' is not a parameter"), "{err}");
    }

    #[test]
    fn pivots_are_read_in_log10_or_in_the_unit_and_bad_values_keep_the_defaults() {
        // 200 km/s: log10 200 = 2.30103 (computed).
        for typed in ["200", "200 km/s", "2.30103"] {
            let read = RelationQuery::read(&pairs(&[("pivot", typed)]), &Relation::MSigma);
            assert!(read.problems.is_empty(), "{typed}: {:?}", read.problems);
            let p = read.query.fit.pivot.unwrap();
            assert!((p - 200f64.log10()).abs() < 1e-5, "{typed}: {p}");
            assert_eq!(
                read.echo.pivot_read_as.is_some(),
                typed != "2.30103",
                "{typed}"
            );
        }
        let read = RelationQuery::read(&pairs(&[("pivot", "200")]), &Relation::MSigma);
        assert_eq!(
            read.echo.pivot_read_as.as_deref(),
            Some("200 km/s, log10 = 2.3010")
        );
        // A bulge mass typed linearly: 1e11 M☉ is log10 11.
        let read = RelationQuery::read(&pairs(&[("pivot", "1e11 Msun")]), &Relation::MBulge);
        assert!((read.query.fit.pivot.unwrap() - 11.0).abs() < 1e-9);
        // Bad values: the default is kept and each problem names its parameter.
        let read = RelationQuery::read(
            &pairs(&[
                ("pivot", "fast"),
                ("replicates", "many"),
                ("steps", "3"),
                ("morphology", "blob"),
                ("method", "fitexy"),
            ]),
            &Relation::MSigma,
        );
        assert_eq!(read.query.fit.pivot, None);
        assert_eq!(read.query.replicates, DEFAULT_REPLICATES);
        assert_eq!(read.query.fit.method, Method::Fitexy);
        let fields: Vec<&str> = read.problems.iter().map(|p| p.field.as_str()).collect();
        assert_eq!(fields, ["pivot", "replicates", "steps", "morphology"]);
        assert_eq!(read.echo.pivot_text.as_deref(), Some("fast"));
        assert!(
            read.problems[0].message.contains("200 km/s"),
            "{:?}",
            read.problems
        );
    }

    #[test]
    fn the_covariance_names_each_pair_once_with_symbols_and_units() {
        use crate::fit::FitSpec;
        let fit = Fit::given_line(
            FitSpec::new(Method::Structural, 2.3),
            crate::fit::Params::line(8.3, 5.0, 0.35),
            [[0.0025, 0.003, 0.0], [0.003, 0.09, 0.0], [0.0, 0.0, 0.0009]],
        );
        let (_, rows) = fit_views(&Relation::MSigma, &fit);
        let pairs: Vec<(&str, &str)> = rows.iter().map(|r| (r.pair.as_str(), r.unit)).collect();
        assert_eq!(
            pairs,
            [
                ("Var(α)", "dex²"),
                ("Cov(α, β)", "dex"),
                ("Cov(α, ε)", "dex²"),
                ("Var(β)", "none"),
                ("Cov(β, ε)", "dex"),
                ("Var(ε)", "dex²"),
            ]
        );
        assert_eq!(rows[1].value, "0.00300");
    }

    #[test]
    fn counts_times_and_errorless_values_read_as_words() {
        assert_eq!(sample_size(17, 1), "17 measurements and 1 upper limit");
        assert_eq!(sample_size(1, 0), "1 measurement and 0 upper limits");
        assert_eq!(with_error(0.4404799159333157, 0.0), "0.440");
        assert_eq!(with_error(-0.4404799159333157, f64::NAN), "−0.440");
        let t = utc_time("2026-12-02T23:33:04Z");
        assert_eq!(t.text, "2 December 2026, 23:33 UTC");
        assert_eq!(t.iso, "2026-12-02T23:33:04Z");
    }

    #[test]
    fn the_mean_band_follows_the_parameter_covariance() {
        use crate::fit::FitSpec;
        let fit = Fit::given_line(
            FitSpec::new(Method::Structural, 2.3),
            crate::fit::Params::line(8.3, 5.0, 0.35),
            [[0.0025, 0.003, 0.0], [0.003, 0.09, 0.0], [0.0, 0.0, 0.0009]],
        );
        let band = mean_band(&fit, 2.0, 2.6);
        assert_eq!(band.len(), BAND_SAMPLES);
        // Invented fit and covariance. At x = 2.0, d = −0.3: Var = 0.0025 + 0.09·0.09
        // + 2·(−0.3)·0.003 = 0.0088 (docs/methods.md §6, computed); centre 8.3 + 5·(−0.3) = 6.8.
        let first = band[0];
        let half = (first.upper - first.lower) / 2.0;
        assert!((half - 0.0088f64.sqrt()).abs() < 1e-12, "{half}");
        assert!(((first.upper + first.lower) / 2.0 - (8.3 - 1.5)).abs() < 1e-12);
        assert!(mean_band(&fit, 2.0, 2.0).is_empty());
    }

    #[test]
    fn charts_mark_the_objects_off_the_relation_largest_z_first() {
        use crate::fit::FitSpec;
        // Invented line and sample: 2,400 objects on the line with 0.1 dex errors, of which
        // those at k = 0 mod 6 sit 0.2 + 0.001 k dex off it (above for even k / 6, below for
        // odd), and every 50th object is an upper limit, 0.5 dex above the line or 3 dex below.
        let fit = Fit::given_line(
            FitSpec::new(Method::Structural, 2.3),
            crate::fit::Params::line(8.3, 5.0, 0.1),
            [[1e-6, 0.0, 0.0], [0.0, 1e-6, 0.0], [0.0, 0.0, 1e-6]],
        );
        let points: Vec<Point> = (0..2_400)
            .map(|k| {
                let x = 2.0 + 0.0002 * f64::from(k);
                let on = 8.3 + 5.0 * (x - 2.3);
                if k % 50 == 25 {
                    let off = if k % 100 == 25 { 0.5 } else { -3.0 };
                    Point::limit(x, 0.0, on + off)
                } else if k % 6 == 0 {
                    let sign = if (k / 6) % 2 == 0 { 1.0 } else { -1.0 };
                    Point::new(x, 0.0, on + sign * (0.2 + 0.001 * f64::from(k)), 0.1)
                } else {
                    Point::new(x, 0.0, on, 0.1)
                }
            })
            .collect();
        let residuals = crate::fit::residuals(&fit, &points);
        let marks = emphasised(&residuals, points.len(), crate::charts::MAX_EMPHASISED);
        assert_eq!(marks.len(), points.len());
        // Exactly the flagged ones, up to the cap; here more are flagged than the cap allows.
        let flagged: Vec<&crate::fit::Residual> = residuals
            .iter()
            .filter(|r| crate::relations::place::is_flagged(r.z, r.upper_limit))
            .collect();
        assert!(flagged.len() > crate::charts::MAX_EMPHASISED);
        assert_eq!(
            marks.iter().filter(|m| **m).count(),
            crate::charts::MAX_EMPHASISED
        );
        let smallest_marked = residuals
            .iter()
            .filter(|r| marks[r.index])
            .map(|r| r.z.abs())
            .fold(f64::INFINITY, f64::min);
        for r in &residuals {
            if marks[r.index] {
                assert!(crate::relations::place::is_flagged(r.z, r.upper_limit));
            } else if crate::relations::place::is_flagged(r.z, r.upper_limit) {
                assert!(r.z.abs() <= smallest_marked, "a larger |z| left unmarked");
            }
        }
        // Limits above the line are never marked; those far below are.
        assert!(!marks[25] && points[25].upper_limit);
        assert!(marks[75] && points[75].upper_limit);
        // Few flagged objects: every one of them is marked.
        let few = &residuals[..120];
        let marks = emphasised(few, 120, crate::charts::MAX_EMPHASISED);
        for r in few {
            assert_eq!(
                marks[r.index],
                crate::relations::place::is_flagged(r.z, r.upper_limit)
            );
        }
        assert!(marks.iter().any(|m| *m));
    }
}
