//! Randomisation (permutation) tests of ANOVA effects.
//!
//! Method. The statistic is each effect's F. Between-subjects effects: permutation of residuals
//! under the reduced model (Freedman & Lane 1983): with ŷ the fitted values of the model
//! without the effect (sum-to-zero coding) and r = y − ŷ, each draw tests y* = ŷ + P·r for a
//! random permutation P; with one factor the reduced model is the grand mean, so this is the
//! permutation of the responses across groups. Within-subject effects: each subject's values are
//! permuted across its within cells. In subject designs the between effects use the same
//! Freedman–Lane scheme on the subjects' totals (whole subjects permuted). For a draw, F* is
//! computed from cell sums (the hypothesis as a quadratic form of the cell means, see
//! [`super::linear::hypothesis_form`]), so a draw costs one pass over the units.
//!
//! ```text
//! Monte Carlo: p = (b + 1)/(m + 1), b = #{F* ≥ F}, m draws (Phipson & Smyth 2010)        (1)
//! exact: p = #{assignments with F* ≥ F} / #{assignments} (the identity counts)           (2)
//! 99% interval for the Monte Carlo p: Wilson's score interval for b/m, z = 2.5758          (3)
//! ```
//!
//! F* ≥ F is judged with a relative tolerance of 1e-9 so that assignments equivalent to the
//! observed one count despite rounding. Reproducibility: draws are split into fixed blocks of
//! 2,000; block j draws from xoshiro256++ (Blackman & Vigna 2018) seeded by SplitMix64 from the
//! seed and j, so the same seed gives the same p whatever the number of threads. With one
//! factor, a draw assigns the units to groups as bit masks without moving the values
//! ([`super::deal`]: fair bits, then uniform corrections to the group sizes — uniform over all
//! assignments) and reads the group sums from a table of subset sums. Memory is flat: the null
//! is kept as a fixed histogram.

use super::deal::Dealer;
use super::linear::{SsType, hypothesis_form, reduced_fit, term_df, within_contrasts};
use crate::Cancel;
use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus as Gen;
use rayon::prelude::*;

/// Draws per block.
pub const BLOCK: u64 = 2_000;
/// Bins of the null histogram (plus one overflow bin).
pub const BINS: usize = 60;

/// One permutation test.
#[derive(Debug, Clone)]
pub enum Test {
    /// Units in crossed cells, Freedman–Lane residuals.
    Between(BetweenTest),
    /// Subjects × within cells, permuted within subjects.
    Within(WithinTest),
}

/// A between-units test.
#[derive(Debug, Clone)]
pub struct BetweenTest {
    cell: Vec<usize>,
    counts: Vec<f64>,
    fitted: Vec<f64>,
    resid: Vec<f64>,
    q: DMatrix<f64>,
    /// Effect df.
    pub df: f64,
    /// Error df.
    pub df_e: f64,
    /// Observed F.
    pub f_obs: f64,
    /// The y values (for exact enumeration of one factor).
    y: Vec<f64>,
    one_factor: bool,
}

/// A within-subjects test.
#[derive(Debug, Clone)]
pub struct WithinTest {
    y: DMatrix<f64>,
    group: Vec<usize>,
    g_cells: usize,
    m: DMatrix<f64>,
    q: DMatrix<f64>,
    counts: Vec<f64>,
    /// Effect df.
    pub df: f64,
    /// Error df.
    pub df_e: f64,
    /// Observed F.
    pub f_obs: f64,
}

fn cell_means(
    cell: &[usize],
    counts: &[f64],
    v: impl Iterator<Item = f64>,
    sums: &mut [f64],
) -> f64 {
    sums.iter_mut().for_each(|s| *s = 0.0);
    let mut sq = 0.0;
    for (&c, x) in cell.iter().zip(v) {
        sums[c] += x;
        sq += x * x;
    }
    let mut between = 0.0;
    for (s, n) in sums.iter_mut().zip(counts) {
        between += *s * *s / n;
        *s /= n;
    }
    sq - between
}

