//! Members' submissions: `/submissions/new` (the form), `/submissions` (one's own, with
//! withdraw), `/submissions/{id}` (one submission and where its galaxy falls against each
//! relation). [`assess`] is shared with the review queue.
//!
//! Every typed value goes through the same cell readers as the catalog CSV files
//! (`catalog::intake::measurement_from_cells`, hence `units::parse_entry`), so a form and a file
//! accept exactly the same things. A refused form comes back with what was typed and a message
//! beside each field at fault; nothing is written unless every measurement is valid.

use std::collections::HashMap;

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};

use super::Nav;
use super::account::session_of;
use super::display::{
    Badge, Uncertain, count, fixed, measurement_detail, readable_utc, significant, soi_badge,
    with_errors,
};
use super::place::{PlaceChart, PlaceRow};
use crate::auth::middleware::{AuthContext, read_cookie, set_cookie};
use crate::auth::{Principal, Role, SessionUser};
use crate::catalog::galaxies::{self, SubmissionSource};
use crate::catalog::intake::{self, Cell, Cells, Checked, GalaxyCells, SubmissionCells, sentence};
use crate::catalog::model::{
    Activity, BulgeKind, BulgeMassMethod, CentreKind, DistanceMethod, MassMethod, Measurement,
    Morphology, Quantity, SigmaDefinition, SingleEpochCalibration, WidthDefinition, WidthSpectrum,
};
use crate::catalog::submissions::{
    self, GalaxyChoice, ReviewNote, SubmissionError, SubmissionSummary,
};
use crate::error::{AppError, AppResult};
use crate::relations::FitCache;
use crate::relations::assess::{Assessment, assess, assess_unstored};
use crate::state::AppState;

/// Measurement rows on a fresh form.
pub(crate) const FORM_ROWS: usize = 3;

/// At most this many measurement rows on one form ("Add a measurement row" stops there).
pub(crate) const MAX_FORM_ROWS: usize = 20;

/// A group of measurement fields: (heading, quantities, [(name suffix, label)], hint).
type FieldGroupSpec = (
    &'static str,
    &'static str,
    &'static [(&'static str, &'static str)],
    &'static str,
);

/// The measurement fields of the form, grouped by the quantities they apply to: (heading,
/// the stored words of those quantities, space-separated, empty for every quantity, and the
/// fields as (name suffix, label)). The columns are the CSV files' (`catalog::intake`), except
/// that the method has one list per quantity (`method_bh`, `method_bulge`, read as `method`).
/// Without a script every group shows under its heading; `static/submission.js` shows only the
/// groups of the chosen quantity.
const MEASUREMENT_GROUPS: [FieldGroupSpec; 8] = [
    (
        "",
        "",
        &[
            ("quantity", "Quantity"),
            ("value", "Value as published"),
            ("scale", "Scale"),
            (
                "limit_confidence_sigma",
                "Limit confidence [σ], for an upper limit (<)",
            ),
        ],
        "",
    ),
    (
        "Black-hole mass only",
        "bh_mass",
        &[
            ("method_bh", "How the mass was measured"),
            ("resolution_arcsec", "Resolution [arcsec]"),
        ],
        "",
    ),
    (
        "Broad-line measurement (reverberation or single-epoch masses)",
        "bh_mass",
        &[
            ("line", "Broad line [such as Hbeta; empty: Hbeta]"),
            (
                "width_definition",
                "Width measure [empty: σ_line; fwhm for single epoch]",
            ),
            (
                "width_spectrum",
                "Width spectrum [empty: rms; single for single epoch]",
            ),
            ("lag_days", "Rest-frame lag [days]"),
            ("lag_err_days", "Lag error [days: 1.2, or +1.4/-1.1]"),
            ("width_km_s", "Line width [km/s]"),
            ("width_err_km_s", "Line width error [km/s]"),
            ("log_l5100_erg_s", "λL(5100 Å) [log10 erg/s]"),
            (
                "virial_factor",
                "Virial factor f the published mass assumed [dimensionless]",
            ),
            ("calibration", "Single-epoch calibration"),
        ],
        "Leave the value empty and give a lag and a line width (reverberation), or λL(5100 Å), a width and a calibration (single epoch), and the mass is computed: the virial product, moved to the adopted ⟨f⟩. To enter a published mass instead, type it as the value and give in virial_factor the f that publication assumed (leave it empty when it is not known: the mass is then shown as published, never rescaled).",
    ),
    (
        "Bulge mass only",
        "bulge_mass",
        &[("method_bulge", "How the bulge mass was measured")],
        "",
    ),
    (
        "Velocity dispersion (σ) only",
        "sigma",
        &[
            ("sigma_definition", "σ definition"),
            ("aperture", "Aperture (such as r_e)"),
        ],
        "",
    ),
    (
        "Bulge luminosity only",
        "bulge_luminosity",
        &[("band", "Band (such as K or V)")],
        "",
    ),
    (
        "Masses and luminosities (they scale with distance)",
        "bh_mass bulge_mass bulge_luminosity",
        &[("source_distance_mpc", "Distance the source assumed [Mpc]")],
        "",
    ),
    (
        "",
        "",
        &[
            ("reference", "Reference"),
            ("note", "Note on this measurement"),
        ],
        "",
    ),
];

/// The new-galaxy columns, with their labels.
const GALAXY_COLUMNS: [(&str, &str); 8] = [
    ("name", "Name"),
    ("morphology", "Morphology"),
    ("bulge_kind", "Bulge kind"),
    ("centre_kind", "Centre kind"),
    ("distance_mpc", "Adopted distance [Mpc]"),
    ("distance_err_mpc", "Distance error [Mpc]"),
    ("distance_method", "Distance method"),
    ("activity", "Activity class of the nucleus"),
];

