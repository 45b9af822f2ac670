//! Posterior sampling of the likelihood estimators (structural and conditional) with flat priors.
//!
//! # Model
//!
//! ```text
//! p(θ | data) ∝ L(data | θ) · π(θ),   π(θ) = Π_j 1[lo_j ≤ θ_j ≤ hi_j]   (flat, bounded)
//! ```
//!
//! L is the structural (Kelly 2007) or conditional likelihood of [`super::Likelihood`], θ its
//! parameter vector. The priors are flat in the parameters themselves — in particular in ε, not
//! in ln ε, so that ε = 0 is not favoured (a flat prior in ln ε piles up at ε → 0 when the
//! scatter is unresolved). The bounds, chosen wide enough never to bind for a real scaling
//! relation, are (α̂, μ̂ = the maximum-likelihood values):
//!
//! ```text
//! alpha        α̂ − 10 … α̂ + 10           dex (log10 M_BH at the pivot)
//! beta, gamma  −20 … 20                    dex per dex
//! beta2        −50 … 50                    dex per dex²
//! eps          0 … 3                       dex (intrinsic scatter)
//! mu_k, mu2_k  μ̂ − 10 … μ̂ + 10            log10 units of x (true-x mean, structural)
//! tau_k, tau2_k  0 < τ ≤ 10                dex (true-x sd, structural; τ = 0 excluded)
//! rho_k        −1 … 1                      (true x–x2 correlation, planes)
//! w_k          0 … 1                       (mixture weights; the likelihood enforces Σ ≤ 1)
//! other        θ̂ − 10 … θ̂ + 10
//! ```
//!
//! The ensemble sampler of [`super::ensemble`] explores the posterior from a ball around the
//! maximum-likelihood point whose size per parameter is `init_scatter` times the Hessian error
//! of the ML fit. Each parameter is reported as its posterior median with the 16/84 and
//! 2.5/97.5 percentiles (Kelly 2007 quote the median and 68 % interval; common practice).
//!
//! # References
//!
//! - Kelly, B. C. 2007, ApJ 665, 1489, §4–6 (measurement-error model, flat priors on the
//!   regression parameters, posterior medians; section numbers from memory).
//! - Goodman, J. & Weare, J. 2010, Comm. App. Math. Comp. Sci. 5, 65 (the sampler).

use serde::Serialize;

use super::ensemble::{self, Chain, EnsembleConfig, ParamSummary};
use super::{Fit, FitError, FitSpec, Likelihood, Method, Point};

/// Half-width of the flat prior on α (and on any location parameter) around the ML value, dex.
pub const LOCATION_HALF_WIDTH_DEX: f64 = 10.0;
/// Bound of the flat prior on the slopes β and γ: |β| ≤ this (dex per dex).
pub const SLOPE_BOUND: f64 = 20.0;
/// Bound of the flat prior on the quadratic coefficient: |β2| ≤ this (dex per dex²).
pub const CURVATURE_BOUND: f64 = 50.0;
/// Upper bound of the flat prior on the intrinsic scatter ε, dex.
pub const SCATTER_MAX_DEX: f64 = 3.0;
/// Upper bound of the flat prior on the true-x sds τ_k, dex.
pub const X_SD_MAX_DEX: f64 = 10.0;

/// The flat prior on one parameter: density constant on [low, high], zero outside.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PriorBounds {
    /// Parameter name (as in [`Likelihood::names`]).
    pub name: &'static str,
    /// Lower bound (inclusive, except for τ where 0 itself is excluded).
    pub low: f64,
    /// Upper bound (inclusive).
    pub high: f64,
}

impl PriorBounds {
    /// Whether `v` lies in the support of this prior.
    #[must_use]
    pub fn contains(&self, v: f64) -> bool {
        let above = if self.name.starts_with("tau") {
            v > self.low
        } else {
            v >= self.low
        };
        above && v <= self.high
    }
}

