//! Planning observations: for a list of candidate hosts not yet observed, the black-hole mass,
//! the radius and angular size of the sphere of influence that the catalog's default
//! relations predict, and the probability that an instrument of a given resolution resolves
//! it, P(θ_infl/θ_res ≥ threshold); the candidates ranked by it (docs/methods.md §4.9).
//! And the check of those probabilities on the catalog's own galaxies ([`reliability`]).
//!
//! ```text
//! per candidate, among the default relations its values allow (M–σ, M_BH–M_bulge, M_BH–L in
//! its band; σ is always needed for r_infl = G M/σ²): the one with the smallest √V of
//! log θ_infl (fit::plan::predict_theta);
//! P(resolved) = Φ((log θ̂_infl − log(threshold · θ_res)) / √V)     per resolution
//! rows ranked by P at the first resolution (highest first), ties and rows without P by name
//! ```
//!
//! The candidate's σ is taken as σ_e (the default fits' definition, docs/methods.md §3.3), its
//! bulge mass as photometric unless it says otherwise, and its errors of σ, bulge mass and
//! luminosity as excluding the distance's error, which enters once through the distance.

use std::collections::HashMap;
use std::sync::Arc;
use std::time::Duration;

use serde::{Deserialize, Serialize};

use super::{Catalog, FitOutcome, REQUEST_WAIT, Relation, SampleFilter, citation};
use crate::astro::SphereOfInfluence;
use crate::astro::constants::{ARCSEC_PER_RADIAN, G_PC_KM2_S2_PER_MSUN};
use crate::catalog::model::BulgeMassMethod;
use crate::error::{AppError, AppResult};
use crate::fit::plan::{
    HostInput, LogDistance, LogPrediction, RelationTerms, SoiScale, ThetaPrediction, p_resolved,
    predict_mass, predict_measured_log_theta, predict_theta, probability_at_least,
};
use crate::fit::{Method, Shape};
use crate::units::{Entry, Quantity, Scale, parse_entry, parse_linear};

/// Most candidates one plan takes (a file or an API batch).
pub const MAX_CANDIDATES: usize = 2_000;
/// Most resolutions one plan compares.
pub const MAX_RESOLUTIONS: usize = 8;
/// Largest resolution accepted, arcsec.
pub const MAX_RESOLUTION_ARCSEC: f64 = 100.0;
/// Longest resolution label, characters.
pub const MAX_LABEL_CHARS: usize = 40;
/// Longest candidate name, characters.
pub const MAX_NAME_CHARS: usize = 80;
/// Largest threshold θ_infl/θ_res accepted (the catalog's own check takes the same range).
pub const MAX_THRESHOLD: f64 = 100.0;

/// The columns a candidate file may have, in the order a template file shows them. `name`
/// and `distance_mpc` are required; a bulge mass is given either as `log_bulge_mass` (with
/// `log_bulge_mass_err_dex`) or as `bulge_mass` as the catalog reads it (`5e10 ± 1e10`,
/// `log 10.7 ± 0.1`); a luminosity likewise, with its `band`.
pub const CANDIDATE_COLUMNS: [&str; 14] = [
    "name",
    "sigma_km_s",
    "sigma_err_km_s",
    "log_bulge_mass",
    "log_bulge_mass_err_dex",
    "bulge_mass",
    "bulge_mass_method",
    "log_luminosity",
    "log_luminosity_err_dex",
    "luminosity",
    "band",
    "distance_mpc",
    "distance_err_mpc",
    "note",
];

/// The text a candidate without σ carries instead of a sphere of influence.
pub const SIGMA_NEEDED: &str = "σ is needed for the sphere of influence.";

/// A log10 value with its error in dex.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LogValue {
    /// log10 of the value in its unit.
    pub log_value: f64,
    /// Its error, dex.
    pub err_dex: f64,
}

impl LogValue {
    fn of(entry: &Entry) -> LogValue {
        LogValue {
            log_value: entry.log_value,
            err_dex: entry.err_dex,
        }
    }
}

/// One candidate host, as read.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Candidate {
    /// Its name as typed (trimmed).
    pub name: String,
    /// log10 σ_e/(km/s) and its error.
    pub sigma: Option<LogValue>,
    /// log10 M_bulge/M☉ at `distance_mpc` and its error without the distance's.
    pub bulge_mass: Option<LogValue>,
    /// How the bulge mass was obtained: photometric (∝ D², the default) or dynamical (∝ D).
    pub bulge_mass_method: BulgeMassMethod,
    /// log10 L_bulge/L☉ of `band` at `distance_mpc` and its error without the distance's.
    pub luminosity: Option<LogValue>,
    /// The luminosity's band.
    pub band: Option<String>,
    /// Distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc (0 when not given).
    pub distance_err_mpc: f64,
}

/// A candidate row that cannot be read: where, which column, what to type instead.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, thiserror::Error)]
#[error("Line {line}{}, column “{column}”: {message}", name_part(.name))]
pub struct RowError {
    /// Line in the file (the header is line 1); for a JSON batch, the item's number from 1.
    pub line: u64,
    /// The candidate's name as typed, when the row has one.
    pub name: String,
    /// The column at fault.
    pub column: String,
    /// One sentence: what is wrong and what to type instead.
    pub message: String,
}

fn name_part(name: &str) -> String {
    if name.is_empty() {
        String::new()
    } else {
        format!(" (“{name}”)")
    }
}

/// A cell of a JSON batch: a number or the text a file would hold.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum Cell {
    /// A number.
    Number(f64),
    /// Text, read as the file's cell would be.
    Text(String),
}

impl Cell {
    fn text(&self) -> String {
        match self {
            Cell::Number(v) => v.to_string(),
            Cell::Text(t) => t.trim().to_owned(),
        }
    }
}

/// One candidate of a JSON batch: the file's columns ([`CANDIDATE_COLUMNS`]) as fields, each
/// a number or text; absent fields are empty cells.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CandidateRecord {
    /// The candidate's name.
    pub name: Option<Cell>,
    /// σ_e, km/s (may carry its error: `210 ± 10`).
    pub sigma_km_s: Option<Cell>,
    /// σ's 1σ error, km/s.
    pub sigma_err_km_s: Option<Cell>,
    /// log10 M_bulge/M☉.
    pub log_bulge_mass: Option<Cell>,
    /// Its error, dex.
    pub log_bulge_mass_err_dex: Option<Cell>,
    /// The bulge mass as the catalog reads it (`5e10 ± 1e10`, `log 10.7 ± 0.1`).
    pub bulge_mass: Option<Cell>,
    /// `photometric` (default) or `dynamical`.
    pub bulge_mass_method: Option<Cell>,
    /// log10 L_bulge/L☉ of the band.
    pub log_luminosity: Option<Cell>,
    /// Its error, dex.
    pub log_luminosity_err_dex: Option<Cell>,
    /// The luminosity as the catalog reads it.
    pub luminosity: Option<Cell>,
    /// The luminosity's band.
    pub band: Option<Cell>,
    /// Distance, Mpc (may carry its error: `18 ± 1.5`).
    pub distance_mpc: Option<Cell>,
    /// The distance's 1σ error, Mpc.
    pub distance_err_mpc: Option<Cell>,
    /// Free text, ignored.
    pub note: Option<Cell>,
}

impl CandidateRecord {
    /// The record's cells by column name ("" when absent).
    fn cells(&self) -> HashMap<&'static str, String> {
        let all = [
            ("name", &self.name),
            ("sigma_km_s", &self.sigma_km_s),
            ("sigma_err_km_s", &self.sigma_err_km_s),
            ("log_bulge_mass", &self.log_bulge_mass),
            ("log_bulge_mass_err_dex", &self.log_bulge_mass_err_dex),
            ("bulge_mass", &self.bulge_mass),
            ("bulge_mass_method", &self.bulge_mass_method),
            ("log_luminosity", &self.log_luminosity),
            ("log_luminosity_err_dex", &self.log_luminosity_err_dex),
            ("luminosity", &self.luminosity),
            ("band", &self.band),
            ("distance_mpc", &self.distance_mpc),
            ("distance_err_mpc", &self.distance_err_mpc),
            ("note", &self.note),
        ];
        all.into_iter()
            .map(|(k, v)| (k, v.as_ref().map(Cell::text).unwrap_or_default()))
            .collect()
    }
}

