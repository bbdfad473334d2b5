//! What changed between two reads of the same file: rows added and removed (as a multiset of
//! rows, so appended batches and edits both show), columns added or gone, new factor levels,
//! new missing values. Also carries the user's labels and level orders over to the new read.

use super::{ColumnData, Dataset};
use std::collections::HashMap;

/// One line per kind of change; empty when nothing but the bytes changed.
pub fn describe(old: &Dataset, new: &Dataset) -> Vec<String> {
    let mut out = Vec::new();
    let added: Vec<&str> = new
        .column_names()
        .filter(|n| old.column(n).is_none())
        .collect();
    let gone: Vec<&str> = old
        .column_names()
        .filter(|n| new.column(n).is_none())
        .collect();
    if !added.is_empty() {
        out.push(format!("columns added: {}", added.join(", ")));
    }
    if !gone.is_empty() {
        out.push(format!("columns gone: {}", gone.join(", ")));
    }
    let common: Vec<&str> = new
        .column_names()
        .filter(|n| old.column(n).is_some())
        .collect();
    let key = |ds: &Dataset, i: usize| -> String {
        common
            .iter()
            .map(|c| ds.column(c).map(|col| col.text(i)).unwrap_or_default())
            .collect::<Vec<_>>()
            .join("\u{1f}")
    };
    let mut counts: HashMap<String, i64> = HashMap::new();
    for i in 0..old.n_rows() {
        *counts.entry(key(old, i)).or_default() -= 1;
    }
    for i in 0..new.n_rows() {
        *counts.entry(key(new, i)).or_default() += 1;
    }
    let plus: i64 = counts.values().filter(|v| **v > 0).sum();
    let minus: i64 = -counts.values().filter(|v| **v < 0).sum::<i64>();
    out.push(format!(
        "rows: {} → {} ({plus} added, {minus} removed or changed)",
        old.n_rows(),
        new.n_rows()
    ));
    for c in &common {
        let (Some(a), Some(b)) = (old.column(c), new.column(c)) else {
            continue;
        };
        if let (ColumnData::Factor(fa), ColumnData::Factor(fb)) = (&a.data, &b.data) {
            let fresh: Vec<&str> = fb
                .levels
                .iter()
                .filter(|l| !fa.levels.contains(l))
                .map(String::as_str)
                .collect();
            if !fresh.is_empty() {
                out.push(format!(
                    "{c}: new level{} {}",
                    if fresh.len() == 1 { "" } else { "s" },
                    fresh.join(", ")
                ));
            }
        }
        if a.type_name() != b.type_name() {
            out.push(format!(
                "{c}: now read as {} (was {})",
                b.type_name(),
                a.type_name()
            ));
        }
        let more = b.missing() as i64 - a.missing() as i64;
        if more > 0 {
            out.push(format!(
                "{c}: {more} more missing value{}",
                if more == 1 { "" } else { "s" }
            ));
        }
    }
    out
}

/// Copies labels and factor level orders set on `old` to the columns of `new` with the same
/// name (new levels follow the old ones).
pub fn carry_over(old: &Dataset, new: &mut Dataset) {
    for col in &mut new.columns {
        let Some(prev) = old.column(&col.name) else {
            continue;
        };
        if col.label.is_none() {
            col.label = prev.label.clone();
        }
        if let (ColumnData::Factor(fp), ColumnData::Factor(fnew)) = (&prev.data, &mut col.data) {
            let order: Vec<String> = fp
                .levels
                .iter()
                .filter(|l| fnew.levels.contains(l))
                .cloned()
                .collect();
            fnew.reorder(&order);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::csv::{ReadOptions, parse_bytes};

    #[test]
    fn appended_rows_new_levels_and_missing_values() {
        let o = ReadOptions::new();
        let old = parse_bytes(b"g,y\na,1\nb,2\n", "t.csv", "t", &o).unwrap();
        let new = parse_bytes(b"g,y,z\na,1,5\nb,2,6\nc,,7\nb,4,8\n", "t.csv", "t", &o).unwrap();
        let d = describe(&old, &new);
        assert_eq!(d[0], "columns added: z");
        assert_eq!(d[1], "rows: 2 → 4 (2 added, 0 removed or changed)");
        assert!(d.contains(&"g: new level c".to_string()), "{d:?}");
        assert!(d.contains(&"y: 1 more missing value".to_string()), "{d:?}");
    }
}
