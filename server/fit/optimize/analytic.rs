//! Newton's method for likelihoods with analytic gradients and Hessians, in a fixed layout of
//! parameter slots, with ε² ≥ 0 handled as an active-set constraint.

use nalgebra::{DMatrix, DVector};

use super::super::tolerance;
use super::{bisect, illinois, invert_spd};

/// Slot of α.
pub(crate) const A: usize = 0;
/// Slot of β.
pub(crate) const B: usize = 1;
/// Slot of β2 or γ.
pub(crate) const C: usize = 2;
/// Slot of ε² (or ε when derivatives are asked for in ε).
pub(crate) const E: usize = 3;
/// Slot of the subsample offset δ.
pub(crate) const D: usize = 4;
/// Slot of the (pivoted) mean of the true x.
pub(crate) const M: usize = 5;
/// Slot of the variance τ² of the true x.
pub(crate) const T: usize = 6;
/// Number of slots.
pub(crate) const NS: usize = 7;

/// −2 ln L with its gradient and Hessian over the slots.
#[derive(Clone, Debug)]
pub(crate) struct Derivs {
    pub(crate) f: f64,
    pub(crate) g: [f64; NS],
    pub(crate) h: [[f64; NS]; NS],
}

impl Derivs {
    pub(crate) fn zero() -> Derivs {
        Derivs {
            f: 0.0,
            g: [0.0; NS],
            h: [[0.0; NS]; NS],
        }
    }

    /// Copies the upper triangle (in `act` order) to the lower one.
    pub(crate) fn symmetrise(&mut self, act: &[usize]) {
        for (ia, &a) in act.iter().enumerate() {
            for &b in &act[ia..] {
                self.h[b][a] = self.h[a][b];
            }
        }
    }
}

/// A likelihood with analytic derivatives over a set of slots.
pub(crate) trait Analytic {
    /// The slots this model uses, in θ order.
    fn slots(&self) -> Vec<usize>;
    /// Mean σ_y² (a scale for ε).
    fn mean_vy(&self) -> f64;
    /// −2 ln L and its derivatives over the slots `act`; slot E holds ε² if `squared`,
    /// else ε. `None` outside the support.
    fn derivs(&self, p: &[f64; NS], squared: bool, act: &[usize]) -> Option<Derivs>;
}

/// Result of [`maximise`].
pub(crate) struct Maximum {
    /// Slots at the maximum (E holds ε²).
    pub(crate) p: [f64; NS],
    pub(crate) neg2: f64,
    /// Covariance over the model's slots in θ order, with ε (not ε²) in slot E.
    pub(crate) cov: Option<DMatrix<f64>>,
    pub(crate) iterations: u64,
    pub(crate) evaluations: u64,
    pub(crate) notes: Vec<String>,
}

/// −2 ln L only (no slot is differentiated, so the per-object work is the value alone).
fn value<O: Analytic>(model: &O, p: &[f64; NS], _act: &[usize]) -> f64 {
    model.derivs(p, true, &[]).map_or(f64::INFINITY, |d| d.f)
}

/// Converts derivatives over ε² (slot E holding s = ε²) into derivatives over ε, by the
/// chain rule.
///
/// ```text
/// ∂f/∂ε = 2ε f_s,  ∂²f/∂x∂ε = 2ε f_xs,  ∂²f/∂ε² = 4ε² f_ss + 2 f_s
/// ```
fn squared_to_eps(d: &Derivs, s: f64, act: &[usize]) -> Derivs {
    let e = s.sqrt();
    let mut out = Derivs {
        f: d.f,
        g: d.g,
        h: d.h,
    };
    if act.contains(&E) {
        out.g[E] = 2.0 * e * d.g[E];
        for &x in act {
            if x != E {
                out.h[x][E] = 2.0 * e * d.h[x][E];
                out.h[E][x] = out.h[x][E];
            }
        }
        out.h[E][E] = 4.0 * e * e * d.h[E][E] + 2.0 * d.g[E];
    }
    out
}

