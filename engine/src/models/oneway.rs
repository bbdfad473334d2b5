//! One-way between-subjects analysis of variance.
//!
//! Method. For k groups with n_i observations, group means ȳ_i and grand mean ȳ (N = Σ n_i):
//!
//! ```text
//! SS_between = Σ_i n_i (ȳ_i − ȳ)²              (1)
//! SS_within  = Σ_i Σ_j (y_ij − ȳ_i)²           (2)
//! SS_total   = Σ_i Σ_j (y_ij − ȳ)²             (3)
//! F = (SS_between / (k − 1)) / (SS_within / (N − k))   (4)
//! p = P(F(k − 1, N − k) > F), the upper tail computed directly   (5)
//! η² = SS_between / SS_total                   (6)
//! ω² = (SS_between − (k − 1)·MS_within) / (SS_total + MS_within)   (7)
//! ```
//!
//! Sums of squares are centred (see [`super::sums`]) on values shifted exactly in decimal
//! (see [`crate::data::decimal`]), which reaches the NIST StRD certified values (tests/nist.rs).
//! In a one-way design partial η² equals η² and partial ω² equals ω² (7).
//!
//! Assumptions: independent observations, normal residuals, equal spread across groups.
//!
//! Degenerate input: fewer than two groups is refused (`DesignError`); a group of one
//! observation is used, with a note; N = k (no residual df) is refused; all values equal is
//! refused (F undefined); zero within-group spread with differing means gives F and p as
//! `null` with a note (F would be infinite); ω² below zero is reported as computed, with a note.
//!
//! References: Fisher, R. A. (1925) Statistical Methods for Research Workers; Hays, W. L. (1963)
//! Statistics for Psychologists, for ω² (7); NIST StRD ANOVA datasets (1998).

use super::sums::{centred_ss, mean, sum};
use crate::dist::f_sf;
use crate::error::CellError;
use serde::Serialize;

/// One row of the ANOVA table (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct EffectRow {
    /// The effect: a factor name, `Residual` or `Total`.
    pub effect: String,
    /// Degrees of freedom.
    pub df: f64,
    /// Sum of squares.
    pub ss: f64,
    /// Mean square (null for Total).
    pub ms: Option<f64>,
    /// F statistic (factor rows only).
    pub f: Option<f64>,
    /// Upper-tail p (factor rows only).
    pub p: Option<f64>,
    /// Error df the effect is tested against.
    pub df_error: Option<f64>,
    /// Error SS the effect is tested against.
    pub ss_error: Option<f64>,
    /// η².
    pub eta2: Option<f64>,
    /// ω².
    pub omega2: Option<f64>,
    /// Partial η².
    pub eta2_partial: Option<f64>,
    /// Partial ω².
    pub omega2_partial: Option<f64>,
    /// Lower confidence bound of η² (noncentral-F inversion, see [`super::power`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub eta2_ci_low: Option<f64>,
    /// Upper confidence bound of η².
    #[serde(skip_serializing_if = "Option::is_none")]
    pub eta2_ci_high: Option<f64>,
    /// Lower confidence bound of f.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub f_ci_low: Option<f64>,
    /// Upper confidence bound of f.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub f_ci_high: Option<f64>,
    /// The confidence level of those bounds.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level: Option<f64>,
}

impl EffectRow {
    /// A row with its name, df and SS, every other field empty.
    pub fn blank(effect: impl Into<String>, df: f64, ss: f64) -> EffectRow {
        EffectRow {
            effect: effect.into(),
            df,
            ss,
            ms: None,
            f: None,
            p: None,
            df_error: None,
            ss_error: None,
            eta2: None,
            omega2: None,
            eta2_partial: None,
            omega2_partial: None,
            eta2_ci_low: None,
            eta2_ci_high: None,
            f_ci_low: None,
            f_ci_high: None,
            level: None,
        }
    }
}

/// A one-way ANOVA result.
#[derive(Debug, Clone, PartialEq)]
pub struct OneWay {
    /// The factor's rows, then `Residual`, then `Total`.
    pub rows: Vec<EffectRow>,
    /// Number of groups used.
    pub k: usize,
    /// Number of observations used.
    pub n: usize,
    /// Notes on degenerate parts.
    pub notes: Vec<String>,
}

impl OneWay {
    /// The factor's row.
    pub fn effect(&self) -> &EffectRow {
        &self.rows[0]
    }
}

