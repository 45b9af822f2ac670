//! Estimators of the black-hole–host scaling relations (M–σ, M_BH–M_bulge, M_BH–L).
//!
//! Pure, synchronous numerics: no I/O, no async, no other massline module.
//!
//! # Model and conventions
//!
//! ```text
//! y = α + β (x − x0) [+ β2 (x − x0)²] [+ γ (x2 − x02)] + e,   e ~ N(0, ε²)
//! ```
//!
//! * y = log10(M_BH / M☉); x (and x2) = log10 of a host property in its natural unit
//!   (σ in km s⁻¹, M_bulge in M☉, L in L☉). Every x and y is a base-10 logarithm.
//! * x0 (x02) is the pivot, in the same log10 units; choose it near the sample mean so α and β
//!   are nearly uncorrelated (Tremaine et al. 2002 used σ0 = 200 km s⁻¹).
//! * Measurement errors σ_x, σ_y and the intrinsic scatter ε are in dex; the x–y error
//!   covariance σ_xy in dex².
//! * An upper limit gives y as the limit's value; it enters the likelihood estimators as a
//!   censored term. FITEXY and BCES cannot use limits and refuse them.
//!
//! # Which estimator when
//!
//! * [`Method::Structural`] (default): the Kelly (2007, ApJ 665, 1489) measurement-error model.
//!   The true x is drawn from a Gaussian or a mixture of up to three; the observed (x, y) is
//!   integrated over it in closed form. Under that Gaussian model of the true x it corrects
//!   the slope dilution that x errors comparable to the spread of x cause, and it uses upper
//!   limits correctly (x density kept). Its ε is still biased low at small N: maximum
//!   likelihood does not account for the fitted parameters.
//! * [`Method::Conditional`]: likelihood of y given the *observed* x with variance
//!   σ_y² + β² σ_x² − 2βσ_xy + ε². Fast and standard (Gültekin et al. 2009 style), but it
//!   underestimates |β| when x errors matter (regression dilution).
//! * [`Method::Fitexy`]: Tremaine et al. (2002, ApJ 574, 740) modified FITEXY; ε tuned so that
//!   χ²/(N − 2) = 1; Δχ² = 1 errors. For comparison with published work.
//! * [`Method::Bces`]: Akritas & Bershady (1996, ApJ 470, 706) moment estimators with analytic
//!   variances; four lines. For comparison with published work (bisector fits of M_BH–M_bulge).
//!
//! Curvature: [`Shape::Quadratic`] adds β2 (x − x0)²; use [`compare_curvature`] to test it
//! against the line with the likelihood ratio, AIC and BIC. Planes: [`Shape::Plane`].
//!
//! | method | Line | Quadratic | Plane | upper limits |
//! |---|---|---|---|---|
//! | structural | exact closed form | Gauss–Hermite quadrature over the true x | exact closed form (bivariate true-x model) | yes (x density kept) |
//! | conditional | yes | yes (slope β + 2β2 d in the variance) | yes (γ² σ_x2² − 2γ σ_x2y + 2βγ σ_xx2 in the variance) | yes (censored Φ term) |
//! | FITEXY | yes | `Unsupported` | `Unsupported` | `Unsupported` |
//! | BCES | yes | `Unsupported` | `Unsupported` | `Unsupported` |
//!
//! A planar fit models the full measurement covariance of (x, x2, y): besides σ_xy, a point
//! carries σ_x2y and σ_xx2 ([`Point::with_x2_covariances`]; both 0 unless given), e.g. from a
//! distance error shared by M_BH and M_bulge (docs/methods.md §2.7, §3.2).
//!
//! What a fit can answer beyond its parameters lives in the `predict` module (prediction at
//! new x with predictive intervals, placement of a new object, the x implied by a mass) and in
//! the `diagnostics` module (residuals, leave-one-out influence, zero-point offset of a
//! subsample).
//!
//! # Algorithms
//!
//! * Likelihood estimators: Newton's method with analytic gradient and Hessian for the
//!   conditional likelihood (all shapes) and for the structural straight line with one
//!   Gaussian x model (started from least squares corrected for attenuation and the moments
//!   of x); ε² ≥ 0 is an active-set constraint. Other structural models (mixtures,
//!   quadratic, plane) use a Nelder–Mead search in an unconstrained parametrisation (ln τ,
//!   softmax weights, atanh ρ) followed by a Newton polish on finite differences. The
//!   covariance is the inverse Hessian of −ln L over all parameters, of which the relation
//!   block is reported (nuisance parameters marginalised). When ε sits at 0 the reason says so
//!   and ε's error is the one-sided profile bound Δ(−2 ln L) = 1.
//! * Sums over objects are plain within blocks of eight objects and compensated (Neumaier)
//!   across blocks, and the logarithms ln V_i are taken once per block (as the logarithm of
//!   the block's product), so fits do not depend on row order beyond rounding (~1e-15
//!   relative). The straight-line conditional fit sweeps samples of ≥ 20,000 objects in
//!   fixed chunks on the rayon pool and combines the chunks in order, so its result does not
//!   depend on the number of threads.
//! * Newton steps smaller than 10⁻⁷ standard errors are taken without a line search (the
//!   change in −2 ln L is below the rounding noise of its sum), so the reported maximum is
//!   the root of the gradient rather than a point where the line search gave up on noise.
//! * A mixture component can collapse onto a few objects (τ_k → 0); the likelihood stays
//!   finite because of the x errors, and the errors are then computed with that direction held
//!   fixed (the reason says so). Prefer K = 1 unless the x distribution is clearly multimodal.
//!
//! # Minimum sample sizes
//!
//! See [`min_points`]: the likelihood estimators need more detections than relation parameters
//! (α, β, [β2|γ], ε), FITEXY and BCES need three.

