//! Watched datasets: display ids on live answers, refresh after a change, the unfinished last
//! line, a file that is gone or replaced by a folder, and statements made from watched data.
//! The numbers of refreshed answers are checked against scipy in tests/python/test_watch.py;
//! these tests check what is sent and when.

mod common;
use common::{bundle, run};
use engine::{Cancel, Output, Session};
use std::path::PathBuf;

fn file(name: &str, text: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("partita-live-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    let p = d.join(name);
    if p.is_dir() {
        std::fs::remove_dir(&p).unwrap();
    }
    std::fs::write(&p, text).unwrap();
    p
}

fn refresh(s: &mut Session, p: &PathBuf) -> Vec<Output> {
    let mut out = Vec::new();
    let n = s.refresh(p, &Cancel::default(), &mut out);
    assert_eq!(n, out.len());
    out
}

const BASE: &str = "g,y\na,1\na,2\na,3\nb,4\nb,5\nb,7\nc,2\nc,3\nc,5\n";

fn watched(name: &str) -> (Session, PathBuf, Vec<Output>) {
    let p = file(name, BASE);
    let mut s = Session::new();
    let mut out = run(&mut s, &format!("read \"{}\" as d with watch", p.display())).unwrap();
    out.extend(run(&mut s, "anova y across g").unwrap());
    (s, p, out)
}

#[test]
fn live_answers_are_displays_with_ids_and_others_are_results() {
    let (mut s, p, out) = watched("ids.csv");
    assert_eq!(out.len(), 2);
    for o in &out {
        assert!(o.display_id.is_some() && !o.is_result && !o.update);
    }
    assert_ne!(out[0].display_id, out[1].display_id);
    assert_eq!(s.watched_files(), vec![std::path::absolute(&p).unwrap()]);
    // Statements not on the watched dataset stay ordinary results.
    let h = run(&mut s, "help anova").unwrap();
    assert!(h[0].is_result && h[0].display_id.is_none());
    // Read again without watch: no longer followed.
    run(&mut s, &format!("read \"{}\" as d", p.display())).unwrap();
    assert!(s.watched_files().is_empty());
    let a = run(&mut s, "anova y across g").unwrap();
    assert!(a[0].is_result && a[0].display_id.is_none());
}

#[test]
fn a_change_refreshes_every_live_display_in_place_and_no_change_sends_nothing() {
    let (mut s, p, out) = watched("change.csv");
    assert!(refresh(&mut s, &p).is_empty(), "unchanged content");
    std::fs::write(&p, format!("{BASE}a,2\nb,6\nc,4\n")).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(up.len(), 2);
    for (u, o) in up.iter().zip(&out) {
        assert!(u.update && !u.is_result);
        assert_eq!(u.display_id, o.display_id);
        let r = &bundle(u)["refresh"];
        assert_eq!(r["ok"], true);
        assert_eq!(r["rows"], 12);
        assert_eq!(r["previous_rows"], 9);
        let t = r["text"].as_str().unwrap();
        assert!(t.contains("12 rows (was 9)"), "{t}");
        // "refreshed at HH:MM:SS UTC±HH:MM: …" (local time with its offset).
        let clock: Vec<char> = t
            .strip_prefix("refreshed at ")
            .unwrap()
            .chars()
            .take(19)
            .collect();
        let shape: String = clock
            .iter()
            .map(|c| if c.is_ascii_digit() { '9' } else { *c })
            .collect();
        assert!(
            shape == "99:99:99 UTC+99:99:" || shape == "99:99:99 UTC-99:99:",
            "{t}"
        );
        assert!(
            u.data["text/html"]
                .as_str()
                .unwrap()
                .contains("partita-refresh")
        );
    }
    let notes = bundle(&up[0])["notes"].to_string();
    assert!(
        notes.contains("rows: 9 → 12 (3 added, 0 removed or changed)"),
        "{notes}"
    );
    let notes = bundle(&up[1])["notes"][0].as_str().unwrap().to_string();
    assert!(
        notes.starts_with("was g: F(2, 6)") && notes.contains("now g: F(2, 9)"),
        "{notes}"
    );
    assert!(
        notes.contains("n = 9") && notes.contains("n = 12"),
        "{notes}"
    );
    // The refreshed data is the session's data now.
    let a = run(&mut s, "describe y across g").unwrap();
    assert_eq!(bundle(&a[0])["provenance"]["rows_used"], 12);
    assert!(refresh(&mut s, &p).is_empty(), "nothing changed since");
}

#[test]
fn an_unfinished_last_line_is_left_out_until_it_is_complete() {
    let (mut s, p, _) = watched("partial.csv");
    std::fs::write(&p, format!("{BASE}a,2\nb")).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(bundle(&up[1])["refresh"]["rows"], 10);
    let notes = bundle(&up[0])["notes"].to_string();
    assert!(notes.contains("line 12 has no line end yet"), "{notes}");
    // Only the unfinished line grew: the complete lines are the same, nothing to send.
    std::fs::write(&p, format!("{BASE}a,2\nb,")).unwrap();
    std::fs::write(&p, format!("{BASE}a,2\nb")).unwrap();
    assert!(refresh(&mut s, &p).is_empty());
    // A last line without a line end that parses is data (the writer has stopped: the
    // kernel refreshes only once the size is stable).
    std::fs::write(&p, format!("{BASE}a,2\nb,6")).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(bundle(&up[1])["refresh"]["rows"], 11);
    // Outside a refresh, a broken unfinished line is an error that says what to do.
    std::fs::write(&p, format!("{BASE}a,2,9,9")).unwrap();
    let e = run(&mut s, &format!("read \"{}\" as e", p.display())).unwrap_err();
    assert!(
        e.notes
            .iter()
            .any(|n| n.contains("no line end") && n.contains("read it again")),
        "{e:?}"
    );
}

#[test]
fn a_deleted_file_or_a_folder_keeps_the_last_result_with_a_note() {
    let (mut s, p, out) = watched("gone.csv");
    let before = bundle(&out[1])["tables"]["anova"].clone();
    std::fs::remove_file(&p).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(up.len(), 2);
    for u in &up {
        let r = &bundle(u)["refresh"];
        assert_eq!(r["ok"], false);
        let t = r["text"].as_str().unwrap();
        assert!(
            t.contains("could not be read again") && t.contains("no such file"),
            "{t}"
        );
        assert!(t.contains("last good read (9 rows"), "{t}");
        assert!(
            u.data["text/html"]
                .as_str()
                .unwrap()
                .contains("partita-refresh stale")
        );
    }
    assert_eq!(bundle(&up[1])["tables"]["anova"], before);
    std::fs::create_dir(&p).unwrap();
    let up = refresh(&mut s, &p);
    let t = bundle(&up[0])["refresh"]["text"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(t.contains("is a folder"), "{t}");
    std::fs::remove_dir(&p).unwrap();
    // The file comes back: refreshed again.
    std::fs::write(&p, format!("{BASE}c,9\n")).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(bundle(&up[1])["refresh"]["ok"], true);
    assert_eq!(bundle(&up[1])["refresh"]["rows"], 10);
}

#[test]
fn a_statement_that_fails_on_the_new_data_keeps_its_last_result() {
    let (mut s, p, out) = watched("fails.csv");
    // A text value in the response: the file reads, the ANOVA cannot run on it.
    let broken = format!("{BASE}c,n/a?\n");
    std::fs::write(&p, &broken).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(up.len(), 2);
    assert_eq!(bundle(&up[0])["refresh"]["ok"], true);
    let r = &bundle(&up[1])["refresh"];
    assert_eq!(r["ok"], false);
    assert!(
        r["text"]
            .as_str()
            .unwrap()
            .contains("failed on the new data"),
        "{r}"
    );
    assert_eq!(bundle(&up[1])["tables"], bundle(&out[1])["tables"]);
}

#[test]
fn statements_on_data_made_from_a_watched_file_follow_it() {
    let wide = "plant,trt,w1,w2,w3\np1,a,1,2,4\np2,a,2,2,5\np3,a,1,3,4\np4,b,2,4,6\np5,b,3,4,7\np6,b,2,5,8\n";
    let p = file("wide.csv", wide);
    let mut s = Session::new();
    let mut out = run(&mut s, &format!("read \"{}\" as w with watch", p.display())).unwrap();
    out.extend(
        run(
            &mut s,
            "unpivot w columns w1, w2, w3 into week, height as long",
        )
        .unwrap(),
    );
    out.extend(
        run(
            &mut s,
            "anova height across trt, week subject plant in long",
        )
        .unwrap(),
    );
    assert!(out.iter().all(|o| o.display_id.is_some()));
    std::fs::write(&p, format!("{wide}p7,a,2,3,5\np8,b,3,5,7\n")).unwrap();
    let up = refresh(&mut s, &p);
    assert_eq!(up.len(), 3);
    for (u, o) in up.iter().zip(&out) {
        assert_eq!(u.display_id, o.display_id);
    }
    let design = &bundle(&up[2])["design"];
    assert!(design.to_string().contains('8'), "{design}");
    assert_eq!(bundle(&up[2])["provenance"]["rows_used"], 24);
}

#[test]
fn watch_takes_no_value() {
    let p = file("opt.csv", BASE);
    let mut s = Session::new();
    let e = run(
        &mut s,
        &format!("read \"{}\" as d with watch 2", p.display()),
    )
    .unwrap_err();
    assert!(e.message.contains("`watch` takes no value"), "{e:?}");
}

#[test]
fn a_new_export_under_the_same_name_says_what_changed_and_reruns_show_was_and_now() {
    let one = file("run1.csv", BASE);
    let two = file("run2.csv", &format!("{BASE}a,2\nb,6\nc,4\nd,5\n"));
    let mut s = Session::new();
    run(&mut s, &format!("read \"{}\" as plates", one.display())).unwrap();
    run(&mut s, "anova y across g in plates").unwrap();
    let r = run(&mut s, &format!("read \"{}\" as plates", two.display())).unwrap();
    let notes = bundle(&r[0])["notes"].clone();
    let first = notes[0].as_str().unwrap();
    assert!(
        first.starts_with(&format!("plates was read from {} at ", one.display())),
        "{first}"
    );
    assert!(
        first.contains(&format!(
            "; now from {}: rows: 9 → 13 (4 added",
            two.display()
        )),
        "{first}"
    );
    assert!(notes.to_string().contains("g: new level d"), "{notes}");
    let a = run(&mut s, "anova y across g in plates").unwrap();
    let was = bundle(&a[0])["notes"][0].as_str().unwrap().to_string();
    assert!(
        was.starts_with("was g: F(2, 6)") && was.contains("now g: F(3, 9)"),
        "{was}"
    );
}
