//! Assumption checks: equal spread across cells, and normality of residuals.
//!
//! Spread. Levene (1960) and Brown & Forsythe (1974): a one-way ANOVA across the cells of the
//! absolute deviations z_ij = |y_ij − c_i|, with c_i the cell mean (Levene) or the cell median
//! (Brown–Forsythe, more robust to skew). F on (k − 1, N − k) df.
//!
//! Normality. Shapiro & Wilk (1965) W with Royston's (1992, 1995) approximation of the
//! coefficients and of the p value (algorithm AS R94):
//!
//! ```text
//! m_i = Φ⁻¹((i − 3/8)/(n + 1/4)),  u = 1/√n                                   (1)
//! a_n = c_n + 0.221157u − 0.147981u² − 2.071190u³ + 4.434685u⁴ − 2.706056u⁵    (2)
//! a_{n−1} = c_{n−1} + 0.042981u − 0.293762u² − 1.752461u³ + 5.682633u⁴ − 3.582633u⁵  (n > 5)
//! a_i = m_i/√ε for the others, ε chosen so that Σ a_i² = 1; c_i = m_i/√(Σ m²)   (3)
//! W = (Σ a_i x_(i))² / Σ (x_i − x̄)²                                          (4)
//! n = 3: p = (6/π)(asin √W − asin √(3/4))                                    (5)
//! 4 ≤ n ≤ 11: γ = −2.273 + 0.459n, y = −ln(γ − ln(1 − W)),
//!     μ = 0.5440 − 0.39978n + 0.025054n² − 0.0006714n³,
//!     σ = exp(1.3822 − 0.77857n + 0.062767n² − 0.0020322n³)                  (6)
//! n ≥ 12: y = ln(1 − W), μ = −1.5861 − 0.31082v − 0.083751v² + 0.0038915v³,
//!     σ = exp(−0.4803 − 0.082676v + 0.0030302v²), v = ln n                   (7)
//! p = P(Z > (y − μ)/σ)                                                         (8)
//! ```
//!
//! The approximation is stated for 3 ≤ n ≤ 5000; outside it the result carries a note.
//! Degenerate input: n < 3 or all values equal gives no test (`None`).

use super::oneway::oneway;
use statrs::distribution::{ContinuousCDF, Normal};

/// A spread test's result.
#[derive(Debug, Clone, PartialEq)]
pub struct SpreadTest {
    /// F.
    pub statistic: f64,
    /// Numerator df.
    pub df: f64,
    /// Denominator df.
    pub df_error: f64,
    /// Upper tail.
    pub p: Option<f64>,
}

/// Where deviations are measured from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Center {
    /// Cell mean (Levene).
    Mean,
    /// Cell median (Brown–Forsythe).
    Median,
}

fn median(sorted: &[f64]) -> f64 {
    let n = sorted.len();
    if n % 2 == 1 {
        sorted[n / 2]
    } else {
        (sorted[n / 2 - 1] + sorted[n / 2]) / 2.0
    }
}

/// Levene or Brown–Forsythe across `cells`; `None` if undefined (fewer than two cells, no
/// residual df, or no spread anywhere).
pub fn spread(cells: &[Vec<f64>], center: Center) -> Option<SpreadTest> {
    let dev: Vec<Vec<f64>> = cells
        .iter()
        .filter(|c| !c.is_empty())
        .map(|c| {
            let ctr = match center {
                Center::Mean => super::sums::mean(c),
                Center::Median => {
                    let mut s = c.clone();
                    s.sort_by(|a, b| a.total_cmp(b));
                    median(&s)
                }
            };
            c.iter().map(|v| (v - ctr).abs()).collect()
        })
        .collect();
    let fit = oneway("spread", &dev).ok()?;
    let e = fit.effect();
    Some(SpreadTest {
        statistic: e.f?,
        df: e.df,
        df_error: e.df_error?,
        p: e.p,
    })
}

