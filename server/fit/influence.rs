//! How each object moves a fit, from one fit instead of one refit per object: the one-step
//! Newton (influence-function) approximation of leaving an object out or adding one, with
//! exact refits where they are cheap or where the ranking needs them (docs/methods.md §6.1).

use nalgebra::DMatrix;
use rayon::prelude::*;
use serde::Serialize;

use super::diagnostics::Influence;
use super::optimize::analytic::{A, Analytic, B, C, E, NS, PerObject};
use super::optimize::invert_spd;
use super::types::Data;
use super::{
    Fit, FitError, FitSpec, Method, Params, Point, Shape, conditional, fit_params_only, structural,
};

/// Samples of at most this many objects are refitted once per object. Up to here the refits
/// are cheap (300 refits of 300 objects take a few tens of milliseconds), and it is the
/// regime where one object moves the fit most, so where a one-step approximation is least
/// accurate (its error falls as the square of the shift, about 1/N²).
pub const EXACT_MAX_N: usize = 300;

/// Above [`EXACT_MAX_N`], the objects ranked highest are refitted exactly; this many of them.
/// The relation page lists five; twenty leave room for objects the approximation ranks a few
/// places off.
pub const EXACT_TOP: usize = 20;

/// How the relation moves when one object is added (new minus old parameters).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Shift {
    /// Δα (dex).
    pub d_alpha: f64,
    /// Δβ (dex/dex).
    pub d_beta: f64,
    /// Δβ2 of a quadratic (dex/dex²).
    pub d_beta2: Option<f64>,
    /// Δγ of a plane (dex/dex).
    pub d_gamma: Option<f64>,
    /// Δε (dex).
    pub d_eps: f64,
    /// Size of the (α, β) shift in units of the fit's errors: √(Δᵀ C⁻¹ Δ) with C the (α, β)
    /// covariance; 0 if C is singular.
    pub shift_sigma: f64,
    /// True when the shift comes from a refit rather than the one-step approximation.
    pub exact: bool,
}

/// A one-row copy of object `i` of `src`, for a one-object model.
pub(crate) fn row(src: &Data, i: usize) -> Data {
    Data {
        d: vec![src.d[i]],
        vx: vec![src.vx[i]],
        y: vec![src.y[i]],
        vy: vec![src.vy[i]],
        cxy: vec![src.cxy[i]],
        lim: vec![src.lim[i]],
        d2: vec![src.d2[i]],
        vx2: vec![src.vx2[i]],
        cx2y: vec![src.cx2y[i]],
        cxx2: vec![src.cxx2[i]],
        n_upper: usize::from(src.lim[i]),
    }
}

/// Overwrites the single row of `dst` (from [`row`]) with object `i` of `src`.
pub(crate) fn set_row(dst: &mut Data, src: &Data, i: usize) {
    dst.d[0] = src.d[i];
    dst.vx[0] = src.vx[i];
    dst.y[0] = src.y[i];
    dst.vy[0] = src.vy[i];
    dst.cxy[0] = src.cxy[i];
    dst.lim[0] = src.lim[i];
    dst.d2[0] = src.d2[i];
    dst.vx2[0] = src.vx2[i];
    dst.cx2y[0] = src.cx2y[i];
    dst.cxx2[0] = src.cxx2[i];
    dst.n_upper = usize::from(src.lim[i]);
}

/// Whether `spec`'s likelihood has per-object analytic derivatives, so that the one-step
/// approximation applies: the conditional likelihood (every shape) and the structural straight
/// line with one Gaussian for the true x.
///
/// # Model
/// ```text
/// −2 ln L = Σ_i f_i(θ) with analytic ∂f_i/∂θ and ∂²f_i/∂θ∂θᵀ
/// ```
///
/// # Errors
/// None.
///
/// # References
/// docs/methods.md §6.1.
pub fn has_one_step(spec: &FitSpec) -> bool {
    match spec.method {
        Method::Conditional => true,
        Method::Structural => spec.shape == Shape::Line && spec.components == 1,
        Method::Fitexy | Method::Bces(_) => false,
    }
}

/// The likelihood whose one-step influence ranks the objects of an estimator without one
/// ([`has_one_step`] false): the structural K = 1 line for structural mixtures (the same
/// relation likelihood with a simpler x model), the conditional likelihood of the same shape
/// for the structural quadratic and plane, and the conditional line for FITEXY and BCES (its
/// score is the same error-weighted residual times leverage as their χ² and moment sums).
fn proxy_spec(spec: &FitSpec) -> FitSpec {
    let method = if spec.method == Method::Structural && spec.shape == Shape::Line {
        Method::Structural
    } else {
        Method::Conditional
    };
    FitSpec {
        method,
        components: 1,
        ..spec.clone()
    }
}

