//! The session: datasets by name, the statement runner, completion and inspection.

use crate::data::csv::{ReadOptions, parse_bytes, read_bytes};
use crate::data::{ColumnData, Dataset};
use crate::design::plural;
use crate::error::{CellError, Span, nearest};
use crate::help;
use crate::lang::ast::{Analysis, ColumnRef, Name, Opt, PlotKind, StmtKind, Value};
use crate::lang::{self, parse};
use crate::render::fmt::num;
use crate::render::{Align, Answer, DisplayTable, Provenance};
use crate::{Cancel, DisplaySink, Output};
use serde_json::{Value as Json, json};
use std::collections::BTreeMap;
use std::path::PathBuf;

mod live;

/// Completion candidates for the text before the cursor.
#[derive(Debug, Clone, PartialEq)]
pub struct Completion {
    /// Candidate words.
    pub matches: Vec<String>,
    /// Start of the replaced text (characters).
    pub cursor_start: usize,
    /// End of the replaced text (characters).
    pub cursor_end: usize,
}

/// What inspection found under the cursor.
#[derive(Debug, Clone, PartialEq)]
pub struct Inspection {
    /// Plain text.
    pub plain: String,
}

/// A notebook session's state.
#[derive(Debug, Default)]
pub struct Session {
    datasets: BTreeMap<String, Dataset>,
    current: Option<String>,
    base_dir: Option<PathBuf>,
    /// The file each dataset was read from (full path) and the read options, for change
    /// detection: the same file read with other options is parsed again.
    origins: BTreeMap<String, (PathBuf, String)>,
    /// Headline and content hash of each analysis statement's last answer, keyed by the
    /// statement's text and dataset: the "was … → now …" line when the data changed.
    history: BTreeMap<(String, String), (String, String)>,
    /// Every file read as data in this session, canonical where it can be: `save` never
    /// writes over one of them.
    read_files: std::collections::BTreeSet<PathBuf>,
    /// The last answer with tables or a figure (for `save LAST`).
    last: Option<Answer>,
    /// Watched datasets and the statements that follow them.
    live: live::Live,
}

impl Session {
    /// An empty session; relative paths are read from the working folder.
    pub fn new() -> Session {
        Session::default()
    }

    /// An empty session reading relative paths from `dir` (the notebook's folder).
    pub fn with_base_dir(dir: PathBuf) -> Session {
        Session {
            base_dir: Some(dir),
            ..Session::default()
        }
    }

    /// The datasets' names.
    pub fn dataset_names(&self) -> impl Iterator<Item = &str> {
        self.datasets.keys().map(String::as_str)
    }

    /// Runs a cell: each statement's answer goes to `sink` as it finishes; the first error
    /// ends the cell. A syntax error anywhere stops the cell before anything runs.
    pub fn run_cell(
        &mut self,
        src: &str,
        cancel: &Cancel,
        sink: &mut dyn DisplaySink,
    ) -> Result<(), CellError> {
        let stmts = parse(src)?;
        let last = stmts.len().saturating_sub(1);
        for (i, st) in stmts.iter().enumerate() {
            if cancel.is_cancelled() {
                return Err(CellError::interrupted());
            }
            let text = &src[st.span.start..st.span.end];
            let used = self.statement_dataset(&st.kind);
            let answer = self
                .run_statement(&st.kind, st.span, cancel, &mut *sink)
                .map_err(|e| e.at_if_none(st.span))?;
            let answer = answer.map(|a| self.was_now(a, text));
            if let Some(a) = &answer {
                if !matches!(st.kind, StmtKind::Save { .. })
                    && (!a.tables.is_empty() || a.figure.is_some())
                {
                    self.last = Some(a.clone());
                }
            }
            let live = self.bind_live(&st.kind, used.as_deref());
            if let Some(a) = answer {
                let mut out = Output::answer(a.mime_bundle(), i == last);
                if let (true, Some(u)) = (live, used.as_deref()) {
                    // A live answer is a display (with an id), so that refreshes replace it.
                    out.display_id = Some(self.record_live(&st.kind, text, u, &a));
                    out.is_result = false;
                }
                sink.display(out);
            }
        }
        Ok(())
    }

