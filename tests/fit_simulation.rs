//! Simulations with known truth: bias and interval coverage of the likelihood estimators.
//!
//! Invented M–σ-like samples (no real objects): true log σ ξ ~ N(2.3, 0.14²), pivot
//! x0 = log10(200), log M_BH = 8.3 + 4.5 (ξ − x0) + N(0, 0.35²); σ errors uniform in
//! 0.01–0.035 dex, mass errors uniform in 0.05–0.3 dex; about 15 % of the objects are upper
//! limits because their true mass lies below a detection threshold (see [`simulate`]).
//!
//! Expected behaviour:
//!
//! * Structural likelihood (Kelly 2007, ApJ 665, 1489): no slope dilution under its Gaussian model
//!   of the true x. docs/methods.md §2.6 (computed there from 2000 simulated samples of this
//!   design): slope bias +0.020 ± 0.009 (an earlier, smaller run gave −0.02 ± 0.03).
//! * Conditional likelihood: the slope is attenuated by about τ²/(τ² + ⟨σ_x²⟩) (regression
//!   dilution; e.g. Akritas & Bershady 1996, §1 — from memory). Here ⟨σ_x²⟩ =
//!   (0.01² + 0.01·0.035 + 0.035²)/3 = 5.58e-4 dex² and τ² = 0.0196, so the expected bias is
//!   −4.5 · 5.58e-4/(0.0196 + 5.58e-4) = −0.125 [computed from that formula]; docs/methods.md §2.6
//!   measures −0.110 ± 0.009 in 2000 simulated samples (computed; an earlier, smaller run gave
//!   −0.14 ± 0.03). The formula is first-order, so the test accepts the band −0.22 … −0.06
//!   (the project's margin).
//! * 68 % intervals from the inverse Hessian should cover the truth in 68 % of samples; with
//!   200 samples the binomial standard error is √(0.68 · 0.32/200) = 3.3 % (computed), so
//!   60–76 % (±2.5 s.e., the project's margin) is accepted.

use massline::fit::bootstrap::bootstrap;
use massline::fit::ensemble::EnsembleConfig;
use massline::fit::posterior::posterior_from_fit;
use massline::fit::{Fit, FitSpec, Method, Point, fit};
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rand_distr::{Distribution, Normal};
use rayon::prelude::*;

const PIVOT: f64 = 2.301_029_995_663_981;
const ALPHA: f64 = 8.3;
const BETA: f64 = 4.5;
const EPS: f64 = 0.35;
const MU: f64 = 2.3;
const TAU: f64 = 0.14;

/// Zero point of the detection threshold (see [`simulate`]), chosen so that about 15 % of
/// the objects fall below it: y − L has mean 8.3 − 7.69 = 0.61 dex and sd
/// √(0.35² + (2.5·0.14)² + 0.25² + ⟨σ_y²⟩) = √(0.3075 + 0.0358) = 0.586 dex, so
/// P(y < L) = Φ(−0.61/0.586) = Φ(−1.041) = 0.149 (computed; the x-error term 4⟨σ_x²⟩ = 0.0022
/// left out of that sd raises it to 0.588 and P to 0.150).
const THRESHOLD_ZERO_POINT: f64 = 7.69;

