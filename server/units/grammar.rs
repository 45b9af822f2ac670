//! Reading values as people type them: [`parse_entry`] into a canonical log10 value with
//! errors in dex ([`Entry`]), [`parse_linear`] into a linear value with one error
//! ([`LinearEntry`]). The text is split into tokens (`lexer`), read into its syntax (`parser`),
//! then converted and checked against the quantity's plausible range here.

mod lexer;
mod parser;

use std::f64::consts::LN_10;

use serde::Serialize;

use self::parser::{ErrorSize, ErrorSyntax, ErrorUnit, Form, Magnitude, parse_syntax};
use super::errors::EntryError;
use super::format::{format_compact, format_log_with_errors};
use super::quantity::{Quantity, Scale};
use super::ranges::{MAX_ENTRY_CHARS, MAX_ERR_DEX, RANGE_EPS_DEX};

/// A value as typed, read into its canonical log10 form with errors in dex.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Entry {
    /// What the value measures.
    pub quantity: Quantity,
    /// The text exactly as typed, trimmed of surrounding white space.
    pub text: String,
    /// Canonical log10 value: log10 M☉ for masses, log10 L☉ for luminosity, log10 km/s for
    /// dispersion (log10 Mpc and log10 arcsec if a distance or resolution is read this way).
    /// For an upper limit, the limit.
    pub log_value: f64,
    /// Lower error, dex, ≥ 0 (0 for an upper limit or when no error was typed).
    pub err_minus_dex: f64,
    /// Upper error, dex, ≥ 0 (0 for an upper limit or when no error was typed).
    pub err_plus_dex: f64,
    /// Symmetric error, dex: the mean of the two (docs/methods.md §2.5 option 1, common
    /// practice).
    pub err_dex: f64,
    /// Whether the text gave an error at all (an error of `± 0` is given; no error is not).
    pub errors_given: bool,
    /// Whether the value is an upper limit (typed with `<`, `<=` or `≤`).
    pub upper_limit: bool,
    /// How the number was read: [`Scale::Linear`] or [`Scale::Log10`], never `Auto`.
    pub scale_used: Scale,
}

impl Entry {
    /// The value with its errors for display, as [`format_log_with_errors`] writes it.
    pub fn display_log(&self) -> String {
        format_log_with_errors(
            self.log_value,
            self.err_minus_dex,
            self.err_plus_dex,
            self.upper_limit,
        )
    }
}

/// A linear value as typed (distance in Mpc, resolution in arcsec) with a symmetric error.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinearEntry {
    /// What the value measures.
    pub quantity: Quantity,
    /// The text exactly as typed, trimmed of surrounding white space.
    pub text: String,
    /// The value in the quantity's unit ([`Quantity::unit_label`]: Mpc for a distance, arcsec
    /// for a resolution).
    pub value: f64,
    /// Symmetric error in the same unit, ≥ 0 and smaller than the value (0 when none typed).
    pub err: f64,
    /// Whether the text gave an error at all.
    pub errors_given: bool,
}

/// Reads a value as typed into its canonical log10 form with errors in dex.
///
/// See the module documentation for the accepted forms. The conversion of linear errors is
///
/// ```text
/// log_value = log10(M)
/// u = log10((M + δ₊) / M),   l = log10(M / (M − δ₋)),   err_dex = (u + l) / 2
/// ```
///
/// where M, δ₊, δ₋ are in the quantity's linear unit ([`Quantity::unit_label`]) and u, l,
/// err_dex in dex. Percent errors are δ = p/100 · M. Values on the log scale keep their
/// errors, which are already in dex.
///
/// Distance and resolution can be read this way too (giving log10 Mpc or log10 arcsec), but
/// they are normally read with [`parse_linear`]; upper limits on them are refused.
///
/// # Errors
///
/// An [`EntryError`] whose message says, in one sentence, what is wrong and what to type.
///
/// # References
///
/// docs/methods.md §2.5 option 1 (convert to dex and average; common practice).
pub fn parse_entry(text: &str, quantity: Quantity, scale: Scale) -> Result<Entry, EntryError> {
    let text = checked_text(text, quantity)?;
    let syntax = parse_syntax(text, quantity)?;
    if syntax.upper_limit && syntax.errors.is_some() {
        return Err(EntryError::LimitWithErrors { quantity });
    }
    if syntax.upper_limit && !quantity.is_log_canonical() {
        return Err(EntryError::LimitNotAccepted { quantity });
    }
    let log_scale = match (scale, syntax.log_word) {
        (Scale::Log10, _) => true,
        (Scale::Linear, true) => return Err(EntryError::LinearScaleLogText { quantity }),
        (Scale::Linear, false) => false,
        (Scale::Auto, said_log) => said_log,
    };
    let value = &syntax.value;
    let log_value = if log_scale {
        if value.form != Form::Plain {
            return Err(EntryError::LogScaleLinearNotation {
                quantity,
                fragment: value.text(text).to_owned(),
            });
        }
        if !value.linear.is_finite() {
            return Err(non_finite(quantity, value, text));
        }
        if value.negative {
            -value.linear
        } else {
            value.linear
        }
    } else {
        let log_value = magnitude_log10(value, text, quantity)?;
        // A bare number that only makes sense as a log10 (a "mass" of 9.51 M☉) is refused
        // rather than guessed: the two readings differ by ten orders of magnitude.
        if scale == Scale::Auto
            && value.form == Form::Plain
            && quantity.is_log_canonical()
            && !in_log_range(quantity, log_value)
            && in_log_range(quantity, value.linear)
        {
            return Err(EntryError::AmbiguousScale {
                quantity,
                fragment: value.text(text).to_owned(),
            });
        }
        log_value
    };
    if !in_log_range(quantity, log_value) {
        return Err(EntryError::OutOfRange {
            quantity,
            shown: show_log_value(quantity, log_value),
        });
    }

    let (err_minus_dex, err_plus_dex) = match &syntax.errors {
        None => (0.0, 0.0),
        Some(errors) => dex_errors(errors, log_value, log_scale, text, quantity)?,
    };
    Ok(Entry {
        quantity,
        text: text.to_owned(),
        log_value,
        err_minus_dex,
        err_plus_dex,
        err_dex: 0.5 * (err_minus_dex + err_plus_dex),
        errors_given: syntax.errors.is_some(),
        upper_limit: syntax.upper_limit,
        scale_used: if log_scale {
            Scale::Log10
        } else {
            Scale::Linear
        },
    })
}

