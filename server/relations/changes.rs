//! What changed between two catalog versions: the galaxies added, the values adopted or
//! replaced, the distances changed (`catalog::changes`), and how each relation's default fit
//! (structural estimator, default sample and pivots) moved, with the significance of each
//! parameter's change (docs/methods.md §10), and the mean virial factors adopted. The page `/changes` and the API's
//! `/api/v1/changes` both answer from [`changes`].

use super::{Catalog, FitChoice, Relation};
use crate::catalog::changes as stored;
use crate::catalog::history::{self, Pinned, VersionAsk};
use crate::error::FieldError;

/// The parameters of the default fit compared, in the order shown.
pub const COMPARED: [&str; 4] = ["alpha", "beta", "gamma", "eps"];

/// The range asked for: `from` and `to`, each a catalog version, either left out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct RangeAsk {
    /// The version compared from; default `to − 1`.
    pub from: Option<i64>,
    /// The version compared to; default the current one.
    pub to: Option<i64>,
}

impl RangeAsk {
    /// Reads `from` and `to` from a request's query pairs. Each problem is one field error
    /// naming its parameter: a value that is not a whole number ≥ 0, an empty value, a
    /// parameter given twice, or any other parameter.
    ///
    /// # Errors
    /// The field errors, every parameter at fault.
    pub fn read(pairs: &[(String, String)]) -> Result<Self, Vec<FieldError>> {
        let mut ask = Self::default();
        let mut problems = Vec::new();
        for (key, value) in pairs {
            let slot = match key.as_str() {
                "from" => &mut ask.from,
                "to" => &mut ask.to,
                other => {
                    let name: String = other.chars().take(40).collect();
                    problems.push(FieldError::new(
                        name.as_str(),
                        format!("'{name}' is not a parameter here; give from and to, two catalog versions."),
                    ));
                    continue;
                }
            };
            let text = value.trim();
            if slot.is_some() {
                problems.push(FieldError::new(key.as_str(), format!("Give '{key}' once.")));
                continue;
            }
            match text.parse::<i64>() {
                Ok(n) if n >= 0 => *slot = Some(n),
                _ => problems.push(FieldError::new(
                    key.as_str(),
                    format!(
                        "'{}' is not a catalog version; give a whole number such as 12, or leave '{key}' out.",
                        text.chars().take(40).collect::<String>()
                    ),
                )),
            }
        }
        if problems.is_empty() {
            Ok(ask)
        } else {
            Err(problems)
        }
    }
}

/// The sentence for a range that does not run forward.
pub const NOT_FORWARD: &str =
    "The range is empty: from must be before to (from is the older version).";

/// Why a range cannot be compared.
#[derive(Debug, thiserror::Error)]
pub enum RangeError {
    /// from ≥ to.
    #[error("{NOT_FORWARD}")]
    NotForward,
    /// `to` is the first version the history keeps and `from` was left out: there is no
    /// earlier version to compare with.
    #[error(
        "Catalog version {0} is the first the history keeps: there is no earlier version to compare it with; give a later 'to'."
    )]
    NothingBefore(i64),
    /// A version outside the history or not made yet (`history::resolve`).
    #[error(transparent)]
    Version(#[from] history::VersionError),
}

/// The two versions compared, resolved against the history: `to` defaults to the current
/// version and `from` to `to − 1`.
///
/// # Errors
/// [`RangeError::NotForward`] when from ≥ to, [`RangeError::NothingBefore`] when `to` is
/// the first version of the history and `from` is left out; a version not made yet, older than the history,
/// or a database failure ([`RangeError::Version`]).
pub async fn resolve_range(
    pool: &sqlx::SqlitePool,
    ask: RangeAsk,
) -> Result<(Pinned, Pinned), RangeError> {
    if ask.from.zip(ask.to).is_some_and(|(from, to)| from >= to) {
        return Err(RangeError::NotForward);
    }
    let to = history::resolve(
        pool,
        &ask.to.map_or(VersionAsk::Current, VersionAsk::Number),
    )
    .await?;
    let from = match ask.from {
        Some(from) => from,
        None if to.version
            <= history::history_from(pool)
                .await
                .map_err(history::VersionError::Db)? =>
        {
            return Err(RangeError::NothingBefore(to.version));
        }
        None => to.version - 1,
    };
    if from >= to.version {
        return Err(RangeError::NotForward);
    }
    let from = history::resolve(pool, &VersionAsk::Number(from)).await?;
    Ok((from, to))
}

