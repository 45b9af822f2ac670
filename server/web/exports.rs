//! The downloads for papers and astronomy software (`export`): the fitted sample as a VOTable
//! and as an AASTeX table, the fit as a LaTeX table row, a methods paragraph, and the adopted
//! catalog as a VOTable. Each reads the same query as `fit.json` (the catalog version included)
//! and hands the fit to `export`.

use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, State};
use axum::response::Response;

use super::relations::{Target, download, file_name, fit_for, read_query, target};
use crate::error::AppResult;
use crate::relations::{FitOutcome, Relation};
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

/// A relation's export for the query: `make` writes the file from the fit, named as the other
/// relation files with `tail` ("-sample.vot").
async fn export_file(
    state: &AppState,
    slug: &str,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
    content_type: &'static str,
    tail: &str,
    make: impl FnOnce(&FitOutcome, &Relation) -> AppResult<String>,
) -> AppResult<Response> {
    let (t, outcome) = fit_of(state, slug, query).await?;
    let text = make(&outcome, &t.relation)?;
    Ok(download(
        &t.pinned,
        content_type,
        &file_name(&t.relation, &outcome, tail),
        text,
    ))
}

/// `/relations/{relation}/sample.vot`: the fitted sample as a VOTable.
pub(crate) async fn sample_vot(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    export_file(&state, &slug, query, VOTABLE, "-sample.vot", |o, r| {
        Ok(crate::export::sample_votable(o, r)?)
    })
    .await
}

/// `/relations/{relation}/fit.tex`: the fit as one row of a LaTeX table of relations.
pub(crate) async fn fit_tex(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    export_file(&state, &slug, query, TEX, "-fit.tex", |o, r| {
        Ok(crate::export::latex::fit_tex_file(o, r))
    })
    .await
}

/// `/relations/{relation}/sample.tex`: the fitted sample as an AASTeX `deluxetable`.
pub(crate) async fn sample_tex(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    export_file(&state, &slug, query, TEX, "-sample.tex", |o, r| {
        Ok(crate::export::sample_table(o, r))
    })
    .await
}

/// `/relations/{relation}/methods.txt`: a paragraph for a methods section.
pub(crate) async fn methods_txt(
    State(state): State<AppState>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    export_file(
        &state,
        &slug,
        query,
        "text/plain; charset=utf-8",
        "-methods.txt",
        |o, r| Ok(crate::export::methods_paragraph(o, r) + "\n"),
    )
    .await
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
