//! What a fit says about individual objects and subsamples: residuals and z-scores,
//! leave-one-out influence, and the zero-point offset of one subsample against another.

use serde::Serialize;

use super::predict::locate;
use super::types::prepare;
use super::{
    Fit, FitError, FitSpec, Method, Params, Point, Shape, conditional, min_points, structural,
};

/// One object's position relative to a fit.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Residual {
    /// Row of the object in the input.
    pub index: usize,
    /// y − ŷ(x), dex (for a limit: limit − prediction).
    pub residual_dex: f64,
    /// residual / √(s_pred² + σ_y²).
    pub z: f64,
    /// The object is an upper limit.
    pub upper_limit: bool,
    /// For a limit: probability that the true mass lies below it.
    pub prob_below_limit: Option<f64>,
}

/// How much one object moves the fit.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Influence {
    /// Row of the left-out object.
    pub index: usize,
    /// α without the object minus α with it (dex).
    pub d_alpha: f64,
    /// β without the object minus β with it.
    pub d_beta: f64,
    /// β2 without the object minus β2 with it, for a quadratic (dex/dex²).
    pub d_beta2: Option<f64>,
    /// γ without the object minus γ with it, for a plane (dex/dex).
    pub d_gamma: Option<f64>,
    /// ε without the object minus ε with it (dex).
    pub d_eps: f64,
    /// Size of the (α, β) shift in units of the full fit's errors: √(Δᵀ C⁻¹ Δ) with C the
    /// (α, β) covariance; 0 if C is singular.
    pub shift_sigma: f64,
    /// True when the shift comes from a refit without the object, false when it is the
    /// one-step approximation (docs/methods.md §6.1).
    pub exact: bool,
}

/// Zero-point offset of subsample b relative to subsample a at a shared slope.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Offset {
    /// δ: b lies δ dex above a at fixed host property.
    pub offset_dex: f64,
    /// 1-σ error of δ from the Hessian, dex.
    pub err_dex: f64,
    /// δ / err.
    pub significance_sigma: f64,
    /// The shared relation (α refers to subsample a).
    pub params: Params,
    /// Objects in a and b.
    pub n_a: usize,
    /// Objects in b.
    pub n_b: usize,
}

/// Residuals and z-scores of `points` about `fit`.
///
/// # Model
/// ```text
/// r_i = y_i − ŷ(x_i [, x2_i]),   z_i = r_i / √(s_pred,i² + σ_y,i² − 2 (∂ŷ/∂x) σ_xy,i)
/// s_pred,i² = ε² + gᵀ C g + (∂ŷ/∂x)² σ_x,i² [+ γ² σ_x2,i²]       (see predict::predict)
/// ∂ŷ/∂x = β [+ 2 β2 (x_i − x0)]; σ_xy,i is the point's x–y error covariance (e.g. from a
/// shared distance error), which makes errors along the relation less surprising.
/// limit: P(true < y_lim) = Φ(r_i / s_pred,i)
/// ```
/// dex throughout. Rows with non-finite values or negative errors (which a fit would have
/// refused) get r = z = 0 rather than NaN; a planar row without x2 is evaluated at x2 = x02.
///
/// # Errors
/// None.
///
/// # References
/// docs/methods.md §6 (outlier review, common practice).
pub fn residuals(fit: &Fit, points: &[Point]) -> Vec<Residual> {
    points
        .iter()
        .enumerate()
        .map(|(index, p)| {
            let pred = if fit.spec.shape == Shape::Plane {
                super::predict_plane(fit, p.x, p.x_err, p.x2.unwrap_or(fit.spec.pivot2), p.x2_err)
            } else {
                super::predict(fit, p.x, p.x_err)
            };
            match pred {
                Ok(pr) if p.y.is_finite() && p.y_err.is_finite() && p.y_err >= 0.0 => {
                    let covs = (p.xy_cov, p.x2_y_cov);
                    let pl = locate(fit, pr, p.x, p.y, p.y_err, covs, p.upper_limit);
                    Residual {
                        index,
                        residual_dex: pl.residual_dex,
                        z: pl.z,
                        upper_limit: p.upper_limit,
                        prob_below_limit: pl.prob_below_limit,
                    }
                }
                _ => Residual {
                    index,
                    residual_dex: 0.0,
                    z: 0.0,
                    upper_limit: p.upper_limit,
                    prob_below_limit: None,
                },
            }
        })
        .collect()
}

