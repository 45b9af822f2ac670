//! Why a typed value or a name was refused: every message is one sentence that names the
//! quantity and says what to type instead.

use super::quantity::Quantity;
use super::ranges::{MAX_ENTRY_CHARS, MAX_ERR_DEX};

/// Why a typed value was refused. Every message is one sentence that names the quantity and
/// says what to type instead.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum EntryError {
    /// Nothing was typed.
    #[error("Enter a value for the {quantity}, such as {}.", quantity.examples())]
    Empty {
        /// What the value measures.
        quantity: Quantity,
    },
    /// The entry is longer than [`MAX_ENTRY_CHARS`].
    #[error(
        "The {quantity} entry is {chars} characters long, but at most {max} are accepted.",
        max = MAX_ENTRY_CHARS
    )]
    TooLong {
        /// What the value measures.
        quantity: Quantity,
        /// Length of the trimmed entry, in characters.
        chars: usize,
    },
    /// Part of the entry could not be read.
    #[error(
        "The {quantity} entry could not be read from “{fragment}” onwards; type a number in {} such as {}.",
        quantity.unit_label(),
        quantity.examples()
    )]
    NotUnderstood {
        /// What the value measures.
        quantity: Quantity,
        /// The text from the first token that could not be read to the end.
        fragment: String,
    },
    /// The entry stops where something more was expected (`3.2e9 ±`, `log`).
    #[error(
        "The {quantity} entry “{text}” stops too early; type a number in {} such as {}.",
        quantity.unit_label(),
        quantity.examples()
    )]
    Incomplete {
        /// What the value measures.
        quantity: Quantity,
        /// The whole entry.
        text: String,
    },
    /// A number contains a comma, which is a thousands separator in some countries and a
    /// decimal mark in others.
    #[error(
        "The {quantity} entry “{fragment}” contains a comma, which separates thousands in some countries and decimals in others, so type {suggestion} instead, with no separators and a point for decimals."
    )]
    CommaInNumber {
        /// What the value measures.
        quantity: Quantity,
        /// The number with its comma, as typed.
        fragment: String,
        /// The readings of the number without a comma, quoted (such as "`1200` or `1.200`").
        suggestion: String,
    },
    /// A number is infinite, not a number, or too large to be represented.
    #[error("The {quantity} entry “{fragment}” is not a finite number (or is too large to store).")]
    NonFinite {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// A linear value is zero or negative (or so small it rounds to zero).
    #[error(
        "The {quantity} must be greater than zero, but “{fragment}” was entered{}.",
        quantity.non_positive_advice()
    )]
    NonPositive {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// With [`Scale::Auto`](super::Scale::Auto), a bare number is implausible as a linear value but plausible as a
    /// log10, so it is refused rather than guessed.
    #[error(
        "The {quantity} “{fragment}” reads as {fragment} {}, which is implausible, so if you meant log10 = {fragment}, choose the log scale or type “log {fragment}”.",
        quantity.unit_label()
    )]
    AmbiguousScale {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// With [`Scale::Linear`](super::Scale::Linear) (the default of files and the API), a
    /// bare number is implausible as a linear value but plausible as a log10.
    #[error(
        "The {quantity} “{fragment}” reads as {fragment} {} on the linear scale, which is implausible, so if you meant log10 = {fragment}, set the scale to “log10” (or type “log {fragment}” with the scale “auto”).",
        quantity.unit_label()
    )]
    LinearLooksLog {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// The log scale was chosen (or `log` typed) but the number is written in a linear
    /// notation (`3.2e9`, `3.2x10^9`, `10^9.51`).
    #[error(
        "The {quantity} is on the log scale, but “{fragment}” is written as a linear value, so either enter the linear value alone with the linear or automatic scale, or enter its log10 as a plain number such as “9.51”."
    )]
    LogScaleLinearNotation {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// The linear scale was chosen but the text says `log`.
    #[error(
        "The linear scale was chosen for the {quantity}, but the entry says “log”, so choose the log scale or remove the word “log”."
    )]
    LinearScaleLogText {
        /// What the value measures.
        quantity: Quantity,
    },
    /// The value lies outside the accepted range of the quantity.
    #[error("The {quantity} {shown} is outside the accepted range {}.", quantity.range_text())]
    OutOfRange {
        /// What the value measures.
        quantity: Quantity,
        /// The value as understood, with its unit (such as "10^12.30 M☉" or "2500 Mpc").
        shown: String,
    },
    /// A linear lower error reaches zero or below: the value is not a detection.
    #[error(
        "The lower error reaches zero or below, so the {quantity} is not a detection; enter it as an upper limit instead, such as “<{suggestion}” (the top of the error bar)."
    )]
    LowerErrorReachesZero {
        /// What the value measures.
        quantity: Quantity,
        /// The top of the error bar, M + δ₊, written compactly (such as "3e7").
        suggestion: String,
    },
    /// An upper limit was typed with error bars.
    #[error(
        "An upper limit on the {quantity} takes no error bars, so enter either the limit alone (such as “<2e7”) or a measured value with its errors."
    )]
    LimitWithErrors {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A lower limit (`>`, `>=`, `≥`) was typed.
    #[error(
        "Lower limits (“>”) on the {quantity} are not supported; enter a measured value, or an upper limit with “<”."
    )]
    LowerLimit {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A limit was typed for a quantity that cannot be a limit (distance, resolution).
    #[error("The {quantity} cannot be a limit; enter a value such as {}.", quantity.examples())]
    LimitNotAccepted {
        /// What the value measures.
        quantity: Quantity,
    },
    /// An error size carries a sign (`± -0.1`).
    #[error(
        "Errors on the {quantity} are sizes and take no sign of their own; write them as {}.",
        quantity.error_example()
    )]
    SignedError {
        /// What the value measures.
        quantity: Quantity,
    },
    /// An error, converted to dex, exceeds [`MAX_ERR_DEX`].
    #[error(
        "An error of {shown} dex on the {quantity} is implausibly large (the limit is {max} dex), so check the error, or enter an upper limit.",
        max = MAX_ERR_DEX
    )]
    ErrorTooLarge {
        /// What the value measures.
        quantity: Quantity,
        /// The error in dex, formatted.
        shown: String,
    },
    /// A percentage error was given for a log10 value.
    #[error(
        "A percentage error cannot apply to a log10 value of the {quantity}; give the error in dex, such as “log 9.51 ± 0.1”."
    )]
    PercentOnLogScale {
        /// What the value measures.
        quantity: Quantity,
    },
    /// The two errors mix `dex` and `%`.
    #[error("The errors on the {quantity} mix “dex” and “%”; give both in the same unit.")]
    MixedErrorUnits {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A word after the number is not the quantity's unit.
    #[error(
        "The word “{found}” is not the unit of the {quantity}; enter the value in {} (the unit may be left out).",
        quantity.unit_label()
    )]
    WrongUnit {
        /// What the value measures.
        quantity: Quantity,
        /// The word as typed.
        found: String,
    },
    /// A linear-only entry ([`parse_linear`](super::parse_linear)) was given on a log scale or
    /// with dex errors.
    #[error(
        "The {quantity} is entered as a linear value in {unit} with any error in {unit} or as a percentage, not on a log scale, such as {}.",
        quantity.error_example(),
        unit = quantity.unit_label()
    )]
    LogNotAccepted {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A linear-only entry ([`parse_linear`](super::parse_linear)) was given with asymmetric
    /// errors.
    #[error(
        "The {quantity} takes one symmetric error, such as {}, so enter the larger of the two.",
        quantity.error_example()
    )]
    AsymmetricNotAccepted {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A linear-only entry ([`parse_linear`](super::parse_linear)) has an error as large as
    /// the value.
    #[error("The error on the {quantity} is as large as the value itself; check the entry.")]
    ErrorExceedsValue {
        /// What the value measures.
        quantity: Quantity,
    },
}

