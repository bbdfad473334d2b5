//! Factorial ANOVA, Welch and `check` through `Session::run_cell`: bad input and what the user
//! is told. Numbers are checked against statsmodels and scipy in tests/python/test_factorial.py.

mod common;

use common::{bundle, run, texts, with_data};
use engine::ErrorKind;

const TWO_BY_TWO: &str = "a,b,y\nx,p,1\nx,p,2\nx,q,3\nx,q,5\ny,p,4\ny,p,4.5\ny,q,8\ny,q,9\ny,q,7\n";

#[test]
fn factorial_answers_with_table_sentence_and_interaction_figure() {
    let mut s = with_data(TWO_BY_TWO);
    let out = run(&mut s, "anova y across a, b").unwrap();
    let b = bundle(&out[0]);
    let effects = texts(b, "anova", "effect");
    assert_eq!(effects, ["a", "b", "a × b", "Residual", "Total"]);
    assert_eq!(b["design"]["ss_type"], 2);
    let report = b["report"].as_str().unwrap();
    assert!(
        report.starts_with("a: F(1, 5) = ") && report.contains("a × b: F(1, 5)"),
        "{report}"
    );
    let svg = out[0].data["image/svg+xml"].as_str().unwrap();
    assert!(
        svg.contains(">\np\n<") && svg.contains(">\nq\n<"),
        "legend names the levels of b"
    );
    let html = out[0].data["text/html"].as_str().unwrap();
    assert!(html.contains("type 2"));
    let out = run(&mut s, "anova y across a, b with ss 3").unwrap();
    assert!(
        out[0].data["text/html"]
            .as_str()
            .unwrap()
            .contains("type 3")
    );
}

#[test]
fn empty_cells_are_named() {
    let mut s = with_data("a,b,y\nx,p,1\nx,p,2\nx,q,3\ny,p,4\ny,p,5\n");
    let e = run(&mut s, "anova y across a, b").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(
        e.message
            .contains("1 combination of a × b has no observations: y / q"),
        "{}",
        e.message
    );
}

#[test]
fn a_factor_left_with_one_level_by_where_is_refused() {
    let mut s = with_data(TWO_BY_TWO);
    let e = run(&mut s, "anova y across a, b where a = \"x\"").unwrap_err();
    assert!(
        e.message.contains("\"a\" has a single level (\"x\")"),
        "{}",
        e.message
    );
    let e = run(&mut s, "anova y across a, b where y > 100").unwrap_err();
    assert!(e.message.contains("keeps no rows"), "{}", e.message);
    let e = run(&mut s, "check y across a, b where a = \"y\"").unwrap_err();
    assert!(e.message.contains("single level"), "{}", e.message);
}

#[test]
fn no_residual_df_and_zero_residual_variance() {
    let mut s = with_data("a,b,y\nx,p,1\nx,q,3\ny,p,4\ny,q,8\n");
    let e = run(&mut s, "anova y across a, b").unwrap_err();
    assert!(
        e.message.contains("leave no residual degrees of freedom"),
        "{}",
        e.message
    );
    let mut s = with_data("a,b,y\nx,p,1\nx,p,1\nx,q,3\nx,q,3\ny,p,4\ny,p,4\ny,q,8\ny,q,8\n");
    let out = run(&mut s, "anova y across a, b").unwrap();
    let b = bundle(&out[0]);
    assert!(b["tables"]["anova"][0]["f"].is_null());
    assert!(b["notes"].to_string().contains("residual variance is zero"));
    assert!(!out[0].data["text/plain"].as_str().unwrap().contains("NaN"));
}

#[test]
fn welch_is_for_one_factor_and_needs_spread_in_each_group() {
    let mut s = with_data(TWO_BY_TWO);
    let e = run(&mut s, "anova y across a, b with welch").unwrap_err();
    assert!(e.message.contains("Welch's test is for one factor"));
    let out = run(&mut s, "anova y across a with welch").unwrap();
    let b = bundle(&out[0]);
    assert!(b["tables"]["welch"][0]["df_error"].as_f64().unwrap() > 0.0);
    assert!(b["report"].as_str().unwrap().contains("; Welch: F(1, "));
    let mut s = with_data("g,y\na,1\na,1\nb,2\nb,3\n");
    let e = run(&mut s, "anova y across g with welch").unwrap_err();
    assert!(e.message.contains("group a has no spread"), "{}", e.message);
    let e = run(&mut s, "anova y across g with welch 2").unwrap_err();
    assert!(e.message.contains("takes no value"));
}

#[test]
fn check_gives_tests_figures_and_considered_notes() {
    let mut text = String::from("g,y\n");
    for i in 0..30 {
        text += &format!("a,{}\n", 10.0 + (i % 5) as f64 * 0.1);
        text += &format!(
            "b,{}\n",
            10.0 + (i % 5) as f64 * 3.0 + if i == 0 { 40.0 } else { 0.0 }
        );
    }
    let mut s = with_data(&text);
    let out = run(&mut s, "check y across g").unwrap();
    let b = bundle(&out[0]);
    let checks = texts(b, "checks", "check");
    assert_eq!(checks, ["brown_forsythe", "levene", "shapiro_wilk"]);
    let notes = b["notes"].to_string();
    assert!(notes.contains("spread differs across g"), "{notes}");
    assert!(notes.contains("depart from a normal shape"), "{notes}");
    assert!(notes.contains("cannot show that an assumption holds"));
    let svg = out[0].data["image/svg+xml"].as_str().unwrap();
    assert!(svg.contains("normal quantile") && svg.contains("fitted"));
    let out = run(&mut s, "plot qq y across g").unwrap();
    assert!(
        out[0].data["image/svg+xml"]
            .as_str()
            .unwrap()
            .contains("normal quantile")
    );
    let out = run(&mut s, "plot residuals y across g").unwrap();
    assert!(
        out[0].data["image/svg+xml"]
            .as_str()
            .unwrap()
            .contains("fitted")
    );
    let e = run(&mut s, "check y across g with level 0.9").unwrap_err();
    assert!(
        e.message.contains("`check` has no option `level`"),
        "{}",
        e.message
    );
}

#[test]
fn shapiro_wilk_outside_its_range_says_so() {
    let mut text = String::from("g,y\n");
    for i in 0..5002 {
        text += &format!(
            "{},{}\n",
            if i % 2 == 0 { "a" } else { "b" },
            (i * 7919 % 1000) as f64 / 10.0
        );
    }
    let mut s = with_data(&text);
    let out = run(&mut s, "check y across g").unwrap();
    assert!(
        bundle(&out[0])["notes"]
            .to_string()
            .contains("validated for 3 to 5,000 values")
    );
    let mut s = with_data("g,y\na,1\nb,2\n");
    let out = run(&mut s, "check y across g").unwrap();
    let notes = bundle(&out[0])["notes"].to_string();
    assert!(
        notes.contains("Shapiro–Wilk: undefined for 2 residuals"),
        "{notes}"
    );
    assert!(notes.contains("Brown–Forsythe: undefined here"), "{notes}");
}
