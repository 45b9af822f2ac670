//! Splitting typed text into tokens: numbers (with their exponent), superscripts, words and
//! signs. Commas inside numbers are refused here, with the two readings spelled out.

use super::super::errors::EntryError;
use super::super::quantity::Quantity;

#[derive(Debug, Clone, PartialEq)]
pub(super) enum Tok {
    /// ASCII digits with at most one point and an optional `e` exponent, as typed.
    Num(String),
    /// A run of superscript digits and signs, converted to ASCII (`⁻⁹` → `-9`).
    Sup(String),
    /// A lower-case word (`log`, `log10`, `dex`, `msun`, `km/s`, `"`).
    Word(String),
    Lt,
    Le,
    Gt,
    Ge,
    Pm,
    Plus,
    Minus,
    Slash,
    Times,
    Caret,
    LParen,
    RParen,
    LBrace,
    RBrace,
    Underscore,
    Eq,
    Comma,
    Percent,
    Other,
}

#[derive(Debug, Clone)]
pub(super) struct Token {
    pub(super) tok: Tok,
    /// Byte offsets in the trimmed text.
    pub(super) start: usize,
    pub(super) end: usize,
}

fn superscript_ascii(c: char) -> Option<char> {
    Some(match c {
        '⁰' => '0',
        '¹' => '1',
        '²' => '2',
        '³' => '3',
        '⁴' => '4',
        '⁵' => '5',
        '⁶' => '6',
        '⁷' => '7',
        '⁸' => '8',
        '⁹' => '9',
        '⁻' => '-',
        '⁺' => '+',
        _ => return None,
    })
}

fn is_word_char(c: char) -> bool {
    c.is_alphabetic() || c == '☉' || c == '⊙'
}

fn is_minus(c: char) -> bool {
    matches!(c, '-' | '\u{2212}' | '\u{2013}')
}

pub(super) fn lex(text: &str, quantity: Quantity) -> Result<Vec<Token>, EntryError> {
    let chars: Vec<(usize, char)> = text.char_indices().collect();
    let offset = |i: usize| chars.get(i).map_or(text.len(), |&(b, _)| b);
    let char_at = |i: usize| chars.get(i).map(|&(_, c)| c);
    let mut tokens = Vec::new();
    let mut i = 0;
    while let Some(c) = char_at(i) {
        let next = char_at(i + 1);
        let start = i;
        let (tok, len) = if c.is_whitespace() {
            i += 1;
            continue;
        } else if c.is_ascii_digit() || (c == '.' && next.is_some_and(|n| n.is_ascii_digit())) {
            let (number, len) = lex_number(&chars[i..], text, quantity)?;
            (Tok::Num(number), len)
        } else if superscript_ascii(c).is_some() {
            let mut s = String::new();
            let mut j = i;
            while let Some(ascii) = char_at(j).and_then(superscript_ascii) {
                s.push(ascii);
                j += 1;
            }
            (Tok::Sup(s), j - i)
        } else if is_word_char(c) {
            let mut word = String::new();
            let mut j = i;
            while let Some(w) = char_at(j) {
                let joins_word = matches!(w, '_' | '/') && char_at(j + 1).is_some_and(is_word_char);
                if is_word_char(w) || (joins_word && !word.is_empty()) {
                    word.extend(w.to_lowercase());
                    j += 1;
                } else {
                    break;
                }
            }
            // `log10` is one word unless the digits go on (`log10.5`, `log100` read as `log`).
            if word == "log"
                && char_at(j) == Some('1')
                && char_at(j + 1) == Some('0')
                && !char_at(j + 2).is_some_and(|d| d.is_ascii_digit() || d == '.')
            {
                word.push_str("10");
                j += 2;
            }
            let tok = if word == "x" {
                Tok::Times
            } else {
                Tok::Word(word)
            };
            (tok, j - i)
        } else {
            match (c, next) {
                ('<', Some('=')) => (Tok::Le, 2),
                ('>', Some('=')) => (Tok::Ge, 2),
                ('*', Some('*')) => (Tok::Caret, 2),
                ('<', _) => (Tok::Lt, 1),
                ('≤' | '⩽', _) => (Tok::Le, 1),
                ('>', _) => (Tok::Gt, 1),
                ('≥' | '⩾', _) => (Tok::Ge, 1),
                ('±', _) => (Tok::Pm, 1),
                ('+', _) => (Tok::Plus, 1),
                (m, _) if is_minus(m) => (Tok::Minus, 1),
                ('/', _) => (Tok::Slash, 1),
                ('×' | '*' | '·' | '⋅', _) => (Tok::Times, 1),
                ('^', _) => (Tok::Caret, 1),
                ('(', _) => (Tok::LParen, 1),
                (')', _) => (Tok::RParen, 1),
                ('{', _) => (Tok::LBrace, 1),
                ('}', _) => (Tok::RBrace, 1),
                ('_', _) => (Tok::Underscore, 1),
                ('=', _) => (Tok::Eq, 1),
                (',', _) => (Tok::Comma, 1),
                ('%', _) => (Tok::Percent, 1),
                ('"' | '″', _) => (Tok::Word("\"".to_owned()), 1),
                _ => (Tok::Other, 1),
            }
        };
        i += len;
        tokens.push(Token {
            tok,
            start: offset(start),
            end: offset(i),
        });
    }
    Ok(tokens)
}

