//! Cells in, a checked submission or every cell at fault out. The cell readers
//! ([`galaxy_from_cells`], [`measurement_from_cells`], through `units::parse_entry`) serve the
//! submission form, the API, catalog files and the demo catalog alike: a value typed in a script
//! is read exactly as one typed in a form or a file. [`check`] reads a whole submission for the
//! form and the API, which name the cells their own way (`m0_value` on the form,
//! `measurements[0].value` in JSON); [`store`] stores it once.

use sqlx::SqlitePool;

use super::galaxies::{NamedGalaxy, SubmissionSource, find_by_slug};
use super::model::{
    Activity, BulgeKind, BulgeMassMethod, CentreKind, DistanceMethod, MassMethod, Morphology,
    NewGalaxy, NewMeasurement, Quantity, SigmaDefinition,
};
use super::names::clean_name;
use super::submissions::{self, Created, GalaxyChoice, SubmissionError};
use crate::units::{self, Scale};

/// A row of a catalog CSV file that cannot be read; says where and why.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{file} line {line}, column '{column}': {message}")]
pub struct RowError {
    /// Which file.
    pub file: &'static str,
    /// Line number in the file (the header is line 1).
    pub line: u64,
    /// Column name.
    pub column: &'static str,
    /// What is wrong, one sentence.
    pub message: String,
}

/// Read a galaxy from named cells (a CSV row or a form): `name`, `morphology`, `bulge_kind`,
/// `centre_kind`, `distance_mpc`, `distance_err_mpc`, `distance_method`. `cell` returns the text
/// of a column ("" when absent); errors carry `file`, `line` and the column.
///
/// # Errors
/// The first cell that cannot be read.
pub fn galaxy_from_cells<'a>(
    file: &'static str,
    line: u64,
    cell: &impl Fn(&'static str) -> &'a str,
) -> Result<NewGalaxy, RowError> {
    let field = |column: &'static str| Field {
        file,
        line,
        column,
        text: cell(column),
    };
    galaxy_from_fields(&field)
}

/// Read a measurement from named cells (a CSV row or a form) through the entry parser:
/// `quantity`, `value`, `scale`, `limit_confidence_sigma`, `method`, `sigma_definition`,
/// `aperture`, `band`, `source_distance_mpc`, `resolution_arcsec`, `reference`, `note`.
///
/// # Errors
/// The first cell that cannot be read.
pub fn measurement_from_cells<'a>(
    file: &'static str,
    line: u64,
    cell: &impl Fn(&'static str) -> &'a str,
) -> Result<NewMeasurement, RowError> {
    let field = |column: &'static str| Field {
        file,
        line,
        column,
        text: cell(column),
    };
    measurement_from_fields(&field)
}

pub(super) fn galaxy_from_fields<'a>(
    field: &impl Fn(&'static str) -> Field<'a>,
) -> Result<NewGalaxy, RowError> {
    let name = galaxy_name(&field("name"))?;
    let distance_mpc =
        field("distance_mpc").number(units::DISTANCE_MIN_MPC, units::DISTANCE_MAX_MPC, "Mpc")?;
    let distance_err_mpc = field("distance_err_mpc").number(0.0, distance_mpc, "Mpc")?;
    if distance_err_mpc >= distance_mpc {
        return Err(field("distance_err_mpc")
            .error("the distance error must be smaller than the distance".into()));
    }
    Ok(NewGalaxy {
        name,
        morphology: field("morphology").word::<Morphology>()?,
        bulge_kind: field("bulge_kind").word::<BulgeKind>()?,
        centre_kind: field("centre_kind").word::<CentreKind>()?,
        distance_mpc,
        distance_err_mpc,
        distance_method: field("distance_method").word::<DistanceMethod>()?,
        activity: match field("activity").text.trim() {
            "" => Activity::Unknown,
            _ => field("activity").word::<Activity>()?,
        },
    })
}

