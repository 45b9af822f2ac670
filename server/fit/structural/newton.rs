//! Analytic derivatives of the K = 1 straight-line structural likelihood.

use super::super::conditional::{CensoredSum, LnSum};
use super::super::influence;
use super::super::intervals::{self, Intervals};
use super::super::optimize::analytic::{self, A, Analytic, B, D, Derivs, E, M, NS, PerObject, T};
use super::super::optimize::{MlResult, Sum};
use super::super::special::{LN_2PI, detection_terms, limit_terms, norm_cdf_parts};
use super::super::types::Fit;
use super::Model;

impl Analytic for Model {
    fn slots(&self) -> Vec<usize> {
        let mut v = vec![A, B, E, M, T];
        if self.group.is_some() {
            v.push(D);
        }
        v
    }

    fn mean_vy(&self) -> f64 {
        self.data.vy.iter().sum::<f64>() / self.data.n() as f64
    }

    /// −2 ln L of the K = 1 line and its derivatives over α, β, ε² (or ε), μ, τ², δ:
    ///
    /// ```text
    /// a = τ² + σ_x², dx = d − μ, k = dx/a, b = β τ² + σ_xy, u = β − b/a
    /// m = α + β μ + b k + δ g,   S = β² τ² + ε² + σ_y² − b²/a
    /// f = ln 2π + ln a + dx²/a + f_y(y − m, S)
    /// m_β = μ + τ² k, m_μ = u, m_τ² = k u;  S_β = 2 τ² u, S_τ² = u²
    /// m_βμ = σ_x²/a, m_βτ² = k σ_x²/a, m_μτ² = −u/a, m_τ²τ² = −2 k u/a
    /// S_ββ = 2 τ² σ_x²/a, S_βτ² = 2 u σ_x²/a, S_τ²τ² = −2 u²/a
    /// ```
    fn derivs(&self, p: &[f64; NS], squared: bool, act: &[usize]) -> Option<Derivs> {
        let dt = &self.data;
        let (alpha, beta, e, delta, mu, t) = (p[A], p[B], p[E], p[D], p[M], p[T]);
        if t.is_nan() || t <= 0.0 {
            return None;
        }
        let e2 = if squared { e } else { e * e };
        let (se, see) = if squared { (1.0, 0.0) } else { (2.0 * e, 2.0) };
        let mut f = Sum::default();
        let mut part = 0.0;
        let mut ln_f = LnSum::new();
        let mut cens = CensoredSum::new();
        let mut n_2pi = 0_usize;
        let mut out = Derivs::zero();
        let mut mp = [0.0; NS];
        let mut sp = [0.0; NS];
        let mut xp = [0.0; NS];
        const ORDER: [usize; 5] = [A, B, E, M, T];
        let full = act == ORDER;
        let mut g5 = [0.0; 5];
        let mut h5 = [[0.0; 5]; 5];
        for i in 0..dt.n() {
            let (vx, cxy) = (dt.vx[i], dt.cxy[i]);
            let gi = match &self.group {
                Some(gr) if gr[i] => 1.0,
                _ => 0.0,
            };
            let a = t + vx;
            let ia = 1.0 / a;
            let dx = dt.d[i] - mu;
            let k = dx * ia;
            let b = beta * t + cxy;
            let u = beta - b * ia;
            let m = alpha + beta * mu + b * k + delta * gi;
            let s2 = beta * beta * t + e2 + dt.vy[i] - b * b * ia;
            if s2.is_nan() || s2 <= 0.0 {
                return None;
            }
            let r = dt.y[i] - m;
            // −2 ln L_i = ln 2π + ln a + dx²/a + f_y: the logarithms go into `ln_f` (one
            // per block), the constants ln 2π are counted, the rest is summed plainly
            // within blocks of four objects and with compensation across them.
            ln_f.push(a);
            n_2pi += 1;
            let ty = if act.is_empty() {
                if dt.lim[i] {
                    cens.push(norm_cdf_parts(r / s2.sqrt()));
                    part += dx * k;
                } else {
                    ln_f.push(s2);
                    n_2pi += 1;
                    part += dx * k + r * r / s2;
                }
                None
            } else if dt.lim[i] {
                let (t, c) = limit_terms(r, s2);
                cens.push(c);
                part += dx * k;
                Some(t)
            } else {
                let t = detection_terms(r, s2);
                ln_f.push(s2);
                n_2pi += 1;
                part += dx * k + t.f;
                Some(t)
            };
            if i % 4 == 3 {
                f.add(part);
                part = 0.0;
            }
            let Some(ty) = ty else {
                continue;
            };
            mp[A] = 1.0;
            mp[B] = mu + t * k;
            mp[M] = u;
            mp[T] = k * u;
            mp[D] = gi;
            sp[B] = 2.0 * t * u;
            sp[E] = se;
            sp[T] = u * u;
            xp[M] = -2.0 * k;
            xp[T] = ia - k * k;
            if full {
                // Constant-size loops over (α, β, ε, μ, τ²) that the compiler unrolls.
                let m5 = [mp[A], mp[B], mp[E], mp[M], mp[T]];
                let s5 = [sp[A], sp[B], sp[E], sp[M], sp[T]];
                let x5 = [xp[A], xp[B], xp[E], xp[M], xp[T]];
                for a in 0..5 {
                    g5[a] += ty.fm * m5[a] + ty.fv * s5[a] + x5[a];
                    for b in a..5 {
                        h5[a][b] += ty.fmm * m5[a] * m5[b]
                            + ty.fmv * (m5[a] * s5[b] + s5[a] * m5[b])
                            + ty.fvv * s5[a] * s5[b];
                    }
                }
            } else {
                for (ja, &pa) in act.iter().enumerate() {
                    out.g[pa] += ty.fm * mp[pa] + ty.fv * sp[pa] + xp[pa];
                    for &pb in &act[ja..] {
                        out.h[pa][pb] += ty.fmm * mp[pa] * mp[pb]
                            + ty.fmv * (mp[pa] * sp[pb] + sp[pa] * mp[pb])
                            + ty.fvv * sp[pa] * sp[pb];
                    }
                }
            }
            let r = vx * ia;
            // Second derivatives of m, S and of the x term (the latter: ln a + dx²/a).
            out.h[B][M] += ty.fm * r;
            out.h[B][T] += ty.fm * k * r + ty.fv * 2.0 * u * r;
            out.h[M][T] += ty.fm * (-u * ia) + 2.0 * k * ia;
            out.h[T][T] += ty.fm * (-2.0 * k * u * ia) + ty.fv * (-2.0 * u * u * ia) - ia * ia
                + 2.0 * k * k * ia;
            out.h[B][B] += ty.fv * 2.0 * t * r;
            out.h[E][E] += ty.fv * see;
            out.h[M][M] += 2.0 * ia;
        }
        if full {
            for a in 0..5 {
                out.g[ORDER[a]] += g5[a];
                for b in a..5 {
                    out.h[ORDER[a]][ORDER[b]] += h5[a][b];
                }
            }
        }
        f.add(part);
        f.add(n_2pi as f64 * LN_2PI);
        f.add(ln_f.total());
        f.add(cens.total());
        out.f = f.total();
        out.symmetrise(act);
        out.f.is_finite().then_some(out)
    }
}