pub mod autocorr;
pub mod bces;
pub mod bootstrap;
pub mod conditional;
pub mod diagnostics;
pub mod ensemble;
pub mod fitexy;
pub mod influence;
pub mod intervals;
pub mod optimize;
pub mod plan;
pub mod posterior;
pub mod predict;
pub mod special;
pub mod structural;
pub mod tolerance;
pub mod types;
pub mod virial;

use serde::Serialize;

pub use diagnostics::{Influence, Offset, Residual, leave_one_out, residuals, zero_point_offset};
pub use influence::{AddingBase, Shift, adding_one};
pub use intervals::{IntervalKind, Intervals, ParamInterval};
pub use predict::{Placement, Prediction, invert, locate, place, predict, predict_plane};
pub use types::{
    BcesLine, Fit, FitSpec, Method, MixtureComponent, Params, Point, Shape, Termination,
};

/// Everything that can go wrong in a fit; each message is one plain sentence.
#[non_exhaustive]
#[derive(thiserror::Error, Debug, Clone, PartialEq)]
pub enum FitError {
    /// Fewer detections than the method needs.
    #[error("The {method} fit needs at least {min} detections but the sample has {n}.")]
    TooFewPoints {
        /// Detections supplied.
        n: usize,
        /// Detections needed.
        min: usize,
        /// Method name ([`Method::as_str`]).
        method: &'static str,
    },
    /// Every object is an upper limit.
    #[error(
        "Every object in the sample is an upper limit, so there is nothing to fit a relation to."
    )]
    AllUpperLimits,
    /// The detections all have the same x.
    #[error("All detections have the same host-property value, so no slope can be fitted.")]
    NoSpreadInX,
    /// A value is NaN or infinite.
    #[error("Row {row} has a non-finite value in column {column}.")]
    NonFiniteInput {
        /// Index of the offending point (0-based).
        row: usize,
        /// Name of the field.
        column: &'static str,
    },
    /// A measurement error is negative.
    #[error("Row {row} has a negative error in column {column}.")]
    NegativeError {
        /// Index of the offending point (0-based).
        row: usize,
        /// Name of the field.
        column: &'static str,
    },
    /// The optimiser did not converge.
    #[error("The optimiser did not converge within {iterations} iterations.")]
    NotConverged {
        /// Iterations spent.
        iterations: u64,
    },
    /// The method cannot do what was asked.
    #[error("{what}")]
    Unsupported {
        /// One sentence saying what is not supported and why.
        what: String,
    },
    /// A setting is out of range.
    #[error("Invalid {setting}: {reason}")]
    InvalidSetting {
        /// Name of the setting.
        setting: &'static str,
        /// Why it is invalid.
        reason: String,
    },
}

