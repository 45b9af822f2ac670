//! A sample the caller brings, fitted: `massline fit` reads it from a CSV file and
//! `POST /api/v1/fit` from a JSON body; both call [`fit_own_sample`] and only render its result.
//!
//! ```text
//! log10 M_BH = α + β (x − x0),  intrinsic scatter ε (dex)
//! x, y: log10 values (x in the host property's unit, y in M☉); errors in dex
//! ```
//!
//! The pivot x0 is the caller's, or the convention of the quantity the caller names, or
//! [`default_pivot`]'s rule on the median of x (with a warning, [`PivotRule::warning`]). The
//! optional bootstrap resamples the objects and refits (`fit::bootstrap`); the optional
//! posterior samples the likelihood with flat priors, starting from the fit
//! ([`POSTERIOR_WALKERS`] walkers, burn-in [`POSTERIOR_BURN_IN`] steps or half the steps if
//! fewer, `fit::posterior`).

use super::defaults::{
    POSTERIOR_BURN_IN, POSTERIOR_INIT_SCATTER, POSTERIOR_WALKERS, PivotRule, XQuantity,
    default_pivot,
};
use crate::fit::bootstrap::{Bootstrap, bootstrap};
use crate::fit::ensemble::EnsembleConfig;
use crate::fit::posterior::{Posterior, posterior_from_fit};
use crate::fit::{self, Fit, FitError, FitSpec, Method, Point};

/// What to compute for a caller's own sample.
#[derive(Debug, Clone, Copy)]
pub struct OwnSampleSettings {
    /// Estimator.
    pub method: Method,
    /// Pivot x0 in the log10 units of x; `None` lets [`default_pivot`] choose it.
    pub pivot: Option<f64>,
    /// What x is, when the caller says so: its convention is the pivot unless `pivot` is given.
    pub x_quantity: Option<XQuantity>,
    /// Bootstrap replicates, when a bootstrap is asked for.
    pub bootstrap: Option<usize>,
    /// Posterior steps per walker (burn-in included), when a posterior is asked for.
    pub posterior_steps: Option<usize>,
    /// Seed of the bootstrap and the posterior (the same seed gives the same numbers).
    pub seed: u64,
}

/// A caller's own sample, fitted.
#[derive(Debug, Clone)]
pub struct OwnSampleFit {
    /// The maximum-likelihood (or moment) fit.
    pub fit: Fit,
    /// Pivot used, log10 units of x.
    pub pivot: f64,
    /// How the pivot was chosen.
    pub pivot_rule: PivotRule,
    /// The bootstrap asked for.
    pub bootstrap: Option<Bootstrap>,
    /// The posterior asked for.
    pub posterior: Option<Posterior>,
}

/// Why a caller's own sample could not be fitted, by the setting at fault; the message is the
/// estimator's one sentence.
#[derive(thiserror::Error, Debug, Clone, PartialEq)]
pub enum OwnSampleError {
    /// The pivot or the fit itself (the points, the estimator).
    #[error(transparent)]
    Fit(FitError),
    /// The bootstrap asked for (its replicates).
    #[error(transparent)]
    Bootstrap(FitError),
    /// The posterior asked for (its steps, or an estimator without a likelihood).
    #[error(transparent)]
    Posterior(FitError),
}

impl OwnSampleError {
    /// The estimator's error, whichever setting it came from.
    #[must_use]
    pub fn into_fit_error(self) -> FitError {
        match self {
            OwnSampleError::Fit(e)
            | OwnSampleError::Bootstrap(e)
            | OwnSampleError::Posterior(e) => e,
        }
    }
}

