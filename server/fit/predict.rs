//! What a fitted relation predicts: log M_BH at a new host property with its predictive
//! interval, where a newly measured object falls, and the host property implied by a mass.
//!
//! The prediction treats the new object's observed x as an unbiased proxy of its true x (its
//! error is propagated through the relation); it uses the Y|X relation as fitted. Isobe et al.
//! (1990, ApJ 364, 104) recommend a forward (Y|X) fit for prediction, not a bisector.
//! For a structural fit the prediction is the relation at the observed x (it does not shrink x
//! towards the fitted x distribution); with σ_x small compared with the spread of x the
//! difference is negligible.

use serde::Serialize;

use super::{Fit, FitError, Shape};

/// A predicted log10 M_BH with its predictive spread.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Prediction {
    /// Predicted log10(M_BH/M☉).
    pub log_mbh: f64,
    /// Predictive standard deviation s_pred, dex (intrinsic scatter, parameter uncertainty,
    /// x error).
    pub sd_dex: f64,
    /// Central 68.27 % predictive interval (±1 s_pred), log10 M☉.
    pub interval68: (f64, f64),
    /// Central 95 % predictive interval (±1.959964 s_pred), log10 M☉.
    pub interval95: (f64, f64),
}

/// Where a measured object falls relative to the relation.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Placement {
    /// The prediction at the object's x.
    pub prediction: Prediction,
    /// y − prediction, dex (for a limit: the limit minus the prediction).
    pub residual_dex: f64,
    /// residual / √(s_pred² + σ_y²); |z| > 2 calls for review, > 3 marks a strong outlier
    /// (common practice).
    pub z: f64,
    /// For an upper limit: the probability that the true log M_BH lies below the limit.
    pub prob_below_limit: Option<f64>,
}

/// Two-sided 95 % normal quantile Φ⁻¹(0.975).
const Z95: f64 = 1.959_963_984_540_054;