/// Reads digits, at most one point and an optional exponent (`3.2e9`, `.5`, `3.2E-3`); returns
/// the number as ASCII and how many characters it used. A comma between digits is refused.
fn lex_number(
    chars: &[(usize, char)],
    text: &str,
    quantity: Quantity,
) -> Result<(String, usize), EntryError> {
    let char_at = |i: usize| chars.get(i).map(|&(_, c)| c);
    let mut number = String::new();
    let mut j = 0;
    let mut seen_point = false;
    while let Some(c) = char_at(j) {
        if c.is_ascii_digit() || (c == '.' && !seen_point) {
            seen_point |= c == '.';
            number.push(c);
            j += 1;
        } else if c == ',' && char_at(j + 1).is_some_and(|d| d.is_ascii_digit()) {
            // Take the whole run of digits, commas and points, and an exponent, for the message.
            let mut k = j;
            while char_at(k).is_some_and(|d| d.is_ascii_digit() || d == ',' || d == '.') {
                k += 1;
            }
            k += exponent_len(&chars[k..]);
            let start = chars[0].0;
            let end = chars.get(k).map_or(text.len(), |&(b, _)| b);
            return Err(comma_error(quantity, &text[start..end]));
        } else {
            break;
        }
    }
    let len = exponent_len(&chars[j..]);
    for &(_, c) in &chars[j..j + len] {
        match c {
            'E' | 'e' => number.push('e'),
            '+' => {}
            m if is_minus(m) => number.push('-'),
            d => number.push(d),
        }
    }
    Ok((number, j + len))
}

/// Length of an `e` exponent (`e9`, `E+9`, `e-3`) at the start of `chars`, or 0.
fn exponent_len(chars: &[(usize, char)]) -> usize {
    let char_at = |i: usize| chars.get(i).map(|&(_, c)| c);
    if !matches!(char_at(0), Some('e' | 'E')) {
        return 0;
    }
    let mut k = 1;
    if char_at(k).is_some_and(|s| s == '+' || is_minus(s)) {
        k += 1;
    }
    if !char_at(k).is_some_and(|d| d.is_ascii_digit()) {
        return 0;
    }
    while char_at(k).is_some_and(|d| d.is_ascii_digit()) {
        k += 1;
    }
    k
}

fn comma_error(quantity: Quantity, fragment: &str) -> EntryError {
    let without = fragment.replace(',', "");
    let with_point = fragment.replace(',', ".");
    // One comma can be a thousands separator only when exactly three digits follow it and no
    // exponent does ("1,200"); then both readings are offered. Otherwise ("2,1e8", "0,5") it
    // is a decimal comma, and removing it would give a value ten or more times too large.
    let suggestion = if fragment.matches(',').count() == 1 && !fragment.contains('.') {
        let after: String = fragment
            .split(',')
            .nth(1)
            .unwrap_or("")
            .chars()
            .take_while(char::is_ascii_digit)
            .collect();
        let rest = &fragment[fragment.find(',').map_or(0, |i| i + 1) + after.len()..];
        if after.len() == 3 && rest.is_empty() {
            format!("“{without}” or “{with_point}”")
        } else {
            format!("“{with_point}”")
        }
    } else {
        format!("“{without}”")
    };
    EntryError::CommaInNumber {
        quantity,
        fragment: fragment.to_owned(),
        suggestion,
    }
}