/// One input of the form: a select when `options` is not empty, a text box otherwise.
pub(crate) struct Input {
    name: String,
    label: &'static str,
    value: String,
    error: Option<String>,
    /// (value, label, selected)
    options: Vec<(String, String, bool)>,
}

fn options_for(column: &str, value: &str) -> Vec<(String, String, bool)> {
    let pairs: Vec<(&str, &str)> = match column {
        "quantity" => Quantity::pairs(),
        "scale" => vec![
            ("auto", "auto (linear unless 'log')"),
            ("linear", "linear"),
            ("log10", "log10"),
        ],
        "limit_confidence_sigma" => vec![("1", "1σ"), ("2", "2σ"), ("3", "3σ")],
        "method_bh" => MassMethod::pairs(),
        "method_bulge" => BulgeMassMethod::pairs(),
        "sigma_definition" => SigmaDefinition::pairs(),
        "morphology" => Morphology::pairs(),
        "bulge_kind" => BulgeKind::pairs(),
        "centre_kind" => CentreKind::pairs(),
        "distance_method" => DistanceMethod::pairs(),
        "activity" => Activity::pairs(),
        "width_definition" => WidthDefinition::pairs(),
        "width_spectrum" => WidthSpectrum::pairs(),
        // Short labels: a select is as wide as its longest option, and the form fits a phone.
        "calibration" => SingleEpochCalibration::pairs()
            .into_iter()
            .map(|(word, _)| (word, calibration_label(word)))
            .collect(),
        _ => return Vec::new(),
    };
    let mut out = Vec::with_capacity(pairs.len() + 1);
    // A new galaxy's kinds are asked, never assumed: "choose…" must be changed (each list has
    // "unknown" or "other" for what is not known).
    match column {
        "scale" => {}
        "morphology" | "bulge_kind" | "centre_kind" | "distance_method" => {
            out.push((String::new(), "choose…".to_owned(), value.is_empty()));
        }
        // An empty cell reads as its default (catalog::virial, catalog::intake).
        "activity" => out.push((
            String::new(),
            "not stated (unknown)".to_owned(),
            value.is_empty(),
        )),
        "width_definition" | "width_spectrum" => {
            out.push((String::new(), "— (default)".to_owned(), value.is_empty()));
        }
        _ => out.push((String::new(), "—".to_owned(), value.is_empty())),
    }
    out.extend(
        pairs
            .into_iter()
            .map(|(v, l)| (v.to_owned(), l.to_owned(), v == value)),
    );
    out
}

/// A single-epoch calibration in a few words (the select's option).
fn calibration_label(word: &str) -> &'static str {
    match word {
        "vp06" => "vp06 (Hβ, own f)",
        _ => "r_l_bentz13 (R–L, ⟨f⟩)",
    }
}

/// The fields of a measurement row that apply to some quantities.
pub(crate) struct FieldGroup {
    /// Which quantities, in words ("Black-hole mass only"); empty for the fields of every one.
    legend: &'static str,
    /// What to type in the group, in a sentence; empty for none.
    hint: &'static str,
    /// The stored words of those quantities, space-separated (for the script).
    quantities: &'static str,
    inputs: Vec<Input>,
}

/// One measurement row of the form.
pub(crate) struct RowInputs {
    number: usize,
    groups: Vec<FieldGroup>,
}

/// `/submissions/new`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/submission_new.html")]
pub(crate) struct NewSubmissionPage {
    nav: Nav,
    csrf: String,
    /// Every galaxy's name, for the picker's list.
    galaxies: Vec<String>,
    /// What is in the picker: a name or a slug, as typed.
    galaxy: String,
    galaxy_error: Option<String>,
    galaxy_inputs: Vec<Input>,
    /// Why the new galaxy's name needs confirming: it looks like a galaxy in the catalog.
    look_alike: Option<String>,
    /// The confirmation box is ticked.
    new_galaxy_confirmed: bool,
    measurement_rows: Vec<RowInputs>,
    /// The number of measurement rows (a hidden field, so "add a row" keeps what was typed).
    n_rows: usize,
    can_add_row: bool,
    note: String,
    note_error: Option<String>,
    form_error: Option<String>,
    /// The form's idempotency key: a retried POST of this form stores nothing new.
    request_key: String,
    /// Where the object falls, before submitting ("Check against the relations").
    preview: Option<AssessmentView>,
}

type Fields = HashMap<String, String>;

/// The number of measurement rows a posted form has (hidden `rows`), within 1..=MAX_FORM_ROWS.
fn rows_of(fields: &Fields) -> usize {
    fields
        .get("rows")
        .and_then(|v| v.trim().parse::<usize>().ok())
        .unwrap_or(FORM_ROWS)
        .clamp(1, MAX_FORM_ROWS)
}

