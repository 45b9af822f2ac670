//! `/planning`: rank candidate galaxies by the probability that an instrument resolves their
//! sphere of influence (`relations::planning`, docs/methods.md §4.9), with the ranked table,
//! its chart, CSV and JSON downloads, and the reliability table of those probabilities on the
//! catalog's own galaxies. Nothing sent is stored; a signed-in member may save the resolutions
//! (`catalog::resolutions`), which then fill the form.
//!
//! The form is a POST (a candidate file does not fit an address). A visitor without a session
//! (a server run with `--public-read`) gets the login form's anti-forgery token, bound to a
//! cookie, as the login page does.

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, FromRequest, Path, Query, State};
use axum::http::{StatusCode, header};
use axum::response::{IntoResponse, Response};

use super::Nav;
use super::display::{Badge, fixed, probability, significant};
use super::login::FormToken;
use crate::auth::Principal;
use crate::catalog::resolutions::{self, Saved};
use crate::charts::planning::{PlanningChart, PlanningPoint, ResolutionLine, planning_svg};
use crate::error::{AppError, AppResult};
use crate::export::plan::{PlanTable, plan_csv};
use crate::relations::planning::{
    CANDIDATE_COLUMNS, OUTSIDE_ERROR, Plan, Reliability, Resolution, RowError, check_threshold,
    plan, read_candidates, reliability,
};
use crate::state::AppState;

/// The example candidate file (invented galaxies).
const EXAMPLE: &str = include_str!("../../seed-data/planning/candidates.csv");
/// The form's script: adds resolution rows (the form works without it).
const SCRIPT: &str = include_str!("../../static/planning.js");
/// Empty resolution rows shown below the filled ones.
const EMPTY_ROWS: usize = 2;

/// A saved resolution in the list.
pub(crate) struct SavedView {
    id: i64,
    label: String,
    arcsec: String,
}

/// One resolution row of the form.
pub(crate) struct ResolutionRow {
    index: usize,
    label: String,
    arcsec: String,
    error: Option<String>,
}

/// One ranked candidate, formatted.
pub(crate) struct RowView {
    rank: usize,
    name: String,
    relation: String,
    log_mbh: String,
    log_mbh_68: String,
    log_mbh_95: String,
    r_infl: String,
    r_infl_68: String,
    theta: String,
    theta_68: String,
    theta_95: String,
    probabilities: Vec<String>,
    note: Option<String>,
}

/// The ranked plan, formatted, with what the download form sends again.
pub(crate) struct PlanView {
    basis: String,
    resolution_headers: Vec<String>,
    rows: Vec<RowView>,
    chart: Option<String>,
    candidates_echo: String,
    resolutions_echo: Vec<(String, String)>,
}

/// One bin of the reliability table, formatted.
pub(crate) struct BinView {
    range: String,
    count: usize,
    predicted: String,
    observed: String,
    interval: String,
    verdict: Option<Badge>,
}

/// The reliability table, formatted.
pub(crate) struct ReliabilityView {
    summary: String,
    /// How to read the table (`relations::planning::reading_of`).
    reading: Option<String>,
    bins: Vec<BinView>,
}

/// `/planning`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/planning.html")]
pub(crate) struct PlanningPage {
    nav: Nav,
    csrf: String,
    signed_in: bool,
    flash: Option<String>,
    saved: Vec<SavedView>,
    columns: String,
    candidates_text: String,
    resolution_rows: Vec<ResolutionRow>,
    threshold: String,
    threshold_error: Option<String>,
    form_error: Option<String>,
    faults: Vec<(String, String, String)>,
    plan: Option<PlanView>,
    reliability: Option<ReliabilityView>,
    reliability_note: String,
}

/// What the form sent, as typed.
#[derive(Debug, Default)]
pub(crate) struct PlanningForm {
    candidates: String,
    labels: Vec<String>,
    arcsecs: Vec<String>,
    threshold: String,
}