/// One seeded sample of `n` objects.
///
/// An object is an upper limit when its measured mass y falls below a detection threshold
/// that depends on the observed σ and on a random per-object term (distance, data quality):
/// L = 7.69 + 2 (x − x0) + N(0, 0.25²) — resolving the sphere of influence needs
/// r_infl ∝ M/σ² above a resolution limit, hence the slope 2. The reported limit is L with
/// the object's mass error as its own uncertainty, so that P(y < L) is exactly the censored
/// term of the likelihoods (Tobit-type censoring; docs/methods.md §2.2). The censoring depends
/// only on observed quantities and independent noise, so it is ignorable.
fn simulate(n: usize, seed: u64) -> Vec<Point> {
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::new(0.0, 1.0).unwrap();
    (0..n)
        .map(|_| {
            let xi = MU + TAU * unit.sample(&mut rng);
            let eta = ALPHA + BETA * (xi - PIVOT) + EPS * unit.sample(&mut rng);
            let x_err = rng.random_range(0.01..0.035);
            let y_err = rng.random_range(0.05..0.3);
            let x = xi + x_err * unit.sample(&mut rng);
            let y = eta + y_err * unit.sample(&mut rng);
            let threshold = THRESHOLD_ZERO_POINT + 2.0 * (x - PIVOT) + 0.25 * unit.sample(&mut rng);
            if y < threshold {
                let mut p = Point::new(x, x_err, threshold, y_err);
                p.upper_limit = true;
                p
            } else {
                Point::new(x, x_err, y, y_err)
            }
        })
        .collect()
}

/// Bias, its standard error, the mean reported error and the 68 % coverage of one parameter.
#[derive(Debug)]
struct Stats {
    bias: f64,
    bias_se: f64,
    mean_err: f64,
    coverage: f64,
}

fn stats(values: &[(f64, f64)], truth: f64) -> Stats {
    let n = values.len() as f64;
    let bias = values.iter().map(|(v, _)| v - truth).sum::<f64>() / n;
    let var = values
        .iter()
        .map(|(v, _)| (v - truth - bias).powi(2))
        .sum::<f64>()
        / (n - 1.0);
    let mean_err = values.iter().map(|(_, e)| e).sum::<f64>() / n;
    let covered = values
        .iter()
        .filter(|(v, e)| (v - truth).abs() <= *e)
        .count() as f64;
    Stats {
        bias,
        bias_se: (var / n).sqrt(),
        mean_err,
        coverage: covered / n,
    }
}

fn column(fits: &[Fit], pick: impl Fn(&Fit) -> (f64, f64)) -> Vec<(f64, f64)> {
    fits.iter().map(pick).collect()
}

