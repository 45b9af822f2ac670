//! Members' submissions: `/submissions/new` (the form), `/submissions` (one's own, with
//! withdraw), `/submissions/{id}` (one submission and where its galaxy falls against each
//! relation). [`assess`] is shared with the review queue.
//!
//! Every typed value goes through the same cell readers as the catalog CSV files
//! (`catalog::demo::measurement_from_cells`, hence `units::parse_entry`), so a form and a file
//! accept exactly the same things. A refused form comes back with what was typed and a message
//! beside each field at fault; nothing is written unless every measurement is valid.

use std::collections::HashMap;

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::{Extension, Path, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};

use super::Nav;
use super::account::session_of;
use super::display::{fixed, significant};
use super::place::{PlaceChart, PlaceRow, Subject, SubjectMass, input_text, place_on_relation};
use crate::astro::{distance_covariance_dex2, log_distance_error_dex};
use crate::auth::{Principal, Role, SessionUser};
use crate::catalog::demo::{galaxy_from_cells, measurement_from_cells};
use crate::catalog::galaxies::{self as store, SubmissionSource};
use crate::catalog::model::{
    BulgeKind, BulgeMassMethod, CentreKind, DistanceMethod, Galaxy, MassMethod, Measurement,
    Morphology, Quantity, SigmaDefinition,
};
use crate::catalog::relation_rows;
use crate::catalog::submissions::{self, GalaxyChoice, SubmissionError, SubmissionSummary};
use crate::error::{AppError, AppResult};
use crate::relations::{Relation, at_adopted_distance, distance_scaling, sphere_of_influence};
use crate::startup::AppState;
use crate::units::format_log_with_errors;

/// Measurement rows on a fresh form.
pub(crate) const FORM_ROWS: usize = 3;

/// At most this many measurement rows on one form ("Add a measurement row" stops there).
pub(crate) const MAX_FORM_ROWS: usize = 20;

/// The measurement columns of the form (and of the CSV files), with their labels.
const MEASUREMENT_COLUMNS: [(&str, &str); 12] = [
    ("quantity", "Quantity"),
    ("value", "Value as published"),
    ("scale", "Scale"),
    ("limit_confidence_sigma", "Limit confidence [σ]"),
    ("method", "Method"),
    ("sigma_definition", "σ definition"),
    ("aperture", "Aperture"),
    ("band", "Band"),
    ("source_distance_mpc", "Source distance [Mpc]"),
    ("resolution_arcsec", "Resolution [arcsec]"),
    ("reference", "Reference"),
    ("note", "Note"),
];

/// The new-galaxy columns, with their labels.
const GALAXY_COLUMNS: [(&str, &str); 7] = [
    ("name", "Name"),
    ("morphology", "Morphology"),
    ("bulge_kind", "Bulge kind"),
    ("centre_kind", "Centre kind"),
    ("distance_mpc", "Adopted distance [Mpc]"),
    ("distance_err_mpc", "Distance error [Mpc]"),
    ("distance_method", "Distance method"),
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
        "method" => MassMethod::pairs()
            .into_iter()
            .chain(BulgeMassMethod::pairs())
            .collect(),
        "sigma_definition" => SigmaDefinition::pairs(),
        "morphology" => Morphology::pairs(),
        "bulge_kind" => BulgeKind::pairs(),
        "centre_kind" => CentreKind::pairs(),
        "distance_method" => DistanceMethod::pairs(),
        _ => return Vec::new(),
    };
    let mut out = Vec::with_capacity(pairs.len() + 1);
    if !matches!(
        column,
        "scale" | "morphology" | "bulge_kind" | "centre_kind" | "distance_method"
    ) {
        out.push((String::new(), "—".to_owned(), value.is_empty()));
    }
    out.extend(
        pairs
            .into_iter()
            .map(|(v, l)| (v.to_owned(), l.to_owned(), v == value)),
    );
    out
}

/// One measurement row of the form.
pub(crate) struct RowInputs {
    number: usize,
    inputs: Vec<Input>,
}

/// `/submissions/new`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/submission_new.html")]
pub(crate) struct NewSubmissionPage {
    nav: Nav,
    csrf: String,
    /// (slug, name, selected)
    galaxies: Vec<(String, String, bool)>,
    galaxy_error: Option<String>,
    galaxy_inputs: Vec<Input>,
    measurement_rows: Vec<RowInputs>,
    /// The number of measurement rows (a hidden field, so "add a row" keeps what was typed).
    n_rows: usize,
    can_add_row: bool,
    note: String,
    form_error: Option<String>,
    /// The form's idempotency key: a retried POST of this form stores nothing new.
    request_key: String,
    /// Where the object falls, before submitting ("Check against the relations").
    preview: Option<Preview>,
}

