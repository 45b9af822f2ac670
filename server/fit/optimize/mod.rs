//! Small, robust optimisers for the estimators: Nelder–Mead for several parameters, Brent's
//! method in one dimension, bracketing root finding, a central-difference Hessian and a Newton
//! polish. They work on plain `f64` slices and allocate only when they start.

use nalgebra::{DMatrix, DVector};

use super::{FitError, tolerance};

/// Outcome of a minimisation.
#[derive(Clone, Debug, PartialEq)]
pub struct Minimum {
    /// Location of the minimum.
    pub x: Vec<f64>,
    /// Objective value there.
    pub f: f64,
    /// Iterations used.
    pub iterations: u64,
    /// Objective evaluations used.
    pub evaluations: u64,
    /// Whether the stopping criterion was met (rather than the iteration limit).
    pub converged: bool,
}

/// Adds floating-point numbers with Neumaier's compensated summation, so that a sum does not
/// depend (beyond the last bit or so) on the order of its terms: fits must not depend on row
/// order.
///
/// # Model
/// ```text
/// s ← s + v;  c ← c + (s_old − s) + v  (or (v − s) + s_old when |v| > |s_old|);  result s + c
/// ```
///
/// # References
/// Neumaier 1974, Z. Angew. Math. Mech. 54, 39.
#[derive(Clone, Copy, Debug, Default)]
pub struct Sum {
    s: f64,
    c: f64,
}

impl Sum {
    /// Adds a term.
    ///
    /// # Model
    /// ```text
    /// s ← s + v with the Neumaier correction c
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// Neumaier 1974, Z. Angew. Math. Mech. 54, 39.
    #[inline]
    pub fn add(&mut self, v: f64) {
        let t = self.s + v;
        if self.s.abs() >= v.abs() {
            self.c += (self.s - t) + v;
        } else {
            self.c += (v - t) + self.s;
        }
        self.s = t;
    }

    /// The compensated total.
    ///
    /// # Model
    /// ```text
    /// total = s + c
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// Neumaier 1974, Z. Angew. Math. Mech. 54, 39.
    #[inline]
    pub fn total(self) -> f64 {
        self.s + self.c
    }
}

