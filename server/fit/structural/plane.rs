//! The structural plane with a one-Gaussian model of the true (x, x2) (K = 1): an analytic
//! gradient of −2 ln L and a Newton maximiser built on it.
//!
//! Per object the observed (x, x2, y) is trivariate normal (docs/methods.md §2.7); with the
//! pivoted means μ = (μ1 − x0, μ2 − x02), Σ_ξ = [[τ1², ρ τ1 τ2], [ρ τ1 τ2, τ2²]], the error
//! blocks E_x = [[σ_x², σ_xx2], [σ_xx2, σ_x2²]] and e_y = (σ_xy, σ_x2y), b = (β, γ):
//!
//! ```text
//! A = Σ_ξ + E_x,  δx = (d, d2) − μ,  w = A⁻¹ δx,  c = Σ_ξ b + e_y,  u = A⁻¹ c,  p = b − u
//! m = α + bᵀμ + cᵀw (+ δ for the offset group),   S = bᵀΣ_ξ b + ε² + σ_y² − cᵀu
//! −2 ln L_i = 2 ln 2π + ln det A + δxᵀw + f_y(y − m, S)
//! ```
//! f_y is the Gaussian term of a detection or −2 ln Φ((y − m)/√S) of an upper limit
//! ([`fy_terms`]). Its derivatives, with f_m = ∂f_y/∂m and f_S = ∂f_y/∂S:
//!
//! ```text
//! ∂/∂α = f_m,  ∂/∂δ = f_m g,  ∂/∂ε² = f_S,  ∂/∂μ = −2w + f_m p
//! ∂/∂b = f_m (μ + Σ_ξ w) + 2 f_S Σ_ξ p
//! ∂/∂Σ_ξ (symmetric matrix) = A⁻¹ − w wᵀ + f_m sym(p wᵀ) + f_S p pᵀ
//! ```
//! (d ln det A = tr(A⁻¹ dA), d(δxᵀA⁻¹δx) = −wᵀ dA w, dm = pᵀ dΣ_ξ w, dS = pᵀ dΣ_ξ p), then the
//! chain rule to the free parametrisation of [`Objective::theta_to_free`]: ε = |u_ε|
//! (ε² = u_ε², smooth through 0), τ_j = e^{u_j}, ρ = tanh u_ρ.
//!
//! x, x2, y, μ in log10 units; σ, τ, ε in dex; covariances in dex².

use nalgebra::{DMatrix, DVector};

use super::super::optimize::{MlResult, Objective, Sum, invert_spd};
use super::super::special::{LN_2PI, fy_terms, ln_norm_cdf};
use super::super::tolerance;
use super::{Model, Shape};

/// Newton iterations before the maximiser gives up (and the simplex path takes over): on the
/// simulated planes of the tests it converges in 3 steps from the start, each costing 2 × 9
/// gradients for the Hessian, so a run that has not converged by 40 should not delay the
/// fall-back further.
const MAX_ITERATIONS: u64 = 40;

/// Newton stops when the predicted decrease of −2 ln L, gᵀH⁻¹g/2, is below this (in units of
/// −2 ln L; far below the 1e-6 to which the simplex path's maximum is known).
const DECREMENT_TOL: f64 = 1e-11;

/// Finite-difference step of the Hessian in each free parameter, as a fraction of its scale
/// ([`Objective::free_steps`]): central differences of an analytic gradient have truncation
/// error O(h²) and rounding error O(ε_machine/h), balanced near 1e-5.
const HESSIAN_STEP: f64 = 1e-5;

/// Whether the plane maximiser applies: a plane with a one-Gaussian x model.
pub(super) fn applies(model: &Model) -> bool {
    model.shape == Shape::Plane && model.k == 1
}

/// The quantities every object's term shares at one point `u` of the free parametrisation.
struct At {
    beta: f64,
    gamma: f64,
    ue: f64,
    e2: f64,
    mu1: f64,
    mu2: f64,
    t1: f64,
    t2: f64,
    rho: f64,
    delta: f64,
    s11: f64,
    s22: f64,
    s12: f64,
    base: f64,
    bsb: f64,
}