/// The placement shown before submitting.
pub(crate) struct Preview {
    rows: Vec<PlaceRow>,
    charts: Vec<PlaceChart>,
    soi: Option<String>,
    mass_at_adopted: Option<String>,
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
    let chosen = get("galaxy");
    let galaxies = submissions::galaxy_names(&state.pool)
        .await?
        .into_iter()
        .map(|(_, name, slug)| {
            let selected = slug == chosen;
            (slug, name, selected)
        })
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
            inputs: MEASUREMENT_COLUMNS
                .iter()
                .map(|(c, l)| input(format!("m{i}_{c}"), c, l))
                .collect(),
        })
        .collect();
    Ok(NewSubmissionPage {
        nav,
        csrf: user.csrf_token.clone(),
        galaxies,
        galaxy_error: errors.get("galaxy").cloned(),
        galaxy_inputs,
        measurement_rows: rows,
        n_rows,
        can_add_row: n_rows < MAX_FORM_ROWS,
        note: get("note"),
        form_error,
        request_key: fields
            .get("request_key")
            .filter(|k| submissions::validate_client_key(k).is_ok())
            .cloned()
            .unwrap_or_else(crate::auth::secret::random_hex_256),
        preview: None,
    })
}

/// Show the empty submission form.
pub(crate) async fn new_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
) -> AppResult<NewSubmissionPage> {
    let user = session_of(&principal)?;
    form_page(&state, user, nav, &HashMap::new(), &HashMap::new(), None).await
}

/// Store a submission from the form, or show the form again with a message beside each field
/// at fault (400) and nothing written.
pub(crate) async fn create_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Form(pairs): Form<Vec<(String, String)>>,
) -> AppResult<Response> {
    let user = session_of(&principal)?;
    let mut fields: Fields = pairs.into_iter().collect();
    let action = fields.get("action").map_or("submit", |a| a.as_str());
    if action == "add_row" {
        // Nothing is checked or stored: the same form with one more row, as typed.
        let n = (rows_of(&fields) + 1).min(MAX_FORM_ROWS);
        fields.insert("rows".into(), n.to_string());
        let page = form_page(&state, user, nav, &fields, &HashMap::new(), None).await?;
        return Ok(page.into_response());
    }
    let checking = action == "check";
    let get = |name: &str| fields.get(name).map_or("", |v| v.as_str());
    let mut errors: HashMap<String, String> = HashMap::new();

    let slug = get("galaxy").trim();
    let galaxy = if slug.is_empty() {
        match galaxy_from_cells("form", 0, &|c| get(c)) {
            Ok(g) => Some(GalaxyChoice::New(g)),
            Err(e) => {
                errors.insert(e.column.to_owned(), capitalised(&e.message));
                None
            }
        }
    } else {
        match store::find_by_slug(&state.pool, slug).await? {
            Some(g) => Some(GalaxyChoice::Existing(g.galaxy_id)),
            None => {
                errors.insert(
                    "galaxy".into(),
                    "That galaxy is not in the catalog; choose another or describe a new one."
                        .into(),
                );
                None
            }
        }
    };

    let mut measurements = Vec::new();
    for i in 0..rows_of(&fields) {
        let key = |c: &str| format!("m{i}_{c}");
        let used = ["quantity", "value"]
            .iter()
            .any(|c| !get(&key(c)).trim().is_empty());
        if !used {
            continue;
        }
        match measurement_from_cells("form", 0, &|c| get(&key(c))) {
            Ok(m) => measurements.push(m),
            Err(e) => {
                errors.insert(key(e.column), capitalised(&e.message));
            }
        }
    }
    let note = get("note").trim();
    if note.chars().count() > 2000 {
        errors.insert(
            "note".into(),
            "The note has at most 2000 characters.".into(),
        );
    }
    let mut form_error = None;
    if measurements.is_empty() && errors.keys().all(|k| !k.starts_with('m')) {
        form_error = Some("Give at least one measurement: a quantity and its value.".to_owned());
    }
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
    let (Some(galaxy), true, None) = (galaxy, errors.is_empty(), &form_error) else {
        let form_error = form_error
            .or_else(|| Some("Nothing was saved; correct the fields marked below.".to_owned()));
        let page = form_page(&state, user, nav, &fields, &errors, form_error).await?;
        return Ok((StatusCode::BAD_REQUEST, page).into_response());
    };
    if checking {
        let mut page = form_page(&state, user, nav, &fields, &errors, None).await?;
        page.preview = Some(preview(&state, &galaxy, &measurements).await?);
        return Ok(page.into_response());
    }
    let request = submissions::request_key(
        Some(user.account_id),
        &client_key,
        &galaxy,
        &measurements,
        note,
    );
    match submissions::create(
        &state.pool,
        Some(user.account_id),
        SubmissionSource::Form,
        &galaxy,
        &measurements,
        note,
        &request,
    )
    .await
    {
        // A replay (the same form posted twice) lands on the same submission.
        Ok(created) => {
            Ok(Redirect::to(&format!("/submissions/{}", created.submission_id)).into_response())
        }
        Err(SubmissionError::Db(e)) => Err(e.into()),
        Err(SubmissionError::KeyReused) => {
            // This page was submitted before with other values (the back button, then edits):
            // keep what was typed, give the form a fresh key, and say so.
            fields.remove("request_key");
            let page = form_page(
                &state,
                user,
                nav,
                &fields,
                &errors,
                Some("This form was already submitted with other values, so nothing was saved. Check the values below and submit again to store them as a new submission.".to_owned()),
            )
            .await?;
            Ok((StatusCode::CONFLICT, page).into_response())
        }
        Err(e) => {
            let field = match e {
                SubmissionError::NameTaken => "name",
                _ => "galaxy",
            };
            errors.insert(field.into(), e.to_string());
            let page = form_page(
                &state,
                user,
                nav,
                &fields,
                &errors,
                Some("Nothing was saved; correct the fields marked below.".to_owned()),
            )
            .await?;
            Ok((StatusCode::BAD_REQUEST, page).into_response())
        }
    }
}

