//! Planning an observation: the black-hole mass, the radius and the angular size of the sphere
//! of influence that a fitted relation predicts for a host not yet observed, and the
//! probability that an instrument of a given resolution will resolve it (docs/methods.md §4.9).
//!
//! # Model
//! ```text
//! log M̂      = α + β (x − x0)                                     (dex, M☉)
//! log r̂_infl = log M̂ − 2 s + log G                                (pc; s = log σ, km/s)
//! log θ̂_infl = log r̂_infl − log D + log(206 264.806″ / 10⁶)       (arcsec; D in Mpc)
//! V = ε² + Var(α) + (x − x0)² Var(β) + 2 (x − x0) Cov(α, β) + Σ_k (c_k² + b_k² Var(β)) σ_k²
//! κ₃ = 6 (Cov(α, β) + (x − x0) Var(β)) Σ_k c_k b_k σ_k²,   γ = κ₃ / V^{3/2}
//! P(resolved) = Φ(−z) + φ(z) γ (z² − 1)/6,   z = (log(threshold · θ_res) − log θ̂_infl) / √V
//! ```
//! Each measured input k (log σ, log x, log D) with error σ_k (dex) enters log θ with the
//! coefficient c_k (at the fitted β) and b_k = ∂c_k/∂β; the b_k term is the exact variance of
//! the product of the uncertain slope and the input's error (second order, small). The same
//! products make the prediction slightly skewed (γ up to about 0.04 far from the pivot), which
//! moves P by up to 0.002: P carries the first (Edgeworth) correction for it, the intervals
//! the Cornish–Fisher one. The coefficients of each case:
//!
//! | case | input | c_k in log M | in log r_infl | in log θ_infl |
//! |---|---|---|---|---|
//! | M–σ (x = s) | s | β | β − 2 | β − 2 |
//! | | log D | 0 | 0 | −1 |
//! | M–x, σ separate, x ∝ D^p | log x | β | β | β |
//! | | s | 0 | −2 | −2 |
//! | | log D | p β | p β | p β − 1 |
//!
//! (p = 2 for a luminosity or a photometric bulge mass, 1 for a dynamical bulge mass;
//! docs/methods.md §3.2.) The candidate's errors of x exclude the distance error: the
//! distance's error enters once, through log D, with the coefficient above.
//!
//! The physical constants come from the caller ([`SoiScale`]): this module is pure statistics
//! and does not use the physics module.

use serde::Serialize;

use super::intervals::Z95;
use super::special::ln_norm_cdf;
use super::{Fit, FitError, Shape};

/// What a fitted straight line contributes to a prediction: its parameters, their covariance
/// and the intrinsic scatter.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct RelationTerms {
    /// Zero point α: log10 M_BH at the pivot, dex.
    pub alpha: f64,
    /// Slope β, dex per dex.
    pub beta: f64,
    /// Pivot x0, log10 units of the host property.
    pub x0: f64,
    /// Var(α), dex².
    pub var_alpha: f64,
    /// Var(β), (dex/dex)².
    pub var_beta: f64,
    /// Cov(α, β), dex · dex/dex.
    pub cov_ab: f64,
    /// Intrinsic scatter ε, dex.
    pub scatter_dex: f64,
}

impl RelationTerms {
    /// The terms of a fitted straight line: α, β, the (α, β) block of its covariance, its
    /// pivot, and the quoted ε ([`Fit::quoted_eps`]: the restricted-likelihood ε where it was
    /// computed; the maximum-likelihood ε is biased low at small N and would make P(resolved)
    /// overconfident, docs/methods.md §2.8), as `fit::predict` predicts with them.
    ///
    /// # Errors
    /// [`FitError::Unsupported`] for a quadratic or planar fit, or one without an (α, β)
    /// covariance.
    pub fn from_fit(fit: &Fit) -> Result<RelationTerms, FitError> {
        if fit.spec.shape != Shape::Line {
            return Err(FitError::Unsupported {
                what: "Planning uses straight-line relations only.".to_owned(),
            });
        }
        let get = |a: &str, b: &str| {
            fit.covariance(a, b)
                .filter(|v| v.is_finite())
                .ok_or_else(|| FitError::Unsupported {
                    what: "The fit has no covariance of its zero point and slope.".to_owned(),
                })
        };
        Ok(RelationTerms {
            alpha: fit.params.alpha,
            beta: fit.params.beta,
            x0: fit.spec.pivot,
            var_alpha: get("alpha", "alpha")?.max(0.0),
            var_beta: get("beta", "beta")?.max(0.0),
            cov_ab: get("alpha", "beta")?,
            scatter_dex: fit.quoted_eps().max(0.0),
        })
    }

