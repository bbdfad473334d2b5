//! The `power` statement: power of a planned design, or the sample size reaching a target.

use crate::error::{CellError, Span};
use crate::lang::ast::{Name, Opt, Spanned, Value};
use crate::models::power::{Design, MAX_N, f_from_eta2, f_from_means, power, solve_n};
use crate::render::fmt::{es, num};
use crate::render::svg::draw_curves;
use crate::render::{Align, Answer, DisplayTable};
use crate::session::{check_options, one_number};
use serde_json::json;

/// The caution printed under power answers.
pub const CAUTION: &str = "Power rests on the effect size and spread you assume: a guessed f gives a guessed n. Planning the number of animals, patients or plots follows local rules and the review of an ethics committee and a qualified statistician.";

fn get<'a>(options: &'a [Opt], name: &str) -> Option<&'a Opt> {
    options.iter().find(|o| o.name.value == name)
}

fn number(options: &[Opt], name: &str) -> Result<Option<(f64, Span)>, CellError> {
    get(options, name)
        .map(|o| one_number(o).map(|v| (v, o.span)))
        .transpose()
}

/// Runs `power groups K …` / `power within M …`.
pub fn run(design: &Name, count: &Spanned<f64>, options: &[Opt]) -> Result<Answer, CellError> {
    let within = design.value == "within";
    let allowed: &[&str] = if within {
        &["f", "eta2", "n", "power", "alpha", "rho", "epsilon"]
    } else {
        &["f", "means", "sd", "eta2", "n", "power", "alpha"]
    };
    check_options(options, "power", allowed)?;
    let what = if within { "levels" } else { "groups" };
    if count.value.fract() != 0.0 || count.value < 2.0 || count.value > 1000.0 {
        return Err(CellError::input(format!(
            "the number of {what} must be a whole number from 2 to 1000, not {}",
            count.value
        ))
        .at(count.span));
    }
    let k = count.value as u64;
    // The effect size, from exactly one of f, eta2, or means with sd.
    let f_opt = number(options, "f")?;
    let eta_opt = number(options, "eta2")?;
    let means = get(options, "means");
    let given = usize::from(f_opt.is_some())
        + usize::from(eta_opt.is_some())
        + usize::from(means.is_some());
    if given != 1 {
        return Err(CellError::input(
            "give the effect size one way: `f F`, `eta2 E`, or `means (m1, m2, …), sd S`",
        )
        .at(design.span.to(count.span)));
    }
    let (f, f_source) = if let Some((f, sp)) = f_opt {
        if !(f > 0.0 && f.is_finite()) {
            return Err(CellError::input(format!("`f` must be above 0, not {f}")).at(sp));
        }
        (f, None)
    } else if let Some((e, sp)) = eta_opt {
        if !(e > 0.0 && e < 1.0) {
            return Err(
                CellError::input(format!("`eta2` must be between 0 and 1, not {e}")).at(sp),
            );
        }
        let f = f_from_eta2(e);
        (f, Some(format!("f = {} from η² = {}", num(f), num(e))))
    } else {
        let o = means.ok_or_else(|| CellError::input("means missing"))?;
        let values = match o.values.as_slice() {
            [
                Spanned {
                    value: Value::List(items),
                    ..
                },
            ] => items
                .iter()
                .map(|v| match v.value {
                    Value::Num(x, _) => Ok(x),
                    _ => Err(CellError::input("`means` takes numbers").at(v.span)),
                })
                .collect::<Result<Vec<f64>, _>>()?,
            _ => {
                return Err(CellError::input(
                    "`means` takes a list in parentheses, e.g. means (4.1, 4.6, 5.3)",
                )
                .at(o.span));
            }
        };
        if values.len() as u64 != k {
            return Err(CellError::input(format!(
                "{} means are given for {k} groups",
                values.len()
            ))
            .at(o.span));
        }
        let (sd, sp) = number(options, "sd")?.ok_or_else(|| {
            CellError::input("`means` needs the common within-group SD too: `sd S`").at(o.span)
        })?;
        if !(sd > 0.0 && sd.is_finite()) {
            return Err(CellError::input(format!("`sd` must be above 0, not {sd}")).at(sp));
        }
        let f = f_from_means(&values, sd);
        if !(f > 0.0) {
            return Err(CellError::input(
                "the means are all equal, so there is no effect to detect (f = 0)",
            )
            .at(o.span));
        }
        (
            f,
            Some(format!("f = {} from the means and SD {}", num(f), num(sd))),
        )
    };
    let alpha = match number(options, "alpha")? {
        Some((a, sp)) if !(a > 0.0 && a < 1.0) => {
            return Err(
                CellError::input(format!("`alpha` must be between 0 and 1, not {a}")).at(sp),
            );
        }
        Some((a, _)) => a,
        None => 0.05,
    };
    let d = if within {
        let (rho, sp) = number(options, "rho")?.ok_or_else(|| {
            CellError::input(
                "`power within` needs `rho R`, the correlation among the repeated measures",
            )
            .at(design.span)
        })?;
        if !(rho > -1.0 && rho < 1.0) {
            return Err(
                CellError::input(format!("`rho` must be between −1 and 1, not {rho}")).at(sp),
            );
        }
        let epsilon = match number(options, "epsilon")? {
            Some((e, sp)) if !(e >= 1.0 / (k as f64 - 1.0) - 1e-12 && e <= 1.0) => {
                return Err(CellError::input(format!(
                    "`epsilon` must be between 1/(M − 1) = {} and 1, not {e}",
                    num(1.0 / (k as f64 - 1.0))
                ))
                .at(sp));
            }
            Some((e, _)) => e,
            None => 1.0,
        };
        Design::Within { m: k, rho, epsilon }
    } else {
        Design::Groups { k }
    };
    let n_opt = number(options, "n")?;
    let p_opt = number(options, "power")?;
    let (n, achieved, target) = match (n_opt, p_opt) {
        (Some((n, sp)), None) => {
            if n.fract() != 0.0 || n < 2.0 || n > MAX_N as f64 {
                return Err(CellError::input(format!(
                    "`n` must be a whole number from 2 to {MAX_N}, not {n}"
                ))
                .at(sp));
            }
            let n = n as u64;
            (n, power(d, n, f, alpha)?, None)
        }
        (None, Some((p, sp))) => {
            if !(p > alpha && p < 1.0) {
                return Err(CellError::input(format!(
                    "`power` must be between alpha ({alpha}) and 1, not {p}"
                ))
                .at(sp));
            }
            let (n, got) = solve_n(d, f, alpha, p).map_err(|e| e.at(sp))?;
            (n, got, Some(p))
        }
        _ => {
            return Err(CellError::input(
                "give either `n N` (to get the power) or `power P` (to get the n that reaches it)",
            )
            .at(design.span.to(count.span)));
        }
    };
    let unit = if within { "subjects" } else { "per group" };
    let total = if within { n } else { n * k };
    let goal = target.unwrap_or(0.8);
    let needed = solve_n(d, f, alpha, goal).ok();
    let report = match target {
        None => {
            let tail = match needed {
                Some((m, _)) => format!("; {m} {unit} reach {goal:.2}"),
                None => String::new(),
            };
            if within {
                format!(
                    "With {n} subjects measured at {k} levels and f = {}, power is {} at α = {}{tail}.",
                    num(f),
                    num_power(achieved),
                    es(alpha)
                )
            } else {
                format!(
                    "With {k} groups of {n} and f = {}, power is {} at α = {}{tail}.",
                    num(f),
                    num_power(achieved),
                    es(alpha)
                )
            }
        }
        Some(p) => {
            let who = if within {
                format!("{n} subjects")
            } else {
                format!("{n} per group ({total} in all)")
            };
            format!(
                "With {k} {what} and f = {} at α = {}, {who} reach power {p:.2} (achieved {}).",
                num(f),
                es(alpha),
                num_power(achieved)
            )
        }
    };
    let mut notes = Vec::new();
    if let Some(s) = f_source {
        notes.push(s);
    }
    // The levers: a smaller spread, and (between groups) one group fewer.
    if let Ok((m, _)) = solve_n(d, 2.0 * f, alpha, goal) {
        notes.push(format!(
            "halving the within-group SD doubles f to {}: {m} {unit} would reach {}",
            num(2.0 * f),
            num(goal)
        ));
    }
    if let Design::Groups { k } = d {
        if k > 2 {
            if let Ok((m, _)) = solve_n(Design::Groups { k: k - 1 }, f, alpha, goal) {
                notes.push(format!(
                    "with {} groups and the same f, {m} per group ({} in all) would reach {}",
                    k - 1,
                    m * (k - 1),
                    num(goal)
                ));
            }
        }
    }
    // Figure: power against n for the requested f and Cohen's conventional 0.1, 0.25, 0.4.
    let mut fs = vec![f];
    for c in [0.1, 0.25, 0.4] {
        if (c - f).abs() > 1e-9 {
            fs.push(c);
        }
    }
    let n_hi = (n.max(needed.map(|x| x.0).unwrap_or(n)) * 2).clamp(10, 2000);
    let step = (n_hi / 60).max(1);
    let curves: Vec<(String, Vec<(f64, f64)>)> = fs
        .iter()
        .map(|&ff| {
            let pts = (2..=n_hi)
                .step_by(step as usize)
                .filter_map(|m| power(d, m, ff, alpha).ok().map(|p| (m as f64, p)))
                .collect();
            (format!("f = {}", num(ff)), pts)
        })
        .collect();
    let x_label = if within { "subjects" } else { "n per group" };
    let figure = draw_curves(&curves, (n as f64, achieved), x_label, "power");
    let mut row = json!({"groups": k, "n_per_group": n, "total_n": total, "f": f, "alpha": alpha, "power": achieved,
        "design": design.value});
    if let Some(t) = target {
        row["target_power"] = json!(t);
    }
    if let Design::Within { rho, epsilon, .. } = d {
        row["rho"] = json!(rho);
        row["epsilon"] = json!(epsilon);
    }
    let mut bundle_tables = serde_json::Map::new();
    bundle_tables.insert("power".into(), json!([row]));
    let mut columns = vec![
        (what.to_string(), Align::Right),
        (
            if within { "subjects" } else { "n per group" }.to_string(),
            Align::Right,
        ),
    ];
    let mut cells = vec![k.to_string(), n.to_string()];
    if !within {
        columns.push(("total N".into(), Align::Right));
        cells.push(total.to_string());
    }
    columns.extend([
        ("f".into(), Align::Right),
        ("α".into(), Align::Right),
        ("power".into(), Align::Right),
    ]);
    cells.extend([num(f), num(alpha), num_power(achieved)]);
    if let Design::Within { rho, epsilon, .. } = d {
        columns.extend([("ρ".into(), Align::Right), ("ε".into(), Align::Right)]);
        cells.extend([num(rho), num(epsilon)]);
    }
    let title = if within {
        format!("Power of a within-subject factor with {k} levels (univariate F test)")
    } else {
        format!("Power of a one-way design with {k} groups of equal size")
    };
    Ok(Answer {
        command: "power".into(),
        title,
        tables: vec![DisplayTable {
            caption: String::new(),
            columns,
            rows: vec![cells],
        }],
        figure,
        report: Some(report),
        notes,
        caution: Some(CAUTION.into()),
        design: json!({"kind": design.value, "levels": k}),
        bundle_tables,
        with_bundle: true,
        ..Default::default()
    })
}

fn num_power(p: f64) -> String {
    format!("{p:.3}")
}
