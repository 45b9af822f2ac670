//! `massline release NAME --version N --note TEXT`: name a catalog version as a release from a
//! shell on the server (`catalog::citations::name_release`; the audit log records no account,
//! as for every command-line change).

use std::io::Write;
use std::path::PathBuf;

use clap::Args;

use crate::catalog::{self, citations};
use crate::config::DEFAULT_DB_PATH;

/// Arguments of `massline release`.
#[derive(Args, Debug, Clone)]
pub struct ReleaseArgs {
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
    /// The release name: 1 to 40 letters, digits, '.', '-' or '_' (e.g. 2027A).
    pub name: String,
    /// The catalog version to release (default: the current one).
    #[arg(long)]
    pub version: Option<i64>,
    /// What the release is for.
    #[arg(long, default_value = "")]
    pub note: String,
}

/// Names the release and reports it on `out`.
///
/// # Errors
/// When the database cannot be opened, or the name, version or note is refused (one sentence).
pub fn run(args: &ReleaseArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async {
        let pool = catalog::connect(&args.db_path).await?;
        let version = match args.version {
            Some(v) => v,
            None => catalog::history::current_version(&pool).await?,
        };
        let release = citations::name_release(&pool, None, &args.name, version, &args.note).await?;
        writeln!(
            out,
            "Release {} names catalog version {}.",
            release.name, release.catalog_version
        )?;
        Ok(())
    })
}