/// Newton iterations over the slots in `free` (all slots `act` are differentiated).
/// Returns the iterations, whether a step would have taken ε² below 0 (then p[E] = 0),
/// and the derivatives at the final p when it was not moved after they were computed;
/// `None` if it did not converge.
///
/// Each line-search trial is evaluated with its derivatives, so an accepted step (nearly
/// always the full Newton step) needs no second sweep over the data for the next
/// iteration.
fn newton<O: Analytic>(
    model: &O,
    p: &mut [f64; NS],
    free: &[usize],
    evals: &mut u64,
) -> Option<(u64, bool, Option<Derivs>)> {
    let k = free.len();
    let e_pos = free.iter().position(|&s| s == E);
    let mut carried: Option<Derivs> = None;
    for it in 0..tolerance::NEWTON_ML_MAX_ITERATIONS {
        let d = match carried.take() {
            Some(d) => d,
            None => {
                *evals += 1;
                model.derivs(p, true, free)?
            }
        };
        let hm = DMatrix::from_fn(k, k, |a, b| d.h[free[a]][free[b]]);
        let gv = DVector::from_fn(k, |a, _| d.g[free[a]]);
        // Levenberg damping until the matrix is positive definite.
        let scale = (0..k)
            .map(|a| hm[(a, a)].abs())
            .fold(0.0_f64, f64::max)
            .max(1e-300);
        let mut mu = 0.0;
        let step = loop {
            let m = &hm + DMatrix::identity(k, k) * mu;
            if let Some(c) = m.cholesky() {
                break c.solve(&gv);
            }
            mu = if mu > 0.0 { mu * 10.0 } else { 1e-10 * scale };
            if mu > 1e10 * scale {
                return None;
            }
        };
        let within =
            |tol: f64| (0..k).all(|a| step[a].abs() <= tol / hm[(a, a)].abs().max(1e-300).sqrt());
        let small = within(tolerance::NEWTON_STEP_REL);
        if small && mu <= 0.0 {
            return Some((it, false, Some(d)));
        }
        // Steps this small only chase the rounding noise of the sums (large samples).
        let tiny = mu <= 0.0 && within(tolerance::NEWTON_NOISE_STEP_REL);
        if let Some(ep) = e_pos
            && p[E] - step[ep] < 0.0
        {
            p[E] = 0.0;
            return Some((it, true, None));
        }
        let mut trial = *p;
        if tiny {
            // A step this small changes −2 ln L by less than the rounding noise of its
            // sum, so a line search cannot judge it (and would backtrack on noise); the
            // undamped Newton step is taken as is, and leaves an error of the order of its
            // square.
            for a in 0..k {
                trial[free[a]] = p[free[a]] - step[a];
            }
            *evals += 1;
            if let Some(dt) = model.derivs(&trial, true, free) {
                *p = trial;
                return Some((it, false, Some(dt)));
            }
        }
        let slope: f64 = (0..k).map(|a| -gv[a] * step[a]).sum();
        let noise = 8.0 * f64::EPSILON * d.f.abs().max(1.0);
        let mut lambda = 1.0;
        let mut moved = false;
        for _ in 0..50 {
            for a in 0..k {
                trial[free[a]] = p[free[a]] - lambda * step[a];
            }
            let dt = model.derivs(&trial, true, free);
            let ft = dt.as_ref().map_or(f64::INFINITY, |x| x.f);
            *evals += 1;
            if ft <= d.f + 1e-4 * lambda * slope + noise {
                if tiny && ft >= d.f - noise {
                    *p = trial;
                    return Some((it, false, dt));
                }
                moved = true;
                carried = dt;
                break;
            }
            lambda *= 0.5;
        }
        if !moved {
            // No descent within rounding noise: at the optimum if the step was small.
            return small.then_some((it, false, Some(d)));
        }
        *p = trial;
    }
    None
}

