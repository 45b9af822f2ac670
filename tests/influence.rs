//! The one-step influence of each object against refits without it (docs/methods.md §6.1).
//!
//! Samples are invented M–σ-like ones (log σ ~ N(2.3, 0.14²), log M = 8.3 + 4.5 (x − x0)
//! [+ 0.5 (x2 − 11)] + N(0, 0.3²), σ errors 0.01–0.035 dex, mass errors 0.05–0.3 dex), some
//! with 10 % upper limits placed 0.1–0.6 dex above the true mass.

use massline::fit::influence::{self, EXACT_MAX_N, EXACT_TOP};
use massline::fit::{
    Fit, FitSpec, Influence, Method, Point, Shape, adding_one, fit_params_only, leave_one_out,
};
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rand_distr::{Distribution, Normal};

/// log10(200): the M–σ pivot.
const PIVOT: f64 = 2.301_029_995_663_981;

/// Pivot of the second host property (log10 M_bulge / M☉ = 11).
const PIVOT2: f64 = 11.0;

fn sample(n: usize, seed: u64, limit_fraction: f64, plane: bool) -> Vec<Point> {
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::new(0.0, 1.0).expect("normal");
    (0..n)
        .map(|i| {
            let xi = 2.3 + 0.14 * unit.sample(&mut rng);
            let xi2 = PIVOT2 + 2.0 * (xi - 2.3) + 0.3 * unit.sample(&mut rng);
            let plane_term = if plane { 0.5 * (xi2 - PIVOT2) } else { 0.0 };
            let eta = 8.3 + 4.5 * (xi - PIVOT) + plane_term + 0.3 * unit.sample(&mut rng);
            let x_err = rng.random_range(0.01..0.035);
            let y_err = rng.random_range(0.05..0.3);
            let x = xi + x_err * unit.sample(&mut rng);
            let p = if rng.random_range(0.0..1.0) < limit_fraction {
                Point::limit(x, x_err, eta + rng.random_range(0.1..0.6))
            } else {
                Point::new(x, x_err, eta + y_err * unit.sample(&mut rng), y_err)
            };
            let p = p.named(&format!("X {i}"));
            if plane {
                p.with_x2(xi2 + 0.1 * unit.sample(&mut rng), 0.1)
            } else {
                p
            }
        })
        .collect()
}

fn without(points: &[Point], i: usize) -> Vec<Point> {
    let mut rest = points.to_vec();
    rest.remove(i);
    rest
}

/// The parameters compared, with the full fit's error of each: (name, Δ approx, Δ exact, σ).
fn deltas(a: &Influence, full: &Fit, refit: &Fit) -> Vec<(&'static str, f64, f64, f64)> {
    let (p, q, e) = (&full.params, &refit.params, &full.errors);
    let mut v = vec![
        ("alpha", a.d_alpha, q.alpha - p.alpha, e.alpha),
        ("beta", a.d_beta, q.beta - p.beta, e.beta),
        ("eps", a.d_eps, q.eps - p.eps, e.eps),
    ];
    if let (Some(d), Some(x), Some(y), Some(s)) = (a.d_gamma, q.gamma, p.gamma, e.gamma) {
        v.push(("gamma", d, x - y, s));
    }
    if let (Some(d), Some(x), Some(y), Some(s)) = (a.d_beta2, q.beta2, p.beta2, e.beta2) {
        v.push(("beta2", d, x - y, s));
    }
    v
}

/// The worst |Δ_approx − Δ_refit| / σ over every parameter of the ten objects the one-step
/// approximation ranks highest.
fn worst_of_top_ten(points: &[Point], spec: &FitSpec) -> (f64, String) {
    let full = fit_params_only(points, spec).expect("fit");
    let approx = influence::approximate(points, spec).expect("one step");
    assert_eq!(approx.len(), points.len());
    assert!(approx.iter().all(|a| !a.exact));
    let mut order: Vec<&Influence> = approx.iter().collect();
    order.sort_by(|a, b| b.shift_sigma.total_cmp(&a.shift_sigma));
    let mut worst = (0.0, String::new());
    for a in order.into_iter().take(10) {
        let refit = fit_params_only(&without(points, a.index), spec).expect("refit");
        for (name, da, de, sd) in deltas(a, &full, &refit) {
            assert!(sd > 0.0, "{name}: no error");
            let gap = (da - de).abs() / sd;
            if gap > worst.0 {
                worst = (
                    gap,
                    format!(
                        "object {} {name}: one step {da:.5}, refit {de:.5}, σ {sd:.5}",
                        a.index
                    ),
                );
            }
        }
    }
    worst
}