/// A new galaxy with its values at the range's end.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct GalaxyAdded {
    /// As stored.
    pub galaxy: stored::AddedGalaxy,
    /// Its adopted values at the range's end.
    pub values: Vec<stored::ValueAt>,
}

/// One parameter of a relation's default fit at the two versions.
#[derive(Debug, Clone, PartialEq)]
pub struct ParamChange {
    /// `alpha`, `beta`, `gamma` or `eps`.
    pub name: &'static str,
    /// Reported value and error at `from`, if that fit has the parameter.
    pub from: Option<(f64, f64)>,
    /// The same at `to`.
    pub to: Option<(f64, f64)>,
}

impl ParamChange {
    /// The change, to − from.
    pub fn delta(&self) -> Option<f64> {
        Some(self.to?.0 - self.from?.0)
    }

    /// Its significance ([`significance`]).
    pub fn significance(&self) -> Option<f64> {
        let (from, from_err) = self.from?;
        let (to, to_err) = self.to?;
        significance(to - from, from_err, to_err)
    }
}

/// A relation's default fit at the two versions.
#[derive(Debug, Clone, PartialEq)]
pub struct RelationChange {
    /// The relation.
    pub relation: Relation,
    /// Objects fitted at `from` (None without a fit).
    pub n_from: Option<usize>,
    /// Objects fitted at `to`.
    pub n_to: Option<usize>,
    /// The parameters present in either fit.
    pub params: Vec<ParamChange>,
    /// Why a fit is missing, one sentence per version that has none.
    pub problems: Vec<String>,
}

/// Everything that changed between two versions.
#[derive(Debug, Clone, PartialEq)]
pub struct Changes {
    /// The older version.
    pub from: Pinned,
    /// The newer one.
    pub to: Pinned,
    /// When each was made (RFC 3339 UTC), if recorded.
    pub from_made_at: Option<String>,
    /// The same for `to`.
    pub to_made_at: Option<String>,
    /// Galaxies whose first value was adopted in the range.
    pub galaxies_added: Vec<GalaxyAdded>,
    /// Values adopted or replaced in the range.
    pub values: Vec<stored::AdoptedChange>,
    /// Distances changed in the range.
    pub distances: Vec<stored::DistanceChange>,
    /// Activity classes changed in the range.
    pub activities: Vec<stored::ActivityChange>,
    /// Every relation of either version.
    pub relations: Vec<RelationChange>,
    /// Mean virial factors adopted in the range, oldest first.
    pub virial_factors: Vec<FactorChange>,
}

/// Who accepted a value, in words: the reviewer's name, or how it entered without a review.
pub fn accepted_by(change: &stored::AdoptedChange) -> String {
    match (&change.reviewer, change.source.as_str()) {
        (Some(name), _) => name.clone(),
        (None, "seed") => "demo load".to_owned(),
        (None, "import") => "command-line import".to_owned(),
        (None, _) => "no reviewer recorded".to_owned(),
    }
}

/// The significance of a parameter's change between two fits, in standard deviations:
/// Δ / √(σ_from² + σ_to²) (docs/methods.md §10). It treats the two fits as independent; when
/// their samples overlap, as two versions of one catalog mostly do, the true error of Δ is
/// smaller, so this overstates the error and understates the significance (conservative).
/// None when both errors are zero or any input is not finite.
pub fn significance(delta: f64, err_from: f64, err_to: f64) -> Option<f64> {
    let denominator = err_from.hypot(err_to);
    (delta.is_finite() && denominator.is_finite() && denominator > 0.0).then(|| delta / denominator)
}

