//! BCES: bivariate correlated errors and intrinsic scatter (Akritas & Bershady 1996), the
//! moment estimators behind many published M_BH–M_bulge fits. Straight lines only; no upper
//! limits.

use super::intervals::{IntervalKind, Intervals};
use super::types::{Data, prepare};
use super::{
    BcesLine, Fit, FitError, FitSpec, Method, Params, Point, Shape, Termination, min_points,
};

/// Slopes, intercepts and analytic (co)variances of all four BCES lines, in pivoted x.
#[derive(Clone, Debug, PartialEq)]
pub struct BcesAll {
    /// β for Y|X, X|Y, bisector, orthogonal (dex per dex).
    pub beta: [f64; 4],
    /// α at the pivot for the same lines (log10 units of y).
    pub alpha: [f64; 4],
    /// Var(β).
    pub var_beta: [f64; 4],
    /// Var(α).
    pub var_alpha: [f64; 4],
    /// Cov(α, β).
    pub cov_alpha_beta: [f64; 4],
}

/// Index of a line in [`BcesAll`]'s arrays.
///
/// # Model
/// ```text
/// index 0..3 for Y|X, X|Y, bisector, orthogonal
/// ```
///
/// # Errors
/// None.
///
/// # References
/// Akritas & Bershady 1996, ApJ 470, 706.
pub fn line_index(line: BcesLine) -> usize {
    match line {
        BcesLine::YOnX => 0,
        BcesLine::XOnY => 1,
        BcesLine::Bisector => 2,
        BcesLine::Orthogonal => 3,
    }
}

