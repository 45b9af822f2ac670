//! `POST /api/v1/submissions` (a script submits measurements; they land as a pending
//! submission) and `GET /api/v1/submissions/{id}` (its state).
//!
//! The body uses the catalog file's column names (README "Catalog CSV"), and every cell goes
//! through the same reader as the form's (`catalog::intake`, hence `units::parse_entry`): a
//! value typed in a script is read exactly as one typed in a form or a file. Every write carries an `Idempotency-Key` header: a retry with the same key and body is
//! answered with the first submission (200, `replayed: true`) and stores nothing.

use std::collections::BTreeMap;

use axum::body::Bytes;
use axum::extract::{Extension, Path, State};
use axum::http::{HeaderMap, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};

use super::ApiResult;
use super::problem::Problem;
use crate::auth::{Principal, Role, Scope, TokenUser, require_scope};
use crate::catalog::csv_io::MEASUREMENT_COLUMNS;
use crate::catalog::galaxies::SubmissionSource;
use crate::catalog::intake::{self, Cells, Checked, GalaxyCells, SubmissionCells};
use crate::catalog::submissions::{self, SubmissionError};
use crate::error::{AppError, FieldError};
use crate::state::AppState;

/// At most this many measurements in one request (a file upload takes more).
pub const MAX_MEASUREMENTS: usize = 100;

/// A cell as a script may send it: the text as typed, or a plain number. `null` is read so
/// that the answer can name the field and say what to send instead (it is never a value).
#[derive(Debug, Clone, PartialEq, Deserialize, utoipa::ToSchema)]
#[serde(untagged)]
pub enum Cell {
    /// Text as typed, e.g. `"2.4e8 +0.6e8/-0.5e8"`.
    Text(String),
    /// A plain number, read as its decimal text.
    Number(f64),
    /// `null`: refused, naming the field.
    Null,
}

impl Cell {
    fn text(&self) -> String {
        match self {
            Self::Text(t) => t.clone(),
            Self::Number(n) => n.to_string(),
            Self::Null => String::new(),
        }
    }
}

/// The sentence for a `null` cell that may be left out.
const NULL_OPTIONAL: &str =
    "null is not a value; leave the field out, or give a number or text such as 16.5.";

/// The sentence for a `null` cell that is required.
const NULL_REQUIRED: &str = "null is not a value; give a number or text such as 16.5.";

/// The galaxy a request describes (when it is not in the catalog yet). Keys and accepted
/// words as the catalog file's galaxy columns.
#[derive(Debug, Clone, Deserialize, utoipa::ToSchema)]
#[serde(deny_unknown_fields)]
pub struct NewGalaxyCells {
    /// Name (unique in the catalog).
    pub name: String,
    /// Morphology word (README "Catalog CSV").
    pub morphology: String,
    /// Bulge kind word.
    pub bulge_kind: String,
    /// Centre kind word.
    pub centre_kind: String,
    /// Adopted distance, Mpc.
    pub distance_mpc: Cell,
    /// Its 1σ error, Mpc.
    pub distance_err_mpc: Cell,
    /// How the distance was measured (word).
    pub distance_method: String,
    /// The nucleus' activity class: `quiescent`, `seyfert1`, `seyfert2`, `liner`, `quasar`,
    /// `radio_galaxy` or `unknown` (left out: unknown).
    #[serde(default)]
    #[schema(example = "seyfert1")]
    pub activity: Option<String>,
}