/// Fits the one-way ANOVA of `groups` (values of each group, already shifted or not).
pub fn oneway(effect: &str, groups: &[Vec<f64>]) -> Result<OneWay, CellError> {
    let groups: Vec<&Vec<f64>> = groups.iter().filter(|g| !g.is_empty()).collect();
    let k = groups.len();
    if k < 2 {
        return Err(CellError::design(format!(
            "\"{effect}\" has {} level{} with data; an ANOVA needs at least two",
            k,
            if k == 1 { "" } else { "s" }
        )));
    }
    let n: usize = groups.iter().map(|g| g.len()).sum();
    if n <= k {
        return Err(CellError::design(format!(
            "{n} observations in {k} groups leave no residual degrees of freedom; at least one group needs two or more"
        )));
    }
    let all: Vec<f64> = groups.iter().flat_map(|g| g.iter().copied()).collect();
    let grand = mean(&all);
    let means: Vec<f64> = groups.iter().map(|g| mean(g)).collect();
    let ss_b = sum(groups
        .iter()
        .zip(&means)
        .map(|(g, m)| g.len() as f64 * (m - grand) * (m - grand))); // (1)
    let ss_w = sum(groups.iter().zip(&means).map(|(g, &m)| centred_ss(g, m))); // (2)
    let ss_t = centred_ss(&all, grand); // (3)
    if ss_t == 0.0 {
        return Err(CellError::data(format!(
            "all {n} values are equal ({}), so there is no variation and F is undefined",
            crate::render::fmt::num(all[0])
        )));
    }
    let df_b = (k - 1) as f64;
    let df_w = (n - k) as f64;
    let ms_b = ss_b / df_b;
    let ms_w = ss_w / df_w;
    let mut notes = Vec::new();
    let (f, p) = if ss_w > 0.0 {
        let f = ms_b / ms_w; // (4)
        (Some(f), f_sf(f, df_b, df_w)) // (5)
    } else {
        notes.push("every group's values are identical within the group, so the within-group variance is zero and F is undefined (infinite); the groups differ without scatter".to_string());
        (None, None)
    };
    let eta2 = ss_b / ss_t; // (6)
    let omega2 = (ss_b - df_b * ms_w) / (ss_t + ms_w); // (7)
    if omega2 < 0.0 {
        notes.push("ω² is below zero: the between-group variation is smaller than chance alone would give; read it as no effect".to_string());
    }
    let singles = groups.iter().filter(|g| g.len() == 1).count();
    if singles > 0 {
        notes.push(format!(
            "{singles} group{} {} a single observation: {} mean is used but adds nothing to the within-group variance",
            if singles == 1 { "" } else { "s" },
            if singles == 1 { "has" } else { "have" },
            if singles == 1 { "its" } else { "their" }
        ));
    }
    let rows = vec![
        EffectRow {
            effect: effect.to_string(),
            df: df_b,
            ss: ss_b,
            ms: Some(ms_b),
            f,
            p,
            df_error: Some(df_w),
            ss_error: Some(ss_w),
            eta2: Some(eta2),
            omega2: Some(omega2),
            eta2_partial: Some(eta2),
            omega2_partial: Some(omega2),
            eta2_ci_low: None,
            eta2_ci_high: None,
            f_ci_low: None,
            f_ci_high: None,
            level: None,
        },
        EffectRow {
            ms: Some(ms_w),
            ..EffectRow::blank("Residual", df_w, ss_w)
        },
        EffectRow::blank("Total", (n - 1) as f64, ss_t),
    ];
    Ok(OneWay { rows, k, n, notes })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_exact_example() {
        // Groups {1,2,3}, {4,5,6}: means 2 and 5, grand mean 3.5.
        // SS_between = 3·1.5² + 3·1.5² = 13.5, SS_within = 2 + 2 = 4 (exact arithmetic),
        // F = 13.5 / (4/4) = 13.5, η² = 13.5/17.5.
        let r = oneway("g", &[vec![1.0, 2.0, 3.0], vec![4.0, 5.0, 6.0]]).unwrap();
        let e = r.effect();
        assert_eq!(e.ss, 13.5);
        assert_eq!(r.rows[1].ss, 4.0);
        assert_eq!(e.f, Some(13.5));
        assert_eq!(e.eta2, Some(13.5 / 17.5));
        // F(1, 4) = T² with T ~ t(4), whose two-sided tail has the closed form
        // P(|T| > t) = 1 − x(3 − x²)/2, x = t/√(t² + 4) (exact for 4 df).
        let t = 13.5f64.sqrt();
        let x = t / (t * t + 4.0).sqrt();
        let exact = 1.0 - x * (3.0 - x * x) / 2.0;
        assert!(
            (e.p.unwrap() - exact).abs() < 1e-13 * exact,
            "{:?} vs {exact}",
            e.p
        );
    }

    #[test]
    fn degenerate_inputs() {
        assert!(
            oneway("g", &[vec![1.0, 2.0]])
                .unwrap_err()
                .message
                .contains("at least two")
        );
        assert!(
            oneway("g", &[vec![1.0], vec![2.0]])
                .unwrap_err()
                .message
                .contains("no residual")
        );
        assert!(
            oneway("g", &[vec![3.0, 3.0], vec![3.0]])
                .unwrap_err()
                .message
                .contains("no variation")
        );
        let r = oneway("g", &[vec![1.0, 1.0], vec![2.0, 2.0]]).unwrap();
        assert_eq!(r.effect().f, None);
        assert_eq!(r.effect().p, None);
        assert!(r.notes[0].contains("zero"));
        let r = oneway("g", &[vec![1.0, 2.0, 3.0], vec![5.0]]).unwrap();
        assert!(r.notes.iter().any(|n| n.contains("single observation")));
    }
}
