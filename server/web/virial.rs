//! `/virial-factor`: calibrating the mean virial factor ⟨f⟩ of reverberation AGN against the
//! quiescent M–σ relation (`relations::virial`), with the published calibrations, the factor
//! adopted now and its history, and a chart; admins adopt a calibration here (POST
//! `/virial-factor/adopt`, `relations::virial::adopt_calibration`).

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Query, State};
use axum::response::{IntoResponse, Redirect, Response};
use serde::Deserialize;

use super::display::{Uncertain, VersionNote, fixed, readable_utc, with_errors};
use crate::auth::Principal;
use crate::catalog::model::{BulgeKind, WidthDefinition};
use crate::catalog::virial as stored;
use crate::charts::{ChartPoint, LineSpec, virial_calibration_svg};
use crate::error::{AppError, AppResult};
use crate::relations::virial::{
    CalibrationAsk, CalibrationView, PUBLISHED, SlopeChoice, adopt_calibration, calibration,
};
use crate::state::AppState;

/// One choice of a select or radio group.
pub(crate) struct Choice {
    value: &'static str,
    label: String,
    selected: bool,
}

/// The calibration's numbers, for display.
pub(crate) struct ResultView {
    log_f: String,
    log_f_err_agn: String,
    log_f_err_relation: String,
    f: String,
    f_interval: String,
    eps_agn: String,
    alpha: String,
    beta: String,
    eps: String,
}

/// One published calibration.
pub(crate) struct PublishedView {
    paper: &'static str,
    sample: &'static str,
    width: &'static str,
    quoted: &'static str,
    log_f: String,
    provenance: &'static str,
}

/// One adoption of the history.
pub(crate) struct AdoptionView {
    width: &'static str,
    log_f: String,
    from_version: i64,
    source: String,
    by: String,
    when_iso: String,
    when: String,
}

/// One AGN of the calibration.
pub(crate) struct AgnView {
    name: String,
    slug: String,
    sigma: String,
    log_vp: String,
}

/// `/virial-factor`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/virial_factor.html")]
pub(crate) struct VirialFactorPage {
    nav: super::Nav,
    flash: Option<String>,
    version_note: Option<VersionNote>,
    /// `?version=N` (or release) for links of a named version, else empty.
    gq: String,
    /// The version query pair for the form ("" for the current version).
    version_pair: Option<(String, String)>,
    version: i64,
    past: bool,
    widths: Vec<Choice>,
    bulges: Vec<Choice>,
    slopes: Vec<Choice>,
    sample_words: String,
    slope_words: &'static str,
    /// Which fit the relation shown is.
    relation_words: &'static str,
    n_agn: usize,
    n_quiescent: usize,
    left_out: String,
    pivot_sigma_km_s: String,
    result: Option<ResultView>,
    problem: Option<String>,
    adopted: String,
    width_label: &'static str,
    agn: Vec<AgnView>,
    chart: String,
    published: Vec<PublishedView>,
    history: Vec<AdoptionView>,
    can_adopt: bool,
    ask_width: &'static str,
    ask_bulge: &'static str,
    ask_slope: &'static str,
    api_query: String,
}

/// "0.64 ± 0.11" rounded to the error (common practice).
fn dex(value: (f64, f64)) -> String {
    with_errors(Uncertain::symmetric(value.0, value.1), 2)
}

/// The chart of a calibration.
fn chart_of(view: &CalibrationView, gq: &str) -> AppResult<String> {
    let quiescent = view
        .quiescent
        .iter()
        .map(|q| ChartPoint {
            name: q.name.clone(),
            href: Some(format!("/galaxies/{}{gq}", q.slug)),
            x: q.log_sigma.0,
            x_err: q.log_sigma.1,
            y: q.log_mbh.0,
            y_err_minus: q.log_mbh.1,
            y_err_plus: q.log_mbh.1,
            upper_limit: q.upper_limit,
            ..ChartPoint::default()
        })
        .collect();
    let shift = view.chart_log_f();
    let agn = view
        .agn
        .iter()
        .map(|a| ChartPoint {
            name: a.name.clone(),
            href: Some(format!("/galaxies/{}{gq}", a.slug)),
            x: a.log_sigma,
            x_err: a.log_sigma_err,
            y: a.log_vp + shift,
            y_err_minus: a.log_vp_err,
            y_err_plus: a.log_vp_err,
            ..ChartPoint::default()
        })
        .collect();
    let line = view.outcome.as_ref().ok().map(|c| LineSpec {
        alpha: c.alpha.0,
        beta: c.beta.0,
        beta2: None,
        pivot: view.pivot_log_sigma,
        scatter_dex: 0.0,
    });
    let agn_label = match &view.outcome {
        Ok(_) => format!("AGN at log VP + {shift:.2}"),
        Err(_) => format!("AGN at log VP + {shift:.2} (adopted)"),
    };
    virial_calibration_svg(
        &format!(
            "Quiescent galaxies and reverberation AGN on the M–σ plane, catalog version {}",
            view.version
        ),
        ("Quiescent galaxies (dynamical masses)", quiescent),
        (&agn_label, agn),
        line,
    )
    .map_err(|e| AppError::Internal(anyhow::anyhow!("virial-factor chart: {e}")))
}

