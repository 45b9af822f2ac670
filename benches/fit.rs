//! Timings of the fit module: `cargo bench --bench fit` (add `-- --quick` for a short run).
//!
//! The project's targets (the scipy figures come from `benches/reference_fit.py` on the same data
//! sizes): conditional ML on 60 objects ≥ 50× faster than scipy's L-BFGS-B with an analytic
//! gradient, on 100,000 objects ≥ 2× faster; structural ML within 3× of conditional; posterior
//! with 32 walkers × 5,000 steps on 60 objects < 100 ms; 1,000 bootstrap refits of 60 objects
//! < 100 ms.

use std::hint::black_box;
use std::time::Duration;

use criterion::{Criterion, criterion_group, criterion_main};
use massline::fit::bootstrap::bootstrap;
use massline::fit::disk;
use massline::fit::ensemble::{self, EnsembleConfig};
use massline::fit::posterior::posterior;
use massline::fit::{
    FitSpec, Likelihood, Method, Point, Shape, fit, fit_params_only, leave_one_out,
};
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rand_distr::{Distribution, Normal};

/// log10(200): the M–σ pivot.
const PIVOT: f64 = 2.301_029_995_663_981;

/// Invented M–σ-like sample: log σ ~ N(2.3, 0.14²), log M = 8.3 + 4.5 (x − x0) + N(0, 0.35²),
/// σ errors 0.01–0.035 dex, mass errors 0.05–0.3 dex, every 7th object an upper limit 0.3 dex
/// above its mass.
fn sample(n: usize, seed: u64) -> Vec<Point> {
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::new(0.0, 1.0).unwrap();
    (0..n)
        .map(|i| {
            let xi = 2.3 + 0.14 * unit.sample(&mut rng);
            let eta = 8.3 + 4.5 * (xi - PIVOT) + 0.35 * unit.sample(&mut rng);
            let x_err = rng.random_range(0.01..0.035);
            let y_err = rng.random_range(0.05..0.3);
            let x = xi + x_err * unit.sample(&mut rng);
            if i % 7 == 3 {
                Point::limit(x, x_err, eta + 0.3)
            } else {
                Point::new(x, x_err, eta + y_err * unit.sample(&mut rng), y_err)
            }
        })
        .collect()
}

/// The sample of [`sample`] with every 10th object an upper limit instead of every 7th.
fn sample_tenth_limits(n: usize, seed: u64) -> Vec<Point> {
    let mut pts = sample(n, seed);
    for (i, p) in pts.iter_mut().enumerate() {
        if i % 7 == 3 && i % 10 != 3 {
            // Back to a detection 0.3 dex below the limit, with a typical mass error.
            *p = Point::new(p.x, p.x_err, p.y - 0.3, 0.15);
        } else if i % 10 == 3 && !p.upper_limit {
            *p = Point::limit(p.x, p.x_err, p.y + 0.3);
        }
    }
    pts
}

/// Leave-one-out influence of every object, structural line, 10 % upper limits: one fit, the
/// one-step shift of each object and refits of the top 20 (docs/methods.md §6.1).
fn influence_benches(c: &mut Criterion) {
    let structural = FitSpec::new(Method::Structural, PIVOT);
    let mut g = c.benchmark_group("leave_one_out");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(10));
    for n in [10_000, 100_000] {
        let pts = sample_tenth_limits(n, 3);
        g.bench_function(format!("structural_{n}"), |b| {
            b.iter(|| leave_one_out(black_box(&pts), &structural).unwrap())
        });
    }
    g.finish();
}