/// Reads a linear value with an optional symmetric error: the galaxy's adopted distance
/// (`16.5 ± 0.8`, `16.5`), the distance a source assumed, a spatial resolution (`0.1`).
///
/// The same number forms as [`parse_entry`] are accepted (`1.65e1`, `16.5 Mpc`), and the error
/// may be in the value's unit or a percentage (`16.5 ± 5%`). Any quantity may be read this way;
/// the value is checked against the quantity's range converted to its linear unit.
///
/// # Errors
///
/// As [`parse_entry`], and also for limits ([`EntryError::LimitNotAccepted`]), the log scale
/// or dex errors ([`EntryError::LogNotAccepted`]), asymmetric errors
/// ([`EntryError::AsymmetricNotAccepted`]) and errors as large as the value
/// ([`EntryError::ErrorExceedsValue`]).
pub fn parse_linear(text: &str, quantity: Quantity) -> Result<LinearEntry, EntryError> {
    let text = checked_text(text, quantity)?;
    let syntax = parse_syntax(text, quantity)?;
    if syntax.upper_limit {
        return Err(EntryError::LimitNotAccepted { quantity });
    }
    if syntax.log_word {
        return Err(EntryError::LogNotAccepted { quantity });
    }
    let value_mag = &syntax.value;
    let log_value = magnitude_log10(value_mag, text, quantity)?;
    if !in_log_range(quantity, log_value) {
        return Err(EntryError::OutOfRange {
            quantity,
            shown: show_log_value(quantity, log_value),
        });
    }
    // In range, so finite and positive: the exactly typed linear number is preferred over
    // 10^log_value, which could differ in the last place.
    let value = if value_mag.linear.is_finite() && value_mag.linear > 0.0 {
        value_mag.linear
    } else {
        10f64.powf(log_value)
    };
    let err = match &syntax.errors {
        None => 0.0,
        Some(ErrorSyntax::Asymmetric { .. }) => {
            return Err(EntryError::AsymmetricNotAccepted { quantity });
        }
        Some(ErrorSyntax::Symmetric(size)) => {
            let typed = error_size(size, text, quantity)?;
            match size.unit {
                ErrorUnit::Dex => return Err(EntryError::LogNotAccepted { quantity }),
                ErrorUnit::Percent => typed / 100.0 * value,
                ErrorUnit::Same => typed,
            }
        }
    };
    if !err.is_finite() {
        return Err(EntryError::ErrorTooLarge {
            quantity,
            shown: format_compact(err),
        });
    }
    if err >= value {
        return Err(EntryError::ErrorExceedsValue { quantity });
    }
    Ok(LinearEntry {
        quantity,
        text: text.to_owned(),
        value,
        err,
        errors_given: syntax.errors.is_some(),
    })
}

/// Trims the entry and refuses empty and overlong ones.
fn checked_text(text: &str, quantity: Quantity) -> Result<&str, EntryError> {
    let text = text.trim();
    if text.is_empty() {
        return Err(EntryError::Empty { quantity });
    }
    let chars = text.chars().count();
    if chars > MAX_ENTRY_CHARS {
        return Err(EntryError::TooLong { quantity, chars });
    }
    Ok(text)
}

