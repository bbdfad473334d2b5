//! Results that follow their data: datasets read `with watch`, the statements that used them,
//! and the refresh that reruns those statements when the file changes.
//!
//! Every answer of a statement on a watched dataset (or on one derived from it by `unpivot`)
//! is sent with a display id and remembered with its statement text. [`Session::refresh`]
//! re-reads a watched file and, when its content changed, reruns the remembered statements in
//! their original order, each answer replacing its display (`update`) under a banner saying
//! when and from how many rows. A file that cannot be read (gone, a folder, a broken last line
//! that is not merely unfinished) leaves every result in place, with a banner saying why.

use super::Session;
use crate::lang::ast::StmtKind;
use crate::render::{Answer, Refresh};
use crate::{Cancel, CellError, DisplaySink, Output};
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

/// One remembered statement.
#[derive(Debug, Clone)]
pub(super) struct Entry {
    /// The statement's source text (parsed again to rerun).
    text: String,
    /// The dataset it used (for `read`, the one it made).
    dataset: String,
    /// The dataset it makes (`unpivot … as NEW`).
    creates: Option<String>,
    /// Whether it is the `read` of its dataset.
    is_read: bool,
    /// Its display.
    display_id: String,
    /// Its last good answer, kept for a refresh that fails.
    last: Answer,
}

/// The session's watch state.
#[derive(Debug, Default)]
pub(super) struct Live {
    /// Datasets read `with watch`.
    watch: BTreeSet<String>,
    /// Those and the datasets made from them.
    sets: BTreeSet<String>,
    entries: Vec<Entry>,
    prefix: String,
    next_id: u64,
    /// Set while a refresh re-reads: an unfinished last line is left out rather than an error.
    pub(super) partial_tail: bool,
}

impl Live {
    fn new_id(&mut self) -> String {
        if self.prefix.is_empty() {
            let t = std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_nanos() as u64)
                .unwrap_or(0);
            self.prefix = format!("partita-{:x}-{:x}", std::process::id(), t & 0xffff_ffff);
        }
        self.next_id += 1;
        format!("{}-{}", self.prefix, self.next_id)
    }

    /// Stops following `name` and everything made from it.
    fn forget(&mut self, name: &str) {
        self.watch.remove(name);
        if !self.sets.remove(name) {
            return;
        }
        let made: Vec<String> = self
            .entries
            .iter()
            .filter(|e| e.dataset == name)
            .filter_map(|e| e.creates.clone())
            .collect();
        self.entries.retain(|e| e.dataset != name);
        for m in made {
            self.forget(&m);
        }
    }
}

/// Sends nothing: a rerun's progress displays are not shown.
struct Discard;
impl DisplaySink for Discard {
    fn display(&mut self, _: Output) {}
}

fn normalised(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

fn absolute(p: &Path) -> PathBuf {
    std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf())
}

/// The time for a banner (see [`crate::render::fmt::local_time`]) and for the bundle
/// (RFC 3339, UTC).
fn clock() -> (String, String) {
    (
        crate::render::fmt::local_time(),
        chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
    )
}

impl Session {
    /// The dataset a statement uses, resolved before it runs.
    pub(super) fn statement_dataset(&self, kind: &StmtKind) -> Option<String> {
        match kind {
            StmtKind::Read { name, .. } | StmtKind::Show { name, .. } => Some(name.value.clone()),
            StmtKind::Unpivot { source, .. } => Some(source.value.clone()),
            StmtKind::Analysis(a) => a
                .dataset
                .as_ref()
                .map(|n| n.value.clone())
                .or_else(|| self.current.clone()),
            _ => None,
        }
    }

    /// After a statement succeeded: updates which datasets are followed, and returns whether
    /// the statement's answer is live (gets a display id and is rerun on refresh).
    pub(super) fn bind_live(&mut self, kind: &StmtKind, used: Option<&str>) -> bool {
        match kind {
            StmtKind::Read { name, options, .. } => {
                if options.iter().any(|o| o.name.value == "watch") {
                    self.live.watch.insert(name.value.clone());
                    self.live.sets.insert(name.value.clone());
                    true
                } else {
                    self.live.forget(&name.value);
                    false
                }
            }
            StmtKind::Unpivot { source, new, .. } => {
                if self.live.sets.contains(&source.value) {
                    self.live.sets.insert(new.value.clone());
                    true
                } else {
                    self.live.forget(&new.value);
                    false
                }
            }
            StmtKind::Show { .. } | StmtKind::Analysis(_) => {
                used.is_some_and(|u| self.live.sets.contains(u))
            }
            _ => false,
        }
    }

    /// Remembers a live statement and returns its display id. The same statement on the same
    /// dataset replaces its earlier entry (a cell run again); a dataset has one `read` entry.
    pub(super) fn record_live(
        &mut self,
        kind: &StmtKind,
        text: &str,
        dataset: &str,
        answer: &Answer,
    ) -> String {
        let id = self.live.new_id();
        let is_read = matches!(kind, StmtKind::Read { .. });
        let creates = match kind {
            StmtKind::Unpivot { new, .. } => Some(new.value.clone()),
            _ => None,
        };
        let entry = Entry {
            text: text.to_string(),
            dataset: dataset.to_string(),
            creates,
            is_read,
            display_id: id.clone(),
            last: answer.clone(),
        };
        let key = normalised(text);
        if is_read {
            self.live
                .entries
                .retain(|e| !(e.is_read && e.dataset == dataset && normalised(&e.text) != key));
        }
        match self
            .live
            .entries
            .iter_mut()
            .find(|e| e.dataset == dataset && normalised(&e.text) == key)
        {
            Some(slot) => *slot = entry,
            None => self.live.entries.push(entry),
        }
        id
    }