/// The page for `view`.
async fn page(
    state: &AppState,
    nav: super::Nav,
    view: &CalibrationView,
    version_note: Option<VersionNote>,
    past: bool,
    flash: Option<String>,
) -> AppResult<VirialFactorPage> {
    let gq = VersionNote::suffix(version_note.as_ref(), '?');
    let ask = view.ask;
    let widths = WidthDefinition::ALL
        .iter()
        .map(|w| Choice {
            value: w.as_str(),
            label: w.label().to_owned(),
            selected: *w == ask.width,
        })
        .collect();
    let bulges = [None, Some(BulgeKind::Classical), Some(BulgeKind::Pseudo)]
        .into_iter()
        .map(|b| Choice {
            value: b.map_or("any", BulgeKind::as_str),
            label: b.map_or("any".to_owned(), |b| b.label().to_owned()),
            selected: b == ask.bulge_kind,
        })
        .collect();
    let slopes = SlopeChoice::ALL
        .into_iter()
        .map(|s| Choice {
            value: s.as_str(),
            label: s.label().to_owned(),
            selected: s == ask.slope,
        })
        .collect();
    let result = view.outcome.as_ref().ok().map(|c| ResultView {
        log_f: dex(c.log_f),
        log_f_err_agn: fixed(c.log_f_err_agn, 3),
        log_f_err_relation: fixed(c.log_f_err_relation, 3),
        f: fixed(c.f, 2),
        f_interval: format!("{}–{}", fixed(c.f_interval.0, 2), fixed(c.f_interval.1, 2)),
        eps_agn: fixed(c.eps_agn, 2),
        alpha: dex(c.alpha),
        beta: dex(c.beta),
        eps: dex(c.eps),
    });
    let published = PUBLISHED
        .iter()
        .map(|p| PublishedView {
            paper: p.paper,
            sample: p.sample,
            width: p.width.label(),
            quoted: p.quoted,
            log_f: fixed(p.log_f, 2),
            provenance: p.provenance,
        })
        .collect();
    let history = stored::adoptions(&state.pool)
        .await?
        .into_iter()
        .map(|a| AdoptionView {
            width: a
                .width_definition
                .parse::<WidthDefinition>()
                .map_or("unknown width", |w| w.label()),
            log_f: dex((a.log_f, a.log_f_err_dex)),
            from_version: a.from_version,
            source: a.source,
            by: a
                .username
                .unwrap_or_else(|| "the catalog's starting values".to_owned()),
            when: readable_utc(&a.created_at),
            when_iso: a.created_at,
        })
        .collect();
    let agn = view
        .agn
        .iter()
        .map(|a| AgnView {
            name: a.name.clone(),
            slug: a.slug.clone(),
            sigma: with_errors(
                Uncertain::symmetric(
                    10f64.powf(a.log_sigma),
                    10f64.powf(a.log_sigma) * a.log_sigma_err * std::f64::consts::LN_10,
                ),
                0,
            ),
            log_vp: dex((a.log_vp, a.log_vp_err)),
        })
        .collect();
    let chart = chart_of(view, &gq)?;
    Ok(VirialFactorPage {
        can_adopt: nav.is_admin && !past && view.outcome.is_ok(),
        nav,
        flash,
        version_pair: version_note
            .as_ref()
            .and_then(|n| n.query.split_once('='))
            .map(|(k, v)| (k.to_owned(), v.to_owned())),
        api_query: format!(
            "{}{}",
            ask.query(),
            VersionNote::suffix(version_note.as_ref(), '&')
        ),
        gq,
        version_note,
        version: view.version,
        past,
        widths,
        bulges,
        slopes,
        sample_words: ask.words(),
        slope_words: ask.slope.label(),
        relation_words: match ask.slope {
            SlopeChoice::Held => "the quiescent structural fit",
            SlopeChoice::Joint => "the joint fit of both samples",
        },
        n_agn: view.agn.len(),
        n_quiescent: view.quiescent.len(),
        left_out: view.left_out.words(),
        pivot_sigma_km_s: fixed(10f64.powf(view.pivot_log_sigma), 0),
        problem: view.outcome.as_ref().err().cloned(),
        result,
        adopted: dex(view.adopted),
        width_label: ask.width.label(),
        agn,
        chart,
        published,
        history,
        ask_width: ask.width.as_str(),
        ask_bulge: ask.bulge_word(),
        ask_slope: ask.slope.as_str(),
    })
}

