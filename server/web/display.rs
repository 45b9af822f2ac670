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
}
