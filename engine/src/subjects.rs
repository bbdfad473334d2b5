//! Designs with a `subject` column: which factors are within and which between subjects, and
//! the subject × within-cell table the repeated-measures models take.
//!
//! Classification (from the data, never from names): a factor constant inside every subject is
//! between-subject; one that changes inside most subjects is within-subject (subjects seen at
//! one level only are then incomplete and set aside below). A factor that changes inside some
//! subjects but not inside as many others is neither: a `DesignError` names the subjects whose
//! rows carry more than one level — usually the same id used in two groups.
//!
//! Table: one value per subject per within cell. Several values in a cell are averaged, with a
//! note (or refused with `with duplicates error`); a subject missing a cell is set aside with a
//! note naming it (complete cases, as the univariate approach requires).

use crate::data::Column;
use crate::design::{Plan, plural};
use crate::error::CellError;
use nalgebra::DMatrix;
use std::collections::HashMap;

/// A factor as used in a subject design.
#[derive(Debug, Clone)]
pub struct FactorUse {
    /// Column name.
    pub name: String,
    /// Label for tables and axes.
    pub display: String,
    /// The levels used, in display order.
    pub levels: Vec<String>,
    /// Whether the factor changes within subjects.
    pub within: bool,
    /// Why it was classified so.
    pub evidence: String,
}

/// The subject × cell table and what was done to build it.
#[derive(Debug, Clone)]
pub struct SubjectDesign {
    /// Subject column name.
    pub subject: String,
    /// Ids of the complete subjects, in order of first appearance.
    pub ids: Vec<String>,
    /// Between factors (in the order given).
    pub between: Vec<FactorUse>,
    /// Within factors (in the order given).
    pub within: Vec<FactorUse>,
    /// N × C cell values, shifted by `offset` (within cells in mixed radix, first factor slowest).
    pub y: DMatrix<f64>,
    /// Between cell of each subject (mixed radix over `between`).
    pub group: Vec<usize>,
    /// The exact shift of the response (add back for display).
    pub offset: f64,
    /// Rows of the complete subjects.
    pub rows_used: usize,
    /// Rows of subjects set aside.
    pub rows_dropped: usize,
    /// Notes for the output.
    pub notes: Vec<String>,
}

impl SubjectDesign {
    /// Number of within cells.
    pub fn n_within_cells(&self) -> usize {
        self.within.iter().map(|f| f.levels.len()).product()
    }
    /// Level names of within cell `c`.
    pub fn within_levels(&self, c: usize) -> Vec<&str> {
        decode(c, &self.within)
    }
    /// Level names of between cell `g`.
    pub fn between_levels(&self, g: usize) -> Vec<&str> {
        decode(g, &self.between)
    }
    /// Each subject's mean over its within cells (shifted like `y`).
    pub fn subject_means(&self) -> Vec<f64> {
        let c = self.n_within_cells();
        (0..self.ids.len())
            .map(|s| (0..c).map(|j| self.y[(s, j)]).sum::<f64>() / c as f64)
            .collect()
    }
    /// The input of the repeated-measures model.
    pub fn rm_data(&self) -> crate::models::repeated::RmData {
        let sizes = |fs: &[FactorUse]| {
            fs.iter()
                .map(|f| (f.name.clone(), f.levels.len()))
                .collect()
        };
        crate::models::repeated::RmData {
            y: self.y.clone(),
            group: self.group.clone(),
            between: sizes(&self.between),
            within: sizes(&self.within),
        }
    }
}

/// Sums and counts of values by subject × within cell.
enum CellSums {
    Dense(Vec<f64>, Vec<u32>),
    Sparse(HashMap<usize, (f64, u32)>),
}

impl CellSums {
    fn new(subjects: usize, cells: usize, rows: usize) -> CellSums {
        match subjects.checked_mul(cells) {
            Some(n) if n <= rows.saturating_mul(4).max(1 << 20) => {
                CellSums::Dense(vec![0.0; n], vec![0; n])
            }
            _ => CellSums::Sparse(HashMap::with_capacity(rows)),
        }
    }
    fn add(&mut self, at: usize, v: f64) {
        match self {
            CellSums::Dense(s, c) => {
                s[at] += v;
                c[at] += 1;
            }
            CellSums::Sparse(m) => {
                let e = m.entry(at).or_insert((0.0, 0));
                e.0 += v;
                e.1 += 1;
            }
        }
    }
    /// The cells holding more than one value.
    fn repeated(&self) -> Vec<usize> {
        match self {
            CellSums::Dense(_, c) => (0..c.len()).filter(|&at| c[at] > 1).collect(),
            CellSums::Sparse(m) => m.iter().filter(|e| e.1.1 > 1).map(|e| *e.0).collect(),
        }
    }
    fn get(&self, at: usize) -> (f64, u32) {
        match self {
            CellSums::Dense(s, c) => (s[at], c[at]),
            CellSums::Sparse(m) => m.get(&at).copied().unwrap_or((0.0, 0)),
        }
    }
}