async fn form_page(
    state: &AppState,
    user: &SessionUser,
    nav: Nav,
    fields: &Fields,
    errors: &HashMap<String, String>,
    form_error: Option<String>,
) -> AppResult<NewSubmissionPage> {
    let get = |name: &str| fields.get(name).cloned().unwrap_or_default();
    let galaxies = submissions::galaxy_names(&state.pool)
        .await?
        .into_iter()
        .map(|(_, name, _)| name)
        .collect();
    let input = |name: String, column: &str, label: &'static str| {
        let value = get(&name);
        Input {
            error: errors.get(&name).cloned(),
            options: options_for(column, &value),
            name,
            label,
            value,
        }
    };
    let galaxy_inputs = GALAXY_COLUMNS
        .iter()
        .map(|(c, l)| input((*c).to_owned(), c, l))
        .collect();
    let n_rows = rows_of(fields);
    let rows = (0..n_rows)
        .map(|i| RowInputs {
            number: i + 1,
            groups: MEASUREMENT_GROUPS
                .iter()
                .map(|(legend, quantities, columns, hint)| FieldGroup {
                    legend,
                    hint,
                    quantities,
                    inputs: columns
                        .iter()
                        .map(|(c, l)| input(format!("m{i}_{c}"), c, l))
                        .collect(),
                })
                .collect(),
        })
        .collect();
    Ok(NewSubmissionPage {
        nav,
        csrf: user.csrf_token.clone(),
        galaxies,
        galaxy: get("galaxy"),
        galaxy_error: errors.get("galaxy").cloned(),
        galaxy_inputs,
        look_alike: errors.get(intake::CONFIRM_COLUMN).cloned(),
        new_galaxy_confirmed: intake::confirmation(&get(intake::CONFIRM_COLUMN)).unwrap_or(false),
        measurement_rows: rows,
        n_rows,
        can_add_row: n_rows < MAX_FORM_ROWS,
        note: get("note"),
        note_error: errors.get("note").cloned(),
        form_error,
        request_key: fields
            .get("request_key")
            .filter(|k| submissions::validate_client_key(k).is_ok())
            .cloned()
            .unwrap_or_else(crate::auth::secret::random_hex_256),
        preview: None,
    })
}

/// Show the submission form, empty or filled from the address (`galaxy`, `note` and the first
/// measurement row's `m0_…` fields, as another page proposes them: the disk fit's "Submit this
/// mass"). Nothing is checked or stored until the member sends the form.
pub(crate) async fn new_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Query(pairs): Query<Vec<(String, String)>>,
) -> AppResult<NewSubmissionPage> {
    let user = session_of(&principal)?;
    let prefill: Fields = pairs
        .into_iter()
        .filter(|(k, v)| {
            (k == "galaxy" || k == "note" || k.starts_with("m0_")) && v.chars().count() <= 2000
        })
        .collect();
    form_page(&state, user, nav, &prefill, &HashMap::new(), None).await
}

/// Store a submission from the form, or show the form again with a message beside each field
/// at fault (400) and nothing written. "Add a measurement row" and "Check against the
/// relations" show the form again, as typed, without storing anything.
pub(crate) async fn create_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Extension(ctx): Extension<AuthContext>,
    nav: Nav,
    Form(pairs): Form<Vec<(String, String)>>,
) -> AppResult<Response> {
    let user = session_of(&principal)?;
    let mut fields: Fields = pairs.into_iter().collect();
    let action = fields
        .get("action")
        .map_or("submit", |a| a.as_str())
        .to_owned();
    if action == "add_row" {
        // Nothing is checked or stored: the same form with one more row, as typed.
        fields.insert(
            "rows".into(),
            (rows_of(&fields) + 1).min(MAX_FORM_ROWS).to_string(),
        );
        return Ok(form_page(&state, user, nav, &fields, &HashMap::new(), None)
            .await?
            .into_response());
    }
    let read = read_form(&state, &fields).await?;
    let (Some(checked), None) = (read.checked, &read.form_error) else {
        let form_error = read
            .form_error
            .or_else(|| Some("Nothing was saved; correct the fields marked below.".to_owned()));
        let page = form_page(&state, user, nav, &fields, &read.errors, form_error).await?;
        return Ok((StatusCode::BAD_REQUEST, page).into_response());
    };
    if action == "check" {
        let a = assess_unstored(&state.catalog(), &checked.galaxy, &checked.measurements).await?;
        let errors = name_warnings(&state, &checked).await?;
        let mut page = form_page(&state, user, nav, &fields, &errors, None).await?;
        page.preview = Some(AssessmentView::with_charts(&state.fits, &a).await?);
        return Ok(page.into_response());
    }
    let created = intake::store(
        &state.pool,
        Some(user.account_id),
        SubmissionSource::Form,
        &read.client_key,
        &checked,
        fields.get("note").map_or("", String::as_str),
    )
    .await;
    match created {
        // A replay (the same form posted twice) lands on the same submission.
        Ok(c) => {
            let mut response =
                Redirect::to(&format!("/submissions/{}", c.submission_id)).into_response();
            response.headers_mut().append(
                axum::http::header::SET_COOKIE,
                set_cookie(
                    flash_cookie_name(ctx.secure_cookies),
                    &format!("saved-{}", c.submission_id),
                    ctx.secure_cookies,
                    Some(FLASH_MAX_AGE_S),
                ),
            );
            Ok(response)
        }
        Err(e) => refused_submission(&state, user, nav, fields, e).await,
    }
}

/// What submitting would answer about a new galaxy's name, said before submitting: a galaxy of
/// that name, or one whose name looks like it (unless confirmed), is in the catalog.
async fn name_warnings(state: &AppState, checked: &Checked) -> AppResult<HashMap<String, String>> {
    let mut errors = HashMap::new();
    if let GalaxyChoice::New(g) = &checked.galaxy
        && let Some(existing) = galaxies::look_alike(&state.pool, &g.name).await?
    {
        if existing.name == g.name {
            errors.insert("name".to_owned(), SubmissionError::NameTaken.to_string());
        } else if !checked.new_galaxy_confirmed {
            errors.insert(
                intake::CONFIRM_COLUMN.to_owned(),
                intake::look_alike_message(&g.name, &existing),
            );
        }
    }
    Ok(errors)
}