/// Minimises `f` with the Nelder–Mead simplex method, restarting from the best vertex until a
/// restart no longer improves the value.
///
/// # Model
/// ```text
/// reflection 1, expansion 2, contraction ½, shrink ½ (the standard coefficients);
/// stop when max_i |f_i − f_best| ≤ f_tol_abs + f_tol_rel |f_best| and the simplex diameter
/// (relative to `step`) ≤ x_tol
/// ```
/// `step` holds the initial simplex edge along each coordinate (same units as x). Non-finite
/// objective values count as +∞.
///
/// # References
/// Nelder & Mead 1965, Comput. J. 7, 308; Lagarias et al. 1998, SIAM J. Optim. 9, 112.
///
/// # Errors
/// None: non-convergence is reported in `Minimum::converged`.
pub fn nelder_mead<F: FnMut(&[f64]) -> f64>(
    mut f: F,
    x0: &[f64],
    step: &[f64],
    max_iterations: u64,
) -> Minimum {
    let n = x0.len();
    let mut evaluations = 0_u64;
    let mut eval = |x: &[f64], evaluations: &mut u64| {
        *evaluations += 1;
        let v = f(x);
        if v.is_finite() { v } else { f64::INFINITY }
    };
    let mut best_x = x0.to_vec();
    let mut best_f = eval(&best_x, &mut evaluations);
    let mut iterations = 0_u64;
    let mut converged = false;
    let mut scale = 1.0;
    // Working storage, allocated once.
    let mut simplex: Vec<Vec<f64>> = vec![vec![0.0; n]; n + 1];
    let mut values = vec![0.0; n + 1];
    let mut centroid = vec![0.0; n];
    let mut trial = vec![0.0; n];
    let mut trial2 = vec![0.0; n];
    let mut idx: Vec<usize> = (0..=n).collect();
    for _restart in 0..tolerance::NM_MAX_RESTARTS {
        simplex[0].copy_from_slice(&best_x);
        values[0] = best_f;
        for i in 0..n {
            simplex[i + 1].copy_from_slice(&best_x);
            simplex[i + 1][i] += step[i] * scale;
            values[i + 1] = eval(&simplex[i + 1], &mut evaluations);
        }
        let start_f = best_f;
        let mut this_converged = false;
        while iterations < max_iterations {
            iterations += 1;
            // Order: find best, worst, second worst.
            idx.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
            let (ib, iw, isw) = (idx[0], idx[n], idx[n - 1]);
            let fb = values[ib];
            let spread = values[iw] - fb;
            let mut diam: f64 = 0.0;
            for v in simplex.iter() {
                for j in 0..n {
                    diam = diam
                        .max((v[j] - simplex[ib][j]).abs() / step[j].abs().max(f64::MIN_POSITIVE));
                }
            }
            if spread.is_finite()
                && spread <= tolerance::NM_F_ABS + tolerance::NM_F_REL * fb.abs()
                && diam <= tolerance::NM_X_REL
            {
                this_converged = true;
                break;
            }
            centroid.iter_mut().for_each(|c| *c = 0.0);
            for (k, v) in simplex.iter().enumerate() {
                if k != iw {
                    for j in 0..n {
                        centroid[j] += v[j] / n as f64;
                    }
                }
            }
            for j in 0..n {
                trial[j] = centroid[j] + (centroid[j] - simplex[iw][j]);
            }
            let fr = eval(&trial, &mut evaluations);
            if fr < fb {
                for j in 0..n {
                    trial2[j] = centroid[j] + 2.0 * (centroid[j] - simplex[iw][j]);
                }
                let fe = eval(&trial2, &mut evaluations);
                if fe < fr {
                    simplex[iw].copy_from_slice(&trial2);
                    values[iw] = fe;
                } else {
                    simplex[iw].copy_from_slice(&trial);
                    values[iw] = fr;
                }
            } else if fr < values[isw] {
                simplex[iw].copy_from_slice(&trial);
                values[iw] = fr;
            } else {
                // Contraction: outside if the reflection improved on the worst, else inside.
                let outside = fr < values[iw];
                for j in 0..n {
                    trial2[j] = if outside {
                        centroid[j] + 0.5 * (trial[j] - centroid[j])
                    } else {
                        centroid[j] + 0.5 * (simplex[iw][j] - centroid[j])
                    };
                }
                let fc = eval(&trial2, &mut evaluations);
                if fc < fr.min(values[iw]) {
                    simplex[iw].copy_from_slice(&trial2);
                    values[iw] = fc;
                } else {
                    // Shrink towards the best vertex.
                    let best = simplex[ib].clone();
                    for k in 0..=n {
                        if k != ib {
                            for j in 0..n {
                                simplex[k][j] = best[j] + 0.5 * (simplex[k][j] - best[j]);
                            }
                            values[k] = eval(&simplex[k], &mut evaluations);
                        }
                    }
                }
            }
        }
        let ib = (0..=n)
            .min_by(|&a, &b| values[a].total_cmp(&values[b]))
            .unwrap_or(0);
        let improved =
            values[ib] < start_f - (tolerance::NM_F_ABS + tolerance::NM_F_REL * start_f.abs());
        if values[ib] <= best_f {
            best_f = values[ib];
            best_x.copy_from_slice(&simplex[ib]);
        }
        converged = this_converged;
        if !this_converged || !improved {
            break;
        }
        // Restart with a smaller simplex around the best point.
        scale *= 0.1;
    }
    Minimum {
        x: best_x,
        f: best_f,
        iterations,
        evaluations,
        converged,
    }
}

