//! The catalog CSV format: import (as pending submissions, or adopted directly by an admin)
//! and export of the adopted catalog. One row per measurement; the galaxy's description is
//! repeated on each row and needed only for galaxies not yet in the catalog. README.md
//! ("Catalog CSV") documents the columns; export writes exactly the columns import reads, so an
//! export re-imports to the same adopted values.
//!
//! A file is imported whole or not at all: every row is read first (through the same cell
//! readers as the demo files and the form, hence `units::parse_entry`), every faulty row is
//! reported with its line and column, and only a file without faults is written, in one
//! `BEGIN IMMEDIATE` transaction.

use std::collections::HashMap;

use sqlx::SqlitePool;

use super::galaxies::{self, RowKey, SubmissionSource};
use super::history::{self, NewEvent};
use super::intake::{
    CONFIRM_COLUMN, Field, RowError, confirmation, galaxy_from_cells, galaxy_name,
    measurement_from_cells,
};
use super::model::{NewGalaxy, NewMeasurement, Quantity, SubmissionState};
use super::submissions::{self, GalaxyChoice, SubmissionError};
use crate::auth::secret::sha256_hex;

pub(super) type Record = HashMap<String, String>;

/// The first characters that make a spreadsheet read a cell as a formula or a command (OWASP,
/// "CSV Injection"): `=`, `+`, `-`, `@`, tab and carriage return.
const FORMULA_STARTS: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// A text cell as every CSV file of the service writes it: a cell that would start with a
/// formula character (after any single quotes it already begins with) gets one more leading
/// `'`, which spreadsheets take as "text, do not evaluate" and do not show. Only free-text and
/// code columns pass through here; numbers the service formats itself (`-0.3`) stay numbers.
/// [`unguard_cell`] takes the quote off again on import, so export → import is lossless.
pub fn guard_text_cell(text: &str) -> std::borrow::Cow<'_, str> {
    if text.trim_start_matches('\'').starts_with(FORMULA_STARTS) {
        std::borrow::Cow::Owned(format!("'{text}"))
    } else {
        std::borrow::Cow::Borrowed(text)
    }
}

/// A cell as read from a CSV file: the inverse of [`guard_text_cell`] (one leading `'` is
/// dropped when the quotes are followed by a formula character; any other cell is as typed).
pub(super) fn unguard_cell(text: &str) -> &str {
    match text.strip_prefix('\'') {
        Some(rest) if rest.trim_start_matches('\'').starts_with(FORMULA_STARTS) => rest,
        _ => text,
    }
}

/// Counts lines up to a byte offset, moving forward only (records come in order, so a whole
/// file is counted once). The csv reader's own line numbers drift on CRLF line ends, which
/// browsers send for every pasted text and spreadsheets write; counting `\n` is right for both.
struct LineCounter<'a> {
    text: &'a [u8],
    at: usize,
    line: u64,
}

impl LineCounter<'_> {
    /// The 1-based line of the record that the reader places at `offset`. The reader's offset
    /// may point at the line end before the record (it consumes it lazily), so line ends at
    /// `offset` are stepped over first.
    fn line_at(&mut self, offset: u64) -> u64 {
        let mut offset = usize::try_from(offset)
            .unwrap_or(usize::MAX)
            .min(self.text.len());
        while offset < self.text.len() && matches!(self.text[offset], b'\r' | b'\n') {
            offset += 1;
        }
        if offset > self.at {
            let newlines = self.text[self.at..offset]
                .iter()
                .filter(|&&b| b == b'\n')
                .count();
            self.line += newlines as u64;
            self.at = offset;
        }
        self.line
    }
}

/// The records of a CSV text, each with the line it starts on (the header is line 1).
///
/// # Errors
/// The first line the CSV reader refuses.
pub(super) fn records(text: &str, file: &'static str) -> Result<Vec<(u64, Record)>, RowError> {
    let mut out = Vec::new();
    for_each_record(text, file, |line, record| out.push((line, record)))?;
    Ok(out)
}

/// Hand each record of a CSV text, with the line it starts on, to `each` as it is read: a large
/// file is never held as cell maps all at once (each map is about 2 KB).
///
/// # Errors
/// The first line the CSV reader refuses; the records before it have been handed over.
pub(super) fn for_each_record(
    text: &str,
    file: &'static str,
    mut each: impl FnMut(u64, Record),
) -> Result<(), RowError> {
    let mut lines = LineCounter {
        text: text.as_bytes(),
        at: 0,
        line: 1,
    };
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .from_reader(text.as_bytes());
    let headers = reader
        .headers()
        .map_err(|e| RowError {
            file,
            line: 1,
            column: "(header)",
            message: e.to_string(),
        })?
        .clone();
    let mut rec = csv::StringRecord::new();
    loop {
        match reader.read_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => return Ok(()),
            Err(e) => {
                return Err(RowError {
                    file,
                    line: e.position().map_or(0, |p| lines.line_at(p.byte())),
                    column: "(row)",
                    message: e.to_string(),
                });
            }
        }
        let line = rec.position().map_or(0, |p| lines.line_at(p.byte()));
        let map = headers
            .iter()
            .zip(rec.iter())
            .map(|(h, v)| (h.to_string(), unguard_cell(v).to_string()))
            .collect();
        each(line, map);
    }
}

/// The columns, in the order export writes them. `row_key` is optional on import (see
/// [`ImportRow::row`]); so are `activity` and the broad-line columns (`line` to `calibration`,
/// `virial::VIRIAL_COLUMNS`), which only reverberation and single-epoch masses fill.
pub const COLUMNS: [&str; 31] = [
    "galaxy",
    "morphology",
    "bulge_kind",
    "centre_kind",
    "distance_mpc",
    "distance_err_mpc",
    "distance_method",
    "activity",
    "quantity",
    "value",
    "scale",
    "limit_confidence_sigma",
    "method",
    "sigma_definition",
    "aperture",
    "band",
    "source_distance_mpc",
    "resolution_arcsec",
    "reference",
    "note",
    "line",
    "width_definition",
    "width_spectrum",
    "lag_days",
    "lag_err_days",
    "width_km_s",
    "width_err_km_s",
    "log_l5100_erg_s",
    "virial_factor",
    "calibration",
    "row_key",
];

/// The columns the export writes as numbers of its own formatting; every other column is text
/// and passes through [`guard_text_cell`] (`lag_err_days` may read `+1.4/-1.1`).
const NUMBER_COLUMNS: [&str; 10] = [
    "distance_mpc",
    "distance_err_mpc",
    "limit_confidence_sigma",
    "source_distance_mpc",
    "resolution_arcsec",
    "lag_days",
    "width_km_s",
    "width_err_km_s",
    "log_l5100_erg_s",
    "virial_factor",
];

/// The content columns a row's fingerprint has always been taken over, in that order.
const FINGERPRINT_COLUMNS: [&str; 19] = [
    "galaxy",
    "morphology",
    "bulge_kind",
    "centre_kind",
    "distance_mpc",
    "distance_err_mpc",
    "distance_method",
    "quantity",
    "value",
    "scale",
    "limit_confidence_sigma",
    "method",
    "sigma_definition",
    "aperture",
    "band",
    "source_distance_mpc",
    "resolution_arcsec",
    "reference",
    "note",
];

/// The content columns added with AGN masses (`activity`, then `virial::VIRIAL_COLUMNS`): they
/// enter a row's fingerprint only when one of them is filled, so a row without them keeps the
/// fingerprint it always had (an old export re-imports as unchanged).
const AGN_FINGERPRINT_COLUMNS: [&str; 11] = [
    "activity",
    "line",
    "width_definition",
    "width_spectrum",
    "lag_days",
    "lag_err_days",
    "width_km_s",
    "width_err_km_s",
    "log_l5100_erg_s",
    "virial_factor",
    "calibration",
];

/// The measurement columns, `quantity` to `calibration` (the API's measurement objects use the
/// same names).
pub const MEASUREMENT_COLUMNS: &[&str] = COLUMNS.split_at(8).1.split_at(22).0;

/// The galaxy-description columns (besides `galaxy`, the name).
const GALAXY_COLUMNS: [&str; 7] = [
    "morphology",
    "bulge_kind",
    "centre_kind",
    "distance_mpc",
    "distance_err_mpc",
    "distance_method",
    "activity",
];

/// One row read from a catalog CSV file.
#[derive(Debug, Clone, PartialEq)]
pub struct ImportRow {
    /// Line in the file (the header is line 1).
    pub line: u64,
    /// The galaxy's name.
    pub galaxy_name: String,
    /// Its description, when the row gives one.
    pub galaxy: Option<NewGalaxy>,
    /// The row's `new_galaxy_confirmed` cell says yes: the galaxy is new even though its name
    /// looks like one in the catalog.
    pub new_galaxy_confirmed: bool,
    /// The measurement.
    pub measurement: NewMeasurement,
    /// The row's key: the `row_key` cell, or the SHA-256 of the content cells when that is
    /// blank; with the content's SHA-256. A row whose key is already stored is skipped.
    pub row: RowKey,
}