impl At {
    fn new(model: &Model, u: &[f64]) -> At {
        let (alpha, beta, gamma, ue) = (u[0], u[1], u[2], u[3]);
        let (mu1, t1, mu2, t2, rho) = (
            u[4] - model.pivot,
            u[5].exp(),
            u[6] - model.pivot2,
            u[7].exp(),
            u[8].tanh(),
        );
        let delta = if model.group.is_some() { u[9] } else { 0.0 };
        let (s11, s22, s12) = (t1 * t1, t2 * t2, rho * t1 * t2);
        At {
            beta,
            gamma,
            ue,
            e2: ue * ue,
            mu1,
            mu2,
            t1,
            t2,
            rho,
            delta,
            s11,
            s22,
            s12,
            base: alpha + beta * mu1 + gamma * mu2,
            bsb: beta * beta * s11 + 2.0 * beta * gamma * s12 + gamma * gamma * s22,
        }
    }

    /// Object `i`'s term of −2 ln L and its gradient over the natural parameters (α, β, γ, ε²,
    /// μ1, μ2, s11, s12, s22, δ); `None` outside the support.
    #[inline]
    fn term(&self, model: &Model, i: usize) -> Option<(f64, [f64; 10])> {
        let dt = &model.data;
        let gi = match &model.group {
            Some(gr) if gr[i] => 1.0,
            _ => 0.0,
        };
        let (s11, s22, s12) = (self.s11, self.s22, self.s12);
        let (beta, gamma) = (self.beta, self.gamma);
        let (a11, a12, a22) = (s11 + dt.vx[i], s12 + dt.cxx2[i], s22 + dt.vx2[i]);
        let det = a11 * a22 - a12 * a12;
        if det.is_nan() || det <= 0.0 {
            return None;
        }
        let id = 1.0 / det;
        let (i11, i12, i22) = (a22 * id, -a12 * id, a11 * id);
        let (dx1, dx2) = (dt.d[i] - self.mu1, dt.d2[i] - self.mu2);
        let (w1, w2) = (i11 * dx1 + i12 * dx2, i12 * dx1 + i22 * dx2);
        let c1 = s11 * beta + s12 * gamma + dt.cxy[i];
        let c2 = s12 * beta + s22 * gamma + dt.cx2y[i];
        let (v1, v2) = (i11 * c1 + i12 * c2, i12 * c1 + i22 * c2);
        let m = self.base + self.delta * gi + c1 * w1 + c2 * w2;
        let s = self.bsb + self.e2 + dt.vy[i] - (c1 * v1 + c2 * v2);
        if s.is_nan() || s <= 0.0 {
            return None;
        }
        let r = dt.y[i] - m;
        let lim = dt.lim[i];
        let t = fy_terms(r, s, lim);
        let fy = if lim {
            -2.0 * ln_norm_cdf(r / s.sqrt())
        } else {
            t.f
        };
        let f = 2.0 * LN_2PI + det.ln() + dx1 * w1 + dx2 * w2 + fy;
        let (p1, p2) = (beta - v1, gamma - v2);
        // Σ_ξ w and Σ_ξ p.
        let (sw1, sw2) = (s11 * w1 + s12 * w2, s12 * w1 + s22 * w2);
        let (sp1, sp2) = (s11 * p1 + s12 * p2, s12 * p1 + s22 * p2);
        let (fm, fs) = (t.fm, t.fv);
        Some((
            f,
            [
                fm,
                fm * (self.mu1 + sw1) + 2.0 * fs * sp1,
                fm * (self.mu2 + sw2) + 2.0 * fs * sp2,
                fs,
                -2.0 * w1 + fm * p1,
                -2.0 * w2 + fm * p2,
                i11 - w1 * w1 + fm * p1 * w1 + fs * p1 * p1,
                // s12 stands in both off-diagonal places of Σ_ξ.
                2.0 * (i12 - w1 * w2) + fm * (p1 * w2 + p2 * w1) + 2.0 * fs * p1 * p2,
                i22 - w2 * w2 + fm * p2 * w2 + fs * p2 * p2,
                fm * gi,
            ],
        ))
    }

    /// A natural-parameter gradient `g` (of one object or of the sample) by the chain rule in
    /// the free parametrisation, into `out` (the length of `u`).
    fn to_free(&self, g: &[f64; 10], out: &mut [f64]) {
        out[0] = g[0];
        out[1] = g[1];
        out[2] = g[2];
        out[3] = 2.0 * self.ue * g[3];
        out[4] = g[4];
        out[5] = 2.0 * self.s11 * g[6] + self.s12 * g[7];
        out[6] = g[5];
        out[7] = 2.0 * self.s22 * g[8] + self.s12 * g[7];
        out[8] = self.t1 * self.t2 * (1.0 - self.rho * self.rho) * g[7];
        if out.len() > 9 {
            out[9] = g[9];
        }
    }
}

