//! HTML rendering through maud, which escapes every interpolated string: a column or level
//! named `<script>…` renders as text. Only the SVG produced by [`super::svg`] (whose text
//! plotters escapes) is inserted unescaped.

use super::{Align, Answer, DisplayTable};
use maud::{Markup, PreEscaped, html};

const STYLE: &str = "<style>.partita-result{font-family:system-ui,sans-serif;font-size:13px;line-height:1.4}\
.partita-result table{border-collapse:collapse;margin:6px 0}\
.partita-result caption{text-align:left;font-weight:600;padding:2px 0}\
.partita-result th{border-bottom:1px solid #555;padding:2px 10px;font-weight:600}\
.partita-result td{padding:2px 10px}\
.partita-result td.num,.partita-result th.num{text-align:right;font-variant-numeric:tabular-nums}\
.partita-result tr:last-child td{border-bottom:1px solid #999}\
.partita-report{font-size:14px;margin:6px 0}\
.partita-notes{margin:4px 0;padding-left:18px;color:#444}\
.partita-small{color:#666;font-size:11px;margin:2px 0}\
.partita-refresh{border-left:3px solid #2a7d4f;padding:2px 8px;margin:4px 0;background:#f1f8f4}\
.partita-refresh.stale{border-left-color:#b3261e;background:#fff3f0}</style>";

/// The answer as an HTML fragment.
pub fn render(a: &Answer) -> String {
    let m: Markup = html! {
        (PreEscaped(STYLE))
        div class="partita-result" {
            @if let Some(r) = &a.refresh {
                p class=(if r.ok { "partita-refresh" } else { "partita-refresh stale" }) { (r.text) }
            }
            @if !a.title.is_empty() { p { strong { (a.title) } } }
            @if let Some(p) = &a.plain { @if a.tables.is_empty() && a.title.is_empty() { pre { (p) } } }
            @for t in &a.tables { (table(t)) }
            @if let Some(svg) = &a.figure { div class="partita-figure" { (PreEscaped(svg)) } }
            @for svg in &a.extra_figures { div class="partita-figure" { (PreEscaped(svg)) } }
            @if let Some(r) = &a.report { p class="partita-report" { (r) } }
            @if !a.notes.is_empty() {
                ul class="partita-notes" { @for n in &a.notes { li { (n) } } }
            }
            @if let Some(c) = &a.caution { p class="partita-small" { (c) } }
            @if let Some(p) = &a.provenance { p class="partita-small" { (super::text::provenance_line(p)) } }
        }
    };
    m.into_string()
}

/// One table.
pub fn table(t: &DisplayTable) -> Markup {
    let class = |j: usize| {
        if t.columns.get(j).is_some_and(|c| c.1 == Align::Right) {
            "num"
        } else {
            ""
        }
    };
    html! {
        table {
            @if !t.caption.is_empty() { caption { (t.caption) } }
            thead { tr { @for (j, (h, _)) in t.columns.iter().enumerate() { th class=(class(j)) { (h) } } } }
            tbody {
                @for r in &t.rows {
                    tr { @for (j, c) in r.iter().enumerate() { td class=(class(j)) { (c) } } }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_escaped() {
        let a = Answer {
            title: "<script>alert(1)</script>".into(),
            tables: vec![DisplayTable {
                caption: "c".into(),
                columns: vec![("<b>x</b>".into(), Align::Left)],
                rows: vec![vec!["<script>alert(1)</script>".into()]],
            }],
            notes: vec!["a & b".into()],
            ..Default::default()
        };
        let h = render(&a);
        assert!(!h.contains("<script>alert"), "{h}");
        assert!(h.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
        assert!(h.contains("&lt;b&gt;x&lt;/b&gt;"));
        assert!(h.contains("a &amp; b"));
    }
}
