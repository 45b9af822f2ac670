//! Newton's method on the conditional likelihood with analytic derivatives.

use super::super::influence;
use super::super::intervals::{self, Intervals};
use super::super::optimize::analytic::{self, A, Analytic, B, C, D, Derivs, E, NS, PerObject};
use super::super::optimize::{MlResult, Sum};
use super::super::special::{LN_2PI, detection_terms, fy_terms, limit_terms, norm_cdf_parts};
use super::super::types::Fit;
use std::ops::Range;

use rayon::prelude::*;

use super::super::types::Shape;
use super::{CensoredSum, LN_BLOCK, LnSum, Model};

impl Analytic for Model {
    fn slots(&self) -> Vec<usize> {
        let mut v = vec![A, B];
        if self.shape != Shape::Line {
            v.push(C);
        }
        v.push(E);
        if self.group.is_some() {
            v.push(D);
        }
        v
    }

    fn mean_vy(&self) -> f64 {
        self.data.vy.iter().sum::<f64>() / self.data.n() as f64
    }

    /// −2 ln L with derivatives (see `analytic::fy_terms` for the per-object terms):
    ///
    /// ```text
    /// μ = α + β d + c q + δ g,  q = d² (quadratic) or d2 (plane),  s = β [+ 2 c d]
    /// V = σ_y² + s² σ_x² − 2 s σ_xy [+ c² σ_x2² − 2 c σ_x2y + 2 s c σ_xx2] + ε²
    /// plane: V_β = 2(β σ_x² − σ_xy + c σ_xx2), V_c = 2(c σ_x2² − σ_x2y + β σ_xx2),
    ///        V_ββ = 2σ_x², V_cc = 2σ_x2², V_βc = 2σ_xx2
    /// H_pq = f_μμ μ_p μ_q + f_μV (μ_p V_q + V_p μ_q) + f_VV V_p V_q + f_V V_pq
    /// ```
    fn derivs(&self, p: &[f64; NS], squared: bool, act: &[usize]) -> Option<Derivs> {
        if self.shape == Shape::Line && self.group.is_none() {
            return self.derivs_line(p, squared, !act.is_empty());
        }
        let dt = &self.data;
        let (alpha, beta, c, e, delta) = (p[A], p[B], p[C], p[E], p[D]);
        let e2 = if squared { e } else { e * e };
        let (ve, vee) = if squared { (1.0, 0.0) } else { (2.0 * e, 2.0) };
        let mut f = Sum::default();
        let mut out = Derivs::zero();
        let quad = self.shape == Shape::Quadratic;
        let plane = self.shape == Shape::Plane;
        let mut mp = [0.0; NS];
        let mut vp = [0.0; NS];
        for i in 0..dt.n() {
            let d = dt.d[i];
            let gi = match &self.group {
                Some(gr) if gr[i] => 1.0,
                _ => 0.0,
            };
            let q = if quad {
                d * d
            } else if plane {
                dt.d2[i]
            } else {
                0.0
            };
            let s = if quad { beta + 2.0 * c * d } else { beta };
            let mu = alpha + beta * d + c * q + delta * gi;
            let (vx2, cx2y, cxx2) = if plane {
                (dt.vx2[i], dt.cx2y[i], dt.cxx2[i])
            } else {
                (0.0, 0.0, 0.0)
            };
            let v = dt.vy[i] + s * s * dt.vx[i] - 2.0 * s * dt.cxy[i] + c * c * vx2
                - 2.0 * c * cx2y
                + 2.0 * s * c * cxx2
                + e2;
            if v.is_nan() || v <= 0.0 {
                return None;
            }
            let t = fy_terms(dt.y[i] - mu, v, dt.lim[i]);
            f.add(t.f);
            mp[A] = 1.0;
            mp[B] = d;
            mp[C] = q;
            mp[D] = gi;
            let vb = 2.0 * (s * dt.vx[i] - dt.cxy[i] + c * cxx2);
            vp[B] = vb;
            vp[C] = if quad {
                2.0 * d * vb
            } else if plane {
                2.0 * (c * vx2 - cx2y + s * cxx2)
            } else {
                0.0
            };
            vp[E] = ve;
            for (ia, &pa) in act.iter().enumerate() {
                out.g[pa] += t.fm * mp[pa] + t.fv * vp[pa];
                for &pb in &act[ia..] {
                    out.h[pa][pb] += t.fmm * mp[pa] * mp[pb]
                        + t.fmv * (mp[pa] * vp[pb] + vp[pa] * mp[pb])
                        + t.fvv * vp[pa] * vp[pb];
                }
            }
            // Second derivatives of V (μ is linear in the parameters).
            out.h[B][B] += t.fv * 2.0 * dt.vx[i];
            if quad {
                out.h[B][C] += t.fv * 4.0 * d * dt.vx[i];
                out.h[C][C] += t.fv * 8.0 * d * d * dt.vx[i];
            } else if plane {
                out.h[B][C] += t.fv * 2.0 * cxx2;
                out.h[C][C] += t.fv * 2.0 * vx2;
            }
            out.h[E][E] += t.fv * vee;
        }
        out.f = f.total();
        out.symmetrise(act);
        out.f.is_finite().then_some(out)
    }
}

