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

/// Most characters of a user's text (a value, a name, a header) echoed in a message.
pub const EXCERPT_CHARS: usize = 80;

/// `s` cut to [`EXCERPT_CHARS`] characters, with "…" and the full length when cut: a message
/// never repeats a 100 MB cell or header.
pub fn excerpt(s: &str) -> String {
    excerpt_to(s, EXCERPT_CHARS)
}

/// `s` cut to `max` characters, marked when cut.
pub fn excerpt_to(s: &str, max: usize) -> String {
    match s.char_indices().nth(max) {
        None => s.to_string(),
        Some((at, _)) => format!("{}… ({} characters)", &s[..at], s.chars().count()),
    }
}

/// Most items of a list (columns, levels, datasets) named in a message.
pub const LISTED_ITEMS: usize = 20;

/// The first [`LISTED_ITEMS`] items, each cut to 40 characters, then "… (N more)".
pub fn listing<'a, I: IntoIterator<Item = &'a str>>(items: I) -> String {
    let mut out: Vec<String> = Vec::new();
    let mut more = 0usize;
    for it in items {
        if out.len() < LISTED_ITEMS {
            out.push(excerpt_to(it, 40));
        } else {
            more += 1;
        }
    }
    let mut s = out.join(", ");
    if more > 0 {
        s.push_str(&format!(", … ({more} more)"));
    }
    s
}

/// Candidates longer than this are not offered as "did you mean" (a typo of a long name is
/// not a typo), and at most [`NEAREST_CANDIDATES`] are compared, so a suggestion costs little
/// whatever the data holds.
const NEAREST_LONGEST: usize = 64;
const NEAREST_CANDIDATES: usize = 10_000;

/// The closest candidate to `word` by edit distance, if close enough to be a likely typo.
pub fn nearest<'a, I: IntoIterator<Item = &'a str>>(word: &str, candidates: I) -> Option<String> {
    if word.chars().count() > NEAREST_LONGEST {
        return None;
    }
    let w = word.to_lowercase();
    let mut best: Option<(usize, &str)> = None;
    for c in candidates
        .into_iter()
        .take(NEAREST_CANDIDATES)
        .filter(|c| c.len() <= 4 * NEAREST_LONGEST && c.chars().count() <= NEAREST_LONGEST)
    {
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
    fn excerpts_and_listings_are_bounded() {
        assert_eq!(excerpt("short"), "short");
        let long = "x".repeat(1_000_000);
        let e = excerpt(&long);
        assert!(e.len() < 120 && e.ends_with("(1000000 characters)"), "{e}");
        let names: Vec<String> = (0..100_000).map(|i| format!("c{i}")).collect();
        let l = listing(names.iter().map(String::as_str));
        assert!(
            l.starts_with("c0, c1,") && l.ends_with("… (99980 more)"),
            "{l}"
        );
        assert!(nearest(&long, ["x"]).is_none());
        assert_eq!(
            nearest("wieght", [long.as_str(), "weight"]),
            Some("weight".into())
        );
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