/// Why an import wrote nothing.
#[derive(Debug, thiserror::Error)]
pub enum ImportError {
    /// Faulty rows, every one of them.
    #[error("{} row(s) of the file are faulty; nothing was imported.", .0.len())]
    Rows(Vec<RowError>),
    /// The database failed.
    #[error("The database failed; nothing was imported.")]
    Db(#[from] sqlx::Error),
}

/// At most this many faulty rows are listed in a report (pages, the command line); the rest
/// are counted, so a large file of faulty rows does not make a larger report.
pub const MAX_REPORTED_ROWS: usize = 200;

/// The rows of a fault report to list (the first [`MAX_REPORTED_ROWS`]) and the sentence
/// summing it up, which counts every faulty row and the ones left out.
pub fn reported_faults(rows: &[RowError]) -> (&[RowError], String) {
    let listed = &rows[..rows.len().min(MAX_REPORTED_ROWS)];
    let summary = if rows.len() > listed.len() {
        format!(
            "{} faulty rows; nothing was imported; the first {} are listed and {} more are not: correct these and send the file again.",
            rows.len(),
            listed.len(),
            rows.len() - listed.len()
        )
    } else {
        format!("{} faulty row(s); nothing was imported.", rows.len())
    };
    (listed, summary)
}

/// Rows stored between two calls of an import's progress callback.
const PROGRESS_ROWS: usize = 5_000;

/// File name used in row reports.
const FILE: &str = "import";

/// Read every row of a catalog CSV text.
///
/// # Errors
/// Every faulty row (line, column, message); an unreadable header or record stops the reading.
pub fn parse_catalog_csv(text: &str) -> Result<Vec<ImportRow>, Vec<RowError>> {
    let mut reader = RowReader::default();
    for_each_record(text, FILE, |line, record| reader.push(line, &record)).map_err(|e| vec![e])?;
    reader.finish()
}

/// Read catalog rows given as cell maps (from CSV records or JSON objects).
fn parse_records(rows: Vec<(u64, Record)>) -> Result<Vec<ImportRow>, Vec<RowError>> {
    let mut reader = RowReader::default();
    for (line, record) in rows {
        reader.push(line, &record);
    }
    reader.finish()
}

/// Catalog rows read one cell map at a time: the rows, every fault, the row keys seen.
#[derive(Default)]
struct RowReader {
    /// The first map has been checked for the columns of the format.
    header_read: bool,
    /// The columns are at fault: the rows are not read.
    header_faulty: bool,
    out: Vec<ImportRow>,
    faults: Vec<RowError>,
    seen: HashMap<String, u64>,
}

impl RowReader {
    /// The rows, or every fault (only the column faults when the columns are at fault).
    fn finish(self) -> Result<Vec<ImportRow>, Vec<RowError>> {
        if self.faults.is_empty() {
            Ok(self.out)
        } else {
            Err(self.faults)
        }
    }

    /// Whether the first map names the columns of the format; records the faults.
    fn check_columns(&mut self, first: &Record) -> bool {
        let mut faults = Vec::new();
        for column in first.keys() {
            if !COLUMNS.contains(&column.as_str()) && column != CONFIRM_COLUMN {
                faults.push(RowError {
                    file: FILE,
                    line: 1,
                    column: "(header)",
                    message: format!(
                        "'{}' is not a column of the catalog format",
                        column.chars().take(40).collect::<String>()
                    ),
                });
            }
        }
        for column in ["galaxy", "quantity", "value"] {
            if !first.contains_key(column) {
                faults.push(RowError {
                    file: FILE,
                    line: 1,
                    column: "(header)",
                    message: format!("the column '{column}' is missing"),
                });
            }
        }
        let fine = faults.is_empty();
        self.faults.extend(faults);
        fine
    }

    /// Read one row.
    fn push(&mut self, line: u64, rec: &Record) {
        if !self.header_read {
            self.header_read = true;
            self.header_faulty = !self.check_columns(rec);
        }
        if self.header_faulty {
            return;
        }
        let (out, faults, seen) = (&mut self.out, &mut self.faults, &mut self.seen);
        let cell = |c: &'static str| {
            let key = if c == "name" { "galaxy" } else { c };
            rec.get(key).map_or("", String::as_str)
        };
        let name_cell = Field {
            file: FILE,
            line,
            column: "galaxy",
            text: cell("galaxy"),
        };
        let name = match galaxy_name(&name_cell) {
            Ok(name) => name,
            Err(e) => {
                faults.push(e);
                return;
            }
        };
        let new_galaxy_confirmed = match confirmation(cell(CONFIRM_COLUMN)) {
            Ok(yes) => yes,
            Err(message) => {
                faults.push(RowError {
                    file: FILE,
                    line,
                    column: CONFIRM_COLUMN,
                    message,
                });
                return;
            }
        };
        let described = GALAXY_COLUMNS.iter().any(|c| !cell(c).trim().is_empty());
        let galaxy = if described {
            match galaxy_from_cells(FILE, line, &cell) {
                Ok(g) => Some(g),
                Err(mut e) => {
                    if e.column == "name" {
                        e.column = "galaxy";
                    }
                    faults.push(e);
                    return;
                }
            }
        } else {
            None
        };
        let row = match row_key_of(&cell) {
            Ok(row) => row,
            Err(message) => {
                faults.push(RowError {
                    file: FILE,
                    line,
                    column: "row_key",
                    message,
                });
                return;
            }
        };
        if let Some(first) = seen.get(&row.key) {
            faults.push(RowError {
                file: FILE,
                line,
                column: "row_key",
                message: format!(
                    "line {first} has the same row key; every row needs its own (a blank key is made from the row's values, so a repeated row gets the same one)"
                ),
            });
            return;
        }
        seen.insert(row.key.clone(), line);
        match measurement_from_cells(FILE, line, &cell) {
            Ok(measurement) => out.push(ImportRow {
                line,
                galaxy_name: name,
                galaxy,
                new_galaxy_confirmed,
                measurement,
                row,
            }),
            Err(e) => faults.push(e),
        }
    }
}

/// The key and fingerprint of a row: SHA-256 over the trimmed content cells joined by the
/// unit separator (U+001F), so cell order and padding never matter and no cell can run into the
/// next; the AGN cells ([`AGN_FINGERPRINT_COLUMNS`]) are appended only when one is filled. The
/// key is the `row_key` cell, or that SHA-256 when it is blank.
fn row_key_of<'a>(cell: &dyn Fn(&'static str) -> &'a str) -> Result<RowKey, String> {
    let mut content = String::new();
    for (i, c) in FINGERPRINT_COLUMNS.iter().enumerate() {
        if i > 0 {
            content.push('\u{1f}');
        }
        content.push_str(cell(c).trim());
    }
    if AGN_FINGERPRINT_COLUMNS
        .iter()
        .any(|c| !cell(c).trim().is_empty())
    {
        for c in AGN_FINGERPRINT_COLUMNS {
            content.push('\u{1f}');
            content.push_str(cell(c).trim());
        }
    }
    let sha256 = sha256_hex(&content);
    let given = cell("row_key").trim();
    if given.chars().count() > 200 {
        return Err("a row key has at most 200 characters".into());
    }
    if given.chars().any(char::is_control) {
        return Err("a row key cannot contain control characters".into());
    }
    let key = if given.is_empty() {
        sha256.clone()
    } else {
        given.to_owned()
    };
    Ok(RowKey {
        key,
        sha256: Some(sha256),
    })
}

/// How the rows enter the catalog.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImportMode {
    /// One pending submission per galaxy, for reviewers (a member's upload; `source` says how).
    Pending {
        /// The submitter; None from the command line.
        account_id: Option<i64>,
        /// `csv` for uploads, `import` for the command line.
        source: SubmissionSource,
    },
    /// A vetted catalog: every row adopted at once (a later row of the same galaxy, quantity
    /// and band replaces an earlier one), one catalog version.
    Accepted,
}

/// What an import wrote.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ImportReport {
    /// Measurements stored.
    pub measurements: usize,
    /// Galaxies created.
    pub new_galaxies: usize,
    /// Submissions created.
    pub submissions: usize,
    /// Rows skipped because their row key is already in the catalog (an earlier import of the
    /// same rows).
    pub skipped: usize,
}

/// Import parsed rows in one transaction; `progress(done, total)` is called for each row stored
/// (for an adopted catalog, after each slice of [`PROGRESS_ROWS`] rows is stored).
///
/// What is read from the catalog is read in batches (the known row keys, the galaxies by name,
/// the look-alikes of new names), and an adopted catalog is written by multi-row statements:
/// a statement costs a round trip to the database's thread, which dominated the time of a large
/// file when every row took five.
///
/// # Errors
/// [`ImportError::Rows`] when a galaxy is neither in the catalog nor described, or a row breaks
/// a check of the schema; [`ImportError::Db`] otherwise. Nothing is written then.
pub async fn import_rows(
    pool: &SqlitePool,
    rows: &[ImportRow],
    mode: ImportMode,
    progress: &mut (dyn FnMut(usize, usize) + Send),
) -> Result<ImportReport, ImportError> {
    let mut tx = super::begin_write(pool).await?;
    // A larger page cache for this transaction only: the indexes of a large file (row keys and
    // their digests, names, slugs) are updated at random places, and with SQLite's default of
    // 2 MB their pages are written out and read back again and again. Durability is the
    // connection's (WAL, synchronous=FULL at commit); the cache only holds uncommitted pages.
    let cache_before: i64 = sqlx::query_scalar("pragma cache_size")
        .fetch_one(&mut *tx)
        .await?;
    sqlx::query(sqlx::AssertSqlSafe(format!(
        "pragma cache_size = -{IMPORT_CACHE_KIB}"
    )))
    .execute(&mut *tx)
    .await?;
    let stored = store_rows(&mut tx, rows, mode, progress).await;
    // The connection goes back to the pool with its own cache size, whatever happened.
    let restored = sqlx::query(sqlx::AssertSqlSafe(format!(
        "pragma cache_size = {cache_before}"
    )))
    .execute(&mut *tx)
    .await;
    match stored? {
        (report, Outcome::Commit) => {
            restored?;
            tx.commit().await?;
            Ok(report)
        }
        (report, Outcome::Nothing) => {
            tx.rollback().await?;
            Ok(report)
        }
    }
}

/// The largest page cache of an import's connection, KiB (the pages of a 100,000-galaxy
/// catalog's indexes fit; the cache takes memory only as pages are read).
const IMPORT_CACHE_KIB: i64 = 131_072;

/// Whether [`store_rows`] wrote anything to commit.
enum Outcome {
    Commit,
    Nothing,
}

