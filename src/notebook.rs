//! Headless execution of an nbformat 4 notebook with the engine directly (no Jupyter), and the
//! standalone HTML report.

use crate::session::exec_error;
use anyhow::{Context, Result, bail};
use engine::{Cancel, Output, Session};
use maud::{DOCTYPE, Markup, PreEscaped, html};
use serde_json::{Value, json};
use std::path::Path;

/// An executed notebook.
pub struct Report {
    nb: Value,
    title: String,
    /// The first failing cell (1-based among all cells) and its message, unless kept going.
    pub failed: Option<(usize, String)>,
    /// The data files the notebook read (absolute paths).
    pub inputs: Vec<std::path::PathBuf>,
    /// A line for the report's footer (when and why it was run).
    pub stamp: String,
}

/// Collects a cell's outputs as a notebook would show them: an update replaces the output with
/// its display id; progress (the `partita-progress` text) is also drawn as a bar on stderr.
#[derive(Default)]
struct Progressive {
    outputs: Vec<Output>,
    progress_shown: bool,
}

impl engine::DisplaySink for Progressive {
    fn display(&mut self, o: Output) {
        if let Some(p) = o.data.get("text/plain").and_then(|v| v.as_str()) {
            if o.display_id.is_some() && p.starts_with("permute: ") {
                eprint!("\r{}", p.lines().next().unwrap_or(""));
                self.progress_shown = true;
            }
        }
        if o.update {
            if let Some(slot) = self
                .outputs
                .iter_mut()
                .find(|x| x.display_id.is_some() && x.display_id == o.display_id)
            {
                slot.data = o.data;
                slot.metadata = o.metadata;
                return;
            }
        }
        self.outputs.push(o);
    }
}

fn source_of(cell: &Value) -> String {
    match &cell["source"] {
        Value::String(s) => s.clone(),
        Value::Array(a) => a.iter().filter_map(Value::as_str).collect(),
        _ => String::new(),
    }
}

/// Runs every code cell in order.
pub fn run(path: &Path, keep_going: bool) -> Result<Report> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("cannot read {}", path.display()))?;
    let mut nb: Value = serde_json::from_str(&text)
        .with_context(|| format!("{} is not a JSON notebook", path.display()))?;
    if nb["nbformat"].as_u64() != Some(4) {
        bail!("{} is not an nbformat 4 notebook", path.display());
    }
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let base = if base.as_os_str().is_empty() {
        std::path::PathBuf::from(".")
    } else {
        base
    };
    let mut session = Session::with_base_dir(base);
    let cancel = Cancel::default();
    let mut count = 0u64;
    let mut failed = None;
    let title = path
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("notebook")
        .to_string();
    let Some(cells) = nb["cells"].as_array_mut() else {
        bail!("{} has no cells list", path.display())
    };
    let mut stop = false;
    for (i, cell) in cells.iter_mut().enumerate() {
        if cell["cell_type"] != "code" {
            continue;
        }
        if stop {
            cell["outputs"] = json!([]);
            cell["execution_count"] = Value::Null;
            continue;
        }
        let src = source_of(cell);
        count += 1;
        let mut outs = Progressive::default();
        let result = session.run_cell(&src, &cancel, &mut outs);
        if outs.progress_shown {
            eprintln!();
        }
        let mut outputs: Vec<Value> = outs
            .outputs
            .into_iter()
            .map(|o| {
                if o.is_result {
                    json!({"output_type": "execute_result", "execution_count": count, "data": o.data, "metadata": o.metadata})
                } else {
                    json!({"output_type": "display_data", "data": o.data, "metadata": o.metadata})
                }
            })
            .collect();
        if let Err(e) = result {
            let err = exec_error(&e, &src);
            eprintln!(
                "partita: cell {} failed: {}: {}",
                i + 1,
                err.ename,
                err.evalue
            );
            outputs.push(json!({"output_type": "error", "ename": err.ename, "evalue": err.evalue, "traceback": err.traceback}));
            if failed.is_none() {
                failed = Some((i + 1, format!("{}: {}", err.ename, err.evalue)));
            }
            stop = !keep_going;
        }
        cell["outputs"] = Value::Array(outputs);
        cell["execution_count"] = json!(count);
    }
    let ks = &mut nb["metadata"]["kernelspec"];
    *ks = json!({"name": "partita", "display_name": "Partita", "language": "partita"});
    nb["metadata"]["language_info"] = json!({"name": "partita", "version": "1", "mimetype": "text/x-partita", "file_extension": ".partita"});
    Ok(Report {
        nb,
        title,
        failed: if keep_going { None } else { failed },
        inputs: session.input_files(),
        stamp: String::new(),
    })
}

/// Writes the executed notebook and/or the HTML report.
pub fn write_outputs(report: &Report, output: Option<&Path>, html: Option<&Path>) -> Result<()> {
    if let Some(o) = output {
        write_atomic(o, report.notebook_json()?.as_bytes())?;
        println!("wrote {}", o.display());
    }
    if let Some(h) = html {
        write_atomic(h, report.html().as_bytes())?;
        println!("wrote {}", h.display());
    }
    Ok(())
}

