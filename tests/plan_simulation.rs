//! Planning with known truth: is P(resolved) calibrated?
//!
//! Invented M–σ catalogs (no real objects), the design of tests/fit_simulation.rs: true log σ
//! ξ ~ N(2.3, 0.14²), log M_BH = 8.3 + 4.5 (ξ − log 200) + N(0, 0.35²), σ errors 0.02 dex,
//! mass errors 0.1 dex, 80 galaxies a catalog, fitted with the structural likelihood. For each
//! catalog, new candidates are drawn from the same model with a distance log-uniform in 3–100
//! Mpc measured with a 10 % error, a resolution log-uniform in 0.05–1″ and threshold 1; the
//! relation fitted to the catalog predicts P(θ_infl/θ_res ≥ 1) from the measured σ and
//! distance alone (`fit::plan::predict_theta`, docs/methods.md §4.9), and each candidate's true
//! θ_infl = G M/(σ² D) at its true σ, mass and distance says whether it is resolved.
//!
//! 500 catalogs × 48 candidates = 24,000 predictions, binned by predicted P in fifths. In each
//! bin the observed fraction must lie within 3 binomial standard errors √(p̄(1 − p̄)/n) of the
//! mean predicted P p̄ (3σ: with five bins a well-calibrated P fails about 1 % of seeds), and
//! so must the overall fraction. The same candidates predicted with the intrinsic scatter 20 %
//! too small (an overconfident P) must fail that check, so the check can fail.

use massline::fit::plan::{
    HostInput, LogDistance, RelationTerms, SoiScale, p_resolved, predict_theta,
};
use massline::fit::{FitSpec, Method, Point, fit};
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

const PIVOT: f64 = 2.301_029_995_663_981;
const ALPHA: f64 = 8.3;
const BETA: f64 = 4.5;
const EPS: f64 = 0.35;
const MU: f64 = 2.3;
const TAU: f64 = 0.14;
const SIGMA_ERR_DEX: f64 = 0.02;
const MASS_ERR_DEX: f64 = 0.1;
const CATALOG_SIZE: usize = 80;
const CATALOGS: u64 = 500;
const CANDIDATES: usize = 48;
const BINS: usize = 5;

/// G = 4.30091727e-3 pc M☉⁻¹ (km/s)² and 648 000/π arcsec per radian (docs/methods.md §5).
fn scale() -> SoiScale {
    SoiScale::new(4.300_917_27e-3, 648_000.0 / std::f64::consts::PI)
}

fn normal(rng: &mut StdRng) -> f64 {
    StandardNormal.sample(rng)
}

/// (predicted P, predicted P with ε 20 % low, truly resolved) of one catalog's candidates.
fn one_catalog(seed: u64) -> Vec<(f64, f64, bool)> {
    let mut rng = StdRng::seed_from_u64(seed);
    let points: Vec<Point> = (0..CATALOG_SIZE)
        .map(|_| {
            let xi = MU + TAU * normal(&mut rng);
            let m = ALPHA + BETA * (xi - PIVOT) + EPS * normal(&mut rng);
            Point::new(
                xi + SIGMA_ERR_DEX * normal(&mut rng),
                SIGMA_ERR_DEX,
                m + MASS_ERR_DEX * normal(&mut rng),
                MASS_ERR_DEX,
            )
        })
        .collect();
    let fitted = fit(&points, &FitSpec::new(Method::Structural, PIVOT)).unwrap();
    let terms = RelationTerms::from_fit(&fitted).unwrap();
    let overconfident = RelationTerms {
        scatter_dex: 0.8 * terms.scatter_dex,
        ..terms
    };
    let sc = scale();
    (0..CANDIDATES)
        .map(|_| {
            let xi = MU + TAU * normal(&mut rng);
            let log_m = ALPHA + BETA * (xi - PIVOT) + EPS * normal(&mut rng);
            let log_d = rng.random_range(3_f64.log10()..100_f64.log10());
            let log_res = rng.random_range(0.05_f64.log10()..1_f64.log10());
            let resolution = 10f64.powf(log_res);
            let true_log_theta = log_m - 2.0 * xi + sc.log_g - log_d + sc.log_arcsec_per_pc_at_mpc;
            // 10 % distance error: σ_logD = 0.1/ln 10 (docs/methods.md §3.2).
            let d_err = 0.1 / std::f64::consts::LN_10;
            let distance = LogDistance {
                log_mpc: log_d + d_err * normal(&mut rng),
                err_dex: d_err,
            };
            let host = HostInput::Sigma {
                log_sigma: xi + SIGMA_ERR_DEX * normal(&mut rng),
                err_dex: SIGMA_ERR_DEX,
            };
            let p = p_resolved(
                &predict_theta(&terms, host, distance, sc).unwrap(),
                resolution,
                1.0,
            );
            let p0 = p_resolved(
                &predict_theta(&overconfident, host, distance, sc).unwrap(),
                resolution,
                1.0,
            );
            (p, p0, true_log_theta >= resolution.log10())
        })
        .collect()
}