/// Maximises the likelihood from `p0` (slot E holding ε²), with the ε = 0 active set;
/// covariance from the analytic Hessian of −ln L in ε (not ε²), ε's error on the boundary
/// from the one-sided profile Δ(−2 ln L) = 1. `None` lets the caller fall back.
pub(crate) fn maximise<O: Analytic>(model: &O, p0: [f64; NS], want_cov: bool) -> Option<Maximum> {
    let slots = model.slots();
    let mut p = p0;
    let mut evals = 0_u64;
    let no_eps: Vec<usize> = slots.iter().copied().filter(|&s| s != E).collect();
    let mut iterations = 0;
    let mut boundary = false;
    let mut settled = false;
    // Derivatives over all slots at the final p, when known.
    let mut at_p: Option<Derivs> = None;
    for _ in 0..4 {
        let (it, hit, last) = newton(model, &mut p, &slots, &mut evals)?;
        iterations += it;
        if !hit && p[E] > 0.0 {
            settled = true;
            at_p = last;
            break;
        }
        // On the boundary: optimise the rest at ε = 0 and check that ε wants to stay
        // there (∂f/∂ε² ≥ 0); otherwise restart inside.
        p[E] = 0.0;
        iterations += newton(model, &mut p, &no_eps, &mut evals)?.0;
        let d = model.derivs(&p, true, &slots)?;
        if d.g[E] >= 0.0 {
            boundary = true;
            settled = true;
            at_p = Some(d);
            break;
        }
        p[E] = 1e-2 * model.mean_vy() + 1e-12;
    }
    if !settled {
        return None;
    }
    let neg2 = at_p
        .as_ref()
        .map_or_else(|| value(model, &p, &slots), |d| d.f);
    let mut notes = Vec::new();
    let mut cov = None;
    if want_cov {
        let free = if boundary { &no_eps } else { &slots };
        let d = match &at_p {
            // The same point: only ε² → ε changes, by the chain rule.
            Some(d) => squared_to_eps(d, p[E], &slots),
            None => {
                let mut pl = p;
                pl[E] = p[E].sqrt();
                model.derivs(&pl, false, free)?
            }
        };
        let k = free.len();
        // The Hessian of −ln L is half that of −2 ln L.
        let hm = DMatrix::from_fn(k, k, |a, b| 0.5 * d.h[free[a]][free[b]]);
        match invert_spd(&hm) {
            Some(inv) => {
                let dim = slots.len();
                let pos = |s: usize| slots.iter().position(|&x| x == s).unwrap_or(0);
                let mut c = DMatrix::zeros(dim, dim);
                for (a, &sa) in free.iter().enumerate() {
                    for (b, &sb) in free.iter().enumerate() {
                        c[(pos(sa), pos(sb))] = inv[(a, b)];
                    }
                }
                if boundary {
                    match profile_eps(model, &p, neg2, &no_eps, &mut evals) {
                        Some(e) => {
                            c[(pos(E), pos(E))] = e * e;
                            notes.push(format!(
                                "The intrinsic scatter sits at the ε = 0 boundary; its error {e:.4} is the one-sided profile-likelihood bound Δ(−2 ln L) = 1, and the other errors are computed with ε held at 0."
                            ));
                        }
                        None => notes.push(
                            "The intrinsic scatter sits at the ε = 0 boundary; its error could not be profiled and is reported as 0.".to_owned(),
                        ),
                    }
                }
                cov = Some(c);
            }
            None => notes.push(
                "The Hessian of −ln L is not positive definite at the optimum, so parameter errors are reported as 0; use the bootstrap or the posterior instead.".to_owned(),
            ),
        }
    } else if boundary {
        notes.push("The intrinsic scatter sits at the ε = 0 boundary.".to_owned());
    }
    Some(Maximum {
        p,
        neg2,
        cov,
        iterations,
        evaluations: evals,
        notes,
    })
}

/// One-sided profile error of ε at the boundary: Δ(−2 ln L) = 1 with the rest re-optimised.
fn profile_eps<O: Analytic>(
    model: &O,
    p0: &[f64; NS],
    neg2: f64,
    rest: &[usize],
    evals: &mut u64,
) -> Option<f64> {
    let mut start = *p0;
    let all = model.slots();
    let mut prof = |e: f64, evals: &mut u64| {
        let mut p = start;
        p[E] = e * e;
        newton(model, &mut p, rest, evals)?;
        start = p;
        Some(value(model, &p, &all) - neg2 - tolerance::DELTA_ONE_SIGMA)
    };
    let mut hi = model.mean_vy().sqrt().max(1e-6);
    for _ in 0..80 {
        if prof(hi, evals)? > 0.0 {
            return bisect(
                |e| prof(e, evals).unwrap_or(f64::NAN),
                0.0,
                hi,
                tolerance::PROFILE_X_REL * hi,
            );
        }
        hi *= 2.0;
    }
    None
}

