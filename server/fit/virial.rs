//! Calibrating the mean virial factor ⟨f⟩ of reverberation-mapped AGN against the M–σ
//! relation of quiescent galaxies, with the slope held at the quiescent fit's
//! (docs/methods.md §4.3).
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

use super::{Fit, FitError, FitSpec, Method, Point, fit};

/// The calibration of log ⟨f⟩.
#[derive(Debug, Clone, PartialEq)]
pub struct VirialCalibration {
    /// log10 ⟨f⟩ (dimensionless f), the mean of the AGN's log f.
    pub log_f: f64,
    /// Its 1-σ error: the AGN offset's and the quiescent relation's, combined, dex.
    pub log_f_err: f64,
    /// The part of `log_f_err` from the AGN alone (their offset at the quiescent slope), dex.
    pub log_f_err_agn: f64,
    /// The part from the quiescent relation's α and β, dex.
    pub log_f_err_relation: f64,
    /// Scatter of the AGN about the shifted relation (intrinsic, after measurement errors),
    /// dex; restricted maximum likelihood.
    pub eps_agn: f64,
    /// Number of AGN used.
    pub n_agn: usize,
    /// The quiescent fit the AGN were held against.
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
        if p.log_sigma_err < 0.0 || p.log_vp_err < 0.0 {
            return Err(FitError::NegativeError {
                row,
                column: "log_vp_err",
            });
        }
    }
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
        log_f: alpha - a,
        log_f_err: (var_agn + var_relation.max(0.0)).sqrt(),
        log_f_err_agn: var_agn.sqrt(),
        log_f_err_relation: var_relation.max(0.0).sqrt(),
        eps_agn: eps,
        n_agn: agn.len(),
        quiescent: relation,
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

    #[test]
    fn agn_exactly_on_a_shifted_relation_give_its_shift_and_no_scatter() {
        // Quiescent points exactly on log M = 8.3 + 5 (x − 2.3) and AGN exactly 0.7 dex below:
        // log f = 0.7 and ε_AGN = 0 (computed).
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
        let c = calibrate(&quiescent, &agn, 2.3).unwrap();
        assert!((c.log_f - 0.7).abs() < 1e-9, "{}", c.log_f);
        assert!(c.eps_agn < 1e-3, "{}", c.eps_agn);
        assert!(c.log_f_err > c.log_f_err_agn && c.log_f_err > c.log_f_err_relation);
        // With ε_AGN = 0 the AGN part is the mean's error: 0.1/√12 (computed).
        assert!((c.log_f_err_agn - 0.1 / 12f64.sqrt()).abs() < 1e-3);
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