    /// Adds "was … → now …" to an analysis whose dataset changed since the statement last ran.
    fn was_now(&mut self, mut a: Answer, text: &str) -> Answer {
        let (Some(p), Some(report)) = (&a.provenance, &a.report) else {
            return a;
        };
        let headline = format!(
            "{}, n = {}",
            report.split("; ").next().unwrap_or(report),
            p.rows_used
        );
        let key = (
            text.split_whitespace().collect::<Vec<_>>().join(" "),
            p.dataset.clone(),
        );
        if let Some((old, sha)) = self.history.get(&key) {
            if *sha != p.sha256 {
                a.notes.insert(0, format!("was {old} → now {headline}"));
            }
        }
        self.history.insert(key, (headline, p.sha256.clone()));
        a
    }

    fn run_statement(
        &mut self,
        st: &StmtKind,
        span: Span,
        cancel: &Cancel,
        sink: &mut dyn DisplaySink,
    ) -> Result<Option<Answer>, CellError> {
        match st {
            StmtKind::Read {
                path,
                name,
                options,
            } => self.read(path, name, options).map(Some),
            StmtKind::Show { name, options } => self.show(name, options).map(Some),
            StmtKind::Unpivot {
                source,
                columns,
                factor,
                value,
                new,
            } => {
                let (ds, _) = self.dataset(Some(source))?;
                let mut long =
                    crate::data::reshape::unpivot(ds, columns, factor, value, &new.value)?;
                if let Some(prev) = self.datasets.get(&new.value) {
                    crate::data::changes::carry_over(prev, &mut long);
                }
                let (rows, k) = (ds.n_rows(), columns.len());
                self.datasets.insert(new.value.clone(), long);
                self.current = Some(new.value.clone());
                let mut a = self.show(new, &[])?;
                a.command = "unpivot".into();
                a.notes.insert(
                    0,
                    format!(
                        "{} rows × {k} columns of {} stacked into {} rows: {} (levels {}) and {}",
                        rows,
                        source.value,
                        rows * k,
                        factor.value,
                        columns
                            .iter()
                            .map(|c| c.value.as_str())
                            .collect::<Vec<_>>()
                            .join(", "),
                        value.value
                    ),
                );
                Ok(Some(a))
            }
            StmtKind::Levels { target, order } => self.levels(target, order).map(Some),
            StmtKind::Label { target, text } => {
                let (ds, col) = self.column_target(target)?;
                let ds = self
                    .datasets
                    .get_mut(&ds)
                    .ok_or_else(|| CellError::data("dataset vanished"))?;
                if let Some(c) = ds.column_mut(&col) {
                    c.label = Some(text.value.clone());
                }
                Ok(Some(short(format!(
                    "{}.{col} is labelled \"{}\"",
                    ds.name, text.value
                ))))
            }
            StmtKind::Analysis(a)
                if matches!(
                    a.verb,
                    crate::lang::ast::Verb::Permute
                        | crate::lang::ast::Verb::Plot(crate::lang::ast::PlotKind::Null)
                ) =>
            {
                let (ds, named) = self.dataset(a.dataset.as_ref())?;
                crate::permute::run(a, ds, named, cancel, sink).map(Some)
            }
            StmtKind::Analysis(a) => self.analysis(a).map(Some),
            StmtKind::Power {
                design,
                count,
                options,
            } => crate::power::run(design, count, options).map(Some),
            StmtKind::Save {
                what,
                path,
                options,
            } => {
                let full = self.full_path(&path.value);
                let inputs: Vec<PathBuf> = self.read_files.iter().cloned().collect();
                crate::save::save(self.last.as_ref(), what, path, &full, options, &inputs).map(Some)
            }
            StmtKind::Help { topic } => help_answer(topic.as_ref()).map(Some),
            StmtKind::Pause { seconds } => {
                let end = std::time::Instant::now()
                    + std::time::Duration::from_secs_f64(seconds.value.clamp(0.0, 600.0));
                while std::time::Instant::now() < end {
                    if cancel.is_cancelled() {
                        return Err(CellError::interrupted().at(span));
                    }
                    std::thread::sleep(std::time::Duration::from_millis(5));
                }
                Ok(Some(short(format!("paused {} s", seconds.value))))
            }
        }
    }

    /// A path as written in a cell, relative to the notebook's folder when one is set.
    fn full_path(&self, written: &str) -> PathBuf {
        match &self.base_dir {
            Some(b) if !std::path::Path::new(written).is_absolute() => b.join(written),
            _ => PathBuf::from(written),
        }
    }