/// Fits `points` with `settings`: picks the pivot, fits, then runs the posterior and the
/// bootstrap asked for (in that order, so when both fail the posterior's error is reported).
/// The fit's own `intervals` are the values and intervals to quote at any N (restricted
/// likelihood where it can be computed; docs/methods.md §2.8), so no resampling is added
/// unasked.
///
/// # Errors
///
/// [`OwnSampleError`] naming the step at fault with the estimator's reason.
pub fn fit_own_sample(
    points: &[Point],
    settings: &OwnSampleSettings,
) -> Result<OwnSampleFit, OwnSampleError> {
    let (pivot, pivot_rule) = match settings.pivot {
        Some(p) => (p, PivotRule::Given),
        None => default_pivot(points, settings.x_quantity),
    };
    let spec = FitSpec::new(settings.method, pivot)
        .with_pivot(pivot)
        .map_err(OwnSampleError::Fit)?;
    let fitted = fit::fit(points, &spec).map_err(OwnSampleError::Fit)?;
    let posterior = match settings.posterior_steps {
        Some(steps) => {
            let cfg = EnsembleConfig::new(
                POSTERIOR_WALKERS,
                steps,
                POSTERIOR_BURN_IN.min(steps / 2),
                settings.seed,
            )
            .and_then(|c| c.with_init_scatter(POSTERIOR_INIT_SCATTER))
            .map_err(OwnSampleError::Posterior)?;
            Some(
                posterior_from_fit(points, &spec, &fitted, &cfg)
                    .map_err(OwnSampleError::Posterior)?
                    .0,
            )
        }
        None => None,
    };
    let boot = match settings.bootstrap {
        Some(n) => {
            Some(bootstrap(points, &spec, n, settings.seed).map_err(OwnSampleError::Bootstrap)?)
        }
        None => None,
    };
    Ok(OwnSampleFit {
        fit: fitted,
        pivot,
        pivot_rule,
        bootstrap: boot,
        posterior,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::relations::SIGMA_PIVOT_LOG;

    /// Invented M–σ-like points on log M = 8.3 + 4.5 (x − log10 200) with ±0.3 dex offsets.
    fn small_sample() -> Vec<Point> {
        [2.05, 2.12, 2.18, 2.22, 2.27, 2.31, 2.35, 2.40, 2.44, 2.50]
            .iter()
            .enumerate()
            .map(|(i, &x)| {
                let off = if i % 2 == 0 { 0.3 } else { -0.3 };
                Point::new(x, 0.02, 8.3 + 4.5 * (x - SIGMA_PIVOT_LOG) + off, 0.1)
            })
            .collect()
    }

    fn settings() -> OwnSampleSettings {
        OwnSampleSettings {
            method: Method::Conditional,
            pivot: None,
            x_quantity: None,
            bootstrap: None,
            posterior_steps: None,
            seed: 1,
        }
    }

    #[test]
    fn a_small_sample_quotes_restricted_intervals_and_resamples_only_when_asked() {
        let points = small_sample();
        let plain = fit_own_sample(&points, &settings()).unwrap();
        assert!(
            matches!(plain.pivot_rule, PivotRule::InferredSigma { .. }),
            "{:?}",
            plain.pivot_rule
        );
        assert!((plain.pivot - SIGMA_PIVOT_LOG).abs() < 1e-12);
        assert!(plain.bootstrap.is_none() && plain.posterior.is_none());
        // Ten objects: the restricted ε exceeds the ML one (the fitted line's degrees of freedom).
        let eps = plain.fit.intervals.get("eps").unwrap();
        assert_eq!(
            plain.fit.intervals.kind,
            crate::fit::IntervalKind::Restricted
        );
        assert!(
            eps.estimate > plain.fit.params.eps,
            "{eps:?} vs {}",
            plain.fit.params.eps
        );
        let asked = fit_own_sample(
            &points,
            &OwnSampleSettings {
                bootstrap: Some(200),
                ..settings()
            },
        )
        .unwrap();
        assert_eq!(asked.bootstrap.unwrap().n_boot, 200);
    }

    /// Invented σ-like points on log M = 8.3 + 4.5 (x − log10 200) with ±0.3 dex offsets,
    /// the first at `low` and the last at `high` (log10 σ/km s⁻¹).
    fn sigma_sample(low: f64, high: f64) -> Vec<Point> {
        let mut xs = vec![low];
        xs.extend((0..28).map(|i| 1.95 + 0.025 * f64::from(i)));
        xs.push(high);
        xs.iter()
            .enumerate()
            .map(|(i, &x)| {
                let off = if i % 2 == 0 { 0.3 } else { -0.3 };
                let on_line = 8.3 + 4.5 * (x.clamp(1.95, 2.65) - SIGMA_PIVOT_LOG);
                Point::new(x, 0.02, on_line + off, 0.1)
            })
            .collect()
    }

    #[test]
    fn moving_one_extreme_point_across_the_sigma_range_moves_neither_pivot_nor_alpha() {
        // One point moved from log σ 2.80859 to 2.79, or from 1.31 to 1.29: the median stays
        // near 2.3, so x0 stays log10 200 = 2.30103 and α moves by the one point's pull only
        // (a few 0.01 dex at most for 30 objects; a pivot moved by 0.2 would move α by
        // β·0.2 ≈ 0.9 dex).
        for (before, after) in [
            (sigma_sample(1.95, 2.808_59), sigma_sample(1.95, 2.79)),
            (sigma_sample(1.31, 2.6), sigma_sample(1.29, 2.6)),
        ] {
            let a = fit_own_sample(&before, &settings()).unwrap();
            let b = fit_own_sample(&after, &settings()).unwrap();
            for f in [&a, &b] {
                assert!(
                    (f.pivot - SIGMA_PIVOT_LOG).abs() < 1e-12,
                    "{:?}",
                    f.pivot_rule
                );
                assert!(matches!(f.pivot_rule, PivotRule::InferredSigma { .. }));
            }
            let d_alpha = (a.fit.params.alpha - b.fit.params.alpha).abs();
            assert!(d_alpha < 0.02, "α moved by {d_alpha} dex");
        }
    }

    #[test]
    fn a_named_quantity_or_a_given_pivot_decides_the_pivot() {
        let points = small_sample();
        let named = |x_quantity, pivot| {
            fit_own_sample(
                &points,
                &OwnSampleSettings {
                    x_quantity,
                    pivot,
                    ..settings()
                },
            )
            .unwrap()
        };
        let mass = named(Some(XQuantity::Mass), None);
        assert_eq!(mass.pivot_rule, PivotRule::Convention(XQuantity::Mass));
        assert!((mass.pivot - 11.0).abs() < 1e-12);
        let given = named(Some(XQuantity::Sigma), Some(2.0));
        assert_eq!(given.pivot_rule, PivotRule::Given);
        assert!((given.pivot - 2.0).abs() < 1e-12);
    }

    #[test]
    fn each_error_names_the_setting_at_fault() {
        let points = small_sample();
        let pivot = fit_own_sample(
            &points,
            &OwnSampleSettings {
                pivot: Some(f64::NAN),
                ..settings()
            },
        )
        .unwrap_err();
        assert!(matches!(pivot, OwnSampleError::Fit(_)), "{pivot:?}");
        let boot = fit_own_sample(
            &points,
            &OwnSampleSettings {
                bootstrap: Some(1),
                ..settings()
            },
        )
        .unwrap_err();
        assert!(matches!(boot, OwnSampleError::Bootstrap(_)), "{boot:?}");
        let post = fit_own_sample(
            &points,
            &OwnSampleSettings {
                method: Method::Bces(crate::fit::BcesLine::YOnX),
                posterior_steps: Some(300),
                ..settings()
            },
        )
        .unwrap_err();
        assert!(matches!(post, OwnSampleError::Posterior(_)), "{post:?}");
        assert!(post.to_string().contains("no likelihood"), "{post}");
    }
}