/// Fits the scaling relation with the estimator named in `spec`.
///
/// # Model
/// ```text
/// y_i = α + β (x_i − x0) [+ β2 (x_i − x0)²] [+ γ (x2_i − x02)] + e_i,  e_i ~ N(0, ε²)
/// ```
/// y = log10 M_BH (dex), x, x2 log10 host properties, x0, x02 pivots (log10 units), ε dex.
/// The method-specific likelihoods and moment equations are documented in [`structural::fit`],
/// [`conditional::fit`], [`fitexy::fit`] and [`bces::fit`].
///
/// # Errors
/// [`FitError::NonFiniteInput`], [`FitError::NegativeError`], [`FitError::TooFewPoints`],
/// [`FitError::AllUpperLimits`], [`FitError::NoSpreadInX`] for bad samples;
/// [`FitError::Unsupported`] for combinations a method cannot fit (limits with FITEXY/BCES;
/// Quadratic/Plane with FITEXY/BCES); [`FitError::NotConverged`] if the optimiser fails.
///
/// # References
/// Kelly 2007, ApJ 665, 1489; Gültekin et al. 2009, ApJ 698, 198; Tremaine et al. 2002,
/// ApJ 574, 740; Akritas & Bershady 1996, ApJ 470, 706.
pub fn fit(points: &[Point], spec: &FitSpec) -> Result<Fit, FitError> {
    fit_with(points, spec, Quote::Restricted)
}

/// [`fit`] without the restricted-likelihood intervals (`fit.intervals` are then the curvature
/// ones): for refits of which only the parameters are used (bootstrap replicates, leave-one-out
/// refits, a refit with one object added), where the restricted computation would cost a few
/// dozen inner maximisations per refit for nothing.
///
/// # Errors
/// As [`fit`].
pub fn fit_params_only(points: &[Point], spec: &FitSpec) -> Result<Fit, FitError> {
    fit_with(points, spec, Quote::Curvature)
}

/// Which intervals a likelihood fit computes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Quote {
    /// The restricted-likelihood intervals where they apply ([`intervals`]).
    Restricted,
    /// The curvature intervals only.
    Curvature,
}

fn fit_with(points: &[Point], spec: &FitSpec, quote: Quote) -> Result<Fit, FitError> {
    match spec.method {
        Method::Structural => structural::fit_quoted(points, spec, quote),
        Method::Conditional => conditional::fit_quoted(points, spec, quote),
        Method::Fitexy => fitexy::fit(points, spec),
        Method::Bces(_) => bces::fit(points, spec),
    }
}

/// Minimum number of detections (upper limits do not count) a fit with `spec` needs.
///
/// # Model
/// ```text
/// conditional:  k + 1          k = number of relation parameters (α, β, [β2|γ], ε): 3 or 4
/// structural:   k + 1 + 3(K − 1)   K = x-model components (each extra one adds a weight,
///                                  a mean and an sd)
/// FITEXY:       3              χ²/(N − 2) must have at least one degree of freedom
/// BCES:         3              the moment estimators and ε need N − 2 ≥ 1
/// ```
/// The likelihood estimators need more points than parameters, otherwise ε is not identified
/// (a line through two points always has ε = 0 at the maximum).
///
/// # Errors
/// None.
///
/// # References
/// Tremaine et al. 2002, ApJ 574, 740 (the N − 2 normalisation).
pub fn min_points(spec: &FitSpec) -> usize {
    let k = relation_param_count(spec.shape);
    match spec.method {
        Method::Conditional => k + 1,
        Method::Structural => k + 1 + 3 * spec.components.saturating_sub(1),
        Method::Fitexy | Method::Bces(_) => 3,
    }
}

