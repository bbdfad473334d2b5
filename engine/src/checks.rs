//! `check Y across F… [subject S]` (assumption checks) and the residual figures `plot qq` and
//! `plot residuals`.
//!
//! Residuals: without `subject`, y minus its cell mean; with `subject`, the residual of the
//! additive subject + cell model, y_sc − ȳ_s − ȳ_gc + ȳ_g (the error term of the
//! repeated-measures ANOVA). Spread is compared across the cells (without `subject`) or across
//! the between groups on subject means (with it). Sphericity comes from the repeated-measures
//! fit ([`crate::models::repeated`]).

use crate::analysis::provenance_of;
use crate::data::Dataset;
use crate::design::Plan;
use crate::error::CellError;
use crate::lang::ast::{Analysis, PlotKind, Verb};
use crate::models::assumptions::{Center, shapiro_wilk, spread};
use crate::models::linear::SsType;
use crate::models::repeated::{Correction, fit};
use crate::render::fmt::{df, num, p_report, p_table, stat};
use crate::render::svg::{XyPanel, draw_panels};
use crate::render::{Align, Answer, DisplayTable};
use serde::Serialize;
use serde_json::{Value as Json, json};
use statrs::distribution::{ContinuousCDF, Normal};

/// One row of the `checks` table (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CheckRow {
    /// `brown_forsythe`, `levene`, `shapiro_wilk` or `mauchly`.
    pub check: String,
    /// What was tested (the cells, `residuals`, a within effect).
    pub effect: String,
    /// F, W or Mauchly's W.
    pub statistic: f64,
    /// df (the χ² df for Mauchly).
    pub df: Option<f64>,
    /// Second df, where the test has two.
    pub df_error: Option<f64>,
    /// p.
    pub p: Option<f64>,
}

/// Most points drawn in a residual figure; beyond it an evenly spaced sample (in rank order
/// for the Q–Q panel) is drawn.
const MAX_POINTS: usize = 2000;

struct Residuals {
    fitted: Vec<f64>,
    resid: Vec<f64>,
    /// Cells (or between groups) for the spread tests: values per cell.
    spread_cells: Vec<Vec<f64>>,
    spread_name: Option<String>,
    mauchly: Vec<CheckRow>,
    notes: Vec<String>,
    n_label: String,
    /// With `subject`: rows used and rows set aside with the incomplete subjects.
    subject_rows: Option<(usize, usize)>,
}

fn residuals(a: &Analysis, plan: &Plan<'_>) -> Result<Residuals, CellError> {
    if plan.subject.is_none() {
        let lay = crate::factorial::layout(plan, a)?;
        let groups = lay.groups();
        let means: Vec<f64> = groups
            .iter()
            .map(|g| crate::models::sums::mean(g))
            .collect();
        let resid: Vec<f64> = lay
            .cell
            .iter()
            .zip(&lay.y)
            .map(|(&c, &v)| v - means[c])
            .collect();
        let fitted = lay.cell.iter().map(|&c| means[c] + plan.y.offset).collect();
        return Ok(Residuals {
            fitted,
            resid,
            spread_cells: groups,
            spread_name: Some(lay.displays.join(" × ")),
            mauchly: Vec::new(),
            notes: lay.notes,
            n_label: format!("{} observations", plan.rows.len()),
            subject_rows: None,
        });
    }
    let sd = crate::subjects::build(plan, false)?;
    let (n, c) = (sd.ids.len(), sd.n_within_cells());
    let g_cells: usize = sd
        .between
        .iter()
        .map(|f| f.levels.len())
        .product::<usize>()
        .max(1);
    let subj_mean = sd.subject_means();
    let mut cell_sum = vec![0.0; g_cells * c];
    let mut gcount = vec![0.0f64; g_cells];
    for s in 0..n {
        gcount[sd.group[s]] += 1.0;
        for j in 0..c {
            cell_sum[sd.group[s] * c + j] += sd.y[(s, j)];
        }
    }
    let cell_mean: Vec<f64> = (0..g_cells * c)
        .map(|i| cell_sum[i] / gcount[i / c].max(1.0))
        .collect();
    let group_mean: Vec<f64> = (0..g_cells)
        .map(|g| (0..c).map(|j| cell_mean[g * c + j]).sum::<f64>() / c as f64)
        .collect();
    let mut fitted = Vec::with_capacity(n * c);
    let mut resid = Vec::with_capacity(n * c);
    for s in 0..n {
        let g = sd.group[s];
        for j in 0..c {
            let f = subj_mean[s] + cell_mean[g * c + j] - group_mean[g];
            fitted.push(f + sd.offset);
            resid.push(sd.y[(s, j)] - f);
        }
    }
    let mut spread_cells = vec![Vec::new(); g_cells];
    for s in 0..n {
        spread_cells[sd.group[s]].push(subj_mean[s]);
    }
    let mut mauchly = Vec::new();
    let mut notes = sd.notes.clone();
    if !sd.within.is_empty() {
        let data = sd.rm_data();
        let rm = fit(&data, SsType::Two, Correction::None)?;
        for s in &rm.sphericity {
            if let Some(w) = s.w {
                mauchly.push(CheckRow {
                    check: "mauchly".into(),
                    effect: s.effect.clone(),
                    statistic: w,
                    df: Some(s.df),
                    df_error: None,
                    p: s.p,
                });
            }
        }
        notes.extend(
            rm.notes
                .into_iter()
                .filter(|n| n.contains("Mauchly") || n.contains("spherical")),
        );
    }
    Ok(Residuals {
        fitted,
        resid,
        spread_name: (!sd.between.is_empty()).then(|| {
            sd.between
                .iter()
                .map(|f| f.display.clone())
                .collect::<Vec<_>>()
                .join(" × ")
        }),
        spread_cells,
        mauchly,
        notes,
        n_label: format!("{} subjects × {} cells", n, c),
        subject_rows: Some((sd.rows_used, sd.rows_dropped)),
    })
}