/// What the form holds, read: the submission when every cell could be read, the message of
/// each field at fault, a message for the form as a whole, and its idempotency key.
struct FormReading {
    checked: Option<Checked>,
    errors: HashMap<String, String>,
    form_error: Option<String>,
    client_key: String,
}

/// Read the submission form's cells through `catalog::intake` (rows left blank are skipped).
async fn read_form(state: &AppState, fields: &Fields) -> AppResult<FormReading> {
    let get = |name: &str| fields.get(name).map_or("", |v| v.as_str());
    let typed = get("galaxy").trim();
    let (slug, unknown_galaxy) = if typed.is_empty() {
        (String::new(), None)
    } else {
        match resolve_galaxy(state, typed).await? {
            Ok(slug) => (slug, None),
            Err(message) => (typed.to_owned(), Some(message)),
        }
    };
    let galaxy = if slug.is_empty() {
        GalaxyCells::New(Box::new(|c| get(c)))
    } else {
        GalaxyCells::Slug(&slug)
    };
    let rows: Vec<(usize, Box<Cells<'_>>)> = (0..rows_of(fields))
        .filter(|i| {
            ["quantity", "value"]
                .iter()
                .any(|c| !get(&format!("m{i}_{c}")).trim().is_empty())
        })
        .map(|i| -> (usize, Box<Cells<'_>>) {
            (
                i,
                Box::new(move |c| {
                    if c == "method" {
                        method_cell(&get, i)
                    } else {
                        get(&format!("m{i}_{c}"))
                    }
                }),
            )
        })
        .collect();
    let filled = !rows.is_empty();
    let cells = SubmissionCells {
        galaxy,
        rows,
        note: get("note"),
    };
    let (mut checked, mut errors) = match intake::check(&state.pool, &cells).await? {
        Ok(c) => (Some(c), HashMap::new()),
        Err(faults) => (
            None,
            faults
                .into_iter()
                .map(|f| (form_field(f.cell, fields), f.message))
                .collect::<HashMap<_, _>>(),
        ),
    };
    if let Some(message) = unknown_galaxy {
        checked = None;
        errors.insert("galaxy".to_owned(), message);
    }
    let mut form_error = (!filled && errors.keys().all(|k| !k.starts_with('m')))
        .then(|| "Give at least one measurement: a quantity and its value.".to_owned());
    // A form always carries its key; a client posting without one gets a fresh key (no retry
    // protection, but nothing refused).
    let client_key = match fields.get("request_key").map(|k| k.trim()) {
        None | Some("") => crate::auth::secret::random_hex_256(),
        Some(k) => match submissions::validate_client_key(k) {
            Ok(()) => k.to_owned(),
            Err(e) => {
                form_error = Some(e);
                String::new()
            }
        },
    };
    Ok(FormReading {
        checked,
        errors,
        form_error,
        client_key,
    })
}

/// The form's name of an intake cell (the method: the list of the row's quantity).
fn form_field(cell: Cell, fields: &Fields) -> String {
    match cell {
        Cell::Galaxy => "galaxy".to_owned(),
        Cell::NewGalaxy(column) => column.to_owned(),
        Cell::NewGalaxyConfirmed => intake::CONFIRM_COLUMN.to_owned(),
        Cell::Measurement(row, "method") => {
            let quantity = fields
                .get(&format!("m{row}_quantity"))
                .map_or("", |q| q.trim());
            if quantity == "bulge_mass" {
                format!("m{row}_method_bulge")
            } else {
                format!("m{row}_method_bh")
            }
        }
        Cell::Measurement(row, column) => format!("m{row}_{column}"),
        Cell::Note => "note".to_owned(),
    }
}

/// A row's `method` cell: the list of its quantity (`method_bh`, `method_bulge`); a posted
/// `method` (a client writing the file columns) comes first.
fn method_cell<'a>(get: &impl Fn(&str) -> &'a str, row: usize) -> &'a str {
    let posted = get(&format!("m{row}_method"));
    if !posted.trim().is_empty() {
        return posted;
    }
    match get(&format!("m{row}_quantity")).trim() {
        "bh_mass" => get(&format!("m{row}_method_bh")),
        "bulge_mass" => get(&format!("m{row}_method_bulge")),
        _ => "",
    }
}

/// The slug of the galaxy typed in the picker: its slug, or its name (letter case and spaces
/// aside). Anything else is the sentence naming it, with the name to type when one looks
/// like it.
async fn resolve_galaxy(state: &AppState, typed: &str) -> AppResult<Result<String, String>> {
    let folded = |t: &str| {
        t.split_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
            .to_lowercase()
    };
    let wanted = folded(typed);
    let all = submissions::galaxy_names(&state.pool).await?;
    if let Some((_, _, slug)) = all
        .iter()
        .find(|(_, name, slug)| slug == typed || folded(name) == wanted)
    {
        return Ok(Ok(slug.clone()));
    }
    let shown: String = typed.chars().take(60).collect();
    let hint = match galaxies::look_alike(&state.pool, typed).await? {
        Some(g) => format!("did you mean “{}”? Type", g.name),
        None => "type".to_owned(),
    };
    Ok(Err(format!(
        "No galaxy in the catalog is called “{shown}”: {hint} a name from the list that opens as you type, or empty this box to describe a new galaxy below."
    )))
}

