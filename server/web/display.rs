//! Turning numbers into what a page shows: rounding, signs and units. Pages hold only strings
//! made here (or by `units`' formatting).

use crate::catalog::model::Quantity;

/// A number with a fixed count of decimals, using a true minus sign.
pub(crate) fn fixed(value: f64, decimals: usize) -> String {
    let text = format!("{value:.decimals$}");
    match text.strip_prefix('-') {
        Some(rest) if rest.chars().any(|c| c.is_ascii_digit() && c != '0') => format!("−{rest}"),
        Some(rest) => rest.to_string(),
        None => text,
    }
}

/// A value with `digits` significant digits, no exponent for everyday magnitudes.
pub(crate) fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 || !value.is_finite() {
        return fixed(value, 0);
    }
    let magnitude = value.abs().log10().floor();
    let decimals = (digits as f64 - 1.0 - magnitude).clamp(0.0, 12.0) as usize;
    fixed(value, decimals)
}

/// A number with a fixed count of decimals and its sign always shown (+0.12, −0.30).
pub(crate) fn signed(value: f64, decimals: usize) -> String {
    let text = fixed(value, decimals);
    if value >= 0.0 && !text.starts_with('−') {
        format!("+{text}")
    } else {
        text
    }
}

/// The unit of a stored quantity's canonical log value.
pub(crate) fn quantity_unit(quantity: Quantity, band: &str) -> String {
    match quantity {
        Quantity::BlackHoleMass | Quantity::BulgeMass => "log10 M☉".to_string(),
        Quantity::VelocityDispersion => "log10 km/s".to_string(),
        Quantity::BulgeLuminosity => format!("log10 L☉,{band}"),
        Quantity::Distance | Quantity::Resolution => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_use_a_true_minus_and_significant_digits() {
        assert_eq!(fixed(-0.004, 2), "0.00");
        assert_eq!(fixed(-1.5, 1), "−1.5");
        assert_eq!(significant(0.22178, 3), "0.222");
        assert_eq!(significant(10.7523, 3), "10.8");
        assert_eq!(significant(1234.0, 2), "1234");
    }
}
