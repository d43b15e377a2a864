//! The result workbook against the workbook format page, version 1.1: sheets, summary keys and
//! units, curve columns, the `steps` sheet and the profile face rows, read back with calamine.
//! The contract's lists are written out here, not taken from the program.

mod support;

use std::path::Path;

use calamine::{Data, Reader, open_workbook_auto};
use support::books;
use support::result::{
    CURVE_ADDITIONS, CURVE_COLUMNS, STEPS_COLUMNS, SUMMARY_KEYS, num, sheet, text,
};
use support::{keep_outputs, output_text, run_in, scratch};

struct Summary {
    rows: Vec<Vec<Data>>,
}

impl Summary {
    fn read(path: &Path) -> Summary {
        Summary {
            rows: sheet(path, "summary").rows().map(|r| r.to_vec()).collect(),
        }
    }

    fn row(&self, key: &str) -> &[Data] {
        self.rows
            .iter()
            .find(|r| text(&r[0]) == key)
            .unwrap_or_else(|| panic!("summary key {key}"))
    }

    fn value(&self, key: &str) -> &Data {
        &self.row(key)[1]
    }

    fn warnings(&self) -> Vec<String> {
        self.rows
            .iter()
            .filter(|r| text(&r[0]) == "warning")
            .map(|r| text(&r[1]))
            .collect()
    }
}