/// The body of `POST /api/v1/submissions`: an existing galaxy by slug (`galaxy`) or a new one
/// (`new_galaxy`), one to 100 measurements, a note for the reviewer.
#[derive(Debug, Clone, Deserialize, utoipa::ToSchema)]
#[serde(deny_unknown_fields)]
pub struct SubmissionRequest {
    /// Slug of a galaxy in the catalog (as in `/galaxies/{slug}`); give this or `new_galaxy`.
    #[serde(default)]
    pub galaxy: Option<String>,
    /// A galaxy not yet in the catalog; give this or `galaxy`.
    #[serde(default)]
    pub new_galaxy: Option<NewGalaxyCells>,
    /// Measurements, each an object whose keys are the catalog file's measurement columns
    /// (`quantity` required, and `value` but for a computed broad-line mass; `scale`,
    /// `limit_confidence_sigma`, `method`, `sigma_definition`, `aperture`, `band`,
    /// `source_distance_mpc`, `resolution_arcsec`, `reference`, `note` as needed). A
    /// reverberation or single-epoch black-hole mass also takes `line`, `width_definition`
    /// (`sigma_line`, `fwhm`), `width_spectrum` (`rms`, `mean`, `single`), `lag_days`,
    /// `lag_err_days` (`1.2` or `+1.4/-1.1`), `width_km_s`, `width_err_km_s`,
    /// `log_l5100_erg_s` (log10 erg/s), `virial_factor` (the linear f the published mass
    /// assumed) and `calibration` (`vp06`, `r_l_bentz13`; single epoch only): without a
    /// `value`, the mass is computed from the lag and the width (or the luminosity and the
    /// width), README "Catalog CSV".
    #[schema(min_items = 1, max_items = 100)]
    pub measurements: Vec<BTreeMap<String, Cell>>,
    /// Note to the reviewer (at most 2000 characters).
    #[serde(default)]
    pub note: String,
    /// `true` confirms that `new_galaxy` is a new galaxy although its name looks like one in
    /// the catalog (the same up to case, spacing, punctuation, accents or look-alike letters of
    /// other scripts); without it such a request is answered 409, naming that galaxy.
    #[serde(default)]
    pub new_galaxy_confirmed: bool,
}

/// The answer to a submission (and to its replay).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, utoipa::ToSchema)]
pub struct SubmissionAnswer {
    /// The submission's key.
    pub submission_id: i64,
    /// The galaxy it measures.
    pub galaxy_id: i64,
    /// Review state: `pending` when stored.
    pub state: String,
    /// True when this answers a replayed request (nothing new was stored).
    pub replayed: bool,
}

/// A submission's state, for its submitter and for reviewers.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, utoipa::ToSchema)]
pub struct SubmissionStatus {
    /// The submission's key.
    pub submission_id: i64,
    /// `pending`, `accepted`, `rejected` or `withdrawn`.
    pub state: String,
    /// How it arrived: `form`, `csv`, `api`, `seed` or `import`.
    pub source: String,
    /// When it was submitted (RFC 3339, UTC).
    pub created_at: String,
    /// The galaxy measured.
    pub galaxy_id: i64,
    /// Its name.
    pub galaxy_name: String,
    /// Its slug.
    pub galaxy_slug: String,
    /// Number of measurements.
    pub n_measurements: i64,
    /// The submitter's note.
    pub note: String,
}

fn token_of(principal: &Principal) -> ApiResult<&TokenUser> {
    match principal {
        Principal::Token(t) => Ok(t),
        // Pages have their own forms; the API's writes are for scripts with tokens.
        Principal::Session(_) => Err(AppError::forbidden(
            "Submitting through the API needs an API token with the submit scope; in a browser, use the submission form.",
        )),
        Principal::Anonymous | Principal::BadToken => {
            Err(AppError::not_logged_in("This endpoint needs an API token."))
        }
    }
}