fn benches(c: &mut Criterion) {
    let small = sample(60, 1);
    let large = sample(100_000, 2);
    let conditional = FitSpec::new(Method::Conditional, PIVOT);
    let structural = FitSpec::new(Method::Structural, PIVOT);

    // The maximum-likelihood fit alone (what the scipy reference computes).
    let mut g = c.benchmark_group("ml");
    g.bench_function("conditional_60", |b| {
        b.iter(|| fit_params_only(black_box(&small), &conditional).unwrap())
    });
    g.bench_function("structural_60", |b| {
        b.iter(|| fit_params_only(black_box(&small), &structural).unwrap())
    });
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(8));
    g.bench_function("conditional_100000", |b| {
        b.iter(|| fit(black_box(&large), &conditional).unwrap())
    });
    g.finish();

    // The fit with the intervals it quotes: ML plus the restricted likelihood of ε.
    let mut g = c.benchmark_group("quoted");
    g.bench_function("conditional_60", |b| {
        b.iter(|| fit(black_box(&small), &conditional).unwrap())
    });
    g.bench_function("structural_60", |b| {
        b.iter(|| fit(black_box(&small), &structural).unwrap())
    });
    g.finish();

    // One likelihood evaluation: the unit of cost of the posterior sampler (32 × 5,000 =
    // 160,000 evaluations per run).
    let mut g = c.benchmark_group("likelihood");
    for (name, spec) in [
        ("conditional_60", &conditional),
        ("structural_60", &structural),
    ] {
        let like = Likelihood::new(&small, spec).unwrap();
        let theta = like.start(&fit(&small, spec).unwrap());
        g.bench_function(name, |b| b.iter(|| like.log_likelihood(black_box(&theta))));
    }
    g.finish();

    let mut g = c.benchmark_group("sampling");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(8));
    let cfg = EnsembleConfig::new(32, 5_000, 1_000, 1)
        .unwrap()
        .with_init_scatter(0.1)
        .unwrap();
    // The sampler's own overhead: the same run on a trivial 3-parameter density.
    g.bench_function("ensemble_overhead_3d_32x5000", |b| {
        b.iter(|| {
            let target = |t: &[f64]| -0.5 * (t[0] * t[0] + t[1] * t[1] + t[2] * t[2]);
            ensemble::sample(target, black_box(&[0.0; 3]), &["a", "b", "c"], &cfg).unwrap()
        })
    });
    g.bench_function("posterior_conditional_60_32x5000", |b| {
        b.iter(|| posterior(black_box(&small), &conditional, &cfg).unwrap())
    });
    g.bench_function("posterior_structural_60_32x5000", |b| {
        b.iter(|| posterior(black_box(&small), &structural, &cfg).unwrap())
    });
    g.bench_function("bootstrap_conditional_60_x1000", |b| {
        b.iter(|| bootstrap(black_box(&small), &conditional, 1_000, 1).unwrap())
    });
    g.bench_function("bootstrap_structural_60_x1000", |b| {
        b.iter(|| bootstrap(black_box(&small), &structural, 1_000, 1).unwrap())
    });
    g.finish();
}

/// Invented plane sample: true (log σ, log M_bulge) bivariate normal (sd 0.14 and 0.4 dex,
/// correlation 0.6), log M = 8.3 + 3 (x − x0) + 0.5 (x2 − 11) + N(0, 0.3²), errors 0.01–0.035
/// dex on x, 0.05–0.15 on x2, 0.05–0.3 on y, every 10th object an upper limit 0.3 dex above its
/// mass.
fn plane_sample(n: usize, seed: u64) -> Vec<Point> {
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::new(0.0, 1.0).unwrap();
    (0..n)
        .map(|i| {
            let (z1, z2) = (unit.sample(&mut rng), unit.sample(&mut rng));
            let xi = 2.3 + 0.14 * z1;
            let xi2 = 11.0 + 0.4 * (0.6 * z1 + 0.8 * z2);
            let eta = 8.3 + 3.0 * (xi - PIVOT) + 0.5 * (xi2 - 11.0) + 0.3 * unit.sample(&mut rng);
            let x_err = rng.random_range(0.01..0.035);
            let x2_err = rng.random_range(0.05..0.15);
            let y_err = rng.random_range(0.05..0.3);
            let x = xi + x_err * unit.sample(&mut rng);
            let x2 = xi2 + x2_err * unit.sample(&mut rng);
            if i % 10 == 3 {
                Point::limit(x, x_err, eta + 0.3).with_x2(x2, x2_err)
            } else {
                Point::new(x, x_err, eta + y_err * unit.sample(&mut rng), y_err).with_x2(x2, x2_err)
            }
        })
        .collect()
}

