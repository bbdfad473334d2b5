//! The analysis verbs with `subject COLUMN`: `anova` (repeated-measures or mixed), `describe`
//! and `plot` over subjects, and `plot profile`.

use crate::analysis::{CAUTION, pct, provenance_of};
use crate::data::Dataset;
use crate::design::Plan;
use crate::error::CellError;
use crate::lang::ast::{Analysis, Opt, PlotKind, Value, Verb};
use crate::models::describe::{CellSummary, summarise};
use crate::models::linear::SsType;
use crate::models::repeated::{Correction, RmRow, fit};
use crate::render::fmt::{df, df_corrected, es, num, p_report, p_table, stat};
use crate::render::svg::{Figure, Group, Profile, Series, draw, draw_profile};
use crate::render::{Align, Answer, DisplayTable};
use crate::session::one_value;
use crate::subjects::{SubjectDesign, build};
use serde_json::{Value as Json, json};
use std::collections::BTreeMap;

/// The caution for designs with repeated measures.
pub const CAUTION_RM: &str = "Repeated-measures F tests also assume sphericity (corrected here as stated) and, with between groups, similar covariance in every group.";

/// Options of the subject forms.
pub(crate) struct RmOptions {
    pub ss: SsType,
    pub correction: Correction,
    pub duplicates_error: bool,
}

/// Reads `ss`, `correction` and `duplicates` (the other options are checked by the caller).
pub(crate) fn options(opts: &[Opt]) -> Result<RmOptions, CellError> {
    let mut out = RmOptions {
        ss: SsType::Two,
        correction: Correction::Auto,
        duplicates_error: false,
    };
    for o in opts {
        let word = || one_value(o).map(Value::text);
        match o.name.value.as_str() {
            "ss" => {
                out.ss = match word()?.as_str() {
                    "2" => SsType::Two,
                    "3" => SsType::Three,
                    other => {
                        return Err(CellError::input(format!(
                            "`ss` is 2 or 3, not \"{other}\""
                        ))
                        .at(o.span)
                        .note("2 adjusts each effect for the effects it does not contain (the default); 3 tests unweighted marginal means"));
                    }
                }
            }
            "correction" => {
                out.correction = match word()?.as_str() {
                    "auto" => Correction::Auto,
                    "gg" => Correction::Gg,
                    "hf" => Correction::Hf,
                    "none" => Correction::None,
                    other => {
                        return Err(CellError::input(format!(
                            "`correction` is auto, gg, hf or none, not \"{other}\""
                        ))
                        .at(o.span)
                        .suggest(crate::error::nearest(other, ["auto", "gg", "hf", "none"])));
                    }
                }
            }
            "duplicates" => {
                out.duplicates_error = match word()?.as_str() {
                    "average" => false,
                    "error" => true,
                    other => {
                        return Err(CellError::input(format!(
                            "`duplicates` is average or error, not \"{other}\""
                        ))
                        .at(o.span));
                    }
                }
            }
            _ => {}
        }
    }
    Ok(out)
}

/// One summary per between × within cell, over subjects.
fn cell_summaries(sd: &SubjectDesign, level: f64) -> Vec<(usize, usize, CellSummary, Vec<f64>)> {
    let g_cells: usize = sd
        .between
        .iter()
        .map(|f| f.levels.len())
        .product::<usize>()
        .max(1);
    let c_cells = sd.n_within_cells();
    let mut out = Vec::new();
    for g in 0..g_cells {
        for c in 0..c_cells {
            let vals: Vec<f64> = (0..sd.ids.len())
                .filter(|&s| sd.group[s] == g)
                .map(|s| sd.y[(s, c)])
                .collect();
            let mut levels = BTreeMap::new();
            for (f, l) in sd.between.iter().zip(sd.between_levels(g)) {
                levels.insert(f.name.clone(), l.to_string());
            }
            for (f, l) in sd.within.iter().zip(sd.within_levels(c)) {
                levels.insert(f.name.clone(), l.to_string());
            }
            let s = summarise(levels, &vals, sd.offset, level);
            out.push((g, c, s, vals));
        }
    }
    out
}

