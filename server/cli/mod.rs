//! The `massline` command: run the server, or work with the catalog and the fits from a shell.
//!
//! ```text
//! massline serve [--db PATH] [--bind ADDR] [--demo] [--public-read] [--secure-cookies]
//!                                                     run the web service
//! massline fit --input FILE.csv [...]                 fit a relation to a CSV of points
//! massline user add NAME --role ROLE [--generate]     create an account (see `user --help`)
//! massline user set-role NAME ROLE | disable NAME | list
//! massline import FILE.csv [--accept]                 load a catalog CSV (pending, or adopted)
//! massline export > FILE.csv                          write the adopted catalog (CSV, JSON or VOTable)
//! massline backup PATH [--db DB] [--force]            a checked copy of the live database
//! massline release NAME [--version N] [--note TEXT]   name a catalog version as a release
//! massline virial-factor [--width-definition W] [--adopt]  calibrate ⟨f⟩ (and adopt it)
//! massline kinematics --input FILE.csv --distance D ...   a black-hole mass from a disk
//! massline plan --input FILE.csv --resolution LABEL=ARCSEC [...]  rank candidates for observing
//! ```
//!
//! The command line is one of the three doors (pages and the JSON API are the others): each
//! subcommand reads its arguments and files, calls the layers below and writes the result.
//! [`main`] parses the arguments and dispatches to [`serve`], [`fit`], [`user`],
//! [`catalog_files`] (import and export), [`backup`], [`release`], [`virial`] and [`plan`].

pub mod backup;
pub mod catalog_files;
pub mod fit;
pub mod kinematics;
pub mod plan;
pub mod release;
pub mod serve;
pub mod user;
pub mod virial;

use clap::{Parser, Subcommand};

use crate::Settings;

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
    Fit(fit::FitArgs),
    /// Manage accounts: add, set-role, disable, list.
    User(user::UserArgs),
    /// Import a catalog CSV: rows become pending submissions, or with --accept are adopted.
    Import(catalog_files::ImportArgs),
    /// Write the adopted catalog to standard output: CSV (the import format), JSON or VOTable.
    Export(catalog_files::ExportArgs),
    /// Copy the database, even while the server runs, to a checked file (see README "Backups").
    Backup(backup::BackupArgs),
    /// Name a catalog version as a release (e.g. for a paper); a release never moves.
    Release(release::ReleaseArgs),
    /// Calibrate the mean virial factor <f> of reverberation AGN on the catalog; --adopt adopts it.
    VirialFactor(virial::VirialArgs),
    /// A black-hole mass from a velocity table of a rotating gas or maser disk.
    Kinematics(kinematics::KinematicsArgs),
    /// Rank candidate galaxies by the probability that each resolution resolves their sphere of influence.
    Plan(plan::PlanArgs),
}

/// Parses the command line, runs the subcommand and turns its outcome into the exit code: 0,
/// or 1 with `massline: ` and the error's chain of reasons on standard error (clap's own
/// usage errors exit with 2).
pub fn main() -> std::process::ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Serve(settings) => serve::run(settings),
        Command::Fit(args) => fit::run(&args, &mut std::io::stdout().lock()),
        Command::User(args) => user::run(&args, &mut std::io::stdout().lock()),
        Command::Import(args) => catalog_files::run_import(
            &args,
            &mut std::io::stdout().lock(),
            &mut std::io::stderr().lock(),
        ),
        Command::Export(args) => catalog_files::run_export(
            &args,
            &mut std::io::stdout().lock(),
            &mut std::io::stderr().lock(),
        ),
        Command::Backup(args) => backup::run(&args),
        Command::Release(args) => release::run(&args, &mut std::io::stdout().lock()),
        Command::VirialFactor(args) => virial::run(&args, &mut std::io::stdout().lock()),
        Command::Kinematics(args) => kinematics::run(&args, &mut std::io::stdout().lock()),
        Command::Plan(args) => plan::run(&args, &mut std::io::stdout().lock()),
    };
    match result {
        Ok(()) => std::process::ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("massline: {e:#}");
            std::process::ExitCode::FAILURE
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_command_line_definition_is_consistent() {
        use clap::CommandFactory;
        Cli::command().debug_assert();
    }
}