/// Number of relation parameters (α, β, [β2|γ], ε) for a shape.
pub(crate) fn relation_param_count(shape: Shape) -> usize {
    match shape {
        Shape::Line => 3,
        Shape::Quadratic | Shape::Plane => 4,
    }
}

/// Names of the relation parameters in `cov` / theta order for a shape.
pub(crate) fn relation_names(shape: Shape) -> &'static [&'static str] {
    match shape {
        Shape::Line => &["alpha", "beta", "eps"],
        Shape::Quadratic => &["alpha", "beta", "beta2", "eps"],
        Shape::Plane => &["alpha", "beta", "gamma", "eps"],
    }
}

/// The likelihood of a sample as a function of a full parameter vector θ, for samplers.
///
/// θ layout (see [`Likelihood::names`]): `alpha, beta, [beta2|gamma], eps`, then for the
/// structural estimator the true-x model of each component k = 1..K: `mu_k, tau_k` (plus
/// `mu2_k, tau2_k, rho_k` for planes) and the weights `w_1 … w_{K−1}` (w_K = 1 − Σ). Means
/// are unpivoted log10 values, sds in dex.
pub struct Likelihood<'a> {
    points: &'a [Point],
    inner: LikelihoodInner,
}

enum LikelihoodInner {
    /// The model (names, start, parameters) and its sampler form (the evaluations).
    Conditional(conditional::Model, conditional::Sampler),
    /// The model, and for the K = 1 line its sampler form (the evaluations).
    Structural(structural::Model, Option<structural::LineSampler>),
}

impl<'a> Likelihood<'a> {
    /// Prepares the likelihood of `points` under `spec` (Structural or Conditional only).
    ///
    /// # Model
    /// ```text
    /// ln L(θ) = Σ_i ln p(x_i, y_i | θ)   (structural)   or   Σ_i ln p(y_i | x_i, θ)   (conditional)
    /// ```
    /// with the per-object terms of [`structural::fit`] and [`conditional::fit`].
    ///
    /// # Errors
    /// The input errors of [`fit`]; [`FitError::Unsupported`] for FITEXY and BCES.
    ///
    /// # References
    /// Kelly 2007, ApJ 665, 1489, §4–5.
    pub fn new(points: &'a [Point], spec: &FitSpec) -> Result<Self, FitError> {
        let inner = match spec.method {
            Method::Conditional => {
                let model = conditional::Model::new(points, spec)?;
                let sampler = model.sampler();
                LikelihoodInner::Conditional(model, sampler)
            }
            Method::Structural => {
                let model = structural::Model::new(points, spec)?;
                let sampler = model.line_sampler();
                LikelihoodInner::Structural(model, sampler)
            }
            Method::Fitexy | Method::Bces(_) => {
                return Err(FitError::Unsupported {
                    what: format!("The {} estimator has no likelihood to sample.", spec.method),
                });
            }
        };
        Ok(Likelihood { points, inner })
    }

    /// Parameter names in θ order.
    ///
    /// # Model
    /// ```text
    /// θ = (α, β, [β2|γ], ε, x-model …): the names of its components, in order
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// Kelly 2007, ApJ 665, 1489, §4 (the parameters of the structural model).
    pub fn names(&self) -> &[&'static str] {
        match &self.inner {
            LikelihoodInner::Conditional(m, _) => m.names(),
            LikelihoodInner::Structural(m, _) => m.names(),
        }
    }

    /// Number of objects the likelihood was built from.
    ///
    /// # Model
    /// ```text
    /// N = number of objects (detections and limits)
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None (bookkeeping).
    pub fn n(&self) -> usize {
        self.points.len()
    }

