//! Error rendering: the one-line `evalue` and the caret traceback.

use crate::error::{CellError, line_col};

/// The `evalue`: location (if any) and the message.
pub fn evalue(e: &CellError, src: &str) -> String {
    let mut s = match e.span {
        Some(sp) => {
            let (l, c) = line_col(src, sp.start);
            format!("line {l}, column {c}: {}", e.message)
        }
        None => e.message.clone(),
    };
    if let Some(sug) = &e.suggestion {
        s.push_str(&format!(" (did you mean `{sug}`?)"));
    }
    s
}

/// The traceback lines: kind and message, the source line with a caret, then notes.
pub fn traceback(e: &CellError, src: &str) -> Vec<String> {
    let mut out = vec![format!("{}: {}", e.kind.name(), e.message)];
    if let Some(sp) = e.span {
        let (l, c) = line_col(src, sp.start);
        let line = src.lines().nth(l - 1).unwrap_or("");
        let width = src
            .get(sp.start..sp.end.min(src.len()))
            .map(|s| s.chars().count())
            .unwrap_or(1)
            .max(1);
        let width = width.min(line.chars().count().saturating_sub(c - 1).max(1));
        let gutter = l.to_string().len();
        out.push(format!("{:gutter$}--> line {l}, column {c}", ""));
        out.push(format!("{:gutter$} |", ""));
        out.push(format!("{l} | {line}"));
        out.push(format!(
            "{:gutter$} | {}{}",
            "",
            " ".repeat(c - 1),
            "^".repeat(width)
        ));
    }
    if let Some(sug) = &e.suggestion {
        out.push(format!("did you mean `{sug}`?"));
    }
    for n in &e.notes {
        out.push(format!("note: {n}"));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Span;

    #[test]
    fn caret_under_the_token() {
        let e = CellError::syntax(
            Span::new(13, 17),
            "expected `across` and the factor(s), found `feed`",
        );
        let src = "anova weight feed";
        assert_eq!(
            traceback(&e, src),
            [
                "SyntaxError: expected `across` and the factor(s), found `feed`",
                " --> line 1, column 14",
                "  |",
                "1 | anova weight feed",
                "  |              ^^^^",
            ]
        );
        assert_eq!(
            evalue(&e, src),
            "line 1, column 14: expected `across` and the factor(s), found `feed`"
        );
    }

    #[test]
    fn suggestion_and_notes_follow() {
        let e = CellError::syntax(Span::new(0, 5), "`anvoa` is not a verb")
            .suggest(Some("anova".into()))
            .note("verbs: read, anova");
        let tb = traceback(&e, "anvoa y across g");
        assert_eq!(tb[5], "did you mean `anova`?");
        assert_eq!(tb[6], "note: verbs: read, anova");
        assert!(evalue(&e, "anvoa").ends_with("(did you mean `anova`?)"));
    }
}