/// Whether a log10 value lies inside the quantity's accepted range (ends included, up to
/// rounding).
fn in_log_range(quantity: Quantity, log_value: f64) -> bool {
    let (min, max) = quantity.log_range();
    log_value.is_finite() && log_value >= min - RANGE_EPS_DEX && log_value <= max + RANGE_EPS_DEX
}

/// log10 of a number read on the linear scale, refusing non-positive and non-finite ones.
fn magnitude_log10(value: &Magnitude, text: &str, quantity: Quantity) -> Result<f64, EntryError> {
    let refuse_non_positive = || EntryError::NonPositive {
        quantity,
        fragment: value.text(text).to_owned(),
    };
    if value.negative || value.mantissa_zero {
        return Err(refuse_non_positive());
    }
    if let Some(log_value) = value.log10_exact {
        return if log_value.is_finite() {
            Ok(log_value)
        } else {
            Err(non_finite(quantity, value, text))
        };
    }
    if !value.linear.is_finite() {
        return Err(non_finite(quantity, value, text));
    }
    if value.linear <= 0.0 {
        // Zero, or so small that it rounded to zero.
        return Err(refuse_non_positive());
    }
    Ok(value.linear.log10())
}

fn non_finite(quantity: Quantity, value: &Magnitude, text: &str) -> EntryError {
    EntryError::NonFinite {
        quantity,
        fragment: value.text(text).to_owned(),
    }
}

/// Converts the typed errors to (lower, upper) errors in dex.
///
/// ```text
/// linear:  u = log10(1 + δ₊/M) = ln_1p(δ₊/M) / ln 10
///          l = log10(M / (M − δ₋)) = −ln_1p(−δ₋/M) / ln 10,   refused when δ₋ ≥ M
/// percent: δ = p/100 · M, then as linear
/// dex:     u = δ₊, l = δ₋
/// ```
///
/// `ln_1p` keeps small fractional errors accurate (δ/M of 10⁻⁶ would lose half its digits
/// in log10(1 + δ/M)).
fn dex_errors(
    errors: &ErrorSyntax,
    log_value: f64,
    log_scale: bool,
    text: &str,
    quantity: Quantity,
) -> Result<(f64, f64), EntryError> {
    let (plus, minus) = match errors {
        ErrorSyntax::Symmetric(size) => (size, size),
        ErrorSyntax::Asymmetric { plus, minus } => (plus, minus),
    };
    let units = [plus.unit, minus.unit];
    let any_dex = units.contains(&ErrorUnit::Dex);
    let any_percent = units.contains(&ErrorUnit::Percent);
    if any_dex && any_percent {
        return Err(EntryError::MixedErrorUnits { quantity });
    }
    if log_scale && any_percent {
        return Err(EntryError::PercentOnLogScale { quantity });
    }
    // A `dex` written once (after the last error) applies to both; on the log scale every
    // error is in dex.
    let in_dex = log_scale || any_dex;
    let delta_plus = error_size(plus, text, quantity)?;
    let delta_minus = error_size(minus, text, quantity)?;

    let (err_minus_dex, err_plus_dex) = if in_dex {
        (delta_minus, delta_plus)
    } else {
        // In range, so M is finite and positive.
        let m = 10f64.powf(log_value);
        let to_linear = |delta: f64, unit: ErrorUnit| match unit {
            ErrorUnit::Percent => delta / 100.0 * m,
            ErrorUnit::Same | ErrorUnit::Dex => delta,
        };
        let delta_plus = to_linear(delta_plus, plus.unit);
        let delta_minus = to_linear(delta_minus, minus.unit);
        if delta_minus >= m {
            return Err(EntryError::LowerErrorReachesZero {
                quantity,
                suggestion: format_compact(m + delta_plus),
            });
        }
        let upper = (delta_plus / m).ln_1p() / LN_10;
        let lower = -(-delta_minus / m).ln_1p() / LN_10;
        (lower, upper)
    };
    for err in [err_minus_dex, err_plus_dex] {
        if !err.is_finite() || err > MAX_ERR_DEX {
            return Err(EntryError::ErrorTooLarge {
                quantity,
                shown: format_compact(err),
            });
        }
    }
    Ok((err_minus_dex, err_plus_dex))
}

/// The size of one typed error, as a finite non-negative number in the unit it was typed in.
fn error_size(size: &ErrorSize, text: &str, quantity: Quantity) -> Result<f64, EntryError> {
    let value = &size.magnitude;
    if value.linear.is_finite() {
        Ok(value.linear)
    } else {
        Err(non_finite(quantity, value, text))
    }
}