fn quad(q: &DMatrix<f64>, m: &[f64]) -> f64 {
    let g = m.len();
    let mut t = 0.0;
    for i in 0..g {
        let mut row = 0.0;
        for j in 0..g {
            row += q[(i, j)] * m[j];
        }
        t += m[i] * row;
    }
    t
}

impl BetweenTest {
    /// The test of `term` for values `y` in cells `cell` of a layout with `sizes`.
    pub fn new(
        sizes: &[usize],
        cell: &[usize],
        y: &[f64],
        term: &[usize],
        ty: SsType,
    ) -> Option<BetweenTest> {
        let g: usize = sizes.iter().product();
        let mut counts = vec![0.0; g];
        for &c in cell {
            counts[c] += 1.0;
        }
        let q = hypothesis_form(sizes, &counts, term, ty)?;
        let p = reduced_fit(sizes, &counts, term)?;
        let mut sums = vec![0.0; g];
        let _ = cell_means(cell, &counts, y.iter().copied(), &mut sums);
        let fit_cells = &p * DMatrix::from_column_slice(g, 1, &sums);
        let fitted: Vec<f64> = cell.iter().map(|&c| fit_cells[(c, 0)]).collect();
        let resid: Vec<f64> = y.iter().zip(&fitted).map(|(a, b)| a - b).collect();
        let df = term_df(sizes, term) as f64;
        let df_e = y.len() as f64 - g as f64;
        let mut t = BetweenTest {
            cell: cell.to_vec(),
            counts,
            fitted,
            resid,
            q,
            df,
            df_e,
            f_obs: 0.0,
            y: y.to_vec(),
            one_factor: sizes.len() == 1,
        };
        let r = t.resid.clone();
        t.f_obs = t.stat(&r, &mut sums);
        Some(t)
    }

    fn stat(&self, resid: &[f64], sums: &mut [f64]) -> f64 {
        let sse = cell_means(
            &self.cell,
            &self.counts,
            self.fitted.iter().zip(resid).map(|(f, r)| f + r),
            sums,
        );
        let ss = quad(&self.q, sums);
        (ss / self.df) / (sse / self.df_e)
    }

    /// F with the values y under group labels `labels` (one factor: the counts are unchanged).
    fn stat_labels(&self, labels: &[usize], sums: &mut [f64]) -> f64 {
        let sse = cell_means(labels, &self.counts, self.y.iter().copied(), sums);
        (quad(&self.q, sums) / self.df) / (sse / self.df_e)
    }
}

impl WithinTest {
    /// The test of within effect `e` crossed with between term `g` (mixed radix layouts).
    pub fn new(
        y: &DMatrix<f64>,
        group: &[usize],
        bsizes: &[usize],
        wsizes: &[usize],
        e: &[usize],
        g: &[usize],
        ty: SsType,
    ) -> Option<WithinTest> {
        let m = within_contrasts(wsizes, e);
        let g_cells: usize = bsizes.iter().product::<usize>().max(1);
        let mut counts = vec![0.0; g_cells];
        for &c in group {
            counts[c] += 1.0;
        }
        let q = hypothesis_form(bsizes, &counts, g, ty)?;
        let d = m.ncols() as f64;
        let n = y.nrows() as f64;
        let mut t = WithinTest {
            y: y.clone(),
            group: group.to_vec(),
            g_cells,
            m,
            q,
            counts,
            df: d * term_df(bsizes, g) as f64,
            df_e: d * (n - g_cells as f64),
            f_obs: 0.0,
        };
        t.f_obs = t.stat(&t.y.clone());
        Some(t)
    }

    fn stat(&self, y: &DMatrix<f64>) -> f64 {
        let z = y * &self.m;
        let (mut ss, mut sse) = (0.0, 0.0);
        let mut sums = vec![0.0; self.g_cells];
        for j in 0..z.ncols() {
            sse += cell_means(
                &self.group,
                &self.counts,
                z.column(j).iter().copied(),
                &mut sums,
            );
            ss += quad(&self.q, &sums);
        }
        (ss / self.df) / (sse / self.df_e)
    }
}

