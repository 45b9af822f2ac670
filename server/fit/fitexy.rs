//! Modified FITEXY (Tremaine et al. 2002): χ² with errors in both coordinates plus an
//! intrinsic scatter ε0 in y, tuned so that χ²/(N − 2) = 1. For comparison with published
//! work; it cannot use upper limits.

use super::intervals::{IntervalKind, Intervals};
use super::optimize::{Sum, brent_min, hessian, illinois, invert_spd};
use super::types::{Data, prepare};
use super::{Fit, FitError, FitSpec, Params, Point, Shape, Termination, min_points, tolerance};

/// Number of slope-angle grid points scanned before Brent's refinement.
const ANGLE_GRID: usize = 181;

/// χ² of the line at slope β with α in closed form, for scatter ε0.
///
/// ```text
/// V_i = σ_y,i² + β² σ_x,i² − 2 β σ_xy,i + ε0²,  w_i = 1/V_i
/// α̂(β) = Σ w_i (y_i − β d_i) / Σ w_i,   χ²(β) = Σ w_i (y_i − α̂ − β d_i)²
/// ```
fn chi2_profile(data: &Data, beta: f64, e2: f64, y_center: f64) -> (f64, f64) {
    let (mut sw, mut swr, mut swr2) = (Sum::default(), Sum::default(), Sum::default());
    for i in 0..data.n() {
        let v = data.vy[i] + beta * beta * data.vx[i] - 2.0 * beta * data.cxy[i] + e2;
        if v <= 0.0 {
            return (f64::INFINITY, 0.0);
        }
        let w = 1.0 / v;
        let r = data.y[i] - y_center - beta * data.d[i];
        sw.add(w);
        swr.add(w * r);
        swr2.add(w * r * r);
    }
    let a = swr.total() / sw.total();
    // Σ w (r − a)² = Σ w r² − a Σ w r (exact at the weighted mean).
    let chi2 = (swr2.total() - a * swr.total()).max(0.0);
    (chi2, y_center + a)
}

/// dχ²/dβ of the profile χ²(β) (α at its optimum, so ∂χ²/∂α = 0 and only the explicit β
/// dependence counts).
///
/// ```text
/// dχ²/dβ = Σ_i [ −w_i² (2β σ_x,i² − 2σ_xy,i) (r_i − α̂)² − 2 w_i d_i (r_i − α̂) ],  r_i = y_i − β d_i
/// ```
fn chi2_profile_slope(data: &Data, beta: f64, e2: f64, alpha: f64) -> f64 {
    let mut s = Sum::default();
    for i in 0..data.n() {
        let v = data.vy[i] + beta * beta * data.vx[i] - 2.0 * beta * data.cxy[i] + e2;
        let w = 1.0 / v;
        let res = data.y[i] - alpha - beta * data.d[i];
        s.add(
            -w * w * (2.0 * beta * data.vx[i] - 2.0 * data.cxy[i]) * res * res
                - 2.0 * w * data.d[i] * res,
        );
    }
    s.total()
}

/// Refines a slope minimum found by Brent's method (value-based, so precise only to about
/// √ε_machine) by finding the zero of dχ²/dβ near it, so that fits agree to rounding whatever
/// the row order.
fn refine_slope(data: &Data, beta: f64, e2: f64, y_center: f64, scale: f64) -> f64 {
    let g = |b: f64| {
        let (_, a) = chi2_profile(data, b, e2, y_center);
        chi2_profile_slope(data, b, e2, a)
    };
    let mut h = 1e-6 * (beta.abs() + 1e-3 * scale);
    for _ in 0..20 {
        if let Some(r) = illinois(g, beta - h, beta + h, 1e-15 * (beta.abs() + 1e-3 * scale)) {
            // Keep the refinement unless it raises χ² beyond rounding noise.
            let (c_r, c_b) = (
                chi2_profile(data, r, e2, y_center).0,
                chi2_profile(data, beta, e2, y_center).0,
            );
            if c_r <= c_b + 8.0 * f64::EPSILON * c_b.abs() {
                return r;
            }
            return beta;
        }
        h *= 4.0;
    }
    beta
}

