//! Maximum likelihood conditional on the observed host property (the "errors in both
//! coordinates plus intrinsic scatter" likelihood of Gültekin et al. 2009 and others).
//!
//! **It underestimates the slope when the x errors matter** (regression dilution): the observed
//! x is treated as if it were the true x, so when σ_x is not small compared to the spread of
//! the true x, |β| is biased towards 0 (on simulated M–σ samples with σ errors of 0.01–0.035
//! dex, by about −0.14 in β; docs/methods.md §2.6). Use [`super::structural`] in that case.

use nalgebra::DMatrix;

use super::intervals::{IntervalKind, Intervals, RESTRICTED_MAX_N};
use super::optimize::{self, MlResult, Objective, Sum};
use super::special::{LN_2PI, NormCdf, ln_norm_cdf, norm_cdf_parts};
use super::types::{Data, prepare};
use super::{
    Fit, FitError, FitSpec, Method, Params, Quote, Shape, Termination, min_points, relation_names,
};

/// Factors multiplied together before one logarithm is taken (see [`LnSum`]).
pub(crate) const LN_BLOCK: usize = 8;
/// 2⁻¹²⁰: below it a block of factors falls back to one logarithm per factor.
const LN_LO: f64 = 1.0 / (1_u128 << 120) as f64;
/// 2¹²⁰: above it a block of factors falls back to one logarithm per factor.
const LN_HI: f64 = (1_u128 << 120) as f64;

/// ln of the product of a block of positive factors, i.e. Σ ln x_k with one logarithm.
///
/// ```text
/// Σ_k ln x_k = ln(x_1 x_2 ⋯ x_m),   m ≤ LN_BLOCK = 8,   every x_k ∈ [2⁻¹²⁰, 2¹²⁰]
/// ```
/// The product carries at most m − 1 roundings, so its logarithm is off by at most
/// (m − 1) ε ≈ 1.6e-15 (absolute) from the sum of exact logarithms; with every factor inside
/// [2⁻¹²⁰, 2¹²⁰] no partial product can overflow or leave the normal range. A block with a
/// factor outside that range (or a non-positive one) takes one logarithm per factor, as
/// before. The logarithm is the costliest operation of a likelihood sweep, and one per block
/// instead of one per object makes the sweep several times cheaper.
#[inline]
pub(crate) fn ln_block(xs: &[f64]) -> f64 {
    let (mut p, mut lo, mut hi) = (1.0_f64, f64::INFINITY, 0.0_f64);
    for &x in xs {
        p *= x;
        lo = min_plain(lo, x);
        hi = max_plain(hi, x);
    }
    if in_ln_range(lo, hi) {
        p.ln()
    } else {
        xs.iter().map(|x| x.ln()).sum()
    }
}

/// Whether factors with smallest `lo` and largest `hi` may be multiplied before the logarithm.
#[inline(always)]
fn in_ln_range(lo: f64, hi: f64) -> bool {
    lo >= LN_LO && hi <= LN_HI
}

/// min(a, b) as one machine instruction: a NaN in `b` is ignored (the callers let NaN reach
/// the result through the product instead).
#[inline(always)]
fn min_plain(a: f64, b: f64) -> f64 {
    if b < a { b } else { a }
}

/// max(a, b) as one machine instruction (a NaN in `b` is ignored, see [`min_plain`]).
#[inline(always)]
fn max_plain(a: f64, b: f64) -> f64 {
    if b > a { b } else { a }
}

/// Running Σ ln x_k over positive factors, taken one block of [`LN_BLOCK`] factors at a time
/// ([`ln_block`]); the blocks are added with compensated summation.
#[derive(Clone, Copy, Debug)]
pub(crate) struct LnSum {
    buf: [f64; LN_BLOCK],
    len: usize,
    total: Sum,
}

impl LnSum {
    /// An empty sum.
    pub(crate) fn new() -> LnSum {
        LnSum {
            buf: [1.0; LN_BLOCK],
            len: 0,
            total: Sum::default(),
        }
    }