/// Δ(−2 ln L_R) of the 95 % interval: the 0.95 quantile of χ² with one degree of freedom,
/// 1.959964² = 3.841459 (computed).
pub(crate) const DELTA_95: f64 = 3.841_458_820_694_124;

/// Absolute tolerance of the interval ends, relative to the scale of ε: 10⁻⁷ of it, far below
/// anything shown.
const INTERVAL_X_REL: f64 = 1e-7;

/// The smallest ε searched, relative to the scale of ε (see [`restricted`]).
const EPS_FLOOR_REL: f64 = 1e-4;

/// Result of [`restricted`].
pub(crate) struct Restricted {
    /// The slots at the restricted ε (E holds ε²) with every other slot at its maximum for
    /// that ε.
    pub(crate) p: [f64; NS],
    /// 68.27 % interval of ε: Δ(−2 ln L_R) ≤ 1 (a lower end of 0 when the interval reaches the
    /// boundary).
    pub(crate) eps_68: (f64, f64),
    /// 95 % interval of ε: Δ(−2 ln L_R) ≤ 3.841.
    pub(crate) eps_95: (f64, f64),
    /// Inverse Hessian of −ln L over the model's slots in θ order (ε, not ε², in slot E) at
    /// `p`, or `None` when it is not positive definite.
    pub(crate) cov: Option<DMatrix<f64>>,
}