#[test]
fn structural_is_unbiased_and_covers_while_conditional_dilutes_the_slope() {
    let started = std::time::Instant::now();
    let pairs: Vec<(Fit, Fit)> = (0..200_u64)
        .into_par_iter()
        .map(|s| {
            let pts = simulate(60, 10_000 + s);
            let st = fit(&pts, &FitSpec::new(Method::Structural, PIVOT)).unwrap();
            let co = fit(&pts, &FitSpec::new(Method::Conditional, PIVOT)).unwrap();
            (st, co)
        })
        .collect();
    let (st, co): (Vec<Fit>, Vec<Fit>) = pairs.into_iter().unzip();
    let report = |label: &str, fits: &[Fit]| {
        let a = stats(&column(fits, |f| (f.params.alpha, f.errors.alpha)), ALPHA);
        let b = stats(&column(fits, |f| (f.params.beta, f.errors.beta)), BETA);
        let e = stats(&column(fits, |f| (f.params.eps, f.errors.eps)), EPS);
        for (name, s) in [("alpha", &a), ("beta", &b), ("eps", &e)] {
            eprintln!(
                "{label:<12} {name:<6} bias {:+.4} ± {:.4}  mean error {:.4}  68% coverage {:.3}",
                s.bias, s.bias_se, s.mean_err, s.coverage
            );
        }
        (a, b, e)
    };
    let (sa, sb, se) = report("structural", &st);
    let (ca, cb, ce) = report("conditional", &co);
    let limits = st.iter().map(|f| f.n_upper).sum::<usize>() as f64 / (60.0 * st.len() as f64);
    // Paired difference conditional − structural: the sample noise common to both cancels, so
    // this measures the dilution relative to the unbiased estimator much more precisely.
    let diff: Vec<f64> = st
        .iter()
        .zip(&co)
        .map(|(s, c)| c.params.beta - s.params.beta)
        .collect();
    let nd = diff.len() as f64;
    let md = diff.iter().sum::<f64>() / nd;
    let sd_md = (diff.iter().map(|d| (d - md).powi(2)).sum::<f64>() / (nd - 1.0) / nd).sqrt();
    eprintln!(
        "paired slope difference conditional − structural {md:+.4} ± {sd_md:.4}; upper-limit \
         fraction {limits:.3}; 200 samples × 2 fits in {:.1} s",
        started.elapsed().as_secs_f64()
    );
    // Expected 0.15 (computed at THRESHOLD_ZERO_POINT); the band is the project's margin.
    assert!((0.12..0.18).contains(&limits), "censored fraction {limits}");

    // Structural slope: no dilution (bias below a quarter of the mean reported error) and
    // honest errors (68 % coverage within 60–76 %).
    assert!(
        sb.bias.abs() < 0.25 * sb.mean_err,
        "structural slope bias {sb:?}"
    );
    assert!(
        (0.60..=0.76).contains(&sb.coverage),
        "structural slope coverage {sb:?}"
    );
    // Structural zero point: the same two properties hold.
    assert!(
        sa.bias.abs() < 0.25 * sa.mean_err,
        "structural zero-point bias {sa:?}"
    );
    assert!(
        (0.60..=0.76).contains(&sa.coverage),
        "structural zero-point coverage {sa:?}"
    );
    // Intrinsic scatter: the ML ε is biased low at small N (it ignores the degrees of freedom
    // of the fitted line; docs/methods.md §2.1) — by −0.008 ± 0.004 dex here (measured by this
    // test; docs/methods.md §2.6 gives −0.009 ± 0.001 dex from 2000 samples), a sixth of its
    // error — and its Hessian interval still covers.
    assert!(se.bias < 0.0, "{se:?}");
    assert!(se.bias.abs() < 0.25 * se.mean_err, "{se:?}");
    assert!((0.60..=0.76).contains(&se.coverage), "{se:?}");

    // Conditional slope: diluted. Against the truth: negative, more than 3 standard errors
    // from 0 and inside the band −0.22 … −0.06 around the expected −0.125 (module docs).
    assert!(cb.bias < 0.0, "{cb:?}");
    assert!(
        cb.bias / cb.bias_se < -3.0,
        "dilution not significant: {cb:?}"
    );
    assert!(
        (-0.22..=-0.06).contains(&cb.bias),
        "dilution outside the band: {cb:?}"
    );
    // Against the structural fit of the same samples: the same band, far more significant.
    assert!(
        (-0.22..=-0.06).contains(&md),
        "paired slope difference {md}"
    );
    assert!(md / sd_md < -10.0, "paired slope difference {md} ± {sd_md}");
    // The dilution shows in the slope only: the conditional zero point (x0 is close to the
    // mean x) and scatter agree with the structural ones in bias and coverage.
    assert!(ca.bias.abs() < 0.25 * ca.mean_err, "{ca:?}");
    assert!((0.60..=0.76).contains(&ca.coverage), "{ca:?}");
    assert!(ce.bias.abs() < 0.25 * ce.mean_err, "{ce:?}");
}

