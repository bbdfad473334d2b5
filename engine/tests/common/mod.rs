//! Helpers shared by the statement-level tests: run a cell, read a file into a session, and
//! take the result bundle of an output.

#![allow(dead_code)]

use engine::{Cancel, CellError, Output, Session};

/// Runs `src` in `s`, collecting the outputs.
pub fn run(s: &mut Session, src: &str) -> Result<Vec<Output>, CellError> {
    let mut out = Vec::new();
    s.run_cell(src, &Cancel::default(), &mut out).map(|_| out)
}

/// A session that has read `text` as dataset `d` (each call writes its own file).
pub fn with_data(text: &str) -> Session {
    static N: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let n = N.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
    let d = std::env::temp_dir().join(format!("partita-tests-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    let p = d.join(format!("{}-{n}.csv", module_path!().replace("::", "-")));
    std::fs::write(&p, text).unwrap();
    let mut s = Session::new();
    run(&mut s, &format!("read \"{}\" as d", p.display())).unwrap();
    s
}

/// The result bundle of an output.
pub fn bundle(o: &Output) -> &serde_json::Value {
    &o.data["application/vnd.partita.result+json"]
}

/// The text in column `key` of every row of bundle table `table`.
pub fn texts<'a>(b: &'a serde_json::Value, table: &str, key: &str) -> Vec<&'a str> {
    b["tables"][table]
        .as_array()
        .unwrap_or_else(|| panic!("no table {table}"))
        .iter()
        .map(|r| {
            r[key]
                .as_str()
                .unwrap_or_else(|| panic!("{table}.{key} is not text"))
        })
        .collect()
}