    /// Adds ln x.
    #[inline(always)]
    pub(crate) fn push(&mut self, x: f64) {
        self.buf[self.len % LN_BLOCK] = x;
        self.len += 1;
        if self.len == LN_BLOCK {
            self.total.add(ln_block(&self.buf));
            self.len = 0;
        }
    }

    /// Σ ln x_k over everything pushed.
    pub(crate) fn total(mut self) -> f64 {
        if self.len > 0 {
            self.total.add(ln_block(&self.buf[..self.len]));
        }
        self.total.total()
    }
}

/// Σ −2 ln Φ(z_k) over the censored terms of a sweep: Φ values go into an [`LnSum`], tail
/// logarithms into a compensated sum.
#[derive(Clone, Copy, Debug)]
pub(crate) struct CensoredSum {
    values: LnSum,
    logs: Sum,
}

impl CensoredSum {
    /// An empty sum.
    pub(crate) fn new() -> CensoredSum {
        CensoredSum {
            values: LnSum::new(),
            logs: Sum::default(),
        }
    }

    /// Adds −2 ln Φ(z) given in the form of [`norm_cdf_parts`].
    #[inline(always)]
    pub(crate) fn push(&mut self, p: NormCdf) {
        match p {
            NormCdf::Value(v) => self.values.push(v),
            NormCdf::Log(l) => self.logs.add(l),
        }
    }

