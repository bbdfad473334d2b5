//! Resolution: an [`Analysis`] checked against the session's datasets, giving a [`Plan`].
//!
//! Here the response must exist and be numeric, each factor must exist, the `where` clause is
//! evaluated once into the rows it keeps, and rows with a missing response or factor are set
//! aside with a note. Nothing downstream re-checks names.

use crate::data::{Column, ColumnData, Dataset, MISSING, NumericColumn};
use crate::error::{CellError, listing, nearest};
use crate::lang::ast::{Analysis, Expr, Name, Value};

/// A checked analysis: the columns and the rows to use.
#[derive(Debug)]
pub struct Plan<'a> {
    /// The dataset.
    pub dataset: &'a Dataset,
    /// The response column (numeric).
    pub response: &'a Column,
    /// Its numbers.
    pub y: &'a NumericColumn,
    /// The factor columns with their level names.
    pub factors: Vec<&'a Column>,
    /// The `subject` column, if given.
    pub subject: Option<&'a Column>,
    /// Row indices kept (by `where` and complete values).
    pub rows: Vec<usize>,
    /// Rows set aside for missing values.
    pub dropped_missing: usize,
    /// Rows set aside by `where`.
    pub dropped_where: usize,
    /// Notes for the output.
    pub notes: Vec<String>,
}

impl Plan<'_> {
    /// Level code of factor `k` at row `i`.
    pub fn code(&self, k: usize, i: usize) -> u32 {
        match &self.factors[k].data {
            ColumnData::Factor(f) => f.codes[i],
            ColumnData::Numeric(_) => MISSING,
        }
    }
    /// Level names of factor `k`.
    pub fn levels(&self, k: usize) -> &[String] {
        match &self.factors[k].data {
            ColumnData::Factor(f) => &f.levels,
            ColumnData::Numeric(_) => &[],
        }
    }
}

/// Finds column `name` or says which columns there are.
pub fn column<'a>(ds: &'a Dataset, name: &Name, role: &str) -> Result<&'a Column, CellError> {
    ds.column(&name.value).ok_or_else(|| {
        CellError::data(format!(
            "dataset {} has no column \"{}\" ({role})",
            ds.name, name.value
        ))
        .at(name.span)
        .suggest(nearest(&name.value, ds.column_names()))
        .note(format!("columns: {}", listing(ds.column_names())))
    })
}