fn solve(dir: &Path, file: &str) {
    let out = run_in(dir, &["solve", file]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
}

#[test]
fn the_rich_case_result_has_every_sheet_key_and_column_of_format_1_1() {
    let dir = scratch();
    books::write_xlsx(&dir.path().join("rich.xlsx"), &books::rich_case());
    solve(dir.path(), "rich.xlsx");
    keep_outputs(dir.path(), "format-1.1");
    let result = dir.path().join("rich.result.xlsx");

    let wb = open_workbook_auto(&result).expect("opens");
    let names = wb.sheet_names().to_vec();
    for required in ["summary", "curves", "steps", "profiles", "input"] {
        assert!(
            names.iter().any(|n| n == required),
            "{required} in {names:?}"
        );
    }

    // summary: a header row, then the keys in the contract's order, then warnings/cautions.
    let s = Summary::read(&result);
    let head: Vec<String> = s.rows[0][..3].iter().map(text).collect();
    assert_eq!(head, ["key", "value", "unit"]);
    let keys: Vec<String> = s.rows.iter().map(|r| text(&r[0])).collect();
    assert_eq!(&keys[1..24], &SUMMARY_KEYS[..]);
    let tail = &keys[24..];
    let first_other = tail
        .iter()
        .position(|k| k == "warning" || k == "caution")
        .expect("warnings or cautions follow");
    assert!(
        tail[first_other..]
            .iter()
            .all(|k| k == "warning" || k == "caution"),
        "{tail:?}"
    );
    assert!(tail.iter().any(|k| k == "caution"));
    // Units in column C with the usual symbols.
    for (key, unit) in [
        ("drying_time_h", "h"),
        ("final_hours", "h"),
        ("final_mean_moisture_pct", "%"),
        ("final_surface_moisture_pct", "%"),
        ("final_centre_moisture_pct", "%"),
        ("max_surface_centre_difference_pct", "%"),
        ("final_surface_temp_c", "°C"),
        ("final_centre_temp_c", "°C"),
        ("water_removed_kg_m2", "kg/m²"),
        ("target_moisture_pct", "%"),
        ("drying_time_days", "d"),
        ("time_of_max_difference_h", "h"),
        ("evaporation_energy_kj_m2", "kJ/m²"),
    ] {
        assert_eq!(text(&s.row(key)[2]), unit, "unit of {key}");
    }
    // Counts are whole numbers; the target is echoed; days are hours / 24.
    for key in ["cells", "time_steps"] {
        let v = num(s.value(key));
        assert!(v > 0.0 && v.fract() == 0.0, "{key} = {v}");
    }
    assert_eq!(num(s.value("target_moisture_pct")), 15.0);
    assert_eq!(text(s.value("status")), "ok");
    let hours = num(s.value("drying_time_h"));
    assert!((num(s.value("drying_time_days")) - hours / 24.0).abs() < 1e-12);
    // Isothermal run: no evaporation energy, an empty cell (not 0, not text).
    assert_eq!(*s.value("evaporation_energy_kj_m2"), Data::Empty);
    let t_max = num(s.value("time_of_max_difference_h"));
    assert!((0.0..=hours).contains(&t_max), "{t_max}");

    // The surface is the GAB skin (Xm 0.08, C 8, K 0.85). The format page's GAB form,
    // X = Xm C K aw / ((1 - K aw)(1 - K aw + C K aw)), turns the reported surface water
    // activity back into the reported surface moisture.
    let aw = num(s.value("final_surface_water_activity"));
    assert!(aw > 0.0 && aw < 1.0, "{aw}");
    let (xm, c, k) = (0.08, 8.0, 0.85);
    let x = xm * c * k * aw / ((1.0 - k * aw) * (1.0 - k * aw + c * k * aw));
    let surface = num(s.value("final_surface_moisture_pct"));
    assert!(
        (100.0 * x - surface).abs() < 1e-6,
        "{} vs {surface}",
        100.0 * x
    );
    let aw_centre = num(s.value("final_centre_water_activity"));
    assert!(aw_centre >= aw && aw_centre <= 1.0, "{aw_centre}");

    // curves: the contract's columns, the layer columns, then the 1.1 additions.
    let curves: Vec<Vec<Data>> = sheet(&result, "curves")
        .rows()
        .map(|r| r.to_vec())
        .collect();
    let header: Vec<String> = curves[0].iter().map(text).collect();
    let mut expected: Vec<String> = CURVE_COLUMNS.iter().map(|s| s.to_string()).collect();
    expected.push("layer_1_mean_moisture_pct".into());
    expected.push("layer_2_mean_moisture_pct".into());
    expected.extend(CURVE_ADDITIONS.iter().map(|s| s.to_string()));
    assert_eq!(&header[..expected.len()], &expected[..]);
    let col = |name: &str| header.iter().position(|h| h == name).expect(name);
    let mut largest: f64 = 0.0;
    for row in &curves[1..] {
        let diff = num(&row[col("surface_centre_difference_pct")]);
        let (sf, ce) = (
            num(&row[col("surface_moisture_pct")]),
            num(&row[col("centre_moisture_pct")]),
        );
        assert!((diff - (sf - ce).abs()).abs() < 1e-9);
        largest = largest.max(diff);
        for name in ["surface_water_activity", "centre_water_activity"] {
            let a = num(&row[col(name)]);
            assert!((0.0..=1.0).contains(&a), "{name} {a}");
        }
        assert!(num(&row[col("equilibrium_moisture_pct")]) > 0.0);
    }
    // The summary's maximum is taken over every time step, so at least the output rows'.
    assert!(num(s.value("max_surface_centre_difference_pct")) >= largest - 1e-9);

    // steps: one row per step that ran, in order, with the contract's columns.
    let steps: Vec<Vec<Data>> = sheet(&result, "steps").rows().map(|r| r.to_vec()).collect();
    let header: Vec<String> = steps[0].iter().map(text).collect();
    assert_eq!(header, STEPS_COLUMNS);
    let labels: Vec<String> = steps[1..].iter().map(|r| text(&r[0])).collect();
    let ended: Vec<String> = steps[1..].iter().map(|r| text(&r[4])).collect();
    assert_eq!(labels.first().map(String::as_str), Some("start"));
    assert_eq!(
        ended.last().map(String::as_str),
        Some("target"),
        "{ended:?}"
    );
    let mut previous_end = 0.0;
    for r in &steps[1..] {
        let (start, end, length) = (num(&r[1]), num(&r[2]), num(&r[3]));
        assert!(
            (start - previous_end).abs() < 1e-9,
            "steps follow each other"
        );
        assert!((end - start - length).abs() < 1e-9);
        previous_end = end;
        assert!(["time", "moisture", "target", "end", "skipped"].contains(&text(&r[4]).as_str()));
    }
    assert!((previous_end - hours).abs() < 1e-9);
    let last = steps.last().expect("a step");
    assert!(
        (num(&last[5]) - 15.0).abs() < 1e-6,
        "the target ends the run"
    );

    // profiles: face A is exposed (face B sealed), so the first row is the surface at 0 mm.
    let profiles: Vec<Vec<Data>> = sheet(&result, "profiles")
        .rows()
        .map(|r| r.to_vec())
        .collect();
    assert_eq!(num(&profiles[1][0]), 0.0);
    assert!(num(&profiles[2][0]) > 0.0);
    let last = num(&profiles.last().expect("rows")[0]);
    assert!(
        last < 10.0,
        "face B is sealed: no row at the full 10 mm ({last})"
    );
    // Every profile column the run reached is filled in every row.
    let width = profiles[0].iter().filter(|d| **d != Data::Empty).count();
    for r in &profiles[1..] {
        for v in &r[1..width] {
            assert!(matches!(v, Data::Float(_)), "{v:?}");
        }
    }
}

/// A wood case as sectioned CSV with the given initial moisture and schedule rows.
fn wood_case(title: &str, initial: f64, target: &str, schedule: &str) -> String {
    format!(
        "[case]\ntitle,{title}\nexposed,both\nend_hours,400\n{target}output_every_min,60\n\
         [layers]\nmaterial,thickness_mm,initial_moisture_pct\noak,25,{initial}\n\
         [materials]\nmaterial,dry_density_kg_m3,d_ref_m2_s,activation_energy_kj_mol,isotherm\n\
         oak,650,2e-10,30,wood\n\
         [schedule]\nstep,hours,until_moisture_pct,dry_bulb_c,rh_pct,surface_coef_m_s\n{schedule}"
    )
}

fn steps_of(path: &Path) -> Vec<(String, f64, f64, String, f64)> {
    sheet(path, "steps")
        .rows()
        .skip(1)
        .map(|r| (text(&r[0]), num(&r[1]), num(&r[2]), text(&r[4]), num(&r[5])))
        .collect()
}

#[test]
fn a_step_whose_trigger_is_already_reached_is_skipped_with_a_warning() {
    // Air-dried lumber at 35 % entering a kiln schedule whose green step ends at 40 %: the
    // green step's air dries (its equilibrium is far below 35 %), so 40 % counts as reached.
    let dir = scratch();
    let csv = wood_case(
        "air-dried lumber",
        35.0,
        "target_moisture_pct,12\n",
        "green,48,40,45,85,2e-7\nmiddle,,25,55,65,2e-7\nfinal,,,65,40,2e-7\n",
    );
    std::fs::write(dir.path().join("lumber.csv"), csv).expect("written");
    solve(dir.path(), "lumber.csv");
    keep_outputs(dir.path(), "skipped-step");
    let result = dir.path().join("lumber.result.xlsx");
    let steps = steps_of(&result);
    let names: Vec<&str> = steps.iter().map(|s| s.0.as_str()).collect();
    assert_eq!(names, ["green", "middle", "final"]);
    let ended: Vec<&str> = steps.iter().map(|s| s.3.as_str()).collect();
    assert_eq!(ended, ["skipped", "moisture", "target"]);
    assert_eq!((steps[0].1, steps[0].2), (0.0, 0.0), "skipped at the start");
    assert!((steps[0].4 - 35.0).abs() < 1e-9);
    assert!((steps[1].4 - 25.0).abs() < 1e-6);
    let summary = Summary::read(&result);
    assert_eq!(text(summary.value("status")), "ok");
    let warnings = summary.warnings();
    assert!(
        warnings
            .iter()
            .any(|w| w.contains("step 1 (green) was skipped") && w.contains("air dries")),
        "{warnings:?}"
    );
    // The first curve row already shows the step in force.
    let curves = sheet(&result, "curves");
    let first = curves.rows().nth(1).expect("row");
    assert_eq!(text(&first[11]), "middle");
}

#[test]
fn a_conditioning_step_that_wets_towards_its_trigger_is_not_skipped() {
    // Dry boards at 7 % conditioned in humid air (equilibrium about 15 % at 60 C, 85 % RH,
    // from memory of the Wood Handbook EMC table):
    // the step's air wets, so its until_moisture_pct of 9 % lies ahead and the step runs.
    let dir = scratch();
    let csv = wood_case(
        "conditioning",
        7.0,
        "",
        "conditioning,100,9,60,85,2e-7\nstorage,,,20,50,2e-7\n",
    );
    std::fs::write(dir.path().join("cond.csv"), csv).expect("written");
    solve(dir.path(), "cond.csv");
    let result = dir.path().join("cond.result.xlsx");
    let steps = steps_of(&result);
    assert_eq!(steps[0].0, "conditioning");
    assert_eq!(steps[0].3, "moisture", "{steps:?}");
    assert!(steps[0].2 > 0.0);
    assert!((steps[0].4 - 9.0).abs() < 1e-6);
    assert_eq!(steps[1].3, "end");
    let warnings = Summary::read(&result).warnings();
    assert!(
        !warnings.iter().any(|w| w.contains("skipped")),
        "{warnings:?}"
    );

    // The same air with a level already passed in the direction it moves the product (boards
    // at 12 % wetted towards about 15 %, from memory as above, until 10 %): that step is
    // skipped.
    let csv = wood_case(
        "passed",
        12.0,
        "",
        "conditioning,100,10,60,85,2e-7\nstorage,,,20,50,2e-7\n",
    );
    std::fs::write(dir.path().join("passed.csv"), csv).expect("written");
    solve(dir.path(), "passed.csv");
    let result = dir.path().join("passed.result.xlsx");
    let steps = steps_of(&result);
    assert_eq!(steps[0].3, "skipped", "{steps:?}");
    let warnings = Summary::read(&result).warnings();
    assert!(
        warnings
            .iter()
            .any(|w| w.contains("step 1 (conditioning) was skipped") && w.contains("air wets")),
        "{warnings:?}"
    );
}

/// The parts of an xlsx (a zip of XML files) by name.
fn xml_parts(path: &Path) -> std::collections::BTreeMap<String, String> {
    use std::io::Read;
    let mut zip = zip::ZipArchive::new(std::fs::File::open(path).expect("opens")).expect("zip");
    let mut parts = std::collections::BTreeMap::new();
    for i in 0..zip.len() {
        let mut f = zip.by_index(i).expect("entry");
        let mut text = String::new();
        if f.read_to_string(&mut text).is_ok() {
            parts.insert(f.name().expect("name").to_string(), text);
        }
    }
    parts
}

fn column_letter(index: usize) -> String {
    let mut n = index + 1;
    let mut s = String::new();
    while n > 0 {
        let r = (n - 1) % 26;
        s.insert(0, (b'A' + r as u8) as char);
        n = (n - 1) / 26;
    }
    s
}

#[test]
fn charts_sit_on_the_summary_with_target_air_and_difference_and_pages_fit() {
    let dir = scratch();
    books::write_xlsx(&dir.path().join("rich.xlsx"), &books::rich_case());
    solve(dir.path(), "rich.xlsx");
    let result = dir.path().join("rich.result.xlsx");
    let parts = xml_parts(&result);
    let header: Vec<String> = sheet(&result, "curves")
        .rows()
        .next()
        .expect("header")
        .iter()
        .map(text)
        .collect();
    let reference = |name: &str| {
        let c = header.iter().position(|h| h == name).expect(name);
        format!("curves!${}$2", column_letter(c))
    };

    // Only the summary (the first sheet) has a drawing, and it holds the three charts.
    let with_drawings: Vec<&String> = parts
        .iter()
        .filter(|(name, body)| {
            name.starts_with("xl/worksheets/_rels/") && body.contains("relationships/drawing")
        })
        .map(|(name, _)| name)
        .collect();
    assert_eq!(with_drawings, ["xl/worksheets/_rels/sheet1.xml.rels"]);
    let charts: Vec<&String> = parts
        .iter()
        .filter(|(name, _)| name.starts_with("xl/charts/chart"))
        .map(|(_, body)| body)
        .collect();
    assert_eq!(charts.len(), 3);

    // The drying chart: mean, surface, centre, the target as its own series, and the air on a
    // secondary axis (a scatter chart with a secondary axis has four value axes).
    let drying = charts
        .iter()
        .find(|c| c.contains("Drying curve"))
        .expect("drying chart");
    for name in [
        "mean_moisture_pct",
        "surface_moisture_pct",
        "centre_moisture_pct",
    ] {
        assert!(drying.contains(&reference(name)), "{name}");
    }
    assert!(drying.contains("<c:v>target</c:v>"), "target line");
    assert!(drying.contains(&reference("air_temp_c")), "dry bulb");
    assert!(
        drying.contains(&reference("air_rh_pct")),
        "relative humidity"
    );
    assert_eq!(drying.matches("<c:valAx>").count(), 4, "secondary axis");
    // The difference chart plots surface_centre_difference_pct against hours.
    assert!(
        charts
            .iter()
            .any(|c| c.contains(&reference("surface_centre_difference_pct"))),
        "difference chart"
    );

    // The curves print area is the table alone, not the chart helper cells beside it.
    let last = column_letter(
        header
            .iter()
            .position(|h| h.is_empty())
            .unwrap_or(header.len())
            - 1,
    );
    assert_eq!(
        last,
        // The contract's columns, two layers, and one extension at the end (air_wet_bulb_c).
        column_letter(CURVE_COLUMNS.len() + 2 + CURVE_ADDITIONS.len())
    );
    assert!(
        parts["xl/workbook.xml"].contains(&format!("curves!$A$1:${last}$")),
        "print area"
    );
    // Print setup: the summary with its charts on one landscape page; every other sheet one
    // page wide.
    let summary = &parts["xl/worksheets/sheet1.xml"];
    assert!(summary.contains("<pageSetUpPr fitToPage=\"1\"/>"));
    assert!(summary.contains("orientation=\"landscape\""));
    assert!(!summary.contains("fitToHeight=\"0\""));
    for (name, body) in &parts {
        if name.starts_with("xl/worksheets/sheet") && name != "xl/worksheets/sheet1.xml" {
            assert!(body.contains("<pageSetUpPr fitToPage=\"1\"/>"), "{name}");
            assert!(body.contains("fitToHeight=\"0\""), "{name}");
        }
    }
}

#[test]
fn the_repository_documents_the_whole_format_itself() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("README.md")).expect("README");
    assert!(
        !readme.contains("../shared"),
        "the README points outside the repository"
    );
    assert!(readme.contains("docs/workbook-format.md"));
    assert!(readme.contains("cargo install --path ."));
    let page = std::fs::read_to_string(root.join("docs/workbook-format.md")).expect("format page");
    // Every sheet, key and column of the format page, version 1.1, in and out.
    let input: &[&str] = &[
        "case",
        "layers",
        "materials",
        "schedule",
        "measured",
        "fit",
        "variants",
        "title",
        "geometry",
        "exposed",
        "coupling",
        "moisture_basis",
        "cells_per_layer",
        "end_hours",
        "target_moisture_pct",
        "output_every_min",
        "profile_hours",
        "flow_length_mm",
        "name",
        "material",
        "thickness_mm",
        "initial_moisture_pct",
        "initial_temp_c",
        "dry_density_kg_m3",
        "d_ref_m2_s",
        "d_ref_temp_c",
        "d_ref_moisture_pct",
        "activation_energy_kj_mol",
        "moisture_coef",
        "isotherm",
        "iso_a",
        "iso_b",
        "iso_c",
        "conductivity_w_mk",
        "specific_heat_j_kgk",
        "gab",
        "oswin",
        "henderson",
        "wood",
        "none",
        "step",
        "hours",
        "until_moisture_pct",
        "dry_bulb_c",
        "rh_pct",
        "wet_bulb_c",
        "equilibrium_moisture_pct",
        "surface_moisture_pct",
        "surface_coef_m_s",
        "hm_m_s",
        "h_w_m2k",
        "air_velocity_m_s",
        "ramp",
        "moisture_pct",
        "surface_temp_c",
        "centre_temp_c",
        "parameters",
        "variant",
        "[case]",
        "[variants]",
    ];
    let output: &[&str] = &[
        "summary",
        "curves",
        "steps",
        "profiles",
        "check",
        "input",
        "problems",
        "position_mm",
        "parameter",
        "estimate",
        "low_95",
        "high_95",
        "unit",
        "drying_model",
        "k_per_h",
        "r2",
        "rmse",
        "reduced_chi_square",
        "lewis",
        "page",
        "henderson_pabis",
        "logarithmic",
        "slope_method_d_eff_m2_s",
        "overrides",
        "status",
    ];
    for word in input
        .iter()
        .chain(output)
        .chain(&SUMMARY_KEYS)
        .chain(&CURVE_COLUMNS)
        .chain(&CURVE_ADDITIONS)
        .chain(&STEPS_COLUMNS)
    {
        assert!(
            page.contains(&format!("`{word}`")),
            "`{word}` is not on the page"
        );
    }
    for pattern in [
        "layer_N_mean_moisture_pct",
        "moisture_pct_at_<H>h",
        "temp_c_at_<H>h",
    ] {
        assert!(page.contains(pattern), "{pattern}");
    }
}