/// The form again when storing was refused: 409 when the form was sent before with other
/// values (a fresh key, what was typed kept), 400 naming the field for the rest.
async fn refused_submission(
    state: &AppState,
    user: &SessionUser,
    nav: Nav,
    mut fields: Fields,
    e: SubmissionError,
) -> AppResult<Response> {
    let (status, errors, message) = match e {
        SubmissionError::Db(e) => return Err(e.into()),
        SubmissionError::KeyReused => {
            // The back button, then edits: keep what was typed, give the form a fresh key.
            fields.remove("request_key");
            (
                StatusCode::CONFLICT,
                HashMap::new(),
                "This form was already submitted with other values, so nothing was saved. Check the values below and submit again to store them as a new submission.",
            )
        }
        // A look-alike name is no typing error: the form asks to choose or confirm.
        e @ SubmissionError::LooksLike { .. } => (
            StatusCode::CONFLICT,
            HashMap::from([(intake::CONFIRM_COLUMN.to_owned(), e.to_string())]),
            "Nothing was saved; choose the existing galaxy, or tick the box below if this is a new one.",
        ),
        e => {
            let field = match e {
                SubmissionError::NameTaken => "name",
                _ => "galaxy",
            };
            (
                StatusCode::BAD_REQUEST,
                HashMap::from([(field.to_owned(), e.to_string())]),
                "Nothing was saved; correct the fields marked below.",
            )
        }
    };
    let page = form_page(state, user, nav, &fields, &errors, Some(message.to_owned())).await?;
    Ok((status, page).into_response())
}

/// A reviewer's decision on a submission, as its submitter reads it.
pub(crate) struct DecisionView {
    /// "accepted" or "rejected".
    pub(crate) decision: String,
    /// `decision-accepted` or `decision-rejected`.
    pub(crate) class: &'static str,
    /// ✓ or ✕ (hidden from screen readers: the word says it).
    pub(crate) mark: &'static str,
    pub(crate) reviewer: String,
    pub(crate) note: String,
    /// "2 Dec 2026, 14:05 UTC".
    pub(crate) when: String,
    /// The stored RFC 3339 time, for `<time datetime>`.
    pub(crate) when_iso: String,
}

impl DecisionView {
    pub(crate) fn new(r: &ReviewNote) -> Self {
        let accepted = r.decision == "accepted";
        Self {
            decision: r.decision.clone(),
            class: if accepted {
                "decision-accepted"
            } else {
                "decision-rejected"
            },
            mark: if accepted { "✓" } else { "✕" },
            reviewer: r.reviewer.clone(),
            note: r.note.clone(),
            when: readable_utc(&r.created_at),
            when_iso: r.created_at.clone(),
        }
    }
}

/// A submission in a list.
pub(crate) struct SummaryView {
    id: i64,
    galaxy_name: String,
    galaxy_slug: String,
    state: String,
    /// "2 Dec 2026, 14:05 UTC".
    created_at: String,
    /// The stored RFC 3339 time, for `<time datetime>`.
    created_iso: String,
    n_measurements: i64,
    /// "1 measurement", "3 measurements".
    measurements_text: String,
    pending: bool,
    /// The reviewers' decisions on it, newest first, each with its note.
    decisions: Vec<DecisionView>,
}

impl SummaryView {
    fn new(s: &SubmissionSummary, reviews: &[ReviewNote]) -> Self {
        Self {
            id: s.submission_id,
            galaxy_name: s.galaxy_name.clone(),
            galaxy_slug: s.galaxy_slug.clone(),
            state: s.state.clone(),
            created_at: readable_utc(&s.created_at),
            created_iso: s.created_at.clone(),
            n_measurements: s.n_measurements,
            measurements_text: count(s.n_measurements, "measurement", "measurements"),
            pending: s.state == "pending",
            decisions: reviews
                .iter()
                .filter(|r| r.submission_id == s.submission_id)
                .map(DecisionView::new)
                .collect(),
        }
    }
}

/// The flags a page reads after an action, to confirm it (`?withdrawn=N`, `?decided=N`). A flag only names a submission: the page says what happened to it from the
/// catalog, and only to its submitter (or to the reviewer who decided), so an address cannot
/// make a page claim something that did not happen.
#[derive(Debug, Default, serde::Deserialize)]
pub(crate) struct FlashQuery {
    #[serde(default)]
    pub(crate) withdrawn: Option<String>,
    #[serde(default)]
    pub(crate) decided: Option<String>,
}

/// The cookie that carries "this submission was just saved" from the form's redirect to the
/// submission's page (read once, then cleared); the page confirms it only to the submitter.
fn flash_cookie_name(secure: bool) -> &'static str {
    if secure {
        "__Host-ml_flash"
    } else {
        "ml_flash"
    }
}

/// How long a confirmation waits to be shown, in seconds.
const FLASH_MAX_AGE_S: i64 = 300;

/// A flag's submission number, when it is one.
pub(crate) fn flag_id(flag: Option<&String>) -> Option<i64> {
    flag.and_then(|v| v.trim().parse().ok())
}

/// `/submissions`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/submissions_list.html")]
pub(crate) struct SubmissionsListPage {
    nav: Nav,
    csrf: String,
    submissions: Vec<SummaryView>,
    /// "Submission 12 for … was withdrawn." after withdrawing.
    flash: Option<String>,
}

/// The logged-in person's submissions, newest first.
pub(crate) async fn list_submissions(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Query(flags): Query<FlashQuery>,
) -> AppResult<SubmissionsListPage> {
    let user = session_of(&principal)?;
    let list = submissions::list_for_account(&state.pool, user.account_id).await?;
    let reviews = submissions::reviews_for_account(&state.pool, user.account_id).await?;
    // Only a submission of this list that is withdrawn is confirmed as withdrawn.
    let flash = flag_id(flags.withdrawn.as_ref()).and_then(|id| {
        list.iter()
            .find(|s| s.submission_id == id && s.state == "withdrawn")
            .map(|s| format!("Submission {id} for {} was withdrawn.", s.galaxy_name))
    });
    Ok(SubmissionsListPage {
        nav,
        csrf: user.csrf_token.clone(),
        submissions: list.iter().map(|s| SummaryView::new(s, &reviews)).collect(),
        flash,
    })
}

