//! Times the randomisation test alone (no kernel): `cargo run --release -p partita-engine
//! --example perm_speed [threads]`. Used to tune the inner loop; the benchmark of record is
//! tests/bench/bench.py.
use engine::models::linear::SsType;
use engine::models::permutation::{BetweenTest, Test, run};

fn main() {
    let threads: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(1);
    let n = 1000;
    let y: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1000) as f64 / 100.0).collect();
    let cell: Vec<usize> = (0..n).map(|i| i % 4).collect();
    let t = Test::Between(BetweenTest::new(&[4], &cell, &y, &[0], SsType::Two).unwrap());
    let t0 = std::time::Instant::now();
    let o = run(
        &t,
        100_000,
        1,
        threads,
        10.0,
        &engine::Cancel::default(),
        &mut |_, _| {},
    );
    println!(
        "{} draws in {:?} on {threads} thread(s), p = {}",
        o.done,
        t0.elapsed(),
        o.p()
    );
}