/// Reads a candidate file: CSV with a header row naming columns of [`CANDIDATE_COLUMNS`]
/// (any order; `name` and `distance_mpc` required).
///
/// # Errors
/// Every row at fault (and a faulty header), each with its line, the candidate's name, the
/// column and what to type instead; an empty file or more than [`MAX_CANDIDATES`] rows.
pub fn read_candidates(text: &str) -> Result<Vec<Candidate>, Vec<RowError>> {
    let header_error = |column: &str, message: String| {
        vec![RowError {
            line: 1,
            name: String::new(),
            column: column.to_owned(),
            message,
        }]
    };
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .flexible(true)
        .from_reader(text.trim_start_matches('\u{feff}').as_bytes());
    let headers: Vec<String> = match reader.headers() {
        Ok(h) => h.iter().map(|c| c.trim().to_lowercase()).collect(),
        Err(e) => return Err(header_error("", format!("The header cannot be read: {e}."))),
    };
    let unknown: Vec<&String> = headers
        .iter()
        .filter(|h| !CANDIDATE_COLUMNS.contains(&h.as_str()))
        .collect();
    if let Some(first) = unknown.first() {
        return Err(header_error(
            first,
            format!(
                "There is no column “{}”; the columns are {}.",
                first.chars().take(40).collect::<String>(),
                CANDIDATE_COLUMNS.join(", ")
            ),
        ));
    }
    for required in ["name", "distance_mpc"] {
        if !headers.iter().any(|h| h == required) {
            return Err(header_error(
                required,
                format!(
                    "The header has no “{required}” column; the first line names the columns, such as name,sigma_km_s,sigma_err_km_s,distance_mpc,distance_err_mpc."
                ),
            ));
        }
    }
    let mut candidates = Vec::new();
    let mut faults = Vec::new();
    for (index, record) in reader.records().enumerate() {
        let line = record
            .as_ref()
            .ok()
            .and_then(|r| r.position().map(csv::Position::line))
            .unwrap_or(index as u64 + 2);
        let record = match record {
            Ok(r) => r,
            Err(e) => {
                faults.push(RowError {
                    line,
                    name: String::new(),
                    column: String::new(),
                    message: format!("The row cannot be read as CSV: {e}."),
                });
                continue;
            }
        };
        if record.iter().all(str::is_empty) {
            continue;
        }
        if record.len() > headers.len() {
            faults.push(RowError {
                line,
                name: record.get(0).unwrap_or("").chars().take(40).collect(),
                column: String::new(),
                message: format!(
                    "The row has {} cells but the header names {} columns; put quotes around a cell that holds a comma.",
                    record.len(),
                    headers.len()
                ),
            });
            continue;
        }
        if candidates.len() + faults.len() >= MAX_CANDIDATES {
            return Err(vec![RowError {
                line,
                name: String::new(),
                column: String::new(),
                message: format!(
                    "A plan takes at most {MAX_CANDIDATES} candidates; split the file."
                ),
            }]);
        }
        let cells: HashMap<&str, String> = headers
            .iter()
            .zip(record.iter())
            .filter_map(|(h, v)| {
                CANDIDATE_COLUMNS
                    .iter()
                    .find(|c| **c == h)
                    .map(|c| (*c, v.to_owned()))
            })
            .collect();
        match read_cells(&cells) {
            Ok(c) => candidates.push(c),
            Err(mut row) => {
                for f in &mut row {
                    f.line = line;
                }
                faults.extend(row);
            }
        }
    }
    finish(candidates, faults)
}

/// Reads a JSON batch of candidates with the rules of [`read_candidates`]; `line` of a fault
/// is the item's number from 1.
///
/// # Errors
/// As [`read_candidates`].
pub fn read_candidate_records(
    records: &[CandidateRecord],
) -> Result<Vec<Candidate>, Vec<RowError>> {
    if records.len() > MAX_CANDIDATES {
        return Err(vec![RowError {
            line: 0,
            name: String::new(),
            column: String::new(),
            message: format!("A plan takes at most {MAX_CANDIDATES} candidates; send fewer."),
        }]);
    }
    let mut candidates = Vec::new();
    let mut faults = Vec::new();
    for (index, record) in records.iter().enumerate() {
        let cells = record.cells();
        let cells: HashMap<&str, String> = cells.into_iter().collect();
        match read_cells(&cells) {
            Ok(c) => candidates.push(c),
            Err(mut row) => {
                for f in &mut row {
                    f.line = index as u64 + 1;
                }
                faults.extend(row);
            }
        }
    }
    finish(candidates, faults)
}

fn finish(
    candidates: Vec<Candidate>,
    faults: Vec<RowError>,
) -> Result<Vec<Candidate>, Vec<RowError>> {
    if !faults.is_empty() {
        return Err(faults);
    }
    if candidates.is_empty() {
        return Err(vec![RowError {
            line: 2,
            name: String::new(),
            column: String::new(),
            message: "There are no candidates; give one row per candidate below the header."
                .to_owned(),
        }]);
    }
    Ok(candidates)
}

/// A value and its separate error column read together by the catalog's grammar
/// (`value ± error`), so that the error is converted to dex as every door converts it.
fn with_error(
    value: &str,
    error: &str,
    read: impl Fn(&str) -> Result<Entry, String>,
    value_column: &'static str,
    error_column: &'static str,
) -> Result<Option<Entry>, (&'static str, String)> {
    if value.is_empty() {
        if error.is_empty() {
            return Ok(None);
        }
        return Err((
            value_column,
            format!(
                "“{error_column}” is given without “{value_column}”; give the value too or leave both empty."
            ),
        ));
    }
    let alone = read(value).map_err(|m| (value_column, m))?;
    if error.is_empty() {
        return Ok(Some(alone));
    }
    if alone.errors_given {
        return Err((
            error_column,
            format!(
                "“{value_column}” already carries an error; give it once, there or in “{error_column}”."
            ),
        ));
    }
    match error.parse::<f64>() {
        Ok(e) if e.is_finite() && e >= 0.0 => {}
        _ => {
            return Err((
                error_column,
                format!(
                    "Type the error as a number of zero or more, such as 0.1, not “{}”.",
                    shown(error)
                ),
            ));
        }
    }
    read(&format!("{value} ± {error}"))
        .map(Some)
        .map_err(|m| (error_column, m))
}

fn shown(text: &str) -> String {
    text.chars().take(40).collect()
}

