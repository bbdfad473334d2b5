//! The analysis verbs (`describe`, `anova`, `plot`): a resolved plan, its cells, the model,
//! and the answer to render.

use crate::data::Dataset;
use crate::design::{Plan, resolve};
use crate::error::CellError;
use crate::lang::ast::{Analysis, PlotKind, Verb};
use crate::models::describe::{CellSummary, summarise};
use crate::models::oneway::oneway;
use crate::render::fmt::{df, es, num, p_report, p_table, stat};
use crate::render::svg::{Figure, Group, draw};
use crate::render::{Align, AnovaLine, Answer, DisplayTable, Provenance};
use crate::session::{check_options, one_number};
use serde_json::{Value as Json, json};
use std::collections::BTreeMap;

/// The caution printed under analyses.
pub const CAUTION: &str = "A small p says the data would be surprising if the groups did not differ; it is not the size or the importance of a difference. The F test assumes independent observations, roughly normal residuals and similar spread in every group. Decisions about animals, patients or food safety follow local rules and qualified review.";

/// Runs `describe`, `anova` or `plot` on `ds` (`named`: the dataset was named with `in`).
pub(crate) fn run(a: &Analysis, ds: &Dataset, named: bool) -> Result<Answer, CellError> {
    if let Some(b) = &a.by {
        if a.verb != Verb::Compare {
            return Err(CellError::input(format!(
                "`by` belongs to `compare` (comparisons within each level of a factor); `{}` takes its factors after `across`",
                a.verb.word()
            ))
            .at(b.span));
        }
    }
    if a.verb == Verb::Compare {
        return crate::compare::run(a, ds, named);
    }
    let residual_figure = matches!(a.verb, Verb::Plot(PlotKind::Qq | PlotKind::Residuals));
    let allowed: &[&str] = match (a.verb, a.subject.is_some()) {
        (Verb::Check | Verb::Compare | Verb::Permute, _) => &[],
        _ if residual_figure => &[],
        (Verb::Anova, true) => &["level", "ss", "correction", "duplicates"],
        (_, true) => &["level", "duplicates"],
        (Verb::Anova, false) => &["level", "ss", "welch"],
        (Verb::Describe | Verb::Plot(_), false) => &["level"],
    };
    check_options(&a.options, a.verb.word(), allowed)?;
    let mut level = 0.95;
    for o in &a.options {
        if o.name.value == "level" {
            level = one_number(o)?;
            if !(level > 0.0 && level < 1.0) {
                return Err(CellError::input(
                    "`level` is a confidence level between 0 and 1, e.g. 0.95",
                )
                .at(o.span));
            }
        }
    }
    if a.verb == Verb::Plot(PlotKind::Profile) && a.subject.is_none() {
        return Err(CellError::design("a profile figure needs `subject COLUMN`")
            .at(a.verb_span)
            .note("e.g. `plot profile length across day subject fish`"));
    }
    let plan = resolve(a, ds)?;
    let mut notes = plan.notes.clone();
    notes.splice(0..0, implicit_dataset_note(ds, named));
    if a.verb == Verb::Check || residual_figure {
        return crate::checks::run(a, ds, plan, notes);
    }
    if plan.subject.is_some() {
        return crate::repeated::run(a, ds, plan, notes, level);
    }
    if a.verb == Verb::Anova && plan.factors.len() > 1 {
        return factorial_answer(a, ds, &plan, notes, level);
    }
    let cells = cells_of(&plan, level).map_err(|e| e.at_if_none(a.verb_span))?;
    for name in cells.empty.iter().take(10) {
        notes.push(format!(
            "level {name} has no observations in the rows used and is left out"
        ));
    }
    if cells.empty.len() > 10 {
        notes.push(format!(
            "… and {} more combinations of levels with no observations",
            cells.empty.len() - 10
        ));
    }
    let factor_label = plan
        .factors
        .iter()
        .map(|f| f.display_name())
        .collect::<Vec<_>>()
        .join(" × ");
    let y_label = plan.response.display_name().to_string();
    let fig_kind = match a.verb {
        Verb::Plot(k) => k,
        _ => PlotKind::Means,
    };
    let svg = draw(&Figure {
        kind: fig_kind,
        groups: cells
            .groups
            .iter()
            .zip(&cells.summaries)
            .map(|((name, vals), s)| Group {
                name: name.clone(),
                values: vals.iter().map(|v| v + plan.y.offset).collect(),
                mean: s.mean,
                ci: s.ci_low.zip(s.ci_high),
                label: None,
            })
            .collect(),
        x_label: factor_label.clone(),
        y_label: y_label.clone(),
        level,
    });
    if svg.is_none() {
        notes.push("the figure could not be drawn for these values".into());
    }
    if cells.groups.iter().any(|g| g.1.len() > MAX_DRAWN) {
        notes.push(format!(
            "groups with more than {MAX_DRAWN} observations are drawn as an evenly spaced sample of their points; means, intervals and boxes use all"
        ));
    }
    let provenance = provenance_of(ds, &plan);
    let factor_names: Vec<&str> = plan.factors.iter().map(|f| f.name.as_str()).collect();
    let design = json!({
        "between": factor_names, "within": [], "subject": null,
        "n": plan.rows.len(),
        "levels": plan.factors.iter().enumerate().map(|(k, f)| (f.name.clone(), json!(plan.levels(k)))).collect::<serde_json::Map<_, _>>(),
    });
    let mut answer = Answer {
        command: a.verb.word().to_string(),
        figure: svg,
        provenance: Some(provenance),
        design,
        with_bundle: true,
        ..Default::default()
    };
    answer.bundle_tables.insert(
        "cells".into(),
        serde_json::to_value(&cells.summaries).unwrap_or(Json::Null),
    );
    let cells_table = cells_display(&plan, &cells.summaries, level);
    match a.verb {
        // `check` and `compare` are answered before this point.
        Verb::Check | Verb::Compare | Verb::Permute => {
            return Err(CellError::input("this verb takes no figure kind"));
        }
        Verb::Describe => {
            answer.title = format!(
                "{y_label} across {factor_label}: {} cells, {} observations",
                cells.summaries.len(),
                plan.rows.len()
            );
            answer.tables.push(cells_table);
        }
        Verb::Plot(k) => {
            answer.title = format!(
                "{y_label} across {factor_label} ({})",
                match k {
                    PlotKind::Means => format!(
                        "means with {}% confidence intervals, every observation",
                        pct(level)
                    ),
                    PlotKind::Box =>
                        "box plots: median, quartiles, whiskers to 1.5 × IQR; every observation"
                            .into(),
                    _ => "every observation".into(),
                }
            );
        }
        Verb::Anova => {
            crate::repeated::options(&a.options)?; // validates `ss` (one factor: both types agree)
            let welch_opt = a.options.iter().find(|o| o.name.value == "welch");
            if let Some(o) = welch_opt {
                if !o.values.is_empty() {
                    return Err(
                        CellError::input("`welch` takes no value: write `with welch`").at(o.span),
                    );
                }
            }
            let fname = &plan.factors[0].name;
            let fit = oneway(
                fname,
                &cells
                    .groups
                    .iter()
                    .map(|(_, v)| v.clone())
                    .collect::<Vec<_>>(),
            )
            .map_err(|e| e.at_if_none(a.factors[0].span))?;
            notes.extend(fit.notes.iter().cloned());
            let mut fit = fit;
            let (df_b, df_w, n_tot) = (fit.rows[0].df, fit.rows[1].df, fit.n as f64);
            if let Some(fv) = fit.rows[0].f {
                if let Some(ci) =
                    crate::models::power::effect_interval(fv, df_b, df_w, n_tot, level)
                {
                    let r = &mut fit.rows[0];
                    r.eta2_ci_low = Some(ci.eta2_low);
                    r.eta2_ci_high = Some(ci.eta2_high);
                    r.f_ci_low = Some(ci.f_low);
                    r.f_ci_high = Some(ci.f_high);
                    r.level = Some(level);
                }
            }
            let e = fit.effect();
            answer.title = format!(
                "One-way ANOVA: {y_label} across {factor_label} ({} levels, {} observations)",
                fit.k, fit.n
            );
            answer.tables.push(crate::render::anova_table(
                "Analysis of variance (between subjects)".into(),
                ["η²", "ω²"],
                fit.rows.iter().map(|r| AnovaLine {
                    effect: &r.effect,
                    df: r.df,
                    ss: r.ss,
                    ms: r.ms,
                    f: r.f,
                    is_effect: r.effect == *fname,
                    p: r.p,
                    sizes: [r.eta2, r.omega2],
                }),
            ));
            answer.tables.push(cells_table);
            answer.report = Some(match (e.f, e.p) {
                (Some(f), Some(p)) => format!(
                    "{}: F({}, {}) = {}, {}, η² = {}{}, ω² = {}",
                    fname,
                    df(e.df),
                    df(fit.rows[1].df),
                    stat(f),
                    p_report(p),
                    es(e.eta2.unwrap_or(0.0)),
                    match (e.eta2_ci_low, e.eta2_ci_high) {
                        (Some(a), Some(b)) =>
                            format!(", {}% CI [{}, {}]", pct(level), es(a), es(b)),
                        _ => String::new(),
                    },
                    es(e.omega2.unwrap_or(0.0))
                ),
                _ => format!(
                    "{fname}: F undefined (no variation within groups), η² = {}",
                    es(e.eta2.unwrap_or(0.0))
                ),
            });
            if welch_opt.is_some() {
                let names: Vec<String> = cells.groups.iter().map(|g| g.0.clone()).collect();
                let groups: Vec<Vec<f64>> = cells.groups.iter().map(|g| g.1.clone()).collect();
                let w = crate::models::welch::welch(fname, &names, &groups)
                    .map_err(|e| e.at_if_none(a.verb_span))?;
                answer.tables.insert(
                    1,
                    DisplayTable {
                        caption: "Welch's ANOVA (does not assume equal spread; Welch 1951)".into(),
                        columns: vec![
                            ("Source".into(), Align::Left),
                            ("F".into(), Align::Right),
                            ("df".into(), Align::Right),
                            ("error df".into(), Align::Right),
                            ("p".into(), Align::Right),
                        ],
                        rows: vec![vec![
                            w.effect.clone(),
                            num(w.f),
                            df(w.df),
                            df(w.df_error),
                            w.p.map(p_table).unwrap_or_default(),
                        ]],
                    },
                );
                if let Some(p) = w.p {
                    answer.report = Some(format!(
                        "{}; Welch: F({}, {}) = {}, {}",
                        answer.report.take().unwrap_or_default(),
                        df(w.df),
                        crate::render::fmt::df_corrected(w.df_error),
                        stat(w.f),
                        p_report(p)
                    ));
                }
                answer.bundle_tables.insert(
                    "welch".into(),
                    serde_json::to_value(vec![&w]).unwrap_or(Json::Null),
                );
            }
            answer.caution = Some(CAUTION.into());
            answer.bundle_tables.insert(
                "anova".into(),
                serde_json::to_value(&fit.rows).unwrap_or(Json::Null),
            );
        }
    }
    answer.notes = notes;
    Ok(answer)
}