/// The form read and checked: the candidates' text, the resolutions, the threshold, and
/// what is wrong with each (every row and field named).
struct Checked {
    resolutions: Vec<Resolution>,
    row_errors: Vec<(usize, String)>,
    threshold: Option<f64>,
    threshold_error: Option<String>,
}

impl PlanningForm {
    /// Resolutions of the filled rows (a row with both cells empty is skipped) and the
    /// threshold (empty: `default`).
    fn check(&self, default: f64) -> Checked {
        let mut resolutions = Vec::new();
        let mut row_errors = Vec::new();
        for (i, (label, arcsec)) in self.labels.iter().zip(&self.arcsecs).enumerate() {
            if label.trim().is_empty() && arcsec.trim().is_empty() {
                continue;
            }
            match Resolution::read(label, arcsec) {
                Ok(r) => resolutions.push(r),
                Err(e) => row_errors.push((i + 1, e)),
            }
        }
        let (threshold, threshold_error) = if self.threshold.trim().is_empty() {
            (Some(default), None)
        } else {
            match self
                .threshold
                .trim()
                .parse::<f64>()
                .map_err(|_| check_threshold(f64::NAN).unwrap_err())
                .and_then(check_threshold)
            {
                Ok(t) => (Some(t), None),
                Err(e) => (None, Some(e)),
            }
        };
        Checked {
            resolutions,
            row_errors,
            threshold,
            threshold_error,
        }
    }

    /// The form's resolution rows as typed, with their errors, and empty rows below.
    fn rows(&self, errors: &[(usize, String)]) -> Vec<ResolutionRow> {
        let mut rows: Vec<ResolutionRow> = self
            .labels
            .iter()
            .zip(&self.arcsecs)
            .enumerate()
            .filter(|(_, (l, a))| !(l.trim().is_empty() && a.trim().is_empty()))
            .map(|(i, (l, a))| ResolutionRow {
                index: 0,
                label: l.clone(),
                arcsec: a.clone(),
                error: errors
                    .iter()
                    .find(|(n, _)| *n == i + 1)
                    .map(|(_, e)| e.clone()),
            })
            .collect();
        with_empty_rows(&mut rows);
        rows
    }
}

/// Numbers the rows from 1 and adds [`EMPTY_ROWS`] empty ones.
fn with_empty_rows(rows: &mut Vec<ResolutionRow>) {
    for _ in 0..EMPTY_ROWS {
        rows.push(ResolutionRow {
            index: 0,
            label: String::new(),
            arcsec: String::new(),
            error: None,
        });
    }
    for (i, r) in rows.iter_mut().enumerate() {
        r.index = i + 1;
    }
}

/// Reads the form: `multipart/form-data` (with a candidate file) or url-encoded.
async fn read_form(state: &AppState, request: axum::extract::Request) -> AppResult<PlanningForm> {
    use axum::extract::Multipart;
    let multipart = request
        .headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.to_ascii_lowercase().starts_with("multipart/form-data"));
    let unreadable = |e: String| AppError::bad_request(format!("The form could not be read: {e}."));
    let mut pairs: Vec<(String, String)> = Vec::new();
    let mut file: Option<String> = None;
    if multipart {
        let mut parts = Multipart::from_request(request, state)
            .await
            .map_err(|e| unreadable(e.body_text()))?;
        while let Some(field) = parts
            .next_field()
            .await
            .map_err(|e| unreadable(e.body_text()))?
        {
            let name = field.name().unwrap_or_default().to_owned();
            let bytes = field.bytes().await.map_err(|e| unreadable(e.body_text()))?;
            let text = String::from_utf8(bytes.to_vec()).map_err(|_| {
                AppError::bad_request(
                    "The candidate file is not UTF-8 text; save it as UTF-8 CSV and upload it again.",
                )
            })?;
            if name == "file" {
                if !text.trim().is_empty() {
                    file = Some(text.trim_start_matches('\u{feff}').to_owned());
                }
            } else {
                pairs.push((name, text));
            }
        }
    } else {
        let bytes = axum::body::Bytes::from_request(request, state)
            .await
            .map_err(|e| unreadable(e.body_text()))?;
        pairs = serde_urlencoded::from_bytes(&bytes).map_err(|e| unreadable(e.to_string()))?;
    }
    let mut form = PlanningForm::default();
    for (k, v) in pairs {
        match k.as_str() {
            "candidates" => form.candidates = v,
            "res_label" => form.labels.push(v),
            "res_arcsec" => form.arcsecs.push(v),
            "threshold" => form.threshold = v,
            _ => {}
        }
    }
    // A label without its arcsec cell (or the reverse) pairs with an empty cell.
    let n = form.labels.len().max(form.arcsecs.len());
    form.labels.resize(n, String::new());
    form.arcsecs.resize(n, String::new());
    if let Some(f) = file {
        form.candidates = f;
    }
    Ok(form)
}

