//! Hostile inputs through the real binary: each ends with exit 1 and an errors workbook that
//! says what was too large, quickly, without ending the process and without touching the input.
//! The files are built here (a zip bomb, a sheet with one cell far away, a CSV of a million
//! lines, a FIFO), so the repository does not carry them.
#![allow(clippy::unwrap_used)]

mod support;

use std::io::Write;
use std::path::Path;
use std::process::{Child, Output};
use std::time::{Duration, Instant};

use calamine::{Data, Reader, open_workbook_auto};
use support::books::{V, series_case, write_csv, write_xlsx};
use support::{bin, keep_outputs, output_text, run_in, scratch, sha256};

/// The problem lines of an errors workbook, as "sheet|cell|problem".
fn problems(path: &Path) -> Vec<String> {
    let mut wb = open_workbook_auto(path).unwrap();
    let range = wb.worksheet_range("problems").unwrap();
    range
        .rows()
        .skip(1)
        .map(|r| {
            r.iter()
                .map(|c| match c {
                    Data::String(s) => s.clone(),
                    other => other.to_string(),
                })
                .collect::<Vec<_>>()
                .join("|")
        })
        .collect()
}

/// Runs `solve FILE` in `dir` and checks the common promises: exit 1, no panic, an errors
/// workbook whose problem contains `text`, the input unchanged. Returns the problems.
fn refused(dir: &Path, file: &str, text: &str) -> Vec<String> {
    let input = dir.join(file);
    let before = sha256(&input);
    let out = run_in(dir, &["solve", file]);
    let shown = output_text(&out);
    assert_eq!(out.status.code(), Some(1), "{file}: {shown}");
    assert!(!shown.contains("panicked"), "{file}: {shown}");
    assert!(shown.contains(text), "{file}: {shown}");
    let stem = file.rsplit_once('.').unwrap().0;
    let errors = dir.join(format!("{stem}.errors.xlsx"));
    let lines = problems(&errors);
    assert!(lines.iter().any(|l| l.contains(text)), "{lines:?}");
    assert!(!dir.join(format!("{stem}.result.xlsx")).exists());
    assert_eq!(sha256(&input), before, "{file} was modified");
    keep_outputs(dir, "cli_hostile");
    lines
}

/// A zip file of the given members, deflated (fastest level) or stored.
fn zip_with(files: &[(&str, &[u8])], deflate: bool) -> Vec<u8> {
    let mut buf = std::io::Cursor::new(Vec::new());
    let mut zip = zip::ZipWriter::new(&mut buf);
    let method = if deflate {
        zip::CompressionMethod::Deflated
    } else {
        zip::CompressionMethod::Stored
    };
    for (name, bytes) in files {
        let options = zip::write::SimpleFileOptions::default()
            .compression_method(method)
            .compression_level(deflate.then_some(1))
            .large_file(bytes.len() > u32::MAX as usize);
        zip.start_file(*name, options).unwrap();
        zip.write_all(bytes).unwrap();
    }
    zip.finish().unwrap();
    buf.into_inner()
}

const MANIFEST: &str = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\
    <manifest:manifest xmlns:manifest=\"urn:oasis:names:tc:opendocument:xmlns:manifest:1.0\" \
    manifest:version=\"1.2\"><manifest:file-entry manifest:full-path=\"/\" \
    manifest:media-type=\"application/vnd.oasis.opendocument.spreadsheet\"/>\
    <manifest:file-entry manifest:full-path=\"content.xml\" manifest:media-type=\"text/xml\"/>\
    </manifest:manifest>";

/// An ods file whose sheet `case` holds `title` in A1 and a number `rows` rows and `cols`
/// columns further on (written with the format's repeat counts, so the file stays small).
fn ods_far_cell(rows: u32, cols: u32) -> Vec<u8> {
    let content = format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\
         <office:document-content \
         xmlns:office=\"urn:oasis:names:tc:opendocument:xmlns:office:1.0\" \
         xmlns:table=\"urn:oasis:names:tc:opendocument:xmlns:table:1.0\" \
         xmlns:text=\"urn:oasis:names:tc:opendocument:xmlns:text:1.0\" office:version=\"1.2\">\
         <office:body><office:spreadsheet><table:table table:name=\"case\">\
         <table:table-row><table:table-cell office:value-type=\"string\"><text:p>title</text:p>\
         </table:table-cell></table:table-row>\
         <table:table-row table:number-rows-repeated=\"{rows}\"><table:table-cell/>\
         </table:table-row><table:table-row>\
         <table:table-cell table:number-columns-repeated=\"{cols}\"/>\
         <table:table-cell office:value-type=\"float\" office:value=\"1\"><text:p>1</text:p>\
         </table:table-cell></table:table-row></table:table></office:spreadsheet>\
         </office:body></office:document-content>"
    );
    zip_with(
        &[
            (
                "mimetype",
                b"application/vnd.oasis.opendocument.spreadsheet",
            ),
            ("META-INF/manifest.xml", MANIFEST.as_bytes()),
            ("content.xml", content.as_bytes()),
        ],
        false,
    )
}

