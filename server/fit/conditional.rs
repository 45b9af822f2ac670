//! Maximum likelihood conditional on the observed host property (the "errors in both
//! coordinates plus intrinsic scatter" likelihood of Gültekin et al. 2009 and others).
//!
//! **It underestimates the slope when the x errors matter** (regression dilution): the observed
//! x is treated as if it were the true x, so when σ_x is not small compared to the spread of
//! the true x, |β| is biased towards 0 (on simulated M–σ samples with σ errors of 0.01–0.035
//! dex, by about −0.14 in β; science notes §2.6). Use [`super::structural`] in that case.

use nalgebra::DMatrix;

use super::optimize::{self, MlResult, Objective, Sum};
use super::types::{Data, prepare};
use super::{
    Fit, FitError, FitSpec, Method, Params, Shape, Termination, min_points, relation_names,
};

/// ln(2π).
const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// Natural logarithm of the standard normal CDF, accurate far into the lower tail.
///
/// # Model
/// ```text
/// ln Φ(z) = ln[½ erfc(−z/√2)]                                   z ≥ −20
/// ln Φ(z) ≈ −z²/2 − ln(−z) − ½ ln(2π) + ln(1 − 1/z² + 3/z⁴ − 15/z⁶)   z < −20
/// ```
/// z is dimensionless.
///
/// # Errors
/// None; returns −∞ only for z = −∞.
///
/// # References
/// Abramowitz & Stegun 1964, 26.2.12 (asymptotic expansion of the normal tail).
pub fn ln_norm_cdf(z: f64) -> f64 {
    if z >= -20.0 {
        (0.5 * statrs::function::erf::erfc(-z / std::f64::consts::SQRT_2)).ln()
    } else {
        let z2 = z * z;
        -0.5 * z2 - (-z).ln() - 0.5 * LN_2PI
            + (1.0 - 1.0 / z2 + 3.0 / (z2 * z2) - 15.0 / (z2 * z2 * z2)).ln()
    }
}

/// Conditional likelihood of a sample (optionally with a zero-point offset for a flagged
/// subsample).
#[derive(Clone, Debug)]
pub(crate) struct Model {
    data: Data,
    shape: Shape,
    names: Vec<&'static str>,
    group: Option<Vec<bool>>,
    y_center: f64,
}

impl Model {
    /// Validates `points` and builds the model.
    pub(crate) fn new(points: &[super::Point], spec: &FitSpec) -> Result<Model, FitError> {
        let spec_c = FitSpec {
            method: Method::Conditional,
            ..spec.clone()
        };
        let data = prepare(points, &spec_c, min_points(&spec_c))?;
        Ok(Model::from_data(data, spec.shape, None))
    }

    /// Builds the model from validated data; `group` flags the objects that get the offset δ.
    pub(crate) fn from_data(data: Data, shape: Shape, group: Option<Vec<bool>>) -> Model {
        let mut names = relation_names(shape).to_vec();
        if group.is_some() {
            names.push("offset");
        }
        let y_center = data.y.iter().sum::<f64>() / data.n() as f64;
        Model {
            data,
            shape,
            names,
            group,
            y_center,
        }
    }

    /// Parameter names in θ order.
    pub(crate) fn names(&self) -> &[&'static str] {
        &self.names
    }

    /// ln L(θ) for samplers.
    pub(crate) fn log_likelihood(&self, theta: &[f64]) -> f64 {
        if theta.len() != self.names.len() || theta[self.eps_index()] < 0.0 {
            return f64::NEG_INFINITY;
        }
        let v = self.neg2(theta);
        if v.is_finite() {
            -0.5 * v
        } else {
            f64::NEG_INFINITY
        }
    }

    /// The ML point of `fit` in θ layout.
    pub(crate) fn start(&self, fit: &Fit) -> Vec<f64> {
        theta_params_to_vec(self.shape, &fit.params)
    }