#[test]
fn at_small_n_the_quoted_interval_covers_more_often_than_the_curvature_one() {
    // 200 samples of 12 objects (about 15 % limits). The inverse-Hessian (curvature) error of
    // the structural slope under-covers at such small N: the likelihood is far from quadratic
    // and the ML ε is biased low, which narrows the slope error (in 800 samples of this design
    // it held the truth in 0.61 of them at 68 % nominal; measured by an earlier run of this
    // test). The quoted (restricted) interval, the bootstrap percentile interval (100
    // resamples) and the posterior 68 % interval (flat priors) are computed for the same
    // samples and shown beside it. With 200 samples the binomial s.e. of a 68 % coverage is
    // √(0.68 · 0.32/200) = 3.3 % (computed); the comparisons below are paired (same samples).
    // Measured by this test: curvature 0.555, quoted 0.655, bootstrap 0.610, posterior 0.645.
    let started = std::time::Instant::now();
    let rows: Vec<[bool; 4]> = (0..200_u64)
        .into_par_iter()
        .map(|s| {
            let pts = simulate(12, 50_000 + s);
            let spec = FitSpec::new(Method::Structural, PIVOT);
            let f = fit(&pts, &spec).unwrap();
            let hess = (f.params.beta - BETA).abs() <= f.errors.beta;
            let quoted = f.intervals.get("beta").unwrap().covers68(BETA);
            let b = bootstrap(&pts, &spec, 100, s).unwrap();
            let bb = b.get("beta").unwrap();
            let boot = bb.p16 <= BETA && BETA <= bb.p84;
            let cfg = EnsembleConfig::new(16, 1_500, 300, s)
                .unwrap()
                .with_init_scatter(0.1)
                .unwrap();
            let (post, _) = posterior_from_fit(&pts, &spec, &f, &cfg).unwrap();
            let pb = post.get("beta").unwrap();
            let inside = pb.p16 <= BETA && BETA <= pb.p84;
            [hess, quoted, boot, inside]
        })
        .collect();
    let n = rows.len() as f64;
    let frac = |k: usize| rows.iter().filter(|r| r[k]).count() as f64 / n;
    let (hess, quoted, boot, post) = (frac(0), frac(1), frac(2), frac(3));
    eprintln!(
        "N = 12, 200 samples: 68% slope coverage  curvature {hess:.3}  quoted {quoted:.3}  \
         bootstrap {boot:.3}  posterior {post:.3}  ({:.1} s)",
        started.elapsed().as_secs_f64()
    );
    // The curvature interval under-covers; the quoted one is within 2.5 binomial s.e. of
    // 68 % and covers more often on the same samples, as does the posterior.
    assert!(hess < 0.68 - 0.033, "curvature coverage {hess}");
    assert!(
        (0.68 - 2.5 * 0.033..=0.68 + 2.5 * 0.033).contains(&quoted),
        "{quoted}"
    );
    assert!(quoted > hess && post > hess, "{hess} {quoted} {post}");
}

/// Bias and coverage of one parameter's reported value and intervals over many samples.
#[derive(Debug)]
struct Reported {
    bias: f64,
    /// Standard deviation of the estimates across samples (the true standard error).
    se: f64,
    cover68: f64,
    cover95: f64,
}

fn reported(fits: &[Fit], name: &str, truth: f64) -> Reported {
    let iv: Vec<_> = fits
        .iter()
        .map(|f| f.intervals.get(name).expect("parameter interval").clone())
        .collect();
    let n = iv.len() as f64;
    let mean = iv.iter().map(|p| p.estimate).sum::<f64>() / n;
    let var = iv.iter().map(|p| (p.estimate - mean).powi(2)).sum::<f64>() / (n - 1.0);
    Reported {
        bias: mean - truth,
        se: var.sqrt(),
        cover68: iv.iter().filter(|p| p.covers68(truth)).count() as f64 / n,
        cover95: iv.iter().filter(|p| p.covers95(truth)).count() as f64 / n,
    }
}

/// The reported values and intervals of the default fit (`fit.intervals`) for `samples`
/// seeded samples of `n` objects.
fn default_fits(n: usize, samples: u64) -> Vec<Fit> {
    (0..samples)
        .into_par_iter()
        .map(|s| {
            let pts = simulate(n, 70_000 + 1_000 * n as u64 + s);
            fit(&pts, &FitSpec::new(Method::Structural, PIVOT)).unwrap()
        })
        .collect()
}