/// The flat prior bounds of the documented table for parameters `names` with ML values `ml`.
#[must_use]
pub fn prior_bounds(names: &[&'static str], ml: &[f64]) -> Vec<PriorBounds> {
    names
        .iter()
        .zip(ml)
        .map(|(&name, &m)| {
            let around = (m - LOCATION_HALF_WIDTH_DEX, m + LOCATION_HALF_WIDTH_DEX);
            let (low, high) = match name {
                "beta" | "gamma" => (-SLOPE_BOUND, SLOPE_BOUND),
                "beta2" => (-CURVATURE_BOUND, CURVATURE_BOUND),
                "eps" => (0.0, SCATTER_MAX_DEX),
                n if n.starts_with("tau") => (0.0, X_SD_MAX_DEX),
                n if n.starts_with("rho") => (-1.0, 1.0),
                n if n.starts_with("w_") => (0.0, 1.0),
                _ => around,
            };
            PriorBounds { name, low, high }
        })
        .collect()
}

/// Posterior summary of a likelihood fit.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Posterior {
    /// Estimator whose likelihood was sampled.
    pub method: Method,
    /// Per parameter (every θ component, nuisance parameters included): median, 16/84 and
    /// 2.5/97.5 percentiles, mean and sd of the posterior sample.
    pub params: Vec<ParamSummary>,
    /// The flat priors used.
    pub priors: Vec<PriorBounds>,
    /// The maximum-likelihood point the walkers started around (θ layout).
    pub ml_start: Vec<f64>,
    /// Fraction of accepted proposals after burn-in.
    pub acceptance_fraction: f64,
    /// Integrated autocorrelation time per parameter, in steps.
    pub autocorr_time: Vec<f64>,
    /// Set when the chain is shorter than 50 autocorrelation times (the intervals are then
    /// unreliable), `None` otherwise.
    pub warning: Option<String>,
    /// Number of posterior samples summarised (walkers × post-burn-in steps).
    pub n_samples: usize,
    /// The sampler settings, seed included, so the run can be repeated.
    pub config: EnsembleConfig,
}

impl Posterior {
    /// The summary of the parameter called `name`, if sampled.
    #[must_use]
    pub fn get(&self, name: &str) -> Option<&ParamSummary> {
        self.params.iter().find(|p| p.name == name)
    }
}

/// Fits `points` by maximum likelihood and samples the posterior around the optimum.
///
/// # Model
///
/// See the module documentation (flat bounded priors; stretch-move sampler).
///
/// # Errors
///
/// [`FitError::Unsupported`] for FITEXY and BCES (no likelihood); the errors of
/// [`super::fit`] for the sample; [`FitError::InvalidSetting`] for a bad `cfg` (see
/// [`ensemble::sample`]).
///
/// # References
///
/// Kelly 2007, ApJ 665, 1489; Goodman & Weare 2010, Comm. App. Math. Comp. Sci. 5, 65.
pub fn posterior(
    points: &[Point],
    spec: &FitSpec,
    cfg: &EnsembleConfig,
) -> Result<Posterior, FitError> {
    let fit = super::fit(points, spec)?;
    posterior_from_fit(points, spec, &fit, cfg).map(|(p, _)| p)
}

/// As [`posterior`], starting from an existing maximum-likelihood `fit` of the same points and
/// spec, and also returning the chain itself.
///
/// # Errors
///
/// As [`posterior`].
pub fn posterior_from_fit(
    points: &[Point],
    spec: &FitSpec,
    fit: &Fit,
    cfg: &EnsembleConfig,
) -> Result<(Posterior, Chain), FitError> {
    posterior_with_progress(points, spec, fit, cfg, None)
}