impl Test {
    /// Observed F.
    pub fn f_obs(&self) -> f64 {
        match self {
            Test::Between(t) => t.f_obs,
            Test::Within(t) => t.f_obs,
        }
    }
    /// (df, error df).
    pub fn dfs(&self) -> (f64, f64) {
        match self {
            Test::Between(t) => (t.df, t.df_e),
            Test::Within(t) => (t.df, t.df_e),
        }
    }
    /// The number of distinct assignments, if it fits in a u128.
    pub fn assignments(&self) -> Option<u128> {
        match self {
            Test::Between(t) if t.one_factor => {
                // N! / Π n_g!
                let mut num: u128 = 1;
                let mut k: u128 = 0;
                for &n in &t.counts {
                    for i in 1..=(n as u128) {
                        k += 1;
                        num = num.checked_mul(k)? / i;
                    }
                }
                Some(num)
            }
            Test::Between(_) => None,
            Test::Within(t) => {
                let c = t.y.ncols() as u32;
                let per: u128 = (1..=c as u128).try_fold(1u128, |a, b| a.checked_mul(b))?;
                per.checked_pow(t.y.nrows() as u32)
            }
        }
    }
}

/// The null distribution as a fixed histogram on [0, upper).
#[derive(Debug, Clone, PartialEq)]
pub struct Null {
    /// Upper end of the binned range.
    pub upper: f64,
    /// Counts per bin; the last one holds values at or beyond `upper`.
    pub bins: Vec<u64>,
}

impl Null {
    fn new(upper: f64) -> Null {
        Null {
            upper,
            bins: vec![0; BINS + 1],
        }
    }
    fn add(&mut self, f: f64) {
        let i = if f.is_finite() && f >= 0.0 {
            ((f / self.upper) * BINS as f64) as usize
        } else {
            BINS
        };
        self.bins[i.min(BINS)] += 1;
    }
    fn merge(&mut self, o: &Null) {
        for (a, b) in self.bins.iter_mut().zip(&o.bins) {
            *a += b;
        }
    }
}

/// What a run found.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// Draws or assignments done.
    pub done: u64,
    /// Of which F* ≥ F.
    pub ge: u64,
    /// Whether every assignment was enumerated.
    pub exact: bool,
    /// Whether the run was interrupted.
    pub partial: bool,
    /// The null histogram.
    pub null: Null,
}

impl Outcome {
    /// p by (1) or (2).
    pub fn p(&self) -> f64 {
        if self.exact && !self.partial {
            self.ge as f64 / self.done as f64
        } else {
            (self.ge as f64 + 1.0) / (self.done as f64 + 1.0)
        }
    }
    /// 99% Monte Carlo interval (3); `None` for an exact p.
    pub fn interval(&self) -> Option<(f64, f64)> {
        if self.exact && !self.partial {
            return None;
        }
        let (b, m, z) = (self.ge as f64, self.done as f64, 2.5758293035489004);
        if m == 0.0 {
            return Some((0.0, 1.0));
        }
        let ph = b / m;
        let den = 1.0 + z * z / m;
        let centre = (ph + z * z / (2.0 * m)) / den;
        let half = z * (ph * (1.0 - ph) / m + z * z / (4.0 * m * m)).sqrt() / den;
        Some(((centre - half).max(0.0), (centre + half).min(1.0)))
    }
}

fn tie(f: f64, f_obs: f64) -> bool {
    f >= f_obs * (1.0 - 1e-9) - 1e-300
}

struct Block {
    done: u64,
    ge: u64,
    null: Null,
}