    /// θ → relation parameters.
    pub(crate) fn params(&self, theta: &[f64]) -> Params {
        theta_params(self.shape, theta)
    }

    /// The relation parameters in the first slots of θ.
    fn parts(&self, theta: &[f64]) -> (f64, f64, f64, f64) {
        match self.shape {
            Shape::Line => (theta[0], theta[1], 0.0, theta[2]),
            Shape::Quadratic | Shape::Plane => (theta[0], theta[1], theta[2], theta[3]),
        }
    }

    /// Starting point: weighted least squares on the detections, ε from the excess scatter.
    pub(crate) fn initial(&self) -> Vec<f64> {
        let (alpha, beta, eps) = ols_start(&self.data);
        let mut t = vec![alpha, beta];
        if self.shape != Shape::Line {
            t.push(0.0);
        }
        t.push(eps);
        if self.group.is_some() {
            t.push(0.0);
        }
        t
    }
}

/// θ → relation parameters for a shape with layout alpha, beta, [beta2|gamma], eps.
pub(crate) fn theta_params(shape: Shape, theta: &[f64]) -> Params {
    match shape {
        Shape::Line => Params {
            alpha: theta[0],
            beta: theta[1],
            beta2: None,
            gamma: None,
            eps: theta[2],
        },
        Shape::Quadratic => Params {
            alpha: theta[0],
            beta: theta[1],
            beta2: Some(theta[2]),
            gamma: None,
            eps: theta[3],
        },
        Shape::Plane => Params {
            alpha: theta[0],
            beta: theta[1],
            beta2: None,
            gamma: Some(theta[2]),
            eps: theta[3],
        },
    }
}

/// Relation parameters → the first slots of θ (alpha, beta, [beta2|gamma], eps).
pub(crate) fn theta_params_to_vec(shape: Shape, p: &Params) -> Vec<f64> {
    let mut t = vec![p.alpha, p.beta];
    match shape {
        Shape::Line => {}
        Shape::Quadratic => t.push(p.beta2.unwrap_or(0.0)),
        Shape::Plane => t.push(p.gamma.unwrap_or(0.0)),
    }
    t.push(p.eps);
    t
}

/// Ordinary least squares of y on x − x0 over the detections, and ε² = max(var(residual) −
/// mean(σ_y² + β²σ_x²), (0.3 sd residual)²) as a start for the likelihood fits.
pub(crate) fn ols_start(data: &Data) -> (f64, f64, f64) {
    let det = || (0..data.n()).filter(|&i| !data.lim[i]);
    let n = det().count() as f64;
    let mx = det().map(|i| data.d[i]).sum::<f64>() / n;
    let my = det().map(|i| data.y[i]).sum::<f64>() / n;
    let sxx: f64 = det().map(|i| (data.d[i] - mx).powi(2)).sum();
    let sxy: f64 = det().map(|i| (data.d[i] - mx) * (data.y[i] - my)).sum();
    let beta = if sxx > 0.0 { sxy / sxx } else { 0.0 };
    let alpha = my - beta * mx;
    let res2: f64 = det()
        .map(|i| (data.y[i] - alpha - beta * data.d[i]).powi(2))
        .sum::<f64>()
        / n;
    let meas: f64 = det()
        .map(|i| data.vy[i] + beta * beta * data.vx[i])
        .sum::<f64>()
        / n;
    let eps = (res2 - meas).max(0.09 * res2).sqrt().max(1e-3);
    (alpha, beta, eps)
}

impl Objective for Model {
    fn dim(&self) -> usize {
        self.names.len()
    }

    fn eps_index(&self) -> usize {
        super::relation_param_count(self.shape) - 1
    }