/// Per bin (count, mean predicted P, observed fraction, |difference| in binomial errors).
fn calibration(pairs: &[(f64, bool)]) -> Vec<(usize, f64, f64, f64)> {
    (0..BINS)
        .map(|b| {
            let inside: Vec<&(f64, bool)> = pairs
                .iter()
                .filter(|(p, _)| ((p * BINS as f64) as usize).min(BINS - 1) == b)
                .collect();
            let n = inside.len();
            let mean = inside.iter().map(|(p, _)| p).sum::<f64>() / n.max(1) as f64;
            let observed = inside.iter().filter(|(_, r)| *r).count() as f64 / n.max(1) as f64;
            let se = (mean * (1.0 - mean) / n.max(1) as f64).sqrt();
            (n, mean, observed, (observed - mean).abs() / se.max(1e-12))
        })
        .collect()
}

#[test]
fn predicted_probabilities_of_resolving_are_calibrated_against_known_truth() {
    let draws: Vec<(f64, f64, bool)> = (0..CATALOGS)
        .into_par_iter()
        .flat_map_iter(|seed| one_catalog(1_000 + seed))
        .collect();
    assert_eq!(draws.len(), CATALOGS as usize * CANDIDATES);
    let with_scatter: Vec<(f64, bool)> = draws.iter().map(|(p, _, r)| (*p, *r)).collect();
    let bins = calibration(&with_scatter);
    for (b, (n, mean, observed, off)) in bins.iter().enumerate() {
        eprintln!("bin {b}: n = {n}, mean P {mean:.3}, observed {observed:.3}, {off:.2} s.e.");
        assert!(
            *n >= 200,
            "bin {b} holds {n} candidates: the design must fill every bin"
        );
        assert!(
            *off < 3.0,
            "bin {b}: mean P {mean}, observed {observed} ({off} s.e.)"
        );
    }
    let n = with_scatter.len() as f64;
    let mean = with_scatter.iter().map(|(p, _)| p).sum::<f64>() / n;
    let observed = with_scatter.iter().filter(|(_, r)| *r).count() as f64 / n;
    assert!(
        (observed - mean).abs() < 3.0 * (mean * (1.0 - mean) / n).sqrt(),
        "overall: mean P {mean}, observed {observed}"
    );
    assert_eq!(bins.iter().map(|b| b.0).sum::<usize>(), with_scatter.len());
    // With ε 20 % low P is overconfident: some bin is far off.
    let without: Vec<(f64, bool)> = draws.iter().map(|(_, p0, r)| (*p0, *r)).collect();
    let worst = calibration(&without)
        .iter()
        .map(|b| b.3)
        .fold(0.0_f64, f64::max);
    eprintln!("with ε 20 % low: worst bin {worst:.1} s.e.");
    assert!(
        worst > 3.0,
        "an overconfident P passed the check ({worst} s.e.)"
    );
}
