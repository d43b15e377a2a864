//! The commands `new` and `verify`, the committed templates and demo folder, and exit codes.

mod support;

use support::{keep_outputs, output_text, run_in, scratch};

const KINDS: [&str; 5] = ["wood", "food", "clay", "blank", "lab"];

#[test]
fn committed_templates_equal_a_fresh_new_and_each_one_solves() {
    let dir = scratch();
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    for kind in KINDS {
        let file = format!("{kind}.xlsx");
        let out = run_in(dir.path(), &["new", kind, &file]);
        assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
        let fresh = std::fs::read(dir.path().join(&file)).expect("written");
        let committed =
            std::fs::read(root.join("templates").join(&file)).expect("committed template");
        assert!(
            fresh == committed,
            "templates/{file} differs from `dampfront new {kind}`; regenerate it"
        );
        let out = run_in(dir.path(), &["solve", &file]);
        assert_eq!(out.status.code(), Some(0), "{kind}: {}", output_text(&out));
        let result = dir.path().join(format!("{kind}.result.xlsx"));
        assert!(result.exists());
        demo_result_is_clean(kind, &result);
    }
    keep_outputs(dir.path(), "templates");
}

/// A demo shows no warning it did not mean to show, and no empty profile column.
fn demo_result_is_clean(kind: &str, result: &std::path::Path) {
    use calamine::{Data, Reader, open_workbook_auto};
    let mut wb = open_workbook_auto(result).expect("opens");
    let summary = wb.worksheet_range("summary").expect("summary");
    let warnings: Vec<String> = summary
        .rows()
        .filter(|r| r[0] == Data::String("warning".into()))
        .map(|r| r[1].to_string())
        .collect();
    assert!(warnings.is_empty(), "{kind}: {warnings:?}");
    let profiles = wb.worksheet_range("profiles").expect("profiles");
    let rows: Vec<&[Data]> = profiles.rows().collect();
    let width = rows[0].iter().filter(|d| **d != Data::Empty).count();
    for c in 1..width {
        assert!(
            rows[1..].iter().all(|r| matches!(r[c], Data::Float(_))),
            "{kind}: profile column {} has empty cells",
            rows[0][c]
        );
    }
}

#[test]
fn the_demo_folder_holds_the_wood_food_and_clay_templates() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    for (demo, kind) in [
        ("wood-board", "wood"),
        ("apple-slices", "food"),
        ("clay-tile", "clay"),
    ] {
        let a = std::fs::read(root.join("inbox-demo").join(format!("{demo}.xlsx"))).expect("demo");
        let b =
            std::fs::read(root.join("templates").join(format!("{kind}.xlsx"))).expect("template");
        assert!(
            a == b,
            "inbox-demo/{demo}.xlsx differs from templates/{kind}.xlsx"
        );
    }
}