fn design_table(sd: &SubjectDesign) -> DisplayTable {
    let mut rows: Vec<Vec<String>> = Vec::new();
    for f in sd.between.iter().chain(&sd.within) {
        rows.push(vec![
            f.display.clone(),
            if f.within { "within" } else { "between" }.into(),
            f.levels.len().to_string(),
            f.evidence.clone(),
        ]);
    }
    DisplayTable {
        caption: format!(
            "Design: {} subjects ({}), each factor classified from the data",
            sd.ids.len(),
            sd.subject
        ),
        columns: vec![
            ("Factor".into(), Align::Left),
            ("Role".into(), Align::Left),
            ("Levels".into(), Align::Right),
            ("Evidence".into(), Align::Left),
        ],
        rows,
    }
}

fn cells_table(
    sd: &SubjectDesign,
    cells: &[(usize, usize, CellSummary, Vec<f64>)],
    y_label: &str,
    level: f64,
) -> DisplayTable {
    let factors: Vec<(String, String)> = sd
        .between
        .iter()
        .chain(&sd.within)
        .map(|f| (f.name.clone(), f.display.clone()))
        .collect();
    let summaries: Vec<CellSummary> = cells.iter().map(|c| c.2.clone()).collect();
    let mut t = crate::analysis::cells_display_of(y_label, &factors, &summaries, level);
    // Counts are of subjects here.
    if let Some(col) = t.columns.iter_mut().find(|c| c.0 == "n") {
        col.0 = "subjects".into();
    }
    t.caption = format!(
        "{y_label} by cell over subjects (mean ± t-based {}% confidence interval)",
        pct(level)
    );
    t
}

/// Most subject lines drawn in a profile figure; beyond it an evenly spaced sample is drawn.
const MAX_LINES: usize = 300;

/// The profile figure: the first within factor on x; one series per between group and level
/// of any other within factor. Returns the SVG and, when subject lines were sampled, a note.
fn profile(
    sd: &SubjectDesign,
    cells: &[(usize, usize, CellSummary, Vec<f64>)],
    y_label: &str,
) -> (Option<String>, Option<String>) {
    let Some(first) = sd.within.first() else {
        return (None, None);
    };
    let k = first.levels.len();
    let rest = sd.n_within_cells() / k;
    let step = (sd.ids.len() * rest).div_ceil(MAX_LINES).max(1);
    let g_cells: usize = sd
        .between
        .iter()
        .map(|f| f.levels.len())
        .product::<usize>()
        .max(1);
    let mut series = Vec::new();
    for g in 0..g_cells {
        for r in 0..rest {
            let cell = |x: usize| x * rest + r;
            let mut name: Vec<String> =
                sd.between_levels(g).iter().map(|s| s.to_string()).collect();
            if rest > 1 {
                let lv = sd.within_levels(cell(0));
                name.extend(lv[1..].iter().map(|s| s.to_string()));
            }
            let summ = |x: usize| &cells[g * sd.n_within_cells() + cell(x)].2;
            series.push(Series {
                name: name.join(" / "),
                means: (0..k).map(|x| summ(x).mean).collect(),
                ci: (0..k)
                    .map(|x| summ(x).ci_low.zip(summ(x).ci_high))
                    .collect(),
                subjects: (0..sd.ids.len())
                    .filter(|&s| sd.group[s] == g && s % step == 0)
                    .map(|s| (0..k).map(|x| sd.y[(s, cell(x))] + sd.offset).collect())
                    .collect(),
            });
        }
    }
    let note = (step > 1).then(|| {
        format!(
            "the figure draws every {step}th subject's line ({} of {} subjects); the means and intervals use all",
            sd.ids.len().div_ceil(step),
            sd.ids.len()
        )
    });
    let svg = draw_profile(&Profile {
        x_levels: first.levels.clone(),
        series,
        x_label: first.display.clone(),
        y_label: y_label.to_string(),
    });
    (svg, note)
}