    /// The terms of a published relation given by its parameters and errors, with Cov(α, β)
    /// (0 when the source does not give it).
    #[must_use]
    pub fn published(
        (alpha, alpha_err): (f64, f64),
        (beta, beta_err): (f64, f64),
        x0: f64,
        cov_ab: f64,
        scatter_dex: f64,
    ) -> RelationTerms {
        RelationTerms {
            alpha,
            beta,
            x0,
            var_alpha: alpha_err * alpha_err,
            var_beta: beta_err * beta_err,
            cov_ab,
            scatter_dex,
        }
    }
}

/// What is known of a candidate host: its σ (always needed for r_infl = G M/σ²) and, for the
/// relations in another host property, that property.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub enum HostInput {
    /// M–σ: the host property is σ itself. s = log10 σ (km/s), its error in dex.
    Sigma {
        /// log10 σ/(km/s).
        log_sigma: f64,
        /// Error of log σ, dex.
        err_dex: f64,
    },
    /// M_BH–M_bulge or M_BH–L: the host property x (log10 M☉ or L☉) measured at the
    /// candidate's distance, scaling as D^p, and σ measured separately.
    Photometric {
        /// log10 of the host property at the candidate's distance.
        log_x: f64,
        /// Its error without the distance's, dex.
        err_dex: f64,
        /// p in x ∝ D^p: 2 for a luminosity or a photometric bulge mass, 1 for a dynamical
        /// bulge mass (docs/methods.md §3.2).
        distance_power: f64,
        /// log10 σ/(km/s).
        log_sigma: f64,
        /// Error of log σ, dex.
        log_sigma_err_dex: f64,
    },
}

/// The distance of a candidate, in logs: log10 D (Mpc) and its error σ_logD = σ_D/(D ln 10).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LogDistance {
    /// log10 D/Mpc.
    pub log_mpc: f64,
    /// Its error, dex.
    pub err_dex: f64,
}

impl LogDistance {
    /// From a distance and its 1σ error, both in Mpc (first order, docs/methods.md §3.2).
    #[must_use]
    pub fn from_mpc(distance_mpc: f64, err_mpc: f64) -> LogDistance {
        LogDistance {
            log_mpc: distance_mpc.log10(),
            err_dex: err_mpc / (distance_mpc * std::f64::consts::LN_10),
        }
    }
}

/// The two constants of the sphere of influence, given by the caller from the physics
/// module's constants (docs/methods.md §3.1, §5).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct SoiScale {
    /// log10 G in pc M☉⁻¹ (km/s)².
    pub log_g: f64,
    /// log10 of the angle, in arcsec, of 1 pc seen from 1 Mpc (206 264.806″/10⁶).
    pub log_arcsec_per_pc_at_mpc: f64,
}

impl SoiScale {
    /// From G in pc M☉⁻¹ (km/s)² and the arcseconds in a radian (648 000/π).
    #[must_use]
    pub fn new(g_pc_km2_s2_per_msun: f64, arcsec_per_radian: f64) -> SoiScale {
        SoiScale {
            log_g: g_pc_km2_s2_per_msun.log10(),
            log_arcsec_per_pc_at_mpc: arcsec_per_radian.log10() - 6.0,
        }
    }
}

/// The prediction of a log10 quantity: its centre, spread and skewness, and central
/// intervals.
///
/// The quantity is a sum of normal terms and of the slope's error times the inputs' errors, so
/// it is slightly skewed (module docs); P and the intervals carry the first correction for it
/// (Edgeworth, Cornish–Fisher), which keeps P within 0.002 of a Monte Carlo of the model
/// where the plain normal was off by 0.002 (docs/methods.md §4.9).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LogPrediction {
    /// The prediction at the fitted parameters and the measured values: the mean of the log10
    /// quantity (its median differs by −γ√V/6, below 0.01 √V wherever |γ| < 0.06).
    pub median: f64,
    /// Its predictive standard deviation √V, dex.
    pub sd_dex: f64,
    /// 68.27 % interval (centre + √V (∓1), Cornish–Fisher: the skewness does not move it).
    pub interval68: (f64, f64),
    /// 95 % interval (centre + √V (∓1.959964 + γ (1.959964² − 1)/6)).
    pub interval95: (f64, f64),
    /// Skewness γ = κ₃/V^{3/2} (0 for a normal prediction).
    pub skewness: f64,
}

impl LogPrediction {
    /// A normal prediction with this centre and variance (dex, dex²).
    #[must_use]
    pub fn normal(median: f64, variance: f64) -> LogPrediction {
        LogPrediction::skewed(median, variance, 0.0)
    }

