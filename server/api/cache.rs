//! What the API keeps between requests of one catalog version, so that the hot reads (a fit,
//! placing one object) cost one version query and no recomputation:
//!
//! * the relations of the catalog (the luminosity bands come from the database);
//! * the fits placing uses (structural, whole catalog, default pivots), by relation slug;
//! * the serialized answer and entity tag of each fit read, by canonical settings.
//!
//! Everything is for one catalog version: a request that reads a newer version empties the
//! cache first, and nothing of an older version is ever stored or returned. One per server
//! (an `Extension` layer of the API's door, `api::door`), cheap to clone.
//!
//! [`ApiCache::catalog_version`] answers the version without a query while the database files
//! are unchanged. Measured on the release build, one SQLite query through the pool costs about
//! 55 µs of CPU, more than the rest of a fit read; `stat` of the two files costs a few µs.
//! Every commit (this process's or another's, e.g. `massline import`) appends to the WAL file,
//! changing its size or modification time; a checkpoint rewrites the database file. File times
//! have the kernel's coarse resolution, so two commits within one tick that leave both files
//! the same size could look alike: the version is therefore also re-read at least every
//! [`VERSION_RECHECK`].

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, PoisonError};
use std::time::{Duration, Instant, SystemTime};

use axum::body::Bytes;
use sqlx::SqlitePool;

use crate::catalog::history;
use crate::relations::{FitOutcome, Relation};

/// Longest time a remembered catalog version is used without reading it again.
pub const VERSION_RECHECK: Duration = Duration::from_millis(250);

/// Size and modification time of the database file and its WAL.
type FilesSignature = [(u64, Option<SystemTime>); 2];

fn files_signature(db_path: &Path) -> Option<FilesSignature> {
    let meta = |p: &Path| {
        std::fs::metadata(p)
            .ok()
            .map(|m| (m.len(), m.modified().ok()))
    };
    let mut wal = db_path.as_os_str().to_owned();
    wal.push("-wal");
    Some([meta(db_path)?, meta(&PathBuf::from(wal))?])
}

#[derive(Debug)]
struct VersionMemo {
    version: i64,
    signature: FilesSignature,
    read_at: Instant,
}

/// Most fit answers kept (different estimators, filters and pivots); then it starts afresh.
const MAX_ANSWERS: usize = 256;

/// A serialized fit answer with its entity tag.
#[derive(Debug, Clone)]
pub struct FitAnswerBytes {
    /// The entity tag.
    pub etag: String,
    /// The JSON body.
    pub body: Bytes,
}

#[derive(Debug, Default)]
struct Inner {
    version: i64,
    relations: Option<Vec<Relation>>,
    place_fits: HashMap<String, Arc<FitOutcome>>,
    answers: HashMap<String, FitAnswerBytes>,
}

impl Inner {
    /// Moves to `version` if it is newer (dropping everything); whether `version` is current.
    fn at(&mut self, version: i64) -> bool {
        if version > self.version {
            *self = Inner {
                version,
                ..Inner::default()
            };
        }
        version == self.version
    }
}

/// The API's per-version cache.
#[derive(Debug, Clone, Default)]
pub struct ApiCache {
    inner: Arc<Mutex<Inner>>,
    version: Arc<Mutex<Option<VersionMemo>>>,
}