/// C⁻¹ of the (α, β) covariance of `fit`, `None` when C is singular.
fn ab_precision(fit: &Fit) -> Option<[[f64; 2]; 2]> {
    let caa = fit.covariance("alpha", "alpha").unwrap_or(0.0);
    let cab = fit.covariance("alpha", "beta").unwrap_or(0.0);
    let cbb = fit.covariance("beta", "beta").unwrap_or(0.0);
    let m = DMatrix::from_row_slice(2, 2, &[caa, cab, cab, cbb]);
    invert_spd(&m).map(|c| [[c[(0, 0)], c[(0, 1)]], [c[(1, 0)], c[(1, 1)]]])
}

/// √(Δᵀ C⁻¹ Δ) for Δ = (Δα, Δβ); 0 without a precision.
fn sigma_of(prec: Option<[[f64; 2]; 2]>, da: f64, db: f64) -> f64 {
    match prec {
        Some(c) => (c[0][0] * da * da + 2.0 * c[0][1] * da * db + c[1][1] * db * db)
            .max(0.0)
            .sqrt(),
        None => 0.0,
    }
}

/// Solves M x = r for the `k` × `k` system (k ≤ NS) by Gaussian elimination with partial
/// pivoting; `None` when M is singular to working precision or the solution is not finite.
fn solve(k: usize, mut m: [[f64; NS]; NS], mut r: [f64; NS]) -> Option<[f64; NS]> {
    let scale = (0..k)
        .flat_map(|a| (0..k).map(move |b| (a, b)))
        .map(|(a, b)| m[a][b].abs())
        .fold(0.0_f64, f64::max);
    if !(scale.is_finite() && scale > 0.0) {
        return None;
    }
    for col in 0..k {
        let piv = (col..k).max_by(|&a, &b| m[a][col].abs().total_cmp(&m[b][col].abs()))?;
        if m[piv][col].abs() <= 1e-14 * scale {
            return None;
        }
        m.swap(col, piv);
        r.swap(col, piv);
        for row in col + 1..k {
            let f = m[row][col] / m[col][col];
            let (upper, lower) = m.split_at_mut(row);
            for (x, &pv) in lower[0][col..k].iter_mut().zip(&upper[col][col..k]) {
                *x -= f * pv;
            }
            r[row] -= f * r[col];
        }
    }
    let mut x = [0.0; NS];
    for row in (0..k).rev() {
        let s: f64 = (row + 1..k).map(|c| m[row][c] * x[c]).sum();
        x[row] = (r[row] - s) / m[row][row];
    }
    x[..k].iter().all(|v| v.is_finite()).then_some(x)
}

/// The one-step approximation for one object, with the slots it moves the estimate to (to
/// start that object's exact refit from).
struct Step {
    influence: Influence,
    at: [f64; NS],
}

/// The parameter shift of a step `dp` over the slots (ε in slot E), as an [`Influence`].
fn influence_of(
    index: usize,
    dp: &[f64; NS],
    shape: Shape,
    prec: Option<[[f64; 2]; 2]>,
) -> Influence {
    Influence {
        index,
        d_alpha: dp[A],
        d_beta: dp[B],
        d_beta2: (shape == Shape::Quadratic).then_some(dp[C]),
        d_gamma: (shape == Shape::Plane).then_some(dp[C]),
        d_eps: dp[E],
        shift_sigma: sigma_of(prec, dp[A], dp[B]),
        exact: false,
    }
}

/// Re-expresses derivatives over ε (slot E) as derivatives over u = ln ε, by the chain rule:
///
/// ```text
/// ∂f/∂u = ε f_ε,   ∂²f/∂x∂u = ε f_xε,   ∂²f/∂u² = ε² f_εε + ε f_ε
/// ```
///
/// A step in ln ε follows how −2 ln L bends in the scatter (for a Gaussian sample, −2 ln L in
/// ln V is N u + S e^(−u), much closer to its quadratic model than in ε); no-op when ε is held.
fn to_log_eps(d: &mut super::optimize::analytic::Derivs, eps: f64, free: &[usize]) {
    if !free.contains(&E) {
        return;
    }
    let ge = d.g[E];
    d.g[E] = eps * ge;
    for &x in free {
        if x != E {
            d.h[x][E] *= eps;
            d.h[E][x] = d.h[x][E];
        }
    }
    d.h[E][E] = eps * eps * d.h[E][E] + eps * ge;
}

