//! Between-subjects factorial analysis of variance (two or more crossed factors, every
//! interaction), balanced or not.
//!
//! Method. Cell counts n_g, means and within-cell sums of squares are accumulated in one pass
//! over the rows (means refined by a second pass), so the cost is linear in rows; the
//! hypotheses come from the cell-means model ([`super::linear`]): type 2 (each effect adjusted
//! for every term not containing it) or type 3 (sum-to-zero coding, unweighted marginal means).
//!
//! ```text
//! SS_error = Σ_g Σ_i (y_gi − ȳ_g)²,  df_error = N − G                          (1)
//! F = (SS_effect/df_effect) / (SS_error/df_error)                              (2)
//! partial η² = SS_effect / (SS_effect + SS_error)                              (3)
//! partial ω² = (SS_effect − df_effect·MS_error) / (SS_effect + (N − df_effect)·MS_error)   (4)
//! ```
//!
//! (4) is the partial ω² of Keppel (1991) and Olejnik & Algina (2003) for manipulated factors.
//! Assumptions: independent observations, normal residuals, equal spread in every cell.
//! Degenerate input: an empty cell is refused with the missing combinations named; N ≤ G (no
//! residual df) is refused; zero residual variance gives F and p as null with a note.

use super::linear::{CellStats, SsType, hypothesis, term_df, terms};
use super::oneway::EffectRow;
use crate::dist::f_sf;
use crate::error::CellError;
use nalgebra::DMatrix;

/// A factorial fit.
#[derive(Debug, Clone)]
pub struct Factorial {
    /// Effect rows (main effects, then interactions by order), `Residual`, `Total`.
    pub rows: Vec<EffectRow>,
    /// Observations.
    pub n: usize,
    /// Cells.
    pub cells: usize,
    /// Notes.
    pub notes: Vec<String>,
}

impl CellStats {
    /// Per-cell statistics of scalar values `y` in cells `cell` (one response).
    pub fn from_values(sizes: &[usize], cell: &[usize], y: &[f64]) -> CellStats {
        let g = sizes.iter().product::<usize>().max(1);
        let mut counts = vec![0.0; g];
        let mut sums = vec![0.0; g];
        for (&c, &v) in cell.iter().zip(y) {
            counts[c] += 1.0;
            sums[c] += v;
        }
        let mut means: Vec<f64> = sums
            .iter()
            .zip(&counts)
            .map(|(s, n)| if *n > 0.0 { s / n } else { 0.0 })
            .collect();
        let mut corr = vec![0.0; g];
        for (&c, &v) in cell.iter().zip(y) {
            corr[c] += v - means[c];
        }
        for c in 0..g {
            if counts[c] > 0.0 {
                means[c] += corr[c] / counts[c];
            }
        }
        let mut ss = 0.0;
        let mut comp = 0.0;
        for (&c, &v) in cell.iter().zip(y) {
            // Neumaier summation of the squared residuals.
            let r = v - means[c];
            let x = r * r;
            let t = ss + x;
            comp += if ss.abs() >= x {
                (ss - t) + x
            } else {
                (x - t) + ss
            };
            ss = t;
        }
        CellStats {
            sizes: sizes.to_vec(),
            counts,
            means: DMatrix::from_column_slice(g, 1, &means),
            within: DMatrix::from_element(1, 1, ss + comp),
        }
    }
}

/// Effect name of a term.
pub fn term_name(names: &[String], term: &[usize]) -> String {
    term.iter()
        .map(|&j| names[j].as_str())
        .collect::<Vec<_>>()
        .join(" × ")
}

fn row(effect: String, df: f64, ss: f64) -> EffectRow {
    EffectRow::blank(effect, df, ss)
}

