//! Between-subjects factorial hypotheses from per-cell sufficient statistics.
//!
//! Method. The between factors B₁…B_b with k₁…k_b levels define G = Πk_j cells (every one
//! non-empty). A cell g holds n_g units with mean vector m_g (d responses: d = 1 for an ordinary
//! ANOVA, d contrasts of the repeated measures in a within stratum). The full factorial model is
//! the cell-means model, so its fit needs only (n_g, m_g) and the pooled within-cell SSCP;
//! the cost is linear in rows and the linear algebra is on G × G matrices (nalgebra).
//!
//! For a term T (a set of between factors; the empty set is the intercept) the coding over
//! cells is the Kronecker product X_T = ⊗_j (C_j if j ∈ T else 1_{k_j}), with C_j the
//! orthonormal Helmert contrasts of factor j (k_j × (k_j − 1)). With D = diag(n_g) and M the
//! G × d matrix of cell means, the hypothesis SSCP of T is
//!
//! ```text
//! type 2:  H_T = B' (R' D R)⁻¹ B,   R = X_T − X_r (X_r' D X_r)⁻¹ X_r' D X_T,   B = R' D M   (1)
//!          where X_r codes every term that does not contain T (a hierarchical model)
//! type 3:  H_T = (L M)' (L D⁻¹ L')⁻¹ (L M),  L = ⊗_j (C_j' if j ∈ T else 1'_{k_j}/k_j)   (2)
//! ```
//!
//! (1) is the extra sum of squares of T over the model of all terms not containing T (Yates
//! 1934; the "type II" of common practice); (2) tests equal unweighted marginal means, the
//! sum-to-zero ("type III") hypothesis. Both agree when the cell counts are equal or
//! proportional. For d = 1 the SS is the single entry; for d > 1 the univariate SS is tr(H).
//!
//! Degenerate input: an empty cell or a singular cross-product is refused by the caller before
//! this module is reached; here a failed Cholesky factorisation returns `None`.

use nalgebra::{DMatrix, DVector};

/// Which hypothesis each effect tests.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SsType {
    /// Each effect adjusted for every term that does not contain it.
    Two,
    /// Equal unweighted marginal means (sum-to-zero coding).
    Three,
}

impl SsType {
    /// 2 or 3, for captions and the bundle.
    pub fn number(self) -> u8 {
        match self {
            SsType::Two => 2,
            SsType::Three => 3,
        }
    }
}

/// Per-cell sufficient statistics of a between-subjects layout.
#[derive(Debug, Clone)]
pub struct CellStats {
    /// Levels per between factor (cells in mixed radix, first factor slowest).
    pub sizes: Vec<usize>,
    /// Units per cell.
    pub counts: Vec<f64>,
    /// Cell means, G × d.
    pub means: DMatrix<f64>,
    /// Pooled within-cell sums of squares and cross-products, d × d.
    pub within: DMatrix<f64>,
}

impl CellStats {
    /// Accumulates units `z` (N × d) falling in cells `cell` (mixed radix over `sizes`).
    /// Means are refined by a second pass over each cell's residuals.
    pub fn from_units(sizes: &[usize], cell: &[usize], z: &DMatrix<f64>) -> CellStats {
        let g = sizes.iter().product::<usize>().max(1);
        let d = z.ncols();
        let mut counts = vec![0.0; g];
        let mut means = DMatrix::<f64>::zeros(g, d);
        for (i, &c) in cell.iter().enumerate() {
            counts[c] += 1.0;
            for j in 0..d {
                means[(c, j)] += z[(i, j)];
            }
        }
        for c in 0..g {
            if counts[c] > 0.0 {
                for j in 0..d {
                    means[(c, j)] /= counts[c];
                }
            }
        }
        // Second pass: the mean of the residuals corrects the first mean's rounding.
        let mut corr = DMatrix::<f64>::zeros(g, d);
        for (i, &c) in cell.iter().enumerate() {
            for j in 0..d {
                corr[(c, j)] += z[(i, j)] - means[(c, j)];
            }
        }
        for c in 0..g {
            if counts[c] > 0.0 {
                for j in 0..d {
                    means[(c, j)] += corr[(c, j)] / counts[c];
                }
            }
        }
        let mut within = DMatrix::<f64>::zeros(d, d);
        let mut r = vec![0.0; d];
        for (i, &c) in cell.iter().enumerate() {
            for j in 0..d {
                r[j] = z[(i, j)] - means[(c, j)];
            }
            for a in 0..d {
                for b in a..d {
                    within[(a, b)] += r[a] * r[b];
                }
            }
        }
        for a in 0..d {
            for b in 0..a {
                within[(a, b)] = within[(b, a)];
            }
        }
        CellStats {
            sizes: sizes.to_vec(),
            counts,
            means,
            within,
        }
    }