/// All four BCES lines with their analytic variances.
///
/// # Model
/// ```text
/// X = x − x0, Y = y; V11 = σ_x², V22 = σ_y², V12 = σ_xy; sums over i = 1..n
/// S_xx = Σ (X−X̄)², S_yy = Σ (Y−Ȳ)², S_xy = Σ (X−X̄)(Y−Ȳ)
/// β1 = (S_xy − ΣV12)/(S_xx − ΣV11)                       Y|X
/// β2 = (S_yy − ΣV22)/(S_xy − ΣV12)                       X|Y (as dY/dX)
/// β3 = [β1β2 − 1 + √((1+β1²)(1+β2²))]/(β1 + β2)          bisector
/// β4 = ½[(β2 − 1/β1) + sign(S_xy)√(4 + (β2 − 1/β1)²)]   orthogonal
/// α_j = Ȳ − β_j X̄
/// ξ1 = [(X−X̄)(Y − β1X − α1) + β1V11 − V12]/d1,  d1 = (S_xx − ΣV11)/n
/// ξ2 = [(Y−Ȳ)(Y − β2X − α2) + β2V12 − V22]/d2,  d2 = (S_xy − ΣV12)/n
/// ξ3 = [(1+β2²)β3ξ1 + (1+β1²)β3ξ2] / [(β1+β2)√((1+β1²)(1+β2²))]
/// ξ4 = [(β4/β1²)ξ1 + β4ξ2] / √(4 + (β2 − 1/β1)²)
/// ζ_j = Y − β_j X − X̄ ξ_j
/// Var(β_j) = Σ(ξ_j − ξ̄_j)²/n²,  Var(α_j) = Σ(ζ_j − ζ̄_j)²/n²,  Cov = Σ(ξ_j − ξ̄_j)(ζ_j − ζ̄_j)/n²
/// ```
/// X in log10 units relative to the pivot; Y in log10 units; V's in dex².
///
/// # Errors
/// [`FitError::Unsupported`] when S_xx ≤ ΣV11 (x errors as large as the spread of x) or
/// S_xy = ΣV12, or when β1 + β2 = 0 or β1 = 0 (bisector and orthogonal undefined).
///
/// # References
/// Akritas & Bershady 1996, ApJ 470, 706, §2 and appendix; Isobe et al. 1990, ApJ 364, 104
/// (the bisector and orthogonal slopes); docs/methods.md §2.4.
pub(crate) fn all_lines(data: &Data) -> Result<BcesAll, FitError> {
    let n = data.n() as f64;
    let xm = data.d.iter().sum::<f64>() / n;
    let ym = data.y.iter().sum::<f64>() / n;
    let (mut sxx, mut syy, mut sxy, mut v11, mut v22, mut v12) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..data.n() {
        let (dx, dy) = (data.d[i] - xm, data.y[i] - ym);
        sxx += dx * dx;
        syy += dy * dy;
        sxy += dx * dy;
        v11 += data.vx[i];
        v22 += data.vy[i];
        v12 += data.cxy[i];
    }
    if sxx - v11 <= 0.0 {
        return Err(FitError::Unsupported {
            what:
                "BCES needs the spread of x to exceed its measurement errors, and here it does not."
                    .to_owned(),
        });
    }
    if sxy - v12 == 0.0 {
        return Err(FitError::Unsupported {
            what: "BCES cannot fit a sample whose x and y show no covariance beyond their errors."
                .to_owned(),
        });
    }
    let b1 = (sxy - v12) / (sxx - v11);
    let b2 = (syy - v22) / (sxy - v12);
    if b1 == 0.0 || b1 + b2 == 0.0 {
        return Err(FitError::Unsupported {
            what: "The BCES bisector and orthogonal slopes are undefined for this sample."
                .to_owned(),
        });
    }
    let r12 = ((1.0 + b1 * b1) * (1.0 + b2 * b2)).sqrt();
    let b3 = (b1 * b2 - 1.0 + r12) / (b1 + b2);
    let t = b2 - 1.0 / b1;
    let b4 = 0.5 * (t + sxy.signum() * (4.0 + t * t).sqrt());
    let beta = [b1, b2, b3, b4];
    let alpha = beta.map(|b| ym - b * xm);
    let d1 = (sxx - v11) / n;
    let d2 = (sxy - v12) / n;
    let m = data.n();
    let mut xi = vec![[0.0_f64; 4]; m];
    let mut zeta = vec![[0.0_f64; 4]; m];
    for i in 0..m {
        let (x, y) = (data.d[i], data.y[i]);
        let x1 = ((x - xm) * (y - b1 * x - alpha[0]) + b1 * data.vx[i] - data.cxy[i]) / d1;
        let x2 = ((y - ym) * (y - b2 * x - alpha[1]) + b2 * data.cxy[i] - data.vy[i]) / d2;
        let x3 = ((1.0 + b2 * b2) * b3 * x1 + (1.0 + b1 * b1) * b3 * x2) / ((b1 + b2) * r12);
        let x4 = ((b4 / (b1 * b1)) * x1 + b4 * x2) / (4.0 + t * t).sqrt();
        xi[i] = [x1, x2, x3, x4];
        for j in 0..4 {
            zeta[i][j] = y - beta[j] * x - xm * xi[i][j];
        }
    }
    let mut var_beta = [0.0; 4];
    let mut var_alpha = [0.0; 4];
    let mut cov_ab = [0.0; 4];
    for j in 0..4 {
        let mx = xi.iter().map(|v| v[j]).sum::<f64>() / n;
        let mz = zeta.iter().map(|v| v[j]).sum::<f64>() / n;
        for i in 0..m {
            let (a, b) = (xi[i][j] - mx, zeta[i][j] - mz);
            var_beta[j] += a * a;
            var_alpha[j] += b * b;
            cov_ab[j] += a * b;
        }
        var_beta[j] /= n * n;
        var_alpha[j] /= n * n;
        cov_ab[j] /= n * n;
    }
    Ok(BcesAll {
        beta,
        alpha,
        var_beta,
        var_alpha,
        cov_alpha_beta: cov_ab,
    })
}

/// All four BCES lines for a sample (pivot from `spec`), with their analytic variances.
///
/// # Model
/// ```text
/// X = x − x0, Y = y; V11 = σ_x², V22 = σ_y², V12 = σ_xy
/// β1 (Y|X) = (S_xy − ΣV12)/(S_xx − ΣV11),  β2 (X|Y) = (S_yy − ΣV22)/(S_xy − ΣV12),
/// β3 bisector, β4 orthogonal;  α_j = Ȳ − β_j X̄;  variances with n² normalisation
/// ```
/// (the full equations are in the source of the private `all_lines`).
///
/// # Errors
/// As [`fit`].
///
/// # References
/// Akritas & Bershady 1996, ApJ 470, 706.
pub fn fit_all(points: &[Point], spec: &FitSpec) -> Result<BcesAll, FitError> {
    let data = checked(points, spec)?;
    all_lines(&data)
}

