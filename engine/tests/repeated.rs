//! Designs with `subject`: classification, the subject × cell table and its bad input, through
//! `Session::run_cell`. Numbers are checked against outside references in
//! tests/python/test_repeated.py; here the checks are on what the user is told.

mod common;

use common::{bundle, run, texts, with_data};
use engine::ErrorKind;

/// Long layout: subjects s1…sN, groups g (between) and t1…tk (within), y from `f`.
fn long(n: usize, k: usize, groups: usize, f: impl Fn(usize, usize) -> f64) -> String {
    let mut t = String::from("id,grp,time,y\n");
    for s in 0..n {
        for j in 0..k {
            t += &format!("s{},g{},t{},{}\n", s + 1, s % groups + 1, j + 1, f(s, j));
        }
    }
    t
}

fn noisy(s: usize, j: usize) -> f64 {
    // A deterministic, non-spherical pattern: subject level, time trend, growing scatter.
    let h = ((s * 7919 + j * 104729) % 1000) as f64 / 1000.0 - 0.5;
    10.0 + (s % 5) as f64 + 0.8 * j as f64 + h * (1.0 + j as f64)
}

#[test]
fn classification_is_stated_with_its_evidence() {
    let mut s = with_data(&long(12, 4, 3, noisy));
    let out = run(&mut s, "anova y across grp, time subject id").unwrap();
    let b = bundle(&out[0]);
    assert_eq!(b["design"]["between"], serde_json::json!(["grp"]));
    assert_eq!(b["design"]["within"], serde_json::json!(["time"]));
    assert_eq!(b["design"]["subjects"], 12);
    let roles = b["design"]["roles"].as_array().unwrap();
    assert!(
        roles[0]["evidence"]
            .as_str()
            .unwrap()
            .contains("constant inside every subject (4, 4, 4")
    );
    assert!(
        roles[1]["evidence"]
            .as_str()
            .unwrap()
            .contains("changes inside 12 of 12 subjects")
    );
    let effects = texts(b, "anova", "effect");
    assert_eq!(effects, ["grp", "time", "grp × time"]);
    let text = out[0].data["text/plain"].as_str().unwrap();
    assert!(text.contains("Mixed ANOVA"), "{text}");
    assert!(b["report"].as_str().unwrap().contains("ηG²"));
    assert!(out[0].data.contains_key("image/svg+xml"));
}

#[test]
fn two_level_within_factor_is_spherical_by_construction() {
    let mut s = with_data(&long(8, 2, 1, noisy));
    let out = run(&mut s, "anova y across time subject id").unwrap();
    let b = bundle(&out[0]);
    assert!(b["tables"]["sphericity"].as_array().unwrap().is_empty());
    let notes = b["notes"].to_string();
    assert!(notes.contains("spherical by construction"), "{notes}");
    assert_eq!(b["tables"]["anova"][0]["correction"], "none");
}

#[test]
fn subject_column_problems_are_named() {
    let mut s = with_data(&long(6, 3, 1, noisy));
    let e = run(&mut s, "anova y across time subject idd").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DataError);
    assert_eq!(e.suggestion.as_deref(), Some("id"));
    let e = run(&mut s, "anova y across time subject id where id = \"s1\"").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(
        e.message.contains("1 subject in the rows used"),
        "{}",
        e.message
    );
    let e = run(&mut s, "anova y across time subject time").unwrap_err();
    assert!(e.message.contains("both as a factor and as the subject"));
}

#[test]
fn a_within_factor_with_one_level_is_refused() {
    let mut s = with_data(&long(6, 3, 1, noisy));
    let e = run(&mut s, "anova y across time subject id where time = \"t2\"").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(e.message.contains("single level (\"t2\")"), "{}", e.message);
}

#[test]
fn same_id_under_two_groups_is_a_design_error_naming_it() {
    let mut text = long(8, 3, 2, noisy);
    // s3 is in g1; one of its rows claims g2.
    text = text.replacen("s3,g1,t2", "s3,g2,t2", 1);
    let mut s = with_data(&text);
    let e = run(&mut s, "anova y across grp, time subject id").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(
        e.message.contains("\"grp\" is neither between nor within"),
        "{}",
        e.message
    );
    assert!(e.message.contains("(s3)"), "{}", e.message);
}