/// Checks `a` against `ds`.
pub fn resolve<'a>(a: &Analysis, ds: &'a Dataset) -> Result<Plan<'a>, CellError> {
    let response = column(ds, &a.response, "the response")?;
    let y = match &response.data {
        ColumnData::Numeric(n) => n,
        ColumnData::Factor(f) => {
            let first = f.codes.iter().enumerate().find_map(|(i, &c)| {
                let text = f.levels.get(c as usize)?;
                text.parse::<f64>().is_err().then(|| (i, text.clone()))
            });
            let mut e =
                CellError::data(format!("the response \"{}\" is not numeric", response.name))
                    .at(a.response.span);
            if let Some((i, text)) = first {
                e = e.note(format!(
                    "its first non-numeric value is \"{}\" on line {} of {}",
                    crate::error::excerpt(&text),
                    ds.lines[i],
                    ds.source
                ));
            }
            return Err(e.note("fix the value in the file, or mark it missing (empty, NA or .)"));
        }
    };
    let subject = match &a.subject {
        Some(s) => {
            let col = column(ds, s, "the subject")?;
            if col.name == response.name {
                return Err(CellError::design("the response cannot also be the subject").at(s.span));
            }
            if a.factors.iter().any(|f| f.value == col.name) {
                return Err(CellError::design(format!(
                    "\"{}\" is named both as a factor and as the subject",
                    col.name
                ))
                .at(s.span)
                .note("the subject column identifies the units; the factors are the conditions"));
            }
            Some(col)
        }
        None => None,
    };
    let mut factors: Vec<&Column> = Vec::new();
    for f in &a.factors {
        let col = column(ds, f, "a factor")?;
        if factors.iter().any(|c| c.name == col.name) {
            return Err(CellError::design(format!(
                "\"{}\" is named twice after `across`; each factor is named once",
                col.name
            ))
            .at(f.span));
        }
        if matches!(col.data, ColumnData::Numeric(_)) {
            return Err(CellError::design(format!(
                "\"{}\" is numeric; a factor needs levels",
                col.name
            ))
            .at(f.span)
            .note(format!(
                "to use numeric codes as levels, read the file `with factor {}`",
                col.name
            )));
        }
        if col.name == response.name {
            return Err(CellError::design("the response cannot also be a factor").at(f.span));
        }
        factors.push(col);
    }
    let keep: Vec<bool> = match &a.filter {
        Some(e) => {
            let mut mask = vec![true; ds.n_rows()];
            eval(e, ds, &mut mask)?;
            mask
        }
        None => vec![true; ds.n_rows()],
    };
    let dropped_where = keep.iter().filter(|k| !**k).count();
    let mut rows = Vec::new();
    let mut missing_lines = Vec::new();
    for i in 0..ds.n_rows() {
        if !keep[i] {
            continue;
        }
        let miss = y.values[i].is_nan()
            || subject.is_some_and(|c| c.text(i).is_empty())
            || factors
                .iter()
                .any(|c| matches!(&c.data, ColumnData::Factor(f) if f.codes[i] == MISSING));
        if miss {
            missing_lines.push(ds.lines[i]);
        } else {
            rows.push(i);
        }
    }
    let mut notes = Vec::new();
    if dropped_where > 0 {
        notes.push(format!(
            "where kept {} of {} rows",
            ds.n_rows() - dropped_where,
            ds.n_rows()
        ));
    }
    if !missing_lines.is_empty() {
        notes.push(format!(
            "{} row{} set aside for a missing value (file line{} {})",
            missing_lines.len(),
            plural(missing_lines.len()),
            plural(missing_lines.len()),
            list_lines(&missing_lines)
        ));
    }
    if rows.is_empty() {
        let why = if dropped_where == ds.n_rows() {
            "the where clause keeps no rows"
        } else {
            "no rows have the response, the factors and the subject all present"
        };
        return Err(CellError::data(format!("{why}: there is nothing to analyse")).at(a.verb_span));
    }
    Ok(Plan {
        dataset: ds,
        response,
        y,
        factors,
        subject,
        rows,
        dropped_missing: missing_lines.len(),
        dropped_where,
        notes,
    })
}

/// The most cells a crossing of factors may have: every model of the crossed layout holds
/// matrices over its cells, and a table or figure of more is unreadable.
pub const MAX_CELLS: usize = 2_000;

/// The number of combinations of levels of factors `names` with `sizes` levels each, or a
/// `DesignError` when it passes [`MAX_CELLS`] (checked without overflow: never allocate by
/// the product of level counts before this says yes).
pub fn crossing(names: &[&str], sizes: &[usize]) -> Result<usize, CellError> {
    let total = sizes
        .iter()
        .try_fold(1usize, |acc, &k| acc.checked_mul(k.max(1)))
        .filter(|&t| t <= MAX_CELLS);
    total.ok_or_else(|| too_many_cells(names, sizes))
}

/// The error for a crossing with more than [`MAX_CELLS`] cells.
pub fn too_many_cells(names: &[&str], sizes: &[usize]) -> CellError {
    let count = sizes.iter().map(|&k| k as f64).product::<f64>().min(1e300);
    let shown = if count < 1e15 {
        format!("{}", count as u64)
    } else {
        format!("about {count:.1e}")
    };
    CellError::design(format!(
        "{} ({} levels) make {shown} cells; at most {MAX_CELLS} cells can be analysed",
        names.join(" × "),
        sizes
            .iter()
            .map(|k| k.to_string())
            .collect::<Vec<_>>()
            .join(" × ")
    ))
    .note("a factor with nearly one level per row is usually an identifier: name it with `subject`, or leave it out of `across`")
}

/// "s" for counts other than one.
pub fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

fn list_lines(lines: &[usize]) -> String {
    let shown: Vec<String> = lines.iter().take(10).map(|l| l.to_string()).collect();
    if lines.len() > 10 {
        format!("{}, … ({} more)", shown.join(", "), lines.len() - 10)
    } else {
        shown.join(", ")
    }
}