/// The submission number in an address.
pub(crate) fn parse_id(id: &str) -> AppResult<i64> {
    id.parse()
        .map_err(|_| AppError::bad_request("The submission number in the address is not a number."))
}

/// Withdraw one's own pending submission.
pub(crate) async fn withdraw_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
) -> AppResult<Redirect> {
    let user = session_of(&principal)?;
    let id = parse_id(&id)?;
    match submissions::withdraw(&state.pool, user.account_id, id).await {
        Ok(()) => Ok(Redirect::to(&format!("/submissions?withdrawn={id}"))),
        // Someone else's submission is as good as absent: its existence is not theirs to know.
        Err(SubmissionError::NotFound | SubmissionError::NotYours) => {
            Err(AppError::not_found(format!("Your submission number {id}")))
        }
        Err(SubmissionError::Db(e)) => Err(e.into()),
        Err(e) => Err(AppError::bad_request(e.to_string())),
    }
}

/// One measurement of a submission, for display.
pub(crate) struct MeasurementView {
    pub(crate) quantity: &'static str,
    pub(crate) value_text: String,
    pub(crate) log_value: String,
    pub(crate) detail: String,
    pub(crate) reference: String,
    /// For a virial mass: the lag, width and factors behind it, in one line.
    pub(crate) broad_line: Option<String>,
}

impl MeasurementView {
    /// `virial`: what lies behind the submission's virial masses
    /// (`relations::agn::submission_virial`).
    pub(crate) fn new(m: &Measurement, virial: &[crate::relations::agn::VirialDetail]) -> Self {
        let quantity = m.quantity.label();
        let detail = measurement_detail(&m.method, &m.sigma_definition, &m.aperture, &m.band);
        Self {
            quantity,
            value_text: m.value_text.clone(),
            log_value: with_errors(
                Uncertain::asymmetric(m.log_value, m.err_minus_dex, m.err_plus_dex, m.upper_limit),
                2,
            ),
            detail,
            reference: m.reference.clone(),
            broad_line: virial
                .iter()
                .find(|d| d.measurement_id == m.measurement_id)
                .map(super::galaxies::VirialView::summary),
        }
    }
}

/// An assessment (`relations::assess`) as the submission pages and the review queue show it.
pub(crate) struct AssessmentView {
    pub(crate) rows: Vec<PlaceRow>,
    pub(crate) charts: Vec<PlaceChart>,
    pub(crate) soi: Option<String>,
    /// Resolved, not resolved or unknown, as a badge beside [`Self::soi`].
    pub(crate) soi_badge: Option<Badge>,
    pub(crate) mass_at_adopted: Option<String>,
    pub(crate) clashes: Vec<ClashView>,
}

/// An adopted value a submitted one would replace.
pub(crate) struct ClashView {
    pub(crate) new_measurement_id: i64,
    pub(crate) text: String,
}

impl AssessmentView {
    /// The assessment formatted, with the relation charts.
    ///
    /// # Errors
    /// When a drawing task fails.
    pub(crate) async fn with_charts(fits: &FitCache, a: &Assessment) -> AppResult<Self> {
        let (rows, charts) = super::place::views(fits, &a.placements).await?;
        Ok(Self {
            rows,
            charts,
            ..Self::of(a)
        })
    }

    /// The assessment formatted, without charts (the review queue).
    pub(crate) fn of(a: &Assessment) -> Self {
        let rows = a.placements.iter().map(super::place::row).collect();
        // ratio = θ_infl / resolution (astro::influence; docs/methods.md): resolved when it
        // reaches the threshold.
        let soi = a.sphere_of_influence.as_ref().map(|s| match (s.ratio, s.resolution_arcsec) {
            (Some(r), Some(res)) => format!(
                "r_infl = {} pc = {}″; θ_infl / resolution = {}″ / {}″ = {} (resolved when ≥ {})",
                significant(s.radius_pc, 3),
                significant(s.theta_arcsec, 3),
                significant(s.theta_arcsec, 3),
                significant(res, 3),
                significant(r, 2),
                significant(s.threshold, 2),
            ),
            _ => format!(
                "r_infl = {} pc = {}″; no resolution was given",
                significant(s.radius_pc, 3),
                significant(s.theta_arcsec, 3),
            ),
        });
        let soi_state = a
            .sphere_of_influence
            .as_ref()
            .map(|s| soi_badge(s.resolved, "unknown (no resolution)"));
        let mass_at_adopted = a.mass_at_adopted.as_ref().map(|m| {
            format!(
                "{} log10 M☉ at {} Mpc (as published: {}{})",
                m.text,
                significant(m.adopted_distance_mpc, 3),
                fixed(m.published_log_mbh, 2),
                m.source_distance_mpc
                    .map_or(String::new(), |d| format!(" at {} Mpc", significant(d, 3)))
            )
        });
        let clashes = a
            .clashes
            .iter()
            .map(|c| ClashView {
                new_measurement_id: c.new_measurement_id,
                text: format!(
                    "The {}{} already has an adopted value: {} (log10 {}).",
                    c.quantity.label(),
                    if c.band.is_empty() {
                        String::new()
                    } else {
                        format!(" in {}", c.band)
                    },
                    c.adopted_value_text,
                    fixed(c.adopted_log_value, 2)
                ),
            })
            .collect();
        Self {
            rows,
            charts: Vec::new(),
            soi,
            soi_badge: soi_state,
            mass_at_adopted,
            clashes,
        }
    }
}

