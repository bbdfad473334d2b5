//! `anova Y across A, B, …` without `subject`: the between-subjects factorial statement, and the
//! cell layout it shares with `check` and the residual figures.

use crate::design::{Plan, plural};
use crate::error::CellError;
use crate::lang::ast::Analysis;
use crate::models::describe::{CellSummary, summarise};
use crate::models::factorial::factorial;
use crate::models::linear::{CellStats, SsType};
use crate::models::sums::centred_ss;
use crate::render::fmt::{df, es, p_report, stat};
use crate::render::svg::{Profile, Series, draw_profile};
use crate::render::{AnovaLine, DisplayTable};
use serde_json::{Value as Json, json};
use std::collections::BTreeMap;

/// The rows of a plan arranged in the crossed cells of its factors (levels unused by the rows
/// left out).
pub(crate) struct Layout {
    /// Factor column names.
    pub names: Vec<String>,
    /// Factor labels.
    pub displays: Vec<String>,
    /// Levels used, per factor.
    pub levels: Vec<Vec<String>>,
    /// Levels per factor.
    pub sizes: Vec<usize>,
    /// Cell (mixed radix, first factor slowest) of each used row, in plan order.
    pub cell: Vec<usize>,
    /// Shifted response of each used row.
    pub y: Vec<f64>,
    /// Notes (levels left out).
    pub notes: Vec<String>,
}

impl Layout {
    /// Number of cells.
    pub fn n_cells(&self) -> usize {
        self.sizes.iter().product()
    }
    /// Level names of cell `c`.
    pub fn cell_levels(&self, mut c: usize) -> Vec<&str> {
        let mut out = vec![""; self.sizes.len()];
        for k in (0..self.sizes.len()).rev() {
            out[k] = &self.levels[k][c % self.sizes[k]];
            c /= self.sizes[k];
        }
        out
    }
    /// Values per cell.
    pub fn groups(&self) -> Vec<Vec<f64>> {
        let mut g = vec![Vec::new(); self.n_cells()];
        for (&c, &v) in self.cell.iter().zip(&self.y) {
            g[c].push(v);
        }
        g
    }
}

/// Builds the layout; a factor left with one level, or an empty combination, is an error.
pub(crate) fn layout(plan: &Plan<'_>, a: &Analysis) -> Result<Layout, CellError> {
    let nf = plan.factors.len();
    let mut maps = Vec::with_capacity(nf);
    let mut levels = Vec::with_capacity(nf);
    let mut notes = Vec::new();
    for k in 0..nf {
        let all = plan.levels(k);
        let mut seen = vec![false; all.len()];
        for &i in &plan.rows {
            seen[plan.code(k, i) as usize] = true;
        }
        let mut map = vec![usize::MAX; all.len()];
        let mut used = Vec::new();
        for (l, s) in seen.iter().enumerate() {
            if *s {
                map[l] = used.len();
                used.push(all[l].clone());
            } else {
                notes.push(format!(
                    "level {} of {} has no observations in the rows used and is left out",
                    all[l], plan.factors[k].name
                ));
            }
        }
        if used.len() < 2 {
            return Err(CellError::design(format!(
                "\"{}\" has a single level (\"{}\") in the rows used; a factor needs two or more",
                plan.factors[k].name,
                used.first().cloned().unwrap_or_default()
            ))
            .at(a.factors[k].span)
            .note("leave it out of `across`, or widen the `where` clause"));
        }
        maps.push(map);
        levels.push(used);
    }
    let sizes: Vec<usize> = levels.iter().map(Vec::len).collect();
    let names: Vec<&str> = plan.factors.iter().map(|f| f.name.as_str()).collect();
    crate::design::crossing(&names, &sizes).map_err(|e| e.at(a.verb_span))?;
    let cell: Vec<usize> = plan
        .rows
        .iter()
        .map(|&i| {
            (0..nf).fold(0, |acc, k| {
                acc * sizes[k] + maps[k][plan.code(k, i) as usize]
            })
        })
        .collect();
    let y: Vec<f64> = plan.rows.iter().map(|&i| plan.y.shifted[i]).collect();
    let lay = Layout {
        names: plan.factors.iter().map(|f| f.name.clone()).collect(),
        displays: plan
            .factors
            .iter()
            .map(|f| f.display_name().to_string())
            .collect(),
        levels,
        sizes,
        cell,
        y,
        notes,
    };
    let mut filled = vec![false; lay.n_cells()];
    for &c in &lay.cell {
        filled[c] = true;
    }
    let empty: Vec<String> = (0..lay.n_cells())
        .filter(|&c| !filled[c])
        .map(|c| lay.cell_levels(c).join(" / "))
        .collect();
    if !empty.is_empty() {
        let shown: Vec<&str> = empty.iter().take(10).map(String::as_str).collect();
        return Err(CellError::design(format!(
            "{} combination{} of {} {} no observations: {}{}",
            empty.len(),
            plural(empty.len()),
            lay.names.join(" × "),
            if empty.len() == 1 { "has" } else { "have" },
            shown.join(", "),
            if empty.len() > 10 { ", …" } else { "" }
        ))
        .at(a.verb_span)
        .note("a full factorial needs data in every combination; leave a factor out, or narrow its levels with `where`"));
    }
    Ok(lay)
}

