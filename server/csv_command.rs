//! `massline import FILE [--accept]` and `massline export`: the catalog CSV format
//! (`catalog::csv_io`, README "Catalog CSV") from a shell. Whoever can run these on the
//! server's database file is its administrator; the audit log records the import with no
//! account.

use std::io::Write;
use std::path::PathBuf;

use clap::Args;

use crate::catalog::csv_io::{ImportError, ImportMode, export_csv, import_csv};
use crate::catalog::{self, galaxies::SubmissionSource};
use crate::config::DEFAULT_DB_PATH;

/// Arguments of `massline import`.
#[derive(Args, Debug, Clone)]
pub struct ImportArgs {
    /// The catalog CSV file.
    pub file: PathBuf,
    /// Adopt every row at once (a vetted catalog) instead of queuing them for review.
    #[arg(long)]
    pub accept: bool,
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
}

/// Arguments of `massline export`.
#[derive(Args, Debug, Clone)]
pub struct ExportArgs {
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
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
        let mode = if args.accept {
            ImportMode::Accepted
        } else {
            ImportMode::Pending {
                account_id: None,
                source: SubmissionSource::Import,
            }
        };
        let mut progress = |done: usize, total: usize| {
            // One line on standard error, rewritten in place; a failed write only loses it.
            let mut stderr = std::io::stderr().lock();
            let _ = write!(stderr, "\rimporting: {done}/{total} rows");
            if done == total {
                let _ = writeln!(stderr);
            }
        };
        match import_csv(&pool, &text, mode, &mut progress).await {
            Ok(report) => {
                writeln!(
                    out,
                    "imported {} measurement(s), {} new galaxies, {} submission(s){}",
                    report.measurements,
                    report.new_galaxies,
                    report.submissions,
                    if args.accept {
                        ", adopted"
                    } else {
                        ", pending review"
                    }
                )?;
                Ok(())
            }
            Err(ImportError::Rows(rows)) => {
                for r in &rows {
                    writeln!(err, "line {}, column '{}': {}", r.line, r.column, r.message)?;
                }
                anyhow::bail!("{} faulty row(s); nothing was imported", rows.len())
            }
            Err(e) => Err(e.into()),
        }
    })
}

/// Write the adopted catalog as CSV to `out`; the catalog version goes to `err`.
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
        let (text, version) = export_csv(&pool).await?;
        out.write_all(text.as_bytes())?;
        writeln!(err, "exported catalog version {version}")?;
        Ok(())
    })
}
