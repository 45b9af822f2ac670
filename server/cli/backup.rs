//! `massline backup PATH [--db DB] [--force]`: a checked copy of the database, even while the
//! server runs (`catalog::backup`; README "Backups").

use crate::catalog::backup::{self, Overwrite};

/// Arguments of `massline backup`.
#[derive(clap::Args, Debug)]
pub struct BackupArgs {
    /// Where the copy goes; its directory must exist.
    pub path: std::path::PathBuf,
    /// The database file to copy (the server's --db).
    #[arg(long = "db", env = "MASSLINE_DB", default_value = crate::config::DEFAULT_DB_PATH)]
    pub db_path: std::path::PathBuf,
    /// Replace PATH when it exists (only after the new copy has passed its checks).
    #[arg(long)]
    pub force: bool,
}

/// Copies the database and prints what was copied: the sizes, the time and the rows per table.
///
/// # Errors
/// When the database cannot be opened, the copy fails its checks, or PATH exists without
/// `--force`.
pub fn run(args: &BackupArgs) -> anyhow::Result<()> {
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async {
        let pool = backup::open_source(&args.db_path).await?;
        let overwrite = if args.force {
            Overwrite::Replace
        } else {
            Overwrite::Refuse
        };
        let report = backup::backup_with(&pool, &args.path, overwrite).await;
        pool.close().await;
        let report = report?;
        println!(
            "backed up '{}' to '{}': {} bytes (source {} bytes), integrity ok, {:.2} s",
            args.db_path.display(),
            report.path.display(),
            report.bytes,
            report.source_bytes,
            report.elapsed.as_secs_f64()
        );
        for t in &report.tables {
            println!("  {:<24} {:>10} rows", t.table, t.rows);
        }
        Ok(())
    })
}