    /// Σ −2 ln Φ(z_k).
    pub(crate) fn total(self) -> f64 {
        let mut s = self.logs;
        s.add(self.values.total());
        -2.0 * s.total()
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

    /// The likelihood prepared for a sampler ([`Sampler`]).
    pub(crate) fn sampler(&self) -> Sampler {
        Sampler::new(self)
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

/// One object's constants for the sampler's sweep ([`Sampler`]).
#[derive(Clone, Copy, Debug, Default)]
struct Row {
    /// d = x − x0.
    d: f64,
    /// y (detection or limit).
    y: f64,
    /// σ_y².
    vy: f64,
    /// σ_x².
    vx: f64,
    /// 2 σ_xy.
    cxy2: f64,
    /// d² (quadratic) or d2 = x2 − x02 (plane); 0 for a line.
    q: f64,
    /// σ_x2² (plane); 0 otherwise.
    vx2: f64,
    /// 2 σ_x2,y (plane); 0 otherwise.
    cx2y2: f64,
    /// 2 σ_x,x2 (plane); 0 otherwise.
    cxx22: f64,
}

/// The relation parameters of one evaluation, with the products every object needs.
#[derive(Clone, Copy, Debug)]
struct Coef {
    alpha: f64,
    beta: f64,
    c2: f64,
    e2: f64,
    bb: f64,
    c2c2: f64,
    two_c2: f64,
}

/// Shape codes for the const-generic sweep.
const LINE: u8 = 0;
const QUADRATIC: u8 = 1;
const PLANE: u8 = 2;

/// Residual r = y − μ and variance V of one object, with exactly the operations (and so the
/// roundings) of [`Objective::neg2`] for that shape.
#[inline(always)]
fn residual_variance<const S: u8>(row: &Row, k: &Coef) -> (f64, f64) {
    let d = row.d;
    match S {
        LINE => {
            let v = row.vy + k.bb * row.vx - k.beta * row.cxy2 + k.e2;
            (row.y - (k.alpha + k.beta * d), v)
        }
        QUADRATIC => {
            let g = k.beta + k.two_c2 * d;
            let v = row.vy + g * g * row.vx - g * row.cxy2 + k.e2;
            (row.y - (k.alpha + k.beta * d + k.c2 * d * d), v)
        }
        _ => {
            let v = row.vy + k.bb * row.vx - k.beta * row.cxy2 + k.c2c2 * row.vx2
                - k.c2 * row.cx2y2
                + k.beta * k.c2 * row.cxx22
                + k.e2;
            (row.y - (k.alpha + k.beta * d + k.c2 * row.q), v)
        }
    }
}

/// The conditional likelihood prepared for repeated evaluation by a sampler.
///
/// # Model
/// ```text
/// −2 ln L = Σ_det [r_i²/V_i + ln V_i] + N_det ln 2π − 2 Σ_lim ln Φ(r_i/√V_i)
/// ```
/// with r_i, V_i as in [`fit`]. The per-object constants (σ_x², σ_y², 2σ_xy, d², …) are
/// computed once, detections and limits are stored apart (no per-object branch), and the
/// logarithms are taken once per block of eight objects ([`ln_block`]).
///
/// Summation: plain within a block of eight objects, compensated across blocks. A sampler
/// needs differences of ln L of order 1, so a relative error of ~1e-15 in −2 ln L (a plain
/// sum of eight positive terms loses at most 7ε) is far below anything it can see; the
/// result agrees with [`Objective::neg2`] to ~1e-15 relative for any sample size.
#[derive(Clone, Debug)]
pub(crate) struct Sampler {
    shape: Shape,
    dim: usize,
    eps_index: usize,
    det: Vec<Row>,
    lim: Vec<Row>,
}

impl Sampler {
    /// Copies the per-object constants out of `model` (which must have no offset group).
    pub(crate) fn new(model: &Model) -> Sampler {
        let dt = &model.data;
        let (mut det, mut lim) = (Vec::new(), Vec::new());
        for i in 0..dt.n() {
            let q = match model.shape {
                Shape::Line => 0.0,
                Shape::Quadratic => dt.d[i] * dt.d[i],
                Shape::Plane => dt.d2[i],
            };
            let plane = model.shape == Shape::Plane;
            let row = Row {
                d: dt.d[i],
                y: dt.y[i],
                vy: dt.vy[i],
                vx: dt.vx[i],
                cxy2: 2.0 * dt.cxy[i],
                q,
                vx2: if plane { dt.vx2[i] } else { 0.0 },
                cx2y2: if plane { 2.0 * dt.cx2y[i] } else { 0.0 },
                cxx22: if plane { 2.0 * dt.cxx2[i] } else { 0.0 },
            };
            let side = if dt.lim[i] { &mut lim } else { &mut det };
            side.push(row);
        }
        Sampler {
            shape: model.shape,
            dim: model.names.len(),
            eps_index: model.eps_index(),
            det,
            lim,
        }
    }

    /// ln L(θ); −∞ if θ has the wrong length, ε < 0 or some V_i ≤ 0.
    pub(crate) fn log_likelihood(&self, theta: &[f64]) -> f64 {
        if theta.len() != self.dim || theta[self.eps_index] < 0.0 {
            return f64::NEG_INFINITY;
        }
        let (alpha, beta, c2, eps) = match self.shape {
            Shape::Line => (theta[0], theta[1], 0.0, theta[2]),
            Shape::Quadratic | Shape::Plane => (theta[0], theta[1], theta[2], theta[3]),
        };
        let k = Coef {
            alpha,
            beta,
            c2,
            e2: eps * eps,
            bb: beta * beta,
            c2c2: c2 * c2,
            two_c2: 2.0 * c2,
        };
        let v = match self.shape {
            Shape::Line => self.neg2::<LINE>(&k),
            Shape::Quadratic => self.neg2::<QUADRATIC>(&k),
            Shape::Plane => self.neg2::<PLANE>(&k),
        };
        match v {
            Some(v) if v.is_finite() => -0.5 * v,
            _ => f64::NEG_INFINITY,
        }
    }

    /// −2 ln L; `None` if a censored object has V_i ≤ 0 (a detection with V_i ≤ 0 makes the
    /// sum non-finite, which [`Sampler::log_likelihood`] turns into −∞ likewise).
    fn neg2<const S: u8>(&self, k: &Coef) -> Option<f64> {
        let mut total = Sum::default();
        for block in self.det.chunks(LN_BLOCK) {
            let (mut quad, mut prod) = (0.0, 1.0);
            let (mut lo, mut hi) = (f64::INFINITY, 0.0);
            for row in block {
                let (r, v) = residual_variance::<S>(row, k);
                quad += r * r / v;
                prod *= v;
                lo = min_plain(lo, v);
                hi = max_plain(hi, v);
            }
            let ln_v = if in_ln_range(lo, hi) {
                prod.ln()
            } else {
                // Rare: a factor outside [2⁻¹²⁰, 2¹²⁰] (V ≤ 0 gives a NaN or infinite
                // result, which the caller turns into −∞ as for any V ≤ 0).
                block
                    .iter()
                    .map(|row| residual_variance::<S>(row, k).1.ln())
                    .sum()
            };
            total.add(quad + ln_v);
        }
        total.add(self.det.len() as f64 * LN_2PI);
        let mut cens = CensoredSum::new();
        for row in &self.lim {
            let (r, v) = residual_variance::<S>(row, k);
            if v <= 0.0 {
                return None;
            }
            cens.push(norm_cdf_parts(r / v.sqrt()));
        }
        total.add(cens.total());
        Some(total.total())
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
    // Three fused passes (each sum keeps its order, so the values are those of one pass per
    // sum): counts and means, then the moments, then the residual and measurement variances.
    let det = || (0..data.n()).filter(|&i| !data.lim[i]);
    let (mut count, mut sum_d, mut sum_y) = (0_usize, 0.0, 0.0);
    for i in det() {
        count += 1;
        sum_d += data.d[i];
        sum_y += data.y[i];
    }
    let n = count as f64;
    let (mx, my) = (sum_d / n, sum_y / n);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for i in det() {
        sxx += (data.d[i] - mx).powi(2);
        sxy += (data.d[i] - mx) * (data.y[i] - my);
    }
    let beta = if sxx > 0.0 { sxy / sxx } else { 0.0 };
    let alpha = my - beta * mx;
    let (mut res2, mut meas) = (0.0, 0.0);
    for i in det() {
        res2 += (data.y[i] - alpha - beta * data.d[i]).powi(2);
        meas += data.vy[i] + beta * beta * data.vx[i];
    }
    let (res2, meas) = (res2 / n, meas / n);
    let eps = (res2 - meas).max(0.09 * res2).sqrt().max(1e-3);
    (alpha, beta, eps)
}

/// The plane's terms of V_i beyond the line's: what the second host property adds.
///
/// ```text
/// γ² σ_x2² − 2 γ σ_x2,y + 2 β γ σ_x,x2      (dex²; γ = the plane's second slope)
/// ```
/// From y − μ(x_obs, x2_obs) = e + δy − β δx − γ δx2 with (δx, δx2, δy) the measurement
/// errors: its variance is σ_y² + β² σ_x² + γ² σ_x2² − 2β σ_xy − 2γ σ_x2,y + 2βγ σ_x,x2 + ε²
/// (docs/methods.md §2.7).
#[inline]
fn plane_extra(beta: f64, gamma: f64, dt: &Data, i: usize) -> f64 {
    gamma * gamma * dt.vx2[i] - 2.0 * gamma * dt.cx2y[i] + 2.0 * beta * gamma * dt.cxx2[i]
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
                Shape::Plane => (
                    alpha + beta * d + c2 * dt.d2[i],
                    beta,
                    plane_extra(beta, c2, dt, i),
                ),
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
                Shape::Plane => (beta * d + c2 * dt.d2[i], beta, plane_extra(beta, c2, dt, i)),
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
/// V_i = σ_y,i² + g_i² σ_x,i² − 2 g_i σ_xy,i [+ γ² σ_x2,i² − 2 γ σ_x2y,i + 2 β γ σ_xx2,i] + ε²
/// detection:   −2 ln L_i = (y_i − μ_i)²/V_i + ln(2π V_i)
/// upper limit: −2 ln L_i = −2 ln Φ((y_i − μ_i)/√V_i)
/// ```
/// y, x, x2 in log10 units; σ's and ε in dex; σ_xy in dex²; α in log10 M☉; β, γ dex/dex,
/// β2 dex/dex²; σ_x2y, σ_xx2 (the plane's x2–y and x–x2 error covariances, e.g. from a shared
/// distance) in dex². V_i is the variance of y − μ_i(x_obs, x2_obs) = e + δy − β δx − γ δx2
/// over the intrinsic scatter e and the measurement errors (δx, δx2, δy).
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
/// Tremaine et al. 2002, ApJ 574, 740 (the variance V_i); docs/methods.md §2.1, §2.2, §2.7.
pub fn fit(points: &[super::Point], spec: &FitSpec) -> Result<Fit, FitError> {
    fit_quoted(points, spec, Quote::Restricted)
}

/// [`fit`], computing the restricted-likelihood intervals only when `quote` asks for them.
pub(crate) fn fit_quoted(
    points: &[super::Point],
    spec: &FitSpec,
    quote: Quote,
) -> Result<Fit, FitError> {
    let model = Model::new(points, spec)?;
    fit_model(&model, spec, quote)
}

/// Fits a prepared conditional model and assembles the result; `quote` decides whether the
/// restricted-likelihood intervals are computed (only for samples of at most
/// [`RESTRICTED_MAX_N`] objects).
pub(crate) fn fit_model(model: &Model, spec: &FitSpec, quote: Quote) -> Result<Fit, FitError> {
    let theta0 = model.initial();
    let ml = run(model, &theta0, true)?;
    bounded(ml.neg2, ml.theta[model.eps_index()], &model.data)?;
    let mut fit = assemble(
        spec,
        model.shape,
        &ml,
        model.data.n(),
        model.data.n_upper,
        None,
    );
    if quote == Quote::Restricted
        && model.data.n() <= RESTRICTED_MAX_N
        && model.group.is_none()
        && ml.cov.is_some()
        && let Some(iv) = newton::restricted(model, &ml.theta)
    {
        fit.intervals = iv;
    }
    Ok(fit)
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
    let intervals = Intervals::from_errors(IntervalKind::Curvature, &params, &errors);
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
        intervals,
    }
}

mod newton;

#[cfg(test)]
mod tests {
    use super::super::tolerance::close;
    use super::super::types::test_data::hogg;
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
        // docs/methods.md §2.2 toy check, computed from the formula: ln Φ(0) = −0.693147 and
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
        // docs/methods.md §2.9, computed oracle 4 (computed from §2.1 on Hogg, Bovy & Lang 2010
        // Table 1, σx and σy, ρ ignored): α 298.9693, β 0.678815, ε 84.9930, −2lnL 237.447860;
        // Hessian errors σ_α ≈ 66.67, σ_β ≈ 0.3658, σ_ε ≈ 15.43 (computed: square roots of the
        // diagonal of the inverse Hessian of −ln L at that maximum, docs/methods.md §2.8).
        let f = fit(&hogg(1), &spec0()).expect("fit");
        let p = &f.params;
        assert!((p.alpha - 298.9693).abs() < 1e-3, "{p:?}");
        assert!((p.beta - 0.678_815).abs() < 2e-6, "{p:?}");
        assert!((p.eps - 84.9930).abs() < 1e-3, "{p:?}");
        assert!((f.neg2_log_l.unwrap_or(0.0) - 237.447_860).abs() < 1e-6);
        let e = &f.errors;
        assert!(close(e.alpha, 66.67, 0.0, 2e-3), "{e:?}");
        assert!(close(e.beta, 0.3658, 0.0, 2e-3), "{e:?}");
        assert!(close(e.eps, 15.43, 0.0, 2e-3), "{e:?}");
        // AIC = −2 ln L + 2k, BIC = −2 ln L + k ln n (Akaike 1974; Schwarz 1978) with k = 3,
        // n = 20.
        let l = f.neg2_log_l.unwrap_or(0.0);
        assert!((f.aic.unwrap_or(0.0) - (l + 6.0)).abs() < 1e-12);
        assert!((f.bic.unwrap_or(0.0) - (l + 3.0 * 20_f64.ln())).abs() < 1e-12);
    }

    #[test]
    fn hogg_points_5_to_20_sit_on_the_eps_boundary() {
        // docs/methods.md §2.9, computed oracle 2 (computed): ML hits ε = 0; β 2.249097, α 29.7321, −2lnL 149.282534.
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

    /// A sample that exercises every branch of the sampler's sweep: detections and limits,
    /// x–y error covariances of both signs, a second host property, and a few limits far
    /// below the relation (z < −20, the asymptotic ln Φ).
    fn mixed_sample(n: usize, seed: u64) -> (Vec<Point>, f64) {
        use super::super::types::test_data::{Sim, simulate};
        let s = Sim {
            n,
            seed,
            limit_fraction: 0.25,
            beta2: 2.0,
            ..Sim::default()
        };
        let mut pts = simulate(&s);
        for (i, p) in pts.iter_mut().enumerate() {
            let sign = if i % 2 == 0 { 0.4 } else { -0.3 };
            p.xy_cov = if p.upper_limit {
                0.0
            } else {
                sign * p.x_err * p.y_err
            };
            p.x2 = Some(10.0 + 0.05 * (i % 11) as f64);
            p.x2_err = 0.04;
            p.x2_y_cov = -sign * p.x2_err * p.y_err;
            p.x_x2_cov = sign * p.x_err * p.x2_err;
            if p.upper_limit && i % 5 == 0 {
                p.y -= 12.0;
            }
        }
        (pts, s.pivot)
    }

    #[test]
    fn sampler_equals_the_compensated_reference_sum_on_random_parameters() {
        // The sampler reorders the sum (detections, then limits), takes one logarithm per
        // block of eight factors and sums plainly within blocks; it must agree with the
        // per-object compensated sum of `neg2` to 1e-12 relative (bound derived in the
        // `Sampler` and `ln_block` docs: ~1e-15).
        use rand::rngs::StdRng;
        use rand::{RngExt, SeedableRng};
        let (pts, pivot) = mixed_sample(203, 41);
        let mut rng = StdRng::seed_from_u64(5);
        for shape in [Shape::Line, Shape::Quadratic, Shape::Plane] {
            let spec = FitSpec::new(Method::Conditional, pivot)
                .with_shape(shape)
                .expect("spec")
                .with_pivot2(10.2)
                .expect("spec");
            let model = Model::new(&pts, &spec).expect("model");
            let sampler = model.sampler();
            let t0 = model.initial();
            let mut any_finite = false;
            for _ in 0..300 {
                let t: Vec<f64> = t0
                    .iter()
                    .map(|v| v + 0.3 * rng.random_range(-1.0..1.0) * (v.abs() + 0.1))
                    .collect();
                let fast = sampler.log_likelihood(&t);
                let reference = -0.5 * model.neg2(&t);
                assert!(
                    (fast - reference).abs() <= 1e-12 * reference.abs(),
                    "{shape:?} {t:?}: {fast} vs {reference}"
                );
                any_finite |= fast.is_finite();
            }
            assert!(any_finite);
            // Outside the support and a wrong length give −∞, as documented.
            let mut bad = t0.clone();
            let ei = model.eps_index();
            bad[ei] = -1e-9;
            for v in [
                sampler.log_likelihood(&bad),
                sampler.log_likelihood(&t0[1..]),
            ] {
                assert!(v.is_infinite() && v < 0.0, "{v}");
            }
        }
    }

    #[test]
    fn sampler_handles_variances_outside_the_product_range_and_at_zero() {
        // Objects without errors and ε of 1e-40 dex give V = 1e-80 < 2⁻¹²⁰: the block falls
        // back to one logarithm per object and still equals the reference.
        // x = i/8 and y = 8 + 4x are exact binary fractions, so the residuals are exactly 0.
        let pts: Vec<Point> = (0..20)
            .map(|i| {
                let x = f64::from(i) / 8.0;
                if i == 7 {
                    Point::limit(x, 0.0, 12.0)
                } else {
                    Point::new(x, 0.0, 8.0 + 4.0 * x, 0.0)
                }
            })
            .collect();
        let model = Model::new(&pts, &spec0()).expect("model");
        let sampler = model.sampler();
        let theta = [8.0, 4.0, 1e-40];
        let fast = sampler.log_likelihood(&theta);
        let reference = -0.5 * model.neg2(&theta);
        assert!(fast.is_finite() && reference.is_finite());
        assert!(
            (fast - reference).abs() <= 1e-12 * reference.abs(),
            "{fast} {reference}"
        );
        // ε = 0 with exact detections: V = 0, an unbounded density, −∞ like the reference's +∞.
        let at_zero = [8.0, 4.0, 0.0];
        let (r, f) = (model.neg2(&at_zero), sampler.log_likelihood(&at_zero));
        assert!(r.is_infinite() && r > 0.0, "{r}");
        assert!(f.is_infinite() && f < 0.0, "{f}");
    }

    #[test]
    fn plane_variance_carries_the_x2_covariances_and_is_unchanged_without_them() {
        // V_i = aᵀ S_i a + ε², a = (−β, −γ, 1), S_i the measurement covariance of (x, x2, y)
        // (docs/methods.md §2.7), computed here as that quadratic form; with σ_x2y = σ_xx2 = 0
        // it is the plane's variance without them, σ_y² + β²σ_x² − 2βσ_xy + γ²σ_x2² + ε².
        use rand::rngs::StdRng;
        use rand::{RngExt, SeedableRng};
        let (pts, pivot) = mixed_sample(64, 47);
        let zeroed: Vec<Point> = pts
            .iter()
            .map(|p| p.clone().with_x2_covariances(0.0, 0.0))
            .collect();
        let spec = FitSpec::new(Method::Conditional, pivot)
            .with_shape(Shape::Plane)
            .and_then(|s| s.with_pivot2(10.2))
            .expect("spec");
        let reference = |points: &[Point], t: &[f64]| -> f64 {
            let (alpha, beta, gamma, eps) = (t[0], t[1], t[2], t[3]);
            let a = [-beta, -gamma, 1.0];
            points
                .iter()
                .map(|p| {
                    let s = [
                        [p.x_err * p.x_err, p.x_x2_cov, p.xy_cov],
                        [p.x_x2_cov, p.x2_err * p.x2_err, p.x2_y_cov],
                        [p.xy_cov, p.x2_y_cov, p.y_err * p.y_err],
                    ];
                    let quad: f64 = (0..3)
                        .map(|j| (0..3).map(|k| a[j] * s[j][k] * a[k]).sum::<f64>())
                        .sum();
                    let v = quad + eps * eps;
                    let x2 = p.x2.unwrap_or(f64::NAN);
                    let r = p.y - (alpha + beta * (p.x - pivot) + gamma * (x2 - 10.2));
                    if p.upper_limit {
                        -2.0 * ln_norm_cdf(r / v.sqrt())
                    } else {
                        r * r / v + v.ln() + LN_2PI
                    }
                })
                .sum()
        };
        let old_form = |points: &[Point], t: &[f64]| -> f64 {
            let (alpha, beta, gamma, eps) = (t[0], t[1], t[2], t[3]);
            points
                .iter()
                .map(|p| {
                    let v = p.y_err.powi(2) + beta * beta * p.x_err.powi(2) - 2.0 * beta * p.xy_cov
                        + gamma * gamma * p.x2_err.powi(2)
                        + eps * eps;
                    let x2 = p.x2.unwrap_or(f64::NAN);
                    let r = p.y - (alpha + beta * (p.x - pivot) + gamma * (x2 - 10.2));
                    if p.upper_limit {
                        -2.0 * ln_norm_cdf(r / v.sqrt())
                    } else {
                        r * r / v + v.ln() + LN_2PI
                    }
                })
                .sum()
        };
        let with = Model::new(&pts, &spec).expect("model");
        let without = Model::new(&zeroed, &spec).expect("model");
        let mut rng = StdRng::seed_from_u64(8);
        let mut differs = false;
        for _ in 0..50 {
            let t = [
                8.3 + rng.random_range(-0.3..0.3),
                5.0 + rng.random_range(-1.0..1.0),
                rng.random_range(-1.5..1.5),
                0.3 + rng.random_range(-0.2..0.2),
            ];
            let (a, b) = (with.neg2(&t), reference(&pts, &t));
            assert!((a - b).abs() <= 1e-12 * b.abs(), "{t:?}: {a} vs {b}");
            let fast = -2.0 * with.sampler().log_likelihood(&t);
            assert!((fast - b).abs() <= 1e-12 * b.abs(), "{t:?}: {fast} vs {b}");
            let (a0, b0) = (without.neg2(&t), old_form(&zeroed, &t));
            assert!((a0 - b0).abs() <= 1e-12 * b0.abs(), "{t:?}: {a0} vs {b0}");
            assert!((reference(&zeroed, &t) - b0).abs() <= 1e-12 * b0.abs());
            differs |= (a - a0).abs() > 1e-6 * a0.abs();
        }
        assert!(differs, "the covariances of this sample change −2 ln L");
    }

    #[test]
    fn block_logarithms_equal_the_sum_of_logarithms() {
        // ln(x1 ⋯ x8) = Σ ln xk within 8 roundings, and blocks with a factor outside
        // [2⁻¹²⁰, 2¹²⁰] take the per-factor route exactly.
        let xs: [f64; 8] = [0.013, 0.2, 7.5, 1e-3, 0.04, 0.9, 3.3, 0.06];
        let direct: f64 = xs.iter().map(|x| x.ln()).sum();
        assert!((ln_block(&xs) - direct).abs() < 1e-14 * direct.abs().max(1.0));
        let wide: [f64; 4] = [1e-200, 1e150, 1e-100, 2.0];
        let direct_wide: f64 = wide.iter().map(|x| x.ln()).sum();
        assert_eq!(ln_block(&wide).to_bits(), direct_wide.to_bits());
        let mut sum = LnSum::new();
        for k in 0..21 {
            sum.push(0.05 + 0.1 * f64::from(k));
        }
        let direct_21: f64 = (0..21).map(|k| (0.05 + 0.1 * f64::from(k)).ln()).sum();
        assert!((sum.total() - direct_21).abs() < 1e-13);
        // The censored parts reproduce ln Φ on both sides of the z = −20 switch.
        for z in [-35.0, -20.5, -20.0, -3.0, 0.0, 0.3, 2.0, 9.0] {
            let mut c = CensoredSum::new();
            c.push(norm_cdf_parts(z));
            let reference = -2.0 * ln_norm_cdf(z);
            assert!((c.total() - reference).abs() <= 1e-15 * reference.abs().max(1e-300));
        }
    }

    #[test]
    fn parallel_line_sweep_does_not_depend_on_the_number_of_threads() {
        // 25,000 objects take the chunked parallel sweep; the chunks are combined in a fixed
        // order, so one thread and the full pool give bit-identical fits.
        let (pts, pivot) = mixed_sample(25_000, 43);
        let spec = FitSpec::new(Method::Conditional, pivot);
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .expect("pool");
        let one = pool.install(|| fit(&pts, &spec)).expect("fit");
        let many = fit(&pts, &spec).expect("fit");
        for (a, b) in [
            (one.params.alpha, many.params.alpha),
            (one.params.beta, many.params.beta),
            (one.params.eps, many.params.eps),
            (one.errors.beta, many.errors.beta),
            (
                one.neg2_log_l.unwrap_or(f64::NAN),
                many.neg2_log_l.unwrap_or(f64::NAN),
            ),
        ] {
            assert_eq!(a.to_bits(), b.to_bits(), "{a} vs {b}");
        }
    }

    #[test]
    fn conditional_through_the_dispatcher_equals_direct_call() {
        let a = fit(&hogg(1), &spec0()).expect("fit");
        let b = fit_any(&hogg(1), &spec0()).expect("fit");
        assert_eq!(a.params, b.params);
    }
}
