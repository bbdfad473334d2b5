//! Distribution functions, in one place so that a fix lands once.
//!
//! Wraps statrs. Upper tails are computed directly, never as `1 − cdf`: the F upper tail is
//! the regularized incomplete beta I_x(d2/2, d1/2) at x = d2 / (d2 + d1·F) (Abramowitz & Stegun
//! 1964, 26.6.2), which keeps its relative accuracy for p far below 1e-16. Invalid arguments
//! return `None` rather than panicking.

use statrs::distribution::{ContinuousCDF, StudentsT};
use statrs::function::beta::checked_beta_reg;

/// P(F > f) for F with (d1, d2) degrees of freedom.
pub fn f_sf(f: f64, d1: f64, d2: f64) -> Option<f64> {
    if !(d1 > 0.0 && d2 > 0.0) || f.is_nan() {
        return None;
    }
    if f <= 0.0 {
        return Some(1.0);
    }
    if f.is_infinite() {
        return Some(0.0);
    }
    let x = d2 / (d2 + d1 * f);
    checked_beta_reg(d2 / 2.0, d1 / 2.0, x).ok()
}

/// P(χ² > x) for χ² with `k` degrees of freedom: the regularized upper incomplete gamma
/// Q(k/2, x/2) (Abramowitz & Stegun 1964, 26.4.19), computed directly.
pub fn chi2_sf(x: f64, k: f64) -> Option<f64> {
    if !(k > 0.0) || x.is_nan() {
        return None;
    }
    if x <= 0.0 {
        return Some(1.0);
    }
    if x.is_infinite() {
        return Some(0.0);
    }
    statrs::function::gamma::checked_gamma_ur(k / 2.0, x / 2.0).ok()
}

/// The `q` quantile of Student's t with `df` degrees of freedom.
pub fn t_quantile(q: f64, df: f64) -> Option<f64> {
    if !(df > 0.0) || !(q > 0.0 && q < 1.0) {
        return None;
    }
    let t = StudentsT::new(0.0, 1.0, df).ok()?;
    let v = t.inverse_cdf(q);
    v.is_finite().then_some(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn f_upper_tail_identities() {
        // F(2, 2): P(F > f) = 1 / (1 + f) exactly (closed form of the F(2, 2) distribution).
        for f in [0.5, 1.0, 3.0, 99.0] {
            let p = f_sf(f, 2.0, 2.0).unwrap();
            assert!((p - 1.0 / (1.0 + f)).abs() < 1e-14, "{f}: {p}");
        }
        // F(2, d2): P(F > f) = (1 + 2f/d2)^(-d2/2) exactly; tiny p keeps relative accuracy.
        let (f, d2) = (5000.0, 40.0);
        let exact = (1.0f64 + 2.0 * f / d2).powf(-d2 / 2.0);
        let p = f_sf(f, 2.0, d2).unwrap();
        assert!(exact < 1e-40);
        assert!(((p - exact) / exact).abs() < 1e-10, "{p} vs {exact}");
        assert_eq!(f_sf(0.0, 1.0, 1.0), Some(1.0));
        assert_eq!(f_sf(1.0, 0.0, 1.0), None);
    }

    #[test]
    fn t_quantile_known_values() {
        // t(1) is Cauchy: the 0.975 quantile is tan(0.475π) exactly.
        let exact = (0.475 * std::f64::consts::PI).tan();
        assert!((t_quantile(0.975, 1.0).unwrap() - exact).abs() < 1e-9);
        // t(2): quantile q = (2q−1)·sqrt(2 / (1 − (2q−1)²)) exactly.
        let a: f64 = 2.0 * 0.975 - 1.0;
        let exact2 = a * (2.0 / (1.0 - a * a)).sqrt();
        assert!((t_quantile(0.975, 2.0).unwrap() - exact2).abs() < 1e-9);
        assert_eq!(t_quantile(1.5, 3.0), None);
    }
}

/// Noncentral F: the Poisson-weighted series of regularized incomplete beta functions.
///
/// P(F > x; d1, d2, λ) = Σ_j w_j · I_{1−y}(d2/2, d1/2 + j), w_j = e^{−λ/2}(λ/2)^j / j!,
/// y = d1·x / (d1·x + d2)  (Johnson, Kotz & Balakrishnan 1995, Continuous Univariate
/// Distributions vol. 2, ch. 30). Terms are summed outward from the Poisson mode; since every
/// beta term lies in [0, 1], the Poisson mass not yet summed bounds the truncation error, and the
/// sum stops when that mass is below 1e-15. More than 100,000 terms each way is a convergence
/// failure (`None`), never a partial sum.
fn ncf_tails(x: f64, d1: f64, d2: f64, lambda: f64) -> Option<(f64, f64)> {
    if !(d1 > 0.0 && d2 > 0.0 && lambda >= 0.0) || x.is_nan() {
        return None;
    }
    if x <= 0.0 {
        return Some((0.0, 1.0));
    }
    if x.is_infinite() {
        return Some((1.0, 0.0));
    }
    let y = d1 * x / (d1 * x + d2);
    let mu = lambda / 2.0;
    let weight = |j: f64| {
        if mu == 0.0 {
            if j == 0.0 { 1.0 } else { 0.0 }
        } else {
            (-mu + j * mu.ln() - statrs::function::gamma::ln_gamma(j + 1.0)).exp()
        }
    };
    let mode = mu.floor();
    let (mut lower, mut upper, mut mass) = (0.0f64, 0.0f64, 0.0f64);
    let term = |j: f64, lower: &mut f64, upper: &mut f64, mass: &mut f64| -> Option<()> {
        let w = weight(j);
        if w > 0.0 {
            let lo = checked_beta_reg(d1 / 2.0 + j, d2 / 2.0, y).ok()?;
            let up = checked_beta_reg(d2 / 2.0, d1 / 2.0 + j, 1.0 - y).ok()?;
            *lower += w * lo;
            *upper += w * up;
            *mass += w;
        }
        Some(())
    };
    term(mode, &mut lower, &mut upper, &mut mass)?;
    let (mut up_j, mut down_j) = (mode + 1.0, mode - 1.0);
    let mut steps = 0;
    while 1.0 - mass > 1e-15 {
        steps += 1;
        if steps > 100_000 {
            return None;
        }
        term(up_j, &mut lower, &mut upper, &mut mass)?;
        up_j += 1.0;
        if down_j >= 0.0 {
            term(down_j, &mut lower, &mut upper, &mut mass)?;
            down_j -= 1.0;
        }
        // Past the mode on both sides the Poisson tails shrink faster than geometrically, so
        // once the next weights are negligible the rest is too (guards against rounding keeping
        // the summed mass a hair below 1 − 1e-15).
        if weight(up_j) < 1e-18 && (down_j < 0.0 || weight(down_j) < 1e-18) {
            break;
        }
    }
    Some((lower.min(1.0), upper.min(1.0)))
}

/// P(F ≤ x) for the noncentral F.
pub fn ncf_cdf(x: f64, d1: f64, d2: f64, lambda: f64) -> Option<f64> {
    ncf_tails(x, d1, d2, lambda).map(|t| t.0)
}

/// P(F > x) for the noncentral F, summed directly (not 1 − cdf).
pub fn ncf_sf(x: f64, d1: f64, d2: f64, lambda: f64) -> Option<f64> {
    ncf_tails(x, d1, d2, lambda).map(|t| t.1)
}

/// The t ≥ 0 where `g(t)` crosses `target`, for `g` monotone in t: `rising` says which way.
/// The upper bracket doubles from 1 (at most 2,000 times), then 200 bisection steps stop at a
/// relative width of `rel`; a `None` from `g` or no bracket is `None`, never a guess.
fn solve_monotone(
    g: impl Fn(f64) -> Option<f64>,
    target: f64,
    rising: bool,
    rel: f64,
) -> Option<f64> {
    let below = |t: f64| g(t).map(|v| if rising { v < target } else { v > target });
    let mut hi = 1.0f64;
    let mut guard = 0;
    while below(hi)? {
        hi *= 2.0;
        guard += 1;
        if guard > 2000 {
            return None;
        }
    }
    let mut lo = 0.0f64;
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if below(mid)? {
            lo = mid
        } else {
            hi = mid
        }
        if hi - lo <= rel * hi.max(1e-300) {
            break;
        }
    }
    Some(0.5 * (lo + hi))
}

