//! Numbers written for people: values with their errors for pages, and compact numbers for
//! messages.

/// A log10 value with its errors for pages, by the rule of [`with_errors_column`] for a value
/// alone: "8.32 +0.10/−0.12", "8.32 ± 0.11" when both round alike, "8.321 ± 0.045" (two
/// significant digits of the error), "8.32" without errors, "< 7.30" for an upper limit (errors
/// ignored). Errors are taken as magnitudes and a non-finite error is treated as absent; a
/// non-finite value is shown as "—". The minus sign is U+2212.
#[must_use]
pub fn format_log_with_errors(
    log_value: f64,
    err_minus_dex: f64,
    err_plus_dex: f64,
    upper_limit: bool,
) -> String {
    with_errors(
        Uncertain::asymmetric(log_value, err_minus_dex, err_plus_dex, upper_limit),
        2,
    )
}

/// A value with its errors, as a page shows it: linear (σ in km/s, a distance in Mpc) or a log10
/// value with errors in dex. Errors are magnitudes; an error that is zero or not a number is
/// absent.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Uncertain {
    /// The value (a log10 value or a linear one).
    pub value: f64,
    /// The error below the value, same unit (a magnitude).
    pub err_minus: f64,
    /// The error above the value, same unit (a magnitude).
    pub err_plus: f64,
    /// `value` is an upper limit: shown as "< value", errors ignored.
    pub upper_limit: bool,
}

impl Uncertain {
    /// value ± err.
    #[must_use]
    pub fn symmetric(value: f64, err: f64) -> Self {
        Uncertain {
            value,
            err_minus: err,
            err_plus: err,
            upper_limit: false,
        }
    }

    /// value +err_plus/−err_minus, or an upper limit.
    #[must_use]
    pub fn asymmetric(value: f64, err_minus: f64, err_plus: f64, upper_limit: bool) -> Self {
        Uncertain {
            value,
            err_minus,
            err_plus,
            upper_limit,
        }
    }

    /// The power of ten of the last digit shown: the error that sets it (the smaller of two)
    /// keeps two significant digits, `floor(log10 err) − 1`, one place higher when rounding
    /// carries into a third digit (9.96 → 10, not 10.0). `None` without an error.
    fn place(&self) -> Option<i32> {
        if self.upper_limit {
            return None;
        }
        let err = [self.err_minus, self.err_plus]
            .into_iter()
            .map(f64::abs)
            .filter(|e| e.is_finite() && *e > 0.0)
            .reduce(f64::min)?;
        #[expect(
            clippy::cast_possible_truncation,
            reason = "the floor of log10 of a finite positive f64 lies within ±330"
        )]
        let mut place = err.log10().floor() as i32 - 1;
        if (err / 10f64.powi(place)).round() >= 100.0 {
            place += 1;
        }
        Some(place)
    }
}

/// How many decimals a place (a power of ten) shows: 10^−2 → 2, 10^0 or above → 0.
fn decimals_of(place: i32) -> usize {
    usize::try_from(-place).unwrap_or(0)
}

/// Every value of one table column with its errors, by one rule. Each row's own place is where
/// its error shows two significant digits (common practice in astronomy tables), the value
/// rounded to the same place. The column then takes the place of its coarsest row, and a finer
/// row moves up by at most one place (its error then shows one significant digit): "185 ± 9"
/// stands above "247 ± 14", never "185.0 ± 9.0" above "247 ± 14", and no error shows digits its
/// measurement lacks ("247.0 ± 14.0"). Every error thus shows one or two significant digits; a
/// column of one keeps two. A place of tens or beyond rounds the value there ("123500 ± 1200").
/// A value without an error, and an upper limit ("< 7.30"), take the column's decimals, or
/// `bare_decimals` when no row has an error; a value that is not a number is "—". Asymmetric
/// errors show as "8.32 +0.10/−0.12" (the smaller sets the place), "± 0.11" when both round
/// alike. The minus is U+2212.
#[must_use]
pub fn with_errors_column(items: &[Uncertain], bare_decimals: usize) -> Vec<String> {
    rounded_column(items, bare_decimals)
        .into_iter()
        .map(|r| match r {
            Rounded::Missing => "—".to_owned(),
            Rounded::Bare(value) => value,
            Rounded::Limit(value) => format!("< {value}"),
            Rounded::WithErrors { value, minus, plus } => join_errors(value, minus, plus),
        })
        .collect()
}