/// `POST /api/v1/submissions`.
#[utoipa::path(
    post,
    path = "/api/v1/submissions",
    tag = "submissions",
    request_body = SubmissionRequest,
    params(("Idempotency-Key" = String, Header, pattern = "^[!-~]{1,100}$", description = "1–100 visible ASCII characters chosen by the client; a retry with the same key and body stores nothing new")),
    responses(
        (status = 201, description = "Stored as a pending submission", body = SubmissionAnswer,
         headers(("Location" = String, description = "/api/v1/submissions/{id}"))),
        (status = 200, description = "A replay of an earlier request: nothing new stored", body = SubmissionAnswer),
        (status = 400, description = "Unreadable body or missing Idempotency-Key", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the submit scope", body = Problem, content_type = "application/problem+json"),
        (status = 413, description = "Body over 1 MB", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "Not JSON", body = Problem, content_type = "application/problem+json"),
        (status = 409, description = "The new galaxy's name looks like a galaxy in the catalog (named with its slug in `errors`); send that slug as `galaxy`, or `new_galaxy_confirmed: true`", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "Invalid fields (every one listed), or the key reused with another body", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
        (status = 503, description = "The database is busy; retry after the given seconds", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn submit(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    headers: HeaderMap,
    body: Bytes,
) -> ApiResult<Response> {
    let token = token_of(&principal)?;
    require_scope(&token.scopes, Scope::Submit).map_err(|_| {
        AppError::forbidden(
            "This token lacks the submit scope; create one with it on your account page.",
        )
    })?;
    if !is_json(&headers) {
        return Err(AppError::unsupported_media_type(
            "Send the submission as application/json.",
        ));
    }
    let client_key = idempotency_key(&headers)?;
    let request: SubmissionRequest = serde_json::from_slice(&body).map_err(|e| {
        AppError::bad_request(format!("The body is not a submission: {e}."))
            .titled("Unreadable body")
    })?;
    let checked = read_request(&state, &request).await?;
    let created = intake::store(
        &state.pool,
        Some(token.account_id),
        SubmissionSource::Api,
        &client_key,
        &checked,
        &request.note,
    )
    .await
    .map_err(|e| match e {
        SubmissionError::Db(e) => AppError::from(e),
        e @ SubmissionError::KeyReused => AppError::invalid_saying(e.to_string())
            .titled("Idempotency key reused")
            .with_fields(vec![FieldError::new("Idempotency-Key", e.to_string())]),
        e @ SubmissionError::NameTaken => {
            AppError::invalid(vec![FieldError::new("new_galaxy.name", e.to_string())])
        }
        e @ SubmissionError::LooksLike { .. } => AppError::conflict(
            "The new galaxy's name looks like a galaxy in the catalog; send that galaxy's slug as \"galaxy\", or send \"new_galaxy_confirmed\": true to store a new galaxy.",
            vec![FieldError::new(intake::CONFIRM_COLUMN, e.to_string())],
        ),
        e => AppError::invalid(vec![FieldError::new("galaxy", e.to_string())]),
    })?;
    let status = if created.replayed {
        StatusCode::OK
    } else {
        StatusCode::CREATED
    };
    let location = format!("/api/v1/submissions/{}", created.submission_id);
    let answer = SubmissionAnswer {
        submission_id: created.submission_id,
        galaxy_id: created.galaxy_id,
        state: "pending".to_owned(),
        replayed: created.replayed,
    };
    Ok((status, [(header::LOCATION, location)], axum::Json(answer)).into_response())
}

/// Whether the body is declared as JSON.
fn is_json(headers: &HeaderMap) -> bool {
    headers
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| {
            v.split(';')
                .next()
                .is_some_and(|t| t.trim().eq_ignore_ascii_case("application/json"))
        })
}

/// The request's `Idempotency-Key`, or a 400 saying how to send one.
fn idempotency_key(headers: &HeaderMap) -> ApiResult<String> {
    let refused = |message: String| {
        AppError::bad_request("The request cannot be taken as sent; nothing was stored.")
            .with_fields(vec![FieldError::new("Idempotency-Key", message)])
    };
    match headers
        .get("idempotency-key")
        .map(|v| v.to_str().map(str::trim))
    {
        Some(Ok(k)) => submissions::validate_client_key(k)
            .map(|()| k.to_owned())
            .map_err(refused),
        Some(Err(_)) => Err(refused(
            "An idempotency key is made of visible ASCII characters (no spaces).".to_owned(),
        )),
        None => Err(refused(
            "Send an Idempotency-Key header (1 to 100 visible ASCII characters) so a retry cannot store the submission twice."
                .to_owned(),
        )),
    }
}

/// Read the galaxy choice and measurements through `catalog::intake`, listing every field at
/// fault as its JSON path.
async fn read_request(state: &AppState, request: &SubmissionRequest) -> ApiResult<Checked> {
    let mut errors = Vec::new();
    if let Some(g) = &request.new_galaxy {
        for (name, cell) in [
            ("distance_mpc", &g.distance_mpc),
            ("distance_err_mpc", &g.distance_err_mpc),
        ] {
            if *cell == Cell::Null {
                errors.push(FieldError::new(format!("new_galaxy.{name}"), NULL_REQUIRED));
            }
        }
    }
    let texts = measurement_texts(&request.measurements, &mut errors);
    let new_cells: Option<BTreeMap<&'static str, String>> = request.new_galaxy.as_ref().map(|g| {
        [
            ("name", g.name.clone()),
            ("morphology", g.morphology.clone()),
            ("bulge_kind", g.bulge_kind.clone()),
            ("centre_kind", g.centre_kind.clone()),
            ("distance_mpc", g.distance_mpc.text()),
            ("distance_err_mpc", g.distance_err_mpc.text()),
            ("distance_method", g.distance_method.clone()),
            ("activity", g.activity.clone().unwrap_or_default()),
            (
                intake::CONFIRM_COLUMN,
                if request.new_galaxy_confirmed {
                    "yes"
                } else {
                    ""
                }
                .to_owned(),
            ),
        ]
        .into_iter()
        .collect()
    });
    let galaxy = match (&request.galaxy, &new_cells) {
        (Some(slug), None) => Some(GalaxyCells::Slug(slug)),
        (None, Some(cells)) => Some(GalaxyCells::New(Box::new(|c| {
            cells.get(c).map_or("", String::as_str)
        }))),
        _ => {
            errors.push(FieldError::new(
                "galaxy",
                "Give either `galaxy` (the slug of a galaxy in the catalog) or `new_galaxy`.",
            ));
            None
        }
    };
    let unclear = galaxy.is_none();
    let n = request.measurements.len();
    if n == 0 || n > MAX_MEASUREMENTS {
        errors.push(FieldError::new(
            "measurements",
            format!("Send 1 to {MAX_MEASUREMENTS} measurements; this request has {n}."),
        ));
    }
    let rows: Vec<(usize, Box<Cells<'_>>)> = texts
        .iter()
        .map(|(i, cells)| -> (usize, Box<Cells<'_>>) {
            (*i, Box::new(|c| cells.get(c).map_or("", String::as_str)))
        })
        .collect();
    let cells = SubmissionCells {
        // Without a galaxy, the cells are still read so that every field at fault is listed.
        galaxy: galaxy.unwrap_or(GalaxyCells::Slug("")),
        rows,
        note: &request.note,
    };
    let null_fields: Vec<String> = errors.iter().map(|e| e.field.clone()).collect();
    let faults = match intake::check(&state.pool, &cells).await? {
        Ok(checked) if errors.is_empty() => return Ok(checked),
        Ok(_) => Vec::new(),
        Err(faults) => faults,
    };
    errors.extend(
        faults
            .into_iter()
            .filter(|f| !(unclear && f.cell == intake::Cell::Galaxy))
            .map(|f| FieldError::new(json_path(f.cell), f.message))
            // A `null` already named is not also "required".
            .filter(|f| !null_fields.contains(&f.field)),
    );
    // In the order of the request: the galaxy, the measurements one by one, the note.
    errors.sort_by_key(|e| request_order(&e.field));
    Err(AppError::invalid(errors))
}

/// Where a field comes in a request: galaxy, then measurements by index, then the note.
fn request_order(field: &str) -> (u8, usize) {
    if let Some(rest) = field.strip_prefix("measurements[") {
        let index = rest.split(']').next().and_then(|i| i.parse().ok());
        return (2, index.unwrap_or(0));
    }
    match field {
        "measurements" => (1, 0),
        "note" => (3, 0),
        _ => (0, 0),
    }
}

/// Each measurement object's cells as text, or a field error for a key that is not a
/// measurement column (that object is then left out).
fn measurement_texts(
    measurements: &[BTreeMap<String, Cell>],
    errors: &mut Vec<FieldError>,
) -> Vec<(usize, BTreeMap<String, String>)> {
    let mut texts = Vec::new();
    for (i, cells) in measurements.iter().take(MAX_MEASUREMENTS).enumerate() {
        if let Some(k) = cells
            .keys()
            .find(|k| !MEASUREMENT_COLUMNS.contains(&k.as_str()))
        {
            errors.push(FieldError::new(
                format!(
                    "measurements[{i}].{}",
                    k.chars().take(40).collect::<String>()
                ),
                "Not a measurement field; the fields are the catalog file's measurement columns.",
            ));
            continue;
        }
        let nulls: Vec<&String> = cells
            .iter()
            .filter(|(_, v)| **v == Cell::Null)
            .map(|(k, _)| k)
            .collect();
        if !nulls.is_empty() {
            for k in nulls {
                errors.push(FieldError::new(
                    format!("measurements[{i}].{k}"),
                    NULL_OPTIONAL,
                ));
            }
            continue;
        }
        texts.push((
            i,
            cells.iter().map(|(k, v)| (k.clone(), v.text())).collect(),
        ));
    }
    texts
}

/// The JSON path of an intake cell.
fn json_path(cell: intake::Cell) -> String {
    match cell {
        intake::Cell::Galaxy => "galaxy".to_owned(),
        intake::Cell::NewGalaxy(column) => format!("new_galaxy.{column}"),
        intake::Cell::NewGalaxyConfirmed => intake::CONFIRM_COLUMN.to_owned(),
        intake::Cell::Measurement(i, column) => format!("measurements[{i}].{column}"),
        intake::Cell::Note => "note".to_owned(),
    }
}

/// `GET /api/v1/submissions/{id}`: the state of one submission. Its submitter, reviewers and
/// admins see it; to anyone else it does not exist (404).
#[utoipa::path(
    get,
    path = "/api/v1/submissions/{id}",
    tag = "submissions",
    params(("id" = i64, Path, description = "The submission's key")),
    responses(
        (status = 200, description = "The submission", body = SubmissionStatus),
        (status = 401, description = "No valid token", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such submission visible to the caller", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn status(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
) -> ApiResult<axum::Json<SubmissionStatus>> {
    let not_found = || {
        AppError::not_found_saying(format!(
            "There is no submission {} that you may see.",
            id.chars().take(20).collect::<String>()
        ))
    };
    let (account_id, role) = match &principal {
        Principal::Token(t) => (t.account_id, t.role),
        Principal::Session(s) => (s.account_id, s.role),
        Principal::Anonymous | Principal::BadToken => {
            return Err(AppError::not_logged_in("This endpoint needs an API token."));
        }
    };
    let id_number = id.parse::<i64>().map_err(|_| not_found())?;
    let s = submissions::find(&state.pool, id_number)
        .await?
        .filter(|s| s.account_id == Some(account_id) || role.includes(Role::Reviewer))
        .ok_or_else(not_found)?;
    Ok(axum::Json(SubmissionStatus {
        submission_id: s.submission_id,
        state: s.state,
        source: s.source,
        created_at: s.created_at,
        galaxy_id: s.galaxy_id,
        galaxy_name: s.galaxy_name,
        galaxy_slug: s.galaxy_slug,
        n_measurements: s.n_measurements,
        note: s.note,
    }))
}