fn thin<T: Copy>(v: &[T]) -> (Vec<T>, usize) {
    let step = v.len().div_ceil(MAX_POINTS).max(1);
    (v.iter().step_by(step).copied().collect(), step)
}

fn panels(r: &Residuals, kinds: &[PlotKind], y_label: &str) -> (Vec<XyPanel>, Option<String>) {
    let n = r.resid.len();
    let mut out = Vec::new();
    let mut thinned = false;
    for k in kinds {
        match k {
            PlotKind::Qq => {
                let mut s = r.resid.clone();
                s.sort_by(|a, b| a.total_cmp(b));
                let norm = Normal::standard();
                let q = |i: usize| norm.inverse_cdf((i as f64 + 1.0 - 0.375) / (n as f64 + 0.25));
                let pts: Vec<(f64, f64)> = (0..n).map(|i| (q(i), s[i])).collect();
                let (pts, step) = thin(&pts);
                thinned |= step > 1;
                // Reference line through the quartiles.
                let line = (n >= 4).then(|| {
                    let (i1, i3) = (n / 4, (3 * n) / 4);
                    let slope = (s[i3] - s[i1]) / (q(i3) - q(i1));
                    let (xa, xb) = (q(0), q(n - 1));
                    (
                        (xa, s[i1] + slope * (xa - q(i1))),
                        (xb, s[i1] + slope * (xb - q(i1))),
                    )
                });
                out.push(XyPanel {
                    title: "Residuals against normal quantiles".into(),
                    points: pts,
                    line,
                    x_label: "normal quantile".into(),
                    y_label: format!("residual ({y_label})"),
                });
            }
            _ => {
                let pts: Vec<(f64, f64)> = r
                    .fitted
                    .iter()
                    .copied()
                    .zip(r.resid.iter().copied())
                    .collect();
                let (pts, step) = thin(&pts);
                thinned |= step > 1;
                let (lo, hi) = r
                    .fitted
                    .iter()
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                        (a.min(x), b.max(x))
                    });
                out.push(XyPanel {
                    title: "Residuals against fitted values".into(),
                    points: pts,
                    line: lo.is_finite().then_some(((lo, 0.0), (hi, 0.0))),
                    x_label: format!("fitted ({y_label})"),
                    y_label: "residual".into(),
                });
            }
        }
    }
    let note = thinned.then(|| {
        format!("the figure draws an evenly spaced sample of {MAX_POINTS} of the {n} residuals; the tests use all")
    });
    (out, note)
}