    fn neg2(&self, theta: &[f64]) -> f64 {
        let (alpha, beta, c2, eps) = self.parts(theta);
        let delta = if self.group.is_some() {
            theta[self.names.len() - 1]
        } else {
            0.0
        };
        let e2 = eps * eps;
        let dt = &self.data;
        let mut sum = Sum::default();
        for i in 0..dt.n() {
            let d = dt.d[i];
            let (mean, g, extra) = match self.shape {
                Shape::Line => (alpha + beta * d, beta, 0.0),
                Shape::Quadratic => (alpha + beta * d + c2 * d * d, beta + 2.0 * c2 * d, 0.0),
                Shape::Plane => (alpha + beta * d + c2 * dt.d2[i], beta, c2 * c2 * dt.vx2[i]),
            };
            let mean = match &self.group {
                Some(gr) if gr[i] => mean + delta,
                _ => mean,
            };
            let v = dt.vy[i] + g * g * dt.vx[i] - 2.0 * g * dt.cxy[i] + extra + e2;
            if v <= 0.0 {
                return f64::INFINITY;
            }
            let r = dt.y[i] - mean;
            if dt.lim[i] {
                sum.add(-2.0 * ln_norm_cdf(r / v.sqrt()));
            } else {
                sum.add(r * r / v + v.ln() + LN_2PI);
            }
        }
        sum.total()
    }

    fn theta_to_free(&self, theta: &[f64]) -> Vec<f64> {
        theta.to_vec()
    }

    fn free_to_theta(&self, u: &[f64], theta: &mut [f64]) {
        theta.copy_from_slice(u);
        let ei = self.eps_index();
        theta[ei] = theta[ei].abs();
    }

    fn typical(&self, theta: &[f64]) -> Vec<f64> {
        let dt = &self.data;
        let n = dt.n() as f64;
        let sd_y = (dt
            .y
            .iter()
            .map(|y| (y - self.y_center).powi(2))
            .sum::<f64>()
            / n)
            .sqrt();
        let md = dt.d.iter().sum::<f64>() / n;
        let sd_x = (dt.d.iter().map(|d| (d - md).powi(2)).sum::<f64>() / n)
            .sqrt()
            .max(1e-12);
        let mut t = vec![0.1 * sd_y.max(1e-6); theta.len()];
        t[1] = 0.1 * (theta[1].abs() + sd_y / sd_x).max(1e-6);
        if self.shape == Shape::Quadratic {
            t[2] = 0.1 * (theta[2].abs() + sd_y / (sd_x * sd_x)).max(1e-6);
        }
        if self.shape == Shape::Plane {
            let m2 = dt.d2.iter().sum::<f64>() / n;
            let sd2 = (dt.d2.iter().map(|d| (d - m2).powi(2)).sum::<f64>() / n)
                .sqrt()
                .max(1e-12);
            t[2] = 0.1 * (theta[2].abs() + sd_y / sd2).max(1e-6);
        }
        let ei = self.eps_index();
        t[ei] = 0.3 * theta[ei].abs().max(0.1 * sd_y).max(1e-6);
        t
    }

    fn best_alpha(&self, theta: &[f64]) -> Option<f64> {
        if self.data.n_upper > 0 || self.group.is_some() {
            return None;
        }
        let (_, beta, c2, eps) = self.parts(theta);
        let e2 = eps * eps;
        let dt = &self.data;
        let (mut sw, mut swr) = (Sum::default(), Sum::default());
        for i in 0..dt.n() {
            let d = dt.d[i];
            let (rest, g, extra) = match self.shape {
                Shape::Line => (beta * d, beta, 0.0),
                Shape::Quadratic => (beta * d + c2 * d * d, beta + 2.0 * c2 * d, 0.0),
                Shape::Plane => (beta * d + c2 * dt.d2[i], beta, c2 * c2 * dt.vx2[i]),
            };
            let v = dt.vy[i] + g * g * dt.vx[i] - 2.0 * g * dt.cxy[i] + extra + e2;
            if v <= 0.0 {
                return None;
            }
            let w = 1.0 / v;
            sw.add(w);
            swr.add(w * (dt.y[i] - self.y_center - rest));
        }
        Some(self.y_center + swr.total() / sw.total())
    }
}

