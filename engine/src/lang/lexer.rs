//! Tokens of the cell language.
//!
//! Words are letters, digits and `_` (not starting with a digit); strings are double-quoted
//! with `\"` and `\\` escapes; numbers are decimal with an optional exponent. `#` starts a
//! comment to the end of the line. A newline ends a statement unless the last token before it
//! is a comma, which continues the statement on the next line.

use crate::error::{CellError, Span};

/// One token with its span.
#[derive(Debug, Clone, PartialEq)]
pub struct Token {
    /// What the token is.
    pub kind: Tok,
    /// Where it stands in the source.
    pub span: Span,
}

/// Token kinds.
#[derive(Debug, Clone, PartialEq)]
pub enum Tok {
    /// A bare word: keyword or name.
    Word(String),
    /// A double-quoted string, unescaped.
    Str(String),
    /// A number, with its source text.
    Num(f64, String),
    /// `,`
    Comma,
    /// `.`
    Dot,
    /// `(`
    LParen,
    /// `)`
    RParen,
    /// A comparison operator: `=`, `!=`, `<`, `<=`, `>`, `>=`.
    Op(&'static str),
    /// End of a statement (a newline not after a comma).
    Newline,
}

impl Tok {
    /// How the token is named in an error message.
    pub fn describe(&self) -> String {
        match self {
            Tok::Word(w) => format!("`{w}`"),
            Tok::Str(s) => format!("the string \"{s}\""),
            Tok::Num(_, t) => format!("the number {t}"),
            Tok::Comma => "`,`".into(),
            Tok::Dot => "`.`".into(),
            Tok::LParen => "`(`".into(),
            Tok::RParen => "`)`".into(),
            Tok::Op(o) => format!("`{o}`"),
            Tok::Newline => "the end of the line".into(),
        }
    }
}

/// Whether the source ends inside an unterminated string (used by is_complete).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LexEnd {
    /// Ended normally.
    Clean,
    /// The last token before the end is a comma: a continued statement.
    Continued,
}

/// Splits `src` into tokens.
pub fn lex(src: &str) -> Result<(Vec<Token>, LexEnd), CellError> {
    let bytes = src.as_bytes();
    let mut toks: Vec<Token> = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        let c = src[i..].chars().next().unwrap_or(' ');
        let start = i;
        match c {
            '\n' => {
                i += 1;
                let continued = matches!(
                    toks.last(),
                    Some(Token {
                        kind: Tok::Comma,
                        ..
                    })
                );
                let already = matches!(
                    toks.last(),
                    None | Some(Token {
                        kind: Tok::Newline,
                        ..
                    })
                );
                if !continued && !already {
                    toks.push(Token {
                        kind: Tok::Newline,
                        span: Span::new(start, i),
                    });
                }
            }
            c if c.is_whitespace() => i += c.len_utf8(),
            '#' => {
                while i < bytes.len() && bytes[i] != b'\n' {
                    i += 1;
                }
            }
            '"' => {
                i += 1;
                let mut s = String::new();
                let mut closed = false;
                while i < bytes.len() {
                    let ch = src[i..].chars().next().unwrap_or(' ');
                    if ch == '\\' && i + 1 < bytes.len() {
                        let next = src[i + 1..].chars().next().unwrap_or(' ');
                        if next == '"' || next == '\\' {
                            s.push(next);
                            i += 1 + next.len_utf8();
                            continue;
                        }
                    }
                    if ch == '"' {
                        i += 1;
                        closed = true;
                        break;
                    }
                    if ch == '\n' {
                        break;
                    }
                    s.push(ch);
                    i += ch.len_utf8();
                }
                if !closed {
                    return Err(CellError::syntax(
                        Span::new(start, i),
                        "this string has no closing double quote",
                    )
                    .note("close the string with \" on the same line"));
                }
                toks.push(Token {
                    kind: Tok::Str(s),
                    span: Span::new(start, i),
                });
            }
            ',' => push1(&mut toks, Tok::Comma, &mut i),
            '(' => push1(&mut toks, Tok::LParen, &mut i),
            ')' => push1(&mut toks, Tok::RParen, &mut i),
            '=' => {
                i += if src[i..].starts_with("==") { 2 } else { 1 };
                toks.push(Token {
                    kind: Tok::Op("="),
                    span: Span::new(start, i),
                });
            }
            '!' if src[i..].starts_with("!=") => {
                i += 2;
                toks.push(Token {
                    kind: Tok::Op("!="),
                    span: Span::new(start, i),
                });
            }
            '<' | '>' => {
                let op = match (c, src[i + 1..].starts_with('=')) {
                    ('<', true) => "<=",
                    ('<', false) => "<",
                    ('>', true) => ">=",
                    _ => ">",
                };
                i += op.len();
                toks.push(Token {
                    kind: Tok::Op(op),
                    span: Span::new(start, i),
                });
            }
            c if c.is_ascii_digit()
                || ((c == '-' || c == '+' || c == '.')
                    && src[i + 1..].starts_with(|d: char| d.is_ascii_digit() || d == '.')) =>
            {
                i += 1;
                while i < bytes.len()
                    && (bytes[i].is_ascii_digit()
                        || bytes[i] == b'.'
                        || ((bytes[i] == b'e' || bytes[i] == b'E')
                            && i + 1 < bytes.len()
                            && (bytes[i + 1].is_ascii_digit()
                                || bytes[i + 1] == b'-'
                                || bytes[i + 1] == b'+'))
                        || ((bytes[i] == b'-' || bytes[i] == b'+')
                            && (bytes[i - 1] == b'e' || bytes[i - 1] == b'E')))
                {
                    i += 1;
                }
                let text = &src[start..i];
                match text.parse::<f64>() {
                    Ok(v) => toks.push(Token {
                        kind: Tok::Num(v, text.to_string()),
                        span: Span::new(start, i),
                    }),
                    Err(_) => {
                        return Err(CellError::syntax(
                            Span::new(start, i),
                            format!("`{text}` is not a number"),
                        ));
                    }
                }
            }
            '.' => push1(&mut toks, Tok::Dot, &mut i),
            c if c.is_alphabetic() || c == '_' => {
                while i < bytes.len() {
                    let ch = src[i..].chars().next().unwrap_or(' ');
                    // A hyphen between letters belongs to the word (`games-howell`, `red-blue`).
                    let hyphen_word =
                        ch == '-' && src[i + 1..].chars().next().is_some_and(char::is_alphabetic);
                    if ch.is_alphanumeric() || ch == '_' || hyphen_word {
                        i += ch.len_utf8();
                    } else {
                        break;
                    }
                }
                toks.push(Token {
                    kind: Tok::Word(src[start..i].to_string()),
                    span: Span::new(start, i),
                });
            }
            other => {
                return Err(CellError::syntax(
                    Span::new(start, start + other.len_utf8()),
                    format!("unexpected character `{other}`"),
                )
                .note("names with spaces or symbols go in double quotes, e.g. \"Biomass (g)\""));
            }
        }
    }
    let end = if matches!(
        toks.last(),
        Some(Token {
            kind: Tok::Comma,
            ..
        })
    ) {
        LexEnd::Continued
    } else {
        LexEnd::Clean
    };
    while matches!(
        toks.last(),
        Some(Token {
            kind: Tok::Newline,
            ..
        })
    ) {
        toks.pop();
    }
    Ok((toks, end))
}