/// Read a galaxy's new adopted distance from named cells (the galaxy page's form):
/// `distance_mpc`, `distance_err_mpc`, `distance_method`, with the same rules as a new
/// galaxy's distance. Every cell at fault is one error.
///
/// # Errors
/// Each cell that cannot be read.
pub fn distance_from_cells<'a>(
    cell: &impl Fn(&'static str) -> &'a str,
) -> Result<super::galaxies::NewDistance, Vec<RowError>> {
    let field = |column: &'static str| Field {
        file: "form",
        line: 0,
        column,
        text: cell(column),
    };
    let distance =
        field("distance_mpc").number(units::DISTANCE_MIN_MPC, units::DISTANCE_MAX_MPC, "Mpc");
    let err = field("distance_err_mpc").number(0.0, units::DISTANCE_MAX_MPC, "Mpc");
    let method = field("distance_method").word::<DistanceMethod>();
    let mut errors = Vec::new();
    let err = match (&distance, err) {
        (Ok(d), Ok(e)) if e >= *d => {
            errors.push(
                field("distance_err_mpc")
                    .error("the distance error must be smaller than the distance".into()),
            );
            None
        }
        (_, Ok(e)) => Some(e),
        (_, Err(e)) => {
            errors.push(e);
            None
        }
    };
    let distance = distance.map_err(|e| errors.insert(0, e)).ok();
    let method = method.map_err(|e| errors.push(e)).ok();
    match (distance, err, method) {
        (Some(distance_mpc), Some(distance_err_mpc), Some(method)) if errors.is_empty() => {
            Ok(super::galaxies::NewDistance {
                distance_mpc,
                distance_err_mpc,
                distance_method: method.as_str().to_owned(),
            })
        }
        _ => Err(errors),
    }
}

/// A galaxy name cell by the name rules (`catalog::names`): NFC, spaces collapsed, nothing
/// that does not show as text.
pub(super) fn galaxy_name(field: &Field<'_>) -> Result<String, RowError> {
    clean_name(field.text).map_err(|m| field.error(m))
}

/// The column (of a form, a JSON request or a catalog file) that confirms a new galaxy whose
/// name looks like one in the catalog.
pub const CONFIRM_COLUMN: &str = "new_galaxy_confirmed";

/// Whether a confirmation cell says yes: `yes`, `true`, `1` or `on` (a ticked checkbox); blank,
/// `no`, `false` or `0` say no.
///
/// # Errors
/// Any other text, as a fragment saying what to type.
pub fn confirmation(text: &str) -> Result<bool, String> {
    match text.trim().to_ascii_lowercase().as_str() {
        "yes" | "true" | "1" | "on" => Ok(true),
        "" | "no" | "false" | "0" => Ok(false),
        _ => Err(format!(
            "type yes in {CONFIRM_COLUMN} to confirm that this is a new galaxy, or leave it blank"
        )),
    }
}

/// The sentence for a new galaxy whose name looks like one in the catalog.
pub fn look_alike_message(name: &str, existing: &NamedGalaxy) -> String {
    format!(
        "“{name}” looks like the existing galaxy “{}” (slug {}): choose it, or confirm that this is a new galaxy.",
        existing.name, existing.slug
    )
}

