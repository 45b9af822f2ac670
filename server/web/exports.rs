//! The downloads for papers and astronomy software (`export`): the fitted sample as a VOTable
//! and as an AASTeX table, the fit as a LaTeX table row, a methods paragraph, and the adopted
//! catalog as a VOTable. Each reads the same query as `fit.json` (the catalog version included)
//! and hands the fit to `export`.

use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, State};
use axum::response::Response;

use super::relations::{Target, download, fit_for, read_query, target};
use crate::error::AppResult;
use crate::relations::FitOutcome;
use crate::state::AppState;

/// The media type of a VOTable (IVOA VOTable 1.4, appendix on media types).
const VOTABLE: &str = "application/x-votable+xml";
/// The media type of LaTeX text.
const TEX: &str = "text/x-tex; charset=utf-8";

/// The relation in the URL at the version asked for, and its fit for the query.
async fn fit_of(
    state: &AppState,
    slug: &str,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<(Target, std::sync::Arc<FitOutcome>)> {
    let t = target(state, slug, query).await?;
    let q = read_query(&t)?;
    let outcome = fit_for(&t, &q).await?;
    Ok((t, outcome))
}

/// A download's name, as the other relation files are named: relation, estimator, catalog
/// version and what it is ("m_sigma-structural-v12-sample.vot").
fn file_name(relation: &crate::relations::Relation, outcome: &FitOutcome, what: &str) -> String {
    format!(
        "{}-{}-v{}-{what}",
        relation.slug(),
        outcome.key.method,
        outcome.key.catalog_version
    )
}

/// `/relations/{relation}/sample.vot`: the fitted sample as a VOTable.
pub(crate) async fn sample_vot(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let (t, outcome) = fit_of(&state, &slug, query).await?;
    let relation = &t.relation;
    let text = crate::export::sample_votable(&outcome, relation)?;
    Ok(download(
        &t.pinned,
        VOTABLE,
        &file_name(relation, &outcome, "sample.vot"),
        text,
    ))
}

/// `/relations/{relation}/fit.tex`: the fit as one row of a LaTeX table of relations.
pub(crate) async fn fit_tex(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let (t, outcome) = fit_of(&state, &slug, query).await?;
    let relation = &t.relation;
    let text = crate::export::latex::fit_tex_file(&outcome, relation);
    Ok(download(
        &t.pinned,
        TEX,
        &file_name(relation, &outcome, "fit.tex"),
        text,
    ))
}

/// `/relations/{relation}/sample.tex`: the fitted sample as an AASTeX `deluxetable`.
pub(crate) async fn sample_tex(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let (t, outcome) = fit_of(&state, &slug, query).await?;
    let relation = &t.relation;
    let text = crate::export::sample_table(&outcome, relation);
    Ok(download(
        &t.pinned,
        TEX,
        &file_name(relation, &outcome, "sample.tex"),
        text,
    ))
}

/// `/relations/{relation}/methods.txt`: a paragraph for a methods section.
pub(crate) async fn methods_txt(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let (t, outcome) = fit_of(&state, &slug, query).await?;
    let relation = &t.relation;
    let mut text = crate::export::methods_paragraph(&outcome, relation);
    text.push('\n');
    Ok(download(
        &t.pinned,
        "text/plain; charset=utf-8",
        &file_name(relation, &outcome, "methods.txt"),
        text,
    ))
}

/// `/catalog.vot`: the adopted catalog as a VOTable, named with its version; any past version
/// with `?version=N` or `?release=NAME`, as the other catalog files.
pub(crate) async fn catalog_vot(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let pinned = super::submissions::file_version(&state, query).await?;
    let (rows, version) =
        crate::catalog::csv_io::adopted_catalog(&state.pool, Some(pinned.version)).await?;
    let text = crate::export::catalog_votable(&rows, version)?;
    Ok(super::submissions::catalog_file(
        &pinned, text, version, "vot", VOTABLE,
    ))
}