/// Everything a page needs besides the plan: who asks and the saved resolutions.
struct Visitor {
    nav: Nav,
    token: FormToken,
    account_id: Option<i64>,
}

impl Visitor {
    fn of(nav: Nav, principal: &Principal, token: FormToken) -> Self {
        let account_id = match principal {
            Principal::Session(s) => Some(s.account_id),
            _ => None,
        };
        Self {
            nav,
            token,
            account_id,
        }
    }

    /// The page with the saved resolutions listed; `rows` None fills the form with them.
    async fn page(
        &self,
        state: &AppState,
        rows: Option<Vec<ResolutionRow>>,
    ) -> AppResult<PlanningPage> {
        let saved = match self.account_id {
            Some(id) => resolutions::list(&state.pool, id).await?,
            None => Vec::new(),
        };
        let rows = rows.unwrap_or_else(|| {
            let mut rows: Vec<ResolutionRow> = saved
                .iter()
                .map(|s| ResolutionRow {
                    index: 0,
                    label: s.label.clone(),
                    arcsec: s.arcsec.to_string(),
                    error: None,
                })
                .collect();
            with_empty_rows(&mut rows);
            rows
        });
        Ok(PlanningPage {
            nav: self.nav.clone(),
            csrf: self.token.csrf.clone(),
            signed_in: self.account_id.is_some(),
            flash: None,
            saved: saved
                .into_iter()
                .map(|s| SavedView {
                    id: s.account_resolution_id,
                    label: s.label,
                    arcsec: s.arcsec.to_string(),
                })
                .collect(),
            columns: CANDIDATE_COLUMNS.join(","),
            candidates_text: String::new(),
            resolution_rows: rows,
            threshold: significant(state.settings.soi_threshold, 2),
            threshold_error: None,
            form_error: None,
            faults: Vec::new(),
            plan: None,
            reliability: None,
            reliability_note: String::new(),
        })
    }

    /// `page` as a response with `status`, setting the login cookie when it is new.
    fn respond(&self, status: StatusCode, page: PlanningPage) -> Response {
        self.token.respond((status, page).into_response())
    }
}

/// Fills the reliability table (at `threshold`) into `page`.
async fn with_reliability(state: &AppState, page: &mut PlanningPage, threshold: f64) {
    match reliability(&state.catalog(), threshold).await {
        Ok(r) => match ReliabilityView::of(&r) {
            Ok(view) => page.reliability = Some(view),
            Err(note) => page.reliability_note = note,
        },
        Err(e) => page.reliability_note = e.to_string(),
    }
}

/// Show the form (saved resolutions prefilled) and the reliability table.
pub(crate) async fn show_planning(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    token: FormToken,
    nav: Nav,
) -> AppResult<Response> {
    let visitor = Visitor::of(nav, &principal, token);
    let mut page = visitor.page(&state, None).await?;
    with_reliability(&state, &mut page, state.settings.soi_threshold).await;
    Ok(visitor.respond(StatusCode::OK, page))
}