fn decode(mut idx: usize, fs: &[FactorUse]) -> Vec<&str> {
    let mut out = vec![""; fs.len()];
    for (k, f) in fs.iter().enumerate().rev() {
        let n = f.levels.len();
        out[k] = &f.levels[idx % n];
        idx /= n;
    }
    out
}

fn list(ids: &[String]) -> String {
    let shown: Vec<&str> = ids.iter().take(10).map(String::as_str).collect();
    if ids.len() > 10 {
        format!("{}, … ({} more)", shown.join(", "), ids.len() - 10)
    } else {
        shown.join(", ")
    }
}

/// Subject codes per row (text of the subject column; numeric ids keep their written form).
fn subject_codes(col: &Column, n_rows: usize) -> (Vec<usize>, Vec<String>) {
    let mut ids: Vec<String> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    let codes = (0..n_rows)
        .map(|i| {
            let t = col.text(i);
            *index.entry(t.clone()).or_insert_with(|| {
                ids.push(t);
                ids.len() - 1
            })
        })
        .collect();
    (codes, ids)
}

/// Builds the subject design of `plan`; `duplicates_error` refuses repeated values in a cell.
pub fn build(plan: &Plan<'_>, duplicates_error: bool) -> Result<SubjectDesign, CellError> {
    let col = plan
        .subject
        .ok_or_else(|| CellError::design("this analysis needs `subject COLUMN`"))?;
    let (scode, ids) = subject_codes(col, plan.dataset.n_rows());
    let mut notes = Vec::new();
    // Levels used per factor, compacted in display order.
    let nf = plan.factors.len();
    let mut compact: Vec<Vec<u32>> = Vec::with_capacity(nf);
    let mut used_levels: Vec<Vec<String>> = Vec::with_capacity(nf);
    for k in 0..nf {
        let levels = plan.levels(k);
        let mut seen = vec![false; levels.len()];
        for &i in &plan.rows {
            seen[plan.code(k, i) as usize] = true;
        }
        let mut map = vec![u32::MAX; levels.len()];
        let mut names = Vec::new();
        for (l, s) in seen.iter().enumerate() {
            if *s {
                map[l] = names.len() as u32;
                names.push(levels[l].clone());
            }
        }
        if names.len() < 2 {
            return Err(CellError::design(format!(
                "\"{}\" has a single level (\"{}\") in the rows used; a factor needs two or more",
                plan.factors[k].name,
                names.first().cloned().unwrap_or_default()
            ))
            .note("leave it out of `across`, or widen the `where` clause"));
        }
        compact.push(map);
        used_levels.push(names);
    }
    // Per subject and factor: first level seen, whether it changed, rows.
    let n_ids = ids.len();
    let mut rows_of = vec![0usize; n_ids];
    for &i in &plan.rows {
        rows_of[scode[i]] += 1;
    }
    let present: Vec<usize> = (0..n_ids).filter(|&s| rows_of[s] > 0).collect();
    if present.len() < 2 {
        return Err(CellError::design(format!(
            "the subject column \"{}\" has {} subject{} in the rows used; repeated measures need several subjects",
            col.name,
            present.len(),
            plural(present.len())
        ))
        .note("the subject column names the animal, plot, well or volunteer measured repeatedly"));
    }
    let mut within_flags = Vec::with_capacity(nf);
    let mut evidence = Vec::with_capacity(nf);
    let mut between_level: Vec<Vec<u32>> = Vec::new();
    for k in 0..nf {
        let mut first = vec![u32::MAX; n_ids];
        let mut changes = vec![false; n_ids];
        for &i in &plan.rows {
            let s = scode[i];
            let c = compact[k][plan.code(k, i) as usize];
            if first[s] == u32::MAX {
                first[s] = c;
            } else if first[s] != c {
                changes[s] = true;
            }
        }
        let varying: Vec<usize> = present.iter().copied().filter(|&s| changes[s]).collect();
        let constant = present
            .iter()
            .filter(|&&s| !changes[s] && rows_of[s] >= 2)
            .count();
        let name = &plan.factors[k].name;
        let nl = used_levels[k].len();
        if varying.is_empty() {
            within_flags.push(false);
            let mut per = vec![0usize; nl];
            for &s in &present {
                per[first[s] as usize] += 1;
            }
            evidence.push(format!(
                "between: constant inside every subject ({} subjects at {})",
                per.iter()
                    .map(|n| n.to_string())
                    .collect::<Vec<_>>()
                    .join(", "),
                used_levels[k].join(", ")
            ));
            between_level.push(first);
        } else if varying.len() > constant {
            within_flags.push(true);
            evidence.push(format!(
                "within: changes inside {} of {} subjects ({nl} levels)",
                varying.len(),
                present.len()
            ));
            between_level.push(Vec::new());
        } else {
            let names: Vec<String> = varying.iter().map(|&s| ids[s].clone()).collect();
            return Err(CellError::design(format!(
                "\"{name}\" is neither between nor within subjects: it is constant inside {constant} subjects but changes inside {} ({})",
                varying.len(),
                list(&names)
            ))
            .note(format!(
                "a subject id under two levels of {name} is usually an id used twice; give each unit its own id in \"{}\"",
                col.name
            )));
        }
    }
    let w_idx: Vec<usize> = (0..nf).filter(|&k| within_flags[k]).collect();
    let b_idx: Vec<usize> = (0..nf).filter(|&k| !within_flags[k]).collect();
    let wsizes: Vec<usize> = w_idx.iter().map(|&k| used_levels[k].len()).collect();
    let wnames: Vec<&str> = w_idx
        .iter()
        .map(|&k| plan.factors[k].name.as_str())
        .collect();
    let n_cells = crate::design::crossing(&wnames, &wsizes)?;
    let bnames: Vec<&str> = b_idx
        .iter()
        .map(|&k| plan.factors[k].name.as_str())
        .collect();
    let bsizes_all: Vec<usize> = b_idx.iter().map(|&k| used_levels[k].len()).collect();
    crate::design::crossing(&bnames, &bsizes_all)?;
    // Sums and counts per subject × within cell: dense when the table is small next to the
    // rows, by the combinations that occur otherwise (never by the product of the counts).
    let mut cells = CellSums::new(n_ids, n_cells, plan.rows.len());
    for &i in &plan.rows {
        let mut c = 0;
        for (j, &k) in w_idx.iter().enumerate() {
            c = c * wsizes[j] + compact[k][plan.code(k, i) as usize] as usize;
        }
        cells.add(scode[i] * n_cells + c, plan.y.shifted[i]);
    }
    let counts = |at: usize| cells.get(at).1;
    let within_uses: Vec<FactorUse> = w_idx
        .iter()
        .map(|&k| FactorUse {
            name: plan.factors[k].name.clone(),
            display: plan.factors[k].display_name().to_string(),
            levels: used_levels[k].clone(),
            within: true,
            evidence: evidence[k].clone(),
        })
        .collect();
    let cell_name = |c: usize| decode(c, &within_uses).join(" / ");
    let mut dups: Vec<(usize, usize)> = cells
        .repeated()
        .into_iter()
        .map(|at| (at / n_cells, at % n_cells))
        .collect();
    dups.sort_unstable();
    if !dups.is_empty() {
        let examples: Vec<String> = dups
            .iter()
            .take(5)
            .map(|&(s, c)| {
                let cell = if n_cells > 1 {
                    format!(" at {}", cell_name(c))
                } else {
                    String::new()
                };
                format!("{}{cell} ({} values)", ids[s], counts(s * n_cells + c))
            })
            .collect();
        if duplicates_error {
            return Err(CellError::design(format!(
                "{} subject × cell combination{} hold more than one value: {}{}",
                dups.len(),
                plural(dups.len()),
                examples.join(", "),
                if dups.len() > 5 { ", …" } else { "" }
            ))
            .note("leave out `with duplicates error` to average them, or fix the file"));
        }
        let values: u32 = dups.iter().map(|&(s, c)| counts(s * n_cells + c)).sum();
        if n_cells == 1 {
            notes.push(format!(
                "no factor named changes within subjects, so the {values} values of {} subjects were averaged into one per subject",
                dups.len()
            ));
        } else {
            notes.push(format!(
            "{} subject × cell combination{} held more than one value ({values} values in all, e.g. {}); each was averaged. `with duplicates error` refuses them instead",
            dups.len(),
            plural(dups.len()),
            examples[0]
        ));
        }
    }
    let mut complete: Vec<usize> = Vec::new();
    let mut incomplete: Vec<String> = Vec::new();
    let mut rows_dropped = 0;
    for &s in &present {
        if (0..n_cells).all(|c| counts(s * n_cells + c) > 0) {
            complete.push(s);
        } else {
            incomplete.push(ids[s].clone());
            rows_dropped += rows_of[s];
        }
    }
    if !incomplete.is_empty() {
        notes.push(format!(
            "{} subject{} set aside for a missing within cell ({}); the univariate analysis uses complete subjects only",
            incomplete.len(),
            plural(incomplete.len()),
            list(&incomplete)
        ));
    }
    if complete.len() < 2 {
        return Err(CellError::design(format!(
            "{} of {} subjects have a value in every within cell ({}); at least two are needed",
            complete.len(),
            present.len(),
            within_uses
                .iter()
                .map(|f| f.name.as_str())
                .collect::<Vec<_>>()
                .join(" × ")
        ))
        .note("check that the within factors' levels are spelled the same for every subject"));
    }
    // Between levels present among complete subjects.
    let mut between_uses = Vec::new();
    let mut bcodes: Vec<Vec<usize>> = vec![Vec::new(); complete.len()];
    for (j, &k) in b_idx.iter().enumerate() {
        let first = &between_level[k];
        let nl = used_levels[k].len();
        let mut seen = vec![0usize; nl];
        for &s in &complete {
            seen[first[s] as usize] += 1;
        }
        let mut map = vec![usize::MAX; nl];
        let mut levels = Vec::new();
        for l in 0..nl {
            if seen[l] > 0 {
                map[l] = levels.len();
                levels.push(used_levels[k][l].clone());
            } else {
                notes.push(format!(
                    "level {} of {} has no complete subject and is left out",
                    used_levels[k][l], plan.factors[k].name
                ));
            }
        }
        if levels.len() < 2 {
            return Err(CellError::design(format!(
                "\"{}\" has a single level among the complete subjects; a factor needs two or more",
                plan.factors[k].name
            )));
        }
        for (t, &s) in complete.iter().enumerate() {
            bcodes[t].push(map[first[s] as usize]);
        }
        let _ = j;
        between_uses.push(FactorUse {
            name: plan.factors[k].name.clone(),
            display: plan.factors[k].display_name().to_string(),
            levels,
            within: false,
            evidence: evidence[k].clone(),
        });
    }
    let bsizes: Vec<usize> = between_uses.iter().map(|f| f.levels.len()).collect();
    let group: Vec<usize> = bcodes
        .iter()
        .map(|codes| {
            codes
                .iter()
                .zip(&bsizes)
                .fold(0, |acc, (&c, &n)| acc * n + c)
        })
        .collect();
    let g_cells: usize = bsizes.iter().product::<usize>().max(1);
    let mut filled = vec![false; g_cells];
    for &g in &group {
        filled[g] = true;
    }
    let empty: Vec<String> = (0..g_cells)
        .filter(|&g| !filled[g])
        .map(|g| decode(g, &between_uses).join(" / "))
        .collect();
    if !empty.is_empty() {
        return Err(CellError::design(format!(
            "between cell{} {} {} no complete subject",
            plural(empty.len()),
            empty.join(", "),
            if empty.len() == 1 { "has" } else { "have" }
        ))
        .note("every combination of the between factors needs subjects; leave a factor out or narrow the levels with `where`"));
    }
    let mut y = DMatrix::<f64>::zeros(complete.len(), n_cells);
    for (t, &s) in complete.iter().enumerate() {
        for c in 0..n_cells {
            let (sum, count) = cells.get(s * n_cells + c);
            y[(t, c)] = sum / count as f64;
        }
    }
    let rows_used = complete.iter().map(|&s| rows_of[s]).sum();
    if within_uses.is_empty() {
        notes.push(
            "no factor named changes inside a subject: the analysis is between subjects, on one value per subject".into(),
        );
    }
    Ok(SubjectDesign {
        subject: col.name.clone(),
        ids: complete.iter().map(|&s| ids[s].clone()).collect(),
        between: between_uses,
        within: within_uses,
        y,
        group,
        offset: plan.y.offset,
        rows_used,
        rows_dropped,
        notes,
    })
}
