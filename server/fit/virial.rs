//! Calibrating the mean virial factor ⟨f⟩ of reverberation-mapped AGN against the M–σ
//! relation of quiescent galaxies (docs/methods.md §4.3), in one of two ways ([`SlopeMode`]):
//! with the slope held at the quiescent fit's ([`calibrate`]), or with one likelihood for both
//! samples that shares α and β ([`calibrate_joint`]).
//!
//! The quiescent relation is fitted with the structural estimator (errors on both axes,
//! intrinsic scatter, upper limits: §2.6). Each AGN gives its virial product log VP and σ; if
//! AGN follow the quiescent relation, log VP = α − log f + β (log σ − x0) + scatter. With β
//! held at the quiescent value, the AGN offset is a location estimate: measurement errors in
//! log σ only widen each object's variance (by β² σ_x²) and do not bias the offset, because
//! they average to zero at the true σ. The offset's scatter ε_AGN (the spread of the
//! individual virial factors and of the AGN about the relation) is estimated by restricted
//! maximum likelihood, which removes the small-sample bias of ε² at N = 30; the uncertainty
//! of the quiescent α and β is carried into log ⟨f⟩.
//!
//! The joint fit gives each sample its own Gaussian model of the true σ and its own scatter
//! (AGN hosts sit at lower σ and scatter more than the quiescent galaxies), so that the AGN
//! can inform the slope without pulling the quiescent sample's σ model or scatter.

use std::fmt;
use std::str::FromStr;

use super::optimize::{self, Objective};
use super::structural::Model;
use super::{Fit, FitError, FitSpec, Method, Point, fit, tolerance};

/// How the M–σ slope enters the calibration of ⟨f⟩.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum SlopeMode {
    /// α and β held at the quiescent structural fit, their covariance carried into the error
    /// ([`calibrate`]): the default.
    #[default]
    Held,
    /// α and β fitted with both samples in one likelihood ([`calibrate_joint`]).
    Joint,
}

impl SlopeMode {
    /// Every mode, in the order of [`SlopeMode::as_str`]'s list.
    pub const ALL: [SlopeMode; 2] = [SlopeMode::Held, SlopeMode::Joint];

    /// Stable lower-case name: "held", "joint".
    ///
    /// # Model
    /// ```text
    /// no equation: a stable name
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None.
    pub fn as_str(self) -> &'static str {
        match self {
            SlopeMode::Held => "held",
            SlopeMode::Joint => "joint",
        }
    }

    /// The mode named `text` ("held" or "joint", as [`SlopeMode::as_str`] writes them).
    ///
    /// # Model
    /// ```text
    /// no equation: a name lookup
    /// ```
    ///
    /// # Errors
    /// [`FitError::InvalidSetting`] for any other text.
    ///
    /// # References
    /// None.
    pub fn parse(text: &str) -> Result<SlopeMode, FitError> {
        SlopeMode::ALL
            .into_iter()
            .find(|m| m.as_str() == text)
            .ok_or_else(|| FitError::InvalidSetting {
                setting: "slope",
                reason: format!("'{text}' is not one of held, joint."),
            })
    }
}

impl fmt::Display for SlopeMode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for SlopeMode {
    type Err = FitError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        SlopeMode::parse(s)
    }
}