/// The slots at the maximum of `fit`, the free slots (ε left out at its floor 0, as the
/// optimiser's active set holds it there) and −2 ln L's gradient and Hessian over them.
fn at_maximum<O: PerObject>(
    model: &O,
    fit: &Fit,
) -> Option<([f64; NS], Vec<usize>, super::optimize::analytic::Derivs)> {
    let p = model.slots_of_fit(fit);
    let free: Vec<usize> = model
        .slots()
        .into_iter()
        .filter(|&s| s != E || p[E] > 0.0)
        .collect();
    let mut total = model.derivs(&p, false, &free)?;
    to_log_eps(&mut total, p[E], &free);
    Some((p, free, total))
}

/// The change of ε for a step `du` in ln ε: ε (e^du − 1) (0 when ε is held at 0).
fn eps_change(eps: f64, du: f64) -> f64 {
    if eps > 0.0 { eps * du.exp_m1() } else { 0.0 }
}

/// The one-step leave-one-out shift of every object of `model` at the maximum of `fit`:
///
/// ```text
/// Δθ_(−i) = (H − H_i)⁻¹ (g_i − g)
/// ```
///
/// with g, H the gradient and Hessian of −2 ln L over the free slots at θ̂ (g ≈ 0 there; it is
/// kept so the step aims at the maximum of the sample without i, not at rounding), g_i, H_i
/// object i's own. When H − H_i is singular (an object the fit cannot do without) the step
/// falls back to the influence function H⁻¹ (g_i − g). The scatter's step is taken in ln ε
/// ([`to_log_eps`]), so ε cannot cross its floor. O(N p²); the objects are swept in parallel, each on its own, so the
/// result does not depend on the number of threads.
fn sweep<O: PerObject + Sync + Send>(model: &O, fit: &Fit, shape: Shape) -> Option<Vec<Step>> {
    let (p, free, total) = at_maximum(model, fit)?;
    let prec = ab_precision(fit);
    let k = free.len();
    let steps: Vec<Option<Step>> = (0..model.n_objects())
        .into_par_iter()
        .with_min_len(512)
        .map_init(
            || model.one(0),
            |one, i| {
                one.load(model, i);
                let mut d = one.derivs(&p, false, &free)?;
                to_log_eps(&mut d, p[E], &free);
                let mut m = [[0.0; NS]; NS];
                let mut full = [[0.0; NS]; NS];
                let mut r = [0.0; NS];
                for (a, &sa) in free.iter().enumerate() {
                    r[a] = d.g[sa] - total.g[sa];
                    for (b, &sb) in free.iter().enumerate() {
                        full[a][b] = total.h[sa][sb];
                        m[a][b] = total.h[sa][sb] - d.h[sa][sb];
                    }
                }
                let x = solve(k, m, r).or_else(|| solve(k, full, r))?;
                let mut dp = [0.0; NS];
                for (a, &sa) in free.iter().enumerate() {
                    dp[sa] = x[a];
                }
                dp[E] = eps_change(p[E], dp[E]);
                let mut at = p;
                for s in 0..NS {
                    at[s] += dp[s];
                }
                Some(Step {
                    influence: influence_of(i, &dp, shape, prec),
                    at,
                })
            },
        )
        .collect();
    steps.into_iter().collect()
}

/// The one-step approximation for every object of `points` at the maximum `full`, `None`
/// when `spec` has no per-object likelihood or the Hessian cannot be formed.
fn steps_at(points: &[Point], spec: &FitSpec, full: &Fit) -> Result<Option<Vec<Step>>, FitError> {
    if !has_one_step(spec) {
        return Ok(None);
    }
    Ok(match spec.method {
        Method::Structural => sweep(&structural::Model::new(points, spec)?, full, spec.shape),
        _ => sweep(&conditional::Model::new(points, spec)?, full, spec.shape),
    })
}