/// The restricted (Laplace-marginal) likelihood of ε and its maximum and intervals.
///
/// ```text
/// −2 ln L_R(ε) = min_λ [−2 ln L(ε, λ)] + ln det H_mm(ε)
/// ```
///
/// where λ are all the other parameters, re-maximised at each ε, and H_mm is the Hessian of
/// −2 ln L over the relation's mean parameters m (α, β and, when fitted, β2 or γ and δ) at that
/// maximum. Integrating m out of the likelihood with flat priors by Laplace's method gives this
/// form (Cox & Reid 1987, JRSS B 49, 1, eq. 4.4 — the adjusted profile likelihood — from
/// memory); for a linear model with Gaussian errors and no censoring it is exactly the REML
/// likelihood of the variance (Patterson & Thompson 1971, Biometrika 58, 545; Harville 1974,
/// Biometrika 61, 383). The ln det term charges ε for the degrees of freedom the fitted line
/// takes from the residuals, which the ML ε ignores (its bias is about −p/(2N) ε for p mean
/// parameters). docs/methods.md §2.8.
///
/// The estimate is the ε that minimises −2 ln L_R (Brent), and the intervals are
/// {ε : −2 ln L_R(ε) − min ≤ 1 or 3.841} (bisection on each side), cut at 0.
/// `None` when a maximum at fixed ε or the Hessian cannot be computed (the caller keeps the
/// curvature errors).
pub(crate) fn restricted<O: Analytic>(model: &O, ml: &[f64; NS]) -> Option<Restricted> {
    let slots = model.slots();
    let rest: Vec<usize> = slots.iter().copied().filter(|&s| s != E).collect();
    let mean: Vec<usize> = slots
        .iter()
        .copied()
        .filter(|s| matches!(*s, A | B | C | D))
        .collect();
    let km = mean.len();
    let mut evals = 0_u64;
    let mut start = *ml;
    // −2 ln L_R at ε, and the slots of its inner maximum.
    let mut objective = |e: f64, evals: &mut u64| -> Option<(f64, [f64; NS])> {
        let mut p = start;
        p[E] = e * e;
        // Warm-started from the last ε; if Newton fails from there, from the ML point.
        let (_, _, last) = newton(model, &mut p, &rest, evals).or_else(|| {
            p = *ml;
            p[E] = e * e;
            newton(model, &mut p, &rest, evals)
        })?;
        let d = match last {
            Some(d) => d,
            None => {
                *evals += 1;
                model.derivs(&p, true, &rest)?
            }
        };
        let hm = DMatrix::from_fn(km, km, |a, b| d.h[mean[a]][mean[b]]);
        let chol = hm.cholesky()?;
        let ln_det: f64 = (0..km).map(|i| 2.0 * chol.l()[(i, i)].ln()).sum();
        start = p;
        Some((d.f + ln_det, p))
    };
    let eps_ml = ml[E].max(0.0).sqrt();
    let scale = model.mean_vy().sqrt().max(eps_ml).max(1e-6);
    // Bracket the minimum: ln det H_mm grows as ε falls (the mean parameters are then better
    // determined), which pushes the restricted ε above the ML one; the search runs from 0 up
    // to where −2 ln L_R has risen by twice the 95 % level above its value at the ML ε.
    let (f_ml, _) = objective(eps_ml, &mut evals)?;
    let mut hi = eps_ml + scale;
    for _ in 0..60 {
        let (f_hi, _) = objective(hi, &mut evals)?;
        if f_hi - f_ml > 2.0 * DELTA_95 {
            break;
        }
        hi *= 2.0;
    }
    let mut failed = false;
    let (eps_r, f_min, _) = super::brent_min(
        |e| match objective(e, &mut evals) {
            Some((f, _)) => f,
            None => {
                failed = true;
                f64::INFINITY
            }
        },
        0.0,
        hi,
        1e-9 * scale,
    );
    if failed || !f_min.is_finite() {
        return None;
    }
    let (f_min, p_min) = objective(eps_r, &mut evals)?;
    let mut excess = |e: f64, level: f64, evals: &mut u64| {
        objective(e, evals).map_or(f64::NAN, |(f, _)| f - f_min - level)
    };
    // Lower end in [floor, hi]: below 10⁻⁴ of the scale of ε the likelihood is flat in ε to
    // rounding (and the inner maximum at ε = 0 can be ill-conditioned), so an interval that
    // reaches down there reaches 0.
    let floor = EPS_FLOOR_REL * scale;
    let mut lower = |level: f64, hi: f64, evals: &mut u64| -> Option<f64> {
        if hi <= floor || excess(floor, level, evals) <= 0.0 {
            return Some(0.0);
        }
        illinois(
            |e| excess(e, level, evals),
            floor,
            hi,
            INTERVAL_X_REL * scale,
        )
    };
    let lo68 = lower(tolerance::DELTA_ONE_SIGMA, eps_r, &mut evals)?;
    let lo95 = lower(DELTA_95, lo68, &mut evals)?;
    // Upper ends: below `hi`, where −2 ln L_R is more than 2 × 3.84 above its minimum.
    let hi68 = illinois(
        |e| excess(e, tolerance::DELTA_ONE_SIGMA, &mut evals),
        eps_r,
        hi,
        INTERVAL_X_REL * scale,
    )?;
    let hi95 = illinois(
        |e| excess(e, DELTA_95, &mut evals),
        hi68,
        hi,
        INTERVAL_X_REL * scale,
    )?;
    // Curvature of −ln L at (λ̂(ε_R), ε_R) over every slot, ε (not ε²) in slot E.
    let mut pe = p_min;
    pe[E] = p_min[E].sqrt();
    let cov = model.derivs(&pe, false, &slots).and_then(|d| {
        let k = slots.len();
        let hm = DMatrix::from_fn(k, k, |a, b| 0.5 * d.h[slots[a]][slots[b]]);
        invert_spd(&hm)
    });
    Some(Restricted {
        p: p_min,
        eps_68: (lo68, hi68),
        eps_95: (lo95, hi95),
        cov,
    })
}

/// A likelihood that is a sum of one term per object, whose terms can be taken one at a time:
/// −2 ln L(θ) = Σ_i f_i(θ), so the gradient and Hessian are sums of per-object ones
/// (g = Σ g_i, H = Σ H_i). The one-step influence of each object needs its own g_i and H_i
/// (docs/methods.md §6.1).
pub(crate) trait PerObject: Analytic + Sized {
    /// Number of objects.
    fn n_objects(&self) -> usize;
    /// The model of object `i` alone (same shape and pivots): its −2 ln L and derivatives are
    /// object i's term f_i of the sample's.
    fn one(&self, i: usize) -> Self;
    /// Makes `self`, a model from [`PerObject::one`], the model of object `i` of `from`
    /// (no allocation: the per-object sweep reuses one buffer).
    fn load(&mut self, from: &Self, i: usize);
    /// Makes `self`, a model from [`PerObject::one`], the model of the prepared one-row
    /// `row` (an object not in the sample; outside any offset group).
    fn set_row(&mut self, row: super::super::types::Data);
    /// The slots of a fit's maximum, with ε (not ε²) in slot E.
    fn slots_of_fit(&self, fit: &super::super::Fit) -> [f64; NS];
}