fn sentence(r: &RmRow) -> String {
    let (Some(f), Some(p)) = (r.f, r.p) else {
        return format!("{}: F undefined (no variation in its error term)", r.effect);
    };
    let (d1, d2) = r.df_applied;
    let p = r.p_corrected.unwrap_or(p);
    let how = match (r.correction.as_deref(), r.gg_epsilon, r.hf_epsilon) {
        (Some("greenhouse-geisser"), Some(e), _) => format!(" (Greenhouse–Geisser, ε = {})", es(e)),
        (Some("huynh-feldt"), _, Some(e)) => format!(" (Huynh–Feldt, ε = {})", es(e)),
        _ => String::new(),
    };
    format!(
        "{}: F({}, {}) = {}, {}, ηp² = {}, ηG² = {}{how}",
        r.effect,
        df_corrected(d1),
        df_corrected(d2),
        stat(f),
        p_report(p),
        es(r.eta2_partial.unwrap_or(0.0)),
        es(r.eta2_generalized.unwrap_or(0.0)),
    )
}

fn anova_table(rows: &[RmRow], ss: SsType) -> DisplayTable {
    let opt = |x: Option<f64>| x.map(num).unwrap_or_default();
    DisplayTable {
        caption: format!(
            "Analysis of variance: each effect against its own error term (sums of squares type {})",
            ss.number()
        ),
        columns: vec![
            ("Effect".into(), Align::Left),
            ("Error term".into(), Align::Left),
            ("df".into(), Align::Right),
            ("SS".into(), Align::Right),
            ("error df".into(), Align::Right),
            ("error SS".into(), Align::Right),
            ("F".into(), Align::Right),
            ("p".into(), Align::Right),
            ("correction".into(), Align::Left),
            ("p corrected".into(), Align::Right),
            ("ηp²".into(), Align::Right),
            ("ηG²".into(), Align::Right),
        ],
        rows: rows
            .iter()
            .map(|r| {
                let corr = match (r.correction.as_deref(), r.gg_epsilon, r.hf_epsilon) {
                    (Some("greenhouse-geisser"), Some(e), _) => {
                        format!(
                            "GG ε = {}, df {}, {}",
                            es(e),
                            df_corrected(r.df_applied.0),
                            df_corrected(r.df_applied.1)
                        )
                    }
                    (Some("huynh-feldt"), _, Some(e)) => {
                        format!(
                            "HF ε = {}, df {}, {}",
                            es(e),
                            df_corrected(r.df_applied.0),
                            df_corrected(r.df_applied.1)
                        )
                    }
                    (Some(_), _, _) if r.df == r.df_applied.0 && r.gg_epsilon == Some(1.0) => {
                        "not needed (1 df)".into()
                    }
                    (Some(_), _, _) => "none".into(),
                    (None, _, _) => String::new(),
                };
                vec![
                    r.effect.clone(),
                    r.stratum.clone(),
                    df(r.df),
                    num(r.ss),
                    df(r.df_error),
                    num(r.ss_error),
                    r.f.map(num).unwrap_or_else(|| "undefined".into()),
                    r.p.map(p_table).unwrap_or_default(),
                    corr,
                    r.p_corrected.map(p_table).unwrap_or_default(),
                    opt(r.eta2_partial),
                    opt(r.eta2_generalized),
                ]
            })
            .collect(),
    }
}