/// χ² at a given (α, β) for scatter ε0.
fn chi2_at(data: &Data, alpha: f64, beta: f64, e2: f64) -> f64 {
    let mut s = Sum::default();
    for i in 0..data.n() {
        let v = data.vy[i] + beta * beta * data.vx[i] - 2.0 * beta * data.cxy[i] + e2;
        if v <= 0.0 {
            return f64::INFINITY;
        }
        let r = data.y[i] - alpha - beta * data.d[i];
        s.add(r * r / v);
    }
    s.total()
}

/// Scale of the slope (sd y / sd x) used to map slope angles to slopes.
fn slope_scale(data: &Data) -> f64 {
    let n = data.n() as f64;
    let my = data.y.iter().sum::<f64>() / n;
    let md = data.d.iter().sum::<f64>() / n;
    let sy = (data.y.iter().map(|y| (y - my).powi(2)).sum::<f64>() / n).sqrt();
    let sd = (data.d.iter().map(|d| (d - md).powi(2)).sum::<f64>() / n).sqrt();
    if sy > 0.0 && sd > 0.0 { sy / sd } else { 1.0 }
}

/// Minimises a function of the slope over all slopes: a grid in the angle θ (β = s tan θ)
/// followed by Brent's method between the neighbours of the best grid point.
fn min_over_slope<F: FnMut(f64) -> f64>(mut f: F, scale: f64) -> (f64, f64) {
    let half_pi = std::f64::consts::FRAC_PI_2;
    let step = std::f64::consts::PI / (ANGLE_GRID + 1) as f64;
    let mut best = (0, f64::INFINITY);
    for k in 1..=ANGLE_GRID {
        let th = -half_pi + k as f64 * step;
        let v = f(scale * th.tan());
        if v < best.1 {
            best = (k, v);
        }
    }
    let th = -half_pi + best.0 as f64 * step;
    let (th_min, v, _) = brent_min(|t| f(scale * t.tan()), th - step, th + step, 1e-14);
    (scale * th_min.tan(), v)
}

/// Minimises a function of the slope near `c`: Brent on [c − w, c + w], re-centred and widened
/// while the minimum sits at an edge; falls back to the full angle scan after 8 widenings.
fn local_min<F: FnMut(f64) -> f64>(mut f: F, c: f64, w: f64, scale: f64) -> (f64, f64) {
    let (mut c, mut w) = (c, w.max(1e-12 * scale));
    for _ in 0..8 {
        let (x, v, _) = brent_min(&mut f, c - w, c + w, 1e-14 * scale);
        if (x - (c - w)).abs() > 0.01 * w && (x - (c + w)).abs() > 0.01 * w {
            return (x, v);
        }
        c = x;
        w *= 4.0;
    }
    min_over_slope(f, scale)
}

/// Minimum of χ² over (α, β) at scatter ε0: (β̂, α̂, χ²_min).
fn minimise(data: &Data, e2: f64, scale: f64, y_center: f64) -> (f64, f64, f64) {
    let (beta, _) = min_over_slope(|b| chi2_profile(data, b, e2, y_center).0, scale);
    let beta = refine_slope(data, beta, e2, y_center, scale);
    let (chi2, alpha) = chi2_profile(data, beta, e2, y_center);
    (beta, alpha, chi2)
}

/// Modified FITEXY fit (Tremaine et al. 2002).
///
/// # Model
/// ```text
/// χ²(α, β; ε0) = Σ_i (y_i − α − β d_i)² / (σ_y,i² + β² σ_x,i² − 2 β σ_xy,i + ε0²),  d_i = x_i − x0
/// ε0: χ²_min(ε0) / (N − 2) = 1, or ε0 = 0 if χ²_min(0)/(N − 2) ≤ 1
/// errors (ε0 fixed): half-width of the range where χ² − χ²_min ≤ 1, profiling the other
/// parameter; the α–β correlation comes from the Hessian of χ²
/// ```
/// x, y, x0 in log10 units; σ's and ε0 in dex; σ_xy dex² (Tremaine et al. did not use σ_xy;
/// with σ_xy = 0 the two agree). No error is given for ε0 (reported as 0, with a note).
///
/// # Errors
/// [`FitError::Unsupported`] for upper limits (FITEXY has no censored term; drop them or use a
/// likelihood estimator) and for Quadratic or Plane; [`FitError::TooFewPoints`] for N < 3;
/// the input errors of [`super::fit`].
///
/// # References
/// Tremaine et al. 2002, ApJ 574, 740, §3 (eq. 9 and the χ²/(N − 2) = 1 rule); Press et al.
/// 1992, *Numerical Recipes* (2nd ed.), §15.3 (FITEXY); docs/methods.md §2.3.
pub fn fit(points: &[Point], spec: &FitSpec) -> Result<Fit, FitError> {
    fit_inner(points, spec, None)
}

