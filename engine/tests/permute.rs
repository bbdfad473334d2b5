//! `permute` and `plot null` through `Session::run_cell`: options, bad input, the partial answer
//! on interrupt. Numbers are checked in tests/python/test_permute.py.

mod common;

use common::{bundle, run, with_data};
use engine::{Cancel, ErrorKind, Output};

fn data() -> String {
    let mut t = String::from("g,y\n");
    for i in 0..30 {
        t += &format!(
            "{},{}\n",
            ["a", "b", "c"][i % 3],
            (i * 7 % 10) as f64 + (i % 3) as f64 * 0.6
        );
    }
    t
}

#[test]
fn draws_seed_and_threads_are_checked() {
    let mut s = with_data(&data());
    for (opt, says) in [
        ("draws 0", "a whole number of draws from 1 to 10000000"),
        ("draws -5", "a whole number of draws"),
        ("draws 20000000", "from 1 to 10000000"),
        ("draws 10.5", "a whole number of draws"),
        ("seed 1.5", "a whole number from 0"),
        ("seed -1", "a whole number from 0"),
        ("threads 0", "from 1 to 256"),
    ] {
        let e = run(&mut s, &format!("permute y across g with {opt}")).unwrap_err();
        assert_eq!(e.kind, ErrorKind::InputError, "{opt}");
        assert!(e.message.contains(says), "{opt}: {}", e.message);
    }
}

#[test]
fn a_drawn_seed_is_shown_and_a_given_seed_repeats() {
    let mut s = with_data(&data());
    let out = run(&mut s, "permute y across g with draws 3000").unwrap();
    let b = bundle(&out[0]);
    let seed = b["tables"]["randomisation"][0]["seed"].as_u64().unwrap();
    assert!(
        b["notes"]
            .to_string()
            .contains(&format!("add `seed {seed}`"))
    );
    let again = run(
        &mut s,
        &format!("permute y across g with draws 3000, seed {seed}"),
    )
    .unwrap();
    assert_eq!(
        bundle(&again[0])["tables"]["randomisation"][0]["p"],
        b["tables"]["randomisation"][0]["p"]
    );
    let report = b["report"].as_str().unwrap();
    assert!(report.contains("3,000 draws, 99% CI ["), "{report}");
}

#[test]
fn exact_runs_say_so_and_plot_null_draws_the_histogram() {
    let mut s = with_data("g,y\na,1\na,2.5\nb,3\nb,4.2\nc,5\nc,4.1\n");
    let out = run(&mut s, "permute y across g with draws 1000, seed 1").unwrap();
    let b = bundle(&out[0]);
    let r = &b["tables"]["randomisation"][0];
    assert_eq!(r["exact"], true);
    assert_eq!(r["draws"], 90); // 6!/(2!2!2!)
    assert!(r["p_ci_low"].is_null());
    assert!(
        b["report"]
            .as_str()
            .unwrap()
            .contains("exact: all 90 assignments")
    );
    let out = run(&mut s, "plot null y across g with draws 1000, seed 1").unwrap();
    let svg = out[0].data["image/svg+xml"].as_str().unwrap();
    assert!(svg.contains("density") && svg.contains("observed F"));
}

#[test]
fn a_design_without_residual_variation_is_refused() {
    let mut s = with_data("g,y\na,1\na,1\nb,2\nb,2\n");
    let e = run(&mut s, "permute y across g with draws 100").unwrap_err();
    assert!(e.message.contains("nothing to randomise"), "{}", e.message);
}

#[test]
fn an_interrupted_run_shows_its_partial_result_then_the_error() {
    let mut t = String::from("g,y\n");
    for i in 0..4000 {
        t += &format!(
            "{},{}\n",
            ["a", "b", "c", "d"][i % 4],
            (i * 7919 % 1000) as f64 / 100.0
        );
    }
    let mut s = with_data(&t);
    let cancel = Cancel::default();
    let c2 = cancel.clone();
    let stopper = std::thread::spawn(move || {
        std::thread::sleep(std::time::Duration::from_millis(300));
        c2.cancel();
    });
    let mut out: Vec<Output> = Vec::new();
    let e = s
        .run_cell(
            "permute y across g with draws 10000000, seed 1",
            &cancel,
            &mut out,
        )
        .unwrap_err();
    stopper.join().unwrap();
    assert_eq!(e.kind, ErrorKind::Interrupted);
    let last = out.last().expect("the partial answer");
    let r = &bundle(last)["tables"]["randomisation"][0];
    assert_eq!(r["partial"], true);
    assert!(r["draws"].as_u64().unwrap() < 10_000_000);
    assert!(
        bundle(last)["notes"][0]
            .as_str()
            .unwrap()
            .starts_with("PARTIAL")
    );
}