fn specs() -> Vec<(&'static str, FitSpec, bool)> {
    let plane = FitSpec::new(Method::Conditional, PIVOT)
        .with_shape(Shape::Plane)
        .and_then(|s| s.with_pivot2(PIVOT2))
        .expect("plane");
    let quadratic = FitSpec::new(Method::Conditional, PIVOT)
        .with_shape(Shape::Quadratic)
        .expect("quadratic");
    vec![
        ("structural", FitSpec::new(Method::Structural, PIVOT), false),
        (
            "conditional",
            FitSpec::new(Method::Conditional, PIVOT),
            false,
        ),
        ("conditional plane", plane, true),
        ("conditional quadratic", quadratic, false),
    ]
}

/// For the ten objects the one-step approximation ranks highest, its shift of every parameter
/// against a refit without the object, in units of the full fit's error of that parameter, on
/// samples of 30, 100 and 300 objects (three seeds each, with and without 10 % upper limits)
/// for the structural line and the conditional line, plane and quadratic.
///
/// Worst agreement found (printed by the test): 0.031 σ at N = 300 (conditional quadratic,
/// ε), 0.053 σ at N = 100 (conditional quadratic, ε), 0.29 σ at N = 30 (conditional
/// quadratic, β). The one-step error falls as the square of the shift (about 1/N²), so the
/// bound asked of the approximation, 0.05 σ, holds from N = 300, where `leave_one_out` starts
/// to use it; the smaller samples are held to bounds about 1.7 times their worst, to catch a
/// change for the worse there too. With the step taken in ε instead of ln ε the worst was
/// 0.13 σ at N = 100 and 0.60 σ at N = 30.
#[test]
fn one_step_shifts_agree_with_refits_for_the_top_ten() {
    let mut worst_all = (0.0, String::new());
    for n in [30, 100, 300] {
        let bound = match n {
            30 => 0.5,
            100 => 0.09,
            _ => 0.05,
        };
        let mut worst_n = (0.0, String::new());
        for (label, spec, plane) in specs() {
            for seed in 1..=3 {
                for limits in [0.0, 0.1] {
                    let pts = sample(n, 100 * seed + n as u64, limits, plane);
                    let (w, what) = worst_of_top_ten(&pts, &spec);
                    println!(
                        "{label} N = {n} seed {seed} limits {limits}: worst {w:.4} σ ({what})"
                    );
                    if w > worst_n.0 {
                        worst_n = (w, format!("{label} N = {n} seed {seed}: {what}"));
                    }
                }
            }
        }
        println!("worst at N = {n}: {:.4} σ ({})", worst_n.0, worst_n.1);
        assert!(worst_n.0 < bound, "N = {n}: {worst_n:?}");
        if worst_n.0 > worst_all.0 {
            worst_all = worst_n;
        }
    }
    println!("worst of all: {:.4} σ ({})", worst_all.0, worst_all.1);
}

/// A sample with one object planted 2 dex above the relation at the high-σ end, where it has
/// leverage (object 17).
fn planted(n: usize, seed: u64, limit_fraction: f64) -> Vec<Point> {
    let mut pts = sample(n, seed, limit_fraction, false);
    let x = 2.3 + 0.3;
    pts[17] = Point::new(x, 0.02, 8.3 + 4.5 * (x - PIVOT) + 2.0, 0.1).named("X 214");
    pts
}

/// The object the one-step approximation ranks first is the one the refits rank first, the
/// planted outlier; `leave_one_out` above the refit size lists every object and refits the
/// top `EXACT_TOP`.
#[test]
fn the_top_object_is_the_refits_top_object_on_a_planted_outlier() {
    let n = EXACT_MAX_N + 100;
    let pts = planted(n, 7, 0.1);
    for spec in [
        FitSpec::new(Method::Structural, PIVOT),
        FitSpec::new(Method::Conditional, PIVOT),
    ] {
        let full = fit_params_only(&pts, &spec).expect("fit");
        let brute: Vec<f64> = (0..n)
            .map(|i| {
                let f = fit_params_only(&without(&pts, i), &spec).expect("refit");
                // Ranked by the shift in α and β scaled by their errors (the covariance term is
                // small at this pivot; the ranking, not the value, is compared).
                let da = (f.params.alpha - full.params.alpha) / full.errors.alpha;
                let db = (f.params.beta - full.params.beta) / full.errors.beta;
                da.hypot(db)
            })
            .collect();
        let brute_top = (0..n)
            .max_by(|&a, &b| brute[a].total_cmp(&brute[b]))
            .expect("top");
        let approx = influence::approximate(&pts, &spec).expect("one step");
        let approx_top = approx
            .iter()
            .max_by(|a, b| a.shift_sigma.total_cmp(&b.shift_sigma))
            .expect("top");
        assert_eq!(brute_top, 17, "{}", spec.method);
        assert_eq!(approx_top.index, brute_top, "{}", spec.method);
        assert!(
            approx_top.d_eps < 0.0,
            "removing the outlier lowers the scatter"
        );

        let loo = leave_one_out(&pts, &spec).expect("loo");
        assert_eq!(loo.len(), n);
        assert!(loo.iter().enumerate().all(|(i, x)| x.index == i));
        assert_eq!(loo.iter().filter(|x| x.exact).count(), EXACT_TOP);
        let top = loo
            .iter()
            .max_by(|a, b| a.shift_sigma.total_cmp(&b.shift_sigma))
            .expect("top");
        assert_eq!(top.index, 17);
        assert!(top.exact);
        // The refitted entry is the refit itself.
        let refit = fit_params_only(&without(&pts, 17), &spec).expect("refit");
        assert!(
            (top.d_beta - (refit.params.beta - full.params.beta)).abs() < 1e-6 * full.errors.beta
        );
    }
}