    fn dataset(&self, name: Option<&Name>) -> Result<(&Dataset, bool), CellError> {
        match name {
            Some(n) => self
                .datasets
                .get(&n.value)
                .map(|d| (d, true))
                .ok_or_else(|| {
                    let mut e =
                        CellError::data(format!("there is no dataset named \"{}\"", n.value))
                            .at(n.span);
                    if self.datasets.is_empty() {
                        e = e.note(
                            "no dataset has been read yet: start with read \"FILE.csv\" as NAME",
                        );
                    } else {
                        e = e
                            .suggest(nearest(&n.value, self.dataset_names()))
                            .note(format!(
                                "datasets: {}",
                                crate::error::listing(self.dataset_names())
                            ));
                    }
                    e
                }),
            None => match self.current.as_ref().and_then(|c| self.datasets.get(c)) {
                Some(d) => Ok((d, false)),
                None => Err(CellError::data("no dataset has been read yet")
                    .note("start with read \"FILE.csv\" as NAME, then name it with `in NAME`")),
            },
        }
    }

    fn read(
        &mut self,
        path: &crate::lang::ast::Spanned<String>,
        name: &Name,
        options: &[Opt],
    ) -> Result<Answer, CellError> {
        check_options(
            options,
            "read",
            &[
                "factor",
                "missing",
                "delimiter",
                "decimal",
                "header",
                "sheet",
                "watch",
            ],
        )?;
        let mut ro = ReadOptions::new();
        for o in options {
            match o.name.value.as_str() {
                "factor" => {
                    if o.values.is_empty() {
                        return Err(
                            CellError::input("`factor` needs one or more column names").at(o.span)
                        );
                    }
                    ro.factors.extend(o.values.iter().map(|v| v.value.text()));
                }
                "missing" => ro.missing.extend(o.values.iter().map(|v| v.value.text())),
                "delimiter" => {
                    let t = one_text(o)?;
                    ro.delimiter = Some(match t.as_str() {
                        "," => b',',
                        ";" => b';',
                        "tab" | "\t" => b'\t',
                        other => {
                            return Err(CellError::input(format!(
                                "`delimiter {other}`: use \",\", \";\" or \"tab\""
                            ))
                            .at(o.span));
                        }
                    });
                }
                "decimal" => match one_text(o)?.as_str() {
                    "," => ro.decimal_comma = true,
                    "." => ro.decimal_comma = false,
                    other => {
                        return Err(CellError::input(format!(
                            "`decimal {other}`: use \",\" or \".\""
                        ))
                        .at(o.span));
                    }
                },
                "header" => {
                    let n = one_number(o)?;
                    if n < 0.0 || n.fract() != 0.0 || n > 10_000.0 {
                        return Err(CellError::input(
                            "`header` takes a line number: 1 for the first line, 0 for no header",
                        )
                        .at(o.span));
                    }
                    ro.header = n as usize;
                }
                "watch" if !o.values.is_empty() => {
                    return Err(CellError::input(
                        "`watch` takes no value: `with watch` follows the file and refreshes the results that use it",
                    )
                    .at(o.span));
                }
                _ => {}
            }
        }
        if ro.decimal_comma && ro.delimiter.is_none() {
            ro.delimiter = Some(b';');
        }
        let full = self.full_path(&path.value);
        let bytes = read_bytes(&full, &path.value).map_err(|e| e.at_if_none(path.span))?;
        self.read_files
            .insert(full.canonicalize().unwrap_or_else(|_| full.clone()));
        let sheet_opt = options.iter().find(|o| o.name.value == "sheet");
        let spreadsheet = crate::data::sheet::is_spreadsheet(&full);
        if let (Some(o), false) = (sheet_opt, spreadsheet) {
            return Err(
                CellError::input("`sheet` is for spreadsheets (.xlsx, .xlsm, .xls, .ods)")
                    .at(o.span),
            );
        }
        let sheet_text = options.iter().find(|o| o.name.value == "sheet").map(|o| {
            o.values
                .iter()
                .map(|v| v.value.text())
                .collect::<Vec<_>>()
                .join(",")
        });
        let how = format!("{ro:?} sheet {sheet_text:?}");
        let same_file = self.origins.get(&name.value).is_some_and(|o| o.0 == full);
        let same_options = self.origins.get(&name.value).is_some_and(|o| o.1 == how);
        // The previous contents of this dataset, from this file or another (a new export
        // under a new name): what changed is said either way.
        let previous = self.datasets.get(&name.value);
        let content_same = previous.is_some_and(|prev| {
            use sha2::{Digest, Sha256};
            hex::encode(Sha256::digest(&bytes)) == prev.sha256
        });
        if let Some(prev) = previous.filter(|_| same_options && same_file) {
            if content_same {
                let mut a = read_answer(prev);
                a.notes.insert(
                    0,
                    format!(
                        "unchanged since it was read at {} (same content, sha256 {}…): not parsed again",
                        prev.read_at,
                        &prev.sha256[..12]
                    ),
                );
                self.current = Some(name.value.clone());
                return Ok(notes_in_plain(a));
            }
        }
        let mut tail_note = None;
        let mut ds = if spreadsheet {
            let wanted = match sheet_opt {
                Some(o) => Some((one_text(o)?, o.span)),
                None => None,
            };
            let (text, sheet) = crate::data::sheet::to_csv(
                &bytes,
                &path.value,
                wanted.as_ref().map(|(s, sp)| (s.as_str(), *sp)),
            )
            .map_err(|e| e.at_if_none(path.span))?;
            let mut sro = ro.clone();
            sro.delimiter = Some(b',');
            sro.decimal_comma = false;
            sro.pad_short_rows = true;
            let mut ds = parse_bytes(&text, &path.value, &name.value, &sro)
                .map_err(|e| e.at_if_none(path.span))?;
            use sha2::{Digest, Sha256};
            ds.sha256 = hex::encode(Sha256::digest(&bytes));
            ds.source = format!("{} (sheet \"{sheet}\")", path.value);
            ds
        } else {
            let (ds, tail) = self
                .parse_text(&bytes, &path.value, &name.value, &ro)
                .map_err(|e| e.at_if_none(path.span))?;
            tail_note = tail;
            ds
        };
        let mut changes = Vec::new();
        if let Some(prev) = previous {
            if !content_same {
                changes = crate::data::changes::describe(prev, &ds);
            }
            crate::data::changes::carry_over(prev, &mut ds);
        }
        let mut answer = read_answer(&ds);
        if let Some(prev) = previous.filter(|_| !content_same) {
            let first = changes.first().cloned().unwrap_or_default();
            let mut lines = vec![if same_file {
                format!(
                    "{} changed since it was read at {}: {first}",
                    path.value, prev.read_at
                )
            } else {
                format!(
                    "{} was read from {} at {}; now from {}: {first}",
                    name.value, prev.source, prev.read_at, path.value
                )
            }];
            lines.extend(changes.into_iter().skip(1));
            for (i, l) in lines.into_iter().enumerate() {
                answer.notes.insert(i, l);
            }
        }
        if let Some(t) = tail_note {
            answer.notes.push(t);
        }
        self.current = Some(name.value.clone());
        self.origins.insert(name.value.clone(), (full, how));
        self.datasets.insert(name.value.clone(), ds);
        Ok(notes_in_plain(answer))
    }

