//! Whole statements through `Session::run_cell`: bad input gets a clear error naming the thing,
//! degenerate designs get notes, and names render as text.

use engine::{Cancel, CellError, ErrorKind, Output, Session};
use std::path::PathBuf;

fn dir() -> PathBuf {
    let d = std::env::temp_dir().join(format!("partita-session-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn file(name: &str, text: &str) -> String {
    let p = dir().join(name);
    std::fs::write(&p, text).unwrap();
    p.display().to_string()
}

fn run(s: &mut Session, src: &str) -> Result<Vec<Output>, CellError> {
    let mut out = Vec::new();
    s.run_cell(src, &Cancel::default(), &mut out).map(|_| out)
}

fn with_data(text: &str) -> Session {
    let mut s = Session::new();
    static N: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let n = N.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
    let p = file(&format!("d{n}.csv"), text);
    run(&mut s, &format!("read \"{p}\" as d")).unwrap();
    s
}

fn bundle(o: &Output) -> &serde_json::Value {
    &o.data["application/vnd.partita.result+json"]
}

#[test]
fn missing_file_names_the_path_and_the_folder() {
    let mut s = Session::new();
    let e = run(&mut s, "read \"no/such.csv\" as t").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DataError);
    assert_eq!(
        e.message,
        "cannot read \"no/such.csv\": there is no such file"
    );
    let cwd = std::env::current_dir().unwrap();
    assert_eq!(
        e.notes[0],
        format!("looked for {}", cwd.join("no/such.csv").display())
    );
    // With a notebook folder, relative paths start there, and the note says where it looked.
    let mut nb = Session::with_base_dir(dir());
    let e = run(&mut nb, "read \"no/such.csv\" as t").unwrap_err();
    assert_eq!(
        e.notes[0],
        format!(
            "looked for {}",
            std::path::absolute(dir().join("no/such.csv"))
                .unwrap()
                .display()
        )
    );
    let d = dir().display().to_string();
    let e = run(&mut s, &format!("read \"{d}\" as t")).unwrap_err();
    assert!(e.message.contains("is a folder"), "{}", e.message);
}

#[test]
fn non_numeric_response_gives_first_value_and_line() {
    let mut s = with_data("g,y\na,1\na,2\nb,x3\nb,4\n");
    let e = run(&mut s, "anova y across g").unwrap_err();
    assert_eq!(e.message, "the response \"y\" is not numeric");
    assert!(e.notes[0].contains("\"x3\" on line 4"), "{:?}", e.notes);
}

#[test]
fn one_level_is_refused_and_a_single_observation_is_noted() {
    let mut s = with_data("g,y\na,1\na,2\na,4\n");
    let e = run(&mut s, "anova y across g").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DesignError);
    assert!(e.message.contains("at least two"), "{}", e.message);
    let mut s = with_data("g,y\na,1\na,2\na,4\nb,7\n");
    let out = run(&mut s, "anova y across g").unwrap();
    let notes = bundle(&out[0])["notes"].to_string();
    assert!(notes.contains("single observation"), "{notes}");
}

#[test]
fn all_values_equal_is_an_error_not_nan() {
    let mut s = with_data("g,y\na,2\na,2\nb,2\nb,2\n");
    let e = run(&mut s, "anova y across g").unwrap_err();
    assert!(e.message.contains("no variation"), "{}", e.message);
    let mut s = with_data("g,y\na,1\na,1\nb,2\nb,2\n");
    let out = run(&mut s, "anova y across g").unwrap();
    let text = serde_json::to_string(&out[0].data).unwrap();
    assert!(
        !text.contains("NaN") && !text.contains("Infinity"),
        "NaN or Infinity in the output"
    );
    assert_eq!(
        bundle(&out[0])["tables"]["anova"][0]["f"],
        serde_json::Value::Null
    );
}

#[test]
fn unknown_names_get_suggestions() {
    let mut s = with_data("feed,weight\na,1\na,2\nb,3\nb,5\n");
    let e = run(&mut s, "anova wieght across feed").unwrap_err();
    assert_eq!(e.suggestion.as_deref(), Some("weight"));
    assert!(e.span.is_some());
    let e = run(&mut s, "anova weight across feed in dd").unwrap_err();
    assert_eq!(e.suggestion.as_deref(), Some("d"));
    let e = run(&mut s, "describe weight across feed where feed = \"c\"").unwrap_err();
    assert!(e.notes[0].contains("levels: a, b"));
    let e = run(&mut s, "describe weight across feed where feed < \"b\"").unwrap_err();
    assert!(e.message.contains("is a factor"));
    let e = run(&mut s, "describe weight across feed where weight > 100").unwrap_err();
    assert!(e.message.contains("keeps no rows"));
    let e = run(&mut s, "anova weight across feed with levle 0.9").unwrap_err();
    assert_eq!(e.kind, ErrorKind::InputError);
    let e = run(&mut s, "describe weight across feed with levle 0.9").unwrap_err();
    assert_eq!(e.suggestion.as_deref(), Some("level"));
}

#[test]
fn numeric_codes_as_factor_need_the_read_option() {
    let p = file("dose.csv", "dose,y\n10,1\n10,2\n20,3\n20,5\n");
    let mut s = Session::new();
    run(&mut s, &format!("read \"{p}\" as t")).unwrap();
    let e = run(&mut s, "anova y across dose").unwrap_err();
    assert!(e.notes[0].contains("with factor dose"), "{:?}", e.notes);
    run(&mut s, &format!("read \"{p}\" as t with factor dose")).unwrap();
    assert!(run(&mut s, "anova y across dose").is_ok());
}