fn run_block(test: &Test, seed: u64, stream: u64, n: u64, upper: f64, cancel: &Cancel) -> Block {
    let mut rng = Gen::seed_from_u64(splitmix(
        seed ^ splitmix(stream.wrapping_add(0x5851_F42D_4C95_7F2D)),
    ));
    let f_obs = test.f_obs();
    let mut out = Block {
        done: 0,
        ge: 0,
        null: Null::new(upper),
    };
    match test {
        Test::Between(t) if t.one_factor => {
            // Groups as bit masks over the units (`deal`); F from the group sums.
            let counts: Vec<usize> = t.counts.iter().map(|&c| c as usize).collect();
            let mut dealer = Dealer::new(&t.y, &counts);
            let nn = t.y.len() as f64;
            let mean = t.y.iter().sum::<f64>() / nn;
            let sst: f64 = t.y.iter().map(|x| (x - mean) * (x - mean)).sum();
            for i in 0..n {
                if i % 256 == 0 && cancel.is_cancelled() {
                    break;
                }
                dealer.deal(&mut rng);
                let mut ssb = 0.0;
                for (s, &c) in dealer.sums.iter().zip(&t.counts) {
                    if c > 0.0 {
                        ssb += (s - c * mean).powi(2) / c;
                    }
                }
                let f = (ssb / t.df) / ((sst - ssb) / t.df_e);
                out.ge += u64::from(tie(f, f_obs));
                out.null.add(f);
                out.done += 1;
            }
        }
        Test::Between(t) => {
            let mut r = t.resid.clone();
            let mut sums = vec![0.0; t.counts.len()];
            for i in 0..n {
                if i % 256 == 0 && cancel.is_cancelled() {
                    break;
                }
                shuffle(&mut r, &mut rng);
                let f = t.stat(&r, &mut sums);
                out.ge += u64::from(tie(f, f_obs));
                out.null.add(f);
                out.done += 1;
            }
        }
        Test::Within(t) => {
            let mut y = t.y.clone();
            let c = y.ncols();
            let mut row = vec![0.0; c];
            for i in 0..n {
                if i % 64 == 0 && cancel.is_cancelled() {
                    break;
                }
                for s in 0..y.nrows() {
                    for j in 0..c {
                        row[j] = t.y[(s, j)];
                    }
                    shuffle(&mut row, &mut rng);
                    for j in 0..c {
                        y[(s, j)] = row[j];
                    }
                }
                let f = t.stat(&y);
                out.ge += u64::from(tie(f, f_obs));
                out.null.add(f);
                out.done += 1;
            }
        }
    }
    out
}

fn shuffle(v: &mut [f64], rng: &mut Gen) {
    for i in (1..v.len()).rev() {
        let j = below(rng, i + 1);
        v.swap(i, j);
    }
}

/// A uniform index in 0..n (Lemire's multiply-and-reject on 32 bits when n fits).
fn below(rng: &mut Gen, n: usize) -> usize {
    if n <= u32::MAX as usize {
        rng.random_range(0..n as u32) as usize
    } else {
        rng.random_range(0..n)
    }
}

