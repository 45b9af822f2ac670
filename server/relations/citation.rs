//! Fits one can cite: a stable identifier derived from everything that determines a fit, the
//! record kept when an identifier is first shown (`catalog::citations`), and the sentence and
//! BibTeX entry a paper quotes.
//!
//! A fit is determined by its relation, estimator, sample filter, pivots and catalog version
//! (the history rebuilds any version's rows exactly, migration 8), and by the fitting code: a
//! change of the code that can move a result changes [`FIT_CODE_VERSION`], and with it every
//! identifier, so an identifier never names two different results.

use std::sync::Arc;

use sha2::Digest as _;

use super::{Catalog, FitChoice, FitKey, FitOutcome, Relation, SampleFilter};
use crate::catalog::citations::{self, CitedFit};

/// The fitting code's version as identifiers include it: the package version and a counter
/// raised whenever an estimator's result can change (docs/methods.md says which).
pub const FIT_CODE_VERSION: &str = concat!(env!("CARGO_PKG_VERSION"), "-fit1");

/// Prefix of every fit identifier.
pub const FIT_ID_PREFIX: &str = "fit-";

/// The identifier of the whole-sample fit `key` made by the current code: `fit-` and the first
/// 16 hex digits (64 bits) of the SHA-256 of the text that names what determines it.
pub fn fit_id(key: &FitKey) -> String {
    fit_id_with(key, FIT_CODE_VERSION)
}

/// [`fit_id`] for a given code version.
pub fn fit_id_with(key: &FitKey, code_version: &str) -> String {
    let text = format!(
        "massline fit\nrelation={}\nmethod={}\nfilter={}\npivots={:016x},{:016x}\ncatalog_version={}\ncode={}\n",
        key.relation,
        key.method,
        key.filter,
        key.pivots.0,
        key.pivots.1,
        key.catalog_version,
        code_version
    );
    let digest = hex::encode(sha2::Sha256::digest(text.as_bytes()));
    format!("{FIT_ID_PREFIX}{}", &digest[..16])
}

/// Whether `text` has the form of a fit identifier.
pub fn looks_like_fit_id(text: &str) -> bool {
    text.strip_prefix(FIT_ID_PREFIX).is_some_and(|h| {
        h.len() == 16
            && h.bytes()
                .all(|b| b.is_ascii_hexdigit() && !b.is_ascii_uppercase())
    })
}

/// The identifier of a whole-sample fit, recorded with its result the first time this server
/// shows it (later visits of the same fit write nothing). A failure to record is logged and
/// the identifier still returned: the fit can be recomputed from what the identifier names
/// only once recorded, so the next showing tries again.
pub async fn cite(catalog: &Catalog, outcome: &Arc<FitOutcome>) -> String {
    let id = fit_id(&outcome.key);
    let Ok(fit) = &outcome.fit else {
        return id;
    };
    if outcome.key.left_out.is_some() || !catalog.fits.first_citation(&id) {
        return id;
    }
    let (pivot, pivot2) = (
        f64::from_bits(outcome.key.pivots.0),
        f64::from_bits(outcome.key.pivots.1),
    );
    let record = CitedFit {
        fit_id: id.clone(),
        relation: outcome.key.relation.clone(),
        method: outcome.key.method.to_owned(),
        sample_filter: outcome.key.filter.clone(),
        pivot_log: pivot,
        pivot2_log: pivot2,
        catalog_version: outcome.key.catalog_version,
        code_version: FIT_CODE_VERSION.to_owned(),
        result_json: result_json(fit),
        created_at: String::new(),
    };
    if let Err(e) = citations::record(&catalog.pool, &record).await {
        tracing::warn!(fit_id = %id, error = %e, "could not record a fit identifier");
        catalog.fits.forget_citation(&id);
    }
    id
}

/// The result as recorded and compared: the fit's JSON (`serde_json`), which writes every
/// float so that it reads back to the same bits.
pub fn result_json(fit: &crate::fit::Fit) -> String {
    serde_json::to_string(fit).unwrap_or_default()
}

