//! Round trips through real files and the real binary: a case workbook written here, solved by
//! `dampfront solve`, and the result read back with calamine against the workbook format page.

mod support;

use std::path::Path;

use calamine::{Data, Reader, open_workbook_auto};
use support::books::{self, V};
use support::result::{SUMMARY_KEYS, num, sheet, text};
use support::{keep_outputs, output_text, run_in, scratch, sha256};

#[test]
fn a_written_case_solves_and_its_result_follows_the_contract() {
    let dir = scratch();
    let input = dir.path().join("slab.xlsx");
    books::write_xlsx(&input, &books::series_case("=1+2 is text, not a formula"));
    let before = sha256(&input);
    let out = run_in(dir.path(), &["solve", "slab.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    assert_eq!(sha256(&input), before, "the input must not change");
    let result = dir.path().join("slab.result.xlsx");
    assert!(result.exists());
    keep_outputs(dir.path(), "roundtrip");

    let wb = open_workbook_auto(&result).expect("opens");
    let names: Vec<String> = wb.sheet_names().to_vec();
    for required in ["summary", "curves", "profiles", "check", "input"] {
        assert!(
            names.iter().any(|n| n == required),
            "sheet {required} in {names:?}"
        );
    }

    let summary = sheet(&result, "summary");
    let rows: Vec<&[Data]> = summary.rows().collect();
    let head: Vec<String> = rows[0][..3].iter().map(text).collect();
    assert_eq!(head, ["key", "value", "unit"], "the summary's header row");
    let keys: Vec<String> = rows.iter().map(|r| text(&r[0])).collect();
    assert_eq!(&keys[1..24], &SUMMARY_KEYS[..]);
    let value = |key: &str| &rows[keys.iter().position(|k| k == key).expect("key")][1];
    // Text from the input is written as text: calamine sees a string, not a formula result.
    assert_eq!(text(value("title")), "=1+2 is text, not a formula");
    assert_eq!(text(value("status")), "ok");
    assert_eq!(
        *value("drying_time_h"),
        Data::Empty,
        "no target, no drying time"
    );
    assert!((num(value("final_hours")) - 10.0).abs() < 1e-9);
    assert!(num(value("mass_balance_error")) <= 1e-9);
    // A single layer exposed on both faces: cells_per_layer (40) for each half.
    assert_eq!(num(value("cells")), 80.0);
    assert_eq!(
        *value("target_moisture_pct"),
        Data::Empty,
        "no target given"
    );
    assert_eq!(*value("drying_time_days"), Data::Empty);
    assert_eq!(
        *value("evaporation_energy_kj_m2"),
        Data::Empty,
        "isothermal run"
    );
    // A fixed surface from the start: the largest difference is at the first step.
    assert!(num(value("time_of_max_difference_h")) < 0.1);
    assert_eq!(text(value("input_sha256")), before);
    assert!(keys.iter().any(|k| k == "caution"));

    let curves = sheet(&result, "curves");
    let header: Vec<String> = curves
        .rows()
        .next()
        .expect("header")
        .iter()
        .map(text)
        .collect();
    let expected = [
        "hours",
        "mean_moisture_pct",
        "surface_moisture_pct",
        "centre_moisture_pct",
        "moisture_ratio",
        "mean_temp_c",
        "surface_temp_c",
        "centre_temp_c",
        "drying_rate_pct_h",
        "air_temp_c",
        "air_rh_pct",
        "step",
        "layer_1_mean_moisture_pct",
    ];
    assert_eq!(&header[..13], &expected[..]);
    let data: Vec<&[Data]> = curves.rows().skip(1).collect();
    assert_eq!(data.len(), 101, "rows every 6 min over 10 h, plus time 0");
    assert_eq!(num(&data[0][0]), 0.0);
    assert!((num(&data[0][1]) - 60.0).abs() < 1e-12);
    assert_eq!(num(&data[0][4]), 1.0);
    // The surface is held at 10 %; the air has no humidity given, so RH is empty.
    assert!((num(&data[50][2]) - 10.0).abs() < 1e-12);
    assert_eq!(data[50][10], Data::Empty);
    assert_eq!(text(&data[50][11]), "hold");
    let last = data.last().expect("rows");
    assert!((num(&last[1]) - num(value("final_mean_moisture_pct"))).abs() < 1e-12);

    let profiles = sheet(&result, "profiles");
    let header: Vec<String> = profiles
        .rows()
        .next()
        .expect("header")
        .iter()
        .map(text)
        .collect();
    assert_eq!(
        &header[..4],
        &[
            "position_mm",
            "moisture_pct_at_0h",
            "moisture_pct_at_1h",
            "moisture_pct_at_2.5h"
        ]
    );
    let rows: Vec<&[Data]> = profiles.rows().skip(1).collect();
    let positions: Vec<f64> = rows.iter().map(|r| num(&r[0])).collect();
    // 80 cell centres (40 per exposed half) and, both faces being exposed, a row for each face.
    assert_eq!(positions.len(), 82);
    assert_eq!(positions[0], 0.0);
    assert!((positions[81] - 12.0).abs() < 1e-12);
    assert!(positions[1..81].iter().all(|&p| p > 0.0 && p < 12.0));
    assert!(positions.windows(2).all(|w| w[0] < w[1]));
    // The face rows hold the surface value: the step holds both surfaces at 10 %.
    for r in [rows[0], rows[81]] {
        assert!((num(&r[2]) - 10.0).abs() < 1e-12, "{r:?}");
    }

    // The check sheet: the run against Crank's series (plane sheet, fixed surface), within the
    // engine's default-mesh limit of 1e-3 in moisture ratio.
    let check = sheet(&result, "check");
    let worst = check
        .rows()
        .skip(1)
        .filter(|r| matches!(r[3], Data::Float(_)))
        .map(|r| num(&r[3]).abs())
        .fold(0.0, f64::max);
    assert!(worst > 0.0 && worst <= 1e-3, "worst {worst}");
}

fn curves_of(path: &Path) -> Vec<Vec<Data>> {
    sheet(path, "curves").rows().map(|r| r.to_vec()).collect()
}

#[test]
fn the_same_case_as_xlsx_ods_and_csv_gives_the_same_result() {
    let dir = scratch();
    let sheets = books::rich_case();
    books::write_xlsx(&dir.path().join("same.xlsx"), &sheets);
    books::write_ods(&dir.path().join("same-ods.ods"), &sheets);
    books::write_csv(&dir.path().join("same-csv.csv"), &sheets);
    let out = run_in(
        dir.path(),
        &["solve", "same.xlsx", "same-ods.ods", "same-csv.csv"],
    );
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    keep_outputs(dir.path(), "formats");
    let a = curves_of(&dir.path().join("same.result.xlsx"));
    for other in ["same-ods.result.xlsx", "same-csv.result.xlsx"] {
        let b = curves_of(&dir.path().join(other));
        assert_eq!(a.len(), b.len(), "{other}");
        for (ra, rb) in a.iter().zip(&b) {
            for (x, y) in ra.iter().zip(rb) {
                match (x, y) {
                    (Data::Float(x), Data::Float(y)) => {
                        assert!(
                            (x - y).abs() <= 1e-12 * x.abs().max(1.0),
                            "{other}: {x} vs {y}"
                        )
                    }
                    _ => assert_eq!(x, y, "{other}"),
                }
            }
        }
    }
    // The rich case reaches its target and reports the drying time.
    let summary = sheet(&dir.path().join("same.result.xlsx"), "summary");
    let status = summary
        .rows()
        .find(|r| text(&r[0]) == "status")
        .map(|r| text(&r[1]));
    assert_eq!(status.as_deref(), Some("ok"));
}

#[test]
fn solve_writes_csv_tables_and_into_an_out_folder() {
    let dir = scratch();
    books::write_xlsx(&dir.path().join("c.xlsx"), &books::series_case("csv"));
    let out = run_in(
        dir.path(),
        &["solve", "c.xlsx", "--out", "results", "--csv"],
    );
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    let results = dir.path().join("results");
    assert!(results.join("c.result.xlsx").exists());
    assert!(!dir.path().join("c.result.xlsx").exists());
    let curves = std::fs::read_to_string(results.join("c.curves.csv")).expect("curves csv");
    assert!(curves.starts_with("hours,mean_moisture_pct,surface_moisture_pct,"));
    assert_eq!(curves.lines().count(), 102);
    assert!(curves.lines().next().expect("header").ends_with(
        ",layer_1_mean_moisture_pct,equilibrium_moisture_pct,surface_water_activity,\
         centre_water_activity,surface_centre_difference_pct,air_wet_bulb_c"
    ));
    let profiles = std::fs::read_to_string(results.join("c.profiles.csv")).expect("profiles csv");
    assert!(
        profiles
            .starts_with("position_mm,moisture_pct_at_0h,moisture_pct_at_1h,moisture_pct_at_2.5h")
    );
    // 80 cells (40 per exposed half) and the face rows: position 0 and the full 12 mm.
    assert_eq!(profiles.lines().count(), 1 + 82);
    assert!(profiles.lines().nth(1).expect("row").starts_with("0,"));
    assert!(profiles.lines().last().expect("row").starts_with("12,"));
    let _ = V::E;
}

#[test]
fn measured_points_are_compared_with_the_model_on_the_fit_sheet() {
    use dampfront::analytic::{Series, Shape, Surface};
    // "Measurements" taken from Crank's plane-sheet series (eq. 4.18, p. 48) for the same slab:
    // l = 6 mm, D = 5e-10 m2/s, so T = D t / l^2 = 0.05 per hour; 60 % falling to 10 %.
    let series = Series::new(Shape::Slab, Surface::Fixed);
    let hours = [1.0, 2.0, 4.0, 8.0];
    let measured: Vec<f64> = hours
        .iter()
        .map(|h| 10.0 + 50.0 * series.moisture_ratio(0.05 * h))
        .collect();
    let mut sheets = books::series_case("measured");
    let leaked: &'static [f64] = Box::leak(measured.clone().into_boxed_slice());
    let mut rows = vec![vec![V::T("hours"), V::T("moisture_pct")]];
    for (h, m) in hours.iter().zip(leaked) {
        rows.push(vec![V::N(*h), V::N(*m)]);
    }
    sheets.push(("measured", rows));
    let dir = scratch();
    books::write_xlsx(&dir.path().join("m.xlsx"), &sheets);
    let out = run_in(dir.path(), &["solve", "m.xlsx"]);
    assert_eq!(out.status.code(), Some(0), "{}", output_text(&out));
    keep_outputs(dir.path(), "measured");
    let fit = sheet(&dir.path().join("m.result.xlsx"), "fit");
    let rows: Vec<&[Data]> = fit.rows().collect();
    let header: Vec<String> = rows[0].iter().map(text).collect();
    assert_eq!(
        &header[..5],
        &["parameter", "estimate", "low_95", "high_95", "unit"]
    );
    let table = rows
        .iter()
        .position(|r| text(&r[0]) == "hours")
        .expect("comparison table");
    for (i, m) in measured.iter().enumerate() {
        let r = rows[table + 1 + i];
        assert!((num(&r[1]) - m).abs() < 1e-12);
        // Model and series agree to the engine's default-mesh accuracy (1e-3 in moisture ratio).
        assert!((num(&r[2]) - m).abs() < 50.0 * 1e-3, "row {i}");
    }
    let rmse = rows
        .iter()
        .find(|r| r.len() > 7 && text(&r[6]) == "rmse_pct")
        .map(|r| num(&r[7]))
        .expect("rmse");
    assert!(rmse < 0.05, "rmse {rmse}");
}