/// The x with P(F(d1, d2) > x) = p (central F), by bisection on the directly computed tail.
pub fn f_isf(p: f64, d1: f64, d2: f64) -> Option<f64> {
    if !(p > 0.0 && p < 1.0) {
        return None;
    }
    solve_monotone(|x| f_sf(x, d1, d2), p, false, 1e-15)
}

/// The q quantile of the noncentral F, by bisection on the cdf (monotone in x).
pub fn ncf_ppf(q: f64, d1: f64, d2: f64, lambda: f64) -> Option<f64> {
    if !(q > 0.0 && q < 1.0) {
        return None;
    }
    solve_monotone(|x| ncf_cdf(x, d1, d2, lambda), q, true, 1e-14)
}

/// The noncentrality λ ≥ 0 with P(F ≤ x; d1, d2, λ) = q, if one exists (the cdf falls as λ
/// grows). Used to invert an observed F into a confidence interval (Steiger 2004).
pub fn ncf_lambda_for_cdf(x: f64, d1: f64, d2: f64, q: f64) -> Option<f64> {
    if ncf_cdf(x, d1, d2, 0.0)? < q {
        return Some(0.0);
    }
    solve_monotone(|l| ncf_cdf(x, d1, d2, l), q, false, 1e-12)
}

#[cfg(test)]
mod ncf_tests {
    use super::*;

    #[test]
    fn zero_noncentrality_is_the_central_f() {
        for (x, a, b) in [(0.5, 2.0, 7.0), (3.0, 4.0, 20.0), (12.0, 1.0, 3.0)] {
            let c = f_sf(x, a, b).unwrap();
            assert!((ncf_sf(x, a, b, 0.0).unwrap() - c).abs() < 1e-15);
            assert!((ncf_cdf(x, a, b, 0.0).unwrap() + c - 1.0).abs() < 1e-14);
        }
    }

    #[test]
    fn tails_add_to_one_and_quantile_inverts() {
        let (lo, up) = ncf_tails(2.5, 3.0, 40.0, 9.0).unwrap();
        assert!((lo + up - 1.0).abs() < 1e-13);
        let x = f_isf(0.05, 2.0, 57.0).unwrap();
        assert!((f_sf(x, 2.0, 57.0).unwrap() - 0.05).abs() < 1e-13);
        let l = ncf_lambda_for_cdf(4.0, 2.0, 30.0, 0.3).unwrap();
        assert!((ncf_cdf(4.0, 2.0, 30.0, l).unwrap() - 0.3).abs() < 1e-9);
    }
}