/// Minimises a function of one variable on [a, b] with Brent's method (golden section plus
/// parabolic interpolation).
///
/// # Model
/// ```text
/// stop when |x − m| ≤ 2 tol − (b − a)/2,  tol = x_tol_rel |x| + x_tol_abs
/// ```
///
/// # Errors
/// None: returns the best point found within the iteration limit.
///
/// # References
/// Brent 1973, *Algorithms for Minimization without Derivatives*, ch. 5.
#[expect(
    clippy::float_cmp,
    reason = "Brent's bookkeeping compares stored abscissae, which are copies, exactly"
)]
pub fn brent_min<F: FnMut(f64) -> f64>(
    mut f: F,
    a: f64,
    b: f64,
    x_tol_abs: f64,
) -> (f64, f64, u64) {
    const GOLD: f64 = 0.381_966_011_250_105_1;
    let (mut a, mut b) = if a < b { (a, b) } else { (b, a) };
    let mut x = a + GOLD * (b - a);
    let (mut w, mut v) = (x, x);
    let mut fx = f(x);
    let (mut fw, mut fv) = (fx, fx);
    let (mut d, mut e) = (0.0_f64, 0.0_f64);
    let mut evals = 1_u64;
    for _ in 0..tolerance::BRENT_MAX_ITERATIONS {
        let m = 0.5 * (a + b);
        let tol = tolerance::BRENT_X_REL * x.abs() + x_tol_abs;
        let t2 = 2.0 * tol;
        if (x - m).abs() <= t2 - 0.5 * (b - a) {
            break;
        }
        let mut golden = true;
        if e.abs() > tol {
            let r = (x - w) * (fx - fv);
            let mut q = (x - v) * (fx - fw);
            let mut p = (x - v) * q - (x - w) * r;
            q = 2.0 * (q - r);
            if q > 0.0 {
                p = -p;
            }
            q = q.abs();
            if p.abs() < (0.5 * q * e).abs() && p > q * (a - x) && p < q * (b - x) {
                e = d;
                d = p / q;
                let u = x + d;
                if u - a < t2 || b - u < t2 {
                    d = if x < m { tol } else { -tol };
                }
                golden = false;
            }
        }
        if golden {
            e = if x < m { b - x } else { a - x };
            d = GOLD * e;
        }
        let u = if d.abs() >= tol {
            x + d
        } else if d > 0.0 {
            x + tol
        } else {
            x - tol
        };
        let fu = f(u);
        evals += 1;
        if fu <= fx {
            if u < x {
                b = x;
            } else {
                a = x;
            }
            (v, fv) = (w, fw);
            (w, fw) = (x, fx);
            (x, fx) = (u, fu);
        } else {
            if u < x {
                a = u;
            } else {
                b = u;
            }
            if fu <= fw || w == x {
                (v, fv) = (w, fw);
                (w, fw) = (u, fu);
            } else if fu <= fv || v == x || v == w {
                (v, fv) = (u, fu);
            }
        }
    }
    (x, fx, evals)
}