/// The calibration of log ⟨f⟩.
#[derive(Debug, Clone, PartialEq)]
pub struct VirialCalibration {
    /// How the slope entered: held at the quiescent fit or fitted jointly.
    pub mode: SlopeMode,
    /// log10 ⟨f⟩ (dimensionless f), the mean of the AGN's log f.
    pub log_f: f64,
    /// Its 1-σ error: the AGN offset's and the relation's, combined, dex.
    pub log_f_err: f64,
    /// The part of `log_f_err` from the AGN alone (their offset with α and β fixed), dex.
    pub log_f_err_agn: f64,
    /// The part from the relation's α and β, dex (`log_f_err`² = agn² + relation²). Joint
    /// mode: the part of the joint variance of log ⟨f⟩ explained by α and β.
    pub log_f_err_relation: f64,
    /// Scatter of the AGN about the shifted relation (intrinsic, after measurement errors),
    /// dex; held mode: restricted maximum likelihood; joint mode: maximum likelihood.
    pub eps_agn: f64,
    /// Number of AGN used.
    pub n_agn: usize,
    /// The relation's zero point α at the pivot (log10 M☉) the calibration used: the
    /// quiescent fit's (held) or the joint fit's (joint).
    pub alpha: f64,
    /// Its 1-σ error, dex.
    pub alpha_err: f64,
    /// The M–σ slope β (dex per dex) the calibration used: the quiescent fit's (held) or the
    /// one shared by both samples (joint).
    pub beta: f64,
    /// Its 1-σ error.
    pub beta_err: f64,
    /// Intrinsic scatter ε of the quiescent galaxies about the relation, dex: the quiescent
    /// fit's (held) or the joint fit's (joint).
    pub eps_quiescent: f64,
    /// Plain sentences from the joint optimiser (e.g. a scatter on its ε = 0 boundary, errors
    /// that could not be computed); empty in the held mode, whose quiescent fit carries its
    /// own in `quiescent.termination`.
    pub notes: Vec<String>,
    /// The quiescent sample's own structural fit: the relation the AGN were held against
    /// (held), or the start of the joint fit (joint).
    pub quiescent: Fit,
}

/// One AGN: log σ (log10 km/s) with its error, and log VP (log10 M☉) with its error, dex.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AgnPoint {
    /// log10 σ, km/s.
    pub log_sigma: f64,
    /// Its error, dex.
    pub log_sigma_err: f64,
    /// log10 of the virial product c τ Δv² / G, M☉.
    pub log_vp: f64,
    /// Its error, dex.
    pub log_vp_err: f64,
}

/// Fewest AGN a calibration takes: an offset and a scatter from fewer are not worth quoting
/// (the project's choice).
pub const MIN_AGN: usize = 5;

/// Calibrates log ⟨f⟩ from the quiescent sample `quiescent` (x = log σ, y = log M_BH, as the
/// relations build them) and the AGN, at the pivot of `pivot_log_sigma`.
///
/// # Model
/// ```text
/// quiescent:  y = α + β (x − x0) + N(0, ε²)                      structural fit (§2.6)
/// AGN i:      z_i = log VP_i − β (x_i − x0),   z_i ~ N(a, ε_A² + s_i²),
///             s_i² = σ_VP,i² + β² σ_x,i²
/// a, ε_A:     restricted maximum likelihood (ε_A ≥ 0), a = Σ w z / Σ w, w = 1/(ε_A² + s_i²)
/// log ⟨f⟩ = α − a
/// Var(log ⟨f⟩) = 1/Σw + Var α + x̄_w² Var β + 2 x̄_w Cov(α, β),   x̄_w = Σ w (x − x0) / Σ w
/// ```
/// (∂a/∂β = −x̄_w). Units: dex throughout; f is dimensionless.
///
/// # Errors
/// [`FitError::TooFewPoints`] for fewer than [`MIN_AGN`] AGN, [`FitError::NonFiniteInput`] and
/// [`FitError::NegativeError`] for a bad AGN value, and any error of the quiescent fit.
///
/// # References
/// docs/methods.md §4.3 (the calibrations this reproduces, e.g. Onken et al. 2004, ApJ 615,
/// 645; Woo et al. 2010, ApJ 716, 269); restricted likelihood: Patterson & Thompson 1971,
/// Biometrika 58, 545.
pub fn calibrate(
    quiescent: &[Point],
    agn: &[AgnPoint],
    pivot_log_sigma: f64,
) -> Result<VirialCalibration, FitError> {
    check_agn(agn)?;
    let spec = FitSpec::new(Method::Structural, pivot_log_sigma);
    let relation = fit(quiescent, &spec)?;
    let (alpha, beta) = (relation.params.alpha, relation.params.beta);
    let d: Vec<f64> = agn.iter().map(|p| p.log_sigma - pivot_log_sigma).collect();
    let z: Vec<f64> = agn
        .iter()
        .zip(&d)
        .map(|(p, d)| p.log_vp - beta * d)
        .collect();
    let s2: Vec<f64> = agn
        .iter()
        .map(|p| p.log_vp_err.powi(2) + (beta * p.log_sigma_err).powi(2))
        .collect();
    let eps = restricted_scatter(&z, &s2);
    let w: Vec<f64> = s2.iter().map(|s| 1.0 / (eps * eps + s)).collect();
    let sum_w: f64 = w.iter().sum();
    let a = w.iter().zip(&z).map(|(w, z)| w * z).sum::<f64>() / sum_w;
    let x_bar = w.iter().zip(&d).map(|(w, d)| w * d).sum::<f64>() / sum_w;
    let var = |n: &str| relation.covariance(n, n).unwrap_or(0.0);
    let cov_ab = relation.covariance("alpha", "beta").unwrap_or(0.0);
    let var_relation = var("alpha") + x_bar * x_bar * var("beta") + 2.0 * x_bar * cov_ab;
    let var_agn = 1.0 / sum_w;
    Ok(VirialCalibration {
        mode: SlopeMode::Held,
        log_f: alpha - a,
        log_f_err: (var_agn + var_relation.max(0.0)).sqrt(),
        log_f_err_agn: var_agn.sqrt(),
        log_f_err_relation: var_relation.max(0.0).sqrt(),
        eps_agn: eps,
        n_agn: agn.len(),
        alpha,
        alpha_err: relation.errors.alpha,
        beta,
        beta_err: relation.errors.beta,
        eps_quiescent: relation.params.eps,
        notes: Vec::new(),
        quiescent: relation,
    })
}