/// The structural plane (one Gaussian for the true (x, x2)) on large samples: the background
/// analysis of a catalog version fits it with every other relation.
fn structural_plane(c: &mut Criterion) {
    let spec = FitSpec::new(Method::Structural, PIVOT)
        .with_shape(Shape::Plane)
        .and_then(|s| s.with_pivot2(11.0))
        .unwrap();
    let mut g = c.benchmark_group("structural_plane_fit");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(10));
    for n in [20_000, 100_000] {
        let pts = plane_sample(n, 3);
        g.bench_function(n.to_string(), |b| {
            b.iter(|| fit(black_box(&pts), &spec).unwrap())
        });
    }
    g.finish();
    // The plane's influence list: one fit, every object's one-step shift and chord refits of
    // the top 20 (docs/methods.md §6.1).
    let mut g = c.benchmark_group("leave_one_out");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(10));
    let pts = plane_sample(100_000, 3);
    g.bench_function("structural_plane_100000", |b| {
        b.iter(|| leave_one_out(black_box(&pts), &spec).unwrap())
    });
    g.finish();
}

/// Invented disk: M_BH = 10^7.3 M☉, v_sys = 900 km/s, i = 70 ± 3°, `n` points on both sides
/// from 0.05 to 2 pc, Plummer stars (L = 10^7.2 L☉, a = 1 pc, Υ = 2), errors 5–30 km/s.
fn disk_sample(n: usize, seed: u64) -> (disk::DiskInput, disk::Extended) {
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::new(0.0, 1.0).unwrap();
    let stars = disk::LightProfile::Plummer {
        l_total_lsun: 10f64.powf(7.2),
        a_pc: 1.0,
    };
    let sin_i = 70f64.to_radians().sin();
    let points = (0..n)
        .map(|k| {
            let r: f64 = (0.05f64.ln() + (40f64).ln() * rng.random_range(0.0..1.0)).exp();
            let x = if k % 2 == 0 { r } else { -r };
            let m = 10f64.powf(7.3) + 2.0 * stars.enclosed_lsun(r);
            let err = rng.random_range(5.0..30.0);
            disk::DiskPoint {
                offset_pc: x,
                v_km_s: 900.0
                    + x.signum() * sin_i * (disk::G_PC_KM2_S2_PER_MSUN * m / r).sqrt()
                    + err * unit.sample(&mut rng),
                err_km_s: err,
            }
        })
        .collect();
    let input = disk::DiskInput {
        points,
        distance_mpc: 15.0,
        distance_err_mpc: 1.0,
        inclination: disk::Inclination::Given {
            deg: 70.0,
            err_deg: 3.0,
        },
    };
    let extended = disk::Extended {
        stars: Some((stars, disk::MassToLight::Free)),
        cluster: None,
    };
    (input, extended)
}

/// Keplerian disk fits (docs/methods.md §4.8) of 50 points: the target is a posterior under
/// 0.5 s with the default sampler settings.
fn disk_fits(c: &mut Criterion) {
    let (input, extended) = disk_sample(50, 4);
    let mut g = c.benchmark_group("disk");
    g.sample_size(10);
    g.bench_function("point_mass_fit_50", |b| {
        b.iter(|| disk::fit_point_mass(black_box(&input)).unwrap())
    });
    g.bench_function("stars_fit_50", |b| {
        b.iter(|| disk::fit_extended(black_box(&input), &extended).unwrap())
    });
    let point = disk::fit_point_mass(&input).unwrap();
    g.bench_function("posterior_point_mass_50_32x3000", |b| {
        b.iter(|| disk::posterior(black_box(&input), &point, None, 1).unwrap())
    });
    let with_stars = disk::fit_extended(&input, &extended).unwrap();
    g.bench_function("posterior_stars_50_32x3000", |b| {
        b.iter(|| disk::posterior(black_box(&input), &with_stars, Some(&extended), 1).unwrap())
    });
    g.finish();
}

criterion_group!(
    fit_benches,
    benches,
    influence_benches,
    structural_plane,
    disk_fits
);
criterion_main!(fit_benches);