/// FITEXY with the intrinsic scatter held at `scatter_dex` instead of tuned; with zero x
/// errors and `scatter_dex` = 0 this is weighted least squares on σ_y (Hogg et al. 2010,
/// exercise 1).
///
/// # Model
/// ```text
/// minimise χ²(α, β; ε0 = scatter_dex) as in [`fit`]; Δχ² = 1 errors
/// ```
/// Units as in [`fit`].
///
/// # Errors
/// As [`fit`], plus [`FitError::InvalidSetting`] for a negative or non-finite `scatter_dex`.
///
/// # References
/// Tremaine et al. 2002, ApJ 574, 740; Hogg, Bovy & Lang 2010, arXiv:1008.4686, §1.
pub fn fit_fixed_scatter(
    points: &[Point],
    spec: &FitSpec,
    scatter_dex: f64,
) -> Result<Fit, FitError> {
    if !(scatter_dex.is_finite() && scatter_dex >= 0.0) {
        return Err(FitError::InvalidSetting {
            setting: "scatter_dex",
            reason: "The fixed intrinsic scatter must be a finite number ≥ 0.".to_owned(),
        });
    }
    fit_inner(points, spec, Some(scatter_dex))
}

fn fit_inner(points: &[Point], spec: &FitSpec, fixed_eps: Option<f64>) -> Result<Fit, FitError> {
    if spec.shape != Shape::Line {
        return Err(FitError::Unsupported {
            what: format!(
                "Modified FITEXY fits straight lines only, not a {}.",
                spec.shape.as_str()
            ),
        });
    }
    let data = prepare(points, spec, min_points(spec))?;
    if data.n_upper > 0 {
        return Err(FitError::Unsupported {
            what: format!(
                "Modified FITEXY cannot use upper limits ({} in the sample); remove them or use the structural or conditional likelihood.",
                data.n_upper
            ),
        });
    }
    let n = data.n();
    let dof = (n - 2) as f64;
    let scale = slope_scale(&data);
    let y_center = data.y.iter().sum::<f64>() / n as f64;
    let mut evaluations = 0_u64;
    // The ε0 search warm-starts the slope minimisation from the previous slope.
    let last_beta = std::cell::Cell::new(None::<f64>);
    let chi_min_at = |e: f64, evaluations: &mut u64| {
        let e2 = e * e;
        let r = match last_beta.get() {
            Some(b0) => {
                *evaluations += 60;
                let (b, c) = local_min(
                    |b| chi2_profile(&data, b, e2, y_center).0,
                    b0,
                    0.05 * scale,
                    scale,
                );
                (b, chi2_profile(&data, b, e2, y_center).1, c)
            }
            None => {
                *evaluations += ANGLE_GRID as u64 + 60;
                minimise(&data, e2, scale, y_center)
            }
        };
        last_beta.set(Some(r.0));
        r
    };
    let mut reason = String::from("Converged.");
    let eps = match fixed_eps {
        Some(e) => {
            reason.push_str(&format!(" The intrinsic scatter was held at {e}."));
            e
        }
        None => {
            let (_, _, c0) = chi_min_at(0.0, &mut evaluations);
            if c0 / dof <= 1.0 {
                reason.push_str(&format!(
                    " χ²/(N − 2) = {:.6} ≤ 1 without intrinsic scatter, so ε0 = 0.",
                    c0 / dof
                ));
                0.0
            } else {
                let mut hi = (data.y.iter().map(|y| (y - y_center).powi(2)).sum::<f64>()
                    / n as f64)
                    .sqrt()
                    .max(1e-6);
                let mut tries = 0;
                while chi_min_at(hi, &mut evaluations).2 / dof > 1.0 {
                    hi *= 2.0;
                    tries += 1;
                    if tries > 200 {
                        return Err(FitError::NotConverged { iterations: tries });
                    }
                }
                // Lower end of the bracket: 0, unless objects without any error make χ²
                // infinite there; then the largest ε below `hi` with χ²/(N − 2) > 1.
                let mut lo = 0.0;
                if !c0.is_finite() {
                    lo = hi;
                    loop {
                        lo *= 0.5;
                        if lo < 1e-10 * hi {
                            return Err(FitError::Unsupported {
                                what: "FITEXY cannot fit objects without errors that lie exactly on a line.".to_owned(),
                            });
                        }
                        if chi_min_at(lo, &mut evaluations).2 / dof > 1.0 {
                            break;
                        }
                    }
                }
                let root = illinois(
                    |e| chi_min_at(e, &mut evaluations).2 / dof - 1.0,
                    lo,
                    hi,
                    tolerance::PROFILE_X_REL * hi,
                )
                .ok_or(FitError::NotConverged { iterations: 200 })?;
                reason.push_str(" ε0 was tuned so that χ²/(N − 2) = 1.");
                root
            }
        }
    };
    let e2 = eps * eps;
    // The final minimum uses the full angle scan, so it is the global one.
    let (beta, alpha, chi2) = minimise(&data, e2, scale, y_center);
    evaluations += ANGLE_GRID as u64 + 60;
    // Δχ² = 1 interval in β (α profiled analytically).
    let prof_beta =
        |b: f64| chi2_profile(&data, b, e2, y_center).0 - chi2 - tolerance::DELTA_ONE_SIGMA;
    // Δχ² = 1 interval in α (β profiled numerically).
    let prof_alpha = |a: f64, width: f64| {
        local_min(|b| chi2_at(&data, a, b, e2), beta, width, scale).1
            - chi2
            - tolerance::DELTA_ONE_SIGMA
    };
    // Curvature guess for the search steps from the Hessian of χ² in (α, β).
    let hm = hessian(
        |p| chi2_at(&data, p[0], p[1], e2),
        &[alpha, beta],
        &[
            1e-4 * (alpha.abs() + 1.0),
            1e-4 * (beta.abs() + scale * 1e-2),
        ],
    );
    let cov_h = invert_spd(&(hm.clone() * 0.5));
    let (sa_guess, sb_guess, rho) = match &cov_h {
        Some(c) => {
            let (sa, sb) = (c[(0, 0)].sqrt(), c[(1, 1)].sqrt());
            (sa, sb, c[(0, 1)] / (sa * sb))
        }
        None => (1.0, scale, 0.0),
    };
    let (b_lo, b_hi) = interval(prof_beta, beta, sb_guess);
    let (a_lo, a_hi) = interval(|a| prof_alpha(a, 10.0 * sb_guess), alpha, sa_guess);
    let half = |lo: Option<f64>, hi: Option<f64>, c: f64| match (lo, hi) {
        (Some(l), Some(h)) => 0.5 * (h - l),
        (Some(l), None) => c - l,
        (None, Some(h)) => h - c,
        (None, None) => 0.0,
    };
    let sb = half(b_lo, b_hi, beta);
    let sa = half(a_lo, a_hi, alpha);
    if b_lo.is_none() || b_hi.is_none() {
        reason.push_str(
            " The Δχ² = 1 slope interval is open on one side; the error uses the closed side.",
        );
    }
    if let (Some(bl), Some(bh), Some(al), Some(ah)) = (b_lo, b_hi, a_lo, a_hi) {
        reason.push_str(&format!(
            " Δχ² = 1 intervals: β −{:.6}/+{:.6}, α −{:.6}/+{:.6}.",
            beta - bl,
            bh - beta,
            alpha - al,
            ah - alpha
        ));
    }
    reason.push_str(" No error is computed for ε0.");
    let rho = if rho.is_finite() { rho } else { 0.0 };
    let cov = vec![
        vec![sa * sa, rho * sa * sb, 0.0],
        vec![rho * sa * sb, sb * sb, 0.0],
        vec![0.0, 0.0, 0.0],
    ];
    Ok(Fit {
        spec: spec.clone(),
        params: Params::line(alpha, beta, eps),
        errors: Params {
            alpha: sa,
            beta: sb,
            beta2: None,
            gamma: None,
            eps: 0.0,
        },
        cov_names: vec!["alpha", "beta", "eps"],
        cov,
        n,
        n_upper: 0,
        neg2_log_l: None,
        aic: None,
        bic: None,
        chi2: Some(chi2),
        n_params: 3,
        termination: Termination {
            reason,
            iterations: 0,
            evaluations,
        },
        x_model: None,
        intervals: Intervals::from_errors(
            IntervalKind::Estimator,
            &Params::line(alpha, beta, eps),
            &Params::line(sa, sb, 0.0),
        ),
    })
}