fn checked(points: &[Point], spec: &FitSpec) -> Result<Data, FitError> {
    if spec.shape != Shape::Line {
        return Err(FitError::Unsupported {
            what: format!(
                "BCES fits straight lines only, not a {}.",
                spec.shape.as_str()
            ),
        });
    }
    let spec_b = FitSpec {
        method: if matches!(spec.method, Method::Bces(_)) {
            spec.method
        } else {
            Method::Bces(BcesLine::YOnX)
        },
        ..spec.clone()
    };
    let data = prepare(points, &spec_b, min_points(&spec_b))?;
    if data.n_upper > 0 {
        return Err(FitError::Unsupported {
            what: format!(
                "BCES cannot use upper limits ({} in the sample); remove them or use the structural or conditional likelihood.",
                data.n_upper
            ),
        });
    }
    Ok(data)
}

/// BCES fit of the line named in `spec.method` (Y|X when the method is not BCES).
///
/// # Model
/// ```text
/// slopes, intercepts and variances: see `BcesAll` / fit_all (Akritas & Bershady 1996)
/// ε² = Σ_i r_i²/(n − 2) − mean_i(σ_y,i² + β² σ_x,i² − 2 β σ_xy,i),  r_i = y_i − α − β d_i,
/// clamped at 0 (then `termination.reason` says so)
/// ```
/// x, y in log10 units; σ's and ε in dex. ε is estimated after the fit, as is common practice;
/// its error is not computed (reported as 0).
///
/// # Errors
/// [`FitError::Unsupported`] for upper limits or a Quadratic/Plane shape, or a degenerate
/// sample (x errors as large as the spread of x; no x–y covariance beyond the errors); [`FitError::TooFewPoints`] for n < 3; the input errors of
/// [`super::fit`].
///
/// # References
/// Akritas & Bershady 1996, ApJ 470, 706; docs/methods.md §2.4 (the ε estimate, common practice).
pub fn fit(points: &[Point], spec: &FitSpec) -> Result<Fit, FitError> {
    let data = checked(points, spec)?;
    let all = all_lines(&data)?;
    let line = match spec.method {
        Method::Bces(l) => l,
        _ => BcesLine::YOnX,
    };
    let j = line_index(line);
    let (alpha, beta) = (all.alpha[j], all.beta[j]);
    let n = data.n();
    let mut r2 = 0.0;
    let mut meas = 0.0;
    for i in 0..n {
        let r = data.y[i] - alpha - beta * data.d[i];
        r2 += r * r;
        meas += data.vy[i] + beta * beta * data.vx[i] - 2.0 * beta * data.cxy[i];
    }
    let e2 = r2 / (n - 2) as f64 - meas / n as f64;
    let mut reason = String::from("Closed form.");
    let eps = if e2 > 0.0 {
        e2.sqrt()
    } else {
        reason.push_str(
            " The residual variance is below the measurement variance, so ε is clamped at 0.",
        );
        0.0
    };
    reason.push_str(
        " ε is estimated from the residual variance after the fit; no error is computed for it.",
    );
    let (va, vb, cab) = (all.var_alpha[j], all.var_beta[j], all.cov_alpha_beta[j]);
    Ok(Fit {
        spec: spec.clone(),
        params: Params::line(alpha, beta, eps),
        errors: Params {
            alpha: va.sqrt(),
            beta: vb.sqrt(),
            beta2: None,
            gamma: None,
            eps: 0.0,
        },
        cov_names: vec!["alpha", "beta", "eps"],
        cov: vec![vec![va, cab, 0.0], vec![cab, vb, 0.0], vec![0.0, 0.0, 0.0]],
        n,
        n_upper: 0,
        neg2_log_l: None,
        aic: None,
        bic: None,
        chi2: None,
        n_params: 3,
        termination: Termination {
            reason,
            iterations: 0,
            evaluations: 0,
        },
        x_model: None,
        intervals: Intervals::from_errors(
            IntervalKind::Estimator,
            &Params::line(alpha, beta, eps),
            &Params::line(va.sqrt(), vb.sqrt(), 0.0),
        ),
    })
}

#[cfg(test)]
mod tests {
    use super::super::types::test_data::{hogg, hogg_with_cov};
    use super::*;

