//! Galaxy names as people type them: the rules a name must meet, and the key by which two names
//! that a reader cannot tell apart are found to be the same.
//!
//! A name is stored in Unicode NFC (a decomposed "é", `e` + U+0301, is stored as the one
//! character U+00E9), trimmed, with every run of spaces (including no-break and other wide
//! spaces) written as one ordinary space. Characters that do not show as text are refused, each
//! named by its code point: control characters (general category Cc: NUL, BEL, tab, line
//! breaks), formatting characters (Cf: zero-width spaces and joiners, bidirectional overrides
//! and isolates such as U+202E and U+2066–U+2069, the soft hyphen) and the line and paragraph
//! separators (Zl, Zp).
//!
//! Two names are look-alikes when their [`name_key`]s are equal: the same letters and digits
//! up to case, spacing, punctuation, accents and confusable characters from other scripts
//! (the skeleton of Unicode Technical Standard #39, "Unicode Security Mechanisms", §4).

use unicode_normalization::UnicodeNormalization;
use unicode_properties::{GeneralCategory, UnicodeGeneralCategory};

/// Longest galaxy name, in characters (the schema's check on `galaxy.name`).
pub const NAME_MAX_CHARS: usize = 100;

/// The name as it is stored: NFC, trimmed, runs of spaces as one space.
///
/// # Errors
/// One lower-case sentence fragment (the cell readers make it a sentence) when the name is
/// empty, too long, or holds a character that does not show as text.
pub fn clean_name(text: &str) -> Result<String, String> {
    let composed: String = text.nfc().collect();
    if let Some(c) = composed.trim().chars().find(|&c| hidden(c)) {
        return Err(format!(
            "the name contains U+{:04X} ({}), which does not show as text; type the name with visible letters, digits, spaces and punctuation only",
            u32::from(c),
            describe(c)
        ));
    }
    let mut name = String::with_capacity(composed.len());
    for word in composed.split(|c: char| c.is_whitespace()) {
        if !word.is_empty() {
            if !name.is_empty() {
                name.push(' ');
            }
            name.push_str(word);
        }
    }
    if name.is_empty() {
        return Err("this column is required".into());
    }
    if name.chars().count() > NAME_MAX_CHARS {
        return Err(format!("a name has at most {NAME_MAX_CHARS} characters"));
    }
    Ok(name)
}

/// Whether a character does not show as text: Cc, Cf, Zl or Zp (a tab or line break inside a
/// name counts; at either end it is trimmed with the spaces).
fn hidden(c: char) -> bool {
    // Most names are ASCII: no table lookup for them (catalog files have many thousand rows).
    if c.is_ascii() {
        return c.is_ascii_control();
    }
    c.is_control()
        || matches!(
            c.general_category(),
            GeneralCategory::Format
                | GeneralCategory::LineSeparator
                | GeneralCategory::ParagraphSeparator
        )
}

/// What a hidden character is, in words a submitter knows.
fn describe(c: char) -> &'static str {
    match c {
        '\0' => "a null character",
        '\u{7}' => "a bell character",
        '\t' => "a tab",
        '\n' | '\u{b}' | '\u{c}' | '\r' | '\u{85}' | '\u{2028}' | '\u{2029}' => "a line break",
        '\u{200b}' => "a zero-width space",
        '\u{200c}' => "a zero-width non-joiner",
        '\u{200d}' => "a zero-width joiner",
        '\u{2060}' => "a word joiner",
        '\u{feff}' => "a zero-width no-break space",
        '\u{ad}' => "a soft hyphen",
        '\u{200e}' | '\u{200f}' | '\u{61c}' => "a text-direction mark",
        '\u{202a}'..='\u{202e}' => "a text-direction embedding or override",
        '\u{2066}'..='\u{2069}' => "a text-direction isolate",
        c if c.is_control() => "a control character",
        _ => "an invisible formatting character",
    }
}

/// The key two look-alike names share: the UTS #39 skeleton of the lower-cased NFC name,
/// lower-cased again (a skeleton may map to capitals, e.g. "0" to "O"), keeping letters and
/// digits only (spaces, punctuation and, as the skeleton is decomposed, accents drop out).
/// "X 214", "x214", "X-214", "X_214" and "Х 214" (Cyrillic U+0425) all have the key of "x214".
pub fn name_key(name: &str) -> String {
    let lower: String = name.nfc().flat_map(char::to_lowercase).collect();
    unicode_security::skeleton(&lower)
        .flat_map(char::to_lowercase)
        .filter(|c| c.is_alphanumeric())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_stored_composed_trimmed_with_single_spaces() {
        assert_eq!(clean_name("  Ce\u{301}le 4 ").unwrap(), "C\u{e9}le 4");
        assert_eq!(clean_name("X \u{a0}  214").unwrap(), "X 214");
        assert_eq!(clean_name("X 214\n").unwrap(), "X 214");
    }

    #[test]
    fn hidden_characters_are_refused_by_code_point() {
        for (name, code) in [
            ("X\u{0}214", "U+0000"),
            ("X 214\u{7}", "U+0007"),
            ("X\n214", "U+000A"),
            ("X\t214", "U+0009"),
            ("\u{202e}X 214", "U+202E"),
            ("X\u{200b} 214", "U+200B"),
            ("X \u{2066}214\u{2069}", "U+2066"),
        ] {
            let message = clean_name(name).unwrap_err();
            assert!(message.contains(code), "{name:?}: {message}");
            assert!(message.contains("type the name with"), "{message}");
        }
    }

    #[test]
    fn look_alikes_share_a_key_and_other_names_do_not() {
        let key = name_key("X 214");
        for alike in [
            "x 214",
            "x214",
            "X-214",
            "X_214",
            "\u{425} 214",
            "X  214",
            "X.214",
        ] {
            assert_eq!(name_key(alike), key, "{alike}");
        }
        for other in ["X 215", "Y 214", "X 2140"] {
            assert_ne!(name_key(other), key, "{other}");
        }
    }
}