/// How much each object moves the fit: the parameter shifts when it is left out.
///
/// # Model
/// ```text
/// Δθ_(i) = θ̂(sample without i) − θ̂(sample),   θ = (α, β, [β2|γ], ε)
/// shift_sigma_i = √(Δ_(i)ᵀ C⁻¹ Δ_(i)),  Δ = (Δα, Δβ), C the full fit's (α, β) covariance
/// one step (N > EXACT_MAX_N):  Δθ_(i) ≈ (H − H_i)⁻¹ (g_i − g)     (see influence::approximate)
/// ```
/// α, ε in dex; β dex/dex. Up to [`super::influence::EXACT_MAX_N`] objects every object is
/// refitted (`exact = true`). Above it, for the conditional likelihood and the structural
/// straight line with one x component, every object gets the one-step approximation from the
/// one fit and the [`super::influence::EXACT_TOP`] it ranks highest by `shift_sigma` are
/// refitted (their entries replaced, `exact = true`; a refit that fails keeps the
/// approximation). For FITEXY, BCES and the other structural models above that size, the
/// objects are ranked by the one-step shifts under a likelihood that has them (the structural
/// K = 1 line for mixtures, the conditional likelihood of the same shape otherwise), and only
/// the top `EXACT_TOP`, refitted, are returned. The result is in input order and does not
/// depend on the number of threads.
///
/// # Errors
/// The errors of [`super::fit`] for the full sample; up to `EXACT_MAX_N` objects (and for the
/// refitted top of estimators without the one-step form) those of any leave-one-out sample
/// (e.g. [`FitError::TooFewPoints`] when the sample has exactly the minimum number of
/// detections).
///
/// # References
/// Cook 1977, Technometrics 19, 15 (influence of single observations); Cook & Weisberg 1982,
/// *Residuals and Influence in Regression*, Chapman & Hall (the one-step approximation; from
/// memory); docs/methods.md §6, §6.1.
pub fn leave_one_out(points: &[Point], spec: &FitSpec) -> Result<Vec<Influence>, FitError> {
    super::influence::leave_one_out(points, spec)
}

