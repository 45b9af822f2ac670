//! `massline user …`: manage accounts from a shell on the server.
//!
//! ```text
//! massline user add NAME --role ROLE [--generate]   create an account (asks for the password)
//! massline user set-role NAME ROLE                  change a role
//! massline user disable NAME                        disable an account and end its sessions
//! massline user list                                list accounts
//! ```
//!
//! Each command takes `--db` (or `MASSLINE_DB`) like `serve`. Changes are written to the audit
//! log with no account as the actor (the command line acts as the system).

use std::io::Write;
use std::path::PathBuf;

use anyhow::Context;
use clap::{Args, Subcommand};
use sqlx::SqlitePool;

use crate::auth::Role;
use crate::auth::accounts::add_user;
use crate::catalog::{self, accounts};
use crate::config::DEFAULT_DB_PATH;

/// Arguments of `massline user`.
#[derive(Args, Debug, Clone)]
pub struct UserArgs {
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH, global = true)]
    pub db_path: PathBuf,
    /// What to do.
    #[command(subcommand)]
    pub command: UserCommand,
}

/// The `user` subcommands.
#[derive(Subcommand, Debug, Clone)]
pub enum UserCommand {
    /// Create an account; asks for the password twice unless --generate is given.
    Add {
        /// Login name (3–64 of a–z, A–Z, 0–9, '.', '_', '-').
        name: String,
        /// member, reviewer or admin.
        #[arg(long, value_parser = parse_role)]
        role: Role,
        /// Generate a strong password and print it once.
        #[arg(long)]
        generate: bool,
    },
    /// Change an account's role.
    SetRole {
        /// Login name.
        name: String,
        /// member, reviewer or admin.
        #[arg(value_parser = parse_role)]
        role: Role,
    },
    /// Disable an account and end its sessions.
    Disable {
        /// Login name.
        name: String,
    },
    /// List the accounts.
    List,
}

fn parse_role(s: &str) -> Result<Role, String> {
    s.parse()
}

/// Run a `user` command, writing its report to `out`.
///
/// # Errors
/// When the database cannot be opened, the name or password breaks a rule, or the account does
/// not exist; each with one sentence.
pub fn run(args: &UserArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async {
        let pool = catalog::connect(&args.db_path).await?;
        match &args.command {
            UserCommand::Add {
                name,
                role,
                generate,
            } => {
                let password = if *generate {
                    None
                } else {
                    Some(prompt_password(name)?)
                };
                let shown = add_user(&pool, name, *role, password).await?;
                writeln!(out, "Created the account '{name}' with role {role}.")?;
                if let Some(p) = shown {
                    writeln!(out, "Its password (shown only now): {p}")?;
                }
            }
            UserCommand::SetRole { name, role } => {
                let account = existing(&pool, name).await?;
                accounts::set_role(&pool, account.account_id, role.as_str(), None).await?;
                writeln!(out, "'{name}' is now {role}.")?;
            }
            UserCommand::Disable { name } => {
                let account = existing(&pool, name).await?;
                accounts::disable(&pool, account.account_id, None).await?;
                writeln!(out, "Disabled '{name}' and ended its sessions.")?;
            }
            UserCommand::List => {
                for a in accounts::list_accounts(&pool).await? {
                    let state = if a.disabled { "disabled" } else { "active" };
                    writeln!(
                        out,
                        "{:<24} {:<9} {:<9} created {}",
                        a.username, a.role, state, a.created_at
                    )?;
                }
            }
        }
        pool.close().await;
        Ok(())
    })
}

async fn existing(pool: &SqlitePool, name: &str) -> anyhow::Result<accounts::Account> {
    accounts::find_by_username(pool, name)
        .await?
        .with_context(|| format!("there is no account named '{name}'"))
}

fn prompt_password(name: &str) -> anyhow::Result<String> {
    let first = rpassword::prompt_password(format!("Password for {name}: "))
        .context("could not read the password from the terminal")?;
    let second = rpassword::prompt_password("The same password again: ")
        .context("could not read the password from the terminal")?;
    anyhow::ensure!(
        first == second,
        "the two passwords differ; nothing was created"
    );
    Ok(first)
}