/// Build a measurement from a row's named fields (shared by every catalog CSV reader).
pub(super) fn measurement_from_fields<'a>(
    field: &impl Fn(&'static str) -> Field<'a>,
) -> Result<NewMeasurement, RowError> {
    let quantity = field("quantity").measured_quantity()?;
    let scale = match field("scale").text.trim() {
        "" | "linear" => Scale::Linear,
        "log10" => Scale::Log10,
        "auto" => Scale::Auto,
        other => {
            return Err(field("scale").error(format!("'{other}' is not linear, log10 or auto")));
        }
    };
    let value = field("value");
    let mass_method = match quantity {
        Quantity::BlackHoleMass => Some(field("method").word::<MassMethod>()?),
        _ => None,
    };
    let virial =
        super::virial::virial_from_fields(field, mass_method, !value.text.trim().is_empty())?;
    let entry = match virial.as_ref().and_then(|v| v.computed) {
        Some(c) => units::Entry {
            quantity,
            text: c.value_text.to_owned(),
            log_value: c.log_value,
            err_minus_dex: c.err_minus_dex,
            err_plus_dex: c.err_plus_dex,
            err_dex: 0.5 * (c.err_minus_dex + c.err_plus_dex),
            errors_given: true,
            upper_limit: false,
            scale_used: Scale::Linear,
        },
        None => units::parse_entry(value.text, quantity, scale)
            .map_err(|e| value.error(e.to_string()))?,
    };
    let entry = match virial.as_ref().map(|v| &v.entry) {
        Some(_) if entry.upper_limit => {
            return Err(value.error(
                "a reverberation or single-epoch mass is a detection; an upper limit on a black-hole mass comes from dynamics".into(),
            ));
        }
        // A single-epoch mass carries its calibration's scatter as an error floor
        // (docs/methods.md §4.2).
        Some(v)
            if virial.as_ref().is_some_and(|m| m.computed.is_none()) && v.calibration.is_some() =>
        {
            let floor = match v.calibration {
                Some(crate::catalog::model::SingleEpochCalibration::Vp06) => {
                    crate::astro::agn::VESTERGAARD_PETERSON_2006.scatter_dex
                }
                _ => crate::astro::agn::R_L_ROUTE_SCATTER_DEX,
            };
            let minus = entry.err_minus_dex.max(floor);
            let plus = entry.err_plus_dex.max(floor);
            units::Entry {
                err_minus_dex: minus,
                err_plus_dex: plus,
                err_dex: 0.5 * (minus + plus),
                ..entry
            }
        }
        _ => entry,
    };
    let method = match quantity {
        Quantity::BlackHoleMass => mass_method.map_or("", MassMethod::as_str),
        Quantity::BulgeMass => field("method").word::<BulgeMassMethod>()?.as_str(),
        _ => field("method").empty_for(quantity)?,
    };
    let sigma_definition = match quantity {
        Quantity::VelocityDispersion => field("sigma_definition")
            .word::<SigmaDefinition>()?
            .as_str(),
        _ => field("sigma_definition").empty_for(quantity)?,
    };
    let band = match quantity {
        Quantity::BulgeLuminosity => field("band").required()?,
        _ => field("band").empty_for(quantity)?,
    };
    let confidence = field("limit_confidence_sigma");
    let limit_confidence_sigma = match (confidence.text.trim(), entry.upper_limit) {
        ("", _) => None,
        ("1", true) => Some(1.0),
        ("2", true) => Some(2.0),
        ("3", true) => Some(3.0),
        (_, false) => {
            return Err(confidence.error("a confidence level is only for an upper limit".into()));
        }
        (other, true) => {
            return Err(confidence.error(format!("'{other}' is not 1, 2 or 3 (sigma)")));
        }
    };
    let aperture = field("aperture").text.trim();
    let reference = field("reference").text.trim();
    let note = field("note").text.trim();
    for (column, text, max) in [
        ("reference", reference, 300),
        ("note", note, NOTE_MAX_CHARS),
    ] {
        if text.chars().count() > max {
            return Err(field(column).error(format!("at most {max} characters")));
        }
    }
    if !band.is_empty() {
        check_band(band).map_err(|e| field("band").error(e))?;
    }
    if !aperture.is_empty() {
        check_aperture(aperture).map_err(|e| field("aperture").error(e))?;
    }
    Ok(NewMeasurement {
        quantity,
        log_value: entry.log_value,
        err_minus_dex: entry.err_minus_dex,
        err_plus_dex: entry.err_plus_dex,
        err_dex: entry.err_dex,
        upper_limit: entry.upper_limit,
        limit_confidence_sigma,
        method: method.to_string(),
        sigma_definition: sigma_definition.to_string(),
        aperture: aperture.to_string(),
        band: band.to_string(),
        source_distance_mpc: field("source_distance_mpc").optional_number(
            units::DISTANCE_MIN_MPC,
            units::DISTANCE_MAX_MPC,
            "Mpc",
        )?,
        resolution_arcsec: field("resolution_arcsec").optional_number(
            units::RESOLUTION_MIN_ARCSEC,
            units::RESOLUTION_MAX_ARCSEC,
            "arcsec",
        )?,
        reference: reference.to_string(),
        note: note.to_string(),
        value_text: entry.text,
        value_scale: match entry.scale_used {
            Scale::Log10 => "log10",
            _ => "linear",
        }
        .to_string(),
        virial: virial.map(|v| v.entry),
    })
}

/// A text quoted in a message: at most 20 characters of it.
fn quoted(text: &str) -> String {
    let mut shown: String = text.chars().take(20).collect();
    if shown.len() < text.len() {
        shown.push('…');
    }
    shown
}

