//! Reshaping: `unpivot` turns a wide layout (one numeric column per occasion or condition) into
//! the long layout the analyses read (one row per measurement).

use super::csv::numeric_column;
use super::{Column, ColumnData, Dataset, FactorColumn};
use crate::error::{CellError, nearest};
use crate::lang::ast::Name;

/// Stacks `columns` of `ds` into a factor `factor` (levels: the column names, in the order
/// given) and a numeric `value`; every other column is repeated. The source file, its hash and
/// its line numbers carry over, so messages still point into the file.
pub fn unpivot(
    ds: &Dataset,
    columns: &[Name],
    factor: &Name,
    value: &Name,
    new_name: &str,
) -> Result<Dataset, CellError> {
    let mut picked: Vec<&Column> = Vec::new();
    for c in columns {
        let col = ds.column(&c.value).ok_or_else(|| {
            CellError::data(format!("dataset {} has no column \"{}\"", ds.name, c.value))
                .at(c.span)
                .suggest(nearest(&c.value, ds.column_names()))
                .note(format!(
                    "columns: {}",
                    crate::error::listing(ds.column_names())
                ))
        })?;
        if picked.iter().any(|p| p.name == col.name) {
            return Err(
                CellError::input(format!("column \"{}\" is listed twice", col.name)).at(c.span),
            );
        }
        if let ColumnData::Factor(_) = col.data {
            return Err(CellError::data(format!(
                "column \"{}\" is not numeric, so it cannot be stacked into the values",
                col.name
            ))
            .at(c.span)
            .note("list only the measurement columns after `columns`"));
        }
        picked.push(col);
    }
    if picked.len() < 2 {
        return Err(
            CellError::input("`unpivot` needs two or more columns to stack")
                .at(columns.first().map(|c| c.span).unwrap_or(factor.span)),
        );
    }
    let kept: Vec<&Column> = ds
        .columns
        .iter()
        .filter(|c| !picked.iter().any(|p| p.name == c.name))
        .collect();
    for n in [factor, value] {
        if kept.iter().any(|c| c.name == n.value) {
            return Err(CellError::input(format!(
                "\"{}\" is already a column of {}; choose another name",
                n.value, ds.name
            ))
            .at(n.span));
        }
    }
    if factor.value == value.value {
        return Err(
            CellError::input("the factor and the value need different names").at(value.span),
        );
    }
    let k = picked.len();
    let n = ds.n_rows();
    let mut out_cols: Vec<Column> = kept
        .iter()
        .map(|c| Column {
            name: c.name.clone(),
            label: c.label.clone(),
            data: repeat(&c.data, n, k),
        })
        .collect();
    let codes: Vec<u32> = (0..n * k).map(|r| (r % k) as u32).collect();
    out_cols.push(Column {
        name: factor.value.clone(),
        label: None,
        data: ColumnData::Factor(FactorColumn {
            levels: picked.iter().map(|c| c.name.clone()).collect(),
            codes,
        }),
    });
    let texts: Vec<Option<String>> = (0..n)
        .flat_map(|i| picked.iter().map(move |c| (i, *c)))
        .map(|(i, c)| {
            let t = c.text(i);
            (!t.is_empty()).then_some(t)
        })
        .collect();
    let decimal_comma = texts.iter().flatten().any(|t| t.contains(','));
    let values = numeric_column(&texts, decimal_comma)
        .ok_or_else(|| CellError::data("the stacked columns hold no numbers").at(value.span))?;
    let shared_label = picked.iter().filter_map(|c| c.label.clone()).next();
    out_cols.push(Column {
        name: value.value.clone(),
        label: shared_label,
        data: ColumnData::Numeric(values),
    });
    Ok(Dataset {
        name: new_name.to_string(),
        source: ds.source.clone(),
        sha256: ds.sha256.clone(),
        read_at: ds.read_at.clone(),
        delimiter: ds.delimiter,
        columns: out_cols,
        lines: ds
            .lines
            .iter()
            .flat_map(|&l| std::iter::repeat_n(l, k))
            .collect(),
    })
}

fn repeat(data: &ColumnData, n: usize, k: usize) -> ColumnData {
    let rep = |i: usize| i / k;
    match data {
        ColumnData::Factor(f) => ColumnData::Factor(FactorColumn {
            levels: f.levels.clone(),
            codes: (0..n * k).map(|r| f.codes[rep(r)]).collect(),
        }),
        ColumnData::Numeric(c) => ColumnData::Numeric(super::NumericColumn {
            values: (0..n * k).map(|r| c.values[rep(r)]).collect(),
            offset: c.offset,
            shifted: (0..n * k).map(|r| c.shifted[rep(r)]).collect(),
            raw: (0..n * k).map(|r| c.raw[rep(r)].clone()).collect(),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::csv::{ReadOptions, parse_bytes};
    use crate::error::Span;
    use crate::lang::ast::Spanned;

    fn name(s: &str) -> Name {
        Spanned::new(s.to_string(), Span::default())
    }

    #[test]
    fn wide_to_long_keeps_ids_lines_and_order() {
        let text = "plant,shade,wk1,wk2\np1,low,1.5,2.25\np2,high,,3\n";
        let ds = parse_bytes(text.as_bytes(), "t.csv", "wide", &ReadOptions::new()).unwrap();
        let long = unpivot(
            &ds,
            &[name("wk1"), name("wk2")],
            &name("week"),
            &name("y"),
            "long",
        )
        .unwrap();
        assert_eq!(long.n_rows(), 4);
        assert_eq!(long.lines, vec![2, 2, 3, 3]);
        let texts: Vec<String> = (0..4)
            .map(|i| long.column("plant").unwrap().text(i))
            .collect();
        assert_eq!(texts, ["p1", "p1", "p2", "p2"]);
        let weeks: Vec<String> = (0..4)
            .map(|i| long.column("week").unwrap().text(i))
            .collect();
        assert_eq!(weeks, ["wk1", "wk2", "wk1", "wk2"]);
        let ColumnData::Numeric(y) = &long.column("y").unwrap().data else {
            panic!("y is numeric")
        };
        assert_eq!(y.values[0], 1.5);
        assert!(y.values[2].is_nan());
        assert_eq!(y.values[3], 3.0);
        assert_eq!(y.shifted[1] + y.offset, 2.25);
    }

    #[test]
    fn refuses_factors_unknown_and_clashing_names() {
        let text = "plant,shade,wk1,wk2\np1,low,1,2\n";
        let ds = parse_bytes(text.as_bytes(), "t.csv", "wide", &ReadOptions::new()).unwrap();
        let e = unpivot(
            &ds,
            &[name("wk1"), name("shade")],
            &name("week"),
            &name("y"),
            "l",
        )
        .unwrap_err();
        assert!(e.message.contains("not numeric"), "{}", e.message);
        let e = unpivot(
            &ds,
            &[name("wk1"), name("wk3")],
            &name("week"),
            &name("y"),
            "l",
        )
        .unwrap_err();
        assert_eq!(e.suggestion.as_deref(), Some("wk1"));
        let e = unpivot(
            &ds,
            &[name("wk1"), name("wk2")],
            &name("plant"),
            &name("y"),
            "l",
        )
        .unwrap_err();
        assert!(e.message.contains("already a column"));
    }
}
