//! Multiple comparisons of group means with multiplicity control.
//!
//! Method. Groups i with n_i, means ȳ_i, variances s_i²; a pooled error MS_e on ν df.
//!
//! ```text
//! pooled SE:  SE_ij = √(MS_e (1/n_i + 1/n_j)),  t = (ȳ_i − ȳ_j)/SE_ij                     (1)
//! Tukey–Kramer: q = √2|t|, p_adj = P(Q_{k,ν} > q), CI = diff ± q_{1−α;k,ν}/√2 · SE         (2)
//! Games–Howell: SE_ij = √(s_i²/n_i + s_j²/n_j), ν_ij = SE⁴ / ((s_i²/n_i)²/(n_i−1)
//!     + (s_j²/n_j)²/(n_j−1)), then (2) with ν_ij                                         (3)
//! pairwise t: p two-sided on ν; Bonferroni p·m; Holm step-down; Benjamini–Hochberg step-up   (4)
//! Dunnett (against control 0): t_i as (1), λ_i = √(n_i/(n_i + n_0)),
//!     p_adj = P(max_j |T_j| > |t_i|), CI = diff ± c_α·SE, c_α the two-sided critical value  (5)
//! paired (within subjects): d = y_a − y_b per subject, t = d̄/(s_d/√n) on n − 1 df, then (4)  (6)
//! ```
//!
//! References: Tukey (1953), Kramer (1956), Games & Howell (1976), Holm (1979), Benjamini &
//! Hochberg (1995), Dunnett (1955). Simultaneous intervals: Tukey, Games–Howell and Dunnett
//! have their own; Holm and Bonferroni get Bonferroni intervals; the false discovery rate has
//! no simultaneous interval, so fdr shows unadjusted ones (the output says so).
//!
//! Letters (compact letter display, Piepho 2004 insert-and-absorb): levels sharing a letter do
//! not differ at α; letters run a, b, c… from the highest mean.

use crate::dist::t_quantile;
use crate::error::CellError;
use crate::simultaneous::{
    dunnett_critical, dunnett_sf, dunnett_sf_with, ptukey_sf, qtukey, t_two_sided,
};
use serde::Serialize;
use std::collections::BTreeMap;

/// A comparison method.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Tukey–Kramer.
    Tukey,
    /// Games–Howell.
    GamesHowell,
    /// Pairwise t, Holm.
    Holm,
    /// Pairwise t, Bonferroni.
    Bonferroni,
    /// Pairwise t, Benjamini–Hochberg.
    Fdr,
    /// Against a control.
    Dunnett,
}

impl Method {
    /// Every method with its word.
    pub const ALL: [(&'static str, Method); 6] = [
        ("tukey", Method::Tukey),
        ("games-howell", Method::GamesHowell),
        ("holm", Method::Holm),
        ("bonferroni", Method::Bonferroni),
        ("fdr", Method::Fdr),
        ("dunnett", Method::Dunnett),
    ];
    /// The word.
    pub fn word(self) -> &'static str {
        Method::ALL
            .iter()
            .find(|m| m.1 == self)
            .map(|m| m.0)
            .unwrap_or("")
    }
    /// The name in prose.
    pub fn prose(self) -> &'static str {
        match self {
            Method::Tukey => "Tukey–Kramer",
            Method::GamesHowell => "Games–Howell",
            Method::Holm => "pairwise t tests, Holm-adjusted",
            Method::Bonferroni => "pairwise t tests, Bonferroni-adjusted",
            Method::Fdr => "pairwise t tests, Benjamini–Hochberg (false discovery rate)",
            Method::Dunnett => "Dunnett (each level against the control)",
        }
    }
}

/// One group's summary.
#[derive(Debug, Clone)]
pub struct GroupStat {
    /// Level name.
    pub name: String,
    /// Observations.
    pub n: f64,
    /// Mean.
    pub mean: f64,
    /// Variance (n − 1 denominator; NaN when n = 1).
    pub var: f64,
}