/// The grammar of a photometric band's name: 1 to 10 ASCII letters and digits, with `.`, `_`,
/// `-` or `/` between them, starting with a letter or digit (`K`, `V`, `Ks`, `K_s`, `3.6um`,
/// `F814W`). Bands are codes that group luminosities into relations, so nothing else is taken.
///
/// # Errors
/// The sentence fragment saying what to type instead.
pub fn check_band(band: &str) -> Result<(), String> {
    let inner = |c: char| c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-' | '/');
    let ok = (1..=10).contains(&band.chars().count())
        && band.starts_with(|c: char| c.is_ascii_alphanumeric())
        && band.chars().all(inner);
    if ok {
        Ok(())
    } else {
        Err(format!(
            "'{}' is not a band name; type 1 to 10 letters and digits, with . _ - or / between them, such as K, V, 3.6um or F814W",
            quoted(band)
        ))
    }
}

/// The grammar of an aperture as published: up to 100 characters, starting with a letter or
/// digit, then letters, digits, spaces and `. _ / - + * × , ( ) ' " ″` (`r_e`, `r_e/8`,
/// `1.5 arcsec`, `2" slit`).
///
/// # Errors
/// The sentence fragment saying what to type instead.
pub fn check_aperture(aperture: &str) -> Result<(), String> {
    let inner = |c: char| {
        c.is_alphanumeric()
            || matches!(
                c,
                ' ' | '.' | '_' | '/' | '-' | '+' | '*' | '×' | ',' | '(' | ')' | '\'' | '"' | '″'
            )
    };
    let ok = aperture.chars().count() <= 100
        && aperture.starts_with(char::is_alphanumeric)
        && aperture.chars().all(inner);
    if ok {
        Ok(())
    } else {
        Err(format!(
            "'{}' is not an aperture; type up to 100 letters, digits and spaces starting with a letter or digit, with . _ / - + * , ( ) or quotes inside, such as r_e/8 or 1.5 arcsec",
            quoted(aperture)
        ))
    }
}

/// One cell of a row, with enough context to say where a problem is.
pub(super) struct Field<'a> {
    pub(super) file: &'static str,
    pub(super) line: u64,
    pub(super) column: &'static str,
    pub(super) text: &'a str,
}

impl<'a> Field<'a> {
    pub(super) fn error(&self, message: String) -> RowError {
        RowError {
            file: self.file,
            line: self.line,
            column: self.column,
            message,
        }
    }

    pub(super) fn required(&self) -> Result<&'a str, RowError> {
        let t = self.text.trim();
        if t.is_empty() {
            Err(self.error("this column is required".into()))
        } else {
            Ok(t)
        }
    }

    pub(super) fn empty_for(&self, q: Quantity) -> Result<&'static str, RowError> {
        if self.text.trim().is_empty() {
            Ok("")
        } else {
            Err(self.error(format!("must be empty for a {}", q.label())))
        }
    }

    pub(super) fn word<T: std::str::FromStr<Err = String>>(&self) -> Result<T, RowError> {
        self.required()?.parse().map_err(|e: String| self.error(e))
    }

    /// A measured quantity's stored word (`distance` and `resolution` are not measurements).
    fn measured_quantity(&self) -> Result<Quantity, RowError> {
        Quantity::parse_measured(self.required()?).map_err(|e| self.error(e))
    }

    pub(super) fn number(&self, min: f64, max: f64, unit: &str) -> Result<f64, RowError> {
        let t = self.required()?;
        match t.parse::<f64>() {
            Ok(v) if v.is_finite() && (min..=max).contains(&v) => Ok(v),
            Ok(_) => Err(self.error(format!("{t} is outside {min}..{max} {unit}"))),
            Err(_) => Err(self.error(format!("'{t}' is not a number"))),
        }
    }

    pub(super) fn optional_number(
        &self,
        min: f64,
        max: f64,
        unit: &str,
    ) -> Result<Option<f64>, RowError> {
        if self.text.trim().is_empty() {
            Ok(None)
        } else {
            self.number(min, max, unit).map(Some)
        }
    }
}

