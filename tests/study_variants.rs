//! Parameter studies through the real binary: a `variants` sheet in .xlsx and in the
//! sectioned CSV, every variant solved, the diffusion time scale, and bad variants told at
//! their variants cells while the others' results are all written.

mod support;

use calamine::Data;
use support::books::{self, Sheet, V};
use support::result::{num, sheet, text};
use support::{keep_outputs, output_text, run_in, scratch};

/// The `variants` sheet's columns as the format page (1.1) lists them.
const FORMAT_COLUMNS: [&str; 8] = [
    "variant",
    "overrides",
    "status",
    "drying_time_h",
    "final_mean_moisture_pct",
    "max_surface_centre_difference_pct",
    "final_surface_temp_c",
    "final_centre_temp_c",
];

fn leak(s: String) -> &'static str {
    Box::leak(s.into_boxed_str())
}

/// A slab exposed on face A with its surface held at 10 % and a constant D, drying from 60 %
/// to a target of 30 %: diffusion-controlled, so its time scale is l²/D.
fn fixed_surface_case(variants: Vec<Vec<V>>) -> Vec<Sheet> {
    use V::*;
    vec![
        (
            "case",
            vec![
                vec![T("title"), T("variant study")],
                vec![T("exposed"), T("a")],
                vec![T("end_hours"), N(200.0)],
                vec![T("target_moisture_pct"), N(30.0)],
            ],
        ),
        (
            "layers",
            vec![
                vec![T("material"), T("thickness_mm"), T("initial_moisture_pct")],
                vec![T("demo"), N(10.0), N(60.0)],
            ],
        ),
        (
            "materials",
            vec![
                vec![T("material"), T("dry_density_kg_m3"), T("d_ref_m2_s")],
                vec![T("demo"), N(450.0), N(5e-10)],
            ],
        ),
        (
            "schedule",
            vec![
                vec![T("step"), T("dry_bulb_c"), T("surface_moisture_pct")],
                vec![T("hold"), N(40.0), N(10.0)],
            ],
        ),
        ("variants", variants),
    ]
}

/// The variants sheet of a result: its rows below the header, as cells.
fn variant_rows(result: &std::path::Path) -> Vec<Vec<Data>> {
    let s = sheet(result, "variants");
    let rows: Vec<Vec<Data>> = s.rows().map(<[Data]>::to_vec).collect();
    let head: Vec<String> = rows[0].iter().map(text).collect();
    assert_eq!(
        &head[..8],
        &FORMAT_COLUMNS[..],
        "the format's columns first"
    );
    rows[1..].to_vec()
}

