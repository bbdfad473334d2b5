//! `compare Y across F [subject S] [by B] with method M[, control "L"][, alpha A]`: which levels
//! differ, under multiplicity control (models in `models/compare.rs`).

use crate::analysis::{cells_display_of, provenance_of};
use crate::data::Dataset;
use crate::design::resolve;
use crate::error::{CellError, nearest};
use crate::lang::ast::{Analysis, PlotKind, Value};
use crate::models::compare::{
    GroupStat, Method, PairRow, against_control, all_pairs, letters, paired,
};
use crate::models::describe::{CellSummary, summarise};
use crate::models::sums::{centred_ss, mean};
use crate::render::fmt::{df, df_corrected, est, num, p_report, p_table};
use crate::render::svg::{Figure, Group, draw, draw_intervals};
use crate::render::{Align, Answer, DisplayTable};
use crate::session::{check_options, one_number, one_value};
use serde_json::{Value as Json, json};
use std::collections::BTreeMap;

/// The caution printed under comparisons.
pub const CAUTION_COMPARE: &str = "Adjusted p values and simultaneous intervals control the chance of any false difference among the comparisons shown; a level that does not differ is not shown to be equal. Decisions about animals, patients or food safety follow local rules and qualified review.";

struct Family {
    /// The `by` level, if any.
    by: Option<(String, String)>,
    groups: Vec<GroupStat>,
    /// Shifted values per group (for the summaries and figure).
    values: Vec<Vec<f64>>,
    /// Paired data: subjects × levels (within-subject comparisons).
    paired: Option<Vec<Vec<f64>>>,
    mse: f64,
    df_e: f64,
}

impl Family {
    fn new(
        by: Option<(String, String)>,
        levels: &[String],
        values: Vec<Vec<f64>>,
        paired: Option<Vec<Vec<f64>>>,
        mse: f64,
        df_e: f64,
    ) -> Family {
        Family {
            by,
            groups: levels
                .iter()
                .zip(&values)
                .map(|(l, v)| stat_of(l, v))
                .collect(),
            values,
            paired,
            mse,
            df_e,
        }
    }
}

fn stat_of(name: &str, vals: &[f64]) -> GroupStat {
    let m = mean(vals);
    let n = vals.len() as f64;
    GroupStat {
        name: name.to_string(),
        n,
        mean: m,
        var: if vals.len() > 1 {
            centred_ss(vals, m) / (n - 1.0)
        } else {
            f64::NAN
        },
    }
}

fn pooled(values: &[Vec<f64>]) -> (f64, f64) {
    let mut ss = 0.0;
    let mut n = 0usize;
    for v in values {
        ss += centred_ss(v, mean(v));
        n += v.len();
    }
    let df = n as f64 - values.len() as f64;
    (if df > 0.0 { ss / df } else { f64::NAN }, df)
}

