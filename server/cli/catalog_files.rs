//! `massline import FILE [--accept | --as USER]` and `massline export [--format csv|json|votable]`: the
//! catalog file formats (`catalog::csv_io`, README "Catalog CSV") from a shell. Whoever can run these on the
//! server's database file is its administrator; the audit log records the import with no
//! account.

use std::io::Write;
use std::path::PathBuf;

use clap::Args;

use crate::catalog::csv_io::{ImportError, ImportMode, export_csv, export_json, import_csv};
use crate::catalog::{self, galaxies::SubmissionSource};
use crate::config::DEFAULT_DB_PATH;

/// Arguments of `massline import`.
#[derive(Args, Debug, Clone)]
pub struct ImportArgs {
    /// The catalog file, CSV or JSON (the format `massline export` writes).
    pub file: PathBuf,
    /// Adopt every row at once (a vetted catalog) instead of queuing them for review.
    #[arg(long, conflicts_with = "submitter")]
    pub accept: bool,
    /// Queue the rows for review as submitted by this account (login name); without it they
    /// have no submitter.
    #[arg(long = "as", value_name = "USER")]
    pub submitter: Option<String>,
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
}

/// The export file formats.
#[derive(clap::ValueEnum, Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ExportFormat {
    /// The catalog CSV format (README "Catalog CSV").
    #[default]
    Csv,
    /// The same rows as JSON, stamped with the catalog version and the time of export.
    Json,
    /// The same rows as an IVOA VOTable 1.4, with units and UCDs, for astronomy software (not
    /// for import).
    Votable,
}

/// Arguments of `massline export`.
#[derive(Args, Debug, Clone)]
pub struct ExportArgs {
    /// File format.
    #[arg(long, value_enum, default_value_t = ExportFormat::Csv)]
    pub format: ExportFormat,
    /// Catalog version to export (any version since the history began); the current one
    /// when left out.
    #[arg(long)]
    pub version: Option<i64>,
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
}

/// Characters of the command line's progress bar.
const PROGRESS_WIDTH: usize = 30;

/// `importing [#########.....................]  300/1000 rows  30%`
fn progress_line(done: usize, total: usize) -> String {
    let filled = (done * PROGRESS_WIDTH)
        .checked_div(total)
        .unwrap_or(PROGRESS_WIDTH)
        .min(PROGRESS_WIDTH);
    let percent = (done * 100).checked_div(total).unwrap_or(100);
    format!(
        "importing [{}{}] {done:>width$}/{total} rows {percent:>3}%",
        "#".repeat(filled),
        ".".repeat(PROGRESS_WIDTH - filled),
        width = total.to_string().len()
    )
}

/// Import a file whole or not at all; a faulty file prints every faulty row to `err`.
///
/// # Errors
/// An unreadable file, faulty rows, or a database failure; nothing is written then.
pub fn run_import(
    args: &ImportArgs,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> anyhow::Result<()> {
    let text = std::fs::read_to_string(&args.file)
        .map_err(|e| anyhow::anyhow!("could not read '{}': {e}", args.file.display()))?;
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async {
        let pool = catalog::connect(&args.db_path).await?;
        let account_id = match &args.submitter {
            None => None,
            Some(name) => Some(
                catalog::accounts::find_by_username(&pool, name)
                    .await?
                    .filter(|a| !a.disabled)
                    .map(|a| a.account_id)
                    .ok_or_else(|| {
                        anyhow::anyhow!("there is no enabled account named '{name}'")
                    })?,
            ),
        };
        let mode = if args.accept {
            ImportMode::Accepted
        } else {
            ImportMode::Pending {
                account_id,
                source: SubmissionSource::Import,
            }
        };
        let mut progress = progress_bar();
        match import_csv(&pool, &text, mode, &mut progress).await {
            Ok(report) => {
                writeln!(
                    out,
                    "imported {} measurement(s), {} new galaxies, {} submission(s){}; {} row(s) already in the catalog skipped",
                    report.measurements,
                    report.new_galaxies,
                    report.submissions,
                    if args.accept {
                        ", adopted"
                    } else {
                        ", pending review"
                    },
                    report.skipped
                )?;
                Ok(())
            }
            Err(ImportError::Rows(rows)) => {
                let unit = if text.trim_start().starts_with('{') {
                    "row"
                } else {
                    "line"
                };
                let (listed, summary) = crate::catalog::csv_io::reported_faults(&rows);
                for r in listed {
                    writeln!(err, "{unit} {}, column '{}': {}", r.line, r.column, r.message)?;
                }
                anyhow::bail!("{}", summary.trim_end_matches('.'))
            }
            Err(e) => Err(e.into()),
        }
    })
}

