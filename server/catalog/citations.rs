//! Fits shown with an identifier to cite (`cited_fit`, migration 8) and named releases
//! (`catalog_release`).

use sqlx::SqlitePool;

/// A fit as recorded when its identifier was first shown.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct CitedFit {
    /// The identifier.
    pub fit_id: String,
    /// Relation slug.
    pub relation: String,
    /// Estimator name.
    pub method: String,
    /// Sample filter, canonical text.
    pub sample_filter: String,
    /// Pivot, log10 units of the host property.
    pub pivot_log: f64,
    /// Second pivot (the plane), log10 M☉.
    pub pivot2_log: f64,
    /// Catalog version fitted.
    pub catalog_version: i64,
    /// The fitting code's version.
    pub code_version: String,
    /// The fitted parameters as first computed (JSON).
    pub result_json: String,
    /// When it was first shown (RFC 3339 UTC).
    pub created_at: String,
}

/// Records a fit under its identifier unless it is there already (the first result stays).
///
/// # Errors
/// Any database error.
pub async fn record(pool: &SqlitePool, fit: &CitedFit) -> sqlx::Result<()> {
    sqlx::query(
        "insert into cited_fit (fit_id, relation, method, sample_filter, pivot_log, pivot2_log,
                                catalog_version, code_version, result_json)
         values (?, ?, ?, ?, ?, ?, ?, ?, ?)
         on conflict (fit_id) do nothing",
    )
    .bind(&fit.fit_id)
    .bind(&fit.relation)
    .bind(&fit.method)
    .bind(&fit.sample_filter)
    .bind(fit.pivot_log)
    .bind(fit.pivot2_log)
    .bind(fit.catalog_version)
    .bind(&fit.code_version)
    .bind(&fit.result_json)
    .execute(pool)
    .await?;
    Ok(())
}

/// The fit recorded under `fit_id`, if any.
///
/// # Errors
/// Any database error.
pub async fn find(pool: &SqlitePool, fit_id: &str) -> sqlx::Result<Option<CitedFit>> {
    sqlx::query_as(
        "select fit_id, relation, method, sample_filter, pivot_log, pivot2_log, catalog_version,
                code_version, result_json, created_at
           from cited_fit where fit_id = ?",
    )
    .bind(fit_id)
    .fetch_optional(pool)
    .await
}

/// A named release.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct Release {
    /// The name, e.g. "2027A".
    pub name: String,
    /// The catalog version released.
    pub catalog_version: i64,
    /// What it is for.
    pub note: String,
    /// Who named it, by username; None when the account is gone or it came from the command
    /// line.
    pub username: Option<String>,
    /// When it was named (RFC 3339 UTC).
    pub created_at: String,
}

/// Every release, newest version first.
///
/// # Errors
/// Any database error.
pub async fn releases(pool: &SqlitePool) -> sqlx::Result<Vec<Release>> {
    sqlx::query_as(
        "select r.name, r.catalog_version, r.note, a.username, r.created_at
           from catalog_release r left join account a on a.account_id = r.account_id
       order by r.catalog_version desc, r.name",
    )
    .fetch_all(pool)
    .await
}

/// The names of the releases of catalog version `version`, sorted.
///
/// # Errors
/// Any database error.
pub async fn releases_of(pool: &SqlitePool, version: i64) -> sqlx::Result<Vec<String>> {
    sqlx::query_scalar("select name from catalog_release where catalog_version = ? order by name")
        .bind(version)
        .fetch_all(pool)
        .await
}

/// Longest release name (migration 8).
pub const RELEASE_NAME_MAX: usize = 40;
/// Longest release note (migration 8).
pub const RELEASE_NOTE_MAX: usize = 2000;

/// Why a release cannot be named; each message one sentence.
#[derive(Debug, thiserror::Error)]
pub enum ReleaseError {
    /// The name breaks the naming rule.
    #[error(
        "A release name has 1 to 40 letters, digits, '.', '-' or '_' (for example 2027A); '{0}' does not."
    )]
    BadName(String),
    /// The name is taken: a release never changes or moves.
    #[error(
        "The name '{name}' already names catalog version {version}; a release never changes or moves, so choose another name."
    )]
    Taken {
        /// The name.
        name: String,
        /// The version it names.
        version: i64,
    },
    /// The version is not one the history can rebuild.
    #[error(
        "Catalog version {asked} cannot be released: releases name versions {from} to {current}, the versions the history keeps."
    )]
    NoSuchVersion {
        /// The version asked for.
        asked: i64,
        /// The first version the history holds.
        from: i64,
        /// The current version.
        current: i64,
    },
    /// The note is too long.
    #[error("A release note has at most 2000 characters; this one has {0}.")]
    NoteTooLong(usize),
    /// The database failed.
    #[error(transparent)]
    Db(#[from] sqlx::Error),
}