/// What running the form gave: the plan, or the page answering what is wrong (400).
enum Outcome {
    Planned(Box<Plan>, PlanningForm, f64),
    Refused(Box<PlanningPage>),
}

/// Reads and checks the form and plans; every faulty row, resolution and the threshold are
/// named on the page.
async fn run(
    state: &AppState,
    visitor: &Visitor,
    request: axum::extract::Request,
) -> AppResult<Outcome> {
    let form = read_form(state, request).await?;
    let checked = form.check(state.settings.soi_threshold);
    let mut page = visitor
        .page(state, Some(form.rows(&checked.row_errors)))
        .await?;
    page.candidates_text = if form.candidates.len() <= 200_000 {
        form.candidates.clone()
    } else {
        String::new()
    };
    page.threshold.clone_from(&form.threshold);
    if page.threshold.trim().is_empty() {
        page.threshold = significant(state.settings.soi_threshold, 2);
    }
    page.threshold_error.clone_from(&checked.threshold_error);
    let candidates = if form.candidates.trim().is_empty() {
        Err(vec![RowError {
            line: 0,
            name: String::new(),
            column: String::new(),
            message: "Choose a candidate file or paste the candidates, header first.".to_owned(),
        }])
    } else {
        read_candidates(&form.candidates)
    };
    let mut problems = Vec::new();
    if let Err(rows) = &candidates {
        page.faults = rows
            .iter()
            .map(|r| {
                let row = match (r.line, r.name.is_empty()) {
                    (0, _) => "—".to_owned(),
                    (line, true) => format!("line {line}"),
                    (line, false) => format!("line {line} (“{}”)", r.name),
                };
                let column = if r.column.is_empty() {
                    "—".to_owned()
                } else {
                    r.column.clone()
                };
                (row, column, r.message.clone())
            })
            .collect();
        problems.push(format!(
            "{} of the candidates must be corrected (listed below); nothing was planned.",
            super::display::count(rows.len(), "problem", "problems")
        ));
    }
    if !checked.row_errors.is_empty() {
        problems.push("Correct the resolutions marked below.".to_owned());
    }
    if checked.resolutions.is_empty() && checked.row_errors.is_empty() {
        problems.push("Give at least one resolution: a label and its arcsec.".to_owned());
    }
    if checked.threshold_error.is_some() {
        problems.push("Correct the threshold.".to_owned());
    }
    let (Ok(candidates), Some(threshold), true) = (
        candidates,
        checked.threshold,
        problems.is_empty() && !checked.resolutions.is_empty(),
    ) else {
        page.form_error = Some(problems.join(" "));
        return Ok(Outcome::Refused(Box::new(page)));
    };
    match plan(
        &state.catalog(),
        &candidates,
        &checked.resolutions,
        threshold,
    )
    .await
    {
        Ok(p) => Ok(Outcome::Planned(Box::new(p), form, threshold)),
        Err(e) if e.status() == StatusCode::BAD_REQUEST => {
            page.form_error = Some(e.to_string());
            Ok(Outcome::Refused(Box::new(page)))
        }
        Err(e) => Err(e),
    }
}

/// Rank the candidates and show the plan, its chart and the reliability table.
pub(crate) async fn run_planning(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    token: FormToken,
    nav: Nav,
    request: axum::extract::Request,
) -> AppResult<Response> {
    let visitor = Visitor::of(nav, &principal, token);
    match run(&state, &visitor, request).await? {
        Outcome::Refused(mut page) => {
            with_reliability(&state, &mut page, state.settings.soi_threshold).await;
            Ok(visitor.respond(StatusCode::BAD_REQUEST, *page))
        }
        Outcome::Planned(plan, form, threshold) => {
            let checked = form.check(threshold);
            let mut page = visitor.page(&state, Some(form.rows(&[]))).await?;
            page.candidates_text = form.candidates.clone();
            page.threshold = significant(threshold, 3);
            page.plan = Some(PlanView::of(&plan, &form, &checked.resolutions));
            with_reliability(&state, &mut page, threshold).await;
            Ok(visitor.respond(StatusCode::OK, page))
        }
    }
}