#[cfg(test)]
pub(super) mod tests {
    use super::super::{Scale, parse_entry, parse_linear};
    use super::*;

    /// A refusal message is one sentence: a capital letter first, one full stop at the end,
    /// no sentence break or line break inside.
    #[track_caller]
    pub(in crate::units) fn assert_one_sentence(message: &str) {
        assert!(
            message.chars().next().is_some_and(char::is_uppercase),
            "message does not start with a capital letter: {message}"
        );
        assert!(
            message.ends_with('.'),
            "message does not end with a full stop: {message}"
        );
        assert!(
            !message.contains(". ") && !message.contains('\n'),
            "message has more than one sentence: {message}"
        );
    }

    #[test]
    fn refused_entries_get_the_right_reason_in_one_sentence() {
        use EntryError as E;
        let bh = Quantity::BlackHoleMass;
        let auto = Scale::Auto;
        type Check = fn(&EntryError) -> bool;
        let cases: &[(&str, Quantity, Scale, Check)] = &[
            ("", bh, auto, |e| matches!(e, E::Empty { .. })),
            ("   ", bh, auto, |e| matches!(e, E::Empty { .. })),
            (
                "1,200",
                Quantity::VelocityDispersion,
                auto,
                |e| matches!(e, E::CommaInNumber { suggestion, .. } if suggestion == "“1200” or “1.200”"),
            ),
            (
                "3,2e9",
                bh,
                auto,
                |e| matches!(e, E::CommaInNumber { suggestion, .. } if suggestion == "“3.2e9”"),
            ),
            (
                "1,200,000,000",
                bh,
                auto,
                |e| matches!(e, E::CommaInNumber { suggestion, .. } if suggestion == "“1200000000”"),
            ),
            ("inf", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("NaN", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("∞", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("-inf", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("1e400", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("log 1e400", bh, auto, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("10^400", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("-5", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("−3e9", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("0", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("0x10^5", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("1e-400", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("9.51", bh, auto, |e| matches!(e, E::AmbiguousScale { .. })),
            ("9.51 ± 0.1", bh, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("<7.3", bh, auto, |e| matches!(e, E::AmbiguousScale { .. })),
            ("11.3", Quantity::BulgeMass, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("10.7", Quantity::BulgeLuminosity, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("2.32", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("9.51", bh, Scale::Linear, |e| {
                matches!(e, E::LinearLooksLog { .. })
            }),
            ("500", bh, Scale::Linear, |e| {
                matches!(e, E::OutOfRange { .. })
            }),
            (
                "3e8 +1e8/-3e8",
                bh,
                auto,
                |e| matches!(e, E::LowerErrorReachesZero { suggestion, .. } if suggestion == "4e8"),
            ),
            ("3e8 ± 3e8", bh, auto, |e| {
                matches!(e, E::LowerErrorReachesZero { .. })
            }),
            ("9.51e0", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("log 3.2e9", bh, auto, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("3.2e9", bh, Scale::Log10, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("10^9.51", bh, Scale::Log10, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("log 9.51", bh, Scale::Linear, |e| {
                matches!(e, E::LinearScaleLogText { .. })
            }),
            ("2e12", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("500", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("log 12", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("log -1", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("700", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::OutOfRange { .. })
            }),
            ("15", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::OutOfRange { .. })
            }),
            (
                "1e7 +2e7/-1e7",
                bh,
                auto,
                |e| matches!(e, E::LowerErrorReachesZero { suggestion, .. } if suggestion == "3e7"),
            ),
            ("1e7 ± 100%", bh, auto, |e| {
                matches!(e, E::LowerErrorReachesZero { .. })
            }),
            ("1e7 ± 2e7", bh, auto, |e| {
                matches!(e, E::LowerErrorReachesZero { .. })
            }),
            ("<2e7 ± 1e6", bh, auto, |e| {
                matches!(e, E::LimitWithErrors { .. })
            }),
            ("< 2e7 +1e6/-1e6", bh, auto, |e| {
                matches!(e, E::LimitWithErrors { .. })
            }),
            ("<log 7.3 ± 0.1", bh, auto, |e| {
                matches!(e, E::LimitWithErrors { .. })
            }),
            (">2e7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            (">=2e7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            ("≥2e7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            ("log > 7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            ("<16", Quantity::Distance, auto, |e| {
                matches!(e, E::LimitNotAccepted { .. })
            }),
            ("3.2e9 ± -0.4e9", bh, auto, |e| {
                matches!(e, E::SignedError { .. })
            }),
            ("3.2e9 +/- -0.4e9", bh, auto, |e| {
                matches!(e, E::SignedError { .. })
            }),
            ("3.2e9 ± +0.4e9", bh, auto, |e| {
                matches!(e, E::SignedError { .. })
            }),
            ("log 9.51 ± 0.4e9", bh, auto, |e| {
                matches!(e, E::ErrorTooLarge { .. })
            }),
            ("1e8 ± 3 dex", bh, auto, |e| {
                matches!(e, E::ErrorTooLarge { .. })
            }),
            ("1e8 +1e11/-1e7", bh, auto, |e| {
                matches!(e, E::ErrorTooLarge { .. })
            }),
            ("1e8 ± 1e400", bh, auto, |e| {
                matches!(e, E::NonFinite { .. })
            }),
            ("log 9.51 ± 10%", bh, auto, |e| {
                matches!(e, E::PercentOnLogScale { .. })
            }),
            ("1e8 +0.1 dex/-10%", bh, auto, |e| {
                matches!(e, E::MixedErrorUnits { .. })
            }),
            (
                "3.2e9 kpc",
                bh,
                auto,
                |e| matches!(e, E::WrongUnit { found, .. } if found == "kpc"),
            ),
            ("210 Msun", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
            ("5e10 Msun", Quantity::BulgeLuminosity, auto, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
            ("3.2e9 ±", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("log", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("<", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("3.2x10^", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("upper limit 2e7", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9 3", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3 200 000 000", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2 x 5", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9x10^9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("1.2.3e9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("9.51 dex", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2 e9", bh, auto, |e| matches!(e, E::NotUnderstood { .. })),
            ("1e7–3e7", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("1'200", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("log log 9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("<<2e7", bh, auto, |e| matches!(e, E::NotUnderstood { .. })),
            ("3.2e9 ^{+0.5e9}^{+0.3e9}", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9 +0.5e9 +0.3e9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9 ± 0.4e9 ± 0.1e9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
        ];
        for &(text, quantity, scale, check) in cases {
            let error = match parse_entry(text, quantity, scale) {
                Ok(entry) => panic!("`{text}` ({quantity}) was accepted as {entry:?}"),
                Err(error) => error,
            };
            assert!(
                check(&error),
                "`{text}` ({quantity}) refused for the wrong reason: {error:?}"
            );
            assert_one_sentence(&error.to_string());
        }
        let long = "1".repeat(MAX_ENTRY_CHARS + 1);
        let error = parse_entry(&long, bh, auto).unwrap_err();
        assert!(matches!(error, E::TooLong { chars, .. } if chars == MAX_ENTRY_CHARS + 1));
        assert_one_sentence(&error.to_string());
    }

    #[test]
    fn messages_name_the_quantity_the_value_and_the_range() {
        let message = parse_entry("2e12", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "The black-hole mass 10^12.30 M☉ is outside the accepted range 10^3 to 10^11.5 M☉."
        );
        let message = parse_entry("700", Quantity::VelocityDispersion, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "The velocity dispersion 700 km/s is outside the accepted range 20 to 600 km/s."
        );
        let message = parse_linear("2500", Quantity::Distance)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "The distance 2500 Mpc is outside the accepted range 0.005 to 2000 Mpc."
        );
        let message = parse_entry("9.51", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(message.contains("log10 = 9.51"), "{message}");
        assert!(message.contains("“log 9.51”"), "{message}");
        assert!(message.contains("9.51 M☉"), "{message}");
        let message = parse_entry("9.51", Quantity::BlackHoleMass, Scale::Linear)
            .unwrap_err()
            .to_string();
        assert!(message.contains("log10 = 9.51"), "{message}");
        assert!(message.contains("“log10”"), "{message}");
        let message = parse_entry("3e8 +1e8/-3e8", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(message.contains("“<4e8”"), "{message}");
        let message = parse_entry("1e7 +2e7/-1e7", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(message.contains("upper limit"), "{message}");
        assert!(message.contains("“<3e7”"), "{message}");
        let message = parse_entry("1,200", Quantity::VelocityDispersion, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("“1,200”") && message.contains("“1200”"),
            "{message}"
        );
        // A decimal comma before an exponent is no thousands separator: the point, never the
        // value ten times too large.
        let message = parse_entry("2,1e8", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(message.contains("“2.1e8”"), "{message}");
        assert!(!message.contains("21e8"), "{message}");
        let message = parse_entry("0,5", Quantity::Resolution, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("“0.5”") && !message.contains("“05”"),
            "{message}"
        );
        // Messages are sentences for people: no Markdown code marks.
        for text in [
            "2,1e8",
            "9.51",
            "-5",
            "1e7 +2e7/-1e7",
            "log 3e8",
            "abc",
            "8 dex %",
        ] {
            if let Err(e) = parse_entry(text, Quantity::BlackHoleMass, Scale::Auto) {
                assert!(!e.to_string().contains('`'), "{text}: {e}");
            }
        }
        let message = parse_entry("-5", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("“-5”") && message.contains("“<2e7”"),
            "{message}"
        );
    }
}