fn eval(e: &Expr, ds: &Dataset, mask: &mut [bool]) -> Result<(), CellError> {
    match e {
        // Each part narrows `mask` in turn; nothing recurses along a chain, and only the
        // nesting of parentheses (bounded by the parser) adds scratch masks.
        Expr::All(parts) => {
            for p in parts {
                eval(p, ds, mask)?;
            }
        }
        Expr::Any(parts) => {
            let mut any = vec![false; mask.len()];
            let mut part = vec![true; mask.len()];
            for p in parts {
                part.iter_mut().for_each(|m| *m = true);
                eval(p, ds, &mut part)?;
                any.iter_mut().zip(&part).for_each(|(a, &b)| *a = *a || b);
            }
            mask.iter_mut().zip(any).for_each(|(a, b)| *a = *a && b);
        }
        Expr::Compare {
            column: name,
            op,
            value,
        } => {
            let col = column(ds, name, "in where")?;
            match &col.data {
                ColumnData::Numeric(n) => {
                    let v = match &value.value {
                        Value::Num(v, _) => *v,
                        Value::Str(s) => s.parse::<f64>().map_err(|_| {
                            CellError::data(format!(
                                "\"{}\" is numeric, so it cannot be compared with the text \"{s}\"",
                                col.name
                            ))
                            .at(value.span)
                        })?,
                        Value::Word(_) | Value::List(_) => {
                            return Err(CellError::syntax(
                                value.span,
                                format!("`{}` is not a number", value.value.text()),
                            ));
                        }
                    };
                    for (i, m) in mask.iter_mut().enumerate() {
                        let x = n.values[i];
                        let ok = !x.is_nan()
                            && match op.value {
                                "=" => x == v,
                                "!=" => x != v,
                                "<" => x < v,
                                "<=" => x <= v,
                                ">" => x > v,
                                _ => x >= v,
                            };
                        *m = *m && ok;
                    }
                }
                ColumnData::Factor(f) => {
                    if !matches!(op.value, "=" | "!=") {
                        return Err(CellError::data(format!(
                            "\"{}\" is a factor: its levels can be tested with = , != or in (…), not `{}`",
                            col.name, op.value
                        ))
                        .at(op.span));
                    }
                    let code = level_code(col, &f.levels, &value.value.text(), value.span)?;
                    let eq = op.value == "=";
                    for (i, m) in mask.iter_mut().enumerate() {
                        let c = f.codes[i];
                        *m = *m && c != MISSING && ((c == code) == eq);
                    }
                }
            }
        }
        Expr::In {
            column: name,
            values,
        } => {
            let col = column(ds, name, "in where")?;
            match &col.data {
                ColumnData::Factor(f) => {
                    // A mask over the level codes: linear in rows and values, however many.
                    let index: std::collections::HashMap<&str, u32> = f
                        .levels
                        .iter()
                        .enumerate()
                        .map(|(i, l)| (l.as_str(), i as u32))
                        .collect();
                    let mut wanted = vec![false; f.levels.len()];
                    for v in values {
                        let text = v.value.text();
                        let code = match index.get(text.as_str()) {
                            Some(&c) => c,
                            None => level_code(col, &f.levels, &text, v.span)?,
                        };
                        wanted[code as usize] = true;
                    }
                    for (i, m) in mask.iter_mut().enumerate() {
                        let c = f.codes[i];
                        *m = *m && c != MISSING && wanted[c as usize];
                    }
                }
                ColumnData::Numeric(n) => {
                    let mut nums = Vec::new();
                    for v in values {
                        match &v.value {
                            Value::Num(x, _) => nums.push(*x),
                            other => {
                                return Err(CellError::data(format!(
                                    "\"{}\" is numeric, so it cannot be compared with \"{}\"",
                                    col.name,
                                    other.text()
                                ))
                                .at(v.span));
                            }
                        }
                    }
                    nums.sort_by(f64::total_cmp);
                    for (i, m) in mask.iter_mut().enumerate() {
                        let x = n.values[i];
                        *m =
                            *m && !x.is_nan() && nums.binary_search_by(|v| v.total_cmp(&x)).is_ok();
                    }
                }
            }
        }
    }
    Ok(())
}

fn level_code(
    col: &Column,
    levels: &[String],
    text: &str,
    span: crate::error::Span,
) -> Result<u32, CellError> {
    levels
        .iter()
        .position(|l| l == text)
        .map(|p| p as u32)
        .ok_or_else(|| {
            CellError::data(format!("\"{}\" has no level \"{text}\"", col.name))
                .at(span)
                .suggest(nearest(text, levels.iter().map(String::as_str)))
                .note(format!(
                    "levels: {}",
                    listing(levels.iter().map(String::as_str))
                ))
        })
}