    /// ln L(θ); −∞ outside the support (ε < 0, τ ≤ 0, |ρ| ≥ 1, weights outside [0, 1]) or if
    /// θ has the wrong length.
    ///
    /// # Model
    /// ```text
    /// ln L(θ) = −½ Σ_i f_i(θ), f_i the per-object −2 ln L terms of conditional::fit / structural::fit; α, ε, μ in log10 units / dex
    /// ```
    ///
    /// # Errors
    /// None: returns −∞ outside the support instead of an error.
    ///
    /// # References
    /// Kelly 2007, ApJ 665, 1489; Gültekin et al. 2009, ApJ 698, 198.
    pub fn log_likelihood(&self, theta: &[f64]) -> f64 {
        match &self.inner {
            LikelihoodInner::Conditional(_, s) => s.log_likelihood(theta),
            LikelihoodInner::Structural(_, Some(s)) => s.log_likelihood(theta),
            LikelihoodInner::Structural(m, None) => m.log_likelihood(theta),
        }
    }

    /// The maximum-likelihood point of `fit` in θ layout (for the structural estimator the
    /// x model is read from `fit.x_model`; if that is missing, moment estimates are used).
    ///
    /// # Model
    /// ```text
    /// θ̂ = (α̂, β̂, [β̂2|γ̂], ε̂, μ̂_k, τ̂_k, …) read from the fit
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None (bookkeeping).
    pub fn start(&self, fit: &Fit) -> Vec<f64> {
        match &self.inner {
            LikelihoodInner::Conditional(m, _) => m.start(fit),
            LikelihoodInner::Structural(m, _) => m.start(fit),
        }
    }

    /// Maps θ back to the relation parameters.
    ///
    /// # Model
    /// ```text
    /// (α, β, [β2|γ], ε) = the first components of θ
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None (bookkeeping).
    pub fn params(&self, theta: &[f64]) -> Params {
        match &self.inner {
            LikelihoodInner::Conditional(m, _) => m.params(theta),
            LikelihoodInner::Structural(m, _) => m.params(theta),
        }
    }
}

/// A straight line and a quadratic fitted to the same sample, and the tests between them.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CurvatureComparison {
    /// The straight-line fit.
    pub line: Fit,
    /// The fit with the β2 (x − x0)² term.
    pub quadratic: Fit,
    /// Likelihood-ratio statistic Λ = (−2 ln L)_line − (−2 ln L)_quadratic (≥ 0 up to
    /// optimiser noise; clamped at 0).
    pub lr_statistic: f64,
    /// P(χ²₁ > Λ): small values favour the curvature.
    pub p_value: f64,
    /// AIC_quadratic − AIC_line (negative favours the quadratic).
    pub delta_aic: f64,
    /// BIC_quadratic − BIC_line (negative favours the quadratic).
    pub delta_bic: f64,
}

/// Fits a line and a quadratic with the likelihood estimator of `spec` and compares them.
///
/// # Model
/// ```text
/// line:      y = α + β (x − x0)                 + N(0, ε²)
/// quadratic: y = α + β (x − x0) + β2 (x − x0)²  + N(0, ε²)
/// Λ = −2 ln L_line + 2 ln L_quad,  p = P(χ²₁ > Λ) = erfc(√(Λ/2))
/// ΔAIC = Λ_q − Λ_l + 2,  ΔBIC = (−2 ln L_q) − (−2 ln L_l) + ln n
/// ```
/// (one extra parameter; x, y in log10 units, β2 in dex per dex²).
///
/// # Errors
/// [`FitError::Unsupported`] unless `spec.method` is Structural or Conditional; the errors of
/// [`fit`].
///
/// # References
/// Wilks 1938, Ann. Math. Stat. 9, 60 (χ² limit of the likelihood ratio); Akaike 1974, IEEE
/// TAC 19, 716; Schwarz 1978, Ann. Stat. 6, 461; Wyithe 2006, MNRAS 365, 1082 (the log-quadratic
/// M–σ term).
pub fn compare_curvature(
    points: &[Point],
    spec: &FitSpec,
) -> Result<CurvatureComparison, FitError> {
    if !matches!(spec.method, Method::Structural | Method::Conditional) {
        return Err(FitError::Unsupported {
            what: format!(
                "Curvature comparison needs a likelihood estimator, and {} is not one.",
                spec.method
            ),
        });
    }
    let line = fit(points, &spec.clone().with_shape(Shape::Line)?)?;
    let quadratic = fit(points, &spec.clone().with_shape(Shape::Quadratic)?)?;
    let (Some(l_line), Some(l_quad), Some(aic_l), Some(aic_q), Some(bic_l), Some(bic_q)) = (
        line.neg2_log_l,
        quadratic.neg2_log_l,
        line.aic,
        quadratic.aic,
        line.bic,
        quadratic.bic,
    ) else {
        return Err(FitError::Unsupported {
            what: "Curvature comparison needs −2 ln L from both fits.".to_owned(),
        });
    };
    let lr_statistic = (l_line - l_quad).max(0.0);
    let p_value = statrs::function::erf::erfc((lr_statistic / 2.0).sqrt());
    Ok(CurvatureComparison {
        delta_aic: aic_q - aic_l,
        delta_bic: bic_q - bic_l,
        line,
        quadratic,
        lr_statistic,
        p_value,
    })
}