/// The work of [`import_rows`] inside its transaction.
async fn store_rows(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    rows: &[ImportRow],
    mode: ImportMode,
    progress: &mut (dyn FnMut(usize, usize) + Send),
) -> Result<(ImportReport, Outcome), ImportError> {
    // Rows imported before (same key) are skipped: importing a file twice adds nothing. A key
    // stored with other content is a fault, not a silent skip.
    // Plain keys are read in batches; a key of the exported form may also be another row's
    // digest, and is looked up alone (only files made by an export carry such keys).
    let plain: Vec<&str> = rows
        .iter()
        .map(|r| r.row.key.as_str())
        .filter(|k| !galaxies::is_public_row_key(k))
        .collect();
    let mut known = galaxies::stored_row_keys(tx, &plain).await?;
    let mut faults = Vec::new();
    let mut fresh: Vec<&ImportRow> = Vec::with_capacity(rows.len());
    for r in rows {
        let found = if galaxies::is_public_row_key(&r.row.key) {
            galaxies::stored_row_key(tx, &r.row.key).await?
        } else {
            known.remove(&r.row.key)
        };
        let stored = match found {
            None => {
                fresh.push(r);
                continue;
            }
            Some(stored) => stored,
        };
        // A row carrying an exported key is compared with what the export wrote for it.
        let sha = match (stored.row_sha256, stored.by_digest) {
            (Some(_), true) => exported_fingerprint(tx, stored.measurement_id).await?,
            (sha, _) => sha,
        };
        match sha {
            Some(sha) if Some(&sha) != r.row.sha256.as_ref() => faults.push(RowError {
                file: FILE,
                line: r.line,
                column: "row_key",
                message: format!(
                    "the row key '{}' was imported before with other values; give a changed row a new key",
                    r.row.key.chars().take(80).collect::<String>()
                ),
            }),
            _ => {}
        }
    }
    if !faults.is_empty() {
        return Err(ImportError::Rows(faults));
    }
    let skipped = rows.len() - fresh.len();
    let rows = fresh;
    // Galaxies in first-appearance order, with their rows.
    let mut order: Vec<&str> = Vec::new();
    let mut by_galaxy: HashMap<&str, Vec<&ImportRow>> = HashMap::new();
    for r in rows.iter().copied() {
        let entry = by_galaxy.entry(r.galaxy_name.as_str()).or_default();
        if entry.is_empty() {
            order.push(r.galaxy_name.as_str());
        }
        entry.push(r);
    }
    let mut choices = Vec::with_capacity(order.len());
    // The catalog is read once per batch of names, not once per galaxy: the galaxies named
    // exactly so, then the look-alikes of the other names.
    let existing_ids = galaxies::ids_by_name(tx, &order).await?;
    let name_keys: HashMap<&str, String> = order
        .iter()
        .filter(|name| !existing_ids.contains_key(**name))
        .map(|name| (*name, super::names::name_key(name)))
        .collect();
    let wanted: Vec<&str> = name_keys.values().map(String::as_str).collect();
    let look_alikes = galaxies::look_alikes(tx, &wanted).await?;
    let look_alike = |name: &str| name_keys.get(name).and_then(|k| look_alikes.get(k));
    // New galaxies of this file by look-alike key: two rows may not describe look-alikes as two
    // new galaxies either, unless the later one confirms it.
    let mut new_keys: HashMap<String, (&str, u64)> = HashMap::new();
    for name in &order {
        let group = &by_galaxy[name];
        let existing: Option<i64> = existing_ids.get(*name).copied();
        let described = group.iter().find_map(|r| r.galaxy.as_ref());
        if let (None, Some(g)) = (existing, described) {
            let key = super::names::name_key(&g.name);
            let confirmed = group.iter().any(|r| r.new_galaxy_confirmed);
            let alike = match look_alike(name) {
                Some(other) => Some(format!(
                    "the galaxy “{}” of the catalog (slug {})",
                    other.name, other.slug
                )),
                None => new_keys
                    .get(&key)
                    .map(|(other, line)| format!("the new galaxy “{other}” of line {line}")),
            };
            new_keys.entry(key).or_insert((*name, group[0].line));
            if let (Some(other), false) = (alike, confirmed) {
                faults.push(RowError {
                    file: FILE,
                    line: group[0].line,
                    column: CONFIRM_COLUMN,
                    message: format!(
                        "“{name}” looks like {other}: write that name in the column galaxy, or type yes in the column {CONFIRM_COLUMN} on one of its rows if this is a new galaxy"
                    ),
                });
                continue;
            }
        }
        match (existing, described) {
            (Some(id), _) => choices.push(GalaxyChoice::Existing(id)),
            (None, Some(g)) => choices.push(GalaxyChoice::New(g.clone())),
            (None, None) => {
                let message = match look_alike(name) {
                    // A look-alike of a catalog name is most likely that galaxy, mistyped.
                    Some(other) => format!(
                        "'{name}' is not in the catalog, but “{}” is: write that name, or describe a new galaxy (morphology, distance, …) on one of its rows",
                        other.name
                    ),
                    None => format!(
                        "'{name}' is not in the catalog; describe it (morphology, distance, …) on one of its rows"
                    ),
                };
                faults.push(RowError {
                    file: FILE,
                    line: group[0].line,
                    column: "galaxy",
                    message,
                });
            }
        }
    }
    if !faults.is_empty() {
        return Err(ImportError::Rows(faults));
    }
    let total = rows.len();
    let mut done = 0;
    let mut report = ImportReport {
        measurements: 0,
        new_galaxies: choices
            .iter()
            .filter(|c| matches!(c, GalaxyChoice::New(_)))
            .count(),
        submissions: 0,
        skipped,
    };
    if rows.is_empty() {
        // Nothing new: no submission, no version bump, no audit event.
        return Ok((report, Outcome::Nothing));
    }
    match mode {
        ImportMode::Pending { account_id, source } => {
            for (name, choice) in order.iter().zip(&choices) {
                let measurements: Vec<NewMeasurement> = by_galaxy[name]
                    .iter()
                    .map(|r| r.measurement.clone())
                    .collect();
                let keys: Vec<RowKey> = by_galaxy[name].iter().map(|r| r.row.clone()).collect();
                submissions::create_in(
                    tx,
                    account_id,
                    source,
                    choice,
                    &measurements,
                    &keys,
                    "CSV import",
                )
                .await
                .map_err(|e| row_fault(e, by_galaxy[name][0].line))?;
                done += measurements.len();
                report.measurements += measurements.len();
                report.submissions += 1;
                progress(done, total);
            }
        }
        ImportMode::Accepted => {
            // First the version, so the history spans of what follows start at it
            // (migration 8).
            history::bump_version(tx).await?;
            let submission_id = galaxies::insert_submission(
                tx,
                None,
                SubmissionSource::Import,
                SubmissionState::Accepted,
                "Vetted catalog imported from the command line",
                None,
            )
            .await?;
            report.submissions = 1;
            let new: Vec<&NewGalaxy> = choices
                .iter()
                .filter_map(|c| match c {
                    GalaxyChoice::New(g) => Some(g),
                    GalaxyChoice::Existing(_) => None,
                })
                .collect();
            let mut new_ids = galaxies::insert_galaxies(tx, &new).await?.into_iter();
            let mut stored: Vec<(galaxies::MeasurementRow<'_>, u64)> = Vec::with_capacity(total);
            for (name, choice) in order.iter().zip(&choices) {
                let galaxy_id = match choice {
                    GalaxyChoice::Existing(id) => *id,
                    GalaxyChoice::New(_) => new_ids.next().ok_or(sqlx::Error::RowNotFound)?,
                };
                for r in &by_galaxy[name] {
                    stored.push(((galaxy_id, &r.measurement, &r.row), r.line));
                }
            }
            // In slices, so that the progress line moves while a large file is stored; the
            // callback still hears of every row (it draws only when its bar grows).
            for part in stored.chunks(PROGRESS_ROWS) {
                let batch: Vec<galaxies::MeasurementRow<'_>> =
                    part.iter().map(|(row, _)| *row).collect();
                galaxies::insert_measurements(tx, submission_id, &batch)
                    .await
                    .map_err(|(i, e)| row_fault(SubmissionError::Db(e), part[i].1))?;
                for _ in part {
                    done += 1;
                    report.measurements += 1;
                    progress(done, total);
                }
            }
            galaxies::adopt_submission(tx, submission_id).await?;
            history::record(
                tx,
                &NewEvent {
                    account_id: None,
                    action: "catalog_imported",
                    entity: "submission",
                    entity_id: Some(submission_id),
                    summary: format!(
                        "Imported and adopted {} measurement(s), {} new galaxies.",
                        report.measurements, report.new_galaxies
                    ),
                },
            )
            .await?;
        }
    }
    Ok((report, Outcome::Commit))
}

/// A failure while writing one row: a schema check becomes a row fault, the rest stays a
/// database failure.
fn row_fault(e: SubmissionError, line: u64) -> ImportError {
    match e {
        SubmissionError::Db(sqlx::Error::Database(db)) if db.message().contains("CHECK") => {
            ImportError::Rows(vec![RowError {
                file: FILE,
                line,
                column: "(row)",
                message: "a value is outside the range the catalog accepts".into(),
            }])
        }
        SubmissionError::Db(e) => ImportError::Db(e),
        other => ImportError::Rows(vec![RowError {
            file: FILE,
            line,
            column: "galaxy",
            message: other.to_string(),
        }]),
    }
}

/// Parse and import a catalog text, CSV or JSON (see [`parse_catalog`] and [`import_rows`]).
///
/// # Errors
/// As those two.
pub async fn import_csv(
    pool: &SqlitePool,
    text: &str,
    mode: ImportMode,
    progress: &mut (dyn FnMut(usize, usize) + Send),
) -> Result<ImportReport, ImportError> {
    let rows = parse_catalog(text).map_err(ImportError::Rows)?;
    import_rows(pool, &rows, mode, progress).await
}

#[derive(sqlx::FromRow)]
struct ExportRow {
    name: String,
    morphology: String,
    bulge_kind: String,
    centre_kind: String,
    distance_mpc: f64,
    distance_err_mpc: f64,
    distance_method: String,
    activity: String,
    #[sqlx(try_from = "String")]
    quantity: Quantity,
    value_text: String,
    value_scale: String,
    limit_confidence_sigma: Option<f64>,
    method: String,
    sigma_definition: String,
    aperture: String,
    band: String,
    source_distance_mpc: Option<f64>,
    resolution_arcsec: Option<f64>,
    reference: String,
    note: String,
    row_key: String,
    log_value: f64,
    err_minus_dex: f64,
    err_plus_dex: f64,
    upper_limit: bool,
    #[sqlx(flatten)]
    virial: ExportVirial,
}

/// The stored broad-line measurement of a row (table `virial_measurement`), all None for a
/// row without one.
#[derive(sqlx::FromRow)]
struct ExportVirial {
    v_line: Option<String>,
    v_width_definition: Option<String>,
    v_width_spectrum: Option<String>,
    v_lag_days: Option<f64>,
    v_lag_err_minus_days: Option<f64>,
    v_lag_err_plus_days: Option<f64>,
    v_width_km_s: Option<f64>,
    v_width_err_km_s: Option<f64>,
    v_log_l5100_erg_s: Option<f64>,
    v_assumed_log_f: Option<f64>,
    v_calibration: Option<String>,
}

/// The shortest decimal text of the linear factor `10^log_f` that reads back (through the
/// `virial_factor` cell's `log10`) to `log_f` bit for bit, so an export re-imports to the same
/// stored number and exports again to the same text; Rust's shortest round-trip form of
/// `10^log_f` when no shorter text does.
fn factor_text(log_f: f64) -> String {
    let f = 10f64.powf(log_f);
    for digits in 0..17 {
        let candidate: f64 = format!("{f:.digits$e}").parse().unwrap_or(f64::NAN);
        if candidate.log10().to_bits() == log_f.to_bits() {
            return candidate.to_string();
        }
    }
    f.to_string()
}

impl ExportRow {
    /// Whether the stored value was computed from the broad-line cells (the value cell was
    /// empty): the export leaves the value cell empty again, so a re-import computes it.
    fn computed(&self) -> bool {
        self.virial.v_line.is_some()
            && (self.value_text == super::virial::COMPUTED_VALUE_TEXT
                || self.value_text == super::virial::COMPUTED_SINGLE_EPOCH_TEXT)
    }

    /// The row's cells in [`COLUMNS`] order, as import reads them.
    fn cells(&self) -> [String; 31] {
        let confidence = match self.limit_confidence_sigma {
            Some(c) if c < 1.5 => "1",
            Some(c) if c < 2.5 => "2",
            Some(_) => "3",
            None => "",
        };
        let opt = |v: Option<f64>| v.map_or(String::new(), |v| v.to_string());
        let v = &self.virial;
        let computed = self.computed();
        let lag_err = match (v.v_lag_err_minus_days, v.v_lag_err_plus_days) {
            (Some(m), Some(p)) if m == 0.0 && p == 0.0 => String::new(),
            (Some(m), Some(p)) if m.to_bits() == p.to_bits() => m.to_string(),
            (Some(m), Some(p)) => format!("+{p}/-{m}"),
            _ => String::new(),
        };
        let width_err = match v.v_width_err_km_s {
            Some(e) if e > 0.0 => e.to_string(),
            _ => String::new(),
        };
        let factor = match v.v_assumed_log_f {
            Some(log_f) if !computed => factor_text(log_f),
            _ => String::new(),
        };
        [
            self.name.clone(),
            self.morphology.clone(),
            self.bulge_kind.clone(),
            self.centre_kind.clone(),
            self.distance_mpc.to_string(),
            self.distance_err_mpc.to_string(),
            self.distance_method.clone(),
            // "unknown" is what an empty cell reads as: written empty, so a row of a galaxy
            // without a class keeps the fingerprint it had before the column existed.
            if self.activity == "unknown" {
                String::new()
            } else {
                self.activity.clone()
            },
            self.quantity.as_str().to_owned(),
            if computed {
                String::new()
            } else {
                self.value_text.clone()
            },
            self.value_scale.clone(),
            confidence.to_owned(),
            self.method.clone(),
            self.sigma_definition.clone(),
            self.aperture.clone(),
            self.band.clone(),
            opt(self.source_distance_mpc),
            opt(self.resolution_arcsec),
            self.reference.clone(),
            self.note.clone(),
            v.v_line.clone().unwrap_or_default(),
            v.v_width_definition.clone().unwrap_or_default(),
            v.v_width_spectrum.clone().unwrap_or_default(),
            opt(v.v_lag_days),
            lag_err,
            opt(v.v_width_km_s),
            width_err,
            opt(v.v_log_l5100_erg_s),
            factor,
            v.v_calibration.clone().unwrap_or_default(),
            galaxies::public_row_key(&self.row_key),
        ]
    }
}

/// The columns of an [`ExportRow`], over `measurement m` and `galaxy g` (left-joined to
/// `virial_measurement v`, which the statements join as `EXPORT_VIRIAL_JOIN`).
const EXPORT_SELECT: &str =
    "select g.name, g.morphology, g.bulge_kind, g.centre_kind, g.distance_mpc,
                g.distance_err_mpc, g.distance_method, g.activity, m.quantity, m.value_text,
                m.value_scale, m.limit_confidence_sigma, m.method, m.sigma_definition,
                m.aperture, m.band, m.source_distance_mpc, m.resolution_arcsec, m.reference,
                m.note, ifnull(m.row_key, 'measurement-' || m.measurement_id) as row_key,
                m.log_value, m.err_minus_dex, m.err_plus_dex, m.upper_limit,
                v.line as v_line, v.width_definition as v_width_definition,
                v.width_spectrum as v_width_spectrum, v.lag_days as v_lag_days,
                v.lag_err_minus_days as v_lag_err_minus_days,
                v.lag_err_plus_days as v_lag_err_plus_days, v.width_km_s as v_width_km_s,
                v.width_err_km_s as v_width_err_km_s, v.log_l5100_erg_s as v_log_l5100_erg_s,
                v.assumed_log_f as v_assumed_log_f, v.calibration as v_calibration";

/// The join of an export's statements that brings in [`ExportVirial`].
const EXPORT_VIRIAL_JOIN: &str =
    "left join virial_measurement v on v.measurement_id = m.measurement_id";

/// The fingerprint ([`row_key_of`]) of the cells an export writes for a measurement, or
/// `None` when it is gone.
async fn exported_fingerprint(
    tx: &mut sqlx::Transaction<'_, sqlx::Sqlite>,
    measurement_id: i64,
) -> sqlx::Result<Option<String>> {
    let row: Option<ExportRow> = sqlx::query_as(sqlx::AssertSqlSafe(format!(
        "{EXPORT_SELECT}
           from measurement m join galaxy g on g.galaxy_id = m.galaxy_id
           {EXPORT_VIRIAL_JOIN}
          where m.measurement_id = ?"
    )))
    .bind(measurement_id)
    .fetch_optional(&mut **tx)
    .await?;
    Ok(row.and_then(|row| {
        let cells = row.cells();
        let cell = |c: &'static str| {
            COLUMNS
                .iter()
                .position(|k| *k == c)
                .map_or("", |i| cells[i].as_str())
        };
        row_key_of(&cell).ok().and_then(|k| k.sha256)
    }))
}