impl ApiCache {
    /// The catalog version now: remembered while the database files are unchanged (and for at
    /// most [`VERSION_RECHECK`]), otherwise read.
    ///
    /// # Errors
    /// When the database cannot be read.
    pub async fn catalog_version(&self, pool: &SqlitePool, db_path: &Path) -> sqlx::Result<i64> {
        // The files are looked at before the query: a commit in between changes them again,
        // so the next request reads anew.
        let signature = files_signature(db_path);
        if let Some(sig) = signature {
            let memo = self.version.lock().unwrap_or_else(PoisonError::into_inner);
            if let Some(m) = memo.as_ref()
                && m.signature == sig
                && m.read_at.elapsed() < VERSION_RECHECK
            {
                return Ok(m.version);
            }
        }
        let version = history::current_version(pool).await?;
        if let Some(sig) = signature {
            *self.version.lock().unwrap_or_else(PoisonError::into_inner) = Some(VersionMemo {
                version,
                signature: sig,
                read_at: Instant::now(),
            });
        }
        Ok(version)
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, Inner> {
        self.inner.lock().unwrap_or_else(PoisonError::into_inner)
    }

    /// The relations of catalog version `version`, if known.
    pub fn relations(&self, version: i64) -> Option<Vec<Relation>> {
        let mut inner = self.lock();
        if inner.at(version) {
            inner.relations.clone()
        } else {
            None
        }
    }

    /// Keeps the relations of `version`.
    pub fn keep_relations(&self, version: i64, relations: &[Relation]) {
        let mut inner = self.lock();
        if inner.at(version) {
            inner.relations = Some(relations.to_vec());
        }
    }

    /// A placing fit of `version`, if known.
    pub fn place_fit(&self, version: i64, slug: &str) -> Option<Arc<FitOutcome>> {
        let mut inner = self.lock();
        if inner.at(version) {
            inner.place_fits.get(slug).cloned()
        } else {
            None
        }
    }

    /// Keeps a placing fit made at `version` (the outcome's own version decides).
    pub fn keep_place_fit(&self, slug: &str, outcome: &Arc<FitOutcome>) {
        let mut inner = self.lock();
        if inner.at(outcome.key.catalog_version) {
            inner.place_fits.insert(slug.to_owned(), outcome.clone());
        }
    }

    /// A serialized fit answer of `version`, if known.
    pub fn answer(&self, version: i64, settings: &str) -> Option<FitAnswerBytes> {
        let mut inner = self.lock();
        if inner.at(version) {
            inner.answers.get(settings).cloned()
        } else {
            None
        }
    }

    /// Keeps a serialized fit answer made at `version`.
    pub fn keep_answer(&self, version: i64, settings: &str, answer: FitAnswerBytes) {
        let mut inner = self.lock();
        if inner.at(version) {
            if inner.answers.len() >= MAX_ANSWERS {
                inner.answers.clear();
            }
            inner.answers.insert(settings.to_owned(), answer);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[tokio::test]
    async fn the_version_is_remembered_until_a_commit_changes_the_files() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("v.sqlite");
        let pool = crate::catalog::connect(&path).await.unwrap();
        let cache = ApiCache::default();
        let v1 = cache.catalog_version(&pool, &path).await.unwrap();
        assert_eq!(cache.catalog_version(&pool, &path).await.unwrap(), v1);
        // A commit through another pool, as another process would make it.
        let other = crate::catalog::connect(&path).await.unwrap();
        let mut tx = crate::catalog::begin_write(&other).await.unwrap();
        history::bump_version(&mut tx).await.unwrap();
        tx.commit().await.unwrap();
        assert_eq!(cache.catalog_version(&pool, &path).await.unwrap(), v1 + 1);
        // Without files to look at, every call reads.
        let missing = dir.path().join("missing.sqlite");
        assert_eq!(
            cache.catalog_version(&pool, &missing).await.unwrap(),
            v1 + 1
        );
    }

    #[test]
    fn a_newer_version_empties_the_cache_and_an_older_one_is_never_served() {
        let cache = ApiCache::default();
        let answer = |tag: &str| FitAnswerBytes {
            etag: tag.to_owned(),
            body: Bytes::from_static(b"{}"),
        };
        cache.keep_answer(3, "m_sigma", answer("a"));
        cache.keep_relations(3, &[Relation::MSigma]);
        assert_eq!(cache.answer(3, "m_sigma").unwrap().etag, "a");
        assert_eq!(cache.relations(3).unwrap(), [Relation::MSigma]);
        // Version 4 is read: version 3's entries are gone.
        assert!(cache.answer(4, "m_sigma").is_none());
        assert!(cache.relations(4).is_none());
        // A late request of version 3 neither reads nor stores.
        cache.keep_answer(3, "m_sigma", answer("old"));
        assert!(cache.answer(3, "m_sigma").is_none());
        assert!(cache.answer(4, "m_sigma").is_none());
    }
}