/// The slots of θ = α, β, ε, μ (unpivoted), τ, [δ] (ε² and τ² in theirs, μ pivoted).
fn slots_of(model: &Model, theta: &[f64]) -> [f64; NS] {
    let mut p = [0.0; NS];
    p[A] = theta[0];
    p[B] = theta[1];
    p[E] = theta[2] * theta[2];
    p[M] = theta[3] - model.pivot;
    p[T] = theta[4] * theta[4];
    if model.group.is_some() {
        p[D] = theta[5];
    }
    p
}

/// The restricted-likelihood intervals of the K = 1 line at its maximum `theta`
/// ([`crate::fit::intervals::restricted`]).
pub(super) fn restricted(model: &Model, theta: &[f64]) -> Option<Intervals> {
    intervals::restricted(
        model,
        super::super::relation_names(model.shape),
        &slots_of(model, theta),
        model.data.n(),
    )
}

/// Maximises the K = 1 line by Newton's method; `None` to fall back.
pub(super) fn maximise(model: &Model, theta0: &[f64], want_cov: bool) -> Option<MlResult> {
    let r = analytic::maximise(model, slots_of(model, theta0), want_cov)?;
    let mut theta = vec![
        r.p[A],
        r.p[B],
        r.p[E].sqrt(),
        r.p[M] + model.pivot,
        r.p[T].sqrt(),
    ];
    if model.group.is_some() {
        theta.push(r.p[D]);
    }
    Some(MlResult {
        theta,
        neg2: r.neg2,
        cov: r.cov,
        iterations: r.iterations,
        evaluations: r.evaluations,
        notes: r.notes,
    })
}

