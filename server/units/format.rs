//! Numbers written for people: values with their errors for pages, and compact numbers for
//! messages.

/// A log10 value with its errors, to two decimals, for pages.
///
/// "8.32 +0.10/−0.12" for different errors, "8.32 ± 0.11" when both round to the same two
/// decimals, "8.32" when both round to zero, "< 7.30" for an upper limit (errors ignored).
/// Errors are taken as magnitudes (their sign is ignored) and a non-finite error is treated as
/// absent; a non-finite value is shown as "—". The minus sign is U+2212.
pub fn format_log_with_errors(
    log_value: f64,
    err_minus_dex: f64,
    err_plus_dex: f64,
    upper_limit: bool,
) -> String {
    if !log_value.is_finite() {
        return "—".to_owned();
    }
    let value = two_decimals(log_value);
    if upper_limit {
        return format!("< {value}");
    }
    let shown_err = |err: f64| {
        if err.is_finite() {
            two_decimals(err.abs())
        } else {
            two_decimals(0.0)
        }
    };
    let minus = shown_err(err_minus_dex);
    let plus = shown_err(err_plus_dex);
    let zero = two_decimals(0.0);
    if minus == zero && plus == zero {
        value
    } else if minus == plus {
        format!("{value} ± {plus}")
    } else {
        format!("{value} +{plus}/\u{2212}{minus}")
    }
}

/// Two decimals, without a negative zero ("-0.00" would suggest a sign that is not there).
fn two_decimals(x: f64) -> String {
    let s = format!("{x:.2}");
    if s == "-0.00" { "0.00".to_owned() } else { s }
}

/// A value and its error, the error rounded to two significant digits and the value to the
/// same decimal place (common practice), as "8.32 ± 0.12", "123500 ± 1200" or "0.10 ± 0.10".
///
/// ```text
/// k = floor(log10 err) − 1          place of the last kept digit, 10^k
/// err′ = round(err / 10^k) · 10^k   (if err′ reaches 100 · 10^k, k grows by one)
/// value′ = round(value / 10^k) · 10^k
/// ```
///
/// A non-finite value is shown as "—"; with an error that is zero, negative or not finite, the
/// value alone is shown in Rust's shortest round-trip form.
pub fn round_to_uncertainty(value: f64, err: f64) -> String {
    if !value.is_finite() {
        return "—".to_owned();
    }
    if !(err.is_finite() && err > 0.0) {
        return format!("{value}");
    }
    let mut place = err.log10().floor() as i32 - 1;
    // Rounding can carry into a new leading digit (0.0996 → 0.100): keep two digits, not three.
    if scale_round(err, place) >= 100.0 {
        place += 1;
    }
    if place >= 0 {
        let step = 10f64.powi(place);
        let value = scale_round(value, place) * step;
        let err = scale_round(err, place) * step;
        format!("{} ± {}", two_decimals_free(value), two_decimals_free(err))
    } else {
        let decimals = (-place) as usize;
        format!("{value:.decimals$} ± {err:.decimals$}")
    }
}

/// x / 10^place, rounded to an integer (multiplying by 10^−place when place < 0, which is
/// exact for the small powers involved more often than dividing by an inexact 10^place).
fn scale_round(x: f64, place: i32) -> f64 {
    if place >= 0 {
        (x / 10f64.powi(place)).round()
    } else {
        (x * 10f64.powi(-place)).round()
    }
}

/// A whole number without decimals or a negative zero.
fn two_decimals_free(x: f64) -> String {
    let s = format!("{x:.0}");
    if s == "-0" { "0".to_owned() } else { s }
}

/// A number written with at most three significant digits, in exponent form when very large
/// or small ("3e7", "3.7e9", "0.005", "16.5"), for messages.
pub(super) fn format_compact(x: f64) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if a == 0.0 {
        return "0".to_owned();
    }
    if (1e-3..1e6).contains(&a) {
        // Three significant digits: the last one at 10^(floor(log10 a) − 2).
        let decimals = (2.0 - a.log10().floor()).max(0.0) as usize;
        return trim_fraction_zeros(&format!("{x:.decimals$}"));
    }
    let s = format!("{x:.2e}");
    match s.split_once('e') {
        Some((mantissa, exponent)) => format!("{}e{exponent}", trim_fraction_zeros(mantissa)),
        None => s,
    }
}

/// "3.200" → "3.2", "3.000" → "3", "120" → "120".
fn trim_fraction_zeros(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        s.to_owned()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_values_with_errors_are_formatted_for_pages() {
        let minus = '\u{2212}';
        assert_eq!(
            format_log_with_errors(8.32, 0.12, 0.10, false),
            format!("8.32 +0.10/{minus}0.12")
        );
        assert_eq!(
            format_log_with_errors(8.32, 0.11, 0.114, false),
            "8.32 ± 0.11"
        );
        assert_eq!(format_log_with_errors(8.324, 0.0, 0.0, false), "8.32");
        assert_eq!(format_log_with_errors(7.3, 0.2, 0.1, true), "< 7.30");
        assert_eq!(format_log_with_errors(8.3, -0.1, 0.1, false), "8.30 ± 0.10");
        assert_eq!(
            format_log_with_errors(8.3, f64::NAN, 0.1, false),
            format!("8.30 +0.10/{minus}0.00")
        );
        assert_eq!(format_log_with_errors(-0.001, 0.0, 0.0, false), "0.00");
        assert_eq!(format_log_with_errors(f64::NAN, 0.1, 0.1, false), "—");
    }

    #[test]
    fn values_are_rounded_to_two_significant_digits_of_their_error() {
        // Common practice: two significant digits in the error, the value to the same place.
        let cases: &[(f64, f64, &str)] = &[
            (8.3214, 0.1234, "8.32 ± 0.12"),
            (8.3214, 0.0996, "8.32 ± 0.10"),
            (0.5, 0.99, "0.50 ± 0.99"),
            (0.5, 0.996, "0.5 ± 1.0"),
            (1.234_56, 0.001_23, "1.2346 ± 0.0012"),
            (123_456.0, 1234.0, "123500 ± 1200"),
            (1234.4, 96.0, "1234 ± 96"),
            (5.0, 15.0, "5 ± 15"),
            (-2.345, 0.05, "-2.345 ± 0.050"),
            (2.0, 0.0, "2"),
            (2.5, f64::NAN, "2.5"),
            (f64::INFINITY, 0.1, "—"),
        ];
        for &(value, err, expected) in cases {
            assert_eq!(
                round_to_uncertainty(value, err),
                expected,
                "{value} ± {err}"
            );
        }
    }
}
