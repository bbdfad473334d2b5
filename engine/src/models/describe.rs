//! Per-cell summaries: n, mean, SD, SE and a t-based confidence interval for the mean.
//!
//! Method: mean ȳ (refined, see [`super::sums`]); SD s = √(Σ(y − ȳ)² / (n − 1)); SE = s/√n;
//! CI = ȳ ± t_{(1+level)/2, n−1} · SE (Student 1908). Assumes independent observations and,
//! for the CI, a roughly normal mean (small n) — common practice.
//!
//! Degenerate input: n = 1 gives SD, SE and the CI as `null` (no spread can be estimated).

use super::sums::{centred_ss, mean};
use crate::dist::t_quantile;
use serde::Serialize;
use std::collections::BTreeMap;

/// One cell's summary (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CellSummary {
    /// Factor → level of this cell.
    pub levels: BTreeMap<String, String>,
    /// Observations used.
    pub n: usize,
    /// Mean.
    pub mean: f64,
    /// Standard deviation (null when n = 1).
    pub sd: Option<f64>,
    /// Standard error of the mean (null when n = 1).
    pub se: Option<f64>,
    /// Lower CI bound.
    pub ci_low: Option<f64>,
    /// Upper CI bound.
    pub ci_high: Option<f64>,
}

/// Summarises `shifted` values (offset added back to the mean) at confidence `level`.
pub fn summarise(
    levels: BTreeMap<String, String>,
    shifted: &[f64],
    offset: f64,
    level: f64,
) -> CellSummary {
    let n = shifted.len();
    let m = mean(shifted);
    let (sd, se, lo, hi) = if n >= 2 {
        let sd = (centred_ss(shifted, m) / (n - 1) as f64).sqrt();
        let se = sd / (n as f64).sqrt();
        let t = t_quantile(0.5 + level / 2.0, (n - 1) as f64);
        let lo = t.map(|t| offset + m - t * se);
        let hi = t.map(|t| offset + m + t * se);
        (Some(sd), Some(se), lo, hi)
    } else {
        (None, None, None, None)
    };
    CellSummary {
        levels,
        n,
        mean: offset + m,
        sd,
        se,
        ci_low: lo,
        ci_high: hi,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn summary_of_a_small_sample() {
        // {1, 2, 3, 4}: mean 2.5, SD √(5/3), SE √(5/3)/2 (exact).
        let s = summarise(BTreeMap::new(), &[0.0, 1.0, 2.0, 3.0], 1.0, 0.95);
        assert_eq!(s.mean, 2.5);
        assert!((s.sd.unwrap() - (5.0f64 / 3.0).sqrt()).abs() < 1e-15);
        assert!((s.se.unwrap() - (5.0f64 / 3.0).sqrt() / 2.0).abs() < 1e-15);
        assert!(s.ci_low.unwrap() < 2.5 && s.ci_high.unwrap() > 2.5);
        let one = summarise(BTreeMap::new(), &[4.0], 0.0, 0.95);
        assert_eq!((one.sd, one.ci_low), (None, None));
    }
}
