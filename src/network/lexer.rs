//! Splits one line of a `.crn` file into tokens, each with its span.
//!
//! The language is line oriented, so the lexer works a line at a time; `#` starts a comment.
//! Lexing is linear in the length of the line and never fails on any input: a character that
//! belongs to no token becomes an error with its column.

use crate::error::Span;

#[derive(Clone, Debug, PartialEq)]
pub enum Tok {
    /// A name or a unit (`nM`, `µL`); names are checked against `[A-Za-z_][A-Za-z0-9_]*` by the
    /// parser where a name is declared.
    Ident(String),
    /// A number literal; `text` is kept for messages.
    Number(f64, String),
    Arrow,
    BiArrow,
    Plus,
    Minus,
    Star,
    Slash,
    Caret,
    LParen,
    RParen,
    Comma,
    At,
    Eq,
    Colon,
    Lt,
    Le,
    Gt,
    Ge,
}

impl Tok {
    /// How the token reads in a message.
    pub fn describe(&self) -> String {
        match self {
            Tok::Ident(s) => format!("`{s}`"),
            Tok::Number(_, t) => format!("the number `{t}`"),
            Tok::Arrow => "`->`".into(),
            Tok::BiArrow => "`<->`".into(),
            Tok::Plus => "`+`".into(),
            Tok::Minus => "`-`".into(),
            Tok::Star => "`*`".into(),
            Tok::Slash => "`/`".into(),
            Tok::Caret => "`^`".into(),
            Tok::LParen => "`(`".into(),
            Tok::RParen => "`)`".into(),
            Tok::Comma => "`,`".into(),
            Tok::At => "`@`".into(),
            Tok::Eq => "`=`".into(),
            Tok::Colon => "`:`".into(),
            Tok::Lt => "`<`".into(),
            Tok::Le => "`<=`".into(),
            Tok::Gt => "`>`".into(),
            Tok::Ge => "`>=`".into(),
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Token {
    pub tok: Tok,
    pub span: Span,
}

/// A character that starts no token, at `span`.
#[derive(Clone, Debug, PartialEq)]
pub struct LexError {
    pub span: Span,
    pub message: String,
}

/// Longest name or number accepted, so that messages quoting them stay readable.
const MAX_NAME: usize = 200;

fn is_ident_start(c: char) -> bool {
    c.is_ascii_alphabetic() || c == '_' || c == 'µ' || c == 'μ'
}

fn is_ident_char(c: char) -> bool {
    is_ident_start(c) || c.is_ascii_digit()
}

/// Tokens of line number `line` (1-based), stopping at a `#` comment.
pub fn lex_line(text: &str, line: u32) -> Result<Vec<Token>, LexError> {
    let chars: Vec<char> = text.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    let span = |start: usize, end: usize| Span::new(line, start as u32 + 1, (end - start) as u32);
    while i < chars.len() {
        let c = chars[i];
        if c == '#' {
            break;
        }
        if c.is_whitespace() {
            i += 1;
            continue;
        }
        let start = i;
        let single = match c {
            '+' => Some(Tok::Plus),
            '*' | '·' => Some(Tok::Star),
            '/' => Some(Tok::Slash),
            '^' => Some(Tok::Caret),
            '(' => Some(Tok::LParen),
            ')' => Some(Tok::RParen),
            ',' => Some(Tok::Comma),
            '@' => Some(Tok::At),
            '=' => Some(Tok::Eq),
            ':' => Some(Tok::Colon),
            _ => None,
        };
        if let Some(tok) = single {
            i += 1;
            out.push(Token {
                tok,
                span: span(start, i),
            });
            continue;
        }
        if c == '-' {
            if chars.get(i + 1) == Some(&'>') {
                i += 2;
                out.push(Token {
                    tok: Tok::Arrow,
                    span: span(start, i),
                });
            } else {
                i += 1;
                out.push(Token {
                    tok: Tok::Minus,
                    span: span(start, i),
                });
            }
            continue;
        }
        if c == '<' {
            if chars.get(i + 1) == Some(&'-') && chars.get(i + 2) == Some(&'>') {
                i += 3;
                out.push(Token {
                    tok: Tok::BiArrow,
                    span: span(start, i),
                });
                continue;
            }
            let tok = if chars.get(i + 1) == Some(&'=') {
                i += 2;
                Tok::Le
            } else {
                i += 1;
                Tok::Lt
            };
            out.push(Token {
                tok,
                span: span(start, i),
            });
            continue;
        }
        if c == '>' {
            let tok = if chars.get(i + 1) == Some(&'=') {
                i += 2;
                Tok::Ge
            } else {
                i += 1;
                Tok::Gt
            };
            out.push(Token {
                tok,
                span: span(start, i),
            });
            continue;
        }
        if c.is_ascii_digit() || (c == '.' && chars.get(i + 1).is_some_and(|d| d.is_ascii_digit()))
        {
            i = scan_number(&chars, i);
            if i - start > MAX_NAME {
                return Err(LexError {
                    span: span(start, start + MAX_NAME),
                    message: format!("a number of {} characters", i - start),
                });
            }
            let text: String = chars[start..i].iter().collect();
            let value = text.parse::<f64>().map_err(|_| LexError {
                span: span(start, i),
                message: format!("`{text}` is not a number"),
            })?;
            out.push(Token {
                tok: Tok::Number(value, text),
                span: span(start, i),
            });
            continue;
        }
        if is_ident_start(c) {
            while i < chars.len() && is_ident_char(chars[i]) {
                i += 1;
            }
            if i - start > MAX_NAME {
                return Err(LexError {
                    span: span(start, start + MAX_NAME),
                    message: format!(
                        "a name of {} characters; names are at most {MAX_NAME}",
                        i - start
                    ),
                });
            }
            out.push(Token {
                tok: Tok::Ident(chars[start..i].iter().collect()),
                span: span(start, i),
            });
            continue;
        }
        let shown = if c.is_control() {
            format!("control character U+{:04X}", c as u32)
        } else {
            format!("character `{c}`")
        };
        return Err(LexError {
            span: span(start, start + 1),
            message: format!("unexpected {shown}"),
        });
    }
    Ok(out)
}

/// End of the number starting at `i`: digits, an optional fraction, an optional exponent. The
/// exponent is taken only when digits follow `e`, so `2E + S` reads as the coefficient 2 of `E`.
fn scan_number(chars: &[char], mut i: usize) -> usize {
    while i < chars.len() && chars[i].is_ascii_digit() {
        i += 1;
    }
    if i < chars.len() && chars[i] == '.' {
        i += 1;
        while i < chars.len() && chars[i].is_ascii_digit() {
            i += 1;
        }
    }
    if i < chars.len() && (chars[i] == 'e' || chars[i] == 'E') {
        let mut j = i + 1;
        if j < chars.len() && (chars[j] == '+' || chars[j] == '-') {
            j += 1;
        }
        if j < chars.len() && chars[j].is_ascii_digit() {
            while j < chars.len() && chars[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    i
}

#[cfg(test)]
mod tests {
    use super::*;

    fn toks(s: &str) -> Vec<Tok> {
        lex_line(s, 1).unwrap().into_iter().map(|t| t.tok).collect()
    }

    #[test]
    fn step_line() {
        let t = toks("step carry H + G <-> HG @ 2e6 /M/s, kd 3 nM # bound");
        assert_eq!(t[0], Tok::Ident("step".into()));
        assert!(t.contains(&Tok::BiArrow));
        assert!(t.contains(&Tok::Number(2e6, "2e6".into())));
        assert_eq!(t.last(), Some(&Tok::Ident("nM".into())));
    }

    #[test]
    fn coefficient_glued_to_name() {
        assert_eq!(
            toks("2E + S"),
            vec![
                Tok::Number(2.0, "2".into()),
                Tok::Ident("E".into()),
                Tok::Plus,
                Tok::Ident("S".into())
            ]
        );
        assert_eq!(toks("1.5e-3")[0], Tok::Number(1.5e-3, "1.5e-3".into()));
    }

    #[test]
    fn micro_sign_units() {
        assert_eq!(toks("3 µM")[1], Tok::Ident("µM".into()));
    }

    #[test]
    fn comparisons_and_colon() {
        assert_eq!(
            toks("when X >= 3 : X = 0, Y < 2 <= > <->"),
            vec![
                Tok::Ident("when".into()),
                Tok::Ident("X".into()),
                Tok::Ge,
                Tok::Number(3.0, "3".into()),
                Tok::Colon,
                Tok::Ident("X".into()),
                Tok::Eq,
                Tok::Number(0.0, "0".into()),
                Tok::Comma,
                Tok::Ident("Y".into()),
                Tok::Lt,
                Tok::Number(2.0, "2".into()),
                Tok::Le,
                Tok::Gt,
                Tok::BiArrow,
            ]
        );
    }

    #[test]
    fn bad_character_has_column() {
        let e = lex_line("param k = 3 $", 4).unwrap_err();
        assert_eq!(e.span, Span::new(4, 13, 1));
        let e = lex_line("a\u{1}", 1).unwrap_err();
        assert!(e.message.contains("U+0001"));
    }
}