    /// The files read `with watch`, as absolute paths, each once.
    pub fn watched_files(&self) -> Vec<PathBuf> {
        let mut v: Vec<PathBuf> = self
            .live
            .watch
            .iter()
            .filter_map(|n| self.origins.get(n))
            .map(|o| absolute(&o.0))
            .collect();
        v.sort();
        v.dedup();
        v
    }

    /// Every file the session has read data from, as absolute paths, each once.
    pub fn input_files(&self) -> Vec<PathBuf> {
        let mut v: Vec<PathBuf> = self.origins.values().map(|o| absolute(&o.0)).collect();
        v.sort();
        v.dedup();
        v
    }

    /// Re-reads the watched datasets that come from `path` and, if the content changed,
    /// reruns the statements that used them; each answer goes to `sink` as an update of its
    /// display. Returns the number of updates sent (0 when the content is unchanged).
    pub fn refresh(&mut self, path: &Path, cancel: &Cancel, sink: &mut dyn DisplaySink) -> usize {
        let target = absolute(path);
        let names: Vec<String> = self
            .live
            .watch
            .iter()
            .filter(|n| {
                self.origins
                    .get(*n)
                    .is_some_and(|o| absolute(&o.0) == target)
            })
            .cloned()
            .collect();
        let (current, last) = (self.current.clone(), self.last.clone());
        let mut sent = 0;
        for n in names {
            sent += self.refresh_dataset(&n, cancel, sink);
        }
        self.current = current;
        self.last = last;
        sent
    }

    /// Parses `text` again and runs its statement on `dataset` as the current dataset.
    fn rerun(
        &mut self,
        text: &str,
        dataset: &str,
        cancel: &Cancel,
    ) -> Result<Option<Answer>, CellError> {
        let stmts = crate::lang::parse(text)?;
        let Some(st) = stmts.first() else {
            return Ok(None);
        };
        self.current = Some(dataset.to_string());
        let a = self.run_statement(&st.kind, st.span, cancel, &mut Discard)?;
        Ok(a.map(|a| self.was_now(a, text)))
    }

    fn refresh_dataset(
        &mut self,
        name: &str,
        cancel: &Cancel,
        sink: &mut dyn DisplaySink,
    ) -> usize {
        let Some(ri) = self
            .live
            .entries
            .iter()
            .position(|e| e.is_read && e.dataset == name)
        else {
            return 0;
        };
        let Some(prev) = self.datasets.get(name) else {
            return 0;
        };
        let (prev_rows, prev_sha, prev_at) =
            (prev.n_rows(), prev.sha256.clone(), prev.read_at.clone());
        let source = prev.source.clone();
        let text = self.live.entries[ri].text.clone();
        self.live.partial_tail = true;
        let read = self.rerun(&text, name, cancel);
        self.live.partial_tail = false;
        let (time, at) = clock();
        let banner = |ok: bool, rows: usize, text: String| Refresh {
            at: at.clone(),
            source: source.clone(),
            rows,
            previous_rows: prev_rows,
            ok,
            text,
        };
        let mut sent = 0;
        let mut send = |sink: &mut dyn DisplaySink, e: &Entry, mut a: Answer, r: Refresh| {
            a.refresh = Some(r);
            sink.display(Output {
                data: a.mime_bundle(),
                metadata: Default::default(),
                is_result: false,
                display_id: Some(e.display_id.clone()),
                update: true,
            });
            sent += 1;
        };
        let read_answer = match read {
            Ok(a) => a,
            Err(e) => {
                let b = banner(
                    false,
                    prev_rows,
                    format!(
                        "at {time} {source} could not be read again: {}. Kept: the result from the last good read ({prev_rows} rows, read at {prev_at})",
                        e.message
                    ),
                );
                let affected = self.affected(name);
                for entry in self
                    .live
                    .entries
                    .iter()
                    .filter(|x| affected.contains(&x.dataset))
                {
                    send(sink, entry, entry.last.clone(), b.clone());
                }
                return sent;
            }
        };
        let Some(ds) = self.datasets.get(name) else {
            return 0;
        };
        if ds.sha256 == prev_sha {
            return 0;
        }
        let rows = ds.n_rows();
        let ok = banner(
            true,
            rows,
            format!("refreshed at {time}: {source} changed — {rows} rows (was {prev_rows})"),
        );
        if let Some(a) = read_answer {
            self.live.entries[ri].last = a.clone();
            send(sink, &self.live.entries[ri], a, ok.clone());
        }
        let mut affected: BTreeSet<String> = BTreeSet::from([name.to_string()]);
        for i in 0..self.live.entries.len() {
            let e = self.live.entries[i].clone();
            if e.is_read || !affected.contains(&e.dataset) {
                continue;
            }
            match self.rerun(&e.text, &e.dataset, cancel) {
                Ok(Some(a)) => {
                    self.live.entries[i].last = a.clone();
                    send(sink, &e, a, ok.clone());
                    if let Some(c) = &e.creates {
                        affected.insert(c.clone());
                    }
                }
                Ok(None) => {}
                Err(err) => {
                    let b = banner(
                        false,
                        rows,
                        format!(
                            "at {time} {source} changed ({rows} rows, was {prev_rows}) but this statement failed on the new data: {}. Kept: the result from the previous data",
                            err.message
                        ),
                    );
                    send(sink, &e, e.last.clone(), b);
                }
            }
        }
        sent
    }

    /// `name` and the datasets made from it by remembered statements.
    fn affected(&self, name: &str) -> BTreeSet<String> {
        let mut set = BTreeSet::from([name.to_string()]);
        for e in &self.live.entries {
            if let Some(c) = &e.creates {
                if set.contains(&e.dataset) {
                    set.insert(c.clone());
                }
            }
        }
        set
    }
}