/// "the value …" → "The value …." (cell messages are lower-case fragments).
fn capitalised(message: &str) -> String {
    let mut chars = message.chars();
    let mut out: String = match chars.next() {
        Some(c) => c.to_uppercase().chain(chars).collect(),
        None => String::new(),
    };
    if !out.ends_with('.') {
        out.push('.');
    }
    out
}

/// Where a not-yet-stored submission would fall: the same assessment as a stored one, with
/// the typed values in place of the galaxy's adopted ones (a new galaxy has none).
async fn preview(
    state: &AppState,
    choice: &GalaxyChoice,
    measurements: &[crate::catalog::model::NewMeasurement],
) -> AppResult<Preview> {
    let galaxy = match choice {
        GalaxyChoice::Existing(id) => submissions::galaxy_by_id(&state.pool, *id)
            .await?
            .ok_or_else(|| AppError::not_found("The chosen galaxy"))?,
        GalaxyChoice::New(g) => Galaxy {
            galaxy_id: 0,
            name: g.name.clone(),
            slug: String::new(),
            morphology: g.morphology.as_str().to_owned(),
            bulge_kind: g.bulge_kind.as_str().to_owned(),
            centre_kind: g.centre_kind.as_str().to_owned(),
            distance_mpc: g.distance_mpc,
            distance_err_mpc: g.distance_err_mpc,
            distance_method: g.distance_method.as_str().to_owned(),
        },
    };
    let typed: Vec<Measurement> = measurements
        .iter()
        .map(|m| Measurement {
            measurement_id: 0,
            galaxy_id: galaxy.galaxy_id,
            submission_id: 0,
            quantity: m.quantity,
            log_value: m.log_value,
            err_minus_dex: m.err_minus_dex,
            err_plus_dex: m.err_plus_dex,
            err_dex: m.err_dex,
            upper_limit: m.upper_limit,
            limit_confidence_sigma: m.limit_confidence_sigma,
            method: m.method.clone(),
            sigma_definition: m.sigma_definition.clone(),
            aperture: m.aperture.clone(),
            band: m.band.clone(),
            source_distance_mpc: m.source_distance_mpc,
            resolution_arcsec: m.resolution_arcsec,
            reference: m.reference.clone(),
            note: m.note.clone(),
            value_text: m.value_text.clone(),
            value_scale: m.value_scale.clone(),
            state: "pending".to_owned(),
            adopted: false,
            created_at: String::new(),
        })
        .collect();
    let a = assess(state, &galaxy, &typed, true, true).await?;
    Ok(Preview {
        rows: a.rows,
        charts: a.charts,
        soi: a.soi,
        mass_at_adopted: a.mass_at_adopted,
    })
}