/// `partita run --watch`: runs the notebook, writes its outputs, then runs it again whenever
/// one of the data files it read, or the notebook itself, changes (debounced as in the
/// kernel). A run with a failing cell leaves the last good outputs in place and says so.
pub fn watch(
    path: &Path,
    keep_going: bool,
    output: Option<&Path>,
    html: Option<&Path>,
) -> Result<()> {
    use kernel::watch::{Debounce, FileWatch, QUIET};
    use std::sync::mpsc::{RecvTimeoutError, channel};
    let (tx, rx) = channel::<std::path::PathBuf>();
    let tx = std::sync::Mutex::new(tx);
    let mut watcher = FileWatch::new(move |p| {
        if let Ok(t) = tx.lock() {
            let _ = t.send(p);
        }
    })
    .map_err(anyhow::Error::msg)?;
    let nb_abs = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    if output.is_some_and(|o| std::path::absolute(o).ok().as_ref() == Some(&nb_abs)) {
        bail!(
            "--watch cannot write the executed notebook over {} itself (each write would start another run); give --output another name",
            path.display()
        );
    }
    let mut followed: Vec<std::path::PathBuf> = vec![nb_abs.clone()];
    let mut debounce = Debounce::new(QUIET);
    let mut good_at: Option<String> = None;
    let mut why = String::from("first run");
    for run_no in 1.. {
        let at = engine::render::fmt::local_time();
        match run(path, keep_going) {
            Ok(mut report) => {
                for f in &report.inputs {
                    if !followed.contains(f) {
                        followed.push(f.clone());
                    }
                }
                report.stamp = format!("run {run_no} at {at} ({why})");
                match (&report.failed, &good_at) {
                    (Some((cell, msg)), Some(good)) => eprintln!(
                        "partita: run {run_no} failed at cell {cell}: {msg}; the outputs of the run at {good} are kept"
                    ),
                    (failed, _) => {
                        write_outputs(&report, output, html)?;
                        match failed {
                            Some((cell, msg)) => eprintln!("partita: cell {cell} failed: {msg}"),
                            None => good_at = Some(at.clone()),
                        }
                    }
                }
            }
            Err(e) => eprintln!("partita: run {run_no} could not start: {e:#}"),
        }
        watcher.set(&followed);
        eprintln!(
            "partita: watching {} file{} for changes (Ctrl-C stops)",
            followed.len(),
            if followed.len() == 1 { "" } else { "s" }
        );
        let changed = loop {
            let got = match debounce.timeout() {
                None => rx.recv().map_err(|_| RecvTimeoutError::Disconnected),
                Some(t) => rx.recv_timeout(t),
            };
            match got {
                Ok(p) => debounce.touched(p),
                Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => bail!("the file watcher stopped"),
            }
            let due = debounce.due();
            if !due.is_empty() {
                break due;
            }
        };
        let names: Vec<String> = changed
            .iter()
            .map(|p| {
                p.file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default()
            })
            .collect();
        why = format!("{} changed", names.join(", "));
        eprintln!("partita: {why}; running {} again", path.display());
    }
    Ok(())
}

/// Writes through a temporary file and a rename (the engine's atomic write, as `save` uses).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    engine::write_atomic(path, bytes).with_context(|| format!("cannot write {}", path.display()))
}

impl Report {
    /// The executed notebook as JSON text.
    pub fn notebook_json(&self) -> Result<String> {
        Ok(serde_json::to_string_pretty(&self.nb)? + "\n")
    }

    /// A standalone HTML report: markdown cells rendered, code and outputs inline.
    pub fn html(&self) -> String {
        let cells = self.nb["cells"].as_array().cloned().unwrap_or_default();
        let page: Markup = html! {
            (DOCTYPE)
            html lang="en" {
                head {
                    meta charset="utf-8";
                    title { (self.title) }
                    style { (PreEscaped(CSS)) }
                }
                body {
                    main {
                        @for c in &cells { (cell_html(c)) }
                    }
                    footer {
                        "Produced by Partita " (env!("CARGO_PKG_VERSION")) " from " (self.title) ".ipynb"
                        @if !self.stamp.is_empty() { " — " (self.stamp) }
                    }
                }
            }
        };
        page.into_string()
    }
}

const CSS: &str = "body{font-family:system-ui,sans-serif;max-width:980px;margin:24px auto;padding:0 16px;color:#222}\
pre.src{background:#f5f6f8;border-left:3px solid #1f5f9e;padding:8px 10px;overflow-x:auto}\
pre.err{background:#fff3f0;border-left:3px solid #b3261e;padding:8px 10px;overflow-x:auto}\
.out{margin:6px 0 18px 0}footer{color:#777;font-size:12px;margin:30px 0}";

fn markdown(src: &str) -> String {
    let parser = pulldown_cmark::Parser::new_ext(src, pulldown_cmark::Options::ENABLE_TABLES);
    let mut out = String::new();
    pulldown_cmark::html::push_html(&mut out, parser);
    out
}

fn text_of(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        Value::Array(a) => a.iter().filter_map(Value::as_str).collect(),
        other => other.to_string(),
    }
}

fn cell_html(c: &Value) -> Markup {
    let src = source_of(c);
    match c["cell_type"].as_str() {
        Some("markdown") => html! { section class="md" { (PreEscaped(markdown(&src))) } },
        Some("code") => html! {
            section class="code" {
                pre class="src" { (src) }
                @for o in c["outputs"].as_array().into_iter().flatten() {
                    div class="out" { (output_html(o)) }
                }
            }
        },
        _ => html! {},
    }
}

fn output_html(o: &Value) -> Markup {
    if o["output_type"] == "error" {
        let tb: Vec<String> = o["traceback"]
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(Value::as_str)
            .map(String::from)
            .collect();
        return html! { pre class="err" { (tb.join("\n")) } };
    }
    let d = &o["data"];
    // Partita's own HTML is produced with escaping already; it embeds the figure.
    if let Some(h) = d.get("text/html") {
        html! { (PreEscaped(text_of(h))) }
    } else if let Some(s) = d.get("image/svg+xml") {
        html! { (PreEscaped(text_of(s))) }
    } else if let Some(t) = d.get("text/plain") {
        html! { pre { (text_of(t)) } }
    } else {
        html! {}
    }
}