    /// Parses delimited text. A file whose last line has no line end and does not parse is
    /// being written: during a refresh that line is left out (with a note); otherwise the
    /// error says to read the file again when it is complete.
    fn parse_text(
        &self,
        bytes: &[u8],
        shown: &str,
        name: &str,
        ro: &ReadOptions,
    ) -> Result<(Dataset, Option<String>), CellError> {
        let err = match parse_bytes(bytes, shown, name, ro) {
            Ok(ds) => return Ok((ds, None)),
            Err(e) => e,
        };
        let cut = match bytes.iter().rposition(|&b| b == b'\n') {
            Some(c) if !bytes.ends_with(b"\n") => c,
            _ => return Err(err),
        };
        let Ok(ds) = parse_bytes(&bytes[..=cut], shown, name, ro) else {
            return Err(err);
        };
        let line = bytes[..=cut].iter().filter(|&&b| b == b'\n').count() + 1;
        if self.live.partial_tail {
            Ok((
                ds,
                Some(format!(
                    "line {line} has no line end yet (the file is still being written?): it is left out until it is complete"
                )),
            ))
        } else {
            Err(err.note(format!(
                "line {line}, the last, has no line end: if the file is still being written, read it again when it is complete"
            )))
        }
    }

    fn show(&self, name: &Name, options: &[Opt]) -> Result<Answer, CellError> {
        check_options(options, "show", &["rows"])?;
        let mut rows = 10usize;
        for o in options {
            let n = one_number(o)?;
            if n < 1.0 || n.fract() != 0.0 {
                return Err(
                    CellError::input("`rows` takes a whole number of rows, 1 or more").at(o.span),
                );
            }
            rows = n as usize;
        }
        let (ds, _) = self.dataset(Some(name))?;
        let shown = rows.min(ds.n_rows());
        let mut cols = vec![("line".to_string(), Align::Right)];
        let listed = &ds.columns[..ds.columns.len().min(SHOWN_COLUMNS)];
        cols.extend(listed.iter().map(|c| {
            (
                format!("{} ({})", crate::error::excerpt(&c.name), c.type_name()),
                if c.type_name() == "numeric" {
                    Align::Right
                } else {
                    Align::Left
                },
            )
        }));
        let trows = (0..shown)
            .map(|i| {
                let mut r = vec![ds.lines[i].to_string()];
                r.extend(listed.iter().map(|c| crate::error::excerpt(&c.text(i))));
                r
            })
            .collect();
        let mut a = read_answer(ds);
        a.command = "show".into();
        a.plain = None;
        a.tables.push(DisplayTable {
            caption: format!("first {shown} of {} rows", ds.n_rows()),
            columns: cols,
            rows: trows,
        });
        Ok(a)
    }

