//! Partita's engine: the cell language, the session's datasets, the statistics and the
//! rendering of answers. It knows nothing about sockets or the Jupyter protocol.
//!
//! The entry point is [`Session::run_cell`]: it parses a cell into statements
//! ([`lang`]), resolves each against the session's datasets ([`design`]), computes
//! ([`models`]) and renders ([`render`]), sending each statement's answer to a
//! [`DisplaySink`] as soon as it is ready. The first failing statement ends the cell with a
//! [`CellError`]. The kernel and `partita run` both call this entry point, together with
//! [`Session::complete`] and [`Session::inspect`].
//!
//! ```
//! use engine::{Cancel, Output, Session};
//! let mut s = Session::new();
//! let mut out: Vec<Output> = Vec::new();
//! s.run_cell("help anova", &Cancel::default(), &mut out).unwrap();
//! assert!(out[0].is_result);
//! assert!(out[0].data["text/plain"].as_str().unwrap().starts_with("anova Y across F"));
//! ```
#![deny(missing_docs)]

mod analysis;
mod checks;
mod compare;
pub mod data;
pub mod design;
pub mod dist;
pub mod error;
mod factorial;
pub mod help;
pub mod lang;
pub mod models;
mod permute;
mod power;
pub mod render;
mod repeated;
mod save;
mod session;
pub mod simultaneous;
pub mod subjects;

pub use error::{CellError, ErrorKind, Span};
pub use save::write_atomic;
pub use session::{Completion, Inspection, Session};

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

/// A cancellation token, checked by long computations between units of work.
#[derive(Debug, Clone, Default)]
pub struct Cancel(Arc<AtomicBool>);

impl Cancel {
    /// A token sharing an existing flag (the kernel's interrupt flag).
    pub fn from_flag(flag: Arc<AtomicBool>) -> Cancel {
        Cancel(flag)
    }
    /// Asks the running computation to stop.
    pub fn cancel(&self) {
        self.0.store(true, Ordering::SeqCst);
    }
    /// Whether stopping was asked for.
    pub fn is_cancelled(&self) -> bool {
        self.0.load(Ordering::SeqCst)
    }
    /// Clears the request (before a new cell).
    pub fn reset(&self) {
        self.0.store(false, Ordering::SeqCst);
    }
}

/// One statement's answer, as a MIME bundle.
#[derive(Debug, Clone, PartialEq)]
pub struct Output {
    /// MIME type → content (strings, or JSON for the result bundle).
    pub data: serde_json::Map<String, serde_json::Value>,
    /// Per-MIME metadata.
    pub metadata: serde_json::Map<String, serde_json::Value>,
    /// True for the cell's last statement: the front end shows it as the cell's result.
    pub is_result: bool,
    /// A display id: later outputs with `update` set replace this one in place (progress).
    pub display_id: Option<String>,
    /// Replaces the display with the same `display_id` instead of adding an output.
    pub update: bool,
}

impl Output {
    /// A plain answer (no display id).
    pub fn answer(data: serde_json::Map<String, serde_json::Value>, is_result: bool) -> Output {
        Output {
            data,
            metadata: Default::default(),
            is_result,
            display_id: None,
            update: false,
        }
    }
}

/// Receives outputs as statements finish.
pub trait DisplaySink {
    /// Called once per answering statement, in order.
    fn display(&mut self, out: Output);
}

impl DisplaySink for Vec<Output> {
    fn display(&mut self, out: Output) {
        self.push(out);
    }
}