    /// A prediction with this mean, variance and third cumulant κ₃ (dex, dex², dex³); the
    /// intervals by the Cornish–Fisher expansion
    ///
    /// ```text
    /// q(z) = mean + √V (z + γ (z² − 1)/6),   γ = κ₃ / V^{3/2}
    /// ```
    /// (to first order in γ; Abramowitz & Stegun 1964, §26.2; from memory).
    #[must_use]
    pub fn skewed(mean: f64, variance: f64, third_cumulant: f64) -> LogPrediction {
        let sd = variance.max(0.0).sqrt();
        let skewness = if sd > 0.0 {
            third_cumulant / (sd * sd * sd)
        } else {
            0.0
        };
        let q = |z: f64| mean + sd * (z + skewness * (z * z - 1.0) / 6.0);
        LogPrediction {
            median: mean,
            sd_dex: sd,
            interval68: (q(-1.0), q(1.0)),
            interval95: (q(-Z95), q(Z95)),
            skewness,
        }
    }
}

/// The predicted black-hole mass and sphere of influence of one candidate.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ThetaPrediction {
    /// log10 M_BH/M☉.
    pub log_mbh: LogPrediction,
    /// log10 r_infl/pc, r_infl = G M/σ².
    pub log_r_infl_pc: LogPrediction,
    /// log10 θ_infl/arcsec, θ_infl = r_infl/D.
    pub log_theta_arcsec: LogPrediction,
}

/// One input's error, its coefficient at the fitted β and the coefficient's slope in β.
struct Term {
    c: f64,
    b: f64,
    sd: f64,
}

/// The prediction with this centre: its variance and third cumulant (module docs).
fn moments(centre: f64, terms: &RelationTerms, d: f64, inputs: &[Term]) -> LogPrediction {
    LogPrediction::skewed(
        centre,
        variance(terms, d, inputs),
        third_cumulant(terms, d, inputs),
    )
}

/// The third cumulant of a prediction. With u = β − β̂, A = (α − α̂) + u d, C = Σ c_k e_k and
/// W = Σ b_k e_k (the inputs' errors e_k, independent of α and β), the quantity less its
/// centre is A + C + u W, whose only nonzero third moment is
///
/// ```text
/// κ₃ = 3 E[(A + C)² u W] = 6 E[A u] E[C W] = 6 (Cov(α, β) + d Var(β)) Σ_k c_k b_k σ_k²
/// ```
/// (dex³; computed from the moments of normal variables).
fn third_cumulant(terms: &RelationTerms, d: f64, inputs: &[Term]) -> f64 {
    let shared: f64 = inputs.iter().map(|t| t.c * t.b * t.sd * t.sd).sum();
    6.0 * (terms.cov_ab + d * terms.var_beta) * shared
}

/// The variance of a prediction: the relation's part and the inputs' parts (module docs).
fn variance(terms: &RelationTerms, d: f64, inputs: &[Term]) -> f64 {
    let relation = terms.scatter_dex.powi(2)
        + terms.var_alpha
        + d * d * terms.var_beta
        + 2.0 * d * terms.cov_ab;
    let measured: f64 = inputs
        .iter()
        .map(|t| (t.c * t.c + t.b * t.b * terms.var_beta) * t.sd * t.sd)
        .sum();
    relation + measured
}

fn check(values: &[(&'static str, f64)], errors: &[(&'static str, f64)]) -> Result<(), FitError> {
    for (column, v) in values.iter().chain(errors) {
        if !v.is_finite() {
            return Err(FitError::NonFiniteInput { row: 0, column });
        }
    }
    for (column, v) in errors {
        if *v < 0.0 {
            return Err(FitError::NegativeError { row: 0, column });
        }
    }
    Ok(())
}

/// The predicted log M_BH of a host with property x (log10, error in dex, x ∝ D^p with the
/// distance error `log_d_err_dex`; p = 0 for σ), without the sphere of influence: what a
/// candidate without σ gets.
///
/// # Model
/// ```text
/// log M̂ = α + β (x − x0)
/// V_M = ε² + Var(α) + d² Var(β) + 2 d Cov(α, β) + (β² + Var β) σ_x² + (p²β² + p² Var β) σ_logD²
/// ```
/// d = x − x0; dex throughout (docs/methods.md §4.9).
///
/// # Errors
/// [`FitError::NonFiniteInput`], [`FitError::NegativeError`].
pub fn predict_mass(
    terms: &RelationTerms,
    log_x: f64,
    err_dex: f64,
    distance_power: f64,
    log_d_err_dex: f64,
) -> Result<LogPrediction, FitError> {
    check(
        &[("log_x", log_x), ("distance_power", distance_power)],
        &[("err_dex", err_dex), ("log_d_err_dex", log_d_err_dex)],
    )?;
    let d = log_x - terms.x0;
    let inputs = [
        Term {
            c: terms.beta,
            b: 1.0,
            sd: err_dex,
        },
        Term {
            c: distance_power * terms.beta,
            b: distance_power,
            sd: log_d_err_dex,
        },
    ];
    Ok(moments(terms.alpha + terms.beta * d, terms, d, &inputs))
}

