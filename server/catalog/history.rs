//! The catalog version and the append-only audit log.
//!
//! Any accepted change bumps the version in the same transaction as the change, and writes an
//! audit event carrying the new version; cached fits are keyed by the version, so they can never
//! outlive the data they were fitted to.

use sqlx::{Sqlite, SqliteExecutor, SqlitePool, Transaction};

/// The current catalog version.
///
/// # Errors
/// When the database cannot be read.
pub async fn current_version(db: impl SqliteExecutor<'_>) -> sqlx::Result<i64> {
    sqlx::query_scalar("select catalog_version from catalog_state where catalog_state_id = 1")
        .fetch_one(db)
        .await
}

/// Increment the catalog version inside a write transaction and return the new value.
///
/// # Errors
/// When the update fails.
pub async fn bump_version(tx: &mut Transaction<'_, Sqlite>) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "update catalog_state
            set catalog_version = catalog_version + 1,
                changed_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
          where catalog_state_id = 1
      returning catalog_version",
    )
    .fetch_one(&mut **tx)
    .await
}

/// Which catalog version a request asks for: `?version=N`, `?release=NAME`, or neither (the
/// current one).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub enum VersionAsk {
    /// The version current when the request is answered.
    #[default]
    Current,
    /// A version by number.
    Number(i64),
    /// A named release.
    Release(String),
}

/// The query parameters that choose a version; every page and endpoint that reads the
/// catalog accepts them.
pub const VERSION_PARAMS: [&str; 2] = ["version", "release"];

impl VersionAsk {
    /// Takes `version` and `release` out of a request's query pairs, leaving the others for the
    /// page's own parameters. `Err` is one sentence per problem, naming the parameter.
    ///
    /// # Errors
    /// A version that is not a whole number ≥ 0, an empty or oversized release name, or both
    /// parameters at once.
    pub fn split(pairs: Vec<(String, String)>) -> Result<(Self, Vec<(String, String)>), String> {
        let mut ask = Self::Current;
        let mut rest = Vec::with_capacity(pairs.len());
        let mut problems = Vec::new();
        let mut seen = 0;
        for (key, value) in pairs {
            let value_t = value.trim();
            match key.as_str() {
                "version" if !value_t.is_empty() => {
                    seen += 1;
                    match value_t.parse::<i64>() {
                        Ok(n) if n >= 0 => ask = Self::Number(n),
                        _ => problems.push(format!(
                            "Parameter 'version': '{}' is not a catalog version; give a whole number such as 12 (the version each page names), or leave it out for the current one.",
                            value_t.chars().take(40).collect::<String>()
                        )),
                    }
                }
                "release" if !value_t.is_empty() => {
                    seen += 1;
                    if value_t.len() > 40 {
                        problems.push(
                            "Parameter 'release': a release name has at most 40 characters; /releases lists them.".to_owned(),
                        );
                    } else {
                        ask = Self::Release(value_t.to_owned());
                    }
                }
                "version" | "release" => {}
                _ => rest.push((key, value)),
            }
        }
        if seen > 1 {
            problems.push(
                "Give either 'version' or 'release', once: they both choose the catalog version."
                    .to_owned(),
            );
        }
        if problems.is_empty() {
            Ok((ask, rest))
        } else {
            Err(problems.join(" "))
        }
    }

    /// The query text that asks for this version again (`version=12`, `release=2027A`), or
    /// empty for the current one: what links on a page of a past version carry.
    pub fn query(&self) -> String {
        match self {
            Self::Current => String::new(),
            Self::Number(n) => format!("version={n}"),
            Self::Release(name) => format!("release={}", urlencoding_min(name)),
        }
    }
}

/// Release names are letters, digits, `.`, `-` and `_` (migration 8), which need no escaping
/// in a query; anything else is escaped byte by byte.
fn urlencoding_min(text: &str) -> String {
    text.bytes()
        .map(|b| {
            if b.is_ascii_alphanumeric() || b"._-".contains(&b) {
                (b as char).to_string()
            } else {
                format!("%{b:02X}")
            }
        })
        .collect()
}

/// A version a request is answered at.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Pinned {
    /// The version served.
    pub version: i64,
    /// The version current when it was resolved.
    pub current: i64,
    /// The release it was asked for by, if any.
    pub release: Option<String>,
    /// Whether the request named a version or release (its answer is then immutable once the
    /// version is past, and carries the version in its links).
    pub asked: bool,
}

impl Pinned {
    /// Whether the version served is older than the current one: its answers never change.
    pub fn is_past(&self) -> bool {
        self.version < self.current
    }
}