/// −2 ln L and its gradient in the free parametrisation `u` (θ layout: α, β, γ, u_ε, μ1,
/// ln τ1, μ2, ln τ2, atanh ρ, [δ]); `None` outside the support or if a term is not finite.
pub(super) fn neg2_gradient(model: &Model, u: &[f64]) -> Option<(f64, Vec<f64>)> {
    let at = At::new(model, u);
    let mut f = Sum::default();
    // Natural-parameter gradient: α, β, γ, ε², μ1, μ2, s11, s12, s22, δ.
    let mut g = [0.0_f64; 10];
    for i in 0..model.data.n() {
        let (fi, gi) = at.term(model, i)?;
        f.add(fi);
        for (a, b) in g.iter_mut().zip(gi) {
            *a += b;
        }
    }
    let total = f.total();
    if !total.is_finite() || g.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let mut out = vec![0.0; u.len()];
    at.to_free(&g, &mut out);
    Some((total, out))
}

/// Object `i`'s term's gradient in the free parametrisation at `u`.
fn object_gradient(model: &Model, u: &[f64], i: usize) -> Option<Vec<f64>> {
    let at = At::new(model, u);
    let (_, g) = at.term(model, i)?;
    let mut out = vec![0.0; u.len()];
    at.to_free(&g, &mut out);
    out.iter().all(|v| v.is_finite()).then_some(out)
}

/// Central-difference Hessian of −2 ln L in `u` from the analytic gradient, symmetrised.
fn hessian(model: &Model, u: &[f64], h: &[f64]) -> Option<DMatrix<f64>> {
    let n = u.len();
    let mut m = DMatrix::zeros(n, n);
    let mut p = u.to_vec();
    for j in 0..n {
        p[j] = u[j] + h[j];
        let (_, gp) = neg2_gradient(model, &p)?;
        p[j] = u[j] - h[j];
        let (_, gm) = neg2_gradient(model, &p)?;
        p[j] = u[j];
        for i in 0..n {
            m[(i, j)] = (gp[i] - gm[i]) / (2.0 * h[j]);
        }
    }
    Some(0.5 * (&m + m.transpose()))
}

/// Leaving one object out of a K = 1 structural plane, from the fit of the whole sample
/// (docs/methods.md §6.1): the one-step (influence-function) shift of every object, and the
/// exact maximum without an object by the chord method.
///
/// # Model
/// ```text
/// f(u) = −2 ln L = Σ_i f_i(u) in the free parametrisation u,  û the maximum,
/// g = ∇f(û) (≈ 0),  H = ∇²f(û),  g_i, H_i object i's terms (H, H_i by central differences
/// of the analytic gradients, steps 1e-5 of each parameter's scale)
/// one step:  u_(−i) ≈ û + (H − H_i)⁻¹ (g_i − g)
/// chord:     u ← u − (H − H_i)⁻¹ (∇f(u) − ∇f_i(u)),  until every step is below 10⁻⁴ of the
///            parameter's standard error √((H/2)⁻¹)_aa
/// ```
/// The chord method (Newton with the Hessian held at û) converges linearly, at a rate of the
/// order of the shift in units of the errors, to the same point as a refit: each step costs
/// one gradient of the sample, where a Newton step costs 19.
///
/// # References
/// Cook & Weisberg 1982, *Residuals and Influence in Regression*, Chapman & Hall (the
/// one-step approximation; from memory); Kelley 1995, *Iterative Methods for Linear and
/// Nonlinear Equations*, SIAM, §5.4 (the chord method; from memory).
pub(crate) struct LeaveOneOut<'a> {
    model: &'a Model,
    /// û and θ̂.
    u: Vec<f64>,
    theta: Vec<f64>,
    /// ∇f(û) and ∇²f(û).
    g: DVector<f64>,
    hess: DMatrix<f64>,
    /// The parameter points of the central differences: (û + h_j e_j, û − h_j e_j) per j.
    around: Vec<(At, At)>,
    h: Vec<f64>,
    /// Standard errors in u.
    sd: Vec<f64>,
}

/// Chord steps [`LeaveOneOut::refit`] takes before giving up (a refit from scratch follows).
const CHORD_STEPS: usize = 30;