#[test]
fn a_sheet_with_one_cell_far_away_is_refused_by_memory_not_fatal() {
    // 6000 x 16000 = 96 million grid cells: the dense grid the reader builds would take
    // gigabytes; before the child-process reader this ended the process.
    let dir = scratch();
    std::fs::write(dir.path().join("far.ods"), ods_far_cell(6000, 16_000)).unwrap();
    let started = Instant::now();
    refused(dir.path(), "far.ods", "of memory");
    assert!(started.elapsed() < Duration::from_secs(60));
}

#[test]
fn a_zip_bomb_is_refused_from_its_declared_sizes() {
    // A shared-strings part of 200 MiB of one letter compresses to a few hundred kilobytes.
    let dir = scratch();
    let mut strings = b"<?xml version=\"1.0\"?><sst xmlns=\"http://schemas.openxmlformats.org/\
        spreadsheetml/2006/main\"><si><t>"
        .to_vec();
    strings.resize(strings.len() + 200 * 1024 * 1024, b'A');
    strings.extend_from_slice(b"</t></si></sst>");
    let bytes = zip_with(&[("xl/sharedStrings.xml", &strings)], true);
    drop(strings);
    assert!(bytes.len() < 2 * 1024 * 1024, "{}", bytes.len());
    std::fs::write(dir.path().join("bomb.xlsx"), bytes).unwrap();
    refused(dir.path(), "bomb.xlsx", "unpack to 200 MiB");
}

#[test]
fn a_csv_of_a_million_lines_is_refused_by_its_line_count() {
    let dir = scratch();
    let mut text = String::from("[case]\n");
    text.push_str(&",\n".repeat(dampfront::limits::MAX_CSV_ROWS));
    std::fs::write(dir.path().join("lines.csv"), text).unwrap();
    refused(dir.path(), "lines.csv", "more than 1000000 lines");
}

#[test]
fn text_longer_than_a_cell_holds_is_an_input_problem_at_its_cell() {
    // Before: "a system error" with exit 2 and nothing written, when the summary was written.
    let dir = scratch();
    let mut case = series_case("x");
    let long: &'static str = Box::leak("t".repeat(40_000).into_boxed_str());
    case[0].1[0][1] = V::T(long);
    write_csv(&dir.path().join("long.csv"), &case);
    let lines = refused(dir.path(), "long.csv", "40000 characters");
    assert!(lines.iter().any(|l| l.starts_with("case|B2|")), "{lines:?}");
}