impl Model {
    /// The straight line without offset, with scalar accumulators (the common, large-sample
    /// case): the same equations as the general `derivs`, with μ_p = (1, d, 0) and
    /// V_p = (0, 2(β σ_x² − σ_xy), V_ε) over (α, β, ε).
    ///
    /// The objects are swept in chunks of [`SWEEP_CHUNK`]; large samples
    /// (≥ [`PARALLEL_MIN`] objects) sweep the chunks on the rayon pool. The chunk partial
    /// sums are always combined in chunk order, so the result does not depend on the
    /// number of threads (or on whether the pool is used).
    fn derivs_line(&self, p: &[f64; NS], squared: bool, with_derivs: bool) -> Option<Derivs> {
        let n = self.data.n();
        let (alpha, beta, e) = (p[A], p[B], p[E]);
        let e2 = if squared { e } else { e * e };
        let (ve, vee) = if squared { (1.0, 0.0) } else { (2.0 * e, 2.0) };
        let k = LineCoef {
            alpha,
            beta,
            e2,
            ve,
            vee,
        };
        let n_chunks = n.div_ceil(SWEEP_CHUNK);
        let chunk = |c: usize| {
            let range = c * SWEEP_CHUNK..((c + 1) * SWEEP_CHUNK).min(n);
            self.line_chunk(range, &k, with_derivs)
        };
        let mut f = Sum::default();
        let mut acc = LineSums::default();
        let mut add = |part: LineSums| {
            f.add(part.f);
            for (a, b) in acc.g.iter_mut().zip(part.g) {
                *a += b;
            }
            for (a, b) in acc.h.iter_mut().zip(part.h) {
                *a += b;
            }
        };
        if n >= PARALLEL_MIN {
            let parts: Vec<Option<LineSums>> = (0..n_chunks).into_par_iter().map(chunk).collect();
            for part in parts {
                add(part?);
            }
        } else {
            for c in 0..n_chunks {
                add(chunk(c)?);
            }
        }
        let mut out = Derivs::zero();
        out.f = f.total();
        if with_derivs {
            out.g[A] = acc.g[0];
            out.g[B] = acc.g[1];
            out.g[E] = acc.g[2];
            let entries = [(A, A), (A, B), (A, E), (B, B), (B, E), (E, E)];
            for ((a, b), v) in entries.into_iter().zip(acc.h) {
                out.h[a][b] = v;
                out.h[b][a] = v;
            }
        }
        out.f.is_finite().then_some(out)
    }

