//! The relation pages: `/relations` (every relation with its current fit) and
//! `/relations/{relation}` (one relation with its controls, chart, residuals, outliers,
//! influence and zero-point offset), with its downloads (chart SVG, fit JSON, sample CSV).

use std::sync::Arc;

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, State};
use axum::http::header;
use axum::response::{IntoResponse, Redirect, Response};

use super::display::significant;
use crate::catalog::model::{BulgeKind, CentreKind, MassMethod, Morphology};
use crate::catalog::relation_rows;
use crate::charts::{
    BandPoint, ChartPoint, Group, LineSpec, RelationChart, ResidualChart, relation_svg,
    residual_svg,
};
use crate::error::{AppError, AppResult};
use crate::fit::{Fit, Method, Point, Shape};
use crate::relations::{
    DEFAULT_REPLICATES, DEFAULT_STEPS, FitOutcome, Member, Relation, RunKey, RunKind, RunState,
    SampleFilter, fitted, stored_run,
};
use crate::state::AppState;
use crate::units::round_to_uncertainty;

/// |z| at which an object is listed as an outlier (common practice: docs/methods.md §6).
pub(crate) const OUTLIER_Z: f64 = 2.0;
/// How many of the most influential objects are listed.
const TOP_INFLUENCE: usize = 5;
/// Samples of the mean-relation band across the x range.
const BAND_SAMPLES: usize = 41;

/// How markers are grouped on the charts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Grouping {
    Morphology,
    BulgeKind,
    Method,
}

impl Grouping {
    const ALL: [(Grouping, &'static str, &'static str); 3] = [
        (Grouping::Morphology, "morphology", "morphology"),
        (Grouping::BulgeKind, "bulge_kind", "bulge kind"),
        (Grouping::Method, "method", "mass method"),
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
        }
    }

    /// Every (stored word, label) of this grouping, in display order.
    fn values(self) -> Vec<(&'static str, &'static str)> {
        match self {
            Grouping::Morphology => Morphology::pairs(),
            Grouping::BulgeKind => BulgeKind::pairs(),
            Grouping::Method => MassMethod::pairs(),
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

/// A subsample for the zero-point offset: one value of one tag, e.g. morphology = elliptical.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Subset {
    dimension: &'static str,
    value: &'static str,
    label: &'static str,
}

impl Subset {
    /// Every subset a reader can pick.
    fn all() -> Vec<Subset> {
        let mut out = Vec::new();
        let mut push = |dimension, items: Vec<(&'static str, &'static str)>| {
            for (value, label) in items {
                out.push(Subset {
                    dimension,
                    value,
                    label,
                });
            }
        };
        push("morphology", Morphology::pairs());
        push("bulge_kind", BulgeKind::pairs());
        push("centre_kind", CentreKind::pairs());
        push("mass_method", MassMethod::pairs());
        out
    }

    fn code(self) -> String {
        format!("{}:{}", self.dimension, self.value)
    }

    fn describe(self) -> String {
        let what = match self.dimension {
            "morphology" => "morphology",
            "bulge_kind" => "bulge",
            "centre_kind" => "centre",
            _ => "mass method",
        };
        format!("{what} {}", self.label)
    }

    fn contains(self, m: &Member) -> bool {
        let word = match self.dimension {
            "morphology" => &m.morphology,
            "bulge_kind" => &m.bulge_kind,
            "centre_kind" => &m.centre_kind,
            _ => &m.mass_method,
        };
        word == self.value
    }

    fn parse(text: &str) -> Result<Subset, String> {
        Subset::all()
            .into_iter()
            .find(|s| s.code() == text)
            .ok_or_else(|| {
                format!(
                    "'{}' is not a subsample; write it as tag:value, e.g. morphology:elliptical or bulge_kind:pseudo",
                    text.chars().take(60).collect::<String>()
                )
            })
    }
}

/// The relation page's query, validated.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct RelationQuery {
    pub(crate) method: Method,
    pub(crate) filter: SampleFilter,
    pub(crate) pivot: Option<f64>,
    pub(crate) pivot2: Option<f64>,
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
            method: Method::Structural,
            filter: SampleFilter::default(),
            pivot: None,
            pivot2: None,
            group: Grouping::Morphology,
            versus: Versus::Distance,
            offset_a: None,
            offset_b: None,
            replicates: DEFAULT_REPLICATES,
            steps: DEFAULT_STEPS,
        }
    }
}

const RELATION_PARAMS: &str = "method, morphology, bulge_kind, centre_kind, mass_method, soi, sigma_definition, limits, pivot, pivot2, group, versus, offset_a, offset_b, replicates, steps";

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