/// Refuses fewer than [`MIN_AGN`] AGN and non-finite values or negative errors.
fn check_agn(agn: &[AgnPoint]) -> Result<(), FitError> {
    if agn.len() < MIN_AGN {
        return Err(FitError::TooFewPoints {
            n: agn.len(),
            min: MIN_AGN,
            method: "virial-factor",
        });
    }
    for (row, p) in agn.iter().enumerate() {
        for (value, column) in [
            (p.log_sigma, "log_sigma"),
            (p.log_sigma_err, "log_sigma_err"),
            (p.log_vp, "log_vp"),
            (p.log_vp_err, "log_vp_err"),
        ] {
            if !value.is_finite() {
                return Err(FitError::NonFiniteInput { row, column });
            }
        }
        for (value, column) in [
            (p.log_sigma_err, "log_sigma_err"),
            (p.log_vp_err, "log_vp_err"),
        ] {
            if value < 0.0 {
                return Err(FitError::NegativeError { row, column });
            }
        }
    }
    Ok(())
}

/// Calibrates log ⟨f⟩ with the slope chosen by `mode`: [`calibrate`] (held) or
/// [`calibrate_joint`] (joint).
///
/// # Model
/// ```text
/// held:  α, β from the quiescent structural fit; log ⟨f⟩ the AGN offset (docs/methods.md §4.3)
/// joint: α, β, log ⟨f⟩ from one likelihood of both samples (docs/methods.md §4.3)
/// ```
///
/// # Errors
/// Those of the chosen calibration.
///
/// # References
/// docs/methods.md §4.3.
pub fn calibrate_with(
    mode: SlopeMode,
    quiescent: &[Point],
    agn: &[AgnPoint],
    pivot_log_sigma: f64,
) -> Result<VirialCalibration, FitError> {
    match mode {
        SlopeMode::Held => calibrate(quiescent, agn, pivot_log_sigma),
        SlopeMode::Joint => calibrate_joint(quiescent, agn, pivot_log_sigma),
    }
}

/// Number of quiescent parameters in the joint θ (α, β, ε_q, μ_q, τ_q: the structural K = 1
/// line's θ).
const NQ: usize = 5;
/// Index of log ⟨f⟩ in the joint θ.
const LOG_F: usize = 5;
/// Index of ε_A in the joint θ.
const EPS_A: usize = 6;

/// The joint likelihood: the quiescent and the AGN structural K = 1 line likelihoods sharing
/// α and β, the AGN's zero point lowered by log ⟨f⟩.
///
/// θ = (α, β, ε_q, μ_q, τ_q, log ⟨f⟩, ε_A, μ_A, τ_A); μ unpivoted log10 σ.
struct Joint {
    quiescent: Model,
    agn: Model,
}