/// The download's format.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct DownloadQuery {
    format: Option<String>,
}

/// The ranked table as CSV or JSON (`?format=csv|json`), from the same form re-posted;
/// nothing is stored. A faulty form answers the page with every fault named (400).
pub(crate) async fn download_plan(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    token: FormToken,
    nav: Nav,
    query: Result<Query<DownloadQuery>, QueryRejection>,
    request: axum::extract::Request,
) -> AppResult<Response> {
    let format = match query.ok().and_then(|q| q.0.format).as_deref() {
        Some("csv") | None => "csv",
        Some("json") => "json",
        Some(other) => {
            return Err(AppError::bad_request(format!(
                "“{}” is not a download format; ask for format=csv or format=json.",
                other.chars().take(20).collect::<String>()
            )));
        }
    };
    let visitor = Visitor::of(nav, &principal, token);
    let plan = match run(&state, &visitor, request).await? {
        Outcome::Refused(page) => return Ok(visitor.respond(StatusCode::BAD_REQUEST, *page)),
        Outcome::Planned(plan, _, _) => plan,
    };
    let table = PlanTable::of(&plan);
    let (content_type, body, name) = if format == "json" {
        (
            "application/json",
            serde_json::to_string_pretty(&table).map_err(anyhow::Error::from)?,
            "plan.json",
        )
    } else {
        ("text/csv; charset=utf-8", plan_csv(&table), "plan.csv")
    };
    Ok((
        [
            (header::CONTENT_TYPE, content_type.to_owned()),
            (
                header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"{name}\""),
            ),
            (header::CACHE_CONTROL, "no-store".to_owned()),
        ],
        body,
    )
        .into_response())
}

/// Save the form's resolutions on the member's account (a label saved before takes the new
/// value) and show the form with them.
pub(crate) async fn save_resolutions(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    token: FormToken,
    nav: Nav,
    request: axum::extract::Request,
) -> AppResult<Response> {
    let user = super::account::session_of(&principal)?;
    let visitor = Visitor::of(nav, &principal, token);
    let form = read_form(&state, request).await?;
    let checked = form.check(state.settings.soi_threshold);
    if !checked.row_errors.is_empty() || checked.resolutions.is_empty() {
        let mut page = visitor
            .page(&state, Some(form.rows(&checked.row_errors)))
            .await?;
        page.candidates_text = form.candidates;
        page.form_error = Some(
            if checked.resolutions.is_empty() && checked.row_errors.is_empty() {
                "There is no resolution to save: fill a label and its arcsec.".to_owned()
            } else {
                "Correct the resolutions marked below; nothing was saved.".to_owned()
            },
        );
        return Ok(visitor.respond(StatusCode::BAD_REQUEST, page));
    }
    let mut saved = 0;
    let mut full = false;
    for r in &checked.resolutions {
        match resolutions::save(&state.pool, user.account_id, &r.label, r.arcsec).await? {
            Saved::Added(_) | Saved::Replaced(_) => saved += 1,
            Saved::Full => full = true,
        }
    }
    let mut page = visitor.page(&state, None).await?;
    page.candidates_text = form.candidates;
    page.flash = Some(format!(
        "Saved {}.{}",
        super::display::count(saved, "resolution", "resolutions"),
        if full {
            format!(
                " You keep the most an account may ({}); delete one to save another.",
                resolutions::MAX_PER_ACCOUNT
            )
        } else {
            String::new()
        }
    ));
    Ok(visitor.respond(StatusCode::OK, page))
}