/// A default fit's size and its parameters as (name, reported value, error), or why there is
/// none.
type FitAt = Result<(usize, Vec<(&'static str, f64, f64)>), String>;

/// A relation's default fit at one version.
async fn default_fit(
    catalog: &Catalog,
    relation: &Relation,
    present: bool,
) -> anyhow::Result<FitAt> {
    if !present {
        return Ok(Err(format!(
            "catalog version {} has no {} relation",
            catalog.pinned.unwrap_or_default(),
            relation.label()
        )));
    }
    let choice = FitChoice::default();
    let outcome = catalog
        .fitted(
            relation,
            choice.method,
            &choice.filter,
            choice.pivots(relation),
        )
        .await?;
    Ok(match &outcome.fit {
        Ok(fit) => Ok((
            fit.n,
            COMPARED
                .iter()
                .filter_map(|name| {
                    fit.intervals
                        .get(name)
                        .map(|iv| (*name, iv.estimate, iv.error))
                })
                .collect(),
        )),
        Err(e) => Err(e.to_string()),
    })
}

/// What changed between the versions `from` and `to` (resolved, from < to): the stored
/// changes in (from, to] and each relation's default fit at both.
///
/// # Errors
/// When the catalog cannot be read or a fitting task fails.
pub async fn changes(catalog: &Catalog, from: Pinned, to: Pinned) -> anyhow::Result<Changes> {
    let pool = &catalog.pool;
    let (a, b) = (from.version, to.version);
    let added = stored::galaxies_added(pool, a, b).await?;
    let ids: Vec<i64> = added.iter().map(|g| g.galaxy_id).collect();
    let mut values_at = stored::values_at(pool, &ids, b).await?;
    let galaxies_added = added
        .into_iter()
        .map(|galaxy| {
            let (mine, rest) = values_at
                .drain(..)
                .partition(|v| v.galaxy_id == galaxy.galaxy_id);
            values_at = rest;
            GalaxyAdded {
                galaxy,
                values: mine,
            }
        })
        .collect();
    let values = stored::values_adopted(pool, a, b).await?;
    let distances = stored::distances_changed(pool, a, b).await?;
    let activities = stored::activities_changed(pool, a, b).await?;
    let at_from = catalog.at(Some(a));
    let at_to = catalog.at(Some(b));
    let relations_from = at_from.relations().await?;
    let relations_to = at_to.relations().await?;
    let mut all = relations_to.clone();
    for r in &relations_from {
        if !all.contains(r) {
            all.push(r.clone());
        }
    }
    let mut relations = Vec::with_capacity(all.len());
    for relation in all {
        let before = default_fit(&at_from, &relation, relations_from.contains(&relation)).await?;
        let after = default_fit(&at_to, &relation, relations_to.contains(&relation)).await?;
        let params = COMPARED
            .iter()
            .filter_map(|name| {
                let find = |fit: &FitAt| {
                    fit.as_ref().ok().and_then(|(_, ps)| {
                        ps.iter()
                            .find(|(n, _, _)| n == name)
                            .map(|(_, v, e)| (*v, *e))
                    })
                };
                let change = ParamChange {
                    name,
                    from: find(&before),
                    to: find(&after),
                };
                (change.from.is_some() || change.to.is_some()).then_some(change)
            })
            .collect();
        let mut problems = Vec::new();
        for (version, fit) in [(a, &before), (b, &after)] {
            if let Err(e) = fit {
                problems.push(format!("No fit at version {version}: {e}"));
            }
        }
        relations.push(RelationChange {
            relation,
            n_from: before.as_ref().ok().map(|(n, _)| *n),
            n_to: after.as_ref().ok().map(|(n, _)| *n),
            params,
            problems,
        });
    }
    Ok(Changes {
        from_made_at: history::made_at(pool, a).await?,
        to_made_at: history::made_at(pool, b).await?,
        from,
        to,
        galaxies_added,
        values,
        distances,
        activities,
        relations,
        virial_factors: factors_adopted(pool, a, b).await?,
    })
}

/// A mean virial factor adopted in the range (`catalog::virial::adopt`).
#[derive(Debug, Clone, PartialEq)]
pub struct FactorChange {
    /// The width measure word ('sigma_line' or 'fwhm').
    pub width_definition: String,
    /// log10 ⟨f⟩ in force just before, dex (None if the width measure had none).
    pub old_log_f: Option<f64>,
    /// log10 ⟨f⟩ adopted, with its error, dex.
    pub new_log_f: (f64, f64),
    /// The catalog version it made.
    pub catalog_version: i64,
    /// Who adopted it (None: the command line).
    pub adopted_by: Option<String>,
    /// What was calibrated, as recorded.
    pub source: String,
}

/// The virial factors adopted in (from, to], oldest first, each with the factor it replaced.
///
/// # Errors
/// When the database cannot be read.
async fn factors_adopted(
    pool: &sqlx::SqlitePool,
    from: i64,
    to: i64,
) -> sqlx::Result<Vec<FactorChange>> {
    let mut out = Vec::new();
    let mut adopted = crate::catalog::virial::adoptions(pool).await?;
    adopted.retain(|a| a.from_version > from && a.from_version <= to);
    adopted.reverse();
    for a in adopted {
        let before = crate::catalog::virial::factors_at(pool, a.from_version - 1)
            .await
            .ok();
        let old_log_f = before.and_then(|f| {
            a.width_definition
                .parse::<crate::catalog::model::WidthDefinition>()
                .ok()
                .map(|w| f.of(w).0)
        });
        out.push(FactorChange {
            width_definition: a.width_definition,
            old_log_f,
            new_log_f: (a.log_f, a.log_f_err_dex),
            catalog_version: a.from_version,
            adopted_by: a.username,
            source: a.source,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs(list: &[(&str, &str)]) -> Vec<(String, String)> {
        list.iter()
            .map(|(k, v)| ((*k).to_owned(), (*v).to_owned()))
            .collect()
    }

    #[test]
    fn the_significance_is_the_change_over_the_errors_added_in_quadrature() {
        // Δ = 0.5, σ = 0.3 and 0.4: √(0.09 + 0.16) = 0.5, so one standard deviation.
        let s = significance(0.5, 0.3, 0.4).unwrap();
        assert!((s - 1.0).abs() < 1e-12, "{s}");
        // The sign follows the change.
        let s = significance(-0.24, 0.05, 0.12).unwrap();
        assert!((s + 0.24 / 0.13).abs() < 1e-12, "{s}");
        // No error at all: no significance rather than infinity.
        assert_eq!(significance(0.1, 0.0, 0.0), None);
        assert_eq!(significance(f64::NAN, 0.1, 0.1), None);
    }

    #[test]
    fn a_parameter_change_is_to_minus_from_and_needs_both_fits() {
        let c = ParamChange {
            name: "beta",
            from: Some((4.5, 0.3)),
            to: Some((5.1, 0.4)),
        };
        assert!((c.delta().unwrap() - 0.6).abs() < 1e-12);
        assert!((c.significance().unwrap() - 0.6 / 0.5).abs() < 1e-12);
        let half = ParamChange {
            name: "beta",
            from: None,
            to: Some((5.1, 0.4)),
        };
        assert_eq!(half.delta(), None);
        assert_eq!(half.significance(), None);
    }

    #[test]
    fn the_range_reads_two_whole_versions_and_names_every_parameter_at_fault() {
        assert_eq!(RangeAsk::read(&[]).unwrap(), RangeAsk::default());
        assert_eq!(
            RangeAsk::read(&pairs(&[("from", "3"), ("to", " 7 ")])).unwrap(),
            RangeAsk {
                from: Some(3),
                to: Some(7)
            }
        );
        let bad = RangeAsk::read(&pairs(&[
            ("from", "-1"),
            ("to", "latest"),
            ("colour", "red"),
        ]))
        .unwrap_err();
        let fields: Vec<&str> = bad.iter().map(|f| f.field.as_str()).collect();
        assert_eq!(fields, ["from", "to", "colour"]);
        assert!(bad[0].message.contains("'-1' is not a catalog version"));
        let twice = RangeAsk::read(&pairs(&[("to", "3"), ("to", "4")])).unwrap_err();
        assert_eq!(twice.len(), 1);
        assert!(twice[0].message.contains("once"), "{}", twice[0].message);
        let empty = RangeAsk::read(&pairs(&[("from", "")])).unwrap_err();
        assert_eq!(empty[0].field, "from");
    }
}