/// One comparison (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct PairRow {
    /// The factor compared.
    pub factor: String,
    /// First level.
    pub a: String,
    /// Second level.
    pub b: String,
    /// mean(a) − mean(b).
    pub diff: f64,
    /// SE of the difference.
    pub se: f64,
    /// q (Tukey, Games–Howell) or t.
    pub statistic: f64,
    /// df.
    pub df: f64,
    /// Unadjusted two-sided p (t test on the same SE and df).
    pub p: Option<f64>,
    /// Adjusted p.
    pub p_adj: Option<f64>,
    /// Interval low.
    pub ci_low: Option<f64>,
    /// Interval high.
    pub ci_high: Option<f64>,
    /// The method's word.
    pub method: String,
    /// For simple effects: the level of the `by` factor.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub by: Option<BTreeMap<String, String>>,
}

/// Adjusted p values (Holm, Bonferroni or Benjamini–Hochberg); others unchanged.
pub fn adjust(p: &[f64], method: Method) -> Vec<f64> {
    let m = p.len() as f64;
    let mut order: Vec<usize> = (0..p.len()).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut out = vec![0.0; p.len()];
    match method {
        Method::Bonferroni => {
            for (i, v) in p.iter().enumerate() {
                out[i] = (v * m).min(1.0);
            }
        }
        Method::Holm => {
            let mut run = 0.0f64;
            for (rank, &i) in order.iter().enumerate() {
                run = run.max(((m - rank as f64) * p[i]).min(1.0));
                out[i] = run;
            }
        }
        Method::Fdr => {
            let mut run = 1.0f64;
            for (rank, &i) in order.iter().enumerate().rev() {
                run = run.min((p[i] * m / (rank as f64 + 1.0)).min(1.0));
                out[i] = run;
            }
        }
        _ => out.copy_from_slice(p),
    }
    out
}

/// All pairs of `groups` (i < j, in level order) by `method` (not Dunnett).
pub fn all_pairs(
    factor: &str,
    groups: &[GroupStat],
    mse: f64,
    df_e: f64,
    method: Method,
    alpha: f64,
) -> Result<Vec<PairRow>, CellError> {
    let k = groups.len() as f64;
    if method == Method::GamesHowell {
        if let Some(g) = groups.iter().find(|g| g.n < 2.0 || !(g.var > 0.0)) {
            return Err(CellError::design(format!(
                "Games–Howell uses each group's own variance, and level {} has {}: its standard error is undefined",
                g.name,
                if g.n < 2.0 { "a single observation" } else { "no spread" }
            ))
            .note("use `with method tukey` (pooled variance), or leave the level out with `where`"));
        }
    }
    let mut rows = Vec::new();
    for i in 0..groups.len() {
        for j in i + 1..groups.len() {
            let (gi, gj) = (&groups[i], &groups[j]);
            let diff = gi.mean - gj.mean;
            let (se, df) = if method == Method::GamesHowell {
                let (vi, vj) = (gi.var / gi.n, gj.var / gj.n);
                let se = (vi + vj).sqrt();
                let df = (vi + vj).powi(2) / (vi * vi / (gi.n - 1.0) + vj * vj / (gj.n - 1.0)); // (3)
                (se, df)
            } else {
                ((mse * (1.0 / gi.n + 1.0 / gj.n)).sqrt(), df_e) // (1)
            };
            let t = diff / se;
            let p = t_two_sided(t, df);
            let (statistic, p_adj, half) = match method {
                Method::Tukey | Method::GamesHowell => {
                    let q = std::f64::consts::SQRT_2 * t.abs(); // (2)
                    let crit =
                        qtukey(1.0 - alpha, k, df).map(|c| c / std::f64::consts::SQRT_2 * se);
                    (q, ptukey_sf(q, k, df), crit)
                }
                _ => (t, p, None),
            };
            rows.push(PairRow {
                factor: factor.to_string(),
                a: gi.name.clone(),
                b: gj.name.clone(),
                diff,
                se,
                statistic,
                df,
                p,
                p_adj,
                ci_low: half.map(|h| diff - h),
                ci_high: half.map(|h| diff + h),
                method: method.word().to_string(),
                by: None,
            });
        }
    }
    finish_t_family(&mut rows, method, alpha);
    Ok(rows)
}

