//! Input checks shared by the astro modules; each returns the value or the matching error.

use super::AstroError;

/// Smallest log₁₀(M/M☉) accepted where a mass is given in log form.
pub(super) const LOG_MASS_MIN: f64 = -10.0;
/// Largest log₁₀(M/M☉) accepted where a mass is given in log form.
///
/// Far above any black hole, but low enough that a linear mass passed by mistake where a
/// log is expected (1e8 instead of 8) is refused rather than silently overflowing.
pub(super) const LOG_MASS_MAX: f64 = 20.0;

/// The value, if finite.
pub(super) fn finite(quantity: &'static str, value: f64) -> Result<f64, AstroError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(AstroError::NotFinite { quantity, value })
    }
}

/// The value, if finite and strictly positive.
pub(super) fn positive(quantity: &'static str, value: f64) -> Result<f64, AstroError> {
    if finite(quantity, value)? > 0.0 {
        Ok(value)
    } else {
        Err(AstroError::NotPositive { quantity, value })
    }
}

/// The value, if finite and zero or positive.
pub(super) fn non_negative(quantity: &'static str, value: f64) -> Result<f64, AstroError> {
    if finite(quantity, value)? >= 0.0 {
        Ok(value)
    } else {
        Err(AstroError::Negative { quantity, value })
    }
}

/// A computed result, if it is finite.
pub(super) fn finite_result(quantity: &'static str, value: f64) -> Result<f64, AstroError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(AstroError::Unrepresentable { quantity })
    }
}

/// A computed result that must be strictly positive: refused if it overflowed to infinity or
/// underflowed to zero.
pub(super) fn positive_result(quantity: &'static str, value: f64) -> Result<f64, AstroError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(AstroError::Unrepresentable { quantity })
    }
}

/// M/M☉ from log₁₀(M/M☉), refusing logs outside [`LOG_MASS_MIN`, `LOG_MASS_MAX`].
pub(super) fn mass_from_log(log_mbh: f64) -> Result<f64, AstroError> {
    let log_mbh = finite("log_mbh", log_mbh)?;
    if (LOG_MASS_MIN..=LOG_MASS_MAX).contains(&log_mbh) {
        Ok(10f64.powf(log_mbh))
    } else {
        Err(AstroError::OutOfRange {
            quantity: "log_mbh",
            value: log_mbh,
            min: LOG_MASS_MIN,
            max: LOG_MASS_MAX,
        })
    }
}
