//! One-way ANOVA against the NIST StRD certified values (tests/data/nist-anova/, public domain).
//!
//! Each file's data lines are turned into CSV text and go through the same reader as a user's
//! file (so the exact decimal shifting is exercised), then through the one-way model. The log
//! relative error LRE = −log10(|x − c| / |c|) counts correct significant digits (McCullough 1998,
//! cited from memory). Required: LRE ≥ 9 for SS, MS and F on the lower- and average-difficulty
//! sets, ≥ 3.5 on the higher ones (the floor); the LREs reached are printed.

use engine::data::ColumnData;
use engine::data::csv::{ReadOptions, parse_bytes};
use engine::models::oneway::oneway;

struct Certified {
    df_b: f64,
    ss_b: f64,
    ms_b: f64,
    f: f64,
    df_w: f64,
    ss_w: f64,
    ms_w: f64,
}

fn load(name: &str) -> (Certified, String) {
    let path = format!(
        "{}/../tests/data/nist-anova/{name}.dat",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    let nums = |line: &str| -> Vec<f64> {
        line.split_whitespace()
            .filter_map(|w| w.parse().ok())
            .collect()
    };
    let between = text
        .lines()
        .find(|l| l.starts_with("Between "))
        .expect("between line");
    let within = text
        .lines()
        .find(|l| l.starts_with("Within "))
        .expect("within line");
    let b = nums(between);
    let w = nums(within);
    let cert = Certified {
        df_b: b[0],
        ss_b: b[1],
        ms_b: b[2],
        f: b[3],
        df_w: w[0],
        ss_w: w[1],
        ms_w: w[2],
    };
    let mut csv = String::from("treatment,response\n");
    // The header says where the data are: "Data (lines A to B)".
    let range = text
        .lines()
        .find(|l| l.trim_start().starts_with("Data ") && l.contains("lines"))
        .expect("data line range");
    let r = nums(&range.replace(['(', ')'], " "));
    let (first, last) = (r[0] as usize, r[1] as usize);
    for line in text.lines().skip(first - 1).take(last + 1 - first) {
        let parts: Vec<&str> = line.split_whitespace().collect();
        assert_eq!(parts.len(), 2, "{name}: data line {line:?}");
        csv.push_str(&format!("{},{}\n", parts[0], parts[1]));
    }
    (cert, csv)
}

fn lre(x: f64, c: f64) -> f64 {
    if x == c {
        return 15.0;
    }
    (-((x - c).abs() / c.abs()).log10()).min(15.0)
}

fn check(name: &str, floor: f64) {
    let (c, csv) = load(name);
    let mut opts = ReadOptions::new();
    opts.factors = vec!["treatment".into()];
    let ds = parse_bytes(csv.as_bytes(), name, "nist", &opts).unwrap();
    let (ColumnData::Factor(g), ColumnData::Numeric(y)) =
        (&ds.columns[0].data, &ds.columns[1].data)
    else {
        panic!("column types")
    };
    let mut groups = vec![Vec::new(); g.levels.len()];
    for (i, &code) in g.codes.iter().enumerate() {
        groups[code as usize].push(y.shifted[i]);
    }
    let r = oneway("treatment", &groups).unwrap();
    let (e, w) = (&r.rows[0], &r.rows[1]);
    assert_eq!(e.df, c.df_b, "{name} df between");
    assert_eq!(w.df, c.df_w, "{name} df within");
    let l = [
        ("SS between", lre(e.ss, c.ss_b)),
        ("MS between", lre(e.ms.unwrap(), c.ms_b)),
        ("SS within", lre(w.ss, c.ss_w)),
        ("MS within", lre(w.ms.unwrap(), c.ms_w)),
        ("F", lre(e.f.unwrap(), c.f)),
    ];
    println!(
        "{name}: {}",
        l.iter()
            .map(|(k, v)| format!("{k} {v:.1}"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    for (k, v) in l {
        assert!(v >= floor, "{name} {k}: LRE {v:.2} < {floor}");
    }
}

#[test]
fn lower_difficulty_sets() {
    for n in ["SiRstv", "SmLs01", "SmLs02", "SmLs03"] {
        check(n, 9.0);
    }
}

#[test]
fn average_difficulty_sets() {
    for n in ["AtmWtAg", "SmLs04", "SmLs05", "SmLs06"] {
        check(n, 9.0);
    }
}

#[test]
fn higher_difficulty_sets() {
    for n in ["SmLs07", "SmLs08", "SmLs09"] {
        check(n, 3.5);
    }
}