/// A log10 value as understood, with its unit, for messages: "10^12.30 M☉" for masses and
/// luminosities, the linear value for dispersion, distance and resolution ("700 km/s").
fn show_log_value(quantity: Quantity, log_value: f64) -> String {
    let unit = quantity.unit_label();
    let linear = 10f64.powf(log_value);
    match quantity {
        Quantity::BlackHoleMass | Quantity::BulgeMass | Quantity::BulgeLuminosity => {
            format!("10^{log_value:.2} {unit}")
        }
        _ if linear.is_finite() && linear > 0.0 => format!("{} {unit}", format_compact(linear)),
        _ => format!("10^{log_value:.2} {unit}"),
    }
}

#[cfg(test)]
pub(super) mod tests {
    use super::super::errors::tests::assert_one_sentence;
    use super::*;
    use crate::fit::tolerance::close;

    /// Tolerance for values computed from the same formula in a different way (rounding only).
    const TOL: f64 = 1e-12;

    /// log10(3.2e9), computed with Python's math.log10.
    const LOG_3_2E9: f64 = 9.505_149_978_319_906;

    #[track_caller]
    pub(in crate::units) fn accept(text: &str, quantity: Quantity, scale: Scale) -> Entry {
        parse_entry(text, quantity, scale)
            .unwrap_or_else(|e| panic!("`{text}` ({quantity}, {scale}) was refused: {e}"))
    }

    #[test]
    fn every_number_notation_reads_the_same_mass() {
        let forms = [
            "3.2e9",
            "3.2E9",
            "3.2e+9",
            "3.2x10^9",
            "3.2X10^9",
            "3.2×10^9",
            "3.2*10^9",
            "3.2·10^9",
            "3.2 x 10^9",
            "3.2 × 10 ^ 9",
            "3.2x10**9",
            "3.2x10^{9}",
            "3.2×10⁹",
            "3.2×10⁺⁹",
            "3200000000",
            "3200000000.0",
            "32e8",
            "0.32e10",
            "  3.2e9  ",
            "3.2e9 Msun",
            "3.2e9 M☉",
            "3.2e9 m_sun",
            "3.2e9 MSOL",
        ];
        for form in forms {
            let entry = accept(form, Quantity::BlackHoleMass, Scale::Auto);
            assert!(
                close(entry.log_value, LOG_3_2E9, TOL, 0.0),
                "{form}: got {}, expected {LOG_3_2E9}",
                entry.log_value
            );
            assert_eq!(entry.text, form.trim());
            assert_eq!(entry.scale_used, Scale::Linear, "{form}");
            assert!(!entry.upper_limit && !entry.errors_given, "{form}");
            assert_eq!((entry.err_minus_dex, entry.err_plus_dex), (0.0, 0.0));
        }
        // The explicit linear scale reads the same.
        let entry = accept("3.2e9", Quantity::BlackHoleMass, Scale::Linear);
        assert!(
            close(entry.log_value, LOG_3_2E9, TOL, 0.0),
            "linear scale: got {}, expected {LOG_3_2E9}",
            entry.log_value
        );
    }

    #[test]
    fn a_power_of_ten_keeps_its_exponent_exactly() {
        for (form, expected) in [
            ("10^9.51", 9.51),
            ("10^{9.51}", 9.51),
            ("10 ^ 9.51", 9.51),
            ("10**9.51", 9.51),
            ("10⁹", 9.0),
            ("10^9", 9.0),
        ] {
            let entry = accept(form, Quantity::BlackHoleMass, Scale::Auto);
            assert!(
                close(entry.log_value, expected, f64::EPSILON * 16.0, 0.0),
                "{form}: {}",
                entry.log_value
            );
            assert_eq!(entry.scale_used, Scale::Linear);
        }
        // A negative exponent, for a resolution read on the log path.
        let entry = accept("10^-1", Quantity::Resolution, Scale::Auto);
        assert!(
            close(entry.log_value, -1.0, TOL, 0.0),
            "10^-1 arcsec: got {}, expected -1",
            entry.log_value
        );
    }

    #[test]
    fn log_values_are_read_from_the_word_or_the_chosen_scale() {
        let cases = [
            ("log 9.51", Scale::Auto),
            ("log10 9.51", Scale::Auto),
            ("LOG10 9.51", Scale::Auto),
            ("Log10=9.51", Scale::Auto),
            ("log = 9.51", Scale::Auto),
            ("log9.51", Scale::Auto),
            ("9.51", Scale::Log10),
            ("log 9.51", Scale::Log10),
            ("log 9.51 Msun", Scale::Auto),
        ];
        for (form, scale) in cases {
            let entry = accept(form, Quantity::BlackHoleMass, scale);
            assert!(
                close(entry.log_value, 9.51, TOL, 0.0),
                "{form}: got {}, expected 9.51",
                entry.log_value
            );
            assert_eq!(entry.scale_used, Scale::Log10, "{form}");
        }
        // `log10.5` is log 10.5, not log10 of 5.
        let entry = accept("log10.5", Quantity::BlackHoleMass, Scale::Auto);
        assert!(
            close(entry.log_value, 10.5, TOL, 0.0),
            "log10.5: got {}, expected 10.5",
            entry.log_value
        );
        let entry = accept("log 10.7", Quantity::BulgeLuminosity, Scale::Auto);
        assert!(
            close(entry.log_value, 10.7, TOL, 0.0),
            "luminosity: got {}, expected 10.7",
            entry.log_value
        );
        let entry = accept("2.3", Quantity::VelocityDispersion, Scale::Log10);
        assert!(
            close(entry.log_value, 2.3, TOL, 0.0),
            "sigma on the log scale: got {}, expected 2.3",
            entry.log_value
        );
    }

