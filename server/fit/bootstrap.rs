//! Bootstrap over objects for any estimator.
//!
//! # Model
//!
//! ```text
//! for b = 1 … B:   draw n objects from the sample with replacement  →  θ̂_b = fit(resample_b)
//! report per parameter: median, 16/84 and 2.5/97.5 percentiles and sd of {θ̂_b}
//! ```
//!
//! Whole objects are resampled (an upper limit stays an upper limit with its x), so the
//! bootstrap reflects the scatter of the sample itself and not only the quoted errors. A
//! replicate that cannot be fitted (e.g. a resample of only upper limits, or too few
//! detections) is counted as failed and left out of the percentiles. Replicate b draws its
//! resample from its own generator seeded by a hash of (seed, b), so the result does not
//! depend on how many threads run the replicates or in which order.
//!
//! # References
//!
//! - Efron, B. & Tibshirani, R. J. 1993, *An Introduction to the Bootstrap*, Chapman & Hall,
//!   ch. 6 and 13 (bootstrap standard errors, percentile intervals) — from memory.
//! - Akritas, M. G. & Bershady, M. A. 1996, ApJ 470, 706, §2 (bootstrap errors for small n
//!   preferred to the analytic ones) — from memory.

use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rayon::prelude::*;
use serde::Serialize;

use super::ensemble::ParamSummary;
use super::{FitError, FitSpec, Params, Point};

/// Fewest successful replicates for which percentiles are reported.
pub const MIN_SUCCESSFUL_REPLICATES: usize = 2;

/// One reason for failed replicates and how many replicates failed with it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct FailureCount {
    /// The fit's error message.
    pub reason: String,
    /// Number of replicates that failed with it.
    pub count: usize,
}

/// Bootstrap distribution of the fitted parameters.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Bootstrap {
    /// Replicates requested.
    pub n_boot: usize,
    /// Replicates that could not be fitted (left out of the summaries).
    pub n_failed: usize,
    /// The seed replicate seeds were derived from.
    pub seed: u64,
    /// Per parameter ("alpha", "beta", ["beta2" | "gamma"], "eps"): median, 16/84 and
    /// 2.5/97.5 percentiles, mean and sd of the successful replicates.
    pub params: Vec<ParamSummary>,
    /// Why replicates failed, most frequent first.
    pub failures: Vec<FailureCount>,
}

impl Bootstrap {
    /// The summary of the parameter called `name`, if present.
    #[must_use]
    pub fn get(&self, name: &str) -> Option<&ParamSummary> {
        self.params.iter().find(|p| p.name == name)
    }
}

/// The seed of replicate `i` derived from the run's `seed` (SplitMix64 finaliser applied to
/// the pair), so that replicates are independent streams whatever the thread schedule.
///
/// # Model
///
/// ```text
/// s_i = mix(seed ⊕ mix(i + 1)),  mix = SplitMix64 output function
/// ```
///
/// # References
///
/// Steele, G. L., Lea, D. & Flood, C. H. 2014, OOPSLA '14, 453 (SplitMix64) — from memory.
#[must_use]
pub fn replicate_seed(seed: u64, i: u64) -> u64 {
    splitmix64(seed ^ splitmix64(i.wrapping_add(1)))
}