/// `/submissions/{id}`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/submission_show.html")]
pub(crate) struct SubmissionPage {
    nav: Nav,
    csrf: String,
    summary: SummaryView,
    own: bool,
    note: String,
    measurements: Vec<MeasurementView>,
    rows: Vec<PlaceRow>,
    charts: Vec<PlaceChart>,
    soi: Option<String>,
    soi_badge: Option<Badge>,
    mass_at_adopted: Option<String>,
    clashes: Vec<ClashView>,
    /// "Submission 12 for … was saved …" after submitting, to the submitter only.
    flash: Option<String>,
}

/// One submission: its measurements and where its galaxy falls against each relation. The
/// submitter, reviewers and admins may see it; to anyone else it does not exist (404).
pub(crate) async fn show_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Extension(ctx): Extension<AuthContext>,
    headers: axum::http::HeaderMap,
    Path(id): Path<String>,
) -> AppResult<Response> {
    let user = session_of(&principal)?;
    let id = parse_id(&id)?;
    let summary = submissions::find(&state.pool, id).await?;
    let own = summary
        .as_ref()
        .is_some_and(|s| s.account_id == Some(user.account_id));
    let Some(summary) = summary.filter(|_| own || user.role.includes(Role::Reviewer)) else {
        return Err(AppError::not_found(format!("Submission number {id}")));
    };
    let galaxy = submissions::galaxy_by_id(&state.pool, summary.galaxy_id)
        .await?
        .ok_or_else(|| AppError::not_found(format!("The galaxy of submission {id}")))?;
    let measured = submissions::measurements_of_submission(&state.pool, id).await?;
    let virial = crate::relations::agn::submission_virial(&state.pool, &measured).await?;
    let a = assess(&state.catalog(), &galaxy, &measured, true).await?;
    let a = AssessmentView::with_charts(&state.fits, &a).await?;
    let reviews = submissions::reviews_of_submission(&state.pool, id).await?;
    let cookie = flash_cookie_name(ctx.secure_cookies);
    let saved = read_cookie(&headers, cookie).is_some_and(|v| v == format!("saved-{id}"));
    let flash = (own && saved).then(|| {
        format!(
            "Submission {id} for {} was saved; a reviewer will accept or reject it.",
            summary.galaxy_name
        )
    });
    let page = SubmissionPage {
        nav,
        csrf: user.csrf_token.clone(),
        own,
        note: summary.note.clone(),
        summary: SummaryView::new(&summary, &reviews),
        flash,
        measurements: measured
            .iter()
            .map(|m| MeasurementView::new(m, &virial))
            .collect(),
        rows: a.rows,
        charts: a.charts,
        soi: a.soi,
        soi_badge: a.soi_badge,
        mass_at_adopted: a.mass_at_adopted,
        clashes: a.clashes,
    };
    let mut response = page.into_response();
    if saved {
        response.headers_mut().append(
            axum::http::header::SET_COOKIE,
            set_cookie(cookie, "", ctx.secure_cookies, Some(0)),
        );
    }
    Ok(response)
}

/// `/submissions/upload`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/submission_upload.html")]
pub(crate) struct UploadPage {
    nav: Nav,
    csrf: String,
    columns: String,
    text: String,
    /// (line, column, message) of every faulty row.
    faults: Vec<(u64, String, String)>,
    summary: Option<String>,
    /// What a successful upload stored.
    done: Option<String>,
}

fn upload_page(nav: Nav, user: &SessionUser, text: String) -> UploadPage {
    UploadPage {
        nav,
        csrf: user.csrf_token.clone(),
        columns: crate::catalog::csv_io::COLUMNS.join(","),
        text,
        faults: Vec::new(),
        summary: None,
        done: None,
    }
}

/// The CSV upload form.
pub(crate) async fn show_upload(
    Extension(principal): Extension<Principal>,
    nav: Nav,
) -> AppResult<UploadPage> {
    let user = session_of(&principal)?;
    Ok(upload_page(nav, user, String::new()))
}

/// The upload form's pasted-text field.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct UploadForm {
    #[serde(default)]
    csv: String,
}

/// Why an upload could not be read.
enum UploadFault {
    /// The body is over the route's limit.
    TooLarge,
    /// A sentence for the upload page.
    Message(String),
}

/// The catalog text of an upload: the file field `file` if a file was chosen, else the pasted
/// `csv` field. Uploads come as `multipart/form-data` (file input) or url-encoded (paste only).
async fn upload_text(
    state: &AppState,
    request: axum::extract::Request,
) -> Result<String, UploadFault> {
    use axum::extract::multipart::MultipartError;
    use axum::extract::{FromRequest, Multipart};
    // A body over the route's limit is a 413, which the router draws with the limit.
    let fault = |what: &str, e: MultipartError| {
        if e.status() == StatusCode::PAYLOAD_TOO_LARGE {
            UploadFault::TooLarge
        } else {
            UploadFault::Message(format!("{what} could not be read: {e}."))
        }
    };
    let multipart = request
        .headers()
        .get(axum::http::header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.to_ascii_lowercase().starts_with("multipart/form-data"));
    if !multipart {
        let Form(form) = Form::<UploadForm>::from_request(request, state)
            .await
            .map_err(|e| {
                if e.status() == StatusCode::PAYLOAD_TOO_LARGE {
                    UploadFault::TooLarge
                } else {
                    UploadFault::Message(format!("The form could not be read: {e}."))
                }
            })?;
        return Ok(form.csv);
    }
    let mut parts = Multipart::from_request(request, state)
        .await
        .map_err(|e| UploadFault::Message(format!("The upload could not be read: {e}.")))?;
    let mut file = None;
    let mut pasted = String::new();
    while let Some(field) = parts
        .next_field()
        .await
        .map_err(|e| fault("The upload", e))?
    {
        match field.name() {
            Some("file") => {
                let bytes = field.bytes().await.map_err(|e| fault("The file", e))?;
                if !bytes.is_empty() {
                    let text = String::from_utf8(bytes.to_vec()).map_err(|_| {
                        UploadFault::Message(
                            "The file is not UTF-8 text; save it as UTF-8 CSV (or JSON) and upload it again."
                                .to_owned(),
                        )
                    })?;
                    // A UTF-8 byte-order mark (spreadsheet exports) is not part of the header.
                    file = Some(text.trim_start_matches('\u{feff}').to_owned());
                }
            }
            Some("csv") => {
                pasted = field.text().await.map_err(|e| fault("The form", e))?;
            }
            _ => {}
        }
    }
    Ok(file.unwrap_or(pasted))
}