fn splitmix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Runs `draws` Monte Carlo draws (or every assignment when there are at most `draws`) on
/// `threads` threads; `progress(done, total)` is called between waves of blocks.
pub fn run(
    test: &Test,
    draws: u64,
    seed: u64,
    threads: usize,
    upper: f64,
    cancel: &Cancel,
    progress: &mut dyn FnMut(u64, u64),
) -> Outcome {
    if let Some(total) = test.assignments().filter(|&a| a <= draws as u128) {
        return exact(test, total as u64, upper, cancel, progress);
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build();
    let blocks = draws.div_ceil(BLOCK);
    let wave = (6 * threads.max(1)) as u64;
    let mut out = Outcome {
        done: 0,
        ge: 0,
        exact: false,
        partial: false,
        null: Null::new(upper),
    };
    let mut start = 0;
    while start < blocks {
        let end = (start + wave).min(blocks);
        let work = |b: u64| {
            let n = BLOCK.min(draws - b * BLOCK);
            run_block(test, seed, b, n, upper, cancel)
        };
        let results: Vec<Block> = match &pool {
            Ok(p) => p.install(|| (start..end).into_par_iter().map(work).collect()),
            Err(_) => (start..end).map(work).collect(),
        };
        for r in &results {
            out.done += r.done;
            out.ge += r.ge;
            out.null.merge(&r.null);
        }
        progress(out.done, draws);
        if cancel.is_cancelled() {
            out.partial = true;
            break;
        }
        start = end;
    }
    out
}

fn exact(
    test: &Test,
    total: u64,
    upper: f64,
    cancel: &Cancel,
    progress: &mut dyn FnMut(u64, u64),
) -> Outcome {
    let f_obs = test.f_obs();
    let mut out = Outcome {
        done: 0,
        ge: 0,
        exact: true,
        partial: false,
        null: Null::new(upper),
    };
    let visit = |f: f64, out: &mut Outcome| {
        out.ge += u64::from(tie(f, f_obs));
        out.null.add(f);
        out.done += 1;
    };
    match test {
        Test::Between(t) => {
            // Every distinct assignment of the group labels (multiset permutations).
            let mut labels = t.cell.clone();
            labels.sort_unstable();
            let mut sums = vec![0.0; t.counts.len()];
            loop {
                // Units keep their values; labels move.
                let f = t.stat_labels(&labels, &mut sums);
                visit(f, &mut out);
                if out.done % 4096 == 0 && cancel.is_cancelled() {
                    out.partial = true;
                    break;
                }
                if !next_permutation(&mut labels) {
                    break;
                }
            }
        }
        Test::Within(t) => {
            let c = t.y.ncols();
            let perms = all_perms(c);
            let n = t.y.nrows();
            let mut idx = vec![0usize; n];
            let mut y = t.y.clone();
            loop {
                for s in 0..n {
                    let p = &perms[idx[s]];
                    for j in 0..c {
                        y[(s, j)] = t.y[(s, p[j])];
                    }
                }
                visit(t.stat(&y), &mut out);
                if out.done % 1024 == 0 && cancel.is_cancelled() {
                    out.partial = true;
                    break;
                }
                // Odometer over the subjects' permutations.
                let mut s = 0;
                while s < n {
                    idx[s] += 1;
                    if idx[s] < perms.len() {
                        break;
                    }
                    idx[s] = 0;
                    s += 1;
                }
                if s == n {
                    break;
                }
            }
        }
    }
    progress(out.done, total);
    out
}

fn next_permutation(v: &mut [usize]) -> bool {
    if v.len() < 2 {
        return false;
    }
    let mut i = v.len() - 1;
    while i > 0 && v[i - 1] >= v[i] {
        i -= 1;
    }
    if i == 0 {
        return false;
    }
    let mut j = v.len() - 1;
    while v[j] <= v[i - 1] {
        j -= 1;
    }
    v.swap(i - 1, j);
    v[i..].reverse();
    true
}

fn all_perms(c: usize) -> Vec<Vec<usize>> {
    let mut p: Vec<usize> = (0..c).collect();
    let mut out = vec![p.clone()];
    while next_permutation(&mut p) {
        out.push(p.clone());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_one_way_by_hand() {
        // Groups {1, 2} and {3, 4}: 4!/(2!2!) = 6 assignments; the observed split (and its
        // mirror, which has the same F) is the most extreme: p = 2/6 (hand count).
        let t = Test::Between(
            BetweenTest::new(
                &[2],
                &[0, 0, 1, 1],
                &[1.0, 2.0, 3.0, 4.0],
                &[0],
                SsType::Two,
            )
            .unwrap(),
        );
        assert_eq!(t.assignments(), Some(6));
        let o = run(&t, 100, 1, 2, 50.0, &Cancel::default(), &mut |_, _| {});
        assert!(o.exact);
        assert_eq!((o.ge, o.done), (2, 6));
        assert!((o.p() - 1.0 / 3.0).abs() < 1e-15);
    }

    #[test]
    fn same_seed_same_p_with_any_threads() {
        let y: Vec<f64> = (0..40)
            .map(|i| ((i * 37) % 11) as f64 + if i < 20 { 0.8 } else { 0.0 })
            .collect();
        let cell: Vec<usize> = (0..40).map(|i| i / 20).collect();
        let t = Test::Between(BetweenTest::new(&[2], &cell, &y, &[0], SsType::Two).unwrap());
        let runs: Vec<(u64, u64)> = [1, 2, 4]
            .iter()
            .map(|&th| {
                let o = run(&t, 9_000, 42, th, 20.0, &Cancel::default(), &mut |_, _| {});
                (o.ge, o.done)
            })
            .collect();
        assert!(runs.iter().all(|r| *r == runs[0]), "{runs:?}");
        assert_eq!(runs[0].1, 9_000);
    }
}
