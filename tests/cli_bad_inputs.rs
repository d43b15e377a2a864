//! Every file of the bad-input corpus in `tests/bad/` through the real binary: exit code 1, an
//! errors workbook (sheet `problems`: sheet, cell, problem) naming the place to fix, the same
//! line on the terminal, no result workbook, no panic, and the input's bytes unchanged.

mod support;

use calamine::{Data, Reader, open_workbook_auto};
use support::{keep_outputs, output_text, run_in, scratch, sha256};

/// (file, sheet, cell, text the problem must contain). An empty sheet means the file as a whole.
const CORPUS: [(&str, &str, &str, &str); 15] = [
    ("empty.xlsx", "", "", "not a readable workbook"),
    ("not_a_zip.xlsx", "", "", "not a readable workbook"),
    ("zip_not_workbook.xlsx", "", "", "not a readable workbook"),
    ("truncated.xlsx", "", "", "not a readable workbook"),
    ("missing_layers.xlsx", "layers", "", "no sheet named layers"),
    (
        "text_in_number.xlsx",
        "layers",
        "C2",
        "expected a number of mm",
    ),
    ("comma_decimal.xlsx", "layers", "C2", "\"12,5\""),
    ("negative_thickness.xlsx", "layers", "C2", "-5"),
    (
        "unknown_material.xlsx",
        "layers",
        "B3",
        "not defined on sheet materials",
    ),
    ("rh_140.xlsx", "schedule", "E2", "140"),
    (
        "duplicate_material.xlsx",
        "materials",
        "A4",
        "defined twice",
    ),
    ("formula_no_cache.xlsx", "layers", "C2", "no cached value"),
    (
        "long_schedule.csv",
        "schedule",
        "A2010",
        "more than 2000 steps",
    ),
    ("comma_decimal.csv", "layers", "B7", ""),
    ("open_quote.csv", "", "", "quoted field is not closed"),
];

#[test]
fn every_bad_input_gets_an_errors_workbook_naming_the_cell() {
    let corpus = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad");
    let dir = scratch();
    for (file, sheet, cell, text) in CORPUS {
        let input = dir.path().join(file);
        std::fs::copy(corpus.join(file), &input).expect("corpus file");
        let before = sha256(&input);
        let out = run_in(dir.path(), &["solve", file]);
        let shown = output_text(&out);
        assert_eq!(out.status.code(), Some(1), "{file}: {shown}");
        assert!(!shown.contains("panicked"), "{file}: {shown}");
        assert_eq!(sha256(&input), before, "{file} was modified");
        let stem = file.rsplit_once('.').map_or(file, |(s, _)| s);
        assert!(
            !dir.path().join(format!("{stem}.result.xlsx")).exists(),
            "{file}"
        );
        let errors = dir.path().join(format!("{stem}.errors.xlsx"));
        let mut wb = open_workbook_auto(&errors).unwrap_or_else(|e| panic!("{file}: {e}"));
        let problems = wb.worksheet_range("problems").expect("sheet problems");
        let rows: Vec<Vec<String>> = problems
            .rows()
            .map(|r| {
                r.iter()
                    .map(|c| match c {
                        Data::String(s) => s.clone(),
                        Data::Empty => String::new(),
                        other => other.to_string(),
                    })
                    .collect()
            })
            .collect();
        assert_eq!(rows[0][..3], ["sheet", "cell", "problem"], "{file}");
        let found = rows[1..]
            .iter()
            .any(|r| r[0] == sheet && r[1] == cell && r[2].contains(text));
        assert!(
            found,
            "{file}: no problem at {sheet}!{cell} with {text:?} in {rows:?}"
        );
        // The terminal shows the same problem as FILE: SHEET!CELL: problem.
        let place = match (sheet.is_empty(), cell.is_empty()) {
            (true, _) => format!("{file}: "),
            (false, true) => format!("{file}: {sheet}: "),
            (false, false) => format!("{file}: {sheet}!{cell}: "),
        };
        assert!(shown.contains(&place), "{file}: {shown}");
    }
    keep_outputs(dir.path(), "bad_inputs");
}

#[test]
fn a_good_input_after_a_bad_one_still_runs_and_the_exit_code_reports_the_bad_one() {
    let corpus = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad");
    let dir = scratch();
    std::fs::copy(corpus.join("rh_140.xlsx"), dir.path().join("bad.xlsx")).expect("copy");
    let out = run_in(dir.path(), &["new", "blank", "good.xlsx"]);
    assert_eq!(out.status.code(), Some(0));
    let out = run_in(dir.path(), &["solve", "bad.xlsx", "good.xlsx"]);
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    assert!(dir.path().join("good.result.xlsx").exists());
    assert!(dir.path().join("bad.errors.xlsx").exists());
    // Fixing the input and solving again removes the stale errors workbook.
    std::fs::copy(dir.path().join("good.xlsx"), dir.path().join("bad.xlsx")).expect("copy");
    let out = run_in(dir.path(), &["solve", "bad.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    assert!(!dir.path().join("bad.errors.xlsx").exists());
    assert!(dir.path().join("bad.result.xlsx").exists());
}
