//! Reading the tokens of an entry into its syntax: an optional upper-limit sign and `log`
//! word, the number in any of its notations, the errors and the unit, before any scale or
//! range is decided.

use super::super::errors::EntryError;
use super::super::quantity::Quantity;
use super::lexer::{Tok, Token, lex};

/// How a number was written; decides whether it may stand on the log scale.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Form {
    /// `9.51`, `3200000000`
    Plain,
    /// `3.2e9`
    ENotation,
    /// `3.2x10^9`
    TimesTen,
    /// `10^9.51`
    PowerOfTen,
}

/// A number as read, before its scale is decided.
#[derive(Debug, Clone)]
pub(super) struct Magnitude {
    pub(super) form: Form,
    /// A minus sign was typed before it.
    pub(super) negative: bool,
    /// Whether a `x10^` mantissa was zero (its log10 does not exist).
    pub(super) mantissa_zero: bool,
    /// The value as a linear number (infinite if it overflowed, zero if it underflowed).
    pub(super) linear: f64,
    /// log10 of the value when the notation gives it exactly (`10^9.51`, `3.2x10^9`), which
    /// also survives values whose linear form would overflow.
    pub(super) log10_exact: Option<f64>,
    start: usize,
    end: usize,
}

impl Magnitude {
    pub(super) fn text<'t>(&self, text: &'t str) -> &'t str {
        &text[self.start..self.end]
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum ErrorUnit {
    /// The unit of the value (linear unit, or dex on the log scale).
    Same,
    Dex,
    Percent,
}

#[derive(Debug, Clone)]
pub(super) struct ErrorSize {
    pub(super) magnitude: Magnitude,
    pub(super) unit: ErrorUnit,
}

#[derive(Debug, Clone)]
pub(super) enum ErrorSyntax {
    Symmetric(ErrorSize),
    Asymmetric { plus: ErrorSize, minus: ErrorSize },
}

#[derive(Debug, Clone)]
pub(super) struct Syntax {
    pub(super) upper_limit: bool,
    pub(super) log_word: bool,
    pub(super) value: Magnitude,
    pub(super) errors: Option<ErrorSyntax>,
}

struct Parser<'a> {
    tokens: Vec<Token>,
    pos: usize,
    text: &'a str,
    quantity: Quantity,
}

pub(super) fn parse_syntax(text: &str, quantity: Quantity) -> Result<Syntax, EntryError> {
    let tokens = lex(text, quantity)?;
    let mut p = Parser {
        tokens,
        pos: 0,
        text,
        quantity,
    };
    let mut upper_limit = false;
    let mut log_word = false;
    loop {
        match p.peek() {
            Some(Tok::Lt | Tok::Le) if !upper_limit => {
                upper_limit = true;
                p.bump();
            }
            Some(Tok::Gt | Tok::Ge) => return Err(EntryError::LowerLimit { quantity }),
            Some(Tok::Word(w)) if (w == "log" || w == "log10") && !log_word => {
                log_word = true;
                p.bump();
                if p.peek() == Some(&Tok::Eq) {
                    p.bump();
                }
            }
            _ => break,
        }
    }
    let value = p.number(true)?;
    p.unit()?;
    let errors = p.errors()?;
    p.unit()?;
    if p.peek().is_some() {
        return Err(p.not_understood());
    }
    Ok(Syntax {
        upper_limit,
        log_word,
        value,
        errors,
    })
}

