//! `permute Y across F… [subject S] with draws N, seed K[, threads T]` and `plot null`: the
//! randomisation test of each effect's F (model in `models/permutation.rs`), with a progress
//! display updated in place and a partial answer when interrupted.

use crate::analysis::provenance_of;
use crate::data::Dataset;
use crate::design::resolve;
use crate::dist::{f_isf, f_sf};
use crate::error::CellError;
use crate::lang::ast::{Analysis, Opt, PlotKind, Value, Verb};
use crate::models::factorial::term_name;
use crate::models::linear::terms;
use crate::models::permutation::{BetweenTest, Outcome, Test, WithinTest, run as run_test};
use crate::render::fmt::{df, num, p_report, p_table, stat};
use crate::render::svg::draw_null;
use crate::render::{Align, Answer, DisplayTable};
use crate::session::check_options;
use crate::{Cancel, DisplaySink, Output};
use serde::Serialize;
use serde_json::{Value as Json, json};
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Instant;

/// Most draws allowed.
pub const MAX_DRAWS: u64 = 10_000_000;
/// Default draws.
pub const DEFAULT_DRAWS: u64 = 10_000;

/// One row of the `randomisation` table (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize)]
pub struct RandRow {
    /// The effect.
    pub effect: String,
    /// Observed F.
    pub f_observed: f64,
    /// Randomisation p.
    pub p: f64,
    /// 99% Monte Carlo interval (null when exact).
    pub p_ci_low: Option<f64>,
    /// Upper end.
    pub p_ci_high: Option<f64>,
    /// Draws done (assignments when exact).
    pub draws: u64,
    /// Every assignment enumerated.
    pub exact: bool,
    /// The seed.
    pub seed: u64,
    /// Interrupted before all draws were done.
    pub partial: bool,
    /// The F-distribution p of the same F, for comparison.
    pub p_f: Option<f64>,
    /// Effect df.
    pub df: f64,
    /// Error df.
    pub df_error: f64,
    /// What was permuted.
    pub scheme: String,
}

fn whole_number(o: &Opt, what: &str, lo: u64, hi: u64) -> Result<u64, CellError> {
    let v = match o.values.as_slice() {
        [v] => &v.value,
        _ => {
            return Err(CellError::input(format!("`{}` takes one value", o.name.value)).at(o.span));
        }
    };
    match v {
        Value::Num(x, _) if x.fract() == 0.0 && *x >= lo as f64 && *x <= hi as f64 => Ok(*x as u64),
        other => Err(CellError::input(format!(
            "`{}` is {what}, not {}",
            o.name.value,
            other.text()
        ))
        .at(o.span)),
    }
}

fn drawn_seed() -> u64 {
    static N: AtomicU64 = AtomicU64::new(0);
    let t = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_nanos() as u64)
        .unwrap_or(0);
    let mut h = t
        ^ N.fetch_add(1, Ordering::Relaxed)
            .wrapping_mul(0x9E37_79B9_7F4A_7C15)
        ^ u64::from(std::process::id());
    h ^= h >> 33;
    h = h.wrapping_mul(0xff51_afd7_ed55_8ccd);
    h ^= h >> 33;
    h % 1_000_000_000
}

fn progress_data(text: &str) -> serde_json::Map<String, Json> {
    let mut m = serde_json::Map::new();
    m.insert("text/plain".into(), Json::String(text.into()));
    m.insert(
        "text/html".into(),
        Json::String(maud::html! { div class="partita-progress" { (text) } }.into_string()),
    );
    m
}

