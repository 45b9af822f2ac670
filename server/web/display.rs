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

pub(crate) use crate::units::{Uncertain, with_errors, with_errors_column};

/// A number with a fixed count of decimals and its sign always shown (+0.12, −0.30).
pub(crate) fn signed(value: f64, decimals: usize) -> String {
    let text = fixed(value, decimals);
    if value >= 0.0 && !text.starts_with('−') {
        format!("+{text}")
    } else {
        text
    }
}

/// A probability (0 to 1) as a percentage with one decimal: "97.3 %". Beyond 99.9 % and below
/// 0.1 % it says so ("> 99.9 %", "< 0.1 %") instead of rounding to a certain "100 %" or
/// "0 %" that no fit can claim; a value that is not a number shows as "—". Pages only: the API
/// keeps the number.
pub(crate) fn probability(p: f64) -> String {
    if !p.is_finite() {
        "—".to_string()
    } else if p > 0.999 {
        "> 99.9 %".to_string()
    } else if p < 0.001 {
        "< 0.1 %".to_string()
    } else {
        // 0.1 ≤ 100 p ≤ 99.9, so one decimal never rounds to 0.0 or 100.0.
        format!("{} %", fixed(100.0 * p, 1))
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

/// A stored UTC time (RFC 3339, as the catalog writes it: "2026-12-02T14:05:31.123Z") as people
/// read it: "2 Dec 2026, 14:05 UTC". Text that is not such a time is shown as it is.
pub(crate) fn readable_utc(iso: &str) -> String {
    const MONTHS: [&str; 12] = [
        "Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec",
    ];
    let number = |range: std::ops::Range<usize>| {
        iso.get(range)
            .filter(|t| t.bytes().all(|b| b.is_ascii_digit()))
            .and_then(|t| t.parse::<usize>().ok())
    };
    let shape = iso.as_bytes();
    let separators = shape.len() >= 16
        && shape[4] == b'-'
        && shape[7] == b'-'
        && matches!(shape[10], b'T' | b' ')
        && shape[13] == b':';
    match (
        separators,
        number(0..4),
        number(5..7),
        number(8..10),
        number(11..13),
        number(14..16),
    ) {
        (
            true,
            Some(year),
            Some(month @ 1..=12),
            Some(day @ 1..=31),
            Some(hour @ 0..=23),
            Some(minute @ 0..=59),
        ) => {
            format!(
                "{day} {} {year}, {hour:02}:{minute:02} UTC",
                MONTHS[month - 1]
            )
        }
        _ => iso.to_owned(),
    }
}

/// A count with its noun, singular for one: "1 galaxy", "3 galaxies", "0 measurements".
pub(crate) fn count<N>(n: N, singular: &str, plural: &str) -> String
where
    N: std::fmt::Display + PartialEq + From<u8>,
{
    let one = n == N::from(1);
    format!("{n} {}", if one { singular } else { plural })
}

/// The words for a stored code (a method, a σ definition, a morphology, a distance method, a
/// submission state, a fit parameter): "stellar_dynamics" → "stellar dynamics", "sigma_e" →
/// "σ_e (within r_e)", "tau_1" → "τ₁". A code this does not know is shown with its underscores
/// as spaces, never as a code.
pub(crate) fn code_label(code: &str) -> String {
    use crate::catalog::model::{
        BulgeKind, BulgeMassMethod, CentreKind, DistanceMethod, MassMethod, Morphology,
        SigmaDefinition,
    };
    let known = MassMethod::pairs()
        .into_iter()
        .chain(BulgeMassMethod::pairs())
        .chain(SigmaDefinition::pairs())
        .chain(Morphology::pairs())
        .chain(BulgeKind::pairs())
        .chain(CentreKind::pairs())
        .chain(DistanceMethod::pairs())
        .find(|(word, _)| *word == code)
        .map(|(_, label)| label.to_owned());
    if let Some(label) = known {
        return label;
    }
    let greek = [
        ("alpha", "α"),
        ("beta", "β"),
        ("gamma", "γ"),
        ("delta", "δ"),
        ("eps", "ε"),
        ("mu", "μ"),
        ("tau", "τ"),
        ("w", "w"),
    ];
    // "tau_1" and "beta2" alike: a letter's name, then its index.
    let split = code.split_once('_').or_else(|| {
        let digits = code.find(|c: char| c.is_ascii_digit())?;
        Some(code.split_at(digits))
    });
    if let Some((name, index)) = split
        && let Some((_, letter)) = greek.iter().find(|(g, _)| *g == name)
        && !index.is_empty()
        && index.bytes().all(|b| b.is_ascii_digit())
    {
        let sub: String = index
            .chars()
            .map(|c| char::from_u32(0x2080 + c.to_digit(10).unwrap_or(0)).unwrap_or(c))
            .collect();
        return format!("{letter}{sub}");
    }
    if let Some((_, letter)) = greek.iter().find(|(g, _)| *g == code) {
        return (*letter).to_owned();
    }
    code.replace('_', " ")
}

/// A measurement's method, σ definition, aperture and band in words: "stellar dynamics",
/// "σ_e within r_e", "σ_c within 0.5 arcsec", "band K". Empty parts are left out.
pub(crate) fn measurement_detail(
    method: &str,
    sigma_definition: &str,
    aperture: &str,
    band: &str,
) -> String {
    let mut parts = Vec::new();
    if !method.is_empty() {
        parts.push(code_label(method));
    }
    match (sigma_definition, aperture) {
        ("", "") => {}
        ("", a) => parts.push(format!("aperture {a}")),
        (d, "") => parts.push(code_label(d)),
        (d, a) => {
            let symbol = match d {
                "sigma_e" => "σ_e".to_owned(),
                "sigma_c" => "σ_c".to_owned(),
                other => code_label(other),
            };
            parts.push(format!("{symbol} within {a}"));
        }
    }
    if !band.is_empty() {
        parts.push(format!("band {band}"));
    }
    parts.join(", ")
}

/// How a page shows a verdict: a CSS class (colour), a symbol (shape, hidden from screen
/// readers) and the words. Colour is never the only signal: the symbol and the words say it too.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Badge {
    /// `v-consistent`, `v-tension`, `v-outlier`, `v-limit-ok`, `soi-resolved`, `soi-unresolved`.
    pub(crate) class: &'static str,
    /// ✓, ▲ or ✕.
    pub(crate) mark: &'static str,
    /// The verdict in words, as the domain states it.
    pub(crate) text: &'static str,
}

/// The badge of a relation verdict ([`crate::relations::verdict`]'s words). A limit far above
/// the prediction is consistent; a limit below it is in tension or an outlier like a measurement.
pub(crate) fn verdict_badge(text: &'static str) -> Badge {
    let (class, mark) = if text.starts_with("outlier") {
        ("v-outlier", "✕")
    } else if text.starts_with("in tension") {
        ("v-tension", "▲")
    } else {
        ("v-consistent", "✓")
    };
    Badge { class, mark, text }
}

/// The badge of a sphere-of-influence check: resolved, not resolved (a flag for reviewers, not a
/// cut), or `unknown` (the words to show when the resolution is missing).
pub(crate) fn soi_badge(resolved: Option<bool>, unknown: &'static str) -> Badge {
    let (class, mark, text) = match resolved {
        Some(true) => ("soi-resolved", "✓", "resolved"),
        Some(false) => ("soi-unresolved", "✕", "not resolved"),
        None => ("soi-unknown", "?", unknown),
    };
    Badge { class, mark, text }
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

    #[test]
    fn values_round_to_two_significant_digits_of_their_error() {
        let one = |v: f64, e: f64| with_errors(Uncertain::symmetric(v, e), 2);
        assert_eq!(one(8.3214, 0.1234), "8.32 ± 0.12");
        // A carry into a third digit keeps two: 9.96 → 10, 0.0996 → 0.10.
        assert_eq!(one(123.456, 9.96), "123 ± 10");
        assert_eq!(one(8.3214, 0.0996), "8.32 ± 0.10");
        assert_eq!(one(1.234_56, 0.001_23), "1.2346 ± 0.0012");
        // An error at or above the value, and above 100.
        assert_eq!(one(5.0, 15.0), "5 ± 15");
        assert_eq!(one(0.5, 0.99), "0.50 ± 0.99");
        assert_eq!(one(123_456.0, 1234.0), "123500 ± 1200");
        // Negative values (a log below zero, a residual) with a true minus.
        assert_eq!(one(-2.345, 0.05), "−2.345 ± 0.050");
        assert_eq!(one(-0.004, 0.3), "0.00 ± 0.30");
        // No error: the value with the bare decimals; not a number: a dash.
        assert_eq!(one(2.0, 0.0), "2.00");
        assert_eq!(one(2.5, f64::NAN), "2.50");
        assert_eq!(one(f64::INFINITY, 0.1), "—");
        // Logs in dex with asymmetric errors: the smaller error sets the place.
        let log = |v, lo, hi, limit| with_errors(Uncertain::asymmetric(v, lo, hi, limit), 2);
        assert_eq!(log(8.32, 0.12, 0.10, false), "8.32 +0.10/−0.12");
        assert_eq!(log(8.32, 0.112, 0.114, false), "8.32 ± 0.11");
        assert_eq!(log(8.3214, 0.045, 0.30, false), "8.321 +0.300/−0.045");
        assert_eq!(log(7.3, 0.2, 0.1, true), "< 7.30");
        assert_eq!(log(8.3, -0.1, 0.1, false), "8.30 ± 0.10");
        assert_eq!(log(8.3, f64::NAN, 0.1, false), "8.30 +0.10/−0.00");
    }

    #[test]
    fn a_column_takes_its_coarsest_place_within_one() {
        let column = |rows: &[(f64, f64)]| {
            let items: Vec<Uncertain> = rows
                .iter()
                .map(|&(v, e)| Uncertain::symmetric(v, e))
                .collect();
            with_errors_column(&items, 0)
        };
        // σ in km/s: one count of decimals for the column, none invented.
        assert_eq!(
            column(&[(185.04, 9.0), (247.2, 14.3), (115.3, 4.2)]),
            ["185 ± 9", "247 ± 14", "115 ± 4"]
        );
        // An error of 9.96 rounds to 10, two digits, and sets the place like 14 does.
        assert_eq!(
            column(&[(185.04, 9.96), (247.2, 14.3)]),
            ["185 ± 10", "247 ± 14"]
        );
        // A row more than one place finer keeps one significant digit, never none.
        assert_eq!(
            column(&[(8.3, 0.05), (8.1, 5.0), (9.0, 0.0)]),
            ["8.30 ± 0.05", "8.1 ± 5.0", "9.0"]
        );
        // Tens set the place; a finer row stays within one place of its own.
        assert_eq!(
            column(&[(1234.0, 150.0), (16.54, 0.8)]),
            ["1230 ± 150", "16.5 ± 0.8"]
        );
        // Logs in dex: an upper limit takes the column's decimals.
        let items = [
            Uncertain::asymmetric(8.3214, 0.12, 0.12, false),
            Uncertain::asymmetric(7.3, 0.0, 0.0, true),
            Uncertain::asymmetric(7.519, 0.027, 0.026, false),
            Uncertain::asymmetric(-0.2, 0.3, 0.3, false),
        ];
        assert_eq!(
            with_errors_column(&items, 0),
            ["8.32 ± 0.12", "< 7.30", "7.52 ± 0.03", "−0.20 ± 0.30"]
        );
    }

    #[test]
    fn probabilities_never_round_to_certainty() {
        // Beyond the one-decimal range the bound is named, never "100 %" or "0 %".
        for p in [1.0, 0.999_999_7, 0.999_5, 0.999_000_1] {
            assert_eq!(probability(p), "> 99.9 %", "{p}");
        }
        for p in [0.0, 1e-12, 0.000_5, 0.000_999_9] {
            assert_eq!(probability(p), "< 0.1 %", "{p}");
        }
        // At the bounds and between them: one decimal, which cannot reach 0.0 or 100.0.
        assert_eq!(probability(0.999), "99.9 %");
        assert_eq!(probability(0.001), "0.1 %");
        assert_eq!(probability(0.5), "50.0 %");
        assert_eq!(probability(0.973_26), "97.3 %");
        assert_eq!(probability(0.012_34), "1.2 %");
        for k in 0..=1000 {
            let shown = probability(f64::from(k) / 1000.0);
            assert!(
                !shown.starts_with("100") && shown != "0.0 %",
                "{k}: {shown}"
            );
        }
        assert_eq!(probability(f64::NAN), "—");
    }

    #[test]
    fn every_verdict_has_a_class_a_mark_and_its_words() {
        use crate::relations::place::verdict;
        let shown = |z, limit| verdict_badge(verdict(z, limit));
        assert_eq!(shown(0.5, false).class, "v-consistent");
        assert_eq!(shown(-2.5, false).class, "v-tension");
        assert_eq!(shown(5.8, false).class, "v-outlier");
        assert_eq!(shown(5.8, false).text, "outlier");
        // A limit far above the prediction is consistent; far below, an outlier.
        assert_eq!(shown(5.8, true).class, "v-consistent");
        assert_eq!(shown(-3.5, true).class, "v-outlier");
        assert_eq!(shown(-2.5, true).text, "in tension (limit below)");
        let marks: Vec<&str> = [0.0, 2.5, 3.5]
            .iter()
            .map(|&z| shown(z, false).mark)
            .collect();
        assert_eq!(marks, ["✓", "▲", "✕"], "each state has its own shape");
        assert_eq!(soi_badge(Some(false), "unknown").class, "soi-unresolved");
        assert_eq!(
            soi_badge(None, "unknown (no resolution)").text,
            "unknown (no resolution)"
        );
    }

    #[test]
    fn times_read_as_day_month_year_and_utc() {
        assert_eq!(
            readable_utc("2026-12-02T14:05:31.123Z"),
            "2 Dec 2026, 14:05 UTC"
        );
        assert_eq!(
            readable_utc("2026-01-09T00:00:00Z"),
            "9 Jan 2026, 00:00 UTC"
        );
        assert_eq!(readable_utc("2026-12-02 23:59"), "2 Dec 2026, 23:59 UTC");
        // Not a stored time: shown as it is, never a made-up date.
        assert_eq!(readable_utc("yesterday"), "yesterday");
        assert_eq!(readable_utc("2026-13-02T14:05:00Z"), "2026-13-02T14:05:00Z");
    }

    #[test]
    fn counts_agree_with_their_noun() {
        assert_eq!(count(1, "galaxy", "galaxies"), "1 galaxy");
        assert_eq!(count(0, "galaxy", "galaxies"), "0 galaxies");
        assert_eq!(
            count(12_i64, "measurement", "measurements"),
            "12 measurements"
        );
    }

    #[test]
    fn codes_show_as_words() {
        assert_eq!(code_label("stellar_dynamics"), "stellar dynamics");
        assert_eq!(code_label("reverberation"), "reverberation mapping");
        assert_eq!(code_label("tau_1"), "τ₁");
        assert_eq!(code_label("mu_12"), "μ₁₂");
        assert_eq!(code_label("eps"), "ε");
        assert_eq!(code_label("beta2"), "β₂");
        assert_eq!(code_label("alpha"), "α");
        assert_eq!(code_label("w_1"), "w₁");
        assert_eq!(code_label("some_new_code"), "some new code");
        assert_eq!(
            measurement_detail("", "sigma_e", "r_e", ""),
            "σ_e within r_e"
        );
        assert_eq!(
            measurement_detail("stellar_dynamics", "", "", ""),
            "stellar dynamics"
        );
        assert_eq!(measurement_detail("", "", "", "K"), "band K");
        assert_eq!(
            measurement_detail("gas_dynamics", "sigma_c", "", ""),
            "gas dynamics, σ_c (central)"
        );
    }
}

/// What a page read at a named catalog version says about it (`partials/version_note.html`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct VersionNote {
    pub(crate) version: i64,
    pub(crate) release: Option<String>,
    /// When the version was made, for people ("3 December 2026, 07:13 UTC").
    pub(crate) made_text: String,
    /// Whether the catalog has changed since.
    pub(crate) past: bool,
    pub(crate) current: i64,
    /// The same page at the current version.
    pub(crate) current_href: String,
    /// `version=N` or `release=NAME`, for the page's own links (empty for none).
    pub(crate) query: String,
}

impl VersionNote {
    /// The note for a request that named a version; None when it named none.
    pub(crate) fn of(
        pinned: &crate::catalog::history::Pinned,
        ask: &crate::catalog::history::VersionAsk,
        made_at: Option<&str>,
        current_href: String,
    ) -> Option<Self> {
        pinned.asked.then(|| Self {
            version: pinned.version,
            release: pinned.release.clone(),
            made_text: made_at.map(readable_utc).unwrap_or_default(),
            past: pinned.is_past(),
            current: pinned.current,
            current_href,
            query: ask.query(),
        })
    }

    /// `?version=N` (or `&…` after `sep`), for links on a page of a named version.
    pub(crate) fn suffix(note: Option<&Self>, sep: char) -> String {
        note.map_or(String::new(), |n| format!("{sep}{}", n.query))
    }
}