    /// −2 ln L of the objects in `range` (and, `with_derivs`, its gradient and Hessian
    /// over α, β, ε), for [`Model::derivs_line`]; `None` if some V_i ≤ 0.
    fn line_chunk(&self, range: Range<usize>, k: &LineCoef, with_derivs: bool) -> Option<LineSums> {
        let dt = &self.data;
        let (ds, vxs, ys, vys, cxys, lims) = (
            &dt.d[range.clone()],
            &dt.vx[range.clone()],
            &dt.y[range.clone()],
            &dt.vy[range.clone()],
            &dt.cxy[range.clone()],
            &dt.lim[range],
        );
        let n = ds.len();
        let (vxs, ys, vys, cxys, lims) = (&vxs[..n], &ys[..n], &vys[..n], &cxys[..n], &lims[..n]);
        let (alpha, beta, e2, ve, vee) = (k.alpha, k.beta, k.e2, k.ve, k.vee);
        // −2 ln L in three parts: Σ r²/V over detections (plain within blocks of
        // LN_BLOCK objects, compensated across them), Σ ln V (one logarithm per block)
        // and the censored terms; N_det ln 2π is added once.
        let mut f = Sum::default();
        let mut part = 0.0;
        let mut ln_v = LnSum::new();
        let mut cens = CensoredSum::new();
        let mut n_det = 0_usize;
        let mut out = LineSums::default();
        if !with_derivs {
            for i in 0..n {
                let v = vys[i] + beta * beta * vxs[i] - 2.0 * beta * cxys[i] + e2;
                if v.is_nan() || v <= 0.0 {
                    return None;
                }
                let r = ys[i] - alpha - beta * ds[i];
                if lims[i] {
                    cens.push(norm_cdf_parts(r / v.sqrt()));
                } else {
                    part += r * r / v;
                    ln_v.push(v);
                    n_det += 1;
                }
                if i % LN_BLOCK == LN_BLOCK - 1 {
                    f.add(part);
                    part = 0.0;
                }
            }
        } else {
            let (mut ga, mut gb, mut ge) = (0.0, 0.0, 0.0);
            let (mut haa, mut hab, mut hae, mut hbb, mut hbe, mut hee) =
                (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
            for i in 0..n {
                let d = ds[i];
                let v = vys[i] + beta * beta * vxs[i] - 2.0 * beta * cxys[i] + e2;
                if v.is_nan() || v <= 0.0 {
                    return None;
                }
                let r = ys[i] - alpha - beta * d;
                let t = if lims[i] {
                    let (t, c) = limit_terms(r, v);
                    cens.push(c);
                    t
                } else {
                    let t = detection_terms(r, v);
                    part += t.f;
                    ln_v.push(v);
                    n_det += 1;
                    t
                };
                if i % LN_BLOCK == LN_BLOCK - 1 {
                    f.add(part);
                    part = 0.0;
                }
                let vb = 2.0 * (beta * vxs[i] - cxys[i]);
                ga += t.fm;
                gb += t.fm * d + t.fv * vb;
                ge += t.fv * ve;
                haa += t.fmm;
                hab += t.fmm * d + t.fmv * vb;
                hae += t.fmv * ve;
                hbb += t.fmm * d * d + 2.0 * t.fmv * d * vb + t.fvv * vb * vb + t.fv * 2.0 * vxs[i];
                hbe += (t.fmv * d + t.fvv * vb) * ve;
                hee += t.fvv * ve * ve + t.fv * vee;
            }
            out.g = [ga, gb, ge];
            out.h = [haa, hab, hae, hbb, hbe, hee];
        }
        f.add(part);
        f.add(n_det as f64 * LN_2PI);
        f.add(ln_v.total());
        f.add(cens.total());
        out.f = f.total();
        Some(out)
    }
}

/// Objects per chunk of a line sweep (a multiple of [`LN_BLOCK`]).
const SWEEP_CHUNK: usize = 8192;
/// Samples at least this large sweep their chunks in parallel.
const PARALLEL_MIN: usize = 20_000;

/// α, β, ε² (and the derivatives of V in ε) of one line sweep.
struct LineCoef {
    alpha: f64,
    beta: f64,
    e2: f64,
    ve: f64,
    vee: f64,
}

/// Partial sums of one chunk: −2 ln L, gradient (α, β, ε) and Hessian (αα, αβ, αε, ββ,
/// βε, εε).
#[derive(Clone, Copy, Debug, Default)]
struct LineSums {
    f: f64,
    g: [f64; 3],
    h: [f64; 6],
}

/// Maximises the conditional likelihood by Newton's method; `None` to fall back.
/// The slots of θ (slot order, ε² in slot E).
fn slots_of(model: &Model, theta: &[f64]) -> [f64; NS] {
    let mut p = [0.0; NS];
    for (k, &s) in model.slots().iter().enumerate() {
        p[s] = theta[k];
    }
    p[E] *= p[E];
    p
}

/// The restricted-likelihood intervals at the maximum `theta`
/// ([`crate::fit::intervals::restricted`]).
pub(super) fn restricted(model: &Model, theta: &[f64]) -> Option<Intervals> {
    intervals::restricted(
        model,
        super::super::relation_names(model.shape),
        &slots_of(model, theta),
        model.data.n(),
    )
}

pub(super) fn maximise(model: &Model, theta0: &[f64], want_cov: bool) -> Option<MlResult> {
    let slots = model.slots();
    let r = analytic::maximise(model, slots_of(model, theta0), want_cov)?;
    debug_assert_eq!(r.p.len(), NS);
    let theta: Vec<f64> = slots
        .iter()
        .map(|&s| if s == E { r.p[E].sqrt() } else { r.p[s] })
        .collect();
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
/// derivatives are those of [`Analytic::derivs`], restricted to one row.
impl PerObject for Model {
    fn n_objects(&self) -> usize {
        self.data.n()
    }

    fn one(&self, i: usize) -> Model {
        Model {
            data: influence::row(&self.data, i),
            shape: self.shape,
            names: self.names.clone(),
            group: self.group.as_ref().map(|g| vec![g[i]]),
            y_center: self.y_center,
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
    use super::super::super::types::test_data::{Sim, hogg, simulate};
    use super::super::super::{FitSpec, Method, optimize};
    use super::*;

    #[test]
    fn analytic_newton_agrees_with_the_simplex_and_numerical_hessian() {
        // Two independent routes to the same maximum: Newton with analytic derivatives, and
        // the simplex search with a central-difference Hessian.
        let s = Sim {
            n: 80,
            seed: 9,
            limit_fraction: 0.2,
            beta2: 3.0,
            ..Sim::default()
        };
        let mut pts = simulate(&s);
        for (i, p) in pts.iter_mut().enumerate() {
            p.xy_cov = if i % 3 == 0 {
                0.3 * p.x_err * p.y_err
            } else {
                0.0
            };
            p.x2 = Some(0.1 * (i as f64 % 7.0));
            p.x2_err = 0.05;
            // Plane: x2–y and x–x2 error covariances of both signs (a limit has no y error).
            p.x2_y_cov = if i % 2 == 0 { 0.4 } else { -0.3 } * p.x2_err * p.y_err;
            p.x_x2_cov = if i % 3 == 1 { -0.5 } else { 0.2 } * p.x_err * p.x2_err;
        }
        for shape in [Shape::Line, Shape::Quadratic, Shape::Plane] {
            let spec = FitSpec::new(Method::Conditional, s.pivot)
                .with_shape(shape)
                .expect("spec");
            let model = Model::new(&pts, &spec).expect("model");
            let t0 = model.initial();
            let a = maximise(&model, &t0, true).expect("newton");
            let b = optimize::maximise_likelihood(&model, &t0, 100_000, true).expect("simplex");
            assert!(
                (a.neg2 - b.neg2).abs() < 1e-8,
                "{shape:?} {} {}",
                a.neg2,
                b.neg2
            );
            let (ca, cb) = (a.cov.expect("cov"), b.cov.expect("cov"));
            for i in 0..a.theta.len() {
                let sd = ca[(i, i)].sqrt();
                assert!((a.theta[i] - b.theta[i]).abs() < 1e-5 * sd, "{shape:?} {i}");
                assert!((sd / cb[(i, i)].sqrt() - 1.0).abs() < 1e-4, "{shape:?} {i}");
            }
        }
        // Hogg et al. 2010 points 5–20 take the boundary branch of the Newton path.
        let model = Model::new(&hogg(5), &FitSpec::new(Method::Conditional, 0.0)).expect("model");
        let a = maximise(&model, &model.initial(), true).expect("newton");
        assert!(a.theta[2].abs() < 1e-300 && a.notes.iter().any(|n| n.contains("boundary")));
    }
}