#[test]
fn incomplete_subjects_are_dropped_and_named_duplicates_averaged_or_refused() {
    // s5 has no value at t3; s2 has a second value at t1.
    let mut text: String = long(8, 3, 1, noisy)
        .lines()
        .map(|l| {
            if l.starts_with("s5,g1,t3,") {
                "s5,g1,t3,".to_string()
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    text += "\ns2,g1,t1,11.5\n";
    let mut s = with_data(&text);
    let out = run(&mut s, "anova y across time subject id").unwrap();
    let b = bundle(&out[0]);
    let notes = b["notes"].to_string();
    assert!(
        notes.contains("1 subject set aside for a missing within cell (s5)"),
        "{notes}"
    );
    assert!(
        notes.contains("held more than one value") && notes.contains("s2 at t1 (2 values)"),
        "{notes}"
    );
    assert_eq!(b["design"]["subjects"], 7);
    let e = run(
        &mut s,
        "anova y across time subject id with duplicates error",
    )
    .unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(e.message.contains("s2 at t1 (2 values)"), "{}", e.message);
}

#[test]
fn too_few_subjects_for_mauchly_still_gives_epsilon() {
    // 4 subjects, 6 levels: 5 contrasts but 3 error df.
    let mut s = with_data(&long(4, 6, 1, noisy));
    let out = run(&mut s, "anova y across time subject id").unwrap();
    let b = bundle(&out[0]);
    let sph = &b["tables"]["sphericity"][0];
    assert!(sph["w"].is_null() && sph["p"].is_null());
    assert!(sph["gg_epsilon"].as_f64().unwrap() > 0.0);
    assert!(
        b["notes"]
            .to_string()
            .contains("Mauchly's test needs at least")
    );
    assert!(!out[0].data["text/plain"].as_str().unwrap().contains("NaN"));
}

#[test]
fn a_constant_measure_gives_notes_not_nan() {
    // Every subject has the same profile shifted: the contrasts do not vary at all.
    let mut s = with_data(&long(6, 3, 1, |s, j| s as f64 + [1.0, 3.0, 2.0][j]));
    let out = run(&mut s, "anova y across time subject id").unwrap();
    let b = bundle(&out[0]);
    let text = out[0].data["text/plain"].as_str().unwrap();
    assert!(!text.contains("NaN") && !b.to_string().contains("NaN"));
    let notes = b["notes"].to_string();
    assert!(
        notes.contains("has no variation, so F is undefined"),
        "{notes}"
    );
    assert!(
        notes.contains("ε and Mauchly's test are undefined"),
        "{notes}"
    );
    assert!(b["tables"]["anova"][0]["f"].is_null());
}

#[test]
fn options_are_checked() {
    let mut s = with_data(&long(6, 3, 1, noisy));
    let e = run(&mut s, "anova y across time subject id with correction ggg").unwrap_err();
    assert_eq!(e.suggestion.as_deref(), Some("gg"));
    let e = run(&mut s, "anova y across time subject id with ss 4").unwrap_err();
    assert!(e.message.contains("`ss` is 2 or 3"));
    let e = run(&mut s, "plot profile y across time").unwrap_err();
    assert!(e.message.contains("needs `subject COLUMN`"));
    let out = run(&mut s, "anova y across time subject id with correction gg").unwrap();
    assert_eq!(
        bundle(&out[0])["tables"]["anova"][0]["correction"],
        "greenhouse-geisser"
    );
}

#[test]
fn describe_and_plot_work_over_subjects() {
    let mut s = with_data(&long(6, 3, 2, noisy));
    let out = run(&mut s, "describe y across grp, time subject id").unwrap();
    let cells = bundle(&out[0])["tables"]["cells"]
        .as_array()
        .unwrap()
        .clone();
    assert_eq!(cells.len(), 6);
    assert_eq!(cells[0]["n"], 3);
    let out = run(&mut s, "plot profile y across grp, time subject id").unwrap();
    let svg = out[0].data["image/svg+xml"].as_str().unwrap();
    assert!(svg.contains("g1") && svg.contains("t3"));
    let out = run(&mut s, "plot means y across time subject id").unwrap();
    assert!(out[0].data.contains_key("image/svg+xml"));
}

#[test]
fn unpivot_feeds_the_analysis() {
    let mut s =
        with_data("plant,shade,w1,w2,w3\np1,a,1,2,3.5\np2,a,2,2.5,4\np3,b,1,3,3\np4,b,0.5,2,5\n");
    let out = run(&mut s, "unpivot d columns w1, w2, w3 into week, h as long\nanova h across shade, week subject plant").unwrap();
    let b = bundle(&out[1]);
    assert_eq!(b["design"]["within"], serde_json::json!(["week"]));
    assert_eq!(b["provenance"]["rows_used"], 12);
    let e = run(&mut s, "unpivot d columns w1, shade into week, h as l2").unwrap_err();
    assert!(e.message.contains("not numeric"));
}