/// The rows adopted at catalog version `version` (`None`: the current one), with the version
/// and when it was made, read in one transaction so they agree. Read from the history
/// (migration 8) whichever the version, so a version's export is the same whenever it is made.
async fn adopted_rows(
    pool: &SqlitePool,
    version: Option<i64>,
) -> anyhow::Result<(Vec<ExportRow>, i64, String, super::virial::Factors)> {
    let mut tx = pool.begin().await?;
    let version = match version {
        Some(v) => v,
        None => super::history::current_version(&mut *tx).await?,
    };
    let made_at = super::history::made_at(&mut *tx, version)
        .await?
        .unwrap_or_default();
    let rows: Vec<ExportRow> = sqlx::query_as(sqlx::AssertSqlSafe(format!(
        "{EXPORT_SELECT}
           from adopted_value_span a
           join measurement m on m.measurement_id = a.measurement_id
           join galaxy_span g on g.galaxy_id = a.galaxy_id
           {EXPORT_VIRIAL_JOIN}
          where a.valid_from_version <= ?1
            and (a.valid_until_version is null or a.valid_until_version > ?1)
            and g.valid_from_version <= ?1
            and (g.valid_until_version is null or g.valid_until_version > ?1)
       order by g.name, case m.quantity when 'bh_mass' then 0 when 'sigma' then 1
                                        when 'bulge_mass' then 2 else 3 end, m.band"
    )))
    .bind(version)
    .fetch_all(&mut *tx)
    .await?;
    let factors = super::virial::factors_at(&mut *tx, version).await?;
    tx.commit().await?;
    Ok((rows, version, made_at, factors))
}

/// One adopted measurement as the catalog exports write it: its cells in [`COLUMNS`] order (the
/// strings of the CSV file, before the formula guard) and the stored canonical numbers.
#[derive(Debug, Clone, PartialEq)]
pub struct CatalogRow {
    /// The cells, in [`COLUMNS`] order.
    pub cells: [String; 31],
    /// log10 of the value in its quantity's unit.
    pub log_value: f64,
    /// Lower error, dex.
    pub err_minus_dex: f64,
    /// Upper error, dex.
    pub err_plus_dex: f64,
    /// Whether the value is an upper limit.
    pub upper_limit: bool,
    /// The galaxy's activity class word (`unknown` included, which the cell leaves empty).
    pub activity: String,
    /// For a reverberation or single-epoch mass: its width measure and factors.
    pub virial: Option<VirialFactorUsed>,
}

/// The virial factor of a broad-line mass in a catalog export.
#[derive(Debug, Clone, PartialEq)]
pub struct VirialFactorUsed {
    /// The width measure word (`sigma_line` or `fwhm`).
    pub width_definition: String,
    /// log10 of the factor the stored mass assumed (None: not known, never rescaled).
    pub assumed_log_f: Option<f64>,
    /// log10 ⟨f⟩ adopted at the exported version and applied to the mass in the relations
    /// (None when the mass is not rescaled).
    pub log_f_applied: Option<f64>,
}

impl ExportRow {
    /// The export's view of the row's virial factor at the factors in force.
    fn factor_used(&self, factors: &super::virial::Factors) -> Option<VirialFactorUsed> {
        let width = self.virial.v_width_definition.as_deref()?;
        let applied = match (
            self.virial.v_assumed_log_f,
            width.parse::<super::model::WidthDefinition>(),
        ) {
            (Some(_), Ok(w)) => Some(factors.of(w).0),
            _ => None,
        };
        Some(VirialFactorUsed {
            width_definition: width.to_owned(),
            assumed_log_f: self.virial.v_assumed_log_f,
            log_f_applied: applied,
        })
    }
}

/// The rows adopted at `version` (`None`: the current one) as every catalog export writes them
/// (the CSV and JSON here, the VOTable in `export`), and the catalog version they were read at.
///
/// # Errors
/// When the database cannot be read.
pub async fn adopted_catalog(
    pool: &SqlitePool,
    version: Option<i64>,
) -> anyhow::Result<(Vec<CatalogRow>, i64)> {
    let (rows, version, _, factors) = adopted_rows(pool, version).await?;
    let rows = rows
        .iter()
        .map(|r| CatalogRow {
            cells: r.cells(),
            log_value: r.log_value,
            err_minus_dex: r.err_minus_dex,
            err_plus_dex: r.err_plus_dex,
            upper_limit: r.upper_limit,
            activity: r.activity.clone(),
            virial: r.factor_used(&factors),
        })
        .collect();
    Ok((rows, version))
}

