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

use super::demo::{RowError, galaxy_from_cells, measurement_from_cells, records};
use super::galaxies::{self, SubmissionSource};
use super::history::{self, NewEvent};
use super::model::{NewGalaxy, NewMeasurement, SubmissionState};
use super::submissions::{self, GalaxyChoice, SubmissionError};

/// The columns, in the order export writes them.
pub const COLUMNS: [&str; 19] = [
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

/// The galaxy-description columns (besides `galaxy`, the name).
const GALAXY_COLUMNS: [&str; 6] = [
    "morphology",
    "bulge_kind",
    "centre_kind",
    "distance_mpc",
    "distance_err_mpc",
    "distance_method",
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
    /// The measurement.
    pub measurement: NewMeasurement,
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

/// File name used in row reports.
const FILE: &str = "import";

/// Read every row of a catalog CSV text.
///
/// # Errors
/// Every faulty row (line, column, message); an unreadable header or record stops the reading.
pub fn parse_catalog_csv(text: &str) -> Result<Vec<ImportRow>, Vec<RowError>> {
    let rows = records(text, FILE).map_err(|e| vec![e])?;
    if let Some((_, first)) = rows.first() {
        let mut faults = Vec::new();
        for column in first.keys() {
            if !COLUMNS.contains(&column.as_str()) {
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
        if !faults.is_empty() {
            return Err(faults);
        }
    }
    let mut out = Vec::with_capacity(rows.len());
    let mut faults = Vec::new();
    for (line, rec) in rows {
        let cell = |c: &'static str| {
            let key = if c == "name" { "galaxy" } else { c };
            rec.get(key).map_or("", String::as_str)
        };
        let name = cell("galaxy").trim();
        if name.is_empty() {
            faults.push(RowError {
                file: FILE,
                line,
                column: "galaxy",
                message: "this column is required".into(),
            });
            continue;
        }
        let described = GALAXY_COLUMNS.iter().any(|c| !cell(c).trim().is_empty());
        let galaxy = if described {
            match galaxy_from_cells(FILE, line, &cell) {
                Ok(g) => Some(g),
                Err(mut e) => {
                    if e.column == "name" {
                        e.column = "galaxy";
                    }
                    faults.push(e);
                    continue;
                }
            }
        } else {
            None
        };
        match measurement_from_cells(FILE, line, &cell) {
            Ok(measurement) => out.push(ImportRow {
                line,
                galaxy_name: name.to_owned(),
                galaxy,
                measurement,
            }),
            Err(e) => faults.push(e),
        }
    }
    if faults.is_empty() {
        Ok(out)
    } else {
        Err(faults)
    }
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
}

/// Import parsed rows in one transaction; `progress(done, total)` is called after each row.
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
    // Galaxies in first-appearance order, with their rows.
    let mut order: Vec<&str> = Vec::new();
    let mut by_galaxy: HashMap<&str, Vec<&ImportRow>> = HashMap::new();
    for r in rows {
        let entry = by_galaxy.entry(r.galaxy_name.as_str()).or_default();
        if entry.is_empty() {
            order.push(r.galaxy_name.as_str());
        }
        entry.push(r);
    }
    let mut faults = Vec::new();
    let mut choices = Vec::with_capacity(order.len());
    for name in &order {
        let group = &by_galaxy[name];
        let existing: Option<i64> =
            sqlx::query_scalar("select galaxy_id from galaxy where name = ?")
                .bind(name)
                .fetch_optional(&mut *tx)
                .await?;
        match (existing, group.iter().find_map(|r| r.galaxy.as_ref())) {
            (Some(id), _) => choices.push(GalaxyChoice::Existing(id)),
            (None, Some(g)) => choices.push(GalaxyChoice::New(g.clone())),
            (None, None) => faults.push(RowError {
                file: FILE,
                line: group[0].line,
                column: "galaxy",
                message: format!(
                    "'{name}' is not in the catalog; describe it (morphology, distance, …) on one of its rows"
                ),
            }),
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
    };
    match mode {
        ImportMode::Pending { account_id, source } => {
            for (name, choice) in order.iter().zip(&choices) {
                let measurements: Vec<NewMeasurement> = by_galaxy[name]
                    .iter()
                    .map(|r| r.measurement.clone())
                    .collect();
                submissions::create_in(
                    &mut tx,
                    account_id,
                    source,
                    choice,
                    &measurements,
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
            let submission_id = galaxies::insert_submission(
                &mut tx,
                None,
                SubmissionSource::Import,
                SubmissionState::Accepted,
                "Vetted catalog imported from the command line",
            )
            .await?;
            report.submissions = 1;
            for (name, choice) in order.iter().zip(&choices) {
                let galaxy_id = match choice {
                    GalaxyChoice::Existing(id) => *id,
                    GalaxyChoice::New(g) => galaxies::insert_galaxy(&mut tx, g).await?.galaxy_id,
                };
                for r in &by_galaxy[name] {
                    let id = galaxies::insert_measurement(
                        &mut tx,
                        galaxy_id,
                        submission_id,
                        &r.measurement,
                    )
                    .await
                    .map_err(|e| row_fault(SubmissionError::Db(e), r.line))?;
                    galaxies::adopt(&mut tx, id).await?;
                    done += 1;
                    report.measurements += 1;
                    progress(done, total);
                }
            }
            history::bump_version(&mut tx).await?;
            history::record(
                &mut tx,
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
    tx.commit().await?;
    Ok(report)
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

/// Parse and import a CSV text (see [`parse_catalog_csv`] and [`import_rows`]).
///
/// # Errors
/// As those two.
pub async fn import_csv(
    pool: &SqlitePool,
    text: &str,
    mode: ImportMode,
    progress: &mut (dyn FnMut(usize, usize) + Send),
) -> Result<ImportReport, ImportError> {
    let rows = parse_catalog_csv(text).map_err(ImportError::Rows)?;
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
    quantity: String,
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
}

/// The adopted catalog as CSV text in the import format, galaxies by name, and the catalog
/// version it was read at (one read transaction, so the two agree).
///
/// # Errors
/// When the database cannot be read.
pub async fn export_csv(pool: &SqlitePool) -> anyhow::Result<(String, i64)> {
    let mut tx = pool.begin().await?;
    let version: i64 =
        sqlx::query_scalar("select catalog_version from catalog_state where catalog_state_id = 1")
            .fetch_one(&mut *tx)
            .await?;
    let rows: Vec<ExportRow> = sqlx::query_as(
        "select g.name, g.morphology, g.bulge_kind, g.centre_kind, g.distance_mpc,
                g.distance_err_mpc, g.distance_method, m.quantity, m.value_text, m.value_scale,
                m.limit_confidence_sigma, m.method, m.sigma_definition, m.aperture, m.band,
                m.source_distance_mpc, m.resolution_arcsec, m.reference, m.note
           from adopted_value a
           join measurement m on m.measurement_id = a.measurement_id
           join galaxy g on g.galaxy_id = a.galaxy_id
       order by g.name, case m.quantity when 'bh_mass' then 0 when 'sigma' then 1
                                        when 'bulge_mass' then 2 else 3 end, m.band",
    )
    .fetch_all(&mut *tx)
    .await?;
    tx.commit().await?;
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(COLUMNS)?;
    let opt = |v: Option<f64>| v.map_or(String::new(), |v| v.to_string());
    for r in rows {
        let confidence = match r.limit_confidence_sigma {
            Some(c) if c < 1.5 => "1",
            Some(c) if c < 2.5 => "2",
            Some(_) => "3",
            None => "",
        };
        w.write_record([
            r.name,
            r.morphology,
            r.bulge_kind,
            r.centre_kind,
            r.distance_mpc.to_string(),
            r.distance_err_mpc.to_string(),
            r.distance_method,
            r.quantity,
            r.value_text,
            r.value_scale,
            confidence.to_owned(),
            r.method,
            r.sigma_definition,
            r.aperture,
            r.band,
            opt(r.source_distance_mpc),
            opt(r.resolution_arcsec),
            r.reference,
            r.note,
        ])?;
    }
    let bytes = w.into_inner().map_err(|e| anyhow::anyhow!("{e}"))?;
    Ok((String::from_utf8(bytes)?, version))
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
        let (text, version) = export_csv(&first).await.unwrap();
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
        let (again, version2) = export_csv(&second).await.unwrap();
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
                submissions: 2
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
}