/// One value of a column rounded by the rule of [`with_errors_column`], in parts, for formats
/// that write the value and its errors their own way (a LaTeX table's `^{+a}_{-b}`). Numbers
/// use the minus sign U+2212.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Rounded {
    /// The value is not a number.
    Missing,
    /// A value without an error.
    Bare(String),
    /// An upper limit: its value.
    Limit(String),
    /// A value with its lower and upper errors (magnitudes), rounded to the same place.
    WithErrors {
        /// The value.
        value: String,
        /// The error below it.
        minus: String,
        /// The error above it.
        plus: String,
    },
}

impl Rounded {
    /// Whether the two errors read alike once rounded (written "± e" rather than "+a/−b").
    #[must_use]
    pub fn symmetric(&self) -> bool {
        matches!(self, Rounded::WithErrors { minus, plus, .. } if minus == plus)
    }
}

/// Every value of one table column rounded by the rule of [`with_errors_column`], in parts.
#[must_use]
pub fn rounded_column(items: &[Uncertain], bare_decimals: usize) -> Vec<Rounded> {
    let places: Vec<Option<i32>> = items.iter().map(Uncertain::place).collect();
    let coarsest = places.iter().flatten().copied().max();
    items
        .iter()
        .zip(&places)
        .map(|(item, place)| {
            if !item.value.is_finite() {
                return Rounded::Missing;
            }
            let Some(own) = *place else {
                let value = fixed_minus(item.value, coarsest.map_or(bare_decimals, decimals_of));
                return if item.upper_limit {
                    Rounded::Limit(value)
                } else {
                    Rounded::Bare(value)
                };
            };
            let place = coarsest.map_or(own, |c| c.min(own + 1));
            // An absent error beside a present one shows as zero.
            let err = |e: f64| if e.is_finite() { e.abs() } else { 0.0 };
            let (minus, plus) = (err(item.err_minus), err(item.err_plus));
            let show = |x: f64| {
                if place > 0 {
                    // Tens or beyond: round to that place, write whole numbers.
                    let step = 10f64.powi(place);
                    fixed_minus((x / step).round() * step, 0)
                } else {
                    fixed_minus(x, decimals_of(place))
                }
            };
            Rounded::WithErrors {
                value: show(item.value),
                minus: show(minus),
                plus: show(plus),
            }
        })
        .collect()
}

/// One value with its errors by the rule of [`with_errors_column`], alone (a column of one).
#[must_use]
pub fn with_errors(item: Uncertain, bare_decimals: usize) -> String {
    with_errors_column(&[item], bare_decimals)
        .pop()
        .unwrap_or_default()
}

/// "v ± e" when the two rounded errors agree, "v +plus/−minus" when not.
fn join_errors(value: String, minus: String, plus: String) -> String {
    if minus == plus {
        format!("{value} ± {plus}")
    } else {
        format!("{value} +{plus}/\u{2212}{minus}")
    }
}

/// A number with a fixed count of decimals and a true minus sign (U+2212), never a negative zero.
fn fixed_minus(value: f64, decimals: usize) -> String {
    let text = format!("{value:.decimals$}");
    match text.strip_prefix('-') {
        Some(rest) if rest.chars().any(|c| c.is_ascii_digit() && c != '0') => {
            format!("\u{2212}{rest}")
        }
        Some(rest) => rest.to_string(),
        None => text,
    }
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
        // Common practice: two significant digits in the error, the value to the same place
        // (a value alone; a column is in `web::display`'s tests).
        let cases: &[(f64, f64, &str)] = &[
            (8.3214, 0.1234, "8.32 ± 0.12"),
            (8.3214, 0.0996, "8.32 ± 0.10"),
            (0.5, 0.99, "0.50 ± 0.99"),
            (0.5, 0.996, "0.5 ± 1.0"),
            (1.234_56, 0.001_23, "1.2346 ± 0.0012"),
            (123_456.0, 1234.0, "123500 ± 1200"),
            (1234.4, 96.0, "1234 ± 96"),
            (5.0, 15.0, "5 ± 15"),
            (-2.345, 0.05, "\u{2212}2.345 ± 0.050"),
            (2.0, 0.0, "2.0"),
            (2.5, f64::NAN, "2.5"),
            (f64::INFINITY, 0.1, "—"),
        ];
        for &(value, err, expected) in cases {
            assert_eq!(
                with_errors(Uncertain::symmetric(value, err), 1),
                expected,
                "{value} ± {err}"
            );
        }
    }
}
