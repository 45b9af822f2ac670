//! Simulations with known truth for the Keplerian disk fits (docs/methods.md §4.8): bias and
//! 68 % coverage of log M_BH, model choice between a point mass and a point mass with stars,
//! and the posterior against the curvature intervals.
//!
//! Every disk is invented (no real object): parameters are drawn from the seeded ranges below.
//! Targets (the project's):
//!
//! * bias: |mean(log M̂ − log M)| below 0.25 of the median reported error;
//! * coverage: the stat (⊕ inclination) 1σ interval covers the truth in 63–73 % of the disks
//!   (68 % nominal; the binomial standard error is √(0.68 · 0.32 / n): 1.6 % for the 800
//!   point-mass disks, 3.3 % for the 200 disks with stars, computed);
//! * model choice: on clear cases (≥ 20 points and the stars' mass inside the outermost point at
//!   least the black hole's) the stars are preferred in ≥ 90 % of the disks, and on point-mass
//!   disks of ≥ 20 points the point mass is preferred in ≥ 90 %;
//! * posterior: on well-sampled disks (Gaussian likelihoods) the posterior median lies within
//!   0.2 curvature errors of the maximum-likelihood value on average, and the 16–84 % half-width
//!   is within 20 % of the curvature error on average.

use massline::fit::disk::{
    DiskFit, DiskInput, DiskPoint, Extended, G_PC_KM2_S2_PER_MSUN, Inclination, LightProfile,
    MassToLight, compare, fit_extended, fit_point_mass, posterior_with,
};
use massline::fit::ensemble::EnsembleConfig;
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

/// One invented disk and its truth.
struct Truth {
    input: DiskInput,
    /// log10 M_BH, or log10 (M_BH sin² i) when the inclination is unknown.
    log_m: f64,
    /// The stars, when the disk has them.
    extended: Option<Extended>,
    /// Stellar mass inside the outermost point, M☉.
    stars_inside: f64,
}

fn normal(rng: &mut StdRng) -> f64 {
    StandardNormal.sample(rng)
}

/// Draws a disk. `n` points; `one_sided` puts all of them at positive offsets (true centre 0);
/// `stars` adds a Plummer cluster of stars with Υ L(<2 pc) between 0.3 and 5 M_BH.
fn simulate(seed: u64, n: usize, one_sided: bool, stars: bool) -> Truth {
    let mut rng = StdRng::seed_from_u64(seed);
    let log_mbh: f64 = rng.random_range(6.5..8.5);
    let v_sys: f64 = rng.random_range(-200.0..2000.0);
    let sense = if rng.random_bool(0.5) { 1.0 } else { -1.0 };
    let x_c = if one_sided {
        0.0
    } else {
        0.02 * normal(&mut rng)
    };
    let (r_lo, r_hi): (f64, f64) = if stars { (0.05, 2.0) } else { (0.1, 1.0) };
    let mut offsets: Vec<f64> = (0..n)
        .map(|k| {
            let r = (r_lo.ln() + (r_hi / r_lo).ln() * rng.random_range(0.0..1.0)).exp();
            let side = if one_sided || k % 2 == 0 { 1.0 } else { -1.0 };
            x_c + side * r
        })
        .collect();
    offsets.sort_by(f64::total_cmp);
    // The member's inclination: the true one seen through a measurement of error err_deg, or
    // unknown for a fifth of the disks.
    let true_deg: f64 = rng.random_range(45.0..90.0);
    let err_deg: f64 = rng.random_range(0.0..6.0);
    let unknown = rng.random_bool(0.2);
    let sin_true = true_deg.to_radians().sin();
    let inclination = if unknown {
        Inclination::Unknown
    } else {
        Inclination::Given {
            deg: true_deg + err_deg * normal(&mut rng),
            err_deg,
        }
    };
    let s_true = if rng.random_bool(0.5) {
        0.0
    } else {
        rng.random_range(5.0..30.0)
    };
    let m_bh = 10f64.powf(log_mbh);
    let (profile, upsilon) = if stars {
        let a_pc: f64 = rng.random_range(0.5..2.0);
        let p = LightProfile::Plummer {
            l_total_lsun: 1.0,
            a_pc,
        };
        // Choose L_tot so that Υ L(<2 pc) = ratio · M_BH with Υ drawn in 1–5.
        let ratio: f64 = rng.random_range(0.3..5.0);
        let ups: f64 = rng.random_range(1.0..5.0);
        let l_tot = ratio * m_bh / (ups * p.enclosed_lsun(2.0));
        (
            Some(LightProfile::Plummer {
                l_total_lsun: l_tot,
                a_pc,
            }),
            ups,
        )
    } else {
        (None, 0.0)
    };
    let mut stars_inside = 0.0;
    let points = offsets
        .iter()
        .map(|&x| {
            let r = (x - x_c).abs();
            let m_star = profile
                .as_ref()
                .map_or(0.0, |p| upsilon * p.enclosed_lsun(r));
            stars_inside = f64::max(stars_inside, m_star);
            let v_rot = sin_true * (G_PC_KM2_S2_PER_MSUN * (m_bh + m_star) / r).sqrt();
            let err: f64 = rng.random_range(5.0..40.0);
            let noise = err.hypot(s_true) * normal(&mut rng);
            DiskPoint {
                offset_pc: x,
                v_km_s: v_sys + sense * (x - x_c).signum() * v_rot + noise,
                err_km_s: err,
            }
        })
        .collect();
    let log_m = if unknown {
        log_mbh + 2.0 * sin_true.log10()
    } else {
        log_mbh
    };
    Truth {
        input: DiskInput {
            points,
            distance_mpc: 10.0,
            distance_err_mpc: 1.0,
            inclination,
        },
        log_m,
        extended: profile.map(|p| Extended {
            stars: Some((p, MassToLight::Free)),
            cluster: None,
        }),
        stars_inside,
    }
}

