//! Cell errors as plain data.
//!
//! A [`CellError`] has a kind (the `ename` the protocol carries), a standalone message that says
//! what to change, an optional [`Span`] into the cell source, notes and an optional "did you
//! mean". Nothing here formats for a screen: [`crate::render::error`] turns an error into
//! traceback text or HTML.

use std::fmt;

/// Byte range into the cell source (start inclusive, end exclusive).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Span {
    /// First byte.
    pub start: usize,
    /// One past the last byte.
    pub end: usize,
}

impl Span {
    /// A span from `start` to `end`.
    pub fn new(start: usize, end: usize) -> Span {
        Span { start, end }
    }
    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span {
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
}

/// What went wrong, in the five kinds of `design/results.md`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum ErrorKind {
    /// The statement does not parse.
    SyntaxError,
    /// The data cannot be used as asked (file, values, types).
    DataError,
    /// The design cannot be analysed as asked (levels, factors).
    DesignError,
    /// An option or argument is out of range or unknown.
    InputError,
    /// The user interrupted the computation.
    Interrupted,
}

impl ErrorKind {
    /// The name sent as `ename`.
    pub fn name(self) -> &'static str {
        match self {
            ErrorKind::SyntaxError => "SyntaxError",
            ErrorKind::DataError => "DataError",
            ErrorKind::DesignError => "DesignError",
            ErrorKind::InputError => "InputError",
            ErrorKind::Interrupted => "Interrupted",
        }
    }
}

/// An error that ends a cell.
#[derive(Debug, Clone, PartialEq)]
pub struct CellError {
    /// The kind, sent as `ename`.
    pub kind: ErrorKind,
    /// What is wrong and what to do, in lower case, without the location.
    pub message: String,
    /// Where in the cell source, if the error points at text.
    pub span: Option<Span>,
    /// Further explanation, one line each.
    pub notes: Vec<String>,
    /// The nearest valid word, if one is close.
    pub suggestion: Option<String>,
}

impl CellError {
    /// A new error of `kind` with `message`.
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> CellError {
        CellError {
            kind,
            message: message.into(),
            span: None,
            notes: Vec::new(),
            suggestion: None,
        }
    }
    /// A syntax error at `span`.
    pub fn syntax(span: Span, message: impl Into<String>) -> CellError {
        CellError::new(ErrorKind::SyntaxError, message).at(span)
    }
    /// A data error.
    pub fn data(message: impl Into<String>) -> CellError {
        CellError::new(ErrorKind::DataError, message)
    }
    /// A design error.
    pub fn design(message: impl Into<String>) -> CellError {
        CellError::new(ErrorKind::DesignError, message)
    }
    /// An input error.
    pub fn input(message: impl Into<String>) -> CellError {
        CellError::new(ErrorKind::InputError, message)
    }
    /// The interruption error.
    pub fn interrupted() -> CellError {
        CellError::new(
            ErrorKind::Interrupted,
            "the computation was interrupted; nothing was kept",
        )
    }
    /// Attaches a span.
    pub fn at(mut self, span: Span) -> CellError {
        self.span = Some(span);
        self
    }
    /// Attaches a span unless one is already set.
    pub fn at_if_none(mut self, span: Span) -> CellError {
        if self.span.is_none() {
            self.span = Some(span);
        }
        self
    }
    /// Adds a note.
    pub fn note(mut self, note: impl Into<String>) -> CellError {
        self.notes.push(note.into());
        self
    }
    /// Adds a suggestion.
    pub fn suggest(mut self, s: Option<String>) -> CellError {
        self.suggestion = s;
        self
    }
}

impl fmt::Display for CellError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.kind.name(), self.message)
    }
}

impl std::error::Error for CellError {}

/// Line (1-based), column (1-based, in characters) of byte `pos` in `src`.
pub fn line_col(src: &str, pos: usize) -> (usize, usize) {
    let pos = pos.min(src.len());
    let before = &src[..floor_char_boundary(src, pos)];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map(|i| i + 1).unwrap_or(0);
    let col = before[line_start..].chars().count() + 1;
    (line, col)
}

/// The largest char boundary not above `pos`.
pub fn floor_char_boundary(s: &str, pos: usize) -> usize {
    let mut p = pos.min(s.len());
    while p > 0 && !s.is_char_boundary(p) {
        p -= 1;
    }
    p
}

/// The closest candidate to `word` by edit distance, if close enough to be a likely typo.
pub fn nearest<'a, I: IntoIterator<Item = &'a str>>(word: &str, candidates: I) -> Option<String> {
    let w = word.to_lowercase();
    let mut best: Option<(usize, &str)> = None;
    for c in candidates {
        let d = edit_distance(&w, &c.to_lowercase());
        if best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c));
        }
    }
    let (d, c) = best?;
    let limit = (w.chars().count().max(c.chars().count()) / 3).max(1) + usize::from(w.len() > 5);
    (d <= limit && d > 0).then(|| c.to_string())
}

/// Edit distance over characters, counting a swap of neighbours as one edit (optimal string
/// alignment distance).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for j in 0..=b.len() {
        d[0][j] = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[i - 1][j] + 1)
                .min(d[i][j - 1] + 1)
                .min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[i - 2][j - 2] + 1);
            }
            d[i][j] = v;
        }
    }
    d[a.len()][b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_and_column_count_characters() {
        assert_eq!(line_col("ab\ncd", 4), (2, 2));
        assert_eq!(line_col("é x", 3), (1, 3));
    }

    #[test]
    fn nearest_finds_typos_and_refuses_strangers() {
        assert_eq!(
            nearest("anvoa", ["anova", "read", "show"]),
            Some("anova".into())
        );
        assert_eq!(nearest("wieght", ["weight", "feed"]), Some("weight".into()));
        assert_eq!(nearest("zzzzzz", ["anova", "read"]), None);
        assert_eq!(nearest("anova", ["anova"]), None);
    }
}