/// The predicted log M_BH, log r_infl and log θ_infl of a candidate, each with its predictive
/// spread and 68.27 % / 95 % intervals.
///
/// # Model
/// See the module documentation: medians from the fitted line at the candidate's values,
/// variances with the coefficients of each case (M–σ: σ's error once, with β − 2; another
/// property x ∝ D^p with σ separate: x's error with β, σ's with −2, the distance's with pβ − 1
/// in θ). log10 values: M☉, pc, arcsec; errors dex; D in Mpc.
///
/// # Errors
/// [`FitError::NonFiniteInput`] for a value that is not finite, [`FitError::NegativeError`]
/// for a negative error.
///
/// # References
/// docs/methods.md §3.1 (r_infl = G M/σ², θ = r/D), §3.2 (distance exponents), §4.9.
pub fn predict_theta(
    terms: &RelationTerms,
    host: HostInput,
    distance: LogDistance,
    scale: SoiScale,
) -> Result<ThetaPrediction, FitError> {
    check(
        &[("log_distance", distance.log_mpc)],
        &[("log_distance_err", distance.err_dex)],
    )?;
    let sd_d = distance.err_dex;
    let beta = terms.beta;
    let (log_mbh, log_sigma, r_inputs, theta_inputs) = match host {
        HostInput::Sigma { log_sigma, err_dex } => {
            check(&[("log_sigma", log_sigma)], &[("sigma_err_dex", err_dex)])?;
            let mass = predict_mass(terms, log_sigma, err_dex, 0.0, 0.0)?;
            let s_term = || Term {
                c: beta - 2.0,
                b: 1.0,
                sd: err_dex,
            };
            let r = vec![s_term()];
            let theta = vec![
                s_term(),
                Term {
                    c: -1.0,
                    b: 0.0,
                    sd: sd_d,
                },
            ];
            (mass, log_sigma, r, theta)
        }
        HostInput::Photometric {
            log_x,
            err_dex,
            distance_power: p,
            log_sigma,
            log_sigma_err_dex,
        } => {
            check(
                &[("log_sigma", log_sigma)],
                &[("sigma_err_dex", log_sigma_err_dex)],
            )?;
            let mass = predict_mass(terms, log_x, err_dex, p, sd_d)?;
            let x_term = || Term {
                c: beta,
                b: 1.0,
                sd: err_dex,
            };
            let s_term = || Term {
                c: -2.0,
                b: 0.0,
                sd: log_sigma_err_dex,
            };
            let d_term = |minus: f64| Term {
                c: p * beta - minus,
                b: p,
                sd: sd_d,
            };
            let r = vec![x_term(), s_term(), d_term(0.0)];
            let theta = vec![x_term(), s_term(), d_term(1.0)];
            (mass, log_sigma, r, theta)
        }
    };
    let d = match host {
        HostInput::Sigma { log_sigma, .. } => log_sigma - terms.x0,
        HostInput::Photometric { log_x, .. } => log_x - terms.x0,
    };
    let log_r = log_mbh.median - 2.0 * log_sigma + scale.log_g;
    let log_theta = log_r - distance.log_mpc + scale.log_arcsec_per_pc_at_mpc;
    Ok(ThetaPrediction {
        log_mbh,
        log_r_infl_pc: moments(log_r, terms, d, &r_inputs),
        log_theta_arcsec: moments(log_theta, terms, d, &theta_inputs),
    })
}

/// The probability that θ_infl / θ_res ≥ threshold under the prediction.
///
/// # Model
/// ```text
/// P = Φ((log θ̂_infl − log10(threshold · θ_res)) / √V)   (+ the skewness term of
///                                                         [`probability_at_least`])
/// ```
/// θ_res in arcsec, threshold dimensionless (common practice: 1, docs/methods.md §3.1). With
/// √V = 0 the answer is 1 or 0.
///
/// # Errors
/// None; NaN for a resolution or threshold that is not positive and finite.
#[must_use]
pub fn p_resolved(pred: &ThetaPrediction, resolution_arcsec: f64, threshold: f64) -> f64 {
    let usable = |v: f64| v.is_finite() && v > 0.0;
    if !(usable(resolution_arcsec) && usable(threshold)) {
        return f64::NAN;
    }
    probability_at_least(
        &pred.log_theta_arcsec,
        (threshold * resolution_arcsec).log10(),
    )
}

