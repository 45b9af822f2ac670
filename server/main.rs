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
    };
    match result {
        Ok(()) => std::process::ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("massline: {e:#}");
            std::process::ExitCode::FAILURE
        }
    }
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