fn sphericity_table(rm: &crate::models::repeated::Rm) -> Option<DisplayTable> {
    if rm.sphericity.is_empty() {
        return None;
    }
    let opt = |x: Option<f64>| x.map(num).unwrap_or_else(|| "undefined".into());
    let p_of = |effect: &str, pick: fn(&RmRow) -> Option<f64>| {
        rm.rows
            .iter()
            .find(|r| r.effect == effect)
            .and_then(pick)
            .map(p_table)
            .unwrap_or_else(|| "—".into())
    };
    Some(DisplayTable {
        caption: "Sphericity of the within-subject effects: Mauchly's test and the ε corrections (p of the effect itself)".into(),
        columns: vec![
            ("Effect".into(), Align::Left),
            ("Mauchly W".into(), Align::Right),
            ("χ²".into(), Align::Right),
            ("df".into(), Align::Right),
            ("p".into(), Align::Right),
            ("ε GG".into(), Align::Right),
            ("p GG".into(), Align::Right),
            ("ε HF".into(), Align::Right),
            ("p HF".into(), Align::Right),
            ("ε lower bound".into(), Align::Right),
            ("p lower bound".into(), Align::Right),
        ],
        rows: rm
            .sphericity
            .iter()
            .map(|s| {
                vec![
                    s.effect.clone(),
                    opt(s.w),
                    opt(s.chi2),
                    df(s.df),
                    s.p.map(p_table).unwrap_or_else(|| "undefined".into()),
                    opt(s.gg_epsilon),
                    p_of(&s.effect, |r| r.gg_p),
                    opt(s.hf_epsilon),
                    p_of(&s.effect, |r| r.hf_p),
                    num(s.lower_bound),
                    p_of(&s.effect, |r| r.lb_p),
                ]
            })
            .collect(),
    })
}