    fn levels(
        &mut self,
        target: &ColumnRef,
        order: &[crate::lang::ast::Spanned<String>],
    ) -> Result<Answer, CellError> {
        let (dsname, colname) = self.column_target(target)?;
        let ds = self
            .datasets
            .get_mut(&dsname)
            .ok_or_else(|| CellError::data("dataset vanished"))?;
        let col = ds
            .column_mut(&colname)
            .ok_or_else(|| CellError::data("column vanished"))?;
        let ColumnData::Factor(f) = &mut col.data else {
            return Err(CellError::design(format!(
                "\"{colname}\" is numeric; only a factor has levels to order"
            ))
            .at(target.column.span)
            .note(format!(
                "read the file `with factor {colname}` to treat its values as levels"
            )));
        };
        let known: std::collections::HashSet<&str> = f.levels.iter().map(String::as_str).collect();
        let mut named: std::collections::HashSet<&str> = std::collections::HashSet::new();
        let mut seen: Vec<String> = Vec::new();
        for l in order {
            if !known.contains(l.value.as_str()) {
                return Err(
                    CellError::data(format!("\"{colname}\" has no level \"{}\"", l.value))
                        .at(l.span)
                        .suggest(nearest(&l.value, f.levels.iter().map(String::as_str)))
                        .note(format!(
                            "levels: {}",
                            crate::error::listing(f.levels.iter().map(String::as_str))
                        )),
                );
            }
            if !named.insert(l.value.as_str()) {
                return Err(
                    CellError::input(format!("level \"{}\" is named twice", l.value)).at(l.span),
                );
            }
            seen.push(l.value.clone());
        }
        f.reorder(&seen);
        Ok(short(format!(
            "{dsname}.{colname} levels in order: {}",
            crate::error::listing(f.levels.iter().map(String::as_str))
        )))
    }

    fn column_target(&self, t: &ColumnRef) -> Result<(String, String), CellError> {
        let (ds, _) = self.dataset(t.dataset.as_ref())?;
        let col = crate::design::column(ds, &t.column, "to change")?;
        Ok((ds.name.clone(), col.name.clone()))
    }

    fn analysis(&self, a: &Analysis) -> Result<Answer, CellError> {
        let (ds, named) = self.dataset(a.dataset.as_ref())?;
        crate::analysis::run(a, ds, named)
    }