    fn spec(line: BcesLine) -> FitSpec {
        FitSpec::new(Method::Bces(line), 0.0)
    }

    #[test]
    fn hogg_points_5_to_20_without_error_covariance() {
        // docs/methods.md §2.9, computed oracle 5 (computed; Akritas & Bershady 1996 formulas on Hogg, Bovy & Lang
        // 2010 Table 1, points 5–20, V12 = 0): (β ± σ, α ± σ)
        let expect = [
            (BcesLine::YOnX, 2.279_051, 0.150_540, 18.3767, 26.2205),
            (BcesLine::XOnY, 2.240_372, 0.156_760, 24.8650, 26.9632),
            (BcesLine::Bisector, 2.259_573, 0.151_271, 21.6441, 26.1936),
            (BcesLine::Orthogonal, 2.246_692, 0.153_742, 23.8049, 26.5106),
        ];
        for (line, b, sb, a, sa) in expect {
            let f = fit(&hogg(5), &spec(line)).expect("fit");
            assert!((f.params.beta - b).abs() < 1e-6, "{line:?} {:?}", f.params);
            assert!((f.errors.beta - sb).abs() < 1e-6, "{line:?} {:?}", f.errors);
            assert!((f.params.alpha - a).abs() < 1e-4, "{line:?} {:?}", f.params);
            assert!(
                (f.errors.alpha - sa).abs() < 1e-4,
                "{line:?} {:?}",
                f.errors
            );
        }
    }

    #[test]
    fn hogg_points_5_to_20_with_error_covariance() {
        // docs/methods.md §2.9, computed oracle 6 (computed), V12 = ρ σx σy: β ± σ_β (α).
        let expect = [
            (BcesLine::YOnX, 2.276_782, 0.160_079, 18.7573),
            (BcesLine::XOnY, 2.242_605, 0.145_106, 24.4905),
            (BcesLine::Bisector, 2.259_585, 0.151_214, 21.6420),
            (BcesLine::Orthogonal, 2.248_191, 0.146_201, 23.5535),
        ];
        for (line, b, sb, a) in expect {
            let f = fit(&hogg_with_cov(5), &spec(line)).expect("fit");
            assert!((f.params.beta - b).abs() < 1e-6, "{line:?} {:?}", f.params);
            assert!((f.errors.beta - sb).abs() < 1e-6, "{line:?} {:?}", f.errors);
            assert!((f.params.alpha - a).abs() < 1e-4, "{line:?} {:?}", f.params);
        }
    }

    #[test]
    fn scatter_is_the_excess_residual_variance() {
        // ε² = Σ r²/(n − 2) − mean(σ_y² + β² σ_x²), the common-practice estimate of
        // docs/methods.md §2.4, recomputed here from the fitted line.
        let pts = hogg(1);
        let f = fit(&pts, &spec(BcesLine::YOnX)).expect("fit");
        let (a, b) = (f.params.alpha, f.params.beta);
        let n = pts.len() as f64;
        let r2: f64 = pts.iter().map(|p| (p.y - a - b * p.x).powi(2)).sum();
        let m: f64 = pts
            .iter()
            .map(|p| p.y_err.powi(2) + b * b * p.x_err.powi(2))
            .sum::<f64>()
            / n;
        assert!((f.params.eps - (r2 / (n - 2.0) - m).sqrt()).abs() < 1e-9);
    }

    #[test]
    fn limits_and_curves_are_refused() {
        let mut pts = hogg(5);
        pts.push(Point::limit(150.0, 5.0, 300.0));
        assert!(matches!(
            fit(&pts, &spec(BcesLine::Bisector)),
            Err(FitError::Unsupported { .. })
        ));
        let q = spec(BcesLine::YOnX).with_shape(Shape::Plane).expect("spec");
        assert!(matches!(
            fit(&hogg(5), &q),
            Err(FitError::Unsupported { .. })
        ));
        // x errors larger than the spread of x.
        let wide: Vec<Point> = hogg(5)
            .into_iter()
            .map(|p| Point { x_err: 500.0, ..p })
            .collect();
        assert!(matches!(
            fit(&wide, &spec(BcesLine::YOnX)),
            Err(FitError::Unsupported { .. })
        ));
    }
}