#[cfg(test)]
mod tests {
    use super::types::test_data::{Sim, hogg, simulate};
    use super::*;

    fn all_methods() -> Vec<Method> {
        Method::ALL.to_vec()
    }

    #[test]
    fn method_names_round_trip() {
        for m in Method::ALL {
            assert_eq!(m.as_str().parse::<Method>(), Ok(m));
        }
        assert!(matches!(
            "ols".parse::<Method>(),
            Err(FitError::InvalidSetting {
                setting: "method",
                ..
            })
        ));
        assert_eq!("plane".parse::<Shape>(), Ok(Shape::Plane));
    }

    #[test]
    fn row_order_does_not_change_any_fit() {
        // Invariance: the likelihoods and moment sums are symmetric in the objects.
        let s = Sim {
            n: 60,
            seed: 21,
            ..Sim::default()
        };
        let pts = simulate(&s);
        let mut shuffled = pts.clone();
        shuffled.reverse();
        shuffled.swap(3, 41);
        shuffled.rotate_left(17);
        for m in all_methods() {
            let spec = FitSpec::new(m, s.pivot);
            let a = fit(&pts, &spec).expect("fit");
            let b = fit(&shuffled, &spec).expect("fit");
            for (x, y, name) in [
                (a.params.alpha, b.params.alpha, "alpha"),
                (a.params.beta, b.params.beta, "beta"),
                (a.params.eps, b.params.eps, "eps"),
                (a.errors.beta, b.errors.beta, "beta error"),
            ] {
                assert!(tolerance::close(x, y, 1e-9, 1e-9), "{m} {name}: {x} vs {y}");
            }
        }
    }

    #[test]
    fn moving_the_pivot_shifts_alpha_by_beta_times_the_shift() {
        // y = α1 + β (x − p1) = α2 + β (x − p2)  ⇒  α2 = α1 + β (p2 − p1), β and ε unchanged.
        let s = Sim {
            n: 60,
            seed: 22,
            ..Sim::default()
        };
        let pts = simulate(&s);
        let shift = 0.25;
        for m in all_methods() {
            let a = fit(&pts, &FitSpec::new(m, s.pivot)).expect("fit");
            let b = fit(&pts, &FitSpec::new(m, s.pivot + shift)).expect("fit");
            assert!(
                (b.params.alpha - (a.params.alpha + a.params.beta * shift)).abs() < 1e-6,
                "{m}"
            );
            assert!((b.params.beta - a.params.beta).abs() < 1e-6, "{m}");
            assert!((b.params.eps - a.params.eps).abs() < 1e-6, "{m}");
        }
    }

