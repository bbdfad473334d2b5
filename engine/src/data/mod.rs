//! Datasets as the session holds them.
//!
//! A [`Dataset`] is a table of named [`Column`]s read from a file by [`csv::read_file`]. A
//! column is numeric ([`NumericColumn`], missing values as NaN, plus an exactly shifted copy for
//! stable sums of squares, see [`decimal`]) or a factor ([`FactorColumn`], level codes in the
//! order the levels first appear, reorderable with `levels`).

pub mod changes;
pub mod csv;
pub mod decimal;
pub mod reshape;
pub mod sheet;

/// Marker code for a missing factor value.
pub const MISSING: u32 = u32::MAX;

/// A table read from a file.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// The name given with `as`.
    pub name: String,
    /// The path as written in the `read` statement.
    pub source: String,
    /// SHA-256 of the file's bytes, hex.
    pub sha256: String,
    /// When it was read (RFC 3339, UTC).
    pub read_at: String,
    /// The field separator found or given.
    pub delimiter: u8,
    /// The columns, in file order.
    pub columns: Vec<Column>,
    /// The file line of each data row (1-based), for messages.
    pub lines: Vec<usize>,
}

impl Dataset {
    /// Number of rows.
    pub fn n_rows(&self) -> usize {
        self.lines.len()
    }
    /// The column named `name` (exact match).
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }
    /// Mutable access to the column named `name`.
    pub fn column_mut(&mut self, name: &str) -> Option<&mut Column> {
        self.columns.iter_mut().find(|c| c.name == name)
    }
    /// The column names.
    pub fn column_names(&self) -> impl Iterator<Item = &str> {
        self.columns.iter().map(|c| c.name.as_str())
    }
}

/// One column.
#[derive(Debug, Clone)]
pub struct Column {
    /// The header name.
    pub name: String,
    /// The label for axes and sentences (set with `label`).
    pub label: Option<String>,
    /// The values.
    pub data: ColumnData,
}

impl Column {
    /// The label if set, else the name.
    pub fn display_name(&self) -> &str {
        self.label.as_deref().unwrap_or(&self.name)
    }
    /// Number of missing values.
    pub fn missing(&self) -> usize {
        match &self.data {
            ColumnData::Numeric(n) => n.values.iter().filter(|v| v.is_nan()).count(),
            ColumnData::Factor(f) => f.codes.iter().filter(|&&c| c == MISSING).count(),
        }
    }
    /// "numeric" or "factor".
    pub fn type_name(&self) -> &'static str {
        match self.data {
            ColumnData::Numeric(_) => "numeric",
            ColumnData::Factor(_) => "factor",
        }
    }
    /// The value of row `i` as display text ("" when missing).
    pub fn text(&self, i: usize) -> String {
        match &self.data {
            ColumnData::Numeric(n) => n.raw[i].clone(),
            ColumnData::Factor(f) => {
                let c = f.codes[i];
                if c == MISSING {
                    String::new()
                } else {
                    f.levels[c as usize].clone()
                }
            }
        }
    }
}

/// Numeric or factor values.
#[derive(Debug, Clone)]
pub enum ColumnData {
    /// Numbers.
    Numeric(NumericColumn),
    /// Levels.
    Factor(FactorColumn),
}

/// A numeric column.
#[derive(Debug, Clone)]
pub struct NumericColumn {
    /// Values as f64, NaN where missing.
    pub values: Vec<f64>,
    /// The offset subtracted exactly in decimal (see [`decimal`]).
    pub offset: f64,
    /// `value − offset`, computed on the written digits; NaN where missing.
    pub shifted: Vec<f64>,
    /// The cell text as written (empty where missing).
    pub raw: Vec<String>,
}

/// A factor column.
#[derive(Debug, Clone)]
pub struct FactorColumn {
    /// Level names, in display order.
    pub levels: Vec<String>,
    /// Per row, the index into `levels` or [`MISSING`].
    pub codes: Vec<u32>,
}

impl FactorColumn {
    /// Builds a factor from cell texts, levels in order of first appearance.
    pub fn from_texts(texts: &[Option<String>]) -> FactorColumn {
        let mut levels: Vec<String> = Vec::new();
        let mut index = std::collections::HashMap::new();
        let codes = texts
            .iter()
            .map(|t| match t {
                None => MISSING,
                Some(s) => *index.entry(s.clone()).or_insert_with(|| {
                    levels.push(s.clone());
                    (levels.len() - 1) as u32
                }),
            })
            .collect();
        FactorColumn { levels, codes }
    }

    /// Reorders the levels: `order` must be a permutation of a subset; unnamed levels follow.
    pub fn reorder(&mut self, order: &[String]) {
        let mut new_levels: Vec<String> = order.to_vec();
        let mut position: std::collections::HashMap<String, u32> = new_levels
            .iter()
            .enumerate()
            .map(|(i, l)| (l.clone(), i as u32))
            .collect();
        for l in &self.levels {
            if !position.contains_key(l) {
                position.insert(l.clone(), new_levels.len() as u32);
                new_levels.push(l.clone());
            }
        }
        let map: Vec<u32> = self
            .levels
            .iter()
            .map(|l| position.get(l).copied().unwrap_or(0))
            .collect();
        for c in &mut self.codes {
            if *c != MISSING {
                *c = map[*c as usize];
            }
        }
        self.levels = new_levels;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn factor_levels_follow_first_appearance_and_reorder() {
        let t: Vec<Option<String>> = ["b", "a", "b", "c"]
            .iter()
            .map(|s| Some(s.to_string()))
            .chain([None])
            .collect();
        let mut f = FactorColumn::from_texts(&t);
        assert_eq!(f.levels, ["b", "a", "c"]);
        assert_eq!(f.codes, [0, 1, 0, 2, MISSING]);
        f.reorder(&["c".into(), "a".into()]);
        assert_eq!(f.levels, ["c", "a", "b"]);
        assert_eq!(f.codes, [2, 1, 2, 0, MISSING]);
    }
}
