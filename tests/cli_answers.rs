//! What `solve` and `batch` print: one plain line per file, or with `--json` one JSON object
//! per input with the summary's keys and values, warnings, problems and output paths.

mod support;

use support::{books, keep_outputs, output_text, run_in, scratch};

fn stdout(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

#[test]
fn solve_prints_one_plain_line_per_file() {
    let dir = scratch();
    books::write_xlsx(&dir.path().join("rich.xlsx"), &books::rich_case());
    books::write_xlsx(&dir.path().join("slab.xlsx"), &books::series_case("slab"));
    let out = run_in(dir.path(), &["solve", "rich.xlsx", "slab.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let text = stdout(&out);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 2, "{text}");
    // The rich case reaches its 15 % target: hours and days, final mean, status.
    let rich = lines[0];
    assert!(rich.starts_with("rich.xlsx: drying time "), "{rich}");
    let hours: f64 = rich["rich.xlsx: drying time ".len()..]
        .split(' ')
        .next()
        .and_then(|h| h.parse().ok())
        .expect("hours");
    assert!(
        rich.contains(&format!("({:.2} days)", hours / 24.0)),
        "{rich}"
    );
    assert!(rich.contains("final mean 15.00 % (dry basis)"), "{rich}");
    assert!(rich.ends_with(", ok"), "{rich}");
    // No target: the time run instead.
    assert!(
        lines[1].starts_with("slab.xlsx: no target; ran 10.00 h, final mean "),
        "{}",
        lines[1]
    );
}

#[test]
fn solve_json_gives_one_object_per_input() {
    let dir = scratch();
    books::write_xlsx(&dir.path().join("rich.xlsx"), &books::rich_case());
    std::fs::write(dir.path().join("bad.csv"), "[case]\nend_hours,abc\n").expect("written");
    let out = run_in(dir.path(), &["solve", "--json", "rich.xlsx", "bad.csv"]);
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    keep_outputs(dir.path(), "json");
    let text = stdout(&out);
    let objects: Vec<serde_json::Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).expect("one JSON object per line"))
        .collect();
    assert_eq!(objects.len(), 2, "{text}");
    let rich = &objects[0];
    assert_eq!(rich["file"], "rich.xlsx");
    assert_eq!(rich["status"], "ok");
    let summary = rich["summary"].as_object().expect("summary object");
    for key in [
        "title",
        "status",
        "drying_time_h",
        "drying_time_days",
        "final_mean_moisture_pct",
        "target_moisture_pct",
        "evaporation_energy_kj_m2",
        "input_sha256",
    ] {
        assert!(summary.contains_key(key), "{key}");
    }
    assert_eq!(summary["title"], "rich case");
    // The keys come in the summary sheet's order, as the text shows them.
    let line = text.lines().next().expect("line");
    let line = &line[line.find("\"summary\":").expect("summary")..];
    let at = |key: &str| line.find(&format!("\"{key}\":")).expect(key);
    assert!(at("title") < at("status") && at("status") < at("drying_time_h"));
    assert!(at("input_sha256") < at("target_moisture_pct"));
    assert_eq!(summary["target_moisture_pct"], 15.0);
    assert!(summary["evaporation_energy_kj_m2"].is_null());
    assert!(summary["cells"].is_u64(), "a count is an integer");
    assert_eq!(rich["units"]["final_surface_temp_c"], "°C");
    assert!(rich["warnings"].is_array());
    assert_eq!(rich["outputs"][0], "rich.result.xlsx");

    let bad = &objects[1];
    assert_eq!(bad["status"], "problems");
    assert_eq!(bad["outputs"][0], "bad.errors.xlsx");
    let problems = bad["problems"].as_array().expect("problems");
    assert!(!problems.is_empty());
    assert!(
        problems.iter().any(|p| p["sheet"] == "case"),
        "{problems:?}"
    );
}

#[test]
fn batch_json_prints_objects_and_keeps_the_table_off_stdout() {
    let dir = scratch();
    for name in ["a.xlsx", "b.xlsx"] {
        books::write_xlsx(&dir.path().join(name), &books::series_case("slab"));
    }
    let out = run_in(
        dir.path(),
        &["batch", ".", "--json", "--jobs", "2", "--settle-ms", "0"],
    );
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let text = stdout(&out);
    let mut files: Vec<String> = text
        .lines()
        .map(|l| {
            let v: serde_json::Value = serde_json::from_str(l).expect("JSON line");
            assert_eq!(v["status"], "ok");
            assert!(v["summary"]["final_mean_moisture_pct"].is_f64());
            v["file"].as_str().expect("file").to_string()
        })
        .collect();
    files.sort();
    assert_eq!(files.len(), 2, "{text}");
    assert!(files[0].ends_with("a.xlsx") && files[1].ends_with("b.xlsx"));
    // The closing table still appears, on standard error.
    assert!(String::from_utf8_lossy(&out.stderr).contains("drying time h"));
}