/// A submission in a list.
pub(crate) struct SummaryView {
    id: i64,
    galaxy_name: String,
    galaxy_slug: String,
    state: String,
    created_at: String,
    n_measurements: i64,
    pending: bool,
}

impl SummaryView {
    fn new(s: &SubmissionSummary) -> Self {
        Self {
            id: s.submission_id,
            galaxy_name: s.galaxy_name.clone(),
            galaxy_slug: s.galaxy_slug.clone(),
            state: s.state.clone(),
            created_at: s
                .created_at
                .get(..16)
                .unwrap_or(&s.created_at)
                .replace('T', " "),
            n_measurements: s.n_measurements,
            pending: s.state == "pending",
        }
    }
}

/// `/submissions`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/submissions_list.html")]
pub(crate) struct SubmissionsListPage {
    nav: Nav,
    csrf: String,
    submissions: Vec<SummaryView>,
}

/// The logged-in person's submissions, newest first.
pub(crate) async fn list_submissions(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
) -> AppResult<SubmissionsListPage> {
    let user = session_of(&principal)?;
    let list = submissions::list_for_account(&state.pool, user.account_id).await?;
    Ok(SubmissionsListPage {
        nav,
        csrf: user.csrf_token.clone(),
        submissions: list.iter().map(SummaryView::new).collect(),
    })
}

fn parse_id(id: &str) -> AppResult<i64> {
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
        Ok(()) => Ok(Redirect::to("/submissions")),
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
}

impl MeasurementView {
    pub(crate) fn new(m: &Measurement) -> Self {
        let quantity = m.quantity.label();
        let detail = [
            m.method.as_str(),
            m.sigma_definition.as_str(),
            m.aperture.as_str(),
            m.band.as_str(),
        ]
        .iter()
        .filter(|t| !t.is_empty())
        .copied()
        .collect::<Vec<_>>()
        .join(", ");
        Self {
            quantity,
            value_text: m.value_text.clone(),
            log_value: format_log_with_errors(
                m.log_value,
                m.err_minus_dex,
                m.err_plus_dex,
                m.upper_limit,
            ),
            detail,
            reference: m.reference.clone(),
        }
    }
}

/// What a submission means for the catalog: where its galaxy falls against each relation
/// (with the submitted values in place of the adopted ones), the sphere-of-influence check,
/// the mass at the adopted distance and the adopted values it would replace.
pub(crate) struct Assessment {
    pub(crate) rows: Vec<PlaceRow>,
    pub(crate) charts: Vec<PlaceChart>,
    pub(crate) soi: Option<String>,
    pub(crate) mass_at_adopted: Option<String>,
    pub(crate) clashes: Vec<ClashView>,
    /// The largest |z| over the relations (0 without a mass): the review queue's order.
    pub(crate) max_abs_z: f64,
}

/// An adopted value a submitted one would replace.
pub(crate) struct ClashView {
    pub(crate) new_measurement_id: i64,
    pub(crate) text: String,
}

/// The value of `quantity` (and band) to use: the submitted one if any, else the adopted one.
fn pick<'a>(
    submitted: &'a [Measurement],
    all: &'a [Measurement],
    quantity: Quantity,
    band: Option<&str>,
) -> Option<&'a Measurement> {
    let matches = |m: &&Measurement| {
        m.quantity == quantity && band.is_none_or(|b| m.band.eq_ignore_ascii_case(b))
    };
    submitted
        .iter()
        .find(matches)
        .or_else(|| all.iter().filter(|m| m.adopted).find(matches))
}