/// Runs `check`, `plot qq` or `plot residuals`.
pub(crate) fn run(
    a: &Analysis,
    ds: &Dataset,
    plan: Plan<'_>,
    mut notes: Vec<String>,
) -> Result<Answer, CellError> {
    let r = residuals(a, &plan)
        .map_err(|e| e.at_if_none(a.subject.as_ref().map(|s| s.span).unwrap_or(a.verb_span)))?;
    notes.extend(r.notes.iter().cloned());
    let y_label = plan.response.display_name().to_string();
    let mut provenance = provenance_of(ds, &plan);
    if let Some((used, dropped)) = r.subject_rows {
        provenance.rows_used = used;
        provenance.rows_dropped += dropped;
    }
    let mut answer = Answer {
        command: a.verb.word().to_string(),
        provenance: Some(provenance),
        with_bundle: true,
        design: json!({
            "factors": plan.factors.iter().map(|f| f.name.clone()).collect::<Vec<_>>(),
            "subject": plan.subject.map(|s| s.name.clone()),
        }),
        ..Default::default()
    };
    let kinds: Vec<PlotKind> = match a.verb {
        Verb::Plot(k) => vec![k],
        _ => vec![PlotKind::Qq, PlotKind::Residuals],
    };
    let (figs, thin_note) = panels(&r, &kinds, &y_label);
    answer.figure = draw_panels(&figs);
    notes.extend(thin_note);
    if let Verb::Plot(k) = a.verb {
        answer.title = format!(
            "{y_label}: residuals {} ({})",
            if k == PlotKind::Qq {
                "against normal quantiles"
            } else {
                "against fitted values"
            },
            r.n_label
        );
        answer.notes = notes;
        return Ok(answer);
    }
    let mut rows: Vec<CheckRow> = Vec::new();
    if let Some(name) = &r.spread_name {
        for (check, center) in [("brown_forsythe", Center::Median), ("levene", Center::Mean)] {
            match spread(&r.spread_cells, center) {
                Some(t) => rows.push(CheckRow {
                    check: check.into(),
                    effect: name.clone(),
                    statistic: t.statistic,
                    df: Some(t.df),
                    df_error: Some(t.df_error),
                    p: t.p,
                }),
                None => notes.push(format!(
                    "{}: undefined here (no spread, or no residual df, within the groups)",
                    if check == "levene" {
                        "Levene"
                    } else {
                        "Brown–Forsythe"
                    }
                )),
            }
        }
    } else {
        notes.push("no between-subject factor: spread is not compared across groups".into());
    }
    let n = r.resid.len();
    match shapiro_wilk(&r.resid) {
        Some((w, p)) => {
            rows.push(CheckRow {
                check: "shapiro_wilk".into(),
                effect: "residuals".into(),
                statistic: w,
                df: None,
                df_error: None,
                p: Some(p),
            });
            if n > 5000 {
                notes.push(format!(
                    "Shapiro–Wilk: Royston's approximation is validated for 3 to 5,000 values and there are {n}; its p is only a rough guide here (and with so many values trivial departures are flagged) — read the Q–Q figure"
                ));
            }
        }
        None => notes.push(format!(
            "Shapiro–Wilk: undefined for {n} residual{} (it needs at least 3 that are not all equal)",
            if n == 1 { "" } else { "s" }
        )),
    }
    rows.extend(r.mauchly.iter().cloned());
    // Plain-language notes on what to consider, never a verdict.
    for row in &rows {
        let Some(p) = row.p else { continue };
        if p >= 0.05 {
            continue;
        }
        notes.push(match row.check.as_str() {
            "brown_forsythe" => format!(
                "spread differs across {} (Brown–Forsythe {}): the F test can mislead when spread differs, most when group sizes differ too; consider Welch's test (`anova … with welch`, one factor) or a randomisation test",
                row.effect,
                p_report(p)
            ),
            "levene" => continue,
            "shapiro_wilk" => format!(
                "the residuals depart from a normal shape (Shapiro–Wilk {}): look at the Q–Q figure for skew or outliers; with moderate group sizes the F test tolerates mild departures, and a transformation or a randomisation test are options",
                p_report(p)
            ),
            _ => format!(
                "sphericity is doubtful for {} (Mauchly {}): the repeated-measures ANOVA corrects its df (Greenhouse–Geisser or Huynh–Feldt), as its notes say",
                row.effect,
                p_report(p)
            ),
        });
    }
    notes.push("these tests cannot show that an assumption holds: with few observations they miss real departures, with many they flag trivial ones; read them with the figures".into());
    let label = |c: &str| match c {
        "brown_forsythe" => "Brown–Forsythe (median-centred)",
        "levene" => "Levene (mean-centred)",
        "shapiro_wilk" => "Shapiro–Wilk W",
        _ => "Mauchly's W",
    };
    answer.title = format!(
        "Assumption checks: {y_label} across {} ({})",
        a.factors
            .iter()
            .map(|f| f.value.as_str())
            .collect::<Vec<_>>()
            .join(", "),
        r.n_label
    );
    answer.tables.push(DisplayTable {
        caption: "Checks: equal spread, normal residuals and (with subject) sphericity".into(),
        columns: vec![
            ("Check".into(), Align::Left),
            ("Of".into(), Align::Left),
            ("statistic".into(), Align::Right),
            ("df".into(), Align::Right),
            ("p".into(), Align::Right),
        ],
        rows: rows
            .iter()
            .map(|r| {
                vec![
                    label(&r.check).to_string(),
                    r.effect.clone(),
                    num(r.statistic),
                    match (r.df, r.df_error) {
                        (Some(a), Some(b)) => format!("{}, {}", df(a), df(b)),
                        (Some(a), None) => df(a),
                        _ => String::new(),
                    },
                    r.p.map(p_table).unwrap_or_else(|| "undefined".into()),
                ]
            })
            .collect(),
    });
    answer.report = Some(
        rows.iter()
            .filter_map(|r| {
                let p = r.p?;
                Some(match r.check.as_str() {
                    "shapiro_wilk" => {
                        format!("Shapiro–Wilk W = {}, {}", num(r.statistic), p_report(p))
                    }
                    "mauchly" => format!(
                        "Mauchly W ({}) = {}, {}",
                        r.effect,
                        num(r.statistic),
                        p_report(p)
                    ),
                    c => format!(
                        "{}: F({}, {}) = {}, {}",
                        if c == "levene" {
                            "Levene"
                        } else {
                            "Brown–Forsythe"
                        },
                        df(r.df.unwrap_or(0.0)),
                        df(r.df_error.unwrap_or(0.0)),
                        stat(r.statistic),
                        p_report(p)
                    ),
                })
            })
            .collect::<Vec<_>>()
            .join("; "),
    );
    answer.bundle_tables.insert(
        "checks".into(),
        serde_json::to_value(&rows).unwrap_or(Json::Null),
    );
    answer.notes = notes;
    Ok(answer)
}