/// Shapiro–Wilk W and p of `x`; `None` when n < 3 or all values are equal.
pub fn shapiro_wilk(x: &[f64]) -> Option<(f64, f64)> {
    let n = x.len();
    if n < 3 {
        return None;
    }
    let mut x = x.to_vec();
    x.sort_by(|a, b| a.total_cmp(b));
    let range = x[n - 1] - x[0];
    if !(range > 0.0) {
        return None;
    }
    let norm = Normal::standard();
    let nn2 = n / 2;
    let an = n as f64;
    // Coefficients for the lower half (positive, as in AS R94), a[0] the most extreme.
    let mut a = vec![0.0; nn2];
    if n == 3 {
        a[0] = std::f64::consts::FRAC_1_SQRT_2;
    } else {
        let an25 = an + 0.25;
        let m: Vec<f64> = (1..=nn2)
            .map(|i| norm.inverse_cdf((i as f64 - 0.375) / an25))
            .collect(); // (1), negative
        let summ2 = 2.0 * m.iter().map(|v| v * v).sum::<f64>();
        let ssumm2 = summ2.sqrt();
        let u = 1.0 / an.sqrt();
        let poly = |c: &[f64]| c.iter().rev().fold(0.0, |acc, &k| acc * u + k);
        let a1 = poly(&[0.0, 0.221157, -0.147981, -2.071190, 4.434685, -2.706056]) - m[0] / ssumm2; // (2)
        let (first, fac) = if n > 5 {
            let a2 =
                -m[1] / ssumm2 + poly(&[0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633]);
            let fac = ((summ2 - 2.0 * m[0] * m[0] - 2.0 * m[1] * m[1])
                / (1.0 - 2.0 * a1 * a1 - 2.0 * a2 * a2))
                .sqrt();
            a[1] = a2;
            (2, fac)
        } else {
            let fac = ((summ2 - 2.0 * m[0] * m[0]) / (1.0 - 2.0 * a1 * a1)).sqrt();
            (1, fac)
        };
        a[0] = a1;
        for i in first..nn2 {
            a[i] = -m[i] / fac; // (3)
        }
    }
    // W as the squared correlation of the data with the full coefficient vector (4), scaled by
    // the range for stability, computed as 1 − W directly.
    let coef = |i: usize| -> f64 {
        let j = n - 1 - i;
        if i < j {
            -a[i]
        } else if i > j {
            a[j]
        } else {
            0.0
        }
    };
    let sa = (0..n).map(coef).sum::<f64>() / an;
    let sx = x.iter().map(|v| v / range).sum::<f64>() / an;
    let (mut ssa, mut ssx, mut sax) = (0.0, 0.0, 0.0);
    for (i, xi) in x.iter().enumerate() {
        let asa = coef(i) - sa;
        let xsx = xi / range - sx;
        ssa += asa * asa;
        ssx += xsx * xsx;
        sax += asa * xsx;
    }
    let ssassx = (ssa * ssx).sqrt();
    let w1 = (ssassx - sax) * (ssassx + sax) / (ssa * ssx);
    let w = 1.0 - w1;
    if n == 3 {
        let p = 6.0 / std::f64::consts::PI * (w.sqrt().asin() - (0.75f64).sqrt().asin()); // (5)
        return Some((w, p.max(0.0)));
    }
    let ln_w1 = w1.ln();
    let (y, mu, sigma) = if n <= 11 {
        let gamma = -2.273 + 0.459 * an;
        if ln_w1 >= gamma {
            return Some((w, 1e-99));
        }
        let y = -(gamma - ln_w1).ln();
        let mu = 0.5440 - 0.39978 * an + 0.025054 * an * an - 0.0006714 * an.powi(3);
        let s = (1.3822 - 0.77857 * an + 0.062767 * an * an - 0.0020322 * an.powi(3)).exp(); // (6)
        (y, mu, s)
    } else {
        let v = an.ln();
        let mu = -1.5861 - 0.31082 * v - 0.083751 * v * v + 0.0038915 * v.powi(3);
        let s = (-0.4803 - 0.082676 * v + 0.0030302 * v * v).exp(); // (7)
        (ln_w1, mu, s)
    };
    let p = norm.sf((y - mu) / sigma); // (8)
    Some((w.clamp(0.0, 1.0), p))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn three_points_have_the_exact_distribution() {
        // n = 3, equally spaced: W = 1 (a perfect normal-order fit), p = 1 by (5).
        let (w, p) = shapiro_wilk(&[1.0, 2.0, 3.0]).unwrap();
        assert!((w - 1.0).abs() < 1e-12 && (p - 1.0).abs() < 1e-9, "{w} {p}");
        // The smallest W for n = 3 is 3/4, where p = 0.
        let (w, p) = shapiro_wilk(&[0.0, 0.0, 1.0]).unwrap();
        assert!((w - 0.75).abs() < 1e-12 && p.abs() < 1e-7, "{w} {p}");
        assert!(shapiro_wilk(&[2.0, 2.0, 2.0]).is_none());
        assert!(shapiro_wilk(&[1.0, 2.0]).is_none());
    }

    #[test]
    fn brown_forsythe_of_equal_spread_is_zero() {
        // Identical shapes shifted: the absolute deviations from each median are the same.
        let t = spread(
            &[vec![1.0, 2.0, 4.0], vec![11.0, 12.0, 14.0]],
            Center::Median,
        )
        .unwrap();
        assert!(t.statistic.abs() < 1e-12);
        assert_eq!((t.df, t.df_error), (1.0, 4.0));
    }
}