/// A pivot as typed: a log10 value in the relation's x unit.
fn parse_pivot(value: &str) -> Result<f64, String> {
    match value.parse::<f64>() {
        Ok(v) if v.is_finite() && (0.0..=20.0).contains(&v) => Ok(v),
        _ => Err(format!(
            "'{}' is not a log10 value from 0 to 20, such as 2.301 (σ = 200 km/s) or 11 (10^11 M☉)",
            value.chars().take(40).collect::<String>()
        )),
    }
}

impl RelationQuery {
    /// Reads the query parameters; every problem becomes one sentence naming the parameter.
    pub(crate) fn parse(pairs: &[(String, String)]) -> Result<Self, String> {
        let mut q = Self::default();
        let mut problems = Vec::new();
        for (key, value) in pairs {
            match q.filter.set(key, value) {
                Ok(true) => continue,
                Ok(false) => {}
                Err(e) => {
                    problems.push(e);
                    continue;
                }
            }
            let value = value.trim();
            if value.is_empty() {
                continue;
            }
            let result: Result<(), String> = match key.as_str() {
                "method" => value
                    .parse::<Method>()
                    .map(|m| q.method = m)
                    .map_err(|_| {
                        format!(
                            "'{}' is not one of: structural, conditional, fitexy, bces-yx, bces-xy, bces-bisector, bces-orthogonal",
                            value.chars().take(40).collect::<String>()
                        )
                    }),
                "pivot" => parse_pivot(value).map(|v| q.pivot = Some(v)),
                "pivot2" => parse_pivot(value).map(|v| q.pivot2 = Some(v)),
                "group" => Grouping::ALL
                    .iter()
                    .find(|(_, s, _)| *s == value)
                    .map(|(g, _, _)| q.group = *g)
                    .ok_or_else(|| {
                        "it is not one of: morphology, bulge_kind, method".to_owned()
                    }),
                "versus" => Versus::ALL
                    .iter()
                    .find(|(_, s, _)| *s == value)
                    .map(|(v, _, _)| q.versus = *v)
                    .ok_or_else(|| "it is not one of: distance, sigma, bulge_mass".to_owned()),
                "offset_a" => Subset::parse(value).map(|s| q.offset_a = Some(s)),
                "offset_b" => Subset::parse(value).map(|s| q.offset_b = Some(s)),
                "replicates" => run_size(RunKind::Bootstrap, value).map(|n| q.replicates = n),
                "steps" => run_size(RunKind::Posterior, value).map(|n| q.steps = n),
                other => {
                    problems.push(format!(
                        "'{}' is not a parameter of this page (it accepts {RELATION_PARAMS}).",
                        other.chars().take(40).collect::<String>()
                    ));
                    continue;
                }
            };
            if let Err(e) = result {
                problems.push(format!("Parameter '{key}': {e}."));
            }
        }
        if problems.is_empty() {
            Ok(q)
        } else {
            Err(problems.join(" "))
        }
    }