/// Finds a root of `f` in [a, b] by bisection; `f(a)` and `f(b)` must differ in sign.
/// Returns `None` if they do not.
///
/// # Model
/// ```text
/// halve [a, b] until b − a ≤ x_tol_abs + 4 ε_machine |x|
/// ```
///
/// # References
/// Press et al. 2007, *Numerical Recipes* (3rd ed.), §9.1.
///
/// # Errors
/// None: returns None without a sign change.
pub fn bisect<F: FnMut(f64) -> f64>(mut f: F, a: f64, b: f64, x_tol_abs: f64) -> Option<f64> {
    let (mut lo, mut hi) = (a, b);
    let mut flo = f(lo);
    let fhi = f(hi);
    if !(flo.is_finite() && fhi.is_finite()) || flo * fhi > 0.0 {
        return None;
    }
    if flo == 0.0 {
        return Some(lo);
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if (hi - lo).abs() <= x_tol_abs + 4.0 * f64::EPSILON * mid.abs() {
            return Some(mid);
        }
        let fm = f(mid);
        if fm == 0.0 {
            return Some(mid);
        }
        if (fm < 0.0) == (flo < 0.0) {
            lo = mid;
            flo = fm;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// Finds a root of `f` in [a, b] by the Illinois variant of regula falsi (superlinear, and
/// as safe as bisection); `f(a)` and `f(b)` must differ in sign. Returns `None` if they do not.
///
/// # Model
/// ```text
/// c = b − f(b)(b − a)/(f(b) − f(a)); keep the sub-interval with the sign change; halve the
/// retained end's f when the same end is kept twice; stop when the interval is below x_tol_abs
/// ```
///
/// # References
/// Dowell & Jarratt 1971, BIT 11, 168.
///
/// # Errors
/// None: returns None without a sign change or on a non-finite value.
pub fn illinois<F: FnMut(f64) -> f64>(mut f: F, a: f64, b: f64, x_tol_abs: f64) -> Option<f64> {
    let (mut a, mut b) = (a, b);
    let (mut fa, mut fb) = (f(a), f(b));
    if !(fa.is_finite() && fb.is_finite()) || fa * fb > 0.0 {
        return None;
    }
    if fa == 0.0 {
        return Some(a);
    }
    if fb == 0.0 {
        return Some(b);
    }
    let mut side = 0;
    for _ in 0..200 {
        let c = (a * fb - b * fa) / (fb - fa);
        let fc = f(c);
        if !fc.is_finite() {
            return None;
        }
        if fc == 0.0 || (b - a).abs() <= x_tol_abs + 4.0 * f64::EPSILON * c.abs() {
            return Some(c);
        }
        if fc * fb > 0.0 {
            b = c;
            fb = fc;
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        } else {
            a = c;
            fa = fc;
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        }
        if (b - a).abs() <= x_tol_abs + 4.0 * f64::EPSILON * c.abs() {
            return Some(0.5 * (a + b));
        }
    }
    Some(0.5 * (a + b))
}

/// Central-difference Hessian of `f` at `x` with steps `h`.
///
/// # Model
/// ```text
/// H_ii = [f(x + h_i e_i) − 2 f(x) + f(x − h_i e_i)] / h_i²
/// H_ij = [f(++) − f(+−) − f(−+) + f(−−)] / (4 h_i h_j)
/// ```
///
/// # References
/// Abramowitz & Stegun 1964, 25.3.23 and 25.3.26.
///
/// # Errors
/// None.
pub fn hessian<F: FnMut(&[f64]) -> f64>(mut f: F, x: &[f64], h: &[f64]) -> DMatrix<f64> {
    let n = x.len();
    let mut m = DMatrix::zeros(n, n);
    let f0 = f(x);
    let mut p = x.to_vec();
    for i in 0..n {
        p[i] = x[i] + h[i];
        let fp = f(&p);
        p[i] = x[i] - h[i];
        let fm = f(&p);
        p[i] = x[i];
        m[(i, i)] = (fp - 2.0 * f0 + fm) / (h[i] * h[i]);
        for j in 0..i {
            let mut g = |si: f64, sj: f64, p: &mut Vec<f64>| {
                p[i] = x[i] + si * h[i];
                p[j] = x[j] + sj * h[j];
                let v = f(p);
                p[i] = x[i];
                p[j] = x[j];
                v
            };
            let v = (g(1.0, 1.0, &mut p) - g(1.0, -1.0, &mut p) - g(-1.0, 1.0, &mut p)
                + g(-1.0, -1.0, &mut p))
                / (4.0 * h[i] * h[j]);
            m[(i, j)] = v;
            m[(j, i)] = v;
        }
    }
    m
}

/// Central-difference gradient of `f` at `x` with steps `h`.
///
/// # Model
/// ```text
/// g_i = [f(x + h_i e_i) − f(x − h_i e_i)] / (2 h_i)
/// ```
///
/// # References
/// Abramowitz & Stegun 1964, 25.3.21.
///
/// # Errors
/// None.
pub fn gradient<F: FnMut(&[f64]) -> f64>(mut f: F, x: &[f64], h: &[f64]) -> Vec<f64> {
    let mut p = x.to_vec();
    (0..x.len())
        .map(|i| {
            p[i] = x[i] + h[i];
            let fp = f(&p);
            p[i] = x[i] - h[i];
            let fm = f(&p);
            p[i] = x[i];
            (fp - fm) / (2.0 * h[i])
        })
        .collect()
}

/// Inverts a symmetric positive-definite matrix (Cholesky); `None` if it is not positive
/// definite.
///
/// # Model
/// ```text
/// M⁻¹ = (L Lᵀ)⁻¹ with M = L Lᵀ (Cholesky)
/// ```
///
/// # Errors
/// None: returns None if M is not positive definite.
///
/// # References
/// Golub & Van Loan 2013, *Matrix Computations* (4th ed.), §4.2.
pub fn invert_spd(m: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let c = m.clone().cholesky()?;
    let inv = c.inverse();
    inv.iter().all(|v| v.is_finite()).then_some(inv)
}

/// Inverse of a symmetric matrix restricted to its clearly positive eigen-directions
/// (eigenvalues above 1e-9 of the largest); `None` if no direction is positive or the result
/// is not finite.
///
/// # Model
/// ```text
/// M⁺ = Σ_{λ_k > 1e-9 λ_max} v_k v_kᵀ / λ_k
/// ```
///
/// # Errors
/// None: returns None if no eigenvalue is positive.
///
/// # References
/// Golub & Van Loan 2013, *Matrix Computations* (4th ed.), §8.1.
pub fn positive_pseudo_inverse(m: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    if !m.iter().all(|v| v.is_finite()) {
        return None;
    }
    let e = nalgebra::SymmetricEigen::new(m.clone());
    let lmax = e.eigenvalues.iter().copied().fold(0.0_f64, f64::max);
    if lmax <= 0.0 {
        return None;
    }
    let n = m.nrows();
    let mut inv = DMatrix::zeros(n, n);
    for k in 0..n {
        let l = e.eigenvalues[k];
        if l > 1e-9 * lmax {
            let v = e.eigenvectors.column(k);
            inv += (v * v.transpose()) / l;
        }
    }
    Some(inv)
}

/// Finite-difference steps for a Hessian: a first guess from the parameter sizes, then
/// 1/100 of each parameter's standard error from that first Hessian.
///
/// # Model
/// ```text
/// h_i = 0.01 σ_i, σ_i² = (H⁻¹)_ii from a first Hessian with h_i = 1e-4 max(|x_i|, t_i, 1e-4)
/// ```
///
/// # Errors
/// None: falls back to the first steps.
///
/// # References
/// Dennis & Schnabel 1996, *Numerical Methods for Unconstrained Optimization*, §5.6.
pub fn hessian_steps<F: FnMut(&[f64]) -> f64>(mut f: F, x: &[f64], typical: &[f64]) -> Vec<f64> {
    let h0: Vec<f64> = x
        .iter()
        .zip(typical)
        .map(|(v, t)| {
            tolerance::HESSIAN_REL_STEP * v.abs().max(t.abs()).max(tolerance::HESSIAN_MIN_STEP)
        })
        .collect();
    let h = hessian(&mut f, x, &h0);
    match invert_spd(&h) {
        Some(inv) => (0..x.len())
            .map(|i| {
                let s = inv[(i, i)].sqrt() * tolerance::HESSIAN_STEP_PER_SIGMA;
                if s.is_finite() && s > 0.0 { s } else { h0[i] }
            })
            .collect(),
        None => h0,
    }
}

/// Five-point central-difference gradient of `f` at `x` with steps `h` (truncation error
/// O(h⁴), so that a Newton polish converges to the same point whatever the rounding noise of
/// the objective).
///
/// # Model
/// ```text
/// g_i = [−f(x + 2h_i e_i) + 8 f(x + h_i e_i) − 8 f(x − h_i e_i) + f(x − 2h_i e_i)] / (12 h_i)
/// ```
///
/// # References
/// Abramowitz & Stegun 1964, 25.3.6.
///
/// # Errors
/// None.
pub fn gradient5<F: FnMut(&[f64]) -> f64>(mut f: F, x: &[f64], h: &[f64]) -> Vec<f64> {
    let mut p = x.to_vec();
    (0..x.len())
        .map(|i| {
            let mut at = |k: f64| {
                p[i] = x[i] + k * h[i];
                let v = f(&p);
                p[i] = x[i];
                v
            };
            (-at(2.0) + 8.0 * at(1.0) - 8.0 * at(-1.0) + at(-2.0)) / (12.0 * h[i])
        })
        .collect()
}

/// Polishes a minimum with damped Newton steps on a five-point gradient and a central-difference
/// Hessian.
///
/// # Model
/// ```text
/// x ← x − λ H⁻¹ g,  λ ∈ {1, ½, ¼, …} until f does not increase beyond its rounding noise
/// (8 ε_machine |f|); stop when every |step_i| < 1e-12 σ_i (σ_i ≈ h_i / 0.01) or after
/// `max_steps`
/// ```
///
/// # References
/// Nocedal & Wright 2006, *Numerical Optimization* (2nd ed.), §3.1 and §3.5.
///
/// # Errors
/// None: stops when no step decreases f.
pub fn newton_polish<F: FnMut(&[f64]) -> f64>(
    mut f: F,
    x: &mut [f64],
    fx: &mut f64,
    h: &[f64],
    max_steps: usize,
) -> u64 {
    let mut evals = 0_u64;
    let n = x.len();
    let mut trial = x.to_vec();
    for _ in 0..max_steps {
        let g = gradient5(&mut f, x, h);
        let hm = hessian(&mut f, x, h);
        evals += (4 * n + 1 + 2 * n * n) as u64;
        let Some(c) = hm.cholesky() else { break };
        let step = c.solve(&DVector::from_vec(g));
        if !step.iter().all(|v| v.is_finite()) {
            break;
        }
        let small = step.iter().zip(h).all(|(s, hi)| {
            s.abs() <= tolerance::NEWTON_STEP_REL * hi / tolerance::HESSIAN_STEP_PER_SIGMA
        });
        if small {
            break;
        }
        let noise = 8.0 * f64::EPSILON * fx.abs().max(1.0);
        let mut lambda = 1.0;
        let mut moved = false;
        for _ in 0..30 {
            for i in 0..n {
                trial[i] = x[i] - lambda * step[i];
            }
            let ft = f(&trial);
            evals += 1;
            if ft.is_finite() && ft <= *fx + noise {
                x.copy_from_slice(&trial);
                *fx = ft;
                moved = true;
                break;
            }
            lambda *= 0.5;
        }
        if !moved {
            break;
        }
    }
    evals
}

/// A −2 ln L with a natural parameter vector θ and an unconstrained "free" vector u for the
/// simplex search; implemented by the conditional and structural models.
pub(crate) trait Objective {
    /// Length of θ.
    fn dim(&self) -> usize;
    /// −2 ln L(θ); +∞ outside the support.
    fn neg2(&self, theta: &[f64]) -> f64;
    /// Index of ε in θ.
    fn eps_index(&self) -> usize;
    /// Maps θ to the free vector u.
    fn theta_to_free(&self, theta: &[f64]) -> Vec<f64>;
    /// Maps u back to θ.
    fn free_to_theta(&self, u: &[f64], theta: &mut [f64]);
    /// Typical scale of each θ component (for simplex and finite-difference steps).
    fn typical(&self, theta: &[f64]) -> Vec<f64>;
    /// Initial simplex steps in the free parametrisation (default: [`Objective::typical`]).
    fn free_steps(&self, theta: &[f64]) -> Vec<f64> {
        self.typical(theta)
    }
    /// If the model can give the best α for the rest of θ in closed form, that α.
    fn best_alpha(&self, _theta: &[f64]) -> Option<f64> {
        None
    }
}

/// Result of [`maximise_likelihood`].
#[derive(Clone, Debug)]
pub(crate) struct MlResult {
    /// θ at the maximum.
    pub(crate) theta: Vec<f64>,
    /// −2 ln L there.
    pub(crate) neg2: f64,
    /// Inverse Hessian of −ln L in the free parametrisation; its relation-parameter block (and
    /// the offset) is the covariance of those parameters. `None` if no error could be computed.
    pub(crate) cov: Option<DMatrix<f64>>,
    /// Iterations and evaluations spent.
    pub(crate) iterations: u64,
    /// Objective evaluations.
    pub(crate) evaluations: u64,
    /// Plain-sentence notes for `Termination::reason`.
    pub(crate) notes: Vec<String>,
}

/// Maximises a likelihood from `theta0`: Nelder–Mead in the free parametrisation (with α in
/// closed form when the model allows it), a Newton polish in θ, a check of the ε = 0
/// boundary, and the inverse central-difference Hessian of −ln L = ½(−2 ln L) for the
/// covariance (at the boundary, ε is held at 0 for the Hessian and its error comes from the
/// one-sided profile Δ(−2 ln L) = 1).
///
/// # Errors
/// [`FitError::NotConverged`] when the simplex search hits `max_iterations`.
pub(crate) fn maximise_likelihood<O: Objective>(
    model: &O,
    theta0: &[f64],
    max_iterations: u64,
    want_cov: bool,
) -> Result<MlResult, FitError> {
    let dim = model.dim();
    let ei = model.eps_index();
    let closed_alpha = model.best_alpha(theta0).is_some();
    let mut theta = theta0.to_vec();
    let free_all = model.theta_to_free(theta0);
    // Simplex over u without α when α is available in closed form.
    let skip = usize::from(closed_alpha);
    let u0: Vec<f64> = free_all[skip..].to_vec();
    let typical = model.typical(theta0);
    let free_steps = model.free_steps(theta0);
    let steps: Vec<f64> = (skip..dim)
        .map(|i| {
            let t = free_steps[i];
            if t > 0.0 { t } else { 0.1 }
        })
        .collect();
    let mut work = theta.clone();
    let mut full_u = free_all.clone();
    let mut objective_u = |u: &[f64]| {
        full_u[skip..].copy_from_slice(u);
        model.free_to_theta(&full_u, &mut work);
        if closed_alpha {
            match model.best_alpha(&work) {
                Some(a) => work[0] = a,
                None => return f64::INFINITY,
            }
        }
        model.neg2(&work)
    };
    let m = nelder_mead(&mut objective_u, &u0, &steps, max_iterations);
    if !m.converged {
        return Err(FitError::NotConverged {
            iterations: m.iterations,
        });
    }
    let theta_of = |u: &[f64]| {
        let mut t = vec![0.0; dim];
        model.free_to_theta(u, &mut t);
        t
    };
    let mut u = free_all.clone();
    u[skip..].copy_from_slice(&m.x);
    theta = theta_of(&u);
    if closed_alpha {
        theta[0] = model.best_alpha(&theta).unwrap_or(theta[0]);
    }
    u = model.theta_to_free(&theta);
    let mut neg2 = model.neg2(&theta);
    let mut evaluations = m.evaluations;
    let mut notes = Vec::new();
    let eps_scale = typical[ei].abs().max(f64::MIN_POSITIVE);
    let mut boundary = theta[ei].abs() < tolerance::EPS_BOUNDARY_REL * eps_scale;
    u[ei] = u[ei].abs();
    if boundary {
        u[ei] = 0.0;
        theta = theta_of(&u);
        neg2 = model.neg2(&theta);
    }
    // Polish and Hessian work in the free parametrisation u, holding ε at 0 on the boundary.
    // The relation parameters map to themselves (ε = |u|, which is ε itself for ε > 0), so the
    // relation block of the inverse Hessian in u equals that in θ: reparametrising nuisance
    // parameters does not change the marginal covariance of the others.
    let u_eval = |sub: &[f64], base: &[f64], idx: &[usize]| {
        let mut uu = base.to_vec();
        for (k, &i) in idx.iter().enumerate() {
            uu[i] = sub[k];
        }
        let mut t = vec![0.0; dim];
        model.free_to_theta(&uu, &mut t);
        model.neg2(&t)
    };
    let free_idx: Vec<usize> = (0..dim).filter(|&i| !(boundary && i == ei)).collect();
    let sub0: Vec<f64> = free_idx.iter().map(|&i| u[i]).collect();
    let sub_typ: Vec<f64> = free_idx.iter().map(|&i| free_steps[i]).collect();
    let base = u.clone();
    let h = hessian_steps(|s| u_eval(s, &base, &free_idx), &sub0, &sub_typ);
    let mut sub = sub0.clone();
    evaluations += newton_polish(
        |s| u_eval(s, &base, &free_idx),
        &mut sub,
        &mut neg2,
        &h,
        tolerance::NEWTON_MAX_STEPS,
    );
    for (k, &i) in free_idx.iter().enumerate() {
        u[i] = sub[k];
    }
    u[ei] = u[ei].abs();
    theta = theta_of(&u);
    if !boundary && theta[ei] < tolerance::EPS_BOUNDARY_REL * eps_scale {
        // The polish moved onto the boundary.
        let mut uu = u.clone();
        uu[ei] = 0.0;
        let t = theta_of(&uu);
        let v = model.neg2(&t);
        if v <= neg2 {
            u = uu;
            theta = t;
            neg2 = v;
            boundary = true;
        }
    }
    let mut cov = None;
    if want_cov {
        let free_idx: Vec<usize> = (0..dim).filter(|&i| !(boundary && i == ei)).collect();
        let sub: Vec<f64> = free_idx.iter().map(|&i| u[i]).collect();
        let sub_typ: Vec<f64> = free_idx.iter().map(|&i| free_steps[i]).collect();
        // −ln L = ½ (−2 ln L): the Hessian of −ln L is half that of −2 ln L.
        let half = |s: &[f64]| 0.5 * u_eval(s, &u, &free_idx);
        let h = hessian_steps(half, &sub, &sub_typ);
        let hm = hessian(half, &sub, &h);
        evaluations += (4 * sub.len() * sub.len() + 2) as u64;
        let inv = match invert_spd(&hm) {
            Some(inv) => Some(inv),
            None => {
                let pinv = positive_pseudo_inverse(&hm);
                if pinv.is_some() {
                    notes.push(
                        "The Hessian of −ln L is singular in some directions (a parameter on a boundary, such as a mixture component of zero width); errors are computed with those directions held fixed.".to_owned(),
                    );
                }
                pinv
            }
        };
        match inv {
            Some(inv) => {
                let mut c = DMatrix::zeros(dim, dim);
                for (a, &i) in free_idx.iter().enumerate() {
                    for (b, &j) in free_idx.iter().enumerate() {
                        c[(i, j)] = inv[(a, b)];
                    }
                }
                if boundary {
                    let (e_err, e_evals) = eps_profile_error(model, &theta, neg2, eps_scale, max_iterations);
                    evaluations += e_evals;
                    match e_err {
                        Some(e) => {
                            c[(ei, ei)] = e * e;
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
    Ok(MlResult {
        theta,
        neg2,
        cov,
        iterations: m.iterations,
        evaluations,
        notes,
    })
}

/// One-sided profile error of ε at the ε = 0 boundary: the ε > 0 where the profile
/// −2 ln L (other parameters re-optimised) exceeds its minimum by 1.
fn eps_profile_error<O: Objective>(
    model: &O,
    theta: &[f64],
    neg2_min: f64,
    eps_scale: f64,
    max_iterations: u64,
) -> (Option<f64>, u64) {
    let dim = model.dim();
    let ei = model.eps_index();
    let idx: Vec<usize> = (0..dim).filter(|&i| i != ei).collect();
    let typical = model.typical(theta);
    let steps: Vec<f64> = idx
        .iter()
        .map(|&i| 0.1 * typical[i].abs().max(1e-3))
        .collect();
    let mut evals = 0_u64;
    let mut start: Vec<f64> = idx.iter().map(|&i| theta[i]).collect();
    let mut profile = |e: f64, evals: &mut u64| {
        let mut t = theta.to_vec();
        t[ei] = e;
        let mut f = |s: &[f64]| {
            for (k, &i) in idx.iter().enumerate() {
                t[i] = s[k];
            }
            model.neg2(&t)
        };
        let m = nelder_mead(&mut f, &start, &steps, max_iterations);
        *evals += m.evaluations;
        start.clone_from(&m.x);
        m.f - neg2_min - tolerance::DELTA_ONE_SIGMA
    };
    let mut hi = eps_scale.max(1e-6);
    let mut found = false;
    for _ in 0..60 {
        if profile(hi, &mut evals) > 0.0 {
            found = true;
            break;
        }
        hi *= 2.0;
    }
    if !found {
        return (None, evals);
    }
    let root = bisect(
        |e| profile(e, &mut evals),
        0.0,
        hi,
        tolerance::PROFILE_X_REL * hi,
    );
    (root, evals)
}

pub(crate) mod analytic;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nelder_mead_finds_the_rosenbrock_minimum() {
        // Rosenbrock 1960, Comput. J. 3, 175: minimum 0 at (1, 1).
        let m = nelder_mead(
            |p| (1.0 - p[0]).powi(2) + 100.0 * (p[1] - p[0] * p[0]).powi(2),
            &[-1.2, 1.0],
            &[0.5, 0.5],
            10_000,
        );
        assert!(m.converged);
        assert!(
            (m.x[0] - 1.0).abs() < 1e-5 && (m.x[1] - 1.0).abs() < 1e-5,
            "{m:?}"
        );
    }

    #[test]
    fn brent_finds_the_minimum_of_a_parabola_and_cosine() {
        // (x − 2)² has its minimum at 2; cos has its minimum at π on [2, 4].
        let (x, _, _) = brent_min(|x| (x - 2.0).powi(2), -10.0, 10.0, 1e-12);
        assert!((x - 2.0).abs() < 1e-7);
        let (x, _, _) = brent_min(f64::cos, 2.0, 4.0, 1e-12);
        assert!((x - std::f64::consts::PI).abs() < 1e-7);
    }

    #[test]
    fn bisection_finds_sqrt2_and_refuses_a_non_bracket() {
        let r = bisect(|x| x * x - 2.0, 0.0, 2.0, 1e-14).unwrap_or(f64::NAN);
        assert!((r - std::f64::consts::SQRT_2).abs() < 1e-12);
        assert!(bisect(|x| x * x + 1.0, 0.0, 2.0, 1e-14).is_none());
    }

    #[test]
    fn illinois_finds_roots_and_refuses_a_non_bracket() {
        // Roots of x² − 2 (√2) and cos x on [1, 2] (π/2).
        let r = illinois(|x| x * x - 2.0, 0.0, 2.0, 1e-14).unwrap_or(f64::NAN);
        assert!((r - std::f64::consts::SQRT_2).abs() < 1e-12);
        let r = illinois(f64::cos, 1.0, 2.0, 1e-14).unwrap_or(f64::NAN);
        assert!((r - std::f64::consts::FRAC_PI_2).abs() < 1e-12);
        assert!(illinois(|x| x * x + 1.0, 0.0, 2.0, 1e-14).is_none());
    }

    #[test]
    fn hessian_of_a_quadratic_form_is_exact() {
        // f = x² + 3xy + 5y²: H = [[2, 3], [3, 10]] (elementary calculus).
        let h = hessian(
            |p| p[0] * p[0] + 3.0 * p[0] * p[1] + 5.0 * p[1] * p[1],
            &[0.3, -0.2],
            &[1e-3, 1e-3],
        );
        assert!((h[(0, 0)] - 2.0).abs() < 1e-6);
        assert!((h[(0, 1)] - 3.0).abs() < 1e-6);
        assert!((h[(1, 1)] - 10.0).abs() < 1e-6);
    }

    #[test]
    fn compensated_sum_is_order_independent() {
        let terms = [1e16, 1.0, -1e16, 3.0, 1e-3];
        let mut a = Sum::default();
        terms.iter().for_each(|&t| a.add(t));
        let mut b = Sum::default();
        terms.iter().rev().for_each(|&t| b.add(t));
        assert!((a.total() - 4.001).abs() < 1e-12 && (b.total() - 4.001).abs() < 1e-12);
    }
}
