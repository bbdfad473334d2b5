//! The engine behind the kernel's interpreter hooks.

use engine::render::error::{evalue, traceback};
use engine::{Cancel, DisplaySink, Output, Session};
use kernel::interp::{Completeness, Completions, DisplayOut, ExecError, Interpreter, LanguageInfo};
use serde_json::{Map, Value};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

/// A Partita session as a kernel interpreter.
pub struct EngineInterpreter {
    session: Session,
}

impl EngineInterpreter {
    pub fn new() -> EngineInterpreter {
        EngineInterpreter {
            session: Session::new(),
        }
    }
}

struct Forward<'a>(&'a mut dyn FnMut(DisplayOut));

impl DisplaySink for Forward<'_> {
    fn display(&mut self, o: Output) {
        (self.0)(DisplayOut {
            data: o.data,
            metadata: o.metadata,
            is_result: o.is_result,
            display_id: o.display_id,
            update: o.update,
        });
    }
}

/// Converts an engine error into the protocol's error fields.
pub fn exec_error(e: &engine::CellError, code: &str) -> ExecError {
    ExecError {
        ename: e.kind.name().into(),
        evalue: evalue(e, code),
        traceback: traceback(e, code),
    }
}

impl Interpreter for EngineInterpreter {
    fn execute(
        &mut self,
        code: &str,
        interrupt: &Arc<AtomicBool>,
        out: &mut dyn FnMut(DisplayOut),
    ) -> Result<(), ExecError> {
        let cancel = Cancel::from_flag(interrupt.clone());
        self.session
            .run_cell(code, &cancel, &mut Forward(out))
            .map_err(|e| exec_error(&e, code))
    }

    fn complete(&mut self, code: &str, cursor: usize) -> Completions {
        let c = self.session.complete(code, cursor);
        Completions {
            matches: c.matches,
            cursor_start: c.cursor_start,
            cursor_end: c.cursor_end,
        }
    }

    fn inspect(&mut self, code: &str, cursor: usize) -> Option<Map<String, Value>> {
        let i = self.session.inspect(code, cursor)?;
        let mut m = Map::new();
        m.insert("text/plain".into(), Value::String(i.plain));
        Some(m)
    }

    fn is_complete(&mut self, code: &str) -> Completeness {
        match engine::lang::completeness(code) {
            engine::lang::Completeness::Complete => Completeness::Complete,
            engine::lang::Completeness::Incomplete => Completeness::Incomplete,
            engine::lang::Completeness::Invalid => Completeness::Invalid,
        }
    }

    fn watched(&self) -> Vec<std::path::PathBuf> {
        self.session.watched_files()
    }

    fn refresh(
        &mut self,
        path: &std::path::Path,
        interrupt: &Arc<AtomicBool>,
        out: &mut dyn FnMut(DisplayOut),
    ) {
        let cancel = Cancel::from_flag(interrupt.clone());
        self.session.refresh(path, &cancel, &mut Forward(out));
    }

    fn language_info(&self) -> LanguageInfo {
        LanguageInfo {
            name: "partita".into(),
            version: "1".into(),
            mimetype: "text/x-partita".into(),
            file_extension: ".partita".into(),
            banner: format!(
                "Partita {} — analysis of designed lab experiments. Type `help` for the statements.",
                env!("CARGO_PKG_VERSION")
            ),
            implementation: "partita".into(),
            implementation_version: env!("CARGO_PKG_VERSION").into(),
        }
    }
}