/// Conditional maximum-likelihood fit.
///
/// # Model
/// ```text
/// μ_i = α + β d_i [+ β2 d_i²] [+ γ d2_i],       d_i = x_i − x0, d2_i = x2_i − x02
/// g_i = ∂μ_i/∂x = β [+ 2 β2 d_i]
/// V_i = σ_y,i² + g_i² σ_x,i² − 2 g_i σ_xy,i [+ γ² σ_x2,i²] + ε²
/// detection:   −2 ln L_i = (y_i − μ_i)²/V_i + ln(2π V_i)
/// upper limit: −2 ln L_i = −2 ln Φ((y_i − μ_i)/√V_i)
/// ```
/// y, x, x2 in log10 units; σ's and ε in dex; σ_xy in dex²; α in log10 M☉; β, γ dex/dex,
/// β2 dex/dex². The x1–x2 error covariance of a plane is not modelled.
///
/// Without limits α is found in closed form, α̂ = Σ w_i (y_i − μ_i + α)/Σ w_i with w = 1/V,
/// and the other parameters by a simplex search; with limits all are searched. A Newton
/// polish follows; the covariance is the inverse central-difference Hessian of −ln L. When ε
/// sits at 0, `termination.reason` says so and ε's error is the one-sided profile bound.
///
/// **This estimator underestimates |β| when x errors matter** (regression dilution): it
/// conditions on the observed x as if it were the true one. Prefer the structural estimator.
///
/// # Errors
/// Input errors as in [`super::fit`]; [`FitError::TooFewPoints`] below [`min_points`]
/// (4 detections for a line, 5 for a quadratic or plane); [`FitError::NotConverged`].
///
/// # References
/// Gültekin et al. 2009, ApJ 698, 198 (ML with intrinsic scatter and censored limits);
/// Tremaine et al. 2002, ApJ 574, 740 (the variance V_i); science notes §2.1, §2.2, §2.7.
pub fn fit(points: &[super::Point], spec: &FitSpec) -> Result<Fit, FitError> {
    let model = Model::new(points, spec)?;
    fit_model(&model, spec)
}

/// Fits a prepared conditional model and assembles the result.
pub(crate) fn fit_model(model: &Model, spec: &FitSpec) -> Result<Fit, FitError> {
    let theta0 = model.initial();
    let ml = run(model, &theta0, true)?;
    bounded(ml.neg2, ml.theta[model.eps_index()], &model.data)?;
    Ok(assemble(
        spec,
        model.shape,
        &ml,
        model.data.n(),
        model.data.n_upper,
        None,
    ))
}

/// Refuses a maximum of an unbounded likelihood: −2 ln L not finite, or ε = 0 with detections
/// that carry no measurement errors at all (then the density at the relation is infinite and
/// any finite value is rounding).
pub(crate) fn bounded(neg2: f64, eps: f64, data: &Data) -> Result<(), FitError> {
    let no_errors = (0..data.n()).all(|i| data.lim[i] || (data.vx[i] == 0.0 && data.vy[i] == 0.0));
    if neg2.is_finite() && !(eps == 0.0 && no_errors) {
        Ok(())
    } else {
        Err(FitError::Unsupported {
            what: "The likelihood is unbounded because the detections lie exactly on the relation without measurement errors.".to_owned(),
        })
    }
}

/// Runs the maximiser on a conditional model.
///
/// The fast path is Newton's method with the analytic gradient and Hessian (one pass over the
/// data per iteration); if it fails, the general simplex driver takes over.
pub(crate) fn run(model: &Model, theta0: &[f64], want_cov: bool) -> Result<MlResult, FitError> {
    if let Some(ml) = newton::maximise(model, theta0, want_cov) {
        return Ok(ml);
    }
    let budget = super::tolerance::NM_ITERATIONS_PER_PARAM * model.names.len() as u64;
    optimize::maximise_likelihood(model, theta0, budget, want_cov)
}