/// Runs a subject form of `describe`, `anova` or `plot`.
pub(crate) fn run(
    a: &Analysis,
    ds: &Dataset,
    plan: Plan<'_>,
    mut notes: Vec<String>,
    level: f64,
) -> Result<Answer, CellError> {
    let opts = options(&a.options)?;
    let sd = build(&plan, opts.duplicates_error)
        .map_err(|e| e.at_if_none(a.subject.as_ref().map(|s| s.span).unwrap_or(a.verb_span)))?;
    notes.extend(sd.notes.iter().cloned());
    let y_label = plan.response.display_name().to_string();
    let cells = cell_summaries(&sd, level);
    let mut provenance = provenance_of(ds, &plan);
    provenance.rows_used = sd.rows_used;
    provenance.rows_dropped += sd.rows_dropped;
    let levels: serde_json::Map<String, Json> = sd
        .between
        .iter()
        .chain(&sd.within)
        .map(|f| (f.name.clone(), json!(f.levels)))
        .collect();
    let mut design = json!({
        "between": sd.between.iter().map(|f| f.name.clone()).collect::<Vec<_>>(),
        "within": sd.within.iter().map(|f| f.name.clone()).collect::<Vec<_>>(),
        "subject": sd.subject,
        "subjects": sd.ids.len(),
        "levels": levels,
        "roles": sd.between.iter().chain(&sd.within).map(|f| json!({
            "factor": f.name, "role": if f.within { "within" } else { "between" }, "evidence": f.evidence,
        })).collect::<Vec<_>>(),
    });
    let mut answer = Answer {
        command: a.verb.word().to_string(),
        provenance: Some(provenance),
        with_bundle: true,
        ..Default::default()
    };
    answer.bundle_tables.insert(
        "cells".into(),
        serde_json::to_value(cells.iter().map(|c| &c.2).collect::<Vec<_>>()).unwrap_or(Json::Null),
    );
    let factor_text = sd
        .between
        .iter()
        .map(|f| format!("{} (between)", f.display))
        .chain(sd.within.iter().map(|f| format!("{} (within)", f.display)))
        .collect::<Vec<_>>()
        .join(", ");
    let design_tbl = design_table(&sd);
    let cells_tbl = cells_table(&sd, &cells, &y_label, level);
    match a.verb {
        // `check` and `compare` are answered before this point.
        Verb::Check | Verb::Compare | Verb::Permute => {
            return Err(CellError::input("this verb takes no figure kind"));
        }
        Verb::Describe => {
            answer.title = format!(
                "{y_label} across {factor_text}: {} cells, {} subjects",
                cells.len(),
                sd.ids.len()
            );
            answer.tables.push(design_tbl);
            answer.tables.push(cells_tbl);
        }
        Verb::Plot(PlotKind::Profile) => {
            if sd.within.is_empty() {
                return Err(CellError::design(
                    "a profile figure needs a factor that changes within subjects; none does here",
                )
                .at(a.verb_span)
                .note("`plot means` draws between-subject groups"));
            }
            answer.title = format!(
                "{y_label} across {factor_text}: each subject's line, cell means with {}% confidence intervals",
                pct(level)
            );
            let (svg, note) = profile(&sd, &cells, &y_label);
            answer.figure = svg;
            notes.extend(note);
        }
        Verb::Plot(kind) => {
            answer.title = format!(
                "{y_label} across {factor_text} over {} subjects ({})",
                sd.ids.len(),
                match kind {
                    PlotKind::Means => format!(
                        "means with {}% confidence intervals, every subject",
                        pct(level)
                    ),
                    PlotKind::Box => "box plots of subjects' values".into(),
                    _ => "every subject's value".into(),
                }
            );
            let x_label = sd
                .between
                .iter()
                .chain(&sd.within)
                .map(|f| f.display.clone())
                .collect::<Vec<_>>()
                .join(" × ");
            answer.figure = draw(&Figure {
                kind,
                groups: cells
                    .iter()
                    .map(|(_, _, s, vals)| Group {
                        name: sd
                            .between
                            .iter()
                            .chain(&sd.within)
                            .map(|f| s.levels.get(&f.name).cloned().unwrap_or_default())
                            .collect::<Vec<_>>()
                            .join(" / "),
                        values: vals.iter().map(|v| v + sd.offset).collect(),
                        mean: s.mean,
                        ci: s.ci_low.zip(s.ci_high),
                        label: None,
                    })
                    .collect(),
                x_label,
                y_label: y_label.clone(),
                level,
            });
        }
        Verb::Anova => {
            let data = sd.rm_data();
            let rm = fit(&data, opts.ss, opts.correction).map_err(|e| e.at_if_none(a.verb_span))?;
            notes.extend(rm.notes.iter().cloned());
            let kind = match (sd.between.is_empty(), sd.within.is_empty()) {
                (_, true) => "Between-subjects ANOVA on subject means",
                (true, false) => "Repeated-measures ANOVA",
                (false, false) => "Mixed ANOVA",
            };
            answer.title = format!(
                "{kind}: {y_label} across {factor_text}; {} subjects",
                sd.ids.len()
            );
            design["ss_type"] = json!(opts.ss.number());
            answer.tables.push(anova_table(&rm.rows, opts.ss));
            if let Some(t) = sphericity_table(&rm) {
                answer.tables.push(t);
            }
            answer.tables.push(design_tbl);
            answer.tables.push(cells_tbl);
            answer.report = Some(rm.rows.iter().map(sentence).collect::<Vec<_>>().join("; "));
            answer.caution = Some(format!("{CAUTION} {CAUTION_RM}"));
            if !sd.within.is_empty() {
                let (svg, note) = profile(&sd, &cells, &y_label);
                answer.figure = svg;
                notes.extend(note);
            }
            answer.bundle_tables.insert(
                "anova".into(),
                serde_json::to_value(&rm.rows).unwrap_or(Json::Null),
            );
            answer.bundle_tables.insert(
                "sphericity".into(),
                serde_json::to_value(&rm.sphericity).unwrap_or(Json::Null),
            );
        }
    }
    if answer.figure.is_none()
        && matches!(a.verb, Verb::Plot(_) | Verb::Anova)
        && !sd.within.is_empty()
    {
        notes.push("the figure could not be drawn for these values".into());
    }
    answer.design = design;
    answer.notes = notes;
    Ok(answer)
}