/// Delete one of the member's saved resolutions (someone else's is "not found").
pub(crate) async fn delete_resolution(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    token: FormToken,
    nav: Nav,
    Path(id): Path<String>,
) -> AppResult<Response> {
    let user = super::account::session_of(&principal)?;
    let not_found = || AppError::not_found("Your saved resolution with this number");
    let id: i64 = id.parse().map_err(|_| not_found())?;
    if !resolutions::delete_own(&state.pool, user.account_id, id).await? {
        return Err(not_found());
    }
    let visitor = Visitor::of(nav, &principal, token);
    let mut page = visitor.page(&state, None).await?;
    page.flash = Some("Deleted the resolution.".to_owned());
    Ok(visitor.respond(StatusCode::OK, page))
}

/// The example candidate file.
pub(crate) async fn example_file() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/csv; charset=utf-8"),
            (
                header::CONTENT_DISPOSITION,
                "attachment; filename=\"candidates.csv\"",
            ),
            (header::CACHE_CONTROL, "public, max-age=3600"),
        ],
        EXAMPLE,
    )
        .into_response()
}

/// The form's script.
pub(crate) async fn script() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/javascript; charset=utf-8"),
            (header::CACHE_CONTROL, "public, max-age=3600"),
        ],
        SCRIPT,
    )
        .into_response()
}

/// `lo–hi` of 10^log values, three significant digits.
fn linear_interval(interval: (f64, f64)) -> String {
    format!(
        "{}–{}",
        significant(10f64.powf(interval.0), 3),
        significant(10f64.powf(interval.1), 3)
    )
}

fn log_interval(interval: (f64, f64)) -> String {
    format!("{} to {}", fixed(interval.0, 2), fixed(interval.1, 2))
}

impl RowView {
    fn of(r: &crate::relations::planning::PlanRow) -> Self {
        let dash = || "—".to_owned();
        let mass = r
            .prediction
            .as_ref()
            .map(|p| &p.log_mbh)
            .or(r.mass.as_ref());
        let p = r.prediction.as_ref();
        Self {
            rank: r.rank,
            name: r.candidate.name.clone(),
            relation: r.relation.as_ref().map_or_else(dash, |rel| rel.label()),
            log_mbh: mass.map_or_else(dash, |m| {
                format!("{} ± {}", fixed(m.median, 2), fixed(m.sd_dex, 2))
            }),
            log_mbh_68: mass.map_or_else(dash, |m| log_interval(m.interval68)),
            log_mbh_95: mass.map_or_else(dash, |m| log_interval(m.interval95)),
            r_infl: p.map_or_else(dash, |p| significant(10f64.powf(p.log_r_infl_pc.median), 3)),
            r_infl_68: p.map_or_else(dash, |p| linear_interval(p.log_r_infl_pc.interval68)),
            theta: p.map_or_else(dash, |p| {
                significant(10f64.powf(p.log_theta_arcsec.median), 3)
            }),
            theta_68: p.map_or_else(dash, |p| linear_interval(p.log_theta_arcsec.interval68)),
            theta_95: p.map_or_else(dash, |p| linear_interval(p.log_theta_arcsec.interval95)),
            probabilities: r
                .p_resolved
                .iter()
                .map(|p| p.map_or_else(dash, probability))
                .collect(),
            note: r
                .note
                .clone()
                .filter(|_| r.p_resolved.iter().all(Option::is_none)),
        }
    }
}