/// ML point of the conditional model (no covariance): the structural estimator's start.
pub(crate) fn quick_start(data: &Data, shape: Shape) -> Vec<f64> {
    let model = Model::from_data(data.clone(), shape, None);
    let theta0 = model.initial();
    match run(&model, &theta0, false) {
        Ok(ml) => ml.theta,
        Err(_) => theta0,
    }
}

/// Builds a [`Fit`] from a likelihood maximum: relation parameters are the first
/// `relation_param_count` entries of θ; their covariance is the matching sub-block of the
/// full inverse Hessian (the nuisance parameters marginalised).
pub(crate) fn assemble(
    spec: &FitSpec,
    shape: Shape,
    ml: &MlResult,
    n: usize,
    n_upper: usize,
    x_model: Option<Vec<super::MixtureComponent>>,
) -> Fit {
    let names = relation_names(shape);
    let k = names.len();
    let cov_full = ml
        .cov
        .clone()
        .unwrap_or_else(|| DMatrix::zeros(ml.theta.len(), ml.theta.len()));
    let cov: Vec<Vec<f64>> = (0..k)
        .map(|i| (0..k).map(|j| cov_full[(i, j)]).collect())
        .collect();
    let sd: Vec<f64> = (0..k).map(|i| cov_full[(i, i)].max(0.0).sqrt()).collect();
    let params = theta_params(shape, &ml.theta);
    let errors = theta_params(shape, &sd);
    let p = ml.theta.len();
    let mut reason = String::from("Converged.");
    for note in &ml.notes {
        reason.push(' ');
        reason.push_str(note);
    }
    Fit {
        spec: spec.clone(),
        params,
        errors,
        cov_names: names.to_vec(),
        cov,
        n,
        n_upper,
        neg2_log_l: Some(ml.neg2),
        aic: Some(ml.neg2 + 2.0 * p as f64),
        bic: Some(ml.neg2 + p as f64 * (n as f64).ln()),
        chi2: None,
        n_params: p,
        termination: Termination {
            reason,
            iterations: ml.iterations,
            evaluations: ml.evaluations,
        },
        x_model,
    }
}