/// A message as one sentence: capital first letter, full stop at the end (the cell readers give lower-case fragments, e.g. "the value … is not a number").
pub fn sentence(text: &str) -> String {
    let text = text.trim();
    let mut chars = text.chars();
    let mut out: String = match chars.next() {
        Some(first) => first.to_uppercase().chain(chars).collect(),
        None => return "The request could not be read.".to_owned(),
    };
    if !out.ends_with('.') {
        out.push('.');
    }
    out
}

/// Longest note a submitter or reviewer may write, in characters.
pub const NOTE_MAX_CHARS: usize = 2000;

/// The note rule: at most [`NOTE_MAX_CHARS`] characters.
///
/// # Errors
/// The sentence saying so.
pub fn check_note(note: &str) -> Result<(), String> {
    if note.chars().count() > NOTE_MAX_CHARS {
        Err(format!("The note has at most {NOTE_MAX_CHARS} characters."))
    } else {
        Ok(())
    }
}

/// A cell by catalog-file column name (an empty text when absent).
pub type Cells<'a> = dyn Fn(&'static str) -> &'a str + Send + Sync + 'a;

/// The galaxy a submission measures, as sent.
pub enum GalaxyCells<'a> {
    /// A galaxy of the catalog, by slug.
    Slug(&'a str),
    /// A new galaxy's cells (the catalog file's galaxy columns).
    New(Box<Cells<'a>>),
}

/// A submission as sent: its galaxy, its measurement rows (each with its number, from 0, and
/// its cells by the catalog file's measurement columns) and the note.
pub struct SubmissionCells<'a> {
    /// The galaxy.
    pub galaxy: GalaxyCells<'a>,
    /// The measurements that were filled in.
    pub rows: Vec<(usize, Box<Cells<'a>>)>,
    /// The note to the reviewer.
    pub note: &'a str,
}

/// Which cell is at fault.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cell {
    /// The galaxy chosen by slug.
    Galaxy,
    /// A column of the new galaxy.
    NewGalaxy(&'static str),
    /// The confirmation that a new galaxy whose name looks like one in the catalog is new
    /// ([`CONFIRM_COLUMN`]), when it is neither yes nor no.
    NewGalaxyConfirmed,
    /// A column of measurement row `.0` (from 0).
    Measurement(usize, &'static str),
    /// The note.
    Note,
}

/// One cell at fault, with one sentence saying why.
#[derive(Debug, Clone, PartialEq)]
pub struct Fault {
    /// The cell.
    pub cell: Cell,
    /// Why.
    pub message: String,
}

/// A submission whose every cell was read.
#[derive(Debug, Clone, PartialEq)]
pub struct Checked {
    /// The galaxy: in the catalog, or new.
    pub galaxy: GalaxyChoice,
    /// A new galaxy is confirmed as new although its name may look like one in the catalog
    /// (the [`CONFIRM_COLUMN`] said yes); checked when storing, under the write lock.
    pub new_galaxy_confirmed: bool,
    /// The measurements, in canonical units.
    pub measurements: Vec<NewMeasurement>,
}

/// Reads every cell of `cells`; the faults of every cell when any is at fault.
///
/// # Errors
/// The outer error is a database failure (looking up the galaxy's slug).
pub async fn check(
    pool: &SqlitePool,
    cells: &SubmissionCells<'_>,
) -> sqlx::Result<Result<Checked, Vec<Fault>>> {
    let mut faults = Vec::new();
    let mut new_galaxy_confirmed = false;
    let galaxy = match &cells.galaxy {
        GalaxyCells::Slug(slug) => match find_by_slug(pool, slug.trim()).await? {
            Some(g) => Some(GalaxyChoice::Existing(g.galaxy_id)),
            None => {
                faults.push(Fault {
                    cell: Cell::Galaxy,
                    message:
                        "That galaxy is not in the catalog; choose another or describe a new one."
                            .to_owned(),
                });
                None
            }
        },
        GalaxyCells::New(cell) => match galaxy_from_cells("form", 0, &|c| cell(c)) {
            Ok(g) => match confirmation(cell(CONFIRM_COLUMN)) {
                Ok(yes) => {
                    new_galaxy_confirmed = yes;
                    Some(GalaxyChoice::New(g))
                }
                Err(message) => {
                    faults.push(Fault {
                        cell: Cell::NewGalaxyConfirmed,
                        message: sentence(&message),
                    });
                    None
                }
            },
            Err(e) => {
                faults.push(Fault {
                    cell: Cell::NewGalaxy(e.column),
                    message: sentence(&e.message),
                });
                None
            }
        },
    };
    let mut measurements = Vec::with_capacity(cells.rows.len());
    for (row, cell) in &cells.rows {
        match measurement_from_cells("form", 0, &|c| cell(c)) {
            Ok(m) => measurements.push(m),
            Err(e) => faults.push(Fault {
                cell: Cell::Measurement(*row, e.column),
                message: sentence(&e.message),
            }),
        }
    }
    if let Err(message) = check_note(cells.note.trim()) {
        faults.push(Fault {
            cell: Cell::Note,
            message,
        });
    }
    Ok(match (galaxy, faults.is_empty()) {
        (Some(galaxy), true) => Ok(Checked {
            galaxy,
            new_galaxy_confirmed,
            measurements,
        }),
        _ => Err(faults),
    })
}

/// Store a checked submission as pending, once: a request sent again with the same client key
/// and content (a retried form or script) is answered with the first submission; the same key
/// with other content is [`SubmissionError::KeyReused`].
///
/// # Errors
/// The [`SubmissionError`] of `catalog::submissions::create`.
pub async fn store(
    pool: &SqlitePool,
    account_id: Option<i64>,
    source: SubmissionSource,
    client_key: &str,
    checked: &Checked,
    note: &str,
) -> Result<Created, SubmissionError> {
    let note = note.trim();
    let request = submissions::request_key(
        account_id,
        client_key,
        &checked.galaxy,
        &checked.measurements,
        note,
    );
    submissions::create(
        pool,
        account_id,
        source,
        &checked.galaxy,
        &checked.measurements,
        note,
        &request,
        checked.new_galaxy_confirmed,
    )
    .await
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_become_sentences() {
        assert_eq!(
            sentence("expected value at line 1"),
            "Expected value at line 1."
        );
        assert_eq!(sentence("Done."), "Done.");
        assert_eq!(sentence(""), "The request could not be read.");
    }

    #[test]
    fn bands_and_apertures_take_only_their_grammar() {
        for band in ["K", "V", "Ks", "K_s", "3.6um", "F814W", "r/i", "W1-W2"] {
            assert_eq!(check_band(band), Ok(()), "{band}");
        }
        for band in [
            "=1+1",
            "+K",
            "-K",
            "@K",
            "K band",
            "K;V",
            "ÄK",
            "'K",
            "ABCDEFGHIJK",
            "K\t",
        ] {
            let message = check_band(band).unwrap_err();
            assert!(message.contains("such as K"), "{band}: {message}");
        }
        for aperture in [
            "r_e",
            "r_e/8",
            "1.5 arcsec",
            "2\" slit",
            "R_e (major axis)",
            "0.5×2″",
        ] {
            assert_eq!(check_aperture(aperture), Ok(()), "{aperture}");
        }
        for aperture in ["=1+1", "-r_e", "@x", " r_e", "r_e; drop", "r<e>"] {
            let message = check_aperture(aperture).unwrap_err();
            assert!(message.contains("such as r_e/8"), "{aperture}: {message}");
        }
        assert!(check_aperture(&"r".repeat(101)).is_err());
    }

    #[test]
    fn a_formula_band_is_refused_where_every_door_reads_cells() {
        let cells = |c: &'static str| match c {
            "quantity" => "bulge_luminosity",
            "value" => "2e10 ± 0.4e10",
            "band" => "=1+1",
            _ => "",
        };
        let e = measurement_from_cells("form", 0, &cells).unwrap_err();
        assert_eq!(e.column, "band");
        assert!(e.message.contains("not a band name"), "{}", e.message);
    }

    #[test]
    fn the_note_rule_counts_characters_not_bytes() {
        assert!(check_note(&"é".repeat(NOTE_MAX_CHARS)).is_ok());
        assert_eq!(
            check_note(&"x".repeat(NOTE_MAX_CHARS + 1)).unwrap_err(),
            "The note has at most 2000 characters."
        );
    }
}