#[test]
fn reported_intervals_hold_their_coverage_and_eps_is_nearly_unbiased_at_small_n() {
    // The default estimator (structural, one Gaussian x component) and the interval the
    // service reports (`fit.intervals`, restricted likelihood; docs/methods.md §2.8), at 25
    // and 60 objects with about 15 % upper limits (design in the module docs), 800 seeded
    // samples each. The project's targets: |bias| of α and β under 0.25 of their standard
    // error and of ε under 0.35 of its standard error (the standard error is the spread of
    // the estimates over the samples); 68 % intervals covering the truth in 63–73 % of the
    // samples and 95 % intervals in 92–97 % (binomial s.e. of a coverage of 0.68 over 800
    // samples: √(0.68 · 0.32/800) = 1.6 %, of 0.95: 0.8 %; computed).
    // Measured by this test (recorded in the README): N = 25: bias α −0.07, β +0.08,
    // ε −0.09 se; 68 % coverage α 0.694, β 0.676, ε 0.708; 95 %: 0.943, 0.941, 0.941. The ML
    // ε of the same samples is biased by −0.39 se and its curvature interval covers 0.642.
    // N = 60: bias −0.11, +0.07, +0.06 se; 68 %: 0.662, 0.674, 0.672; 95 %: 0.955, 0.953, 0.950.
    // N = 12 (printed, not asserted): 68 % 0.677, 0.698, 0.639; 95 % 0.944, 0.953, 0.940.
    use massline::fit::IntervalKind;
    for (n, check) in [(12_usize, false), (25, true), (60, true)] {
        let started = std::time::Instant::now();
        let fits = default_fits(n, 800);
        let restricted = fits
            .iter()
            .filter(|f| f.intervals.kind == IntervalKind::Restricted)
            .count();
        let ml_eps = stats(&column(&fits, |f| (f.params.eps, f.errors.eps)), EPS);
        for (name, truth, max_bias) in [
            ("alpha", ALPHA, 0.25),
            ("beta", BETA, 0.25),
            ("eps", EPS, 0.35),
        ] {
            let r = reported(&fits, name, truth);
            eprintln!(
                "N = {n:>2} {name:<5} bias {:+.4} ({:+.2} se), se {:.4}, 68% coverage {:.3}, \
                 95% coverage {:.3}",
                r.bias,
                r.bias / r.se,
                r.se,
                r.cover68,
                r.cover95
            );
            if check {
                assert!(r.bias.abs() < max_bias * r.se, "N = {n} {name}: {r:?}");
                assert!((0.63..=0.73).contains(&r.cover68), "N = {n} {name}: {r:?}");
                assert!((0.92..=0.97).contains(&r.cover95), "N = {n} {name}: {r:?}");
            }
        }
        eprintln!(
            "N = {n:>2}: {restricted} of {} fits restricted; ML ε bias {:+.4}, curvature 68% \
             coverage {:.3}; {:.1} s",
            fits.len(),
            ml_eps.bias,
            ml_eps.coverage,
            started.elapsed().as_secs_f64()
        );
        if check {
            // The restricted likelihood is what the fits report: it must not quietly fall
            // back to the curvature intervals (3 and 2 of 800 samples do, measured).
            assert!(
                restricted as f64 >= 0.99 * fits.len() as f64,
                "{restricted}"
            );
            // And it corrects a real bias: the ML ε of the same samples is biased low.
            assert!(ml_eps.bias < 0.0, "{ml_eps:?}");
        }
    }
}