    #[test]
    fn every_error_variant_is_produced_with_a_sentence() {
        let spec = FitSpec::new(Method::Structural, 0.0);
        let base = hogg(1);
        let mut errors = Vec::new();
        // Too few detections: a line needs 4 for the likelihoods.
        errors.push(fit(&base[..3], &spec).expect_err("too few"));
        assert!(matches!(
            errors[0],
            FitError::TooFewPoints {
                n: 3,
                min: 4,
                method: "structural"
            }
        ));
        // All limits.
        let limits: Vec<Point> = base
            .iter()
            .map(|p| Point::limit(p.x, p.x_err, p.y))
            .collect();
        errors.push(fit(&limits, &spec).expect_err("limits"));
        assert!(matches!(errors[1], FitError::AllUpperLimits));
        // No spread in x.
        let flat: Vec<Point> = base
            .iter()
            .map(|p| Point {
                x: 200.0,
                ..p.clone()
            })
            .collect();
        errors.push(fit(&flat, &spec).expect_err("flat"));
        assert!(matches!(errors[2], FitError::NoSpreadInX));
        // Non-finite input names row and column.
        let mut bad = base.clone();
        bad[5].y_err = f64::NAN;
        errors.push(fit(&bad, &spec).expect_err("nan"));
        assert_eq!(
            errors[3],
            FitError::NonFiniteInput {
                row: 5,
                column: "y_err"
            }
        );
        // Negative error.
        let mut neg = base.clone();
        neg[7].x_err = -1.0;
        errors.push(fit(&neg, &spec).expect_err("negative"));
        assert_eq!(
            errors[4],
            FitError::NegativeError {
                row: 7,
                column: "x_err"
            }
        );
        // Unsupported: BCES with an upper limit.
        let mut lim = base.clone();
        lim[0].upper_limit = true;
        errors.push(
            fit(&lim, &FitSpec::new(Method::Bces(BcesLine::Bisector), 0.0)).expect_err("bces"),
        );
        assert!(matches!(errors[5], FitError::Unsupported { .. }));
        // Invalid setting: four mixture components.
        errors.push(spec.clone().with_components(4).expect_err("components"));
        assert!(matches!(
            errors[6],
            FitError::InvalidSetting {
                setting: "components",
                ..
            }
        ));
        // Not converged: a simplex budget of 3 iterations.
        let model =
            conditional::Model::new(&base, &FitSpec::new(Method::Conditional, 0.0)).expect("model");
        errors.push(
            optimize::maximise_likelihood(&model, &model.initial(), 3, true).expect_err("budget"),
        );
        assert!(matches!(
            errors[7],
            FitError::NotConverged { iterations: 3 }
        ));
        for e in &errors {
            let msg = e.to_string();
            assert!(
                msg.ends_with('.') && msg.chars().next().is_some_and(char::is_uppercase),
                "{msg}"
            );
        }
    }

    #[test]
    fn degenerate_samples_without_errors_give_errors_or_sensible_fits() {
        // Invented points exactly on y = 8 + 4 (x − 2) = 9.2 + 4 (x − 2.3) with no errors:
        // likelihoods are unbounded, FITEXY undefined; BCES returns the line itself (α = 9.2 at
        // the pivot 2.3, computed).
        let exact: Vec<Point> = (0..10)
            .map(|i| {
                let x = 2.0 + 0.05 * f64::from(i);
                Point::new(x, 0.0, 8.0 + 4.0 * (x - 2.0), 0.0)
            })
            .collect();
        for m in [Method::Conditional, Method::Fitexy] {
            assert!(
                matches!(
                    fit(&exact, &FitSpec::new(m, 2.3)),
                    Err(FitError::Unsupported { .. })
                ),
                "{m}"
            );
        }
        let s = fit(&exact, &FitSpec::new(Method::Structural, 2.3));
        assert!(s.is_err(), "{s:?}");
        let b = fit(&exact, &FitSpec::new(Method::Bces(BcesLine::YOnX), 2.3)).expect("bces");
        assert!((b.params.beta - 4.0).abs() < 1e-9 && (b.params.alpha - 9.2).abs() < 1e-9);
        // ±0.1 dex alternating scatter without errors: FITEXY reduces to least squares with
        // ε0² = Σ r²/(N − 2) (Tremaine et al. 2002 rule with σ = 0).
        let noisy: Vec<Point> = exact
            .iter()
            .enumerate()
            .map(|(i, p)| Point {
                y: p.y + if i % 2 == 0 { 0.1 } else { -0.1 },
                ..p.clone()
            })
            .collect();
        let f = fit(&noisy, &FitSpec::new(Method::Fitexy, 2.3)).expect("fitexy");
        let ols = fit(&noisy, &FitSpec::new(Method::Bces(BcesLine::YOnX), 2.3)).expect("bces");
        assert!(
            (f.params.beta - ols.params.beta).abs() < 1e-9,
            "{:?} {:?} {}",
            f.params,
            ols.params,
            f.termination.reason
        );
        let r2: f64 = noisy
            .iter()
            .map(|p| (p.y - f.params.alpha - f.params.beta * (p.x - 2.3)).powi(2))
            .sum();
        assert!((f.params.eps - (r2 / 8.0).sqrt()).abs() < 1e-9);
    }