/// Newton's method on the conditional likelihood with analytic derivatives.
mod newton {
    use super::super::optimize::analytic::{self, A, Analytic, B, C, D, Derivs, E, NS, fy_terms};
    use super::super::optimize::{MlResult, Sum};
    use super::super::types::Shape;
    use super::Model;

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
        /// V = σ_y² + s² σ_x² − 2 s σ_xy [+ c² σ_x2²] + ε²
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
                let vx2 = if plane { dt.vx2[i] } else { 0.0 };
                let v = dt.vy[i] + s * s * dt.vx[i] - 2.0 * s * dt.cxy[i] + c * c * vx2 + e2;
                if v.is_nan() || v <= 0.0 {
                    return None;
                }
                let t = fy_terms(dt.y[i] - mu, v, dt.lim[i]);
                f.add(t.f);
                mp[A] = 1.0;
                mp[B] = d;
                mp[C] = q;
                mp[D] = gi;
                let vb = 2.0 * (s * dt.vx[i] - dt.cxy[i]);
                vp[B] = vb;
                vp[C] = if quad {
                    2.0 * d * vb
                } else if plane {
                    2.0 * c * vx2
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
        fn derivs_line(&self, p: &[f64; NS], squared: bool, with_derivs: bool) -> Option<Derivs> {
            let dt = &self.data;
            let (alpha, beta, e) = (p[A], p[B], p[E]);
            let e2 = if squared { e } else { e * e };
            let (ve, vee) = if squared { (1.0, 0.0) } else { (2.0 * e, 2.0) };
            let mut f = Sum::default();
            let (mut ga, mut gb, mut ge) = (0.0, 0.0, 0.0);
            let (mut haa, mut hab, mut hae, mut hbb, mut hbe, mut hee) =
                (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
            for i in 0..dt.n() {
                let d = dt.d[i];
                let v = dt.vy[i] + beta * beta * dt.vx[i] - 2.0 * beta * dt.cxy[i] + e2;
                if v.is_nan() || v <= 0.0 {
                    return None;
                }
                let r = dt.y[i] - alpha - beta * d;
                if !with_derivs {
                    if dt.lim[i] {
                        f.add(-2.0 * super::ln_norm_cdf(r / v.sqrt()));
                    } else {
                        f.add(r * r / v + v.ln() + super::LN_2PI);
                    }
                    continue;
                }
                let t = fy_terms(r, v, dt.lim[i]);
                f.add(t.f);
                let vb = 2.0 * (beta * dt.vx[i] - dt.cxy[i]);
                ga += t.fm;
                gb += t.fm * d + t.fv * vb;
                ge += t.fv * ve;
                haa += t.fmm;
                hab += t.fmm * d + t.fmv * vb;
                hae += t.fmv * ve;
                hbb +=
                    t.fmm * d * d + 2.0 * t.fmv * d * vb + t.fvv * vb * vb + t.fv * 2.0 * dt.vx[i];
                hbe += (t.fmv * d + t.fvv * vb) * ve;
                hee += t.fvv * ve * ve + t.fv * vee;
            }
            let mut out = Derivs::zero();
            out.f = f.total();
            out.g[A] = ga;
            out.g[B] = gb;
            out.g[E] = ge;
            let entries = [
                (A, A, haa),
                (A, B, hab),
                (A, E, hae),
                (B, B, hbb),
                (B, E, hbe),
                (E, E, hee),
            ];
            for (a, b, v) in entries {
                out.h[a][b] = v;
                out.h[b][a] = v;
            }
            out.f.is_finite().then_some(out)
        }
    }

    /// Maximises the conditional likelihood by Newton's method; `None` to fall back.
    pub(super) fn maximise(model: &Model, theta0: &[f64], want_cov: bool) -> Option<MlResult> {
        let slots = model.slots();
        let mut p = [0.0; NS];
        for (k, &s) in slots.iter().enumerate() {
            p[s] = theta0[k];
        }
        p[E] *= p[E];
        let r = analytic::maximise(model, p, want_cov)?;
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
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::{hogg, rel};
    use super::super::{Point, fit as fit_any};
    use super::*;

    fn spec0() -> FitSpec {
        FitSpec::new(Method::Conditional, 0.0)
    }

    #[test]
    #[expect(
        clippy::approx_constant,
        reason = "the published check value is ln 2 rounded to 6 places"
    )]
    fn censored_term_matches_the_toy_check_values() {
        // Science notes §2.2 toy check, computed from the formula: ln Φ(0) = −0.693147 and
        // ln Φ((7.5 − 8.12)/0.44) = −2.533205 (Gültekin et al. 2009 "all" parameters).
        assert!((ln_norm_cdf(0.0) - (-0.693_147)).abs() < 1e-6);
        assert!((ln_norm_cdf((7.5 - 8.12) / 0.44) - (-2.533_205)).abs() < 1e-6);
        // The same through the likelihood: one limit at x = 0, σ_x = 0, α = 8, β = 4, ε = 0.4,
        // y_ul = 8 contributes −2 ln Φ(0) = 1.386294.
        let pts = vec![
            Point::new(-0.1, 0.0, 7.6, 0.1),
            Point::new(0.1, 0.0, 8.4, 0.1),
            Point::new(0.2, 0.0, 8.8, 0.1),
            Point::new(-0.2, 0.0, 7.2, 0.1),
        ];
        let mut with_limit = pts.clone();
        with_limit.push(Point::limit(0.0, 0.0, 8.0));
        let a = Model::new(&pts, &spec0()).expect("model");
        let b = Model::new(&with_limit, &spec0()).expect("model");
        let theta = [8.0, 4.0, 0.4];
        assert!((b.neg2(&theta) - a.neg2(&theta) - 1.386_294).abs() < 1e-6);
        // Far lower tail stays finite (asymptotic branch) and continuous at the switch.
        assert!(ln_norm_cdf(-40.0).is_finite());
        assert!((ln_norm_cdf(-20.0 - 1e-9) - ln_norm_cdf(-20.0)).abs() < 1e-6);
    }