    #[test]
    fn errors_convert_to_dex_as_science_md_section_2_5_option_1() {
        // Expected values computed with Python's math.log10 from docs/methods.md §2.5 option 1:
        // u = log10((M + δ₊)/M), l = log10(M/(M − δ₋)). For 3.2e9 +0.5e9 −0.3e9:
        // u = log10(3.7/3.2), l = log10(3.2/2.9).
        let u_32 = 0.063_051_745_747_089_02;
        let l_32 = 0.042_751_980_420_949_88;
        // 1e8 ± 10 %: u = log10(1.1), l = log10(1/0.9).
        let u_10pc = 0.041_392_685_158_225_07;
        let l_10pc = 0.045_757_490_560_675_14;
        // 1e8 +10 % −5 %: l = log10(1/0.95) = 0.022276394711152253 (Python math.log10).
        let l_5pc = 0.022_276_394_711_152_253;
        // 210 ± 10 km/s: u = log10(220/210), l = log10(210/200).
        let u_sigma = 0.020_203_386_088_286_99;
        let l_sigma = 0.021_189_299_069_938_092;
        // 1e7 +2e7 −0.5e7: u = log10(3) = 0.47712125471966244 (Python math.log10),
        // l = log10(2).
        let (u_3, l_2) = (0.477_121_254_719_662_44, std::f64::consts::LOG10_2);

        let bh = Quantity::BlackHoleMass;
        let cases: &[(&str, Quantity, Scale, f64, f64)] = &[
            ("3.2e9 +0.5e9/-0.3e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 +0.5e9 -0.3e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 +0.5e9, -0.3e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 (+0.5e9, -0.3e9)", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 (+0.5e9/-0.3e9) Msun", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 -0.3e9 +0.5e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9^{+0.5e9}_{-0.3e9}", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 _{-0.3e9}^{+0.5e9}", bh, Scale::Auto, l_32, u_32),
            ("3.2x10^9 +0.5x10^9/−0.3x10^9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 +0.5e9/–0.3e9", bh, Scale::Linear, l_32, u_32),
            ("3.2E9+0.5E9-0.3E9", bh, Scale::Auto, l_32, u_32),
            ("1e8 ± 10%", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 ± 1e7", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 +/- 1e7", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 +-1e7", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 ± 0.1e8", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 +10%/-5%", bh, Scale::Auto, l_5pc, u_10pc),
            ("1e7 +2e7/-0.5e7", bh, Scale::Auto, l_2, u_3),
            (
                "2e11 ± 10%",
                Quantity::BulgeMass,
                Scale::Auto,
                l_10pc,
                u_10pc,
            ),
            (
                "210 ± 10 km/s",
                Quantity::VelocityDispersion,
                Scale::Auto,
                l_sigma,
                u_sigma,
            ),
            (
                "210 km/s ± 10",
                Quantity::VelocityDispersion,
                Scale::Auto,
                l_sigma,
                u_sigma,
            ),
            // Errors in dex, written or implied by the log scale.
            ("3.2e9 ± 0.15 dex", bh, Scale::Auto, 0.15, 0.15),
            ("3.2e9 +0.1/-0.2 dex", bh, Scale::Auto, 0.2, 0.1),
            ("3.2e9 +0.1 dex/-0.2 dex", bh, Scale::Auto, 0.2, 0.1),
            ("log 9.51 ± 0.1", bh, Scale::Auto, 0.1, 0.1),
            ("log 9.51 ± 0.1 dex", bh, Scale::Auto, 0.1, 0.1),
            ("log 9.51 +0.1/-0.2", bh, Scale::Auto, 0.2, 0.1),
            ("9.51 ± 0.1", bh, Scale::Log10, 0.1, 0.1),
            ("9.51 ± 0", bh, Scale::Log10, 0.0, 0.0),
        ];
        for &(text, quantity, scale, minus, plus) in cases {
            let entry = accept(text, quantity, scale);
            assert!(
                close(entry.err_minus_dex, minus, TOL, 0.0),
                "{text}: got {}, expected {minus}",
                entry.err_minus_dex
            );
            assert!(
                close(entry.err_plus_dex, plus, TOL, 0.0),
                "{text}: got {}, expected {plus}",
                entry.err_plus_dex
            );
            assert!(
                close(entry.err_dex, 0.5 * (minus + plus), TOL, 0.0),
                "{text}: got {}, expected {}",
                entry.err_dex,
                0.5 * (minus + plus)
            );
            assert!(entry.errors_given, "{text}");
        }
        // The symmetric error of the worked example, (u + l)/2 = 0.05290186308401945
        // (Python, docs/methods.md §2.5 option 1).
        let entry = accept("3.2e9 +0.5e9/-0.3e9", bh, Scale::Auto);
        assert!(
            close(entry.err_dex, 0.052_901_863_084_019_45, TOL, 0.0),
            "mean of u and l: got {}, expected 0.05290186308401945",
            entry.err_dex
        );
        assert_eq!(entry.display_log(), "9.51 +0.06/\u{2212}0.04");
    }

    #[test]
    fn upper_limits_are_read_on_both_scales_without_errors() {
        // log10(2e7) = 7.301029995663981 (Python math.log10).
        let log_2e7 = 7.301_029_995_663_981;
        for form in [
            "<2e7",
            "< 2e7",
            "<=2e7",
            "<= 2e7",
            "≤2e7",
            "⩽ 2e7",
            "< 2x10^7",
            "<2e7 Msun",
        ] {
            let entry = accept(form, Quantity::BlackHoleMass, Scale::Auto);
            assert!(entry.upper_limit, "{form}");
            assert!(
                close(entry.log_value, log_2e7, TOL, 0.0),
                "{form}: got {}, expected {log_2e7}",
                entry.log_value
            );
            assert_eq!(
                (entry.err_minus_dex, entry.err_plus_dex, entry.err_dex),
                (0.0, 0.0, 0.0)
            );
        }
        for (form, scale) in [
            ("< log 7.3", Scale::Auto),
            ("<log10 7.3", Scale::Auto),
            ("log < 7.3", Scale::Auto),
            ("log10 <= 7.3", Scale::Auto),
            ("<7.3", Scale::Log10),
        ] {
            let entry = accept(form, Quantity::BlackHoleMass, scale);
            assert!(entry.upper_limit, "{form}");
            assert_eq!(entry.scale_used, Scale::Log10);
            assert!(
                close(entry.log_value, 7.3, TOL, 0.0),
                "{form}: got {}, expected 7.3",
                entry.log_value
            );
            assert_eq!(entry.display_log(), "< 7.30");
        }
    }

    #[test]
    fn linear_entries_read_distances_and_resolutions() {
        use Quantity as Q;
        let cases: &[(&str, Quantity, f64, f64)] = &[
            ("16.5", Q::Distance, 16.5, 0.0),
            ("16.5 ± 0.8", Q::Distance, 16.5, 0.8),
            ("16.5 +/- 0.8 Mpc", Q::Distance, 16.5, 0.8),
            ("16.5 Mpc ± 0.8", Q::Distance, 16.5, 0.8),
            ("16.5 +-0.8", Q::Distance, 16.5, 0.8),
            ("16.5 ± 5%", Q::Distance, 16.5, 0.825),
            ("1.65e1", Q::Distance, 16.5, 0.0),
            ("0.008", Q::Distance, 0.008, 0.0),
            ("0.1", Q::Resolution, 0.1, 0.0),
            ("0.05\"", Q::Resolution, 0.05, 0.0),
            ("0.05″", Q::Resolution, 0.05, 0.0),
            ("0.1 arcsec ± 0.01", Q::Resolution, 0.1, 0.01),
            ("210 ± 10 km/s", Q::VelocityDispersion, 210.0, 10.0),
        ];
        for &(text, quantity, value, err) in cases {
            let entry = parse_linear(text, quantity)
                .unwrap_or_else(|e| panic!("`{text}` was refused: {e}"));
            assert!(
                close(entry.value, value, TOL, 0.0),
                "{text}: got {}, expected {value}",
                entry.value
            );
            assert!(
                close(entry.err, err, TOL, 0.0),
                "{text}: got {}, expected {err}",
                entry.err
            );
            assert_eq!(
                entry.errors_given,
                text.contains('±') || text.contains("+"),
                "{text}"
            );
            assert_eq!(entry.text, text);
        }
        use EntryError as E;
        type Check = fn(&EntryError) -> bool;
        let refused: &[(&str, Quantity, Check)] = &[
            ("", Q::Distance, |e| matches!(e, E::Empty { .. })),
            ("<16", Q::Distance, |e| {
                matches!(e, E::LimitNotAccepted { .. })
            }),
            (">16", Q::Distance, |e| matches!(e, E::LowerLimit { .. })),
            ("log 1.2", Q::Distance, |e| {
                matches!(e, E::LogNotAccepted { .. })
            }),
            ("16.5 ± 0.1 dex", Q::Distance, |e| {
                matches!(e, E::LogNotAccepted { .. })
            }),
            ("16.5 +1/-0.5", Q::Distance, |e| {
                matches!(e, E::AsymmetricNotAccepted { .. })
            }),
            ("16.5 ± 20", Q::Distance, |e| {
                matches!(e, E::ErrorExceedsValue { .. })
            }),
            ("16.5 ± 100%", Q::Distance, |e| {
                matches!(e, E::ErrorExceedsValue { .. })
            }),
            ("16.5 ± 1e400", Q::Distance, |e| {
                matches!(e, E::NonFinite { .. })
            }),
            ("2500", Q::Distance, |e| matches!(e, E::OutOfRange { .. })),
            ("20", Q::Resolution, |e| matches!(e, E::OutOfRange { .. })),
            ("16,5", Q::Distance, |e| {
                matches!(e, E::CommaInNumber { .. })
            }),
            ("-3", Q::Distance, |e| matches!(e, E::NonPositive { .. })),
            ("1e400", Q::Distance, |e| matches!(e, E::NonFinite { .. })),
            ("16.5 kpc", Q::Distance, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
            ("0.1 mas", Q::Resolution, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
        ];
        for &(text, quantity, check) in refused {
            let error = match parse_linear(text, quantity) {
                Ok(entry) => panic!("`{text}` was accepted as {entry:?}"),
                Err(error) => error,
            };
            assert!(
                check(&error),
                "`{text}` refused for the wrong reason: {error:?}"
            );
            assert_one_sentence(&error.to_string());
        }
    }

    /// A small linear congruential generator (Knuth's MMIX constants), so the property tests
    /// need no extra crate and always see the same inputs.
    struct Lcg(u64);

    impl Lcg {
        fn next(&mut self) -> u64 {
            self.0 = self
                .0
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            self.0 >> 33
        }

        fn below(&mut self, n: usize) -> usize {
            (self.next() % n as u64) as usize
        }
    }

    /// The invariants every accepted entry must satisfy.
    #[track_caller]
    fn assert_entry_is_sound(entry: &Entry, text: &str) {
        let what = format!("`{text}` ({}) gave {entry:?}", entry.quantity);
        assert!(entry.log_value.is_finite(), "{what}");
        let (min, max) = entry.quantity.log_range();
        assert!(
            entry.log_value >= min - RANGE_EPS_DEX && entry.log_value <= max + RANGE_EPS_DEX,
            "{what}"
        );
        for err in [entry.err_minus_dex, entry.err_plus_dex, entry.err_dex] {
            assert!(
                err.is_finite() && (0.0..=MAX_ERR_DEX).contains(&err),
                "{what}"
            );
        }
        assert!(
            close(
                entry.err_dex,
                0.5 * (entry.err_minus_dex + entry.err_plus_dex),
                TOL,
                0.0
            ),
            "{what}"
        );
        if entry.upper_limit {
            assert_eq!(
                (entry.err_minus_dex, entry.err_plus_dex),
                (0.0, 0.0),
                "{what}"
            );
        }
        assert_ne!(entry.scale_used, Scale::Auto, "{what}");
        assert_eq!(entry.text, text.trim(), "{what}");
    }

    #[test]
    fn the_parsers_never_panic_and_accepted_values_are_sound() {
        // Pieces of real entries, so that many random strings are accepted and the deep paths
        // are reached, mixed with single characters of every kind.
        const PIECES: &[&str] = &[
            "3.2", "9.51", "0.4", "210", "16.5", "1e7", "e9", "E-3", "10", "^", "**", "x", "×",
            "*", "·", "10^", "⁹", "⁻", "±", "+/-", "+-", "+", "-", "−", "–", "/", ",", "(", ")",
            "{", "}", "_", "^{", "_{", "<", "<=", "≤", ">", "≥", "=", "%", "dex", "log", "log10",
            "msun", "km/s", "mpc", "\"", " ", " ", "  ", ".", "0", "00", "9", "inf", "nan", "∞",
            "1,2", "'", "é", "☉", "\u{a0}", "\t", "e", "E", "1e400", "1e-400",
        ];
        const PREFIXES: &[&str] = &["", "", "<", "< ", "log ", "log10 ", "<log ", "log <", "≤"];
        // Values that fit each quantity (in `Quantity::ALL` order), some only on one scale.
        const VALUES: [&[&str]; 6] = [
            &["3.2e9", "9.51", "2e7", "3.2x10^9", "10^8.5", "1e3"],
            &["210", "2.3", "600", "20", "1.5e2"],
            &["2e11", "11.3", "10^10.5", "6"],
            &["5e10", "10.7", "1e6", "13.5"],
            &["16.5", "0.005", "2000", "1.2"],
            &["0.1", "1.2e-4", "10", "0.05"],
        ];
        const ERRORS: &[&str] = &[
            "",
            "",
            " ± 0.4e9",
            " +/- 10",
            " +-0.1",
            " +0.5e9/-0.3e9",
            " (+0.5, -0.3)",
            " ± 0.15 dex",
            " +0.1/-0.2 dex",
            " ± 10%",
            " +10%/-5%",
            "^{+0.2}_{-0.1}",
            " ± 0.8",
            " -0.3 +0.5",
            " ± 1e7",
        ];

        let alphabet: Vec<char> =
            "0123456789.eE+-−±/<>=≤≥xX×*^(){}_,% ldgxmsunkpcarn\"'∞⁹⁻é☉\u{a0}\u{0}~#;"
                .chars()
                .collect();
        let mut rng = Lcg(0x6d61_7373_6c69_6e65);
        let mut accepted = 0usize;
        let mut accepted_linear = 0usize;
        let scales = [Scale::Auto, Scale::Linear, Scale::Log10];
        for round in 0..40_000 {
            let q = rng.below(Quantity::ALL.len());
            let quantity = Quantity::ALL[q];
            let mut text = String::new();
            match round % 3 {
                0 => {
                    for _ in 0..rng.below(12) {
                        text.push(alphabet[rng.below(alphabet.len())]);
                    }
                }
                1 => {
                    for _ in 0..rng.below(9) {
                        text.push_str(PIECES[rng.below(PIECES.len())]);
                    }
                }
                _ => {
                    // A well-formed entry, then up to two random edits.
                    for part in [PREFIXES, VALUES[q], ERRORS] {
                        text.push_str(part[rng.below(part.len())]);
                    }
                    if rng.below(3) == 0 {
                        let units = quantity.unit_words();
                        text.push(' ');
                        text.push_str(units[rng.below(units.len())]);
                    }
                    for _ in 0..rng.below(3) {
                        let chars: Vec<char> = text.chars().collect();
                        let at = rng.below(chars.len() + 1);
                        let mut edited: String = chars[..at].iter().collect();
                        if rng.below(2) == 0 {
                            edited.push(alphabet[rng.below(alphabet.len())]);
                            edited.extend(&chars[at..]);
                        } else {
                            edited.extend(chars.iter().skip(at + 1));
                        }
                        text = edited;
                    }
                }
            }
            let scale = scales[rng.below(scales.len())];
            match parse_entry(&text, quantity, scale) {
                Ok(entry) => {
                    accepted += 1;
                    assert_entry_is_sound(&entry, &text);
                }
                Err(error) => {
                    let message = error.to_string();
                    assert!(message.ends_with('.'), "`{text}`: {message}");
                }
            }
            match parse_linear(&text, quantity) {
                Ok(entry) => {
                    accepted_linear += 1;
                    let (min, max) = quantity.log_range();
                    let log_value = entry.value.log10();
                    assert!(
                        entry.value.is_finite()
                            && log_value >= min - RANGE_EPS_DEX
                            && log_value <= max + RANGE_EPS_DEX,
                        "`{text}` gave {entry:?}"
                    );
                    assert!(entry.err.is_finite() && entry.err >= 0.0 && entry.err < entry.value);
                }
                Err(error) => assert!(error.to_string().ends_with('.')),
            }
        }
        // The test means something only if many inputs got through to the end.
        assert!(
            accepted > 1000,
            "only {accepted} random entries were accepted"
        );
        assert!(
            accepted_linear > 400,
            "only {accepted_linear} linear entries were accepted"
        );
    }

    #[test]
    fn every_valid_value_on_a_grid_is_accepted_and_sound() {
        // Values across each range, typed in several notations, with several error forms.
        for quantity in Quantity::ALL {
            let (min, max) = quantity.log_range();
            for step in 0..=20 {
                let log_value = min + (max - min) * f64::from(step) / 20.0;
                let linear = 10f64.powf(log_value);
                let texts = [
                    format!("{linear:e}"),
                    format!("10^{log_value}"),
                    format!("{linear:e} ± 5%"),
                    format!("{linear:e} +0.1/-0.2 dex"),
                    format!("{linear:e} +{:e}/-{:e}", linear * 0.3, linear * 0.2),
                ];
                for text in &texts {
                    let entry = accept(text, quantity, Scale::Auto);
                    assert_entry_is_sound(&entry, text);
                    assert!(close(entry.log_value, log_value, 1e-9, 0.0), "{text}");
                }
                let text = format!("log {log_value}");
                let entry = accept(&text, quantity, Scale::Auto);
                assert_entry_is_sound(&entry, &text);
            }
        }
    }
}