/// The catalog adopted at `version` (`None`: the current one) as CSV text in the import
/// format, galaxies by name, and the catalog
/// version it was read at (one read transaction, so the two agree). Each row carries its row
/// key, so importing the export again adds nothing.
///
/// # Errors
/// When the database cannot be read.
pub async fn export_csv(pool: &SqlitePool, version: Option<i64>) -> anyhow::Result<(String, i64)> {
    let (rows, version, _, _) = adopted_rows(pool, version).await?;
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(COLUMNS)?;
    for r in &rows {
        let cells: Vec<String> = COLUMNS
            .iter()
            .zip(r.cells())
            .map(|(column, cell)| {
                if NUMBER_COLUMNS.contains(column) {
                    cell
                } else {
                    guard_text_cell(&cell).into_owned()
                }
            })
            .collect();
        w.write_record(&cells)?;
    }
    let bytes = w.into_inner().map_err(|e| anyhow::anyhow!("{e}"))?;
    Ok((String::from_utf8(bytes)?, version))
}

/// The name of the JSON export format (its `format` key).
pub const JSON_FORMAT: &str = "massline-catalog";

/// The adopted catalog as JSON, stamped with the catalog version and the time of export:
///
/// ```json
/// {"format": "massline-catalog", "format_version": 1, "catalog_version": 7,
///  "catalog_version_made_at": "2026-12-02T04:00:00.000Z", "columns": ["galaxy", …, "row_key"],
///  "rows": [{"galaxy": "…", …, "row_key": "…",
///            "derived": {"log_value": 8.38, "err_minus_dex": 0.1, "err_plus_dex": 0.1,
///                        "upper_limit": false, "activity": "seyfert1",
///                        "virial": {"method": "reverberation", "width_definition": "sigma_line",
///                                   "assumed_log_f": 0.0, "log_f_applied": 0.64,
///                                   "log_value_at_adopted_f": 7.53}}}]}
/// ```
///
/// `virial` is there for reverberation and single-epoch masses only: the factor the stored
/// mass assumed, the adopted log ⟨f⟩ applied at this version (null when the mass is not
/// rescaled: its source's factor is not known) and the mass so rescaled.
///
/// Every cell is the string the CSV export has (the value as entered, in its unit), so the
/// file re-imports to the same catalog; `derived` holds the stored canonical numbers (log10 in
/// the quantity's unit, dex) for scripts and is ignored on import. Returns the text and the
/// catalog version.
///
/// # Errors
/// When the database cannot be read.
pub async fn export_json(pool: &SqlitePool, version: Option<i64>) -> anyhow::Result<(String, i64)> {
    let (rows, version, made_at, factors) = adopted_rows(pool, version).await?;
    let rows: Vec<serde_json::Value> = rows
        .iter()
        .map(|r| {
            let mut object: serde_json::Map<String, serde_json::Value> = COLUMNS
                .iter()
                .zip(r.cells())
                .map(|(c, v)| ((*c).to_owned(), serde_json::Value::String(v)))
                .collect();
            let mut derived = serde_json::json!({
                "log_value": r.log_value,
                "err_minus_dex": r.err_minus_dex,
                "err_plus_dex": r.err_plus_dex,
                "upper_limit": r.upper_limit,
                "activity": r.activity,
            });
            if let Some(v) = r.factor_used(&factors) {
                derived["virial"] = serde_json::json!({
                    "method": r.method,
                    "width_definition": v.width_definition,
                    "assumed_log_f": v.assumed_log_f,
                    "log_f_applied": v.log_f_applied,
                    "log_value_at_adopted_f": v.assumed_log_f.zip(v.log_f_applied)
                        .map(|(assumed, applied)| r.log_value + applied - assumed),
                });
            }
            object.insert("derived".to_owned(), derived);
            serde_json::Value::Object(object)
        })
        .collect();
    let doc = serde_json::json!({
        "format": JSON_FORMAT,
        "format_version": 1,
        "catalog_version": version,
        "catalog_version_made_at": made_at,
        "columns": COLUMNS,
        "rows": rows,
    });
    Ok((serde_json::to_string_pretty(&doc)?, version))
}

/// Read every row of a JSON catalog (the format [`export_json`] writes; `rows` is what
/// matters: objects whose keys are [`COLUMNS`], values strings, numbers or null). Row numbers in
/// the report count from 1.
///
/// # Errors
/// Every faulty row, or one fault for a document that is not a catalog.
pub fn parse_catalog_json(text: &str) -> Result<Vec<ImportRow>, Vec<RowError>> {
    let whole = |message: String| {
        vec![RowError {
            file: FILE,
            line: 0,
            column: "(file)",
            message,
        }]
    };
    let doc: serde_json::Value =
        serde_json::from_str(text).map_err(|e| whole(format!("the JSON cannot be read: {e}")))?;
    let Some(rows) = doc.get("rows").and_then(serde_json::Value::as_array) else {
        return Err(whole(
            "a JSON catalog is an object with a \"rows\" array".to_owned(),
        ));
    };
    let mut records = Vec::with_capacity(rows.len());
    let mut faults = Vec::new();
    for (i, row) in rows.iter().enumerate() {
        let line = i as u64 + 1;
        let Some(object) = row.as_object() else {
            faults.push(RowError {
                file: FILE,
                line,
                column: "(row)",
                message: "a row is a JSON object".into(),
            });
            continue;
        };
        let mut record = Record::new();
        for (key, value) in object {
            if key == "derived" {
                continue;
            }
            if !COLUMNS.contains(&key.as_str()) && key != CONFIRM_COLUMN {
                faults.push(RowError {
                    file: FILE,
                    line,
                    column: "(row)",
                    message: format!(
                        "'{}' is not a column of the catalog format",
                        key.chars().take(40).collect::<String>()
                    ),
                });
                continue;
            }
            let text = match value {
                serde_json::Value::String(v) => v.trim().to_owned(),
                serde_json::Value::Number(n) => n.to_string(),
                serde_json::Value::Null => String::new(),
                serde_json::Value::Bool(b) if key == CONFIRM_COLUMN => b.to_string(),
                _ => {
                    faults.push(RowError {
                        file: FILE,
                        line,
                        column: "(row)",
                        message: format!("the cell '{key}' is a string, a number or null"),
                    });
                    continue;
                }
            };
            record.insert(key.clone(), text);
        }
        records.push((line, record));
    }
    if !faults.is_empty() {
        return Err(faults);
    }
    parse_records(records)
}

