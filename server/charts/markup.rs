//! Text and number hygiene for the SVG this module writes by hand.

/// `true` for characters XML 1.0 forbids anywhere in a document (§2.2 of the W3C XML 1.0
/// recommendation, from memory): controls other than tab, line feed and carriage return, and the
/// non-characters U+FFFE and U+FFFF. One of them in a name would make the whole page's SVG
/// ill-formed, escaping cannot help, so they are replaced.
fn forbidden_in_xml(c: char) -> bool {
    (c < '\u{20}' && !matches!(c, '\t' | '\n' | '\r')) || matches!(c, '\u{FFFE}' | '\u{FFFF}')
}

/// Caller text made safe to hand to plotters (which escapes markup itself): forbidden
/// characters become U+FFFD.
pub(super) fn clean(text: &str) -> String {
    text.chars()
        .map(|c| if forbidden_in_xml(c) { '\u{FFFD}' } else { c })
        .collect()
}

/// Caller text escaped for SVG text content and attribute values alike.
pub(super) fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if forbidden_in_xml(c) => out.push('\u{FFFD}'),
            c => out.push(c),
        }
    }
    out
}

/// `true` when `href` is a path on this site: it starts with one `/` (two would be a link to
/// another host, as would a backslash, which browsers read as a slash) and holds no whitespace
/// or control characters. Everything else (`javascript:`, `https://…`, `//host`) is refused.
pub(super) fn is_site_relative(href: &str) -> bool {
    let mut chars = href.chars();
    chars.next() == Some('/')
        && !matches!(chars.next(), Some('/' | '\\'))
        && href
            .chars()
            .all(|c| !c.is_control() && !c.is_whitespace() && c != '\\')
}

/// A pixel coordinate with at most one decimal, without a trailing `.0`.
pub(super) fn num(v: f64) -> String {
    let rounded = (v * 10.0).round() / 10.0;
    // A tiny negative would print as "-0.0"; it is the same pixel as 0.
    let rounded = if rounded.abs() < 0.05 { 0.0 } else { rounded };
    let s = format!("{rounded:.1}");
    s.strip_suffix(".0").map_or(s.clone(), str::to_owned)
}

/// A value in dex for a tooltip: two decimals, with a true minus sign.
pub(super) fn dex(v: f64) -> String {
    // Values that round to zero print as "0.00", never "−0.00".
    let v = if v.abs() < 0.005 { 0.0 } else { v };
    minus_sign(&format!("{v:.2}"))
}

/// Replaces ASCII hyphen-minus by U+2212, the typographic minus sign.
pub(super) fn minus_sign(text: &str) -> String {
    text.replace('-', "\u{2212}")
}

/// Shortens `text` to at most `max_chars` characters, ending in "…" when cut.
pub(super) fn truncate(text: &str, max_chars: usize) -> String {
    if text.chars().count() <= max_chars {
        return text.to_owned();
    }
    let keep = max_chars.saturating_sub(1);
    let mut out: String = text.chars().take(keep).collect();
    out.push('…');
    out
}