/// Reads one candidate's cells; every cell at fault is named.
fn read_cells(cells: &HashMap<&str, String>) -> Result<Candidate, Vec<RowError>> {
    let cell = |c: &str| cells.get(c).map(String::as_str).unwrap_or("");
    let name = cell("name").to_owned();
    let mut faults: Vec<(&'static str, String)> = Vec::new();
    if name.is_empty() {
        faults.push(("name", "Give the candidate a name.".to_owned()));
    } else if name.chars().count() > MAX_NAME_CHARS || name.chars().any(char::is_control) {
        faults.push((
            "name",
            format!(
                "Type a name of at most {MAX_NAME_CHARS} characters without control characters."
            ),
        ));
    }
    let entry = |q: Quantity, scale: Scale| {
        move |t: &str| {
            parse_entry(t, q, scale)
                .map_err(|e| e.to_string())
                .and_then(|e| {
                    if e.upper_limit {
                        Err(format!(
                            "The {q} cannot be an upper limit here; give a value."
                        ))
                    } else {
                        Ok(e)
                    }
                })
        }
    };
    let mut keep = |r: Result<Option<Entry>, (&'static str, String)>| match r {
        Ok(v) => v,
        Err(f) => {
            faults.push(f);
            None
        }
    };
    let sigma = keep(with_error(
        cell("sigma_km_s"),
        cell("sigma_err_km_s"),
        entry(Quantity::VelocityDispersion, Scale::Linear),
        "sigma_km_s",
        "sigma_err_km_s",
    ));
    let log_mb = keep(with_error(
        cell("log_bulge_mass"),
        cell("log_bulge_mass_err_dex"),
        entry(Quantity::BulgeMass, Scale::Log10),
        "log_bulge_mass",
        "log_bulge_mass_err_dex",
    ));
    let typed_mb = keep(with_error(
        cell("bulge_mass"),
        "",
        entry(Quantity::BulgeMass, Scale::Auto),
        "bulge_mass",
        "bulge_mass",
    ));
    let log_l = keep(with_error(
        cell("log_luminosity"),
        cell("log_luminosity_err_dex"),
        entry(Quantity::BulgeLuminosity, Scale::Log10),
        "log_luminosity",
        "log_luminosity_err_dex",
    ));
    let typed_l = keep(with_error(
        cell("luminosity"),
        "",
        entry(Quantity::BulgeLuminosity, Scale::Auto),
        "luminosity",
        "luminosity",
    ));
    let bulge_mass = match (log_mb, typed_mb) {
        (Some(_), Some(_)) => {
            faults.push((
                "bulge_mass",
                "Give the bulge mass once: in “log_bulge_mass” or in “bulge_mass”.".to_owned(),
            ));
            None
        }
        (a, b) => a.or(b),
    };
    let luminosity = match (log_l, typed_l) {
        (Some(_), Some(_)) => {
            faults.push((
                "luminosity",
                "Give the luminosity once: in “log_luminosity” or in “luminosity”.".to_owned(),
            ));
            None
        }
        (a, b) => a.or(b),
    };
    let bulge_mass_method = match cell("bulge_mass_method") {
        "" => BulgeMassMethod::Photometric,
        word => match word.to_lowercase().parse::<BulgeMassMethod>() {
            Ok(m) => m,
            Err(_) => {
                faults.push((
                    "bulge_mass_method",
                    format!("Type photometric or dynamical, not “{}”.", shown(word)),
                ));
                BulgeMassMethod::Photometric
            }
        },
    };
    let band = match cell("band") {
        "" => {
            if luminosity.is_some() {
                faults.push((
                    "band",
                    "Give the band of the luminosity, such as K or V.".to_owned(),
                ));
            }
            None
        }
        b => match crate::catalog::intake::check_band(b) {
            Ok(()) => Some(b.to_owned()),
            Err(m) => {
                faults.push(("band", format!("{m}.")));
                None
            }
        },
    };
    let distance = match (cell("distance_mpc"), cell("distance_err_mpc")) {
        ("", _) => {
            faults.push((
                "distance_mpc",
                "Give the distance in Mpc, such as 18.5; its error goes in “distance_err_mpc”."
                    .to_owned(),
            ));
            None
        }
        (d, "") => match parse_linear(d, Quantity::Distance) {
            Ok(e) => Some((e.value, e.err)),
            Err(e) => {
                faults.push(("distance_mpc", e.to_string()));
                None
            }
        },
        (d, e) => match parse_linear(d, Quantity::Distance) {
            Ok(alone) if alone.errors_given => {
                faults.push((
                    "distance_err_mpc",
                    "“distance_mpc” already carries an error; give it once, there or in “distance_err_mpc”.".to_owned(),
                ));
                None
            }
            Ok(_) => match parse_linear(&format!("{d} ± {e}"), Quantity::Distance) {
                Ok(v) => Some((v.value, v.err)),
                Err(m) => {
                    faults.push(("distance_err_mpc", m.to_string()));
                    None
                }
            },
            Err(m) => {
                faults.push(("distance_mpc", m.to_string()));
                None
            }
        },
    };
    if sigma.is_none()
        && bulge_mass.is_none()
        && luminosity.is_none()
        && !faults.iter().any(|(c, _)| {
            matches!(
                *c,
                "sigma_km_s"
                    | "sigma_err_km_s"
                    | "log_bulge_mass"
                    | "bulge_mass"
                    | "log_luminosity"
                    | "luminosity"
            )
        })
    {
        faults.push((
            "sigma_km_s",
            "Give σ in km/s (needed for the sphere of influence), and a bulge mass or a luminosity if known.".to_owned(),
        ));
    }
    let Some((distance_mpc, distance_err_mpc)) = distance.filter(|_| faults.is_empty()) else {
        let row_name = shown(&name);
        return Err(faults
            .into_iter()
            .map(|(column, message)| RowError {
                line: 0,
                name: row_name.clone(),
                column: column.to_owned(),
                message,
            })
            .collect());
    };
    Ok(Candidate {
        name,
        sigma: sigma.as_ref().map(LogValue::of),
        bulge_mass: bulge_mass.as_ref().map(LogValue::of),
        bulge_mass_method,
        luminosity: luminosity.as_ref().map(LogValue::of),
        band,
        distance_mpc,
        distance_err_mpc,
    })
}

/// An instrument's resolution, with the label a plan shows for it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Resolution {
    /// 1–40 characters, e.g. "AO K band".
    pub label: String,
    /// θ_res, arcsec, 0 < θ_res ≤ 100.
    pub arcsec: f64,
}

impl Resolution {
    /// A checked resolution.
    ///
    /// # Errors
    /// One sentence saying what to type instead.
    pub fn new(label: &str, arcsec: f64) -> Result<Resolution, String> {
        let label = label.trim();
        let n = label.chars().count();
        if n == 0 || n > MAX_LABEL_CHARS || label.chars().any(char::is_control) {
            return Err(format!(
                "Give the resolution a label of 1 to {MAX_LABEL_CHARS} characters, such as “AO K band”."
            ));
        }
        if !(arcsec.is_finite() && arcsec > 0.0 && arcsec <= MAX_RESOLUTION_ARCSEC) {
            return Err(format!(
                "Type the resolution in arcsec, a number above 0 and at most {MAX_RESOLUTION_ARCSEC}, such as 0.1."
            ));
        }
        Ok(Resolution {
            label: label.to_owned(),
            arcsec,
        })
    }

    /// [`Resolution::new`] from the typed number.
    ///
    /// # Errors
    /// As [`Resolution::new`].
    pub fn read(label: &str, arcsec_text: &str) -> Result<Resolution, String> {
        let arcsec = arcsec_text
            .trim()
            .trim_end_matches('″')
            .trim_end_matches('"')
            .trim_end_matches("arcsec")
            .trim()
            .parse::<f64>()
            .unwrap_or(f64::NAN);
        Resolution::new(label, arcsec)
    }
}

/// Checks a threshold on θ_infl/θ_res: finite, above 0, at most [`MAX_THRESHOLD`].
///
/// # Errors
/// One sentence saying what to type instead.
pub fn check_threshold(threshold: f64) -> Result<f64, String> {
    if threshold.is_finite() && threshold > 0.0 && threshold <= MAX_THRESHOLD {
        Ok(threshold)
    } else {
        Err(format!(
            "Type the threshold on θ_infl/θ_res as a number above 0 and at most {MAX_THRESHOLD}, such as 1."
        ))
    }
}

/// The constants of the sphere of influence from the physics module (docs/methods.md §3.1,
/// §5): G = 4.30091727e-3 pc M☉⁻¹ (km/s)², 206 264.806″ per radian.
#[must_use]
pub fn soi_scale() -> SoiScale {
    SoiScale::new(G_PC_KM2_S2_PER_MSUN, ARCSEC_PER_RADIAN)
}

/// One default relation as a plan used it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanFit {
    /// The relation (serialised as its slug).
    #[serde(serialize_with = "slug")]
    pub relation: Relation,
    /// Its fit identifier (`relations::citation`), when there is a fit.
    pub fit_id: Option<String>,
    /// The catalog version the fit was made at.
    pub catalog_version: Option<i64>,
    /// Objects in the fit.
    pub n: usize,
    /// The fitted terms, when there is a usable fit.
    pub terms: Option<RelationTerms>,
    /// Why the relation could not be used (no fit, still computing), one sentence.
    pub problem: Option<String>,
}