/// P(the log10 quantity ≥ `log_bound`) under a normal prediction.
///
/// # Model
/// ```text
/// z = (log_bound − centre)/√V
/// P = Φ(−z) + φ(z) γ (z² − 1)/6          (Edgeworth, first order in the skewness γ)
/// √V = 0: 1 when centre ≥ log_bound, else 0
/// ```
/// (The Edgeworth expansion to first order in γ; Abramowitz & Stegun 1964, §26.2; from
/// memory.)
///
/// # Errors
/// None; NaN for a bound that is not a number.
#[must_use]
pub fn probability_at_least(pred: &LogPrediction, log_bound: f64) -> f64 {
    let gap = pred.median - log_bound;
    if gap.is_nan() {
        f64::NAN
    } else if pred.sd_dex > 0.0 {
        // Edgeworth's first correction for the skewness γ, with z = (bound − centre)/√V:
        // P(X ≥ bound) = Φ(−z) + φ(z) γ (z² − 1)/6.
        let z = -gap / pred.sd_dex;
        let density = (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt();
        let p = ln_norm_cdf(-z).exp() + density * pred.skewness * (z * z - 1.0) / 6.0;
        p.clamp(0.0, 1.0)
    } else if gap >= 0.0 {
        1.0
    } else {
        0.0
    }
}

/// The prediction of the θ_infl a measurement of the host will give, from σ and the distance
/// alone: what the reliability check compares with the measured ratio (docs/methods.md §4.9).
///
/// # Model
/// The measured θ_infl = G M_meas/(σ_obs² D) uses the observed σ, and a dynamical mass at the
/// adopted distance scales as D (so θ_meas follows the true distance); with s_true = s − e_s,
/// log D_true = log D + δ and the mass's measurement error e_y:
/// ```text
/// log θ_meas = α + β (s_true − x0) + e + e_y − 2 s − log D_true + C
/// median = α + β (s − x0) − 2 s − log D + C
/// V = ε² + Var(α) + d² Var(β) + 2 d Cov(α, β) + (β² + Var β) σ_s² + σ_logD² + σ_y²
/// ```
/// d = s − x0; logs in dex, C = log G + log(206 264.806″/10⁶).
///
/// # Errors
/// [`FitError::NonFiniteInput`], [`FitError::NegativeError`].
pub fn predict_measured_log_theta(
    terms: &RelationTerms,
    log_sigma: f64,
    sigma_err_dex: f64,
    mass_err_dex: f64,
    distance: LogDistance,
    scale: SoiScale,
) -> Result<LogPrediction, FitError> {
    check(
        &[("log_sigma", log_sigma), ("log_distance", distance.log_mpc)],
        &[
            ("sigma_err_dex", sigma_err_dex),
            ("mass_err_dex", mass_err_dex),
            ("log_distance_err", distance.err_dex),
        ],
    )?;
    let d = log_sigma - terms.x0;
    let inputs = [
        Term {
            c: terms.beta,
            b: 1.0,
            sd: sigma_err_dex,
        },
        Term {
            c: -1.0,
            b: 0.0,
            sd: distance.err_dex,
        },
        Term {
            c: 1.0,
            b: 0.0,
            sd: mass_err_dex,
        },
    ];
    let median = terms.alpha + terms.beta * d - 2.0 * log_sigma + scale.log_g - distance.log_mpc
        + scale.log_arcsec_per_pc_at_mpc;
    Ok(moments(median, terms, d, &inputs))
}

#[cfg(test)]
mod tests {
    use rand::SeedableRng;
    use rand::rngs::StdRng;
    use rand_distr::{Distribution, StandardNormal};

    use super::*;

    /// G in pc M☉⁻¹ (km/s)² and arcsec per radian, as docs/methods.md §5 and §7 rows 24–26
    /// state them (computed there from GM☉ and the parsec).
    fn scale() -> SoiScale {
        SoiScale::new(4.300_917_27e-3, 648_000.0 / std::f64::consts::PI)
    }

    /// Gültekin et al. 2009 "all" (docs/methods.md §7 row 1): 8.12 ± 0.08, 4.24 ± 0.41,
    /// ε = 0.44, covariance neglected, pivot 200 km/s.
    fn g09() -> RelationTerms {
        RelationTerms::published((8.12, 0.08), (4.24, 0.41), 200_f64.log10(), 0.0, 0.44)
    }

    #[test]
    fn the_worked_example_of_the_methods_document() {
        // docs/methods.md §4.9 (computed): σ = 150 km/s ± 5 % (σ_s = 0.05/ln 10 dex, first
        // order, §3.2), D = 20 ± 2 Mpc, θ_res = 0.1″, threshold 1: log M̂ = 7.5903,
        // r_infl = 7.441 pc, θ̂ = 0.07674″, P = 0.400; √V = 0.4548 dex to first order, 0.4549
        // with the Var(β) σ_s² term this module adds.
        let host = HostInput::Sigma {
            log_sigma: 150_f64.log10(),
            err_dex: 0.05 / std::f64::consts::LN_10,
        };
        let pred = predict_theta(&g09(), host, LogDistance::from_mpc(20.0, 2.0), scale()).unwrap();
        assert!((pred.log_mbh.median - 7.5903).abs() < 5e-5, "{pred:?}");
        assert!((10f64.powf(pred.log_r_infl_pc.median) - 7.441).abs() < 5e-4);
        assert!((10f64.powf(pred.log_theta_arcsec.median) - 0.076_74).abs() < 5e-6);
        let first_order = (pred.log_theta_arcsec.sd_dex.powi(2)
            - 0.41_f64.powi(2) * (0.05 / std::f64::consts::LN_10).powi(2))
        .sqrt();
        assert!((first_order - 0.4548).abs() < 5e-5, "{first_order}");
        assert!((pred.log_theta_arcsec.sd_dex - 0.4549).abs() < 5e-5);
        let p = p_resolved(&pred, 0.1, 1.0);
        assert!((p - 0.400).abs() < 5e-4, "{p}");
        // Intervals: ±1 and ±1.959964 √V (standard normal quantiles), the 95 % ends moved by
        // γ (1.959964² − 1)/6 √V (Cornish–Fisher); here the prediction is nearly symmetric.
        let t = pred.log_theta_arcsec;
        assert!(t.skewness.abs() < 0.01, "{t:?}");
        assert!((t.interval68.1 - t.median - t.sd_dex).abs() < 1e-12);
        let shift = t.skewness * (1.959_964_f64.powi(2) - 1.0) / 6.0 * t.sd_dex;
        assert!((t.median - t.interval95.0 - 1.959_964 * t.sd_dex + shift).abs() < 1e-6);
        assert!((t.interval95.1 - t.median - 1.959_964 * t.sd_dex - shift).abs() < 1e-6);
        // A coarser resolution or a higher threshold can only lower P.
        assert!(p_resolved(&pred, 0.2, 1.0) < p && p_resolved(&pred, 0.1, 2.0) < p);
        assert!(p_resolved(&pred, 0.0, 1.0).is_nan());
    }

    #[test]
    fn the_sphere_of_influence_constants() {
        // docs/methods.md §7 row 23 (computed): M = 10⁸ M☉, σ = 200 km/s → r_infl = 10.7523 pc,
        // θ_infl = 0.22178″ at 10 Mpc. With no scatter and no errors the prediction is exact.
        let exact = RelationTerms::published((8.0, 0.0), (4.0, 0.0), 200_f64.log10(), 0.0, 0.0);
        let host = HostInput::Sigma {
            log_sigma: 200_f64.log10(),
            err_dex: 0.0,
        };
        let pred = predict_theta(&exact, host, LogDistance::from_mpc(10.0, 0.0), scale()).unwrap();
        assert!((10f64.powf(pred.log_r_infl_pc.median) - 10.7523).abs() < 5e-5);
        assert!((10f64.powf(pred.log_theta_arcsec.median) - 0.22178).abs() < 5e-6);
        assert!(pred.log_theta_arcsec.sd_dex.abs() < 1e-15);
        assert!((p_resolved(&pred, 0.2, 1.0) - 1.0).abs() < 1e-15);
        assert!(p_resolved(&pred, 0.25, 1.0).abs() < 1e-15);
    }

    #[test]
    fn bad_inputs_are_refused() {
        let host = HostInput::Sigma {
            log_sigma: f64::NAN,
            err_dex: 0.01,
        };
        assert!(matches!(
            predict_theta(&g09(), host, LogDistance::from_mpc(10.0, 1.0), scale()),
            Err(FitError::NonFiniteInput { .. })
        ));
        let host = HostInput::Photometric {
            log_x: 11.0,
            err_dex: -0.1,
            distance_power: 2.0,
            log_sigma: 2.2,
            log_sigma_err_dex: 0.02,
        };
        assert!(matches!(
            predict_theta(&g09(), host, LogDistance::from_mpc(10.0, 1.0), scale()),
            Err(FitError::NegativeError { .. })
        ));
    }

    /// One case of the Monte Carlo comparison.
    struct Case {
        terms: RelationTerms,
        host: HostInput,
        distance: LogDistance,
        resolution_arcsec: f64,
        threshold: f64,
    }

    /// log θ_infl drawn from the model the analytic prediction describes: (α, β) from their
    /// bivariate normal, the scatter, the true σ (and x) about the measured ones, the true
    /// distance about the given one, a property ∝ D^p measured at the given distance.
    fn draw(case: &Case, rng: &mut StdRng) -> (f64, f64, f64) {
        let mut n = || -> f64 { StandardNormal.sample(&mut *rng) };
        let t = &case.terms;
        let sa = t.var_alpha.sqrt();
        let (z1, z2) = (n(), n());
        let alpha = t.alpha + sa * z1;
        let beta = if sa > 0.0 {
            t.beta
                + t.cov_ab / sa * z1
                + (t.var_beta - t.cov_ab * t.cov_ab / t.var_alpha).sqrt() * z2
        } else {
            t.beta + t.var_beta.sqrt() * z2
        };
        let e = t.scatter_dex * n();
        let delta = case.distance.err_dex * n();
        let (x_true, s_true) = match case.host {
            HostInput::Sigma { log_sigma, err_dex } => {
                let s = log_sigma - err_dex * n();
                (s, s)
            }
            HostInput::Photometric {
                log_x,
                err_dex,
                distance_power,
                log_sigma,
                log_sigma_err_dex,
            } => (
                log_x - err_dex * n() + distance_power * delta,
                log_sigma - log_sigma_err_dex * n(),
            ),
        };
        let sc = scale();
        let log_m = alpha + beta * (x_true - t.x0) + e;
        let log_r = log_m - 2.0 * s_true + sc.log_g;
        let log_theta = log_r - (case.distance.log_mpc + delta) + sc.log_arcsec_per_pc_at_mpc;
        (log_m, log_r, log_theta)
    }

    #[test]
    fn the_analytic_probability_agrees_with_a_monte_carlo_of_the_same_model() {
        // 10⁶ draws per case; the binomial sd of a fraction near 0.5 is 0.0005, so 0.002 is
        // four of them. The spreads agree within 0.5 % (their MC error is about 0.07 %).
        const DRAWS: usize = 1_000_000;
        let x0_sigma = 200_f64.log10();
        let m_sigma = |beta: f64, var_beta: f64, cov: f64| {
            RelationTerms::published((8.3, 0.05), (beta, var_beta.sqrt()), x0_sigma, cov, 0.35)
        };
        let m_bulge = |beta: f64, eps: f64| RelationTerms {
            alpha: 8.5,
            beta,
            x0: 11.0,
            var_alpha: 0.06_f64.powi(2),
            var_beta: 0.1_f64.powi(2),
            cov_ab: 0.001,
            scatter_dex: eps,
        };
        let sigma = |s: f64, err: f64| HostInput::Sigma {
            log_sigma: s.log10(),
            err_dex: err,
        };
        let bulge = |x: f64, err: f64, p: f64, s: f64, s_err: f64| HostInput::Photometric {
            log_x: x,
            err_dex: err,
            distance_power: p,
            log_sigma: s.log10(),
            log_sigma_err_dex: s_err,
        };
        let d = |mpc: f64, err: f64| LogDistance::from_mpc(mpc, err);
        let cases = [
            (
                m_sigma(4.24, 0.17, 0.0),
                sigma(150.0, 0.02),
                d(20.0, 2.0),
                0.1,
                1.0,
            ),
            (
                m_sigma(5.5, 0.25, 0.01),
                sigma(250.0, 0.04),
                d(60.0, 9.0),
                0.25,
                1.0,
            ),
            (
                m_sigma(3.5, 0.09, -0.005),
                sigma(90.0, 0.01),
                d(4.0, 0.2),
                0.5,
                2.0,
            ),
            (
                m_sigma(4.8, 0.2, 0.0),
                sigma(300.0, 0.05),
                d(100.0, 20.0),
                0.5,
                0.5,
            ),
            (
                m_sigma(4.24, 0.17, 0.0),
                sigma(120.0, 0.03),
                d(15.0, 3.0),
                0.3,
                1.0,
            ),
            (
                m_bulge(1.1, 0.3),
                bulge(11.2, 0.1, 2.0, 220.0, 0.02),
                d(20.0, 2.0),
                1.0,
                1.0,
            ),
            (
                m_bulge(1.0, 0.35),
                bulge(10.5, 0.2, 2.0, 150.0, 0.03),
                d(30.0, 6.0),
                0.05,
                1.0,
            ),
            (
                m_bulge(1.3, 0.25),
                bulge(11.8, 0.15, 1.0, 300.0, 0.05),
                d(80.0, 8.0),
                0.3,
                2.0,
            ),
            (
                m_bulge(0.9, 0.4),
                bulge(10.0, 0.05, 2.0, 110.0, 0.01),
                d(10.0, 2.5),
                1.0,
                2.0,
            ),
        ];
        let mut rng = StdRng::seed_from_u64(4_9);
        for (i, (terms, host, distance, resolution_arcsec, threshold)) in
            cases.into_iter().enumerate()
        {
            let case = Case {
                terms,
                host,
                distance,
                resolution_arcsec,
                threshold,
            };
            let pred = predict_theta(&case.terms, case.host, case.distance, scale()).unwrap();
            let bound = (case.threshold * case.resolution_arcsec).log10();
            let predicted = [pred.log_mbh, pred.log_r_infl_pc, pred.log_theta_arcsec];
            let (mut hits, mut sums) = (0usize, [[0.0_f64; 3]; 3]);
            for _ in 0..DRAWS {
                let drawn = draw(&case, &mut rng);
                for (k, v) in [drawn.0, drawn.1, drawn.2].into_iter().enumerate() {
                    // About the predicted centre, so the sums stay well conditioned.
                    let u = v - predicted[k].median;
                    sums[k][0] += u;
                    sums[k][1] += u * u;
                    sums[k][2] += u * u * u;
                }
                hits += usize::from(drawn.2 >= bound);
            }
            let mc = hits as f64 / DRAWS as f64;
            let analytic = p_resolved(&pred, case.resolution_arcsec, case.threshold);
            eprintln!("case {i}: P analytic {analytic:.4}, Monte Carlo {mc:.4}");
            assert!(
                (mc - analytic).abs() < 0.002,
                "case {i}: Monte Carlo {mc}, analytic {analytic}"
            );
            for (k, p) in predicted.iter().enumerate() {
                let n = DRAWS as f64;
                let shift = sums[k][0] / n;
                let mean = p.median + shift;
                let sd = (sums[k][1] / n - shift * shift).sqrt();
                let third = sums[k][2] / n - 3.0 * shift * sums[k][1] / n + 2.0 * shift.powi(3);
                let skewness = third / sd.powi(3);
                // The skewness estimate's sd is about √(6/N) = 0.0024.
                assert!(
                    (skewness - p.skewness).abs() < 0.01,
                    "case {i} quantity {k}: skewness {skewness}, predicted {}",
                    p.skewness
                );
                assert!(
                    (mean - p.median).abs() < 0.002,
                    "case {i} quantity {k}: mean {mean} {p:?}"
                );
                assert!(
                    (sd / p.sd_dex - 1.0).abs() < 0.005,
                    "case {i} quantity {k}: sd {sd} {p:?}"
                );
            }
        }
    }

    #[test]
    fn the_measured_ratio_counts_sigma_with_beta_and_the_mass_error() {
        // The measured θ uses the observed σ in both the mass and σ²: σ's error enters with β,
        // not β − 2, and the mass's own error adds (the function's formula, computed by hand).
        let t = RelationTerms::published((8.3, 0.0), (4.5, 0.0), 200_f64.log10(), 0.0, 0.35);
        let distance = LogDistance::from_mpc(16.0, 1.6);
        let measured = predict_measured_log_theta(&t, 2.25, 0.02, 0.1, distance, scale()).unwrap();
        let want = 0.35_f64.powi(2) + (4.5_f64 * 0.02).powi(2) + distance.err_dex.powi(2) + 0.01;
        assert!((measured.sd_dex - want.sqrt()).abs() < 1e-12);
        let host = HostInput::Sigma {
            log_sigma: 2.25,
            err_dex: 0.02,
        };
        let predicted = predict_theta(&t, host, distance, scale()).unwrap();
        assert!((measured.median - predicted.log_theta_arcsec.median).abs() < 1e-12);
        assert!(measured.sd_dex > predicted.log_theta_arcsec.sd_dex);
    }

    #[test]
    fn a_mass_without_sigma_carries_the_distance_through_the_property() {
        // x ∝ D² with σ_logD = 0.05 and β = 1.1: V adds (2 · 1.1)² 0.05² + 2² Var(β) 0.05²
        // (the module's formula, computed by hand here).
        let t = RelationTerms::published((8.5, 0.0), (1.1, 0.1), 11.0, 0.0, 0.3);
        let m = predict_mass(&t, 11.0, 0.0, 2.0, 0.05).unwrap();
        let want = 0.09 + (2.2_f64 * 0.05).powi(2) + 4.0 * 0.01 * 0.0025;
        assert!((m.sd_dex - want.sqrt()).abs() < 1e-12);
        assert!((m.median - 8.5).abs() < 1e-12);
    }
}