impl Joint {
    /// The two structural θ vectors of a joint θ.
    fn split(theta: &[f64]) -> ([f64; NQ], [f64; NQ]) {
        let q = [theta[0], theta[1], theta[2], theta[3], theta[4]];
        let a = [
            theta[0] - theta[LOG_F],
            theta[1],
            theta[EPS_A],
            theta[7],
            theta[8],
        ];
        (q, a)
    }

    /// A joint vector from the quiescent vector `q` (first five entries) and the AGN
    /// entries of `a` (ε, μ, τ at 2..5); `log_f` in its place.
    fn join(q: &[f64], log_f: f64, a: &[f64]) -> Vec<f64> {
        let mut t = q[..NQ].to_vec();
        t.extend_from_slice(&[log_f, a[2], a[3], a[4]]);
        t
    }
}

impl Objective for Joint {
    fn dim(&self) -> usize {
        2 * NQ - 1
    }

    fn eps_index(&self) -> usize {
        2
    }

    fn neg2(&self, theta: &[f64]) -> f64 {
        if theta.len() != self.dim() {
            return f64::INFINITY;
        }
        let (q, a) = Joint::split(theta);
        self.quiescent.neg2(&q) + self.agn.neg2(&a)
    }

    fn theta_to_free(&self, theta: &[f64]) -> Vec<f64> {
        let (q, a) = Joint::split(theta);
        let uq = self.quiescent.theta_to_free(&q);
        let ua = self.agn.theta_to_free(&a);
        Joint::join(&uq, theta[LOG_F], &ua)
    }

    fn free_to_theta(&self, u: &[f64], theta: &mut [f64]) {
        let (uq, ua) = Joint::split(u);
        let (mut q, mut a) = ([0.0; NQ], [0.0; NQ]);
        self.quiescent.free_to_theta(&uq, &mut q);
        self.agn.free_to_theta(&ua, &mut a);
        theta.copy_from_slice(&Joint::join(&q, u[LOG_F], &a));
    }

    fn typical(&self, theta: &[f64]) -> Vec<f64> {
        let (q, a) = Joint::split(theta);
        let ta = self.agn.typical(&a);
        Joint::join(&self.quiescent.typical(&q), ta[0], &ta)
    }

    fn free_steps(&self, theta: &[f64]) -> Vec<f64> {
        let (q, a) = Joint::split(theta);
        let ta = self.agn.free_steps(&a);
        Joint::join(&self.quiescent.free_steps(&q), ta[0], &ta)
    }
}

