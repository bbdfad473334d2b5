//! Statements from tokens. Syntax only: names are not looked up here.

use super::ast::*;
use super::lexer::{Tok, Token, lex};
use crate::error::{CellError, Span, nearest};

/// The verbs a cell may start a statement with (without the test-only `pause`).
pub const VERBS: [&str; 13] = [
    "read", "unpivot", "show", "levels", "label", "describe", "anova", "check", "compare",
    "permute", "plot", "power", "help",
];

/// Clause keywords after `across`.
pub const CLAUSES: [&str; 5] = ["in", "subject", "by", "where", "with"];

/// The longest cell, in bytes (a cell is a few short statements; a megabyte is far beyond any).
pub const MAX_CELL_BYTES: usize = 1 << 20;

/// The deepest nesting of parentheses in a `where` condition.
pub const MAX_NESTING: usize = 32;

/// Whether the test-only `pause` verb is on (environment variable `PARTITA_TEST_PAUSE=1`).
pub fn pause_enabled() -> bool {
    std::env::var("PARTITA_TEST_PAUSE").is_ok_and(|v| v == "1")
}

/// Parses a whole cell into statements.
pub fn parse(src: &str) -> Result<Vec<Statement>, CellError> {
    check_length(src)?;
    let (toks, _) = lex(src)?;
    let mut out = Vec::new();
    for line in toks.split(|t| t.kind == Tok::Newline) {
        if line.is_empty() {
            continue;
        }
        let mut p = Parser {
            toks: line,
            pos: 0,
            end: line[line.len() - 1].span.end,
            depth: 0,
        };
        out.push(p.statement()?);
    }
    Ok(out)
}

/// Refuses a cell longer than [`MAX_CELL_BYTES`] before anything else reads it.
pub fn check_length(src: &str) -> Result<(), CellError> {
    if src.len() <= MAX_CELL_BYTES {
        return Ok(());
    }
    Err(CellError::syntax(
        crate::error::Span::new(0, 0),
        format!(
            "this cell is {} bytes long; a cell holds at most {MAX_CELL_BYTES} bytes (1 MiB)",
            src.len()
        ),
    )
    .note("split the statements over several cells; data belongs in a file read with `read`"))
}

struct Parser<'a> {
    toks: &'a [Token],
    pos: usize,
    end: usize,
    /// Parentheses open around the current position of a `where` condition.
    depth: usize,
}