/// Roots of `f` (negative at `c`) below and above `c`, searched outwards from c ± `guess`.
fn interval<F: Fn(f64) -> f64>(f: F, c: f64, guess: f64) -> (Option<f64>, Option<f64>) {
    let g = if guess.is_finite() && guess > 0.0 {
        guess
    } else {
        1.0
    };
    let side = |dir: f64| {
        let mut s = g;
        for _ in 0..60 {
            let p = c + dir * s;
            let v = f(p);
            if v.is_finite() && v > 0.0 {
                return illinois(&f, c, p, tolerance::PROFILE_X_REL * (g + c.abs()));
            }
            s *= 2.0;
        }
        None
    };
    (side(-1.0), side(1.0))
}

#[cfg(test)]
mod tests {
    use super::super::tolerance::close;
    use super::super::types::test_data::{hogg, hogg_y_only, pearson_york};
    use super::super::{FitSpec, Method, Point, Shape};
    use super::*;

    fn spec0() -> FitSpec {
        FitSpec::new(Method::Fitexy, 0.0)
    }

    #[test]
    fn hogg_all_twenty_matches_the_tremaine_oracle() {
        // docs/methods.md §2.9, computed oracle 3 (computed; Tremaine et al. 2002 procedure on Hogg, Bovy & Lang
        // 2010 Table 1, σx and σy, ρ ignored): ε0 = 92.1067, α = 298.9081, β = 0.681171;
        // Δχ² = 1 slope interval −0.3950/+0.3972.
        let f = fit(&hogg(1), &spec0()).expect("fit");
        let p = &f.params;
        assert!((p.eps - 92.1067).abs() < 1e-3, "{p:?}");
        assert!((p.alpha - 298.9081).abs() < 1e-3, "{p:?}");
        assert!((p.beta - 0.681_171).abs() < 2e-6, "{p:?}");
        assert!(
            (f.errors.beta - 0.5 * (0.3950 + 0.3972)).abs() < 2e-4,
            "{:?}",
            f.errors
        );
        // χ²/(N − 2) = 1 by construction.
        assert!((f.chi2.unwrap_or(0.0) / 18.0 - 1.0).abs() < 1e-8);
        // The asymmetric interval itself is reported in the reason: −0.3950/+0.3972.
        let r = &f.termination.reason;
        let lo: f64 = r
            .split("β −")
            .nth(1)
            .and_then(|t| t.split('/').next())
            .and_then(|t| t.parse().ok())
            .unwrap_or(0.0);
        let hi: f64 = r
            .split("/+")
            .nth(1)
            .and_then(|t| t.split(',').next())
            .and_then(|t| t.parse().ok())
            .unwrap_or(0.0);
        assert!(
            (lo - 0.3950).abs() < 1e-4 && (hi - 0.3972).abs() < 1e-4,
            "{r}"
        );
    }