    /// Number of cells.
    pub fn n_cells(&self) -> usize {
        self.counts.len()
    }
    /// Total units.
    pub fn n(&self) -> f64 {
        self.counts.iter().sum()
    }
    /// Residual degrees of freedom of the full factorial model.
    pub fn df_error(&self) -> f64 {
        self.n() - self.n_cells() as f64
    }
}

/// Every term of the full factorial over `b` factors, the intercept (empty set) first, then by
/// order (main effects, two-way interactions, …), each term's factors in ascending order.
pub fn terms(b: usize) -> Vec<Vec<usize>> {
    let mut out: Vec<Vec<usize>> = (0u32..(1u32 << b))
        .map(|mask| (0..b).filter(|j| mask & (1 << j) != 0).collect())
        .collect();
    out.sort_by(|x: &Vec<usize>, y: &Vec<usize>| x.len().cmp(&y.len()).then(x.cmp(y)));
    out
}

/// Degrees of freedom of a term: Π (k_j − 1) over its factors (1 for the intercept).
pub fn term_df(sizes: &[usize], term: &[usize]) -> usize {
    term.iter().map(|&j| sizes[j] - 1).product()
}

/// Orthonormal Helmert contrasts for k levels: k × (k − 1), columns orthogonal to 1.
pub fn helmert(k: usize) -> DMatrix<f64> {
    let mut m = DMatrix::zeros(k, k.saturating_sub(1));
    for j in 1..k {
        let norm = ((j * (j + 1)) as f64).sqrt();
        for i in 0..j {
            m[(i, j - 1)] = 1.0 / norm;
        }
        m[(j, j - 1)] = -(j as f64) / norm;
    }
    m
}

/// Kronecker product of a list of matrices (first one slowest).
pub fn kron_all(parts: &[DMatrix<f64>]) -> DMatrix<f64> {
    let mut acc = DMatrix::from_element(1, 1, 1.0);
    for p in parts {
        acc = acc.kronecker(p);
    }
    acc
}

/// The orthonormal contrast matrix M_E (C × d_E) of within effect `e` over within factors with
/// `sizes` levels: Helmert contrasts for the factors in `e`, the normalised mean for the others
/// (formula (1) of [`super::repeated`]).
pub fn within_contrasts(sizes: &[usize], e: &[usize]) -> DMatrix<f64> {
    let parts: Vec<DMatrix<f64>> = sizes
        .iter()
        .enumerate()
        .map(|(f, &k)| {
            if e.contains(&f) {
                helmert(k)
            } else {
                DMatrix::from_element(k, 1, 1.0 / (k as f64).sqrt())
            }
        })
        .collect();
    kron_all(&parts)
}

fn coding(sizes: &[usize], term: &[usize]) -> DMatrix<f64> {
    let parts: Vec<DMatrix<f64>> = sizes
        .iter()
        .enumerate()
        .map(|(j, &k)| {
            if term.contains(&j) {
                helmert(k)
            } else {
                DMatrix::from_element(k, 1, 1.0)
            }
        })
        .collect();
    kron_all(&parts)
}

fn contains(t: &[usize], sub: &[usize]) -> bool {
    sub.iter().all(|j| t.contains(j))
}

fn inverse_spd(a: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let chol = a.clone().cholesky()?;
    Some(chol.inverse())
}

/// The G × G matrix Q of the hypothesis of `term`, so that its SSCP is H = M' Q M for any cell
/// means M of a layout with these `counts` ((1) or (2) of the module doc); `None` if singular.
pub fn hypothesis_form(
    sizes: &[usize],
    counts: &[f64],
    term: &[usize],
    ty: SsType,
) -> Option<DMatrix<f64>> {
    let d = DVector::from_vec(counts.to_vec());
    let g = counts.len();
    match ty {
        SsType::Two => {
            let reduced: Vec<Vec<usize>> = terms(sizes.len())
                .into_iter()
                .filter(|t| !contains(t, term))
                .collect();
            let xt = coding(sizes, term);
            let r = if reduced.is_empty() {
                xt
            } else {
                let xr = stack(sizes, &reduced, g);
                let dxr = weight_rows(&xr, &d);
                let coef = inverse_spd(&(xr.transpose() * &dxr))? * (dxr.transpose() * &xt);
                xt - xr * coef
            };
            let dr = weight_rows(&r, &d);
            let inner = inverse_spd(&(r.transpose() * &dr))?;
            Some(&dr * inner * dr.transpose())
        }
        SsType::Three => {
            let parts: Vec<DMatrix<f64>> = sizes
                .iter()
                .enumerate()
                .map(|(j, &k)| {
                    if term.contains(&j) {
                        helmert(k).transpose()
                    } else {
                        DMatrix::from_element(1, k, 1.0 / k as f64)
                    }
                })
                .collect();
            let l = kron_all(&parts);
            let dinv: Vec<f64> = counts.iter().map(|n| 1.0 / n).collect();
            let ldl = weight_cols(&l, &DVector::from_vec(dinv)) * l.transpose();
            Some(l.transpose() * inverse_spd(&ldl)? * l)
        }
    }
}

