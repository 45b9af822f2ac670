//! Functions of the standard normal distribution shared by the likelihood estimators
//! (conditional and structural) and by their Newton derivatives: ln Φ far into the lower tail,
//! Φ in the form the block-logarithm sums take, the inverse Mills ratio φ/Φ, and one object's
//! −2 ln L term (a detection's Gaussian density or an upper limit's censored Φ) with its
//! derivatives in the object's mean m and variance V.
//!
//! z is dimensionless; a residual r = y − m is in dex (log10 units) and V in dex².

/// ln(2π).
pub(crate) const LN_2PI: f64 = 1.837_877_066_409_345_5;

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

/// Φ(z) where its logarithm can be taken from a product (z ≥ −20, the range in which
/// [`ln_norm_cdf`] takes the logarithm of ½ erfc), otherwise ln Φ(z) from the asymptotic tail
/// series. Both are exactly the values [`ln_norm_cdf`] computes.
pub(crate) enum NormCdf {
    /// Φ(z) itself, in (2.7e-89, 1].
    Value(f64),
    /// ln Φ(z) (z < −20, or z not a number).
    Log(f64),
}

/// Φ(z) or ln Φ(z) as [`ln_norm_cdf`] computes them (see [`NormCdf`]).
#[inline]
pub(crate) fn norm_cdf_parts(z: f64) -> NormCdf {
    if z >= -20.0 {
        NormCdf::Value(0.5 * statrs::function::erf::erfc(-z / std::f64::consts::SQRT_2))
    } else {
        NormCdf::Log(ln_norm_cdf(z))
    }
}

/// Inverse Mills ratio λ(z) = φ(z)/Φ(z), stable in the lower tail, given Φ(z) when known.
///
/// # Model
/// ```text
/// λ(z) = φ(z)/Φ(z),  φ(z) = e^{−z²/2}/√(2π)                      z > −30, Φ(z) > 0
/// λ(z) ≈ −z / (1 − 1/z² + 3/z⁴)                                   otherwise
/// ```
///
/// # References
/// Abramowitz & Stegun 1964, 26.2.12 (asymptotic expansion of the normal tail).
#[inline]
fn mills_ratio(z: f64, big_phi: Option<f64>) -> f64 {
    if z > -30.0 {
        let phi = (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt();
        let big_phi = big_phi
            .unwrap_or_else(|| 0.5 * statrs::function::erf::erfc(-z / std::f64::consts::SQRT_2));
        if big_phi > 0.0 {
            return phi / big_phi;
        }
    }
    let z2 = z * z;
    -z / (1.0 - 1.0 / z2 + 3.0 / (z2 * z2))
}

/// One object's −2 ln L term as a function of its mean m and variance V, with derivatives.
pub(crate) struct FyTerms {
    pub(crate) f: f64,
    pub(crate) fm: f64,
    pub(crate) fv: f64,
    pub(crate) fmm: f64,
    pub(crate) fmv: f64,
    pub(crate) fvv: f64,
}

/// Per-object −2 ln L and its derivatives in (m, V), for residual r = y − m.
///
/// ```text
/// detection: f = r²/V + ln V + ln 2π;  f_m = −2r/V, f_V = (V − r²)/V²,
///            f_mm = 2/V, f_mV = 2r/V², f_VV = (2r² − V)/V³
/// limit:     f = −2 ln Φ(z), z = r/√V;  f_z = −2λ, f_zz = 2λ(z + λ), λ = φ(z)/Φ(z);
///            z_m = −1/√V, z_V = −z/(2V), z_mV = 1/(2V^{3/2}), z_VV = 3z/(4V²)
/// ```
#[inline]
pub(crate) fn fy_terms(r: f64, v: f64, limit: bool) -> FyTerms {
    if limit {
        let sv = v.sqrt();
        let z = r / sv;
        let lam = mills_ratio(z, None);
        let fz = -2.0 * lam;
        let fzz = 2.0 * lam * (z + lam);
        let zm = -1.0 / sv;
        let zv = -z / (2.0 * v);
        let zmv = 1.0 / (2.0 * v * sv);
        let zvv = 3.0 * z / (4.0 * v * v);
        FyTerms {
            f: -2.0 * ln_norm_cdf(z),
            fm: fz * zm,
            fv: fz * zv,
            fmm: fzz * zm * zm,
            fmv: fzz * zm * zv + fz * zmv,
            fvv: fzz * zv * zv + fz * zvv,
        }
    } else {
        let iv = 1.0 / v;
        FyTerms {
            f: r * r * iv + v.ln() + LN_2PI,
            fm: -2.0 * r * iv,
            fv: (1.0 - r * r * iv) * iv,
            fmm: 2.0 * iv,
            fmv: 2.0 * r * iv * iv,
            fvv: (2.0 * r * r * iv - 1.0) * iv * iv,
        }
    }
}

/// A detection's −2 ln L term without its logarithm, and the derivatives in (m, V), for
/// residual r = y − m.
///
/// ```text
/// f = r²/V  (the caller adds ln V + ln 2π);  f_m = −2r/V, f_V = (V − r²)/V²,
/// f_mm = 2/V, f_mV = 2r/V², f_VV = (2r² − V)/V³
/// ```
#[inline]
pub(crate) fn detection_terms(r: f64, v: f64) -> FyTerms {
    let iv = 1.0 / v;
    let r2iv = r * r * iv;
    FyTerms {
        f: r2iv,
        fm: -2.0 * r * iv,
        fv: (1.0 - r2iv) * iv,
        fmm: 2.0 * iv,
        fmv: 2.0 * r * iv * iv,
        fvv: (2.0 * r2iv - 1.0) * iv * iv,
    }
}

/// A censored term's derivatives in (m, V) (its value, in the form of [`norm_cdf_parts`], is
/// returned beside them and `f` is left 0), sharing one erfc between Φ and λ.
///
/// ```text
/// f = −2 ln Φ(z), z = r/√V;  f_z = −2λ, f_zz = 2λ(z + λ), λ = φ(z)/Φ(z);
/// z_m = −1/√V, z_V = −z/(2V), z_mV = 1/(2V^{3/2}), z_VV = 3z/(4V²)
/// ```
#[inline]
pub(crate) fn limit_terms(r: f64, v: f64) -> (FyTerms, NormCdf) {
    // Two divisions instead of five: 1/V and 1/√V serve every derivative of z.
    let iv = 1.0 / v;
    let isv = 1.0 / v.sqrt();
    let z = r * isv;
    let cdf = norm_cdf_parts(z);
    let lam = match cdf {
        NormCdf::Value(big_phi) => mills_ratio(z, Some(big_phi)),
        NormCdf::Log(_) => mills_ratio(z, None),
    };
    let fz = -2.0 * lam;
    let fzz = 2.0 * lam * (z + lam);
    let zm = -isv;
    let zv = -0.5 * z * iv;
    let zmv = 0.5 * iv * isv;
    let zvv = 0.75 * z * iv * iv;
    let t = FyTerms {
        f: 0.0,
        fm: fz * zm,
        fv: fz * zv,
        fmm: fzz * zm * zm,
        fmv: fzz * zm * zv + fz * zmv,
        fvv: fzz * zv * zv + fz * zvv,
    };
    (t, cdf)
}