/// Object by object, for the one-step influence of each object (docs/methods.md §6.1); the
/// derivatives are those of [`Analytic::derivs`] of the K = 1 line, restricted to one row.
impl PerObject for Model {
    fn n_objects(&self) -> usize {
        self.data.n()
    }

    fn one(&self, i: usize) -> Model {
        Model {
            data: influence::row(&self.data, i),
            shape: self.shape,
            k: self.k,
            pivot: self.pivot,
            pivot2: self.pivot2,
            names: self.names.clone(),
            group: self.group.as_ref().map(|g| vec![g[i]]),
        }
    }

    fn load(&mut self, from: &Model, i: usize) {
        influence::set_row(&mut self.data, &from.data, i);
        if let (Some(g), Some(f)) = (self.group.as_mut(), from.group.as_ref()) {
            g[0] = f[i];
        }
    }

    fn set_row(&mut self, row: super::super::types::Data) {
        self.data = row;
        if let Some(g) = self.group.as_mut() {
            g[0] = false;
        }
    }

    fn slots_of_fit(&self, fit: &Fit) -> [f64; NS] {
        let mut p = slots_of(self, &self.start(fit));
        p[E] = p[E].sqrt();
        p
    }
}

#[cfg(test)]
mod tests {
    use super::super::super::types::prepare;
    use super::super::super::types::test_data::{Sim, simulate};
    use super::super::super::{FitSpec, Method, optimize};
    use super::*;

    #[test]
    fn analytic_newton_agrees_with_the_simplex_and_numerical_hessian() {
        // Two independent routes to the K = 1 line maximum (with limits, x–y error covariance
        // and a subsample offset): Newton with analytic derivatives, and the simplex search
        // with a central-difference Hessian.
        let s = Sim {
            n: 80,
            seed: 19,
            limit_fraction: 0.2,
            ..Sim::default()
        };
        let mut pts = simulate(&s);
        for (i, p) in pts.iter_mut().enumerate() {
            if i % 3 == 0 {
                p.xy_cov = 0.4 * p.x_err * p.y_err;
            }
        }
        let sp = FitSpec::new(Method::Structural, s.pivot);
        for group in [
            None,
            Some((0..80).map(|i| i % 2 == 0).collect::<Vec<bool>>()),
        ] {
            let data = prepare(&pts, &sp, 4).expect("data");
            let model = Model::from_data(data, &sp, group);
            let t0 = model.initial();
            let a = maximise(&model, &t0, true).expect("newton");
            let b = optimize::maximise_likelihood(&model, &t0, 100_000, true).expect("simplex");
            assert!((a.neg2 - b.neg2).abs() < 1e-7, "{} {}", a.neg2, b.neg2);
            let (ca, cb) = (a.cov.expect("cov"), b.cov.expect("cov"));
            // Relation block (and offset) only: the nuisance parametrisations differ.
            let mut idx = vec![0, 1, 2];
            if a.theta.len() == 6 {
                idx.push(5);
            }
            for &i in &idx {
                let sd = ca[(i, i)].sqrt();
                assert!(
                    (a.theta[i] - b.theta[i]).abs() < 1e-4 * sd,
                    "{i}: {} {}",
                    a.theta[i],
                    b.theta[i]
                );
                assert!((sd / cb[(i, i)].sqrt() - 1.0).abs() < 1e-3, "{i}");
            }
        }
    }
}
