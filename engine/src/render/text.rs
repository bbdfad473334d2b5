//! Plain-text rendering, for terminals and `text/plain`.

use super::{Align, Answer, DisplayTable};

/// The answer as plain text.
pub fn render(a: &Answer) -> String {
    let mut out = String::new();
    if let Some(r) = &a.refresh {
        out.push_str(&format!("[{}]\n", r.text));
    }
    if let Some(p) = &a.plain {
        out.push_str(p);
        return out;
    }
    if !a.title.is_empty() {
        out.push_str(&a.title);
        out.push('\n');
    }
    for t in &a.tables {
        out.push('\n');
        out.push_str(&table(t));
    }
    if let Some(r) = &a.report {
        out.push('\n');
        out.push_str(r);
        out.push('\n');
    }
    for n in &a.notes {
        out.push_str("note: ");
        out.push_str(n);
        out.push('\n');
    }
    if let Some(c) = &a.caution {
        out.push_str(c);
        out.push('\n');
    }
    if let Some(p) = &a.provenance {
        out.push_str(&provenance_line(p));
        out.push('\n');
    }
    out.trim_end().to_string()
}

/// "dataset trial (data/trial.csv, sha256 1a2b3c4d5e6f…), 60 rows used, read 2026-…"
pub fn provenance_line(p: &super::Provenance) -> String {
    let short: String = p.sha256.chars().take(12).collect();
    let dropped = if p.rows_dropped > 0 {
        format!(", {} set aside", p.rows_dropped)
    } else {
        String::new()
    };
    format!(
        "dataset {} from {} (sha256 {short}…), {} rows used{dropped}, read {}",
        p.dataset, p.source, p.rows_used, p.read_at
    )
}

/// A table with aligned columns.
pub fn table(t: &DisplayTable) -> String {
    let ncol = t.columns.len();
    let mut w: Vec<usize> = t.columns.iter().map(|(h, _)| h.chars().count()).collect();
    for r in &t.rows {
        for (j, c) in r.iter().enumerate().take(ncol) {
            w[j] = w[j].max(c.chars().count());
        }
    }
    let cell = |s: &str, j: usize| {
        let pad = w[j].saturating_sub(s.chars().count());
        match t.columns[j].1 {
            Align::Left => format!("{s}{}", " ".repeat(pad)),
            Align::Right => format!("{}{s}", " ".repeat(pad)),
        }
    };
    let mut out = String::new();
    if !t.caption.is_empty() {
        out.push_str(&t.caption);
        out.push('\n');
    }
    let head: Vec<String> = t
        .columns
        .iter()
        .enumerate()
        .map(|(j, (h, _))| cell(h, j))
        .collect();
    out.push_str(head.join("  ").trim_end());
    out.push('\n');
    let rule: Vec<String> = w.iter().map(|&n| "─".repeat(n)).collect();
    out.push_str(&rule.join("  "));
    out.push('\n');
    for r in &t.rows {
        let cells: Vec<String> = (0..ncol)
            .map(|j| cell(r.get(j).map(String::as_str).unwrap_or(""), j))
            .collect();
        out.push_str(cells.join("  ").trim_end());
        out.push('\n');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn aligned_table() {
        let t = DisplayTable {
            caption: "cap".into(),
            columns: vec![("Source".into(), Align::Left), ("df".into(), Align::Right)],
            rows: vec![
                vec!["feed".into(), "2".into()],
                vec!["Residual".into(), "57".into()],
            ],
        };
        assert_eq!(
            table(&t),
            "cap\nSource    df\n────────  ──\nfeed       2\nResidual  57\n"
        );
    }
}