/// `anova` with several between factors.
fn factorial_answer(
    a: &Analysis,
    ds: &Dataset,
    plan: &Plan<'_>,
    mut notes: Vec<String>,
    level: f64,
) -> Result<Answer, CellError> {
    let opts = crate::repeated::options(&a.options)?;
    if let Some(o) = a.options.iter().find(|o| o.name.value == "welch") {
        return Err(CellError::input(
            "Welch's test is for one factor; with several, consider `check` and a randomisation test",
        )
        .at(o.span));
    }
    let y_label = plan.response.display_name().to_string();
    let lay = crate::factorial::layout(plan, a)?;
    let summaries = crate::factorial::summaries(&lay, plan.y.offset, level);
    let parts = crate::factorial::run(&lay, &summaries, &y_label, opts.ss)
        .map_err(|e| e.at_if_none(a.verb_span))?;
    notes.extend(lay.notes.iter().cloned());
    notes.extend(parts.notes);
    let mut answer = Answer {
        command: "anova".into(),
        title: parts.title,
        figure: parts.figure,
        report: Some(parts.report),
        caution: Some(CAUTION.into()),
        provenance: Some(provenance_of(ds, plan)),
        design: crate::factorial::design_json(&lay, plan.rows.len(), opts.ss),
        with_bundle: true,
        notes,
        ..Default::default()
    };
    answer.tables.push(parts.table);
    answer.tables.push(cells_display(plan, &summaries, level));
    answer.bundle_tables.insert("anova".into(), parts.rows);
    answer.bundle_tables.insert(
        "cells".into(),
        serde_json::to_value(&summaries).unwrap_or(Json::Null),
    );
    Ok(answer)
}