fn slug<S: serde::Serializer>(relation: &Relation, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&relation.slug())
}

fn optional_slug<S: serde::Serializer>(
    relation: &Option<Relation>,
    s: S,
) -> Result<S::Ok, S::Error> {
    match relation {
        Some(r) => s.serialize_some(&r.slug()),
        None => s.serialize_none(),
    }
}

/// One relation considered for a candidate: the spread of its prediction.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Considered {
    /// The relation (serialised as its slug).
    #[serde(serialize_with = "slug")]
    pub relation: Relation,
    /// √V of log θ_infl (with σ) or of log M_BH (without), dex.
    pub sd_dex: f64,
}

/// A candidate's row of a plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanRow {
    /// Rank from 1.
    pub rank: usize,
    /// The candidate as read.
    pub candidate: Candidate,
    /// The relation used, when one could be (serialised as its slug).
    #[serde(serialize_with = "optional_slug")]
    pub relation: Option<Relation>,
    /// Every relation the candidate's values allowed, with its spread (the smallest is used).
    pub considered: Vec<Considered>,
    /// Predicted log M_BH (also without σ).
    pub mass: Option<LogPrediction>,
    /// Predicted mass, r_infl and θ_infl, with σ.
    pub prediction: Option<ThetaPrediction>,
    /// P(θ_infl/θ_res ≥ threshold) at each resolution of the plan, in its order; None without
    /// a prediction of θ_infl.
    pub p_resolved: Vec<Option<f64>>,
    /// Why something is missing (e.g. [`SIGMA_NEEDED`]), one sentence.
    pub note: Option<String>,
}

/// A ranked plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Plan {
    /// The catalog version read.
    pub catalog_version: i64,
    /// θ_infl/θ_res at or above which a sphere counts as resolved.
    pub threshold: f64,
    /// The resolutions, in the order given; P at the first ranks the rows.
    pub resolutions: Vec<Resolution>,
    /// The default relations and their fits.
    pub fits: Vec<PlanFit>,
    /// One row per candidate, ranked.
    pub rows: Vec<PlanRow>,
    /// A catalog version whose fits are still being computed (older fits are used meanwhile).
    pub computing: Option<i64>,
}

/// The default relations for planning: M–σ, M_BH–M_bulge and M_BH–L of each band.
fn planning_relations(bands: &[String]) -> Vec<Relation> {
    let mut out = vec![Relation::MSigma, Relation::MBulge];
    out.extend(bands.iter().map(|b| Relation::Luminosity(b.clone())));
    out
}

/// The default fit of `relation` (structural, whole sample, default pivots), waiting at most
/// `wait` (`None`: as long as it takes); an older version's while it is computed, with the
/// version being computed.
async fn default_fit(
    catalog: &Catalog,
    relation: &Relation,
    wait: Option<Duration>,
) -> AppResult<(Option<Arc<FitOutcome>>, Option<i64>)> {
    let pivots = (relation.default_pivot(), relation.default_pivot2());
    let choice = (
        relation,
        Method::Structural,
        &SampleFilter::default(),
        pivots,
    );
    Ok(match catalog.fitted_within(choice, wait).await? {
        Ok(outcome) => (Some(outcome), None),
        Err(key) => (catalog.fits.latest(&key), Some(key.catalog_version)),
    })
}

/// The plan of `candidates` at `resolutions` against the catalog's default relations (see the
/// module documentation for the choice and the ranking).
///
/// # Errors
/// [`AppError`] 400 for no resolution, too many, two with one label, or a threshold out of
/// range; when the catalog cannot be read or a fit task fails.
pub async fn plan(
    catalog: &Catalog,
    candidates: &[Candidate],
    resolutions: &[Resolution],
    threshold: f64,
) -> AppResult<Plan> {
    plan_within(
        catalog,
        candidates,
        resolutions,
        threshold,
        Some(REQUEST_WAIT),
    )
    .await
}

/// As [`plan`], waiting for each default fit at most `wait` (`None`: as long as it takes, for
/// the command line).
///
/// # Errors
/// As [`plan`].
pub async fn plan_within(
    catalog: &Catalog,
    candidates: &[Candidate],
    resolutions: &[Resolution],
    threshold: f64,
    wait: Option<Duration>,
) -> AppResult<Plan> {
    let threshold = check_threshold(threshold).map_err(AppError::bad_request)?;
    if resolutions.is_empty() || resolutions.len() > MAX_RESOLUTIONS {
        return Err(AppError::bad_request(format!(
            "Give 1 to {MAX_RESOLUTIONS} resolutions to plan for."
        )));
    }
    // The labels name the plan's columns, so each must be its own.
    if let Some((i, r)) = resolutions
        .iter()
        .enumerate()
        .find(|(i, r)| resolutions[..*i].iter().any(|o| o.label == r.label))
    {
        return Err(AppError::bad_request(format!(
            "Resolution {} has the label “{}” of an earlier one; give each resolution its own label.",
            i + 1,
            r.label
        )));
    }
    let catalog_version = catalog.rows().await.map_err(anyhow::Error::from)?.version;
    let bands = catalog.bands().await.map_err(anyhow::Error::from)?;
    let mut fits = Vec::new();
    let mut computing = None;
    for relation in planning_relations(&bands) {
        let (outcome, still) = default_fit(catalog, &relation, wait).await?;
        computing = computing.or(still);
        fits.push(plan_fit(catalog, relation, outcome.as_ref(), still).await);
    }
    let rows = rank(
        candidates
            .iter()
            .map(|c| plan_row(c, &fits, resolutions, threshold))
            .collect(),
    );
    Ok(Plan {
        catalog_version,
        threshold,
        resolutions: resolutions.to_vec(),
        fits,
        rows,
        computing,
    })
}

async fn plan_fit(
    catalog: &Catalog,
    relation: Relation,
    outcome: Option<&Arc<FitOutcome>>,
    computing: Option<i64>,
) -> PlanFit {
    let Some(outcome) = outcome else {
        return PlanFit {
            relation,
            fit_id: None,
            catalog_version: None,
            n: 0,
            terms: None,
            problem: Some(format!(
                "The fit of catalog version {} is being computed; ask again in a few seconds.",
                computing.unwrap_or_default()
            )),
        };
    };
    let (terms, problem) = match &outcome.fit {
        Ok(fit) => match RelationTerms::from_fit(fit) {
            Ok(t) => (Some(t), None),
            Err(e) => (None, Some(e.to_string())),
        },
        Err(e) => (None, Some(format!("No fit of this relation: {e}"))),
    };
    let fit_id = if terms.is_some() {
        Some(citation::cite(catalog, outcome).await)
    } else {
        None
    };
    PlanFit {
        relation,
        fit_id,
        catalog_version: Some(outcome.key.catalog_version),
        n: outcome.sample.points.len(),
        terms,
        problem,
    }
}

