//! `/fits/{id}`: the permanent page of a fit one can cite. The fit is made again from the
//! catalog version its identifier names (`relations::citation::remake`) and checked against
//! the result recorded when the identifier was first shown.

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::{Path, State};

use super::display::{Uncertain, VersionNote, readable_utc, with_errors};
use super::relations::{
    CiteView, CovRow, Grouping, ParamView, RelationQuery, filter_words, fit_views, method_label,
    relation_chart_svg, with_version,
};
use crate::catalog::history::{Pinned, VersionAsk};
use crate::error::AppResult;
use crate::relations::citation::{self, FIT_CODE_VERSION};
use crate::state::AppState;

/// `/fits/{id}`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/fit_show.html")]
pub(crate) struct FitPage {
    nav: super::Nav,
    fit_id: String,
    label: String,
    slug: String,
    method: &'static str,
    sample: String,
    size: String,
    version_note: Option<VersionNote>,
    /// The query (with '?') that asks for this fit on the relation page and its downloads.
    query: String,
    params: Vec<ParamView>,
    interval_label: String,
    cov_rows: Vec<CovRow>,
    chart_svg: String,
    /// The result made now equals the recorded one.
    same_result: bool,
    /// The code is the one the record was made with.
    same_code: bool,
    recorded_code: String,
    code: &'static str,
    recorded_at: String,
    cite: Option<CiteView>,
    fit_error: Option<String>,
    /// The first rows of the fitted sample.
    sample_rows: Vec<SampleRowView>,
    /// Objects of the sample beyond those rows.
    sample_more: usize,
    x_label: String,
}

/// One object of the fitted sample, as the fit read it.
pub(crate) struct SampleRowView {
    name: String,
    slug: String,
    x: String,
    y: String,
    limit: bool,
}

/// Rows of the sample the page lists; `sample.csv` has every object.
const SAMPLE_ROWS: usize = 100;

/// Show a fit by its identifier.
pub(crate) async fn show_fit(
    State(state): State<AppState>,
    nav: super::Nav,
    Path(id): Path<String>,
) -> AppResult<FitPage> {
    let remade = citation::remake(&state.catalog(), &id).await?;
    let version = remade.record.catalog_version;
    let current = crate::catalog::history::current_version(&state.pool).await?;
    let ask = VersionAsk::Number(version);
    let pinned = Pinned {
        version,
        current,
        release: None,
        asked: true,
    };
    let made_at = crate::catalog::history::made_at(&state.pool, version).await?;
    let q = RelationQuery {
        fit: remade.choice.clone(),
        ..RelationQuery::default()
    };
    let plain = with_version(q.to_query_string(), &ask);
    let version_note = VersionNote::of(
        &pinned,
        &ask,
        made_at.as_deref(),
        format!("/relations/{}{}", remade.relation.slug(), {
            let now = q.to_query_string();
            if now.is_empty() {
                now
            } else {
                format!("?{now}")
            }
        }),
    );
    let outcome = &remade.outcome;
    let fit = outcome.fit.as_ref().ok();
    let (params, cov_rows) = fit
        .map(|f| fit_views(&remade.relation, f))
        .unwrap_or_default();
    let sample_rows = outcome
        .sample
        .members
        .iter()
        .zip(&outcome.sample.points)
        .take(SAMPLE_ROWS)
        .map(|(m, p)| SampleRowView {
            name: m.name.clone(),
            slug: m.slug.clone(),
            x: with_errors(Uncertain::symmetric(p.x, p.x_err), 2),
            y: with_errors(
                Uncertain::asymmetric(p.y, p.y_err, p.y_err, p.upper_limit),
                2,
            ),
            limit: p.upper_limit,
        })
        .collect();
    let chart_svg =
        relation_chart_svg(&remade.relation, outcome, Grouping::Morphology).unwrap_or_default();
    Ok(FitPage {
        nav,
        fit_id: remade.record.fit_id.clone(),
        label: remade.relation.label(),
        slug: remade.relation.slug(),
        method: method_label(remade.choice.method),
        sample: filter_words(&outcome.key.filter),
        size: format!(
            "{} galaxies with measured masses and {} upper limits",
            outcome.sample.n_detections(),
            outcome.sample.n_limits()
        ),
        version_note,
        query: format!("?{plain}"),
        params,
        interval_label: fit.map_or("", |f| f.intervals.kind.label()).to_owned(),
        cov_rows,
        chart_svg,
        same_result: remade.same_result,
        same_code: remade.same_code,
        recorded_code: remade.record.code_version.clone(),
        code: FIT_CODE_VERSION,
        recorded_at: readable_utc(&remade.record.created_at),
        cite: CiteView::of(&remade.catalog, &remade.relation, outcome).await?,
        fit_error: outcome.fit.as_ref().err().map(ToString::to_string),
        sample_rows,
        sample_more: outcome.sample.points.len().saturating_sub(SAMPLE_ROWS),
        x_label: remade.relation.x_label(),
    })
}