/// The import's progress bar: one line on standard error, rewritten in place when the bar grows
/// (not on every row of a 50,000-row file); a failed write only loses the bar.
fn progress_bar() -> impl FnMut(usize, usize) {
    let mut last_width = usize::MAX;
    move |done: usize, total: usize| {
        let filled = (done * PROGRESS_WIDTH)
            .checked_div(total)
            .unwrap_or(PROGRESS_WIDTH);
        if filled == last_width && done != total {
            return;
        }
        last_width = filled;
        let mut stderr = std::io::stderr().lock();
        let _ = write!(stderr, "\r{}", progress_line(done, total));
        if done == total {
            let _ = writeln!(stderr);
        }
    }
}

/// Write the adopted catalog as CSV, JSON or VOTable to `out`; the catalog version goes to `err`.
///
/// # Errors
/// When the database cannot be read.
pub fn run_export(
    args: &ExportArgs,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> anyhow::Result<()> {
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async {
        let pool = catalog::connect(&args.db_path).await?;
        let version = match args.version {
            None => None,
            Some(n) => Some(
                catalog::history::resolve(&pool, &catalog::history::VersionAsk::Number(n))
                    .await?
                    .version,
            ),
        };
        let (text, version) = match args.format {
            ExportFormat::Csv => export_csv(&pool, version).await?,
            ExportFormat::Json => export_json(&pool, version).await?,
            ExportFormat::Votable => {
                let (rows, version) =
                    crate::catalog::csv_io::adopted_catalog(&pool, version).await?;
                (crate::export::catalog_votable(&rows, version)?, version)
            }
        };
        out.write_all(text.as_bytes())?;
        writeln!(err, "exported catalog version {version}")?;
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_progress_bar_fills_with_the_rows_done() {
        assert_eq!(
            progress_line(0, 1000),
            format!("importing [{}]    0/1000 rows   0%", ".".repeat(30))
        );
        assert_eq!(
            progress_line(500, 1000),
            format!(
                "importing [{}{}]  500/1000 rows  50%",
                "#".repeat(15),
                ".".repeat(15)
            )
        );
        assert_eq!(
            progress_line(1000, 1000),
            format!("importing [{}] 1000/1000 rows 100%", "#".repeat(30))
        );
        assert!(progress_line(0, 0).ends_with("100%"));
    }

    #[test]
    fn the_votable_export_writes_a_row_per_adopted_measurement() {
        let dir = tempfile::tempdir().unwrap();
        let db_path = dir.path().join("catalog.db");
        let runtime = tokio::runtime::Runtime::new().unwrap();
        let csv_rows = runtime.block_on(async {
            let pool = catalog::connect(&db_path).await.unwrap();
            crate::catalog::demo::load_demo(&pool).await.unwrap();
            let (text, _) = export_csv(&pool, None).await.unwrap();
            pool.close().await;
            csv::Reader::from_reader(text.as_bytes()).records().count()
        });
        drop(runtime);
        let args = ExportArgs {
            format: ExportFormat::Votable,
            version: None,
            db_path,
        };
        let (mut out, mut err) = (Vec::new(), Vec::new());
        run_export(&args, &mut out, &mut err).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(text.starts_with("<?xml version=\"1.0\""), "{text}");
        assert!(csv_rows > 100, "the demo catalog has its rows");
        assert_eq!(text.matches("<TR>").count(), csv_rows);
        assert!(
            String::from_utf8(err)
                .unwrap()
                .starts_with("exported catalog version ")
        );
    }
}