/// Calibrates log ⟨f⟩ with α and β fitted jointly from the quiescent sample `quiescent`
/// (x = log σ, y = log M_BH) and the AGN, at the pivot of `pivot_log_sigma`.
///
/// # Model
/// ```text
/// quiescent i:  ξ_i ~ N(μ_q, τ_q²),  η_i = α + β (ξ_i − x0) + N(0, ε_q²)
///               (x_i, y_i) = (ξ_i, η_i) + N2(0, [[σ_x², σ_xy], [σ_xy, σ_y²]]); upper limits
///               in y as the structural model takes them (docs/methods.md §2.6)
/// AGN j:        ξ_j ~ N(μ_A, τ_A²),  log VP_j = α − log ⟨f⟩ + β (ξ_j − x0) + N(0, ε_A²)
///               (x_j, log VP_j observed with errors σ_x,j and σ_VP,j, uncorrelated)
/// −2 ln L(α, β, ε_q, μ_q, τ_q, log ⟨f⟩, ε_A, μ_A, τ_A)
///     = −2 ln L_structural(quiescent | α, β, ε_q, μ_q, τ_q)
///       −2 ln L_structural(AGN | α − log ⟨f⟩, β, ε_A, μ_A, τ_A)
/// ```
/// each term the closed-form K = 1 line of [`super::structural::fit`]. Maximised by the
/// simplex search, Newton polish and central-difference Hessian of the project's optimiser,
/// started from [`calibrate`]'s result; errors from the inverse Hessian of −ln L over all nine
/// parameters. `log_f_err_agn` is the error of log ⟨f⟩ with α and β fixed (its conditional
/// variance), `log_f_err_relation` the rest. Units: x, μ in log10 km/s; y, α in log10 M☉;
/// τ, ε, log ⟨f⟩ in dex; β dex per dex; f dimensionless.
///
/// # Errors
/// As [`calibrate`]; [`FitError::NotConverged`] if the joint maximum is not found.
///
/// # References
/// Kelly 2007, ApJ 665, 1489 (the structural model); Woo et al. 2013, ApJ 772, 49 (a joint
/// fit of AGN and quiescent galaxies, abstract); docs/methods.md §4.3.
pub fn calibrate_joint(
    quiescent: &[Point],
    agn: &[AgnPoint],
    pivot_log_sigma: f64,
) -> Result<VirialCalibration, FitError> {
    let held = calibrate(quiescent, agn, pivot_log_sigma)?;
    let spec = FitSpec::new(Method::Structural, pivot_log_sigma);
    let q_model = Model::new(quiescent, &spec)?;
    let agn_points: Vec<Point> = agn
        .iter()
        .map(|p| Point::new(p.log_sigma, p.log_sigma_err, p.log_vp, p.log_vp_err))
        .collect();
    let a_model = Model::new(&agn_points, &spec)?;
    // Start: the held calibration; the AGN's true-σ model from their moments.
    let a_start = a_model.initial();
    let mut start = q_model.start(&held.quiescent);
    start.extend_from_slice(&[held.log_f, held.eps_agn, a_start[3], a_start[4]]);
    let joint = Joint {
        quiescent: q_model,
        agn: a_model,
    };
    let budget = tolerance::NM_ITERATIONS_PER_PARAM * joint.dim() as u64;
    let ml = optimize::maximise_likelihood(&joint, &start, budget, true)?;
    if !ml.neg2.is_finite() {
        return Err(FitError::NotConverged {
            iterations: ml.iterations,
        });
    }
    let t = &ml.theta;
    let cov = ml.cov.as_ref();
    let c = |i: usize, j: usize| cov.map_or(0.0, |m| m[(i, j)]);
    // Variance of log ⟨f⟩ explained by (α, β): c_fᵀ C_ab⁻¹ c_f.
    let (caa, cab, cbb) = (c(0, 0), c(0, 1), c(1, 1));
    let (cfa, cfb) = (c(LOG_F, 0), c(LOG_F, 1));
    let det = caa * cbb - cab * cab;
    let var_relation = if det > 0.0 {
        (cbb * cfa * cfa - 2.0 * cab * cfa * cfb + caa * cfb * cfb) / det
    } else {
        0.0
    };
    let var_total = c(LOG_F, LOG_F).max(0.0);
    let var_relation = var_relation.clamp(0.0, var_total);
    Ok(VirialCalibration {
        mode: SlopeMode::Joint,
        log_f: t[LOG_F],
        log_f_err: var_total.sqrt(),
        log_f_err_agn: (var_total - var_relation).sqrt(),
        log_f_err_relation: var_relation.sqrt(),
        eps_agn: t[EPS_A],
        n_agn: agn.len(),
        alpha: t[0],
        alpha_err: caa.max(0.0).sqrt(),
        beta: t[1],
        beta_err: cbb.max(0.0).sqrt(),
        eps_quiescent: t[2],
        notes: ml.notes.clone(),
        quiescent: held.quiescent,
    })
}