#[test]
fn a_twelve_row_variants_sheet_runs_all_twelve_in_order() {
    use V::*;
    let mut variants = vec![vec![T("variant"), T("layers.thickness_mm[1]")]];
    for k in 1..=12 {
        variants.push(vec![T(leak(format!("t{k}"))), N(2.0 + k as f64)]);
    }
    let dir = scratch();
    let input = dir.path().join("twelve.xlsx");
    books::write_xlsx(&input, &fixed_surface_case(variants));
    let out = run_in(dir.path(), &["solve", "twelve.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let result = dir.path().join("twelve.result.xlsx");
    keep_outputs(dir.path(), "variants_twelve");
    let rows = variant_rows(&result);
    assert_eq!(rows.len(), 12);
    let mut last = 0.0;
    for (k, row) in rows.iter().enumerate() {
        assert_eq!(text(&row[0]), format!("t{}", k + 1), "input order");
        assert_eq!(
            text(&row[1]),
            format!("layers.thickness_mm[1]={}", 3 + k),
            "overrides"
        );
        assert_eq!(text(&row[2]), "ok");
        // A thicker slab takes longer to reach the same mean (time scale l²/D).
        let t = num(&row[3]);
        assert!(t > last, "{k}: {t} after {last}");
        last = t;
    }
    // Every run's curve is on variant_curves: the base case's and the twelve.
    let curves = sheet(&result, "variant_curves");
    let names: Vec<String> = curves
        .rows()
        .next()
        .expect("a header")
        .iter()
        .map(text)
        .filter(|n| !n.is_empty())
        .collect();
    assert_eq!(names.len(), 13, "{names:?}");
    assert_eq!(names[0], "base case");
}

#[test]
fn twice_the_thickness_takes_four_times_as_long_when_diffusion_controls() {
    use V::*;
    let variants = vec![
        vec![T("variant"), T("layers.thickness_mm[1]")],
        vec![T("single"), N(8.0)],
        vec![T("double"), N(16.0)],
    ];
    let dir = scratch();
    books::write_xlsx(
        &dir.path().join("scale.xlsx"),
        &fixed_surface_case(variants),
    );
    let out = run_in(dir.path(), &["solve", "scale.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let rows = variant_rows(&dir.path().join("scale.result.xlsx"));
    let (single, double) = (num(&rows[0][3]), num(&rows[1][3]));
    // Fixed surface, constant D: Mt/M∞ depends on D t / l² alone (Crank, The Mathematics of
    // Diffusion, 2nd ed., 1975, eq. 4.18), so the time to the same mean scales with l²: 4x
    // for twice the thickness. 0.1 relative allows for the two meshes' discretisation error.
    let ratio = double / single;
    assert!(
        (3.9..=4.1).contains(&ratio),
        "{double} / {single} = {ratio}"
    );
}

#[test]
fn bad_variants_are_input_errors_at_their_cells_and_the_others_all_run() {
    use V::*;
    let variants = vec![
        vec![
            T("variant"),
            T("layers.thickness_mm[1]"),
            T("schedule.dry_bulb_c[*]"),
            T("layers.thickness_mm[3]"),
            T("case.cells_per_layer"),
        ],
        vec![T("thin"), N(5.0), E, E, E],
        vec![T("no such row"), E, E, N(7.0), E],
        vec![T("hot"), E, N(60.0), E, E],
        vec![T("negative"), N(-3.0), E, E, E],
        vec![T("too far"), N(20000.0), E, E, E],
        vec![T("few cells"), E, E, E, N(2.0)],
        vec![T("coarse"), E, E, E, N(10.0)],
    ];
    let dir = scratch();
    // The CSV form: a [variants] section after the others.
    books::write_csv(&dir.path().join("mixed.csv"), &fixed_surface_case(variants));
    let out = run_in(dir.path(), &["solve", "mixed.csv"]);
    // Bad variants are input problems (exit 1), yet the result with the good ones is written.
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    let result = dir.path().join("mixed.result.xlsx");
    let errors = dir.path().join("mixed.errors.xlsx");
    assert!(result.exists() && errors.exists(), "{}", output_text(&out));
    keep_outputs(dir.path(), "variants_bad");

    let rows = variant_rows(&result);
    let status: Vec<String> = rows.iter().map(|r| text(&r[2])).collect();
    assert_eq!(
        status,
        [
            "ok",
            "input_error",
            "ok",
            "input_error",
            "input_error",
            "input_error",
            "ok"
        ]
    );
    for row in rows.iter().filter(|r| text(&r[2]) == "ok") {
        for c in 3..8 {
            assert!(num(&row[c]).is_finite(), "{row:?}");
        }
    }
    for row in rows.iter().filter(|r| text(&r[2]) == "input_error") {
        assert_eq!(
            row[3],
            Data::Empty,
            "no figures for a variant that did not run"
        );
    }

    // In the CSV, [variants] is line 15 (each earlier section: its line and its rows: case
    // 1 + 4, layers, materials and schedule 1 + 2 each), its header line 16, data lines 17-23.
    let problems = sheet(&errors, "problems");
    let lines: Vec<String> = problems
        .rows()
        .skip(1)
        .map(|r| format!("{}!{}: {}", text(&r[0]), text(&r[1]), text(&r[2])))
        .collect();
    let expect = [
        "variants!D18: layers.thickness_mm[3]: sheet layers has 1 data row(s); row 3 does not exist",
        "variants!B20: layers.thickness_mm[1]: thickness_mm must be a number > 0, found -3",
        "variants!B21: layers.thickness_mm[1]: thickness_mm 20000 is outside the plausible range 0.001 to 10000 mm",
        "variants!E22: case.cells_per_layer: cells_per_layer must be an integer >= 4, found 2",
    ];
    assert_eq!(lines, expect);
    // The command line says the same, and the summary lists them as warnings.
    let stdout = String::from_utf8_lossy(&out.stdout);
    let summary = sheet(&result, "summary");
    let warnings: Vec<String> = summary
        .rows()
        .filter(|r| text(&r[0]) == "warning")
        .map(|r| text(&r[1]))
        .collect();
    for e in expect {
        assert!(stdout.contains(e), "{stdout}");
        assert!(warnings.iter().any(|w| w == e), "{e} in {warnings:?}");
    }

    // --json carries the same table: one object per variant, in order.
    let out = run_in(dir.path(), &["solve", "--json", "mixed.csv"]);
    let line = String::from_utf8_lossy(&out.stdout);
    let json: serde_json::Value = serde_json::from_str(line.trim()).expect("one JSON object");
    let listed: Vec<&str> = json["variants"]
        .as_array()
        .expect("a variants array")
        .iter()
        .map(|v| v["status"].as_str().unwrap_or_default())
        .collect();
    assert_eq!(listed, status);
    assert_eq!(json["variants"][3]["problems"][0], expect[1]);
}

#[test]
fn a_variants_own_warnings_reach_the_summary_at_its_cell_and_a_name_used_twice_is_told() {
    use V::*;
    // 333 in a °C column is the usual kelvin slip (the base case's check warns above 150 °C);
    // the base case itself (40 °C) has no warning.
    let variants = vec![
        // A typed path with nothing under it is told too.
        vec![
            T("variant"),
            T("schedule.dry_bulb_c[1]"),
            T("case.foo_typo"),
        ],
        vec![T("kelvin"), N(333.0)],
        vec![T("same"), N(45.0)],
        vec![T("same"), N(50.0)],
    ];
    let dir = scratch();
    books::write_xlsx(
        &dir.path().join("warned.xlsx"),
        &fixed_surface_case(variants),
    );
    let out = run_in(dir.path(), &["solve", "warned.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let summary = sheet(&dir.path().join("warned.result.xlsx"), "summary");
    let warnings: Vec<String> = summary
        .rows()
        .filter(|r| text(&r[0]) == "warning")
        .map(|r| text(&r[1]))
        .collect();
    keep_outputs(dir.path(), "variants_warned");
    assert!(
        warnings.iter().any(
            |w| w.starts_with("variants!A2: variant kelvin: schedule!B2:") && w.contains("333")
        ),
        "{warnings:?}"
    );
    assert!(
        warnings
            .iter()
            .any(|w| w.starts_with("variants!A4:") && w.contains("used twice")),
        "{warnings:?}"
    );
    assert!(
        warnings
            .iter()
            .any(|w| w.starts_with("variants!C1: no variant gives a value under case.foo_typo")),
        "{warnings:?}"
    );
    assert_eq!(warnings.len(), 3, "{warnings:?}");
}

#[test]
fn batch_gives_the_base_cases_drying_time_when_a_variant_could_not_run() {
    use V::*;
    let variants = vec![
        vec![T("variant"), T("layers.thickness_mm[1]")],
        vec![T("fine"), N(12.0)],
        vec![T("typo"), T("abc")],
    ];
    let dir = scratch();
    books::write_xlsx(
        &dir.path().join("partial.xlsx"),
        &fixed_surface_case(variants),
    );
    let out = run_in(dir.path(), &["batch", "."]);
    assert_eq!(out.status.code(), Some(1), "{}", output_text(&out));
    let shown = output_text(&out);
    let line = shown
        .lines()
        .find(|l| l.starts_with("partial.xlsx"))
        .unwrap_or_else(|| panic!("{shown}"));
    let cells: Vec<&str> = line.split_whitespace().collect();
    assert_eq!(cells[1], "problems", "{line}");
    let hours: f64 = cells[2].parse().unwrap_or_else(|_| panic!("{line}"));
    assert!(hours > 0.0, "{line}");
}