    /// The query string (without '?') that reproduces this query; empty for the defaults.
    pub(crate) fn to_query_string(&self) -> String {
        let mut pairs: Vec<(&str, String)> = Vec::new();
        if self.method != Method::Structural {
            pairs.push(("method", self.method.as_str().to_owned()));
        }
        for (k, v) in self.filter.query_pairs() {
            pairs.push((k, v.to_owned()));
        }
        if let Some(p) = self.pivot {
            pairs.push(("pivot", format!("{p}")));
        }
        if let Some(p) = self.pivot2 {
            pairs.push(("pivot2", format!("{p}")));
        }
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

    fn pivots(&self, relation: &Relation) -> (f64, f64) {
        (
            self.pivot.unwrap_or_else(|| relation.default_pivot()),
            self.pivot2.unwrap_or_else(|| relation.default_pivot2()),
        )
    }
}

/// The relations of the catalog as it is now.
async fn relations_of(state: &AppState) -> AppResult<Vec<Relation>> {
    let bands = relation_rows::luminosity_bands(&state.pool).await?;
    Ok(Relation::all(
        &bands
            .into_iter()
            .filter(|b| Relation::valid_band(b))
            .collect::<Vec<_>>(),
    ))
}

/// The relation named in the URL, or 404.
async fn relation_named(state: &AppState, slug: &str) -> AppResult<Relation> {
    let bands = relation_rows::luminosity_bands(&state.pool).await?;
    Relation::from_slug(slug, &bands).map_err(|e| AppError::not_found(e.to_string()))
}

fn read_query(
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<RelationQuery> {
    let pairs = crate::router::query_pairs(query)?;
    RelationQuery::parse(&pairs).map_err(AppError::bad_request)
}

async fn fit_for(
    state: &AppState,
    relation: &Relation,
    q: &RelationQuery,
) -> AppResult<Arc<FitOutcome>> {
    Ok(fitted(
        &state.pool,
        &state.fits,
        state.settings.soi_threshold,
        relation,
        q.method,
        &q.filter,
        q.pivots(relation),
    )
    .await?)
}

/// A parameter with its error, rounded to the error.
fn with_error(value: f64, err: f64) -> String {
    round_to_uncertainty(value, err).replace('-', "−")
}

/// One relation on `/relations`.
pub(crate) struct RelationSummary {
    label: String,
    slug: String,
    x_label: String,
    alpha: String,
    beta: String,
    gamma: Option<String>,
    eps: String,
    n: String,
    problem: Option<String>,
}

/// `/relations`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/relations_list.html")]
pub(crate) struct RelationsListPage {
    nav: super::Nav,
    relations: Vec<RelationSummary>,
    catalog_version: i64,
}

/// Show every relation with its current structural fit.
pub(crate) async fn list_relations(
    State(state): State<AppState>,
    nav: super::Nav,
) -> AppResult<RelationsListPage> {
    let q = RelationQuery::default();
    let mut relations = Vec::new();
    let mut catalog_version = 0;
    for relation in relations_of(&state).await? {
        let outcome = fit_for(&state, &relation, &q).await?;
        catalog_version = outcome.key.catalog_version;
        let n = format!(
            "{} + {} limits",
            outcome.sample.n_detections(),
            outcome.sample.n_limits()
        );
        let summary = match &outcome.fit {
            Ok(fit) => RelationSummary {
                label: relation.label(),
                slug: relation.slug(),
                x_label: relation.x_label(),
                alpha: with_error(fit.params.alpha, fit.errors.alpha),
                beta: with_error(fit.params.beta, fit.errors.beta),
                gamma: fit
                    .params
                    .gamma
                    .map(|g| with_error(g, fit.errors.gamma.unwrap_or(0.0))),
                eps: with_error(fit.params.eps, fit.errors.eps),
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
    Ok(RelationsListPage {
        nav,
        relations,
        catalog_version,
    })
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
    symbol: &'static str,
    value: String,
    unit: String,
}

/// A row of the covariance matrix.
pub(crate) struct CovRow {
    name: &'static str,
    cells: Vec<String>,
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

/// `/relations/{relation}`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/relation_show.html")]
pub(crate) struct RelationPage {
    nav: super::Nav,
    label: String,
    slug: String,
    x_label: String,
    x2_label: Option<String>,
    method_options: Vec<OptionView>,
    morphology_options: Vec<OptionView>,
    bulge_options: Vec<OptionView>,
    centre_options: Vec<OptionView>,
    mass_method_options: Vec<OptionView>,
    soi_resolved: bool,
    exclude_limits: bool,
    uses_sigma: bool,
    sigma_central: bool,
    pivot: String,
    pivot2: String,
    pivot_unit: String,
    group_options: Vec<OptionView>,
    versus_options: Vec<OptionView>,
    offset_a_options: Vec<OptionView>,
    offset_b_options: Vec<OptionView>,
    catalog_version: i64,
    fitted_at: String,
    method: &'static str,
    filter_text: String,
    n_detections: usize,
    n_limits: usize,
    sigma_note: Option<String>,
    missing_note: Option<String>,
    fit_error: Option<String>,
    fit_note: String,
    params: Vec<ParamView>,
    cov_names: Vec<&'static str>,
    cov_rows: Vec<CovRow>,
    chart_svg: String,
    residual_svg: String,
    residual2_svg: String,
    residual2_label: String,
    chart_error: Option<String>,
    outliers: Vec<ObjectView>,
    influential: Vec<ObjectView>,
    influence_note: Option<String>,
    offset: Option<OffsetView>,
    offset_note: Option<String>,
    query: String,
    /// The query string without '?', for the run form.
    query_plain: String,
    runs: Vec<RunView>,
    refresh: bool,
    may_start: bool,
}

/// A bootstrap or posterior run on the relation page.
pub(crate) struct RunView {
    kind: &'static str,
    title: String,
    size: usize,
    /// "stored", "running", "failed" or "none".
    status: &'static str,
    progress: String,
    note: Option<String>,
    params: Vec<RunParamView>,
    stored_at: String,
}

/// One parameter of a finished run.
pub(crate) struct RunParamView {
    name: &'static str,
    median: String,
    interval68: String,
    interval95: String,
}

fn run_param_name(name: &str) -> &'static str {
    match name {
        "alpha" => "α",
        "beta" => "β",
        "beta2" => "β₂",
        "gamma" => "γ",
        "eps" => "ε",
        _ => "?",
    }
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
            note: None,
            params: Vec::new(),
            stored_at: String::new(),
        };
        if kind == RunKind::Posterior
            && !matches!(q.method, Method::Structural | Method::Conditional)
        {
            view.status = "failed";
            view.note = Some(format!(
                "The {} estimator has no likelihood, so it has no posterior.",
                q.method.as_str()
            ));
            views.push(view);
            continue;
        }
        if let Some(run) = stored_run(&state.pool, outcome, kind, size).await? {
            let params: Vec<crate::fit::ensemble::ParamSummary> =
                serde_json::from_str::<Vec<serde_json::Value>>(&run.params_json)
                    .unwrap_or_default()
                    .into_iter()
                    .filter_map(|v| {
                        let name = run_param_name(v["name"].as_str()?);
                        let get = |k: &str| v[k].as_f64();
                        Some(crate::fit::ensemble::ParamSummary {
                            name,
                            median: get("median")?,
                            p16: get("p16")?,
                            p84: get("p84")?,
                            p2_5: get("p2_5")?,
                            p97_5: get("p97_5")?,
                            mean: get("mean")?,
                            sd: get("sd")?,
                        })
                    })
                    .collect();
            view.status = "stored";
            view.stored_at = run.created_at;
            view.params = params
                .iter()
                .map(|p| {
                    let half = (p.p84 - p.p16) / 2.0;
                    let decimals = if half > 0.0 {
                        (1.0 - half.log10().floor()).clamp(1.0, 6.0) as usize
                    } else {
                        3
                    };
                    RunParamView {
                        name: p.name,
                        median: super::display::fixed(p.median, decimals),
                        interval68: format!(
                            "{} to {}",
                            super::display::fixed(p.p16, decimals),
                            super::display::fixed(p.p84, decimals)
                        ),
                        interval95: format!(
                            "{} to {}",
                            super::display::fixed(p.p2_5, decimals),
                            super::display::fixed(p.p97_5, decimals)
                        ),
                    }
                })
                .collect();
            if let Ok(settings) = serde_json::from_str::<serde_json::Value>(&run.settings_json) {
                if let Some(w) = settings["warning"].as_str() {
                    view.note = Some(w.to_owned());
                } else if let Some(n) = settings["failed"].as_u64().filter(|n| *n > 0) {
                    view.note = Some(format!(
                        "{n} resamples could not be fitted and were left out."
                    ));
                }
            }
        } else if let Some(progress) = state.runs.get(&RunKey {
            fit: outcome.key.clone(),
            kind,
            size,
        }) {
            match progress.state() {
                RunState::Running | RunState::Stored => {
                    view.status = "running";
                    let done = progress.done.load(std::sync::atomic::Ordering::Relaxed);
                    view.progress = match kind {
                        RunKind::Bootstrap => format!(
                            "{done} of {} resamples fitted (started {})",
                            progress.total, progress.started_at
                        ),
                        RunKind::Posterior => format!(
                            "{done} of {} sampler steps done, burn-in included (started {})",
                            progress.total, progress.started_at
                        ),
                    };
                }
                RunState::Failed(why) => {
                    view.status = "failed";
                    view.note = Some(why);
                }
            }
        }
        views.push(view);
    }
    Ok(views)
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

/// `POST /relations/{relation}/runs`: start a bootstrap or posterior run in the background
/// and go back to the relation page, which shows its progress.
pub(crate) async fn start_run(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    axum::Form(form): axum::Form<RunForm>,
) -> AppResult<Redirect> {
    let pairs: Vec<(String, String)> = serde_urlencoded::from_str(&form.query)
        .map_err(|_| AppError::bad_request("The relation's settings could not be read."))?;
    let q = RelationQuery::parse(&pairs).map_err(AppError::bad_request)?;
    let size = if form.size.trim().is_empty() {
        0
    } else {
        form.size.trim().parse::<usize>().map_err(|_| {
            AppError::bad_request("Parameter 'size': give a whole number of resamples or steps.")
        })?
    };
    let (kind, size) = RunKind::parse(form.kind.trim(), size).map_err(AppError::bad_request)?;
    let relation = relation_named(&state, &slug).await?;
    let outcome = fit_for(&state, &relation, &q).await?;
    if let Err(e) = &outcome.fit {
        return Err(AppError::bad_request(format!(
            "There is no fit to start a run from: {e}"
        )));
    }
    if stored_run(&state.pool, &outcome, kind, size)
        .await?
        .is_none()
    {
        state.runs.start(state.pool.clone(), outcome, kind, size);
    }
    let mut back = q.clone();
    match kind {
        RunKind::Bootstrap => back.replicates = size,
        RunKind::Posterior => back.steps = size,
    }
    let query = back.to_query_string();
    Ok(Redirect::to(&format!(
        "/relations/{}{}#runs",
        relation.slug(),
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
    }
}

/// The relation chart of a fit outcome.
pub(super) fn relation_chart(
    relation: &Relation,
    outcome: &FitOutcome,
    grouping: Grouping,
) -> RelationChart {
    let fit = outcome.fit.as_ref().ok();
    let (groups, index) = groups_of(grouping, &outcome.sample.members);
    let points: Vec<ChartPoint> = outcome
        .sample
        .points
        .iter()
        .zip(&outcome.sample.members)
        .zip(&index)
        .map(|((p, m), g)| chart_point(m, p, p.x, chart_y(fit, p), *g))
        .collect();
    let (x_min, x_max) = points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |acc, p| {
            (acc.0.min(p.x), acc.1.max(p.x))
        });
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
        points,
        groups,
        line: fit.map(|f| LineSpec {
            alpha: f.params.alpha,
            beta: f.params.beta,
            beta2: f.params.beta2,
            pivot: f.spec.pivot,
            scatter_dex: f.params.eps.max(0.0),
        }),
        mean_band: fit.map_or_else(Vec::new, |f| mean_band(f, x_min, x_max)),
        ..RelationChart::default()
    }
}

/// Draw the relation chart, or say why not.
fn relation_chart_svg(
    relation: &Relation,
    outcome: &FitOutcome,
    grouping: Grouping,
) -> Result<String, String> {
    relation_svg(&relation_chart(relation, outcome, grouping)).map_err(|e| e.to_string())
}

/// Show one relation.
pub(crate) async fn show_relation(
    State(state): State<AppState>,
    nav: super::Nav,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<RelationPage> {
    let q = read_query(query)?;
    let relation = relation_named(&state, &slug).await?;
    let outcome = fit_for(&state, &relation, &q).await?;
    let sample = &outcome.sample;
    let fit = outcome.fit.as_ref().ok();
    let mut chart_error = None;
    let chart_svg = relation_chart_svg(&relation, &outcome, q.group).unwrap_or_else(|e| {
        chart_error = Some(e);
        String::new()
    });

    let mut params = Vec::new();
    let mut cov_names = Vec::new();
    let mut cov_rows = Vec::new();
    let mut residual_chart = String::new();
    let mut residual2_chart = String::new();
    let mut outliers = Vec::new();
    let mut influential = Vec::new();
    let mut influence_note = None;
    if let Some(f) = fit {
        let unit = relation.x_unit();
        params.push(ParamView {
            symbol: "α",
            value: with_error(f.params.alpha, f.errors.alpha),
            unit: "log10 M☉ at the pivot".into(),
        });
        params.push(ParamView {
            symbol: "β",
            value: with_error(f.params.beta, f.errors.beta),
            unit: format!("dex of M_BH per dex of x ({unit})"),
        });
        if let Some(g) = f.params.gamma {
            params.push(ParamView {
                symbol: "γ",
                value: with_error(g, f.errors.gamma.unwrap_or(0.0)),
                unit: "dex of M_BH per dex of M_bulge".into(),
            });
        }
        params.push(ParamView {
            symbol: "ε",
            value: with_error(f.params.eps, f.errors.eps),
            unit: "dex (intrinsic scatter)".into(),
        });
        cov_names.clone_from(&f.cov_names);
        cov_rows = f
            .cov_names
            .iter()
            .zip(&f.cov)
            .map(|(name, row)| CovRow {
                name,
                cells: row.iter().map(|v| significant(*v, 3)).collect(),
            })
            .collect();

        // Residuals: against x, and against the property the reader picked.
        let residuals = crate::fit::residuals(f, &sample.points);
        let (groups, index) = groups_of(q.group, &sample.members);
        let residual_points = |x_of: &dyn Fn(&Member, &Point) -> Option<f64>| -> Vec<ChartPoint> {
            sample
                .points
                .iter()
                .zip(&sample.members)
                .zip(&residuals)
                .zip(&index)
                .filter_map(|(((p, m), r), g)| {
                    let x = x_of(m, p)?;
                    // The second property's error is not carried in the sample: no x bar.
                    let mut c = chart_point(m, p, x, r.residual_dex, *g);
                    c.x_err = 0.0;
                    Some(c)
                })
                .collect()
        };
        let mut vs_x = residual_points(&|_, p| Some(p.x));
        for (c, p) in vs_x.iter_mut().zip(&sample.points) {
            c.x_err = p.x_err;
        }
        let chart = ResidualChart {
            title: format!("Residuals of {} against x", relation.label()),
            x_label: relation.x_label(),
            points: vs_x,
            groups: groups.clone(),
            scatter_dex: f.params.eps.max(0.0),
            ..ResidualChart::default()
        };
        residual_chart = residual_svg(&chart).unwrap_or_default();
        let chart2 = ResidualChart {
            title: format!(
                "Residuals of {} against {}",
                relation.label(),
                q.versus.axis_label()
            ),
            x_label: q.versus.axis_label(),
            points: residual_points(&|m, _| q.versus.value(m)),
            groups,
            scatter_dex: f.params.eps.max(0.0),
            ..ResidualChart::default()
        };
        residual2_chart = residual_svg(&chart2).unwrap_or_default();

        let mut flagged: Vec<_> = residuals
            .iter()
            .filter(|r| {
                if r.upper_limit {
                    r.z <= -OUTLIER_Z
                } else {
                    r.z.abs() >= OUTLIER_Z
                }
            })
            .collect();
        flagged.sort_by(|a, b| b.z.abs().total_cmp(&a.z.abs()));
        outliers = flagged
            .into_iter()
            .map(|r| {
                let m = &sample.members[r.index];
                ObjectView {
                    name: m.name.clone(),
                    slug: m.slug.clone(),
                    first: if r.upper_limit {
                        format!("< {}", super::display::fixed(r.residual_dex, 2))
                    } else {
                        super::display::fixed(r.residual_dex, 2)
                    },
                    second: super::display::fixed(r.z, 1),
                    third: String::new(),
                }
            })
            .collect();

        match state.fits.influence(&outcome).await?.as_ref() {
            Ok(list) => {
                let mut sorted: Vec<_> = list.iter().collect();
                sorted.sort_by(|a, b| b.shift_sigma.total_cmp(&a.shift_sigma));
                influential = sorted
                    .into_iter()
                    .take(TOP_INFLUENCE)
                    .map(|i| {
                        let m = &sample.members[i.index];
                        ObjectView {
                            name: m.name.clone(),
                            slug: m.slug.clone(),
                            first: super::display::fixed(i.d_beta, 3),
                            second: super::display::fixed(i.d_alpha, 3),
                            third: super::display::fixed(i.shift_sigma, 2),
                        }
                    })
                    .collect();
            }
            Err(e) => influence_note = Some(e.to_string()),
        }
    }

    // Zero-point offset between the two subsamples the reader picked.
    let mut offset = None;
    let mut offset_note = None;
    if let (Some(a), Some(b)) = (q.offset_a, q.offset_b) {
        if a == b {
            offset_note = Some("Pick two different subsamples to compare.".to_owned());
        } else if let Ok(spec) = outcome.spec.clone() {
            let pick = |s: Subset| -> Vec<Point> {
                sample
                    .points
                    .iter()
                    .zip(&sample.members)
                    .filter(|(_, m)| s.contains(m))
                    .map(|(p, _)| p.clone())
                    .collect()
            };
            let (pa, pb) = (pick(a), pick(b));
            let result =
                tokio::task::spawn_blocking(move || crate::fit::zero_point_offset(&pa, &pb, &spec))
                    .await
                    .map_err(anyhow::Error::from)?;
            match result {
                Ok(o) => {
                    offset = Some(OffsetView {
                        a: a.describe(),
                        b: b.describe(),
                        n_a: o.n_a,
                        n_b: o.n_b,
                        offset: with_error(o.offset_dex, o.err_dex),
                        significance: super::display::fixed(o.significance_sigma, 1),
                    });
                }
                Err(e) => {
                    offset_note = Some(format!(
                        "The offset of {} against {} could not be fitted: {e}",
                        b.describe(),
                        a.describe()
                    ));
                }
            }
        }
    }

    let runs = run_views(&state, &outcome, &q).await?;
    let refresh = runs.iter().any(|r| r.status == "running");
    let may_start = nav.username.is_some();
    let pivots = q.pivots(&relation);
    let methods = Method::ALL;
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
    let sigma_note = (relation.uses_sigma() && sample.left_out_sigma_definition > 0).then(|| {
        format!(
            "{} galaxies with a {} were left out: σ definitions are never mixed in one fit.",
            sample.left_out_sigma_definition,
            match q.filter.sigma {
                crate::relations::SigmaChoice::Effective => "central σ_c",
                crate::relations::SigmaChoice::Central => "σ_e",
            }
        )
    });
    let missing_note = (sample.left_out_missing > 0).then(|| {
        format!(
            "{} galaxies matching the selection lack a value this relation needs.",
            sample.left_out_missing
        )
    });
    Ok(RelationPage {
        nav,
        label: relation.label(),
        slug: relation.slug(),
        x_label: relation.x_label(),
        x2_label: relation.x2_label(),
        method_options: methods
            .iter()
            .map(|m| option(m.as_str(), method_label(*m), *m == q.method))
            .collect(),
        morphology_options: enum_options(
            Morphology::pairs(),
            q.filter.morphology.map(Morphology::as_str),
        ),
        bulge_options: enum_options(
            BulgeKind::pairs(),
            q.filter.bulge_kind.map(BulgeKind::as_str),
        ),
        centre_options: enum_options(
            CentreKind::pairs(),
            q.filter.centre_kind.map(CentreKind::as_str),
        ),
        mass_method_options: enum_options(
            MassMethod::pairs(),
            q.filter.mass_method.map(MassMethod::as_str),
        ),
        soi_resolved: q.filter.soi == crate::relations::SoiChoice::Resolved,
        exclude_limits: q.filter.exclude_limits,
        uses_sigma: relation.uses_sigma(),
        sigma_central: q.filter.sigma == crate::relations::SigmaChoice::Central,
        pivot: format!("{}", (pivots.0 * 1e4).round() / 1e4),
        pivot2: format!("{}", (pivots.1 * 1e4).round() / 1e4),
        pivot_unit: relation.x_unit(),
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
        catalog_version: outcome.key.catalog_version,
        fitted_at: outcome.fitted_at.clone(),
        method: q.method.as_str(),
        filter_text: outcome.key.filter.replace(';', "; "),
        n_detections: sample.n_detections(),
        n_limits: sample.n_limits(),
        sigma_note,
        missing_note,
        fit_error: outcome.fit.as_ref().err().map(ToString::to_string),
        fit_note: method_note(q.method).to_owned(),
        params,
        cov_names,
        cov_rows,
        chart_svg,
        residual_svg: residual_chart,
        residual2_svg: residual2_chart,
        residual2_label: q.versus.axis_label(),
        chart_error,
        outliers,
        influential,
        influence_note,
        offset,
        offset_note,
        query: {
            let s = q.to_query_string();
            if s.is_empty() { s } else { format!("?{s}") }
        },
        query_plain: q.to_query_string(),
        runs,
        refresh,
        may_start,
    })
}

fn method_label(m: Method) -> &'static str {
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
            "Modified FITEXY (Tremaine et al. 2002, ApJ 574, 740): cannot use upper limits."
        }
        Method::Bces(_) => {
            "BCES (Akritas & Bershady 1996, ApJ 470, 706): moment estimators, cannot use upper limits."
        }
    }
}

/// `/relations/{relation}/chart.svg`: the relation chart as a file.
pub(crate) async fn download_chart(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let q = read_query(query)?;
    let relation = relation_named(&state, &slug).await?;
    let outcome = fit_for(&state, &relation, &q).await?;
    let svg = relation_chart_svg(&relation, &outcome, q.group).map_err(AppError::bad_request)?;
    Ok(download(
        "image/svg+xml; charset=utf-8",
        &format!("{}-{}.svg", relation.slug(), q.method.as_str()),
        svg,
    ))
}

/// `/relations/{relation}/fit.json`: the fit and its settings.
pub(crate) async fn download_fit(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let q = read_query(query)?;
    let relation = relation_named(&state, &slug).await?;
    let outcome = fit_for(&state, &relation, &q).await?;
    let (pivot, pivot2) = q.pivots(&relation);
    let body = serde_json::json!({
        "relation": relation.slug(),
        "label": relation.label(),
        "x": relation.x_label(),
        "x2": relation.x2_label(),
        "y": relation.y_label(),
        "method": q.method.as_str(),
        "sample_filter": outcome.key.filter,
        "pivot_log": pivot,
        "pivot2_log": (relation.shape() == Shape::Plane).then_some(pivot2),
        "catalog_version": outcome.key.catalog_version,
        "fitted_at": outcome.fitted_at,
        "n_detections": outcome.sample.n_detections(),
        "n_upper": outcome.sample.n_limits(),
        "left_out_sigma_definition": outcome.sample.left_out_sigma_definition,
        "galaxies": outcome.sample.members.iter().map(|m| m.slug.as_str()).collect::<Vec<_>>(),
        "fit": outcome.fit.as_ref().ok(),
        "error": outcome.fit.as_ref().err().map(ToString::to_string),
    });
    let text = serde_json::to_string_pretty(&body).map_err(anyhow::Error::from)?;
    Ok(download(
        "application/json",
        &format!("{}-{}.json", relation.slug(), q.method.as_str()),
        text,
    ))
}

/// A CSV cell that a spreadsheet will not read as a formula.
fn csv_text(text: &str) -> String {
    if text.starts_with(['=', '+', '-', '@', '\t', '\r']) {
        format!("'{text}")
    } else {
        text.to_owned()
    }
}

/// `/relations/{relation}/sample.csv`: the fitted sample, one galaxy a row.
pub(crate) async fn download_sample(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let q = read_query(query)?;
    let relation = relation_named(&state, &slug).await?;
    let outcome = fit_for(&state, &relation, &q).await?;
    let unit = relation.x_unit();
    let mut w = csv::Writer::from_writer(Vec::new());
    let header = [
        "galaxy".to_owned(),
        "slug".to_owned(),
        "morphology".to_owned(),
        "bulge_kind".to_owned(),
        "centre_kind".to_owned(),
        "mass_method".to_owned(),
        format!("x [{unit}]"),
        "x_err [dex]".to_owned(),
        "x2 [log10 M_sun]".to_owned(),
        "x2_err [dex]".to_owned(),
        "log_mbh [log10 M_sun, at adopted distance]".to_owned(),
        "log_mbh_err [dex]".to_owned(),
        "xy_cov [dex^2]".to_owned(),
        "upper_limit".to_owned(),
    ];
    w.write_record(&header).map_err(anyhow::Error::from)?;
    for (p, m) in outcome.sample.points.iter().zip(&outcome.sample.members) {
        w.write_record([
            csv_text(&m.name),
            m.slug.clone(),
            m.morphology.clone(),
            m.bulge_kind.clone(),
            m.centre_kind.clone(),
            m.mass_method.clone(),
            format!("{:.4}", p.x),
            format!("{:.4}", p.x_err),
            p.x2.map_or(String::new(), |v| format!("{v:.4}")),
            if p.x2.is_some() {
                format!("{:.4}", p.x2_err)
            } else {
                String::new()
            },
            format!("{:.4}", p.y),
            format!("{:.4}", p.y_err),
            format!("{:.6}", p.xy_cov),
            if p.upper_limit { "1" } else { "0" }.to_owned(),
        ])
        .map_err(anyhow::Error::from)?;
    }
    let bytes = w.into_inner().map_err(|e| anyhow::anyhow!("{e}"))?;
    let text = String::from_utf8(bytes).map_err(anyhow::Error::from)?;
    Ok(download(
        "text/csv; charset=utf-8",
        &format!("{}-sample.csv", relation.slug()),
        text,
    ))
}

fn download(content_type: &'static str, filename: &str, body: String) -> Response {
    (
        [
            (header::CONTENT_TYPE, content_type.to_owned()),
            (
                header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"{filename}\""),
            ),
        ],
        body,
    )
        .into_response()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs(items: &[(&str, &str)]) -> Vec<(String, String)> {
        items
            .iter()
            .map(|(k, v)| ((*k).to_owned(), (*v).to_owned()))
            .collect()
    }

    #[test]
    fn the_query_round_trips_and_names_bad_parameters() {
        let q = RelationQuery::parse(&pairs(&[
            ("method", "bces-bisector"),
            ("morphology", "elliptical"),
            ("pivot", "2.2"),
            ("group", "bulge_kind"),
            ("versus", "sigma"),
            ("offset_a", "morphology:elliptical"),
            ("offset_b", "bulge_kind:pseudo"),
        ]))
        .unwrap();
        assert_eq!(q.method.as_str(), "bces-bisector");
        assert_eq!(q.pivot, Some(2.2));
        let text = q.to_query_string();
        let back: Vec<(String, String)> = serde_urlencoded::from_str(&text).unwrap();
        assert_eq!(RelationQuery::parse(&back).unwrap(), q);
        assert_eq!(RelationQuery::default().to_query_string(), "");

        let err = RelationQuery::parse(&pairs(&[
            ("method", "eyeball"),
            ("pivot", "NaN"),
            ("offset_a", "colour:red"),
            ("fish", "1"),
        ]))
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
    fn the_mean_band_follows_the_parameter_covariance() {
        use crate::fit::FitSpec;
        let fit = Fit::given_line(
            FitSpec::new(Method::Structural, 2.3),
            crate::fit::Params::line(8.3, 5.0, 0.35),
            [[0.0025, 0.003, 0.0], [0.003, 0.09, 0.0], [0.0, 0.0, 0.0009]],
        );
        let band = mean_band(&fit, 2.0, 2.6);
        assert_eq!(band.len(), BAND_SAMPLES);
        // At x = 2.0, d = −0.3: Var = 0.0025 + 0.09·0.09 + 2·(−0.3)·0.003 = 0.0088 (science
        // notes §6, computed).
        let first = band[0];
        let half = (first.upper - first.lower) / 2.0;
        assert!((half - 0.0088f64.sqrt()).abs() < 1e-12, "{half}");
        assert!(((first.upper + first.lower) / 2.0 - (8.3 - 1.5)).abs() < 1e-12);
        assert!(mean_band(&fit, 2.0, 2.0).is_empty());
    }

    #[test]
    fn csv_cells_never_start_a_formula() {
        assert_eq!(csv_text("=cmd()"), "'=cmd()");
        assert_eq!(csv_text("Corvane 30"), "Corvane 30");
    }
}