fn stack(sizes: &[usize], ts: &[Vec<usize>], g: usize) -> DMatrix<f64> {
    let blocks: Vec<DMatrix<f64>> = ts.iter().map(|t| coding(sizes, t)).collect();
    let cols: usize = blocks.iter().map(|b| b.ncols()).sum();
    let mut x = DMatrix::zeros(g, cols);
    let mut at = 0;
    for b in &blocks {
        x.columns_mut(at, b.ncols()).copy_from(b);
        at += b.ncols();
    }
    x
}

/// The G × G operator P giving the fitted cell values P·m of the model with every term except
/// `term` (sum-to-zero coding; the reduced model of a Freedman–Lane permutation test).
pub fn reduced_fit(sizes: &[usize], counts: &[f64], term: &[usize]) -> Option<DMatrix<f64>> {
    let g = counts.len();
    let others: Vec<Vec<usize>> = terms(sizes.len())
        .into_iter()
        .filter(|t| t.as_slice() != term)
        .collect();
    let x = stack(sizes, &others, g);
    let d = DVector::from_vec(counts.to_vec());
    let dx = weight_rows(&x, &d);
    Some(&x * inverse_spd(&(x.transpose() * &dx))? * dx.transpose())
}

/// The hypothesis SSCP (d × d) of `term` under `ty`; `None` if a cross-product is singular.
pub fn hypothesis(stats: &CellStats, term: &[usize], ty: SsType) -> Option<DMatrix<f64>> {
    let q = hypothesis_form(&stats.sizes, &stats.counts, term, ty)?;
    Some(stats.means.transpose() * q * &stats.means)
}

fn weight_rows(x: &DMatrix<f64>, w: &DVector<f64>) -> DMatrix<f64> {
    let mut out = x.clone();
    for (i, mut row) in out.row_iter_mut().enumerate() {
        row *= w[i];
    }
    out
}

fn weight_cols(x: &DMatrix<f64>, w: &DVector<f64>) -> DMatrix<f64> {
    let mut out = x.clone();
    for (j, mut col) in out.column_iter_mut().enumerate() {
        col *= w[j];
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn one_column(v: &[f64]) -> DMatrix<f64> {
        DMatrix::from_column_slice(v.len(), 1, v)
    }

    #[test]
    fn helmert_is_orthonormal_and_sums_to_zero() {
        for k in 2..7 {
            let h = helmert(k);
            let i = h.transpose() * &h;
            assert!((i - DMatrix::identity(k - 1, k - 1)).abs().max() < 1e-14);
            assert!((DMatrix::from_element(1, k, 1.0) * &h).abs().max() < 1e-14);
        }
    }

    #[test]
    fn one_way_hypothesis_is_the_between_groups_ss() {
        // Groups {1,2,3}, {4,5}, {9}: grand mean 4, SS_between = 3·4 + 2·0.25 + 25 = 37.5
        // (hand arithmetic, formula (1) of models/oneway.rs).
        let z = one_column(&[1.0, 2.0, 3.0, 4.0, 5.0, 9.0]);
        let s = CellStats::from_units(&[3], &[0, 0, 0, 1, 1, 2], &z);
        for ty in [SsType::Two, SsType::Three] {
            let h = hypothesis(&s, &[0], ty).unwrap();
            assert!((h[(0, 0)] - 37.5).abs() < 1e-12, "{ty:?}: {}", h[(0, 0)]);
        }
        assert!((s.within[(0, 0)] - 2.5).abs() < 1e-12);
        // The type 2 intercept is N·ȳ² = 6·16 (hand arithmetic).
        let h0 = hypothesis(&s, &[], SsType::Two).unwrap();
        assert!((h0[(0, 0)] - 96.0).abs() < 1e-12);
    }

    #[test]
    fn terms_are_ordered_by_size() {
        assert_eq!(
            terms(3),
            vec![
                vec![],
                vec![0],
                vec![1],
                vec![2],
                vec![0, 1],
                vec![0, 2],
                vec![1, 2],
                vec![0, 1, 2]
            ]
        );
    }
}