/// The one-step (influence-function) approximation of the leave-one-out shift of every
/// object, from one fit: no refits, every entry with `exact = false`.
///
/// # Model
/// ```text
/// f(θ) = −2 ln L = Σ_i f_i(θ),  g = ∇f(θ̂),  H = ∇²f(θ̂),  g_i, H_i object i's terms
/// Δθ_(−i) = θ̂(sample without i) − θ̂ ≈ (H − H_i)⁻¹ (g_i − g)
/// shift_sigma_i = √(Δᵀ C⁻¹ Δ),  Δ = (Δα, Δβ),  C the fit's (α, β) covariance
/// ```
/// θ over the free parameters: α, β, [β2|γ], ε (in ε, not ε²; held at 0 when the fit has it
/// there) and for the structural line the true-x mean μ and variance τ² as nuisance. α, ε in
/// dex; β dex/dex.
///
/// # Errors
/// The errors of [`super::fit`]; [`FitError::Unsupported`] when `spec` has no per-object
/// likelihood ([`has_one_step`]) or the Hessian of the fit cannot be formed.
///
/// # References
/// Cook & Weisberg 1982, *Residuals and Influence in Regression*, Chapman & Hall (the
/// one-step approximation; from memory); Hampel 1974, JASA 69, 383 (the influence function;
/// from memory); docs/methods.md §6.1.
pub fn approximate(points: &[Point], spec: &FitSpec) -> Result<Vec<Influence>, FitError> {
    let full = fit_params_only(points, spec)?;
    match steps_at(points, spec, &full)? {
        Some(steps) => Ok(steps.into_iter().map(|s| s.influence).collect()),
        None => Err(FitError::Unsupported {
            what: format!(
                "The one-step influence needs the conditional or the one-component structural straight-line likelihood, so for {} use the leave-one-out refits.",
                spec.method
            ),
        }),
    }
}

/// Differences of two parameter sets (a minus b), with the curvature or plane term when both
/// carry it.
fn difference(a: &Params, b: &Params) -> (f64, f64, Option<f64>, Option<f64>, f64) {
    (
        a.alpha - b.alpha,
        a.beta - b.beta,
        a.beta2.zip(b.beta2).map(|(x, y)| x - y),
        a.gamma.zip(b.gamma).map(|(x, y)| x - y),
        a.eps - b.eps,
    )
}

/// Object `i`'s shift from a refit without it.
fn exact(
    points: &[Point],
    spec: &FitSpec,
    full: &Fit,
    prec: Option<[[f64; 2]; 2]>,
    i: usize,
) -> Result<Influence, FitError> {
    let rest: Vec<Point> = points
        .iter()
        .enumerate()
        .filter(|(j, _)| *j != i)
        .map(|(_, p)| p.clone())
        .collect();
    let params = fit_params_only(&rest, spec)?.params;
    let (d_alpha, d_beta, d_beta2, d_gamma, d_eps) = difference(&params, &full.params);
    Ok(Influence {
        index: i,
        d_alpha,
        d_beta,
        d_beta2,
        d_gamma,
        d_eps,
        shift_sigma: sigma_of(prec, d_alpha, d_beta),
        exact: true,
    })
}

/// Positions (into `list`) of the `k` entries with the largest shift, largest first; ties go
/// to the lower position, so the choice does not depend on the sort.
fn top(list: &[Influence], k: usize) -> Vec<usize> {
    let mut order: Vec<usize> = (0..list.len()).collect();
    order.sort_by(|&a, &b| {
        list[b]
            .shift_sigma
            .total_cmp(&list[a].shift_sigma)
            .then(a.cmp(&b))
    });
    order.truncate(k);
    order
}

/// Every object's one-step shift, with the [`EXACT_TOP`] ranked highest replaced by refits
/// without them; `None` when the Hessian cannot be formed.
///
/// A refit here is Newton's method on −2 ln L without the object, f − f_i (the sample's
/// derivatives less the object's, so no model is rebuilt), from the one-step estimate and
/// with the scatter in ln ε, iterated until the step is below 10⁻⁴ standard errors; from a
/// start that close it converges in two or three steps, and being full Newton steps they do
/// not stall on the rounding noise of a large sum. When it does not converge (or ε sits at 0)
/// the object is refitted from scratch; a refit that fails keeps the approximation.
fn ranked_and_refitted<O: PerObject + Sync + Send>(
    model: &O,
    points: &[Point],
    spec: &FitSpec,
    full: &Fit,
) -> Option<Vec<Influence>> {
    let steps = sweep(model, full, spec.shape)?;
    let prec = ab_precision(full);
    let mut list: Vec<Influence> = steps.iter().map(|s| s.influence.clone()).collect();
    let chosen = top(&list, EXACT_TOP);
    let p0 = model.slots_of_fit(full);
    let free: Vec<usize> = model
        .slots()
        .into_iter()
        .filter(|&s| s != E || p0[E] > 0.0)
        .collect();
    let refits: Vec<(usize, Option<Influence>)> = chosen
        .par_iter()
        .map(|&i| {
            let by_newton = (p0[E] > 0.0)
                .then(|| newton_without(model, i, &steps[i].at, &free))
                .flatten()
                .map(|p| {
                    let params = Params {
                        alpha: p[A],
                        beta: p[B],
                        beta2: (spec.shape == Shape::Quadratic).then_some(p[C]),
                        gamma: (spec.shape == Shape::Plane).then_some(p[C]),
                        eps: p[E],
                    };
                    let (d_alpha, d_beta, d_beta2, d_gamma, d_eps) =
                        difference(&params, &full.params);
                    Influence {
                        index: i,
                        d_alpha,
                        d_beta,
                        d_beta2,
                        d_gamma,
                        d_eps,
                        shift_sigma: sigma_of(prec, d_alpha, d_beta),
                        exact: true,
                    }
                });
            let r = by_newton.or_else(|| exact(points, spec, full, prec, i).ok());
            (i, r)
        })
        .collect();
    for (i, r) in refits {
        if let Some(r) = r {
            list[i] = r;
        }
    }
    Some(list)
}