/// Adjusts a family of t-based rows (Holm, Bonferroni, fdr) and sets their intervals.
pub fn finish_t_family(rows: &mut [PairRow], method: Method, alpha: f64) {
    if !matches!(method, Method::Holm | Method::Bonferroni | Method::Fdr) {
        return;
    }
    let m = rows.len() as f64;
    let ps: Vec<f64> = rows.iter().map(|r| r.p.unwrap_or(1.0)).collect();
    let adj = adjust(&ps, method); // (4)
    for (r, a) in rows.iter_mut().zip(adj) {
        r.p_adj = r.p.map(|_| a);
        let level = if method == Method::Fdr {
            1.0 - alpha / 2.0
        } else {
            1.0 - alpha / (2.0 * m)
        };
        let half = t_quantile(level, r.df).map(|t| t * r.se);
        r.ci_low = half.map(|h| r.diff - h);
        r.ci_high = half.map(|h| r.diff + h);
    }
}

/// Each group against `control` (Dunnett); returns the rows and the integration-error estimate.
pub fn against_control(
    factor: &str,
    groups: &[GroupStat],
    control: usize,
    mse: f64,
    df_e: f64,
    alpha: f64,
) -> Result<(Vec<PairRow>, f64), CellError> {
    let c0 = &groups[control];
    let others: Vec<usize> = (0..groups.len()).filter(|&i| i != control).collect();
    let lambdas: Vec<f64> = others
        .iter()
        .map(|&i| (groups[i].n / (groups[i].n + c0.n)).sqrt())
        .collect();
    let crit = dunnett_critical(alpha, &lambdas, df_e).ok_or_else(|| {
        CellError::design("Dunnett's critical value could not be found for this design")
    })?;
    // Integration error: the same probability with twice the panels.
    let fine = dunnett_sf_with(crit, &lambdas, df_e, 10, 12).unwrap_or(alpha);
    let err = (fine - alpha).abs();
    let mut rows = Vec::new();
    for &i in &others {
        let g = &groups[i];
        let diff = g.mean - c0.mean;
        let se = (mse * (1.0 / g.n + 1.0 / c0.n)).sqrt();
        let t = diff / se;
        rows.push(PairRow {
            factor: factor.to_string(),
            a: g.name.clone(),
            b: c0.name.clone(),
            diff,
            se,
            statistic: t,
            df: df_e,
            p: t_two_sided(t, df_e),
            p_adj: dunnett_sf(t.abs(), &lambdas, df_e), // (5)
            ci_low: Some(diff - crit * se),
            ci_high: Some(diff + crit * se),
            method: "dunnett".into(),
            by: None,
        });
    }
    Ok((rows, err))
}

/// Paired comparisons of the columns of `y` (subjects × levels), (6).
pub fn paired(
    factor: &str,
    names: &[String],
    y: &[Vec<f64>],
    method: Method,
    alpha: f64,
) -> Result<Vec<PairRow>, CellError> {
    let n = y.len() as f64;
    let mut rows = Vec::new();
    for i in 0..names.len() {
        for j in i + 1..names.len() {
            let d: Vec<f64> = y.iter().map(|r| r[i] - r[j]).collect();
            let mean = crate::models::sums::mean(&d);
            let var = crate::models::sums::centred_ss(&d, mean) / (n - 1.0);
            let se = (var / n).sqrt();
            let (t, p) = if se > 0.0 {
                let t = mean / se;
                (t, t_two_sided(t, n - 1.0))
            } else {
                (0.0, None)
            };
            rows.push(PairRow {
                factor: factor.to_string(),
                a: names[i].clone(),
                b: names[j].clone(),
                diff: mean,
                se,
                statistic: t,
                df: n - 1.0,
                p,
                p_adj: None,
                ci_low: None,
                ci_high: None,
                method: method.word().to_string(),
                by: None,
            });
        }
    }
    finish_t_family(&mut rows, method, alpha);
    Ok(rows)
}

