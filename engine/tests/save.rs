//! `save LAST` and re-reading changed files, through `Session::run_cell`.

mod common;

use common::{run, with_data};
use engine::{ErrorKind, Session};

#[test]
fn saves_tables_and_figures_atomically_and_refuses_bad_targets() {
    let dir = std::env::temp_dir().join(format!("partita-save-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let data = dir.join("trial.csv");
    std::fs::write(&data, "g,y\na,1\na,2\nb,4\nb,5.5\n").unwrap();
    let mut s = Session::new();
    let e = run(
        &mut s,
        &format!("save LAST to \"{}\"", dir.join("x.csv").display()),
    )
    .unwrap_err();
    assert!(e.message.contains("no result to save yet"));
    run(
        &mut s,
        &format!("read \"{}\" as t\nanova y across g", data.display()),
    )
    .unwrap();
    let csv_path = dir.join("anova.csv");
    let out = run(&mut s, &format!("save LAST to \"{}\"", csv_path.display())).unwrap();
    assert!(
        out[0].data["text/plain"]
            .as_str()
            .unwrap()
            .contains("saved table 1")
    );
    let text = std::fs::read_to_string(&csv_path).unwrap();
    assert!(text.starts_with("Source,df,SS,MS,F,p,η²,ω²\n"), "{text}");
    assert!(text.contains("\nResidual,2,"));
    run(
        &mut s,
        &format!(
            "save LAST to \"{}\" with table 2",
            dir.join("cells.csv").display()
        ),
    )
    .unwrap();
    run(
        &mut s,
        &format!("save LAST to \"{}\"", dir.join("fig.svg").display()),
    )
    .unwrap();
    assert!(
        std::fs::read_to_string(dir.join("fig.svg"))
            .unwrap()
            .starts_with("<svg")
    );
    let e = run(&mut s, &format!("save LAST to \"{}\"", data.display())).unwrap_err();
    assert!(e.message.contains("was read as data"), "{}", e.message);
    assert_eq!(
        std::fs::read_to_string(&data).unwrap(),
        "g,y\na,1\na,2\nb,4\nb,5.5\n"
    );
    let e = run(
        &mut s,
        &format!(
            "save LAST to \"{}\"",
            dir.join("no/such/dir/x.csv").display()
        ),
    )
    .unwrap_err();
    assert!(e.message.contains("does not exist"), "{}", e.message);
    let e = run(
        &mut s,
        &format!("save LAST to \"{}\"", dir.join("x.xlsx").display()),
    )
    .unwrap_err();
    assert_eq!(e.kind, ErrorKind::InputError);
    assert!(
        e.message.contains(".csv (a table), .svg or .png"),
        "{}",
        e.message
    );
    let e = run(
        &mut s,
        &format!(
            "save LAST to \"{}\" with table 9",
            dir.join("y.csv").display()
        ),
    )
    .unwrap_err();
    assert!(e.message.contains("`table 9` does not exist"));
    let leftovers: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().contains("partita-tmp"))
        .collect();
    assert!(leftovers.is_empty());
}

#[test]
fn a_file_replaced_by_a_folder_is_a_clear_error_and_the_data_stay() {
    let mut s = with_data("g,y\na,1\na,2\nb,4\nb,5\n");
    let dir = std::env::temp_dir().join(format!("partita-folder-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let e = run(&mut s, &format!("read \"{}\" as d", dir.display())).unwrap_err();
    assert!(e.message.contains("is a folder"));
    assert!(
        run(&mut s, "anova y across g in d").is_ok(),
        "the last good dataset is kept"
    );
}
