//! Named numerical tolerances of the fit module, and the rule for comparing numbers in tests.
//!
//! # Absolute versus relative comparison
//!
//! Compare a quantity *relatively* when its scale is arbitrary or set by the data (slopes of
//! the Hogg et al. 2010 table, whose intercepts are ~300, χ² values, −2 ln L): |a − b| ≤
//! r · max(|a|, |b|). Compare it *absolutely* when it lives on a fixed scale in dex or is
//! expected to be near zero (zero points of an M–σ fit, the intrinsic scatter at its ε = 0
//! boundary, residuals, probabilities): |a − b| ≤ t. A relative test of a number that is
//! zero passes nothing; an absolute test of a number of order 300 is meaningless at 1e-9.
//! [`close`] does both: it passes when either the absolute or the relative criterion holds.
//!
//! The optimiser tolerances below are set so that fitted parameters are reproducible to
//! about 1e-9 relative (well below any statistical error), which is what the invariance tests
//! (row order, pivot shift) check.

/// Nelder–Mead: absolute spread of the simplex values at convergence (objective is −2 ln L).
pub const NM_F_ABS: f64 = 1e-13;
/// Nelder–Mead: relative spread of the simplex values at convergence.
pub const NM_F_REL: f64 = 1e-14;
/// Nelder–Mead: simplex diameter at convergence, in units of the initial step.
pub const NM_X_REL: f64 = 1e-9;
/// Nelder–Mead: restarts from the best vertex (guards against a collapsed simplex).
pub const NM_MAX_RESTARTS: usize = 4;
/// Nelder–Mead: iteration budget per fitted parameter.
pub const NM_ITERATIONS_PER_PARAM: u64 = 4_000;
/// Brent: relative tolerance on the abscissa.
pub const BRENT_X_REL: f64 = 1e-11;
/// Brent: iteration limit.
pub const BRENT_MAX_ITERATIONS: usize = 300;
/// Newton polish: stop when every step is below this fraction of the parameter's error.
pub const NEWTON_STEP_REL: f64 = 1e-12;
/// Newton polish: maximum steps.
pub const NEWTON_MAX_STEPS: usize = 8;
/// Newton's method with analytic derivatives: a step below this many standard errors that
/// brings no decrease beyond rounding noise ends the iteration.
pub const NEWTON_NOISE_STEP_REL: f64 = 1e-7;
/// Newton's method with analytic derivatives: iteration limit.
pub const NEWTON_ML_MAX_ITERATIONS: u64 = 200;
/// Hessian: first finite-difference step relative to the parameter size.
pub const HESSIAN_REL_STEP: f64 = 1e-4;
/// Hessian: smallest first finite-difference step.
pub const HESSIAN_MIN_STEP: f64 = 1e-4;
/// Hessian: final step as a fraction of the parameter's standard error.
pub const HESSIAN_STEP_PER_SIGMA: f64 = 1e-2;
/// Intrinsic scatter below this (dex, or the y units of the data) is reported as exactly 0.
/// Because −2 ln L is even in ε, ε ≈ 1e-5 from the optimiser means the optimum is on the
/// ε = 0 boundary.
pub const EPS_BOUNDARY_REL: f64 = 1e-4;
/// Δ(−2 ln L) (or Δχ²) that defines a 1-σ profile interval.
pub const DELTA_ONE_SIGMA: f64 = 1.0;
/// Root finding on profiles: absolute tolerance relative to the parameter scale.
pub const PROFILE_X_REL: f64 = 1e-10;

/// True when `a` and `b` agree absolutely within `abs` or relatively within `rel`.
///
/// # Model
/// ```text
/// |a − b| ≤ abs  or  |a − b| ≤ rel · max(|a|, |b|)
/// ```
///
/// # Errors
/// None.
///
/// # References
/// Common practice (cf. numpy.isclose).
pub fn close(a: f64, b: f64, abs: f64, rel: f64) -> bool {
    let d = (a - b).abs();
    d <= abs || d <= rel * a.abs().max(b.abs())
}