/// Why a version cannot be served.
#[derive(Debug, thiserror::Error)]
pub enum VersionError {
    /// A version after the current one.
    #[error(
        "Catalog version {asked} does not exist yet; the current version is {current}. Leave 'version' out for the current catalog."
    )]
    NotYet {
        /// The version asked for.
        asked: i64,
        /// The current version.
        current: i64,
    },
    /// A version from before the history began.
    #[error(
        "Catalog version {asked} is older than the history the catalog keeps: versions before {from} were not recorded, so they cannot be rebuilt. Ask for version {from} or later."
    )]
    BeforeHistory {
        /// The version asked for.
        asked: i64,
        /// The first version the history holds.
        from: i64,
    },
    /// No release of that name.
    #[error("There is no release named '{name}'; /releases lists the releases.")]
    NoRelease {
        /// The name asked for.
        name: String,
    },
    /// The database could not be read.
    #[error(transparent)]
    Db(#[from] sqlx::Error),
}

/// The first version the history holds (the version current when it began; 0 for a catalog
/// that started with it).
///
/// # Errors
/// When the database cannot be read.
pub async fn history_from(db: impl SqliteExecutor<'_>) -> sqlx::Result<i64> {
    sqlx::query_scalar("select history_from_version from catalog_state where catalog_state_id = 1")
        .fetch_one(db)
        .await
}

/// When catalog version `version` became current (RFC 3339 UTC), if recorded.
///
/// # Errors
/// When the database cannot be read.
pub async fn made_at(db: impl SqliteExecutor<'_>, version: i64) -> sqlx::Result<Option<String>> {
    sqlx::query_scalar("select made_at from catalog_version_made where catalog_version = ?")
        .bind(version)
        .fetch_optional(db)
        .await
}

/// The version `ask` names, checked against the history.
///
/// # Errors
/// [`VersionError`]: not yet made, from before the history, an unknown release, or a
/// database failure.
pub async fn resolve(pool: &SqlitePool, ask: &VersionAsk) -> Result<Pinned, VersionError> {
    let (current, from): (i64, i64) = sqlx::query_as(
        "select catalog_version, history_from_version from catalog_state where catalog_state_id = 1",
    )
    .fetch_one(pool)
    .await?;
    let (version, release) = match ask {
        VersionAsk::Current => {
            return Ok(Pinned {
                version: current,
                current,
                release: None,
                asked: false,
            });
        }
        VersionAsk::Number(n) => (*n, None),
        VersionAsk::Release(name) => {
            let found: Option<i64> =
                sqlx::query_scalar("select catalog_version from catalog_release where name = ?")
                    .bind(name)
                    .fetch_optional(pool)
                    .await?;
            let version = found.ok_or_else(|| VersionError::NoRelease { name: name.clone() })?;
            (version, Some(name.clone()))
        }
    };
    if version > current {
        return Err(VersionError::NotYet {
            asked: version,
            current,
        });
    }
    if version < from {
        return Err(VersionError::BeforeHistory {
            asked: version,
            from,
        });
    }
    Ok(Pinned {
        version,
        current,
        release,
        asked: true,
    })
}

/// What an audit event says happened.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NewEvent<'a> {
    /// Who did it; None for the system.
    pub account_id: Option<i64>,
    /// Short machine-readable action, e.g. "demo_loaded".
    pub action: &'a str,
    /// Kind of thing it concerns, e.g. "galaxy"; empty for the whole catalog.
    pub entity: &'a str,
    /// Its id, if any.
    pub entity_id: Option<i64>,
    /// One human-readable sentence.
    pub summary: String,
}

/// Append an audit event, stamped with the catalog version as it stands in this transaction.
///
/// # Errors
/// When the insert fails.
pub async fn record(tx: &mut Transaction<'_, Sqlite>, event: &NewEvent<'_>) -> sqlx::Result<i64> {
    sqlx::query_scalar(
        "insert into audit_event (account_id, action, entity, entity_id, summary, catalog_version)
         values (?, ?, ?, ?, ?, (select catalog_version from catalog_state where catalog_state_id = 1))
         returning audit_event_id",
    )
    .bind(event.account_id)
    .bind(event.action)
    .bind(event.entity)
    .bind(event.entity_id)
    .bind(&event.summary)
    .fetch_one(&mut **tx)
    .await
}

/// An audit event as shown on pages.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct Event {
    /// Key.
    pub audit_event_id: i64,
    /// When (RFC 3339 UTC).
    pub at: String,
    /// Who, by username; None for the system.
    pub username: Option<String>,
    /// Action.
    pub action: String,
    /// Entity kind.
    pub entity: String,
    /// Entity id.
    pub entity_id: Option<i64>,
    /// Sentence.
    pub summary: String,
    /// Catalog version after the event.
    pub catalog_version: i64,
}

/// The most recent audit events, newest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn recent_events(pool: &SqlitePool, limit: i64) -> sqlx::Result<Vec<Event>> {
    sqlx::query_as(
        "select e.audit_event_id, e.at, a.username, e.action, e.entity, e.entity_id, e.summary,
                e.catalog_version
           from audit_event e left join account a on a.account_id = e.account_id
       order by e.audit_event_id desc
          limit ?",
    )
    .bind(limit)
    .fetch_all(pool)
    .await
}