    /// Completion of the word before `cursor` (a character offset into `code`).
    pub fn complete(&self, code: &str, cursor: usize) -> Completion {
        let chars: Vec<char> = code.chars().collect();
        let cursor = cursor.min(chars.len());
        let mut start = cursor;
        while start > 0 && (chars[start - 1].is_alphanumeric() || chars[start - 1] == '_') {
            start -= 1;
        }
        let prefix: String = chars[start..cursor].iter().collect();
        // The statement so far: from the last newline not continued by a comma.
        let before: String = chars[..start].iter().collect();
        let stmt = statement_before(&before);
        let words: Vec<&str> = stmt
            .split(|c: char| !(c.is_alphanumeric() || c == '_'))
            .filter(|w| !w.is_empty())
            .collect();
        let mut cands: Vec<String> = Vec::new();
        let verb = words.first().copied();
        let last = words.last().copied();
        let in_with =
            words.contains(&"with") && (stmt.trim_end().ends_with(',') || last == Some("with"));
        if words.is_empty() {
            cands.extend(lang::VERBS.iter().map(|s| s.to_string()));
        } else if words.len() == 1 && verb == Some("plot") {
            cands.extend(PlotKind::ALL.iter().map(|(w, _)| w.to_string()));
        } else if verb == Some("help") && words.len() == 1 {
            cands.extend(lang::VERBS.iter().map(|s| s.to_string()));
        } else if in_with {
            if let Some(h) = verb.and_then(help::verb) {
                cands.extend(
                    h.options
                        .iter()
                        .map(|(o, _)| o.split_whitespace().next().unwrap_or("").to_string()),
                );
            }
        } else if last == Some("in") || matches!(verb, Some("show")) && words.len() == 1 {
            cands.extend(self.dataset_names().map(str::to_string));
        } else {
            let ds_name = words
                .windows(2)
                .find(|w| w[0] == "in")
                .map(|w| w[1].to_string());
            let dotted = stmt.trim_end().strip_suffix('.').and_then(|s| {
                s.rsplit(|c: char| !(c.is_alphanumeric() || c == '_'))
                    .next()
            });
            let ds = match dotted {
                Some(d) if self.datasets.contains_key(d) && stmt.ends_with('.') => {
                    self.datasets.get(d)
                }
                _ => ds_name
                    .as_ref()
                    .and_then(|n| self.datasets.get(n))
                    .or_else(|| self.current.as_ref().and_then(|c| self.datasets.get(c))),
            };
            if let Some(ds) = ds {
                cands.extend(ds.column_names().map(str::to_string));
            }
            if !stmt.ends_with('.') {
                cands.extend(
                    ["across", "in", "where", "with", "and", "or"]
                        .iter()
                        .map(|s| s.to_string()),
                );
                if matches!(verb, Some("levels" | "label")) {
                    cands.extend(self.dataset_names().map(str::to_string));
                }
            }
        }
        let mut matches: Vec<String> = cands
            .into_iter()
            .filter(|c| c.starts_with(&prefix))
            .collect();
        matches.sort();
        matches.dedup();
        Completion {
            matches,
            cursor_start: start,
            cursor_end: cursor,
        }
    }

    /// Help or a summary for the word under `cursor` (a character offset).
    pub fn inspect(&self, code: &str, cursor: usize) -> Option<Inspection> {
        let chars: Vec<char> = code.chars().collect();
        let cursor = cursor.min(chars.len());
        let is_w = |c: char| c.is_alphanumeric() || c == '_';
        let mut s = cursor;
        while s > 0 && is_w(chars[s - 1]) {
            s -= 1;
        }
        let mut e = cursor;
        while e < chars.len() && is_w(chars[e]) {
            e += 1;
        }
        let word: String = chars[s..e].iter().collect();
        if word.is_empty() {
            return None;
        }
        if let Some(h) = help::verb(&word) {
            return Some(Inspection {
                plain: help::verb_text(h),
            });
        }
        if let Some(ds) = self.datasets.get(&word) {
            return Some(Inspection {
                plain: crate::render::text::render(&read_answer(ds)),
            });
        }
        // DATASET.COLUMN or a column of the current dataset.
        let before: String = chars[..s].iter().collect();
        let ds = before
            .strip_suffix('.')
            .and_then(|b| b.rsplit(|c: char| !is_w(c)).next())
            .and_then(|d| self.datasets.get(d))
            .or_else(|| self.current.as_ref().and_then(|c| self.datasets.get(c)));
        let ds = ds?;
        let col = ds.column(&word)?;
        Some(Inspection {
            plain: format!("{}.{}: {}", ds.name, col.name, column_summary(col)),
        })
    }
}

fn statement_before(before: &str) -> String {
    let mut lines: Vec<&str> = Vec::new();
    for l in before.split('\n').rev() {
        if !lines.is_empty() && !l.trim_end().ends_with(',') {
            break;
        }
        lines.push(l);
    }
    lines.reverse();
    lines.join("\n")
}