/// The maximum of −2 ln L without object `i` by Newton's method from `start` (ε in slot E,
/// stepped in ln ε); `None` if it has not converged (a step below [`LAST_STEP_REL`] standard
/// errors, which is taken) within
/// [`NEWTON_WITHOUT_STEPS`] steps.
fn newton_without<O: PerObject>(
    model: &O,
    i: usize,
    start: &[f64; NS],
    free: &[usize],
) -> Option<[f64; NS]> {
    let mut one = model.one(i);
    one.load(model, i);
    let k = free.len();
    let mut p = *start;
    for _ in 0..NEWTON_WITHOUT_STEPS {
        let mut d = model.derivs(&p, false, free)?;
        let di = one.derivs(&p, false, free)?;
        for &a in free {
            d.g[a] -= di.g[a];
            for &b in free {
                d.h[a][b] -= di.h[a][b];
            }
        }
        to_log_eps(&mut d, p[E], free);
        let mut m = [[0.0; NS]; NS];
        let mut r = [0.0; NS];
        for (a, &sa) in free.iter().enumerate() {
            r[a] = -d.g[sa];
            for (b, &sb) in free.iter().enumerate() {
                m[a][b] = d.h[sa][sb];
            }
        }
        let x = solve(k, m, r)?;
        let mut done = true;
        for (a, &sa) in free.iter().enumerate() {
            // −2 ln L's Hessian is twice the inverse covariance: σ_a ≈ √(2 / H_aa).
            let sd = (2.0 / m[a][a].abs().max(f64::MIN_POSITIVE)).sqrt();
            done &= x[a].abs() <= LAST_STEP_REL * sd;
            if sa == E {
                p[E] *= x[a].exp();
            } else {
                p[sa] += x[a];
            }
        }
        if done {
            return Some(p);
        }
    }
    None
}

/// Newton steps [`newton_without`] may take: from a one-step start two or three suffice.
const NEWTON_WITHOUT_STEPS: usize = 8;

/// A Newton step below this many standard errors is the last: Newton's method converges
/// quadratically, so the error left after a step of s standard errors is of the order of s²
/// (here about 10⁻⁸ σ, far below anything shown), and confirming it with one more O(N) sweep
/// would cost a third of the refit.
const LAST_STEP_REL: f64 = 1e-4;

/// The body of [`super::leave_one_out`] (see there).
pub(super) fn leave_one_out(points: &[Point], spec: &FitSpec) -> Result<Vec<Influence>, FitError> {
    let full = fit_params_only(points, spec)?;
    let prec = ab_precision(&full);
    if points.len() <= EXACT_MAX_N {
        return (0..points.len())
            .into_par_iter()
            .map(|i| exact(points, spec, &full, prec, i))
            .collect();
    }
    if let Some(list) = plane_ranked_and_refitted(points, spec, &full, prec)? {
        return Ok(list);
    }
    let analytic = match spec.method {
        _ if !has_one_step(spec) => None,
        Method::Structural => {
            ranked_and_refitted(&structural::Model::new(points, spec)?, points, spec, &full)
        }
        _ => ranked_and_refitted(&conditional::Model::new(points, spec)?, points, spec, &full),
    };
    if let Some(list) = analytic {
        return Ok(list);
    }
    // No per-object likelihood: rank by the proxy's one-step shifts, refit the top exactly
    // and list only those.
    let proxy = proxy_spec(spec);
    let proxy_fit = fit_params_only(points, &proxy)?;
    let ranked = steps_at(points, &proxy, &proxy_fit)?.ok_or_else(|| FitError::Unsupported {
        what: "The ranking fit's Hessian could not be formed, so the influence of each object is not available; use a smaller sample.".to_owned(),
    })?;
    let ranked: Vec<Influence> = ranked.into_iter().map(|s| s.influence).collect();
    let mut chosen = top(&ranked, EXACT_TOP);
    chosen.sort_unstable();
    chosen
        .par_iter()
        .map(|&i| exact(points, spec, &full, prec, i))
        .collect()
}

