//! Issue 13: inputs that once killed, hung or overwrote. Each test names the input; each must
//! be answered (a result or a clear error) in bounded time and memory, and nothing read as
//! data may change.

mod common;

use common::{run, with_data};
use engine::lang::{Completeness, MAX_NESTING, completeness, parse};
use engine::{Cancel, ErrorKind, Session};
use rand::{Rng, SeedableRng};
use std::io::Write;
use std::path::{Path, PathBuf};

fn tmp(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("partita-hardening-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d.join(name)
}

/// Every output of a run, as the bytes the kernel would send.
fn answer_bytes(out: &[engine::Output]) -> usize {
    out.iter()
        .map(|o| serde_json::to_vec(&o.data).unwrap().len())
        .sum()
}

// ---- the language -------------------------------------------------------------------------

const WORDS: &[&str] = &[
    "read", "anova", "describe", "check", "compare", "permute", "plot", "power", "help", "show",
    "levels", "label", "unpivot", "save", "across", "in", "subject", "by", "where", "with", "and",
    "or", "as", "columns", "into", "to", "LAST", "means", "box", "groups", "within", "y", "g", "h",
    "d", "f", "n", "alpha", "method", "tukey", "draws", "seed", "ss", "level", "é", "_x",
];
const PUNCT: &[&str] = &[
    ",", ".", "(", ")", "=", "!=", "<", "<=", ">", ">=", "\"", "\"a\"", "\"\\\"\"", "#", "\n",
    ",\n", " ", "-", "1", "0.5", "-2e3", "1e999", "\t", "\r\n", "\u{feff}", "→", "\\",
];

fn random_cell(rng: &mut impl Rng) -> String {
    let n = rng.random_range(0..40);
    let mut s = String::new();
    for _ in 0..n {
        match rng.random_range(0..10) {
            0..=4 => s.push_str(WORDS[rng.random_range(0..WORDS.len())]),
            5..=8 => s.push_str(PUNCT[rng.random_range(0..PUNCT.len())]),
            _ => s.push(char::from_u32(rng.random_range(0..0x3000)).unwrap_or('?')),
        }
        if rng.random_bool(0.6) {
            s.push(' ');
        }
    }
    s
}

/// A property test: whatever the text, parsing, the completeness check, completion and
/// inspection answer without panicking, and a cell that parses runs to a result or an error.
#[test]
fn random_cells_are_always_answered() {
    let mut s = with_data("y,g,h\n1,a,x\n2,b,y\n3,a,x\n4,b,y\n5,a,y\n6,b,x\n");
    let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(13);
    for _ in 0..6_000 {
        let cell = random_cell(&mut rng);
        let parsed = parse(&cell);
        let _ = completeness(&cell);
        let cursor = rng.random_range(0..=cell.chars().count());
        let _ = s.complete(&cell, cursor);
        let _ = s.inspect(&cell, cursor);
        if parsed.is_ok() && !cell.contains("save") && !cell.contains("read") {
            let mut out = Vec::new();
            let _ = s.run_cell(&cell, &Cancel::default(), &mut out);
        }
    }
}

#[test]
fn deep_parentheses_are_a_syntax_error_naming_the_limit() {
    let deep = format!(
        "describe y across g where {}g = \"a\"{}",
        "(".repeat(1296),
        ")".repeat(1296)
    );
    let e = parse(&deep).unwrap_err();
    assert_eq!(e.kind, ErrorKind::SyntaxError);
    assert!(
        e.message.contains(&MAX_NESTING.to_string()),
        "{}",
        e.message
    );
    assert_eq!(completeness(&deep), Completeness::Invalid);
    // At the limit it still parses.
    let ok = format!(
        "describe y across g where {}g = \"a\"{}",
        "(".repeat(MAX_NESTING),
        ")".repeat(MAX_NESTING)
    );
    assert!(parse(&ok).is_ok());
}

#[test]
fn long_and_or_chains_run_without_recursion() {
    let mut s = with_data("y,g\n1,a\n2,b\n3,a\n4,b\n5,c\n6,c\n");
    let chain = vec!["g = \"a\""; 20_000].join(" or ");
    let out = run(
        &mut s,
        &format!("describe y across g where {chain} or g = \"b\""),
    )
    .unwrap();
    let b = common::bundle(&out[0]);
    assert_eq!(b["provenance"]["rows_used"], 4);
    let chain = vec!["y > 0"; 20_000].join(" and ");
    assert!(run(&mut s, &format!("describe y across g where {chain}")).is_ok());
    assert_eq!(
        completeness(&format!("describe y across g where {chain}")),
        Completeness::Complete
    );
}

#[test]
fn an_oversized_cell_is_refused_with_the_limit() {
    let big = format!("help {}", "x".repeat(engine::lang::MAX_CELL_BYTES));
    let e = parse(&big).unwrap_err();
    assert!(e.message.contains("1048576"), "{}", e.message);
    assert_eq!(completeness(&big), Completeness::Invalid);
}

// ---- crossings ----------------------------------------------------------------------------

#[test]
fn a_factor_named_twice_is_refused() {
    let mut s = with_data("y,g\n1,a\n2,b\n3,a\n4,b\n");
    let many = vec!["g"; 40].join(", ");
    for verb in ["describe", "anova", "check", "plot means"] {
        let e = run(&mut s, &format!("{verb} y across {many}")).unwrap_err();
        assert_eq!(e.kind, ErrorKind::DesignError, "{verb}");
        assert!(e.message.contains("named twice"), "{verb}: {}", e.message);
    }
}

#[test]
fn crossing_identifier_columns_is_refused_without_allocating_the_product() {
    let mut csv = String::from("y,a,b,c\n");
    for i in 0..3000 {
        csv.push_str(&format!("{},id{i},k{i},{}\n", i % 7, ["p", "q"][i % 2]));
    }
    let mut s = with_data(&csv);
    for st in [
        "describe y across a, b",
        "plot means y across a, b",
        "anova y across a, b",
        "check y across a, b",
        "compare y across a by b",
        "permute y across a, b with draws 10",
    ] {
        let e = run(&mut s, st).unwrap_err();
        assert_eq!(e.kind, ErrorKind::DesignError, "{st}: {e:?}");
        assert!(
            e.message.contains("at most 2000 cells"),
            "{st}: {}",
            e.message
        );
    }
    // With a subject column too: the within factor with a level per row.
    let e = run(&mut s, "anova y across a subject c").unwrap_err();
    assert!(
        matches!(e.kind, ErrorKind::DesignError),
        "{}: {e:?}",
        e.message
    );
    // A crossing of two ordinary factors still works.
    let ok = with_data("y,g,h\n1,a,x\n2,b,y\n3,a,x\n4,b,y\n5,a,y\n6,b,x\n");
    let mut ok = ok;
    assert!(run(&mut ok, "describe y across g, h").is_ok());
}

// ---- files that are not files -------------------------------------------------------------

#[test]
fn a_fifo_and_a_device_are_refused_before_reading() {
    let fifo = tmp("pipe.csv");
    let _ = std::fs::remove_file(&fifo);
    let made = std::process::Command::new("mkfifo").arg(&fifo).status();
    assert!(
        made.is_ok_and(|s| s.success()),
        "mkfifo is needed for this test"
    );
    let mut s = Session::new();
    let e = run(&mut s, &format!("read \"{}\" as x", fifo.display())).unwrap_err();
    assert_eq!(e.kind, ErrorKind::DataError);
    assert!(e.message.contains("named pipe"), "{}", e.message);
    let e = run(&mut s, "read \"/dev/zero\" as x").unwrap_err();
    assert!(e.message.contains("a device"), "{}", e.message);
    let e = run(&mut s, "read \"/tmp\" as x").unwrap_err();
    assert!(e.message.contains("a folder"), "{}", e.message);
}

// ---- answers out of proportion ------------------------------------------------------------

#[test]
fn a_huge_header_only_file_gives_a_short_error() {
    let p = tmp("header-only.csv");
    let names: Vec<String> = (0..3_600_000).map(|i| format!("column_{i}")).collect();
    std::fs::write(&p, names.join(",") + "\n").unwrap();
    assert!(std::fs::metadata(&p).unwrap().len() > 40_000_000);
    let mut s = Session::new();
    let e = run(&mut s, &format!("read \"{}\" as x", p.display())).unwrap_err();
    assert!(e.message.contains("no data rows"), "{}", &e.message[..200]);
    let all: usize = e.message.len() + e.notes.iter().map(String::len).sum::<usize>();
    assert!(all < 1_000, "{all} bytes of message");
}

#[test]
fn a_hundred_thousand_columns_are_read_with_a_short_answer() {
    let p = tmp("wide.csv");
    let n = 100_000;
    let head: Vec<String> = (0..n).map(|i| format!("c{i}")).collect();
    let row: Vec<String> = (0..n).map(|i| (i % 10).to_string()).collect();
    std::fs::write(
        &p,
        format!("{}\n{}\n{}\n", head.join(","), row.join(","), row.join(",")),
    )
    .unwrap();
    let mut s = Session::new();
    let out = run(&mut s, &format!("read \"{}\" as x", p.display())).unwrap();
    let size = answer_bytes(&out);
    assert!(size < 200_000, "the answer is {size} bytes");
    let b = common::bundle(&out[0]);
    assert_eq!(b["tables"]["columns"].as_array().unwrap().len(), 200);
    assert!(
        b["notes"][0]
            .as_str()
            .unwrap()
            .starts_with("100000 columns")
    );
    // A repeated name among them is still found.
    std::fs::write(&p, format!("{},c5\n{},1\n", head.join(","), row.join(","))).unwrap();
    let e = run(&mut s, &format!("read \"{}\" as y", p.display())).unwrap_err();
    assert!(
        e.message.contains("two columns named \"c5\""),
        "{}",
        e.message
    );
}

#[test]
fn a_huge_value_is_echoed_as_an_excerpt() {
    let p = tmp("long-value.csv");
    let long = "z".repeat(5_000_000);
    std::fs::write(&p, format!("y,g\n1,{long}\n2,b\n3,{long}\n")).unwrap();
    let mut s = Session::new();
    let out = run(&mut s, &format!("read \"{}\" as x", p.display())).unwrap();
    assert!(answer_bytes(&out) < 20_000);
    let e = run(&mut s, "describe g across y").unwrap_err();
    let all = e.message.len() + e.notes.iter().map(String::len).sum::<usize>();
    assert!(all < 2_000, "{all}");
}

// ---- spreadsheets -------------------------------------------------------------------------

/// A minimal XLSX workbook with one sheet whose XML is `sheet` (as written by
/// ECMA-376 Part 1: content types, the package relationship, the workbook and its relationship).
fn xlsx(sheet: &str) -> Vec<u8> {
    let mut w = zip::ZipWriter::new(std::io::Cursor::new(Vec::new()));
    let o = zip::write::SimpleFileOptions::default()
        .compression_method(zip::CompressionMethod::Deflated);
    let parts = [
        (
            "[Content_Types].xml",
            r#"<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/><Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/><Override PartName="/xl/worksheets/sheet1.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/></Types>"#.to_string(),
        ),
        (
            "_rels/.rels",
            r#"<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/></Relationships>"#.to_string(),
        ),
        (
            "xl/workbook.xml",
            r#"<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"><sheets><sheet name="Data" sheetId="1" r:id="rId1"/></sheets></workbook>"#.to_string(),
        ),
        (
            "xl/_rels/workbook.xml.rels",
            r#"<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/></Relationships>"#.to_string(),
        ),
        (
            "xl/worksheets/sheet1.xml",
            format!(
                r#"<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>{sheet}</sheetData></worksheet>"#
            ),
        ),
    ];
    for (name, text) in parts {
        w.start_file(name, o).unwrap();
        w.write_all(text.as_bytes()).unwrap();
    }
    w.finish().unwrap().into_inner()
}

fn inline(r: &str, text: &str) -> String {
    format!(r#"<c r="{r}" t="inlineStr"><is><t>{text}</t></is></c>"#)
}

fn read_sheet(bytes: &[u8], name: &str) -> Result<Vec<engine::Output>, engine::CellError> {
    let p = tmp(name);
    std::fs::write(&p, bytes).unwrap();
    let mut s = Session::new();
    run(&mut s, &format!("read \"{}\" as x", p.display()))
}

#[test]
fn an_ordinary_xlsx_sheet_still_reads() {
    let rows = format!(
        r#"<row r="1">{}{}</row><row r="2">{}<c r="B2"><v>1.5</v></c></row><row r="4">{}<c r="B4"><v>2</v></c></row>"#,
        inline("A1", "g"),
        inline("B1", "y"),
        inline("A2", "a"),
        inline("A4", "b")
    );
    let bytes = xlsx(&rows);
    let out = read_sheet(&bytes, "ok.xlsx").unwrap();
    let b = common::bundle(&out[0]);
    assert_eq!(b["provenance"]["rows_used"], 2);
    assert_eq!(b["tables"]["columns"][1]["type"], "numeric");
}

#[test]
fn a_sparse_sheet_with_cells_at_a1_and_xfd1048576_is_read_sparsely() {
    let rows = format!(
        r#"<row r="1">{}</row><row r="1048576"><c r="XFD1048576"><v>1</v></c></row>"#,
        inline("A1", "y")
    );
    let bytes = xlsx(&rows);
    assert!(bytes.len() < 3_000);
    let e = read_sheet(&bytes, "sparse.xlsx").unwrap_err();
    assert_eq!(e.kind, ErrorKind::DataError);
    assert!(
        e.message
            .contains("line 1048576 has 16384 fields but the header has 1"),
        "{}",
        e.message
    );
}

#[test]
fn a_cell_that_inflates_to_100_mb_is_refused_with_a_short_error() {
    let big = "a".repeat(100 << 20);
    let rows = format!(
        r#"<row r="1">{}</row><row r="2">{}</row>"#,
        inline("A1", "g"),
        inline("A2", &big)
    );
    let bytes = xlsx(&rows);
    drop(rows);
    assert!(bytes.len() < 300_000, "{} bytes", bytes.len());
    let e = read_sheet(&bytes, "bomb.xlsx").unwrap_err();
    assert!(e.message.contains("cell A2"), "{}", e.message);
    assert!(e.message.contains("at most 32767"), "{}", e.message);
    assert!(e.message.len() < 300);
}

#[test]
fn a_part_declaring_more_than_the_bound_is_refused_before_it_is_read() {
    let mut w = zip::ZipWriter::new(std::io::Cursor::new(Vec::new()));
    let o = zip::write::SimpleFileOptions::default()
        .compression_method(zip::CompressionMethod::Deflated)
        .large_file(true);
    w.start_file("xl/workbook.xml", o).unwrap();
    let zeros = vec![b' '; 1 << 20];
    for _ in 0..(engine::data::sheet::MAX_ENTRY >> 20) + 1 {
        w.write_all(&zeros).unwrap();
    }
    let bytes = w.finish().unwrap().into_inner();
    assert!(bytes.len() < 4 << 20, "{}", bytes.len());
    let e = read_sheet(&bytes, "declared.xlsx").unwrap_err();
    assert!(e.message.contains("inflates to"), "{}", e.message);
}

// ---- save ---------------------------------------------------------------------------------

#[test]
fn every_file_read_in_the_session_is_protected_from_save() {
    let a = tmp("a.csv");
    let b = tmp("b.csv");
    std::fs::write(&a, "y,g\n1,a\n2,b\n3,a\n4,b\n").unwrap();
    std::fs::write(&b, "y,g\n5,a\n6,b\n7,a\n8,b\n").unwrap();
    let before = std::fs::read(&a).unwrap();
    let mut s = Session::new();
    run(&mut s, &format!("read \"{}\" as x", a.display())).unwrap();
    run(&mut s, &format!("read \"{}\" as x", b.display())).unwrap();
    run(&mut s, "describe y across g").unwrap();
    let e = run(&mut s, &format!("save LAST to \"{}\"", a.display())).unwrap_err();
    assert!(e.message.contains("read as data"), "{}", e.message);
    assert_eq!(std::fs::read(&a).unwrap(), before);
}

fn leftovers(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .filter_map(|e| e.ok()?.file_name().into_string().ok())
        .filter(|n| n.contains(".partita-"))
        .collect()
}

#[test]
fn a_planted_link_at_the_old_temporary_name_is_not_followed() {
    let dir = tmp("links");
    std::fs::create_dir_all(&dir).unwrap();
    let data = dir.join("data.csv");
    std::fs::write(&data, "precious\n").unwrap();
    // The name the temporary file once had, predictable from the process id.
    let planted = dir.join(format!(".out.csv.partita-tmp-{}", std::process::id()));
    let _ = std::fs::remove_file(&planted);
    std::os::unix::fs::symlink(&data, &planted).unwrap();
    engine::write_atomic(&dir.join("out.csv"), b"new\n").unwrap();
    assert_eq!(std::fs::read(&data).unwrap(), b"precious\n");
    assert_eq!(std::fs::read(dir.join("out.csv")).unwrap(), b"new\n");
    std::fs::remove_file(&planted).unwrap();
    assert!(leftovers(&dir).is_empty(), "{:?}", leftovers(&dir));
}

/// A write that fails for want of space leaves neither the target nor a temporary file. Needs
/// root to mount a small tmpfs; says why when it cannot.
#[test]
fn a_full_disk_leaves_no_temporary_file() {
    let dir = tmp("full");
    std::fs::create_dir_all(&dir).unwrap();
    let mounted = std::process::Command::new("mount")
        .args(["-t", "tmpfs", "-o", "size=64k", "tmpfs"])
        .arg(&dir)
        .stderr(std::process::Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    if !mounted {
        eprintln!("skipped: mounting a 64 KiB tmpfs needs root (this run is not allowed to mount)");
        return;
    }
    let target = dir.join("big.csv");
    let result = engine::write_atomic(&target, &vec![b'x'; 1 << 20]);
    let left = leftovers(&dir);
    let exists = target.exists();
    let _ = std::process::Command::new("umount").arg(&dir).status();
    assert!(result.is_err(), "a 1 MiB write into 64 KiB succeeded");
    assert!(left.is_empty(), "{left:?}");
    assert!(!exists);
}

// ---- long lists in a cell -----------------------------------------------------------------

/// `in (…)` with many values and `levels` with many names are linear in rows and names (a
/// mask over level codes, a sorted list of numbers, a map of positions).
#[test]
fn long_value_lists_and_level_orders_are_answered() {
    let n = 20_000;
    let mut csv = String::from("y,id,g\n");
    for i in 0..n {
        csv.push_str(&format!("{},id{i},{}\n", i % 13, ["a", "b"][i % 2]));
    }
    let mut s = with_data(&csv);
    let ids: Vec<String> = (0..n / 2).map(|i| format!("\"id{}\"", 2 * i)).collect();
    let out = run(
        &mut s,
        &format!("describe y across g where id in ({})", ids.join(", ")),
    )
    .unwrap();
    let b = common::bundle(&out[0]);
    assert_eq!(b["provenance"]["rows_used"], n / 2);
    // Even ids are all in group a.
    assert_eq!(b["tables"]["cells"].as_array().unwrap().len(), 1);
    let nums: Vec<String> = (0..13)
        .filter(|v| v % 2 == 0)
        .map(|v| v.to_string())
        .collect();
    let out = run(
        &mut s,
        &format!("describe y across g where y in ({})", nums.join(", ")),
    )
    .unwrap();
    let kept = common::bundle(&out[0])["provenance"]["rows_used"]
        .as_u64()
        .unwrap();
    let want = (0..n).filter(|i| (i % 13) % 2 == 0).count() as u64;
    assert_eq!(kept, want);
    let order: Vec<String> = (0..n).rev().map(|i| format!("\"id{i}\"")).collect();
    let out = run(&mut s, &format!("levels d.id {}", order.join(", "))).unwrap();
    let text = out[0].data["text/plain"].as_str().unwrap();
    assert!(
        text.starts_with("d.id levels in order: id19999, id19998"),
        "{text}"
    );
    assert!(text.len() < 1_000, "{} bytes", text.len());
}