/// Per-cell summaries (offset added back).
pub(crate) fn summaries(lay: &Layout, offset: f64, level: f64) -> Vec<CellSummary> {
    lay.groups()
        .iter()
        .enumerate()
        .map(|(c, vals)| {
            let levels: BTreeMap<String, String> = lay
                .names
                .iter()
                .zip(lay.cell_levels(c))
                .map(|(n, l)| (n.clone(), l.to_string()))
                .collect();
            summarise(levels, vals, offset, level)
        })
        .collect()
}

/// The interaction figure: the first factor on x, one line per combination of the others.
pub(crate) fn interaction_figure(
    lay: &Layout,
    cells: &[CellSummary],
    y_label: &str,
) -> Option<String> {
    let k = lay.sizes[0];
    let rest = lay.n_cells() / k;
    let series = (0..rest)
        .map(|r| {
            let at = |x: usize| &cells[x * rest + r];
            Series {
                name: lay.cell_levels(r)[1..].join(" / "),
                means: (0..k).map(|x| at(x).mean).collect(),
                ci: (0..k).map(|x| at(x).ci_low.zip(at(x).ci_high)).collect(),
                subjects: Vec::new(),
            }
        })
        .collect();
    draw_profile(&Profile {
        x_levels: lay.levels[0].clone(),
        series,
        x_label: lay.displays[0].clone(),
        y_label: y_label.to_string(),
    })
}

/// What the factorial statement adds to its answer.
pub(crate) struct FactorialParts {
    pub title: String,
    pub table: DisplayTable,
    pub report: String,
    pub rows: Json,
    pub notes: Vec<String>,
    pub figure: Option<String>,
}

/// Fits and formats the factorial ANOVA.
pub(crate) fn run(
    lay: &Layout,
    cells: &[CellSummary],
    y_label: &str,
    ty: SsType,
) -> Result<FactorialParts, CellError> {
    let stats = CellStats::from_values(&lay.sizes, &lay.cell, &lay.y);
    let grand = crate::models::sums::mean(&lay.y);
    let fit = factorial(&lay.displays, &stats, centred_ss(&lay.y, grand), ty)?;
    let table = crate::render::anova_table(
        format!(
            "Analysis of variance, between subjects, full factorial (sums of squares type {}{})",
            ty.number(),
            if ty == SsType::Three {
                ", sum-to-zero coding"
            } else {
                ": each effect adjusted for the effects that do not contain it"
            }
        ),
        ["ηp²", "ωp²"],
        fit.rows.iter().map(|r| AnovaLine {
            effect: &r.effect,
            df: r.df,
            ss: r.ss,
            ms: r.ms,
            f: r.f,
            is_effect: r.df_error.is_some(),
            p: r.p,
            sizes: [r.eta2_partial, r.omega2_partial],
        }),
    );
    let df_e = fit.rows[fit.rows.len() - 2].df;
    let report = fit
        .rows
        .iter()
        .filter(|r| r.df_error.is_some())
        .map(|r| match (r.f, r.p) {
            (Some(f), Some(p)) => format!(
                "{}: F({}, {}) = {}, {}, ηp² = {}",
                r.effect,
                df(r.df),
                df(df_e),
                stat(f),
                p_report(p),
                es(r.eta2_partial.unwrap_or(0.0))
            ),
            _ => format!("{}: F undefined (no variation within cells)", r.effect),
        })
        .collect::<Vec<_>>()
        .join("; ");
    let sizes: Vec<String> = lay.sizes.iter().map(|s| s.to_string()).collect();
    let counts: Vec<usize> = cells.iter().map(|c| c.n).collect();
    let balanced = counts.iter().all(|&c| c == counts[0]);
    let mut notes = fit.notes.clone();
    if !balanced && lay.sizes.len() > 1 {
        notes.push(format!(
            "the cells are unequal in size ({} to {} observations), so type 2 and type 3 sums of squares differ; this table uses type {} (`with ss {}` for the other)",
            counts.iter().min().unwrap_or(&0),
            counts.iter().max().unwrap_or(&0),
            ty.number(),
            if ty == SsType::Two { 3 } else { 2 }
        ));
    }
    Ok(FactorialParts {
        title: format!(
            "Factorial ANOVA ({}): {y_label} across {}; {} cells, {} observations",
            sizes.join(" × "),
            lay.displays.join(", "),
            fit.cells,
            fit.n
        ),
        table,
        report,
        rows: serde_json::to_value(&fit.rows).unwrap_or(Json::Null),
        notes,
        figure: interaction_figure(lay, cells, y_label),
    })
}

/// The design object for a between-subjects layout.
pub(crate) fn design_json(lay: &Layout, n: usize, ty: SsType) -> Json {
    json!({
        "between": lay.names, "within": [], "subject": null, "n": n, "ss_type": ty.number(),
        "levels": lay.names.iter().zip(&lay.levels).map(|(n, l)| (n.clone(), json!(l))).collect::<serde_json::Map<_, _>>(),
    })
}