/// The structural plane with one Gaussian x model (whose likelihood has per-object analytic
/// gradients but not the per-object Hessians of [`PerObject`]): every object's one-step
/// shift, per-object Hessians by central differences, and the [`EXACT_TOP`] ranked highest
/// replaced by chord refits from their one-step estimates ([`structural::PlaneLeaveOneOut`]),
/// or by refits from scratch where the chord does not converge. `None` for other
/// specifications, or where ε sits at 0 or a step cannot be formed: the caller then ranks by
/// the proxy likelihood.
fn plane_ranked_and_refitted(
    points: &[Point],
    spec: &FitSpec,
    full: &Fit,
    prec: Option<[[f64; 2]; 2]>,
) -> Result<Option<Vec<Influence>>, FitError> {
    if !(spec.method == Method::Structural && spec.shape == Shape::Plane && spec.components == 1) {
        return Ok(None);
    }
    let model = structural::Model::new(points, spec)?;
    let Some(loo) = structural::PlaneLeaveOneOut::new(&model, &model.start(full)) else {
        return Ok(None);
    };
    let hat = loo.relation_at_maximum();
    let entry = |i: usize, r: [f64; 4], exact: bool| {
        let (d_alpha, d_beta) = (r[0] - hat[0], r[1] - hat[1]);
        Influence {
            index: i,
            d_alpha,
            d_beta,
            d_beta2: None,
            d_gamma: Some(r[2] - hat[2]),
            d_eps: r[3] - hat[3],
            shift_sigma: sigma_of(prec, d_alpha, d_beta),
            exact,
        }
    };
    let Some(starts) = (0..points.len())
        .into_par_iter()
        .map(|i| loo.one_step(i))
        .collect::<Option<Vec<Vec<f64>>>>()
    else {
        return Ok(None);
    };
    let mut list: Vec<Influence> = starts
        .iter()
        .enumerate()
        .map(|(i, u)| entry(i, loo.relation(u), false))
        .collect();
    let refits: Vec<(usize, Option<Influence>)> = top(&list, EXACT_TOP)
        .par_iter()
        .map(|&i| {
            let r = match loo.refit(i, &starts[i]) {
                Some(u) => Some(entry(i, loo.relation(&u), true)),
                None => exact(points, spec, full, prec, i).ok(),
            };
            (i, r)
        })
        .collect();
    for (i, r) in refits {
        if let Some(r) = r {
            list[i] = r;
        }
    }
    Ok(Some(list))
}

/// How the relation would move if `new` joined `points`: the one-step approximation above
/// [`EXACT_MAX_N`] objects for likelihoods with per-object derivatives ([`has_one_step`]), a
/// refit otherwise.
///
/// # Model
/// ```text
/// f(θ) = −2 ln L of the sample,  f_new the new object's term,  all at θ̂ = the maximum of `fit`
/// Δθ = θ̂(sample + new) − θ̂ ≈ −(H + H_new)⁻¹ (g + g_new)            (g ≈ 0 at θ̂)
/// shift_sigma = √(Δᵀ C⁻¹ Δ),  Δ = (Δα, Δβ),  C the fit's (α, β) covariance
/// ```
/// over the free parameters as in [`approximate`] (ε held at 0 when the fit has it there). α,
/// ε in dex; β dex/dex. The sample's g and H are the same for every new object: a caller that
/// asks for many keeps them with [`AddingBase`].
///
/// # Errors
/// [`FitError::InvalidSetting`] (setting `fit`) when `fit` was not made with `spec`; the
/// input errors of [`super::fit`] for the sample with `new` (its row is the last); the
/// errors of a refit.
///
/// # References
/// Cook & Weisberg 1982, *Residuals and Influence in Regression*, Chapman & Hall (from
/// memory); docs/methods.md §6.1.
pub fn adding_one(
    points: &[Point],
    spec: &FitSpec,
    fit: &Fit,
    new: &Point,
) -> Result<Shift, FitError> {
    AddingBase::new(points, spec, fit)?.shift(points, new)
}

/// The sample's side of [`adding_one`] for one fit: the gradient and Hessian of its −2 ln L
/// at the maximum, so that the one-step change for each new object costs one object's terms
/// (O(1)) instead of a pass over the sample.
#[derive(Clone, Debug)]
pub struct AddingBase {
    spec: FitSpec,
    fit: Fit,
    prec: Option<[[f64; 2]; 2]>,
    /// `None` where [`adding_one`] refits: at most [`EXACT_MAX_N`] objects, no per-object
    /// likelihood, or a structural fit without its x model.
    step: Option<StepBase>,
}

