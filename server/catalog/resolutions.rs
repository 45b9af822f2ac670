//! The instrument resolutions a member saves for planning observations (migration 10,
//! `account_resolution`): listed, added and deleted by their owner only. Each change writes
//! its audit event in the same transaction (`history::record`), as every account change does.
//! Nothing else about planning is stored.

use sqlx::SqlitePool;

use super::accounts::for_log;
use super::begin_write;
use super::history::{NewEvent, record};

/// How many resolutions one member may keep (a form and a list, not a store).
pub const MAX_PER_ACCOUNT: i64 = 50;

/// One saved resolution.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct SavedResolution {
    /// Key.
    pub account_resolution_id: i64,
    /// The member's name for it (1–40 characters).
    pub label: String,
    /// The resolution in arcseconds (0 < arcsec ≤ 100).
    pub arcsec: f64,
    /// When it was saved (RFC 3339 UTC).
    pub created_at: String,
}

/// What saving a resolution did.
#[derive(Debug, Clone, PartialEq)]
pub enum Saved {
    /// A new row with this id.
    Added(i64),
    /// The label was saved before; its arcsec now holds the new value (this id).
    Replaced(i64),
    /// The member already keeps [`MAX_PER_ACCOUNT`] resolutions; nothing was stored.
    Full,
}

/// The resolutions of one account, in the order they were saved.
///
/// # Errors
/// When the database fails.
pub async fn list(pool: &SqlitePool, account_id: i64) -> sqlx::Result<Vec<SavedResolution>> {
    sqlx::query_as(
        "select account_resolution_id, label, arcsec, created_at
           from account_resolution where account_id = ? order by account_resolution_id",
    )
    .bind(account_id)
    .fetch_all(pool)
    .await
}

/// Save a resolution under `label` for `account_id`: a new label is added, a label the
/// account already keeps takes the new value. The label and value must already be checked
/// (`relations::planning::Resolution`); the table's checks refuse anything else. Writes
/// `resolution_saved`.
///
/// # Errors
/// When the database fails.
pub async fn save(
    pool: &SqlitePool,
    account_id: i64,
    label: &str,
    arcsec: f64,
) -> sqlx::Result<Saved> {
    let mut tx = begin_write(pool).await?;
    let existing: Option<i64> = sqlx::query_scalar(
        "select account_resolution_id from account_resolution where account_id = ? and label = ?",
    )
    .bind(account_id)
    .bind(label)
    .fetch_optional(&mut *tx)
    .await?;
    let saved = if let Some(id) = existing {
        sqlx::query("update account_resolution set arcsec = ? where account_resolution_id = ?")
            .bind(arcsec)
            .bind(id)
            .execute(&mut *tx)
            .await?;
        Saved::Replaced(id)
    } else {
        let count: i64 =
            sqlx::query_scalar("select count(*) from account_resolution where account_id = ?")
                .bind(account_id)
                .fetch_one(&mut *tx)
                .await?;
        if count >= MAX_PER_ACCOUNT {
            return Ok(Saved::Full);
        }
        let id: i64 = sqlx::query_scalar(
            "insert into account_resolution (account_id, label, arcsec) values (?, ?, ?)
             returning account_resolution_id",
        )
        .bind(account_id)
        .bind(label)
        .bind(arcsec)
        .fetch_one(&mut *tx)
        .await?;
        Saved::Added(id)
    };
    let (Saved::Added(id) | Saved::Replaced(id)) = saved else {
        return Ok(saved);
    };
    record(
        &mut tx,
        &NewEvent {
            account_id: Some(account_id),
            action: "resolution_saved",
            entity: "account_resolution",
            entity_id: Some(id),
            summary: format!(
                "Saved the resolution '{}' = {arcsec} arcsec for planning.",
                for_log(label)
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(saved)
}

/// Delete one of an account's own resolutions and write `resolution_deleted`. Returns false
/// when the account keeps no such resolution (someone else's is "no such resolution").
///
/// # Errors
/// When the database fails.
pub async fn delete_own(
    pool: &SqlitePool,
    account_id: i64,
    account_resolution_id: i64,
) -> sqlx::Result<bool> {
    let mut tx = begin_write(pool).await?;
    let label: Option<String> = sqlx::query_scalar(
        "delete from account_resolution where account_resolution_id = ? and account_id = ?
         returning label",
    )
    .bind(account_resolution_id)
    .bind(account_id)
    .fetch_optional(&mut *tx)
    .await?;
    let Some(label) = label else {
        return Ok(false);
    };
    record(
        &mut tx,
        &NewEvent {
            account_id: Some(account_id),
            action: "resolution_deleted",
            entity: "account_resolution",
            entity_id: Some(account_resolution_id),
            summary: format!("Deleted the planning resolution '{}'.", for_log(&label)),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(true)
}
