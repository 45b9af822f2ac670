//! A sample the caller brings, fitted: `massline fit` reads it from a CSV file and
//! `POST /api/v1/fit` from a JSON body; both call [`fit_own_sample`] and only render its result.
//!
//! ```text
//! log10 M_BH = α + β (x − x0),  intrinsic scatter ε (dex)
//! x, y: log10 values (x in the host property's unit, y in M☉); errors in dex
//! ```
//!
//! The pivot x0 is the caller's or [`default_pivot`]'s. The optional bootstrap resamples the
//! objects and refits (`fit::bootstrap`); the optional posterior samples the likelihood with
//! flat priors, starting from the fit ([`POSTERIOR_WALKERS`] walkers, burn-in
//! [`POSTERIOR_BURN_IN`] steps or half the steps if fewer, `fit::posterior`).

use super::defaults::{
    POSTERIOR_BURN_IN, POSTERIOR_INIT_SCATTER, POSTERIOR_WALKERS, default_pivot,
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
    /// Bootstrap replicates, when a bootstrap is asked for.
    pub bootstrap: Option<usize>,
    /// Posterior steps per walker (burn-in included), when a posterior is asked for.
    pub posterior_steps: Option<usize>,
    /// Seed of the bootstrap and the posterior (the same seed gives the same numbers).
    pub seed: u64,
}

/// How the pivot was chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PivotRule {
    /// The caller gave it.
    Given,
    /// [`default_pivot`] chose it; the text names its rule.
    Default(&'static str),
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
        None => {
            let (p, rule) = default_pivot(points);
            (p, PivotRule::Default(rule))
        }
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
            bootstrap: None,
            posterior_steps: None,
            seed: 1,
        }
    }

    #[test]
    fn a_small_sample_quotes_restricted_intervals_and_resamples_only_when_asked() {
        let points = small_sample();
        let plain = fit_own_sample(&points, &settings()).unwrap();
        assert_eq!(
            plain.pivot_rule,
            PivotRule::Default("log10(200): the x values look like log10 sigma in km/s")
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