/// The slots at the maximum, the free slots, the sample's derivatives there (ε stepped in
/// ln ε) and a one-object model to evaluate a new object's terms with.
#[derive(Clone, Debug)]
struct StepBase {
    p: [f64; NS],
    free: Vec<usize>,
    total: super::optimize::analytic::Derivs,
    one: OneObject,
}

#[derive(Clone, Debug)]
enum OneObject {
    Structural(structural::Model),
    Conditional(conditional::Model),
}

impl AddingBase {
    /// The sample's side for `fit` of `points` (one pass over the sample).
    ///
    /// # Errors
    /// [`FitError::InvalidSetting`] (setting `fit`) when `fit` was not made with `spec`; the
    /// input errors of [`super::fit`] for `points`.
    pub fn new(points: &[Point], spec: &FitSpec, fit: &Fit) -> Result<AddingBase, FitError> {
        if fit.spec != *spec {
            return Err(FitError::InvalidSetting {
                setting: "fit",
                reason: "Pass the fit made of the same sample with the same settings.".to_owned(),
            });
        }
        let one_step = points.len() > EXACT_MAX_N
            && has_one_step(spec)
            && (spec.method != Method::Structural || fit.x_model.is_some());
        let step = if one_step {
            match spec.method {
                Method::Structural => {
                    let model = structural::Model::new(points, spec)?;
                    at_maximum(&model, fit).map(|(p, free, total)| StepBase {
                        p,
                        free,
                        total,
                        one: OneObject::Structural(model.one(0)),
                    })
                }
                _ => {
                    let model = conditional::Model::new(points, spec)?;
                    at_maximum(&model, fit).map(|(p, free, total)| StepBase {
                        p,
                        free,
                        total,
                        one: OneObject::Conditional(model.one(0)),
                    })
                }
            }
        } else {
            None
        };
        Ok(AddingBase {
            spec: spec.clone(),
            fit: fit.clone(),
            prec: ab_precision(fit),
            step,
        })
    }

    /// How the relation would move if `new` joined `points` (the sample this base was made
    /// from), as [`adding_one`]: by one step where the base has the sample's derivatives, by
    /// a refit otherwise or when the step cannot be formed.
    ///
    /// # Errors
    /// The input errors of [`super::fit`] for `new`; the errors of a refit.
    pub fn shift(&self, points: &[Point], new: &Point) -> Result<Shift, FitError> {
        let step = match &self.step {
            Some(base) => {
                let row = super::types::prepare_rows(std::slice::from_ref(new), &self.spec)
                    .map_err(|e| renumbered(e, points.len()))?;
                base.newton_step(row)
            }
            None => None,
        };
        if let Some(dp) = step {
            return Ok(Shift {
                d_alpha: dp[A],
                d_beta: dp[B],
                d_beta2: (self.spec.shape == Shape::Quadratic).then_some(dp[C]),
                d_gamma: (self.spec.shape == Shape::Plane).then_some(dp[C]),
                d_eps: dp[E],
                shift_sigma: sigma_of(self.prec, dp[A], dp[B]),
                exact: false,
            });
        }
        let mut all = points.to_vec();
        all.push(new.clone());
        let refitted = fit_params_only(&all, &self.spec)?;
        let (d_alpha, d_beta, d_beta2, d_gamma, d_eps) =
            difference(&refitted.params, &self.fit.params);
        Ok(Shift {
            d_alpha,
            d_beta,
            d_beta2,
            d_gamma,
            d_eps,
            shift_sigma: sigma_of(self.prec, d_alpha, d_beta),
            exact: true,
        })
    }
}

/// An input error of the one-row sample `[new]` as the error of the sample with `new` as its
/// last row (row `n`), as a refit of that sample would report it.
fn renumbered(e: FitError, n: usize) -> FitError {
    match e {
        FitError::NonFiniteInput { column, .. } => FitError::NonFiniteInput { row: n, column },
        FitError::NegativeError { column, .. } => FitError::NegativeError { row: n, column },
        FitError::InvalidSetting { setting, reason } => FitError::InvalidSetting {
            setting,
            reason: reason.replacen("Row 0 ", &format!("Row {n} "), 1),
        },
        other => other,
    }
}

