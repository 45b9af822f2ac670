//! The `massline` command: run the server, or work with the catalog and the fits from a shell.
//!
//! ```text
//! massline serve [--db PATH] [--bind ADDR] [--demo] [--public-read] [--secure-cookies]
//!                                                     run the web service
//! massline fit --input FILE.csv [...]                 fit a relation to a CSV of points
//! massline user add NAME --role ROLE [--generate]     create an account (see `user --help`)
//! massline user set-role NAME ROLE | disable NAME | list
//! massline import FILE.csv [--accept]                 load a catalog CSV (pending, or adopted)
//! massline export > FILE.csv                          write the adopted catalog as CSV
//! massline backup PATH [--db DB] [--force]            a checked copy of the live database
//! ```

use clap::{Parser, Subcommand};
use tracing_subscriber::EnvFilter;

use massline::{Application, Settings};

/// massline: a research group's black-hole catalog and its scaling relations.
#[derive(Parser, Debug)]
#[command(name = "massline", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Run the web service.
    Serve(Settings),
    /// Fit a black-hole–host relation to a CSV of points and print the result.
    Fit(massline::fit_command::FitArgs),
    /// Manage accounts: add, set-role, disable, list.
    User(massline::auth::cli::UserArgs),
    /// Import a catalog CSV: rows become pending submissions, or with --accept are adopted.
    Import(massline::csv_command::ImportArgs),
    /// Write the adopted catalog as CSV (the import format) to standard output.
    Export(massline::csv_command::ExportArgs),
    /// Copy the database, even while the server runs, to a checked file (see README "Backups").
    Backup(BackupArgs),
}

/// Arguments of `massline backup`.
#[derive(clap::Args, Debug)]
struct BackupArgs {
    /// Where the copy goes; its directory must exist.
    path: std::path::PathBuf,
    /// The database file to copy (the server's --db).
    #[arg(long = "db", env = "MASSLINE_DB", default_value = massline::config::DEFAULT_DB_PATH)]
    db_path: std::path::PathBuf,
    /// Replace PATH when it exists (only after the new copy has passed its checks).
    #[arg(long)]
    force: bool,
}

fn main() -> std::process::ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Serve(settings) => serve(settings),
        Command::Fit(args) => massline::fit_command::run(&args, &mut std::io::stdout().lock()),
        Command::User(args) => massline::auth::cli::run(&args, &mut std::io::stdout().lock()),
        Command::Import(args) => massline::csv_command::run_import(
            &args,
            &mut std::io::stdout().lock(),
            &mut std::io::stderr().lock(),
        ),
        Command::Export(args) => massline::csv_command::run_export(
            &args,
            &mut std::io::stdout().lock(),
            &mut std::io::stderr().lock(),
        ),
        Command::Backup(args) => backup(&args),
    };
    match result {
        Ok(()) => std::process::ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("massline: {e:#}");
            std::process::ExitCode::FAILURE
        }
    }
}

fn backup(args: &BackupArgs) -> anyhow::Result<()> {
    use massline::catalog::backup::{self, Overwrite};
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

fn serve(settings: Settings) -> anyhow::Result<()> {
    tracing_subscriber::fmt()
        .with_env_filter(
            EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new("info,sqlx=warn")),
        )
        .init();
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async move {
        let app = Application::build(settings).await?;
        if !app.demo_accounts().is_empty() {
            // Printed once, to the console only (never to the log): these passwords are not
            // stored anywhere in clear.
            println!("Demo accounts created (the passwords are shown only now):");
            for a in app.demo_accounts() {
                println!("  {:<14} {:<9} {}", a.username, a.role, a.password);
            }
        }
        tracing::info!("massline is listening on http://{}", app.address());
        app.run_until(async {
            // If the signal handler cannot be installed the server still runs; it just has to be
            // stopped by other means.
            let _ = tokio::signal::ctrl_c().await;
            tracing::info!("stopping: finishing open requests");
        })
        .await
    })
}