/// Waits for `child` at most `limit`; kills it and fails the test when it takes longer.
fn wait_or_kill(mut child: Child, limit: Duration) -> Output {
    let started = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if started.elapsed() > limit {
            child.kill().unwrap();
            let out = child.wait_with_output().unwrap();
            panic!("still running after {limit:?}: {}", output_text(&out));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

#[test]
fn a_fifo_is_not_read_and_does_not_block() {
    // Before: open() waited for a writer for ever.
    let dir = scratch();
    let fifo = dir.path().join("pipe.csv");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap();
    assert!(made.success());
    let child = bin()
        .current_dir(dir.path())
        .args(["solve", "pipe.csv"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let out = wait_or_kill(child, Duration::from_secs(20));
    let shown = output_text(&out);
    assert_eq!(out.status.code(), Some(1), "{shown}");
    assert!(shown.contains("not an ordinary file"), "{shown}");
    let lines = problems(&dir.path().join("pipe.errors.xlsx"));
    assert!(
        lines.iter().any(|l| l.contains("not an ordinary file")),
        "{lines:?}"
    );
}

#[test]
fn a_valid_case_still_solves_through_the_reader_process() {
    let dir = scratch();
    write_xlsx(
        &dir.path().join("ok.xlsx"),
        &series_case("through the child"),
    );
    let out = run_in(dir.path(), &["solve", "ok.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    assert!(dir.path().join("ok.result.xlsx").exists());
}

#[test]
fn a_title_that_looks_like_a_cell_range_still_gives_a_result() {
    // Before: "Drying curve: kiln X!A1" was taken for a chart range; exit 2, nothing written.
    let dir = scratch();
    write_csv(&dir.path().join("range.csv"), &series_case("kiln X!A1"));
    let out = run_in(dir.path(), &["solve", "range.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    assert!(dir.path().join("range.result.xlsx").exists());
    keep_outputs(dir.path(), "cli_hostile");
}

#[test]
fn profile_hours_after_the_end_give_a_warning_and_a_result() {
    // Before: "Chart must contain at least one series"; exit 2, nothing written.
    let dir = scratch();
    let mut case = series_case("late profiles");
    case[0].1[5][1] = V::T("50, 60");
    write_csv(&dir.path().join("late.csv"), &case);
    let out = run_in(dir.path(), &["solve", "late.csv"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let result = dir.path().join("late.result.xlsx");
    let mut wb = open_workbook_auto(&result).unwrap();
    let summary = wb.worksheet_range("summary").unwrap();
    let text: Vec<String> = summary.cells().map(|(_, _, c)| c.to_string()).collect();
    assert!(
        text.iter().any(|t| t.contains("before some profile_hours")),
        "{text:?}"
    );
    keep_outputs(dir.path(), "cli_hostile");
}

/// The series case with one material row carrying an isotherm and the given constants.
fn with_isotherm(kind: &'static str, a: f64, b: f64, c: f64) -> Vec<support::books::Sheet> {
    use V::*;
    let mut case = series_case("isotherm extremes");
    case[2].1 = vec![
        vec![
            T("material"),
            T("dry_density_kg_m3"),
            T("d_ref_m2_s"),
            T("isotherm"),
            T("iso_a"),
            T("iso_b"),
            T("iso_c"),
        ],
        vec![T("demo"), N(450.0), N(5e-10), T(kind), N(a), N(b), N(c)],
    ];
    case
}

#[test]
fn extreme_isotherm_constants_are_refused_at_their_cells() {
    // Before: each ran for minutes. Columns: E iso_a, F iso_b, G iso_c.
    for (name, case, cell, text) in [
        (
            "gab_c.csv",
            with_isotherm("gab", 0.08, 1e308, 0.8),
            "F",
            "GAB constant C",
        ),
        (
            "gab_k.csv",
            with_isotherm("gab", 0.08, 10.0, 5e-324),
            "G",
            "GAB constant K",
        ),
        (
            "oswin_b.csv",
            with_isotherm("oswin", 0.1, 1e-300, 0.0),
            "F",
            "Oswin constant b",
        ),
    ] {
        let dir = scratch();
        write_csv(&dir.path().join(name), &case);
        let lines = refused(dir.path(), name, text);
        // The materials sheet starts on line 11 of the CSV (after [case], 6 rows, [layers],
        // 2 rows, [materials]); its value row is line 13.
        assert!(
            lines
                .iter()
                .any(|l| l.starts_with(&format!("materials|{cell}13|")) && l.contains(text)),
            "{name}: {lines:?}"
        );
    }
}

#[test]
fn a_vanishing_end_time_or_tolerance_is_refused() {
    // Told in the unit typed (hours), not in seconds.
    for (row, value, text) in [
        (
            3usize,
            V::N(1e-20),
            "end_hours 1e-20 is outside the plausible range 0.001 to 1000000 h",
        ),
        (
            3,
            V::N(1e7),
            "end_hours 1e7 is outside the plausible range 0.001 to 1000000 h",
        ),
    ] {
        let dir = scratch();
        let mut case = series_case("tiny");
        case[0].1[row][1] = value;
        write_csv(&dir.path().join("tiny.csv"), &case);
        let lines = refused(dir.path(), "tiny.csv", text);
        assert!(lines.iter().any(|l| l.starts_with("case|B5|")), "{lines:?}");
    }
    let dir = scratch();
    let mut case = series_case("tight");
    case[0].1.push(vec![V::T("tolerance"), V::N(2e-16)]);
    write_csv(&dir.path().join("tight.csv"), &case);
    let lines = refused(dir.path(), "tight.csv", "tolerance");
    assert!(lines.iter().any(|l| l.starts_with("case|B8|")), "{lines:?}");
    // A moisture_coef that carries D at the initial moisture past vapour in air is refused at
    // its cell, not left to crawl: 5e-10 exp(40 x 0.6) = 13 m2/s.
    let mut case = series_case("fast");
    case[2].1[0].push(V::T("moisture_coef"));
    case[2].1[1].push(V::N(40.0));
    write_csv(&dir.path().join("fast.csv"), &case);
    let lines = refused(dir.path(), "fast.csv", "moisture_coef 40 gives D = 1.3");
    // (a CSV case counts its rows through the file: the material row is line 13)
    assert!(
        lines.iter().any(|l| l.starts_with("materials|D13|")),
        "{lines:?}"
    );
    // The ends of the range the message gives both run ("from 1e-10 to 0.1").
    for (name, tol) in [("loosest", 0.1), ("tightest", 1e-10)] {
        let mut case = series_case("ends");
        case[0].1.push(vec![V::T("tolerance"), V::N(tol)]);
        let file = format!("{name}.csv");
        write_csv(&dir.path().join(&file), &case);
        let out = run_in(dir.path(), &["solve", &file]);
        assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    }
}

#[test]
fn a_case_over_its_time_budget_stops_with_a_message_naming_the_option() {
    let dir = scratch();
    write_xlsx(
        &dir.path().join("slow.xlsx"),
        &support::books::slow_case("slow", 20000.0, 1e-10),
    );
    let out = run_in(dir.path(), &["solve", "--case-seconds", "0.3", "slow.xlsx"]);
    let shown = output_text(&out);
    assert_eq!(out.status.code(), Some(1), "{shown}");
    assert!(shown.contains("--case-seconds"), "{shown}");
    let lines = problems(&dir.path().join("slow.errors.xlsx"));
    assert!(lines.iter().any(|l| l.contains("time budget")), "{lines:?}");
    // The stop names the cell to change: the tolerance the input gives (case!B8).
    assert!(
        lines
            .iter()
            .any(|l| l.starts_with("case|B8|the solver stopped")),
        "{lines:?}"
    );
}

#[test]
fn settings_that_multiply_into_a_huge_result_are_refused_at_their_cells() {
    // Before: 1e6 output rows x 200 layers, or 100,000 cells x 1000 profiles, took 4 to over
    // 10 GB of memory.
    use V::*;
    let dir = scratch();
    let mut case = series_case("many rows");
    case[0].1[3][1] = N(100_000.0); // end_hours
    case[0].1[4][1] = N(6.0); // output_every_min: a million rows
    let mut layers = vec![case[1].1[0].clone()];
    for _ in 0..200 {
        layers.push(vec![T("slab"), T("demo"), N(0.1), N(60.0)]);
    }
    case[1].1 = layers;
    write_csv(&dir.path().join("rows.csv"), &case);
    let lines = refused(
        dir.path(),
        "rows.csv",
        "more than the 2000000 a result may hold",
    );
    assert!(lines.iter().any(|l| l.starts_with("case|B6|")), "{lines:?}");

    let mut case = series_case("many profiles");
    case[0].1.push(vec![T("cells_per_layer"), N(100_000.0)]);
    let times: Vec<String> = (0..1000).map(|i| format!("{}", i as f64 * 0.01)).collect();
    case[0].1[5][1] = T(Box::leak(times.join(", ").into_boxed_str()));
    write_csv(&dir.path().join("profiles.csv"), &case);
    let lines = refused(dir.path(), "profiles.csv", "list fewer profile_hours");
    assert!(lines.iter().any(|l| l.starts_with("case|B7|")), "{lines:?}");
}

#[test]
fn a_huge_number_is_named_as_too_large_not_as_inf() {
    // Before: end_hours 1e308 (3.6e311 s) was reported as "found inf"; now the value is
    // checked as typed, in hours.
    let dir = scratch();
    let mut case = series_case("huge");
    case[0].1[3][1] = V::N(1e308);
    write_csv(&dir.path().join("huge.csv"), &case);
    let lines = refused(
        dir.path(),
        "huge.csv",
        "end_hours 1e308 is outside the plausible range",
    );
    assert!(lines.iter().all(|l| !l.contains("inf")), "{lines:?}");
}

#[test]
fn fuzz_finds_in_tests_bad_fuzz_are_refused_with_problems() {
    // many_material_rows.csv: found by the read_csv fuzz target as a timeout. Thousands of
    // rows with problems made the parser compare every problem with every other (a 400 KB
    // file of such rows took a minute of CPU); each file must end as an input problem.
    let corpus = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad/fuzz");
    let mut names: Vec<String> = std::fs::read_dir(&corpus)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert!(!names.is_empty());
    let dir = scratch();
    for name in &names {
        std::fs::copy(corpus.join(name), dir.path().join(name)).unwrap();
        let lines = refused(dir.path(), name, "");
        assert!(!lines.is_empty(), "{name}");
    }
}