/// Estimators without a per-object likelihood: above the refit size `leave_one_out` lists only
/// the refitted top, ranked by the conditional one-step shifts, and the planted outlier is
/// first; below it every object is refitted.
#[test]
fn estimators_without_a_likelihood_list_their_refitted_top() {
    let pts = planted(EXACT_MAX_N + 50, 8, 0.0);
    for spec in [
        FitSpec::new(Method::Fitexy, PIVOT),
        FitSpec::new(Method::Bces(massline::fit::BcesLine::YOnX), PIVOT),
    ] {
        let loo = leave_one_out(&pts, &spec).expect("loo");
        assert_eq!(loo.len(), EXACT_TOP, "{}", spec.method);
        assert!(loo.iter().all(|x| x.exact));
        assert!(loo.windows(2).all(|w| w[0].index < w[1].index));
        let top = loo
            .iter()
            .max_by(|a, b| a.shift_sigma.total_cmp(&b.shift_sigma))
            .expect("top");
        assert_eq!(top.index, 17, "{}", spec.method);
        let small = leave_one_out(&pts[..60], &spec).expect("loo");
        assert_eq!(small.len(), 60);
        assert!(small.iter().all(|x| x.exact));
    }
}

/// Below the refit size every entry is the refit without the object.
#[test]
fn small_samples_are_refitted_object_by_object() {
    let pts = sample(50, 9, 0.1, false);
    let spec = FitSpec::new(Method::Structural, PIVOT);
    let full = fit_params_only(&pts, &spec).expect("fit");
    let loo = leave_one_out(&pts, &spec).expect("loo");
    assert_eq!(loo.len(), 50);
    for x in [&loo[0], &loo[23], &loo[49]] {
        assert!(x.exact);
        let f = fit_params_only(&without(&pts, x.index), &spec).expect("refit");
        assert!((x.d_alpha - (f.params.alpha - full.params.alpha)).abs() < 1e-12);
        assert!((x.d_eps - (f.params.eps - full.params.eps)).abs() < 1e-12);
    }
}