/// Assess a submission (see [`Assessment`]); `charts` draws the relation charts too, `refit`
/// refits each relation with the submission in (the costly part).
pub(crate) async fn assess(
    state: &AppState,
    galaxy: &Galaxy,
    submitted: &[Measurement],
    charts: bool,
    refit: bool,
) -> AppResult<Assessment> {
    let all = store::measurements_of(&state.pool, galaxy.galaxy_id).await?;
    let at_adopted = |m: &Measurement| {
        at_adopted_distance(
            m.log_value,
            m.quantity,
            &m.method,
            m.source_distance_mpc,
            galaxy.distance_mpc,
        )
    };
    // The adopted distance's error enters as in the fit samples (docs/methods.md §3.2): in
    // quadrature on each distance-dependent value, and as the x–y covariance of the two.
    let sigma_log_d =
        log_distance_error_dex(galaxy.distance_mpc, galaxy.distance_err_mpc).unwrap_or(0.0);
    let kind = |m: &Measurement| distance_scaling(m.quantity, &m.method);
    let err_of = |m: &Measurement| m.err_dex.hypot(f64::from(kind(m).exponent()) * sigma_log_d);
    let value = |m: &Measurement| {
        if m.upper_limit {
            (at_adopted(m), 0.0)
        } else {
            (at_adopted(m), err_of(m))
        }
    };
    let text = |m: &Measurement| {
        format_log_with_errors(
            at_adopted(m),
            m.err_minus_dex,
            m.err_plus_dex,
            m.upper_limit,
        )
    };
    let mass_m = pick(submitted, &all, Quantity::BlackHoleMass, None);
    let sigma_m = pick(submitted, &all, Quantity::VelocityDispersion, None)
        .filter(|m| m.sigma_definition == SigmaDefinition::Effective.as_str());
    let bulge_m = pick(submitted, &all, Quantity::BulgeMass, None);
    let mass = mass_m.map(|m| SubjectMass {
        log_mbh: at_adopted(m),
        err_minus_dex: m.err_minus_dex,
        err_plus_dex: m.err_plus_dex,
        // A limit is taken as exact, as in the fits.
        err_dex: if m.upper_limit { 0.0 } else { err_of(m) },
        xy_cov: 0.0,
        upper_limit: m.upper_limit,
    });
    let bands: Vec<String> = relation_rows::luminosity_bands(&state.pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();
    let mut rows = Vec::new();
    let mut chart_list = Vec::new();
    let mut max_abs_z: f64 = 0.0;
    for relation in Relation::all(&bands) {
        let (x, x2) = match &relation {
            Relation::MSigma => (sigma_m, None),
            Relation::MBulge => (bulge_m, None),
            Relation::Luminosity(b) => (
                pick(submitted, &all, Quantity::BulgeLuminosity, Some(b)),
                None,
            ),
            Relation::SigmaBulgePlane => (sigma_m.filter(|_| bulge_m.is_some()), bulge_m),
        };
        let Some(x) = x else { continue };
        let x2_text = x2.map(text);
        let mass = mass.zip(mass_m).map(|(mut subject_mass, m)| {
            if !m.upper_limit && !x.upper_limit {
                subject_mass.xy_cov = distance_covariance_dex2(
                    kind(m),
                    kind(x),
                    galaxy.distance_mpc,
                    galaxy.distance_err_mpc,
                )
                .unwrap_or(0.0);
            }
            subject_mass
        });
        let subject = Subject {
            name: galaxy.name.clone(),
            href: (galaxy.galaxy_id > 0).then(|| format!("/galaxies/{}", galaxy.slug)),
            x: value(x),
            x2: x2.map(value),
            mass,
            input: input_text(&relation, &text(x), x2_text.as_deref()),
        };
        let placed = place_on_relation(state, &relation, &subject, refit).await?;
        if let Some(z) = placed.row.z_abs {
            max_abs_z = max_abs_z.max(z);
        }
        rows.push(placed.row);
        if charts {
            chart_list.extend(placed.chart);
        }
    }
    let soi = mass_m.and_then(|m| {
        let s = sphere_of_influence(
            at_adopted(m),
            &m.method,
            pick(submitted, &all, Quantity::VelocityDispersion, None).map(|s| s.log_value),
            galaxy.distance_mpc,
            m.resolution_arcsec,
            state.settings.soi_threshold,
        )?;
        Some(format!(
            "r_infl = {} pc = {}″; resolution/θ = {} ({})",
            significant(s.radius_pc, 3),
            significant(s.theta_arcsec, 3),
            s.ratio.map_or("—".into(), |r| significant(r, 2)),
            match s.resolved {
                Some(true) => "resolved",
                Some(false) => "not resolved",
                None => "unknown: no resolution given",
            }
        ))
    });
    let mass_at_adopted = submitted
        .iter()
        .find(|m| m.quantity == Quantity::BlackHoleMass)
        .map(|m| {
            format!(
                "{} log10 M☉ at {} Mpc (as published: {}{})",
                text(m),
                significant(galaxy.distance_mpc, 3),
                fixed(m.log_value, 2),
                m.source_distance_mpc
                    .map_or(String::new(), |d| format!(" at {} Mpc", significant(d, 3)))
            )
        });
    let submission_id = submitted.first().map_or(0, |m| m.submission_id);
    let clashes = submissions::clashes(&state.pool, submission_id)
        .await?
        .into_iter()
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
    Ok(Assessment {
        rows,
        charts: chart_list,
        soi,
        mass_at_adopted,
        clashes,
        max_abs_z,
    })
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
    mass_at_adopted: Option<String>,
    clashes: Vec<ClashView>,
}

/// One submission: its measurements and where its galaxy falls against each relation. The
/// submitter, reviewers and admins may see it; to anyone else it does not exist (404).
pub(crate) async fn show_submission(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    Path(id): Path<String>,
) -> AppResult<SubmissionPage> {
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
    let a = assess(&state, &galaxy, &measured, true, true).await?;
    Ok(SubmissionPage {
        nav,
        csrf: user.csrf_token.clone(),
        own,
        note: summary.note.clone(),
        summary: SummaryView::new(&summary),
        measurements: measured.iter().map(MeasurementView::new).collect(),
        rows: a.rows,
        charts: a.charts,
        soi: a.soi,
        mass_at_adopted: a.mass_at_adopted,
        clashes: a.clashes,
    })
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

/// The catalog text of an upload: the file field `file` if a file was chosen, else the pasted
/// `csv` field. Uploads come as `multipart/form-data` (file input) or url-encoded (paste only).
async fn upload_text(state: &AppState, request: axum::extract::Request) -> Result<String, String> {
    use axum::extract::{FromRequest, Multipart};
    let multipart = request
        .headers()
        .get(axum::http::header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.to_ascii_lowercase().starts_with("multipart/form-data"));
    if !multipart {
        let Form(form) = Form::<UploadForm>::from_request(request, state)
            .await
            .map_err(|e| format!("The form could not be read: {e}."))?;
        return Ok(form.csv);
    }
    let mut parts = Multipart::from_request(request, state)
        .await
        .map_err(|e| format!("The upload could not be read: {e}."))?;
    let mut file = None;
    let mut pasted = String::new();
    while let Some(field) = parts
        .next_field()
        .await
        .map_err(|e| format!("The upload could not be read: {e}."))?
    {
        match field.name() {
            Some("file") => {
                let bytes = field
                    .bytes()
                    .await
                    .map_err(|e| format!("The file could not be read: {e}."))?;
                if !bytes.is_empty() {
                    let text = String::from_utf8(bytes.to_vec()).map_err(|_| {
                        "The file is not UTF-8 text; save it as UTF-8 CSV (or JSON) and upload it again."
                            .to_owned()
                    })?;
                    // A UTF-8 byte-order mark (spreadsheet exports) is not part of the header.
                    file = Some(text.trim_start_matches('\u{feff}').to_owned());
                }
            }
            Some("csv") => {
                pasted = field
                    .text()
                    .await
                    .map_err(|e| format!("The form could not be read: {e}."))?;
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
        Err(message) => {
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
                "Imported {} measurement(s) as {} pending submission(s) ({} new galaxies); {} row(s) already in the catalog were skipped.",
                report.measurements, report.submissions, report.new_galaxies, report.skipped
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
            page.summary = Some(format!(
                "{} faulty row(s); nothing was imported.",
                rows.len()
            ));
            page.faults = rows
                .into_iter()
                .map(|r| (r.line, r.column.to_owned(), capitalised(&r.message)))
                .collect();
            Ok((StatusCode::BAD_REQUEST, page).into_response())
        }
        Err(ImportError::Db(e)) => Err(e.into()),
    }
}

/// The adopted catalog as CSV (the import format), named with its catalog version.
pub(crate) async fn download_catalog(State(state): State<AppState>) -> AppResult<Response> {
    let (text, version) = crate::catalog::csv_io::export_csv(&state.pool).await?;
    Ok(catalog_file(
        text,
        version,
        "csv",
        "text/csv; charset=utf-8",
    ))
}

/// `/catalog.json`: the adopted catalog as JSON, stamped with the catalog version inside.
pub(crate) async fn download_catalog_json(State(state): State<AppState>) -> AppResult<Response> {
    let (text, version) = crate::catalog::csv_io::export_json(&state.pool).await?;
    Ok(catalog_file(text, version, "json", "application/json"))
}

/// A catalog export as a download named after its version, with the version in a header too.
fn catalog_file(text: String, version: i64, extension: &str, content_type: &str) -> Response {
    (
        [
            (axum::http::header::CONTENT_TYPE, content_type.to_owned()),
            (
                axum::http::header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"massline-catalog-v{version}.{extension}\""),
            ),
            (
                axum::http::HeaderName::from_static("catalog-version"),
                version.to_string(),
            ),
        ],
        text,
    )
        .into_response()
}