impl PlanView {
    fn of(plan: &Plan, form: &PlanningForm, resolutions: &[Resolution]) -> Self {
        let fits: Vec<String> = plan
            .fits
            .iter()
            .filter_map(|f| {
                f.fit_id
                    .as_ref()
                    .map(|id| format!("{} (fit {id}, {} objects)", f.relation.label(), f.n))
            })
            .collect();
        let mut basis = format!(
            "Catalog version {}; threshold θ_infl / resolution ≥ {}; fits used: {}.",
            plan.catalog_version,
            significant(plan.threshold, 3),
            if fits.is_empty() {
                "none".to_owned()
            } else {
                fits.join("; ")
            }
        );
        if let Some(v) = plan.computing {
            basis.push_str(&format!(
                " The fits of catalog version {v} are being computed; older fits were used."
            ));
        }
        Self {
            basis,
            resolution_headers: plan
                .resolutions
                .iter()
                .map(|r| format!("{} ({}″)", r.label, significant(r.arcsec, 3)))
                .collect(),
            rows: plan.rows.iter().map(RowView::of).collect(),
            chart: chart(plan),
            candidates_echo: form.candidates.clone(),
            resolutions_echo: resolutions
                .iter()
                .map(|r| (r.label.clone(), r.arcsec.to_string()))
                .collect(),
        }
    }
}

/// The chart of the candidates with a predicted θ_infl; None when none has one.
fn chart(plan: &Plan) -> Option<String> {
    let points: Vec<PlanningPoint> = plan
        .rows
        .iter()
        .filter_map(|r| {
            let p = r.prediction.as_ref()?;
            Some(PlanningPoint {
                name: r.candidate.name.clone(),
                log_distance_mpc: r.candidate.distance_mpc.log10(),
                log_theta_arcsec: p.log_theta_arcsec.median,
                log_theta_68: p.log_theta_arcsec.interval68,
            })
        })
        .collect();
    if points.is_empty() {
        return None;
    }
    let lines = plan
        .resolutions
        .iter()
        .map(|r| ResolutionLine {
            label: r.label.clone(),
            log_theta_arcsec: (plan.threshold * r.arcsec).log10(),
        })
        .collect();
    planning_svg(&PlanningChart {
        title: "Predicted sphere of influence against distance".to_owned(),
        points,
        lines,
        threshold_text: significant(plan.threshold, 3),
    })
    .ok()
}

impl ReliabilityView {
    /// The table, or the sentence saying why there is none.
    fn of(r: &Reliability) -> Result<Self, String> {
        if let Some(problem) = &r.problem {
            return Err(problem.clone());
        }
        let percent = |v: Option<f64>| v.map_or_else(|| "—".to_owned(), |v| fixed(100.0 * v, 0));
        let bins = r
            .bins
            .iter()
            .map(|b| BinView {
                range: format!("{}–{} %", fixed(100.0 * b.lo, 0), fixed(100.0 * b.hi, 0)),
                count: b.count,
                predicted: percent(b.mean_predicted),
                observed: percent(b.observed_fraction),
                interval: b.interval68.map_or_else(
                    || "—".to_owned(),
                    |(lo, hi)| format!("{}–{}", fixed(100.0 * lo, 0), fixed(100.0 * hi, 0)),
                ),
                verdict: b.verdict.map(reliability_badge),
            })
            .collect();
        let within = r
            .bins
            .iter()
            .filter(|b| b.verdict.is_some_and(|v| v != OUTSIDE_ERROR))
            .count();
        let filled = r.bins.iter().filter(|b| b.verdict.is_some()).count();
        Ok(Self {
            summary: format!(
                "{} compared at catalog version {}{}; {} of {} filled bins within error.",
                super::display::count(r.compared, "galaxy", "galaxies"),
                r.catalog_version,
                r.fit_id
                    .as_ref()
                    .map(|id| format!(" (M–σ fit {id})"))
                    .unwrap_or_default(),
                within,
                filled
            ),
            reading: r.reading.clone(),
            bins,
        })
    }
}

/// A bin's verdict with its class and mark: within error reads as consistent, outside as in
/// tension (colour, mark and words).
fn reliability_badge(verdict: &'static str) -> Badge {
    if verdict == OUTSIDE_ERROR {
        Badge {
            class: "v-tension",
            mark: "▲",
            text: "outside its interval",
        }
    } else {
        Badge {
            class: "v-consistent",
            mark: "✓",
            text: verdict,
        }
    }
}