/// Adding an object: above the refit size the one-step shift agrees with the refit within
/// 0.05 σ of each parameter (structural and conditional, a typical object and one 1.5 dex
/// above the relation); below it the shift is the refit's.
#[test]
fn adding_one_agrees_with_the_refit_with_the_object() {
    let pts = sample(EXACT_MAX_N + 100, 10, 0.1, false);
    let x = 2.45;
    let typical = Point::new(x, 0.02, 8.3 + 4.5 * (x - PIVOT) + 0.2, 0.1).named("X 301");
    let high = Point::new(x, 0.02, 8.3 + 4.5 * (x - PIVOT) + 1.5, 0.1).named("X 302");
    let limit = Point::limit(x, 0.02, 8.3 + 4.5 * (x - PIVOT) - 0.8).named("X 303");
    let mut worst = 0.0_f64;
    for spec in [
        FitSpec::new(Method::Structural, PIVOT),
        FitSpec::new(Method::Conditional, PIVOT),
    ] {
        let full = fit_params_only(&pts, &spec).expect("fit");
        for new in [&typical, &high, &limit] {
            let shift = adding_one(&pts, &spec, &full, new).expect("shift");
            assert!(!shift.exact);
            let mut all = pts.clone();
            all.push(new.clone());
            let refit = fit_params_only(&all, &spec).expect("refit");
            let (p, q, e) = (&full.params, &refit.params, &full.errors);
            for (name, d, want, sd) in [
                ("alpha", shift.d_alpha, q.alpha - p.alpha, e.alpha),
                ("beta", shift.d_beta, q.beta - p.beta, e.beta),
                ("eps", shift.d_eps, q.eps - p.eps, e.eps),
            ] {
                let gap = (d - want).abs() / sd;
                worst = worst.max(gap);
                assert!(
                    gap < 0.05,
                    "{} {} {name}: {d} vs {want} (σ {sd})",
                    spec.method,
                    new.name
                );
                // The shift is not trivially zero: the refit moves the parameter.
                if new.name == "X 302" && name != "eps" {
                    assert!(want.abs() > 0.05 * sd, "{name}");
                }
            }
        }
        let small = &pts[..80];
        let small_fit = fit_params_only(small, &spec).expect("fit");
        let shift = adding_one(small, &spec, &small_fit, &high).expect("shift");
        assert!(shift.exact);
        let mut all = small.to_vec();
        all.push(high.clone());
        let refit = fit_params_only(&all, &spec).expect("refit");
        assert!((shift.d_beta - (refit.params.beta - small_fit.params.beta)).abs() < 1e-12);
        // A fit of other settings is refused.
        let other = FitSpec::new(Method::Conditional, PIVOT + 0.1);
        assert!(adding_one(&pts, &other, &full, &high).is_err());
    }
    println!("worst agreement of the added object: {worst:.4} σ");
}

/// The structural plane (one Gaussian for the true host properties) has per-object analytic
/// gradients but no per-object Hessians: above the refit size every object still gets a
/// one-step shift (per-object Hessians by central differences), and the `EXACT_TOP` ranked
/// highest are refitted by the chord method (docs/methods.md §6.1). Checked against refits
/// from scratch on a 400-object plane with 10 % limits and an outlier planted with leverage:
/// the refitted entries within 10⁻³ σ of each parameter, the ten next-ranked one-step entries
/// within 0.05 σ, and the planted object first.
#[test]
fn the_structural_plane_lists_every_object_and_refits_its_top_by_the_chord_method() {
    let spec = FitSpec::new(Method::Structural, PIVOT)
        .with_shape(Shape::Plane)
        .and_then(|s| s.with_pivot2(PIVOT2))
        .expect("plane");
    let n = EXACT_MAX_N + 100;
    let mut pts = sample(n, 11, 0.1, true);
    let (x, x2) = (2.3 + 0.3, PIVOT2 + 0.8);
    pts[17] = Point::new(x, 0.02, 8.3 + 4.5 * (x - PIVOT) + 0.5 * 0.8 + 2.0, 0.1)
        .named("X 214")
        .with_x2(x2, 0.1);
    let full = fit_params_only(&pts, &spec).expect("fit");
    let loo = leave_one_out(&pts, &spec).expect("loo");
    assert_eq!(loo.len(), n, "every object is listed");
    assert!(loo.iter().enumerate().all(|(i, x)| x.index == i));
    assert_eq!(loo.iter().filter(|x| x.exact).count(), EXACT_TOP);
    let top = loo
        .iter()
        .max_by(|a, b| a.shift_sigma.total_cmp(&b.shift_sigma))
        .expect("top");
    assert_eq!(top.index, 17, "the planted object moves the plane most");
    assert!(
        top.d_eps < 0.0,
        "without the outlier the scatter is smaller"
    );

    let mut next: Vec<&Influence> = loo.iter().filter(|x| !x.exact).collect();
    next.sort_by(|a, b| b.shift_sigma.total_cmp(&a.shift_sigma));
    let (mut worst_exact, mut worst_step) = (0.0_f64, 0.0_f64);
    for (entry, bound) in loo
        .iter()
        .filter(|x| x.exact)
        .map(|x| (x, 1e-3))
        .chain(next.into_iter().take(10).map(|x| (x, 0.05)))
    {
        let refit = fit_params_only(&without(&pts, entry.index), &spec).expect("refit");
        for (name, d, want, sd) in deltas(entry, &full, &refit) {
            let gap = (d - want).abs() / sd;
            if entry.exact {
                worst_exact = worst_exact.max(gap);
            } else {
                worst_step = worst_step.max(gap);
            }
            assert!(
                gap < bound,
                "object {} {name}: listed {d:.6}, refit {want:.6}, σ {sd:.6} (exact: {})",
                entry.index,
                entry.exact
            );
        }
    }
    println!(
        "structural plane, N = {n}: chord refits within {worst_exact:.2e} σ, one step within {worst_step:.4} σ"
    );
}