/// A recorded fit made again from the catalog version it names.
#[derive(Clone)]
pub struct Remade {
    /// What was recorded when the identifier was first shown.
    pub record: CitedFit,
    /// The relation.
    pub relation: Relation,
    /// The estimator, sample and pivots, as a relation page reads them.
    pub choice: FitChoice,
    /// The catalog at the fit's version.
    pub catalog: Catalog,
    /// The fit made now from that version's rows.
    pub outcome: Arc<FitOutcome>,
    /// Whether the fit made now equals the recorded result (every float to the bit).
    pub same_result: bool,
    /// Whether the fitting code is the one the record was made with.
    pub same_code: bool,
}

/// Why a recorded fit cannot be made again.
#[derive(Debug, thiserror::Error)]
pub enum RemakeError {
    /// No identifier of that form, or none recorded.
    #[error(
        "There is no fit with the identifier '{0}'. Identifiers (fit- and 16 hexadecimal digits) appear under \"How to cite this fit\" on relation pages and as fit_id in fit.json and the API."
    )]
    Unknown(String),
    /// The record names a relation, estimator or sample this code no longer reads.
    #[error("The fit '{id}' was recorded with settings this server no longer reads: {reason}")]
    Unreadable {
        /// The identifier.
        id: String,
        /// What could not be read.
        reason: String,
    },
    /// The version cannot be served (before the history).
    #[error(transparent)]
    Version(#[from] crate::catalog::history::VersionError),
    /// The database or the fitting task failed.
    #[error(transparent)]
    Failed(#[from] anyhow::Error),
}

impl From<sqlx::Error> for RemakeError {
    fn from(e: sqlx::Error) -> Self {
        Self::Failed(e.into())
    }
}

impl From<RemakeError> for crate::error::AppError {
    fn from(err: crate::relations::citation::RemakeError) -> Self {
        match err {
            RemakeError::Unknown(_) | RemakeError::Unreadable { .. } => {
                Self::not_found_saying(err.to_string())
            }
            RemakeError::Version(e) => e.into(),
            RemakeError::Failed(e) => Self::Internal(e),
        }
    }
}

/// The fit recorded under `id`, made again from its catalog version (the history rebuilds the
/// version's rows; `catalog` is the current catalog, moved to that version here) and checked
/// against the recorded result.
///
/// # Errors
/// [`RemakeError`].
pub async fn remake(catalog: &Catalog, id: &str) -> Result<Remade, RemakeError> {
    let unknown = || RemakeError::Unknown(id.chars().take(40).collect());
    if !looks_like_fit_id(id) {
        return Err(unknown());
    }
    let record = citations::find(&catalog.pool, id)
        .await?
        .ok_or_else(unknown)?;
    let pinned = crate::catalog::history::resolve(
        &catalog.pool,
        &crate::catalog::history::VersionAsk::Number(record.catalog_version),
    )
    .await?;
    let at = catalog.at(Some(pinned.version));
    let unreadable = |reason: String| RemakeError::Unreadable {
        id: record.fit_id.clone(),
        reason,
    };
    let bands = at.bands().await?;
    let relation =
        Relation::from_slug(&record.relation, &bands).map_err(|e| unreadable(e.to_string()))?;
    let method = record
        .method
        .parse::<crate::fit::Method>()
        .map_err(|e| unreadable(e.to_string()))?;
    let mut pairs: Vec<(String, String)> = record
        .sample_filter
        .split(';')
        .filter_map(|kv| kv.split_once('='))
        .map(|(k, v)| (k.to_owned(), v.to_owned()))
        .collect();
    // Fits recorded before the `masses` choice existed took every mass method.
    if !pairs.iter().any(|(k, _)| k == "masses") {
        pairs.push(("masses".to_owned(), "all".to_owned()));
    }
    let filter = SampleFilter::parse(&pairs).map_err(unreadable)?;
    let differs = |a: f64, b: f64| a.to_bits() != b.to_bits();
    let choice = FitChoice {
        method,
        filter,
        pivot: differs(record.pivot_log, relation.default_pivot()).then_some(record.pivot_log),
        pivot2: differs(record.pivot2_log, relation.default_pivot2()).then_some(record.pivot2_log),
    };
    let outcome = at
        .fitted(&relation, method, &choice.filter, choice.pivots(&relation))
        .await?;
    let same_result = outcome
        .fit
        .as_ref()
        .is_ok_and(|f| result_json(f) == record.result_json);
    let same_code = record.code_version == FIT_CODE_VERSION;
    Ok(Remade {
        record,
        relation,
        choice,
        catalog: at,
        outcome,
        same_result,
        same_code,
    })
}

/// The one sentence a paper's text can quote for a fit.
pub fn cite_sentence(
    label: &str,
    method_label: &str,
    n: (usize, usize),
    version: i64,
    releases: &[String],
    id: &str,
) -> String {
    let release = match releases {
        [] => String::new(),
        [one] => format!(", release {one}"),
        more => format!(", releases {}", more.join(", ")),
    };
    let limits = match n.1 {
        0 => String::new(),
        1 => " and 1 upper limit".to_owned(),
        k => format!(" and {k} upper limits"),
    };
    format!(
        "The {label} relation was fitted with massline ({method_label} estimator; {} galaxies with measured masses{limits}) to catalog version {version}{release}; fit identifier {id}.",
        n.0
    )
}

/// A BibTeX entry for a fit (`@misc`); the key is the identifier. `year` is the year the
/// catalog version was made.
pub fn bibtex(
    label_tex: &str,
    method_label: &str,
    version: i64,
    releases: &[String],
    id: &str,
    year: &str,
) -> String {
    let release = if releases.is_empty() {
        String::new()
    } else {
        format!(", release {}", releases.join(", "))
    };
    format!(
        "@misc{{{id},\n  title = {{{{{label_tex} relation, {method_label} estimator, catalog version {version}{release}}}}},\n  author = {{{{massline catalog}}}},\n  year = {{{year}}},\n  note = {{Fit identifier {id}; fitting code {FIT_CODE_VERSION}; page /fits/{id}}}\n}}\n"
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::Method;
    use crate::relations::{Relation, SampleFilter};

    fn key(version: i64) -> FitKey {
        FitKey::new(
            version,
            &Relation::MSigma,
            Method::Structural,
            &SampleFilter::default(),
            2.3,
            11.0,
        )
    }

    #[test]
    fn an_identifier_names_everything_that_determines_the_fit() {
        let base = fit_id(&key(12));
        assert!(looks_like_fit_id(&base), "{base}");
        assert_eq!(base, fit_id(&key(12)), "the same fit, the same identifier");
        assert_ne!(base, fit_id(&key(13)), "another version");
        assert_ne!(base, fit_id_with(&key(12), "0.0.0-fit0"), "other code");
        let mut other = key(12);
        other.method = Method::Conditional.as_str();
        assert_ne!(base, fit_id(&other), "another estimator");
        let mut other = key(12);
        other.pivots.0 = 2.2f64.to_bits();
        assert_ne!(base, fit_id(&other), "another pivot");
        let mut other = key(12);
        other.filter = "morphology=elliptical".into();
        assert_ne!(base, fit_id(&other), "another sample");
        assert!(!looks_like_fit_id("fit-XYZ"));
        assert!(!looks_like_fit_id("fit-0123456789ABCDEF"));
    }

    #[test]
    fn the_sentence_and_bibtex_name_version_release_and_identifier() {
        let s = cite_sentence(
            "M–σ",
            "structural",
            (40, 2),
            12,
            &["2027A".into()],
            "fit-0123456789abcdef",
        );
        assert!(s.contains("catalog version 12, release 2027A"), "{s}");
        assert!(
            s.contains("40 galaxies with measured masses and 2 upper limits"),
            "{s}"
        );
        assert!(s.contains("fit-0123456789abcdef"), "{s}");
        let b = bibtex(
            "M--$\\sigma$",
            "structural",
            12,
            &[],
            "fit-0123456789abcdef",
            "2026",
        );
        assert!(b.starts_with("@misc{fit-0123456789abcdef,"), "{b}");
        assert!(b.contains("catalog version 12}}"), "{b}");
        assert!(b.contains("year = {2026}"), "{b}");
        assert_eq!(
            b.matches('{').count(),
            b.matches('}').count(),
            "balanced braces: {b}"
        );
    }
}
