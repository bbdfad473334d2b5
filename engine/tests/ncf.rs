//! Noncentral F (cdf, sf, quantile) and the central F upper quantile against scipy.stats over 240
//! points (tests/data/ncf_scipy.csv, written by tests/data/make_ncf_reference.py with the scipy
//! version named in its first line).

use engine::dist::{f_isf, ncf_cdf, ncf_ppf, ncf_sf};

#[test]
fn noncentral_f_agrees_with_scipy() {
    let path = format!("{}/../tests/data/ncf_scipy.csv", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap();
    let mut worst = 0.0f64;
    let mut n = 0;
    for line in text.lines().skip(2) {
        let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        let (x, d1, d2, lam) = (v[0], v[1], v[2], v[3]);
        let close = |ours: f64, theirs: f64, what: &str| {
            let err = (ours - theirs).abs();
            let rel = if theirs > 1e-12 { err / theirs } else { 0.0 };
            let ok = if theirs > 1e-12 {
                rel < 1e-8
            } else {
                err < 1e-12
            };
            assert!(
                ok,
                "{what} at x={x} d1={d1} d2={d2} λ={lam}: {ours} vs {theirs}"
            );
            rel
        };
        worst = worst.max(close(ncf_cdf(x, d1, d2, lam).unwrap(), v[4], "cdf"));
        worst = worst.max(close(ncf_sf(x, d1, d2, lam).unwrap(), v[5], "sf"));
        worst = worst.max(close(f_isf(0.05, d1, d2).unwrap(), v[6], "F quantile"));
        worst = worst.max(close(
            ncf_ppf(v[7], d1, d2, lam).unwrap(),
            v[8],
            "noncentral F quantile",
        ));
        n += 1;
    }
    assert_eq!(n, 240);
    println!("noncentral F vs scipy: {n} points, worst relative difference {worst:.2e}");
}
