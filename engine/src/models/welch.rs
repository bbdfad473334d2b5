//! Welch's heteroscedastic one-way ANOVA (Welch 1951).
//!
//! Method. For k groups with n_i, means ȳ_i and variances s_i²:
//!
//! ```text
//! w_i = n_i / s_i²,  W = Σ w_i,  ȳ_w = Σ w_i ȳ_i / W                          (1)
//! A = Σ w_i (ȳ_i − ȳ_w)² / (k − 1)                                            (2)
//! λ = Σ (1 − w_i/W)² / (n_i − 1)                                              (3)
//! F = A / (1 + 2(k − 2)λ/(k² − 1)),  df = (k − 1, (k² − 1)/(3λ))              (4)
//! ```
//!
//! Assumptions: independent observations, roughly normal groups; spread may differ.
//! Degenerate input: a group with fewer than two observations or with zero variance has no
//! weight, and the test is refused with the group named.

use super::sums::{centred_ss, mean};
use crate::dist::f_sf;
use crate::error::CellError;
use serde::Serialize;

/// The `welch` table row (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct WelchRow {
    /// The factor.
    pub effect: String,
    /// Welch's F.
    pub f: f64,
    /// Numerator df.
    pub df: f64,
    /// Denominator df (fractional).
    pub df_error: f64,
    /// Upper tail.
    pub p: Option<f64>,
}

/// Welch's test of `groups` (named by `names`).
pub fn welch(effect: &str, names: &[String], groups: &[Vec<f64>]) -> Result<WelchRow, CellError> {
    let k = groups.len() as f64;
    if groups.len() < 2 {
        return Err(CellError::design("Welch's test needs at least two groups"));
    }
    let mut w = Vec::with_capacity(groups.len());
    let mut m = Vec::with_capacity(groups.len());
    for (g, name) in groups.iter().zip(names) {
        let n = g.len() as f64;
        let mu = mean(g);
        let var = if g.len() > 1 {
            centred_ss(g, mu) / (n - 1.0)
        } else {
            0.0
        };
        if g.len() < 2 || !(var > 0.0) {
            return Err(CellError::design(format!(
                "Welch's test weighs each group by n/s², and group {name} has {}",
                if g.len() < 2 {
                    "a single observation".to_string()
                } else {
                    "no spread (all its values are equal)".to_string()
                }
            ))
            .note("leave `with welch` out, or remove the group with `where`"));
        }
        w.push(n / var);
        m.push(mu);
    }
    let sw: f64 = w.iter().sum();
    let mw = w.iter().zip(&m).map(|(w, m)| w * m).sum::<f64>() / sw; // (1)
    let a = w
        .iter()
        .zip(&m)
        .map(|(w, m)| w * (m - mw) * (m - mw))
        .sum::<f64>()
        / (k - 1.0); // (2)
    let lambda: f64 = w
        .iter()
        .zip(groups)
        .map(|(w, g)| (1.0 - w / sw).powi(2) / (g.len() as f64 - 1.0))
        .sum(); // (3)
    let f = a / (1.0 + 2.0 * (k - 2.0) * lambda / (k * k - 1.0)); // (4)
    let df2 = (k * k - 1.0) / (3.0 * lambda);
    Ok(WelchRow {
        effect: effect.to_string(),
        f,
        df: k - 1.0,
        df_error: df2,
        p: f_sf(f, k - 1.0, df2),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_groups_reduce_to_the_welch_t_test() {
        // With k = 2, Welch's F is the square of Welch's t and df_error its Satterthwaite df
        // (Welch 1951; a standard identity). {1,2,3,4} and {2,4,6,8,10}: means 2.5, 6;
        // variances 5/3, 10; t² = 3.5² / (5/12 + 2) = 12.25 / 2.41666…
        let g = vec![vec![1.0, 2.0, 3.0, 4.0], vec![2.0, 4.0, 6.0, 8.0, 10.0]];
        let r = welch("g", &["a".into(), "b".into()], &g).unwrap();
        let (v1, v2) = (5.0 / 3.0 / 4.0, 10.0 / 5.0);
        assert!((r.f - 12.25 / (v1 + v2)).abs() < 1e-12);
        let df = (v1 + v2).powi(2) / (v1 * v1 / 3.0 + v2 * v2 / 4.0);
        assert!((r.df_error - df).abs() < 1e-10, "{} vs {df}", r.df_error);
        let e = welch(
            "g",
            &["a".into(), "b".into()],
            &[vec![1.0, 1.0], vec![2.0, 3.0]],
        )
        .unwrap_err();
        assert!(e.message.contains("group a has no spread"));
    }
}