/// Invented reverberation-mapped AGN for the virial-factor calibration: true log σ ξ ~
/// N(2.1, 0.1²) (AGN hosts sit at lower σ than the quiescent sample), true log M on the
/// quiescent relation above with scatter 0.35 dex, each object's log f = `log_f` +
/// N(0, `f_spread`²) (with 0.2, ε_AGN = √(0.35² + 0.2²) = 0.403 dex, computed), log VP =
/// log M − log f; σ errors 0.02–0.05 dex, VP errors 0.10–0.20 dex (the lag and width errors of
/// a typical campaign: common practice).
fn simulate_agn(
    n: usize,
    seed: u64,
    log_f: f64,
    f_spread: f64,
) -> Vec<massline::fit::virial::AgnPoint> {
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::new(0.0, 1.0).unwrap();
    (0..n)
        .map(|_| {
            let xi = 2.1 + 0.1 * unit.sample(&mut rng);
            let log_m = ALPHA + BETA * (xi - PIVOT) + EPS * unit.sample(&mut rng);
            let log_f = log_f + f_spread * unit.sample(&mut rng);
            let x_err = rng.random_range(0.02..0.05);
            let y_err = rng.random_range(0.10..0.20);
            massline::fit::virial::AgnPoint {
                log_sigma: xi + x_err * unit.sample(&mut rng),
                log_sigma_err: x_err,
                log_vp: log_m - log_f + y_err * unit.sample(&mut rng),
                log_vp_err: y_err,
            }
        })
        .collect()
}

/// The simulated sample's mean log f: 0.65 (between the published σ_line calibrations of
/// docs/methods.md §4.3; an invented value for the simulation).
const LOG_F: f64 = 0.65;

/// Calibrating log ⟨f⟩ on 400 simulated (quiescent + AGN) samples of 30 and of 100 AGN:
/// |bias| under 0.25 of the mean quoted error and 68 % intervals covering the truth in
/// 63–73 % of the samples (the project's targets; the binomial standard error of a coverage
/// from 400 samples is √(0.68 · 0.32/400) = 2.3 %, computed).
#[test]
fn the_virial_factor_calibration_is_unbiased_and_covers_at_30_and_100_agn() {
    for (n_agn, base) in [(30usize, 7_000u64), (100, 9_000)] {
        let results: Vec<(f64, f64)> = (0..400u64)
            .into_par_iter()
            .map(|k| {
                let quiescent = simulate(80, base + k);
                let agn = simulate_agn(n_agn, base + 50_000 + k, LOG_F, 0.2);
                let c = massline::fit::virial::calibrate(&quiescent, &agn, PIVOT).unwrap();
                (c.log_f, c.log_f_err)
            })
            .collect();
        let s = stats(&results, LOG_F);
        eprintln!(
            "virial factor, {n_agn} AGN: bias {:+.4} dex, mean error {:.4} dex, 68 % coverage {:.3}",
            s.bias, s.mean_err, s.coverage
        );
        assert!(
            s.bias.abs() < 0.25 * s.mean_err,
            "{n_agn} AGN: bias {} against mean error {}",
            s.bias,
            s.mean_err
        );
        assert!(
            (0.63..=0.73).contains(&s.coverage),
            "{n_agn} AGN: coverage {}",
            s.coverage
        );
    }
}

/// The AGN scatter of [`simulate_agn`] with an f spread of 0.2 dex: √(0.35² + 0.2²) =
/// 0.4031 dex (computed).
const EPS_AGN: f64 = 0.403_112_887_414_927_5;

