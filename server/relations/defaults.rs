//! The defaults every door shares (pages, the JSON API, the command line), each defined once:
//! the pivots, the rule that picks a pivot for a caller's own sample, the sampler and bootstrap
//! settings of a caller's own sample ([`super::fit_own_sample`]) and of the pages' background
//! runs ([`super::RunRegistry`]).

use crate::fit::Point;

/// log10 of the default σ pivot, 200 km/s (Tremaine et al. 2002, ApJ 574, 740): the
/// conventional M–σ pivot, σ0 = 200 km s⁻¹, so x0 = log10(200) = 2.30103.
pub const SIGMA_PIVOT_LOG: f64 = 2.301_029_995_663_981;
/// log10 of the default bulge-mass pivot, 10^11 M☉ (near the sample mean; common practice).
pub const MBULGE_PIVOT_LOG: f64 = 11.0;
/// log10 of the default luminosity pivot, 10^11 L☉ of the band (common practice).
pub const LUMINOSITY_PIVOT_LOG: f64 = 11.0;

/// The default pivot for `points` and the rule that chose it.
///
/// ```text
/// x0 = log10(200) = 2.30103          if every x ∈ [1.3, 2.8]  (x looks like log10 σ/km s⁻¹)
/// x0 = round(median(x) · 2) / 2      otherwise                (median rounded to 0.5)
/// ```
#[must_use]
pub fn default_pivot(points: &[Point]) -> (f64, &'static str) {
    if !points.is_empty() && points.iter().all(|p| (1.3..=2.8).contains(&p.x)) {
        return (
            SIGMA_PIVOT_LOG,
            "log10(200): the x values look like log10 sigma in km/s",
        );
    }
    let mut xs: Vec<f64> = points.iter().map(|p| p.x).collect();
    xs.sort_by(f64::total_cmp);
    let median = match xs.len() {
        0 => 0.0,
        n if n % 2 == 1 => xs[n / 2],
        n => 0.5 * (xs[n / 2 - 1] + xs[n / 2]),
    };
    ((median * 2.0).round() / 2.0, "median of x rounded to 0.5")
}

/// Walkers of every posterior run: a caller's own sample (`massline fit --posterior`,
/// `POST /api/v1/fit`) and the pages' runs.
pub const POSTERIOR_WALKERS: usize = 32;
/// Default steps per walker of the posterior of a caller's own sample (burn-in included;
/// `massline fit --steps`).
pub const POSTERIOR_STEPS: usize = 5_000;
/// Burn-in steps of the posterior of a caller's own sample (at most half the steps).
pub const POSTERIOR_BURN_IN: usize = 1_000;
/// Initial ball of the posterior walkers of a caller's own sample, in units of the ML errors.
pub const POSTERIOR_INIT_SCATTER: f64 = 0.1;

/// Below this many objects a fit whose intervals come from the likelihood's curvature alone
/// (not the restricted likelihood) gets a warning in `massline fit`: they are too small there
/// (tests/fit_simulation.rs measures it).
pub const SMALL_SAMPLE: usize = 30;

/// Default bootstrap replicates of a run started from the pages.
pub const DEFAULT_REPLICATES: usize = 1000;
/// Default posterior steps per walker of a run started from the pages (burn-in is a fifth of
/// them).
pub const DEFAULT_STEPS: usize = 5000;
/// The seed of every run started from the pages (stored with the run).
pub const RUN_SEED: u64 = 1;
/// Accepted bootstrap replicates of a run started from the pages.
pub const REPLICATES_RANGE: (usize, usize) = (20, 10_000);
/// Accepted posterior steps of a run started from the pages.
pub const STEPS_RANGE: (usize, usize) = (200, 50_000);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_pivot_follows_the_documented_rule() {
        // Invented x values. σ-like x: x0 = log10 200 = 2.30103 (Tremaine et al. 2002 pivot);
        // otherwise the median rounded to 0.5 (the rule above): median 10.9 → 11.0 (computed).
        let sigma = vec![
            Point::new(1.9, 0.02, 7.0, 0.1),
            Point::new(2.6, 0.02, 9.0, 0.1),
        ];
        let (p, rule) = default_pivot(&sigma);
        assert!((p - 2.301_03).abs() < 1e-5 && rule.starts_with("log10(200)"));
        let bulge: Vec<Point> = [10.2, 10.9, 11.3]
            .iter()
            .map(|&x| Point::new(x, 0.1, 8.0, 0.1))
            .collect();
        let (p, rule) = default_pivot(&bulge);
        assert!((p - 11.0).abs() < 1e-12 && rule.starts_with("median"));
    }
}