/// A candidate's row, before ranking (rank 0).
fn plan_row(
    candidate: &Candidate,
    fits: &[PlanFit],
    resolutions: &[Resolution],
    threshold: f64,
) -> PlanRow {
    let distance = LogDistance::from_mpc(candidate.distance_mpc, candidate.distance_err_mpc);
    let scale = soi_scale();
    let bulge_power = match candidate.bulge_mass_method {
        BulgeMassMethod::Photometric => 2.0,
        BulgeMassMethod::Dynamical => 1.0,
    };
    // (relation, host property and its distance power) the candidate's values allow.
    let mut options: Vec<(&PlanFit, LogValue, f64)> = Vec::new();
    for fit in fits {
        let host = match &fit.relation {
            Relation::MSigma => candidate.sigma.map(|s| (s, 0.0)),
            Relation::MBulge => candidate.bulge_mass.map(|b| (b, bulge_power)),
            Relation::Luminosity(band) => candidate
                .luminosity
                .filter(|_| {
                    candidate
                        .band
                        .as_deref()
                        .is_some_and(|b| b.eq_ignore_ascii_case(band))
                })
                .map(|l| (l, 2.0)),
            Relation::SigmaBulgePlane => None,
        };
        if let Some((value, power)) = host {
            options.push((fit, value, power));
        }
    }
    let mut row = PlanRow {
        rank: 0,
        candidate: candidate.clone(),
        relation: None,
        considered: Vec::new(),
        mass: None,
        prediction: None,
        p_resolved: vec![None; resolutions.len()],
        note: None,
    };
    let usable: Vec<_> = options
        .iter()
        .filter(|(f, _, _)| f.terms.is_some())
        .collect();
    if usable.is_empty() {
        row.note = Some(match options.first() {
            Some((f, _, _)) => f
                .problem
                .clone()
                .unwrap_or_else(|| "No relation could be used.".to_owned()),
            None => match &candidate.band {
                Some(b) if candidate.luminosity.is_some() => format!(
                    "The catalog has no M_BH–L relation in the {b} band; give σ or a bulge mass."
                ),
                _ => "No default relation takes this candidate's values; give σ.".to_owned(),
            },
        });
        return row;
    }
    if let Some(sigma) = candidate.sigma {
        let mut best: Option<(Relation, ThetaPrediction)> = None;
        for (fit, value, power) in &usable {
            let Some(terms) = fit.terms.as_ref() else {
                continue;
            };
            let host = if fit.relation == Relation::MSigma {
                HostInput::Sigma {
                    log_sigma: sigma.log_value,
                    err_dex: sigma.err_dex,
                }
            } else {
                HostInput::Photometric {
                    log_x: value.log_value,
                    err_dex: value.err_dex,
                    distance_power: *power,
                    log_sigma: sigma.log_value,
                    log_sigma_err_dex: sigma.err_dex,
                }
            };
            let Ok(pred) = predict_theta(terms, host, distance, scale) else {
                continue;
            };
            row.considered.push(Considered {
                relation: fit.relation.clone(),
                sd_dex: pred.log_theta_arcsec.sd_dex,
            });
            if best
                .as_ref()
                .is_none_or(|(_, b)| pred.log_theta_arcsec.sd_dex < b.log_theta_arcsec.sd_dex)
            {
                best = Some((fit.relation.clone(), pred));
            }
        }
        if let Some((relation, pred)) = best {
            row.relation = Some(relation);
            row.mass = Some(pred.log_mbh);
            row.p_resolved = resolutions
                .iter()
                .map(|r| Some(p_resolved(&pred, r.arcsec, threshold)))
                .collect();
            row.prediction = Some(pred);
        }
    } else {
        let mut best: Option<(Relation, LogPrediction)> = None;
        for (fit, value, power) in &usable {
            let Some(terms) = fit.terms.as_ref() else {
                continue;
            };
            let Ok(mass) = predict_mass(
                terms,
                value.log_value,
                value.err_dex,
                *power,
                distance.err_dex,
            ) else {
                continue;
            };
            row.considered.push(Considered {
                relation: fit.relation.clone(),
                sd_dex: mass.sd_dex,
            });
            if best.as_ref().is_none_or(|(_, b)| mass.sd_dex < b.sd_dex) {
                best = Some((fit.relation.clone(), mass));
            }
        }
        if let Some((relation, mass)) = best {
            row.relation = Some(relation);
            row.mass = Some(mass);
        }
        row.note = Some(SIGMA_NEEDED.to_owned());
    }
    row
}

/// Ranks rows by P at the first resolution (highest first); rows without it last; ties and
/// those by name.
fn rank(mut rows: Vec<PlanRow>) -> Vec<PlanRow> {
    let first = |r: &PlanRow| {
        r.p_resolved
            .first()
            .copied()
            .flatten()
            .filter(|p| p.is_finite())
    };
    rows.sort_by(|a, b| match (first(a), first(b)) {
        (Some(x), Some(y)) => y
            .total_cmp(&x)
            .then_with(|| a.candidate.name.cmp(&b.candidate.name)),
        (Some(_), None) => std::cmp::Ordering::Less,
        (None, Some(_)) => std::cmp::Ordering::Greater,
        (None, None) => a.candidate.name.cmp(&b.candidate.name),
    });
    for (i, r) in rows.iter_mut().enumerate() {
        r.rank = i + 1;
    }
    rows
}

/// Bins of predicted probability in the reliability table: [0, 0.2), …, [0.8, 1].
pub const RELIABILITY_BINS: usize = 5;

/// The verdict of a bin whose mean predicted P lies inside the observed fraction's 68 %
/// interval.
pub const WITHIN_ERROR: &str = "within error";
/// The verdict of a bin whose mean predicted P lies outside it.
pub const OUTSIDE_ERROR: &str = "outside";

/// One bin of the reliability table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReliabilityBin {
    /// Lower edge of predicted P (included).
    pub lo: f64,
    /// Upper edge (excluded, except 1 for the last bin).
    pub hi: f64,
    /// Galaxies whose predicted P falls in the bin.
    pub count: usize,
    /// How many of them the measurement resolved (θ_infl/θ_res ≥ threshold).
    pub resolved: usize,
    /// Mean predicted P of the bin's galaxies.
    pub mean_predicted: Option<f64>,
    /// Fraction resolved.
    pub observed_fraction: Option<f64>,
    /// Wilson 68.27 % interval of the fraction resolved.
    pub interval68: Option<(f64, f64)>,
    /// [`WITHIN_ERROR`] or [`OUTSIDE_ERROR`]; None for an empty bin.
    pub verdict: Option<&'static str>,
}

/// The reliability check of P(resolved) on the catalog's own galaxies.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Reliability {
    /// The catalog version of the M–σ fit used.
    pub catalog_version: i64,
    /// Its fit identifier.
    pub fit_id: Option<String>,
    /// θ_infl/θ_res at or above which a sphere counts as resolved.
    pub threshold: f64,
    /// The bins, [`RELIABILITY_BINS`] of them (empty when there is no fit).
    pub bins: Vec<ReliabilityBin>,
    /// Galaxies compared (the bins' counts add up to it).
    pub compared: usize,
    /// Galaxies of the M–σ sample left out: an upper limit, or no recorded resolution.
    pub left_out: usize,
    /// How each galaxy was left out of the fit: how many by a refit, how many by the one-step
    /// change (docs/methods.md §6.1).
    pub refitted: usize,
    /// Galaxies left out by the one-step change.
    pub one_step: usize,
    /// Why there is no table (no fit, computing), one sentence.
    pub problem: Option<String>,
    /// A catalog version whose fit or influence list is still being computed.
    pub computing: Option<i64>,
    /// How to read the table, one paragraph (see [`reading_of`]); None without bins.
    pub reading: Option<String>,
}

/// How to read a reliability table: whether its bins agree with their predictions, and if the
/// catalog's galaxies were resolved more often than predicted, why that is expected.
///
/// A catalog is not a random draw of candidates: it holds the masses that were measured, and
/// observers choose targets and instruments that resolve the sphere of influence (attempts that
/// did not are seldom published), so its galaxies are resolved more often than σ and distance
/// alone predict (docs/methods.md §4.9).
#[must_use]
pub fn reading_of(bins: &[ReliabilityBin]) -> Option<String> {
    let filled: Vec<&ReliabilityBin> = bins.iter().filter(|b| b.count > 0).collect();
    if filled.is_empty() {
        return None;
    }
    let outside: Vec<&&ReliabilityBin> = filled
        .iter()
        .filter(|b| b.verdict == Some(OUTSIDE_ERROR))
        .collect();
    let above = outside
        .iter()
        .filter(|b| b.observed_fraction > b.mean_predicted)
        .count();
    let below = outside.len() - above;
    let n = filled.len();
    let also = |k: usize, way: &str| {
        if k == 0 {
            String::new()
        } else {
            format!(" (and in {k} {way})")
        }
    };
    Some(if outside.is_empty() {
        format!(
            "Every one of the {n} filled bins agrees with its prediction within error: on this catalog the planner's probabilities can be taken at face value."
        )
    } else if above >= below {
        format!(
            "In {above} of {n} filled bins the catalog's galaxies were resolved more often than predicted{}. That is expected of a catalog: it holds the masses that were measured, and observers choose targets and instruments that resolve the sphere of influence (attempts that did not are seldom published), so measured galaxies are resolved more often than their σ and distance alone predict. Read P(resolved) as the chance before such a choice; a bin resolved less often than predicted would mean the planner is optimistic there.",
            also(below, "less often")
        )
    } else {
        format!(
            "In {below} of {n} filled bins the catalog's galaxies were resolved less often than predicted{}: on this catalog the planner is optimistic, so read its probabilities as upper bounds and check the relation's scatter and the recorded resolutions.",
            also(above, "more often")
        )
    })
}