/// The joint calibration (α and β shared by both samples, each with its own true-σ model and
/// scatter) on 1000 simulated (quiescent + AGN) samples of 30 and of 100 AGN, the design of
/// the held test above: |bias| of log ⟨f⟩ under 0.25 of the mean quoted error and its 68 %
/// intervals covering the truth in 63–73 % of the samples (the project's targets; binomial
/// standard error √(0.68 · 0.32/1000) = 1.5 %, computed). ε_A is a maximum-likelihood
/// estimate and so biased low at small N; its bias is printed and must stay below 0.35 of the
/// spread of its estimates (the project's target for a scatter, as for ε in
/// `reported_intervals_hold_their_coverage_and_eps_is_nearly_unbiased_at_small_n`).
#[test]
fn the_joint_virial_factor_calibration_is_unbiased_and_covers_at_30_and_100_agn() {
    use massline::fit::virial::{SlopeMode, calibrate_with};
    for (n_agn, base) in [(30usize, 7_000u64), (100, 9_000)] {
        let started = std::time::Instant::now();
        let results: Vec<(f64, f64, f64, f64)> = (0..1000u64)
            .into_par_iter()
            .map(|k| {
                let quiescent = simulate(80, base + k);
                let agn = simulate_agn(n_agn, base + 50_000 + k, LOG_F, 0.2);
                let c = calibrate_with(SlopeMode::Joint, &quiescent, &agn, PIVOT).unwrap();
                (c.log_f, c.log_f_err, c.eps_agn, c.beta)
            })
            .collect();
        let f: Vec<(f64, f64)> = results.iter().map(|r| (r.0, r.1)).collect();
        let s = stats(&f, LOG_F);
        let e = stats(
            &results.iter().map(|r| (r.2, 0.0)).collect::<Vec<_>>(),
            EPS_AGN,
        );
        let b = stats(
            &results.iter().map(|r| (r.3, 0.0)).collect::<Vec<_>>(),
            BETA,
        );
        let e_sd = e.bias_se * (results.len() as f64).sqrt();
        eprintln!(
            "joint virial factor, {n_agn} AGN: log f bias {:+.4} ± {:.4} dex, mean error {:.4} \
             dex, 68 % coverage {:.3}; ε_A bias {:+.4} ± {:.4} dex (spread {:.4}); β bias \
             {:+.3} ± {:.3}; {} samples in {:.1} s",
            s.bias,
            s.bias_se,
            s.mean_err,
            s.coverage,
            e.bias,
            e.bias_se,
            e_sd,
            b.bias,
            b.bias_se,
            results.len(),
            started.elapsed().as_secs_f64()
        );
        assert!(
            s.bias.abs() < 0.25 * s.mean_err,
            "{n_agn} AGN: bias {} against mean error {}",
            s.bias,
            s.mean_err
        );
        assert!(
            (0.63..=0.73).contains(&s.coverage),
            "{n_agn} AGN: coverage {}",
            s.coverage
        );
        assert!(e.bias.abs() < 0.35 * e_sd, "{n_agn} AGN: ε_A {e:?}");
    }
}

/// Published ⟨f⟩ calibrations (docs/methods.md §4.3), each reproduced on 200 simulated samples
/// built with its number of AGN and its ⟨f⟩: the mean calibrated log ⟨f⟩ lies within the
/// published error of the published value, and the error massline quotes for one such sample
/// is within a factor 1.5 of the published one (the project's margin: the published samples'
/// errors and σ ranges differ from the simulation's). The AGN scatter is 0.43 dex in all three
/// (Woo et al. 2010, ApJ 716, 269, abstract: ε = 0.43 ± 0.08), i.e. an f spread of
/// √(0.43² − 0.35²) = 0.25 dex about the quiescent scatter (computed).
/// Both slope modes (held, joint) are checked on the same samples.
#[test]
fn the_calibration_reproduces_published_virial_factors_on_samples_built_like_theirs() {
    use massline::fit::virial::{SlopeMode, calibrate_with};
    let spread = (0.43f64.powi(2) - EPS * EPS).sqrt();
    // (source, N_AGN, log ⟨f⟩, its published 1-σ error in dex)
    let published = [
        // Onken et al. 2004, ApJ 615, 645: ⟨f⟩ = 5.5 ± 1.8 (from memory), 16 AGN (abstract);
        // log 5.5 = 0.740 and 1.8/(5.5 ln 10) = 0.142 dex (computed).
        (
            "Onken et al. 2004",
            16usize,
            5.5f64.log10(),
            1.8 / (5.5 * std::f64::consts::LN_10),
        ),
        // Woo et al. 2010, ApJ 716, 269: log f = 0.72 (+0.09/−0.10) (from memory), 24 AGN.
        ("Woo et al. 2010", 24, 0.72, 0.10),
        // Grier et al. 2013, ApJ 773, 90: ⟨log f⟩ = 0.64 ± 0.11 (from memory), 25 AGN.
        ("Grier et al. 2013", 25, 0.64, 0.11),
    ];
    for ((i, (source, n_agn, log_f, err)), mode) in published
        .into_iter()
        .enumerate()
        .flat_map(|p| SlopeMode::ALL.map(|m| (p, m)))
    {
        let results: Vec<(f64, f64)> = (0..200u64)
            .into_par_iter()
            .map(|k| {
                let seed = 20_000 + 1_000 * i as u64 + k;
                let quiescent = simulate(80, seed);
                let agn = simulate_agn(n_agn, seed + 500_000, log_f, spread);
                let c = calibrate_with(mode, &quiescent, &agn, PIVOT).unwrap();
                (c.log_f, c.log_f_err)
            })
            .collect();
        let s = stats(&results, log_f);
        let mean = log_f + s.bias;
        eprintln!(
            "{source} ({mode}): published log f {log_f:.3} ± {err:.3}; massline mean {mean:.3}, \
             quoted error {:.3}, 68 % coverage {:.3}",
            s.mean_err, s.coverage
        );
        assert!(
            (mean - log_f).abs() < err,
            "{source} ({mode}): {mean} against {log_f} ± {err}"
        );
        assert!(
            (err / 1.5..=err * 1.5).contains(&s.mean_err),
            "{source} ({mode}): quoted error {} against published {err}",
            s.mean_err
        );
    }
}