fn check_finite(values: &[(&'static str, f64)]) -> Result<(), FitError> {
    for (column, v) in values {
        if !v.is_finite() {
            return Err(FitError::NonFiniteInput { row: 0, column });
        }
    }
    Ok(())
}

fn check_error(column: &'static str, v: f64) -> Result<(), FitError> {
    if v < 0.0 {
        return Err(FitError::NegativeError { row: 0, column });
    }
    Ok(())
}

fn cov_of(fit: &Fit, a: &str, b: &str) -> f64 {
    fit.covariance(a, b).unwrap_or(0.0)
}

/// Shared core: mean, and s_pred² for a new object at (d, d2) with errors.
fn core(fit: &Fit, x: f64, x_err: f64, x2: Option<(f64, f64)>) -> Prediction {
    let p = &fit.params;
    let d = x - fit.spec.pivot;
    // μ = α + β d [+ β2 d²] [+ γ d2]; gradient g = ∂μ/∂(α, β, β2|γ).
    let (third_name, third_val, third_grad) = match fit.spec.shape {
        Shape::Line => ("", 0.0, 0.0),
        Shape::Quadratic => ("beta2", p.beta2.unwrap_or(0.0), d * d),
        Shape::Plane => {
            let d2 = x2.map_or(0.0, |(v, _)| v - fit.spec.pivot2);
            ("gamma", p.gamma.unwrap_or(0.0), d2)
        }
    };
    let log_mbh = p.alpha + p.beta * d + third_val * third_grad;
    let names = ["alpha", "beta", third_name];
    let grads = [1.0, d, third_grad];
    let k = if third_name.is_empty() { 2 } else { 3 };
    let mut var_par = 0.0;
    for i in 0..k {
        for j in 0..k {
            var_par += grads[i] * grads[j] * cov_of(fit, names[i], names[j]);
        }
    }
    let slope = match fit.spec.shape {
        Shape::Quadratic => p.beta + 2.0 * third_val * d,
        _ => p.beta,
    };
    // The quoted ε (restricted likelihood where computed): the ML ε is low at small N and
    // would narrow every predictive interval with it.
    let eps = fit.quoted_eps();
    let mut var = eps * eps + var_par.max(0.0) + slope * slope * x_err * x_err;
    if let (Shape::Plane, Some((_, e2))) = (fit.spec.shape, x2) {
        var += third_val * third_val * e2 * e2;
    }
    let sd = var.sqrt();
    Prediction {
        log_mbh,
        sd_dex: sd,
        interval68: (log_mbh - sd, log_mbh + sd),
        interval95: (log_mbh - Z95 * sd, log_mbh + Z95 * sd),
    }
}

/// Predicts log10 M_BH at host property `x ± x_err` (log10, dex).
///
/// # Model
/// ```text
/// d = x − x0
/// ŷ = α + β d [+ β2 d²]
/// s_pred² = ε² + gᵀ C g + (∂ŷ/∂x)² σ_x²,   g = (1, d [, d²]),  ∂ŷ/∂x = β [+ 2 β2 d]
///         = ε² + Var(α) + d² Var(β) + 2 d Cov(α, β) + β² σ_x²   for a line
/// ε = the quoted scatter (Fit::quoted_eps: restricted likelihood where computed)
/// 68 % interval ŷ ± s_pred, 95 % interval ŷ ± 1.959964 s_pred
/// ```
/// x, x0 in log10 units; ŷ in log10 M☉; s_pred, ε, σ_x in dex; C the covariance of the fitted
/// (α, β [, β2]).
///
/// # Errors
/// [`FitError::NonFiniteInput`] (row 0) for non-finite input, [`FitError::NegativeError`] for
/// a negative `x_err`, [`FitError::Unsupported`] for a planar fit (use [`predict_plane`]).
///
/// # References
/// docs/methods.md §6 (prediction variance, common practice); Isobe et al. 1990, ApJ 364, 104.
pub fn predict(fit: &Fit, x: f64, x_err: f64) -> Result<Prediction, FitError> {
    check_finite(&[("x", x), ("x_err", x_err)])?;
    check_error("x_err", x_err)?;
    if fit.spec.shape == Shape::Plane {
        return Err(FitError::Unsupported {
            what: "A planar relation needs the second host property; use predict_plane.".to_owned(),
        });
    }
    Ok(core(fit, x, x_err, None))
}

/// Predicts log10 M_BH from a planar fit at (x ± x_err, x2 ± x2_err) (log10, dex).
///
/// # Model
/// ```text
/// ŷ = α + β (x − x0) + γ (x2 − x02)
/// s_pred² = ε² + gᵀ C g + β² σ_x² + γ² σ_x2²,   g = (1, x − x0, x2 − x02)
/// ```
/// Units as in [`predict`]; γ in dex per dex.
///
/// # Errors
/// [`FitError::NonFiniteInput`], [`FitError::NegativeError`]; [`FitError::Unsupported`] if the
/// fit is not planar.
///
/// # References
/// docs/methods.md §2.7 and §6.
pub fn predict_plane(
    fit: &Fit,
    x: f64,
    x_err: f64,
    x2: f64,
    x2_err: f64,
) -> Result<Prediction, FitError> {
    check_finite(&[("x", x), ("x_err", x_err), ("x2", x2), ("x2_err", x2_err)])?;
    check_error("x_err", x_err)?;
    check_error("x2_err", x2_err)?;
    if fit.spec.shape != Shape::Plane {
        return Err(FitError::Unsupported {
            what: "predict_plane needs a planar fit; use predict for a line or quadratic."
                .to_owned(),
        });
    }
    Ok(core(fit, x, x_err, Some((x2, x2_err))))
}

/// Places a measured object (or an upper limit) relative to a line or quadratic fit.
///
/// # Model
/// ```text
/// r = y − ŷ(x)                                (dex)
/// z = r / √(s_pred² + σ_y²)
/// limit: P(true log M_BH < y_lim) = Φ((y_lim − ŷ) / s_pred)
/// ```
/// ŷ and s_pred as in [`predict`] (with the object's σ_x); y, y_lim in log10 M☉; σ_y dex.
///
/// # Errors
/// As [`predict`], plus [`FitError::NonFiniteInput`] / [`FitError::NegativeError`] for y and
/// y_err.
///
/// # References
/// docs/methods.md §6 (outlier review, |z| > 2 / > 3, common practice).
pub fn place(
    fit: &Fit,
    x: f64,
    x_err: f64,
    y: f64,
    y_err: f64,
    upper_limit: bool,
) -> Result<Placement, FitError> {
    check_finite(&[("y", y), ("y_err", y_err)])?;
    check_error("y_err", y_err)?;
    let prediction = predict(fit, x, x_err)?;
    Ok(placement_of(prediction, y, y_err, upper_limit))
}

/// Where an object with log M_BH `y` (or an upper limit) falls, given the prediction at its x.
///
/// # Model
/// ```text
/// r = y − ŷ,   z = r / √(s_pred² + σ_y² − 2 (∂ŷ/∂x) σ_xy − 2 γ σ_x2y)
/// ∂ŷ/∂x = β [+ 2 β2 (x − x0)];  γ = 0 unless the fit is a plane
/// limit: P(true log M_BH < y_lim) = Φ(r / s_pred)
/// ```
/// σ_xy (σ_x2y) is the covariance of the object's x (x2) and y errors (a shared distance
/// error, 0 for independent values); it makes an error along the relation less surprising. When that
/// variance is not positive, z falls back to r / √(s_pred² + σ_y²). dex throughout.
///
/// # References
/// docs/methods.md §3.2 (the shared-distance covariance) and §6 (the prediction variance and z;
/// common practice).
#[must_use]
pub fn locate(
    fit: &Fit,
    prediction: Prediction,
    x: f64,
    y: f64,
    y_err: f64,
    (xy_cov, x2_y_cov): (f64, f64),
    upper_limit: bool,
) -> Placement {
    let mut placed = placement_of(prediction, y, y_err, upper_limit);
    let slope = fit.params.beta + 2.0 * fit.params.beta2.unwrap_or(0.0) * (x - fit.spec.pivot);
    let gamma = fit.params.gamma.unwrap_or(0.0);
    let var = placed.prediction.sd_dex.powi(2) + y_err.powi(2)
        - 2.0 * slope * xy_cov
        - 2.0 * gamma * x2_y_cov;
    if var > 0.0 && xy_cov.is_finite() && x2_y_cov.is_finite() {
        placed.z = placed.residual_dex / var.sqrt();
    }
    placed
}

fn placement_of(prediction: Prediction, y: f64, y_err: f64, upper_limit: bool) -> Placement {
    let residual_dex = y - prediction.log_mbh;
    let denom = (prediction.sd_dex.powi(2) + y_err * y_err).sqrt();
    let z = if denom > 0.0 {
        residual_dex / denom
    } else {
        0.0
    };
    let prob_below_limit = upper_limit.then(|| {
        if prediction.sd_dex > 0.0 {
            0.5 * statrs::function::erf::erfc(
                -residual_dex / (prediction.sd_dex * std::f64::consts::SQRT_2),
            )
        } else if residual_dex >= 0.0 {
            1.0
        } else {
            0.0
        }
    });
    Placement {
        prediction,
        residual_dex,
        z,
        prob_below_limit,
    }
}

/// The host property x (log10 units, unpivoted) at which the relation predicts `log_mbh`.
///
/// # Model
/// ```text
/// line:      x = x0 + (y − α)/β
/// quadratic: β2 d² + β d + (α − y) = 0, d = x − x0; the root on the branch where the slope
///            β + 2 β2 d has the sign of β, nearest the pivot
/// ```
/// y in log10 M☉.
///
/// # Errors
/// [`FitError::NonFiniteInput`] for a non-finite mass; [`FitError::Unsupported`] for a zero
/// slope, a quadratic that never reaches `log_mbh`, or a planar fit (x2 would be needed).
///
/// # References
/// Elementary algebra.
pub fn invert(fit: &Fit, log_mbh: f64) -> Result<f64, FitError> {
    check_finite(&[("log_mbh", log_mbh)])?;
    let p = &fit.params;
    let flat = || FitError::Unsupported {
        what: "The relation is flat, so a mass does not determine the host property.".to_owned(),
    };
    match fit.spec.shape {
        Shape::Plane => Err(FitError::Unsupported {
            what: "A planar relation cannot be inverted without the second host property."
                .to_owned(),
        }),
        Shape::Line => {
            if p.beta == 0.0 {
                return Err(flat());
            }
            Ok(fit.spec.pivot + (log_mbh - p.alpha) / p.beta)
        }
        Shape::Quadratic => {
            let b2 = p.beta2.unwrap_or(0.0);
            if b2 == 0.0 {
                if p.beta == 0.0 {
                    return Err(flat());
                }
                return Ok(fit.spec.pivot + (log_mbh - p.alpha) / p.beta);
            }
            let c = p.alpha - log_mbh;
            let disc = p.beta * p.beta - 4.0 * b2 * c;
            if disc < 0.0 {
                return Err(FitError::Unsupported {
                    what: "The quadratic relation never reaches this mass.".to_owned(),
                });
            }
            let sq = disc.sqrt();
            // Numerically stable roots.
            let q = -0.5 * (p.beta + p.beta.signum() * sq);
            let mut roots = vec![c / q, q / b2];
            roots.retain(|d| d.is_finite());
            let on_branch: Vec<f64> = roots
                .iter()
                .copied()
                .filter(|d| (p.beta + 2.0 * b2 * d) * p.beta >= 0.0)
                .collect();
            let pool = if on_branch.is_empty() {
                roots
            } else {
                on_branch
            };
            pool.into_iter()
                .min_by(|a, b| a.abs().total_cmp(&b.abs()))
                .map(|d| fit.spec.pivot + d)
                .ok_or_else(flat)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::{Sim, simulate};
    use super::super::{FitSpec, Method, Params, fit, residuals};
    use super::*;

    /// A published relation as a Fit with no parameter uncertainty (pivot σ0 = 200 km/s).
    fn published(alpha: f64, beta: f64, eps: f64) -> Fit {
        Fit::given_line(
            FitSpec::new(Method::Conditional, 200_f64.log10()),
            Params::line(alpha, beta, eps),
            [[0.0; 3]; 3],
        )
    }

    #[test]
    fn predictions_of_published_m_sigma_relations() {
        // docs/methods.md §7 rows 11–12 (computed) from Gültekin et al. 2009 (8.12, 4.24), Tremaine et
        // al. 2002 (8.13, 4.02), McConnell & Ma 2013 (8.32, 5.64), pivot 200 km/s:
        // log M at σ = 100 km/s: 6.8436, 6.9199, 6.6222; at 300 km/s: 8.8666 (G09), 9.3132 (MM13).
        let g09 = published(8.12, 4.24, 0.44);
        let t02 = published(8.13, 4.02, 0.0);
        let mm13 = published(8.32, 5.64, 0.38);
        let at = |f: &Fit, s: f64| predict(f, f64::log10(s), 0.0).expect("predict").log_mbh;
        assert!((at(&g09, 100.0) - 6.8436).abs() < 1e-4);
        assert!((at(&t02, 100.0) - 6.9199).abs() < 1e-4);
        assert!((at(&mm13, 100.0) - 6.6222).abs() < 1e-4);
        assert!((at(&g09, 300.0) - 8.8666).abs() < 1e-4);
        assert!((at(&mm13, 300.0) - 9.3132).abs() < 1e-4);
        // With no parameter covariance and no x error, s_pred = ε; 95 % is ±1.959964 ε
        // (standard normal quantile).
        let p = predict(&g09, 2.0, 0.0).expect("predict");
        assert!((p.sd_dex - 0.44).abs() < 1e-12);
        assert!((p.interval95.1 - p.log_mbh - 1.959_964 * 0.44).abs() < 1e-6);
        // An x error of 0.02 dex adds β² σ_x² (docs/methods.md §6).
        let p = predict(&g09, 2.0, 0.02).expect("predict");
        assert!((p.sd_dex - 0.44_f64.hypot(4.24 * 0.02)).abs() < 1e-12);
    }

    #[test]
    fn prediction_variance_uses_the_parameter_covariance() {
        // s_pred² = ε² + Var(α) + d² Var(β) + 2 d Cov(α, β) (docs/methods.md §6). Var(α) = 0.08²
        // and Var(β) = 0.41² are the Gültekin et al. 2009 errors (docs/methods.md §7 row 1); ε,
        // Cov(α, β) and d are invented.
        let mut f = published(8.12, 4.24, 0.3);
        f.cov = vec![
            vec![0.0064, -0.002, 0.0],
            vec![-0.002, 0.1681, 0.0],
            vec![0.0; 3],
        ];
        let d = -0.2;
        let p = predict(&f, f.spec.pivot + d, 0.0).expect("predict");
        let want = 0.09 + 0.0064 + d * d * 0.1681 + 2.0 * d * (-0.002);
        assert!((p.sd_dex - want.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn z_of_a_plane_member_counts_the_mass_and_bulge_mass_shared_distance() {
        // A fit with no parameter uncertainty and ε = 0.3 dex: s_pred = 0.3 at the pivot. An
        // object 0.6 dex above it with σ_y = 0.2 dex and σ_x2y = 0.02 dex² on a plane with
        // γ = 0.5: z = 0.6/√(0.09 + 0.04 − 2 · 0.5 · 0.02) = 0.6/√0.11 (computed from the
        // formula above); without the covariance 0.6/√0.13.
        let mut f = Fit::given_line(
            FitSpec::new(Method::Conditional, 2.3),
            Params::line(8.0, 4.0, 0.3),
            [[0.0; 3]; 3],
        );
        let pr = predict(&f, 2.3, 0.0).unwrap();
        f.params.gamma = Some(0.5);
        let with = locate(&f, pr.clone(), 2.3, 8.6, 0.2, (0.0, 0.02), false);
        let without = locate(&f, pr, 2.3, 8.6, 0.2, (0.0, 0.0), false);
        assert!((with.z - 0.6 / 0.11_f64.sqrt()).abs() < 1e-12, "{}", with.z);
        assert!(
            (without.z - 0.6 / 0.13_f64.sqrt()).abs() < 1e-12,
            "{}",
            without.z
        );
    }

    #[test]
    fn placement_and_limit_probability() {
        let f = published(8.12, 4.24, 0.44);
        let x = 200_f64.log10();
        // Gültekin et al. 2009 "all" (docs/methods.md §7 row 1), no parameter covariance.
        // A mass 0.88 dex high with σ_y = 0: z = 0.88 / 0.44 = 2.
        let pl = place(&f, x, 0.0, 9.0, 0.0, false).expect("place");
        assert!((pl.residual_dex - 0.88).abs() < 1e-12 && (pl.z - 2.0).abs() < 1e-12);
        assert!(pl.prob_below_limit.is_none());
        // A limit one s_pred above the line: Φ(1) = 0.841345 (standard normal table).
        let pl = place(&f, x, 0.0, 8.56, 0.0, true).expect("place");
        assert!((pl.prob_below_limit.unwrap_or(0.0) - 0.841_345).abs() < 1e-6);
        // At the line: 1/2.
        let pl = place(&f, x, 0.0, 8.12, 0.0, true).expect("place");
        assert!((pl.prob_below_limit.unwrap_or(0.0) - 0.5).abs() < 1e-12);
        assert!(matches!(
            place(&f, x, -0.1, 8.0, 0.1, false),
            Err(FitError::NegativeError { .. })
        ));
        assert!(matches!(
            place(&f, f64::NAN, 0.1, 8.0, 0.1, false),
            Err(FitError::NonFiniteInput { .. })
        ));
    }

    #[test]
    fn inverse_undoes_the_prediction() {
        let f = published(8.12, 4.24, 0.44);
        for x in [2.0, 2.3, 2.5] {
            let y = predict(&f, x, 0.0).expect("predict").log_mbh;
            assert!((invert(&f, y).expect("invert") - x).abs() < 1e-12);
        }
        // Quadratic (Wyithe 2006-like curvature β2 = 1.6): the root on the rising branch.
        let mut q = published(8.12, 4.2, 0.3);
        q.spec.shape = Shape::Quadratic;
        q.params.beta2 = Some(1.6);
        for x in [2.0, 2.3, 2.6] {
            let y = predict(&q, x, 0.0).expect("predict").log_mbh;
            assert!((invert(&q, y).expect("invert") - x).abs() < 1e-10, "{x}");
        }
        let flat = published(8.0, 0.0, 0.3);
        assert!(matches!(
            invert(&flat, 8.0),
            Err(FitError::Unsupported { .. })
        ));
    }

    #[test]
    fn residual_z_scores_of_a_simulated_sample_have_unit_spread() {
        // For a correctly specified model the z-scores of the detections are ~N(0, 1).
        let s = Sim {
            n: 300,
            seed: 41,
            limit_fraction: 0.1,
            ..Sim::default()
        };
        let pts = simulate(&s);
        let f = fit(&pts, &FitSpec::new(Method::Structural, s.pivot)).expect("fit");
        let r = residuals(&f, &pts);
        let z: Vec<f64> = r.iter().filter(|r| !r.upper_limit).map(|r| r.z).collect();
        let n = z.len() as f64;
        let m = z.iter().sum::<f64>() / n;
        let sd = (z.iter().map(|v| (v - m).powi(2)).sum::<f64>() / n).sqrt();
        // Bounds of 0.15 on the mean and 0.1 on the sd are the project's margins.
        assert!(m.abs() < 0.15 && (sd - 1.0).abs() < 0.1, "mean {m} sd {sd}");
        // Limits were placed 0.1–0.6 dex above the true mass: most should be likely upper bounds.
        let probs: Vec<f64> = r.iter().filter_map(|r| r.prob_below_limit).collect();
        let mean_p = probs.iter().sum::<f64>() / probs.len() as f64;
        assert!(mean_p > 0.6 && mean_p < 1.0, "{mean_p}");
    }
}