/// A chord step below this many standard errors is the last (as for the line's refits).
const CHORD_LAST_STEP_REL: f64 = 1e-4;

impl<'a> LeaveOneOut<'a> {
    /// From the maximum `theta_hat` of the whole sample; `None` when the model is not a K = 1
    /// plane without offset, ε is on its 0 boundary (the free parametrisation is not smooth
    /// there), or the Hessian is not positive definite.
    pub(crate) fn new(model: &'a Model, theta_hat: &[f64]) -> Option<LeaveOneOut<'a>> {
        if !applies(model) || model.group.is_some() || !model.in_support(theta_hat) {
            return None;
        }
        let ei = model.eps_index();
        let eps_scale = model.typical(theta_hat)[ei].abs().max(f64::MIN_POSITIVE);
        if theta_hat[ei] < tolerance::EPS_BOUNDARY_REL * eps_scale {
            return None;
        }
        let u = model.theta_to_free(theta_hat);
        let h: Vec<f64> = model
            .free_steps(theta_hat)
            .iter()
            .map(|s| HESSIAN_STEP * s.abs().max(1e-3))
            .collect();
        let (_, g) = neg2_gradient(model, &u)?;
        let hess = hessian(model, &u, &h)?;
        let cov = invert_spd(&(0.5 * &hess))?;
        let sd = (0..u.len()).map(|a| cov[(a, a)].max(0.0).sqrt()).collect();
        let around = (0..u.len())
            .map(|j| {
                let mut p = u.clone();
                p[j] = u[j] + h[j];
                let plus = At::new(model, &p);
                p[j] = u[j] - h[j];
                (plus, At::new(model, &p))
            })
            .collect();
        Some(LeaveOneOut {
            model,
            theta: theta_hat.to_vec(),
            u,
            g: DVector::from_vec(g),
            hess,
            around,
            h,
            sd,
        })
    }

    /// Object `i`'s Hessian term H_i at û (central differences of its analytic gradient).
    fn object_hessian(&self, i: usize) -> Option<DMatrix<f64>> {
        let n = self.u.len();
        let mut m = DMatrix::zeros(n, n);
        let (mut gp, mut gm) = (vec![0.0; n], vec![0.0; n]);
        for (j, (plus, minus)) in self.around.iter().enumerate() {
            plus.to_free(&plus.term(self.model, i)?.1, &mut gp);
            minus.to_free(&minus.term(self.model, i)?.1, &mut gm);
            for a in 0..n {
                m[(a, j)] = (gp[a] - gm[a]) / (2.0 * self.h[j]);
            }
        }
        Some(0.5 * (&m + m.transpose()))
    }

    /// The free parameters of the one-step estimate without object `i`.
    pub(crate) fn one_step(&self, i: usize) -> Option<Vec<f64>> {
        let gi = DVector::from_vec(object_gradient(self.model, &self.u, i)?);
        let m = &self.hess - self.object_hessian(i)?;
        let step = m.lu().solve(&(gi - &self.g))?;
        step.iter()
            .all(|v| v.is_finite())
            .then(|| self.u.iter().zip(step.iter()).map(|(a, b)| a + b).collect())
    }

    /// The maximum without object `i` by the chord method from `start` (free parameters, e.g.
    /// [`LeaveOneOut::one_step`]'s); `None` if it has not converged in [`CHORD_STEPS`].
    pub(crate) fn refit(&self, i: usize, start: &[f64]) -> Option<Vec<f64>> {
        let m = (&self.hess - self.object_hessian(i)?).lu();
        let mut u = start.to_vec();
        for _ in 0..CHORD_STEPS {
            let (_, g) = neg2_gradient(self.model, &u)?;
            let gi = object_gradient(self.model, &u, i)?;
            let r = DVector::from_iterator(u.len(), g.iter().zip(&gi).map(|(a, b)| a - b));
            let x = m.solve(&r)?;
            let mut done = true;
            for a in 0..u.len() {
                if !x[a].is_finite() {
                    return None;
                }
                done &= x[a].abs() <= CHORD_LAST_STEP_REL * self.sd[a];
                u[a] -= x[a];
            }
            if done {
                return Some(u);
            }
        }
        None
    }

    /// The relation parameters (α, β, γ, ε) at free parameters `u` (ε = |u_ε|).
    pub(crate) fn relation(&self, u: &[f64]) -> [f64; 4] {
        let mut t = vec![0.0; u.len()];
        self.model.free_to_theta(u, &mut t);
        [t[0], t[1], t[2], t[3]]
    }

    /// The relation parameters of the whole sample's maximum.
    pub(crate) fn relation_at_maximum(&self) -> [f64; 4] {
        [self.theta[0], self.theta[1], self.theta[2], self.theta[3]]
    }
}

/// Maximises the K = 1 plane from `theta0` by Newton's method in the free parametrisation,
/// with a Levenberg shift when the Hessian is not positive definite and a halving line
/// search; `None` (the simplex path takes over) when it does not converge, when ε ends on its
/// 0 boundary, or when the Hessian at the maximum is not positive definite.
///
/// # Model
/// ```text
/// u ← u − λ (H + ν I)⁻¹ g,  g, H: gradient and Hessian of −2 ln L in u,
/// λ ∈ {1, ½, ¼, …} until −2 ln L decreases; stop when gᵀ(H + νI)⁻¹g / 2 < 1e-11
/// covariance: (H/2)⁻¹, the inverse Hessian of −ln L in u (as the simplex path reports it)
/// ```
///
/// # References
/// Nocedal & Wright 2006, *Numerical Optimization* (2nd ed.), §3.1, §3.4 and §8.1.
pub(super) fn maximise(model: &Model, theta0: &[f64], want_cov: bool) -> Option<MlResult> {
    if !applies(model) || !model.in_support(theta0) {
        return None;
    }
    let n = theta0.len();
    let mut u = model.theta_to_free(theta0);
    let mut h: Vec<f64> = model
        .free_steps(theta0)
        .iter()
        .map(|s| HESSIAN_STEP * s.abs().max(1e-3))
        .collect();
    let (mut f, mut g) = neg2_gradient(model, &u)?;
    let mut evaluations = 1_u64;
    let mut iterations = 0_u64;
    let mut converged = false;
    let mut trial = u.clone();
    let mut last = None;
    while iterations < MAX_ITERATIONS {
        iterations += 1;
        let hm = hessian(model, &u, &h)?;
        evaluations += 2 * n as u64;
        last = Some(hm.clone());
        let gv = DVector::from_vec(g.clone());
        // Levenberg shift ν, grown from 0 until the matrix is positive definite.
        let scale = (0..n).map(|i| hm[(i, i)].abs()).fold(0.0_f64, f64::max);
        let mut nu = 0.0;
        let step = loop {
            let mut shifted = hm.clone();
            for i in 0..n {
                shifted[(i, i)] += nu;
            }
            if let Some(c) = shifted.cholesky() {
                break c.solve(&gv);
            }
            nu = if nu == 0.0 {
                1e-8 * scale.max(1e-12)
            } else {
                10.0 * nu
            };
            if nu > 1e8 * scale.max(1.0) {
                return None;
            }
        };
        if !step.iter().all(|v| v.is_finite()) {
            return None;
        }
        let decrement = 0.5 * gv.dot(&step);
        if nu == 0.0 && decrement.abs() < DECREMENT_TOL {
            converged = true;
            break;
        }
        let mut lambda = 1.0;
        let mut moved = false;
        for _ in 0..40 {
            for i in 0..n {
                trial[i] = u[i] - lambda * step[i];
            }
            if let Some((ft, gt)) = neg2_gradient(model, &trial) {
                evaluations += 1;
                if ft <= f {
                    u.copy_from_slice(&trial);
                    f = ft;
                    g = gt;
                    moved = true;
                    break;
                }
            }
            lambda *= 0.5;
        }
        if !moved {
            // No decrease within rounding: converged if the step was already negligible.
            converged = nu == 0.0 && decrement.abs() < 1e3 * DECREMENT_TOL;
            break;
        }
    }
    if !converged {
        return None;
    }
    let mut theta = vec![0.0; n];
    model.free_to_theta(&u, &mut theta);
    let ei = model.eps_index();
    let eps_scale = model.typical(&theta)[ei].abs().max(f64::MIN_POSITIVE);
    if theta[ei] < tolerance::EPS_BOUNDARY_REL * eps_scale {
        return None;
    }
    // The free vector of the reported θ (ε = |u_ε|), at which the covariance is taken.
    u = model.theta_to_free(&theta);
    let neg2 = model.neg2(&theta);
    if !neg2.is_finite() {
        return None;
    }
    let cov = if want_cov {
        // Steps of 1e-3 of each standard error for the covariance's own Hessian, the errors
        // from the last Newton Hessian (taken at this point; the sign of u_ε does not change
        // the diagonal of its inverse).
        let first = invert_spd(&(0.5 * last?))?;
        for (i, hi) in h.iter_mut().enumerate() {
            let sd = first[(i, i)].sqrt();
            if sd.is_finite() && sd > 0.0 {
                *hi = 1e-3 * sd;
            }
        }
        let hm = hessian(model, &u, &h)?;
        evaluations += 2 * n as u64;
        Some(invert_spd(&(0.5 * hm))?)
    } else {
        None
    };
    Some(MlResult {
        theta,
        neg2,
        cov,
        iterations,
        evaluations,
        notes: Vec::new(),
    })
}

#[cfg(test)]
mod tests {
    use super::super::super::optimize;
    use super::super::super::types::prepare;
    use super::super::super::{FitSpec, Method, Point};
    use super::*;
    use rand::rngs::StdRng;
    use rand::{RngExt, SeedableRng};
    use rand_distr::{Distribution, StandardNormal};