fn column_summary(c: &crate::data::Column) -> String {
    let miss = c.missing();
    match &c.data {
        ColumnData::Numeric(n) => {
            let present: Vec<f64> = n.values.iter().copied().filter(|v| !v.is_nan()).collect();
            let lo = present.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = present.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let mut s = format!("numeric, range {} to {}", num(lo), num(hi));
            if miss > 0 {
                s.push_str(&format!(", {miss} missing"));
            }
            s
        }
        ColumnData::Factor(f) => {
            let shown: Vec<String> = f
                .levels
                .iter()
                .take(12)
                .map(|l| crate::error::excerpt_to(l, 40))
                .collect();
            let more = if f.levels.len() > 12 {
                format!(", … ({} more)", f.levels.len() - 12)
            } else {
                String::new()
            };
            let mut s = format!(
                "factor, {} level{}: {}{more}",
                f.levels.len(),
                plural(f.levels.len()),
                shown.join(", ")
            );
            if miss > 0 {
                s.push_str(&format!("; {miss} missing"));
            }
            s
        }
    }
}

fn delimiter_name(d: u8) -> &'static str {
    match d {
        b';' => "semicolon-separated",
        b'\t' => "tab-separated",
        _ => "comma-separated",
    }
}

/// Most columns listed in the answer of `read` (and `show`); the rest are counted in a note.
const SHOWN_COLUMNS: usize = 200;

fn read_answer(ds: &Dataset) -> Answer {
    let head = format!(
        "dataset {}: {} row{} × {} column{} from {} ({})",
        ds.name,
        ds.n_rows(),
        plural(ds.n_rows()),
        ds.columns.len(),
        plural(ds.columns.len()),
        ds.source,
        delimiter_name(ds.delimiter)
    );
    let mut plain = head.clone();
    let listed = &ds.columns[..ds.columns.len().min(SHOWN_COLUMNS)];
    for c in listed {
        plain.push_str(&format!(
            "\n  {}: {}",
            crate::error::excerpt(&c.name),
            column_summary(c)
        ));
    }
    let hidden = ds.columns.len() - listed.len();
    if hidden > 0 {
        plain.push_str(&format!(
            "\n  … and {hidden} more columns (the first {SHOWN_COLUMNS} are listed)"
        ));
    }
    let cols: Vec<Json> = listed
        .iter()
        .map(|c| {
            // Levels as data, bounded like every message: the first 1,000, each cut to 200
            // characters (`levels_total` counts them all).
            let (levels, total) = match &c.data {
                ColumnData::Factor(f) => (
                    json!(
                        f.levels
                            .iter()
                            .take(1000)
                            .map(|l| crate::error::excerpt_to(l, 200))
                            .collect::<Vec<_>>()
                    ),
                    json!(f.levels.len()),
                ),
                ColumnData::Numeric(_) => (Json::Null, Json::Null),
            };
            json!({"column": crate::error::excerpt_to(&c.name, 200), "type": c.type_name(), "missing": c.missing(), "levels": levels, "levels_total": total, "label": c.label})
        })
        .collect();
    let mut bundle_tables = serde_json::Map::new();
    bundle_tables.insert("columns".into(), Json::Array(cols));
    Answer {
        command: "read".into(),
        title: head,
        tables: vec![DisplayTable {
            caption: String::new(),
            columns: vec![
                ("column".into(), Align::Left),
                ("type".into(), Align::Left),
                ("summary".into(), Align::Left),
            ],
            rows: listed
                .iter()
                .map(|c| {
                    vec![
                        crate::error::excerpt(&c.name),
                        c.type_name().into(),
                        column_summary(c),
                    ]
                })
                .collect(),
        }],
        notes: if hidden > 0 {
            vec![format!(
                "{} columns in all: the first {SHOWN_COLUMNS} are listed here (and in the bundle)",
                ds.columns.len()
            )]
        } else {
            Vec::new()
        },
        plain: Some(plain),
        design: Json::Null,
        bundle_tables,
        provenance: Some(Provenance {
            dataset: ds.name.clone(),
            source: ds.source.clone(),
            sha256: ds.sha256.clone(),
            rows_used: ds.n_rows(),
            rows_dropped: 0,
            read_at: ds.read_at.clone(),
        }),
        with_bundle: true,
        ..Default::default()
    }
}