/// Ho & Kim 2014 (ApJ 789, 17, abstract): ⟨f⟩ = 6.3 ± 1.5 for classical bulges and
/// ellipticals, 3.2 ± 0.7 for pseudobulges (docs/methods.md §4.3). Samples built with each
/// factor are calibrated separately (the page's bulge-kind subsamples), held slope, 200
/// samples each: the mean lies within the published error of the published value, and the two
/// subsamples come out apart by more than their combined quoted error. The number of AGN in
/// each subsample is not recalled: 20 is the project's choice, so the quoted errors are not
/// compared with the published ones.
#[test]
fn bulge_kind_subsamples_give_back_classical_and_pseudobulge_factors() {
    use massline::fit::virial::calibrate;
    let spread = (0.43f64.powi(2) - EPS * EPS).sqrt();
    let ln10 = std::f64::consts::LN_10;
    // (source, log ⟨f⟩, published error in dex: σ_f / (f ln 10), computed)
    let kinds = [
        (
            "classical (Ho & Kim 2014)",
            6.3f64.log10(),
            1.5 / (6.3 * ln10),
        ),
        ("pseudo (Ho & Kim 2014)", 3.2f64.log10(), 0.7 / (3.2 * ln10)),
    ];
    let mut means = Vec::new();
    for (i, (source, log_f, err)) in kinds.into_iter().enumerate() {
        let results: Vec<(f64, f64)> = (0..200u64)
            .into_par_iter()
            .map(|k| {
                let seed = 40_000 + 1_000 * i as u64 + k;
                let quiescent = simulate(80, seed);
                let agn = simulate_agn(20, seed + 500_000, log_f, spread);
                let c = calibrate(&quiescent, &agn, PIVOT).unwrap();
                (c.log_f, c.log_f_err)
            })
            .collect();
        let s = stats(&results, log_f);
        let mean = log_f + s.bias;
        eprintln!(
            "{source}: published log f {log_f:.3} ± {err:.3}; massline mean {mean:.3}, quoted error {:.3}",
            s.mean_err
        );
        assert!(
            (mean - log_f).abs() < err,
            "{source}: {mean} against {log_f} ± {err}"
        );
        means.push((mean, s.mean_err));
    }
    let gap = means[0].0 - means[1].0;
    assert!(
        gap > means[0].1.hypot(means[1].1),
        "classical − pseudo = {gap:.3} dex against errors {means:?}"
    );
}