    #[test]
    fn hogg_points_5_to_20_need_no_scatter() {
        // docs/methods.md §2.9, computed oracle 1 (computed): χ²/(N−2) = 0.957745 < 1 at ε0 = 0, so ε0 = 0;
        // α = 21.0345, β = 2.299771.
        let f = fit(&hogg(5), &spec0()).expect("fit");
        assert!(f.params.eps.abs() < 1e-15);
        assert!((f.params.alpha - 21.0345).abs() < 1e-3, "{:?}", f.params);
        assert!((f.params.beta - 2.299_771).abs() < 2e-6, "{:?}", f.params);
        assert!((f.chi2.unwrap_or(0.0) / 14.0 - 0.957_745).abs() < 1e-6);
        assert!(f.termination.reason.contains("ε0 = 0"));
    }

    #[test]
    fn with_no_x_errors_and_no_scatter_fitexy_is_weighted_least_squares() {
        // Hogg, Bovy & Lang 2010 exercise 1 (points 5–20, σ_y only), recomputed in
        // docs/methods.md §2.9 (computed): slope 2.239921 ± 0.107780, intercept 34.0477 ± 18.2462,
        // cov = −1.88954 (published 2.24 ± 0.11, 34 ± 18, from memory).
        let f = fit_fixed_scatter(&hogg_y_only(5), &spec0(), 0.0).expect("fit");
        assert!((f.params.beta - 2.239_921).abs() < 1e-6, "{:?}", f.params);
        assert!((f.errors.beta - 0.107_780).abs() < 1e-6, "{:?}", f.errors);
        assert!((f.params.alpha - 34.0477).abs() < 1e-4);
        assert!((f.errors.alpha - 18.2462).abs() < 1e-4);
        assert!((f.covariance("alpha", "beta").unwrap_or(0.0) - (-1.889_54)).abs() < 1e-3);
        // Exercise 2 (all 20 points): 1.076748 ± 0.077407, 213.2735 ± 14.3940 (computed).
        let f = fit_fixed_scatter(&hogg_y_only(1), &spec0(), 0.0).expect("fit");
        assert!((f.params.beta - 1.076_748).abs() < 1e-6);
        assert!((f.errors.beta - 0.077_407).abs() < 1e-6);
        assert!((f.params.alpha - 213.2735).abs() < 1e-4);
        assert!((f.errors.alpha - 14.3940).abs() < 1e-4);
    }

