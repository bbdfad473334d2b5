//! Compensated sums and centred moments shared by the models.
//!
//! Sums use Neumaier's improvement of Kahan summation (Neumaier 1974, ZAMM 54:39–51). Means are
//! refined with one correction pass, m = m0 + Σ(x − m0)/n, and sums of squares are centred on the
//! refined mean (the two-pass algorithm; Chan, Golub & LeVeque 1983, The American Statistician
//! 37(3):242–247), never Σx² − (Σx)²/n.

/// Neumaier-compensated sum.
pub fn sum<I: IntoIterator<Item = f64>>(xs: I) -> f64 {
    let mut s = 0.0f64;
    let mut c = 0.0f64;
    for x in xs {
        let t = s + x;
        if s.abs() >= x.abs() {
            c += (s - t) + x;
        } else {
            c += (x - t) + s;
        }
        s = t;
    }
    s + c
}

/// The refined mean of `xs` (NaN for an empty slice).
pub fn mean(xs: &[f64]) -> f64 {
    let n = xs.len() as f64;
    let m0 = sum(xs.iter().copied()) / n;
    m0 + sum(xs.iter().map(|x| x - m0)) / n
}

/// Σ(x − m)² for a given centre m.
pub fn centred_ss(xs: &[f64], m: f64) -> f64 {
    sum(xs.iter().map(|x| (x - m) * (x - m)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn compensated_sum_recovers_cancelled_terms() {
        // 1e16 + 1 − 1e16 is 1 exactly; naive left-to-right summation gives 0.
        assert_eq!(sum([1e16, 1.0, -1e16]), 1.0);
        assert_eq!(mean(&[1.0, 2.0, 3.0, 4.0]), 2.5);
        assert_eq!(centred_ss(&[1.0, 2.0, 3.0], 2.0), 2.0);
    }
}