/// Show the calibration (at the current version or the one named).
pub(crate) async fn show_virial_factor(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let (catalog, pinned, ask, rest) = super::relations::versioned(&state, query).await?;
    // The confirmation after an adoption is worded from what the catalog holds, and only for
    // the admin who adopted, so an address cannot make the page claim something.
    let adopted_at = rest
        .iter()
        .find(|(k, _)| k == "adopted")
        .and_then(|(_, v)| v.parse::<i64>().ok());
    let rest: Vec<(String, String)> = rest.into_iter().filter(|(k, _)| k != "adopted").collect();
    let choices = CalibrationAsk::read(&rest, true).map_err(|faults| {
        AppError::bad_request(
            faults
                .into_iter()
                .map(|(_, e)| e)
                .collect::<Vec<_>>()
                .join(" "),
        )
    })?;
    let view = calibration(&catalog, choices).await?;
    let made_at = crate::catalog::history::made_at(&state.pool, pinned.version).await?;
    let version_note = VersionNote::of(
        &pinned,
        &ask,
        made_at.as_deref(),
        format!("/virial-factor?{}", choices.query()),
    );
    let me = match &principal {
        Principal::Session(s) => Some(s.username.as_str()),
        _ => None,
    };
    let flash = match (adopted_at, me) {
        (Some(v), Some(me)) => stored::adoptions(&state.pool)
            .await?
            .into_iter()
            .find(|a| a.from_version == v && a.username.as_deref() == Some(me))
            .map(|a| {
                format!(
                    "Adopted log ⟨f⟩ = {} for the {}: catalog version {} rescales every reverberation mass of that width measure with a known assumed factor.",
                    fixed(a.log_f, 3),
                    a.width_definition
                        .parse::<WidthDefinition>()
                        .map_or("width measure", |w| w.label()),
                    a.from_version
                )
            }),
        _ => None,
    };
    let page = page(&state, nav, &view, version_note, pinned.is_past(), flash).await?;
    Ok(page.into_response())
}

/// The adoption form's fields.
#[derive(Debug, Deserialize)]
pub(crate) struct AdoptForm {
    #[serde(default)]
    width_definition: String,
    #[serde(default)]
    bulge_kind: String,
    #[serde(default)]
    slope: String,
    /// The catalog version the calibration shown was computed on.
    #[serde(default)]
    version: String,
    #[serde(default)]
    note: String,
}

/// Adopt a calibration (admins).
pub(crate) async fn adopt(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Form(form): Form<AdoptForm>,
) -> AppResult<Response> {
    let me = super::account::session_of(&principal)?;
    let pairs = vec![
        ("width_definition".to_owned(), form.width_definition),
        ("bulge_kind".to_owned(), form.bulge_kind),
        ("slope".to_owned(), form.slope),
    ];
    let ask = CalibrationAsk::read(&pairs, true).map_err(|faults| {
        AppError::bad_request(
            faults
                .into_iter()
                .map(|(_, e)| e)
                .collect::<Vec<_>>()
                .join(" "),
        )
    })?;
    let calibrated_on = match form.version.trim() {
        "" => None,
        text => Some(text.parse::<i64>().map_err(|_| {
            AppError::bad_request(format!(
                "'{}' is not a catalog version; give a whole number such as 12.",
                text.chars().take(40).collect::<String>()
            ))
        })?),
    };
    let adopted = adopt_calibration(
        &state.catalog(),
        Some(me.account_id),
        ask,
        calibrated_on,
        &form.note,
    )
    .await?;
    Ok(Redirect::to(&format!(
        "/virial-factor?{}&adopted={}",
        ask.query(),
        adopted.version
    ))
    .into_response())
}