    /// An invented plane: log M = 8.3 + 4 (x − 2.3) + 0.6 (x2 − 11) + N(0, eps²), with
    /// true (x, x2) of correlation `corr` (sd 0.12 and 0.4 dex), errors 0.02–0.04 dex on x,
    /// 0.05–0.15 on x2, 0.1–0.3 on y, an x–x2 error correlation of 0.3 and an x2–y one of
    /// −0.2 on every third object, and a fraction `limits` of upper limits 0.1–0.5 dex above
    /// the true mass.
    fn plane_sample(n: usize, limits: f64, corr: f64, eps: f64, seed: u64) -> Vec<Point> {
        let mut rng = StdRng::seed_from_u64(seed);
        (0..n)
            .map(|i| {
                let mut g = || -> f64 { StandardNormal.sample(&mut rng) };
                let (z1, z2) = (g(), g());
                let xi = 2.3 + 0.12 * z1;
                let xi2 = 11.0 + 0.4 * (corr * z1 + (1.0 - corr * corr).sqrt() * z2);
                let eta = 8.3 + 4.0 * (xi - 2.3) + 0.6 * (xi2 - 11.0) + eps * g();
                let (ex, ex2, ey) = (
                    rng.random_range(0.02..0.04),
                    rng.random_range(0.05..0.15),
                    rng.random_range(0.1..0.3),
                );
                let (n1, n2, n3): (f64, f64, f64) = (
                    StandardNormal.sample(&mut rng),
                    StandardNormal.sample(&mut rng),
                    StandardNormal.sample(&mut rng),
                );
                let x = xi + ex * n1;
                let x2 = xi2 + ex2 * n2;
                if rng.random_range(0.0..1.0) < limits {
                    let lim = eta + rng.random_range(0.1..0.5);
                    Point::limit(x, ex, lim).with_x2(x2, ex2)
                } else {
                    let y: f64 = eta + ey * n3;
                    let p = Point::new(x, ex, y, ey).with_x2(x2, ex2);
                    if i % 3 == 0 {
                        p.with_x2_covariances(-0.2 * ex2 * ey, 0.3 * ex * ex2)
                    } else {
                        p
                    }
                }
            })
            .collect()
    }