    #[test]
    fn pearson_york_data_reproduce_york_at_zero_scatter() {
        // docs/methods.md §2.9, the Pearson–York data (computed): FITEXY at ε0 = 0 on Pearson (1901) data with York
        // (1966, Can. J. Phys. 44, 1079) weights: slope −0.4805334, intercept 5.4799102,
        // χ² = 11.86635; York's exact solution −0.480533, 5.479910 (from memory).
        let f = fit_fixed_scatter(&pearson_york(), &spec0(), 0.0).expect("fit");
        assert!(
            close(f.params.beta, -0.480_533_4, 0.0, 1e-7),
            "{:?}",
            f.params
        );
        assert!(
            close(f.params.alpha, 5.479_910_2, 0.0, 1e-7),
            "{:?}",
            f.params
        );
        assert!(close(f.chi2.unwrap_or(0.0), 11.866_35, 0.0, 1e-6));
        assert!((f.params.beta - (-0.480_533)).abs() < 1e-6);
        assert!((f.params.alpha - 5.479_910).abs() < 1e-6);
    }

    #[test]
    fn limits_quadratics_and_bad_scatter_are_refused() {
        let mut pts = hogg(5);
        pts.push(Point::limit(150.0, 5.0, 300.0));
        assert!(matches!(
            fit(&pts, &spec0()),
            Err(FitError::Unsupported { .. })
        ));
        let q = spec0().with_shape(Shape::Quadratic).expect("spec");
        assert!(matches!(
            fit(&hogg(5), &q),
            Err(FitError::Unsupported { .. })
        ));
        assert!(matches!(
            fit_fixed_scatter(&hogg(5), &spec0(), -1.0),
            Err(FitError::InvalidSetting { .. })
        ));
        // FITEXY divides by N − 2: two points are too few.
        assert!(matches!(
            fit(&hogg(19), &spec0()),
            Err(FitError::TooFewPoints { n: 2, min: 3, .. })
        ));
    }
}
