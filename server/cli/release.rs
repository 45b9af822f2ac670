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

#[cfg(test)]
mod tests {
    use super::*;

    fn args(db: &std::path::Path, name: &str, version: Option<i64>) -> ReleaseArgs {
        ReleaseArgs {
            db_path: db.to_path_buf(),
            name: name.to_owned(),
            version,
            note: "for the paper".to_owned(),
        }
    }

    #[test]
    fn the_command_names_the_current_version_and_refuses_a_taken_name_or_a_future_version() {
        let dir = tempfile::tempdir().unwrap();
        let db = dir.path().join("catalog.db");
        let mut out = Vec::new();
        run(&args(&db, "2027A", None), &mut out).unwrap();
        let said = String::from_utf8(out).unwrap();
        assert_eq!(said, "Release 2027A names catalog version 0.\n");
        let taken = run(&args(&db, "2027A", Some(0)), &mut Vec::new()).unwrap_err();
        assert!(
            taken
                .to_string()
                .contains("already names catalog version 0"),
            "{taken}"
        );
        let future = run(&args(&db, "2027B", Some(5)), &mut Vec::new()).unwrap_err();
        assert!(
            future.to_string().contains("cannot be released"),
            "{future}"
        );
        let bad = run(&args(&db, "new release", None), &mut Vec::new()).unwrap_err();
        assert!(bad.to_string().contains("letters, digits"), "{bad}");
    }
}
