//! Cells in, a checked submission or every cell at fault out. The submission form and the
//! API read a submission's cells here, through the same cell readers as catalog files
//! ([`crate::catalog::demo::measurement_from_cells`], hence `units::parse_entry`): a value typed
//! in a script is read exactly as one typed in a form or a file. Each door names the cells its
//! own way (`m0_value` on the form, `measurements[0].value` in JSON).

use sqlx::SqlitePool;

use super::demo::{galaxy_from_cells, measurement_from_cells};
use super::galaxies::SubmissionSource;
use super::galaxies::find_by_slug;
use super::model::NewMeasurement;
use super::submissions::{self, Created, GalaxyChoice, SubmissionError};

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
            Ok(g) => Some(GalaxyChoice::New(g)),
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
    fn the_note_rule_counts_characters_not_bytes() {
        assert!(check_note(&"é".repeat(NOTE_MAX_CHARS)).is_ok());
        assert_eq!(
            check_note(&"x".repeat(NOTE_MAX_CHARS + 1)).unwrap_err(),
            "The note has at most 2000 characters."
        );
    }
}