#[test]
fn script_names_render_as_text() {
    let mut s = with_data("\"<script>alert(1)</script>\",y\n<b>a</b>,1\n<b>a</b>,2\nb,3\nb,5\n");
    let out = run(&mut s, "anova y across \"<script>alert(1)</script>\"").unwrap();
    let html = out[0].data["text/html"].as_str().unwrap();
    assert!(!html.contains("<script>alert"), "unescaped");
    assert!(!html.contains("<b>a</b>"));
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
}

#[test]
fn outputs_stream_and_the_last_is_the_result() {
    let mut s = with_data("g,y\na,1\na,2\nb,3\nb,5\n");
    let mut out = Vec::new();
    let e = s.run_cell(
        "describe y across g\nplot points y across g\nanova y across nope",
        &Cancel::default(),
        &mut out,
    );
    assert!(e.is_err());
    assert_eq!(out.len(), 2);
    assert!(out.iter().all(|o| !o.is_result));
    let out = run(&mut s, "describe y across g\nanova y across g").unwrap();
    assert_eq!(
        out.iter().map(|o| o.is_result).collect::<Vec<_>>(),
        [false, true]
    );
    let b = bundle(&out[1]);
    assert_eq!(b["schema"], "partita.result/1");
    assert_eq!(b["command"], "anova");
    assert_eq!(b["tables"]["anova"][1]["effect"], "Residual");
    assert_eq!(b["tables"]["anova"][2]["effect"], "Total");
    assert_eq!(b["provenance"]["rows_used"], 4);
    assert!(
        out[1].data["image/svg+xml"]
            .as_str()
            .unwrap()
            .starts_with("<svg")
    );
}

#[test]
fn cancelled_before_a_statement_is_interrupted() {
    let mut s = Session::new();
    let c = Cancel::default();
    c.cancel();
    let e = s.run_cell("help", &c, &mut Vec::new()).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Interrupted);
}

#[test]
fn completion_offers_columns_of_the_dataset_in_context() {
    let s = with_data("feed,weight\na,1\nb,2\n");
    let c = s.complete("anova we", 8);
    assert_eq!(c.matches, ["weight"]);
    assert_eq!((c.cursor_start, c.cursor_end), (6, 8));
    let c = s.complete("anova weight across f", 21);
    assert_eq!(c.matches, ["feed"]);
    assert_eq!(s.complete("plot b", 6).matches, ["box"]);
    assert_eq!(
        s.complete("read \"x\" as t with fa", 21).matches,
        ["factor"]
    );
    assert_eq!(
        s.complete("anova weight across feed in ", 28).matches,
        ["d"]
    );
    assert!(
        s.complete("pa", 2).matches.is_empty(),
        "the test-only verb is not offered"
    );
    // Cursor positions count characters, not bytes.
    let c = s.complete("label d.\"é\" x\nanova we", 22);
    assert_eq!((c.cursor_start, c.cursor_end), (20, 22));
}

#[test]
fn inspection_of_verbs_datasets_and_columns() {
    let s = with_data("feed,weight\na,1\nb,2\n");
    assert!(
        s.inspect("anova", 2)
            .unwrap()
            .plain
            .starts_with("anova Y across F")
    );
    assert!(
        s.inspect("show d", 6)
            .unwrap()
            .plain
            .starts_with("dataset d: 2 rows")
    );
    assert_eq!(
        s.inspect("d.feed", 4).unwrap().plain,
        "d.feed: factor, 2 levels: a, b"
    );
    assert_eq!(
        s.inspect("weight", 1).unwrap().plain,
        "d.weight: numeric, range 1 to 2"
    );
    assert!(s.inspect("   ", 1).is_none());
}

#[test]
fn power_bad_input_is_named() {
    let mut s = Session::new();
    for (src, needle) in [
        ("power groups 3 with f 0, n 20", "`f` must be above 0"),
        (
            "power groups 3 with f 0.25, n 20, alpha 1.5",
            "`alpha` must be between 0 and 1",
        ),
        (
            "power groups 3 with f 0.25, power 0.01",
            "`power` must be between alpha",
        ),
        ("power groups 1 with f 0.25, n 20", "from 2 to 1000"),
        (
            "power groups 3 with f 0.25, n 1",
            "`n` must be a whole number from 2",
        ),
        (
            "power groups 3 with f 0.001, power 0.99",
            "not reached with n ≤ 100000",
        ),
        ("power groups 3 with f 0.25", "give either `n N`"),
        ("power groups 3 with f 0.25, eta2 0.1, n 5", "one way"),
        (
            "power groups 3 with means (1, 2), sd 1, n 5",
            "2 means are given for 3 groups",
        ),
        ("power within 3 with f 0.25, n 10", "needs `rho R`"),
        (
            "power within 3 with f 0.25, n 10, rho 0.5, epsilon 0.2",
            "`epsilon` must be between",
        ),
    ] {
        let e = run(&mut s, src).unwrap_err();
        assert_eq!(e.kind, ErrorKind::InputError, "{src}");
        assert!(e.message.contains(needle), "{src}: {}", e.message);
    }
}

#[test]
fn power_answers_with_table_sentence_and_figure() {
    let mut s = Session::new();
    let out = run(&mut s, "power groups 3 with f 0.25, power 0.8").unwrap();
    let row = &bundle(&out[0])["tables"]["power"][0];
    assert_eq!(row["target_power"], 0.8);
    assert!(row["power"].as_f64().unwrap() >= 0.8);
    assert_eq!(row["total_n"], row["n_per_group"].as_u64().unwrap() * 3);
    assert!(
        out[0].data["text/markdown"]
            .as_str()
            .unwrap()
            .starts_with("With 3 groups and f = 0.25 at α = .05, ")
    );
    assert!(
        out[0].data["image/svg+xml"]
            .as_str()
            .unwrap()
            .contains("n per group")
    );
}