/// Whether `name` may name a release: 1 to [`RELEASE_NAME_MAX`] ASCII letters, digits, `.`,
/// `-`, `_` (the schema's check).
pub fn valid_release_name(name: &str) -> bool {
    (1..=RELEASE_NAME_MAX).contains(&name.len())
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || b"._-".contains(&b))
}

/// Names catalog version `version` as release `name` with `note`, in one transaction with the
/// audit event `release_named`. A release adopts nothing, so the catalog version stays. Returns
/// the release as stored.
///
/// # Errors
/// [`ReleaseError`]: a bad name or note, a taken name, a version outside the history, or a
/// database failure.
pub async fn name_release(
    pool: &SqlitePool,
    account_id: Option<i64>,
    name: &str,
    version: i64,
    note: &str,
) -> Result<Release, ReleaseError> {
    let name = name.trim();
    let note = note.trim();
    if !valid_release_name(name) {
        return Err(ReleaseError::BadName(name.chars().take(60).collect()));
    }
    let note_chars = note.chars().count();
    if note_chars > RELEASE_NOTE_MAX {
        return Err(ReleaseError::NoteTooLong(note_chars));
    }
    let mut tx = super::begin_write(pool).await?;
    let (current, from): (i64, i64) = sqlx::query_as(
        "select catalog_version, history_from_version from catalog_state where catalog_state_id = 1",
    )
    .fetch_one(&mut *tx)
    .await?;
    if version < from || version > current {
        return Err(ReleaseError::NoSuchVersion {
            asked: version,
            from,
            current,
        });
    }
    let taken: Option<i64> =
        sqlx::query_scalar("select catalog_version from catalog_release where name = ?")
            .bind(name)
            .fetch_optional(&mut *tx)
            .await?;
    if let Some(taken) = taken {
        return Err(ReleaseError::Taken {
            name: name.to_owned(),
            version: taken,
        });
    }
    let id: i64 = sqlx::query_scalar(
        "insert into catalog_release (name, catalog_version, note, account_id)
         values (?, ?, ?, ?) returning catalog_release_id",
    )
    .bind(name)
    .bind(version)
    .bind(note)
    .bind(account_id)
    .fetch_one(&mut *tx)
    .await?;
    super::history::record(
        &mut tx,
        &super::history::NewEvent {
            account_id,
            action: "release_named",
            entity: "catalog_release",
            entity_id: Some(id),
            summary: format!("Catalog version {version} released as {name}."),
        },
    )
    .await?;
    let release = sqlx::query_as(
        "select r.name, r.catalog_version, r.note, a.username, r.created_at
           from catalog_release r left join account a on a.account_id = r.account_id
          where r.catalog_release_id = ?",
    )
    .bind(id)
    .fetch_one(&mut *tx)
    .await?;
    tx.commit().await?;
    Ok(release)
}

/// The version a "what changed" link of `releases[index]` starts from: the newest older
/// version among the releases after it in the list (newest first, as [`releases`] reads
/// them), else the first version of the history; None when the release names that version.
pub fn previous_version(releases: &[Release], index: usize, history_from: i64) -> Option<i64> {
    let version = releases.get(index)?.catalog_version;
    releases
        .iter()
        .skip(index + 1)
        .map(|r| r.catalog_version)
        .find(|v| *v < version)
        .or((history_from < version).then_some(history_from))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn release(name: &str, catalog_version: i64) -> Release {
        Release {
            name: name.to_owned(),
            catalog_version,
            note: String::new(),
            username: None,
            created_at: String::new(),
        }
    }

    #[test]
    fn release_names_are_letters_digits_dots_dashes_and_underscores_up_to_40() {
        for good in ["2027A", "v1.2-rc_3", &"x".repeat(40)] {
            assert!(valid_release_name(good), "{good}");
        }
        for bad in ["", "a b", "ä", "2027/A", "x?", &"x".repeat(41)] {
            assert!(!valid_release_name(bad), "{bad}");
        }
    }

    #[test]
    fn a_release_changes_from_the_newest_older_release_or_the_start_of_the_history() {
        // Newest first, two names for version 9.
        let list = [
            release("c", 12),
            release("b2", 9),
            release("b", 9),
            release("a", 4),
        ];
        assert_eq!(previous_version(&list, 0, 2), Some(9));
        assert_eq!(previous_version(&list, 1, 2), Some(4));
        assert_eq!(previous_version(&list, 2, 2), Some(4));
        assert_eq!(previous_version(&list, 3, 2), Some(2));
        assert_eq!(previous_version(&list, 3, 4), None);
        assert_eq!(previous_version(&list, 9, 0), None);
    }
}
