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
        // With the linear scale (the default of files and the API) the same slip gets the
        // same hint, worded for the scale column.
        if value.form == Form::Plain
            && quantity.is_log_canonical()
            && !in_log_range(quantity, log_value)
            && in_log_range(quantity, value.linear)
        {
            let fragment = value.text(text).to_owned();
            return Err(if scale == Scale::Auto {
                EntryError::AmbiguousScale { quantity, fragment }
            } else {
                EntryError::LinearLooksLog { quantity, fragment }
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
/// Relative rounding of a value recovered from its log10 (10^log10(M) differs from M by a few
/// units in the last place): a lower error within this fraction of the value reaches zero.
const LOWER_ERROR_ROUNDING: f64 = 1e-12;

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
        // Within rounding of the value: 3e8 −3e8 reaches zero although 10^log10(3e8) comes
        // back a few units in the last place above 3e8.
        if delta_minus >= m * (1.0 - LOWER_ERROR_ROUNDING) {
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
pub(super) mod tests;