/// Runs `permute` or `plot null`.
pub(crate) fn run(
    a: &Analysis,
    ds: &Dataset,
    named: bool,
    cancel: &Cancel,
    sink: &mut dyn DisplaySink,
) -> Result<Answer, CellError> {
    check_options(
        &a.options,
        a.verb.word(),
        &["draws", "seed", "threads", "ss"],
    )?;
    if a.by.is_some() {
        return Err(CellError::input("`by` belongs to `compare`").at(a
            .by
            .as_ref()
            .map(|b| b.span)
            .unwrap_or(a.verb_span)));
    }
    let mut draws = DEFAULT_DRAWS;
    let mut seed = None;
    let mut threads = std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(1);
    for o in &a.options {
        match o.name.value.as_str() {
            "draws" => {
                draws = whole_number(
                    o,
                    &format!("a whole number of draws from 1 to {MAX_DRAWS}"),
                    1,
                    MAX_DRAWS,
                )?
            }
            "seed" => {
                seed = Some(whole_number(
                    o,
                    "a whole number from 0 to 2^53 (the same seed repeats the same draws)",
                    0,
                    1 << 53,
                )?)
            }
            "threads" => {
                threads =
                    whole_number(o, "a whole number of threads from 1 to 256", 1, 256)? as usize
            }
            _ => {}
        }
    }
    let ss = crate::repeated::options(&a.options)?.ss;
    let seed_given = seed.is_some();
    let seed = seed.unwrap_or_else(drawn_seed);
    let plan = resolve(a, ds)?;
    let mut notes = plan.notes.clone();
    notes.splice(0..0, crate::analysis::implicit_dataset_note(ds, named));
    let mut provenance = provenance_of(ds, &plan);
    let mut tests: Vec<(String, Test, String)> = Vec::new();
    if plan.subject.is_some() {
        let sd = crate::subjects::build(&plan, false)?;
        notes.extend(sd.notes.iter().cloned());
        provenance.rows_used = sd.rows_used;
        provenance.rows_dropped += sd.rows_dropped;
        let bsizes: Vec<usize> = sd.between.iter().map(|f| f.levels.len()).collect();
        let wsizes: Vec<usize> = sd.within.iter().map(|f| f.levels.len()).collect();
        let bnames: Vec<String> = sd.between.iter().map(|f| f.name.clone()).collect();
        let wnames: Vec<String> = sd.within.iter().map(|f| f.name.clone()).collect();
        // Subject totals scaled by 1/√C, the between stratum's scores (any scale gives the same F).
        let c = sd.n_within_cells() as f64;
        let totals: Vec<f64> = sd.subject_means().iter().map(|m| m * c.sqrt()).collect();
        for g in terms(bsizes.len()).into_iter().skip(1) {
            let t = BetweenTest::new(&bsizes, &sd.group, &totals, &g, ss)
                .ok_or_else(|| CellError::design("the between-subjects design is singular"))?;
            tests.push((term_name(&bnames, &g), Test::Between(t), "whole subjects permuted across the between groups (Freedman–Lane on subject totals)".into()));
        }
        for e in terms(wsizes.len()).into_iter().skip(1) {
            for g in terms(bsizes.len()) {
                let t = WithinTest::new(&sd.y, &sd.group, &bsizes, &wsizes, &e, &g, ss)
                    .ok_or_else(|| CellError::design("the between-subjects design is singular"))?;
                let mut name: Vec<String> = g.iter().map(|&j| bnames[j].clone()).collect();
                name.extend(e.iter().map(|&f| wnames[f].clone()));
                tests.push((
                    name.join(" × "),
                    Test::Within(t),
                    "each subject's values permuted across its within cells".into(),
                ));
            }
        }
    } else {
        let lay = crate::factorial::layout(&plan, a)?;
        notes.extend(lay.notes.iter().cloned());
        for t in terms(lay.sizes.len()).into_iter().skip(1) {
            let test = BetweenTest::new(&lay.sizes, &lay.cell, &lay.y, &t, ss)
                .ok_or_else(|| CellError::design("the design is singular"))?;
            let scheme = if lay.sizes.len() == 1 {
                "responses permuted across the groups".to_string()
            } else {
                format!(
                    "residuals of the model without {} permuted (Freedman–Lane)",
                    term_name(&lay.names, &t)
                )
            };
            tests.push((term_name(&lay.names, &t), Test::Between(test), scheme));
        }
    }
    for (name, t, _) in &tests {
        if !t.f_obs().is_finite() {
            return Err(CellError::data(format!(
                "{name}: F is undefined for these data (no variation within cells), so there is nothing to randomise"
            )));
        }
        if t.assignments() == Some(1) {
            return Err(CellError::design(format!(
                "{name}: no permutation changes the statistic (there is only one distinct assignment)"
            )));
        }
    }
    // Progress, updated in place.
    static IDS: AtomicU64 = AtomicU64::new(0);
    let display_id = format!(
        "partita-progress-{}-{}",
        std::process::id(),
        IDS.fetch_add(1, Ordering::Relaxed)
    );
    let total = draws * tests.len() as u64;
    let started = Instant::now();
    let mut last = Instant::now();
    let mut shown = false;
    let mut rows: Vec<RandRow> = Vec::new();
    let mut outcomes: Vec<Outcome> = Vec::new();
    let mut interrupted = false;
    for (i, (name, t, scheme)) in tests.iter().enumerate() {
        let (d1, d2) = t.dfs();
        let upper = f_isf(0.001, d1, d2)
            .unwrap_or(10.0)
            .max(t.f_obs() * 1.25)
            .max(1.0);
        let offset = draws * i as u64;
        let effect_seed = seed ^ (i as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        let mut progress = |done: u64, _of: u64| {
            if last.elapsed().as_secs_f64() >= 0.25
                || (!shown && started.elapsed().as_secs_f64() >= 0.25)
            {
                let text = format!(
                    "permute: {} of {} draws ({:.0}%), {:.1} s",
                    offset + done,
                    total,
                    100.0 * (offset + done) as f64 / total as f64,
                    started.elapsed().as_secs_f64()
                );
                sink.display(Output {
                    data: progress_data(&text),
                    metadata: Default::default(),
                    is_result: false,
                    display_id: Some(display_id.clone()),
                    update: shown,
                });
                shown = true;
                last = Instant::now();
            }
        };
        let o = run_test(t, draws, effect_seed, threads, upper, cancel, &mut progress);
        let ci = o.interval();
        rows.push(RandRow {
            effect: name.clone(),
            f_observed: t.f_obs(),
            p: o.p(),
            p_ci_low: ci.map(|c| c.0),
            p_ci_high: ci.map(|c| c.1),
            draws: o.done,
            exact: o.exact && !o.partial,
            seed,
            partial: o.partial,
            p_f: f_sf(t.f_obs(), d1, d2),
            df: d1,
            df_error: d2,
            scheme: scheme.clone(),
        });
        interrupted = o.partial;
        outcomes.push(o);
        if interrupted {
            break;
        }
    }
    if shown {
        let text = format!(
            "permute: {}{} draws in {:.1} s",
            if interrupted {
                "interrupted after "
            } else {
                "done, "
            },
            rows.iter().map(|r| r.draws).sum::<u64>(),
            started.elapsed().as_secs_f64()
        );
        sink.display(Output {
            data: progress_data(&text),
            metadata: Default::default(),
            is_result: false,
            display_id: Some(display_id),
            update: true,
        });
    }
    if !seed_given {
        notes.push(format!(
            "seed {seed} was drawn for this run; add `seed {seed}` to repeat these draws exactly"
        ));
    }
    for r in &rows {
        notes.push(format!("{}: {}", r.effect, r.scheme));
    }
    if interrupted {
        notes.insert(
            0,
            "PARTIAL: the run was interrupted; p and its interval use the draws done so far".into(),
        );
    }
    let y_label = plan.response.display_name().to_string();
    let answer = answer_of(
        a,
        &rows,
        &outcomes,
        &y_label,
        notes,
        provenance,
        interrupted,
    );
    if interrupted {
        sink.display(Output::answer(answer.mime_bundle(), false));
        return Err(CellError::interrupted());
    }
    Ok(answer)
}

fn answer_of(
    a: &Analysis,
    rows: &[RandRow],
    outcomes: &[Outcome],
    y_label: &str,
    notes: Vec<String>,
    provenance: crate::render::Provenance,
    partial: bool,
) -> Answer {
    let figures: Vec<String> = rows
        .iter()
        .zip(outcomes)
        .filter_map(|(r, o)| {
            draw_null(
                &o.null.bins,
                o.null.upper,
                r.f_observed,
                r.df,
                r.df_error,
                &format!("{}: F under randomisation", r.effect),
            )
        })
        .collect();
    let mut figs = figures.into_iter();
    let mut answer = Answer {
        command: a.verb.word().to_string(),
        title: format!(
            "{}Randomisation test: {y_label} across {}",
            if partial { "PARTIAL — " } else { "" },
            a.factors.iter().map(|f| f.value.as_str()).collect::<Vec<_>>().join(", ")
        ),
        figure: figs.next(),
        extra_figures: figs.collect(),
        provenance: Some(provenance),
        with_bundle: true,
        notes,
        caution: Some("A randomisation p does not lean on the F distribution, but it still assumes the units are exchangeable under no effect; a small p is not the size or the importance of a difference. Decisions about animals, patients or food safety follow local rules and qualified review.".into()),
        design: json!({"factors": a.factors.iter().map(|f| f.value.clone()).collect::<Vec<_>>(), "subject": a.subject.as_ref().map(|s| s.value.clone())}),
        ..Default::default()
    };
    if a.verb == Verb::Plot(PlotKind::Null) {
        answer.bundle_tables.insert(
            "randomisation".into(),
            serde_json::to_value(rows).unwrap_or(Json::Null),
        );
        return answer;
    }
    answer.tables.push(DisplayTable {
        caption: "Randomisation tests of each effect's F".into(),
        columns: vec![
            ("Effect".into(), Align::Left),
            ("F".into(), Align::Right),
            ("df".into(), Align::Right),
            ("p".into(), Align::Right),
            ("99% interval of p".into(), Align::Right),
            ("draws".into(), Align::Right),
            ("p from F distribution".into(), Align::Right),
        ],
        rows: rows
            .iter()
            .map(|r| {
                vec![
                    r.effect.clone(),
                    num(r.f_observed),
                    format!("{}, {}", df(r.df), df(r.df_error)),
                    p_table(r.p),
                    match (r.p_ci_low, r.p_ci_high) {
                        (Some(l), Some(h)) => format!("{} to {}", p_low(l), p_table(h)),
                        _ => "exact".into(),
                    },
                    if r.exact {
                        format!("all {}", thousands(r.draws))
                    } else {
                        thousands(r.draws)
                    },
                    r.p_f.map(p_table).unwrap_or_default(),
                ]
            })
            .collect(),
    });
    answer.report = Some(
        rows.iter()
            .map(|r| {
                format!(
                    "{}: F({}, {}) = {}, randomisation {} ({})",
                    r.effect,
                    df(r.df),
                    df(r.df_error),
                    stat(r.f_observed),
                    p_report(r.p),
                    if r.exact {
                        format!("exact: all {} assignments", thousands(r.draws))
                    } else {
                        format!(
                            "{} draws, 99% CI [{}, {}], seed {}",
                            thousands(r.draws),
                            p_low(r.p_ci_low.unwrap_or(0.0)),
                            p_table(r.p_ci_high.unwrap_or(1.0)),
                            r.seed
                        )
                    }
                )
            })
            .collect::<Vec<_>>()
            .join("; "),
    );
    answer.bundle_tables.insert(
        "randomisation".into(),
        serde_json::to_value(rows).unwrap_or(Json::Null),
    );
    answer
}

/// A lower interval end: 0 as "0", else as a table p.
fn p_low(x: f64) -> String {
    if x <= 0.0 { "0".into() } else { p_table(x) }
}

/// 12345 → "12,345".
fn thousands(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    out
}