/// A dataset summary shows its notes (what changed, unfinished lines) in the plain text too.
fn notes_in_plain(mut a: Answer) -> Answer {
    if let Some(p) = a.plain.as_mut() {
        for n in &a.notes {
            p.push_str("\nnote: ");
            p.push_str(n);
        }
    }
    a
}

fn short(text: String) -> Answer {
    Answer {
        plain: Some(text),
        ..Default::default()
    }
}

fn help_answer(topic: Option<&Name>) -> Result<Answer, CellError> {
    match topic {
        Some(t) => {
            let h = help::verb(&t.value).ok_or_else(|| {
                CellError::input(format!("there is no help for `{}`", t.value))
                    .at(t.span)
                    .suggest(nearest(&t.value, lang::VERBS))
                    .note(format!("verbs: {}", lang::VERBS.join(", ")))
            })?;
            let text = help::verb_text(h);
            Ok(Answer {
                command: "help".into(),
                title: h.usage.into(),
                plain: Some(text),
                tables: vec![DisplayTable {
                    caption: String::new(),
                    columns: vec![
                        ("option".into(), Align::Left),
                        ("meaning".into(), Align::Left),
                    ],
                    rows: h
                        .options
                        .iter()
                        .map(|(o, d)| vec![o.to_string(), d.to_string()])
                        .collect(),
                }]
                .into_iter()
                .filter(|t| !t.rows.is_empty())
                .collect(),
                report: None,
                notes: vec![h.summary.to_string(), format!("example: {}", h.example)],
                ..Default::default()
            })
        }
        None => {
            let mut plain = String::from(
                "Partita statements (one per line; a trailing comma continues a line):\n",
            );
            for h in help::VERBS {
                plain.push_str(&format!("\n  {}\n      {}\n", h.usage, h.summary));
            }
            plain.push_str(&format!(
                "\n{}\n\n`help VERB` shows one verb's options and an example.",
                help::WHERE_HELP
            ));
            Ok(Answer {
                command: "help".into(),
                title: "Partita statements".into(),
                tables: vec![DisplayTable {
                    caption: "one statement per line; a trailing comma continues it".into(),
                    columns: vec![
                        ("statement".into(), Align::Left),
                        ("what it does".into(), Align::Left),
                    ],
                    rows: help::VERBS
                        .iter()
                        .map(|h| vec![h.usage.to_string(), h.summary.to_string()])
                        .collect(),
                }],
                notes: vec![
                    help::WHERE_HELP.into(),
                    "`help VERB` shows one verb's options and an example.".into(),
                ],
                plain: Some(plain),
                ..Default::default()
            })
        }
    }
}

pub(crate) fn check_options(
    options: &[Opt],
    verb: &str,
    allowed: &[&str],
) -> Result<(), CellError> {
    for (i, o) in options.iter().enumerate() {
        if !allowed.contains(&o.name.value.as_str()) {
            let mut e = CellError::input(format!("`{verb}` has no option `{}`", o.name.value))
                .at(o.name.span);
            e = if allowed.is_empty() {
                e.note(format!("`{verb}` takes no options"))
            } else {
                e.suggest(nearest(&o.name.value, allowed.iter().copied()))
                    .note(format!("options of `{verb}`: {}", allowed.join(", ")))
            };
            return Err(e);
        }
        if options[..i].iter().any(|p| p.name.value == o.name.value) {
            return Err(
                CellError::input(format!("option `{}` is given twice", o.name.value))
                    .at(o.name.span),
            );
        }
    }
    Ok(())
}

pub(crate) fn one_value(o: &Opt) -> Result<&Value, CellError> {
    match o.values.as_slice() {
        [v] => Ok(&v.value),
        [] => Err(CellError::input(format!("option `{}` needs a value", o.name.value)).at(o.span)),
        _ => Err(CellError::input(format!("option `{}` takes one value", o.name.value)).at(o.span)),
    }
}

pub(crate) fn one_number(o: &Opt) -> Result<f64, CellError> {
    match one_value(o)? {
        Value::Num(v, _) => Ok(*v),
        other => Err(CellError::input(format!(
            "option `{}` takes a number, not \"{}\"",
            o.name.value,
            other.text()
        ))
        .at(o.span)),
    }
}

fn one_text(o: &Opt) -> Result<String, CellError> {
    Ok(one_value(o)?.text())
}
