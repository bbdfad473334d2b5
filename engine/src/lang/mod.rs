//! The cell language: [`lexer`] turns text into tokens, [`parser`] turns tokens into
//! [`ast::Statement`]s with byte spans. Only syntax is checked here; names are resolved
//! against the session's datasets by [`crate::design`].
//!
//! ```
//! let stmts = engine::lang::parse("anova weight across feed in trial").unwrap();
//! assert_eq!(stmts.len(), 1);
//! ```

pub mod ast;
pub mod lexer;
pub mod parser;

pub use parser::{CLAUSES, MAX_CELL_BYTES, MAX_NESTING, VERBS, check_length, parse, pause_enabled};

/// What a cell's text is, for the protocol's is_complete request.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Completeness {
    /// It parses.
    Complete,
    /// It ends with a continuation comma: more lines are expected.
    Incomplete,
    /// It cannot parse, whatever follows.
    Invalid,
}

/// Classifies `src` as complete, incomplete (a line continued with a trailing comma) or invalid.
pub fn completeness(src: &str) -> Completeness {
    if check_length(src).is_err() {
        return Completeness::Invalid;
    }
    match lexer::lex(src) {
        Ok((_, lexer::LexEnd::Continued)) => Completeness::Incomplete,
        Ok(_) => match parse(src) {
            Ok(_) => Completeness::Complete,
            Err(_) => Completeness::Invalid,
        },
        Err(_) => Completeness::Invalid,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn completeness_of_samples() {
        assert_eq!(completeness("help"), Completeness::Complete);
        assert_eq!(completeness("anova y across a,"), Completeness::Incomplete);
        assert_eq!(completeness("anova y across"), Completeness::Invalid);
        assert_eq!(completeness("read \"x"), Completeness::Invalid);
    }
}