/// Bias, median reported error and coverage of log M_BH over fits with their truths.
struct Summary {
    bias: f64,
    bias_se: f64,
    median_err: f64,
    coverage: f64,
    n: usize,
}

fn summarise(results: &[(f64, f64, f64)]) -> Summary {
    // (estimate, reported stat ⊕ inclination error, truth)
    let n = results.len();
    let d: Vec<f64> = results.iter().map(|(e, _, t)| e - t).collect();
    let bias = d.iter().sum::<f64>() / n as f64;
    let sd = (d.iter().map(|v| (v - bias).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt();
    let mut errs: Vec<f64> = results.iter().map(|r| r.1).collect();
    errs.sort_by(f64::total_cmp);
    let covered = results
        .iter()
        .filter(|(e, s, t)| (e - t).abs() <= *s)
        .count();
    Summary {
        bias,
        bias_se: sd / (n as f64).sqrt(),
        median_err: errs[n / 2],
        coverage: covered as f64 / n as f64,
        n,
    }
}

fn stat_and_inclination(f: &DiskFit) -> f64 {
    f.log_mbh_err_stat.hypot(f.log_mbh_err_inclination)
}

fn check(label: &str, s: &Summary) {
    eprintln!(
        "{label}: n = {}, bias = {:+.4} ± {:.4} dex, median error {:.4} dex, coverage {:.3}",
        s.n, s.bias, s.bias_se, s.median_err, s.coverage
    );
    assert!(
        s.bias.abs() < 0.25 * s.median_err,
        "{label}: bias {} against 0.25 × {}",
        s.bias,
        s.median_err
    );
    assert!(
        (0.63..=0.73).contains(&s.coverage),
        "{label}: coverage {}",
        s.coverage
    );
}

#[test]
fn sparse_point_mass_disks_are_unbiased_with_honest_intervals() {
    // 800 disks of 8–15 points, a quarter of them seen on one side only.
    let results: Vec<(f64, f64, f64)> = (0..800_u64)
        .into_par_iter()
        .map(|k| {
            let n = 8 + (k % 8) as usize;
            let truth = simulate(1_000 + k, n, k % 4 == 3, false);
            let f = fit_point_mass(&truth.input).unwrap_or_else(|e| panic!("disk {k}: {e}"));
            (f.log_mbh, stat_and_inclination(&f), truth.log_m)
        })
        .collect();
    check("point mass, 8–15 points", &summarise(&results));
    let one_sided: Vec<(f64, f64, f64)> = results
        .iter()
        .enumerate()
        .filter(|(k, _)| k % 4 == 3)
        .map(|(_, r)| *r)
        .collect();
    let s = summarise(&one_sided);
    eprintln!(
        "  of which one-sided: n = {}, bias {:+.4}, coverage {:.3}",
        s.n, s.bias, s.coverage
    );
}

#[test]
fn disks_with_stars_are_unbiased_with_honest_intervals() {
    // 200 disks of 15–30 points with a Plummer stellar cluster, Υ fitted.
    let results: Vec<(f64, f64, f64)> = (0..200_u64)
        .into_par_iter()
        .map(|k| {
            let n = 15 + (k % 16) as usize;
            let truth = simulate(5_000 + k, n, false, true);
            let ext = truth.extended.as_ref().expect("stars");
            let f = fit_extended(&truth.input, ext).unwrap_or_else(|e| panic!("disk {k}: {e}"));
            (f.log_mbh, stat_and_inclination(&f), truth.log_m)
        })
        .collect();
    check("point mass + stars, 15–30 points", &summarise(&results));
}

#[test]
fn model_comparison_picks_the_true_model_in_clear_cases() {
    // Clear cases: ≥ 20 points and, for the stars, a stellar mass inside the outermost point of
    // at least the black hole's.
    let picks: Vec<(bool, bool)> = (0..240_u64)
        .into_par_iter()
        .filter_map(|k| {
            let stars = k % 2 == 0;
            let n = 20 + (k % 11) as usize;
            let truth = simulate(9_000 + k, n, false, stars);
            if stars && truth.stars_inside < 10f64.powf(truth.log_m) {
                return None;
            }
            let ext = truth.extended.clone().unwrap_or(Extended {
                stars: Some((
                    LightProfile::Plummer {
                        l_total_lsun: 1e7,
                        a_pc: 1.0,
                    },
                    MassToLight::Free,
                )),
                cluster: None,
            });
            let point = fit_point_mass(&truth.input).expect("point");
            let with_stars = fit_extended(&truth.input, &ext).expect("stars");
            let c = compare(&point, &with_stars);
            Some((stars, c.preferred == with_stars.model))
        })
        .collect();
    for stars in [true, false] {
        let cases: Vec<bool> = picks
            .iter()
            .filter(|(s, _)| *s == stars)
            .map(|(_, chose_stars)| *chose_stars == stars)
            .collect();
        let right = cases.iter().filter(|c| **c).count() as f64 / cases.len() as f64;
        eprintln!(
            "true model {}: {} clear cases, right in {right:.3}",
            if stars { "stars" } else { "point mass" },
            cases.len()
        );
        assert!(cases.len() >= 60, "too few clear cases: {}", cases.len());
        assert!(right >= 0.9, "right in {right}");
    }
}

#[test]
fn the_posterior_agrees_with_the_curvature_on_gaussian_cases() {
    // 40 two-sided disks of 20–30 points (nearly Gaussian likelihoods).
    let cfg = EnsembleConfig {
        walkers: 16,
        steps: 1_200,
        burn_in: 300,
        seed: 11,
        init_scatter: 0.1,
    };
    let rows: Vec<(f64, f64)> = (0..40_u64)
        .into_par_iter()
        .map(|k| {
            let truth = simulate(20_000 + k, 20 + (k % 11) as usize, false, false);
            let f = fit_point_mass(&truth.input).expect("fit");
            let p = posterior_with(&truth.input, &f, None, &cfg.clone().with_seed(k))
                .expect("posterior");
            let sigma = stat_and_inclination(&f);
            let half = 0.5 * (p.log_mbh.p84 - p.log_mbh.p16);
            ((p.log_mbh.median - f.log_mbh) / sigma, half / sigma)
        })
        .collect();
    let n = rows.len() as f64;
    let shift = rows.iter().map(|r| r.0.abs()).sum::<f64>() / n;
    let width = rows.iter().map(|r| r.1).sum::<f64>() / n;
    eprintln!("posterior: mean |median − ML| = {shift:.3} σ, mean half-width = {width:.3} σ");
    assert!(shift < 0.2, "{shift}");
    assert!((width - 1.0).abs() < 0.2, "{width}");
}
