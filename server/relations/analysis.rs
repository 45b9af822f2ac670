//! What a relation's page says about its fit beyond the parameters: the objects that lie off
//! the relation (with the same verdict rule as placing a new object), the most influential
//! objects (leave-one-out refits), and the zero-point offset between two subsamples.

use std::sync::Arc;
use std::time::Duration;

use super::place::{is_flagged, verdict};
use super::{FitCache, FitOutcome, Member};
use crate::catalog::model::{BulgeKind, CentreKind, MassMethod, Morphology};
use crate::error::AppResult;
use crate::fit::{self, Influence, Offset, Point};

/// An object at least "in tension" with the relation.
#[derive(Debug, Clone, PartialEq)]
pub struct Flagged {
    /// Its index in the fit's sample.
    pub index: usize,
    /// Observed minus fitted log M_BH, dex.
    pub residual_dex: f64,
    /// The residual in standard deviations.
    pub z: f64,
    /// Whether its mass is an upper limit.
    pub upper_limit: bool,
    /// The verdict (`relations::place::verdict`).
    pub verdict: &'static str,
}

/// Every object of the fit that is at least in tension with it (|z| ≥ 2; limits only when they
/// lie that far below), largest |z| first.
pub fn flagged(outcome: &FitOutcome) -> Vec<Flagged> {
    let Ok(f) = &outcome.fit else {
        return Vec::new();
    };
    let mut out: Vec<Flagged> = fit::residuals(f, &outcome.sample.points)
        .into_iter()
        .filter(|r| is_flagged(r.z, r.upper_limit))
        .map(|r| Flagged {
            index: r.index,
            residual_dex: r.residual_dex,
            z: r.z,
            upper_limit: r.upper_limit,
            verdict: verdict(r.z, r.upper_limit),
        })
        .collect();
    out.sort_by(|a, b| b.z.abs().total_cmp(&a.z.abs()));
    out
}

/// The `n` objects whose leaving out moves (α, β) most, in units of their errors, waiting at
/// most `wait` for the influence computation (`None`: as long as it takes); `Ok(None)` while
/// it is still being computed in the background.
///
/// # Errors
/// When the refitting task fails; `Ok(Some(Err(reason)))` when the influence cannot be computed.
pub async fn most_influential(
    fits: &FitCache,
    outcome: &Arc<FitOutcome>,
    n: usize,
    wait: Option<Duration>,
) -> AppResult<Option<Result<Vec<Influence>, String>>> {
    let Some(result) = fits.influence_within(outcome, wait).await? else {
        return Ok(None);
    };
    Ok(Some(match result.as_ref() {
        Ok(list) => {
            let mut sorted = list.clone();
            sorted.sort_by(|a, b| b.shift_sigma.total_cmp(&a.shift_sigma));
            sorted.truncate(n);
            Ok(sorted)
        }
        Err(e) => Err(e.to_string()),
    }))
}

/// A subsample for the zero-point offset: one value of one tag, e.g. morphology = elliptical.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Subset {
    dimension: &'static str,
    value: &'static str,
    label: &'static str,
}

impl Subset {
    /// Every subset a reader can pick.
    pub fn all() -> Vec<Subset> {
        let mut out = Vec::new();
        let mut push = |dimension, items: Vec<(&'static str, &'static str)>| {
            for (value, label) in items {
                out.push(Subset {
                    dimension,
                    value,
                    label,
                });
            }
        };
        push("morphology", Morphology::pairs());
        push("bulge_kind", BulgeKind::pairs());
        push("centre_kind", CentreKind::pairs());
        push("mass_method", MassMethod::pairs());
        out
    }

    /// The query form, `tag:value`.
    pub fn code(self) -> String {
        format!("{}:{}", self.dimension, self.value)
    }

    /// A few words for people, e.g. "bulge pseudo".
    pub fn describe(self) -> String {
        let what = match self.dimension {
            "morphology" => "morphology",
            "bulge_kind" => "bulge",
            "centre_kind" => "centre",
            _ => "mass method",
        };
        format!("{what} {}", self.label)
    }

    /// Whether the member belongs to this subsample.
    pub fn contains(self, m: &Member) -> bool {
        let word = match self.dimension {
            "morphology" => &m.morphology,
            "bulge_kind" => &m.bulge_kind,
            "centre_kind" => &m.centre_kind,
            _ => &m.mass_method,
        };
        word == self.value
    }

    /// Reads the query form.
    ///
    /// # Errors
    /// One sentence (without a full stop) saying how to write a subsample.
    pub fn parse(text: &str) -> Result<Subset, String> {
        Subset::all()
            .into_iter()
            .find(|s| s.code() == text)
            .ok_or_else(|| {
                format!(
                    "'{}' is not a subsample; write it as tag:value, e.g. morphology:elliptical or bulge_kind:pseudo",
                    text.chars().take(60).collect::<String>()
                )
            })
    }
}

/// The zero-point offset of subsample `b` against `a` at the fit's shared slope and scatter
/// (`fit::zero_point_offset`), fitted off the async runtime; None when the fit has no spec.
///
/// # Errors
/// When the fitting task fails; `Ok(Some(Err(reason)))` when the offset cannot be fitted.
pub async fn offset_between(
    outcome: &FitOutcome,
    a: Subset,
    b: Subset,
) -> AppResult<Option<Result<Offset, String>>> {
    let Ok(spec) = outcome.spec.clone() else {
        return Ok(None);
    };
    let pick = |s: Subset| -> Vec<Point> {
        outcome
            .sample
            .points
            .iter()
            .zip(&outcome.sample.members)
            .filter(|(_, m)| s.contains(m))
            .map(|(p, _)| p.clone())
            .collect()
    };
    let (pa, pb) = (pick(a), pick(b));
    let result = tokio::task::spawn_blocking(move || fit::zero_point_offset(&pa, &pb, &spec))
        .await
        .map_err(anyhow::Error::from)?;
    Ok(Some(result.map_err(|e| e.to_string())))
}