/// SplitMix64 output function (Steele et al. 2014; constants from memory).
fn splitmix64(x: u64) -> u64 {
    let mut z = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The resample of replicate `i`: `points.len()` objects drawn with replacement.
#[must_use]
pub fn resample(points: &[Point], seed: u64, i: u64) -> Vec<Point> {
    let mut rng = StdRng::seed_from_u64(replicate_seed(seed, i));
    let n = points.len();
    (0..n)
        .map(|_| points[rng.random_range(0..n)].clone())
        .collect()
}

/// Bootstraps the fit of `points` with `spec` over `n_boot` resamples of the objects.
///
/// # Model
///
/// See the module documentation. The replicates run in parallel on the current rayon pool.
///
/// # Errors
///
/// [`FitError::InvalidSetting`] if `n_boot` < 2; the error of [`super::fit`] if the full sample
/// itself cannot be fitted; [`FitError::Unsupported`] if fewer than 2 replicates could be
/// fitted.
///
/// # References
///
/// Efron & Tibshirani 1993, ch. 13 (percentile interval) — from memory.
pub fn bootstrap(
    points: &[Point],
    spec: &FitSpec,
    n_boot: usize,
    seed: u64,
) -> Result<Bootstrap, FitError> {
    if n_boot < MIN_SUCCESSFUL_REPLICATES {
        return Err(FitError::InvalidSetting {
            setting: "n_boot",
            reason: format!("the bootstrap needs at least 2 replicates, not {n_boot}"),
        });
    }
    // The full sample must be fittable: otherwise every failure below would be the input's
    // fault, and the caller should hear that error instead.
    let full = super::fit_params_only(points, spec)?;
    let names = full.params.names();
    let results: Vec<Result<Params, FitError>> = (0..n_boot as u64)
        .into_par_iter()
        .map(|i| super::fit_params_only(&resample(points, seed, i), spec).map(|f| f.params))
        .collect();

    let mut columns: Vec<Vec<f64>> = vec![Vec::with_capacity(n_boot); names.len()];
    let mut failures: Vec<FailureCount> = Vec::new();
    for r in results {
        match r {
            Ok(p) => {
                for (col, v) in columns.iter_mut().zip(p.values()) {
                    col.push(v);
                }
            }
            Err(e) => {
                let reason = e.to_string();
                match failures.iter_mut().find(|f| f.reason == reason) {
                    Some(f) => f.count += 1,
                    None => failures.push(FailureCount { reason, count: 1 }),
                }
            }
        }
    }
    let n_failed: usize = failures.iter().map(|f| f.count).sum();
    let n_ok = n_boot - n_failed;
    if n_ok < MIN_SUCCESSFUL_REPLICATES {
        return Err(FitError::Unsupported {
            what: format!(
                "Only {n_ok} of {n_boot} bootstrap replicates could be fitted, too few for \
                 intervals."
            ),
        });
    }
    // Stable order: most frequent reason first, ties by message.
    failures.sort_by(|a, b| b.count.cmp(&a.count).then_with(|| a.reason.cmp(&b.reason)));
    let params = names
        .iter()
        .zip(columns.iter_mut())
        .filter_map(|(name, col)| ParamSummary::from_values(name, col))
        .collect();
    Ok(Bootstrap {
        n_boot,
        n_failed,
        seed,
        params,
        failures,
    })
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::msigma_sample as sample_points;
    use super::super::{BcesLine, Method};
    use super::*;

    #[test]
    fn result_does_not_depend_on_the_thread_count() {
        let points = sample_points(30, 4, 5);
        let spec = FitSpec::new(Method::Conditional, 2.30103);
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| bootstrap(&points, &spec, 64, 17).unwrap())
        };
        let one = run(1);
        assert_eq!(one, run(2));
        assert_eq!(one.n_boot, 64);
        assert_ne!(
            one,
            bootstrap(&points, &spec, 64, 18).unwrap(),
            "the seed matters"
        );
    }

    #[test]
    fn bootstrap_sd_is_close_to_the_analytic_error_for_bces() {
        // For a well-behaved sample without limits the bootstrap sd of the BCES slope and the
        // Akritas & Bershady (1996) analytic error estimate the same quantity; with 400
        // replicates and n = 60 they agree to ~25 % (common practice; Akritas & Bershady 1996
        // compare the two, from memory).
        let points = sample_points(60, 0, 11);
        let spec = FitSpec::new(Method::Bces(BcesLine::YOnX), 2.30103);
        let full = super::super::fit(&points, &spec).unwrap();
        let b = bootstrap(&points, &spec, 400, 3).unwrap();
        assert_eq!(b.n_failed, 0);
        let beta = b.get("beta").unwrap();
        let ratio = beta.sd / full.errors.beta;
        assert!(
            (0.75..1.33).contains(&ratio),
            "bootstrap {} vs analytic {}",
            beta.sd,
            full.errors.beta
        );
        assert!(
            beta.p16 < full.params.beta && full.params.beta < beta.p84,
            "{beta:?}"
        );
        assert!(beta.p2_5 < beta.p16 && beta.p84 < beta.p97_5);
    }

    #[test]
    fn replicates_that_cannot_be_fitted_are_counted() {
        // Five detections and three limits: some resamples have fewer detections than the
        // conditional estimator needs (4) and fail; the rest are summarised.
        let mut points = sample_points(5, 0, 8);
        points.extend(sample_points(3, 3, 9));
        let spec = FitSpec::new(Method::Conditional, 2.30103);
        let b = bootstrap(&points, &spec, 200, 1).unwrap();
        assert!(b.n_failed > 0, "{b:?}");
        assert!(b.n_failed < 200);
        assert_eq!(
            b.failures.iter().map(|f| f.count).sum::<usize>(),
            b.n_failed
        );
        assert!(b.failures[0].reason.ends_with('.'));
        assert!(b.get("beta").is_some());
    }

    #[test]
    fn bad_requests_are_refused() {
        let points = sample_points(20, 0, 2);
        let spec = FitSpec::new(Method::Conditional, 2.30103);
        assert!(matches!(
            bootstrap(&points, &spec, 1, 0),
            Err(FitError::InvalidSetting {
                setting: "n_boot",
                ..
            })
        ));
        assert!(
            bootstrap(&points[..2], &spec, 10, 0).is_err(),
            "the full sample cannot be fitted"
        );
    }

    #[test]
    fn replicate_seeds_differ_and_resamples_have_the_sample_size() {
        assert_ne!(replicate_seed(1, 0), replicate_seed(1, 1));
        assert_ne!(replicate_seed(1, 0), replicate_seed(2, 0));
        let points = sample_points(10, 2, 3);
        let r = resample(&points, 4, 0);
        assert_eq!(r.len(), 10);
        assert!(r.iter().all(|p| points.contains(p)));
        assert_eq!(r, resample(&points, 4, 0));
    }
}