    fn plane_spec() -> FitSpec {
        FitSpec::new(Method::Structural, 2.3)
            .with_shape(Shape::Plane)
            .and_then(|s| s.with_pivot2(11.0))
            .expect("spec")
    }

    fn model_of(pts: &[Point], group: Option<Vec<bool>>) -> Model {
        let sp = plane_spec();
        let data = prepare(pts, &sp, 6).expect("data");
        Model::from_data(data, &sp, group)
    }

    #[test]
    fn gradient_matches_central_differences_of_neg2() {
        // The analytic gradient against five-point central differences of the model's own
        // −2 ln L, at the start and at random points around it, with limits, error
        // covariances, correlated (x, x2) and the subsample offset.
        let pts = plane_sample(120, 0.2, 0.5, 0.3, 3);
        let mut rng = StdRng::seed_from_u64(8);
        for group in [None, Some((0..120).map(|i| i % 2 == 1).collect())] {
            let model = model_of(&pts, group);
            let t0 = model.initial();
            let u0 = model.theta_to_free(&t0);
            for k in 0..6 {
                let u: Vec<f64> = u0
                    .iter()
                    .map(|v| {
                        if k == 0 {
                            *v
                        } else {
                            v + 0.2 * rng.random_range(-1.0..1.0) * (v.abs().min(1.0) + 0.05)
                        }
                    })
                    .collect();
                let neg2_u = |uu: &[f64]| {
                    let mut t = vec![0.0; uu.len()];
                    model.free_to_theta(uu, &mut t);
                    model.neg2(&t)
                };
                let (f, g) = neg2_gradient(&model, &u).expect("gradient");
                assert!((f - neg2_u(&u)).abs() <= 1e-12 * f.abs(), "{f}");
                let h: Vec<f64> = u.iter().map(|v| 1e-3 * v.abs().max(0.1)).collect();
                let fd = optimize::gradient5(neg2_u, &u, &h);
                let norm = g.iter().map(|v| v * v).sum::<f64>().sqrt();
                for i in 0..u.len() {
                    // Relative to the component, or to the gradient's size for a component
                    // near 0 (where a relative difference means nothing).
                    let tol = 1e-6 * g[i].abs().max(1e-3 * norm);
                    assert!(
                        (g[i] - fd[i]).abs() <= tol,
                        "{i}: analytic {} numeric {} at {u:?}",
                        g[i],
                        fd[i]
                    );
                }
            }
        }
    }

