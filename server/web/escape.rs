//! The escaper of every page template (`askama.toml` names it for `.html`): askama's HTML
//! escaping, with each control character other than tab, line feed and carriage return written
//! as U+FFFD (the replacement character). The input rules refuse such characters in names, but a
//! text stored before them, or a free-text cell, must not carry a NUL or BEL into a page either:
//! HTML escaping alone passes them through.

use std::fmt::{self, Write};

use askama::filters::Escaper;

/// HTML escaping that also replaces control characters (see the module's doc).
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct Html;

/// A character a page never shows as it is: a control character that is not white space
/// HTML knows (tab, line feed, carriage return).
fn unshowable(c: char) -> bool {
    c.is_control() && !matches!(c, '\t' | '\n' | '\r')
}

impl Escaper for Html {
    fn write_escaped_str<W: Write>(&self, mut dest: W, string: &str) -> fmt::Result {
        let mut rest = string;
        while let Some(at) = rest.find(unshowable) {
            askama::filters::Html.write_escaped_str(&mut dest, &rest[..at])?;
            dest.write_char('\u{fffd}')?;
            let width = rest[at..].chars().next().map_or(1, char::len_utf8);
            rest = &rest[at + width..];
        }
        askama::filters::Html.write_escaped_str(dest, rest)
    }

    fn write_escaped_char<W: Write>(&self, mut dest: W, c: char) -> fmt::Result {
        if unshowable(c) {
            dest.write_char('\u{fffd}')
        } else {
            askama::filters::Html.write_escaped_char(dest, c)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn escaped(text: &str) -> String {
        let mut out = String::new();
        Html.write_escaped_str(&mut out, text).unwrap();
        out
    }

    #[test]
    fn controls_become_the_replacement_character_and_markup_is_escaped() {
        assert_eq!(escaped("X\u{0}214<b>"), "X\u{fffd}214&#60;b&#62;");
        assert_eq!(escaped("a\u{7}\u{7}b"), "a\u{fffd}\u{fffd}b");
        assert_eq!(escaped("two\nlines\tand é"), "two\nlines\tand é");
    }
}