impl StepBase {
    /// One Newton step of the sample with the object of `row` from the maximum:
    /// −(H + H_new)⁻¹ (g + g_new) over the free slots, ε kept from crossing 0.
    fn newton_step(&self, row: super::types::Data) -> Option<[f64; NS]> {
        let mut d = match &self.one {
            OneObject::Structural(m) => {
                let mut m = m.clone();
                m.set_row(row);
                m.derivs(&self.p, false, &self.free)?
            }
            OneObject::Conditional(m) => {
                let mut m = m.clone();
                m.set_row(row);
                m.derivs(&self.p, false, &self.free)?
            }
        };
        to_log_eps(&mut d, self.p[E], &self.free);
        let k = self.free.len();
        let mut m = [[0.0; NS]; NS];
        let mut r = [0.0; NS];
        for (a, &sa) in self.free.iter().enumerate() {
            r[a] = -(self.total.g[sa] + d.g[sa]);
            for (b, &sb) in self.free.iter().enumerate() {
                m[a][b] = self.total.h[sa][sb] + d.h[sa][sb];
            }
        }
        let x = solve(k, m, r)?;
        let mut dp = [0.0; NS];
        for (a, &sa) in self.free.iter().enumerate() {
            dp[sa] = x[a];
        }
        dp[E] = eps_change(self.p[E], dp[E]);
        Some(dp)
    }
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::{Sim, simulate};
    use super::*;

    /// Σ_i of the one-object models' gradients and Hessians equals the sample's (the
    /// likelihood is a sum over objects), checked at a point away from the maximum.
    fn per_object_terms_sum_to_the_sample<O: PerObject>(model: &O, p: &[f64; NS]) {
        let act = model.slots();
        let total = model.derivs(p, false, &act).expect("derivs");
        let mut g = [0.0; NS];
        let mut h = [[0.0; NS]; NS];
        let mut one = model.one(0);
        for i in 0..model.n_objects() {
            one.load(model, i);
            let d = one.derivs(p, false, &act).expect("derivs");
            for &a in &act {
                g[a] += d.g[a];
                for &b in &act {
                    h[a][b] += d.h[a][b];
                }
            }
        }
        for &a in &act {
            assert!(
                (g[a] - total.g[a]).abs() < 1e-8 * (1.0 + total.g[a].abs()),
                "g {a}"
            );
            for &b in &act {
                let want = total.h[a][b];
                assert!(
                    (h[a][b] - want).abs() < 1e-8 * (1.0 + want.abs()),
                    "h {a} {b}"
                );
            }
        }
    }

    #[test]
    fn per_object_derivatives_sum_to_the_sample_derivatives() {
        let s = Sim {
            n: 60,
            seed: 71,
            limit_fraction: 0.2,
            ..Sim::default()
        };
        let mut pts = simulate(&s);
        for (i, p) in pts.iter_mut().enumerate() {
            p.xy_cov = if i % 3 == 0 {
                0.3 * p.x_err * p.y_err
            } else {
                0.0
            };
            p.x2 = Some(11.0 + 0.1 * (i as f64 % 7.0));
            p.x2_err = 0.05;
        }
        let spec = FitSpec::new(Method::Structural, s.pivot);
        let m = structural::Model::new(&pts, &spec).expect("model");
        let mut p = [0.0; NS];
        p[A] = 8.2;
        p[B] = 4.6;
        p[E] = 0.25;
        p[super::super::optimize::analytic::M] = 0.01;
        p[super::super::optimize::analytic::T] = 0.015;
        per_object_terms_sum_to_the_sample(&m, &p);
        for shape in [Shape::Line, Shape::Quadratic, Shape::Plane] {
            let spec = FitSpec::new(Method::Conditional, s.pivot)
                .with_shape(shape)
                .and_then(|sp| sp.with_pivot2(11.0))
                .expect("spec");
            let m = conditional::Model::new(&pts, &spec).expect("model");
            let mut q = p;
            q[C] = 0.7;
            per_object_terms_sum_to_the_sample(&m, &q);
        }
    }

    #[test]
    fn the_small_solver_solves_a_pivoting_system() {
        // [[0, 2, 1], [1, 1, 0], [3, 0, 1]] x = (7, 3, 6) has x = (1, 2, 3) (computed by hand);
        // the zero in the first pivot forces a row swap.
        let mut m = [[0.0; NS]; NS];
        m[0][..3].copy_from_slice(&[0.0, 2.0, 1.0]);
        m[1][..3].copy_from_slice(&[1.0, 1.0, 0.0]);
        m[2][..3].copy_from_slice(&[3.0, 0.0, 1.0]);
        let mut r = [0.0; NS];
        r[..3].copy_from_slice(&[7.0, 3.0, 6.0]);
        let x = solve(3, m, r).expect("nonsingular");
        for (got, want) in x[..3].iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-12, "{x:?}");
        }
        let mut singular = m;
        singular[2] = singular[0];
        assert!(solve(3, singular, r).is_none());
    }
}
