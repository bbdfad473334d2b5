//! `compare` through `Session::run_cell`: bad input and what the user is told. Numbers are
//! checked against scipy and statsmodels in tests/python/test_compare.py.

mod common;

use common::{bundle, run, with_data};
use engine::ErrorKind;

const THREE: &str = "g,y\na,1\na,2\na,3\nb,4\nb,5\nb,6.5\nc,9\nc,10\nc,12\n";

#[test]
fn unknown_method_lists_the_methods() {
    let mut s = with_data(THREE);
    let e = run(&mut s, "compare y across g with method tukye").unwrap_err();
    assert_eq!(e.kind, ErrorKind::InputError);
    assert_eq!(e.suggestion.as_deref(), Some("tukey"));
    assert!(e.notes[0].contains("tukey, games-howell, holm, bonferroni, fdr, dunnett"));
}

#[test]
fn control_level_must_exist_and_belongs_to_dunnett() {
    let mut s = with_data(THREE);
    let e = run(
        &mut s,
        "compare y across g with method dunnett, control \"aa\"",
    )
    .unwrap_err();
    assert!(e.message.contains("no level \"aa\""), "{}", e.message);
    assert_eq!(e.suggestion.as_deref(), Some("a"));
    assert!(e.notes.iter().any(|n| n == "levels: a, b, c"));
    let e = run(&mut s, "compare y across g with method dunnett").unwrap_err();
    assert!(e.message.contains("needs the control level"));
    let e = run(&mut s, "compare y across g with method holm, control \"a\"").unwrap_err();
    assert!(e.message.contains("`control` belongs to `method dunnett`"));
    let out = run(&mut s, "compare y across g with control \"a\"").unwrap();
    assert_eq!(bundle(&out[0])["design"]["method"], "dunnett");
}

#[test]
fn games_howell_with_a_single_observation_says_why() {
    let mut s = with_data("g,y\na,1\na,2\nb,4\nc,9\nc,10\n");
    let e = run(&mut s, "compare y across g with method games-howell").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(
        e.message.contains("level b has a single observation"),
        "{}",
        e.message
    );
}

#[test]
fn two_levels_are_answered_with_a_note() {
    let mut s = with_data("g,y\na,1\na,2\na,3\nb,4\nb,5\nb,7\n");
    let out = run(&mut s, "compare y across g").unwrap();
    let b = bundle(&out[0]);
    assert_eq!(b["tables"]["pairs"].as_array().unwrap().len(), 1);
    assert!(
        b["notes"]
            .to_string()
            .contains("already is this comparison")
    );
}

#[test]
fn clause_and_factor_misuse_is_explained() {
    let mut s =
        with_data("g,h,y\na,x,1\na,y,2\nb,x,4\nb,y,5\na,x,1.5\nb,y,5.5\na,y,2.5\nb,x,4.5\n");
    let e = run(&mut s, "compare y across g, h").unwrap_err();
    assert!(
        e.notes[0].contains("compare y across g by h"),
        "{:?}",
        e.notes
    );
    let e = run(&mut s, "anova y across g by h").unwrap_err();
    assert!(e.message.contains("`by` belongs to `compare`"));
    let e = run(&mut s, "compare y across g by g").unwrap_err();
    assert!(e.message.contains("names the factor being compared"));
    let out = run(&mut s, "compare y across g by h").unwrap();
    assert_eq!(
        bundle(&out[0])["tables"]["pairs"].as_array().unwrap().len(),
        2
    );
}

#[test]
fn within_subject_levels_take_paired_tests_only() {
    let mut text = String::from("id,t,y\n");
    for s in 0..6 {
        for (j, t) in ["t1", "t2", "t3"].iter().enumerate() {
            text += &format!(
                "s{s},{t},{}\n",
                s as f64 + j as f64 * 0.5 + ((s * 3 + j) % 4) as f64 * 0.1
            );
        }
    }
    let mut s = with_data(&text);
    let e = run(&mut s, "compare y across t subject id with method tukey").unwrap_err();
    assert!(e.message.contains("paired t tests"), "{}", e.message);
    let out = run(&mut s, "compare y across t subject id").unwrap();
    let b = bundle(&out[0]);
    assert_eq!(b["design"]["paired"], true);
    assert_eq!(b["tables"]["pairs"][0]["df"], 5.0);
    let html = out[0].data["text/html"].as_str().unwrap();
    assert_eq!(
        html.matches("<svg").count(),
        2,
        "differences and means figures"
    );
}
