//! What the written files look like from outside: permissions that follow the umask, and CSV
//! outputs that a spreadsheet program cannot mistake for formulas.
#![allow(clippy::unwrap_used)]

mod support;

use std::os::unix::fs::PermissionsExt;
use std::path::Path;

use support::books::{series_case, write_csv};
use support::{output_text, scratch};

/// Runs `dampfront ARGS` in `dir` under `umask`.
fn run_with_umask(dir: &Path, umask: &str, args: &[&str]) -> std::process::Output {
    std::process::Command::new("sh")
        .current_dir(dir)
        .arg("-c")
        .arg(format!("umask {umask} && exec \"$0\" \"$@\""))
        .arg(env!("CARGO_BIN_EXE_dampfront"))
        .args(args)
        .output()
        .unwrap()
}

fn mode(path: &Path) -> u32 {
    std::fs::metadata(path).unwrap().permissions().mode() & 0o777
}

#[test]
fn outputs_follow_the_umask_like_any_saved_file() {
    // Before: every output was 0600 whatever the umask.
    for (umask, expected) in [("022", 0o644), ("027", 0o640), ("002", 0o664)] {
        let dir = scratch();
        write_csv(&dir.path().join("ok.csv"), &series_case("modes"));
        let out = run_with_umask(dir.path(), umask, &["solve", "--csv", "ok.csv"]);
        assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
        for name in ["ok.result.xlsx", "ok.curves.csv", "ok.profiles.csv"] {
            assert_eq!(
                mode(&dir.path().join(name)),
                expected,
                "{name} umask {umask}"
            );
        }
        std::fs::write(dir.path().join("bad.csv"), "[case]\ntitle,x\n").unwrap();
        let out = run_with_umask(dir.path(), umask, &["solve", "bad.csv"]);
        assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
        assert_eq!(mode(&dir.path().join("bad.errors.xlsx")), expected);
    }
}

#[test]
fn csv_outputs_keep_formula_like_labels_as_text() {
    // Before: a step label such as =HYPERLINK(...) went raw into curves.csv, where a
    // spreadsheet program would run it.
    let dir = scratch();
    let mut case = series_case("csv labels");
    case[3].1[1][0] = support::books::V::T("=HYPERLINK(\"http://example.invalid\",\"x\")");
    write_csv(&dir.path().join("lab.csv"), &case);
    let out = support::run_in(dir.path(), &["solve", "--csv", "lab.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let curves = std::fs::read_to_string(dir.path().join("lab.curves.csv")).unwrap();
    assert!(curves.contains("\"'=HYPERLINK("), "{curves}");
    for line in curves.lines() {
        for field in line.split(',') {
            assert!(!field.starts_with(['=', '+', '@']), "{field} in {line}");
        }
    }
}