/// Read a catalog file, CSV or JSON (a text whose first non-blank character is `{`).
///
/// # Errors
/// As [`parse_catalog_csv`] and [`parse_catalog_json`].
pub fn parse_catalog(text: &str) -> Result<Vec<ImportRow>, Vec<RowError>> {
    if text.trim_start().starts_with('{') {
        parse_catalog_json(text)
    } else {
        parse_catalog_csv(text)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalog::demo::load_demo;

    async fn temp_pool() -> (tempfile::TempDir, SqlitePool) {
        let dir = tempfile::tempdir().unwrap();
        let pool = crate::catalog::connect(&dir.path().join("t.sqlite"))
            .await
            .unwrap();
        (dir, pool)
    }

    async fn count(pool: &SqlitePool, table: &str) -> i64 {
        sqlx::query_scalar(sqlx::AssertSqlSafe(format!("select count(*) from {table}")))
            .fetch_one(pool)
            .await
            .unwrap()
    }

    const HEADER: &str = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,limit_confidence_sigma,method,sigma_definition,aperture,band,source_distance_mpc,resolution_arcsec,reference,note";

    #[tokio::test]
    async fn the_demo_catalog_exports_and_reimports_to_the_same_adopted_values() {
        let (_a, first) = temp_pool().await;
        load_demo(&first).await.unwrap();
        let (text, version) = export_csv(&first, None).await.unwrap();
        assert_eq!(version, 1);
        let (_b, second) = temp_pool().await;
        let mut calls = 0;
        let report = import_csv(&second, &text, ImportMode::Accepted, &mut |_, _| calls += 1)
            .await
            .unwrap();
        assert_eq!(calls, report.measurements);
        assert_eq!(
            report.measurements as i64,
            count(&first, "adopted_value").await
        );
        let (again, version2) = export_csv(&second, None).await.unwrap();
        assert_eq!(again, text, "export → import → export is the identity");
        assert_eq!(version2, 1);
        // The adopted canonical values agree to the bit (the same text, the same parser).
        let q = "select g.name, m.quantity, m.band, m.log_value, m.err_dex, m.upper_limit
                   from adopted_value a join measurement m using (measurement_id)
                   join galaxy g on g.galaxy_id = a.galaxy_id order by 1, 2, 3";
        let a: Vec<(String, String, String, f64, f64, bool)> =
            sqlx::query_as(q).fetch_all(&first).await.unwrap();
        let b: Vec<(String, String, String, f64, f64, bool)> =
            sqlx::query_as(q).fetch_all(&second).await.unwrap();
        assert_eq!(a.len(), b.len());
        for (x, y) in a.iter().zip(&b) {
            assert_eq!((&x.0, &x.1, &x.2, x.5), (&y.0, &y.1, &y.2, y.5));
            assert_eq!(x.3.to_bits(), y.3.to_bits(), "{x:?} vs {y:?}");
            assert_eq!(x.4.to_bits(), y.4.to_bits(), "{x:?} vs {y:?}");
        }
    }

    /// A catalog CSV line from (column, cell) pairs, every other column of [`COLUMNS`] (but
    /// `row_key`) empty.
    fn line_of(cells: &[(&str, &str)]) -> String {
        COLUMNS[..30]
            .iter()
            .map(|c| {
                cells
                    .iter()
                    .find(|(k, _)| k == c)
                    .map_or("", |(_, v)| v)
                    .to_owned()
            })
            .collect::<Vec<_>>()
            .join(",")
    }

    /// Invented AGN rows: a computed reverberation mass, typed ones with a known and an
    /// unknown factor, computed single-epoch masses by both calibrations, a typed single-epoch
    /// mass, and a quiescent galaxy with a dynamical mass; five activity classes.
    fn agn_catalog() -> String {
        let galaxy = |name: &'static str, activity: &'static str| {
            vec![
                ("galaxy", name),
                ("morphology", "elliptical"),
                ("bulge_kind", "classical"),
                ("centre_kind", "core"),
                ("distance_mpc", "20"),
                ("distance_err_mpc", "1"),
                ("distance_method", "sbf"),
                ("activity", activity),
            ]
        };
        let with = |mut base: Vec<(&'static str, &'static str)>,
                    more: &[(&'static str, &'static str)]| {
            base.extend_from_slice(more);
            line_of(&base)
        };
        let sigma = [
            ("quantity", "sigma"),
            ("value", "150 ± 10"),
            ("sigma_definition", "sigma_e"),
        ];
        let lines = [
            COLUMNS[..30].join(","),
            with(galaxy("Tesk 61", "seyfert1"), &sigma),
            with(
                galaxy("Tesk 61", "seyfert1"),
                &[
                    ("quantity", "bh_mass"),
                    ("method", "reverberation"),
                    ("source_distance_mpc", "21"),
                    ("lag_days", "10.3"),
                    ("lag_err_days", "+1.4/-1.1"),
                    ("width_km_s", "2000"),
                    ("width_err_km_s", "100"),
                    ("log_l5100_erg_s", "43.5"),
                ],
            ),
            with(galaxy("Tesk 62", "quasar"), &sigma),
            with(
                galaxy("Tesk 62", "quasar"),
                &[
                    ("quantity", "bh_mass"),
                    ("value", "3e7 ± 0.5e7"),
                    ("method", "reverberation"),
                    ("width_definition", "fwhm"),
                    ("width_spectrum", "mean"),
                    ("lag_days", "12"),
                    ("lag_err_days", "2"),
                    ("virial_factor", "5.5"),
                ],
            ),
            with(
                galaxy("Tesk 63", "seyfert2"),
                &[
                    ("quantity", "bh_mass"),
                    ("value", "log 7.3 ± 0.2"),
                    ("scale", "log10"),
                    ("method", "reverberation"),
                    ("line", "MgII"),
                ],
            ),
            with(
                galaxy("Tesk 64", "quasar"),
                &[
                    ("quantity", "bh_mass"),
                    ("method", "single_epoch"),
                    ("width_km_s", "4000"),
                    ("log_l5100_erg_s", "44"),
                    ("calibration", "vp06"),
                ],
            ),
            with(
                galaxy("Tesk 65", "liner"),
                &[
                    ("quantity", "bh_mass"),
                    ("method", "single_epoch"),
                    ("width_km_s", "3000"),
                    ("width_err_km_s", "300"),
                    ("log_l5100_erg_s", "44.5"),
                    ("calibration", "r_l_bentz13"),
                ],
            ),
            with(
                galaxy("Tesk 66", ""),
                &[
                    ("quantity", "bh_mass"),
                    ("value", "5e7 ± 1e7"),
                    ("method", "single_epoch"),
                    ("virial_factor", "4.3"),
                    ("calibration", "r_l_bentz13"),
                ],
            ),
            with(galaxy("Tesk 67", "quiescent"), &sigma),
            with(
                galaxy("Tesk 67", "quiescent"),
                &[
                    ("quantity", "bh_mass"),
                    ("value", "2e8 ± 0.3e8"),
                    ("method", "stellar_dynamics"),
                    ("source_distance_mpc", "20"),
                    ("resolution_arcsec", "0.1"),
                ],
            ),
        ];
        lines.join("\n") + "\n"
    }

    #[tokio::test]
    async fn agn_rows_export_and_reimport_to_the_same_file_and_the_same_fitted_rows() {
        let (_a, first) = temp_pool().await;
        import_csv(&first, &agn_catalog(), ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        let (text, version) = export_csv(&first, None).await.unwrap();
        let (_b, second) = temp_pool().await;
        import_csv(&second, &text, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        let (again, version2) = export_csv(&second, None).await.unwrap();
        assert_eq!(again, text, "export → import → export is the identity");
        let (json, _) = export_json(&first, None).await.unwrap();
        let (json2, _) = export_json(&second, None).await.unwrap();
        let strip = |t: &str| {
            let mut v: serde_json::Value = serde_json::from_str(t).unwrap();
            v["catalog_version_made_at"] = serde_json::Value::Null;
            v
        };
        assert_eq!(strip(&json), strip(&json2));
        // The rows the fits read agree to the bit: the same masses at the adopted factors.
        let a = super::super::relation_rows::relation_rows_at(&first, version)
            .await
            .unwrap();
        let b = super::super::relation_rows::relation_rows_at(&second, version2)
            .await
            .unwrap();
        assert_eq!(a.len(), 7);
        assert_eq!(a, b);
        // What the file says: computed rows have an empty value, typed ones their text and f.
        let rows = parse_catalog_csv(&text).unwrap();
        let by = |name: &str| {
            rows.iter()
                .find(|r| {
                    r.galaxy_name == name && r.measurement.quantity == Quantity::BlackHoleMass
                })
                .unwrap()
        };
        assert!(text.contains(",10.3,'+1.4/-1.1,2000,100,43.5,,,"), "{text}");
        assert_eq!(
            by("Tesk 61").measurement.value_text,
            super::super::virial::COMPUTED_VALUE_TEXT
        );
        let typed = by("Tesk 62").measurement.virial.clone().unwrap();
        assert_eq!(typed.assumed_log_f, Some(5.5f64.log10()));
        assert!(text.contains(",5.5,"), "{text}");
        assert_eq!(
            by("Tesk 63")
                .measurement
                .virial
                .clone()
                .unwrap()
                .assumed_log_f,
            None
        );
        assert_eq!(
            by("Tesk 64").measurement.value_text,
            super::super::virial::COMPUTED_SINGLE_EPOCH_TEXT
        );
        // Activity classes travel; "unknown" is the empty cell.
        let activity: Vec<(String, String)> =
            sqlx::query_as("select name, activity from galaxy order by name")
                .fetch_all(&second)
                .await
                .unwrap();
        let words: Vec<&str> = activity.iter().map(|(_, a)| a.as_str()).collect();
        assert_eq!(
            words,
            [
                "seyfert1",
                "quasar",
                "seyfert2",
                "quasar",
                "liner",
                "unknown",
                "quiescent"
            ]
        );
        // The virial factor applied is the adopted one: log ⟨f⟩ = 0.64 for σ_line at version
        // 0 (migration 9), 0.05 for the FWHM; none for the unknown factor and vp06.
        let f = |name: &str| a.iter().find(|r| r.name == name).unwrap().mbh_log_f;
        assert_eq!(f("Tesk 61"), Some(0.64));
        assert_eq!(f("Tesk 62"), Some(0.05));
        assert_eq!(f("Tesk 63"), None);
        assert_eq!(f("Tesk 64"), None);
        assert_eq!(f("Tesk 67"), None);
        // Importing the export into the catalog it came from adds nothing.
        let report = import_csv(&first, &text, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!(report.skipped, 10);
        assert_eq!(report.measurements, 0);
    }

    #[test]
    fn a_row_without_the_agn_cells_keeps_its_old_fingerprint() {
        let cells = [
            ("galaxy", "Tesk 70"),
            ("morphology", "elliptical"),
            ("quantity", "sigma"),
            ("value", "150 ± 10"),
            ("sigma_definition", "sigma_e"),
        ];
        let cell = |c: &'static str| cells.iter().find(|(k, _)| *k == c).map_or("", |(_, v)| *v);
        // The fingerprint as it was before the AGN columns: the 19 content cells joined by
        // U+001F.
        let old: Vec<&str> = FINGERPRINT_COLUMNS.iter().map(|c| cell(c)).collect();
        let expected = sha256_hex(&old.join("\u{1f}"));
        assert_eq!(row_key_of(&cell).unwrap().sha256, Some(expected.clone()));
        // An AGN cell changes it.
        let with_activity = |c: &'static str| if c == "activity" { "seyfert1" } else { cell(c) };
        assert_ne!(row_key_of(&with_activity).unwrap().sha256, Some(expected));
    }

    #[tokio::test]
    async fn one_bad_row_writes_nothing_and_every_bad_row_is_reported() {
        let (_d, pool) = temp_pool().await;
        let text = format!(
            "{HEADER}\n\
             Tesk 31,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,\n\
             Tesk 31,,,,,,,bh_mass,-2e8,,,stellar_dynamics,,,,20,0.1,,\n\
             Tesk 32,spiral,pseudo,unknown,15,1,cepheid,bh_mass,1e7 ± 2e6,,,teleport,,,,15,0.05,,\n"
        );
        let err = import_csv(
            &pool,
            &text,
            ImportMode::Pending {
                account_id: None,
                source: SubmissionSource::Csv,
            },
            &mut |_, _| {},
        )
        .await
        .unwrap_err();
        let ImportError::Rows(rows) = err else {
            panic!("expected row faults, got {err}")
        };
        let at: Vec<(u64, &str)> = rows.iter().map(|r| (r.line, r.column)).collect();
        assert_eq!(at, vec![(3, "value"), (4, "method")], "{rows:?}");
        for table in ["galaxy", "submission", "measurement", "audit_event"] {
            assert_eq!(count(&pool, table).await, 0, "{table}");
        }
    }

    #[tokio::test]
    async fn rows_become_one_pending_submission_per_galaxy() {
        let (_d, pool) = temp_pool().await;
        let text = format!(
            "{HEADER}\n\
             Tesk 41,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,\n\
             Tesk 41,,,,,,,bh_mass,<3e7,,2,stellar_dynamics,,,,20,0.1,,\n\
             Tesk 42,spiral,pseudo,unknown,15,1,cepheid,bh_mass,log 7.1 ± 0.1,log10,,maser,,,,15,,,\n"
        );
        let report = import_csv(
            &pool,
            &text,
            ImportMode::Pending {
                account_id: None,
                source: SubmissionSource::Csv,
            },
            &mut |_, _| {},
        )
        .await
        .unwrap();
        assert_eq!(
            report,
            ImportReport {
                measurements: 3,
                new_galaxies: 2,
                submissions: 2,
                skipped: 0,
            }
        );
        assert_eq!(count(&pool, "adopted_value").await, 0);
        assert_eq!(submissions::review_queue(&pool).await.unwrap().len(), 2);
        let confidence: Option<f64> = sqlx::query_scalar(
            "select limit_confidence_sigma from measurement where upper_limit = 1",
        )
        .fetch_one(&pool)
        .await
        .unwrap();
        assert_eq!(confidence, Some(2.0));
        // A galaxy neither in the catalog nor described is a row fault.
        let err = import_csv(
            &pool,
            &format!("{HEADER}\nTesk 99,,,,,,,bh_mass,1e8,,,maser,,,,,,,\n"),
            ImportMode::Accepted,
            &mut |_, _| {},
        )
        .await
        .unwrap_err();
        assert!(
            matches!(err, ImportError::Rows(ref r) if r[0].line == 2),
            "{err}"
        );
    }

    /// `n` invented galaxies, three rows each (σ, black-hole mass, bulge mass), as catalog CSV
    /// with row keys; galaxy `i` has σ = 100 + i/10 km/s.
    fn survey_csv(n: usize) -> String {
        let mut text = format!("{HEADER},row_key\n");
        for i in 0..n {
            let sigma = format!("{:.1}", 100.0 + i as f64 / 10.0);
            text.push_str(&format!(
                "X {i:04},elliptical,classical,unknown,20,1,hubble_flow,sigma,{sigma} ± 5,,,,sigma_e,r_e,,,,Survey (invented),,x{i}-sigma\n\
                 X {i:04},,,,,,,bh_mass,8.1 ± 0.2,log10,,stellar_dynamics,,,,20,0.1,Survey (invented),,x{i}-mass\n\
                 X {i:04},,,,,,,bulge_mass,10.9 ± 0.12,log10,,photometric,,,,20,,Survey (invented),,x{i}-bulge\n"
            ));
        }
        text
    }

    async fn catalog_version(pool: &SqlitePool) -> i64 {
        history::current_version(pool).await.unwrap()
    }

    #[tokio::test]
    async fn a_large_file_is_adopted_whole_with_one_version_and_a_later_row_adopted() {
        let (_d, pool) = temp_pool().await;
        // 1,000 galaxies (3,000 rows: several batches of every statement), and a second σ of
        // X 0500 at the end, which replaces its first.
        let mut text = survey_csv(1000);
        text.push_str(
            "X 0500,,,,,,,sigma,321 ± 9,,,,sigma_e,r_e,,,,Later (invented),,x500-sigma-2\n",
        );
        let mut calls = 0;
        let report = import_csv(&pool, &text, ImportMode::Accepted, &mut |done, total| {
            calls += 1;
            assert_eq!(total, 3001);
            assert_eq!(done, calls);
        })
        .await
        .unwrap();
        assert_eq!(
            report,
            ImportReport {
                measurements: 3001,
                new_galaxies: 1000,
                submissions: 1,
                skipped: 0,
            }
        );
        assert_eq!(calls, 3001);
        assert_eq!(count(&pool, "galaxy").await, 1000);
        assert_eq!(count(&pool, "measurement").await, 3001);
        assert_eq!(count(&pool, "adopted_value").await, 3000);
        assert_eq!(catalog_version(&pool).await, 1);
        let events: Vec<(String, i64)> =
            sqlx::query_as("select action, catalog_version from audit_event")
                .fetch_all(&pool)
                .await
                .unwrap();
        assert_eq!(events, vec![("catalog_imported".to_owned(), 1)]);
        // Every galaxy has its own slug and its own adopted σ; X 0500 the later one.
        let slugs: i64 = sqlx::query_scalar("select count(distinct slug) from galaxy")
            .fetch_one(&pool)
            .await
            .unwrap();
        assert_eq!(slugs, 1000);
        let adopted_sigma = |name: &'static str| {
            let pool = pool.clone();
            async move {
                sqlx::query_scalar::<_, String>(
                    "select m.value_text from adopted_value a join measurement m using (measurement_id)
                       join galaxy g on g.galaxy_id = a.galaxy_id
                      where g.name = ? and a.quantity = 'sigma'",
                )
                .bind(name)
                .fetch_one(&pool)
                .await
                .unwrap()
            }
        };
        assert_eq!(adopted_sigma("X 0500").await, "321 ± 9");
        assert_eq!(adopted_sigma("X 0499").await, "149.9 ± 5");
        // Again: every row known (looked up in batches), nothing written, no version.
        let again = import_csv(&pool, &text, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!((again.measurements, again.skipped), (0, 3001));
        assert_eq!(catalog_version(&pool).await, 1);
        // A later file naming these galaxies finds them by name, and a new look-alike of one
        // of them ("X 05OO", letter O for zero) is refused.
        let more = format!(
            "{HEADER},row_key\n\
             X 0999,,,,,,,bh_mass,8.3 ± 0.2,log10,,stellar_dynamics,,,,20,0.1,Survey (invented),,x999-mass-2\n\
             X 05OO,spiral,pseudo,unknown,12,1,cepheid,sigma,90 ± 5,,,,sigma_e,r_e,,,,Survey (invented),,xO-sigma\n"
        );
        let err = import_csv(&pool, &more, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap_err();
        let ImportError::Rows(rows) = err else {
            panic!("expected row faults, got {err}")
        };
        assert_eq!(rows.len(), 1, "{rows:?}");
        assert_eq!(
            (rows[0].line, rows[0].column),
            (3, CONFIRM_COLUMN),
            "{rows:?}"
        );
        assert!(rows[0].message.contains("X 0500"), "{rows:?}");
        assert_eq!(count(&pool, "measurement").await, 3001);
    }

    #[tokio::test]
    async fn a_large_file_with_one_faulty_row_in_the_middle_stores_nothing() {
        let (_d, pool) = temp_pool().await;
        let text = survey_csv(1000);
        // A mass the reader refuses (log 81), on line 1503 (row 1502 of 3,000).
        let mut lines: Vec<String> = text.lines().map(str::to_owned).collect();
        lines[1502] = lines[1502].replacen("8.1 ± 0.2", "81 ± 0.2", 1);
        assert!(lines[1502].contains(",81 ± 0.2"), "{}", lines[1502]);
        let faulty = lines.join("\n");
        let err = import_csv(&pool, &faulty, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap_err();
        let ImportError::Rows(rows) = err else {
            panic!("expected row faults, got {err}")
        };
        assert_eq!(rows.iter().map(|r| r.line).collect::<Vec<_>>(), vec![1503]);
        // A value only the database's checks refuse (an error of 5 dex), on the row of line
        // 2203: the multi-row statement holding it fails, and the row is still named.
        let mut parsed = parse_catalog_csv(&text).unwrap();
        let middle = parsed.iter().position(|r| r.line == 2203).unwrap();
        parsed[middle].measurement.err_dex = 5.0;
        let err = import_rows(&pool, &parsed, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap_err();
        let ImportError::Rows(rows) = err else {
            panic!("expected row faults, got {err}")
        };
        assert_eq!(rows.iter().map(|r| r.line).collect::<Vec<_>>(), vec![2203]);
        for table in [
            "galaxy",
            "submission",
            "measurement",
            "adopted_value",
            "audit_event",
        ] {
            assert_eq!(count(&pool, table).await, 0, "{table}");
        }
        assert_eq!(catalog_version(&pool).await, 0);
        // The same file without the fault imports whole.
        parsed[middle].measurement.err_dex = 0.2;
        let report = import_rows(&pool, &parsed, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!(report.measurements, 3000);
        assert_eq!(catalog_version(&pool).await, 1);
    }

    fn pending() -> ImportMode {
        ImportMode::Pending {
            account_id: None,
            source: SubmissionSource::Csv,
        }
    }

    #[tokio::test]
    async fn the_readme_example_file_imports() {
        let text = include_str!("../../examples/catalog-example.csv");
        let rows = parse_catalog_csv(text).expect("the example file is valid");
        assert_eq!(rows.len(), 4);
        assert_eq!(rows[0].row.key, "tesk41-sigma");
        // A blank row key is made from the row's values.
        assert_eq!(rows[2].row.key.len(), 64);
        let (_d, pool) = temp_pool().await;
        let report = import_csv(&pool, text, pending(), &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!((report.measurements, report.new_galaxies), (4, 2));
    }

    #[test]
    fn the_measurement_columns_run_from_quantity_to_calibration() {
        assert_eq!(MEASUREMENT_COLUMNS.first(), Some(&"quantity"));
        assert_eq!(MEASUREMENT_COLUMNS.last(), Some(&"calibration"));
        assert_eq!(MEASUREMENT_COLUMNS.len(), 22);
        for column in super::super::virial::VIRIAL_COLUMNS {
            assert!(MEASUREMENT_COLUMNS.contains(&column), "{column}");
        }
        assert!(!MEASUREMENT_COLUMNS.contains(&"activity"));
    }

    #[test]
    fn faulty_rows_are_named_by_their_line_with_lf_and_crlf_line_ends() {
        let lf = format!(
            "{HEADER}\n\
             Tesk 71,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,\n\
             Tesk 71,,,,,,,bh_mass,-2e8,,,stellar_dynamics,,,,20,0.1,,\n\
             Tesk 71,,,,,,,sigma,9000,,,,sigma_e,r_e,,,,,\n"
        );
        let crlf = lf.replace('\n', "\r\n");
        for text in [&lf, &crlf] {
            let lines: Vec<u64> = parse_catalog_csv(text)
                .unwrap_err()
                .iter()
                .map(|e| e.line)
                .collect();
            assert_eq!(lines, vec![3, 4], "{:?}", &text[..30]);
        }
        // A quoted cell spanning two lines moves the rows after it down by one.
        let quoted = lf.replacen(
            "sigma,210 ± 10,,,,sigma_e,r_e,,,,,",
            "sigma,210 ± 10,,,,sigma_e,r_e,,,,\"a note\non two lines\",",
            1,
        );
        let lines: Vec<u64> = parse_catalog_csv(&quoted)
            .unwrap_err()
            .iter()
            .map(|e| e.line)
            .collect();
        assert_eq!(lines, vec![4, 5]);
    }

    #[tokio::test]
    async fn importing_a_file_twice_adds_nothing_in_either_mode() {
        let text = format!(
            "{HEADER}\n\
             Tesk 51,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,\n\
             Tesk 51,,,,,,,bh_mass,2e8 ± 0.4e8,,,stellar_dynamics,,,,20,0.1,,\n"
        );
        for mode in [pending(), ImportMode::Accepted] {
            let (_d, pool) = temp_pool().await;
            let first = import_csv(&pool, &text, mode, &mut |_, _| {})
                .await
                .unwrap();
            assert_eq!((first.measurements, first.skipped), (2, 0));
            let tables = ["galaxy", "submission", "measurement", "audit_event"];
            let mut before = Vec::new();
            for t in tables {
                before.push(count(&pool, t).await);
            }
            let version = crate::catalog::history::current_version(&pool)
                .await
                .unwrap();
            let second = import_csv(&pool, &text, mode, &mut |_, _| {})
                .await
                .unwrap();
            assert_eq!((second.measurements, second.skipped), (0, 2), "{mode:?}");
            assert_eq!(second.submissions, 0);
            for (t, b) in tables.iter().zip(before) {
                assert_eq!(
                    count(&pool, t).await,
                    b,
                    "{t} after the second import ({mode:?})"
                );
            }
            assert_eq!(
                crate::catalog::history::current_version(&pool)
                    .await
                    .unwrap(),
                version
            );
            // A file with one new row adds that row only.
            let more =
                format!("{text}Tesk 51,,,,,,,bulge_mass,3e11 ± 0.5e11,,,dynamical,,,,20,,,\n");
            let third = import_csv(&pool, &more, mode, &mut |_, _| {})
                .await
                .unwrap();
            assert_eq!((third.measurements, third.skipped), (1, 2));
        }
    }

    #[tokio::test]
    async fn a_row_key_reused_for_other_values_and_a_repeated_row_are_faults() {
        let (_d, pool) = temp_pool().await;
        let header = format!("{HEADER},row_key");
        let row = "Tesk 61,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,";
        let first = format!("{header}\n{row},k-1\n");
        import_csv(&pool, &first, pending(), &mut |_, _| {})
            .await
            .unwrap();
        let changed = format!("{header}\n{},k-1\n", row.replace("210 ± 10", "215 ± 10"));
        let err = import_csv(&pool, &changed, pending(), &mut |_, _| {})
            .await
            .unwrap_err();
        assert!(
            matches!(&err, ImportError::Rows(r) if r.len() == 1 && r[0].column == "row_key" && r[0].line == 2),
            "{err:?}"
        );
        // The same row twice in one file (blank keys: the same derived key).
        let twice = format!("{HEADER}\n{row}\n{row}\n");
        let err = parse_catalog_csv(&twice).unwrap_err();
        assert_eq!(
            err.iter().map(|e| (e.line, e.column)).collect::<Vec<_>>(),
            vec![(3, "row_key")]
        );
        assert_eq!(count(&pool, "measurement").await, 1);
    }

    #[test]
    fn a_report_lists_the_first_faulty_rows_and_counts_the_rest() {
        let body: String = (0..1000)
            .map(|i| format!("Tesk {i},,,,,,,bh_mass,-1,,,maser,,,,,,,\n"))
            .collect();
        let faults = parse_catalog_csv(&format!("{HEADER}\n{body}")).unwrap_err();
        assert_eq!(faults.len(), 1000);
        let (listed, summary) = reported_faults(&faults);
        assert_eq!(listed.len(), MAX_REPORTED_ROWS);
        assert_eq!(listed[0].line, 2);
        assert!(summary.starts_with("1000 faulty rows"), "{summary}");
        assert!(summary.contains("800 more"), "{summary}");
        let (listed, summary) = reported_faults(&faults[..3]);
        assert_eq!(listed.len(), 3);
        assert_eq!(summary, "3 faulty row(s); nothing was imported.");
    }

    #[tokio::test]
    async fn exported_row_keys_reveal_no_stored_key_and_still_reimport_to_nothing_new() {
        let (_a, first) = temp_pool().await;
        // Stored keys as a form request makes them (account id, client key) and as a member
        // chose them for a file row.
        let text = format!(
            "{HEADER},row_key\n\
             Tesk 91,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,,7:client-key-123#1\n\
             Tesk 91,,,,,,,bh_mass,2e8 ± 0.4e8,,,stellar_dynamics,,,,20,0.1,,,member1-private-batch\n"
        );
        import_csv(&first, &text, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        let (exported, _) = export_csv(&first, None).await.unwrap();
        for secret in ["7:", "client-key-123", "member1", "private-batch"] {
            assert!(!exported.contains(secret), "{secret} in {exported}");
        }
        let rows = parse_catalog_csv(&exported).unwrap();
        for r in &rows {
            assert!(
                r.row.key.starts_with("rk-") && r.row.key.len() == 67,
                "{}",
                r.row.key
            );
        }
        // Into the catalog it came from: nothing new.
        let again = import_csv(&first, &exported, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!((again.measurements, again.skipped), (0, 2));
        // Into an empty catalog: the same export, and again nothing new the second time.
        let (_b, second) = temp_pool().await;
        import_csv(&second, &exported, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!(export_csv(&second, None).await.unwrap().0, exported);
        let twice = import_csv(&second, &exported, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!(twice.measurements, 0);
    }

    #[tokio::test]
    async fn rows_stored_before_the_digest_column_get_it_when_the_database_opens() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.sqlite");
        let pool = crate::catalog::connect(&path).await.unwrap();
        load_demo(&pool).await.unwrap();
        let (before, _) = export_csv(&pool, None).await.unwrap();
        sqlx::query("update measurement set row_key_digest = null")
            .execute(&pool)
            .await
            .unwrap();
        pool.close().await;
        let pool = crate::catalog::connect(&path).await.unwrap();
        assert_eq!(
            count_where(&pool, "measurement", "row_key_digest is null").await,
            0
        );
        let again = import_csv(&pool, &before, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!(again.measurements, 0);
    }

    async fn count_where(pool: &SqlitePool, table: &str, condition: &str) -> i64 {
        sqlx::query_scalar(sqlx::AssertSqlSafe(format!(
            "select count(*) from {table} where {condition}"
        )))
        .fetch_one(pool)
        .await
        .unwrap()
    }

    #[test]
    fn formula_cells_get_one_quote_and_lose_it_on_import() {
        for (stored, written) in [
            ("=1+1", "'=1+1"),
            ("+cmd", "'+cmd"),
            ("-x", "'-x"),
            ("@SUM(A1)", "'@SUM(A1)"),
            ("\tx", "'\tx"),
            ("\rx", "'\rx"),
            // A cell that already starts with quotes before a formula character gets one more,
            // so that import, which drops one, gives it back unchanged.
            ("'=x", "''=x"),
            ("''+x", "'''+x"),
            ("'quoted", "'quoted"),
            ("X 214", "X 214"),
            ("", ""),
        ] {
            assert_eq!(guard_text_cell(stored), written, "{stored:?}");
            assert_eq!(unguard_cell(written), stored, "{written:?}");
        }
    }

    #[tokio::test]
    async fn an_export_neutralises_formula_cells_and_reimports_them_unchanged() {
        let (_a, first) = temp_pool().await;
        let text = format!(
            "{HEADER}\n\
             Tesk 81,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,-Invented 2031,=HYPERLINK(\"x\")\n\
             Tesk 81,,,,,,,bh_mass,2e8 ± 0.4e8,,,stellar_dynamics,,,,20,0.1,@Invented 2031,''=kept as typed\n"
        );
        import_csv(&first, &text, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        let (exported, _) = export_csv(&first, None).await.unwrap();
        let mut reader = csv::Reader::from_reader(exported.as_bytes());
        let header = reader.headers().unwrap().clone();
        for record in reader.records() {
            for (column, cell) in header.iter().zip(record.unwrap().iter()) {
                if NUMBER_COLUMNS.contains(&column) {
                    assert!(
                        cell.is_empty() || cell.parse::<f64>().is_ok(),
                        "{column}: {cell}"
                    );
                } else {
                    assert!(!cell.starts_with(FORMULA_STARTS), "{column}: {cell:?}");
                }
            }
        }
        assert!(exported.contains("'=HYPERLINK"), "{exported}");
        assert!(exported.contains("''=kept as typed"), "{exported}");
        // Into an empty catalog: the stored texts come back as they were typed, and the second
        // export is the first.
        let (_b, second) = temp_pool().await;
        import_csv(&second, &exported, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        let q = "select reference, note from measurement order by reference";
        let a: Vec<(String, String)> = sqlx::query_as(q).fetch_all(&first).await.unwrap();
        let b: Vec<(String, String)> = sqlx::query_as(q).fetch_all(&second).await.unwrap();
        assert_eq!(a, b);
        assert!(a.contains(&("@Invented 2031".to_owned(), "'=kept as typed".to_owned())));
        assert_eq!(export_csv(&second, None).await.unwrap().0, exported);
        // Into the catalog it came from: nothing new.
        let again = import_csv(&first, &exported, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!((again.measurements, again.skipped), (0, 2));
    }

    #[tokio::test]
    async fn the_json_export_is_stamped_and_reimports_to_the_same_catalog() {
        let (_a, first) = temp_pool().await;
        load_demo(&first).await.unwrap();
        let (json, version) = export_json(&first, None).await.unwrap();
        let doc: serde_json::Value = serde_json::from_str(&json).unwrap();
        assert_eq!(doc["format"], JSON_FORMAT);
        assert_eq!(doc["catalog_version"], version);
        assert!(
            doc["catalog_version_made_at"]
                .as_str()
                .unwrap()
                .ends_with('Z')
        );
        let n_rows = doc["rows"].as_array().unwrap().len();
        assert_eq!(n_rows as i64, count(&first, "adopted_value").await);
        // Into an empty catalog: the same CSV export comes out of both.
        let (_b, second) = temp_pool().await;
        let report = import_csv(&second, &json, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!(report.measurements, n_rows);
        assert_eq!(
            export_csv(&first, None).await.unwrap().0,
            export_csv(&second, None).await.unwrap().0
        );
        // Into the catalog it came from: nothing new, the version unchanged.
        let again = import_csv(&first, &json, ImportMode::Accepted, &mut |_, _| {})
            .await
            .unwrap();
        assert_eq!((again.measurements, again.skipped), (0, n_rows));
        assert_eq!(
            crate::catalog::history::current_version(&first)
                .await
                .unwrap(),
            version
        );
        // Unknown keys and non-scalar cells are row faults.
        let bad = r#"{"rows": [{"galaxy": "Tesk 1", "colour": "blue"}, {"galaxy": ["x"]}]}"#;
        let faults = parse_catalog(bad).unwrap_err();
        assert_eq!(
            faults.iter().map(|f| f.line).collect::<Vec<_>>(),
            vec![1, 2]
        );
        assert!(parse_catalog("{\"rows\": 3}").is_err());
    }
}