/// As [`posterior_from_fit`], counting completed sampler steps (out of `cfg.steps`) in
/// `progress` for a caller that shows how far a background run has got, and stopping when
/// `progress` asks (`ensemble::Progress`).
///
/// # Errors
///
/// As [`posterior_from_fit`]; [`FitError::Unsupported`] when stopped.
pub fn posterior_with_progress(
    points: &[Point],
    spec: &FitSpec,
    fit: &Fit,
    cfg: &EnsembleConfig,
    progress: Option<&super::ensemble::Progress<'_>>,
) -> Result<(Posterior, Chain), FitError> {
    if !matches!(spec.method, Method::Structural | Method::Conditional) {
        return Err(FitError::Unsupported {
            what: format!(
                "The {} estimator has no likelihood, so it has no posterior to sample.",
                spec.method.as_str()
            ),
        });
    }
    let like = Likelihood::new(points, spec)?;
    let names: Vec<&'static str> = like.names().to_vec();
    let start = like.start(fit);
    let priors = prior_bounds(&names, &start);
    // Ball size per parameter: the Hessian error where the fit has one, else a small fraction
    // of the value (e.g. nuisance parameters or ε at its boundary, whose error may be 0).
    let scale: Vec<f64> = names
        .iter()
        .zip(&start)
        .map(|(name, v)| {
            let err = fit
                .cov_names
                .iter()
                .position(|n| n == name)
                .and_then(|i| fit.cov.get(i).and_then(|row| row.get(i)))
                .map_or(0.0, |var| var.max(0.0).sqrt());
            if err.is_finite() && err > 0.0 {
                err
            } else {
                0.05 * v.abs().max(0.1)
            }
        })
        .collect();
    let log_post = |theta: &[f64]| {
        if priors.iter().zip(theta).all(|(p, v)| p.contains(*v)) {
            like.log_likelihood(theta)
        } else {
            f64::NEG_INFINITY
        }
    };
    let chain = ensemble::sample_with_progress(log_post, &start, &scale, &names, cfg, progress)?;
    let params = (0..names.len())
        .map(|j| {
            ParamSummary::from_values(names[j], &mut chain.column(j)).ok_or_else(|| {
                FitError::InvalidSetting {
                    setting: "steps",
                    reason: "the posterior sample is empty or not finite".into(),
                }
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let posterior = Posterior {
        method: spec.method,
        params,
        priors,
        ml_start: start,
        acceptance_fraction: chain.acceptance_fraction,
        autocorr_time: chain.autocorr_time.clone(),
        warning: chain.warning.clone(),
        n_samples: chain.samples.len(),
        config: cfg.clone(),
    };
    Ok((posterior, chain))
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::msigma_sample as sample_points;
    use super::*;

    /// Marginal median of axis `axis` of a posterior tabulated on a regular grid (midpoint
    /// rule; the CDF is interpolated linearly between cell edges).
    fn grid_marginal_median(
        post: &[f64],
        dims: [usize; 3],
        axis: usize,
        lo: f64,
        step: f64,
    ) -> (f64, f64) {
        let mut marg = vec![0.0; dims[axis]];
        for a in 0..dims[0] {
            for b in 0..dims[1] {
                for e in 0..dims[2] {
                    let idx = [a, b, e][axis];
                    marg[idx] += post[(a * dims[1] + b) * dims[2] + e];
                }
            }
        }
        let total: f64 = marg.iter().sum();
        let centre = |i: usize| lo + (i as f64 + 0.5) * step;
        let mean: f64 = marg
            .iter()
            .enumerate()
            .map(|(i, m)| m * centre(i))
            .sum::<f64>()
            / total;
        let var: f64 = marg
            .iter()
            .enumerate()
            .map(|(i, m)| m * (centre(i) - mean).powi(2))
            .sum::<f64>()
            / total;
        let mut cum = 0.0;
        for (i, m) in marg.iter().enumerate() {
            let next = cum + m / total;
            if next >= 0.5 {
                // Cell i spans [lo + i·step, lo + (i + 1)·step]; the CDF is linear inside it.
                let frac = (0.5 - cum) / (m / total);
                return (lo + (i as f64 + frac) * step, var.sqrt());
            }
            cum = next;
        }
        unreachable!("the cumulative sum reaches 1")
    }

    #[test]
    fn conditional_posterior_medians_match_grid_quadrature() {
        // The posterior of (α, β, ε) under flat priors computed on a 3-D grid has no sampling
        // noise; the sampler's marginal medians must agree within 0.1 posterior sd.
        let points = sample_points(25, 4, 2024);
        let spec = FitSpec::new(Method::Conditional, 2.30103);
        let fit = super::super::fit(&points, &spec).unwrap();
        let cfg = EnsembleConfig::new(32, 5_000, 500, 99)
            .unwrap()
            .with_init_scatter(0.1)
            .unwrap();
        let (post, chain) = posterior_from_fit(&points, &spec, &fit, &cfg).unwrap();
        assert!(post.warning.is_none(), "{:?}", post.warning);
        assert!((0.2..0.8).contains(&post.acceptance_fraction));
        assert_eq!(post.n_samples, 32 * 4_500);
        assert_eq!(chain.samples.len(), post.n_samples);

        let like = Likelihood::new(&points, &spec).unwrap();
        let err = |i: usize| fit.cov[i][i].sqrt();
        // Grid: ±7 Hessian errors in α and β; ε from 0 to ε̂ + 8 errors (ε's posterior is
        // skewed to the right).
        let n = [90_usize, 90, 90];
        let lo = [
            fit.params.alpha - 7.0 * err(0),
            fit.params.beta - 7.0 * err(1),
            0.0,
        ];
        let hi = [
            fit.params.alpha + 7.0 * err(0),
            fit.params.beta + 7.0 * err(1),
            fit.params.eps + 8.0 * err(2),
        ];
        let step: Vec<f64> = (0..3).map(|k| (hi[k] - lo[k]) / n[k] as f64).collect();
        let mut log_post = Vec::with_capacity(n[0] * n[1] * n[2]);
        for a in 0..n[0] {
            for b in 0..n[1] {
                for e in 0..n[2] {
                    let theta = [
                        lo[0] + (a as f64 + 0.5) * step[0],
                        lo[1] + (b as f64 + 0.5) * step[1],
                        lo[2] + (e as f64 + 0.5) * step[2],
                    ];
                    log_post.push(like.log_likelihood(&theta));
                }
            }
        }
        let peak = log_post.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let post_grid: Vec<f64> = log_post.iter().map(|v| (v - peak).exp()).collect();
        // The grid must contain the posterior: its edges carry a negligible density.
        for (k, name) in ["alpha", "beta", "eps"].iter().enumerate() {
            let (median, sd) = grid_marginal_median(&post_grid, n, k, lo[k], step[k]);
            let mc = post.get(name).unwrap();
            eprintln!(
                "{name}: sampler median {:.5} sd {:.5}; grid median {median:.5} sd {sd:.5}; \
                 |Δ median| = {:.3} sd; τ = {:.1}, acceptance {:.3}",
                mc.median,
                mc.sd,
                (mc.median - median).abs() / sd,
                post.autocorr_time[k],
                post.acceptance_fraction
            );
            assert!(
                (mc.median - median).abs() < 0.1 * sd,
                "{name}: sampler median {} vs grid {median} (posterior sd {sd})",
                mc.median
            );
            assert!(
                (mc.sd - sd).abs() < 0.1 * sd,
                "{name}: sd {} vs grid {sd}",
                mc.sd
            );
        }
    }

    #[test]
    fn priors_follow_the_documented_table() {
        // docs/methods.md §2.8 prior table: α ∈ α̂ ± 10 (8.3 → [−1.7, 18.3]), β ∈ [−20, 20],
        // ε ∈ [0, 3], μ ∈ μ̂ ± 10, 0 < τ ≤ 10, weights in [0, 1], β₂ ∈ [−50, 50]; the ML values
        // are invented.
        let names = ["alpha", "beta", "eps", "mu_1", "tau_1", "w_1", "beta2"];
        let ml = [8.3, 4.5, 0.3, 2.3, 0.1, 0.5, 0.0];
        let p = prior_bounds(&names, &ml);
        assert!((p[0].low + 1.7).abs() < 1e-12 && (p[0].high - 18.3).abs() < 1e-12);
        assert!(p[1].contains(20.0) && !p[1].contains(20.1) && p[1].contains(-20.0));
        assert!(p[2].contains(0.0) && !p[2].contains(-1e-9) && !p[2].contains(3.01));
        assert!(p[3].contains(-7.6) && !p[3].contains(12.4));
        assert!(!p[4].contains(0.0) && p[4].contains(1e-9));
        assert!(p[5].contains(1.0) && !p[5].contains(1.01));
        assert!(p[6].contains(-50.0) && !p[6].contains(50.5));
    }

    #[test]
    fn estimators_without_a_likelihood_are_refused() {
        let points = sample_points(20, 0, 1);
        let spec = FitSpec::new(Method::Fitexy, 2.3);
        let err = posterior(&points, &spec, &EnsembleConfig::default()).unwrap_err();
        assert!(matches!(err, FitError::Unsupported { .. }));
    }

    #[test]
    fn structural_posterior_runs_and_brackets_the_ml_slope() {
        let points = sample_points(40, 6, 7);
        let spec = FitSpec::new(Method::Structural, 2.30103);
        let fit = super::super::fit(&points, &spec).unwrap();
        let cfg = EnsembleConfig::new(32, 2_500, 500, 3)
            .unwrap()
            .with_init_scatter(0.1)
            .unwrap();
        let (post, _) = posterior_from_fit(&points, &spec, &fit, &cfg).unwrap();
        assert!(post.get("mu_1").is_some() && post.get("tau_1").is_some());
        let beta = post.get("beta").unwrap();
        // Flat priors: the ML slope lies inside the central 95 % interval, and the 68 %
        // interval has about the Hessian width (within a factor 1.5; common practice).
        assert!(
            beta.p2_5 < fit.params.beta && fit.params.beta < beta.p97_5,
            "{beta:?}"
        );
        let width = 0.5 * (beta.p84 - beta.p16);
        let ratio = width / fit.errors.beta;
        assert!(
            (0.67..1.5).contains(&ratio),
            "{beta:?} vs {}",
            fit.errors.beta
        );
        let eps = post.get("eps").unwrap();
        assert!(eps.p2_5 >= 0.0);
    }

    /// The walker-mean estimate the sampler used before the per-walker average: kept to
    /// compare the two on the same chains.
    fn walker_mean_tau(chain: &Chain, j: usize) -> f64 {
        let averaged: Vec<f64> = chain
            .samples
            .chunks(chain.walkers)
            .map(|step| step.iter().map(|s| s[j]).sum::<f64>() / chain.walkers as f64)
            .collect();
        ensemble::integrated_autocorr_time(&averaged, ensemble::SOKAL_C).tau
    }

    fn spread(values: &[f64]) -> (f64, f64, f64) {
        let min = values.iter().copied().fold(f64::INFINITY, f64::min);
        let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (min, values.iter().sum::<f64>() / values.len() as f64, max)
    }

    #[test]
    #[ignore = "a measurement for docs/methods.md §2.8, not a check; run with --ignored --nocapture"]
    fn autocorrelation_times_of_msigma_posteriors_over_seeds_and_samples() {
        // The posterior settings of a caller's own sample (32 walkers, 5000 steps of which
        // 1000 burn-in, initial ball 0.1 ML errors), structural estimator, invented samples.
        // Measured (debug build, 13 min): reference τ 60.7–63.1 steps; over 10 seeds every
        // parameter's τ 48.8–65.1, the largest per seed 55.8–65.1, no warning (walker-mean
        // estimate: 27.1–199.3, above 80 steps, i.e. a warning, in 5 of 10 seeds); 25 objects:
        // no warning in 100 samples (walker-mean: 67), largest τ per sample 55.2–68.7 steps.
        // The walker-mean count checks 50 τ̂ > kept steps only (not an unsettled window).
        let spec = FitSpec::new(Method::Structural, 2.30103);
        let cfg = |steps: usize, seed: u64| {
            EnsembleConfig::new(32, steps, 1_000, seed)
                .unwrap()
                .with_init_scatter(0.1)
                .unwrap()
        };
        let points = sample_points(60, 0, 2026);
        let fit = super::super::fit(&points, &spec).unwrap();
        let (reference, _) = posterior_from_fit(&points, &spec, &fit, &cfg(41_000, 1)).unwrap();
        eprintln!(
            "60 objects, reference run of 40,000 kept steps: τ {:.1?}",
            reference.autocorr_time
        );
        let mut worst = Vec::new();
        let mut worst_old = Vec::new();
        for seed in 1..=10 {
            let (post, chain) =
                posterior_from_fit(&points, &spec, &fit, &cfg(5_000, seed)).unwrap();
            let old: Vec<f64> = (0..chain.names.len())
                .map(|j| walker_mean_tau(&chain, j))
                .collect();
            eprintln!(
                "seed {seed}: τ {:.1?}, walker-mean τ {old:.1?}, warning {}",
                post.autocorr_time,
                post.warning.is_some()
            );
            worst.push(post.autocorr_time.iter().copied().fold(0.0, f64::max));
            worst_old.push(old.iter().copied().fold(0.0, f64::max));
        }
        eprintln!(
            "largest τ per seed (min, mean, max): {:.1?}; walker-mean: {:.1?}",
            spread(&worst),
            spread(&worst_old)
        );
        let (mut warned, mut warned_old) = (0, 0);
        let mut worst25 = Vec::new();
        for sample in 0..100 {
            let points = sample_points(25, 0, 5_000 + sample);
            let fit = super::super::fit(&points, &spec).unwrap();
            let (post, chain) = posterior_from_fit(&points, &spec, &fit, &cfg(5_000, 1)).unwrap();
            warned += usize::from(post.warning.is_some());
            let old = (0..chain.names.len())
                .map(|j| walker_mean_tau(&chain, j))
                .fold(0.0, f64::max);
            warned_old += usize::from(4_000.0 < 50.0 * old);
            worst25.push(post.autocorr_time.iter().copied().fold(0.0, f64::max));
        }
        let mut sorted = worst25.clone();
        sorted.sort_by(f64::total_cmp);
        eprintln!(
            "25 objects, 100 samples: warning in {warned} (walker-mean estimate: {warned_old}); \
             largest τ per sample (min, mean, max) {:.1?}, median {:.1}, 90th percentile {:.1}",
            spread(&worst25),
            ensemble::quantile_sorted(&sorted, 0.5),
            ensemble::quantile_sorted(&sorted, 0.9)
        );
    }
}