/// Fits the full factorial of `stats` (every cell non-empty); `total_ss` is the centred total.
pub fn factorial(
    names: &[String],
    stats: &CellStats,
    total_ss: f64,
    ty: SsType,
) -> Result<Factorial, CellError> {
    let n = stats.n();
    let g = stats.n_cells();
    let df_e = n - g as f64;
    if df_e < 1.0 {
        return Err(CellError::design(format!(
            "{n} observations in {g} cells leave no residual degrees of freedom"
        ))
        .note("a factorial ANOVA needs more observations than cells: at least one cell needs two or more"));
    }
    if !(total_ss > 0.0) {
        return Err(CellError::data(format!(
            "all {n} values are equal, so there is no variation and F is undefined"
        )));
    }
    let ss_e = stats.within[(0, 0)].max(0.0);
    let ms_e = ss_e / df_e;
    let mut notes = Vec::new();
    let zero_error = ss_e <= total_ss * 1e-13;
    if zero_error {
        notes.push("the values are identical within every cell, so the residual variance is zero and F is undefined".into());
    }
    let mut rows = Vec::new();
    for t in terms(stats.sizes.len()).into_iter().skip(1) {
        let h = hypothesis(stats, &t, ty).ok_or_else(|| {
            CellError::design(
                "the design is singular (an empty cell); every combination needs data",
            )
        })?;
        let ss = h[(0, 0)].max(0.0);
        let df = term_df(&stats.sizes, &t) as f64;
        let mut r = row(term_name(names, &t), df, ss);
        r.ms = Some(ss / df);
        r.df_error = Some(df_e);
        r.ss_error = Some(ss_e);
        if !zero_error {
            let f = (ss / df) / ms_e; // (2)
            r.f = Some(f);
            r.p = f_sf(f, df, df_e);
        }
        r.eta2_partial = Some(ss / (ss + ss_e)); // (3)
        r.omega2_partial = Some((ss - df * ms_e) / (ss + (n - df) * ms_e)); // (4)
        rows.push(r);
    }
    if rows
        .iter()
        .any(|r| r.omega2_partial.is_some_and(|w| w < 0.0))
    {
        notes.push("a partial ω² below zero means that effect is smaller than chance alone would give; read it as no effect".into());
    }
    let mut res = row("Residual".into(), df_e, ss_e);
    res.ms = Some(ms_e);
    rows.push(res);
    rows.push(row("Total".into(), n - 1.0, total_ss));
    Ok(Factorial {
        rows,
        n: n as usize,
        cells: g,
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn balanced_two_by_two_by_hand() {
        // Cells (a1b1, a1b2, a2b1, a2b2) = {1,3}, {2,4}, {5,7}, {10,12}: cell means 2, 3, 6, 11;
        // grand mean 5.5. A: 4·((2.5 − 5.5)² + (8.5 − 5.5)²) = 72; B: 4·((4 − 5.5)² + (7 − 5.5)²)
        // = 18; AB: 2·Σ(interaction residual)² with residuals ±1 → 2·4·1 = 8; error: 8 × 1 = 8
        // (hand arithmetic; balanced, so types 2 and 3 agree).
        let y = [1.0, 3.0, 2.0, 4.0, 5.0, 7.0, 10.0, 12.0];
        let cell = [0, 0, 1, 1, 2, 2, 3, 3];
        let s = CellStats::from_values(&[2, 2], &cell, &y);
        let names = vec!["A".to_string(), "B".to_string()];
        for ty in [SsType::Two, SsType::Three] {
            let f = factorial(&names, &s, 106.0, ty).unwrap();
            let ss: Vec<f64> = f.rows.iter().map(|r| r.ss).collect();
            for (a, b) in ss.iter().zip([72.0, 18.0, 8.0, 8.0, 106.0]) {
                assert!((a - b).abs() < 1e-12, "{ty:?}: {ss:?}");
            }
            assert_eq!(f.rows[2].effect, "A × B");
            assert!((f.rows[0].f.unwrap() - 36.0).abs() < 1e-12);
        }
    }
}
