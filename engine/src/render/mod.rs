//! Rendering: an [`Answer`] (plain data) becomes a MIME bundle — `text/html` (auto-escaped
//! through maud), `image/svg+xml` (plotters), `text/plain`, `text/markdown` (the report
//! sentence) and the JSON result bundle of `design/results.md`. Every renderer reads the same
//! struct; none computes.

pub mod error;
pub mod fmt;
pub mod html;
pub mod svg;
pub mod text;

use serde_json::{Map, Value, json};

/// One line of a between-subjects ANOVA table as shown.
#[derive(Debug, Clone)]
pub struct AnovaLine<'a> {
    /// Effect, `Residual` or `Total`.
    pub effect: &'a str,
    /// df.
    pub df: f64,
    /// SS.
    pub ss: f64,
    /// MS (none for Total).
    pub ms: Option<f64>,
    /// F (none on the error and total lines, or when undefined).
    pub f: Option<f64>,
    /// Whether the line is an effect: a missing F then reads "undefined".
    pub is_effect: bool,
    /// p.
    pub p: Option<f64>,
    /// The two effect sizes of the table's last columns.
    pub sizes: [Option<f64>; 2],
}

/// A between-subjects ANOVA table: Source, df, SS, MS, F, p and two effect-size columns
/// headed `size_heads`.
pub fn anova_table<'a>(
    caption: String,
    size_heads: [&str; 2],
    lines: impl Iterator<Item = AnovaLine<'a>>,
) -> DisplayTable {
    use fmt::{df, num, p_table};
    let opt = |x: Option<f64>| x.map(num).unwrap_or_default();
    let mut columns: Vec<(String, Align)> = ["Source", "df", "SS", "MS", "F", "p"]
        .iter()
        .map(|h| {
            (
                h.to_string(),
                if *h == "Source" {
                    Align::Left
                } else {
                    Align::Right
                },
            )
        })
        .collect();
    columns.extend(size_heads.iter().map(|h| (h.to_string(), Align::Right)));
    DisplayTable {
        caption,
        columns,
        rows: lines
            .map(|r| {
                vec![
                    r.effect.to_string(),
                    df(r.df),
                    num(r.ss),
                    opt(r.ms),
                    match r.f {
                        Some(f) => num(f),
                        None if r.is_effect => "undefined".into(),
                        None => String::new(),
                    },
                    r.p.map(p_table).unwrap_or_default(),
                    opt(r.sizes[0]),
                    opt(r.sizes[1]),
                ]
            })
            .collect(),
    }
}

/// The MIME type of the machine-readable result bundle.
pub const BUNDLE_MIME: &str = "application/vnd.partita.result+json";

/// How a table column is aligned.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// Text.
    Left,
    /// Numbers.
    Right,
}

/// A table as shown (already formatted text).
#[derive(Debug, Clone, Default)]
pub struct DisplayTable {
    /// Caption above the table.
    pub caption: String,
    /// Column headers with alignment.
    pub columns: Vec<(String, Align)>,
    /// Rows of cell texts.
    pub rows: Vec<Vec<String>>,
}

/// Where the numbers came from.
#[derive(Debug, Clone, Default)]
pub struct Provenance {
    /// Dataset name.
    pub dataset: String,
    /// File as given.
    pub source: String,
    /// SHA-256 of the file.
    pub sha256: String,
    /// Rows used.
    pub rows_used: usize,
    /// Rows set aside.
    pub rows_dropped: usize,
    /// When the file was read.
    pub read_at: String,
}

/// One statement's answer, before rendering.
#[derive(Debug, Clone, Default)]
pub struct Answer {
    /// The command word for the bundle (`anova`, `describe`, …).
    pub command: String,
    /// The title line.
    pub title: String,
    /// Tables as shown.
    pub tables: Vec<DisplayTable>,
    /// An SVG figure.
    pub figure: Option<String>,
    /// Further SVG figures, shown in the HTML beside the first.
    pub extra_figures: Vec<String>,
    /// The report sentence.
    pub report: Option<String>,
    /// Notes.
    pub notes: Vec<String>,
    /// A caution printed small under analyses.
    pub caution: Option<String>,
    /// Provenance, for analyses of a dataset.
    pub provenance: Option<Provenance>,
    /// The design object of the bundle.
    pub design: Value,
    /// The bundle's tables (table name → rows).
    pub bundle_tables: Map<String, Value>,
    /// Plain text to use instead of the rendered tables (short answers).
    pub plain: Option<String>,
    /// Whether to attach the JSON bundle.
    pub with_bundle: bool,
    /// Set on an answer refreshed because its watched data file changed.
    pub refresh: Option<Refresh>,
}

/// The banner of a refreshed answer.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Refresh {
    /// When (RFC 3339, UTC).
    pub at: String,
    /// The file, as the `read` named it.
    pub source: String,
    /// Rows now.
    pub rows: usize,
    /// Rows at the previous read.
    pub previous_rows: usize,
    /// False when the file could not be read or the statement failed on it: the answer is
    /// the last good one.
    pub ok: bool,
    /// The banner sentence.
    pub text: String,
}

impl Answer {
    /// The JSON result bundle.
    pub fn bundle(&self) -> Value {
        let mut b = json!({
            "schema": "partita.result/1",
            "command": self.command,
            "design": self.design,
            "tables": Value::Object(self.bundle_tables.clone()),
            "report": self.report,
            "notes": self.notes,
        });
        if let Some(r) = &self.refresh {
            b["refresh"] = json!({
                "at": r.at, "source": r.source, "rows": r.rows,
                "previous_rows": r.previous_rows, "ok": r.ok, "text": r.text,
            });
        }
        if let Some(p) = &self.provenance {
            b["provenance"] = json!({
                "dataset": p.dataset, "source": p.source, "sha256": p.sha256,
                "rows_used": p.rows_used, "rows_dropped": p.rows_dropped, "read_at": p.read_at,
            });
        }
        b
    }

    /// The MIME bundle sent to the front end.
    pub fn mime_bundle(&self) -> Map<String, Value> {
        let mut m = Map::new();
        m.insert("text/plain".into(), Value::String(text::render(self)));
        m.insert("text/html".into(), Value::String(html::render(self)));
        if let Some(svg) = &self.figure {
            m.insert("image/svg+xml".into(), Value::String(svg.clone()));
        }
        if let Some(r) = &self.report {
            m.insert("text/markdown".into(), Value::String(r.clone()));
        }
        if self.with_bundle {
            m.insert(BUNDLE_MIME.into(), self.bundle());
        }
        m
    }
}
