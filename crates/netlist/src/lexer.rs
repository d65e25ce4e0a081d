//! Tokens of the circuit language.
//!
//! Newlines end statements, except inside parentheses and brackets. `#` starts a comment that
//! runs to the end of the line. Numbers are decimal with an optional exponent (`2.5e-3`);
//! a unit, if any, follows as separate identifier tokens and is read by the parser.

use crate::diag::{Diagnostic, ErrorKind};
use crate::source::{FileId, Span};

/// What a token is.
#[derive(Clone, Debug, PartialEq)]
pub enum Tok {
    /// A name or keyword.
    Ident(String),
    /// A number literal.
    Number(f64),
    /// A double-quoted string (escapes `\"` and `\\`).
    Str(String),
    /// End of a statement.
    Newline,
    /// One of `= , : ; ( ) { } [ ] + - * / ^ % .. .`
    Punct(&'static str),
    /// End of input.
    Eof,
}

/// A token and where it is.
#[derive(Clone, Debug, PartialEq)]
pub struct Token {
    /// The token.
    pub tok: Tok,
    /// Its place in the source.
    pub span: Span,
    /// Whether whitespace (or a line start) came right before it.
    pub spaced: bool,
}

const PUNCTS: &[&str] = &[
    "..", "=", ",", ":", ";", "(", ")", "{", "}", "[", "]", "+", "-", "*", "/", "^", "%", ".",
];

/// Splits `text` into tokens, reporting bad characters and malformed literals.
pub fn lex(file: FileId, text: &str, diags: &mut Vec<Diagnostic>) -> Vec<Token> {
    let bytes = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    let mut depth: i32 = 0;
    let mut spaced = true;
    while i < bytes.len() {
        let c = bytes[i];
        if c == b'#' {
            while i < bytes.len() && bytes[i] != b'\n' {
                i += 1;
            }
            continue;
        }
        if c == b'\n' {
            if depth <= 0
                && !matches!(
                    out.last(),
                    Some(Token {
                        tok: Tok::Newline,
                        ..
                    }) | None
                )
            {
                out.push(Token {
                    tok: Tok::Newline,
                    span: Span::new(file, i, i + 1),
                    spaced: true,
                });
            }
            i += 1;
            spaced = true;
            continue;
        }
        if c.is_ascii_whitespace() {
            i += 1;
            spaced = true;
            continue;
        }
        let start = i;
        if c.is_ascii_digit() || (c == b'.' && i + 1 < bytes.len() && bytes[i + 1].is_ascii_digit())
        {
            i = number_end(bytes, i);
            let lit = &text[start..i];
            // A literal whose digits are not all zero but whose value is 0 or subnormal has
            // underflowed; one that is infinite has overflowed. Both are refused, never read
            // as 0 or infinity.
            let nonzero = lit
                .split(['e', 'E'])
                .next()
                .is_some_and(|m| m.bytes().any(|b| (b'1'..=b'9').contains(&b)));
            match lit.parse::<f64>() {
                Ok(v) if v.is_finite() && (!nonzero || v >= f64::MIN_POSITIVE) => {
                    out.push(Token {
                        tok: Tok::Number(v),
                        span: Span::new(file, start, i),
                        spaced,
                    })
                }
                Ok(v) => diags.push(
                    Diagnostic::new(
                        ErrorKind::BadNumber,
                        Span::new(file, start, i),
                        if v.is_infinite() {
                            format!("`{lit}` is too large to represent")
                        } else {
                            format!("`{lit}` is too small to represent (it underflows to 0)")
                        },
                    )
                    .with_help("numbers must lie between about 2.2e-308 and 1.8e308; use a unit prefix for small or large values"),
                ),
                Err(_) => diags.push(Diagnostic::new(
                    ErrorKind::BadNumber,
                    Span::new(file, start, i),
                    format!("`{lit}` is not a number"),
                )),
            }
            spaced = false;
            continue;
        }
        if c.is_ascii_alphabetic() || c == b'_' || c >= 0x80 {
            // Identifiers: ASCII letters, digits, `_`, and the micro sign for units.
            let rest = &text[i..];
            let mut len = 0;
            for ch in rest.chars() {
                if ch.is_ascii_alphanumeric() || ch == '_' || ch == 'µ' || ch == 'Ω' {
                    len += ch.len_utf8();
                } else {
                    break;
                }
            }
            if len == 0 {
                let ch = rest.chars().next().unwrap_or('?');
                diags.push(Diagnostic::new(
                    ErrorKind::BadCharacter,
                    Span::new(file, i, i + ch.len_utf8()),
                    format!("unexpected character `{ch}`"),
                ).with_help("names use letters, digits and `_`; remove the character or put text in double quotes"));
                i += ch.len_utf8();
                continue;
            }
            out.push(Token {
                tok: Tok::Ident(text[i..i + len].to_string()),
                span: Span::new(file, i, i + len),
                spaced,
            });
            i += len;
            spaced = false;
            continue;
        }
        if c == b'"' {
            let mut j = i + 1;
            let mut s = String::new();
            let mut closed = false;
            while j < bytes.len() {
                match bytes[j] {
                    b'"' => {
                        closed = true;
                        j += 1;
                        break;
                    }
                    b'\\'
                        if j + 1 < bytes.len()
                            && (bytes[j + 1] == b'"' || bytes[j + 1] == b'\\') =>
                    {
                        s.push(bytes[j + 1] as char);
                        j += 2;
                    }
                    b'\n' => break,
                    _ => {
                        let ch = text[j..].chars().next().unwrap_or('?');
                        s.push(ch);
                        j += ch.len_utf8();
                    }
                }
            }
            if !closed {
                diags.push(
                    Diagnostic::new(
                        ErrorKind::BadString,
                        Span::new(file, i, j),
                        "this string is not closed on its line".into(),
                    )
                    .with_help("add a closing `\"`"),
                );
            } else {
                out.push(Token {
                    tok: Tok::Str(s),
                    span: Span::new(file, i, j),
                    spaced,
                });
            }
            i = j;
            spaced = false;
            continue;
        }
        if let Some(p) = PUNCTS.iter().find(|p| text[i..].starts_with(**p)) {
            match *p {
                "(" | "[" => depth += 1,
                ")" | "]" => depth -= 1,
                _ => {}
            }
            out.push(Token {
                tok: Tok::Punct(p),
                span: Span::new(file, i, i + p.len()),
                spaced,
            });
            i += p.len();
            spaced = false;
            continue;
        }
        let ch = text[i..].chars().next().unwrap_or('?');
        diags.push(Diagnostic::new(
            ErrorKind::BadCharacter,
            Span::new(file, i, i + ch.len_utf8()),
            format!("unexpected character `{ch}`"),
        ).with_help("names use letters, digits and `_`; remove the character or put text in double quotes"));
        i += ch.len_utf8();
    }
    out.push(Token {
        tok: Tok::Eof,
        span: Span::new(file, text.len(), text.len()),
        spaced: true,
    });
    out
}

/// The end of a number literal starting at `i`: digits and points (stopping before a `..`
/// range operator), then an optional exponent `e`, `E` with an optional sign.
pub(crate) fn number_end(bytes: &[u8], mut i: usize) -> usize {
    while i < bytes.len() && (bytes[i].is_ascii_digit() || bytes[i] == b'.') {
        if bytes[i] == b'.' && i + 1 < bytes.len() && bytes[i + 1] == b'.' {
            break;
        }
        i += 1;
    }
    if i < bytes.len() && (bytes[i] == b'e' || bytes[i] == b'E') {
        let mut j = i + 1;
        if j < bytes.len() && (bytes[j] == b'+' || bytes[j] == b'-') {
            j += 1;
        }
        if j < bytes.len() && bytes[j].is_ascii_digit() {
            while j < bytes.len() && bytes[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    i
}
