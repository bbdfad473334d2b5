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