#[test]
fn new_writes_csv_too_and_never_overwrites() {
    let dir = scratch();
    let out = run_in(dir.path(), &["new", "food", "apple.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let text = std::fs::read_to_string(dir.path().join("apple.csv")).expect("csv");
    assert!(text.starts_with("[case]\n"));
    let out = run_in(dir.path(), &["solve", "apple.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let before = std::fs::read(dir.path().join("apple.csv")).expect("csv");
    let out = run_in(dir.path(), &["new", "wood", "apple.csv"]);
    assert_eq!(out.status.code(), Some(2), "{}", output_text(&out));
    assert_eq!(
        std::fs::read(dir.path().join("apple.csv")).expect("csv"),
        before
    );
    let out = run_in(dir.path(), &["new", "cheese", "x.xlsx"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(!dir.path().join("x.xlsx").exists());
}

#[test]
fn verify_prints_a_passing_table() {
    let dir = scratch();
    let out = run_in(dir.path(), &["verify"]);
    let text = output_text(&out);
    assert_eq!(out.status.code(), Some(0), "{text}");
    assert!(text.contains("16 of 16 checks passed"), "{text}");
    assert!(text.contains("sphere, biot 100, 40 cells"), "{text}");
}

#[test]
fn usage_errors_exit_with_2() {
    let dir = scratch();
    assert_eq!(run_in(dir.path(), &["frobnicate"]).status.code(), Some(2));
    assert_eq!(run_in(dir.path(), &["solve"]).status.code(), Some(2));
    assert_eq!(
        run_in(dir.path(), &["batch", "x", "--shard", "4/3"])
            .status
            .code(),
        Some(2)
    );
    assert_eq!(run_in(dir.path(), &["--help"]).status.code(), Some(0));
}

#[test]
fn a_missing_input_is_a_system_error_and_writes_nothing() {
    let dir = scratch();
    let out = run_in(dir.path(), &["solve", "nowhere.xlsx"]);
    assert_eq!(out.status.code(), Some(2), "{}", output_text(&out));
    assert!(output_text(&out).contains("nowhere.xlsx"));
    assert_eq!(std::fs::read_dir(dir.path()).expect("dir").count(), 0);
}

#[test]
fn an_interrupted_batch_exits_2_and_says_what_was_not_run() {
    let dir = scratch();
    for i in 0..3 {
        support::books::write_xlsx(
            &dir.path().join(format!("slow-{i}.xlsx")),
            &support::books::slow_case("slow", 20000.0, 1e-10),
        );
    }
    let child = support::bin()
        .current_dir(dir.path())
        .args(["batch", ".", "--jobs", "1"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("starts");
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(60);
    while !std::fs::read_dir(dir.path())
        .expect("dir")
        .flatten()
        .any(|e| e.file_name().to_string_lossy().ends_with(".lock"))
    {
        assert!(std::time::Instant::now() < deadline, "no run started");
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let pid = child.id().to_string();
    let status = std::process::Command::new("kill")
        .args(["-TERM", &pid])
        .status()
        .expect("kill runs");
    assert!(status.success());
    let out = child.wait_with_output().expect("exits");
    let text = output_text(&out);
    assert_eq!(out.status.code(), Some(2), "{text}");
    assert!(text.contains("interrupted"), "{text}");
    // Nothing half-written: no lock and no temporary file is left.
    for e in std::fs::read_dir(dir.path()).expect("dir").flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        assert!(
            !name.ends_with(".lock") && !name.starts_with(".dampfront-"),
            "{name} left"
        );
    }
}

#[test]
fn new_refuses_a_name_it_cannot_honour() {
    let dir = scratch();
    for name in ["w.ods", "w.xls", "w"] {
        let out = run_in(dir.path(), &["new", "wood", name]);
        let text = output_text(&out);
        assert_eq!(out.status.code(), Some(2), "{name}: {text}");
        assert!(text.contains(".xlsx or"), "{name}: {text}");
    }
    assert_eq!(std::fs::read_dir(dir.path()).expect("dir").count(), 0);
    // Upper-case extensions are the same extensions.
    let out = run_in(dir.path(), &["new", "wood", "W.XLSX"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
}

#[test]
fn jobs_must_be_at_least_one() {
    let dir = scratch();
    for command in ["batch", "watch"] {
        let out = run_in(dir.path(), &[command, ".", "--jobs", "0"]);
        let text = output_text(&out);
        assert_eq!(out.status.code(), Some(2), "{command}: {text}");
        assert!(text.contains("--jobs"), "{command}: {text}");
    }
}

#[test]
fn logs_to_a_pipe_carry_no_colour_codes() {
    let dir = scratch();
    let out = run_in(dir.path(), &["new", "clay", "c.xlsx"]);
    assert_eq!(out.status.code(), Some(0));
    // The test harness pipes stderr, as cron does when it appends to a log file.
    let out = run_in(dir.path(), &["solve", "c.xlsx"]);
    let text = output_text(&out);
    assert_eq!(out.status.code(), Some(0), "{text}");
    assert!(text.contains("INFO"), "{text}");
    assert!(
        !text.contains('\u{1b}'),
        "escape codes in a piped log: {text:?}"
    );
}

#[test]
fn colour_only_on_a_terminal_and_never_with_no_color() {
    use dampfront::cli::use_colour;
    use std::ffi::OsStr;
    assert!(use_colour(true, None));
    assert!(!use_colour(false, None));
    assert!(!use_colour(true, Some(OsStr::new("1"))));
    // no-color.org: an empty NO_COLOR does not count as set.
    assert!(use_colour(true, Some(OsStr::new(""))));
}

#[test]
fn a_missing_dry_bulb_is_reported_once_without_a_wet_bulb_complaint() {
    let dir = scratch();
    let cell_empty = "[case]\nend_hours,10\n[layers]\nmaterial,thickness_mm,initial_moisture_pct\n\
        m,10,50\n[materials]\nmaterial,dry_density_kg_m3,d_ref_m2_s,isotherm,iso_a,iso_b\n\
        m,500,1e-10,oswin,0.1,0.5\n[schedule]\nstep,hours,dry_bulb_c,wet_bulb_c,surface_coef_m_s\n\
        one,10,,45,1e-7\n";
    let column_missing = "[case]\nend_hours,10\n[layers]\nmaterial,thickness_mm,initial_moisture_pct\n\
        m,10,50\n[materials]\nmaterial,dry_density_kg_m3,d_ref_m2_s,isotherm,iso_a,iso_b\n\
        m,500,1e-10,oswin,0.1,0.5\n[schedule]\nstep,hours,wet_bulb_c,surface_coef_m_s\n\
        one,10,45,1e-7\n";
    for (name, text) in [("empty.csv", cell_empty), ("nocolumn.csv", column_missing)] {
        std::fs::write(dir.path().join(name), text).expect("written");
        let out = run_in(dir.path(), &["solve", name]);
        let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
        assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
        assert!(stdout.contains("dry_bulb_c"), "{name}: {stdout}");
        assert!(!stdout.contains("wet_bulb_c"), "{name}: {stdout}");
        assert_eq!(stdout.lines().count(), 1, "{name}: {stdout}");
    }
}