struct Cells {
    /// (label, shifted values) per non-empty cell, in level order.
    groups: Vec<(String, Vec<f64>)>,
    summaries: Vec<CellSummary>,
    /// Cells with no observations (only listed when the crossing is small).
    empty: Vec<String>,
}

/// The cells that occur in the rows, in level order. The values are gathered densely when the
/// product of level counts is small, and by the combinations that occur otherwise, so that
/// crossing identifier-like columns never allocates by the product; more than
/// [`crate::design::MAX_CELLS`] occurring cells are refused.
fn cells_of(plan: &Plan<'_>, level: f64) -> Result<Cells, CellError> {
    let nf = plan.factors.len();
    let sizes: Vec<usize> = (0..nf).map(|k| plan.levels(k).len()).collect();
    let names: Vec<&str> = plan.factors.iter().map(|f| f.name.as_str()).collect();
    let dense = sizes
        .iter()
        .try_fold(1usize, |acc, &k| acc.checked_mul(k.max(1)))
        .filter(|&t| t <= DENSE_CELLS);
    let mut occurring: Vec<(Vec<u32>, Vec<f64>)> = Vec::new();
    let mut empty = Vec::new();
    let codes_of = |i: usize| -> Vec<u32> { (0..nf).map(|k| plan.code(k, i)).collect() };
    match dense {
        Some(total) => {
            let mut buckets: Vec<Vec<f64>> = vec![Vec::new(); total];
            for &i in &plan.rows {
                let idx = (0..nf).fold(0, |acc, k| acc * sizes[k] + plan.code(k, i) as usize);
                buckets[idx].push(plan.y.shifted[i]);
            }
            for (idx, vals) in buckets.into_iter().enumerate() {
                let mut rem = idx;
                let mut codes = vec![0u32; nf];
                for k in (0..nf).rev() {
                    codes[k] = (rem % sizes[k]) as u32;
                    rem /= sizes[k];
                }
                if vals.is_empty() {
                    empty.push(codes);
                } else {
                    occurring.push((codes, vals));
                }
            }
        }
        None => {
            let mut map: BTreeMap<Vec<u32>, Vec<f64>> = BTreeMap::new();
            for &i in &plan.rows {
                let key = codes_of(i);
                if !map.contains_key(&key) && map.len() == crate::design::MAX_CELLS {
                    return Err(crate::design::too_many_cells(&names, &sizes));
                }
                map.entry(key).or_default().push(plan.y.shifted[i]);
            }
            occurring = map.into_iter().collect();
        }
    }
    if occurring.len() > crate::design::MAX_CELLS {
        return Err(crate::design::too_many_cells(&names, &sizes));
    }
    let label = |codes: &[u32]| -> Vec<String> {
        (0..nf)
            .map(|k| plan.levels(k)[codes[k] as usize].clone())
            .collect()
    };
    let mut out = Cells {
        groups: Vec::new(),
        summaries: Vec::new(),
        empty: empty.iter().map(|c| label(c).join(" / ")).collect(),
    };
    for (codes, vals) in occurring {
        let names = label(&codes);
        let levels: BTreeMap<String, String> = plan
            .factors
            .iter()
            .zip(&names)
            .map(|(f, n)| (f.name.clone(), n.clone()))
            .collect();
        out.summaries
            .push(summarise(levels, &vals, plan.y.offset, level));
        out.groups.push((names.join(" / "), vals));
    }
    Ok(out)
}