/// The restricted-likelihood scatter ε ≥ 0 of values `z` with known variances `s2` about a
/// common mean:
///
/// ```text
/// ℓ_R(ε) = −½ [ Σ ln(ε² + s_i²) + Σ w_i (z_i − ẑ)² + ln Σ w_i ],   w_i = 1/(ε² + s_i²)
/// ```
///
/// maximised over ε in [0, 5 · sd(z) + 1] by golden-section search on a bracket found by a
/// grid (ℓ_R is smooth and, for these data, has one maximum; the grid guards against a
/// second). dex.
fn restricted_scatter(z: &[f64], s2: &[f64]) -> f64 {
    let neg_l = |eps: f64| -> f64 {
        let w: Vec<f64> = s2.iter().map(|s| 1.0 / (eps * eps + s)).collect();
        let sum_w: f64 = w.iter().sum();
        let mean = w.iter().zip(z).map(|(w, z)| w * z).sum::<f64>() / sum_w;
        let mut total = sum_w.ln();
        for (w, z) in w.iter().zip(z) {
            total += -w.ln() + w * (z - mean).powi(2);
        }
        0.5 * total
    };
    let n = z.len() as f64;
    let mean = z.iter().sum::<f64>() / n;
    let sd = (z.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt();
    let top = 5.0 * sd + 1.0;
    const GRID: usize = 200;
    let (mut best, mut best_v) = (0, f64::INFINITY);
    for i in 0..=GRID {
        let v = neg_l(top * i as f64 / GRID as f64);
        if v < best_v {
            (best, best_v) = (i, v);
        }
    }
    let step = top / GRID as f64;
    let (mut lo, mut hi) = (
        (best as f64 - 1.0).max(0.0) * step,
        (best as f64 + 1.0).min(GRID as f64) * step,
    );
    let golden = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..80 {
        let m1 = hi - golden * (hi - lo);
        let m2 = lo + golden * (hi - lo);
        if neg_l(m1) < neg_l(m2) {
            hi = m2;
        } else {
            lo = m1;
        }
    }
    0.5 * (lo + hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(x: f64, y: f64) -> Point {
        Point {
            name: String::new(),
            x,
            x_err: 0.02,
            y,
            y_err: 0.1,
            xy_cov: 0.0,
            upper_limit: false,
            x2: None,
            x2_err: 0.0,
            x2_y_cov: 0.0,
            x_x2_cov: 0.0,
        }
    }

    /// Quiescent points ±0.3 dex about log M = 8.3 + 5 (x − 2.3), their structural fit, and 12
    /// AGN (log VP error 0.1 dex, σ exact) exactly on that fitted line lowered by 0.7 dex.
    fn on_a_shifted_relation() -> (Vec<Point>, Fit, Vec<AgnPoint>) {
        let quiescent: Vec<Point> = (0..40)
            .map(|i| {
                let x = 2.0 + 0.015 * f64::from(i);
                point(
                    x,
                    8.3 + 5.0 * (x - 2.3) + if i % 2 == 0 { 0.3 } else { -0.3 },
                )
            })
            .collect();
        let q = fit(&quiescent, &FitSpec::new(Method::Structural, 2.3)).unwrap();
        let agn: Vec<AgnPoint> = (0..12)
            .map(|i| {
                let x = 2.05 + 0.02 * f64::from(i);
                AgnPoint {
                    log_sigma: x,
                    log_sigma_err: 0.0,
                    log_vp: q.params.alpha + q.params.beta * (x - 2.3) - 0.7,
                    log_vp_err: 0.1,
                }
            })
            .collect();
        (quiescent, q, agn)
    }

    #[test]
    fn agn_exactly_on_a_shifted_relation_give_its_shift_and_no_scatter() {
        // Quiescent points exactly on log M = 8.3 + 5 (x − 2.3) and AGN exactly 0.7 dex below:
        // log f = 0.7 and ε_AGN = 0 (computed).
        let (quiescent, _, agn) = on_a_shifted_relation();
        let c = calibrate(&quiescent, &agn, 2.3).unwrap();
        assert!((c.log_f - 0.7).abs() < 1e-9, "{}", c.log_f);
        assert!(c.eps_agn < 1e-3, "{}", c.eps_agn);
        assert!(c.log_f_err > c.log_f_err_agn && c.log_f_err > c.log_f_err_relation);
        // With ε_AGN = 0 the AGN part is the mean's error: 0.1/√12 (computed).
        assert!((c.log_f_err_agn - 0.1 / 12f64.sqrt()).abs() < 1e-3);
    }

    #[test]
    fn the_joint_fit_of_agn_exactly_on_a_shifted_relation_gives_its_shift() {
        // The quiescent points and the AGN as in the held test: the AGN lie exactly on the
        // quiescent maximum-likelihood line lowered by 0.7 dex, so the AGN likelihood alone
        // is largest at that line with ε_A = 0, the quiescent one at the same (α, β), and the
        // joint maximum is log f = 0.7 with the quiescent α, β (computed from the model).
        let (quiescent, q, agn) = on_a_shifted_relation();
        let c = calibrate_joint(&quiescent, &agn, 2.3).unwrap();
        assert_eq!(c.mode, SlopeMode::Joint);
        assert!((c.log_f - 0.7).abs() < 1e-6, "{}", c.log_f);
        assert!(
            (c.beta - q.params.beta).abs() < 1e-5,
            "{} {}",
            c.beta,
            q.params.beta
        );
        assert!((c.alpha - q.params.alpha).abs() < 1e-6);
        assert!(c.eps_agn < 1e-3, "{}", c.eps_agn);
        assert!(
            c.log_f_err > 0.0 && c.beta_err > 0.0 && c.alpha_err > 0.0,
            "{c:?}"
        );
        let parts = c.log_f_err_agn.hypot(c.log_f_err_relation);
        assert!(
            (parts - c.log_f_err).abs() < 1e-12,
            "{parts} {}",
            c.log_f_err
        );
    }

    #[test]
    fn the_joint_likelihood_adds_the_agn_as_bivariate_normals_below_the_relation() {
        // An independent writing of the AGN term: (x, log VP) of AGN j is bivariate normal
        // with mean (μ_A, α − log f + β (μ_A − x0)) and covariance
        // [[τ² + σx², β τ²], [β τ², β² τ² + ε_A² + σ_VP²]] (Kelly 2007 eq. 16 for K = 1).
        let quiescent: Vec<Point> = (0..20)
            .map(|i| point(2.0 + 0.02 * f64::from(i), 7.8 + 0.3 * f64::from(i % 5)))
            .collect();
        let agn: Vec<AgnPoint> = (0..9)
            .map(|i| AgnPoint {
                log_sigma: 1.95 + 0.03 * f64::from(i),
                log_sigma_err: 0.01 + 0.005 * f64::from(i % 3),
                log_vp: 6.6 + 0.2 * f64::from(i % 4),
                log_vp_err: 0.12,
            })
            .collect();
        let x0 = 2.3;
        let spec = FitSpec::new(Method::Structural, x0);
        let points: Vec<Point> = agn
            .iter()
            .map(|p| Point::new(p.log_sigma, p.log_sigma_err, p.log_vp, p.log_vp_err))
            .collect();
        let joint = Joint {
            quiescent: Model::new(&quiescent, &spec).unwrap(),
            agn: Model::new(&points, &spec).unwrap(),
        };
        let theta = [8.2, 4.6, 0.3, 2.2, 0.12, 0.65, 0.4, 2.1, 0.09];
        let (alpha, beta, log_f, eps, mu, tau) = (8.2, 4.6, 0.65, 0.4, 2.1, 0.09);
        let mut expected = joint.quiescent.neg2(&theta[..5]);
        for p in &agn {
            let (a, b) = (tau * tau + p.log_sigma_err.powi(2), beta * tau * tau);
            let c = beta * beta * tau * tau + eps * eps + p.log_vp_err.powi(2);
            let det = a * c - b * b;
            let dx = p.log_sigma - mu;
            let dy = p.log_vp - (alpha - log_f + beta * (mu - x0));
            let q = (c * dx * dx - 2.0 * b * dx * dy + a * dy * dy) / det;
            expected += 2.0 * (2.0 * std::f64::consts::PI).ln() + det.ln() + q;
        }
        let got = joint.neg2(&theta);
        assert!(
            (got - expected).abs() < 1e-9 * expected.abs(),
            "{got} {expected}"
        );
        // And the free parametrisation maps back to θ.
        let mut back = [0.0; 9];
        joint.free_to_theta(&joint.theta_to_free(&theta), &mut back);
        for (u, v) in back.iter().zip(&theta) {
            assert!((u - v).abs() < 1e-12, "{back:?}");
        }
    }

    #[test]
    fn slope_modes_have_stable_names_and_dispatch() {
        for m in SlopeMode::ALL {
            assert_eq!(SlopeMode::parse(m.as_str()), Ok(m));
            assert_eq!(m.to_string().parse::<SlopeMode>(), Ok(m));
        }
        assert_eq!(SlopeMode::default(), SlopeMode::Held);
        assert!(matches!(
            SlopeMode::parse("free"),
            Err(FitError::InvalidSetting {
                setting: "slope",
                ..
            })
        ));
        let quiescent: Vec<Point> = (0..30)
            .map(|i| {
                point(
                    2.0 + 0.02 * f64::from(i),
                    7.6 + 0.1 * f64::from(i) + 0.2 * f64::from(i % 3),
                )
            })
            .collect();
        let agn: Vec<AgnPoint> = (0..12)
            .map(|i| AgnPoint {
                log_sigma: 1.95 + 0.03 * f64::from(i),
                log_sigma_err: 0.01,
                log_vp: 6.9 + 0.09 * f64::from(i) + 0.1 * f64::from(i % 2),
                log_vp_err: 0.1,
            })
            .collect();
        let held = calibrate_with(SlopeMode::Held, &quiescent, &agn, 2.3).unwrap();
        assert_eq!(held, calibrate(&quiescent, &agn, 2.3).unwrap());
        assert_eq!(held.mode, SlopeMode::Held);
        assert_eq!(held.beta.to_bits(), held.quiescent.params.beta.to_bits());
        let joint = calibrate_with(SlopeMode::Joint, &quiescent, &agn, 2.3).unwrap();
        assert_eq!(joint.mode, SlopeMode::Joint);
        // The quiescent points rise 5 dex per dex, the AGN 3 (by construction): the shared
        // slope lies between the two samples' own slopes.
        let points: Vec<Point> = agn
            .iter()
            .map(|p| Point::new(p.log_sigma, p.log_sigma_err, p.log_vp, p.log_vp_err))
            .collect();
        let own = fit(&points, &FitSpec::new(Method::Structural, 2.3)).unwrap();
        // (Computed by this test: quiescent 5.16 ± 0.17, AGN 3.08 ± 0.29, shared 4.97 ± 0.19;
        // the AGN's own scatter grows as the shared slope leaves theirs, so their pull is
        // weaker than an inverse-variance mean of the two slopes would be.)
        assert!(
            own.params.beta < joint.beta,
            "{} {}",
            own.params.beta,
            joint.beta
        );
        assert!(
            joint.beta < held.beta - 0.05,
            "{} {}",
            joint.beta,
            held.beta
        );
    }

    #[test]
    fn too_few_or_faulty_agn_are_refused() {
        let quiescent: Vec<Point> = (0..20)
            .map(|i| point(2.0 + 0.02 * f64::from(i), 8.0 + 0.1 * f64::from(i)))
            .collect();
        let one = AgnPoint {
            log_sigma: 2.1,
            log_sigma_err: 0.02,
            log_vp: 7.0,
            log_vp_err: 0.1,
        };
        assert!(matches!(
            calibrate(&quiescent, &[one; 3], 2.3),
            Err(FitError::TooFewPoints { n: 3, .. })
        ));
        let mut bad = vec![one; 6];
        bad[4].log_vp = f64::NAN;
        assert!(matches!(
            calibrate(&quiescent, &bad, 2.3),
            Err(FitError::NonFiniteInput { row: 4, .. })
        ));
        let mut negative = vec![one; 6];
        negative[2].log_sigma_err = -0.01;
        for mode in SlopeMode::ALL {
            assert!(matches!(
                calibrate_with(mode, &quiescent, &negative, 2.3),
                Err(FitError::NegativeError {
                    row: 2,
                    column: "log_sigma_err"
                })
            ));
            assert!(matches!(
                calibrate_with(mode, &quiescent, &[one; 3], 2.3),
                Err(FitError::TooFewPoints { n: 3, .. })
            ));
        }
    }

    #[test]
    fn the_restricted_scatter_recovers_a_known_spread_of_equal_error_values() {
        // Values ±1 around 0 with no measurement error: the restricted estimate of the spread
        // is the sample standard deviation with n − 1, √(n/(n−1)) for n = 10 (computed).
        let z: Vec<f64> = (0..10)
            .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
            .collect();
        let eps = restricted_scatter(&z, &[0.0; 10]);
        assert!((eps - (10.0f64 / 9.0).sqrt()).abs() < 1e-6, "{eps}");
    }
}
