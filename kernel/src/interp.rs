//! The hooks the kernel calls: the whole of what it knows about the language.

use serde_json::{Map, Value};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

/// One output of a cell.
#[derive(Debug, Clone, PartialEq)]
pub struct DisplayOut {
    /// MIME bundle.
    pub data: Map<String, Value>,
    /// Metadata.
    pub metadata: Map<String, Value>,
    /// The cell's result (sent as execute_result) rather than a display.
    pub is_result: bool,
    /// Display id (sent in `transient`), so that later updates replace this display.
    pub display_id: Option<String>,
    /// Sent as update_display_data for `display_id`.
    pub update: bool,
}

/// A failed cell.
#[derive(Debug, Clone, PartialEq)]
pub struct ExecError {
    /// `ename`.
    pub ename: String,
    /// `evalue`.
    pub evalue: String,
    /// Traceback lines.
    pub traceback: Vec<String>,
}

/// Completion candidates.
#[derive(Debug, Clone, PartialEq)]
pub struct Completions {
    /// Candidates.
    pub matches: Vec<String>,
    /// Start of the replaced text (code points).
    pub cursor_start: usize,
    /// End of the replaced text (code points).
    pub cursor_end: usize,
}

/// `is_complete` answers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Completeness {
    /// Ready to run.
    Complete,
    /// More lines expected.
    Incomplete,
    /// Cannot run.
    Invalid,
}

/// Static facts for kernel_info_reply.
#[derive(Debug, Clone, PartialEq)]
pub struct LanguageInfo {
    /// Language name.
    pub name: String,
    /// Language version.
    pub version: String,
    /// MIME type of source files.
    pub mimetype: String,
    /// File extension with the dot.
    pub file_extension: String,
    /// Banner text.
    pub banner: String,
    /// Implementation name.
    pub implementation: String,
    /// Implementation version.
    pub implementation_version: String,
}

/// What the kernel needs of a language.
pub trait Interpreter: Send {
    /// Runs a cell. Outputs go to `out` as they are ready; `interrupt` turns true when the user
    /// asks to stop.
    fn execute(
        &mut self,
        code: &str,
        interrupt: &Arc<AtomicBool>,
        out: &mut dyn FnMut(DisplayOut),
    ) -> Result<(), ExecError>;
    /// Completion at `cursor`.
    fn complete(&mut self, code: &str, cursor: usize) -> Completions;
    /// Help or a summary for what is under `cursor`, as a MIME bundle.
    fn inspect(&mut self, code: &str, cursor: usize) -> Option<Map<String, Value>>;
    /// Whether `code` is ready to run.
    fn is_complete(&mut self, code: &str) -> Completeness;
    /// Facts for kernel_info.
    fn language_info(&self) -> LanguageInfo;
    /// Files whose changes should be reported to [`Interpreter::refresh`] (absolute paths).
    fn watched(&self) -> Vec<PathBuf> {
        Vec::new()
    }
    /// Called between requests when a watched file changed and has been quiet: updates of
    /// earlier displays go to `out` (each with the `display_id` it was first sent with).
    fn refresh(
        &mut self,
        _path: &Path,
        _interrupt: &Arc<AtomicBool>,
        _out: &mut dyn FnMut(DisplayOut),
    ) {
    }
}