impl Parser<'_> {
    fn peek(&self) -> Option<&Tok> {
        self.tokens.get(self.pos).map(|t| &t.tok)
    }

    fn peek_at(&self, ahead: usize) -> Option<&Tok> {
        self.tokens.get(self.pos + ahead).map(|t| &t.tok)
    }

    fn bump(&mut self) {
        self.pos += 1;
    }

    /// Byte offset where the next token starts (the end of the text when none is left).
    fn here(&self) -> usize {
        self.tokens
            .get(self.pos)
            .map_or(self.text.len(), |t| t.start)
    }

    /// Byte offset where the last consumed token ends.
    fn last_end(&self) -> usize {
        self.pos
            .checked_sub(1)
            .and_then(|i| self.tokens.get(i))
            .map_or(0, |t| t.end)
    }

    fn not_understood(&self) -> EntryError {
        if self.pos >= self.tokens.len() {
            EntryError::Incomplete {
                quantity: self.quantity,
                text: self.text.to_owned(),
            }
        } else {
            EntryError::NotUnderstood {
                quantity: self.quantity,
                fragment: self.text[self.here()..].to_owned(),
            }
        }
    }

    fn expect(&mut self, tok: &Tok) -> Result<(), EntryError> {
        if self.peek() == Some(tok) {
            self.bump();
            Ok(())
        } else {
            Err(self.not_understood())
        }
    }

    /// A number in any of its notations, with a leading minus sign when `signed`.
    fn number(&mut self, signed: bool) -> Result<Magnitude, EntryError> {
        let start = self.here();
        let negative = signed && self.peek() == Some(&Tok::Minus);
        if negative {
            self.bump();
        }
        let digits = match self.peek() {
            Some(Tok::Num(digits)) => digits.clone(),
            Some(Tok::Word(w)) if matches!(w.as_str(), "inf" | "infinity" | "nan") => {
                return Err(self.non_finite_here(start));
            }
            Some(Tok::Other) if self.text[self.here()..].starts_with('∞') => {
                return Err(self.non_finite_here(start));
            }
            _ => return Err(self.not_understood()),
        };
        self.bump();
        let mut magnitude = Magnitude {
            form: Form::Plain,
            negative,
            mantissa_zero: false,
            linear: f64::NAN,
            log10_exact: None,
            start,
            end: start,
        };
        if self.peek() == Some(&Tok::Times) {
            // 3.2 × 10^9: the mantissa is a plain decimal.
            if digits.contains('e') {
                return Err(self.not_understood());
            }
            self.bump();
            if self.peek() != Some(&Tok::Num("10".to_owned())) {
                return Err(self.not_understood());
            }
            self.bump();
            let (exponent_text, exponent) = self.exponent()?;
            let mantissa: f64 = self.parse_f64(&digits)?;
            magnitude.form = Form::TimesTen;
            magnitude.mantissa_zero = mantissa <= 0.0;
            magnitude.linear = if exponent_text.contains('.') {
                mantissa * 10f64.powf(exponent)
            } else {
                // Correctly rounded, unlike mantissa × 10^k in floating point.
                self.parse_f64(&format!("{digits}e{exponent_text}"))?
            };
            magnitude.log10_exact = (mantissa > 0.0).then(|| mantissa.log10() + exponent);
        } else if digits == "10" && matches!(self.peek(), Some(Tok::Caret | Tok::Sup(_))) {
            let (exponent_text, exponent) = self.exponent()?;
            magnitude.form = Form::PowerOfTen;
            magnitude.linear = if exponent_text.contains('.') {
                10f64.powf(exponent)
            } else {
                self.parse_f64(&format!("1e{exponent_text}"))?
            };
            magnitude.log10_exact = Some(exponent);
        } else {
            magnitude.form = if digits.contains('e') {
                Form::ENotation
            } else {
                Form::Plain
            };
            magnitude.linear = self.parse_f64(&digits)?;
        }
        magnitude.end = self.last_end();
        Ok(magnitude)
    }

    fn non_finite_here(&self, start: usize) -> EntryError {
        let end = self.tokens.get(self.pos).map_or(self.text.len(), |t| t.end);
        EntryError::NonFinite {
            quantity: self.quantity,
            fragment: self.text[start..end].to_owned(),
        }
    }

    fn parse_f64(&self, digits: &str) -> Result<f64, EntryError> {
        digits.parse().map_err(|_| self.not_understood())
    }

    /// The exponent after `10`: `^9`, `^-9`, `^9.51`, `^{9.51}`, `**9`, or superscripts `⁹`.
    /// Returns it as ASCII text and as a number.
    fn exponent(&mut self) -> Result<(String, f64), EntryError> {
        let text = match self.peek() {
            Some(Tok::Sup(s)) => {
                let s = s.replace('+', "");
                self.bump();
                s
            }
            Some(Tok::Caret) => {
                self.bump();
                let braced = self.peek() == Some(&Tok::LBrace);
                if braced {
                    self.bump();
                }
                let negative = self.peek() == Some(&Tok::Minus);
                if matches!(self.peek(), Some(Tok::Minus | Tok::Plus)) {
                    self.bump();
                }
                let digits = match self.peek() {
                    Some(Tok::Num(d)) if !d.contains('e') => d.clone(),
                    _ => return Err(self.not_understood()),
                };
                self.bump();
                if braced {
                    self.expect(&Tok::RBrace)?;
                }
                if negative {
                    format!("-{digits}")
                } else {
                    digits
                }
            }
            _ => return Err(self.not_understood()),
        };
        let value = self.parse_f64(&text)?;
        Ok((text, value))
    }

    /// An optional unit word; a word that is not the quantity's unit is refused.
    fn unit(&mut self) -> Result<(), EntryError> {
        let Some(Tok::Word(word)) = self.peek() else {
            return Ok(());
        };
        if self.quantity.unit_words().contains(&word.as_str()) {
            self.bump();
            return Ok(());
        }
        if matches!(
            word.as_str(),
            "dex" | "log" | "log10" | "inf" | "infinity" | "nan" | "e"
        ) {
            return Err(self.not_understood());
        }
        let token = &self.tokens[self.pos];
        Err(EntryError::WrongUnit {
            quantity: self.quantity,
            found: self.text[token.start..token.end].to_owned(),
        })
    }

    /// One error size: a number without sign, then optionally `%` or `dex`.
    fn error_size(&mut self) -> Result<ErrorSize, EntryError> {
        if matches!(self.peek(), Some(Tok::Minus | Tok::Plus | Tok::Pm)) {
            return Err(EntryError::SignedError {
                quantity: self.quantity,
            });
        }
        let magnitude = self.number(false)?;
        let unit = match self.peek() {
            Some(Tok::Percent) => {
                self.bump();
                ErrorUnit::Percent
            }
            Some(Tok::Word(w)) if w == "dex" => {
                self.bump();
                ErrorUnit::Dex
            }
            _ => ErrorUnit::Same,
        };
        Ok(ErrorSize { magnitude, unit })
    }

    /// The error part, if any.
    fn errors(&mut self) -> Result<Option<ErrorSyntax>, EntryError> {
        let errors = match self.peek() {
            Some(Tok::Pm) => {
                self.bump();
                ErrorSyntax::Symmetric(self.error_size()?)
            }
            Some(Tok::Plus) => match self.peek_at(1) {
                // `+/-`
                Some(Tok::Slash) => {
                    if self.peek_at(2) != Some(&Tok::Minus) {
                        self.bump();
                        return Err(self.not_understood());
                    }
                    self.pos += 3;
                    ErrorSyntax::Symmetric(self.error_size()?)
                }
                // `+-`
                Some(Tok::Minus) => {
                    self.pos += 2;
                    ErrorSyntax::Symmetric(self.error_size()?)
                }
                _ => {
                    self.bump();
                    let plus = self.error_size()?;
                    self.separator();
                    self.expect(&Tok::Minus)?;
                    let minus = self.error_size()?;
                    ErrorSyntax::Asymmetric { plus, minus }
                }
            },
            Some(Tok::Minus) => {
                self.bump();
                let minus = self.error_size()?;
                self.separator();
                self.expect(&Tok::Plus)?;
                let plus = self.error_size()?;
                ErrorSyntax::Asymmetric { plus, minus }
            }
            Some(Tok::LParen) => {
                self.bump();
                let Some(inner) = self.errors()? else {
                    return Err(self.not_understood());
                };
                self.expect(&Tok::RParen)?;
                inner
            }
            Some(Tok::Caret | Tok::Underscore) => {
                let start = self.here();
                let (first_plus, first) = self.latex_error()?;
                if !matches!(self.peek(), Some(Tok::Caret | Tok::Underscore)) {
                    return Err(self.not_understood());
                }
                let (second_plus, second) = self.latex_error()?;
                match (first_plus, second_plus) {
                    (true, false) => ErrorSyntax::Asymmetric {
                        plus: first,
                        minus: second,
                    },
                    (false, true) => ErrorSyntax::Asymmetric {
                        plus: second,
                        minus: first,
                    },
                    // Two upper or two lower errors.
                    _ => {
                        return Err(EntryError::NotUnderstood {
                            quantity: self.quantity,
                            fragment: self.text[start..].to_owned(),
                        });
                    }
                }
            }
            _ => return Ok(None),
        };
        Ok(Some(errors))
    }

    /// `^{+0.5}` or `_{-0.3}`: returns whether the sign was plus, and the size.
    fn latex_error(&mut self) -> Result<(bool, ErrorSize), EntryError> {
        self.bump();
        self.expect(&Tok::LBrace)?;
        let plus = match self.peek() {
            Some(Tok::Plus) => true,
            Some(Tok::Minus) => false,
            _ => return Err(self.not_understood()),
        };
        self.bump();
        let size = self.error_size()?;
        self.expect(&Tok::RBrace)?;
        Ok((plus, size))
    }

    /// An optional `/` or `,` between the two errors of an asymmetric pair.
    fn separator(&mut self) {
        if matches!(self.peek(), Some(Tok::Slash | Tok::Comma)) {
            self.bump();
        }
    }
}