/// Runs `compare`.
pub(crate) fn run(a: &Analysis, ds: &Dataset, named: bool) -> Result<Answer, CellError> {
    check_options(&a.options, "compare", &["method", "control", "alpha"])?;
    if a.factors.len() != 1 {
        return Err(CellError::input(format!(
            "`compare` compares the levels of one factor; {} were given",
            a.factors.len()
        ))
        .at(a.factors[1].span)
        .note(format!(
            "to compare {} within each level of {}, write `compare {} across {} by {}`",
            a.factors[0].value,
            a.factors[1].value,
            a.response.value,
            a.factors[0].value,
            a.factors[1].value
        )));
    }
    let mut method = None;
    let mut control = None;
    let mut alpha = 0.05;
    for o in &a.options {
        match o.name.value.as_str() {
            "method" => {
                let w = one_value(o)?.text();
                method = Some(
                    Method::ALL
                        .iter()
                        .find(|m| m.0 == w)
                        .map(|m| m.1)
                        .ok_or_else(|| {
                            CellError::input(format!("`{w}` is not a comparison method"))
                                .at(o.span)
                                .suggest(nearest(&w, Method::ALL.iter().map(|m| m.0)))
                                .note(format!(
                                    "methods: {}",
                                    Method::ALL
                                        .iter()
                                        .map(|m| m.0)
                                        .collect::<Vec<_>>()
                                        .join(", ")
                                ))
                        })?,
                );
            }
            "control" => {
                control = Some((
                    match one_value(o)? {
                        Value::Str(s) | Value::Word(s) => s.clone(),
                        v => v.text(),
                    },
                    o.span,
                ))
            }
            "alpha" => {
                alpha = one_number(o)?;
                if !(alpha > 0.0 && alpha < 0.5) {
                    return Err(CellError::input(
                        "`alpha` is the familywise error rate, between 0 and 0.5 (e.g. 0.05)",
                    )
                    .at(o.span));
                }
            }
            _ => {}
        }
    }
    let within_subject = a.subject.is_some();
    if a.by.is_some() && within_subject {
        return Err(CellError::input("`by` (comparisons within each level of another factor) is for designs without `subject`")
            .at(a.by.as_ref().map(|b| b.span).unwrap_or(a.verb_span))
            .note("for a mixed design, compare the within-subject levels in each group with `where GROUP = \"…\"`"));
    }
    if control.is_some() && method.is_some_and(|m| m != Method::Dunnett) {
        return Err(CellError::input("`control` belongs to `method dunnett`")
            .at(control.as_ref().map(|c| c.1).unwrap_or(a.verb_span)));
    }
    if control.is_some() && method.is_none() {
        method = Some(Method::Dunnett);
    }
    let mut resolved = a.clone();
    if let Some(b) = &a.by {
        if b.value == a.factors[0].value {
            return Err(CellError::input("`by` names the factor being compared").at(b.span));
        }
        resolved.factors.push(b.clone());
    }
    let plan = resolve(&resolved, ds)?;
    let mut notes = plan.notes.clone();
    notes.splice(0..0, crate::analysis::implicit_dataset_note(ds, named));
    let fname = plan.factors[0].name.clone();
    let flabel = plan.factors[0].display_name().to_string();
    let y_label = plan.response.display_name().to_string();
    let offset = plan.y.offset;
    let mut families: Vec<Family> = Vec::new();
    let mut provenance = provenance_of(ds, &plan);
    let mut paired_design = false;
    if within_subject {
        let sd = crate::subjects::build(&plan, false)?;
        notes.extend(sd.notes.iter().cloned());
        provenance.rows_used = sd.rows_used;
        provenance.rows_dropped += sd.rows_dropped;
        if let Some(f) = sd.within.iter().find(|f| f.name == fname) {
            paired_design = true;
            let cols: Vec<Vec<f64>> = (0..sd.ids.len())
                .map(|s| (0..f.levels.len()).map(|j| sd.y[(s, j)]).collect())
                .collect();
            let values: Vec<Vec<f64>> = (0..f.levels.len())
                .map(|j| cols.iter().map(|r| r[j]).collect())
                .collect();
            families.push(Family::new(
                None,
                &f.levels,
                values,
                Some(cols),
                f64::NAN,
                sd.ids.len() as f64 - 1.0,
            ));
            notes.push(format!("{fname} changes within subjects: each pair of levels is compared by a paired t test on the {} subjects' differences", sd.ids.len()));
        } else {
            let f = &sd.between[0];
            let subj = sd.subject_means();
            let values: Vec<Vec<f64>> = (0..f.levels.len())
                .map(|g| {
                    (0..sd.ids.len())
                        .filter(|&s| sd.group[s] == g)
                        .map(|s| subj[s])
                        .collect()
                })
                .collect();
            let (mse, df_e) = pooled(&values);
            families.push(Family::new(None, &f.levels, values, None, mse, df_e));
            notes.push(format!("{fname} is constant within subjects: the levels are compared on each subject's mean, with the error pooled between subjects"));
        }
    } else {
        let lay = crate::factorial::layout(&plan, &resolved)?;
        notes.extend(lay.notes.iter().cloned());
        let groups = lay.groups();
        let (mse, df_e) = pooled(&groups);
        let k = lay.sizes[0];
        if lay.sizes.len() == 1 {
            families.push(Family::new(
                None,
                &lay.levels[0],
                groups.clone(),
                None,
                mse,
                df_e,
            ));
        } else {
            let nb = lay.sizes[1];
            for b in 0..nb {
                let vals: Vec<Vec<f64>> = (0..k).map(|i| groups[i * nb + b].clone()).collect();
                families.push(Family::new(
                    Some((lay.names[1].clone(), lay.levels[1][b].clone())),
                    &lay.levels[0],
                    vals,
                    None,
                    mse,
                    df_e,
                ));
            }
            notes.push(format!(
                "simple effects: {fname} is compared within each level of {}, each level a family of its own, with the error pooled over the full {} × {} model ({} df)",
                lay.names[1], fname, lay.names[1], df_e
            ));
        }
    }
    let method = method.unwrap_or(if paired_design {
        Method::Holm
    } else {
        Method::Tukey
    });
    if paired_design && !matches!(method, Method::Holm | Method::Bonferroni | Method::Fdr) {
        return Err(CellError::input(format!(
            "{fname} changes within subjects, so its levels are compared by paired t tests; `{}` is for independent groups",
            method.word()
        ))
        .note("use `with method holm` (the default here), `bonferroni` or `fdr`"));
    }
    if !(families[0].df_e > 0.0) {
        return Err(
            CellError::design("no error degrees of freedom are left for the comparisons")
                .note("every group needs more than one observation"),
        );
    }
    let k = families[0].groups.len();
    if k == 2 {
        notes.push(format!("{fname} has two levels: the ANOVA's F test already is this comparison (F = t²); the difference and its interval are shown"));
    }
    let mut rows: Vec<PairRow> = Vec::new();
    let mut cells: Vec<CellSummary> = Vec::new();
    let mut letter_cols: Vec<String> = Vec::new();
    let mut dunnett_err = 0.0f64;
    for fam in &families {
        let mut fam_rows = if let Some(cols) = &fam.paired {
            let names: Vec<String> = fam.groups.iter().map(|g| g.name.clone()).collect();
            paired(&fname, &names, cols, method, alpha)?
        } else if method == Method::Dunnett {
            let (cname, cspan) = control.clone().ok_or_else(|| {
                CellError::input("`method dunnett` needs the control level: `with method dunnett, control \"LEVEL\"`")
                    .note(format!("levels: {}", crate::error::listing(fam.groups.iter().map(|g| g.name.as_str()))))
            })?;
            let ci = fam
                .groups
                .iter()
                .position(|g| g.name == cname)
                .ok_or_else(|| {
                    CellError::input(format!(
                        "\"{fname}\" has no level \"{cname}\" to use as the control"
                    ))
                    .at(cspan)
                    .suggest(nearest(&cname, fam.groups.iter().map(|g| g.name.as_str())))
                    .note(format!(
                        "levels: {}",
                        fam.groups
                            .iter()
                            .map(|g| g.name.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ))
                })?;
            let (r, err) = against_control(&fname, &fam.groups, ci, fam.mse, fam.df_e, alpha)?;
            dunnett_err = dunnett_err.max(err);
            r
        } else {
            all_pairs(&fname, &fam.groups, fam.mse, fam.df_e, method, alpha)?
        };
        let by_map = fam
            .by
            .as_ref()
            .map(|(f, l)| BTreeMap::from([(f.clone(), l.clone())]));
        for r in &mut fam_rows {
            r.by = by_map.clone();
        }
        let means: Vec<f64> = fam.groups.iter().map(|g| g.mean).collect();
        let lets = if method == Method::Dunnett {
            vec![String::new(); k]
        } else {
            let differ: Vec<(usize, usize)> = fam_rows
                .iter()
                .filter(|r| r.p_adj.is_some_and(|p| p < alpha))
                .filter_map(|r| {
                    let i = fam.groups.iter().position(|g| g.name == r.a)?;
                    let j = fam.groups.iter().position(|g| g.name == r.b)?;
                    Some((i, j))
                })
                .collect();
            letters(&means, &differ)
        };
        for (i, g) in fam.groups.iter().enumerate() {
            let mut lv = BTreeMap::from([(fname.clone(), g.name.clone())]);
            if let Some((f, l)) = &fam.by {
                lv.insert(f.clone(), l.clone());
            }
            cells.push(summarise(lv, &fam.values[i], offset, 1.0 - alpha));
            letter_cols.push(lets[i].clone());
        }
        rows.extend(fam_rows);
    }
    // Outputs.
    let pct = crate::analysis::pct(1.0 - alpha);
    let interval = match method {
        Method::Tukey | Method::GamesHowell | Method::Dunnett => format!("{pct}% simultaneous"),
        Method::Holm | Method::Bonferroni => format!("{pct}% Bonferroni"),
        Method::Fdr => format!("{pct}% unadjusted"),
    };
    if method == Method::Fdr {
        notes.push("the false discovery rate has no simultaneous intervals: the intervals shown are unadjusted".into());
    }
    if method == Method::Holm {
        notes.push("Holm's step-down adjustment has no intervals of its own; the intervals shown are Bonferroni's, which are wider".into());
    }
    if method == Method::Dunnett {
        notes.push(format!(
            "Dunnett probabilities are integrated numerically (Gauss–Legendre over the exact one-factor form); the integration error at the critical value is below {:.0e}",
            (dunnett_err * 10.0).max(1e-12)
        ));
    }
    notes.push(format!("differences are mean(first) − mean(second) in {y_label}; levels sharing a letter do not differ at familywise α = {alpha}"));
    let stat_name = match method {
        Method::Tukey | Method::GamesHowell => "q",
        _ => "t",
    };
    let by_name = a.by.as_ref().map(|b| b.value.clone());
    let mut columns = vec![("Pair".to_string(), Align::Left)];
    if let Some(b) = &by_name {
        columns.push((b.clone(), Align::Left));
    }
    for (h, al) in [
        ("difference", Align::Right),
        ("SE", Align::Right),
        (stat_name, Align::Right),
        ("df", Align::Right),
        ("p", Align::Right),
        ("p adjusted", Align::Right),
    ] {
        columns.push((h.to_string(), al));
    }
    columns.push((format!("{interval} interval"), Align::Right));
    let table_rows = rows
        .iter()
        .map(|r| {
            let mut v = vec![format!("{} − {}", r.a, r.b)];
            if by_name.is_some() {
                v.push(
                    r.by.as_ref()
                        .and_then(|m| m.values().next().cloned())
                        .unwrap_or_default(),
                );
            }
            v.push(num(r.diff));
            v.push(num(r.se));
            v.push(num(r.statistic));
            v.push(if method == Method::GamesHowell {
                df_corrected(r.df)
            } else {
                df(r.df)
            });
            v.push(r.p.map(p_table).unwrap_or_else(|| "undefined".into()));
            v.push(r.p_adj.map(p_table).unwrap_or_else(|| "undefined".into()));
            v.push(match (r.ci_low, r.ci_high) {
                (Some(l), Some(h)) => format!("{} to {}", num(l), num(h)),
                _ => "—".into(),
            });
            v
        })
        .collect();
    let mut answer = Answer {
        command: "compare".into(),
        title: format!(
            "Comparisons of {y_label} across {flabel}: {} ({} comparison{})",
            method.prose(),
            rows.len(),
            if rows.len() == 1 { "" } else { "s" }
        ),
        provenance: Some(provenance),
        with_bundle: true,
        caution: Some(CAUTION_COMPARE.into()),
        design: json!({"factor": fname, "by": by_name, "subject": plan.subject.map(|s| s.name.clone()), "method": method.word(), "alpha": alpha, "paired": paired_design}),
        ..Default::default()
    };
    answer.tables.push(DisplayTable {
        caption: format!("Pairs, {} (familywise α = {alpha})", method.prose()),
        columns,
        rows: table_rows,
    });
    let mut cells_tbl = cells_display_of(
        &y_label,
        &plan
            .factors
            .iter()
            .map(|f| (f.name.clone(), f.display_name().to_string()))
            .collect::<Vec<_>>(),
        &cells,
        1.0 - alpha,
    );
    if method != Method::Dunnett {
        cells_tbl.columns.push(("letters".into(), Align::Left));
        for (r, l) in cells_tbl.rows.iter_mut().zip(&letter_cols) {
            r.push(l.clone());
        }
    }
    answer.tables.push(cells_tbl);
    let differ: Vec<&PairRow> = rows
        .iter()
        .filter(|r| r.p_adj.is_some_and(|p| p < alpha))
        .collect();
    answer.report = Some(if differ.is_empty() {
        format!(
            "{}: no pair of {flabel} levels differs at familywise α = {alpha} ({} comparisons)",
            method.prose(),
            rows.len()
        )
    } else {
        format!(
            "{}: {} of {} comparisons differ — {}",
            method.prose(),
            differ.len(),
            rows.len(),
            differ
                .iter()
                .map(|r| format!(
                    "{} − {}{} = {}, {} CI [{}, {}], adjusted {}",
                    r.a,
                    r.b,
                    r.by.as_ref()
                        .and_then(|m| m.values().next().map(|l| format!(" at {l}")))
                        .unwrap_or_default(),
                    est(r.diff),
                    interval,
                    r.ci_low.map(est).unwrap_or_default(),
                    r.ci_high.map(est).unwrap_or_default(),
                    p_report(r.p_adj.unwrap_or(1.0))
                ))
                .collect::<Vec<_>>()
                .join("; ")
        )
    });
    let labels: Vec<String> = rows
        .iter()
        .map(|r| match r.by.as_ref().and_then(|m| m.values().next()) {
            Some(l) => format!("{} − {} ({l})", r.a, r.b),
            None => format!("{} − {}", r.a, r.b),
        })
        .collect();
    answer.figure = draw_intervals(
        &rows
            .iter()
            .zip(&labels)
            .map(|(r, l)| (l.clone(), r.diff, r.ci_low, r.ci_high))
            .collect::<Vec<_>>(),
        &format!("difference in {y_label} ({interval} interval)"),
    );
    let means_fig = draw(&Figure {
        kind: PlotKind::Means,
        groups: cells
            .iter()
            .zip(&letter_cols)
            .enumerate()
            .map(|(i, (c, l))| {
                let fam = &families[i / k];
                let level = &fam.groups[i % k].name;
                let _ = c;
                Group {
                    name: match &fam.by {
                        Some((_, b)) => format!("{level} / {b}"),
                        None => level.clone(),
                    },
                    values: fam.values[i % k].iter().map(|v| v + offset).collect(),
                    mean: c.mean,
                    ci: c.ci_low.zip(c.ci_high),
                    label: (!l.is_empty()).then(|| l.clone()),
                }
            })
            .collect(),
        x_label: flabel.clone(),
        y_label: y_label.clone(),
        level: 1.0 - alpha,
    });
    answer.extra_figures.extend(means_fig);
    let mut cell_json = serde_json::to_value(&cells).unwrap_or(Json::Null);
    if let Json::Array(items) = &mut cell_json {
        if method != Method::Dunnett {
            for (item, l) in items.iter_mut().zip(&letter_cols) {
                item["letters"] = json!(l);
            }
        }
    }
    answer.bundle_tables.insert(
        "pairs".into(),
        serde_json::to_value(&rows).unwrap_or(Json::Null),
    );
    answer.bundle_tables.insert("cells".into(), cell_json);
    answer.notes = notes;
    Ok(answer)
}