/// Import an uploaded catalog file (or pasted rows) as pending submissions, one per galaxy,
/// whole or not at all; a faulty file gets a report of every faulty row (400) and nothing is
/// written. Rows already in the catalog (same row key) are skipped, so sending a file twice
/// adds nothing.
pub(crate) async fn upload(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    request: axum::extract::Request,
) -> AppResult<Response> {
    use crate::catalog::csv_io::{ImportError, ImportMode, import_csv};
    let user = session_of(&principal)?;
    let text = match upload_text(&state, request).await {
        Ok(t) => t,
        Err(UploadFault::TooLarge) => return Err(AppError::BodyTooLarge { limit_bytes: None }),
        Err(UploadFault::Message(message)) => {
            let mut page = upload_page(nav, user, String::new());
            page.summary = Some(message);
            return Ok((StatusCode::BAD_REQUEST, page).into_response());
        }
    };
    if text.trim().is_empty() {
        let mut page = upload_page(nav, user, String::new());
        page.summary = Some("Choose a file or paste rows; nothing was sent.".to_owned());
        return Ok((StatusCode::BAD_REQUEST, page).into_response());
    }
    let mode = ImportMode::Pending {
        account_id: Some(user.account_id),
        source: SubmissionSource::Csv,
    };
    match import_csv(&state.pool, &text, mode, &mut |_, _| {}).await {
        Ok(report) => {
            let mut page = upload_page(nav, user, String::new());
            page.done = Some(format!(
                "Imported {} as {} ({}); {} already in the catalog {} skipped.",
                count(report.measurements, "measurement", "measurements"),
                count(
                    report.submissions,
                    "pending submission",
                    "pending submissions"
                ),
                count(report.new_galaxies, "new galaxy", "new galaxies"),
                count(report.skipped, "row", "rows"),
                if report.skipped == 1 { "was" } else { "were" },
            ));
            Ok(page.into_response())
        }
        Err(ImportError::Rows(rows)) => {
            // A big file is not echoed back into the text box.
            let echo = if text.len() <= 200_000 {
                text
            } else {
                String::new()
            };
            let mut page = upload_page(nav, user, echo);
            let (listed, summary) = crate::catalog::csv_io::reported_faults(&rows);
            page.summary = Some(summary);
            page.faults = listed
                .iter()
                .map(|r| (r.line, r.column.to_owned(), sentence(&r.message)))
                .collect();
            Ok((StatusCode::BAD_REQUEST, page).into_response())
        }
        Err(ImportError::Db(e)) => Err(e.into()),
    }
}

/// The adopted catalog as CSV (the import format), named with its catalog version; any past
/// version with `?version=N` or `?release=NAME`.
pub(crate) async fn download_catalog(
    State(state): State<AppState>,
    query: Result<axum::extract::Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let pinned = file_version(&state, query).await?;
    let (text, version) =
        crate::catalog::csv_io::export_csv(&state.pool, Some(pinned.version)).await?;
    Ok(catalog_file(
        &pinned,
        text,
        version,
        "csv",
        "text/csv; charset=utf-8",
    ))
}

/// `/catalog.json`: the adopted catalog as JSON, stamped with the catalog version inside.
pub(crate) async fn download_catalog_json(
    State(state): State<AppState>,
    query: Result<axum::extract::Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let pinned = file_version(&state, query).await?;
    let (text, version) =
        crate::catalog::csv_io::export_json(&state.pool, Some(pinned.version)).await?;
    Ok(catalog_file(
        &pinned,
        text,
        version,
        "json",
        "application/json",
    ))
}

/// The version a catalog file is asked for; it takes no other parameter.
pub(super) async fn file_version(
    state: &AppState,
    query: Result<axum::extract::Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<crate::catalog::history::Pinned> {
    let (_, pinned, _, rest) = super::relations::versioned(state, query).await?;
    if let Some((key, _)) = rest.first() {
        return Err(AppError::bad_request(format!(
            "'{}' is not a parameter of this file (it accepts version, release).",
            key.chars().take(40).collect::<String>()
        )));
    }
    Ok(pinned)
}

/// A catalog export as a download named after its version, with the version in a header too;
/// a past version's file never changes ([`crate::router::Immutable`]).
pub(super) fn catalog_file(
    pinned: &crate::catalog::history::Pinned,
    text: String,
    version: i64,
    extension: &str,
    content_type: &'static str,
) -> Response {
    super::relations::download(
        pinned,
        content_type,
        &format!("massline-catalog-v{version}.{extension}"),
        text,
    )
}