/// Zero-point offset between two subsamples that share slope (and curvature or γ) and
/// intrinsic scatter.
///
/// # Model
/// ```text
/// y_i = α + δ·[i ∈ b] + β (x_i − x0) [+ …] + N(0, ε²)
/// δ̂ and its error from the joint likelihood (inverse Hessian); significance = δ̂ / σ_δ
/// ```
/// The likelihood is that of `spec.method` (Structural: one true-x model shared by both
/// subsamples; Conditional: y given the observed x). δ, α, ε in dex.
///
/// # Errors
/// [`FitError::Unsupported`] for FITEXY and BCES; [`FitError::TooFewPoints`] if either
/// subsample has no detection; the errors of [`super::fit`] for the joint sample;
/// [`FitError::Unsupported`] if the Hessian gives no error for δ.
///
/// # References
/// docs/methods.md §6 (subsample splits, e.g. McConnell & Ma 2013 early vs late types).
pub fn zero_point_offset(a: &[Point], b: &[Point], spec: &FitSpec) -> Result<Offset, FitError> {
    if !matches!(spec.method, Method::Structural | Method::Conditional) {
        return Err(FitError::Unsupported {
            what: format!(
                "A zero-point offset needs a likelihood estimator, and {} is not one.",
                spec.method
            ),
        });
    }
    for part in [a, b] {
        if !part.iter().any(|p| !p.upper_limit) {
            return Err(FitError::TooFewPoints {
                n: 0,
                min: 1,
                method: spec.method.as_str(),
            });
        }
    }
    let all: Vec<Point> = a.iter().chain(b).cloned().collect();
    let group: Vec<bool> = (0..all.len()).map(|i| i >= a.len()).collect();
    let data = prepare(&all, spec, min_points(spec) + 1)?;
    let ml = match spec.method {
        Method::Structural => {
            let m = structural::Model::from_data(data, spec, Some(group));
            structural::maximise(&m, true)?
        }
        _ => {
            let m = conditional::Model::from_data(data, spec.shape, Some(group));
            let t0 = m.initial();
            conditional::run(&m, &t0, true)?
        }
    };
    let last = ml.theta.len() - 1;
    let offset_dex = ml.theta[last];
    let err_dex = match &ml.cov {
        Some(c) if c[(last, last)] > 0.0 => c[(last, last)].sqrt(),
        _ => {
            return Err(FitError::Unsupported {
                what: "The joint fit's Hessian gives no error for the offset.".to_owned(),
            });
        }
    };
    Ok(Offset {
        offset_dex,
        err_dex,
        significance_sigma: offset_dex / err_dex,
        params: conditional::theta_params(spec.shape, &ml.theta),
        n_a: a.len(),
        n_b: b.len(),
    })
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::{Sim, hogg, simulate};
    use super::*;

    #[test]
    fn a_shared_distance_covariance_enters_the_z_score() {
        // z = r / √(s_pred² + σ_y² − 2 β σ_xy), docs/methods.md §3.2 (a shared distance error makes
        // the x and y errors covary); values computed from the formula.
        let fit = Fit::given_line(
            super::super::FitSpec::new(super::super::Method::Conditional, 11.0),
            Params::line(8.5, 1.1, 0.3),
            [[0.0; 3]; 3],
        );
        let plain = Point::new(11.2, 0.1, 8.72 + 0.5, 0.2);
        let shared = plain.clone().with_xy_cov(0.012);
        let r = residuals(&fit, &[plain, shared]);
        let s_pred2 = 0.3f64.powi(2) + (1.1f64 * 0.1).powi(2);
        let expected_plain = 0.5 / (s_pred2 + 0.04).sqrt();
        let expected_shared = 0.5 / (s_pred2 + 0.04 - 2.0 * 1.1 * 0.012).sqrt();
        assert!((r[0].residual_dex - 0.5).abs() < 1e-12);
        assert!((r[0].z - expected_plain).abs() < 1e-12, "{}", r[0].z);
        assert!((r[1].z - expected_shared).abs() < 1e-12, "{}", r[1].z);
        assert!(r[1].z > r[0].z);
    }

    #[test]
    fn residuals_are_data_minus_line() {
        // Hogg, Bovy & Lang 2010 Table 1; |z| < 4 is the project's bound for a fit to its own
        // sample.
        let pts = hogg(1);
        let f = super::super::fit(&pts, &FitSpec::new(Method::Conditional, 0.0)).expect("fit");
        let r = residuals(&f, &pts);
        for (p, r) in pts.iter().zip(&r) {
            let want = p.y - f.params.alpha - f.params.beta * p.x;
            assert!((r.residual_dex - want).abs() < 1e-9);
            assert!(r.z.abs() < 4.0);
        }
    }

    #[test]
    fn leave_one_out_finds_a_planted_outlier() {
        let s = Sim {
            n: 40,
            seed: 51,
            ..Sim::default()
        };
        let mut pts = simulate(&s);
        // Plant an object 2 dex above the relation at the high-σ end, where it has leverage.
        pts[17].x = s.x_mean + 0.25;
        pts[17].y = s.alpha + s.beta * (pts[17].x - s.pivot) + 2.0;
        for m in [Method::Structural, Method::Conditional] {
            let inf = leave_one_out(&pts, &FitSpec::new(m, s.pivot)).expect("loo");
            assert_eq!(inf.len(), 40);
            let top = inf
                .iter()
                .max_by(|a, b| a.shift_sigma.total_cmp(&b.shift_sigma))
                .expect("max");
            assert_eq!(top.index, 17, "{m}: {top:?}");
            assert!(top.d_eps < 0.0, "removing the outlier lowers the scatter");
        }
    }

    #[test]
    fn zero_point_offset_recovers_a_planted_offset() {
        // Invented subsamples: b lies 0.3 dex above a (α 8.6 against 8.3) at the same slope and
        // scatter; the offset is recovered within 3σ and is significant at 3σ (common practice).
        let a = simulate(&Sim {
            n: 120,
            seed: 61,
            ..Sim::default()
        });
        let b = simulate(&Sim {
            n: 80,
            seed: 62,
            alpha: 8.6,
            ..Sim::default()
        });
        for m in [Method::Structural, Method::Conditional] {
            let o = zero_point_offset(&a, &b, &FitSpec::new(m, 2.301_03)).expect("offset");
            assert!((o.offset_dex - 0.3).abs() < 3.0 * o.err_dex, "{m}: {o:?}");
            assert!(o.significance_sigma > 3.0, "{m}: {o:?}");
            assert!((o.params.beta - 5.0).abs() < 1.0);
        }
        // No offset planted: compatible with zero.
        let c = simulate(&Sim {
            n: 80,
            seed: 63,
            ..Sim::default()
        });
        let o = zero_point_offset(&a, &c, &FitSpec::new(Method::Conditional, 2.301_03))
            .expect("offset");
        assert!(o.significance_sigma.abs() < 3.0, "{o:?}");
        assert!(matches!(
            zero_point_offset(&a, &c, &FitSpec::new(Method::Fitexy, 2.301_03)),
            Err(FitError::Unsupported { .. })
        ));
    }
}