/// Compact letters for levels with `means`, given the pairs (i, j) that differ.
pub fn letters(means: &[f64], differ: &[(usize, usize)]) -> Vec<String> {
    let k = means.len();
    let mut order: Vec<usize> = (0..k).collect();
    order.sort_by(|&a, &b| means[b].total_cmp(&means[a]));
    // Insert: split every set holding a differing pair; absorb: drop sets inside others.
    let mut sets: Vec<Vec<bool>> = vec![vec![true; k]];
    for &(i, j) in differ {
        let mut next = Vec::new();
        for s in sets {
            if s[i] && s[j] {
                let mut a = s.clone();
                a[i] = false;
                let mut b = s;
                b[j] = false;
                next.push(a);
                next.push(b);
            } else {
                next.push(s);
            }
        }
        let mut kept: Vec<Vec<bool>> = Vec::new();
        for (x, s) in next.iter().enumerate() {
            let inside = next
                .iter()
                .enumerate()
                .any(|(y, t)| y != x && (0..k).all(|m| !s[m] || t[m]) && (s != t || y < x));
            if !inside {
                kept.push(s.clone());
            }
        }
        sets = kept;
    }
    // Letters in order of the highest mean each set holds.
    sets.sort_by_key(|s| order.iter().position(|&m| s[m]).unwrap_or(k));
    let mut out = vec![String::new(); k];
    for (li, s) in sets.iter().enumerate() {
        let letter = letter_name(li);
        for m in 0..k {
            if s[m] {
                out[m].push_str(&letter);
            }
        }
    }
    out
}

fn letter_name(i: usize) -> String {
    let abc = b"abcdefghijklmnopqrstuvwxyz";
    if i < 26 {
        (abc[i] as char).to_string()
    } else {
        format!("{}{}", abc[i / 26 - 1] as char, abc[i % 26] as char)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn adjustments_by_hand() {
        // p = (.01, .04, .03): Bonferroni ×3; Holm: .03, then max(.03, 2·.03) = .06, then
        // max(.06, .04) = .06; BH: .04·3/3 = .04, .03·3/2 = .045 → min → .04, .01·3 = .03.
        let p = [0.01, 0.04, 0.03];
        let b = adjust(&p, Method::Bonferroni);
        let h = adjust(&p, Method::Holm);
        let f = adjust(&p, Method::Fdr);
        for (x, y) in b.iter().zip([0.03, 0.12, 0.09]) {
            assert!((x - y).abs() < 1e-15);
        }
        for (x, y) in h.iter().zip([0.03, 0.06, 0.06]) {
            assert!((x - y).abs() < 1e-15, "{h:?}");
        }
        for (x, y) in f.iter().zip([0.03, 0.04, 0.04]) {
            assert!((x - y).abs() < 1e-15, "{f:?}");
        }
    }

    #[test]
    fn letters_of_a_chain() {
        // Means 3 > 2 > 1, only the extremes differ: a, ab, b.
        assert_eq!(letters(&[3.0, 2.0, 1.0], &[(0, 2)]), ["a", "ab", "b"]);
        // All differ: a, b, c; none differ: a, a, a.
        assert_eq!(
            letters(&[1.0, 3.0, 2.0], &[(0, 1), (0, 2), (1, 2)]),
            ["c", "a", "b"]
        );
        assert_eq!(letters(&[1.0, 3.0, 2.0], &[]), ["a", "a", "a"]);
    }
}