    #[test]
    fn minimum_sample_sizes_follow_the_documented_rule() {
        // docs/methods.md §2: one detection more than the relation parameters (4 for a line, 5
        // for a quadratic), 3 more per extra structural component (K = 3: 4 + 6 = 10), 3 for
        // FITEXY and BCES.
        let s = |m| FitSpec::new(m, 0.0);
        assert_eq!(min_points(&s(Method::Conditional)), 4);
        assert_eq!(min_points(&s(Method::Structural)), 4);
        assert_eq!(
            min_points(&s(Method::Structural).with_components(3).expect("spec")),
            10
        );
        assert_eq!(
            min_points(
                &s(Method::Conditional)
                    .with_shape(Shape::Quadratic)
                    .expect("spec")
            ),
            5
        );
        assert_eq!(min_points(&s(Method::Fitexy)), 3);
        assert_eq!(min_points(&s(Method::Bces(BcesLine::YOnX))), 3);
        // Exactly the minimum fits.
        assert!(fit(&hogg(17), &s(Method::Conditional)).is_ok());
    }

    #[test]
    fn curvature_comparison_prefers_the_line_on_linear_data() {
        let s = Sim {
            n: 200,
            seed: 31,
            ..Sim::default()
        };
        let pts = simulate(&s);
        for m in [Method::Conditional, Method::Structural] {
            let c = compare_curvature(&pts, &FitSpec::new(m, s.pivot)).expect("compare");
            assert!(c.p_value > 0.01, "{m}: p = {}", c.p_value);
            assert!(c.delta_bic > 0.0, "{m}: ΔBIC = {}", c.delta_bic);
            // ΔAIC = Λ·(−1) + 2 by definition of AIC with one extra parameter (docs/methods.md
            // §2.7). p > 0.01 and ΔBIC > 0 are the project's thresholds for "no curvature".
            assert!((c.delta_aic - (2.0 - c.lr_statistic)).abs() < 1e-6);
        }
        assert!(matches!(
            compare_curvature(&pts, &FitSpec::new(Method::Fitexy, s.pivot)),
            Err(FitError::Unsupported { .. })
        ));
    }

    #[test]
    fn curvature_comparison_detects_a_planted_quadratic_term() {
        // Invented truth β2 = 8 dex/dex² over an x spread of 0.15 dex: 8 × 0.15² = 0.18 dex at
        // 1 sd (computed).
        let s = Sim {
            n: 300,
            seed: 32,
            beta2: 8.0,
            x_sd: 0.15,
            eps: 0.2,
            ..Sim::default()
        };
        let pts = simulate(&s);
        for m in [Method::Conditional, Method::Structural] {
            let c = compare_curvature(&pts, &FitSpec::new(m, s.pivot)).expect("compare");
            assert!(c.p_value < 1e-4, "{m}: p = {}", c.p_value);
            assert!(c.delta_aic < 0.0 && c.delta_bic < 0.0);
            let q = &c.quadratic;
            let (b2, e2) = (q.params.beta2.unwrap_or(0.0), q.errors.beta2.unwrap_or(0.0));
            if m == Method::Structural {
                assert!((b2 - s.beta2).abs() < 3.0 * e2, "{m}: β2 = {b2} ± {e2}");
            }
        }
    }
}
