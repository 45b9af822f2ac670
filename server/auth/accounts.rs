//! Creating accounts: the name and password rules, the generated password and the stored
//! hash, for every door that creates one (`massline user add`, the `--demo` accounts).

use anyhow::Context;
use sqlx::SqlitePool;

use super::Role;
use super::password::{check_new_password, hash_now};
use super::secret::generate_password;
use crate::catalog::accounts;

/// Create an account with a given password (checked against the rules) or, when `password` is
/// None, a generated one, which is returned so the caller can show it once.
///
/// # Errors
/// When the name or the password breaks a rule, the name is taken, or the database fails.
pub async fn add_user(
    pool: &SqlitePool,
    name: &str,
    role: Role,
    password: Option<String>,
) -> anyhow::Result<Option<String>> {
    super::validate_username(name).map_err(|e| anyhow::anyhow!(e))?;
    let (password, generated) = match password {
        Some(p) => (p, false),
        None => (generate_password(), true),
    };
    check_new_password(&password, name).map_err(|e| anyhow::anyhow!(e))?;
    let to_hash = password.clone();
    let phc = tokio::task::spawn_blocking(move || hash_now(&to_hash)).await??;
    accounts::create_account(pool, name, &phc, role.as_str(), None)
        .await?
        .with_context(|| format!("the name '{name}' is already taken; nothing was created"))?;
    Ok(generated.then_some(password))
}