/// Crossings with at most this many combinations are gathered densely.
const DENSE_CELLS: usize = 1 << 16;

use crate::render::svg::MAX_DRAWN;

/// The note saying which dataset was used when the statement named none.
pub(crate) fn implicit_dataset_note(ds: &Dataset, named: bool) -> Option<String> {
    (!named).then(|| {
        format!(
            "dataset {} (the one read most recently); name another with `in NAME`",
            ds.name
        )
    })
}

/// A confidence level as a percentage ("95").
pub(crate) fn pct(level: f64) -> String {
    num(level * 100.0)
}

/// Where the numbers of `plan` came from.
pub(crate) fn provenance_of(ds: &Dataset, plan: &Plan<'_>) -> Provenance {
    Provenance {
        dataset: ds.name.clone(),
        source: ds.source.clone(),
        sha256: ds.sha256.clone(),
        rows_used: plan.rows.len(),
        rows_dropped: plan.dropped_missing + plan.dropped_where,
        read_at: ds.read_at.clone(),
    }
}

fn cells_display(plan: &Plan<'_>, cells: &[CellSummary], level: f64) -> DisplayTable {
    let factors: Vec<(String, String)> = plan
        .factors
        .iter()
        .map(|f| (f.name.clone(), f.display_name().to_string()))
        .collect();
    cells_display_of(plan.response.display_name(), &factors, cells, level)
}

/// The table of cells: factors given as (column name, label).
pub(crate) fn cells_display_of(
    y_label: &str,
    factors: &[(String, String)],
    cells: &[CellSummary],
    level: f64,
) -> DisplayTable {
    let mut columns: Vec<(String, Align)> =
        factors.iter().map(|f| (f.1.clone(), Align::Left)).collect();
    for h in ["n", "mean", "SD", "SE"] {
        columns.push((h.into(), Align::Right));
    }
    columns.push((format!("{}% CI", pct(level)), Align::Right));
    let opt = |x: Option<f64>| x.map(num).unwrap_or_else(|| "—".into());
    let rows = cells
        .iter()
        .map(|c| {
            let mut r: Vec<String> = factors
                .iter()
                .map(|f| c.levels.get(&f.0).cloned().unwrap_or_default())
                .collect();
            r.push(c.n.to_string());
            r.push(num(c.mean));
            r.push(opt(c.sd));
            r.push(opt(c.se));
            r.push(match (c.ci_low, c.ci_high) {
                (Some(a), Some(b)) => format!("{} to {}", num(a), num(b)),
                _ => "—".into(),
            });
            r
        })
        .collect();
    DisplayTable {
        caption: format!(
            "{y_label} by cell (mean ± t-based {}% confidence interval)",
            pct(level)
        ),
        columns,
        rows,
    }
}