/// The Wilson score interval of k successes in n at z standard deviations (z = 1: 68.27 %).
///
/// ```text
/// centre = (k + z²/2)/(n + z²),  half = z √(k(n − k)/n + z²/4) / (n + z²)
/// ```
/// (Wilson 1927, JASA 22, 209.)
#[must_use]
pub fn wilson_interval(k: usize, n: usize, z: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let (k, n) = (k as f64, n as f64);
    let z2 = z * z;
    let centre = (k + z2 / 2.0) / (n + z2);
    let half = z * (k * (n - k) / n + z2 / 4.0).sqrt() / (n + z2);
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

/// Bins (predicted P, measured verdict) pairs into [`RELIABILITY_BINS`] bins.
#[must_use]
pub fn bin_reliability(pairs: &[(f64, bool)]) -> Vec<ReliabilityBin> {
    let bins = RELIABILITY_BINS as f64;
    let width = 1.0 / bins;
    (0..RELIABILITY_BINS)
        .map(|i| {
            // i/5 rather than i · 0.2, so the edges read 0.6, not 0.6000000000000001.
            let (lo, hi) = (i as f64 / bins, (i + 1) as f64 / bins);
            let last = i + 1 == RELIABILITY_BINS;
            let inside: Vec<&(f64, bool)> = pairs
                .iter()
                .filter(|(p, _)| {
                    let b = ((p / width).floor() as usize).min(RELIABILITY_BINS - 1);
                    b == i || (last && *p >= 1.0)
                })
                .collect();
            let count = inside.len();
            let resolved = inside.iter().filter(|(_, r)| *r).count();
            if count == 0 {
                return ReliabilityBin {
                    lo,
                    hi,
                    count,
                    resolved,
                    mean_predicted: None,
                    observed_fraction: None,
                    interval68: None,
                    verdict: None,
                };
            }
            let mean = inside.iter().map(|(p, _)| p).sum::<f64>() / count as f64;
            let interval = wilson_interval(resolved, count, 1.0);
            ReliabilityBin {
                lo,
                hi,
                count,
                resolved,
                mean_predicted: Some(mean),
                observed_fraction: Some(resolved as f64 / count as f64),
                interval68: Some(interval),
                verdict: Some(if (interval.0..=interval.1).contains(&mean) {
                    WITHIN_ERROR
                } else {
                    OUTSIDE_ERROR
                }),
            }
        })
        .collect()
}

/// The cache's name of a reliability table made from a fit (with its threshold's bits).
fn reliability_name(threshold: f64) -> String {
    format!("planning reliability {}", threshold.to_bits())
}

/// The reliability check: for each galaxy of the default M–σ sample with a measured (not
/// limit) dynamical mass, a recorded resolution, σ and distance, P(resolved) predicted from σ
/// and the distance alone with the galaxy left out of the M–σ fit, against the verdict of its
/// measurement (θ_infl from the measured mass / recorded resolution ≥ threshold,
/// `astro::SphereOfInfluence`), binned by predicted P.
///
/// The galaxy is left out by the fit's leave-one-out list (`FitCache::influence_within`,
/// `fit::leave_one_out`): exact refits up to 300 objects, the one-step change above
/// (docs/methods.md §6.1), so the check costs O(N) at any catalog size; the left-out fit keeps
/// the full fit's covariance. What is predicted is the measured ratio, so its variance adds
/// the mass's own measurement error (`fit::plan::predict_measured_log_theta`). Made once per
/// fit at the catalog's own threshold (`FitCache::made_from`), per request at any other.
///
/// # Errors
/// [`AppError`] 400 for a threshold out of range; when the catalog cannot be read or a task
/// fails.
pub async fn reliability(catalog: &Catalog, threshold: f64) -> AppResult<Reliability> {
    reliability_within(catalog, threshold, Some(REQUEST_WAIT)).await
}

/// As [`reliability`], waiting for the fit and its leave-one-out list at most `wait` each
/// (`None`: as long as they take, for the command line).
///
/// # Errors
/// As [`reliability`].
pub async fn reliability_within(
    catalog: &Catalog,
    threshold: f64,
    wait: Option<Duration>,
) -> AppResult<Reliability> {
    let threshold = check_threshold(threshold).map_err(AppError::bad_request)?;
    let relation = Relation::MSigma;
    let (outcome, computing) = default_fit(catalog, &relation, wait).await?;
    let empty = |version: i64, problem: String, computing: Option<i64>| Reliability {
        catalog_version: version,
        fit_id: None,
        threshold,
        bins: Vec::new(),
        compared: 0,
        left_out: 0,
        refitted: 0,
        one_step: 0,
        problem: Some(problem),
        computing,
        reading: None,
    };
    let Some(outcome) = outcome.filter(|_| computing.is_none()) else {
        let v = computing.unwrap_or_default();
        return Ok(empty(
            v,
            format!(
                "The M–σ fit of catalog version {v} is being computed; ask again in a few seconds."
            ),
            computing,
        ));
    };
    let version = outcome.key.catalog_version;
    if let Err(e) = &outcome.fit {
        return Ok(empty(version, format!("No M–σ fit: {e}"), None));
    }
    let Some(influence) = catalog.fits.influence_within(&outcome, wait).await? else {
        return Ok(empty(
            version,
            format!(
                "The leave-one-out list of catalog version {version} is being computed; ask again in a few seconds."
            ),
            Some(version),
        ));
    };
    let influence = match influence.as_ref() {
        Ok(list) => list.clone(),
        Err(e) => return Ok(empty(version, format!("No leave-one-out list: {e}"), None)),
    };
    let rows = catalog.rows().await.map_err(anyhow::Error::from)?;
    let fit_id = citation::cite(catalog, &outcome).await;
    let fits = catalog.fits.clone();
    // The catalog's own threshold is what most visitors ask for: kept per fit. Any other is
    // computed per request (O(N), no fit), so thresholds people type cannot fill the cache.
    let keep = threshold.to_bits() == catalog.soi_threshold.to_bits();
    let made = tokio::task::spawn_blocking(move || {
        let make = || reliability_of(&outcome, &influence, &rows.rows, threshold);
        if keep {
            fits.made_from(&outcome.key, &reliability_name(threshold), make)
        } else {
            Arc::new(make())
        }
    })
    .await
    .map_err(anyhow::Error::from)?;
    let mut table = made.as_ref().clone();
    table.fit_id = Some(fit_id);
    Ok(table)
}

/// The reliability table of one fit (see [`reliability`]).
fn reliability_of(
    outcome: &FitOutcome,
    influence: &[crate::fit::Influence],
    rows: &[crate::catalog::relation_rows::RelationRow],
    threshold: f64,
) -> Reliability {
    let version = outcome.key.catalog_version;
    let mut table = Reliability {
        catalog_version: version,
        fit_id: None,
        threshold,
        bins: Vec::new(),
        compared: 0,
        left_out: 0,
        refitted: 0,
        one_step: 0,
        problem: None,
        computing: None,
        reading: None,
    };
    let Ok(fit) = &outcome.fit else {
        return table;
    };
    if fit.spec.shape != Shape::Line {
        table.problem = Some("The M–σ fit is not a straight line.".to_owned());
        return table;
    }
    let Ok(full) = RelationTerms::from_fit(fit) else {
        table.problem =
            Some("The M–σ fit has no covariance of its zero point and slope.".to_owned());
        return table;
    };
    let by_id: HashMap<i64, &crate::catalog::relation_rows::RelationRow> =
        rows.iter().map(|r| (r.galaxy_id, r)).collect();
    let shifts: HashMap<usize, &crate::fit::Influence> =
        influence.iter().map(|i| (i.index, i)).collect();
    let scale = soi_scale();
    let mut pairs = Vec::new();
    for (index, (point, member)) in outcome
        .sample
        .points
        .iter()
        .zip(&outcome.sample.members)
        .enumerate()
    {
        let row = by_id.get(&member.galaxy_id);
        let measured = row.and_then(|row| {
            let resolution = row.mbh_resolution_arcsec?;
            let sigma_err = row.sigma_err_dex?;
            if point.upper_limit {
                return None;
            }
            let soi = SphereOfInfluence::from_log_mbh(
                point.y,
                10f64.powf(point.x),
                row.distance_mpc,
                Some(resolution),
                threshold,
            )
            .ok()?;
            Some((row, resolution, sigma_err, soi.resolved?))
        });
        let (Some((row, resolution, sigma_err, resolved)), Some(shift)) =
            (measured, shifts.get(&index))
        else {
            table.left_out += 1;
            continue;
        };
        let terms = RelationTerms {
            alpha: full.alpha + shift.d_alpha,
            beta: full.beta + shift.d_beta,
            scatter_dex: (full.scatter_dex + shift.d_eps).max(0.0),
            ..full
        };
        let distance = LogDistance::from_mpc(row.distance_mpc, row.distance_err_mpc);
        let Ok(pred) = predict_measured_log_theta(
            &terms,
            point.x,
            sigma_err,
            row.mbh_err_dex.unwrap_or(0.0),
            distance,
            scale,
        ) else {
            table.left_out += 1;
            continue;
        };
        let p = p_of(&pred, resolution, threshold);
        if shift.exact {
            table.refitted += 1;
        } else {
            table.one_step += 1;
        }
        pairs.push((p, resolved));
    }
    table.compared = pairs.len();
    table.bins = bin_reliability(&pairs);
    table.reading = reading_of(&table.bins);
    table
}

/// P(log θ ≥ log(threshold · θ_res)) for a normal prediction of log θ.
fn p_of(pred: &LogPrediction, resolution_arcsec: f64, threshold: f64) -> f64 {
    probability_at_least(pred, (threshold * resolution_arcsec).log10())
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = "name,sigma_km_s,sigma_err_km_s,log_bulge_mass,log_bulge_mass_err_dex,bulge_mass,bulge_mass_method,log_luminosity,log_luminosity_err_dex,band,distance_mpc,distance_err_mpc\n\
        Candidate North,200,10,,,,,,,,18,1.5\n\
        Candidate East,,,10.9,0.1,,,,,,25,\n\
        Candidate West,180 ± 9,,,,5e10 ± 1e10,dynamical,10.4,0.08,K,12 ± 1,\n";

    #[test]
    fn a_candidate_file_is_read_with_the_catalog_grammar() {
        let c = read_candidates(GOOD).unwrap();
        assert_eq!(c.len(), 3);
        let north = &c[0];
        assert_eq!(north.name, "Candidate North");
        let s = north.sigma.unwrap();
        // 200 ± 10 km/s: log10 200 and the mean of log10(210/200) and log10(200/190), the
        // grammar's conversion (docs/methods.md §2.5 option 1): 0.0217328 dex (computed).
        assert!((s.log_value - 200_f64.log10()).abs() < 1e-12);
        assert!((s.err_dex - 0.021_732_8).abs() < 1e-6, "{s:?}");
        assert!((north.distance_mpc - 18.0).abs() < 1e-12);
        assert!((north.distance_err_mpc - 1.5).abs() < 1e-12);
        let east = &c[1];
        assert!(east.sigma.is_none());
        assert!((east.bulge_mass.unwrap().log_value - 10.9).abs() < 1e-12);
        assert_eq!(east.bulge_mass_method, BulgeMassMethod::Photometric);
        assert!(east.distance_err_mpc.abs() < 1e-15);
        let west = &c[2];
        assert_eq!(west.bulge_mass_method, BulgeMassMethod::Dynamical);
        assert!((west.bulge_mass.unwrap().log_value - 5e10_f64.log10()).abs() < 1e-12);
        assert_eq!(west.band.as_deref(), Some("K"));
        assert!((west.luminosity.unwrap().err_dex - 0.08).abs() < 1e-12);
        assert!((west.distance_err_mpc - 1.0).abs() < 1e-12);
    }

    #[test]
    fn every_faulty_row_is_named_with_what_to_type() {
        let text = "name,sigma_km_s,log_bulge_mass,bulge_mass,log_luminosity,band,distance_mpc\n\
            ,200,,,,,18\n\
            Bad Sigma,fast,,,,,18\n\
            No Distance,200,,,,,\n\
            No Band,200,,,10.5,,18\n\
            Twice,200,10.9,8e10,,,18\n\
            Fine,200,,,,,18\n\
            Nothing,,,,,,18\n";
        let faults = read_candidates(text).unwrap_err();
        let at =
            |line: u64| -> Vec<&RowError> { faults.iter().filter(|f| f.line == line).collect() };
        assert_eq!(at(2)[0].column, "name");
        assert_eq!(at(3)[0].column, "sigma_km_s");
        assert_eq!(at(3)[0].name, "Bad Sigma");
        assert_eq!(at(4)[0].column, "distance_mpc");
        assert!(at(4)[0].message.contains("Mpc"), "{:?}", at(4));
        assert_eq!(at(5)[0].column, "band");
        assert_eq!(at(6)[0].column, "bulge_mass");
        assert!(at(7).is_empty());
        assert_eq!(at(8)[0].column, "sigma_km_s");
        for f in &faults {
            assert!(f.message.ends_with('.'), "{f}");
            assert!(
                f.to_string().starts_with(&format!("Line {}", f.line)),
                "{f}"
            );
        }
        // The header: an unknown column is named with the columns there are.
        let faults = read_candidates("name,sigma,distance_mpc\nA,200,18\n").unwrap_err();
        assert_eq!(faults.len(), 1);
        assert_eq!((faults[0].line, faults[0].column.as_str()), (1, "sigma"));
        assert!(faults[0].message.contains("sigma_km_s"));
        assert!(read_candidates("name,sigma_km_s,distance_mpc\n").is_err());
    }

    #[test]
    fn a_json_batch_reads_as_the_file_does() {
        let json = r#"[{"name": "Candidate North", "sigma_km_s": 200, "sigma_err_km_s": "10", "distance_mpc": 18, "distance_err_mpc": 1.5},
                       {"name": "Candidate South", "log_bulge_mass": 10.9, "distance_mpc": "25"}]"#;
        let records: Vec<CandidateRecord> = serde_json::from_str(json).unwrap();
        let from_json = read_candidate_records(&records).unwrap();
        let from_file = read_candidates(GOOD).unwrap();
        assert_eq!(from_json[0], from_file[0]);
        assert!((from_json[1].bulge_mass.unwrap().log_value - 10.9).abs() < 1e-12);
        let bad: Vec<CandidateRecord> =
            serde_json::from_str(r#"[{"name": "A", "distance_mpc": 18}, {"name": "B", "sigma_km_s": -3, "distance_mpc": 18}]"#)
                .unwrap();
        let faults = read_candidate_records(&bad).unwrap_err();
        assert_eq!(faults.iter().map(|f| f.line).collect::<Vec<_>>(), [1, 2]);
        assert!(serde_json::from_str::<Vec<CandidateRecord>>(r#"[{"nmae": "A"}]"#).is_err());
    }

    #[test]
    fn resolutions_and_thresholds_are_checked() {
        assert!(Resolution::new("AO K band", 0.05).is_ok());
        assert!((Resolution::read("slit", "0.2″").unwrap().arcsec - 0.2).abs() < 1e-15);
        for (label, arcsec) in [("", 0.1), ("x", 0.0), ("x", 100.5), ("x", f64::NAN)] {
            assert!(Resolution::new(label, arcsec).is_err(), "{label} {arcsec}");
        }
        assert!(Resolution::new(&"a".repeat(41), 0.1).is_err());
        assert!(Resolution::new(&"a".repeat(40), 100.0).is_ok());
        assert!(check_threshold(1.0).is_ok() && check_threshold(0.0).is_err());
        assert!(check_threshold(101.0).is_err());
    }

    #[test]
    fn the_sphere_of_influence_constants_come_from_the_physics_module() {
        // docs/methods.md §7 row 26: G = 4.30091727e-3 pc M☉⁻¹ (km/s)² (computed); 1 pc at
        // 1 Mpc subtends 0.206265″ (648 000/π × 10⁻⁶, computed).
        let s = soi_scale();
        assert!((10f64.powf(s.log_g) / 4.300_91e-3 - 1.0).abs() < 3e-6);
        assert!((10f64.powf(s.log_arcsec_per_pc_at_mpc) - 0.206_265).abs() < 1e-6);
    }

    #[test]
    fn the_wilson_interval_and_the_bins() {
        // Wilson 1927 score interval, k = 3 of n = 10 at z = 1: (0.178821, 0.457543) (computed
        // from the formula in the doc comment).
        let (lo, hi) = wilson_interval(3, 10, 1.0);
        assert!((lo - 0.178_821).abs() < 1e-6 && (hi - 0.457_543).abs() < 1e-6);
        // For large n it approaches p ± √(p(1 − p)/n).
        let (lo, hi) = wilson_interval(30_000, 100_000, 1.0);
        assert!(((hi - lo) / 2.0 - (0.21_f64 / 100_000.0).sqrt()).abs() < 1e-6);
        let pairs = [
            (0.05, false),
            (0.1, false),
            (0.3, true),
            (0.5, true),
            (0.55, false),
            (0.9, true),
            (1.0, true),
        ];
        let bins = bin_reliability(&pairs);
        assert_eq!(bins.len(), RELIABILITY_BINS);
        assert_eq!(
            (bins[3].lo.to_bits(), bins[3].hi.to_bits()),
            (0.6_f64.to_bits(), 0.8_f64.to_bits())
        );
        assert_eq!(bins.iter().map(|b| b.count).sum::<usize>(), pairs.len());
        assert_eq!(
            bins.iter().map(|b| b.count).collect::<Vec<_>>(),
            [2, 1, 2, 0, 2]
        );
        assert_eq!(bins[0].verdict, Some(WITHIN_ERROR));
        assert_eq!(bins[3].verdict, None);
        // One resolved of one at mean 0.3: the interval (0.5, 1) misses 0.3.
        assert_eq!(bins[1].verdict, Some(OUTSIDE_ERROR));
    }

    #[test]
    fn the_reading_says_which_way_the_bins_disagree() {
        // 40 galaxies at P = 0.5 and 0.9: calibrated when half and nine tenths are resolved,
        // resolved more often when all are, less often when none are.
        let draw = |resolved_at_half: usize, resolved_at_nine: usize| {
            let mut pairs = Vec::new();
            for k in 0..40 {
                pairs.push((0.5, k < resolved_at_half));
                pairs.push((0.9, k < resolved_at_nine));
            }
            reading_of(&bin_reliability(&pairs)).unwrap()
        };
        assert!(draw(20, 36).contains("face value"), "{}", draw(20, 36));
        assert!(draw(40, 40).contains("more often than predicted"));
        assert!(draw(5, 10).contains("less often than predicted"));
        assert!(draw(40, 10).contains("(and in 1 less often)"));
        assert_eq!(reading_of(&bin_reliability(&[])), None);
    }

    fn fit_of(relation: Relation, terms: RelationTerms) -> PlanFit {
        PlanFit {
            relation,
            fit_id: Some("fit-test".to_owned()),
            catalog_version: Some(1),
            n: 50,
            terms: Some(terms),
            problem: None,
        }
    }

    fn candidate(name: &str, sigma: Option<f64>, bulge: Option<f64>) -> Candidate {
        Candidate {
            name: name.to_owned(),
            sigma: sigma.map(|s| LogValue {
                log_value: s.log10(),
                err_dex: 0.02,
            }),
            bulge_mass: bulge.map(|b| LogValue {
                log_value: b,
                err_dex: 0.1,
            }),
            bulge_mass_method: BulgeMassMethod::Photometric,
            luminosity: None,
            band: None,
            distance_mpc: 18.0,
            distance_err_mpc: 1.8,
        }
    }

    #[test]
    fn each_candidate_gets_the_tightest_relation_its_values_allow_and_rows_are_ranked() {
        // Invented relations: M–σ with ε = 0.3 and M_BH–M_bulge with ε = 0.5, so a candidate
        // with both is predicted from M–σ; a tighter M_bulge relation wins the same candidate.
        let m_sigma = RelationTerms::published((8.3, 0.05), (5.0, 0.3), 200_f64.log10(), 0.0, 0.3);
        let loose = RelationTerms::published((8.5, 0.05), (1.1, 0.1), 11.0, 0.0, 0.5);
        let tight = RelationTerms {
            scatter_dex: 0.1,
            ..loose
        };
        let res = [
            Resolution::new("AO", 0.05).unwrap(),
            Resolution::new("seeing", 0.5).unwrap(),
        ];
        let fits = [
            fit_of(Relation::MSigma, m_sigma),
            fit_of(Relation::MBulge, loose),
        ];
        let both = candidate("Both", Some(220.0), Some(11.2));
        let row = plan_row(&both, &fits, &res, 1.0);
        assert_eq!(row.relation, Some(Relation::MSigma));
        assert_eq!(row.considered.len(), 2);
        let least = row
            .considered
            .iter()
            .map(|c| c.sd_dex)
            .fold(f64::INFINITY, f64::min);
        assert!((row.prediction.unwrap().log_theta_arcsec.sd_dex - least).abs() < 1e-15);
        let (p_ao, p_seeing) = (row.p_resolved[0].unwrap(), row.p_resolved[1].unwrap());
        assert!(p_ao > p_seeing, "{p_ao} {p_seeing}");
        let fits_tight = [
            fit_of(Relation::MSigma, m_sigma),
            fit_of(Relation::MBulge, tight),
        ];
        let row = plan_row(&both, &fits_tight, &res, 1.0);
        assert_eq!(row.relation, Some(Relation::MBulge));
        // Without σ: a mass, no sphere of influence, and the sentence saying why.
        let row = plan_row(&candidate("No sigma", None, Some(11.0)), &fits, &res, 1.0);
        assert_eq!(row.relation, Some(Relation::MBulge));
        assert!(row.mass.is_some() && row.prediction.is_none());
        assert_eq!(row.p_resolved, [None, None]);
        assert_eq!(row.note.as_deref(), Some(SIGMA_NEEDED));
        // Ranking: highest P at the first resolution first, ties by name, rows without P last.
        let rows = rank(vec![
            plan_row(&candidate("No sigma", None, Some(11.0)), &fits, &res, 1.0),
            plan_row(&candidate("Small", Some(100.0), None), &fits, &res, 1.0),
            plan_row(&candidate("Twin b", Some(250.0), None), &fits, &res, 1.0),
            plan_row(&candidate("Twin a", Some(250.0), None), &fits, &res, 1.0),
        ]);
        let names: Vec<&str> = rows.iter().map(|r| r.candidate.name.as_str()).collect();
        assert_eq!(names, ["Twin a", "Twin b", "Small", "No sigma"]);
        assert_eq!(
            rows.iter().map(|r| r.rank).collect::<Vec<_>>(),
            [1, 2, 3, 4]
        );
    }
}