    #[test]
    fn hogg_all_twenty_matches_the_computed_ml_oracle() {
        // Science notes §2.9 item 4 [C] (computed from §2.1 on Hogg, Bovy & Lang 2010 Table 1,
        // σx and σy, ρ ignored): α 298.9693, β 0.678815, ε 84.9930, −2lnL 237.447860;
        // Hessian errors σ_α ≈ 66.67, σ_β ≈ 0.3658, σ_ε ≈ 15.43.
        let f = fit(&hogg(1), &spec0()).expect("fit");
        let p = &f.params;
        assert!((p.alpha - 298.9693).abs() < 1e-3, "{p:?}");
        assert!((p.beta - 0.678_815).abs() < 2e-6, "{p:?}");
        assert!((p.eps - 84.9930).abs() < 1e-3, "{p:?}");
        assert!((f.neg2_log_l.unwrap_or(0.0) - 237.447_860).abs() < 1e-6);
        let e = &f.errors;
        assert!(rel(e.alpha, 66.67) < 2e-3, "{e:?}");
        assert!(rel(e.beta, 0.3658) < 2e-3, "{e:?}");
        assert!(rel(e.eps, 15.43) < 2e-3, "{e:?}");
        // AIC/BIC from their definitions with k = 3, n = 20.
        let l = f.neg2_log_l.unwrap_or(0.0);
        assert!((f.aic.unwrap_or(0.0) - (l + 6.0)).abs() < 1e-12);
        assert!((f.bic.unwrap_or(0.0) - (l + 3.0 * 20_f64.ln())).abs() < 1e-12);
    }

    #[test]
    fn hogg_points_5_to_20_sit_on_the_eps_boundary() {
        // Science notes §2.9 item 3 [C]: ML hits ε = 0; β 2.249097, α 29.7321, −2lnL 149.282534.
        let f = fit(&hogg(5), &spec0()).expect("fit");
        let p = &f.params;
        assert!(p.eps.abs() < 1e-12, "{p:?}");
        assert!((p.beta - 2.249_097).abs() < 2e-6, "{p:?}");
        assert!((p.alpha - 29.7321).abs() < 1e-3, "{p:?}");
        assert!((f.neg2_log_l.unwrap_or(0.0) - 149.282_534).abs() < 1e-6);
        assert!(
            f.termination.reason.contains("boundary"),
            "{}",
            f.termination.reason
        );
        assert!(f.errors.eps > 0.0 && f.errors.beta > 0.0);
    }

    #[test]
    fn analytic_newton_agrees_with_the_simplex_and_numerical_hessian() {
        // Two independent routes to the same maximum: Newton with analytic derivatives, and
        // the simplex search with a central-difference Hessian.
        use super::super::types::test_data::{Sim, simulate};
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
        }
        for shape in [Shape::Line, Shape::Quadratic, Shape::Plane] {
            let spec = FitSpec::new(Method::Conditional, s.pivot)
                .with_shape(shape)
                .expect("spec");
            let model = Model::new(&pts, &spec).expect("model");
            let t0 = model.initial();
            let a = newton::maximise(&model, &t0, true).expect("newton");
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
        let model = Model::new(&hogg(5), &spec0()).expect("model");
        let a = newton::maximise(&model, &model.initial(), true).expect("newton");
        assert!(a.theta[2].abs() < 1e-300 && a.notes.iter().any(|n| n.contains("boundary")));
    }

    #[test]
    fn conditional_through_the_dispatcher_equals_direct_call() {
        let a = fit(&hogg(1), &spec0()).expect("fit");
        let b = fit_any(&hogg(1), &spec0()).expect("fit");
        assert_eq!(a.params, b.params);
    }
}