fn push1(toks: &mut Vec<Token>, kind: Tok, i: &mut usize) {
    toks.push(Token {
        kind,
        span: Span::new(*i, *i + 1),
    });
    *i += 1;
}

#[cfg(test)]
mod tests {
    use super::*;

    fn kinds(src: &str) -> Vec<Tok> {
        lex(src).unwrap().0.into_iter().map(|t| t.kind).collect()
    }

    #[test]
    fn words_strings_numbers_and_operators() {
        assert_eq!(
            kinds(r#"read "a \"b\".csv" as t # comment"#),
            vec![
                Tok::Word("read".into()),
                Tok::Str("a \"b\".csv".into()),
                Tok::Word("as".into()),
                Tok::Word("t".into())
            ]
        );
        assert_eq!(
            kinds("x >= -1.5e2, y != 3"),
            vec![
                Tok::Word("x".into()),
                Tok::Op(">="),
                Tok::Num(-150.0, "-1.5e2".into()),
                Tok::Comma,
                Tok::Word("y".into()),
                Tok::Op("!="),
                Tok::Num(3.0, "3".into())
            ]
        );
    }

    #[test]
    fn a_trailing_comma_continues_the_line() {
        let (t, end) = lex("a across b,\n c\nshow t").unwrap();
        assert_eq!(t.iter().filter(|t| t.kind == Tok::Newline).count(), 1);
        assert_eq!(end, LexEnd::Clean);
        assert_eq!(lex("anova y across a,").unwrap().1, LexEnd::Continued);
    }

    #[test]
    fn an_open_string_is_an_error_with_its_span() {
        let e = lex("read \"abc").unwrap_err();
        assert_eq!(e.span, Some(Span::new(5, 9)));
    }

    #[test]
    fn dotted_column_reference() {
        assert_eq!(
            kinds("trial.feed"),
            vec![
                Tok::Word("trial".into()),
                Tok::Dot,
                Tok::Word("feed".into())
            ]
        );
    }
}

#[cfg(test)]
mod hyphen_tests {
    use super::*;

    #[test]
    fn a_hyphen_between_letters_stays_in_the_word() {
        let (t, _) = lex("method games-howell, y > -2").unwrap();
        assert_eq!(t[1].kind, Tok::Word("games-howell".into()));
        assert!(matches!(t.last().unwrap().kind, Tok::Num(v, _) if v == -2.0));
    }
}