    #[test]
    fn newton_agrees_with_the_simplex_path_on_simulated_planes() {
        // Two routes to the same maximum: Newton on the analytic gradient and the simplex
        // search with its numerical Hessian, on planes with and without limits and with
        // correlated and uncorrelated true (x, x2).
        for (n, limits, corr, seed) in [
            (50, 0.0, 0.0, 1),
            (50, 0.1, 0.6, 2),
            (500, 0.0, 0.6, 3),
            (500, 0.1, -0.4, 4),
            (5000, 0.1, 0.6, 5),
        ] {
            let pts = plane_sample(n, limits, corr, 0.3, seed);
            let model = model_of(&pts, None);
            let t0 = model.initial();
            let a = maximise(&model, &t0, true).expect("newton converges");
            let budget = tolerance::NM_ITERATIONS_PER_PARAM * t0.len() as u64;
            let b = optimize::maximise_likelihood(&model, &t0, budget, true).expect("simplex");
            assert!(
                a.neg2 <= b.neg2 + 1e-6,
                "N {n}: newton {} simplex {}",
                a.neg2,
                b.neg2
            );
            let (ca, cb) = (a.cov.expect("cov"), b.cov.expect("cov"));
            for i in 0..t0.len() {
                let sd = cb[(i, i)].sqrt();
                // The same point: every parameter within 1e-5 (log10 units or dex).
                assert!(
                    (a.theta[i] - b.theta[i]).abs() <= 1e-5,
                    "N {n}, {i}: {} {} (sd {sd})",
                    a.theta[i],
                    b.theta[i]
                );
                // Covariances within 1 % of the standard errors' product (variances within
                // 1 % of themselves).
                for j in 0..t0.len() {
                    let scale = sd * cb[(j, j)].sqrt();
                    assert!(
                        (ca[(i, j)] - cb[(i, j)]).abs() < 0.01 * scale,
                        "N {n}, ({i}, {j}): {} {}",
                        ca[(i, j)],
                        cb[(i, j)]
                    );
                }
            }
        }
    }

    #[test]
    fn a_maximum_at_zero_scatter_goes_to_the_simplex_path() {
        // No intrinsic scatter and y errors of 0.1–0.3 dex: the maximum sits at ε = 0, where
        // Newton in u_ε stops short; the dispatch must then give the simplex path's answer.
        // The first of the seeded samples whose maximum is on the boundary.
        let (model, t0, b) = (1..60)
            .find_map(|seed| {
                let model = model_of(&plane_sample(25, 0.0, 0.3, 0.0, seed), None);
                let t0 = model.initial();
                let budget = tolerance::NM_ITERATIONS_PER_PARAM * t0.len() as u64;
                let b = optimize::maximise_likelihood(&model, &t0, budget, true).ok()?;
                (b.theta[3] == 0.0).then_some((model, t0, b))
            })
            .expect("a sample with its maximum at ε = 0");
        assert!(maximise(&model, &t0, true).is_none());
        let a = super::super::maximise(&model, true).expect("fit");
        assert_eq!(a.theta, b.theta);
        assert_eq!(a.neg2.to_bits(), b.neg2.to_bits());
    }
}