impl<'a> Parser<'a> {
    fn peek(&self) -> Option<&'a Token> {
        self.toks.get(self.pos)
    }
    fn next(&mut self) -> Option<&'a Token> {
        let t = self.toks.get(self.pos);
        self.pos += usize::from(t.is_some());
        t
    }
    fn eof_span(&self) -> Span {
        Span::new(self.end, self.end)
    }
    fn at_end(&self) -> bool {
        self.pos >= self.toks.len()
    }
    fn peek_word(&self, w: &str) -> bool {
        matches!(self.peek(), Some(Token { kind: Tok::Word(x), .. }) if x == w)
    }
    fn unexpected(&self, wanted: &str) -> CellError {
        match self.peek() {
            Some(t) => CellError::syntax(
                t.span,
                format!("expected {wanted}, found {}", t.kind.describe()),
            ),
            None => CellError::syntax(
                self.eof_span(),
                format!("expected {wanted} at the end of the statement"),
            ),
        }
    }
    fn expect_word(&mut self, w: &str) -> Result<Span, CellError> {
        if self.peek_word(w) {
            Ok(self.next().map(|t| t.span).unwrap_or_default())
        } else {
            let mut e = self.unexpected(&format!("`{w}`"));
            if let Some(Token {
                kind: Tok::Word(x), ..
            }) = self.peek()
            {
                e = e.suggest(nearest(x, [w]));
            }
            Err(e)
        }
    }
    /// A name: a bare word or a quoted string.
    fn name(&mut self, what: &str) -> Result<Name, CellError> {
        match self.peek() {
            Some(Token {
                kind: Tok::Word(w) | Tok::Str(w),
                span,
            }) => {
                self.pos += 1;
                Ok(Spanned::new(w.clone(), *span))
            }
            _ => Err(self.unexpected(what)),
        }
    }
    fn string(&mut self, what: &str) -> Result<Spanned<String>, CellError> {
        match self.peek() {
            Some(Token {
                kind: Tok::Str(s),
                span,
            }) => {
                self.pos += 1;
                Ok(Spanned::new(s.clone(), *span))
            }
            _ => Err(self.unexpected(what)),
        }
    }
    fn finish(&self) -> Result<(), CellError> {
        if self.at_end() {
            Ok(())
        } else {
            Err(self.unexpected("the end of the statement"))
        }
    }

    fn statement(&mut self) -> Result<Statement, CellError> {
        let first = self.peek().ok_or_else(|| self.unexpected("a statement"))?;
        let start = first.span.start;
        let verb = match &first.kind {
            Tok::Word(w) => w.clone(),
            _ => {
                return Err(CellError::syntax(
                    first.span,
                    format!(
                        "a statement starts with a verb, not {}",
                        first.kind.describe()
                    ),
                )
                .note(format!("verbs: {}", VERBS.join(", "))));
            }
        };
        let verb_span = first.span;
        self.pos += 1;
        let kind = match verb.as_str() {
            "read" => {
                let path = self.string("a file path in double quotes, e.g. \"data/trial.csv\"")?;
                self.expect_word("as")?;
                let name = self.name("a name for the dataset")?;
                let options = self.options()?;
                StmtKind::Read {
                    path,
                    name,
                    options,
                }
            }
            "unpivot" => {
                let source = self.name("the name of the wide dataset")?;
                self.expect_word("columns")?;
                let mut columns = vec![self.name("a column to stack")?];
                while matches!(
                    self.peek(),
                    Some(Token {
                        kind: Tok::Comma,
                        ..
                    })
                ) {
                    self.pos += 1;
                    columns.push(self.name("a column after the comma")?);
                }
                self.expect_word("into").map_err(|e| {
                    e.note("e.g. `unpivot wide columns wk1, wk2 into week, height as long`")
                })?;
                let factor = self.name("the name of the new factor")?;
                if !matches!(
                    self.peek(),
                    Some(Token {
                        kind: Tok::Comma,
                        ..
                    })
                ) {
                    return Err(self.unexpected("a comma and the name of the value column"));
                }
                self.pos += 1;
                let value = self.name("the name of the value column")?;
                self.expect_word("as")?;
                let new = self.name("a name for the long dataset")?;
                StmtKind::Unpivot {
                    source,
                    columns,
                    factor,
                    value,
                    new,
                }
            }
            "show" => {
                let name = self.name("the name of a dataset")?;
                let options = self.options()?;
                StmtKind::Show { name, options }
            }
            "levels" => {
                let target = self.column_ref()?;
                let mut order = vec![self.level_text()?];
                while matches!(
                    self.peek(),
                    Some(Token {
                        kind: Tok::Comma,
                        ..
                    })
                ) {
                    self.pos += 1;
                    order.push(self.level_text()?);
                }
                StmtKind::Levels { target, order }
            }
            "label" => {
                let target = self.column_ref()?;
                let text = self.string("the label in double quotes, e.g. \"Biomass (g)\"")?;
                StmtKind::Label { target, text }
            }
            "describe" => StmtKind::Analysis(self.analysis(Verb::Describe, verb_span)?),
            "anova" => StmtKind::Analysis(self.analysis(Verb::Anova, verb_span)?),
            "check" => StmtKind::Analysis(self.analysis(Verb::Check, verb_span)?),
            "compare" => StmtKind::Analysis(self.analysis(Verb::Compare, verb_span)?),
            "permute" => StmtKind::Analysis(self.analysis(Verb::Permute, verb_span)?),
            "plot" => {
                let kind_tok =
                    self.name("a figure kind (means, box, points, profile, qq or residuals)")?;
                let kind = PlotKind::ALL
                    .iter()
                    .find(|(w, _)| *w == kind_tok.value)
                    .map(|(_, k)| *k)
                    .ok_or_else(|| {
                        CellError::syntax(
                            kind_tok.span,
                            format!("`{}` is not a figure kind", kind_tok.value),
                        )
                        .note("figure kinds: means, box, points, profile, qq, residuals, null")
                        .suggest(nearest(
                            &kind_tok.value,
                            PlotKind::ALL.iter().map(|(w, _)| *w),
                        ))
                    })?;
                StmtKind::Analysis(self.analysis(Verb::Plot(kind), verb_span)?)
            }
            "power" => {
                let design = self.name("`groups` or `within`")?;
                if design.value != "groups" && design.value != "within" {
                    return Err(CellError::syntax(
                        design.span,
                        format!(
                            "expected `groups` or `within` after `power`, found `{}`",
                            design.value
                        ),
                    )
                    .suggest(nearest(&design.value, ["groups", "within"]))
                    .note("e.g. `power groups 3 with f 0.25, n 20`"));
                }
                let count = match self.next() {
                    Some(Token {
                        kind: Tok::Num(v, _),
                        span,
                    }) => Spanned::new(*v, *span),
                    _ => {
                        self.pos = self.pos.saturating_sub(1);
                        return Err(self.unexpected("the number of groups or levels"));
                    }
                };
                let options = self.options()?;
                StmtKind::Power {
                    design,
                    count,
                    options,
                }
            }
            "save" => {
                let what = self.name("`LAST` (the last result)")?;
                if what.value != "LAST" {
                    return Err(CellError::syntax(
                        what.span,
                        format!(
                            "`save` saves the last result: write `save LAST to \"PATH\"`, not `{}`",
                            what.value
                        ),
                    ));
                }
                self.expect_word("to")?;
                let path =
                    self.string("a file path in double quotes, e.g. \"results/anova.csv\"")?;
                let options = self.options()?;
                StmtKind::Save {
                    what,
                    path,
                    options,
                }
            }
            "help" => {
                let topic = if self.at_end() {
                    None
                } else {
                    Some(self.name("a verb")?)
                };
                StmtKind::Help { topic }
            }
            "pause" if pause_enabled() => match self.next() {
                Some(Token {
                    kind: Tok::Num(v, _),
                    span,
                }) => StmtKind::Pause {
                    seconds: Spanned::new(*v, *span),
                },
                _ => return Err(self.unexpected("a number of seconds")),
            },
            other => {
                return Err(
                    CellError::syntax(verb_span, format!("`{other}` is not a verb"))
                        .note(format!("verbs: {}", VERBS.join(", ")))
                        .suggest(nearest(other, VERBS)),
                );
            }
        };
        self.finish()?;
        let end = self.toks.last().map(|t| t.span.end).unwrap_or(start);
        Ok(Statement {
            span: Span::new(start, end),
            kind,
        })
    }

    fn level_text(&mut self) -> Result<Spanned<String>, CellError> {
        match self.next() {
            Some(Token {
                kind: Tok::Str(s) | Tok::Word(s),
                span,
            }) => Ok(Spanned::new(s.clone(), *span)),
            Some(Token {
                kind: Tok::Num(_, t),
                span,
            }) => Ok(Spanned::new(t.clone(), *span)),
            _ => {
                self.pos = self.pos.saturating_sub(1);
                Err(self.unexpected("a level in double quotes"))
            }
        }
    }

    fn column_ref(&mut self) -> Result<ColumnRef, CellError> {
        let first = self.name("DATASET.COLUMN")?;
        if matches!(self.peek(), Some(Token { kind: Tok::Dot, .. })) {
            self.pos += 1;
            let column = self.name("a column name after the dot")?;
            Ok(ColumnRef {
                dataset: Some(first),
                column,
            })
        } else {
            Ok(ColumnRef {
                dataset: None,
                column: first,
            })
        }
    }

    fn analysis(&mut self, verb: Verb, verb_span: Span) -> Result<Analysis, CellError> {
        let response = self.name("the response column")?;
        if !self.peek_word("across") {
            let mut e = self.unexpected("`across` and the factor(s)");
            e = e.note(format!(
                "e.g. `{} {} across group`",
                verb.word(),
                response.value
            ));
            return Err(e);
        }
        self.pos += 1;
        let mut factors = vec![self.name("a factor column")?];
        while matches!(
            self.peek(),
            Some(Token {
                kind: Tok::Comma,
                ..
            })
        ) {
            self.pos += 1;
            factors.push(self.name("a factor column after the comma")?);
        }
        let mut a = Analysis {
            verb,
            verb_span,
            response,
            factors,
            dataset: None,
            subject: None,
            by: None,
            filter: None,
            options: Vec::new(),
        };
        while let Some(t) = self.peek() {
            let Tok::Word(w) = &t.kind else {
                return Err(self.unexpected("`in`, `subject`, `by`, `where` or `with`"));
            };
            let twice = || CellError::syntax(t.span, format!("`{w}` is given twice"));
            match w.as_str() {
                "in" => {
                    self.pos += 1;
                    if a.dataset.is_some() {
                        return Err(twice());
                    }
                    a.dataset = Some(self.name("a dataset name")?);
                }
                "subject" => {
                    self.pos += 1;
                    if a.subject.is_some() {
                        return Err(twice());
                    }
                    a.subject = Some(self.name("the subject column")?);
                }
                "by" => {
                    self.pos += 1;
                    if a.by.is_some() {
                        return Err(twice());
                    }
                    a.by =
                        Some(self.name("the factor whose levels the comparisons are made within")?);
                }
                "where" => {
                    self.pos += 1;
                    if a.filter.is_some() {
                        return Err(twice());
                    }
                    a.filter = Some(self.or_expr()?);
                }
                "with" => {
                    a.options = self.options()?;
                    if !self.at_end() {
                        return Err(self.unexpected("the end of the statement (`with` comes last)"));
                    }
                }
                other => {
                    return Err(CellError::syntax(
                        t.span,
                        format!(
                            "expected `in`, `subject`, `by`, `where` or `with`, found `{other}`"
                        ),
                    )
                    .suggest(nearest(other, CLAUSES))
                    .note("several factors are separated by commas: `across a, b`"));
                }
            }
        }
        Ok(a)
    }

    fn options(&mut self) -> Result<Vec<Opt>, CellError> {
        if self.at_end() {
            return Ok(Vec::new());
        }
        self.expect_word("with")?;
        let mut opts = Vec::new();
        loop {
            let name = match self.peek() {
                Some(Token {
                    kind: Tok::Word(w),
                    span,
                }) => {
                    self.pos += 1;
                    Spanned::new(w.clone(), *span)
                }
                _ => return Err(self.unexpected("an option name")),
            };
            let mut values = Vec::new();
            let mut end = name.span;
            loop {
                match self.peek() {
                    Some(Token {
                        kind: Tok::Comma, ..
                    })
                    | None => break,
                    Some(Token {
                        kind: Tok::LParen,
                        span,
                    }) => {
                        let start = *span;
                        self.pos += 1;
                        let mut items = vec![self.value()?];
                        loop {
                            match self.next() {
                                Some(Token {
                                    kind: Tok::Comma, ..
                                }) => items.push(self.value()?),
                                Some(Token {
                                    kind: Tok::RParen,
                                    span,
                                }) => {
                                    end = *span;
                                    break;
                                }
                                _ => {
                                    self.pos = self.pos.saturating_sub(1);
                                    return Err(self.unexpected("`,` or `)` in the list"));
                                }
                            }
                        }
                        values.push(Spanned::new(Value::List(items), start.to(end)));
                    }
                    Some(Token { kind, span }) => {
                        let v = match kind {
                            Tok::Num(v, t) => Value::Num(*v, t.clone()),
                            Tok::Str(s) => Value::Str(s.clone()),
                            Tok::Word(w) => Value::Word(w.clone()),
                            _ => return Err(self.unexpected("an option value")),
                        };
                        values.push(Spanned::new(v, *span));
                        end = *span;
                        self.pos += 1;
                    }
                }
            }
            opts.push(Opt {
                span: name.span.to(end),
                name,
                values,
            });
            if matches!(
                self.peek(),
                Some(Token {
                    kind: Tok::Comma,
                    ..
                })
            ) {
                self.pos += 1;
            } else {
                break;
            }
        }
        Ok(opts)
    }

    fn or_expr(&mut self) -> Result<Expr, CellError> {
        let mut any = vec![self.and_expr()?];
        while self.peek_word("or") {
            self.pos += 1;
            any.push(self.and_expr()?);
        }
        Ok(if any.len() == 1 {
            any.remove(0)
        } else {
            Expr::Any(any)
        })
    }

    fn and_expr(&mut self) -> Result<Expr, CellError> {
        let mut all = vec![self.atom()?];
        while self.peek_word("and") {
            self.pos += 1;
            all.push(self.atom()?);
        }
        Ok(if all.len() == 1 {
            all.remove(0)
        } else {
            Expr::All(all)
        })
    }

    fn atom(&mut self) -> Result<Expr, CellError> {
        if matches!(
            self.peek(),
            Some(Token {
                kind: Tok::LParen,
                ..
            })
        ) {
            if self.depth == MAX_NESTING {
                return Err(CellError::syntax(
                    self.peek().map(|t| t.span).unwrap_or_default(),
                    format!(
                        "parentheses nest deeper than {MAX_NESTING} levels here; a condition may nest at most {MAX_NESTING}"
                    ),
                )
                .note("write the condition with fewer parentheses, or with `in (\"a\", \"b\")` for a set of levels"));
            }
            self.pos += 1;
            self.depth += 1;
            let e = self.or_expr()?;
            self.depth -= 1;
            match self.next() {
                Some(Token {
                    kind: Tok::RParen, ..
                }) => return Ok(e),
                _ => {
                    self.pos = self.pos.saturating_sub(1);
                    return Err(self.unexpected("`)`"));
                }
            }
        }
        let column = self.name("a column to compare")?;
        match self.next() {
            Some(Token {
                kind: Tok::Op(op),
                span,
            }) => {
                let op = Spanned::new(*op, *span);
                let value = self.value()?;
                Ok(Expr::Compare { column, op, value })
            }
            Some(Token {
                kind: Tok::Word(w), ..
            }) if w == "in" => {
                match self.next() {
                    Some(Token {
                        kind: Tok::LParen, ..
                    }) => {}
                    _ => {
                        self.pos = self.pos.saturating_sub(1);
                        return Err(self.unexpected("`(` and a list of values"));
                    }
                }
                let mut values = vec![self.value()?];
                loop {
                    match self.next() {
                        Some(Token {
                            kind: Tok::Comma, ..
                        }) => values.push(self.value()?),
                        Some(Token {
                            kind: Tok::RParen, ..
                        }) => break,
                        _ => {
                            self.pos = self.pos.saturating_sub(1);
                            return Err(self.unexpected("`,` or `)`"));
                        }
                    }
                }
                Ok(Expr::In { column, values })
            }
            _ => {
                self.pos = self.pos.saturating_sub(1);
                Err(self.unexpected("a comparison (=, !=, <, <=, >, >=) or `in (…)`"))
            }
        }
    }

    fn value(&mut self) -> Result<Spanned<Value>, CellError> {
        match self.next() {
            Some(Token {
                kind: Tok::Num(v, t),
                span,
            }) => Ok(Spanned::new(Value::Num(*v, t.clone()), *span)),
            Some(Token {
                kind: Tok::Str(s),
                span,
            }) => Ok(Spanned::new(Value::Str(s.clone()), *span)),
            Some(Token {
                kind: Tok::Word(w),
                span,
            }) => Err(CellError::syntax(
                *span,
                format!("`{w}` is not a value: put text in double quotes"),
            )
            .note(format!("e.g. \"{w}\""))),
            _ => {
                self.pos = self.pos.saturating_sub(1);
                Err(self.unexpected("a number or a quoted string"))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn one(src: &str) -> StmtKind {
        let mut v = parse(src).unwrap();
        assert_eq!(v.len(), 1);
        v.remove(0).kind
    }

    #[test]
    fn read_with_options() {
        let StmtKind::Read {
            path,
            name,
            options,
        } = one(r#"read "data/t.csv" as trial with factor dose block, missing ".""#)
        else {
            panic!("not a read")
        };
        assert_eq!(path.value, "data/t.csv");
        assert_eq!(name.value, "trial");
        assert_eq!(options.len(), 2);
        assert_eq!(options[0].name.value, "factor");
        assert_eq!(options[0].values.len(), 2);
        assert_eq!(options[1].values[0].value, Value::Str(".".into()));
    }

    #[test]
    fn anova_with_every_clause_in_any_order() {
        let StmtKind::Analysis(a) = one(
            "anova weight across feed where (sex = \"f\" or age >= 3) and pen in (\"A\", \"B\") in trial",
        ) else {
            panic!()
        };
        assert_eq!(a.verb, Verb::Anova);
        assert_eq!(a.response.value, "weight");
        assert_eq!(a.factors.len(), 1);
        assert_eq!(a.dataset.unwrap().value, "trial");
        assert!(matches!(&a.filter, Some(Expr::All(v)) if v.len() == 2));
    }

    #[test]
    fn continued_lines_and_comments() {
        let v = parse("# a comment\nanova y across a,\n  b\n\nshow t # trailing\n").unwrap();
        assert_eq!(v.len(), 2);
        let StmtKind::Analysis(a) = &v[0].kind else {
            panic!()
        };
        assert_eq!(a.factors.len(), 2);
    }

    #[test]
    fn plot_kinds_and_levels_and_label() {
        assert!(matches!(
            one("plot box y across g"),
            StmtKind::Analysis(Analysis {
                verb: Verb::Plot(PlotKind::Box),
                ..
            })
        ));
        let StmtKind::Levels { target, order } = one(r#"levels t.feed "low", "mid", "high""#)
        else {
            panic!()
        };
        assert_eq!(target.dataset.unwrap().value, "t");
        assert_eq!(order.len(), 3);
        assert!(matches!(
            one(r#"label t.w "Weight (g)""#),
            StmtKind::Label { .. }
        ));
    }

    #[test]
    fn unknown_verb_suggests_the_nearest() {
        let e = parse("anvoa y across g").unwrap_err();
        assert_eq!(e.suggestion.as_deref(), Some("anova"));
        assert_eq!(e.span, Some(Span::new(0, 5)));
    }

    #[test]
    fn missing_across_is_reported_at_the_token() {
        let e = parse("anova weight feed").unwrap_err();
        assert_eq!(
            e.message,
            "expected `across` and the factor(s), found `feed`"
        );
        assert_eq!(e.span, Some(Span::new(13, 17)));
    }

    #[test]
    fn where_values_must_be_quoted() {
        let e = parse("describe y across g where g = a").unwrap_err();
        assert!(e.message.contains("double quotes"), "{}", e.message);
    }

    #[test]
    fn bad_plot_kind() {
        let e = parse("plot mean y across g").unwrap_err();
        assert_eq!(e.suggestion.as_deref(), Some("means"));
    }

    #[test]
    fn power_with_a_list_of_means() {
        let StmtKind::Power {
            design,
            count,
            options,
        } = one("power groups 3 with means (4.1, 4.6, 5.3), sd 0.6, power 0.8")
        else {
            panic!()
        };
        assert_eq!((design.value.as_str(), count.value), ("groups", 3.0));
        assert_eq!(options.len(), 3);
        let Value::List(v) = &options[0].values[0].value else {
            panic!()
        };
        assert_eq!(v.len(), 3);
        assert!(
            parse("power group 3 with f 0.2, n 4")
                .unwrap_err()
                .suggestion
                .as_deref()
                == Some("groups")
        );
    }

    #[test]
    fn trailing_garbage() {
        let e = parse("show t rows").unwrap_err();
        assert!(e.message.starts_with("expected `with`"), "{}", e.message);
    }
}
