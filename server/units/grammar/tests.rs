//! Tests of reading typed values: every notation, the conversion of errors to dex, limits,
//! linear entries, and random and grid inputs that must never panic and always give sound
//! values.

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
fn errors_convert_to_dex_as_methods_section_2_5_option_1() {
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
    assert_eq!(entry.display_log(), "9.505 +0.063/\u{2212}0.043");
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
        let entry =
            parse_linear(text, quantity).unwrap_or_else(|e| panic!("`{text}` was refused: {e}"));
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
        "3.2", "9.51", "0.4", "210", "16.5", "1e7", "e9", "E-3", "10", "^", "**", "x", "×", "*",
        "·", "10^", "⁹", "⁻", "±", "+/-", "+-", "+", "-", "−", "–", "/", ",", "(", ")", "{", "}",
        "_", "^{", "_{", "<", "<=", "≤", ">", "≥", "=", "%", "dex", "log", "log10", "msun", "km/s",
        "mpc", "\"", " ", " ", "  ", ".", "0", "00", "9", "inf", "nan", "∞", "1,2", "'", "é", "☉",
        "\u{a0}", "\t", "e", "E", "1e400", "1e-400",
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
